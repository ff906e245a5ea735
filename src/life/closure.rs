//! Old-age closure: rates above the top fitted age by the Kannisto logistic law.
//!
//! Data thin out at the oldest ages, so a model is fitted only up to some age and the
//! table is closed by a law fitted to the model's own top ages, year by year. Kannisto's
//! law μ(x) = a e^{bx} / (1 + a e^{bx}) has logit μ(x) = ln a + b x, so it is fitted by
//! ordinary least squares of logit m(x) on x over the top `fit_ages` fitted ages of the
//! same year (x the age last birthday; central rates stand in for the force). The fit is
//! closed form and allocation-free because it runs for every projected year of every
//! scenario.

use std::ops::Range;

use crate::life::exp::{exp, exp_in_place, q_from_force, q_from_force_in_place};

/// e^η / (1 + e^η) given e = e^−|η|: written so that large |η| neither overflows nor
/// loses the small tail.
#[inline(always)]
fn logistic(eta: f64, e: f64) -> f64 {
    if eta >= 0.0 {
        1.0 / (1.0 + e)
    } else {
        e / (1.0 + e)
    }
}

/// A central rate at or above 1 has no logit; it is capped just below 1 for the fit.
const MAX_FIT_RATE: f64 = 1.0 - 1e-12;

/// Logits [`Kannisto::fit`] keeps between its passes (more fitted ages are taken again).
const KEPT_LOGITS: usize = 32;

/// Kannisto's logistic law, logit μ(x) = `alpha` + `beta` x.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Kannisto {
    /// Intercept ln a.
    pub alpha: f64,
    /// Slope b per year of age.
    pub beta: f64,
}

impl Kannisto {
    /// The law with μ(x) = a e^{bx} / (1 + a e^{bx}).
    pub fn new(a: f64, b: f64) -> Self {
        Kannisto {
            alpha: a.ln(),
            beta: b,
        }
    }

    /// Force of mortality μ(x).
    pub fn force(&self, age: f64) -> f64 {
        let eta = self.alpha + self.beta * age;
        logistic(eta, exp(-eta.abs()))
    }

    /// μ at ages `first_age`, `first_age` + 1, ... into `out`, each as [`Self::force`]
    /// gives it, in two passes a loop vectorises.
    pub fn forces(&self, first_age: f64, out: &mut [f64]) {
        let eta = |i: usize| self.alpha + self.beta * (first_age + i as f64);
        for (i, o) in out.iter_mut().enumerate() {
            *o = -eta(i).abs();
        }
        exp_in_place(out);
        for (i, o) in out.iter_mut().enumerate() {
            *o = logistic(eta(i), *o);
        }
    }

    /// Ordinary least squares of logit m on age: `rates[i]` is the central rate at age
    /// `first_age + i`. Needs at least two rates; `None` if fewer or any is not positive.
    pub fn fit(first_age: i32, rates: &[f64]) -> Option<Kannisto> {
        let n = rates.len();
        if n < 2 {
            return None;
        }
        let mean_age = f64::from(first_age) + (n as f64 - 1.0) / 2.0;
        // The fit runs for every projected year of every scenario: each logit is taken
        // once and kept for the second pass (a `ln` is most of a rate's cost).
        let mut logits = [0.0; KEPT_LOGITS];
        let mut mean_logit = 0.0;
        for (i, &m) in rates.iter().enumerate() {
            if m.is_nan() || m <= 0.0 {
                return None;
            }
            let l = logit(m.min(MAX_FIT_RATE));
            if let Some(slot) = logits.get_mut(i) {
                *slot = l;
            }
            mean_logit += l;
        }
        mean_logit /= n as f64;
        let (mut sxy, mut sxx) = (0.0, 0.0);
        for (i, &m) in rates.iter().enumerate() {
            let dx = f64::from(first_age) + i as f64 - mean_age;
            let l = match logits.get(i) {
                Some(&l) => l,
                None => logit(m.min(MAX_FIT_RATE)),
            };
            sxy += dx * (l - mean_logit);
            sxx += dx * dx;
        }
        let beta = sxy / sxx;
        Some(Kannisto {
            alpha: mean_logit - beta * mean_age,
            beta,
        })
    }
}

fn logit(m: f64) -> f64 {
    (m / (1.0 - m)).ln()
}

/// Closes a table of rates at the old ages.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct KannistoClosure {
    /// How many of the top fitted ages the law is fitted to (at least 2).
    pub fit_ages: usize,
    /// Highest age; q is 1 there.
    pub max_age: i32,
}

impl KannistoClosure {
    /// Turns central rates into a closed table of one-year rates q.
    ///
    /// On entry `out[..fitted]` holds central rates m at ages `first_age ..` from a model;
    /// on exit `out[i]` is q at age `first_age + i` up to `max_age`: 1 − exp(−m) on the
    /// fitted ages, 1 − exp(−μ) from the Kannisto law above them, and 1 at `max_age`.
    /// `out` must have length `max_age − first_age + 1` and `fitted` must be at least 2.
    pub fn close(&self, first_age: i32, fitted: usize, out: &mut [f64]) {
        self.close_cells(first_age, fitted, 0..out.len(), out);
    }

    /// The fitted ages (indices from the first) whose central rates
    /// [`KannistoClosure::close_cells`] needs for `cells`: those among the cells, and the
    /// top `fit_ages` fitted ones when a cell lies above them (the year's law is fitted
    /// there). One range: any gap between the two is included.
    pub fn central_cells(
        &self,
        first_age: i32,
        fitted: usize,
        cells: Range<usize>,
    ) -> Range<usize> {
        let own = cells.start.min(fitted)..cells.end.min(fitted);
        if self.closed_cells(first_age, fitted, &cells).is_empty() {
            return own;
        }
        let k = self.fit_ages.clamp(2, fitted);
        let start = if own.is_empty() {
            fitted - k
        } else {
            own.start.min(fitted - k)
        };
        start..fitted
    }

    /// The cells of `cells` above the fitted ages and below `max_age`: the law's.
    fn closed_cells(&self, first_age: i32, fitted: usize, cells: &Range<usize>) -> Range<usize> {
        let last = (self.max_age - first_age).max(0) as usize;
        cells.start.max(fitted)..cells.end.min(last)
    }

    /// As [`KannistoClosure::close`] for the cells `cells` of the table only, each with
    /// the value `close` gives it, bit for bit: on entry `out[self.central_cells(fitted,
    /// cells)]` holds the model's central rates; on exit `out[cells]` holds q, every
    /// other entry is NaN or as it was (those taken only for the law's fit become NaN).
    pub fn close_cells(&self, first_age: i32, fitted: usize, cells: Range<usize>, out: &mut [f64]) {
        debug_assert_eq!(out.len(), (self.max_age - first_age + 1) as usize);
        debug_assert!(fitted >= 2 && fitted <= out.len());
        debug_assert!(cells.end <= out.len());
        let last = out.len() - 1;
        let closed = self.closed_cells(first_age, fitted, &cells);
        let law = if closed.is_empty() {
            None
        } else {
            let k = self.fit_ages.clamp(2, fitted);
            let top_first = first_age + (fitted - k) as i32;
            // A top rate of zero (no deaths anywhere near the top): nothing to extend,
            // so the last fitted rate is held.
            let top = &out[fitted - k..fitted];
            Some(Kannisto::fit(top_first, top).ok_or_else(|| q_from_force(out[fitted - 1])))
        };
        // The central cells below `cells` were taken for the law only.
        let central = self.central_cells(first_age, fitted, cells.clone());
        let split = cells.start.clamp(central.start, central.end);
        out[central.start..split].fill(f64::NAN);
        q_from_force_in_place(&mut out[split..central.end]);
        match law {
            Some(Ok(law)) => {
                // Ages are whole numbers: first_age + start + j is exact either way.
                let from = f64::from(first_age) + closed.start as f64;
                law.forces(from, &mut out[closed.clone()]);
                q_from_force_in_place(&mut out[closed]);
            }
            Some(Err(hold)) => out[closed].fill(hold),
            None => {}
        }
        if cells.contains(&last) {
            out[last] = 1.0;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn forces_in_a_row_are_each_ages_force() {
        // η = ln a + b x crosses 0 inside the row, where the formula switches.
        let law = Kannisto::new(2e-5, 0.11);
        let mut row = vec![0.0; 70];
        law.forces(60.0, &mut row);
        for (i, &mu) in row.iter().enumerate() {
            let age = 60.0 + i as f64;
            assert_eq!(mu.to_bits(), law.force(age).to_bits(), "{age}");
            // μ = a e^{bx} / (1 + a e^{bx}) (Kannisto's law, closed form).
            let odds = 2e-5 * (0.11 * age).exp();
            assert!(
                (mu - odds / (1.0 + odds)).abs() <= 4e-16 * mu.max(1e-300),
                "{age}"
            );
        }
    }

    #[test]
    fn two_point_fit_is_exact() {
        let law = Kannisto::new(2e-5, 0.11);
        let rates = [law.force(90.0), law.force(91.0)];
        let fitted = Kannisto::fit(90, &rates).unwrap();
        assert!((fitted.alpha - law.alpha).abs() < 1e-9);
        assert!((fitted.beta - law.beta).abs() < 1e-11);
        assert!(Kannisto::fit(90, &[0.1]).is_none());
        assert!(Kannisto::fit(90, &[0.1, 0.0]).is_none());
    }

    /// Central rates of a Gompertz-like model at ages 60..=99, for a table to 120.
    fn central(first_age: i32, fitted: usize) -> Vec<f64> {
        (0..fitted)
            .map(|i| (-9.5 + 0.09 * f64::from(first_age + i as i32)).exp())
            .collect()
    }

    #[test]
    fn closing_some_cells_gives_each_the_whole_tables_value() {
        let closure = KannistoClosure {
            fit_ages: 10,
            max_age: 120,
        };
        let (first_age, fitted) = (60, 40);
        let len = (closure.max_age - first_age + 1) as usize;
        for top in [central(first_age, fitted), {
            // No deaths near the top: the last fitted rate is held.
            let mut m = central(first_age, fitted);
            m[fitted - 1] = 0.0;
            m
        }] {
            let mut whole = vec![0.0; len];
            whole[..fitted].copy_from_slice(&top);
            closure.close(first_age, fitted, &mut whole);
            for start in (0..len).step_by(3) {
                for end in (start..=len).step_by(2) {
                    let cells = start..end;
                    let mut some = vec![f64::NAN; len];
                    let central = closure.central_cells(first_age, fitted, cells.clone());
                    some[central.clone()].copy_from_slice(&top[central]);
                    closure.close_cells(first_age, fitted, cells.clone(), &mut some);
                    for i in 0..len {
                        if cells.contains(&i) {
                            assert_eq!(some[i].to_bits(), whole[i].to_bits(), "{cells:?} at {i}");
                        } else {
                            assert!(some[i].is_nan(), "{cells:?} at {i}: {}", some[i]);
                        }
                    }
                }
            }
        }
    }
}
