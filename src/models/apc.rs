//! Age–period–cohort: log m(x, t) = a_x + k_t + γ_{t−x}, by Poisson maximum likelihood.
//!
//! D(x, t) ~ Poisson(E(x, t) m(x, t)). The predictor is linear in the parameters, so the
//! fit is a Poisson GLM with offset ln E and age, period and cohort factors, solved by the
//! constrained Newton iteration of [`crate::models::glm`]. Because t − x − c = 0 in every
//! cell, the model is unchanged by
//!
//! - k_t → k_t + u, a_x → a_x − u (period level),
//! - γ_c → γ_c + v, a_x → a_x − v (cohort level),
//! - γ_c → γ_c + δ (c − c̄), k_t → k_t − δ (t − t̄), a_x → a_x + δ (x − x̄) with
//!   c̄ = t̄ − x̄ (the linear trend, which age, period and cohort cannot tell apart).
//!
//! The constraints Σ_t k_t = 0, Σ_c γ_c = 0 and Σ_c (c − c̄) γ_c = 0 (sums over estimated
//! cohorts) fix u, v and δ: the period and cohort effects carry no level and the cohort
//! effect no linear trend, so a_x absorbs the overall level and the linear age–period
//! trend stays in a_x and k_t. Effective parameters: A + (T − 1) + (C − 2).

use nalgebra::DMatrix;

use crate::data::Population;
use crate::data::config::CohortSeriesKind;
use crate::error::{Error, Result};
use crate::life::closure::KannistoClosure;
use crate::models::check_fit_settings;
use crate::models::cohort::{CohortEffects, CohortGrid};
use crate::models::glm::{self, Cell, Family};
use crate::models::likelihood::measure_fit;
use crate::models::{FitBasis, FittedModel, MortalityModel};
use crate::series::CohortSeries;

const NAME: &str = "apc";

/// Unchecked age–period–cohort settings.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ApcParams {
    /// Cohorts seen in fewer cells are not estimated.
    pub min_cohort_cells: usize,
    /// Time series of the cohort index.
    pub cohort_series: CohortSeriesKind,
    /// Top fitted ages the Kannisto closure is fitted to.
    pub closure_fit_ages: usize,
    /// Highest age of the closed table.
    pub max_age: i32,
    /// Convergence tolerance on the log-likelihood increase a Newton step promises.
    pub tolerance: f64,
    /// Iteration cap; reaching it is an error.
    pub max_iterations: usize,
}

/// Checked age–period–cohort settings, ready to fit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Apc {
    params: ApcParams,
}

/// A fitted age–period–cohort model for one population.
#[derive(Debug, Clone)]
pub struct ApcFit {
    basis: FitBasis,
    /// Age pattern a_x.
    pub ax: Vec<f64>,
    /// Period index k_t as a 1 × years matrix, Σ k_t = 0.
    pub kt: DMatrix<f64>,
    /// The cohort grid: which cohorts were estimated.
    pub grid: CohortGrid,
    /// Cohort effects, every cohort of the grid (left-out ones filled).
    pub cohorts: CohortEffects,
    /// γ_{T−x} by fitted age in the last fitted year T, held by [`FittedModel::rates`];
    /// kept so that `rates` allocates nothing.
    last_year_gamma: Vec<f64>,
}

/// Checks the settings every cohort model shares; `name` is the model's.
pub(crate) fn check_common(
    name: &str,
    tolerance: f64,
    max_iterations: usize,
    closure_fit_ages: usize,
    min_cohort_cells: usize,
) -> Result<()> {
    check_fit_settings(name, tolerance, max_iterations, closure_fit_ages)?;
    if min_cohort_cells == 0 {
        return Err(Error::model(name, "min_cohort_cells must be at least 1"));
    }
    Ok(())
}

/// Checks the window against the closure settings; `name` is the model's.
pub(crate) fn check_window(
    name: &str,
    population: &Population,
    closure_fit_ages: usize,
    max_age: i32,
) -> Result<()> {
    let ages = population.ages;
    if ages.len() < 2 || population.years.len() < 2 {
        return Err(Error::model(
            name,
            format!(
                "sex {}: needs at least two ages and two years, found {} and {}",
                population.sex,
                ages.len(),
                population.years.len()
            ),
        ));
    }
    if max_age <= ages.last {
        return Err(Error::model(
            name,
            format!(
                "max_age {max_age} must be above the top fitted age {}",
                ages.last
            ),
        ));
    }
    if closure_fit_ages > ages.len() {
        return Err(Error::model(
            name,
            format!(
                "closure_fit_ages {closure_fit_ages} exceeds the {} fitted ages",
                ages.len()
            ),
        ));
    }
    Ok(())
}

impl ApcParams {
    /// Checks the settings that do not depend on the data.
    pub fn check(self) -> Result<Apc> {
        check_common(
            NAME,
            self.tolerance,
            self.max_iterations,
            self.closure_fit_ages,
            self.min_cohort_cells,
        )?;
        Ok(Apc { params: self })
    }
}

impl MortalityModel for Apc {
    fn fit(&self, population: &Population) -> Result<Box<dyn FittedModel>> {
        Ok(Box::new(self.fit_population(population)?))
    }

    fn check_population(&self, population: &Population) -> Result<()> {
        self.grid(population).map(drop)
    }
}

impl Apc {
    /// The window's checks and its cohort grid: what the fit refuses before iterating.
    fn grid(&self, population: &Population) -> Result<CohortGrid> {
        let p = &self.params;
        check_window(NAME, population, p.closure_fit_ages, p.max_age)?;
        // Two constraints on γ leave C − 2 free values; the time series needs its own
        // minimum on top.
        let needed = p.cohort_series.minimum_length().max(3);
        CohortGrid::new(
            NAME,
            population.ages,
            population.years,
            p.min_cohort_cells,
            needed,
        )
    }

    /// Fits one population.
    pub fn fit_population(&self, population: &Population) -> Result<ApcFit> {
        let p = &self.params;
        let grid = self.grid(population)?;
        let (ages, years, sex) = (population.ages, population.years, population.sex);
        let (na, nt) = (ages.len(), years.len());
        grid.require_deaths(NAME, population)?;
        let nc = grid.estimated;
        let mut cells = Vec::with_capacity(na * nt);
        for j in 0..nt {
            for i in 0..na {
                let e = population.exposure[(i, j)];
                if let Some(c) = grid.position[grid.cohort(i, j)]
                    && e > 0.0
                {
                    cells.push(Cell {
                        deaths: population.deaths[(i, j)],
                        size: e,
                        terms: [(i, 1.0), (na + j, 1.0), (na + nt + c, 1.0), (0, 0.0)],
                    });
                }
            }
        }
        let cohort_years = grid.estimated_years();
        let cbar = cohort_years.iter().sum::<f64>() / nc as f64;
        let mut constraints = DMatrix::zeros(3, na + nt + nc);
        for j in 0..nt {
            constraints[(0, na + j)] = 1.0;
        }
        for (c, year) in cohort_years.iter().enumerate() {
            constraints[(1, na + nt + c)] = 1.0;
            constraints[(2, na + nt + c)] = year - cbar;
        }
        let mut start = vec![0.0; na + nt + nc];
        for (i, a) in start.iter_mut().take(na).enumerate() {
            let (mut d, mut e) = (0.0, 0.0);
            for j in 0..nt {
                if grid.used(i, j) {
                    d += population.deaths[(i, j)];
                    e += population.exposure[(i, j)];
                }
            }
            *a = (d / e).ln();
        }
        let (theta, iterations) = glm::fit(
            Family::Poisson,
            &cells,
            &constraints,
            start,
            p.tolerance,
            p.max_iterations,
        )
        .map_err(|rule| Error::model(NAME, format!("sex {sex}: {rule}")))?;
        let ax = theta[..na].to_vec();
        let kt = DMatrix::from_row_slice(1, nt, &theta[na..na + nt]);
        let gamma = &theta[na + nt..];
        let (values, series) = grid.complete(gamma, p.cohort_series)?;
        let cohorts = CohortEffects {
            first_cohort: grid.first_cohort,
            values,
            fitted: grid.fitted_mask(),
            loading: vec![1.0; na],
            series,
        };
        let mut fit = ApcFit {
            ax,
            kt,
            grid,
            last_year_gamma: cohorts.by_age(years.last, ages.first),
            cohorts,
            basis: FitBasis::unmeasured(
                sex,
                ages,
                years,
                KannistoClosure {
                    fit_ages: p.closure_fit_ages,
                    max_age: p.max_age,
                },
            ),
        };
        fit.measure(population, iterations)?;
        Ok(fit)
    }
}

impl ApcFit {
    /// Fitted central rate m(x, t) at row `i` (age) and column `j` (year).
    pub fn central_rate(&self, i: usize, j: usize) -> f64 {
        let c = self.grid.cohort(i, j);
        (self.ax[i] + self.kt[(0, j)] + self.cohorts.values[c]).exp()
    }

    /// The fitted time series of the cohort index.
    pub fn cohort_series(&self) -> &CohortSeries {
        &self.cohorts.series
    }

    fn measure(&mut self, population: &Population, iterations: usize) -> Result<()> {
        let (na, nt) = (self.basis.ages.len(), self.basis.years.len());
        let count = na + (nt - 1) + (self.grid.estimated - 2);
        let (diagnostics, residuals) = measure_fit(
            NAME,
            self.basis.sex,
            Family::Poisson,
            &population.deaths,
            &population.exposure,
            count,
            iterations,
            |i, j| self.grid.used(i, j).then(|| self.central_rate(i, j)),
        )?;
        self.basis.record(diagnostics, residuals);
        Ok(())
    }
}

impl FittedModel for ApcFit {
    fn name(&self) -> &'static str {
        NAME
    }

    fn method(&self) -> &'static str {
        "poisson"
    }

    fn basis(&self) -> &FitBasis {
        &self.basis
    }

    fn factor_names(&self) -> &'static [&'static str] {
        &["k"]
    }

    fn factors(&self) -> &DMatrix<f64> {
        &self.kt
    }

    /// Rates with the cohort effects of the last fitted year's cohorts frozen: age x takes
    /// γ of the cohort born in `years().last − x`, whatever year the indices belong to.
    fn rates(&self, factors: &[f64], out: &mut [f64]) {
        self.cohort_rates(factors, &self.last_year_gamma, out);
    }

    fn cohort_rates(&self, factors: &[f64], gamma_by_age: &[f64], out: &mut [f64]) {
        self.cohort_rates_in(factors, gamma_by_age, 0..out.len(), out);
    }

    fn cohort_rates_in(
        &self,
        factors: &[f64],
        gamma_by_age: &[f64],
        cells: std::ops::Range<usize>,
        out: &mut [f64],
    ) {
        let k = factors[0];
        let (first, n) = (self.basis.ages.first, self.ax.len());
        let central = self.basis.closure.central_cells(first, n, cells.clone());
        let (ax, gamma) = (&self.ax[central.clone()], &gamma_by_age[central.clone()]);
        let log_rates = &mut out[central];
        for ((m, a), g) in log_rates.iter_mut().zip(ax).zip(gamma) {
            *m = a + k + g;
        }
        crate::life::exp::exp_in_place(log_rates);
        self.basis.closure.close_cells(first, n, cells, out);
    }

    fn cohort_effects(&self) -> Option<CohortEffects> {
        Some(self.cohorts.clone())
    }

    fn parameters_json(&self) -> serde_json::Value {
        serde_json::json!({
            "ax": self.ax,
            "kt": self.kt.as_slice(),
            "gamma": self.cohorts.values,
            "cohorts": self.grid.cohort_years(),
            "fitted_cohorts": self.cohorts.fitted,
        })
    }
}
