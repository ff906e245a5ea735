//! Command-line interface: one file per subcommand, each with one entry function.
//!
//! Parsing lives here; the work lives in the library modules. Every error reaches `main`
//! as an [`Error`](crate::Error) and exits with code 2.

use clap::{Parser, Subcommand};

use crate::error::Result;

pub mod check;
pub mod fit;
pub mod hedge;
pub mod merge;
pub mod progress;
pub mod project;
pub mod run;
pub mod synth;
pub mod table;
pub mod value;

/// Stochastic longevity-risk simulator.
#[derive(Debug, Parser)]
#[command(name = "tailspan", version, about, long_about = None)]
pub struct Cli {
    /// Print no progress bars.
    #[arg(long, short, global = true)]
    pub quiet: bool,
    /// Log each stage's time on standard error.
    #[arg(long, short, global = true)]
    pub verbose: bool,
    /// The subcommand to run.
    #[command(subcommand)]
    pub command: Command,
}

/// The subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Write the invented demo experience and book.
    Synth(synth::SynthArgs),
    /// Validate a config and every input it names; print a summary.
    Check(check::CheckArgs),
    /// Print a deterministic life table from a law, as CSV.
    Table(table::TableArgs),
    /// Fit the configured model(s); write fit.json and residuals.
    Fit(fit::FitArgs),
    /// Fit the first configured model to each sex and write scenario paths to Parquet.
    Project(project::ProjectArgs),
    /// Value the book in every scenario; write results, capital and summary.json.
    Value(value::ValueArgs),
    /// Price the configured longevity swaps and q-forwards.
    Hedge(hedge::HedgeArgs),
    /// Everything the config asks for — fit, project, value, capital, hedges — and a report.
    Run(run::RunArgs),
    /// Combine a sharded run's part files into whole files and summary.json.
    Merge(merge::MergeArgs),
}

/// Runs the parsed command line.
pub fn run(cli: Cli) -> Result<()> {
    match cli.command {
        Command::Synth(args) => synth::run(&args),
        Command::Check(args) => check::run(&args),
        Command::Table(args) => table::run(&args),
        Command::Fit(args) => fit::run(&args, cli.quiet),
        Command::Project(args) => project::run(&args, cli.quiet),
        Command::Value(args) => value::run(&args, cli.quiet),
        Command::Hedge(args) => hedge::run(&args, cli.quiet),
        Command::Run(args) => run::run(&args, cli.quiet, cli.verbose),
        Command::Merge(args) => merge::run(&args),
    }
}
