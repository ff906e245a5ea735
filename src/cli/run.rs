//! `tailspan run`: the whole job the config asks for, with a report.

use std::io::Write as _;
use std::path::PathBuf;
use std::time::Instant;

use crate::cli::fit::fit_and_write;
use crate::cli::hedge::print_hedges;
use crate::cli::progress::Progress;
use crate::cli::value::print_summary;
use crate::data::config::ModelKind;
use crate::data::{Book, Config, Experience};
use crate::error::{Error, Result};
use crate::hedge::HedgeResults;
use crate::hedge::qforward::ReferenceCells;
use crate::io::provenance::retire_stale_records;
use crate::io::write_json;
use crate::io::{AtomicFile, Provenance};
use crate::pipeline::inputs::checked_inputs;
use crate::pipeline::models::{
    ModelFiles, Staging, ValuedModel, compare_models, gather_model_files, model_options,
};
use crate::pipeline::{
    LIFETIME_SCENARIOS_KEPT, ProjectedFits, ValuationOutcome, ValuationSetup, ValueRequest,
    hedge_stage, summarize, value_book, write_hedge_table_to,
};
use crate::projection::engine::ROW_GROUP_ROWS;
use crate::projection::engine::write_projection_keeping;
use crate::projection::{OutputOptions, Projector, Written, scenario_ids};
use crate::report::gather::{ReportInputs, fan_probes, report_data};
use crate::report::model_risk::model_risk;
use crate::risk::summary::RunSummary;
use crate::valuation::Extracts;

/// Arguments of `tailspan run`.
#[derive(Debug, clap::Args)]
pub struct RunArgs {
    /// The run configuration (TOML).
    pub config: PathBuf,
}

/// Times the stages for `--verbose`.
struct Stages {
    verbose: bool,
    start: Instant,
    last: Instant,
}

impl Stages {
    fn new(verbose: bool) -> Self {
        let now = Instant::now();
        Stages {
            verbose,
            start: now,
            last: now,
        }
    }

    fn done(&mut self, stage: &str) {
        let now = Instant::now();
        if self.verbose {
            eprintln!(
                "tailspan: {stage:<10} {:>8.2} s   (total {:.2} s)",
                (now - self.last).as_secs_f64(),
                (now - self.start).as_secs_f64()
            );
        }
        self.last = now;
    }
}

/// Runs `tailspan run`: checks the inputs, fits every configured model (fit.json,
/// residuals.parquet), projects (paths, factors, period), values the book with capital
/// (book, cash-flow and lifetime files, summary.json), prices the hedges (hedge.parquet),
/// writes report.html and prints the headline figures.
pub fn run(args: &RunArgs, quiet: bool, verbose: bool) -> Result<()> {
    let run_at = now_utc();
    let mut stages = Stages::new(verbose);
    let config = Config::load(&args.config)?;
    let provenance = crate::pipeline::provenance(&config)?;
    let inputs = checked_inputs(&config)?;
    let (experience, book) = (inputs.experience, inputs.book);
    let candidate = crate::pipeline::allocation::candidate_book(&config, book.as_ref())?;
    stages.done("check");

    let fit_set = fit_and_write(&config, &provenance, &experience)?;
    stages.done("fit");

    // Every listed kind goes through the same stages; with several, each writes into its
    // own staging folder and the files are gathered with a `model` column at the end.
    let staging = Staging::for_config(&config)?;
    let ids = scenario_ids(config.projection.scenarios, config.projection.noise);
    let base_options = OutputOptions {
        folder: config.output_folder(),
        paths: config.output.paths,
        compression: config.output.compression,
        shard: None,
        row_group_rows: ROW_GROUP_ROWS,
        provenance: provenance.clone(),
    };
    let mut runs = Vec::new();
    for kind in config.model.kinds() {
        let context = ModelContext {
            config: &config,
            provenance: &provenance,
            experience: &experience,
            book: book.as_ref(),
            candidate: candidate.as_ref(),
            first: runs.is_empty(),
            options: model_options(&base_options, staging.as_ref(), kind),
            label: staging.as_ref().map(|_| kind.name()),
            quiet,
        };
        runs.push(run_model(&context, kind, ids.clone(), &mut stages)?);
    }

    let several = staging.is_some();
    let mut pending = Vec::new();
    let mut model_risk_data = None;
    if several {
        if book.is_some() {
            let valued: Vec<ValuedModel<'_>> = runs
                .iter()
                .filter_map(|r| {
                    r.valued.as_ref().map(|v| ValuedModel {
                        fits: &r.fits,
                        outcome: &v.outcome,
                        summary: &v.summary,
                        hedges: v.hedges.as_ref(),
                    })
                })
                .collect();
            let (models, average) = compare_models(&config, &valued)?;
            let level = config.capital.levels.iter().copied().fold(0.0, f64::max);
            let pairs: Vec<_> = models
                .iter()
                .zip(valued.iter().map(|v| v.outcome))
                .collect();
            model_risk_data = Some(model_risk(&pairs, &average, level)?);
            if let Some(v) = runs[0].valued.as_mut() {
                v.summary.models = Some(models);
                v.summary.model_average = Some(average);
            }
        }
        let files = runs
            .iter_mut()
            .map(|r| ModelFiles {
                model: r.fits.kind,
                written: r.written.files.clone(),
                pending: r
                    .valued
                    .as_mut()
                    .map(|v| std::mem::take(&mut v.files))
                    .unwrap_or_default(),
            })
            .collect();
        pending = gather_model_files(&config, &provenance, files)?;
        stages.done("gather");
    }
    let mut first = runs.swap_remove(0);
    drop(runs);
    let mut summary = None;
    let mut outcome = None;
    let mut hedges = None;
    let mut probe_offset = 0;
    let mut basis = None;
    if let Some(valued) = first.valued.take() {
        retire_stale_records(&config.output_folder(), &provenance)?;
        for file in valued
            .files
            .into_iter()
            .chain(pending)
            .chain(valued.allocation)
        {
            file.commit()?;
        }
        write_json(config.output_folder().join("summary.json"), &valued.summary)?;
        summary = Some(valued.summary);
        outcome = Some(valued.outcome);
        hedges = valued.hedges;
        probe_offset = valued.probe_offset;
        basis = valued.basis;
    } else {
        retire_stale_records(&config.output_folder(), &provenance)?;
        for file in pending {
            file.commit()?;
        }
    }
    drop(staging);
    let projector = first.projector;

    let mut data = report_data(&ReportInputs {
        config: &config,
        experience: &experience,
        fits: &fit_set,
        projector: &projector,
        outcome: outcome.as_ref(),
        probe_offset,
        summary: summary.as_ref(),
        hedges: hedges.as_ref(),
        provenance: &provenance,
        run_at,
        basis: basis.as_ref(),
    })?;
    data.model_risk = model_risk_data;
    let report = config.output_folder().join("report.html");
    crate::report::write(&report, &data)?;
    stages.done("report");

    if let Some(summary) = &summary {
        print_summary(summary)?;
        if let Some(h) = &hedges {
            print_hedges(h)?;
        }
    }
    let mut out = std::io::stdout().lock();
    writeln!(out, "results in {}", config.output_folder().display())
        .map_err(|e| Error::io("standard output", e))
}

/// What every kind's stages share.
struct ModelContext<'a> {
    config: &'a Config,
    provenance: &'a Provenance,
    experience: &'a Experience,
    book: Option<&'a Book>,
    /// A tranche to price beside the book (`data.candidate_book`).
    candidate: Option<&'a Book>,
    /// Whether this is the first listed kind, whose capital is allocated and whose book
    /// basis is written, as the top-level figures are its.
    first: bool,
    /// Where this kind writes (its staging folder in a multi-model run).
    options: OutputOptions,
    /// The kind's name on the progress bars when several are run.
    label: Option<&'static str>,
    quiet: bool,
}

/// One kind's valuation: its files (uncommitted), figures and hedges.
struct ModelValuation {
    outcome: ValuationOutcome,
    files: Vec<AtomicFile>,
    /// `allocation.parquet`, written beside the gathered files, never given a model column.
    allocation: Option<AtomicFile>,
    summary: RunSummary,
    hedges: Option<HedgeResults>,
    probe_offset: usize,
    /// The book's fitted basis, when `[basis]` is configured.
    basis: Option<crate::basis::FittedBasis>,
}

/// One kind's run: fits, projector, projection files, and valuation when there is a book.
struct ModelRun {
    fits: ProjectedFits,
    projector: Projector,
    written: Written,
    valued: Option<ModelValuation>,
}

/// Fits, projects and (with a book) values one kind, prices its hedges and summarises it,
/// exactly as a run of that kind alone does.
fn run_model(
    cx: &ModelContext<'_>,
    kind: ModelKind,
    ids: std::ops::Range<u64>,
    stages: &mut Stages,
) -> Result<ModelRun> {
    let config = cx.config;
    let stage = |name: &str| match cx.label {
        Some(model) => format!("{name} {model}"),
        None => name.to_string(),
    };
    let fits = ProjectedFits::fit_kind(config, cx.experience, kind)?;
    let mut projector = fits.projector(config, cx.experience)?;
    let bar = Progress::new(&stage("projecting"), ids.end - ids.start, cx.quiet);
    // The charts' period e°65 (the first stochastic scenarios) comes from the projection,
    // which computes it for `period.parquet`; the valuation then reads only the book's cells.
    let charted = 1..1 + LIFETIME_SCENARIOS_KEPT as u64;
    let (written, period) =
        write_projection_keeping(&mut projector, ids.clone(), &cx.options, charted, &|n| {
            bar.advance(n)
        })?;
    bar.finish();
    stages.done("project");
    let Some(book) = cx.book else {
        return Ok(ModelRun {
            fits,
            projector,
            written,
            valued: None,
        });
    };
    let setup = ValuationSetup::new(config, book.clone(), &projector)?;
    if cx.first {
        crate::pipeline::write_basis(config, cx.provenance, &setup)?;
    }
    let mut probes = Vec::new();
    if let Some(h) = &config.hedge {
        probes.extend(ReferenceCells::of(h).cells);
    }
    let probe_offset = probes.len();
    probes.extend(fan_probes(config, &projector));
    // The charts draw the first stochastic scenarios (and the central path).
    let extracts = Extracts {
        probes,
        every_scenario: probe_offset,
        period: false,
        charts_end: ids.start.max(1) + LIFETIME_SCENARIOS_KEPT as u64,
    };
    let request = ValueRequest {
        ids,
        options: &cx.options,
        hedges: config.hedge.as_ref(),
        report: true,
        extracts: &extracts,
    };
    let bar = Progress::new(
        &stage("valuing"),
        request.ids.end - request.ids.start,
        cx.quiet,
    );
    let (mut outcome, mut files) =
        value_book(config, &setup, &projector, &request, &|n| bar.advance(n))?;
    outcome.period = period;
    bar.finish();
    stages.done("value");
    let mut summary = summarize(
        config,
        cx.provenance,
        &fits,
        cx.experience,
        &setup,
        &projector,
        &outcome,
    )?;
    stages.done("capital");
    let allocation = match cx.first {
        true => crate::pipeline::allocation::allocation_stage(
            config,
            cx.provenance,
            &setup,
            &projector,
            &outcome,
            &mut summary,
            cx.candidate,
        )?,
        false => None,
    };
    if allocation.is_some() {
        stages.done("allocation");
    }
    let mut hedges = None;
    if let Some(h) = &config.hedge {
        let results = hedge_stage(config, h, &setup, &outcome)?;
        files.push(write_hedge_table_to(
            &cx.options.folder.join("hedge.parquet"),
            config,
            cx.provenance,
            &results,
            &outcome,
        )?);
        summary.hedges =
            Some(serde_json::to_value(&results.summary).map_err(|e| {
                Error::Numerical(format!("hedge summary could not be written: {e}"))
            })?);
        hedges = Some(results);
        stages.done("hedge");
    }
    Ok(ModelRun {
        fits,
        projector,
        written,
        valued: Some(ModelValuation {
            outcome,
            files,
            allocation,
            summary,
            hedges,
            probe_offset,
            basis: setup.basis.clone(),
        }),
    })
}

/// The current time in UTC as ISO 8601, from the system clock, or the time that
/// `SOURCE_DATE_EPOCH` gives in seconds (the reproducible-builds.org convention), so that a
/// rerun can reproduce the report byte for byte.
fn now_utc() -> String {
    let fixed = std::env::var("SOURCE_DATE_EPOCH")
        .ok()
        .and_then(|s| s.trim().parse::<u64>().ok());
    let secs = fixed.unwrap_or_else(|| {
        std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .map(|d| d.as_secs())
            .unwrap_or(0)
    });
    let (days, rem) = (secs / 86_400, secs % 86_400);
    let (y, m, d) = civil_from_days(days as i64);
    format!(
        "{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}Z",
        rem / 3600,
        (rem % 3600) / 60,
        rem % 60
    )
}

/// Gregorian date of a day count from 1970-01-01 (H. Hinnant's civil-from-days algorithm).
fn civil_from_days(z: i64) -> (i64, u32, u32) {
    let z = z + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = (doy - (153 * mp + 2) / 5 + 1) as u32;
    let m = if mp < 10 { mp + 3 } else { mp - 9 } as u32;
    (yoe + era * 400 + i64::from(m <= 2), m, d)
}

#[cfg(test)]
mod tests {
    use super::civil_from_days;

    #[test]
    fn civil_dates_of_known_days() {
        // 1970-01-01 is day 0; 2000-03-01 is day 11,017; 2026-12-02 is day 20,789
        // (day counts from the proleptic Gregorian calendar, hand-checked).
        assert_eq!(civil_from_days(0), (1970, 1, 1));
        assert_eq!(civil_from_days(11_017), (2000, 3, 1));
        assert_eq!(civil_from_days(20_789), (2026, 12, 2));
    }
}
