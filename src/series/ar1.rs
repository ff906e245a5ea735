//! An AR(1) with a constant: the population-specific index of a two-population model.
//!
//! Li & Lee (2005) model each population's own index k_t as a stationary deviation from the
//! common trend, k_t = c + φ k_{t−1} + σ ε_t, ε_t ~ N(0, 1), whose mean c / (1 − φ) is
//! estimated with it (unlike [`crate::series::SpreadAr1`], whose level is fitted apart).
//! c, φ are the conditional maximum-likelihood estimates given the first value, i.e. the
//! least-squares fit of k_t on (1, k_{t−1}) (Hamilton 1994, §5.2); σ̂² = SSR / (T − 1),
//! and the standard errors are the square roots of σ̂² (XᵀX)⁻¹'s diagonal.

use serde::Serialize;

use crate::error::{Error, Result};

/// Fitted AR(1) with constant.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Ar1 {
    /// Constant ĉ.
    pub constant: f64,
    /// Autoregressive coefficient φ̂.
    pub phi: f64,
    /// Innovation standard deviation σ̂ (maximum likelihood, divisor T − 1).
    pub sigma: f64,
    /// Standard error of ĉ.
    pub constant_standard_error: f64,
    /// Standard error of φ̂.
    pub phi_standard_error: f64,
    /// Conditional Gaussian log-likelihood at the estimates, given the first value.
    pub log_likelihood: f64,
    /// Last value of the series, where a projection starts.
    pub last: f64,
    /// Number of transitions T − 1 the estimates rest on.
    pub steps: usize,
    /// Residuals k_t − ĉ − φ̂ k_{t−1}, t = 2 … T.
    #[serde(skip)]
    pub residuals: Vec<f64>,
}

impl Ar1 {
    /// Fits the series `values` (oldest first); needs at least four values whose lagged
    /// part is not constant.
    pub fn fit(values: &[f64]) -> Result<Ar1> {
        if values.len() < 4 {
            return Err(Error::model(
                "ar1",
                format!(
                    "an AR(1) with constant needs at least four values, found {}",
                    values.len()
                ),
            ));
        }
        let steps = values.len() - 1;
        let n = steps as f64;
        let (x, y) = (&values[..steps], &values[1..]);
        let mean_x = x.iter().sum::<f64>() / n;
        let mean_y = y.iter().sum::<f64>() / n;
        let sxx: f64 = x.iter().map(|v| (v - mean_x).powi(2)).sum();
        let sxy: f64 = x
            .iter()
            .zip(y)
            .map(|(a, b)| (a - mean_x) * (b - mean_y))
            .sum();
        if !(sxx > 0.0 && sxx.is_finite() && sxy.is_finite()) {
            return Err(Error::model(
                "ar1",
                "the series does not vary before its last value: φ is not identified",
            ));
        }
        let phi = sxy / sxx;
        let constant = mean_y - phi * mean_x;
        let residuals: Vec<f64> = x
            .iter()
            .zip(y)
            .map(|(a, b)| b - constant - phi * a)
            .collect();
        let variance = residuals.iter().map(|e| e * e).sum::<f64>() / n;
        if !(variance > 0.0 && variance.is_finite()) {
            return Err(Error::model(
                "ar1",
                "the series follows an exact AR(1) path: its innovation variance is zero",
            ));
        }
        // (XᵀX)⁻¹ of X = [1, k_{t−1}]: [[Σx², −Σx], [−Σx, n]] / (n Sxx).
        let sum_x2: f64 = x.iter().map(|v| v * v).sum();
        Ok(Ar1 {
            constant,
            phi,
            sigma: variance.sqrt(),
            constant_standard_error: (variance * sum_x2 / (n * sxx)).sqrt(),
            phi_standard_error: (variance / sxx).sqrt(),
            log_likelihood: -0.5 * n * ((2.0 * std::f64::consts::PI * variance).ln() + 1.0),
            last: values[steps],
            steps,
            residuals,
        })
    }

    /// The next value after `previous` with standardised innovation `shock`.
    pub fn step(&self, previous: f64, shock: f64) -> f64 {
        self.constant + self.phi * previous + self.sigma * shock
    }

    /// The expected path h = 1, 2, … years after the last value:
    /// E[k_{T+h}] = c + φ E[k_{T+h−1}].
    pub fn central_into(&self, out: &mut [f64]) {
        let mut value = self.last;
        for v in out {
            value = self.step(value, 0.0);
            *v = value;
        }
    }

    /// Correlation of this fit's residuals with `other`'s, over the same transitions.
    pub fn residual_correlation(&self, other: &Ar1) -> Result<f64> {
        if self.residuals.len() != other.residuals.len() {
            return Err(Error::model(
                "ar1",
                "the two series cover different years: their innovations cannot be paired",
            ));
        }
        let (mut s11, mut s22, mut s12) = (0.0, 0.0, 0.0);
        for (a, b) in self.residuals.iter().zip(&other.residuals) {
            s11 += a * a;
            s22 += b * b;
            s12 += a * b;
        }
        Ok((s12 / (s11 * s22).sqrt()).clamp(-1.0, 1.0))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn central_path_tends_to_the_stationary_mean() {
        let ar = Ar1::fit(&[0.3, 0.1, 0.25, 0.05, 0.2, 0.12, 0.18]).unwrap();
        let mut path = [0.0; 400];
        ar.central_into(&mut path);
        // Closed form: the mean of a stationary AR(1) with constant is c / (1 − φ).
        assert!(ar.phi.abs() < 1.0);
        assert!((path[399] - ar.constant / (1.0 - ar.phi)).abs() < 1e-12);
    }

    #[test]
    fn a_constant_or_short_series_is_refused() {
        assert!(Ar1::fit(&[1.0, 2.0, 3.0]).is_err());
        assert!(Ar1::fit(&[1.0, 1.0, 1.0, 1.0, 2.0]).is_err());
    }
}
