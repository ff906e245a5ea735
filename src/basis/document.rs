//! `basis.json`: what the book's experience says about its level, slope and spread.

use serde::Serialize;

use crate::basis::actual_expected::ActualToExpected;
use crate::basis::book_experience::BookCell;
use crate::basis::relative::RelativeFit;

/// The spread's AR(1) and the fitted year factors.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SpreadRecord {
    /// φ̂ of κ_t = φ κ_{t−1} + σ ε_t.
    pub phi: f64,
    /// σ̂, which holds the κ̂_t's Poisson sampling noise as well as the true spread.
    pub sigma: f64,
    /// Standard error of φ̂.
    pub phi_standard_error: f64,
    /// Conditional Gaussian log-likelihood of the AR(1).
    pub log_likelihood: f64,
    /// Mean over the years of the κ̂_t's sampling variance 1/D_t, beside σ̂².
    pub mean_sampling_variance: f64,
    /// Calendar years of the book's experience.
    pub years: Vec<i32>,
    /// κ̂_t per year.
    pub values: Vec<f64>,
}

/// The document written to `basis.json`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BasisDocument {
    /// `relative`.
    pub kind: &'static str,
    /// α0: the book's log-rate level against the population at x̄.
    pub level: f64,
    /// α1: change of the log-rate gap per year of age.
    pub slope: f64,
    /// Covariance of (α0, α1), inverse of the information matrix.
    pub covariance: [[f64; 2]; 2],
    /// x̄, mean of the population's fitted ages.
    pub mean_age: f64,
    /// Lowest and highest age of the book's experience (the slope is held beyond them).
    pub ages: [i32; 2],
    /// The spread.
    pub spread: SpreadRecord,
    /// Poisson log-likelihood of the level fit.
    pub log_likelihood: f64,
    /// Deviance of the level fit.
    pub deviance: f64,
    /// Cells fitted.
    pub observations: usize,
    /// Newton iterations of the level fit.
    pub iterations: usize,
    /// Actual against expected deaths at the population's fitted rates.
    pub actual_to_expected: ActualToExpected,
}

impl BasisDocument {
    /// The document of `fit` to `cells`.
    pub fn new(fit: &RelativeFit, cells: &[BookCell]) -> BasisDocument {
        let years = &fit.years;
        let n = years.sampling_variance.len().max(1) as f64;
        BasisDocument {
            kind: "relative",
            level: fit.level.level,
            slope: fit.level.slope,
            covariance: fit.level.covariance,
            mean_age: fit.level.mean_age,
            ages: [fit.ages.0, fit.ages.1],
            spread: SpreadRecord {
                phi: fit.spread.phi,
                sigma: fit.spread.sigma,
                phi_standard_error: fit.spread.phi_standard_error,
                log_likelihood: fit.spread.log_likelihood,
                mean_sampling_variance: years.sampling_variance.iter().sum::<f64>() / n,
                years: years.years.clone(),
                values: years.values.clone(),
            },
            log_likelihood: fit.level.log_likelihood,
            deviance: fit.level.deviance,
            observations: fit.level.observations,
            iterations: fit.level.iterations,
            actual_to_expected: ActualToExpected::of(cells),
        }
    }
}
