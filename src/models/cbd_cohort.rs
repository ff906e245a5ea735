//! The CBD cohort extensions M6 and M7 of Cairns et al. (2009), by binomial maximum
//! likelihood on initial exposure E0 = Ec + D/2 (common practice).
//!
//! - M6: logit q(x, t) = k1_t + (x − x̄) k2_t + γ_{t−x};
//! - M7: M6 + k3_t ((x − x̄)² − σ̂²), σ̂² the mean of (x − x̄)² over the fitted ages.
//!
//! Both are linear in the parameters, hence binomial GLMs solved by the constrained Newton
//! iteration of [`crate::models::glm`]. Writing s_t = t − x̄ − c̄ (c̄ the mean estimated
//! cohort), a cohort effect of the form α + β (c − c̄) adds α + β s_t − β (x − x̄) to every
//! cell's predictor, so it is the same model as k1_t → k1_t + α + β s_t, k2_t → k2_t − β.
//! Cairns et al. (2009) remove it with Σ_c γ_c = 0 and Σ_c c γ_c = 0: the level and
//! linear trend of the cohort effect move into the period indices (the level and a linear
//! time trend into k1, the slope into k2). For M7 a quadratic κ (c − c̄)² is likewise
//! κ (s_t² + σ̂²) − 2 κ s_t (x − x̄) + κ ((x − x̄)² − σ̂²), absorbed by k1, k2 and k3, and
//! the third constraint Σ_c c² γ_c = 0 removes it. Sums run over the estimated cohorts.
//! Effective parameters: 2T + C − 2 (M6) and 3T + C − 3 (M7).

use nalgebra::DMatrix;

use crate::data::Population;
use crate::data::config::CohortSeriesKind;
use crate::error::{Error, Result};
use crate::life::closure::KannistoClosure;
use crate::models::apc::{check_common, check_window};
use crate::models::cohort::{CohortEffects, CohortGrid};
use crate::models::glm::{self, Cell, Family, logistic, softplus};
use crate::models::likelihood::measure_fit;
use crate::models::{FitBasis, FittedModel, MortalityModel};

/// Which of the two cohort extensions.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CbdCohortVariant {
    /// M6: level, slope and cohort.
    M6,
    /// M7: M6 plus a curvature index k3.
    M7,
}

impl CbdCohortVariant {
    /// The name used in files.
    pub fn name(self) -> &'static str {
        match self {
            CbdCohortVariant::M6 => "m6",
            CbdCohortVariant::M7 => "m7",
        }
    }

    /// Number of period indices.
    fn indices(self) -> usize {
        match self {
            CbdCohortVariant::M6 => 2,
            CbdCohortVariant::M7 => 3,
        }
    }
}

/// Unchecked M6/M7 settings.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CbdCohortParams {
    /// M6 or M7.
    pub variant: CbdCohortVariant,
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

/// Checked M6/M7 settings, ready to fit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CbdCohort {
    params: CbdCohortParams,
}

/// A fitted M6 or M7 model for one population.
#[derive(Debug, Clone)]
pub struct CbdCohortFit {
    variant: CbdCohortVariant,
    basis: FitBasis,
    /// Mean fitted age x̄.
    pub xbar: f64,
    /// Mean of (x − x̄)² over the fitted ages (used by M7).
    pub sigma2: f64,
    /// Period indices: rows k1, k2 (and k3 for M7), one column per year.
    pub factors: DMatrix<f64>,
    /// The cohort grid: which cohorts were estimated.
    pub grid: CohortGrid,
    /// Cohort effects, every cohort of the grid (left-out ones filled).
    pub cohorts: CohortEffects,
    /// γ_{T−x} by fitted age in the last fitted year T, held by [`FittedModel::rates`];
    /// kept so that `rates` allocates nothing.
    last_year_gamma: Vec<f64>,
}

impl CbdCohortParams {
    /// Checks the settings that do not depend on the data.
    pub fn check(self) -> Result<CbdCohort> {
        check_common(
            self.variant.name(),
            self.tolerance,
            self.max_iterations,
            self.closure_fit_ages,
            self.min_cohort_cells,
        )?;
        Ok(CbdCohort { params: self })
    }
}

impl MortalityModel for CbdCohort {
    fn fit(&self, population: &Population) -> Result<Box<dyn FittedModel>> {
        Ok(Box::new(self.fit_population(population)?))
    }

    fn check_population(&self, population: &Population) -> Result<()> {
        self.grid(population).map(drop)
    }
}

impl CbdCohort {
    /// The window's checks and its cohort grid: what the fit refuses before iterating.
    fn grid(&self, population: &Population) -> Result<CohortGrid> {
        let p = &self.params;
        let name = p.variant.name();
        let (ages, years, sex) = (population.ages, population.years, population.sex);
        let (na, nk) = (ages.len(), p.variant.indices());
        if na < nk {
            return Err(Error::model(
                name,
                format!("sex {sex}: {nk} period indices need at least {nk} ages, found {na}"),
            ));
        }
        check_window(name, population, p.closure_fit_ages, p.max_age)?;
        let needed = p.cohort_series.minimum_length().max(nk + 1);
        CohortGrid::new(name, ages, years, p.min_cohort_cells, needed)
    }

    /// Fits one population.
    pub fn fit_population(&self, population: &Population) -> Result<CbdCohortFit> {
        let p = &self.params;
        let name = p.variant.name();
        let grid = self.grid(population)?;
        let (ages, years, sex) = (population.ages, population.years, population.sex);
        let (na, nt, nk) = (ages.len(), years.len(), p.variant.indices());
        grid.require_deaths(name, population)?;
        let nc = grid.estimated;
        let xbar = (f64::from(ages.first) + f64::from(ages.last)) / 2.0;
        let centred: Vec<f64> = ages.iter().map(|x| f64::from(x) - xbar).collect();
        let sigma2 = centred.iter().map(|z| z * z).sum::<f64>() / na as f64;
        let initial = population.initial_exposure();
        let mut cells = Vec::with_capacity(na * nt);
        for j in 0..nt {
            for i in 0..na {
                let (d, n) = (population.deaths[(i, j)], initial[(i, j)]);
                if d > n {
                    return Err(Error::model(
                        name,
                        format!(
                            "sex {sex}, age {}, year {}: deaths {d} exceed the initial \
                             exposure {n} (E0 = Ec + D/2)",
                            ages.first + i as i32,
                            years.first + j as i32
                        ),
                    ));
                }
                let Some(c) = grid.position[grid.cohort(i, j)] else {
                    continue;
                };
                if n <= 0.0 {
                    continue;
                }
                let z = centred[i];
                let curvature = if nk == 3 {
                    (2 * nt + j, z * z - sigma2)
                } else {
                    (0, 0.0)
                };
                cells.push(Cell {
                    deaths: d,
                    size: n,
                    terms: [(j, 1.0), (nt + j, z), curvature, (nk * nt + c, 1.0)],
                });
            }
        }
        let cohort_years = grid.estimated_years();
        let cbar = cohort_years.iter().sum::<f64>() / nc as f64;
        let mut constraints = DMatrix::zeros(nk, nk * nt + nc);
        for (c, year) in cohort_years.iter().enumerate() {
            let s = year - cbar;
            constraints[(0, nk * nt + c)] = 1.0;
            constraints[(1, nk * nt + c)] = s;
            if nk == 3 {
                constraints[(2, nk * nt + c)] = s * s;
            }
        }
        let mut start = vec![0.0; nk * nt + nc];
        for (j, k1) in start.iter_mut().take(nt).enumerate() {
            let (mut d, mut n) = (0.0, 0.0);
            for i in 0..na {
                if grid.used(i, j) {
                    d += population.deaths[(i, j)];
                    n += initial[(i, j)];
                }
            }
            *k1 = (d / (n - d)).ln();
        }
        let (theta, iterations) = glm::fit(
            Family::Binomial,
            &cells,
            &constraints,
            start,
            p.tolerance,
            p.max_iterations,
        )
        .map_err(|rule| Error::model(name, format!("sex {sex}: {rule}")))?;
        let factors = DMatrix::from_row_slice(nk, nt, &theta[..nk * nt]);
        let (values, series) = grid.complete(&theta[nk * nt..], p.cohort_series)?;
        let cohorts = CohortEffects {
            first_cohort: grid.first_cohort,
            values,
            fitted: grid.fitted_mask(),
            loading: vec![1.0; na],
            series,
        };
        let mut fit = CbdCohortFit {
            variant: p.variant,
            xbar,
            sigma2,
            factors,
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
        fit.measure(population, &initial, iterations)?;
        Ok(fit)
    }
}

impl CbdCohortFit {
    /// M6 or M7.
    pub fn variant(&self) -> CbdCohortVariant {
        self.variant
    }

    /// Linear predictor logit q at age row `i` for period indices `k` and cohort effect `g`.
    fn eta(&self, i: usize, k: &[f64], g: f64) -> f64 {
        let z = f64::from(self.basis.ages.first) + i as f64 - self.xbar;
        let mut eta = k[0] + z * k[1] + g;
        if k.len() > 2 {
            eta += k[2] * (z * z - self.sigma2);
        }
        eta
    }

    /// Fitted one-year rate q(x, t) at row `i` (age) and column `j` (year).
    pub fn death_rate(&self, i: usize, j: usize) -> f64 {
        let k: Vec<f64> = self.factors.column(j).iter().copied().collect();
        let g = self.cohorts.values[self.grid.cohort(i, j)];
        logistic(self.eta(i, &k, g))
    }

    fn measure(
        &mut self,
        population: &Population,
        initial: &DMatrix<f64>,
        iterations: usize,
    ) -> Result<()> {
        let nt = self.basis.years.len();
        let nk = self.variant.indices();
        let count = nk * nt + self.grid.estimated - nk;
        let (diagnostics, residuals) = measure_fit(
            self.variant.name(),
            self.basis.sex,
            Family::Binomial,
            &population.deaths,
            initial,
            count,
            iterations,
            |i, j| self.grid.used(i, j).then(|| self.death_rate(i, j)),
        )?;
        self.basis.record(diagnostics, residuals);
        Ok(())
    }
}

impl FittedModel for CbdCohortFit {
    fn name(&self) -> &'static str {
        self.variant.name()
    }

    fn method(&self) -> &'static str {
        "binomial"
    }

    fn basis(&self) -> &FitBasis {
        &self.basis
    }

    fn factor_names(&self) -> &'static [&'static str] {
        match self.variant {
            CbdCohortVariant::M6 => &["k1", "k2"],
            CbdCohortVariant::M7 => &["k1", "k2", "k3"],
        }
    }

    fn factors(&self) -> &DMatrix<f64> {
        &self.factors
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
        let (first, n) = (self.basis.ages.first, self.basis.ages.len());
        for i in self.basis.closure.central_cells(first, n, cells.clone()) {
            // softplus(η) = −ln(1 − q): the central rate the closure expects.
            out[i] = softplus(self.eta(i, factors, gamma_by_age[i]));
        }
        self.basis.closure.close_cells(first, n, cells, out);
    }

    fn cohort_effects(&self) -> Option<CohortEffects> {
        Some(self.cohorts.clone())
    }

    fn parameters_json(&self) -> serde_json::Value {
        let row = |r: usize| -> Vec<f64> { self.factors.row(r).iter().copied().collect() };
        let mut out = serde_json::json!({
            "k1": row(0),
            "k2": row(1),
            "xbar": self.xbar,
            "gamma": self.cohorts.values,
            "cohorts": self.grid.cohort_years(),
            "fitted_cohorts": self.cohorts.fitted,
        });
        if self.variant == CbdCohortVariant::M7 {
            out["k3"] = serde_json::json!(row(2));
            out["sigma2"] = serde_json::json!(self.sigma2);
        }
        out
    }
}
