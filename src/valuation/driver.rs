//! Values the book in every scenario, in parallel, in scenario order.
//!
//! Scenarios are regenerated from (seed, scenario) rather than read back from
//! `paths.parquet`: generating one costs far less than reading it, and the valuation then
//! works the same whether or not the paths were written. Chunks of scenarios are valued in
//! parallel and handed to the caller in order, so whatever the caller writes or keeps is
//! identical for any thread count; each thread keeps its own buffers, so nothing in the
//! per-scenario path allocates once they have grown.

use std::ops::Range;

use rayon::prelude::*;

use crate::error::Result;
use crate::projection::{Projector, Purpose, ScenarioPaths, stream};
use crate::valuation::cohort::{RateSurface, sex_index};
use crate::valuation::lifetimes::{LifetimeRow, LifetimeTable, LifetimeWorkspace};
use crate::valuation::portfolio::{PreparedBook, ScenarioValue, Workspace};

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
}

/// What the driver does per scenario.
#[derive(Debug, Clone, Copy)]
pub struct DriverSettings {
    /// Seed of the death streams (the projection's seed).
    pub seed: u64,
    /// Simulate each life's death as well as the trend.
    pub idiosyncratic: bool,
}

struct Buffers {
    paths: ScenarioPaths,
    book: Workspace,
    lifetimes: LifetimeWorkspace,
}

/// The rate surfaces of `paths` by sex slot (F, M).
pub fn surfaces(paths: &ScenarioPaths) -> [Option<RateSurface<'_>>; 2] {
    let mut out = [None, None];
    for (i, &sex) in paths.sexes().iter().enumerate() {
        out[sex_index(sex)] = Some(paths.surface(i));
    }
    out
}

/// Values `book` in scenarios `ids`, handing each chunk's results, in scenario order, to
/// `sink`.
pub fn value_scenarios(
    projector: &Projector,
    book: &PreparedBook,
    lifetimes: Option<&LifetimeTable>,
    ids: Range<u64>,
    settings: DriverSettings,
    mut sink: impl FnMut(&[ScenarioResult]) -> Result<()>,
) -> Result<()> {
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
                },
                |buffers, scenario| {
                    value_one(projector, book, lifetimes, settings, buffers, scenario)
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
    settings: DriverSettings,
    buffers: &mut Buffers,
    scenario: u64,
) -> Result<ScenarioResult> {
    projector.generate(scenario, &mut buffers.paths)?;
    let surfaces = surfaces(&buffers.paths);
    book.build_curves(&surfaces, &mut buffers.book)?;
    let mut result = ScenarioResult {
        scenario,
        ..ScenarioResult::default()
    };
    if settings.idiosyncratic {
        let mut rng = stream(settings.seed, scenario, Purpose::Deaths);
        book.value(&mut buffers.book, Some(&mut rng), &mut result.value);
    } else {
        book.value::<rand_chacha::ChaCha8Rng>(&mut buffers.book, None, &mut result.value);
    }
    if let Some(table) = lifetimes {
        table.compute(&surfaces, &mut buffers.lifetimes, &mut result.lifetimes)?;
    }
    Ok(result)
}
