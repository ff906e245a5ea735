//! The stages a run chains together, shared by `fit`, `project`, `value`, `hedge` and `run`.
//!
//! Each command needs the same first steps — the config's experience, the first configured
//! model fitted to each sex, a projector over the joint basis — and must build them the same
//! way, or a `value` would not reproduce the paths a `project` wrote for the same seed.

pub mod allocation;
pub mod inputs;
pub mod models;

use std::ops::Range;
use std::path::Path;
use std::sync::Arc;

use arrow_array::{ArrayRef, Float64Array, StringArray, UInt32Array};
use arrow_schema::{DataType, Field, Schema};

use crate::basis::{BookRates, FittedBasis};
use crate::data::{Book, Config, Experience, Sex};
use crate::error::{Error, Result};
use crate::hedge::legs::{BookSample, BookSampler};
use crate::hedge::qforward::{ReferenceCells, ReferenceRates};
use crate::hedge::spec::HedgeConfig;
use crate::hedge::{HedgeInputs, HedgeResults, evaluate};
use crate::interest::DiscountCurve;
use crate::io::AtomicFile;
use crate::io::Provenance;
use crate::io::hash::{InputHash, hash_file};
use crate::io::parquet::{DEFAULT_ROWS_PER_GROUP, ParquetSink};
use crate::life::Fractional;
use crate::models::{FittedModel, MortalityModel, build_model};
use crate::projection::{
    BootstrapSource, OutputOptions, Projector, Settings, Uncertainty, scenario_ids,
};
use crate::risk::one_year::{Recalibration, one_year_values};
use crate::risk::order::{HELD, Streamed};
use crate::risk::summary::{OneYearFigures, RunInfo, RunSummary};
use crate::risk::{CapitalSummary, StressFigures};
use crate::valuation::files::{ValuationFiles, WrittenBook};
use crate::valuation::{
    Basis, DriverSettings, Extracts, LevelAdjustment, LifetimeTable, PreparedBook, ScenarioValue,
    Workspace, value_scenarios,
};

/// The projected model fitted to each sex, with the specifications that can refit it.
pub struct ProjectedFits {
    /// Kind name, e.g. `lee-carter`.
    pub kind: &'static str,
    /// Fitted model per sex, in the config's order.
    pub fits: Vec<(Sex, Arc<dyn FittedModel>)>,
    /// The checked model per sex (the same spec for every sex), for refits.
    pub specs: Vec<Arc<dyn MortalityModel>>,
}

impl ProjectedFits {
    /// Fits the first configured model kind to each sex of `experience`.
    pub fn fit(config: &Config, experience: &Experience) -> Result<Self> {
        Self::fit_kind(config, experience, config.model.kinds()[0])
    }

    /// Fits the configured model of `kind` to each sex of `experience`.
    pub fn fit_kind(
        config: &Config,
        experience: &Experience,
        kind: crate::data::config::ModelKind,
    ) -> Result<Self> {
        let mut fits = Vec::new();
        let mut specs: Vec<Arc<dyn MortalityModel>> = Vec::new();
        for population in &experience.populations {
            let spec: Arc<dyn MortalityModel> = Arc::from(build_model(&config.model, kind)?);
            fits.push((population.sex, Arc::from(spec.fit(population)?)));
            specs.push(spec);
        }
        Ok(ProjectedFits {
            kind: kind.name(),
            fits,
            specs,
        })
    }

    /// A projector over these fits with the config's projection settings.
    pub fn projector(&self, config: &Config, experience: &Experience) -> Result<Projector> {
        let settings = Settings::from_config(&config.projection);
        let source = matches!(settings.uncertainty, Uncertainty::Bootstrap { .. }).then(|| {
            BootstrapSource {
                models: self.specs.clone(),
                populations: experience.populations.clone(),
            }
        });
        let basis = crate::projection::JointBasis::new(self.fits.clone())?;
        Projector::from_basis(Arc::new(basis), settings, source)
    }
}

/// The book and what values it, prepared once for every scenario.
pub struct ValuationSetup {
    /// The book as loaded.
    pub book: Book,
    /// Cohorts and schedules.
    pub prepared: PreparedBook,
    /// Truncated lifetimes to report per cohort.
    pub lifetimes: LifetimeTable,
    /// Valuation year.
    pub year: i32,
    /// The book's own mortality against the population (`[basis]`), if configured.
    pub basis: Option<FittedBasis>,
}

impl ValuationSetup {
    /// Prepares `book` on the config's valuation basis over the projector's rates.
    pub fn new(config: &Config, book: Book, projector: &Projector) -> Result<Self> {
        let basis = Basis {
            timing: config.valuation.timing,
            frequency: config.valuation.frequency,
            curve: DiscountCurve::from_config(config)?,
        };
        let ages = projector.ages();
        let mut level = LevelAdjustment::none(ages.first, ages.last);
        for f in &config.valuation.mortality_factors {
            level.set(f.sex, f.ages[0], f.ages[1], f.factor);
        }
        let year = config.valuation_year();
        let prepared = PreparedBook::new(
            &book,
            &basis,
            level.clone(),
            year,
            ages.first,
            ages.last,
            projector.years().last,
        )
        .map_err(|e| match e {
            Error::Config { key, rule, .. } => Error::config(&config.file, key, rule),
            other => other,
        })?;
        let mut lifetimes = LifetimeTable::new(
            &book,
            &config.valuation.horizons,
            &basis,
            level,
            Fractional::Udd,
            year,
            ages.last,
        );
        lifetimes.share_curves(&prepared);
        Ok(ValuationSetup {
            book,
            prepared,
            lifetimes,
            year,
            basis: crate::basis::from_config(config, projector.basis())?,
        })
    }

    /// The book's own rates, when `[basis]` is configured.
    pub fn book_rates(&self) -> Option<&BookRates> {
        self.basis.as_ref().map(|b| &b.rates)
    }

    /// The book's expected PV on the central path with every q multiplied by `scale`.
    pub fn central_value(&self, projector: &Projector, scale: f64) -> Result<f64> {
        let mut paths = projector.buffer();
        projector.generate(0, &mut paths)?;
        let mut ws = Workspace::default();
        let mut book_buffers = crate::basis::BookBuffers::default();
        let surfaces = match self.book_rates() {
            Some(rates) => rates.apply(0, &paths.surfaces(), &mut book_buffers),
            None => paths.surfaces(),
        };
        self.prepared
            .build_scaled_curves(&surfaces, scale, &mut ws)?;
        let mut value = ScenarioValue::default();
        self.prepared
            .value::<rand_chacha::ChaCha8Rng>(&mut ws, None, &mut value);
        Ok(value.pv_expected)
    }
}

/// Writes `basis.json` when the config has a `[basis]`: the book's level, slope, spread and
/// actual-to-expected figures, with the run's provenance.
pub fn write_basis(config: &Config, provenance: &Provenance, setup: &ValuationSetup) -> Result<()> {
    if let Some(basis) = &setup.basis {
        let record = crate::io::provenance::Recorded {
            run: provenance,
            body: &basis.document,
        };
        crate::io::write_json(config.output_folder().join("basis.json"), &record)?;
    }
    Ok(())
}

/// What the valuation of a run (or of one shard) gives.
#[derive(Debug, Default)]
pub struct ValuationOutcome {
    /// Scenario 0 (the central path), if it was in the range valued.
    pub central: Option<ScenarioValue>,
    /// Stochastic scenarios valued.
    pub stochastic: usize,
    /// Scenario numbers of the stochastic scenarios valued, in order, when hedges were
    /// asked for (they name the rows of `hedge.parquet`).
    pub scenarios: Vec<u64>,
    /// The written `book.parquet`, from which the capital figures and the report's
    /// histogram read the PVs again: no PV is kept in memory.
    pub book: Option<WrittenBook>,
    /// What the hedges need of every scenario, when hedges were asked for: a few numbers
    /// a scenario, not its cash flows.
    pub hedge_sample: Option<BookSample>,
    /// Whole-future e°x per (sex, age) reported, one value per stochastic scenario, for
    /// the report: the first [`LIFETIME_SCENARIOS_KEPT`] scenarios only (every scenario's are in
    /// `lifetimes.parquet`).
    pub lifetimes: Vec<((Sex, i32), Vec<f64>)>,
    /// The requested cells' q on the central path.
    pub central_probes: Vec<f64>,
    /// The requested cells' q per stochastic scenario, for the report: the first
    /// [`LIFETIME_SCENARIOS_KEPT`] only.
    pub probes: Vec<Vec<f64>>,
    /// When hedges were asked for: per q-forward reference cell (the first requested
    /// cells), its q in every stochastic scenario, in scenario order.
    pub reference_rates: Vec<Vec<f64>>,
    /// Period e°65 by sex and projected year, per stochastic scenario (for the report,
    /// the first [`LIFETIME_SCENARIOS_KEPT`] only).
    pub period: Vec<Vec<f64>>,
}

/// Stochastic scenarios whose whole-future e°x a [`ValuationOutcome`] keeps in memory for
/// the report: enough for a fan chart, and a bound so that a million-scenario run's memory
/// does not grow with its cohorts times its scenarios.
pub const LIFETIME_SCENARIOS_KEPT: usize = 10_000;

/// Which scenarios to value, where to write, and what to keep.
pub struct ValueRequest<'a> {
    /// Scenario numbers (a shard's block, or all).
    pub ids: Range<u64>,
    /// Output folder, compression and shard naming.
    pub options: &'a OutputOptions,
    /// Gather what these hedges need of every scenario (and keep every scenario's
    /// reference cells).
    pub hedges: Option<&'a HedgeConfig>,
    /// Keep what the report's charts draw of the first [`LIFETIME_SCENARIOS_KEPT`]
    /// scenarios. No PV stays in memory: the capital figures and the report's histogram
    /// read them back from `book.parquet`, so memory does not grow with the scenario count.
    pub report: bool,
    /// Cells and period figures to read off each scenario.
    pub extracts: &'a Extracts,
}

/// Values the book in the requested scenarios, writing the valuation files and keeping the
/// per-scenario figures (and the full values when asked).
pub fn value_book(
    config: &Config,
    setup: &ValuationSetup,
    projector: &Projector,
    request: &ValueRequest<'_>,
    progress: &(dyn Fn(u64) + Sync),
) -> Result<(ValuationOutcome, Vec<AtomicFile>)> {
    let ValueRequest {
        ids,
        options,
        hedges,
        report,
        extracts,
    } = request;
    let (ids, report) = (ids.clone(), *report);
    // The hedges' table names every scenario.
    let keep_ids = hedges.is_some();
    let mut hedging = match hedges {
        Some(h) => Some((
            BookSampler::new(
                h,
                &DiscountCurve::from_config(config)?,
                setup.prepared.years(),
            ),
            BookSample::default(),
        )),
        None => None,
    };
    let reference_cells = hedges.map_or(0, |h| ReferenceCells::of(h).cells.len());
    let settings = DriverSettings {
        seed: config.projection.seed,
        idiosyncratic: config.valuation.idiosyncratic,
        book_rates: setup.book_rates(),
        // Index hedges (parametric swaps, q-forwards) need the book on the index's rates.
        index_cash: hedges.is_some_and(|h| {
            !h.qforward.is_empty()
                || h.swap
                    .iter()
                    .any(|s| s.floating == crate::hedge::spec::FloatingBasis::Parametric)
        }),
    };
    let mut files = ValuationFiles::create(options, setup.year, true)?;
    let mut outcome = ValuationOutcome::default();
    // Exact capacity: growth by doubling would hold up to twice the per-scenario figures,
    // and three times while a grown vector is copied.
    let n = (ids.end - ids.start) as usize;
    if keep_ids {
        outcome.scenarios.reserve_exact(n);
    }
    outcome.reference_rates = (0..reference_cells)
        .map(|_| Vec::with_capacity(n))
        .collect();
    value_scenarios(
        projector,
        &setup.prepared,
        Some(&setup.lifetimes),
        ids,
        settings,
        extracts,
        |chunk| {
            files.write(chunk)?;
            for r in chunk {
                if r.scenario == 0 {
                    if let Some((_, sample)) = &mut hedging {
                        sample.central = r.value.clone();
                    }
                    outcome.central = Some(r.value.clone());
                    outcome.central_probes = r.probes.clone();
                    continue;
                }
                // Chart inputs are bounded like the lifetimes; the hedges need every
                // scenario's reference rates, as they need every scenario's values.
                let keep_charts = report && outcome.stochastic < LIFETIME_SCENARIOS_KEPT;
                if !r.probes.is_empty() && keep_charts {
                    outcome.probes.push(r.probes.clone());
                }
                if r.probes.len() < reference_cells {
                    return Err(Error::model(
                        "hedge",
                        format!("scenario {} lacks its reference rates", r.scenario),
                    ));
                }
                for (column, &q) in outcome.reference_rates.iter_mut().zip(&r.probes) {
                    column.push(q);
                }
                if !r.period.is_empty() && keep_charts {
                    outcome.period.push(r.period.clone());
                }
                outcome.stochastic += 1;
                if keep_ids {
                    outcome.scenarios.push(r.scenario);
                }
                let keep_lifetimes = report && outcome.stochastic <= LIFETIME_SCENARIOS_KEPT;
                for row in r.lifetimes.iter().filter(|l| {
                    keep_lifetimes && l.horizon as i32 == whole_future_horizon(l, setup)
                }) {
                    let key = (row.sex, row.age);
                    match outcome.lifetimes.iter_mut().find(|(k, _)| *k == key) {
                        Some((_, v)) => v.push(row.e_complete),
                        None => {
                            let mut v = Vec::with_capacity(n.min(LIFETIME_SCENARIOS_KEPT));
                            v.push(row.e_complete);
                            outcome.lifetimes.push((key, v));
                        }
                    }
                }
                if let Some((sampler, sample)) = &mut hedging {
                    let index_cash = if r.index_cash.is_empty() {
                        &r.value.cash_expected
                    } else {
                        &r.index_cash
                    };
                    sampler.push_with_index(
                        sample,
                        outcome.stochastic - 1,
                        &r.value,
                        index_cash,
                    )?;
                    if !r.index_cash.is_empty() {
                        sample.pv_index.push(r.index_pv);
                    }
                }
            }
            progress(chunk.len() as u64);
            Ok(())
        },
    )?;
    outcome.hedge_sample = hedging.map(|(_, sample)| sample);
    let mut files = files.close()?;
    outcome.book = Some(WrittenBook::reopen(&mut files[0])?);
    Ok((outcome, files))
}

/// The whole-future horizon of a lifetime row's cohort.
fn whole_future_horizon(row: &crate::valuation::LifetimeRow, setup: &ValuationSetup) -> i32 {
    setup.prepared.max_age() - row.age + 1
}

/// The config and every input it names, hashed for the record.
pub fn input_hashes(config: &Config) -> Result<Vec<InputHash>> {
    let mut paths = vec![("config", config.file.clone())];
    paths.extend(config.experience_inputs());
    if let Some(book) = &config.data.book {
        paths.push(("book", config.resolve(book)));
    }
    // A spreadsheet is hashed whole, whichever sheet is read.
    for (_, path) in &mut paths {
        *path = crate::data::spreadsheet::split_sheet(path).0;
    }
    if let Some(curve) = &config.valuation.curve {
        paths.push(("curve", config.resolve(curve)));
    }
    if let Some(candidate) = &config.data.candidate_book {
        paths.push(("candidate_book", config.resolve(candidate)));
    }
    if let (Some(_), Some(book)) = (&config.basis, &config.data.book_experience) {
        paths.push(("book_experience", config.resolve(book)));
    }
    paths.iter().map(|(role, p)| hash_file(role, p)).collect()
}

/// The provenance every output of the run `config` describes records: hashed once, at the
/// start, so that every file of the run names the same inputs.
pub fn provenance(config: &Config) -> Result<Provenance> {
    let scenarios = scenario_ids(config.projection.scenarios, config.projection.noise).end - 1;
    Ok(Provenance::new(
        config.projection.seed,
        scenarios as usize,
        input_hashes(config)?,
    ))
}

/// The figures of `summary.json` from a whole run's valuation: capital, the
/// standard-formula stress, and (when configured) one-year capital by re-calibration.
pub fn summarize(
    config: &Config,
    provenance: &Provenance,
    fits: &ProjectedFits,
    experience: &Experience,
    setup: &ValuationSetup,
    projector: &Projector,
    outcome: &ValuationOutcome,
) -> Result<RunSummary> {
    let central = outcome
        .central
        .as_ref()
        .ok_or_else(|| Error::model("valuation", "the central path (scenario 0) was not valued"))?;
    let best_estimate = central.pv_expected;
    let levels = &config.capital.levels;
    let idiosyncratic = config.valuation.idiosyncratic;
    let capital = |values: &[f64]| CapitalSummary::new(values, best_estimate, levels);
    let (trend, trend_idiosyncratic) = match &outcome.book {
        // Without noise the central path is the only scenario; its figures stand alone.
        _ if outcome.stochastic == 0 => (
            capital(&[best_estimate]),
            idiosyncratic.then(|| capital(&[central.pv_simulated])),
        ),
        Some(book) => {
            let streamed = |column| -> Result<CapitalSummary> {
                let values = book.column(column);
                let sample = Streamed::new(&values, HELD)?;
                if sample.stats().count != outcome.stochastic {
                    return Err(Error::model(
                        "valuation",
                        format!(
                            "book.parquet holds {} values of `{column}` for {} scenarios",
                            sample.stats().count,
                            outcome.stochastic
                        ),
                    ));
                }
                CapitalSummary::streamed(&sample, best_estimate, levels)
            };
            let simulated = idiosyncratic
                .then(|| streamed("pv_simulated"))
                .transpose()?;
            (streamed("pv_expected")?, simulated)
        }
        None => {
            return Err(Error::model(
                "valuation",
                "book.parquet was not kept for the summary",
            ));
        }
    };
    let decrease = config.capital.standard_stress;
    let stressed = setup.central_value(projector, 1.0 - decrease)?;
    let one_year = if config.capital.one_year && config.projection.noise {
        let recalibration = Recalibration {
            specs: &fits.specs,
            populations: &experience.populations,
            year: setup.year,
            book_rates: setup.book_rates(),
        };
        let values = one_year_values(
            projector,
            &setup.prepared,
            &recalibration,
            config.capital.one_year_scenarios,
        )?;
        let level = levels.iter().copied().fold(0.0, f64::max);
        Some(OneYearFigures::new(&values, best_estimate, level))
    } else {
        None
    };
    Ok(RunSummary {
        run: RunInfo {
            tool: "tailspan",
            version: crate::VERSION,
            run_id: provenance.run_id.clone(),
            seed: config.projection.seed,
            scenarios: outcome.stochastic,
            model: fits.kind.to_string(),
            valuation_year: setup.year,
            config_sha256: provenance.config_sha256.clone(),
            inputs: provenance.inputs.clone(),
        },
        best_estimate,
        trend,
        trend_idiosyncratic,
        standard_stress: StressFigures::new(decrease, best_estimate, stressed),
        one_year,
        hedges: None,
        models: None,
        model_average: None,
        allocation: None,
        decomposition: decomposition(config, setup, projector, outcome, best_estimate)?,
    })
}

/// Stochastic scenarios the capital decomposition values (seven measures each): the run's
/// first ones, so that its memory and time stay bounded on very long runs.
pub const DECOMPOSITION_SCENARIOS: usize = 20_000;

/// `summary.json` → `decomposition`, when the book has its own basis and the run is
/// stochastic.
fn decomposition(
    config: &Config,
    setup: &ValuationSetup,
    projector: &Projector,
    outcome: &ValuationOutcome,
    best_estimate: f64,
) -> Result<Option<crate::risk::decomposition::Decomposition>> {
    let Some(rates) = setup.book_rates() else {
        return Ok(None);
    };
    if !config.projection.noise || outcome.stochastic == 0 {
        return Ok(None);
    }
    let n = outcome.stochastic.min(DECOMPOSITION_SCENARIOS) as u64;
    crate::risk::decomposition::decompose(
        projector,
        &setup.prepared,
        rates,
        config.projection.seed,
        1..n + 1,
        best_estimate,
        &config.capital.levels,
    )
    .map(Some)
}

/// Prices and values the configured hedges on a whole run's valuation (gathered with
/// `ValueRequest::hedges` and the hedges' reference cells as the first probes).
pub fn hedge_stage(
    config: &Config,
    hedges: &HedgeConfig,
    setup: &ValuationSetup,
    outcome: &ValuationOutcome,
) -> Result<HedgeResults> {
    if outcome.central.is_none() {
        return Err(Error::model(
            "hedge",
            "the central path (scenario 0) was not valued",
        ));
    }
    let sample = match &outcome.hedge_sample {
        Some(s) if !s.pv.is_empty() => s,
        _ => {
            return Err(Error::config(
                &config.file,
                "projection.noise",
                crate::data::config::HEDGES_NEED_NOISE,
            ));
        }
    };
    let n = ReferenceCells::of(hedges).cells.len();
    if outcome.central_probes.len() < n || outcome.reference_rates.len() != n {
        return Err(Error::model(
            "hedge",
            "the reference rates of the q-forwards were not gathered",
        ));
    }
    let references: Vec<ReferenceRates> = outcome
        .central_probes
        .iter()
        .zip(&outcome.reference_rates)
        .map(|(&central, realised)| ReferenceRates {
            central,
            realised: realised.clone(),
        })
        .collect();
    let curve = DiscountCurve::from_config(config)?;
    let inputs = HedgeInputs {
        book: sample,
        curve: &curve,
        valuation_year: setup.year,
        references: &references,
        levels: &config.capital.levels,
    };
    evaluate(hedges, &inputs)
}

/// Writes `hedge.parquet` (`scenario, contract, fixed_leg, floating_leg, net`).
pub fn write_hedge_table(
    config: &Config,
    provenance: &Provenance,
    results: &HedgeResults,
    outcome: &ValuationOutcome,
) -> Result<AtomicFile> {
    let path = config.output_folder().join("hedge.parquet");
    write_hedge_table_to(&path, config, provenance, results, outcome)
}

/// Writes the hedge table to `path` (a model's staging folder in a multi-model run).
pub fn write_hedge_table_to(
    path: &Path,
    config: &Config,
    provenance: &Provenance,
    results: &HedgeResults,
    outcome: &ValuationOutcome,
) -> Result<AtomicFile> {
    let schema = Arc::new(Schema::new(vec![
        Field::new("scenario", DataType::UInt32, false),
        Field::new("contract", DataType::Utf8, false),
        Field::new("fixed_leg", DataType::Float64, false),
        Field::new("floating_leg", DataType::Float64, false),
        Field::new("net", DataType::Float64, false),
    ]));
    let mut sink = ParquetSink::create(
        path,
        schema,
        config.output.compression,
        HEDGE_DESCRIPTION,
        provenance,
        DEFAULT_ROWS_PER_GROUP,
    )?;
    // Contract by contract, a batch of scenarios at a time: the rows are never all in
    // memory at once.
    let ids = &outcome.scenarios;
    for (name, legs) in &results.values {
        if legs.net.len() != ids.len() || legs.floating_leg.len() != ids.len() {
            return Err(Error::Numerical(format!(
                "hedge `{name}` has {} scenarios but {} scenario numbers were kept",
                legs.net.len(),
                ids.len()
            )));
        }
        for start in (0..ids.len()).step_by(HEDGE_BATCH_ROWS) {
            let end = (start + HEDGE_BATCH_ROWS).min(ids.len());
            let rows = end - start;
            let columns: Vec<ArrayRef> = vec![
                Arc::new(UInt32Array::from_iter_values(
                    ids[start..end].iter().map(|&s| s as u32),
                )),
                Arc::new(StringArray::from_iter_values(std::iter::repeat_n(
                    name.as_str(),
                    rows,
                ))),
                Arc::new(Float64Array::from(vec![legs.fixed_leg; rows])),
                Arc::new(Float64Array::from(legs.floating_leg[start..end].to_vec())),
                Arc::new(Float64Array::from(legs.net[start..end].to_vec())),
            ];
            sink.write_columns(columns)?;
        }
    }
    sink.close()
}

/// Rows of `hedge.parquet` built at a time.
const HEDGE_BATCH_ROWS: usize = 1 << 16;

const HEDGE_DESCRIPTION: &str = "scenario: scenario number; contract: hedge name from the \
    config; fixed_leg: PV of the fixed leg; floating_leg: PV of the floating leg in the \
    scenario; net: value to the book's owner (floating less fixed for a hedger)";
