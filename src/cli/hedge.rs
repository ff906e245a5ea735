//! `tailspan hedge`: price the configured longevity swaps and q-forwards.

use std::io::Write as _;
use std::path::PathBuf;

use crate::cli::progress::Progress;
use crate::data::{Config, PathsOutput};
use crate::error::{Error, Result};
use crate::hedge::qforward::ReferenceCells;
use crate::io::provenance::{Recorded, retire_stale_records};
use crate::io::write_json;
use crate::pipeline::inputs::checked_inputs;
use crate::pipeline::{
    ProjectedFits, ValuationSetup, ValueRequest, hedge_stage, value_book, write_hedge_table,
};
use crate::projection::engine::ROW_GROUP_ROWS;
use crate::projection::{OutputOptions, scenario_ids};
use crate::valuation::Extracts;

/// Arguments of `tailspan hedge`.
#[derive(Debug, clap::Args)]
pub struct HedgeArgs {
    /// The run configuration (TOML) with a `[hedge]` section.
    pub config: PathBuf,
}

/// Runs `tailspan hedge`: values the book in every scenario in memory, prices and values
/// every contract of `[hedge]`, and writes `hedge.parquet` and `hedge.json`.
pub fn run(args: &HedgeArgs, quiet: bool) -> Result<()> {
    let config = Config::load(&args.config)?;
    let hedges = config.hedge.clone().ok_or_else(|| {
        Error::config(
            &config.file,
            "hedge",
            "no `[hedge]` section: nothing to price",
        )
    })?;
    let provenance = crate::pipeline::provenance(&config)?;
    let inputs = checked_inputs(&config)?;
    let experience = inputs.experience;
    let book = inputs.book.ok_or_else(|| {
        Error::config(
            &config.file,
            "data.book",
            "hedges are priced against a book",
        )
    })?;
    let fits = ProjectedFits::fit(&config, &experience)?;
    let mut projector = fits.projector(&config, &experience)?;
    let setup = ValuationSetup::new(&config, book, &projector)?;
    let ids = scenario_ids(config.projection.scenarios, config.projection.noise);
    projector.prepare(ids.clone())?;
    // The valuation files go to a scratch folder and are dropped: this command writes only
    // the hedge results.
    let scratch = tempfile::tempdir().map_err(|e| Error::io(std::env::temp_dir(), e))?;
    let options = OutputOptions {
        folder: scratch.path().to_path_buf(),
        paths: PathsOutput::None,
        compression: config.output.compression,
        shard: None,
        row_group_rows: ROW_GROUP_ROWS,
        provenance: provenance.clone(),
    };
    let probes = ReferenceCells::of(&hedges).cells;
    let extracts = Extracts {
        every_scenario: probes.len(),
        probes,
        ..Extracts::default()
    };
    let request = ValueRequest {
        ids,
        options: &options,
        hedges: Some(&hedges),
        report: false,
        extracts: &extracts,
    };
    let bar = Progress::new("valuing", request.ids.end - request.ids.start, quiet);
    let (outcome, _scratch_files) =
        value_book(&config, &setup, &projector, &request, &|n| bar.advance(n))?;
    bar.finish();
    let results = hedge_stage(&config, &hedges, &setup, &outcome)?;
    let table = write_hedge_table(&config, &provenance, &results, &outcome)?;
    retire_stale_records(&config.output_folder(), &provenance)?;
    table.commit()?;
    let record = Recorded {
        run: &provenance,
        body: &results.summary,
    };
    write_json(config.output_folder().join("hedge.json"), &record)?;
    print_hedges(&results)
}

/// Prints each contract's price.
pub fn print_hedges(hedges: &crate::hedge::HedgeResults) -> Result<()> {
    use crate::hedge::evaluate::ContractSummary;
    let money = crate::report::format::amount;
    let mut text = String::new();
    for c in &hedges.summary.contracts {
        match c {
            ContractSummary::Swap(s) => text.push_str(&format!(
                "swap `{}`: premium {:.3} % = {} by cost of capital, {:.3} % = {} by Sharpe ratio\n",
                s.name,
                100.0 * s.cost_of_capital.premium.rate,
                money(s.cost_of_capital.premium.amount),
                100.0 * s.sharpe.premium.rate,
                money(s.sharpe.premium.amount),
            )),
            ContractSummary::QForward(q) => text.push_str(&format!(
                "q-forward `{}`: fixed rate {:.6} (central {:.6}), notional {}\n",
                q.name,
                q.fixed_rate,
                q.central_rate,
                money(q.notional)
            )),
        }
    }
    let mut out = std::io::stdout().lock();
    out.write_all(text.as_bytes())
        .and_then(|()| out.flush())
        .map_err(|e| Error::io("standard output", e))
}
