//! Self-consistency: data simulated from known cohort-model parameters are fitted back
//! within their sampling error.
//!
//! The sampling error is derived from the expected Fisher information at the true
//! parameters (standard maximum-likelihood asymptotics): I = Σ_cells w ∇η ∇ηᵀ with
//! w = μ for Poisson deaths (log link) and w = n q (1 − q) for binomial deaths (logit
//! link). Under linear constraints C θ = 0 (linearised for the bilinear
//! Renshaw–Haberman model) the estimator's covariance is the top-left block of
//! [I Cᵀ; C 0]⁻¹ (Aitchison & Silvey 1958). Each estimate must lie within 4.5 standard
//! errors of the truth and the mean squared standardised error must be near 1 (per
//! parameter group, or pooled over all parameters for Renshaw–Haberman, whose a_x errors
//! are strongly correlated).

use crate::models_support;

use models_support::*;
use nalgebra::{DMatrix, DVector};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Binomial, Distribution, Normal, Poisson};
use tailspan::data::config::{CohortLoading, CohortSeriesKind};
use tailspan::data::{Population, Sex, Span};
use tailspan::models::{CbdCohortVariant, CohortGrid};
use tailspan::series::CohortSeries;

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

/// Accumulates the expected information of cells with sparse predictor gradients.
struct Information {
    matrix: DMatrix<f64>,
}

impl Information {
    fn new(p: usize) -> Self {
        Information {
            matrix: DMatrix::zeros(p, p),
        }
    }

    fn add(&mut self, weight: f64, gradient: &[(usize, f64)]) {
        for &(a, za) in gradient {
            for &(b, zb) in gradient {
                self.matrix[(a, b)] += weight * za * zb;
            }
        }
    }

    /// Standard errors under the constraints `c` θ = 0 (rows of `c`).
    fn standard_errors(&self, c: &DMatrix<f64>) -> DVector<f64> {
        let (p, r) = (self.matrix.nrows(), c.nrows());
        let mut bordered = DMatrix::zeros(p + r, p + r);
        bordered.view_mut((0, 0), (p, p)).copy_from(&self.matrix);
        bordered.view_mut((p, 0), (r, p)).copy_from(c);
        bordered.view_mut((0, p), (p, r)).copy_from(&c.transpose());
        let inverse = bordered.try_inverse().unwrap();
        DVector::from_fn(p, |i, _| inverse[(i, i)].sqrt())
    }
}

/// γ with its mean, linear (and quadratic, for `degree` 2) trend removed over `years`.
fn detrend(gamma: &[f64], years: &[f64], degree: usize) -> Vec<f64> {
    let cbar = years.iter().sum::<f64>() / years.len() as f64;
    let basis = DMatrix::from_fn(years.len(), degree + 1, |c, r| {
        (years[c] - cbar).powi(r as i32)
    });
    let g = DVector::from_column_slice(gamma);
    let coef = (basis.transpose() * &basis).try_inverse().unwrap() * basis.transpose() * &g;
    (g - basis * coef).iter().copied().collect()
}

/// Constraint rows Σ γ = 0, Σ (c − c̄) γ = 0 (and Σ (c − c̄)² γ = 0) at columns from `at`.
fn cohort_constraints(c: &mut DMatrix<f64>, row: usize, at: usize, years: &[f64], degree: usize) {
    let cbar = years.iter().sum::<f64>() / years.len() as f64;
    for (k, y) in years.iter().enumerate() {
        for r in 0..=degree {
            c[(row + r, at + k)] = (y - cbar).powi(r as i32);
        }
    }
}

fn window() -> (Span, Span) {
    (Span::new(60, 84).unwrap(), Span::new(1990, 2014).unwrap())
}

/// A smooth invented cohort pattern with a kink, before constraints.
fn raw_cohort(year: f64) -> f64 {
    0.06 * (year / 4.0).sin() + 0.03 * ((year - 1930.0) / 10.0).cos()
}

#[test]
fn apc_recovers_simulated_parameters() {
    let (ages, years) = window();
    let (na, nt) = (ages.len(), years.len());
    let grid = CohortGrid::new("apc", ages, years, 3, 5).unwrap();
    let cohort_years = grid.estimated_years();
    let nc = cohort_years.len();
    let a: Vec<f64> = (0..na).map(|i| (0.005f64).ln() + 0.09 * i as f64).collect();
    let k: Vec<f64> = (0..nt).map(|j| -0.02 * (j as f64 - 12.0)).collect();
    let raw: Vec<f64> = cohort_years.iter().map(|c| raw_cohort(*c)).collect();
    let gamma = detrend(&raw, &cohort_years, 1);
    let exposure = DMatrix::from_fn(na, nt, |i, _| 1e5 * (-0.04 * i as f64).exp());
    let mut rng = stream(11);
    let mut info = Information::new(na + nt + nc);
    let mut deaths = DMatrix::zeros(na, nt);
    for j in 0..nt {
        for i in 0..na {
            let g = grid.position[grid.cohort(i, j)];
            let mean = exposure[(i, j)] * (a[i] + k[j] + g.map_or(0.0, |c| gamma[c])).exp();
            deaths[(i, j)] = Poisson::new(mean).unwrap().sample(&mut rng);
            if let Some(c) = g {
                info.add(mean, &[(i, 1.0), (na + j, 1.0), (na + nt + c, 1.0)]);
            }
        }
    }
    let population = Population::new(Sex::F, ages, years, deaths, exposure).unwrap();
    let fit = apc().fit_population(&population).unwrap();
    let mut c = DMatrix::zeros(3, na + nt + nc);
    for j in 0..nt {
        c[(0, na + j)] = 1.0;
    }
    cohort_constraints(&mut c, 1, na + nt, &cohort_years, 1);
    let se = info.standard_errors(&c);
    let estimate: Vec<f64> = fit
        .ax
        .iter()
        .chain(fit.kt.iter())
        .copied()
        .chain(masked(&fit.cohorts.values, &fit.cohorts.fitted))
        .collect();
    let truth: Vec<f64> = a.iter().chain(&k).chain(&gamma).copied().collect();
    let z: Vec<f64> = (0..truth.len())
        .map(|r| (estimate[r] - truth[r]) / se[r])
        .collect();
    check_standardised("a_x", &z[..na]);
    check_standardised("k_t", &z[na..na + nt]);
    check_standardised("gamma", &z[na + nt..]);
}

fn cbd_cohort_recovery(variant: CbdCohortVariant, scenario: u64) {
    let (ages, years) = window();
    let (na, nt) = (ages.len(), years.len());
    let nk = if variant == CbdCohortVariant::M7 {
        3
    } else {
        2
    };
    let grid = CohortGrid::new("m", ages, years, 3, 5).unwrap();
    let cohort_years = grid.estimated_years();
    let nc = cohort_years.len();
    let xbar = 72.0;
    let sigma2 = (0..na).map(|i| (i as f64 - 12.0).powi(2)).sum::<f64>() / na as f64;
    let k1: Vec<f64> = (0..nt).map(|j| -3.2 - 0.02 * j as f64).collect();
    let k2: Vec<f64> = (0..nt).map(|j| 0.1 + 0.0006 * j as f64).collect();
    let k3: Vec<f64> = (0..nt).map(|j| 0.0004 - 0.00001 * j as f64).collect();
    let raw: Vec<f64> = cohort_years.iter().map(|c| raw_cohort(*c)).collect();
    let gamma = detrend(&raw, &cohort_years, nk - 1);
    let mut rng = stream(scenario);
    let p = nk * nt + nc;
    let mut info = Information::new(p);
    let mut deaths = DMatrix::zeros(na, nt);
    let mut exposure = DMatrix::zeros(na, nt);
    for j in 0..nt {
        for i in 0..na {
            let z = f64::from(ages.first) + i as f64 - xbar;
            let curve = z * z - sigma2;
            let g = grid.position[grid.cohort(i, j)];
            let mut eta = k1[j] + z * k2[j] + g.map_or(0.0, |c| gamma[c]);
            if nk == 3 {
                eta += curve * k3[j];
            }
            let q = 1.0 / (1.0 + (-eta).exp());
            let lives = 60_000u64;
            let d = Binomial::new(lives, q).unwrap().sample(&mut rng) as f64;
            deaths[(i, j)] = d;
            // Central exposure chosen so that E0 = Ec + D/2 equals the simulated lives.
            exposure[(i, j)] = lives as f64 - d / 2.0;
            if let Some(c) = g {
                let mut gradient = vec![(j, 1.0), (nt + j, z), (nk * nt + c, 1.0)];
                if nk == 3 {
                    gradient.push((2 * nt + j, curve));
                }
                info.add(lives as f64 * q * (1.0 - q), &gradient);
            }
        }
    }
    let population = Population::new(Sex::M, ages, years, deaths, exposure).unwrap();
    let fit = cbd_cohort(variant).fit_population(&population).unwrap();
    assert_eq!(fit.xbar, xbar);
    let mut c = DMatrix::zeros(nk, p);
    cohort_constraints(&mut c, 0, nk * nt, &cohort_years, nk - 1);
    let se = info.standard_errors(&c);
    let mut truth: Vec<f64> = k1.iter().chain(&k2).copied().collect();
    if nk == 3 {
        truth.extend(&k3);
    }
    truth.extend(&gamma);
    let mut estimate: Vec<f64> = (0..nk)
        .flat_map(|r| fit.factors.row(r).iter().copied().collect::<Vec<_>>())
        .collect();
    estimate.extend(masked(&fit.cohorts.values, &fit.cohorts.fitted));
    let z: Vec<f64> = (0..p).map(|r| (estimate[r] - truth[r]) / se[r]).collect();
    for (r, name) in ["k1", "k2", "k3"].iter().take(nk).enumerate() {
        check_standardised(name, &z[r * nt..(r + 1) * nt]);
    }
    check_standardised("gamma", &z[nk * nt..]);
}

#[test]
fn m6_recovers_simulated_parameters() {
    cbd_cohort_recovery(CbdCohortVariant::M6, 12);
}

#[test]
fn m7_recovers_simulated_parameters() {
    cbd_cohort_recovery(CbdCohortVariant::M7, 13);
}

fn renshaw_haberman_recovery(loading: CohortLoading, scenario: u64) {
    let (ages, years) = window();
    let (na, nt) = (ages.len(), years.len());
    let free = loading == CohortLoading::Free;
    let grid = CohortGrid::new("rh", ages, years, 3, 5).unwrap();
    let cohort_years = grid.estimated_years();
    let nc = cohort_years.len();
    let a: Vec<f64> = (0..na).map(|i| (0.005f64).ln() + 0.09 * i as f64).collect();
    let raw_b: Vec<f64> = (0..na).map(|i| 1.6 - i as f64 / na as f64).collect();
    let b: Vec<f64> = raw_b
        .iter()
        .map(|v| v / raw_b.iter().sum::<f64>())
        .collect();
    let k: Vec<f64> = (0..nt)
        .map(|j| -1.2 * (j as f64 - 12.0) + 1.5 * (j as f64 / 2.0).sin())
        .collect();
    let kbar = k.iter().sum::<f64>() / nt as f64;
    let k: Vec<f64> = k.iter().map(|v| v - kbar).collect();
    let (b0, scale) = if free {
        let raw: Vec<f64> = (0..na).map(|i| 0.5 + i as f64 / na as f64).collect();
        let sum: f64 = raw.iter().sum();
        (raw.iter().map(|v| v / sum).collect::<Vec<_>>(), sum)
    } else {
        (vec![1.0; na], 1.0)
    };
    let raw: Vec<f64> = cohort_years
        .iter()
        .map(|c| scale * raw_cohort(*c))
        .collect();
    let gamma = detrend(&raw, &cohort_years, 1);
    let exposure = DMatrix::from_fn(na, nt, |i, _| 2e5 * (-0.04 * i as f64).exp());
    let mut rng = stream(scenario);
    // θ = (a, b, k, γ, b0).
    let p = 3 * na + nt + nc;
    let mut info = Information::new(p);
    let mut deaths = DMatrix::zeros(na, nt);
    for j in 0..nt {
        for i in 0..na {
            let g = grid.position[grid.cohort(i, j)];
            let cohort = g.map_or(0.0, |c| gamma[c]);
            let mean = exposure[(i, j)] * (a[i] + b[i] * k[j] + b0[i] * cohort).exp();
            deaths[(i, j)] = Poisson::new(mean).unwrap().sample(&mut rng);
            if let Some(c) = g {
                let mut gradient = vec![
                    (i, 1.0),
                    (na + i, k[j]),
                    (2 * na + j, b[i]),
                    (2 * na + nt + c, b0[i]),
                ];
                if free {
                    gradient.push((2 * na + nt + nc + i, cohort));
                }
                info.add(mean, &gradient);
            }
        }
    }
    // Constraints: Σb, Σk, Σγ, Σ(c − c̄)γ, and Σb0 (free) or b0 fixed (unit).
    let rows = if free { 5 } else { 4 + na };
    let mut c = DMatrix::zeros(rows, p);
    for i in 0..na {
        c[(0, na + i)] = 1.0;
        if free {
            c[(4, 2 * na + nt + nc + i)] = 1.0;
        } else {
            c[(4 + i, 2 * na + nt + nc + i)] = 1.0;
        }
    }
    for j in 0..nt {
        c[(1, 2 * na + j)] = 1.0;
    }
    cohort_constraints(&mut c, 2, 2 * na + nt, &cohort_years, 1);
    let se = info.standard_errors(&c);

    let population = Population::new(Sex::F, ages, years, deaths, exposure).unwrap();
    let fit = renshaw_haberman(loading)
        .fit_population(&population)
        .unwrap();
    let mut estimate: Vec<f64> = fit.ax.iter().chain(&fit.bx).copied().collect();
    estimate.extend(fit.kt.iter());
    estimate.extend(masked(&fit.cohorts.values, &fit.cohorts.fitted));
    estimate.extend(&fit.b0x);
    let mut truth: Vec<f64> = a
        .iter()
        .chain(&b)
        .chain(&k)
        .chain(&gamma)
        .copied()
        .collect();
    truth.extend(&b0);
    let z: Vec<f64> = (0..2 * na + nt + nc)
        .map(|r| (estimate[r] - truth[r]) / se[r])
        .collect();
    let mut z: Vec<f64> = z;
    if free {
        z.extend((0..na).map(|i| (fit.b0x[i] - b0[i]) / se[2 * na + nt + nc + i]));
    } else {
        assert!(fit.b0x.iter().all(|v| *v == 1.0));
    }
    // The errors of a_x (and of b0_x) move together through the cohort level, so a group
    // of them has a wide spread of mean z²; the band is checked on all parameters pooled.
    for (name, range) in [
        ("a_x", 0..na),
        ("b_x", na..2 * na),
        ("k_t", 2 * na..2 * na + nt),
        ("gamma", 2 * na + nt..2 * na + nt + nc),
        ("b0_x", 2 * na + nt + nc..z.len()),
    ] {
        let worst = z[range].iter().fold(0.0f64, |m, v| m.max(v.abs()));
        assert!(worst < 4.5, "{name}: largest |z| = {worst}");
    }
    check_standardised("all parameters", &z);
}

#[test]
fn renshaw_haberman_unit_loading_recovers_simulated_parameters() {
    renshaw_haberman_recovery(CohortLoading::Unit, 14);
}

#[test]
fn renshaw_haberman_free_loading_recovers_simulated_parameters() {
    renshaw_haberman_recovery(CohortLoading::Free, 15);
}

#[test]
fn cohort_series_recover_simulated_coefficients() {
    // Conditional ML is OLS of the AR regression; its standard errors are
    // √(σ² diag (XᵀX)⁻¹) (standard regression asymptotics).
    let mut rng = stream(16);
    let noise = Normal::new(0.0, 0.02).unwrap();
    let n = 600;
    let (mu0, mu1, phi) = (0.05, -0.0002, 0.6);
    let mut trend_series = vec![0.1];
    let mut diff = vec![0.0];
    let mut level = vec![0.0];
    for i in 1..n {
        let next = mu0 + mu1 * (i + 1) as f64 + phi * trend_series[i - 1] + noise.sample(&mut rng);
        trend_series.push(next);
        let d = 0.004 + 0.5 * diff[i - 1] + noise.sample(&mut rng);
        diff.push(d);
        level.push(level[i - 1] + d);
    }
    let fit = CohortSeries::fit(CohortSeriesKind::Ar1Trend, &trend_series).unwrap();
    let x = DMatrix::from_fn(n - 1, 3, |r, col| match col {
        0 => 1.0,
        1 => trend_series[r],
        _ => (r + 2) as f64,
    });
    let cov = (x.transpose() * &x).try_inverse().unwrap() * fit.sigma2;
    let z = [
        (fit.intercept - mu0) / cov[(0, 0)].sqrt(),
        (fit.phi - phi) / cov[(1, 1)].sqrt(),
        (fit.trend - mu1) / cov[(2, 2)].sqrt(),
    ];
    assert!(z.iter().all(|v| v.abs() < 4.0), "{z:?}");
    // σ̂² has standard error ≈ σ² √(2/m).
    assert!((fit.sigma2 - 4e-4).abs() < 4.0 * 4e-4 * (2.0 / (n - 1) as f64).sqrt());

    let fit = CohortSeries::fit(CohortSeriesKind::Arima110Drift, &level).unwrap();
    let x = DMatrix::from_fn(n - 2, 2, |r, col| if col == 0 { 1.0 } else { diff[r + 1] });
    let cov = (x.transpose() * &x).try_inverse().unwrap() * fit.sigma2;
    assert!(((fit.intercept - 0.004) / cov[(0, 0)].sqrt()).abs() < 4.0);
    assert!(((fit.phi - 0.5) / cov[(1, 1)].sqrt()).abs() < 4.0);
}
