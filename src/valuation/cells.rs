//! The cells of each scenario's rates that the valuation reads, for the projector to
//! compute and no others.
//!
//! A book reads its cohorts' diagonals from the valuation year (the truncated lifetimes
//! the same ones, the book's own rates under `[basis]` the same cells of the population's),
//! the hedges a few reference cells; only the first, charted, scenarios also read the fan
//! charts' cells and period e°65. Regenerating a scenario's whole grid for that spent most
//! of a small book's time on `exp` and `expm1` of cells nobody read.

use crate::projection::period::PERIOD_AGE;
use crate::projection::{CellPlan, Projector};
use crate::valuation::driver::Extracts;
use crate::valuation::lifetimes::LifetimeTable;
use crate::valuation::portfolio::PreparedBook;

/// The cells of every scenario and of the charted ones.
#[derive(Debug, Clone)]
pub struct ScenarioCells {
    every: CellPlan,
    charted: CellPlan,
    charts_end: u64,
}

impl ScenarioCells {
    /// The cells `book`, `lifetimes` and `extracts` read of `projector`'s scenarios.
    pub fn new(
        projector: &Projector,
        book: &PreparedBook,
        lifetimes: Option<&LifetimeTable>,
        extracts: &Extracts,
    ) -> ScenarioCells {
        let mut every = projector.no_cells();
        for cohort in book.cohorts() {
            every.add_cohort(cohort.sex, cohort.age, book.year);
        }
        if let Some(table) = lifetimes {
            for cohort in table.cohorts() {
                every.add_cohort(cohort.sex, cohort.age, table.year());
            }
        }
        let leading = extracts.every_scenario.min(extracts.probes.len());
        for &(sex, age, year) in &extracts.probes[..leading] {
            every.add_cell(sex, age, year);
        }
        let mut charted = every.clone();
        for &(sex, age, year) in &extracts.probes[leading..] {
            charted.add_cell(sex, age, year);
        }
        if extracts.period {
            charted.add_ages_from(PERIOD_AGE);
        }
        ScenarioCells {
            every,
            charted,
            charts_end: extracts.charts_end,
        }
    }

    /// The cells every scenario reads.
    pub fn every(&self) -> &CellPlan {
        &self.every
    }

    /// The cells scenario `scenario` reads.
    pub fn of(&self, scenario: u64) -> &CellPlan {
        if scenario < self.charts_end {
            &self.charted
        } else {
            &self.every
        }
    }
}
