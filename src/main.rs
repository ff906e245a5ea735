//! The `tailspan` binary: parse, run, report. No maths here.

use std::io::ErrorKind;
use std::process::ExitCode;

use clap::Parser;

fn main() -> ExitCode {
    let cli = tailspan::cli::Cli::parse();
    match tailspan::cli::run(cli) {
        Ok(()) => ExitCode::SUCCESS,
        // A closed pipe on standard output (`tailspan table ... | head`) is a normal end.
        Err(tailspan::Error::Io { source, .. }) if source.kind() == ErrorKind::BrokenPipe => {
            ExitCode::SUCCESS
        }
        Err(err) => {
            eprintln!("tailspan: error: {err}");
            ExitCode::from(2)
        }
    }
}
