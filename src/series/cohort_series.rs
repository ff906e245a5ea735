//! Time-series models of a cohort index γ_c over consecutive birth years.
//!
//! Cohort effects are usually projected by a low-order ARIMA model rather than a random
//! walk: differences of γ are autocorrelated, and a random walk would make the youngest
//! cohorts' uncertainty explode. Two forms are offered, both fitted by conditional
//! maximum likelihood (the first observations are taken as given), which for an AR(1)
//! regression is exactly ordinary least squares with the variance estimated as RSS/m:
//!
//! - ARIMA(1,1,0) with drift: Δγ_c = μ0 + φ Δγ_{c−1} + ε_c, the drift (mean difference)
//!   being μ0/(1 − φ);
//! - AR(1) about a linear trend: γ_c = μ0 + μ1 τ_c + φ γ_{c−1} + ε_c, with τ_c = 1, 2, …
//!   the position of cohort c in the series; the trend slope per birth year is μ1/(1 − φ).
//!
//! ε_c ~ N(0, σ²). The log-likelihood is the conditional one, −m/2 (ln 2πσ² + 1).
//!
//! Under drift uncertainty a scenario redraws the deterministic terms (μ0, and μ1 for the
//! trend form) from their estimation distribution given φ̂, N(β̂, σ̂² (XᵀX)⁻¹) over the
//! intercept (and trend) columns only: with φ known the drift of an AR(1) is estimated as
//! a random walk's is, and φ itself is held, since a draw near 1 would make the youngest
//! cohorts' γ explode.

use nalgebra::{Matrix3, Vector3};
use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};

/// Time-series model of the cohort index γ_c over birth years c.
#[derive(Debug, Clone, Copy, Deserialize, Serialize, PartialEq, Eq)]
#[serde(rename_all = "kebab-case")]
pub enum CohortSeriesKind {
    /// ARIMA(1,1,0) with drift: Δγ_c = μ0 + φ Δγ_{c−1} + ε_c.
    Arima110Drift,
    /// AR(1) with a linear trend: γ_c = μ0 + μ1 τ_c + φ γ_{c−1} + ε_c.
    Ar1Trend,
}

/// A fitted cohort-index time series, ready to project forward.
#[derive(Debug, Clone, PartialEq)]
pub struct CohortSeries {
    /// The model form.
    pub kind: CohortSeriesKind,
    /// Intercept μ0 of the regression.
    pub intercept: f64,
    /// Trend coefficient μ1 per position (0 for ARIMA(1,1,0)).
    pub trend: f64,
    /// Autoregressive coefficient φ.
    pub phi: f64,
    /// Innovation variance σ² (maximum-likelihood divisor m).
    pub sigma2: f64,
    /// Regression observations m.
    pub observations: usize,
    /// Conditional log-likelihood.
    pub log_likelihood: f64,
    /// Lower Cholesky factor of the covariance of (μ0, μ1) given φ, σ̂² (X_AᵀX_A)⁻¹
    /// (the μ1 row and column are zero for ARIMA(1,1,0)).
    pub terms_factor: [[f64; 2]; 2],
    /// The series the model was fitted to (oldest cohort first).
    history: Vec<f64>,
}

/// The deterministic terms of a cohort series' recursion: estimated, or drawn for one
/// scenario under drift uncertainty.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SeriesTerms {
    /// Intercept μ0.
    pub intercept: f64,
    /// Trend coefficient μ1 per position (0 for ARIMA(1,1,0)).
    pub trend: f64,
}

/// The estimates as written to `fit.json`.
#[derive(Debug, Clone, Serialize)]
pub struct CohortSeriesSummary {
    /// Model name: `arima110-drift` or `ar1-trend`.
    pub kind: &'static str,
    /// Intercept μ0.
    pub intercept: f64,
    /// Trend coefficient μ1 per position (ar1-trend only).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub trend: Option<f64>,
    /// Autoregressive coefficient φ.
    pub phi: f64,
    /// Innovation variance σ².
    pub sigma2: f64,
    /// Drift of γ per birth year, μ0/(1 − φ) (arima110-drift), or trend slope μ1/(1 − φ)
    /// (ar1-trend); absent when φ = 1.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub drift: Option<f64>,
    /// Regression observations.
    pub observations: usize,
    /// Conditional log-likelihood.
    pub log_likelihood: f64,
}

impl CohortSeriesKind {
    /// The name used in files.
    pub fn name(self) -> &'static str {
        match self {
            CohortSeriesKind::Arima110Drift => "arima110-drift",
            CohortSeriesKind::Ar1Trend => "ar1-trend",
        }
    }

    /// Fewest values of γ the model can be fitted to (at least one residual degree of
    /// freedom beyond the regression coefficients).
    pub fn minimum_length(self) -> usize {
        match self {
            CohortSeriesKind::Arima110Drift => 5,
            CohortSeriesKind::Ar1Trend => 5,
        }
    }
}

impl CohortSeries {
    /// Fits `kind` to the consecutive cohort values `gamma` (oldest first).
    pub fn fit(kind: CohortSeriesKind, gamma: &[f64]) -> Result<CohortSeries> {
        if gamma.len() < kind.minimum_length() {
            return Err(Error::model(
                kind.name(),
                format!(
                    "the cohort index has {} estimated cohorts; the time series needs at least \
                     {} (widen data.years or data.ages, or lower model.min_cohort_cells)",
                    gamma.len(),
                    kind.minimum_length()
                ),
            ));
        }
        if gamma.iter().any(|v| !v.is_finite()) {
            return Err(Error::Numerical("the cohort index is not finite".into()));
        }
        // Regression rows (response, regressors) under each form.
        let rows: Vec<(f64, [f64; 3])> = match kind {
            CohortSeriesKind::Arima110Drift => {
                let diff: Vec<f64> = gamma.windows(2).map(|w| w[1] - w[0]).collect();
                diff.windows(2).map(|w| (w[1], [1.0, w[0], 0.0])).collect()
            }
            CohortSeriesKind::Ar1Trend => (1..gamma.len())
                .map(|i| (gamma[i], [1.0, gamma[i - 1], (i + 1) as f64]))
                .collect(),
        };
        let width = match kind {
            CohortSeriesKind::Arima110Drift => 2,
            CohortSeriesKind::Ar1Trend => 3,
        };
        let mut xtx = Matrix3::<f64>::zeros();
        let mut xty = Vector3::<f64>::zeros();
        for (y, x) in &rows {
            let x = Vector3::from(*x);
            xtx += x * x.transpose();
            xty += x * *y;
        }
        if width == 2 {
            xtx[(2, 2)] = 1.0;
        }
        let beta = xtx
            .cholesky()
            .map(|c| c.solve(&xty))
            .filter(|b| b.iter().all(|v| v.is_finite()))
            .ok_or_else(|| {
                Error::model(
                    kind.name(),
                    "the cohort index is constant or collinear with its lag, so the \
                     autoregression is not identified",
                )
            })?;
        let m = rows.len();
        let rss: f64 = rows
            .iter()
            .map(|(y, x)| {
                let fitted = beta[0] * x[0] + beta[1] * x[1] + beta[2] * x[2];
                (y - fitted).powi(2)
            })
            .sum();
        let sigma2 = rss / m as f64;
        let log_likelihood = if sigma2 > 0.0 {
            -(m as f64) / 2.0 * ((2.0 * std::f64::consts::PI * sigma2).ln() + 1.0)
        } else {
            f64::INFINITY
        };
        let terms_factor = terms_factor(&rows, width, sigma2);
        Ok(CohortSeries {
            kind,
            intercept: beta[0],
            phi: beta[1],
            trend: beta[2],
            sigma2,
            observations: m,
            log_likelihood,
            terms_factor,
            history: gamma.to_vec(),
        })
    }

    /// The regression residuals ε̂ (one per observation, oldest first).
    pub fn residuals(&self) -> Vec<f64> {
        let g = &self.history;
        match self.kind {
            CohortSeriesKind::Arima110Drift => {
                let diff: Vec<f64> = g.windows(2).map(|w| w[1] - w[0]).collect();
                diff.windows(2)
                    .map(|w| w[1] - self.intercept - self.phi * w[0])
                    .collect()
            }
            CohortSeriesKind::Ar1Trend => (1..g.len())
                .map(|i| g[i] - self.intercept - self.phi * g[i - 1] - self.trend * (i + 1) as f64)
                .collect(),
        }
    }

    /// The estimated deterministic terms.
    pub fn terms(&self) -> SeriesTerms {
        SeriesTerms {
            intercept: self.intercept,
            trend: self.trend,
        }
    }

    /// The terms μ̂ + L z for standard normal `z`, L = [`CohortSeries::terms_factor`].
    pub fn drawn_terms(&self, z: [f64; 2]) -> SeriesTerms {
        let l = &self.terms_factor;
        SeriesTerms {
            intercept: self.intercept + l[0][0] * z[0],
            trend: self.trend + l[1][0] * z[0] + l[1][1] * z[1],
        }
    }

    /// Number of cohort values the series was fitted to.
    pub fn len(&self) -> usize {
        self.history.len()
    }

    /// Whether the series holds no values (never true for a fitted series).
    pub fn is_empty(&self) -> bool {
        self.history.is_empty()
    }

    /// The next `shocks.len()` cohort values after the fitted history, with innovation
    /// σ·`shocks[h]` in step h: zero shocks give the central projection, standard normal
    /// shocks a simulated path.
    pub fn project(&self, shocks: &[f64]) -> Vec<f64> {
        let mut values = shocks.to_vec();
        self.project_into(self.terms(), &mut values);
        values
    }

    /// In place: `values` holds standard normal shocks on entry and the next
    /// `values.len()` cohort values after the fitted history on return, under `terms`.
    /// Allocates nothing, for the per-scenario projection.
    pub fn project_into(&self, terms: SeriesTerms, values: &mut [f64]) {
        let sigma = self.sigma2.sqrt();
        let n = self.history.len();
        let mut last = self.history[n - 1];
        let mut last_diff = self.history[n - 1] - self.history[n - 2];
        let mut position = n as f64;
        for v in values.iter_mut() {
            let z = *v;
            position += 1.0;
            match self.kind {
                CohortSeriesKind::Arima110Drift => {
                    last_diff = terms.intercept + self.phi * last_diff + sigma * z;
                    last += last_diff;
                }
                CohortSeriesKind::Ar1Trend => {
                    last = terms.intercept + terms.trend * position + self.phi * last + sigma * z;
                }
            }
            *v = last;
        }
    }

    /// The estimates for `fit.json`.
    pub fn summary(&self) -> CohortSeriesSummary {
        let free = (1.0 - self.phi).abs() > 1e-12;
        let (trend, drift) = match self.kind {
            CohortSeriesKind::Arima110Drift => {
                (None, free.then(|| self.intercept / (1.0 - self.phi)))
            }
            CohortSeriesKind::Ar1Trend => (
                Some(self.trend),
                free.then(|| self.trend / (1.0 - self.phi)),
            ),
        };
        CohortSeriesSummary {
            kind: self.kind.name(),
            intercept: self.intercept,
            trend,
            phi: self.phi,
            sigma2: self.sigma2,
            drift,
            observations: self.observations,
            log_likelihood: self.log_likelihood,
        }
    }
}

/// Cholesky factor of σ² (X_AᵀX_A)⁻¹ over the intercept (and trend) regressors of `rows`.
fn terms_factor(rows: &[(f64, [f64; 3])], width: usize, sigma2: f64) -> [[f64; 2]; 2] {
    let m = rows.len() as f64;
    if width == 2 {
        return [[(sigma2 / m).sqrt(), 0.0], [0.0, 0.0]];
    }
    let (s1, s2) = rows
        .iter()
        .fold((0.0, 0.0), |(a, b), (_, x)| (a + x[2], b + x[2] * x[2]));
    // Inverse of [[m, s1], [s1, s2]] times σ², then its 2 × 2 Cholesky factor.
    let det = m * s2 - s1 * s1;
    let (v00, v01, v11) = (sigma2 * s2 / det, -sigma2 * s1 / det, sigma2 * m / det);
    if !(det > 0.0 && v00 > 0.0) {
        return [[0.0, 0.0], [0.0, 0.0]];
    }
    let l00 = v00.sqrt();
    let l10 = v01 / l00;
    let l11 = (v11 - l10 * l10).max(0.0).sqrt();
    [[l00, 0.0], [l10, l11]]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exact_ar1_trend_is_recovered_and_continued() {
        // γ_i = 0.5 + 0.1 (i + 1) + 0.6 γ_{i−1} with no noise: the regression is exact.
        let mut gamma = vec![1.0];
        for i in 1..12 {
            let next = 0.5 + 0.1 * (i + 1) as f64 + 0.6 * gamma[i - 1];
            gamma.push(next);
        }
        let fit = CohortSeries::fit(CohortSeriesKind::Ar1Trend, &gamma[..10]).unwrap();
        assert!((fit.phi - 0.6).abs() < 1e-9 && (fit.trend - 0.1).abs() < 1e-9);
        let ahead = fit.project(&[0.0, 0.0]);
        assert!((ahead[0] - gamma[10]).abs() < 1e-8 && (ahead[1] - gamma[11]).abs() < 1e-8);
    }

    #[test]
    fn short_series_is_refused() {
        let err = CohortSeries::fit(CohortSeriesKind::Arima110Drift, &[0.1, 0.2, 0.0])
            .unwrap_err()
            .to_string();
        assert!(err.contains("at least 5"), "{err}");
    }
}
