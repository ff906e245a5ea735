//! A mean-zero AR(1): the spread between a book's mortality and its population's.
//!
//! The spread κ_t is a deviation from a level that is estimated separately, so it has no
//! intercept and reverts to zero: κ_t = φ κ_{t−1} + σ ε_t, ε_t ~ N(0, 1). φ and σ are the
//! conditional maximum-likelihood estimates given the first value (Hamilton 1994, §5.2):
//! φ̂ = Σ κ_t κ_{t−1} / Σ κ_{t−1}², σ̂² = Σ (κ_t − φ̂ κ_{t−1})² / (T − 1), the least-squares
//! fit of κ_t on κ_{t−1} without intercept.

use serde::Serialize;

use crate::error::{Error, Result};

/// Fitted mean-zero AR(1).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SpreadAr1 {
    /// Autoregressive coefficient φ̂.
    pub phi: f64,
    /// Innovation standard deviation σ̂.
    pub sigma: f64,
    /// Standard error of φ̂, σ̂ / √(Σ κ_{t−1}²).
    pub phi_standard_error: f64,
    /// Conditional log-likelihood at the estimates (Gaussian, given the first value).
    pub log_likelihood: f64,
    /// Last value of the series, where a projection starts.
    pub last: f64,
    /// Number of transitions T − 1 the estimates rest on.
    pub steps: usize,
}

impl SpreadAr1 {
    /// Fits the series `values` (oldest first); needs at least three values that are not
    /// all zero.
    pub fn fit(values: &[f64]) -> Result<SpreadAr1> {
        if values.len() < 3 {
            return Err(Error::model(
                "spread",
                format!(
                    "an AR(1) needs at least three years of spread, found {}",
                    values.len()
                ),
            ));
        }
        let lagged: f64 = values[..values.len() - 1].iter().map(|v| v * v).sum();
        if !(lagged > 0.0 && lagged.is_finite()) {
            return Err(Error::model(
                "spread",
                "the spread is zero in every year but the last: φ is not identified",
            ));
        }
        let cross: f64 = values.windows(2).map(|w| w[0] * w[1]).sum();
        let phi = cross / lagged;
        let steps = values.len() - 1;
        let ssr: f64 = values.windows(2).map(|w| (w[1] - phi * w[0]).powi(2)).sum();
        let variance = ssr / steps as f64;
        let sigma = variance.sqrt();
        let log_likelihood = if variance > 0.0 {
            -0.5 * steps as f64 * ((2.0 * std::f64::consts::PI * variance).ln() + 1.0)
        } else {
            f64::INFINITY
        };
        if !log_likelihood.is_finite() {
            return Err(Error::model(
                "spread",
                "the spread follows an exact AR(1) path: its innovation variance is zero",
            ));
        }
        Ok(SpreadAr1 {
            phi,
            sigma,
            phi_standard_error: sigma / lagged.sqrt(),
            log_likelihood,
            last: values[values.len() - 1],
            steps,
        })
    }

    /// The expected path h = 1, 2, … years after the last value: φ^h κ_T.
    pub fn central_into(&self, out: &mut [f64]) {
        let mut value = self.last;
        for v in out {
            value *= self.phi;
            *v = value;
        }
    }

    /// A path driven by standard normal `shocks`, one per year after the last value.
    pub fn project_into(&self, shocks: &[f64], out: &mut [f64]) {
        let mut value = self.last;
        for (v, z) in out.iter_mut().zip(shocks) {
            value = self.phi * value + self.sigma * z;
            *v = value;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_noiseless_decay_is_refused_and_a_short_series_too() {
        assert!(SpreadAr1::fit(&[1.0, 0.5]).is_err());
        assert!(SpreadAr1::fit(&[1.0, 0.5, 0.25, 0.125]).is_err());
        assert!(SpreadAr1::fit(&[0.0, 0.0, 0.3]).is_err());
    }

    #[test]
    fn central_path_decays_geometrically() {
        let ar = SpreadAr1::fit(&[0.1, -0.05, 0.08, 0.02, -0.03]).unwrap();
        let mut path = [0.0; 3];
        ar.central_into(&mut path);
        // Closed form: E[κ_{T+h} | κ_T] = φ^h κ_T.
        for (h, v) in path.iter().enumerate() {
            assert!((v - ar.phi.powi(h as i32 + 1) * ar.last).abs() < 1e-15);
        }
    }
}
