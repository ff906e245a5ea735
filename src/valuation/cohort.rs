//! Cohorts: the lives that share one survival curve in every scenario.
//!
//! Lives of one sex and age with the same mortality multiplier follow the same cohort
//! diagonal q(x + k, V + k), so the curve is built once per cohort and scenario and shared
//! by every policy in it; the inner loop over policies never touches the rate surface.

use crate::data::Sex;
use crate::data::sex::sex_index;
use crate::projection::RateSurface;

/// Lives of one sex aged `age` at the valuation date with one mortality multiplier.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Cohort {
    /// Sex.
    pub sex: Sex,
    /// Age last birthday at the valuation date.
    pub age: i32,
    /// Policy-level multiplier of the population q (the book's own level).
    pub factor: f64,
}

/// Multipliers of the population q by sex and attained age (from `[valuation]`).
#[derive(Debug, Clone, PartialEq)]
pub struct LevelAdjustment {
    /// First attained age covered.
    pub first_age: i32,
    /// Multiplier by sex (index 0 F, 1 M) and attained age from `first_age`.
    pub factors: [Vec<f64>; 2],
}

impl LevelAdjustment {
    /// No adjustment: every factor 1 for ages `first_age ..= max_age`.
    pub fn none(first_age: i32, max_age: i32) -> Self {
        let n = (max_age - first_age + 1).max(0) as usize;
        LevelAdjustment {
            first_age,
            factors: [vec![1.0; n], vec![1.0; n]],
        }
    }

    /// Sets the multiplier for `sex` at attained ages `from ..= to` (clipped to the range).
    pub fn set(&mut self, sex: Sex, from: i32, to: i32, factor: f64) {
        let row = &mut self.factors[sex_index(sex)];
        for age in from.max(self.first_age)..=to {
            if let Some(slot) = row.get_mut((age - self.first_age) as usize) {
                *slot = factor;
            }
        }
    }

    /// The multiplier for `sex` at attained age `age` (1 outside the range).
    #[inline]
    pub fn factor(&self, sex: Sex, age: i32) -> f64 {
        self.factors[sex_index(sex)]
            .get((age - self.first_age) as usize)
            .copied()
            .unwrap_or(1.0)
    }
}

/// Fills `q` and `survival` with the cohort diagonal from the valuation year: `q[k] =
/// min(1, scale × level × factor × q(age + k, year + k))` for k up to `max_age − age` (q is 1 at
/// `max_age`), and `survival[k] = k p x` for k up to `q.len()`. Returns the number of years.
pub fn cohort_curve(
    cohort: &Cohort,
    surface: &RateSurface<'_>,
    year: i32,
    level: &LevelAdjustment,
    scale: f64,
    q: &mut Vec<f64>,
    survival: &mut Vec<f64>,
) -> usize {
    let max_age = surface.max_age();
    let years = (max_age - cohort.age + 1) as usize;
    // Years below max_age read the diagonal, one row and one column further each year:
    // a stride of `ages + 1` through the surface, bounds-checked once here.
    let rated = years.saturating_sub(1);
    let diagonal: &[f64] = match rated {
        0 => &[],
        n => {
            let start = (year - surface.first_year) as usize * surface.ages
                + (cohort.age - surface.first_age) as usize;
            &surface.q[start..=start + (n - 1) * (surface.ages + 1)]
        }
    };
    q.clear();
    q.resize(years, 1.0);
    survival.clear();
    survival.resize(years + 1, 1.0);
    // One pass: q from its diagonal cell (each row of `stride` starts with it) and the
    // book's level at its age, then the survival to the next year.
    let stride = surface.ages + 1;
    let sex = sex_index(cohort.sex);
    let from = usize::try_from(cohort.age - level.first_age).ok();
    let levels = from.and_then(|from| level.factors[sex].get(from..from + rated));
    let mut alive = 1.0;
    let mut step = |rate: &mut f64, s: &mut f64, base: f64, factor: f64| {
        *rate = (base * scale * cohort.factor * factor).min(1.0);
        alive *= 1.0 - *rate;
        *s = alive;
    };
    let cells = q[..rated]
        .iter_mut()
        .zip(&mut survival[1..=rated])
        .zip(diagonal.chunks(stride));
    match levels {
        Some(levels) => {
            for (((rate, s), row), &factor) in cells.zip(levels) {
                step(rate, s, row[0], factor);
            }
        }
        None => {
            for (k, ((rate, s), row)) in cells.enumerate() {
                step(
                    rate,
                    s,
                    row[0],
                    level.factor(cohort.sex, cohort.age + k as i32),
                );
            }
        }
    }
    // The year at max_age: q = 1.
    for (s, &rate) in survival[rated + 1..].iter_mut().zip(&q[rated..]) {
        alive *= 1.0 - rate;
        *s = alive;
    }
    years
}
