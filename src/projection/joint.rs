//! The sexes' period indices stacked into one vector and projected as one random walk.
//!
//! Female and male mortality improve together: fitting each sex's indices on its own and
//! drawing independent innovations would make the two paths drift apart far more than
//! history shows. Stacking them ([k_F, k_M] or [k1_F, k2_F, k1_M, k2_M]) and estimating a
//! single drift and innovation covariance from the stacked first differences keeps the
//! historical cross-sex correlation in every scenario.

use std::sync::Arc;

use nalgebra::{DMatrix, DVector};

use crate::projection::cohort_paths::CohortBasis;
use crate::series::random_walk::RandomWalk;

use crate::data::{Sex, Span};
use crate::error::{Error, Result};
use crate::models::FittedModel;

/// One consistent projection basis: a fitted model per sex and the joint random walk of
/// their stacked indices.
pub struct JointBasis {
    sexes: Vec<Sex>,
    models: Vec<Arc<dyn FittedModel>>,
    offsets: Vec<usize>,
    last: DVector<f64>,
    walk: RandomWalk,
    cohorts: CohortBasis,
}

impl std::fmt::Debug for JointBasis {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("JointBasis")
            .field("sexes", &self.sexes)
            .field("last", &self.last)
            .field("walk", &self.walk)
            .finish_non_exhaustive()
    }
}

impl JointBasis {
    /// Stacks the sexes' fitted indices and estimates their joint random walk.
    ///
    /// Every model must cover the same fitted years, start at the same age and close at
    /// the same `max_age`, so that one scenario is one grid of years × ages per sex.
    pub fn new(fits: Vec<(Sex, Arc<dyn FittedModel>)>) -> Result<JointBasis> {
        let Some((_, first)) = fits.first() else {
            return Err(Error::model(
                "projection",
                "needs a fitted model for at least one sex",
            ));
        };
        let (years, ages, max_age) = (first.years(), first.ages(), first.max_age());
        let mut offsets = Vec::with_capacity(fits.len() + 1);
        let mut dims = 0;
        for (sex, model) in &fits {
            let rule = if model.years() != years {
                Some(format!(
                    "sex {sex} is fitted to years {}-{} but sex {} to {}-{}; the sexes are projected together and need the same years",
                    model.years().first,
                    model.years().last,
                    fits[0].0,
                    years.first,
                    years.last
                ))
            } else if model.ages().first != ages.first || model.max_age() != max_age {
                Some(format!(
                    "sex {sex} has rates for ages {}-{} but sex {} for {}-{}; the sexes need the same first age and max_age",
                    model.ages().first,
                    model.max_age(),
                    fits[0].0,
                    ages.first,
                    max_age
                ))
            } else if model.factors().nrows() == 0
                || model.factors().nrows() != model.factor_names().len()
                || model.factors().ncols() != years.len()
            {
                Some(format!(
                    "sex {sex}: the fitted indices must have one row per index name and one column per fitted year ({} years)",
                    years.len()
                ))
            } else {
                None
            };
            if let Some(rule) = rule {
                return Err(Error::model(model.name(), rule));
            }
            offsets.push(dims);
            dims += model.factors().nrows();
        }
        offsets.push(dims);
        let mut history = DMatrix::zeros(dims, years.len());
        for ((_, model), &offset) in fits.iter().zip(&offsets) {
            let f = model.factors();
            history.view_mut((offset, 0), f.shape()).copy_from(f);
        }
        // A singular covariance (indices moving in lock-step) is factored with zero
        // columns by the estimator, so such a history still projects.
        let walk = RandomWalk::estimate(&history)?;
        let last = history.column(years.len() - 1).into_owned();
        let (sexes, models): (Vec<Sex>, Vec<Arc<dyn FittedModel>>) = fits.into_iter().unzip();
        let cohorts = CohortBasis::new(&models)?;
        Ok(JointBasis {
            sexes,
            models,
            offsets,
            last,
            walk,
            cohorts,
        })
    }

    /// The sexes, in stacking order.
    pub fn sexes(&self) -> &[Sex] {
        &self.sexes
    }

    /// The fitted model of the sex at `index`.
    pub fn model(&self, index: usize) -> &dyn FittedModel {
        self.models[index].as_ref()
    }

    /// Shared handles to the fitted models, in stacking order.
    pub fn models(&self) -> &[Arc<dyn FittedModel>] {
        &self.models
    }

    /// Where the indices of the sex at `index` sit in the stacked vector.
    pub fn range(&self, index: usize) -> std::ops::Range<usize> {
        self.offsets[index]..self.offsets[index + 1]
    }

    /// Length of the stacked index vector.
    pub fn dims(&self) -> usize {
        self.last.len()
    }

    /// The stacked indices in the last fitted year, k_T.
    pub fn last(&self) -> &DVector<f64> {
        &self.last
    }

    /// The joint random-walk estimate.
    pub fn walk(&self) -> &RandomWalk {
        &self.walk
    }

    /// The cohort effects of the sexes' models, drawn per scenario.
    pub fn cohorts(&self) -> &CohortBasis {
        &self.cohorts
    }

    /// Lower Cholesky factor L of the innovation covariance, L Lᵀ = Σ̂.
    pub fn cholesky(&self) -> &DMatrix<f64> {
        &self.walk.cholesky
    }

    /// The fitted years.
    pub fn years(&self) -> Span {
        self.models[0].years()
    }

    /// Ages of the rates: the first fitted age to `max_age`.
    pub fn rate_ages(&self) -> Span {
        Span {
            first: self.models[0].ages().first,
            last: self.models[0].max_age(),
        }
    }

    /// Innovation correlation matrix implied by Σ̂.
    pub fn correlation(&self) -> DMatrix<f64> {
        let s = &self.walk.covariance;
        DMatrix::from_fn(s.nrows(), s.ncols(), |i, j| {
            s[(i, j)] / (s[(i, i)] * s[(j, j)]).sqrt()
        })
    }

    /// Names of the stacked indices, e.g. `k1_F`.
    pub fn names(&self) -> Vec<String> {
        let mut names = Vec::with_capacity(self.dims());
        for (sex, model) in self.sexes.iter().zip(&self.models) {
            names.extend(model.factor_names().iter().map(|n| format!("{n}_{sex}")));
        }
        names
    }
}
