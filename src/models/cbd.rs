//! Cairns–Blake–Dowd (CBD, "M5"): logit q(x, t) = k1_t + (x − x̄) k2_t.
//!
//! With no age parameters, each year is its own two-parameter binomial regression of
//! deaths on initial exposure E0 = Ec + D/2 (common practice), fitted by Newton–Raphson
//! (for the canonical logit link this is the same as iteratively reweighted least
//! squares). x̄ is the mean of the fitted ages, so k1 is the level at the centre of the
//! age range and k2 the slope. Above the top fitted age the table is closed by the
//! Kannisto law fitted to the model's own top rates, as for every model, rather than by
//! extending the logit-linear age pattern.

use nalgebra::DMatrix;

use crate::data::Population;
use crate::error::{Error, Result};
use crate::life::closure::KannistoClosure;
use crate::models::check_fit_settings;
use crate::models::glm::Family;
use crate::models::likelihood::measure_fit;
use crate::models::{FitBasis, FittedModel, MortalityModel};

const NAME: &str = "cbd";

/// Unchecked CBD settings.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CbdParams {
    /// Top fitted ages the Kannisto closure is fitted to.
    pub closure_fit_ages: usize,
    /// Highest age of the closed table.
    pub max_age: i32,
    /// Convergence tolerance on the change in each year's log-likelihood.
    pub tolerance: f64,
    /// Newton iteration cap per year; reaching it is an error.
    pub max_iterations: usize,
}

/// Checked CBD settings, ready to fit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Cbd {
    params: CbdParams,
}

/// A fitted CBD model for one population.
#[derive(Debug, Clone)]
pub struct CbdFit {
    basis: FitBasis,
    /// Mean fitted age x̄.
    pub xbar: f64,
    /// Period indices: row 0 is k1_t, row 1 is k2_t.
    pub factors: DMatrix<f64>,
}

impl CbdParams {
    /// Checks the settings that do not depend on the data.
    pub fn check(self) -> Result<Cbd> {
        check_fit_settings(
            NAME,
            self.tolerance,
            self.max_iterations,
            self.closure_fit_ages,
        )?;
        Ok(Cbd { params: self })
    }
}

impl MortalityModel for Cbd {
    fn fit(&self, population: &Population) -> Result<Box<dyn FittedModel>> {
        Ok(Box::new(self.fit_population(population)?))
    }
}

impl Cbd {
    /// Fits one population, year by year.
    pub fn fit_population(&self, population: &Population) -> Result<CbdFit> {
        let p = &self.params;
        let (ages, years, sex) = (population.ages, population.years, population.sex);
        if p.max_age <= ages.last {
            return Err(Error::model(
                NAME,
                format!(
                    "max_age {} must be above the top fitted age {}",
                    p.max_age, ages.last
                ),
            ));
        }
        if ages.len() < 2 || p.closure_fit_ages > ages.len() {
            return Err(Error::model(
                NAME,
                format!(
                    "sex {sex}: the age slope k2 needs at least two ages, and the closure at \
                     most {} ages, found closure_fit_ages {}",
                    ages.len(),
                    p.closure_fit_ages
                ),
            ));
        }
        let xbar = (f64::from(ages.first) + f64::from(ages.last)) / 2.0;
        let initial = population.initial_exposure();
        let centred: Vec<f64> = ages.iter().map(|x| f64::from(x) - xbar).collect();
        let mut factors = DMatrix::zeros(2, years.len());
        let mut most = 0;
        for (j, year) in years.iter().enumerate() {
            let deaths = population.deaths.column(j);
            let lives = initial.column(j);
            let cell = |i: usize| (deaths[i], lives[i]);
            let (k1, k2, iterations) =
                fit_year(ages.first, &centred, cell, p.tolerance, p.max_iterations).map_err(
                    |rule| Error::model(NAME, format!("sex {sex}, year {year}: {rule}")),
                )?;
            factors[(0, j)] = k1;
            factors[(1, j)] = k2;
            most = most.max(iterations);
        }
        let mut fit = CbdFit {
            xbar,
            factors,
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
        fit.measure(population, &initial, most)?;
        Ok(fit)
    }
}

/// Binomial Newton–Raphson for one year's (k1, k2); returns them and the iterations.
fn fit_year(
    first_age: i32,
    centred: &[f64],
    cell: impl Fn(usize) -> (f64, f64),
    tolerance: f64,
    max_iterations: usize,
) -> std::result::Result<(f64, f64, usize), String> {
    let (mut deaths, mut lives, mut used) = (0.0, 0.0, Vec::with_capacity(centred.len()));
    for (i, &z) in centred.iter().enumerate() {
        let (d, n) = cell(i);
        if d > n {
            return Err(format!(
                "age {}: deaths {d} exceed the initial exposure {n} (E0 = Ec + D/2)",
                first_age + i as i32
            ));
        }
        if n > 0.0 {
            deaths += d;
            lives += n;
            used.push(z);
        }
    }
    used.dedup();
    if used.len() < 2 {
        return Err(
            "fewer than two ages have exposure, so the age slope k2 is not identified \
                    (singular design)"
                .into(),
        );
    }
    if !(deaths > 0.0 && deaths < lives) {
        return Err(
            "no deaths (or no survivors) at any age, so the binomial fit has no finite \
                    estimate"
                .into(),
        );
    }
    // Start from the pooled rate with no slope: the likelihood is concave, so Newton
    // from here converges for any data with a finite maximum.
    let pooled = deaths / lives;
    let (mut k1, mut k2) = ((pooled / (1.0 - pooled)).ln(), 0.0);
    // The kernel d ln q + (n − d) ln(1 − q): the constant ln C(n, d) plays no part in
    // the ascent check, and leaving it out saves three lgamma calls per cell.
    let log_likelihood = |k1: f64, k2: f64| -> f64 {
        let mut ll = 0.0;
        for (i, &z) in centred.iter().enumerate() {
            let (d, n) = cell(i);
            if n > 0.0 {
                let eta = k1 + z * k2;
                // ln q = −softplus(−η), ln(1 − q) = −softplus(η).
                ll -= d * softplus(-eta) + (n - d) * softplus(eta);
            }
        }
        ll
    };
    let mut previous = log_likelihood(k1, k2);
    for it in 1..=max_iterations {
        let (mut u1, mut u2, mut i11, mut i12, mut i22) = (0.0, 0.0, 0.0, 0.0, 0.0);
        for (i, &z) in centred.iter().enumerate() {
            let (d, n) = cell(i);
            if n <= 0.0 {
                continue;
            }
            let q = logistic(k1 + z * k2);
            let r = d - n * q;
            let w = n * q * (1.0 - q);
            u1 += r;
            u2 += r * z;
            i11 += w;
            i12 += w * z;
            i22 += w * z * z;
        }
        let det = i11 * i22 - i12 * i12;
        if !det.is_finite() || det <= 0.0 {
            return Err("the binomial information matrix is singular (singular design)".into());
        }
        let (mut s1, mut s2) = ((i22 * u1 - i12 * u2) / det, (i11 * u2 - i12 * u1) / det);
        // Half the Newton decrement, Uᵀ I⁻¹ U / 2, is the increase in ℓ the step promises;
        // unlike a difference of two log-likelihoods it does not lose precision to the
        // large constant terms.
        let promised = 0.5 * (s1 * u1 + s2 * u2);
        // Step halving keeps every iteration an ascent; a full step is almost always taken.
        let mut current = log_likelihood(k1 + s1, k2 + s2);
        let mut halvings = 0;
        while (current.is_nan() || current < previous - 1e-12 * previous.abs()) && halvings < 30 {
            s1 *= 0.5;
            s2 *= 0.5;
            current = log_likelihood(k1 + s1, k2 + s2);
            halvings += 1;
        }
        k1 += s1;
        k2 += s2;
        if !(current.is_finite() && k1.is_finite() && k2.is_finite()) {
            return Err("the binomial fit diverged".into());
        }
        if promised.abs() < tolerance {
            return Ok((k1, k2, it));
        }
        previous = current;
    }
    Err(format!(
        "the binomial fit did not converge in {max_iterations} iterations; raise \
         model.max_iterations or model.tolerance"
    ))
}

/// The logistic function 1/(1 + e^{−η}), stable for large |η|.
fn logistic(eta: f64) -> f64 {
    if eta >= 0.0 {
        1.0 / (1.0 + (-eta).exp())
    } else {
        let e = eta.exp();
        e / (1.0 + e)
    }
}

/// ln(1 + e^η): the central rate −ln(1 − q) of q = logistic(η), stable for large |η|.
fn softplus(eta: f64) -> f64 {
    if eta > 0.0 {
        eta + (-eta).exp().ln_1p()
    } else {
        eta.exp().ln_1p()
    }
}

impl CbdFit {
    /// Fitted one-year rate q(x, t) at row `i` (age) and column `j` (year).
    pub fn death_rate(&self, i: usize, j: usize) -> f64 {
        let z = f64::from(self.basis.ages.first) + i as f64 - self.xbar;
        logistic(self.factors[(0, j)] + z * self.factors[(1, j)])
    }

    fn measure(
        &mut self,
        population: &Population,
        initial: &DMatrix<f64>,
        iterations: usize,
    ) -> Result<()> {
        let n_years = self.basis.years.len();
        let (diagnostics, residuals) = measure_fit(
            NAME,
            self.basis.sex,
            Family::Binomial,
            &population.deaths,
            initial,
            2 * n_years,
            iterations,
            |i, j| Some(self.death_rate(i, j)),
        )?;
        self.basis.record(diagnostics, residuals);
        Ok(())
    }
}

impl FittedModel for CbdFit {
    fn name(&self) -> &'static str {
        NAME
    }

    fn method(&self) -> &'static str {
        "binomial"
    }

    fn basis(&self) -> &FitBasis {
        &self.basis
    }

    fn factor_names(&self) -> &'static [&'static str] {
        &["k1", "k2"]
    }

    fn factors(&self) -> &DMatrix<f64> {
        &self.factors
    }

    fn rates(&self, factors: &[f64], out: &mut [f64]) {
        self.cohort_rates_in(factors, &[], 0..out.len(), out);
    }

    fn cohort_rates_in(
        &self,
        factors: &[f64],
        _: &[f64],
        cells: std::ops::Range<usize>,
        out: &mut [f64],
    ) {
        let (k1, k2) = (factors[0], factors[1]);
        let n = self.basis.ages.len();
        let first = f64::from(self.basis.ages.first) - self.xbar;
        let central = self
            .basis
            .closure
            .central_cells(self.basis.ages.first, n, cells.clone());
        for i in central {
            out[i] = softplus(k1 + (first + i as f64) * k2);
        }
        self.basis
            .closure
            .close_cells(self.basis.ages.first, n, cells, out);
    }

    fn parameters_json(&self) -> serde_json::Value {
        let k1: Vec<f64> = self.factors.row(0).iter().copied().collect();
        let k2: Vec<f64> = self.factors.row(1).iter().copied().collect();
        serde_json::json!({ "k1": k1, "k2": k2, "xbar": self.xbar })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn softplus_inverts_logistic() {
        for eta in [-40.0, -3.0, 0.0, 2.5, 30.0] {
            let q = logistic(eta);
            assert!((-(-softplus(eta)).exp_m1() - q).abs() < 1e-15);
        }
    }
}
