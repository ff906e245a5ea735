//! Log-likelihoods, deviances and residuals shared by every fit.
//!
//! The constant terms (ln d!, ln C(n, d)) are kept so that a log-likelihood can be set
//! beside the saturated model's: deviance = 2 (ℓ_saturated − ℓ). Terms use `lgamma` so
//! that non-integer deaths and exposures (e.g. weighted or E0 = Ec + D/2) stay valid.
//! Cells with zero exposure carry no information and are skipped everywhere (weight 0).

use libm::lgamma;
use nalgebra::DMatrix;

use crate::data::Sex;
use crate::error::{Error, Result};
use crate::models::FitDiagnostics;
use crate::models::glm::Family;

/// `x ln(x / y)` with the convention 0 ln 0 = 0.
fn xlogx_over(x: f64, y: f64) -> f64 {
    if x > 0.0 { x * (x / y).ln() } else { 0.0 }
}

/// Poisson log-likelihood of deaths `d` given the fitted mean `mean`:
/// d ln(mean) − mean − ln Γ(d + 1).
pub fn poisson_log_likelihood(d: f64, mean: f64) -> f64 {
    let log_term = if d > 0.0 { d * mean.ln() } else { 0.0 };
    log_term - mean - lgamma(d + 1.0)
}

/// Poisson unit deviance 2 [d ln(d / mean) − (d − mean)] (standard GLM definition).
pub fn poisson_deviance(d: f64, mean: f64) -> f64 {
    (2.0 * (xlogx_over(d, mean) - (d - mean))).max(0.0)
}

/// Binomial log-likelihood of `d` deaths out of `n` initial lives at rate `q`:
/// ln C(n, d) + d ln q + (n − d) ln(1 − q), with C by `lgamma` for non-integer n.
pub fn binomial_log_likelihood(d: f64, n: f64, q: f64) -> f64 {
    let choose = lgamma(n + 1.0) - lgamma(d + 1.0) - lgamma(n - d + 1.0);
    let deaths = if d > 0.0 { d * q.ln() } else { 0.0 };
    let survivors = if n - d > 0.0 {
        (n - d) * (1.0 - q).ln()
    } else {
        0.0
    };
    choose + deaths + survivors
}

/// Binomial unit deviance 2 [d ln(d / nq) + (n − d) ln((n − d) / (n − nq))].
pub fn binomial_deviance(d: f64, n: f64, q: f64) -> f64 {
    (2.0 * (xlogx_over(d, n * q) + xlogx_over(n - d, n * (1.0 - q)))).max(0.0)
}

/// Signed deviance residual sign(d − fitted) √(unit deviance).
pub fn deviance_residual(d: f64, fitted: f64, unit_deviance: f64) -> f64 {
    let r = unit_deviance.max(0.0).sqrt();
    if d < fitted { -r } else { r }
}

/// Measures a fit over an ages × years grid: the diagnostics (with `parameters` free
/// parameters) and the deviance residuals (NaN where a cell is skipped). `size` is the
/// exposure (Poisson) or initial exposure (binomial); cells with `size ≤ 0` are skipped,
/// as are those for which `fitted(i, j)` gives `None`. Sums run year by year, age within
/// year. A non-finite log-likelihood or deviance is an error naming `model` and `sex`.
#[allow(clippy::too_many_arguments)]
pub(crate) fn measure_fit(
    model: &str,
    sex: Sex,
    family: Family,
    deaths: &DMatrix<f64>,
    size: &DMatrix<f64>,
    parameters: usize,
    iterations: usize,
    fitted: impl Fn(usize, usize) -> Option<f64>,
) -> Result<(FitDiagnostics, DMatrix<f64>)> {
    let (n_ages, n_years) = deaths.shape();
    let mut residuals = DMatrix::from_element(n_ages, n_years, f64::NAN);
    let (mut ll, mut dev, mut cells) = (0.0, 0.0, 0usize);
    for j in 0..n_years {
        for i in 0..n_ages {
            let (d, n) = (deaths[(i, j)], size[(i, j)]);
            if n <= 0.0 {
                continue;
            }
            let Some(rate) = fitted(i, j) else { continue };
            let (unit, cell_ll, expected) = match family {
                Family::Poisson => {
                    let mean = n * rate;
                    (
                        poisson_deviance(d, mean),
                        poisson_log_likelihood(d, mean),
                        mean,
                    )
                }
                Family::Binomial => (
                    binomial_deviance(d, n, rate),
                    binomial_log_likelihood(d, n, rate),
                    n * rate,
                ),
            };
            ll += cell_ll;
            dev += unit;
            residuals[(i, j)] = deviance_residual(d, expected, unit);
            cells += 1;
        }
    }
    if !(ll.is_finite() && dev.is_finite()) {
        return Err(Error::Numerical(format!(
            "{model}, sex {sex}: the fitted rates give a non-finite log-likelihood"
        )));
    }
    Ok((
        FitDiagnostics::new(ll, dev, parameters, cells, iterations),
        residuals,
    ))
}

impl FitDiagnostics {
    /// Builds the diagnostics from a maximised log-likelihood and deviance, with
    /// AIC = 2ν − 2ℓ (Akaike 1974) and BIC = ν ln n − 2ℓ (Schwarz 1978).
    pub fn new(
        log_likelihood: f64,
        deviance: f64,
        parameter_count: usize,
        observations: usize,
        iterations: usize,
    ) -> Self {
        let nu = parameter_count as f64;
        FitDiagnostics {
            log_likelihood,
            deviance,
            parameters: parameter_count,
            observations,
            aic: 2.0 * nu - 2.0 * log_likelihood,
            bic: nu * (observations as f64).ln() - 2.0 * log_likelihood,
            iterations,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn saturated_poisson_has_zero_deviance() {
        // deviance = 2 (ℓ_sat − ℓ): the saturated mean is d itself.
        let (d, mean) = (7.0, 5.5);
        let dev = poisson_deviance(d, mean);
        let gap = poisson_log_likelihood(d, d) - poisson_log_likelihood(d, mean);
        assert!((dev - 2.0 * gap).abs() < 1e-12);
        assert_eq!(poisson_deviance(d, d), 0.0);
        assert!((poisson_deviance(0.0, 2.0) - 4.0).abs() < 1e-15);
    }

    #[test]
    fn binomial_deviance_matches_likelihood_gap() {
        let (d, n, q) = (12.0, 140.5, 0.07);
        let dev = binomial_deviance(d, n, q);
        let gap = binomial_log_likelihood(d, n, d / n) - binomial_log_likelihood(d, n, q);
        assert!((dev - 2.0 * gap).abs() < 1e-10);
    }

    #[test]
    fn poisson_log_likelihood_matches_pmf() {
        // P(D = 3 | mean 2) = e^-2 2^3 / 3! (closed form).
        let p: f64 = (-2.0f64).exp() * 8.0 / 6.0;
        assert!((poisson_log_likelihood(3.0, 2.0) - p.ln()).abs() < 1e-12);
    }
}
