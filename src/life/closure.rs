//! Old-age closure: rates above the top fitted age by the Kannisto logistic law.
//!
//! Data thin out at the oldest ages, so a model is fitted only up to some age and the
//! table is closed by a law fitted to the model's own top ages, year by year. Kannisto's
//! law μ(x) = a e^{bx} / (1 + a e^{bx}) has logit μ(x) = ln a + b x, so it is fitted by
//! ordinary least squares of logit m(x) on x over the top `fit_ages` fitted ages of the
//! same year (x the age last birthday; central rates stand in for the force). The fit is
//! closed form and allocation-free because it runs for every projected year of every
//! scenario.

/// A central rate at or above 1 has no logit; it is capped just below 1 for the fit.
const MAX_FIT_RATE: f64 = 1.0 - 1e-12;

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
        // Written so that large |eta| neither overflows nor loses the small tail.
        if eta >= 0.0 {
            1.0 / (1.0 + (-eta).exp())
        } else {
            let e = eta.exp();
            e / (1.0 + e)
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
        let mut mean_logit = 0.0;
        for &m in rates {
            if m.is_nan() || m <= 0.0 {
                return None;
            }
            mean_logit += logit(m.min(MAX_FIT_RATE));
        }
        mean_logit /= n as f64;
        let (mut sxy, mut sxx) = (0.0, 0.0);
        for (i, &m) in rates.iter().enumerate() {
            let dx = f64::from(first_age) + i as f64 - mean_age;
            sxy += dx * (logit(m.min(MAX_FIT_RATE)) - mean_logit);
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
        debug_assert_eq!(out.len(), (self.max_age - first_age + 1) as usize);
        debug_assert!(fitted >= 2 && fitted <= out.len());
        let k = self.fit_ages.clamp(2, fitted);
        let top_first = first_age + (fitted - k) as i32;
        let law = Kannisto::fit(top_first, &out[fitted - k..fitted]);
        for q in out[..fitted].iter_mut() {
            *q = -(-*q).exp_m1();
        }
        let last = out.len() - 1;
        match law {
            Some(law) => {
                for (i, q) in out.iter_mut().enumerate().take(last).skip(fitted) {
                    let age = f64::from(first_age) + i as f64;
                    *q = -(-law.force(age)).exp_m1();
                }
            }
            // A top rate of zero (no deaths anywhere near the top): nothing to extend,
            // so the last fitted rate is held.
            None => {
                let hold = out[fitted - 1];
                out[fitted..last].fill(hold);
            }
        }
        out[last] = 1.0;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

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
}
