//! Parameter uncertainty: the estimated drift, or the whole fit, varies by scenario.
//!
//! Process risk alone (innovations around a known drift) understates long-horizon spread,
//! because the drift itself is estimated from a few decades. Two published remedies are
//! offered: draw the drift from its estimation distribution, or re-estimate everything on
//! resampled deaths (semi-parametric Poisson bootstrap, Brouhns, Denuit & Van Keilegom
//! 2005). A bootstrap refit costs milliseconds, so a fixed pool of replicates is shared
//! by the scenarios (scenario s uses replicate s mod B) rather than one refit each.

use std::sync::Arc;

use nalgebra::{DMatrix, DVector};
use rand::RngExt;
use rand_distr::{Poisson, StandardNormal};

use crate::data::{Population, Sex};
use crate::error::{Error, Result};
use crate::models::{FittedModel, MortalityModel};
use crate::projection::joint::JointBasis;
use crate::projection::streams::{Purpose, stream};

/// Which parameter uncertainty the scenarios carry.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Uncertainty {
    /// The estimated drift and fit are taken as known.
    None,
    /// Drift drawn once per scenario from N(d̂, Σ̂ / (T − 1)).
    Drift,
    /// Poisson bootstrap of the deaths, refit and re-estimated, with this many replicates.
    Bootstrap {
        /// Number of replicates B; scenario s uses replicate s mod B.
        samples: usize,
    },
}

/// What a bootstrap refit needs: each sex's model specification and experience, in the
/// same order as the fitted models.
pub struct BootstrapSource {
    /// Checked model specifications, one per sex.
    pub models: Vec<Arc<dyn MortalityModel>>,
    /// The experience each sex was fitted to.
    pub populations: Vec<Population>,
}

/// The drift of `scenario`: d̂ + L z / √(T − 1) with z standard normal from the scenario's
/// drift stream, so that d ~ N(d̂, Σ̂ / (T − 1)).
pub fn drawn_drift(basis: &JointBasis, seed: u64, scenario: u64) -> DVector<f64> {
    let mut rng = stream(seed, scenario, Purpose::Drift);
    let z = DVector::from_fn(basis.dims(), |_, _| rng.sample::<f64, _>(StandardNormal));
    let scale = (basis.walk().steps as f64).sqrt().recip();
    &basis.walk().drift + basis.cholesky() * z * scale
}

/// Expected deaths of the fitted model on the fitted grid: E^c · m with
/// m = −ln(1 − q) (constant force within each cell, the project's convention). A cohort
/// model's cell (x, t) takes the fitted γ_{t−x} of its own cohort.
pub fn fitted_deaths(model: &dyn FittedModel, population: &Population) -> Result<DMatrix<f64>> {
    let ages = model.ages();
    let years = model.years();
    let population = population.restrict(ages, years)?;
    let width = (model.max_age() - ages.first + 1) as usize;
    let mut q = vec![0.0; width];
    let mut expected = DMatrix::zeros(ages.len(), years.len());
    let cohorts = model.cohort_effects();
    for (j, year) in years.iter().enumerate() {
        let k: Vec<f64> = model.factors().column(j).iter().copied().collect();
        match &cohorts {
            Some(c) => model.cohort_rates(&k, &c.by_age(year, ages.first), &mut q),
            None => model.rates(&k, &mut q),
        }
        for i in 0..ages.len() {
            let m = -(-q[i]).ln_1p();
            let d = population.exposure[(i, j)] * m;
            if !(d.is_finite() && d >= 0.0) {
                return Err(Error::Numerical(format!(
                    "sex {}, year {year}, age {}: fitted rate q = {} gives no finite expected deaths for the bootstrap",
                    population.sex,
                    ages.first + i as i32,
                    q[i]
                )));
            }
            expected[(i, j)] = d;
        }
    }
    Ok(expected)
}

/// Bootstrap replicate `replicate`: deaths resampled as D* ~ Poisson(fitted deaths) for
/// every sex from the replicate's own stream, each sex refitted, and the joint random walk
/// re-estimated on the refitted indices.
pub fn bootstrap_basis(
    central: &JointBasis,
    source: &BootstrapSource,
    seed: u64,
    replicate: u64,
) -> Result<JointBasis> {
    let n = central.sexes().len();
    if source.models.len() != n || source.populations.len() != n {
        return Err(Error::model(
            "bootstrap",
            format!("needs a model specification and experience for each of the {n} sexes"),
        ));
    }
    let mut rng = stream(seed, replicate, Purpose::Bootstrap);
    let mut fits: Vec<(Sex, Arc<dyn FittedModel>)> = Vec::with_capacity(n);
    for (i, &sex) in central.sexes().iter().enumerate() {
        let model = central.model(i);
        let population = source.populations[i].restrict(model.ages(), model.years())?;
        if population.sex != sex {
            return Err(Error::model(
                "bootstrap",
                format!(
                    "experience for sex {} given where sex {sex} was expected",
                    population.sex
                ),
            ));
        }
        let expected = fitted_deaths(model, &population)?;
        let deaths = expected.map(|lambda| {
            if lambda > 0.0 {
                // `Poisson::new` only rejects non-positive or non-finite means, excluded here.
                Poisson::new(lambda).map(|p| rng.sample(p)).unwrap_or(0.0)
            } else {
                0.0
            }
        });
        let resampled = Population::new(
            sex,
            population.ages,
            population.years,
            deaths,
            population.exposure.clone(),
        )?;
        let refit = source.models[i].fit(&resampled).map_err(|e| {
            Error::model(
                model.name(),
                format!("bootstrap replicate {replicate}, sex {sex}: refit failed: {e}"),
            )
        })?;
        fits.push((sex, Arc::from(refit)));
    }
    JointBasis::new(fits).map_err(|e| {
        Error::model(
            "bootstrap",
            format!("replicate {replicate}: random walk of the refitted indices: {e}"),
        )
    })
}
