//! `tailspan hedge`: price the configured longevity swaps and q-forwards.

use std::io::Write as _;
use std::path::PathBuf;

use crate::cli::progress::Progress;
use crate::data::{Book, Config, Experience, PathsOutput};
use crate::error::{Error, Result};
use crate::hedge::evaluate::HedgeSummary;
use crate::hedge::qforward::ReferenceCells;
use crate::hedge::{HedgeConfig, HedgeResults};
use crate::io::provenance::{Recorded, retire_stale_records};
use crate::io::{Provenance, write_json};
use crate::pipeline::inputs::checked_inputs;
use crate::pipeline::models::{
    ModelFiles, ModelWeights, Staging, gather_model_files, mixture_hedges, model_weights,
};
use crate::pipeline::{
    ProjectedFits, ValuationOutcome, ValuationSetup, ValueRequest, hedge_stage, value_book,
    write_hedge_table, write_hedge_table_to,
};
use crate::projection::engine::ROW_GROUP_ROWS;
use crate::projection::{OutputOptions, scenario_ids};
use crate::risk::model_average::MixtureHedge;
use crate::valuation::Extracts;

/// Arguments of `tailspan hedge`.
#[derive(Debug, clap::Args)]
pub struct HedgeArgs {
    /// The run configuration (TOML) with a `[hedge]` section.
    pub config: PathBuf,
}

/// Runs `tailspan hedge`: values the book in every scenario in memory, prices and values
/// every contract of `[hedge]`, and writes `hedge.parquet` and `hedge.json`. With several
/// model kinds, each kind is fitted, projected and valued on the same random numbers and
/// prices the contracts on its own scenarios, as a run of that kind alone would;
/// `hedge.parquet` gains a `model` column, and `hedge.json` gives each kind's prices and
/// each contract on the weighted mixture of the kinds.
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
    let staging = Staging::for_config(&config)?;
    let mut priced = Vec::new();
    for kind in config.model.kinds() {
        let label = staging.as_ref().map(|_| kind.name());
        let fits = ProjectedFits::fit_kind(&config, &experience, kind)?;
        let (outcome, results) = price_kind(
            (&config, &provenance),
            &hedges,
            (&fits, &experience),
            &book,
            label,
            quiet,
        )?;
        let table = match &staging {
            Some(s) => {
                let folder = s.folder(kind);
                std::fs::create_dir_all(&folder).map_err(|e| Error::io(&folder, e))?;
                let path = folder.join("hedge.parquet");
                write_hedge_table_to(&path, &config, &provenance, &results, &outcome)?
            }
            None => write_hedge_table(&config, &provenance, &results, &outcome)?,
        };
        priced.push((fits, outcome, results, table));
    }
    if staging.is_none() {
        let Some((_, _, results, table)) = priced.pop() else {
            return Ok(());
        };
        retire_stale_records(&config.output_folder(), &provenance)?;
        table.commit()?;
        let record = Recorded {
            run: &provenance,
            body: &results.summary,
        };
        write_json(config.output_folder().join("hedge.json"), &record)?;
        return print_hedges(&results);
    }

    let fits: Vec<&ProjectedFits> = priced.iter().map(|(f, ..)| f).collect();
    let ModelWeights {
        weights,
        from: weights_from,
        ..
    } = model_weights(&config, &fits);
    let samples: Option<Vec<_>> = priced
        .iter()
        .map(|(_, outcome, results, _)| outcome.hedge_sample.as_ref().map(|s| (results, s)))
        .collect();
    let mixture = samples
        .map(|samples| mixture_hedges(&samples, &weights, &config.capital.levels))
        .transpose()?
        .flatten();
    let mut files = Vec::with_capacity(priced.len());
    let mut models = Vec::with_capacity(priced.len());
    for ((fits, _, results, table), &weight) in priced.into_iter().zip(&weights) {
        files.push(ModelFiles {
            model: fits.kind,
            written: Vec::new(),
            pending: vec![table],
        });
        models.push((fits.kind, weight, results));
    }
    let gathered = gather_model_files(&config, &provenance, files)?;
    drop(staging);
    retire_stale_records(&config.output_folder(), &provenance)?;
    for file in gathered {
        file.commit()?;
    }
    let body = ModelHedges {
        models: models
            .iter()
            .map(|(model, weight, results)| ModelHedge {
                model,
                weight: *weight,
                hedges: &results.summary,
            })
            .collect(),
        model_average: MixtureHedges {
            weights_from,
            hedges: mixture.as_deref().unwrap_or_default(),
        },
    };
    let record = Recorded {
        run: &provenance,
        body: &body,
    };
    write_json(config.output_folder().join("hedge.json"), &record)?;
    for (model, weight, results) in &models {
        print_text(&format!("{model} (weight {weight:.4}):\n"))?;
        print_hedges(results)?;
    }
    print_mixture(&body.model_average)
}

/// Fits, projects and values the book under one kind's `fits` and prices `hedges` on its
/// scenarios; `label` names the kind on the progress bar when there are several.
fn price_kind(
    (config, provenance): (&Config, &Provenance),
    hedges: &HedgeConfig,
    (fits, experience): (&ProjectedFits, &Experience),
    book: &Book,
    label: Option<&str>,
    quiet: bool,
) -> Result<(ValuationOutcome, HedgeResults)> {
    let mut projector = fits.projector(config, experience)?;
    let setup = ValuationSetup::new(config, book.clone(), &projector)?;
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
    let probes = ReferenceCells::of(hedges).cells;
    let extracts = Extracts {
        every_scenario: probes.len(),
        probes,
        ..Extracts::default()
    };
    let request = ValueRequest {
        ids,
        options: &options,
        hedges: Some(hedges),
        report: false,
        extracts: &extracts,
    };
    let stage = match label {
        Some(kind) => format!("valuing ({kind})"),
        None => "valuing".to_string(),
    };
    let bar = Progress::new(&stage, request.ids.end - request.ids.start, quiet);
    let (outcome, _scratch_files) =
        value_book(config, &setup, &projector, &request, &|n| bar.advance(n))?;
    bar.finish();
    let results = hedge_stage(config, hedges, &setup, &outcome)?;
    Ok((outcome, results))
}

/// `hedge.json` of several kinds: each kind's prices, and each contract on the mixture.
#[derive(Debug, serde::Serialize)]
struct ModelHedges<'a> {
    /// Each kind, in the config's order.
    models: Vec<ModelHedge<'a>>,
    /// Each contract on the weighted mixture of the kinds' distributions.
    model_average: MixtureHedges<'a>,
}

/// One kind's prices, as `hedge.json` of a run of that kind alone gives them.
#[derive(Debug, serde::Serialize)]
struct ModelHedge<'a> {
    /// The kind's name.
    model: &'a str,
    /// Its weight in the mixture.
    weight: f64,
    /// Its prices and effectiveness.
    hedges: &'a HedgeSummary,
}

/// The contracts on the mixture.
#[derive(Debug, serde::Serialize)]
struct MixtureHedges<'a> {
    /// `config` (`model.weights`) or `bic`.
    weights_from: &'static str,
    /// Each contract's capital without and with it on the mixture.
    hedges: &'a [MixtureHedge],
}

/// Prints each contract's capital reduction on the mixture of the kinds.
fn print_mixture(average: &MixtureHedges<'_>) -> Result<()> {
    let mut text = format!("model average (weights from {}):\n", average.weights_from);
    for h in average.hedges {
        for t in &h.tails {
            let reduction = t
                .capital_reduction_pct
                .map_or_else(|| "-".to_string(), |r| format!("{r:.1} %"));
            text.push_str(&format!(
                "`{}` at {:.1} %: capital {} unhedged, {} hedged ({reduction} less)\n",
                h.contract,
                100.0 * t.level,
                crate::report::format::amount(t.capital_unhedged),
                crate::report::format::amount(t.capital_hedged),
            ));
        }
    }
    print_text(&text)
}

/// Writes `text` to standard output.
fn print_text(text: &str) -> Result<()> {
    let mut out = std::io::stdout().lock();
    out.write_all(text.as_bytes())
        .and_then(|()| out.flush())
        .map_err(|e| Error::io("standard output", e))
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
    print_text(&text)
}
