//! Monte Carlo moments of the projected indices against the closed forms of a random walk
//! with drift.
//!
//! Source for every closed form here: a random walk with drift k_{T+h} = k_T + h d +
//! Σ_{j≤h} ε_j, ε ~ N(0, Σ) i.i.d., has mean k_T + h d and covariance h Σ (standard
//! time-series result, e.g. Hamilton, Time Series Analysis, 1994, ch. 15 — from memory);
//! with the drift itself drawn from N(d̂, Σ / n) independently of the innovations the
//! covariance becomes h Σ + h² Σ / n (law of total variance). Tolerances are four
//! standard errors of the Monte Carlo estimate: σ/√N for a mean, σ²√(2/(N−1)) for a
//! normal variance, √((σ1² σ2² + σ12²)/N) for a normal covariance, and (1 − ρ²)/√N for a
//! correlation (Fisher's large-sample result).

use crate::projection_support;

use projection_support::{AGES, cbd_pair, log_rate_pair};
use tailspan::projection::{Projector, Settings, Uncertainty};

const N: u64 = 4000;

fn settings(noise: bool, uncertainty: Uncertainty, horizon: usize) -> Settings {
    Settings {
        seed: 20261202,
        horizon,
        noise,
        uncertainty,
    }
}

/// Stacked indices at each horizon of `hs` for scenarios 1..=N, one pass over the scenarios.
fn sample(projector: &Projector, hs: &[usize]) -> Vec<Vec<Vec<f64>>> {
    let mut buf = projector.buffer();
    let mut out = vec![Vec::with_capacity(N as usize); hs.len()];
    for s in 1..=N {
        projector.generate(s, &mut buf).unwrap();
        for (o, &h) in out.iter_mut().zip(hs) {
            o.push(buf.stacked(h).to_vec());
        }
    }
    out
}

fn mean(xs: &[Vec<f64>], i: usize) -> f64 {
    xs.iter().map(|x| x[i]).sum::<f64>() / xs.len() as f64
}

fn cov(xs: &[Vec<f64>], i: usize, j: usize) -> f64 {
    let (mi, mj) = (mean(xs, i), mean(xs, j));
    xs.iter().map(|x| (x[i] - mi) * (x[j] - mj)).sum::<f64>() / (xs.len() - 1) as f64
}

fn assert_within(what: &str, estimate: f64, expected: f64, se: f64) {
    assert!(
        (estimate - expected).abs() <= 4.0 * se,
        "{what}: Monte Carlo {estimate} vs closed form {expected} (4 s.e. = {})",
        4.0 * se
    );
}

#[test]
fn central_path_is_last_index_plus_h_drifts_exactly() {
    let horizon = 30;
    let fits = log_rate_pair(120);
    // d̂ = (k_T − k_1)/(T − 1), the closed form of the mean first difference.
    let closed_drift: Vec<f64> = fits
        .iter()
        .map(|(_, m)| {
            let k = m.factors();
            (k[(0, k.ncols() - 1)] - k[(0, 0)]) / (k.ncols() - 1) as f64
        })
        .collect();
    let central = Projector::new(fits, settings(false, Uncertainty::None, horizon), None).unwrap();
    let basis = central.basis();
    for (i, d) in closed_drift.iter().enumerate() {
        assert!((basis.walk().drift[i] - d).abs() < 1e-12);
    }
    let mut buf = central.buffer();
    central.generate(0, &mut buf).unwrap();
    for h in 1..=horizon {
        for i in 0..basis.dims() {
            assert_eq!(
                buf.stacked(h)[i],
                basis.last()[i] + h as f64 * basis.walk().drift[i],
                "h = {h}, index {i}"
            );
        }
    }
    assert!(central.generate(1, &mut buf).is_err());

    // With noise on, scenario 0 is still the same central path.
    let noisy = Projector::new(
        log_rate_pair(120),
        settings(true, Uncertainty::Drift, horizon),
        None,
    )
    .unwrap();
    let mut other = noisy.buffer();
    noisy.generate(0, &mut other).unwrap();
    assert_eq!(buf.rates(0), other.rates(0));
    assert_eq!(buf.rates(1), other.rates(1));
    noisy.generate(1, &mut other).unwrap();
    assert_ne!(buf.rates(0), other.rates(0));
}

#[test]
fn lee_carter_index_mean_and_variance_grow_linearly() {
    let horizon = 25;
    let p = Projector::new(
        log_rate_pair(120),
        settings(true, Uncertainty::None, horizon),
        None,
    )
    .unwrap();
    let b = p.basis();
    let hs = [1, 10, 25];
    for (h, xs) in hs.into_iter().zip(sample(&p, &hs)) {
        for i in 0..2 {
            let (d, s2) = (b.walk().drift[i], b.walk().covariance[(i, i)]);
            let var = h as f64 * s2;
            assert_within(
                &format!("mean k at h = {h}, index {i}"),
                mean(&xs, i),
                b.last()[i] + h as f64 * d,
                (var / N as f64).sqrt(),
            );
            assert_within(
                &format!("variance of k at h = {h}, index {i}"),
                cov(&xs, i, i),
                var,
                var * (2.0 / (N - 1) as f64).sqrt(),
            );
        }
    }
}

#[test]
fn cbd_cross_covariance_and_cross_sex_correlation_match() {
    let horizon = 10;
    let p = Projector::new(
        cbd_pair(AGES, 120),
        settings(true, Uncertainty::None, horizon),
        None,
    )
    .unwrap();
    let b = p.basis();
    let sigma = &b.walk().covariance;
    let h = horizon;
    let [first, xs]: [Vec<Vec<f64>>; 2] = sample(&p, &[1, h]).try_into().unwrap();
    // k1_F with k2_F (within-sex) and k1_F with k1_M (across sexes).
    for (i, j) in [(0, 1), (2, 3), (0, 2), (1, 3)] {
        let (sii, sjj, sij) = (sigma[(i, i)], sigma[(j, j)], sigma[(i, j)]);
        let hh = h as f64;
        assert_within(
            &format!("covariance ({i}, {j}) at h = {h}"),
            cov(&xs, i, j),
            hh * sij,
            (hh * hh * (sii * sjj + sij * sij) / N as f64).sqrt(),
        );
    }
    // Innovations of the first projected year: k_{T+1} − k_T − d̂.
    let innovations: Vec<Vec<f64>> = first
        .iter()
        .map(|x| {
            (0..4)
                .map(|i| x[i] - b.last()[i] - b.walk().drift[i])
                .collect()
        })
        .collect();
    let rho = b.correlation()[(0, 2)];
    assert!(
        rho > 0.3,
        "the invented history has correlated sexes: {rho}"
    );
    let sample_rho =
        cov(&innovations, 0, 2) / (cov(&innovations, 0, 0) * cov(&innovations, 2, 2)).sqrt();
    assert_within(
        "cross-sex innovation correlation",
        sample_rho,
        rho,
        (1.0 - rho * rho) / (N as f64).sqrt(),
    );
}

#[test]
fn drift_uncertainty_adds_h_squared_term() {
    let horizon = 25;
    let p = Projector::new(
        log_rate_pair(120),
        settings(true, Uncertainty::Drift, horizon),
        None,
    )
    .unwrap();
    let b = p.basis();
    let n = b.walk().steps as f64;
    let xs = sample(&p, &[horizon]).remove(0);
    let hh = horizon as f64;
    for i in 0..2 {
        let s2 = b.walk().covariance[(i, i)];
        let var = hh * s2 + hh * hh * s2 / n;
        assert!(
            hh * hh * s2 / n > 0.5 * hh * s2,
            "the check must see the drift term"
        );
        assert_within(
            &format!("mean with drift uncertainty, index {i}"),
            mean(&xs, i),
            b.last()[i] + hh * b.walk().drift[i],
            (var / N as f64).sqrt(),
        );
        assert_within(
            &format!("variance with drift uncertainty, index {i}"),
            cov(&xs, i, i),
            var,
            var * (2.0 / (N - 1) as f64).sqrt(),
        );
    }
}

#[test]
fn joint_estimator_cross_covariance_by_hand() {
    // Two indices over four years; first differences (1, 3, 2) and (−1, 0, −2): drifts 2
    // and −1, deviations (−1, 1, 0) and (0, 1, −1), so with divisor T − 2 = 2 both
    // variances are 1 and the covariance is 1/2 (hand computation of the usual
    // estimators); the Cholesky factor of [[1, ½], [½, 1]] has L21 = ½, L22 = √3/2.
    let h = nalgebra::DMatrix::from_row_slice(2, 4, &[0.0, 1.0, 4.0, 6.0, 5.0, 4.0, 4.0, 2.0]);
    let w = tailspan::series::RandomWalk::estimate(&h).unwrap();
    assert_eq!(w.steps, 3);
    assert!((w.drift[0] - 2.0).abs() < 1e-15 && (w.drift[1] + 1.0).abs() < 1e-15);
    assert!((w.covariance[(0, 0)] - 1.0).abs() < 1e-15);
    assert!((w.covariance[(1, 1)] - 1.0).abs() < 1e-15);
    assert!((w.covariance[(0, 1)] - 0.5).abs() < 1e-15);
    assert!((w.cholesky[(1, 0)] - 0.5).abs() < 1e-15);
    assert!((w.cholesky[(1, 1)] - 0.75f64.sqrt()).abs() < 1e-15);
}
