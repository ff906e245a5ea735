//! Stochastic mortality models: fit to one population's experience, then drive projections.
//!
//! Each model is a parameters value (checked once) whose `fit` returns a separate fitted
//! type. The projection engine only sees [`FittedModel`]: a set of period indices with a
//! history, and a map from a year's indices to that year's one-year rates at every age up
//! to `max_age`. Adding a model is adding one file that implements it.

use nalgebra::DMatrix;
use serde::Serialize;

use crate::data::{Population, Sex, Span};

pub mod apc;
pub mod basis;
pub mod cbd;
pub mod cbd_cohort;
pub mod cohort;
pub mod glm;
pub mod lee_carter;
pub mod likelihood;
pub mod renshaw_haberman;
pub mod select;

pub use apc::{Apc, ApcFit, ApcParams};
pub use basis::FitBasis;
pub use cbd::{Cbd, CbdFit, CbdParams};
pub use cbd_cohort::{CbdCohort, CbdCohortFit, CbdCohortParams, CbdCohortVariant};
pub use cohort::{CohortEffects, CohortGrid};
pub use lee_carter::{LeeCarter, LeeCarterFit, LeeCarterMethod, LeeCarterParams};
pub use renshaw_haberman::{RenshawHaberman, RenshawHabermanFit, RenshawHabermanParams};
pub use select::{
    FitDocument, FitRecord, FitSet, ModelFit, RankEntry, TimeSeriesRecord, build_model,
    fit_population,
};

/// Goodness-of-fit measures every fit reports.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FitDiagnostics {
    /// Maximised log-likelihood (Poisson for log-rate models, binomial for CBD).
    pub log_likelihood: f64,
    /// Deviance against the saturated model.
    pub deviance: f64,
    /// Effective number of parameters (after identifiability constraints).
    pub parameters: usize,
    /// Number of cells fitted (cells with positive exposure).
    pub observations: usize,
    /// Akaike information criterion: 2 ν − 2 ℓ.
    pub aic: f64,
    /// Bayesian information criterion: ν ln n − 2 ℓ.
    pub bic: f64,
    /// Iterations the fit took (0 for closed-form fits).
    pub iterations: usize,
}

/// What the projection engine needs from any fitted model. `Any` lets a model's own
/// [`MortalityModel::refit`] recognise a fit of its kind to start from.
pub trait FittedModel: std::any::Any + Send + Sync {
    /// Model name as written in files (`lee-carter`, `cbd`).
    fn name(&self) -> &'static str;

    /// Estimation method as written in files (`svd`, `poisson`, `binomial`).
    fn method(&self) -> &'static str;

    /// The data window, closure and fit quality the fit holds besides its parameters.
    fn basis(&self) -> &FitBasis;

    /// Sex of the population fitted.
    fn sex(&self) -> Sex {
        self.basis().sex
    }

    /// The population's fitted ages.
    fn ages(&self) -> Span {
        self.basis().ages
    }

    /// The fitted calendar years.
    fn years(&self) -> Span {
        self.basis().years
    }

    /// Names of the period indices, e.g. `["k"]` or `["k1", "k2"]`.
    fn factor_names(&self) -> &'static [&'static str];

    /// Fitted period indices: one row per index, one column per fitted year.
    fn factors(&self) -> &DMatrix<f64>;

    /// One-year death rates q at ages `ages().first ..= max_age` for a year whose period
    /// indices are `factors`; rates above the top fitted age come from the closure and q is
    /// 1 at `max_age`. `out` has length `max_age − ages().first + 1`.
    fn rates(&self, factors: &[f64], out: &mut [f64]);

    /// Highest age of the rates; q is 1 there.
    fn max_age(&self) -> i32 {
        self.basis().closure.max_age
    }

    /// Fit quality.
    fn diagnostics(&self) -> &FitDiagnostics {
        &self.basis().diagnostics
    }

    /// Deviance residuals, ages × years (NaN where the exposure is zero).
    fn residuals(&self) -> DMatrix<f64> {
        self.basis().residuals.clone()
    }

    /// Fitted parameters by name, as written to `fit.json`.
    fn parameters_json(&self) -> serde_json::Value;

    /// The cohort index γ_c of a cohort model (`None` for period-only models). For these
    /// models [`FittedModel::rates`] holds each age's cohort effect at its value in the
    /// last fitted year; a projection that follows cohorts draws γ for the younger
    /// cohorts from the index's time series and calls [`FittedModel::cohort_rates`].
    fn cohort_effects(&self) -> Option<CohortEffects> {
        None
    }

    /// Like [`FittedModel::rates`], with `gamma_by_age[i]` the cohort effect γ_{t−x} of
    /// the i-th fitted age in the year of `factors`; models without a cohort effect
    /// ignore it.
    fn cohort_rates(&self, factors: &[f64], gamma_by_age: &[f64], out: &mut [f64]) {
        let _ = gamma_by_age;
        self.rates(factors, out);
    }

    /// Like [`FittedModel::cohort_rates`] for the cells `out[cells]` only, each with the
    /// value the whole row gives it, bit for bit: a projection computes the cells its
    /// readers take (a book's cohort diagonals) and no others. Entries outside `cells` are
    /// left as they were or set to NaN. By default the whole row.
    fn cohort_rates_in(
        &self,
        factors: &[f64],
        gamma_by_age: &[f64],
        cells: std::ops::Range<usize>,
        out: &mut [f64],
    ) {
        let _ = cells;
        self.cohort_rates(factors, gamma_by_age, out);
    }
}

/// A checked model specification that can be fitted to a population.
pub trait MortalityModel: Send + Sync {
    /// Fits the model to one population.
    fn fit(&self, population: &Population) -> crate::Result<Box<dyn FittedModel>>;

    /// Refuses what [`MortalityModel::fit`] would refuse about `population`'s window before
    /// any iteration (too few ages, years or identifiable cohorts for the settings), with
    /// the same message, so that `check` catches it. By default nothing.
    fn check_population(&self, population: &Population) -> crate::Result<()> {
        let _ = population;
        Ok(())
    }

    /// Fits `population`, which extends `base`'s data by later years (the one-year
    /// re-calibration), starting where `base` ended when the model can: the result's rates
    /// equal [`MortalityModel::fit`]'s within the fit's tolerance; its diagnostics may be
    /// left unmeasured (a refit is read for its rates). By default a cold fit.
    fn refit(
        &self,
        population: &Population,
        base: &dyn FittedModel,
    ) -> crate::Result<Box<dyn FittedModel>> {
        let _ = base;
        self.fit(population)
    }
}

/// Checks the fit settings every model shares; errors name the model `name`.
pub(crate) fn check_fit_settings(
    name: &str,
    tolerance: f64,
    max_iterations: usize,
    closure_fit_ages: usize,
) -> crate::Result<()> {
    if !(tolerance.is_finite() && tolerance > 0.0) {
        return Err(crate::Error::model(
            name,
            format!("tolerance must be positive, found {tolerance}"),
        ));
    }
    if max_iterations == 0 {
        return Err(crate::Error::model(
            name,
            "max_iterations must be at least 1",
        ));
    }
    if closure_fit_ages < 2 {
        return Err(crate::Error::model(
            name,
            "the closure needs at least two fitted ages (closure_fit_ages)",
        ));
    }
    Ok(())
}
