//! Li & Lee (2005)'s augmented common factor model for two large populations, per sex:
//! log m_{x,t,i} = a_{x,i} + B_x K_t + b_{x,i} k_{t,i}, i = 1 (the index population),
//! 2 (the book's).
//!
//! Fitted as in the paper, in closed form: a_{x,i} is the time average of population i's
//! log rates; B_x, K_t the first singular component of the combined population's centred
//! log rates (pooled deaths over pooled exposures), normalised to Σ B_x = 1, Σ K_t = 0;
//! b_{x,i}, k_{t,i} the first singular component of each population's residual
//! log m_{x,t,i} − a_{x,i} − B_x K_t, normalised to Σ b_{x,i} = 1. K_t is a random walk
//! with drift, each k_{t,i} an AR(1) with constant, and the two AR(1)s' innovations are
//! correlated.
//!
//! In the valuation only the gap between the populations is used: B_x K_t cancels from
//! log m_2 − log m_1 = (a_{x,2} − a_{x,1}) + b_{x,2} k_{t,2} − b_{x,1} k_{t,1}, so the common
//! trend stays the population model's and the fitted K_t is reported, not projected.

use std::path::Path;

use nalgebra::{DMatrix, DVector};
use serde::Serialize;

use crate::data::{Population, Sex, Span};
use crate::error::{Error, Result};
use crate::models::lee_carter::{centre, first_component};
use crate::series::{Ar1, RandomWalk};

/// The closed-form parameters of one sex.
#[derive(Debug, Clone, PartialEq)]
pub struct Components {
    /// a_{x,i}: each population's time-average log rate by age.
    pub level: [DVector<f64>; 2],
    /// B_x: the common factor's age loading (Σ = 1).
    pub common_loading: DVector<f64>,
    /// K_t: the common index (Σ = 0).
    pub common_index: DVector<f64>,
    /// b_{x,i}: each population's own age loading (Σ = 1).
    pub own_loading: [DVector<f64>; 2],
    /// k_{t,i}: each population's own index.
    pub own_index: [DVector<f64>; 2],
}

/// The closed-form fit of `log_rates` (population 1, population 2; ages × years) with the
/// combined population's `combined` log rates.
pub fn components(log_rates: [&DMatrix<f64>; 2], combined: &DMatrix<f64>) -> Result<Components> {
    let shape = combined.shape();
    if log_rates.iter().any(|m| m.shape() != shape) || shape.0 < 2 || shape.1 < 2 {
        return Err(Error::model(
            "li-lee",
            "the two populations' log rates must cover the same ages and years, at least two of each",
        ));
    }
    let (_, combined_centred) = centre(combined);
    let (common_loading, common_index) = normalised_component(combined_centred, "the combined")?;
    let common = &common_loading * common_index.transpose();
    let mut level = [DVector::zeros(0), DVector::zeros(0)];
    let mut own_loading = level.clone();
    let mut own_index = level.clone();
    for (i, rates) in log_rates.iter().enumerate() {
        let (a, centred) = centre(rates);
        let residual = centred - &common;
        let (b, k) = normalised_component(residual, ["the index", "the book's"][i])?;
        level[i] = a;
        own_loading[i] = b;
        own_index[i] = k;
    }
    Ok(Components {
        level,
        common_loading,
        common_index,
        own_loading,
        own_index,
    })
}

/// [`first_component`] of `matrix`, or an error naming `whose` population it failed for.
fn normalised_component(matrix: DMatrix<f64>, whose: &str) -> Result<(DVector<f64>, DVector<f64>)> {
    first_component(matrix)?.ok_or_else(|| {
        Error::model(
            "li-lee",
            format!(
                "the leading age pattern of {whose} population's log rates sums to zero (or \
                 there is none), so it cannot be normalised to sum to 1"
            ),
        )
    })
}

/// The common index's random walk with drift, as reported.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct CommonWalk {
    /// Drift d̂ = (K_T − K_1) / (T − 1).
    pub drift: f64,
    /// σ̂_K of the yearly steps (divisor T − 2).
    pub sigma: f64,
    /// Standard error of the drift, σ̂_K / √(T − 1).
    pub drift_standard_error: f64,
}

/// One sex's fitted Li–Lee model.
#[derive(Debug, Clone, PartialEq)]
pub struct LiLeeSex {
    /// Sex of the lives.
    pub sex: Sex,
    /// Fitted ages.
    pub ages: Span,
    /// Fitted years: those both populations hold in the population's window.
    pub years: Span,
    /// a, B, K, b, k.
    pub components: Components,
    /// K_t's random walk with drift.
    pub common: CommonWalk,
    /// Each population's k_t AR(1) with constant.
    pub own: [Ar1; 2],
    /// Correlation of the two AR(1)s' innovations.
    pub correlation: f64,
}

impl LiLeeSex {
    /// Fits one sex from the index population's and the book population's experience on
    /// the same ages and years; `files` name them in errors.
    pub fn fit(populations: [&Population; 2], files: [&Path; 2]) -> Result<LiLeeSex> {
        let [first, second] = populations;
        if first.ages != second.ages || first.years != second.years || first.sex != second.sex {
            return Err(Error::model(
                "li-lee",
                "the two populations must be fitted on the same sex, ages and years",
            ));
        }
        let log_first = log_rates(first, files[0])?;
        let log_second = log_rates(second, files[1])?;
        let combined = (&first.deaths + &second.deaths)
            .zip_map(&(&first.exposure + &second.exposure), |d, e| (d / e).ln());
        let components = components([&log_first, &log_second], &combined)?;
        let walk = RandomWalk::estimate(&DMatrix::from_row_slice(
            1,
            components.common_index.len(),
            components.common_index.as_slice(),
        ))?;
        let sigma = walk.covariance[(0, 0)].sqrt();
        let common = CommonWalk {
            drift: walk.drift[0],
            sigma,
            drift_standard_error: walk.drift_covariance[(0, 0)].sqrt(),
        };
        let own = [
            Ar1::fit(components.own_index[0].as_slice())?,
            Ar1::fit(components.own_index[1].as_slice())?,
        ];
        let correlation = own[0].residual_correlation(&own[1])?;
        Ok(LiLeeSex {
            sex: first.sex,
            ages: first.ages,
            years: first.years,
            components,
            common,
            own,
            correlation,
        })
    }

    /// log m_book − log m_index at fitted-age row `row` (clamped to the fitted ages) with
    /// own indices `k` = (k_{t,1}, k_{t,2}).
    pub fn log_ratio(&self, row: usize, k: [f64; 2]) -> f64 {
        let c = &self.components;
        let row = row.min(c.common_loading.len() - 1);
        c.level[1][row] - c.level[0][row] + c.own_loading[1][row] * k[1]
            - c.own_loading[0][row] * k[0]
    }

    /// Row of `age` among the fitted ages, ages beyond them held at the nearer end.
    pub fn row(&self, age: i32) -> usize {
        (age.clamp(self.ages.first, self.ages.last) - self.ages.first) as usize
    }

    /// The fitted own indices in `year` (held at the first fitted year before it); `None`
    /// after the last fitted year.
    pub fn fitted_indices(&self, year: i32) -> Option<[f64; 2]> {
        if year > self.years.last {
            return None;
        }
        let j = (year.max(self.years.first) - self.years.first) as usize;
        let k = &self.components.own_index;
        Some([k[0][j], k[1][j]])
    }
}

/// log(D / E) of every cell, or an error naming `file` and the first cell where it is
/// undefined.
fn log_rates(population: &Population, file: &Path) -> Result<DMatrix<f64>> {
    let mut out = DMatrix::zeros(population.ages.len(), population.years.len());
    for (j, year) in population.years.iter().enumerate() {
        for (i, age) in population.ages.iter().enumerate() {
            let (d, e) = (population.deaths[(i, j)], population.exposure[(i, j)]);
            if e <= 0.0 || d <= 0.0 {
                let column = if e <= 0.0 { "exposure" } else { "deaths" };
                return Err(Error::File {
                    file: file.to_path_buf(),
                    rule: format!(
                        "sex {}, age {age}, year {year}: column `{column}` is zero, so the log \
                         death rate is undefined; `[basis] kind = \"li-lee\"` is for two large \
                         populations with deaths in every fitted cell",
                        population.sex
                    ),
                });
            }
            out[(i, j)] = (d / e).ln();
        }
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn population(deaths: f64) -> Population {
        let (ages, years) = (Span::new(60, 62).unwrap(), Span::new(2000, 2004).unwrap());
        let exposure = DMatrix::from_element(3, 5, 1000.0);
        let deaths = DMatrix::from_fn(3, 5, |i, j| {
            if (i, j) == (1, 2) {
                deaths
            } else {
                10.0 + (i * 5 + j) as f64
            }
        });
        Population::new(Sex::M, ages, years, deaths, exposure).unwrap()
    }

    #[test]
    fn a_cell_without_deaths_is_refused_naming_the_file_and_cell() {
        let (good, empty) = (population(12.0), population(0.0));
        let err = LiLeeSex::fit(
            [&good, &empty],
            [Path::new("index.csv"), Path::new("second.csv")],
        )
        .unwrap_err()
        .to_string();
        assert!(err.contains("second.csv"), "{err}");
        assert!(err.contains("age 61, year 2002"), "{err}");
        assert!(err.contains("`deaths`"), "{err}");
    }
}
