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
use crate::projection::RateSurface;
use crate::valuation::cohort::{Cohort, LevelAdjustment, cohort_curve};
use crate::valuation::portfolio::{PreparedBook, Workspace};
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
    /// The whole-life annuity schedule: its first n years are the n-year temporary
    /// annuity's, so one pass down a cohort's years gives every horizon.
    whole_life: Schedule,
    /// Per cohort, the book's cohort with the same curve (same sex, age, level and year,
    /// multiplier 1), set by [`Self::share_curves`].
    book_cohorts: Vec<Option<usize>>,
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
        let whole_life = Schedule::new(&annuity_shape(None), basis, years);
        LifetimeTable {
            year,
            book_cohorts: vec![None; cohorts.len()],
            cohorts,
            horizons,
            level,
            fractional,
            whole_life,
        }
    }

    /// Lets [`Self::compute`] read the curves `book` builds instead of building its own
    /// where they are the same: a book cohort of the same sex and age with multiplier 1, on
    /// the same level adjustment and valuation year.
    pub fn share_curves(&mut self, book: &PreparedBook) {
        let same_basis = book.year == self.year && book.level() == &self.level;
        for (shared, cohort) in self.book_cohorts.iter_mut().zip(&self.cohorts) {
            *shared = book.cohorts().iter().position(|c| {
                same_basis
                    && c.sex == cohort.sex
                    && c.age == cohort.age
                    && c.factor.to_bits() == 1.0f64.to_bits()
            });
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

    /// Computes one scenario's rows into `out` (cleared first). `book`, when given, is the
    /// book passed to [`Self::share_curves`] with its curves built on `surfaces` (scale
    /// 1): the cohorts it shares are read from it rather than built again.
    pub fn compute(
        &self,
        surfaces: &[Option<RateSurface<'_>>; 2],
        book: Option<(&PreparedBook, &Workspace)>,
        ws: &mut LifetimeWorkspace,
        out: &mut Vec<LifetimeRow>,
    ) -> Result<()> {
        out.clear();
        for (cohort, shared) in self.cohorts.iter().zip(&self.book_cohorts) {
            let (q, survival) = match (book, shared) {
                (Some((book, book_ws)), Some(c)) => book.curve(book_ws, *c),
                _ => {
                    let Some(surface) = surfaces[sex_index(cohort.sex)].as_ref() else {
                        continue;
                    };
                    cohort_curve(
                        cohort,
                        surface,
                        self.year,
                        &self.level,
                        1.0,
                        &mut ws.q,
                        &mut ws.survival,
                    );
                    (&ws.q[..], &ws.survival[..])
                }
            };
            self.push_rows(cohort, q, survival, out);
        }
        Ok(())
    }

    /// One cohort's rows from its curve: each configured horizon, then the whole life
    /// (through the year at max_age, where q = 1).
    ///
    /// One pass down the years: each horizon's figures are the running sums at its year,
    /// the same additions in the same order as summing each horizon on its own
    /// (`complete_expectation_n`, `curtate_expectation_n`, the n-year temporary annuity's
    /// `Schedule::expected_pv`, whose later years add zero), so the same bits.
    fn push_rows(&self, cohort: &Cohort, q: &[f64], survival: &[f64], out: &mut Vec<LifetimeRow>) {
        let years = q.len();
        let sched = &self.whole_life;
        let (levels, slopes) = (&sched.pv_level, &sched.pv_slope);
        let (mut lived, mut curtate, mut annuity) = (0.0, 0.0, sched.certain_pv);
        let mut k = 0;
        let horizons = self.horizons.iter().copied();
        for n in horizons.chain(std::iter::once(years)) {
            // Horizons are sorted: each one's years continue the last one's. The schedule
            // covers the youngest cohort's years (`new`), so every cohort's.
            let end = n.min(years);
            let year_by_year = q[k..end]
                .iter()
                .zip(&survival[k..end])
                .zip(&survival[k + 1..=end])
                .zip(levels[k..end].iter().zip(&slopes[k..end]));
            for (((&qj, &alive), &next), (&level, &slope)) in year_by_year {
                lived += alive * self.fractional.year_lived(qj);
                curtate += next;
                annuity += alive * (level - slope * qj);
            }
            k = end;
            out.push(LifetimeRow {
                sex: cohort.sex,
                age: cohort.age,
                horizon: n as u32,
                e_complete: lived,
                e_curtate: curtate,
                annuity,
            });
        }
    }
}

/// A life annuity from the valuation date, for `term` years or for life.
fn annuity_shape(term: Option<u32>) -> PaymentShape {
    PaymentShape {
        deferral: 0,
        term,
        guarantee: 0,
        escalation_bits: 0.0f64.to_bits(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::interest::{DiscountCurve, Timing};
    use crate::life::table::{complete_expectation_n, curtate_expectation_n, survival_curve};

    #[test]
    fn one_pass_gives_each_horizons_own_sums_to_the_bit() {
        // Against each horizon summed on its own, as the definitions read: the truncated
        // expectations term by term and the n-year temporary annuity's own schedule.
        let mut q: Vec<f64> = (0..45).map(|k| (0.004 * 1.1f64.powi(k)).min(1.0)).collect();
        q.push(1.0);
        let mut survival = vec![0.0; q.len() + 1];
        survival_curve(&q, &mut survival);
        let cohort = Cohort {
            sex: Sex::F,
            age: 75,
            factor: 1.0,
        };
        for (timing, frequency, fractional) in [
            (Timing::Advance, 12, Fractional::Udd),
            (Timing::Arrears, 4, Fractional::ConstantForce),
            (Timing::Advance, 1, Fractional::Udd),
        ] {
            let basis = Basis {
                timing,
                frequency,
                curve: DiscountCurve::Flat { rate_pa: 0.025 },
            };
            let horizons = [0, 1, 10, 25, 46, 60];
            let years = 50;
            let table = LifetimeTable {
                year: 2025,
                cohorts: vec![cohort],
                horizons: horizons.to_vec(),
                level: LevelAdjustment::none(55, 120),
                fractional,
                whole_life: Schedule::new(&annuity_shape(None), &basis, years),
                book_cohorts: vec![None],
            };
            let mut rows = Vec::new();
            table.push_rows(&cohort, &q, &survival, &mut rows);
            let expected = horizons
                .iter()
                .map(|&n| (n, Some(n as u32)))
                .chain([(q.len(), None)]);
            assert_eq!(rows.len(), horizons.len() + 1);
            for (row, (n, term)) in rows.iter().zip(expected) {
                let own = Schedule::new(&annuity_shape(term), &basis, years);
                assert_eq!(row.horizon as usize, n);
                assert_eq!(
                    row.e_complete.to_bits(),
                    complete_expectation_n(&q, n, fractional).to_bits(),
                    "{n}"
                );
                assert_eq!(
                    row.e_curtate.to_bits(),
                    curtate_expectation_n(&q, n).to_bits(),
                    "{n}"
                );
                assert_eq!(
                    row.annuity.to_bits(),
                    own.expected_pv(&survival, &q).to_bits(),
                    "{n}"
                );
            }
        }
    }
}
