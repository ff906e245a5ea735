//! Truncated future lifetimes per cohort and scenario: the distributions of capped
//! lifetimes that capital and pricing work read.
//!
//! For each (sex, age) in the book and each horizon n, one scenario's cohort diagonal gives
//! e°x:n = E[min(Tx, n)], e x:n = E[min(Kx, n)] and the n-year temporary annuity on the
//! valuation basis; "to max_age" (n = max_age − x) is always one of the horizons, where the
//! annuity is the whole-life one. The book's own mortality level by sex and age band
//! applies; per-policy multipliers do not (they describe policies, not the cohort).

use crate::data::sex::sex_index;
use crate::data::{Book, Sex};
use crate::error::Result;
use crate::life::Fractional;
use crate::life::table::{complete_expectation_n, curtate_expectation_n};
use crate::projection::RateSurface;
use crate::valuation::cohort::{Cohort, LevelAdjustment, cohort_curve};
use crate::valuation::schedule::{Basis, PaymentShape, Schedule};

/// One row of `lifetimes.parquet` (the scenario number is added by the writer).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LifetimeRow {
    /// Sex.
    pub sex: Sex,
    /// Age at the valuation date.
    pub age: i32,
    /// Horizon n in years.
    pub horizon: u32,
    /// e°x:n.
    pub e_complete: f64,
    /// e x:n.
    pub e_curtate: f64,
    /// n-year temporary annuity on the valuation basis.
    pub annuity: f64,
}

/// The cohorts and horizons to report, with their annuity schedules.
#[derive(Debug, Clone)]
pub struct LifetimeTable {
    year: i32,
    cohorts: Vec<Cohort>,
    horizons: Vec<usize>,
    level: LevelAdjustment,
    fractional: Fractional,
    /// Annuity schedule per configured horizon, then the whole-life one last.
    schedules: Vec<Schedule>,
}

/// Reusable buffers.
#[derive(Debug, Default, Clone)]
pub struct LifetimeWorkspace {
    q: Vec<f64>,
    survival: Vec<f64>,
}

impl LifetimeTable {
    /// The (sex, age) cohorts of `book`, each with the configured `horizons` and the
    /// horizon to `max_age`.
    pub fn new(
        book: &Book,
        horizons: &[usize],
        basis: &Basis,
        level: LevelAdjustment,
        fractional: Fractional,
        year: i32,
        max_age: i32,
    ) -> Self {
        let mut keys: Vec<(Sex, i32)> = book.policies.iter().map(|p| (p.sex, p.age)).collect();
        keys.sort();
        keys.dedup();
        let cohorts = keys
            .into_iter()
            .map(|(sex, age)| Cohort {
                sex,
                age,
                factor: 1.0,
            })
            .collect::<Vec<_>>();
        let youngest = cohorts.iter().map(|c| c.age).min().unwrap_or(max_age);
        let years = (max_age - youngest + 1).max(1) as usize;
        let mut horizons = horizons.to_vec();
        horizons.sort_unstable();
        horizons.dedup();
        let shape = |term| PaymentShape {
            deferral: 0,
            term,
            guarantee: 0,
            escalation_bits: 0.0f64.to_bits(),
        };
        let mut schedules: Vec<Schedule> = horizons
            .iter()
            .map(|&n| Schedule::new(&shape(Some(n as u32)), basis, years))
            .collect();
        schedules.push(Schedule::new(&shape(None), basis, years));
        LifetimeTable {
            year,
            cohorts,
            horizons,
            level,
            fractional,
            schedules,
        }
    }

    /// The (sex, age) cohorts reported, each with multiplier 1.
    pub fn cohorts(&self) -> &[Cohort] {
        &self.cohorts
    }

    /// The valuation year, where the cohorts' diagonals start.
    pub fn year(&self) -> i32 {
        self.year
    }

    /// Rows per scenario.
    pub fn rows_per_scenario(&self) -> usize {
        self.cohorts.len() * (self.horizons.len() + 1)
    }

    /// Computes one scenario's rows into `out` (cleared first).
    pub fn compute(
        &self,
        surfaces: &[Option<RateSurface<'_>>; 2],
        ws: &mut LifetimeWorkspace,
        out: &mut Vec<LifetimeRow>,
    ) -> Result<()> {
        out.clear();
        for cohort in &self.cohorts {
            let Some(surface) = surfaces[sex_index(cohort.sex)].as_ref() else {
                continue;
            };
            let years = cohort_curve(
                cohort,
                surface,
                self.year,
                &self.level,
                1.0,
                &mut ws.q,
                &mut ws.survival,
            );
            // The whole-life row runs through the year at max_age, where q = 1.
            let whole_life = self.schedules.len() - 1;
            let horizons = self.horizons.iter().copied().enumerate();
            for (i, n) in horizons.chain(std::iter::once((whole_life, years))) {
                out.push(LifetimeRow {
                    sex: cohort.sex,
                    age: cohort.age,
                    horizon: n as u32,
                    e_complete: complete_expectation_n(&ws.q, n, self.fractional),
                    e_curtate: curtate_expectation_n(&ws.q, n),
                    annuity: self.schedules[i].expected_pv(&ws.survival, &ws.q),
                });
            }
        }
        Ok(())
    }
}
