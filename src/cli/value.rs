//! `tailspan value`: value the book in every scenario and write results and capital.

use std::io::Write as _;
use std::path::PathBuf;

use crate::cli::progress::Progress;
use crate::data::{Book, Config, Experience};
use crate::error::{Error, Result};
use crate::io::provenance::retire_stale_records;
use crate::io::write_json;
use crate::pipeline::{ProjectedFits, ValuationSetup, ValueRequest, summarize, value_book};
use crate::projection::engine::ROW_GROUP_ROWS;
use crate::projection::{OutputOptions, Shard, scenario_ids};
use crate::risk::summary::RunSummary;
use crate::valuation::Extracts;

/// Arguments of `tailspan value`.
#[derive(Debug, clap::Args)]
pub struct ValueArgs {
    /// The run configuration (TOML).
    pub config: PathBuf,
    /// Value only shard K of N (a contiguous block of scenarios), e.g. `2/8`, into
    /// `part-K-of-N` files; `tailspan merge` combines the shards' results.
    #[arg(long, value_name = "K/N")]
    pub shard: Option<String>,
}

/// Runs `tailspan value`: fits, projects in memory, values the book in every scenario and
/// writes `book.parquet`, `cashflows.parquet`, `lifetimes.parquet` and `summary.json`.
pub fn run(args: &ValueArgs, quiet: bool) -> Result<()> {
    // A long valuation frees large buffers over and over; see `io::memory`.
    crate::io::memory::return_large_frees();
    let shard: Option<Shard> = args.shard.as_deref().map(str::parse).transpose()?;
    let config = Config::load(&args.config)?;
    let provenance = crate::pipeline::provenance(&config)?;
    let experience = Experience::from_config(&config)?;
    let book = Book::from_config(&config)?.ok_or_else(|| {
        Error::config(
            &config.file,
            "data.book",
            "`tailspan value` needs a book to value",
        )
    })?;
    let fits = ProjectedFits::fit(&config, &experience)?;
    let mut projector = fits.projector(&config, &experience)?;
    let setup = ValuationSetup::new(&config, book, &projector)?;
    crate::pipeline::write_basis(&config, &provenance, &setup)?;
    let options = OutputOptions {
        folder: config.output_folder(),
        paths: false,
        compression: config.output.compression,
        shard,
        row_group_rows: ROW_GROUP_ROWS,
        provenance: provenance.clone(),
    };
    let all = scenario_ids(config.projection.scenarios, config.projection.noise);
    let ids = match shard {
        Some(s) => s.range(all)?,
        None => all,
    };
    projector.prepare(ids.clone())?;
    let bar = Progress::new("valuing", ids.end - ids.start, quiet);
    let request = ValueRequest {
        ids,
        options: &options,
        hedges: None,
        report: false,
        extracts: &Extracts::default(),
    };
    let (outcome, files) = value_book(&config, &setup, &projector, &request, &|n| bar.advance(n))?;
    bar.finish();
    let summary = match shard {
        Some(_) => None,
        None => Some(summarize(
            &config,
            &provenance,
            &fits,
            &experience,
            &setup,
            &projector,
            &outcome,
        )?),
    };
    if shard.is_none() {
        retire_stale_records(&config.output_folder(), &provenance)?;
    }
    for file in files {
        file.commit()?;
    }
    if let Some(summary) = &summary {
        write_json(config.output_folder().join("summary.json"), summary)?;
        print_summary(summary)?;
    }
    Ok(())
}

/// Prints the headline figures.
pub fn print_summary(summary: &RunSummary) -> Result<()> {
    let mut text = String::new();
    let money = crate::report::format::amount;
    text.push_str(&format!(
        "best estimate (central path)       {:>18}\n",
        money(summary.best_estimate)
    ));
    let columns = [
        Some(("trend", &summary.trend)),
        summary
            .trend_idiosyncratic
            .as_ref()
            .map(|c| ("trend+idiosyncratic", c)),
    ];
    for (name, c) in columns.into_iter().flatten() {
        for t in &c.tails {
            text.push_str(&format!(
                "{name:<20} VaR {:>5.1} %     {:>18}   capital {:>16} ({:.2} % of BE)\n",
                100.0 * t.level,
                money(t.var),
                money(t.capital),
                t.capital_pct
            ));
        }
    }
    if let Some(o) = &summary.one_year {
        text.push_str(&format!(
            "one-year capital {:>5.1} %          {:>18} ({:.2} % of BE)\n",
            100.0 * o.level,
            money(o.capital),
            o.capital_pct
        ));
    }
    let s = &summary.standard_stress;
    text.push_str(&format!(
        "standard-formula stress (-{:.0} % q) {:>17} ({:.2} % of BE)\n",
        100.0 * s.decrease,
        money(s.capital),
        s.capital_pct
    ));
    let mut out = std::io::stdout().lock();
    out.write_all(text.as_bytes())
        .and_then(|()| out.flush())
        .map_err(|e| Error::io("standard output", e))
}
