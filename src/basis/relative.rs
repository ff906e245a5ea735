//! The relative model: the book's log rate is the population's fitted log rate shifted by
//! a level, a slope by age and a yearly spread,
//! log m_book(x, t) = log m̂_pop(x, t) + α0 + α1 (x − x̄) + κ_t.
//!
//! Estimation in two stages, both Poisson maximum likelihood with offset log(E · m̂_pop):
//! (α0, α1) by Newton–Raphson (the IRLS of a Poisson GLM with log link), their covariance
//! the inverse of the information matrix Σ μ z zᵀ, z = (1, x − x̄); then κ_t as year
//! factors on the offset plus the fitted level, whose maximum-likelihood value is closed:
//! κ̂_t = log(Σ_x D_{x,t} / Σ_x μ̂_{x,t}). The κ̂_t are then fitted as a mean-zero AR(1)
//! ([`SpreadAr1`]). A κ̂_t carries Poisson sampling noise of variance ≈ 1/D_t (delta
//! method) besides the true spread; the AR(1) is fitted to κ̂_t as they are, so σ̂ holds
//! both and the projected spread errs wide, and the noise is reported beside it.

use crate::basis::book_experience::BookCell;
use crate::error::{Error, Result};
use crate::series::SpreadAr1;

/// Iterations of the level fit before it is called divergent.
const MAX_ITERATIONS: usize = 100;

/// Largest Newton step, in either coefficient, at which the level fit has converged.
const TOLERANCE: f64 = 1e-12;

/// The fitted level and slope of the book against the population.
#[derive(Debug, Clone, PartialEq)]
pub struct LevelFit {
    /// α0: the book's log-rate level against the population at x̄.
    pub level: f64,
    /// α1: change of the log-rate gap per year of age.
    pub slope: f64,
    /// Inverse information matrix of (α0, α1).
    pub covariance: [[f64; 2]; 2],
    /// x̄, the mean of the population's fitted ages.
    pub mean_age: f64,
    /// Poisson log-likelihood at the estimates, with the log D! terms.
    pub log_likelihood: f64,
    /// Deviance against the saturated model.
    pub deviance: f64,
    /// Cells fitted.
    pub observations: usize,
    /// Newton iterations taken.
    pub iterations: usize,
}

/// The year factors κ̂_t and their sampling noise.
#[derive(Debug, Clone, PartialEq)]
pub struct YearSpread {
    /// Calendar years, in order.
    pub years: Vec<i32>,
    /// κ̂_t per year.
    pub values: Vec<f64>,
    /// Approximate sampling variance of each κ̂_t, 1/D_t.
    pub sampling_variance: Vec<f64>,
}

/// The whole relative fit: level, year factors and their AR(1).
#[derive(Debug, Clone, PartialEq)]
pub struct RelativeFit {
    /// α0, α1 and their covariance.
    pub level: LevelFit,
    /// κ̂_t by year.
    pub years: YearSpread,
    /// The spread's mean-zero AR(1).
    pub spread: SpreadAr1,
    /// Lowest and highest age of the book's experience: beyond them the slope is held at
    /// its value at the nearer end rather than extrapolated.
    pub ages: (i32, i32),
}

impl RelativeFit {
    /// Fits the relative model to the book's `cells`; `mean_age` is x̄.
    pub fn fit(cells: &[BookCell], mean_age: f64) -> Result<RelativeFit> {
        let level = fit_level(cells, mean_age)?;
        let years = year_factors(cells, &level)?;
        let spread = SpreadAr1::fit(&years.values)?;
        let ages = cells.iter().fold((i32::MAX, i32::MIN), |(lo, hi), c| {
            (lo.min(c.age), hi.max(c.age))
        });
        Ok(RelativeFit {
            level,
            years,
            spread,
            ages,
        })
    }

    /// Last calendar year of the book's experience (where the spread's projection starts).
    pub fn last_year(&self) -> i32 {
        *self.years.years.last().unwrap_or(&i32::MIN)
    }

    /// The age term α1 (x − x̄) at `age`, with x clamped to the book's ages.
    pub fn age_term(&self, slope: f64, age: i32) -> f64 {
        let x = age.clamp(self.ages.0, self.ages.1) as f64;
        slope * (x - self.level.mean_age)
    }
}

/// Poisson log-likelihood term of one cell with mean `mu`.
fn log_likelihood_term(deaths: f64, mu: f64) -> f64 {
    let log_term = if deaths > 0.0 { deaths * mu.ln() } else { 0.0 };
    log_term - mu - libm::lgamma(deaths + 1.0)
}

/// Deviance term of one cell with mean `mu`.
fn deviance_term(deaths: f64, mu: f64) -> f64 {
    let log_term = if deaths > 0.0 {
        deaths * (deaths / mu).ln()
    } else {
        0.0
    };
    2.0 * (log_term - (deaths - mu))
}

/// α0 and α1 by Newton–Raphson on the Poisson likelihood with offset log(E · m̂_pop).
pub fn fit_level(cells: &[BookCell], mean_age: f64) -> Result<LevelFit> {
    let deaths: f64 = cells.iter().map(|c| c.deaths).sum();
    let expected: f64 = cells.iter().map(BookCell::expected).sum();
    if !(deaths > 0.0 && expected > 0.0) {
        return Err(Error::model(
            "basis",
            "the book's experience has no deaths: its level cannot be estimated",
        ));
    }
    let distinct_ages = cells.iter().any(|c| c.age != cells[0].age);
    if !distinct_ages {
        return Err(Error::model(
            "basis",
            "the book's experience holds a single age: its slope by age cannot be estimated",
        ));
    }
    let log_likelihood = |theta: [f64; 2]| -> f64 {
        cells
            .iter()
            .map(|c| {
                let mu = c.expected() * (theta[0] + theta[1] * (c.age as f64 - mean_age)).exp();
                log_likelihood_term(c.deaths, mu)
            })
            .sum()
    };
    // The intercept-only estimate is exact for α1 = 0, a good start.
    let mut theta = [(deaths / expected).ln(), 0.0];
    let mut current = log_likelihood(theta);
    for iteration in 1..=MAX_ITERATIONS {
        let (score, info) = score_and_information(cells, theta, mean_age);
        let det = info[0][0] * info[1][1] - info[0][1] * info[1][0];
        if !(det.is_finite() && det > 0.0) {
            return Err(Error::model(
                "basis",
                "the information matrix of the book's level and slope is singular",
            ));
        }
        let step = [
            (info[1][1] * score[0] - info[0][1] * score[1]) / det,
            (info[0][0] * score[1] - info[1][0] * score[0]) / det,
        ];
        // Step halving keeps each iterate an ascent (the likelihood is concave).
        let mut scale = 1.0;
        let mut next = [theta[0] + step[0], theta[1] + step[1]];
        let mut value = log_likelihood(next);
        while !(value.is_finite() && value >= current - 1e-9 * current.abs()) && scale > 1e-8 {
            scale *= 0.5;
            next = [theta[0] + scale * step[0], theta[1] + scale * step[1]];
            value = log_likelihood(next);
        }
        theta = next;
        current = value;
        if step[0].abs().max(step[1].abs()) * scale < TOLERANCE {
            let (_, info) = score_and_information(cells, theta, mean_age);
            let det = info[0][0] * info[1][1] - info[0][1] * info[1][0];
            let covariance = [
                [info[1][1] / det, -info[0][1] / det],
                [-info[1][0] / det, info[0][0] / det],
            ];
            let deviance = cells
                .iter()
                .map(|c| {
                    let mu = c.expected() * (theta[0] + theta[1] * (c.age as f64 - mean_age)).exp();
                    deviance_term(c.deaths, mu)
                })
                .sum();
            return Ok(LevelFit {
                level: theta[0],
                slope: theta[1],
                covariance,
                mean_age,
                log_likelihood: current,
                deviance,
                observations: cells.len(),
                iterations: iteration,
            });
        }
    }
    Err(Error::model(
        "basis",
        format!("the book's level and slope did not converge in {MAX_ITERATIONS} iterations"),
    ))
}

/// Score and expected information of (α0, α1) at `theta`.
fn score_and_information(
    cells: &[BookCell],
    theta: [f64; 2],
    mean_age: f64,
) -> ([f64; 2], [[f64; 2]; 2]) {
    let mut score = [0.0; 2];
    let mut info = [[0.0; 2]; 2];
    for c in cells {
        let z = c.age as f64 - mean_age;
        let mu = c.expected() * (theta[0] + theta[1] * z).exp();
        let r = c.deaths - mu;
        score[0] += r;
        score[1] += r * z;
        info[0][0] += mu;
        info[0][1] += mu * z;
        info[1][1] += mu * z * z;
    }
    info[1][0] = info[0][1];
    (score, info)
}

/// κ̂_t: the Poisson maximum-likelihood year factors on the offset log(E · m̂_pop) plus the
/// fitted level, log(Σ_x D_{x,t} / Σ_x μ̂_{x,t}).
pub fn year_factors(cells: &[BookCell], level: &LevelFit) -> Result<YearSpread> {
    let mut years: Vec<i32> = cells.iter().map(|c| c.year).collect();
    years.sort_unstable();
    years.dedup();
    let mut spread = YearSpread {
        years: years.clone(),
        values: Vec::with_capacity(years.len()),
        sampling_variance: Vec::with_capacity(years.len()),
    };
    for &year in &years {
        let (mut deaths, mut fitted) = (0.0, 0.0);
        for c in cells.iter().filter(|c| c.year == year) {
            deaths += c.deaths;
            fitted +=
                c.expected() * (level.level + level.slope * (c.age as f64 - level.mean_age)).exp();
        }
        if deaths <= 0.0 {
            return Err(Error::model(
                "basis",
                format!("the book has no deaths in {year}: that year's spread is not estimable"),
            ));
        }
        spread.values.push((deaths / fitted).ln());
        spread.sampling_variance.push(1.0 / deaths);
    }
    Ok(spread)
}
