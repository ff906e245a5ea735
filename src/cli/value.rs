//! `tailspan value`: value the book in every scenario and write results and capital.

use std::io::Write as _;
use std::path::PathBuf;

use crate::cli::progress::Progress;
use crate::data::{Config, PathsOutput};
use crate::error::{Error, Result};
use crate::io::provenance::retire_stale_records;
use crate::io::write_json;
use crate::pipeline::inputs::checked_inputs;
use crate::pipeline::models::{
    ModelFiles, Staging, ValuedModel, compare_models, gather_model_files, model_options,
    refuse_sharded_models,
};
use crate::pipeline::{ProjectedFits, ValuationSetup, ValueRequest, summarize, value_book};
use crate::projection::engine::ROW_GROUP_ROWS;
use crate::projection::{OutputOptions, Shard, scenario_ids};
use crate::risk::model_average::{ModelAverage, ModelFigures};
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
    let inputs = checked_inputs(&config)?;
    let experience = inputs.experience;
    let book = inputs.book.ok_or_else(|| {
        Error::config(
            &config.file,
            "data.book",
            "`tailspan value` needs a book to value",
        )
    })?;
    let candidate = crate::pipeline::allocation::candidate_book(&config, Some(&book))?;
    refuse_sharded_models(&config, shard.is_some())?;
    let staging = Staging::for_config(&config)?;
    let base_options = OutputOptions {
        folder: config.output_folder(),
        paths: PathsOutput::None,
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
    // Every listed kind is valued the same way, on the same scenario streams.
    let mut valued = Vec::new();
    let mut allocation_file = None;
    for kind in config.model.kinds() {
        let fits = ProjectedFits::fit_kind(&config, &experience, kind)?;
        let mut projector = fits.projector(&config, &experience)?;
        let setup = ValuationSetup::new(&config, book.clone(), &projector)?;
        if valued.is_empty() {
            crate::pipeline::write_basis(&config, &provenance, &setup)?;
        }
        let options = model_options(&base_options, staging.as_ref(), kind);
        projector.prepare(ids.clone())?;
        let stage = match &staging {
            Some(_) => format!("valuing {}", kind.name()),
            None => "valuing".to_string(),
        };
        let bar = Progress::new(&stage, ids.end - ids.start, quiet);
        let request = ValueRequest {
            ids: ids.clone(),
            options: &options,
            hedges: None,
            report: false,
            extracts: &Extracts::default(),
        };
        let (outcome, files) =
            value_book(&config, &setup, &projector, &request, &|n| bar.advance(n))?;
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
        let mut summary = summary;
        // Allocation replays the whole run's tail, so only a whole run has it; with several
        // kinds it follows the first, as the top-level figures do.
        if valued.is_empty()
            && let Some(figures) = summary.as_mut()
        {
            allocation_file = crate::pipeline::allocation::allocation_stage(
                &config,
                &provenance,
                &setup,
                &projector,
                &outcome,
                figures,
                candidate.as_ref(),
            )?;
        }
        valued.push((fits, outcome, files, summary));
    }
    let (summary, files) = if staging.is_some() {
        let models: Vec<ValuedModel<'_>> = valued
            .iter()
            .filter_map(|(fits, outcome, _, summary)| {
                summary.as_ref().map(|summary| ValuedModel {
                    fits,
                    outcome,
                    summary,
                    hedges: None,
                })
            })
            .collect();
        let (figures, average) = compare_models(&config, &models)?;
        let mut summary = valued[0].3.clone();
        if let Some(s) = summary.as_mut() {
            s.models = Some(figures);
            s.model_average = Some(average);
        }
        let parts = valued
            .iter_mut()
            .map(|(fits, _, files, _)| ModelFiles {
                model: fits.kind,
                written: Vec::new(),
                pending: std::mem::take(files),
            })
            .collect();
        (summary, gather_model_files(&config, &provenance, parts)?)
    } else {
        let (_, _, files, summary) = valued.remove(0);
        (summary, files)
    };
    if shard.is_none() {
        retire_stale_records(&config.output_folder(), &provenance)?;
    }
    for file in files.into_iter().chain(allocation_file) {
        file.commit()?;
    }
    drop(valued);
    drop(staging);
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
    if let (Some(models), Some(average)) = (&summary.models, &summary.model_average) {
        text.push_str(&model_risk_table(models, average));
    }
    let mut out = std::io::stdout().lock();
    out.write_all(text.as_bytes())
        .and_then(|()| out.flush())
        .map_err(|e| Error::io("standard output", e))
}

/// The printed "model risk" table: each model's BIC, weight, best estimate, VaR and
/// capital (trend risk, at the highest level), then the mixture's and the spread of the
/// best estimates.
fn model_risk_table(models: &[ModelFigures], average: &ModelAverage) -> String {
    let money = crate::report::format::amount;
    let tail = |tails: &[crate::risk::TailFigures]| tails.last().cloned();
    let level = tail(&average.trend.tails)
        .map_or(String::new(), |t| format!("VaR {:.1} %", 100.0 * t.level));
    let mut text = format!(
        "model risk (trend; weights from {})\n{:<18} {:>12} {:>7} {:>18} {:>18} {:>22}\n",
        if average.weights_from == "bic" {
            "BIC"
        } else {
            "model.weights"
        },
        "model",
        "BIC",
        "weight",
        "best estimate",
        level,
        "capital"
    );
    let mut row =
        |name: &str, bic: String, weight: f64, be: f64, t: Option<crate::risk::TailFigures>| {
            let (var, capital) = match t {
                Some(t) => (
                    money(t.var),
                    format!("{} ({:.2} %)", money(t.capital), t.capital_pct),
                ),
                None => (String::new(), String::new()),
            };
            text.push_str(&format!(
                "{name:<18} {bic:>12} {weight:>7.3} {:>18} {var:>18} {capital:>22}\n",
                money(be)
            ));
        };
    for m in models {
        let bic = m.bic.get("total").copied().unwrap_or(f64::NAN);
        row(
            &m.model,
            format!("{bic:.1}"),
            m.weight,
            m.best_estimate,
            tail(&m.trend.tails),
        );
    }
    row(
        "model average",
        String::new(),
        1.0,
        average.best_estimate,
        tail(&average.trend.tails),
    );
    text.push_str(&format!(
        "spread of best estimates (max - min) {:>18}\n",
        money(average.best_estimate_spread)
    ));
    text
}
