//! Lee–Carter: log m(x, t) = a_x + b_x k_t, with Σ b_x = 1 and Σ k_t = 0.
//!
//! Two estimators. The SVD fit (Lee & Carter 1992) is closed form but needs a log rate in
//! every cell; the optional second stage re-estimates k_t so that fitted deaths equal
//! observed deaths year by year. The Poisson fit (Brouhns, Denuit & Vermunt 2002) treats
//! D(x, t) ~ Poisson(E(x, t) m(x, t)), so zero-death cells are ordinary data and
//! zero-exposure cells simply carry no weight; it cycles one-dimensional Newton updates of
//! a, k and b. The grid is held column-major (ages contiguous within a year) and the
//! iteration works over preallocated slices, so a fit does no allocation per iteration.

use nalgebra::{DMatrix, DVector};

use crate::data::Population;
use crate::error::{Error, Result};
use crate::life::closure::KannistoClosure;
use crate::models::check_fit_settings;
use crate::models::glm::Family;
use crate::models::likelihood::measure_fit;
use crate::models::{FitBasis, FitDiagnostics, FittedModel, MortalityModel};

const NAME: &str = "lee-carter";

/// (a_x, b_x, k_t).
type Parameters = (DVector<f64>, DVector<f64>, DVector<f64>);

/// How the Lee–Carter parameters are estimated.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LeeCarterMethod {
    /// Leading singular vectors of the centred log-rate matrix (Lee & Carter 1992).
    Svd,
    /// Poisson maximum likelihood (Brouhns, Denuit & Vermunt 2002).
    Poisson,
}

impl LeeCarterMethod {
    /// The name used in files.
    pub fn name(self) -> &'static str {
        match self {
            LeeCarterMethod::Svd => "svd",
            LeeCarterMethod::Poisson => "poisson",
        }
    }
}

/// Unchecked Lee–Carter settings.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LeeCarterParams {
    /// Estimator.
    pub method: LeeCarterMethod,
    /// SVD only: re-estimate k_t so fitted deaths match observed deaths each year.
    pub refit_kt: bool,
    /// Top fitted ages the Kannisto closure is fitted to.
    pub closure_fit_ages: usize,
    /// Highest age of the closed table.
    pub max_age: i32,
    /// Convergence tolerance on the change in log-likelihood per cycle.
    pub tolerance: f64,
    /// Iteration cap; reaching it without convergence is an error.
    pub max_iterations: usize,
}

/// Checked Lee–Carter settings, ready to fit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LeeCarter {
    params: LeeCarterParams,
}

/// A fitted Lee–Carter model for one population.
#[derive(Debug, Clone)]
pub struct LeeCarterFit {
    basis: FitBasis,
    method: LeeCarterMethod,
    /// Age pattern a_x (mean log rate).
    pub ax: DVector<f64>,
    /// Age sensitivity b_x, Σ b_x = 1.
    pub bx: DVector<f64>,
    /// Period index k_t as a 1 × years matrix, Σ k_t = 0.
    pub kt: DMatrix<f64>,
}

impl LeeCarterParams {
    /// Checks the settings that do not depend on the data.
    pub fn check(self) -> Result<LeeCarter> {
        check_fit_settings(
            NAME,
            self.tolerance,
            self.max_iterations,
            self.closure_fit_ages,
        )?;
        if self.refit_kt && self.method == LeeCarterMethod::Poisson {
            return Err(Error::model(
                NAME,
                "refit_kt is a second stage of the SVD fit; the Poisson fit already matches deaths",
            ));
        }
        Ok(LeeCarter { params: self })
    }
}

impl MortalityModel for LeeCarter {
    fn fit(&self, population: &Population) -> Result<Box<dyn FittedModel>> {
        Ok(Box::new(self.fit_population(population)?))
    }

    /// The Poisson fit starts from `base`'s a_x, b_x and k_t, each new year's k_t solved
    /// given them, instead of from an SVD of the log rates; it stops by the same rule, so
    /// it lands on the same maximum within the tolerance. The SVD fit is closed form: cold.
    /// The refit is not measured against its data (its diagnostics hold only the cycle
    /// count): a re-calibration reads its rates, and the measure costs as much as a cycle.
    fn refit(
        &self,
        population: &Population,
        base: &dyn FittedModel,
    ) -> Result<Box<dyn FittedModel>> {
        let any: &dyn std::any::Any = base;
        let start = match (self.params.method, any.downcast_ref::<LeeCarterFit>()) {
            (LeeCarterMethod::Poisson, Some(base)) => base.warm_start(population),
            _ => None,
        };
        Ok(Box::new(self.fit_from(population, start, false)?))
    }
}

impl LeeCarter {
    /// The checked settings.
    pub fn params(&self) -> &LeeCarterParams {
        &self.params
    }

    /// Fits one population.
    pub fn fit_population(&self, population: &Population) -> Result<LeeCarterFit> {
        self.fit_from(population, None, true)
    }

    /// Fits one population; the Poisson fit starts from `start` when given, else from the
    /// SVD fit. Unless `measure`, the fit's log-likelihood and residuals are left unmeasured.
    fn fit_from(
        &self,
        population: &Population,
        start: Option<Parameters>,
        measure: bool,
    ) -> Result<LeeCarterFit> {
        let p = &self.params;
        let ages = population.ages;
        if ages.len() < 2 || population.years.len() < 2 {
            return Err(Error::model(
                NAME,
                format!(
                    "sex {}: needs at least two ages and two years, found {} and {}",
                    population.sex,
                    ages.len(),
                    population.years.len()
                ),
            ));
        }
        if p.max_age <= ages.last {
            return Err(Error::model(
                NAME,
                format!(
                    "max_age {} must be above the top fitted age {}",
                    p.max_age, ages.last
                ),
            ));
        }
        if p.closure_fit_ages > ages.len() {
            return Err(Error::model(
                NAME,
                format!(
                    "closure_fit_ages {} exceeds the {} fitted ages",
                    p.closure_fit_ages,
                    ages.len()
                ),
            ));
        }
        let (ax, bx, kt, iterations) = match p.method {
            LeeCarterMethod::Svd => {
                let log_rates = observed_log_rates(population)?;
                let (ax, bx, mut kt) = svd_fit(&log_rates)?;
                let mut ax = ax;
                let iterations = if p.refit_kt {
                    refit_period_index(population, &mut ax, &bx, &mut kt, p.max_iterations)?
                } else {
                    0
                };
                (ax, bx, kt, iterations)
            }
            LeeCarterMethod::Poisson => {
                let ((ax, bx, kt), cycles) =
                    poisson_fit(population, start, p.tolerance, p.max_iterations)?;
                (ax, bx, kt, cycles)
            }
        };
        let mut fit = LeeCarterFit {
            method: p.method,
            ax,
            bx,
            kt: DMatrix::from_row_slice(1, kt.len(), kt.as_slice()),
            basis: FitBasis::unmeasured(
                population.sex,
                ages,
                population.years,
                KannistoClosure {
                    fit_ages: p.closure_fit_ages,
                    max_age: p.max_age,
                },
            ),
        };
        if measure {
            fit.measure(population, iterations)?;
        } else {
            let unmeasured = FitDiagnostics::new(0.0, 0.0, 0, 0, iterations);
            fit.basis.record(unmeasured, DMatrix::zeros(0, 0));
        }
        Ok(fit)
    }
}

impl LeeCarterFit {
    /// Fitted central rate m(x, t) at row `i` (age) and column `j` (year).
    pub fn central_rate(&self, i: usize, j: usize) -> f64 {
        (self.ax[i] + self.bx[i] * self.kt[(0, j)]).exp()
    }

    /// The estimator used.
    pub fn fit_method(&self) -> LeeCarterMethod {
        self.method
    }

    /// Starting values for a fit to `population`, which extends this fit's data by later
    /// years: this fit's a_x, b_x and k_t, and each new year's k_t maximising that year's
    /// Poisson likelihood given them (Newton steps from the last fitted k_t). `None`
    /// when the population is not such an extension.
    fn warm_start(&self, population: &Population) -> Option<Parameters> {
        let (ages, years) = (self.basis.ages, self.basis.years);
        if population.sex != self.basis.sex
            || population.ages != ages
            || population.years.first != years.first
            || population.years.last < years.last
        {
            return None;
        }
        let n_ages = ages.len();
        let mut kt: Vec<f64> = self.kt.iter().copied().collect();
        for j in years.len()..population.years.len() {
            let (d, e) = (population.deaths.column(j), population.exposure.column(j));
            let mut k = *kt.last()?;
            for _ in 0..50 {
                let (mut score, mut information) = (0.0, 0.0);
                for i in 0..n_ages {
                    let fitted = e[i] * (self.ax[i] + self.bx[i] * k).exp();
                    score += (d[i] - fitted) * self.bx[i];
                    information += fitted * self.bx[i] * self.bx[i];
                }
                let step = score / information;
                if !step.is_finite() {
                    return None;
                }
                k += step;
                if step.abs() <= 1e-12 * (1.0 + k.abs()) {
                    break;
                }
            }
            kt.push(k);
        }
        Some((self.ax.clone(), self.bx.clone(), DVector::from_vec(kt)))
    }

    /// Log-likelihood, deviance and residuals against the data.
    fn measure(&mut self, population: &Population, iterations: usize) -> Result<()> {
        let (n_ages, n_years) = (self.basis.ages.len(), self.basis.years.len());
        let count = 2 * n_ages + n_years - 2;
        let (diagnostics, residuals) = measure_fit(
            NAME,
            self.basis.sex,
            Family::Poisson,
            &population.deaths,
            &population.exposure,
            count,
            iterations,
            |i, j| Some(self.central_rate(i, j)),
        )?;
        self.basis.record(diagnostics, residuals);
        Ok(())
    }
}

impl FittedModel for LeeCarterFit {
    fn name(&self) -> &'static str {
        NAME
    }

    fn method(&self) -> &'static str {
        self.method.name()
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
        let k = factors[0];
        let (first, n) = (self.basis.ages.first, self.ax.len());
        let central = self.basis.closure.central_cells(first, n, cells.clone());
        let (ax, bx) = (
            &self.ax.as_slice()[central.clone()],
            &self.bx.as_slice()[central.clone()],
        );
        let log_rates = &mut out[central];
        for ((m, a), b) in log_rates.iter_mut().zip(ax).zip(bx) {
            *m = a + b * k;
        }
        crate::life::exp::exp_in_place(log_rates);
        self.basis.closure.close_cells(first, n, cells, out);
    }

    fn parameters_json(&self) -> serde_json::Value {
        serde_json::json!({
            "ax": self.ax.as_slice(),
            "bx": self.bx.as_slice(),
            "kt": self.kt.as_slice(),
        })
    }
}

/// log(D/E) in every cell, or an error naming the first cell where it is undefined.
fn observed_log_rates(population: &Population) -> Result<DMatrix<f64>> {
    let mut out = DMatrix::zeros(population.ages.len(), population.years.len());
    for (j, year) in population.years.iter().enumerate() {
        for (i, age) in population.ages.iter().enumerate() {
            let (d, e) = (population.deaths[(i, j)], population.exposure[(i, j)]);
            if e <= 0.0 || d <= 0.0 {
                let what = if e <= 0.0 { "exposure" } else { "deaths" };
                return Err(Error::model(
                    NAME,
                    format!(
                        "sex {}, age {age}, year {year}: zero {what}, so the log death rate is \
                         undefined and the SVD fit cannot be used; set `fit = \"poisson\"` in \
                         [model], which handles cells with no deaths",
                        population.sex
                    ),
                ));
            }
            out[(i, j)] = (d / e).ln();
        }
    }
    Ok(out)
}

/// SVD fit of a complete log-rate matrix: (a, b, k) normalised to Σb = 1, Σk = 0.
fn svd_fit(log_rates: &DMatrix<f64>) -> Result<Parameters> {
    let (ax, centred) = centre(log_rates);
    let (bx, kt) = first_component(centred)?.ok_or_else(|| {
        Error::model(
            NAME,
            "the leading age pattern of the centred log rates sums to zero, so it cannot be \
             normalised to Σ b_x = 1 (no common trend across ages)",
        )
    })?;
    Ok((ax, bx, kt))
}

/// Each row's time average a, and the matrix less it (the centring of Lee & Carter's SVD
/// fit, which Li & Lee's fit repeats per population).
pub(crate) fn centre(log_rates: &DMatrix<f64>) -> (DVector<f64>, DMatrix<f64>) {
    let a = log_rates.column_sum() / log_rates.ncols() as f64;
    let mut centred = log_rates.clone();
    for mut column in centred.column_iter_mut() {
        column -= &a;
    }
    (a, centred)
}

/// The first singular component s₁ u₁ v₁ᵀ of `matrix` as (u₁ / Σu₁, s₁ Σu₁ v₁): loadings
/// summing to 1 and the index. `None` when it cannot be so normalised (Σu₁ about zero
/// beside |u₁|, or no positive finite s₁).
pub(crate) fn first_component(
    matrix: DMatrix<f64>,
) -> Result<Option<(DVector<f64>, DVector<f64>)>> {
    let svd = matrix.svd(true, true);
    let (Some(u), Some(v_t)) = (svd.u.as_ref(), svd.v_t.as_ref()) else {
        return Err(Error::Numerical(
            "singular value decomposition failed".into(),
        ));
    };
    let s1 = svd.singular_values[0];
    let u1 = u.column(0);
    let scale = u1.sum();
    if !(s1.is_finite() && s1 > 0.0 && scale.is_finite() && scale.abs() >= 1e-8 * u1.norm()) {
        return Ok(None);
    }
    Ok(Some((u1 / scale, v_t.row(0).transpose() * (s1 * scale))))
}

/// Second stage of Lee & Carter (1992): for each year, solve
/// Σ_x E exp(a_x + b_x k) = Σ_x D for k by Newton's method, then re-centre k.
fn refit_period_index(
    population: &Population,
    ax: &mut DVector<f64>,
    bx: &DVector<f64>,
    kt: &mut DVector<f64>,
    max_iterations: usize,
) -> Result<usize> {
    let mut most = 0;
    for (j, year) in population.years.iter().enumerate() {
        let deaths: f64 = population.deaths.column(j).sum();
        let exposure = population.exposure.column(j);
        let mut k = kt[j];
        let mut converged = false;
        for it in 1..=max_iterations {
            let (mut g, mut slope) = (-deaths, 0.0);
            for i in 0..ax.len() {
                let fitted = exposure[i] * (ax[i] + bx[i] * k).exp();
                g += fitted;
                slope += fitted * bx[i];
            }
            if slope.is_nan() || slope <= 0.0 {
                break;
            }
            let step = g / slope;
            k -= step;
            if step.abs() <= 1e-12 * (1.0 + k.abs()) {
                most = most.max(it);
                converged = true;
                break;
            }
        }
        if !converged || !k.is_finite() {
            return Err(Error::model(
                NAME,
                format!(
                    "sex {}, year {year}: re-estimating k_t to match observed deaths \
                     (model.refit_kt) did not converge in {max_iterations} iterations; raise \
                     model.max_iterations or set model.refit_kt = false",
                    population.sex
                ),
            ));
        }
        kt[j] = k;
    }
    let mean = kt.mean();
    kt.add_scalar_mut(-mean);
    *ax += bx * mean;
    Ok(most)
}

/// Poisson maximum likelihood by cycled one-dimensional Newton steps in a, k, b
/// (Brouhns, Denuit & Vermunt 2002, section 3), from `start` or the SVD-based starting
/// values. Returns (a, b, k, cycles).
fn poisson_fit(
    population: &Population,
    start: Option<Parameters>,
    tolerance: f64,
    max_iterations: usize,
) -> Result<(Parameters, usize)> {
    require_information(population)?;
    let (n_ages, n_years) = (population.ages.len(), population.years.len());
    let (a0, b0, k0) = start.unwrap_or_else(|| starting_values(population));
    let mut ax: Vec<f64> = a0.iter().copied().collect();
    let mut bx: Vec<f64> = b0.iter().copied().collect();
    let mut kt: Vec<f64> = k0.iter().copied().collect();
    let deaths = population.deaths.as_slice();
    let exposure = population.exposure.as_slice();
    let mut fitted = vec![0.0; n_ages * n_years];
    let mut num = vec![0.0; n_ages];
    let mut den = vec![0.0; n_ages];
    let mut factor = vec![0.0; n_ages];
    let crude_log: Vec<f64> = deaths
        .iter()
        .zip(exposure)
        .map(|(d, e)| if *d > 0.0 { (d / e).ln() } else { 0.0 })
        .collect();

    // ℓ = ℓ_saturated − deviance/2, so the change in ℓ is minus the change in half the
    // deviance; the deviance is a sum of small non-negative terms and keeps its precision
    // where ℓ itself (large terms that cancel) would not.
    let mut previous = refresh(&mut fitted, deaths, exposure, &crude_log, &ax, &bx, &kt);
    for cycle in 1..=max_iterations {
        // a_x: Newton step on each row, then scale each row's fitted deaths.
        num.fill(0.0);
        den.fill(0.0);
        for (dcol, fcol) in deaths.chunks_exact(n_ages).zip(fitted.chunks_exact(n_ages)) {
            for i in 0..n_ages {
                num[i] += dcol[i] - fcol[i];
                den[i] += fcol[i];
            }
        }
        for i in 0..n_ages {
            let step = num[i] / den[i];
            ax[i] += step;
            factor[i] = step.exp();
        }
        for fcol in fitted.chunks_exact_mut(n_ages) {
            for (f, s) in fcol.iter_mut().zip(&factor) {
                *f *= s;
            }
        }
        // k_t: Newton step on each year, then refresh that year's fitted deaths: by the
        // factor exp(b_x Δk) when every b_x Δk is near zero (the fitted deaths feed only the
        // b_x step; the likelihood below is always from exactly recomputed ones).
        let largest_b = bx.iter().fold(0.0_f64, |m, b| m.max(b.abs()));
        for (j, k) in kt.iter_mut().enumerate() {
            let range = j * n_ages..(j + 1) * n_ages;
            let (dcol, ecol) = (&deaths[range.clone()], &exposure[range.clone()]);
            let fcol = &mut fitted[range];
            let (mut n, mut d) = (0.0, 0.0);
            for i in 0..n_ages {
                n += (dcol[i] - fcol[i]) * bx[i];
                d += fcol[i] * bx[i] * bx[i];
            }
            let step = n / d;
            *k += step;
            if step.abs() * largest_b <= NEAR_ZERO {
                for (f, b) in fcol.iter_mut().zip(&bx) {
                    *f *= exp_near_zero(b * step);
                }
            } else {
                for i in 0..n_ages {
                    fcol[i] = ecol[i] * (ax[i] + bx[i] * *k).exp();
                }
            }
        }
        // b_x: Newton step on each row, then refresh everything and the likelihood.
        num.fill(0.0);
        den.fill(0.0);
        for ((dcol, fcol), k) in deaths
            .chunks_exact(n_ages)
            .zip(fitted.chunks_exact(n_ages))
            .zip(&kt)
        {
            for i in 0..n_ages {
                num[i] += (dcol[i] - fcol[i]) * k;
                den[i] += fcol[i] * k * k;
            }
        }
        for i in 0..n_ages {
            bx[i] += num[i] / den[i];
        }
        let current = refresh(&mut fitted, deaths, exposure, &crude_log, &ax, &bx, &kt);
        if !current.is_finite() {
            return Err(Error::model(
                NAME,
                format!(
                    "sex {}: the Poisson fit diverged (non-finite log-likelihood at cycle {cycle})",
                    population.sex
                ),
            ));
        }
        if (current - previous).abs() < tolerance {
            return Ok((normalise(ax, bx, kt)?, cycle));
        }
        previous = current;
    }
    Err(Error::model(
        NAME,
        format!(
            "sex {}: the Poisson fit did not converge in {max_iterations} cycles (change in \
             log-likelihood still above {tolerance:e}); raise model.max_iterations or \
             model.tolerance",
            population.sex
        ),
    ))
}

/// Largest |x| for which [`exp_near_zero`] is used: its Taylor series' first omitted term
/// is below 2⁻⁶⁰ of the result there, under half a unit in the last place.
const NEAR_ZERO: f64 = 1.0 / 1024.0;

/// eˣ for |x| ≤ [`NEAR_ZERO`] by its Taylor series to x⁵/120, a few times cheaper than
/// `exp` and within a unit in the last place of it there.
fn exp_near_zero(x: f64) -> f64 {
    1.0 + x * (1.0 + x * (1.0 / 2.0 + x * (1.0 / 6.0 + x * (1.0 / 24.0 + x * (1.0 / 120.0)))))
}

/// Recomputes every fitted death count and returns half the Poisson deviance,
/// Σ [d (ln(d/E) − η) − (d − fitted)] over cells with positive exposure (zero-exposure
/// cells fit zero deaths and add nothing).
fn refresh(
    fitted: &mut [f64],
    deaths: &[f64],
    exposure: &[f64],
    crude_log: &[f64],
    ax: &[f64],
    bx: &[f64],
    kt: &[f64],
) -> f64 {
    let n_ages = ax.len();
    let mut half_deviance = 0.0;
    for ((((fcol, dcol), ecol), lcol), k) in fitted
        .chunks_exact_mut(n_ages)
        .zip(deaths.chunks_exact(n_ages))
        .zip(exposure.chunks_exact(n_ages))
        .zip(crude_log.chunks_exact(n_ages))
        .zip(kt)
    {
        for i in 0..n_ages {
            let eta = ax[i] + bx[i] * k;
            let f = ecol[i] * eta.exp();
            fcol[i] = f;
            half_deviance += dcol[i] * (lcol[i] - eta) - (dcol[i] - f);
        }
    }
    half_deviance
}

/// Every age and every year needs some exposure and some deaths, or its parameter has no
/// finite maximum-likelihood estimate.
fn require_information(population: &Population) -> Result<()> {
    let sex = population.sex;
    for (i, age) in population.ages.iter().enumerate() {
        let (d, e) = (
            population.deaths.row(i).sum(),
            population.exposure.row(i).sum(),
        );
        if !(d > 0.0 && e > 0.0) {
            return Err(Error::model(
                NAME,
                format!(
                    "sex {sex}, age {age}: no deaths or no exposure in any year, so a_x has no \
                     finite estimate; narrow data.ages"
                ),
            ));
        }
    }
    for (j, year) in population.years.iter().enumerate() {
        let (d, e) = (
            population.deaths.column(j).sum(),
            population.exposure.column(j).sum(),
        );
        if !(d > 0.0 && e > 0.0) {
            return Err(Error::model(
                NAME,
                format!(
                    "sex {sex}, year {year}: no deaths or no exposure at any age, so k_t has no \
                     finite estimate; narrow data.years"
                ),
            ));
        }
    }
    Ok(())
}

/// Starting values for the Poisson fit: the SVD fit when every cell has deaths; otherwise
/// the SVD fit of log rates smoothed towards each age's pooled rate r_x,
/// ln((D + r_x)/(E + 1)), which is finite even in zero cells; if neither has a usable age
/// pattern, flat b_x with k_t from each year's pooled rate.
fn starting_values(population: &Population) -> Parameters {
    if let Ok(log_rates) = observed_log_rates(population)
        && let Ok(start) = svd_fit(&log_rates)
    {
        return start;
    }
    let (n_ages, n_years) = (population.ages.len(), population.years.len());
    let pooled: Vec<f64> = (0..n_ages)
        .map(|i| population.deaths.row(i).sum() / population.exposure.row(i).sum())
        .collect();
    let smoothed = DMatrix::from_fn(n_ages, n_years, |i, j| {
        ((population.deaths[(i, j)] + pooled[i]) / (population.exposure[(i, j)] + 1.0)).ln()
    });
    if let Ok((a, b, k)) = svd_fit(&smoothed)
        && b.iter().all(|v| v.is_finite())
        && k.iter().any(|v| *v != 0.0)
    {
        return (a, b, k);
    }
    let ax = DVector::from_iterator(n_ages, pooled.iter().map(|r| r.ln()));
    let bx = DVector::from_element(n_ages, 1.0 / n_ages as f64);
    let mut kt = DVector::from_fn(n_years, |j, _| {
        let rate = population.deaths.column(j).sum() / population.exposure.column(j).sum();
        rate.ln() * n_ages as f64
    });
    let mean = kt.mean();
    kt.add_scalar_mut(-mean);
    if kt.iter().all(|v| *v == 0.0) {
        // Identical years: any non-zero k lets the b step move; the fit decides the rest.
        kt = DVector::from_fn(n_years, |j, _| j as f64 - (n_years as f64 - 1.0) / 2.0);
    }
    (ax, bx, kt)
}

/// Applies Σ b = 1, Σ k = 0 without changing any fitted rate:
/// k → c (k − k̄), b → b / c, a → a + b k̄ with c = Σ b.
fn normalise(ax: Vec<f64>, bx: Vec<f64>, kt: Vec<f64>) -> Result<Parameters> {
    let mut ax = DVector::from_vec(ax);
    let mut bx = DVector::from_vec(bx);
    let mut kt = DVector::from_vec(kt);
    let mean = kt.mean();
    ax += &bx * mean;
    kt.add_scalar_mut(-mean);
    let scale = bx.sum();
    if scale.is_nan() || scale.abs() <= 1e-10 * bx.norm() {
        return Err(Error::model(
            NAME,
            "the fitted b_x sum to zero, so they cannot be normalised to Σ b_x = 1",
        ));
    }
    bx /= scale;
    kt *= scale;
    Ok((ax, bx, kt))
}

#[cfg(test)]
mod tests {
    use super::{NEAR_ZERO, exp_near_zero};

    #[test]
    fn the_series_is_within_an_ulp_of_exp_near_zero() {
        // Against the standard library's exp (itself within an ulp of eˣ).
        for i in -1000..=1000 {
            let x = NEAR_ZERO * f64::from(i) / 1000.0;
            let (e, s) = (x.exp(), exp_near_zero(x));
            assert!(
                ((s - e) / e).abs() <= f64::EPSILON,
                "x = {x}: {s} against {e}"
            );
        }
    }
}
