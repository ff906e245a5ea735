//! Self-consistency: data simulated from known parameters are fitted back within their
//! sampling error.
//!
//! The sampling error is derived here from the expected Fisher information at the true
//! parameters (standard maximum-likelihood asymptotics): for Poisson deaths with a log
//! link I = Σ_cells μ ∇η ∇ηᵀ, and for binomial deaths with a logit link
//! I = Σ_cells n q (1 − q) z zᵀ. Each estimate must lie within 4.5 standard errors of the
//! truth, and the mean squared standardised error must be near 1.

use crate::models_support;

use models_support::*;
use nalgebra::{DMatrix, DVector};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Binomial, Distribution, Poisson};
use tailspan::data::{Population, Sex, Span};
use tailspan::models::{FittedModel, LeeCarterMethod};
use tailspan::series::RandomWalk;

fn stream(scenario: u64) -> ChaCha8Rng {
    let mut rng = ChaCha8Rng::seed_from_u64(20261202);
    rng.set_stream(scenario);
    rng
}

/// Checks standardised errors: every |z| < 4.5 and mean z² in (0.5, 1.6).
fn check_standardised(label: &str, z: &[f64]) {
    let worst = z.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let mean_square = z.iter().map(|v| v * v).sum::<f64>() / z.len() as f64;
    assert!(worst < 4.5, "{label}: largest |z| = {worst}");
    assert!(
        (0.5..1.6).contains(&mean_square),
        "{label}: mean z² = {mean_square}"
    );
}

#[test]
fn lee_carter_poisson_recovers_simulated_parameters() {
    let (ages, years) = (Span::new(60, 89).unwrap(), Span::new(1990, 2019).unwrap());
    let (na, nt) = (ages.len(), years.len());
    let a = DVector::from_fn(na, |i, _| (0.004f64).ln() + 0.1 * i as f64);
    let raw = DVector::from_fn(na, |i, _| 1.5 - i as f64 / na as f64);
    let b = &raw / raw.sum();
    let t_mid = (nt as f64 - 1.0) / 2.0;
    let k = DVector::from_fn(nt, |j, _| {
        -1.5 * (j as f64 - t_mid) + 2.0 * (j as f64).sin()
    });
    let k = k.add_scalar(-k.mean());
    let exposure = DMatrix::from_fn(na, nt, |i, _| 2e5 * (-0.05 * i as f64).exp());
    let mean = DMatrix::from_fn(na, nt, |i, j| exposure[(i, j)] * (a[i] + b[i] * k[j]).exp());
    let mut rng = stream(1);
    let deaths = mean.map(|m| Poisson::new(m).unwrap().sample(&mut rng));
    let population = Population::new(Sex::F, ages, years, deaths, exposure).unwrap();
    let fit = lee_carter(LeeCarterMethod::Poisson, false)
        .fit_population(&population)
        .unwrap();

    // Free parameters θ = (a_1..a_A, b_1..b_{A−1}, k_1..k_{T−1}); b_A = 1 − Σ, k_T = −Σ.
    let p = 2 * na + nt - 2;
    let mut info = DMatrix::zeros(p, p);
    let mut grad = DVector::zeros(p);
    for j in 0..nt {
        for i in 0..na {
            grad.fill(0.0);
            grad[i] = 1.0;
            if i < na - 1 {
                grad[na + i] = k[j];
            } else {
                for r in 0..na - 1 {
                    grad[na + r] = -k[j];
                }
            }
            if j < nt - 1 {
                grad[2 * na - 1 + j] = b[i];
            } else {
                for s in 0..nt - 1 {
                    grad[2 * na - 1 + s] = -b[i];
                }
            }
            info += mean[(i, j)] * &grad * grad.transpose();
        }
    }
    let cov = info.try_inverse().unwrap();
    // Map to every parameter: φ = G θ + c.
    let mut g = DMatrix::zeros(2 * na + nt, p);
    for i in 0..na {
        g[(i, i)] = 1.0;
    }
    for i in 0..na - 1 {
        g[(na + i, na + i)] = 1.0;
        g[(2 * na - 1, na + i)] = -1.0;
    }
    for j in 0..nt - 1 {
        g[(2 * na + j, 2 * na - 1 + j)] = 1.0;
        g[(2 * na + nt - 1, 2 * na - 1 + j)] = -1.0;
    }
    let se = (&g * cov * g.transpose()).diagonal().map(f64::sqrt);
    let estimate: Vec<f64> = fit
        .ax
        .iter()
        .chain(fit.bx.iter())
        .chain(fit.kt.iter())
        .copied()
        .collect();
    let truth: Vec<f64> = a.iter().chain(b.iter()).chain(k.iter()).copied().collect();
    let z: Vec<f64> = (0..estimate.len())
        .map(|r| (estimate[r] - truth[r]) / se[r])
        .collect();
    check_standardised("a_x", &z[..na]);
    check_standardised("b_x", &z[na..2 * na]);
    check_standardised("k_t", &z[2 * na..]);
}

#[test]
fn cbd_recovers_simulated_parameters() {
    let (ages, years) = (Span::new(65, 89).unwrap(), Span::new(1995, 2019).unwrap());
    let (na, nt) = (ages.len(), years.len());
    let xbar = 77.0;
    let k1 = DVector::from_fn(nt, |j, _| -3.0 - 0.02 * j as f64);
    let k2 = DVector::from_fn(nt, |j, _| 0.1 + 0.0005 * j as f64);
    let lives = DMatrix::from_fn(na, nt, |i, _| 50_000 + 2_000 * i as u64);
    let q = DMatrix::from_fn(na, nt, |i, j| {
        let eta = k1[j] + (f64::from(ages.first) + i as f64 - xbar) * k2[j];
        1.0 / (1.0 + (-eta).exp())
    });
    let mut rng = stream(2);
    let deaths = DMatrix::from_fn(na, nt, |i, j| {
        Binomial::new(lives[(i, j)], q[(i, j)])
            .unwrap()
            .sample(&mut rng) as f64
    });
    // The fit works on E0 = Ec + D/2, so central exposure is chosen to give E0 = lives.
    let exposure = DMatrix::from_fn(na, nt, |i, j| lives[(i, j)] as f64 - deaths[(i, j)] / 2.0);
    let population = Population::new(Sex::M, ages, years, deaths, exposure).unwrap();
    let fit = cbd().fit_population(&population).unwrap();
    assert_eq!(fit.xbar, xbar);

    let (mut z1, mut z2) = (Vec::new(), Vec::new());
    for j in 0..nt {
        let mut info = nalgebra::Matrix2::zeros();
        for i in 0..na {
            let z = nalgebra::Vector2::new(1.0, f64::from(ages.first) + i as f64 - xbar);
            let w = lives[(i, j)] as f64 * q[(i, j)] * (1.0 - q[(i, j)]);
            info += w * z * z.transpose();
        }
        let cov = info.try_inverse().unwrap();
        z1.push((fit.factors[(0, j)] - k1[j]) / cov[(0, 0)].sqrt());
        z2.push((fit.factors[(1, j)] - k2[j]) / cov[(1, 1)].sqrt());
    }
    check_standardised("k1", &z1);
    check_standardised("k2", &z2);
}

#[test]
fn random_walk_recovers_simulated_drift_and_covariance() {
    // A bivariate walk with known drift and covariance; drift errors are judged against
    // the drift's own standard error Σ/(T − 1), the covariance within its sampling error.
    let (drift, chol) = (
        nalgebra::Vector2::new(-0.03, 0.001),
        nalgebra::Matrix2::new(0.05, 0.0, 0.004, 0.002),
    );
    let sigma = chol * chol.transpose();
    let normal = rand_distr::StandardNormal;
    let steps = 400;
    let mut rng = stream(3);
    let mut factors = DMatrix::zeros(2, steps + 1);
    for t in 1..=steps {
        let e = nalgebra::Vector2::new(normal.sample(&mut rng), normal.sample(&mut rng));
        let next = factors.column(t - 1) + drift + chol * e;
        factors.set_column(t, &next);
    }
    let rw = RandomWalk::estimate(&factors).unwrap();
    for r in 0..2 {
        let se = (sigma[(r, r)] / steps as f64).sqrt();
        assert!((rw.drift[r] - drift[r]).abs() < 4.0 * se, "drift {r}");
        // Var(σ̂²) ≈ 2σ⁴/(T − 2) for normal innovations.
        let var_se = sigma[(r, r)] * (2.0 / (steps as f64 - 1.0)).sqrt();
        assert!((rw.covariance[(r, r)] - sigma[(r, r)]).abs() < 4.0 * var_se);
    }
    let back = &rw.cholesky * rw.cholesky.transpose();
    assert!((back - &rw.covariance).norm() < 1e-15);
    assert!(rw.cholesky[(0, 1)] == 0.0);
}

#[test]
fn diagnostics_follow_the_textbook_formulas() {
    // Deviance 2 Σ [d ln(d/d̂) − (d − d̂)] (Poisson GLM deviance, McCullagh & Nelder 1989);
    // AIC = 2ν − 2ℓ (Akaike 1974); BIC = ν ln n − 2ℓ (Schwarz 1978); recomputed here from
    // the fitted rates.
    let population = load_population("sparse_experience.csv");
    let fit = lee_carter(LeeCarterMethod::Poisson, false)
        .fit_population(&population)
        .unwrap();
    let (mut deviance, mut cells) = (0.0, 0usize);
    for j in 0..population.years.len() {
        for i in 0..population.ages.len() {
            let (d, e) = (population.deaths[(i, j)], population.exposure[(i, j)]);
            if e == 0.0 {
                continue;
            }
            let fitted = e * fit.central_rate(i, j);
            let log_term = if d > 0.0 { d * (d / fitted).ln() } else { 0.0 };
            deviance += 2.0 * (log_term - (d - fitted));
            cells += 1;
        }
    }
    let diag = fit.diagnostics();
    assert!((diag.deviance - deviance).abs() < 1e-9 * deviance);
    let nu = (2 * 20 + 20 - 2) as f64;
    assert_eq!(diag.parameters, 58);
    assert_eq!(diag.observations, cells);
    assert!((diag.aic - (2.0 * nu - 2.0 * diag.log_likelihood)).abs() < 1e-9);
    let bic = nu * (cells as f64).ln() - 2.0 * diag.log_likelihood;
    assert!((diag.bic - bic).abs() < 1e-9);
    // Squared deviance residuals add up to the deviance.
    let squares: f64 = fit
        .residuals()
        .iter()
        .filter(|r| r.is_finite())
        .map(|r| r * r)
        .sum();
    assert!((squares - deviance).abs() < 1e-9 * deviance);
}
