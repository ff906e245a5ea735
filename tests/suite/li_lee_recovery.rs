//! Simulation-recovery check of Li & Lee (2005)'s augmented common factor model:
//! two populations' Poisson deaths are drawn from known parameters with large exposures,
//! fitted back, and the estimates must lie within a few standard errors of the truth.
//!
//! The model is identified through the combined population: B_x K_t is the first
//! component of the pooled rates, so the own parts of the two populations must add up to
//! (about) nothing in the pool, w₁ b_{x,1} k_{t,1} + w₂ b_{x,2} k_{t,2} ≈ 0 with the
//! populations' death shares w_i. The simulation draws them so: equal death shares, the
//! same own loading b_x, and k_{t,2} = −k_{t,1}. The a_{x,i} are time averages, so each k is
//! identified up to its sample mean: the true k is centred, and its AR(1)'s true constant
//! is c − (1 − φ) k̄ (k̄ the uncentred sample mean), which is what the fit estimates.

use std::path::Path;

use nalgebra::{DMatrix, DVector};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal, Poisson};
use tailspan::basis::LiLeeSex;
use tailspan::data::{Population, Sex, Span};

const DRIFT: f64 = -0.4;
const SIGMA_K: f64 = 0.3;
const C: f64 = 0.3;
const PHI: f64 = 0.6;
const SIGMA: f64 = 1.0;

#[test]
fn li_lee_recovers_simulated_parameters() {
    let mut rng = ChaCha8Rng::seed_from_u64(20261205);
    let (ages, years) = (Span::new(60, 79).unwrap(), Span::new(1960, 2019).unwrap());
    let (na, nt) = (ages.len(), years.len());
    let line = |from: f64, to: f64| {
        let raw = DVector::from_fn(na, |i, _| from + (to - from) * i as f64 / (na - 1) as f64);
        &raw / raw.sum()
    };
    let common_b = line(1.5, 0.5);
    let own_b = line(0.5, 1.5);
    let normal = Normal::new(0.0, 1.0).unwrap();
    let mut common_k = vec![0.0];
    let mut own_k = vec![C / (1.0 - PHI)];
    for _ in 1..nt {
        let (z, e): (f64, f64) = (normal.sample(&mut rng), normal.sample(&mut rng));
        common_k.push(common_k.last().unwrap() + DRIFT + SIGMA_K * z);
        own_k.push(C + PHI * own_k.last().unwrap() + SIGMA * e);
    }
    let own_mean = own_k.iter().sum::<f64>() / nt as f64;
    let true_constant = C - (1.0 - PHI) * own_mean;
    let a = |i: usize| -4.2 + 0.09 * i as f64;
    // Population 2 is 10 % lighter with e^0.1 times the exposure: equal death shares.
    let shift = [0.0, -0.1];
    let size = [1e6, 1e6 * 0.1f64.exp()];
    let sign = [1.0, -1.0];
    let populations: Vec<Population> = (0..2)
        .map(|p| {
            let exposure = DMatrix::from_element(na, nt, size[p]);
            let deaths = DMatrix::from_fn(na, nt, |i, j| {
                let log_m = a(i)
                    + shift[p]
                    + common_b[i] * common_k[j]
                    + sign[p] * own_b[i] * (own_k[j] - own_mean);
                Poisson::new(size[p] * log_m.exp())
                    .unwrap()
                    .sample(&mut rng)
            });
            Population::new(Sex::F, ages, years, deaths, exposure).unwrap()
        })
        .collect();
    let fit = LiLeeSex::fit(
        [&populations[0], &populations[1]],
        [Path::new("index.csv"), Path::new("book.csv")],
    )
    .unwrap();

    let within = |label: &str, estimate: f64, truth: f64, standard_error: f64| {
        let z = (estimate - truth) / standard_error;
        assert!(
            z.abs() < 3.0,
            "{label}: {estimate} against {truth} (s.e. {standard_error}, z = {z})"
        );
    };
    let steps = (nt - 1) as f64;
    // Random walk with drift: s.e. of the drift σ_K / √(T − 1) (closed form).
    within("drift", fit.common.drift, DRIFT, SIGMA_K / steps.sqrt());
    // σ̂ of a Gaussian sample: s.e. ≈ σ / √(2 (T − 1)) (large-sample closed form).
    within(
        "sigma_K",
        fit.common.sigma,
        SIGMA_K,
        SIGMA_K / (2.0 * steps).sqrt(),
    );
    for (i, sign) in [1.0, -1.0].into_iter().enumerate() {
        let ar = &fit.own[i];
        // φ and c: the AR(1)'s OLS covariance σ̂² (XᵀX)⁻¹ (its standard errors).
        within("phi", ar.phi, PHI, ar.phi_standard_error);
        within(
            "constant",
            ar.constant,
            sign * true_constant,
            ar.constant_standard_error,
        );
        within("sigma", ar.sigma, SIGMA, SIGMA / (2.0 * steps).sqrt());
    }
    // The two own indices are mirror images here, so their innovations are perfectly
    // negatively correlated.
    assert!(fit.correlation < -0.95, "{}", fit.correlation);
    // The loadings have no closed-form standard error; with ~10^4 deaths a cell the
    // Poisson noise on a log rate is about 1 %, and the loadings must lie within a tenth
    // of their mean value 1/20 of the truth.
    let tolerance = 0.1 / na as f64;
    for x in 0..na {
        let c = &fit.components;
        assert!(
            (c.common_loading[x] - common_b[x]).abs() < tolerance,
            "B[{x}] = {} against {}",
            c.common_loading[x],
            common_b[x]
        );
        for p in 0..2 {
            assert!(
                (c.own_loading[p][x] - own_b[x]).abs() < tolerance,
                "b[{p}][{x}] = {} against {}",
                c.own_loading[p][x],
                own_b[x]
            );
        }
    }
}
