//! Multivariate random walk with drift for a model's period indices.
//!
//! Every model here projects its period indices as k_t = k_{t−1} + d + ε_t with
//! ε_t ~ N(0, Σ). The estimates are the usual ones for this model (Lee & Carter 1992 for
//! one index; the bivariate form for CBD, Cairns, Blake & Dowd 2006): the drift is the
//! mean first difference d̂ = (k_T − k_1)/(T − 1), Σ̂ is the sample covariance of the
//! first differences about d̂ with divisor T − 2 (unbiased), and the drift estimator's
//! covariance is Σ̂/(T − 1).

use nalgebra::{DMatrix, DVector};
use serde::Serialize;

use crate::error::{Error, Result};

/// Fitted random walk with drift for `dim` period indices.
#[derive(Debug, Clone, PartialEq)]
pub struct RandomWalk {
    /// Drift d̂ per index.
    pub drift: DVector<f64>,
    /// Innovation covariance Σ̂.
    pub covariance: DMatrix<f64>,
    /// Covariance of the drift estimator, Σ̂/(T − 1).
    pub drift_covariance: DMatrix<f64>,
    /// Lower-triangular L with L Lᵀ = Σ̂ (zero columns where Σ̂ is singular).
    pub cholesky: DMatrix<f64>,
    /// Number of first differences T − 1 the estimates rest on.
    pub steps: usize,
}

/// The estimates as written to `fit.json`.
#[derive(Debug, Clone, Serialize)]
pub struct RandomWalkSummary {
    /// Drift per index.
    pub drift: Vec<f64>,
    /// Standard deviation of the innovations per index.
    pub volatility: Vec<f64>,
    /// Innovation covariance, row by row.
    pub covariance: Vec<Vec<f64>>,
    /// Standard error of the drift per index, σ/√(T − 1).
    pub drift_standard_error: Vec<f64>,
    /// Covariance of the drift estimator, row by row.
    pub drift_covariance: Vec<Vec<f64>>,
}

impl RandomWalk {
    /// Estimates the walk from `factors` (one row per index, one column per year).
    /// Needs at least three years.
    pub fn estimate(factors: &DMatrix<f64>) -> Result<RandomWalk> {
        let (dim, years) = factors.shape();
        if years < 3 || dim == 0 {
            return Err(Error::model(
                "random-walk",
                format!("needs at least one index and three years of it, found {years} years"),
            ));
        }
        let steps = years - 1;
        let diffs = factors.columns(1, steps) - factors.columns(0, steps);
        let drift = (factors.column(years - 1) - factors.column(0)) / steps as f64;
        let mut covariance = DMatrix::zeros(dim, dim);
        for c in diffs.column_iter() {
            let e = c - &drift;
            covariance += &e * e.transpose();
        }
        covariance /= (steps - 1) as f64;
        if covariance.iter().any(|v| !v.is_finite()) {
            return Err(Error::Numerical(
                "period indices are not finite; cannot estimate their random walk".into(),
            ));
        }
        let drift_covariance = &covariance / steps as f64;
        let cholesky = lower_factor(&covariance);
        Ok(RandomWalk {
            drift,
            covariance,
            drift_covariance,
            cholesky,
            steps,
        })
    }

    /// Number of indices.
    pub fn dim(&self) -> usize {
        self.drift.len()
    }

    /// Innovation standard deviations √Σ̂_ii.
    pub fn volatility(&self) -> DVector<f64> {
        self.covariance.diagonal().map(f64::sqrt)
    }

    /// Drift standard errors √(Σ̂_ii/(T − 1)).
    pub fn drift_standard_error(&self) -> DVector<f64> {
        self.drift_covariance.diagonal().map(f64::sqrt)
    }

    /// The estimates in plain vectors for output.
    pub fn summary(&self) -> RandomWalkSummary {
        let rows = |m: &DMatrix<f64>| {
            m.row_iter()
                .map(|r| r.iter().copied().collect())
                .collect::<Vec<Vec<f64>>>()
        };
        RandomWalkSummary {
            drift: self.drift.iter().copied().collect(),
            volatility: self.volatility().iter().copied().collect(),
            covariance: rows(&self.covariance),
            drift_standard_error: self.drift_standard_error().iter().copied().collect(),
            drift_covariance: rows(&self.drift_covariance),
        }
    }
}

/// Cholesky factor by nalgebra; for a singular (semi-definite) covariance, such as indices
/// that move in lock-step, the outer-product algorithm with zero columns at zero pivots.
fn lower_factor(a: &DMatrix<f64>) -> DMatrix<f64> {
    if let Some(chol) = a.clone().cholesky() {
        return chol.l();
    }
    let n = a.nrows();
    let scale = a.diagonal().iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let mut l = DMatrix::zeros(n, n);
    for j in 0..n {
        let mut pivot = a[(j, j)];
        for k in 0..j {
            pivot -= l[(j, k)] * l[(j, k)];
        }
        if pivot <= 1e-12 * scale {
            continue;
        }
        let root = pivot.sqrt();
        l[(j, j)] = root;
        for i in j + 1..n {
            let mut s = a[(i, j)];
            for k in 0..j {
                s -= l[(i, k)] * l[(j, k)];
            }
            l[(i, j)] = s / root;
        }
    }
    l
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn linear_indices_have_exact_drift_and_no_noise() {
        let k = DMatrix::from_row_slice(2, 4, &[3.0, 1.0, -1.0, -3.0, 0.1, 0.2, 0.3, 0.4]);
        let rw = RandomWalk::estimate(&k).unwrap();
        assert!((rw.drift[0] + 2.0).abs() < 1e-15);
        assert!((rw.drift[1] - 0.1).abs() < 1e-15);
        assert!(rw.covariance.norm() < 1e-24);
        assert!(rw.cholesky.norm() < 1e-12);
    }

    #[test]
    fn univariate_estimates_match_hand_computation() {
        // Differences -1, 2, -4: mean -1, deviations 0, 3, -3, variance 18/2 = 9.
        let k = DMatrix::from_row_slice(1, 4, &[0.0, -1.0, 1.0, -3.0]);
        let rw = RandomWalk::estimate(&k).unwrap();
        assert!((rw.drift[0] + 1.0).abs() < 1e-15);
        assert!((rw.covariance[(0, 0)] - 9.0).abs() < 1e-12);
        assert!((rw.drift_standard_error()[0] - 3.0 / 3f64.sqrt()).abs() < 1e-12);
        assert!((rw.cholesky[(0, 0)] - 3.0).abs() < 1e-12);
    }
}
