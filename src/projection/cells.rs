//! Which cells of a scenario's rate grid its readers take, so that only those are computed.
//!
//! Every cell costs an `exp` and an `expm1` (more above the fitted ages, where the year's
//! Kannisto law is fitted first), while a book reads only its cohorts' diagonals
//! q(x + k, V + k) from the valuation year: about a third of a 66-age × 80-year grid for
//! ages 55–95, none of the years before V. A plan holds, per sex and projected year, one
//! range of ages (the hull of what is asked for that row); the projector computes those
//! cells, each to the bit the whole grid gives it, and leaves every other cell NaN, so a
//! reader that strays outside its plan reads NaN rather than another scenario's rate.

use std::ops::Range;

use crate::data::{Sex, Span};

/// Per sex and projected year, the ages of the rates to compute.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct CellPlan {
    sexes: Vec<Sex>,
    years: Span,
    ages: Span,
    /// Column range (indices from the first age) per sex and year, sex-major.
    rows: Vec<(u16, u16)>,
}

impl CellPlan {
    /// Every cell of the grid: what the paths file and the one-year refits read.
    pub fn full(sexes: &[Sex], years: Span, ages: Span) -> CellPlan {
        let n = ages.len() as u16;
        CellPlan {
            sexes: sexes.to_vec(),
            years,
            ages,
            rows: vec![(0, n); sexes.len() * years.len()],
        }
    }

    /// No cell: add what the readers take.
    pub fn empty(sexes: &[Sex], years: Span, ages: Span) -> CellPlan {
        CellPlan {
            sexes: sexes.to_vec(),
            years,
            ages,
            rows: vec![(0, 0); sexes.len() * years.len()],
        }
    }

    /// Whether every cell is computed.
    pub fn is_full(&self) -> bool {
        let n = self.ages.len() as u16;
        self.rows.iter().all(|&r| r == (0, n))
    }

    /// Cells computed, of `sexes × years × ages`.
    pub fn count(&self) -> usize {
        self.rows.iter().map(|&(a, b)| (b - a) as usize).sum()
    }

    /// The age columns computed for the sex at `sex_index` in projected year number
    /// `h + 1` (row `h` of the grid).
    #[inline]
    pub fn cells(&self, sex_index: usize, h: usize) -> Range<usize> {
        let (a, b) = self.rows[sex_index * self.years.len() + h];
        a as usize..b as usize
    }

    /// Adds q(`age`, `year`) of `sex`; a sex, age or year off the grid adds nothing.
    pub fn add_cell(&mut self, sex: Sex, age: i32, year: i32) {
        let Some(i) = self.sexes.iter().position(|&s| s == sex) else {
            return;
        };
        if let (Some(h), Some(col)) = (self.years.index(year), self.ages.index(age)) {
            let row = &mut self.rows[i * self.years.len() + h];
            let col = col as u16;
            *row = if row.0 == row.1 {
                (col, col + 1)
            } else {
                (row.0.min(col), row.1.max(col + 1))
            };
        }
    }

    /// Adds the diagonal of the lives of `sex` aged `age` in `year`: q(age + k, year + k)
    /// for every k with the age below the top one (where q is 1 without a rate) and the
    /// year on the grid.
    pub fn add_cohort(&mut self, sex: Sex, age: i32, year: i32) {
        let mut k = 0;
        while age + k < self.ages.last && year + k <= self.years.last {
            self.add_cell(sex, age + k, year + k);
            k += 1;
        }
    }

    /// Adds every age from `age` to the top one, in every year and sex: a period figure
    /// such as e°65 reads these.
    pub fn add_ages_from(&mut self, age: i32) {
        for sex in self.sexes.clone() {
            for year in self.years.iter() {
                for a in age.max(self.ages.first)..=self.ages.last {
                    self.add_cell(sex, a, year);
                }
            }
        }
    }

    /// Adds every cell of `other` (a plan of the same grid).
    pub fn add_plan(&mut self, other: &CellPlan) {
        debug_assert_eq!(self.rows.len(), other.rows.len());
        for (row, &(a, b)) in self.rows.iter_mut().zip(&other.rows) {
            if a == b {
                continue;
            }
            *row = if row.0 == row.1 {
                (a, b)
            } else {
                (row.0.min(a), row.1.max(b))
            };
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn grid() -> CellPlan {
        CellPlan::empty(
            &[Sex::F, Sex::M],
            Span {
                first: 2025,
                last: 2034,
            },
            Span {
                first: 55,
                last: 60,
            },
        )
    }

    #[test]
    fn a_cohort_takes_its_diagonal_below_the_top_age() {
        let mut plan = grid();
        plan.add_cohort(Sex::M, 57, 2026);
        // Ages 57, 58, 59 in 2026–2028; age 60 is the top (q = 1), not a rate.
        assert_eq!(plan.cells(1, 0), 0..0);
        assert_eq!(plan.cells(1, 1), 2..3);
        assert_eq!(plan.cells(1, 2), 3..4);
        assert_eq!(plan.cells(1, 3), 4..5);
        assert_eq!(plan.cells(1, 4), 0..0);
        assert_eq!(plan.count(), 3);
        plan.add_cohort(Sex::M, 55, 2026);
        assert_eq!(plan.cells(1, 1), 0..3);
        assert_eq!(plan.cells(0, 1), 0..0);
        plan.add_cell(Sex::F, 90, 2026);
        plan.add_cell(Sex::F, 56, 2050);
        // Rows of 2026–2028 hold the hull of both diagonals (three cells each), 2029 and
        // 2030 the younger one's; the cells off the grid add nothing.
        assert_eq!(plan.count(), 3 * 3 + 2);
    }

    #[test]
    fn period_rows_and_the_full_grid() {
        let mut plan = grid();
        plan.add_ages_from(59);
        assert_eq!(plan.cells(0, 9), 4..6);
        assert_eq!(plan.count(), 2 * 10 * 2);
        let mut more = grid();
        more.add_cell(Sex::F, 55, 2025);
        plan.add_plan(&more);
        assert_eq!(plan.cells(0, 0), 0..6);
        assert!(!plan.is_full());
        let full = CellPlan::full(&[Sex::F, Sex::M], plan.years, plan.ages);
        assert!(full.is_full());
        assert_eq!(full.count(), 2 * 10 * 6);
    }
}
