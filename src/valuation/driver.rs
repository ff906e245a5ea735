//! Values the book in every scenario, in parallel, in scenario order.
//!
//! Scenarios are regenerated from (seed, scenario) rather than read back from
//! `paths.parquet`: generating one costs far less than reading it, and the valuation then
//! works the same whether or not the paths were written, and only the cells the book and
//! the extracts read are computed ([`ScenarioCells`]). Chunks of scenarios are valued in
//! parallel and handed to the caller in order, so whatever the caller writes or keeps is
//! identical for any thread count; each thread keeps its own buffers, so nothing in the
//! per-scenario path allocates once they have grown.

use std::ops::Range;

use rayon::prelude::*;

use crate::basis::{BookBuffers, BookRates, Uncertainty};
use crate::data::Sex;
use crate::error::{Error, Result};
use crate::projection::period::{PERIOD_AGE, complete_expectancy};
use crate::projection::{Projector, Purpose, ScenarioPaths, stream};
use crate::valuation::cells::ScenarioCells;
use crate::valuation::lifetimes::{LifetimeRow, LifetimeTable, LifetimeWorkspace};
use crate::valuation::portfolio::{NoPolicies, PolicySink, PreparedBook, ScenarioValue, Workspace};

/// Scenarios valued per parallel chunk: enough to keep both cores busy between the
/// ordered hand-overs, few enough that a chunk's results stay a few megabytes.
pub const CHUNK_SCENARIOS: usize = 512;

/// One scenario's results.
#[derive(Debug, Clone, Default)]
pub struct ScenarioResult {
    /// Scenario number (0 is the central path).
    pub scenario: u64,
    /// The book's values and cash flows.
    pub value: ScenarioValue,
    /// Truncated lifetimes per cohort and horizon (empty when not asked for).
    pub lifetimes: Vec<LifetimeRow>,
    /// q at each requested (sex, age, year) cell, in request order.
    pub probes: Vec<f64>,
    /// Period e°65 by projected year, sex by sex (empty when not asked for).
    pub period: Vec<f64>,
    /// With `[basis]` and [`DriverSettings::index_cash`]: the book's expected cash flows on
    /// the population's path at the book's fitted level and expected spread, what an
    /// index-based (parametric) hedge floats on; empty otherwise.
    pub index_cash: Vec<f64>,
    /// With [`ScenarioResult::index_cash`]: the book's PV on those rates, with individual
    /// deaths when they are simulated (the same deaths stream); 0 otherwise.
    pub index_pv: f64,
}

/// Scenario figures read off the rates besides the book's values: cells for the hedges
/// and the report's fan charts, and period life expectancy at 65.
///
/// The hedges need their cells in every scenario; the charts draw only the first
/// scenarios, so the rest skip those figures rather than compute and drop them.
#[derive(Debug, Clone, Default)]
pub struct Extracts {
    /// (sex, age, calendar year) cells whose q to keep.
    pub probes: Vec<(Sex, i32, i32)>,
    /// How many of `probes`, the leading ones, every scenario reads.
    pub every_scenario: usize,
    /// Keep period e°65 for every projected year and sex.
    pub period: bool,
    /// Scenarios numbered below this read every probe and the period figures.
    pub charts_end: u64,
}

/// What the driver does per scenario.
#[derive(Debug, Clone, Copy)]
pub struct DriverSettings<'a> {
    /// Seed of the death streams (the projection's seed).
    pub seed: u64,
    /// Simulate each life's death as well as the trend.
    pub idiosyncratic: bool,
    /// The book's own rates made from the population's (`[basis]`); `None` values the
    /// book on the population's rates.
    pub book_rates: Option<&'a BookRates>,
    /// With `book_rates`, also value the book's expected cash flows at the fixed level and
    /// expected spread on each population path ([`ScenarioResult::index_cash`]).
    pub index_cash: bool,
}

struct Buffers {
    paths: ScenarioPaths,
    book: Workspace,
    lifetimes: LifetimeWorkspace,
    book_rates: BookBuffers,
}

/// Values `book` in scenarios `ids`, handing each chunk's results, in scenario order, to
/// `sink`.
pub fn value_scenarios(
    projector: &Projector,
    book: &PreparedBook,
    lifetimes: Option<&LifetimeTable>,
    ids: Range<u64>,
    settings: DriverSettings<'_>,
    extracts: &Extracts,
    mut sink: impl FnMut(&[ScenarioResult]) -> Result<()>,
) -> Result<()> {
    let cells = ScenarioCells::new(projector, book, lifetimes, extracts);
    let mut start = ids.start;
    while start < ids.end {
        let end = (start + CHUNK_SCENARIOS as u64).min(ids.end);
        let results = (start..end)
            .into_par_iter()
            .map_init(
                || Buffers {
                    paths: projector.buffer(),
                    book: Workspace::default(),
                    lifetimes: LifetimeWorkspace::default(),
                    book_rates: BookBuffers::default(),
                },
                |buffers, scenario| {
                    buffers.paths.set_cells(cells.of(scenario));
                    let mut result =
                        value_one(projector, book, lifetimes, settings, buffers, scenario)?;
                    extract(&buffers.paths, extracts, &mut result)?;
                    Ok(result)
                },
            )
            .collect::<Result<Vec<_>>>()?;
        sink(&results)?;
        start = end;
    }
    Ok(())
}

fn value_one(
    projector: &Projector,
    book: &PreparedBook,
    lifetimes: Option<&LifetimeTable>,
    settings: DriverSettings<'_>,
    buffers: &mut Buffers,
    scenario: u64,
) -> Result<ScenarioResult> {
    let mut result = ScenarioResult {
        scenario,
        ..ScenarioResult::default()
    };
    value_in_scenario(
        projector,
        book,
        settings,
        scenario,
        (
            &mut buffers.paths,
            &mut buffers.book,
            &mut buffers.book_rates,
        ),
        &mut result.value,
        &mut NoPolicies,
    )?;
    if let Some(table) = lifetimes {
        let surfaces = buffers.paths.surfaces();
        // The book's curves are the population's unless it has rates of its own.
        let shared = settings
            .book_rates
            .is_none()
            .then_some((book, &buffers.book));
        table.compute(
            &surfaces,
            shared,
            &mut buffers.lifetimes,
            &mut result.lifetimes,
        )?;
    }
    if let (true, Some(rates)) = (settings.index_cash, settings.book_rates) {
        let fixed = Uncertainty {
            level: false,
            spread: false,
        };
        let population = buffers.paths.surfaces();
        let index = rates.apply_with(fixed, scenario, &population, &mut buffers.book_rates);
        book.build_curves(&index, &mut buffers.book)?;
        let mut value = ScenarioValue::default();
        if settings.idiosyncratic {
            let mut rng = stream(settings.seed, scenario, Purpose::Deaths);
            book.value(&mut buffers.book, Some(&mut rng), &mut value);
            result.index_pv = value.pv_simulated;
        } else {
            book.value::<rand_chacha::ChaCha8Rng>(&mut buffers.book, None, &mut value);
            result.index_pv = value.pv_expected;
        }
        result.index_cash = value.cash_expected;
    }
    Ok(result)
}

/// Generates scenario `scenario` into `buffers` (paths, book workspace) and values `book`
/// in it into `out`, handing each policy's pieces to `policies`: what every scenario of a
/// run goes through, so a scenario valued again on its own gives the same figures.
pub fn value_in_scenario<P: PolicySink>(
    projector: &Projector,
    book: &PreparedBook,
    settings: DriverSettings<'_>,
    scenario: u64,
    buffers: (&mut ScenarioPaths, &mut Workspace, &mut BookBuffers),
    out: &mut ScenarioValue,
    policies: &mut P,
) -> Result<()> {
    let (paths, ws, book_buffers) = buffers;
    projector.generate(scenario, paths)?;
    let population = paths.surfaces();
    let surfaces = match settings.book_rates {
        Some(rates) => rates.apply(scenario, &population, book_buffers),
        None => population,
    };
    book.build_curves(&surfaces, ws)?;
    if settings.idiosyncratic {
        let mut rng = stream(settings.seed, scenario, Purpose::Deaths);
        book.value_policies(ws, Some(&mut rng), out, policies);
    } else {
        book.value_policies::<rand_chacha::ChaCha8Rng, P>(ws, None, out, policies);
    }
    Ok(())
}

/// Reads the requested cells and period expectations off one scenario's rates.
fn extract(paths: &ScenarioPaths, extracts: &Extracts, result: &mut ScenarioResult) -> Result<()> {
    let charted = result.scenario < extracts.charts_end;
    let read = if charted {
        extracts.probes.len()
    } else {
        extracts.every_scenario.min(extracts.probes.len())
    };
    for &(sex, age, year) in &extracts.probes[..read] {
        let slot = paths.sexes().iter().position(|&s| s == sex);
        let q = slot.and_then(|i| paths.q(i, year, age)).ok_or_else(|| {
            Error::model(
                "projection",
                format!("no projected rate for sex {sex}, age {age}, year {year}"),
            )
        })?;
        result.probes.push(q);
    }
    if extracts.period && charted {
        let ages = paths.ages();
        if let Some(from) = ages.index(PERIOD_AGE) {
            for i in 0..paths.sexes().len() {
                for year in paths.years().iter() {
                    if let Some(row) = paths.year_rates(i, year) {
                        result.period.push(complete_expectancy(&row[from..]));
                    }
                }
            }
        }
    }
    Ok(())
}
