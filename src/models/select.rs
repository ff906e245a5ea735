//! From the `[model]` config to fitted models, and the ranking of fits by BIC.
//!
//! Several kinds may be listed; each is fitted to each sex and the fits of one sex are
//! ranked by BIC (lower is better). Lee–Carter's likelihood is Poisson on central exposure
//! and CBD's is binomial on initial exposure, so across kinds the ranking compares two
//! approximations to the same death counts: a guide to the choice, not a formal test.
//! The cohort models (apc, renshaw-haberman, m6, m7) give no weight to the cells of the
//! corner cohorts they leave out (`model.min_cohort_cells`), so their likelihood and n
//! cover slightly fewer cells than the period models'; `observations` says how many.

use serde::Serialize;

use crate::data::config::{ClosureKind, FitMethod, ModelConfig, ModelKind};
use crate::data::{Experience, Population, Sex};
use crate::error::Result;
use crate::models::{
    ApcParams, CbdCohortParams, CbdCohortVariant, CbdParams, FittedModel, LeeCarterMethod,
    LeeCarterParams, MortalityModel, RenshawHabermanParams,
};
use crate::series::RandomWalk;
use crate::series::cohort_series::CohortSeriesSummary;
use crate::series::random_walk::RandomWalkSummary;

/// One fitted model with its period indices' random walk.
pub struct ModelFit {
    /// The fitted model.
    pub model: Box<dyn FittedModel>,
    /// Random walk with drift estimated from the fitted period indices.
    pub random_walk: RandomWalk,
}

impl std::fmt::Debug for ModelFit {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("ModelFit")
            .field("model", &self.model.name())
            .field("method", &self.model.method())
            .field("sex", &self.model.sex())
            .field("diagnostics", self.model.diagnostics())
            .field("random_walk", &self.random_walk)
            .finish()
    }
}

/// Every configured model fitted to every sex.
#[derive(Debug)]
pub struct FitSet {
    /// Fits in config order: sex by sex, kind by kind.
    pub fits: Vec<ModelFit>,
}

/// One line of the BIC ranking.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RankEntry {
    /// Sex of the population.
    pub sex: Sex,
    /// 1 for the lowest BIC within the sex.
    pub rank: usize,
    /// Model name.
    pub model: &'static str,
    /// Estimation method.
    pub method: &'static str,
    /// The fit's BIC.
    pub bic: f64,
    /// BIC minus the sex's lowest BIC.
    pub delta_bic: f64,
}

/// The `fit.json` document: one record per fit, then the BIC ranking.
#[derive(Debug, Clone, Serialize)]
pub struct FitDocument {
    /// Crate version that wrote the file.
    pub version: &'static str,
    /// One record per sex and kind.
    pub fits: Vec<FitRecord>,
    /// BIC ranking within each sex, when several kinds are fitted.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub ranking: Option<Vec<RankEntry>>,
}

/// One fit as written to `fit.json`.
#[derive(Debug, Clone, Serialize)]
pub struct FitRecord {
    /// Model name.
    pub model: &'static str,
    /// Estimation method.
    pub method: &'static str,
    /// Sex of the population.
    pub sex: Sex,
    /// Fitted ages, inclusive.
    pub ages: [i32; 2],
    /// Fitted years, inclusive.
    pub years: [i32; 2],
    /// Highest age of the closed table.
    pub max_age: i32,
    /// Fitted parameters by name.
    pub parameters: serde_json::Value,
    /// Maximised log-likelihood (constants included).
    pub log_likelihood: f64,
    /// Deviance against the saturated model.
    pub deviance: f64,
    /// Effective number of parameters.
    pub parameter_count: usize,
    /// Cells with positive exposure.
    pub observations: usize,
    /// Akaike information criterion.
    pub aic: f64,
    /// Bayesian information criterion.
    pub bic: f64,
    /// Iterations of the fit.
    pub iterations: usize,
    /// Time-series estimates for the projection.
    pub time_series: TimeSeriesRecord,
    /// Time-series estimates of the cohort index (cohort models only).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub cohort_time_series: Option<CohortSeriesSummary>,
}

/// The period indices' time-series model and its estimates.
#[derive(Debug, Clone, Serialize)]
pub struct TimeSeriesRecord {
    /// Time-series model name.
    pub kind: &'static str,
    /// Names of the indices, in the order of the estimates.
    pub factors: &'static [&'static str],
    /// Drift, volatility, covariance and the drift's standard error.
    pub estimates: RandomWalkSummary,
}

/// Builds the checked model of `kind` from the `[model]` settings.
pub fn build_model(config: &ModelConfig, kind: ModelKind) -> Result<Box<dyn MortalityModel>> {
    match config.closure {
        ClosureKind::Kannisto => {}
    }
    Ok(match kind {
        ModelKind::LeeCarter => {
            let method = match config.method_for(kind) {
                FitMethod::Svd => LeeCarterMethod::Svd,
                _ => LeeCarterMethod::Poisson,
            };
            Box::new(
                LeeCarterParams {
                    method,
                    refit_kt: config.refit_kt && method == LeeCarterMethod::Svd,
                    closure_fit_ages: config.closure_fit_ages,
                    max_age: config.max_age,
                    tolerance: config.tolerance,
                    max_iterations: config.max_iterations,
                }
                .check()?,
            )
        }
        ModelKind::Cbd => Box::new(
            CbdParams {
                closure_fit_ages: config.closure_fit_ages,
                max_age: config.max_age,
                tolerance: config.tolerance,
                max_iterations: config.max_iterations,
            }
            .check()?,
        ),
        ModelKind::Apc => Box::new(
            ApcParams {
                min_cohort_cells: config.min_cohort_cells,
                cohort_series: config.cohort_series,
                closure_fit_ages: config.closure_fit_ages,
                max_age: config.max_age,
                tolerance: config.tolerance,
                max_iterations: config.max_iterations,
            }
            .check()?,
        ),
        ModelKind::RenshawHaberman => Box::new(
            RenshawHabermanParams {
                loading: config.cohort_loading,
                min_cohort_cells: config.min_cohort_cells,
                cohort_series: config.cohort_series,
                closure_fit_ages: config.closure_fit_ages,
                max_age: config.max_age,
                tolerance: config.tolerance,
                max_iterations: config.max_iterations,
            }
            .check()?,
        ),
        ModelKind::M6 | ModelKind::M7 => Box::new(
            CbdCohortParams {
                variant: if kind == ModelKind::M6 {
                    CbdCohortVariant::M6
                } else {
                    CbdCohortVariant::M7
                },
                min_cohort_cells: config.min_cohort_cells,
                cohort_series: config.cohort_series,
                closure_fit_ages: config.closure_fit_ages,
                max_age: config.max_age,
                tolerance: config.tolerance,
                max_iterations: config.max_iterations,
            }
            .check()?,
        ),
    })
}

/// Fits every configured kind to one population.
pub fn fit_population(config: &ModelConfig, population: &Population) -> Result<Vec<ModelFit>> {
    config
        .kinds()
        .into_iter()
        .map(|kind| {
            let model = build_model(config, kind)?.fit(population)?;
            let random_walk = RandomWalk::estimate(model.factors())?;
            Ok(ModelFit { model, random_walk })
        })
        .collect()
}

impl FitSet {
    /// Fits every configured kind to every population of `experience`.
    pub fn fit(config: &ModelConfig, experience: &Experience) -> Result<FitSet> {
        let mut fits = Vec::new();
        for population in &experience.populations {
            fits.extend(fit_population(config, population)?);
        }
        Ok(FitSet { fits })
    }

    /// Whether more than one kind was fitted (files then carry a `model` column).
    pub fn several_kinds(&self) -> bool {
        self.fits
            .iter()
            .any(|f| f.model.name() != self.fits[0].model.name())
    }

    /// The fits of each sex ranked by BIC, lowest first.
    pub fn ranking(&self) -> Vec<RankEntry> {
        let mut sexes: Vec<Sex> = self.fits.iter().map(|f| f.model.sex()).collect();
        sexes.dedup();
        let mut out = Vec::new();
        for sex in sexes {
            let mut group: Vec<&ModelFit> =
                self.fits.iter().filter(|f| f.model.sex() == sex).collect();
            group.sort_by(|a, b| {
                a.model
                    .diagnostics()
                    .bic
                    .total_cmp(&b.model.diagnostics().bic)
            });
            let best = group[0].model.diagnostics().bic;
            out.extend(group.iter().enumerate().map(|(i, f)| RankEntry {
                sex,
                rank: i + 1,
                model: f.model.name(),
                method: f.model.method(),
                bic: f.model.diagnostics().bic,
                delta_bic: f.model.diagnostics().bic - best,
            }));
        }
        out
    }

    /// The `fit.json` document.
    pub fn document(&self) -> FitDocument {
        let fits = self
            .fits
            .iter()
            .map(|f| {
                let m = &f.model;
                let d = m.diagnostics();
                FitRecord {
                    model: m.name(),
                    method: m.method(),
                    sex: m.sex(),
                    ages: [m.ages().first, m.ages().last],
                    years: [m.years().first, m.years().last],
                    max_age: m.max_age(),
                    parameters: m.parameters_json(),
                    log_likelihood: d.log_likelihood,
                    deviance: d.deviance,
                    parameter_count: d.parameters,
                    observations: d.observations,
                    aic: d.aic,
                    bic: d.bic,
                    iterations: d.iterations,
                    time_series: TimeSeriesRecord {
                        kind: "random-walk-with-drift",
                        factors: m.factor_names(),
                        estimates: f.random_walk.summary(),
                    },
                    cohort_time_series: m.cohort_effects().map(|c| c.series.summary()),
                }
            })
            .collect();
        FitDocument {
            version: crate::VERSION,
            fits,
            ranking: self.several_kinds().then(|| self.ranking()),
        }
    }
}
