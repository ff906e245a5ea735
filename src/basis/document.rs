//! `basis.json`: what the book's experience says about its level, slope and spread.

use serde::Serialize;

use crate::basis::actual_expected::ActualToExpected;
use crate::basis::book_experience::BookCell;
use crate::basis::li_lee::{CommonWalk, LiLeeSex};
use crate::basis::relative::RelativeFit;
use crate::data::Sex;
use crate::series::Ar1;

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
    /// `relative` or `li-lee`.
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
    /// Under `li-lee`, the two-population fit of each sex.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub li_lee: Option<Vec<LiLeeRecord>>,
}

/// One population's own part of a Li–Lee fit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct OwnRecord {
    /// a_{x,i} by fitted age.
    pub a: Vec<f64>,
    /// b_{x,i} by fitted age.
    pub b: Vec<f64>,
    /// k_{t,i} by fitted year.
    pub k: Vec<f64>,
    /// k_{t,i}'s AR(1) with constant.
    pub ar1: Ar1,
}

/// `basis.json` → `li_lee`: one sex's two-population fit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LiLeeRecord {
    /// Sex of the lives.
    pub sex: Sex,
    /// First and last fitted age.
    pub ages: [i32; 2],
    /// First and last fitted year (those the two populations share).
    pub years: [i32; 2],
    /// B_x by fitted age.
    pub common_b: Vec<f64>,
    /// K_t by fitted year (reported; the valuation's common trend is the population
    /// model's path).
    pub common_k: Vec<f64>,
    /// K_t's random walk with drift.
    pub common_walk: CommonWalk,
    /// The index population (`data.experience`).
    pub index: OwnRecord,
    /// The book's population (`data.book_experience`).
    pub book: OwnRecord,
    /// Correlation of the two k AR(1)s' innovations.
    pub innovation_correlation: f64,
}

impl LiLeeRecord {
    /// The record of `fit`.
    pub fn new(fit: &LiLeeSex) -> LiLeeRecord {
        let c = &fit.components;
        let own = |i: usize| OwnRecord {
            a: c.level[i].as_slice().to_vec(),
            b: c.own_loading[i].as_slice().to_vec(),
            k: c.own_index[i].as_slice().to_vec(),
            ar1: fit.own[i].clone(),
        };
        LiLeeRecord {
            sex: fit.sex,
            ages: [fit.ages.first, fit.ages.last],
            years: [fit.years.first, fit.years.last],
            common_b: c.common_loading.as_slice().to_vec(),
            common_k: c.common_index.as_slice().to_vec(),
            common_walk: fit.common,
            index: own(0),
            book: own(1),
            innovation_correlation: fit.correlation,
        }
    }
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
            li_lee: None,
        }
    }

    /// The document of a Li–Lee basis: the relative fit's level, slope, covariance and
    /// actual-to-expected (comparable across kinds), `spread` the first sex's book
    /// population's own index and its AR(1), and every sex's fit in `li_lee`.
    pub fn li_lee(relative: &RelativeFit, cells: &[BookCell], fits: &[LiLeeSex]) -> BasisDocument {
        let mut document = BasisDocument::new(relative, cells);
        document.kind = "li-lee";
        if let Some(first) = fits.first() {
            let book = &first.own[1];
            document.spread.phi = book.phi;
            document.spread.sigma = book.sigma;
            document.spread.phi_standard_error = book.phi_standard_error;
            document.spread.log_likelihood = book.log_likelihood;
            document.spread.years = first.years.iter().collect();
            document.spread.values = first.components.own_index[1].as_slice().to_vec();
        }
        document.li_lee = Some(fits.iter().map(LiLeeRecord::new).collect());
        document
    }
}
