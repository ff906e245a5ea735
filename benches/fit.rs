//! Fit timings on a national-size grid: 51 ages × 50 years of invented Poisson data.
//!
//! Target: the Poisson Lee–Carter fit under 100 ms on one core.

use std::hint::black_box;

use criterion::{Criterion, criterion_group, criterion_main};
use nalgebra::DMatrix;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Poisson};
use tailspan::data::{Population, Sex, Span};
use tailspan::models::{CbdParams, LeeCarterMethod, LeeCarterParams};

/// Invented experience for ages 50–100 and years 1975–2024 with `exposure_at_50` lives at
/// age 50. The rates are not exactly Lee–Carter (a second age-period term and a cohort
/// wave are added), so the fit has real work to do.
fn invented(exposure_at_50: f64) -> Population {
    let (ages, years) = (Span::new(50, 100).unwrap(), Span::new(1975, 2024).unwrap());
    let (na, nt) = (ages.len(), years.len());
    let mut rng = ChaCha8Rng::seed_from_u64(7);
    let exposure = DMatrix::from_fn(na, nt, |i, j| {
        exposure_at_50 * (-0.04 * i as f64).exp() * (1.0 + 0.005 * j as f64)
    });
    let deaths = DMatrix::from_fn(na, nt, |i, j| {
        let x = i as f64 / na as f64;
        let b = (1.2 - x) / na as f64;
        let k = -1.2 * (j as f64 - 24.5);
        let second = 0.02 * (x - 0.5) * 3.0 * (j as f64 / 8.0).sin();
        let cohort = 0.03 * ((j as f64 - i as f64) / 5.0).sin();
        let m = ((0.003f64).ln() + 0.095 * i as f64 + b * k + second + cohort).exp();
        Poisson::new(exposure[(i, j)] * m).unwrap().sample(&mut rng)
    });
    Population::new(Sex::F, ages, years, deaths, exposure).unwrap()
}

fn bench_fits(c: &mut Criterion) {
    let population = invented(1e5);
    // A small population: many cells with no deaths, and hundreds of Newton cycles.
    let small = invented(2e2);
    let lee_carter = |method| {
        LeeCarterParams {
            method,
            refit_kt: false,
            closure_fit_ages: 10,
            max_age: 120,
            tolerance: 1e-8,
            max_iterations: 1000,
        }
        .check()
        .unwrap()
    };
    let poisson = lee_carter(LeeCarterMethod::Poisson);
    let svd = lee_carter(LeeCarterMethod::Svd);
    let cbd = CbdParams {
        closure_fit_ages: 10,
        max_age: 120,
        tolerance: 1e-8,
        max_iterations: 100,
    }
    .check()
    .unwrap();
    c.bench_function("lee_carter_poisson_51x50", |b| {
        b.iter(|| poisson.fit_population(black_box(&population)).unwrap())
    });
    c.bench_function("lee_carter_poisson_51x50_small_population", |b| {
        b.iter(|| poisson.fit_population(black_box(&small)).unwrap())
    });
    c.bench_function("lee_carter_svd_51x50", |b| {
        b.iter(|| svd.fit_population(black_box(&population)).unwrap())
    });
    c.bench_function("cbd_51x50", |b| {
        b.iter(|| cbd.fit_population(black_box(&population)).unwrap())
    });
}

criterion_group!(benches, bench_fits);
criterion_main!(benches);
