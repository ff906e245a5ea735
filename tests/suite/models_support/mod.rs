//! Shared helpers for the model tests: fixture loading and model settings.
#![allow(dead_code)]

use std::path::PathBuf;

use nalgebra::DMatrix;
use tailspan::data::config::{CohortLoading, CohortSeriesKind};
use tailspan::data::{Population, Sex, Span};
use tailspan::models::{
    Apc, ApcParams, Cbd, CbdCohort, CbdCohortParams, CbdCohortVariant, CbdParams, LeeCarter,
    LeeCarterMethod, LeeCarterParams, RenshawHaberman, RenshawHabermanParams,
};

/// Path of a file in tests/fixtures.
pub fn fixture(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures")
        .join(name)
}

/// Reads a fixture experience CSV (`year,age,sex,deaths,exposure`, one sex, complete grid)
/// straight into a population, independently of the crate's loader.
pub fn load_population(name: &str) -> Population {
    let text = std::fs::read_to_string(fixture(name)).unwrap();
    let rows: Vec<(i32, i32, f64, f64)> = text
        .lines()
        .skip(1)
        .map(|line| {
            let f: Vec<&str> = line.split(',').collect();
            (
                f[0].parse().unwrap(),
                f[1].parse().unwrap(),
                f[3].parse().unwrap(),
                f[4].parse().unwrap(),
            )
        })
        .collect();
    let years = Span::new(
        rows.iter().map(|r| r.0).min().unwrap(),
        rows.iter().map(|r| r.0).max().unwrap(),
    )
    .unwrap();
    let ages = Span::new(
        rows.iter().map(|r| r.1).min().unwrap(),
        rows.iter().map(|r| r.1).max().unwrap(),
    )
    .unwrap();
    assert_eq!(rows.len(), ages.len() * years.len());
    let mut deaths = DMatrix::zeros(ages.len(), years.len());
    let mut exposure = DMatrix::zeros(ages.len(), years.len());
    for (year, age, d, e) in rows {
        let (i, j) = (ages.index(age).unwrap(), years.index(year).unwrap());
        deaths[(i, j)] = d;
        exposure[(i, j)] = e;
    }
    Population::new(Sex::F, ages, years, deaths, exposure).unwrap()
}

/// The reference fits made by tests/fixtures/make_models_fixtures.py.
pub fn reference() -> serde_json::Value {
    let text = std::fs::read_to_string(fixture("models_reference.json")).unwrap();
    serde_json::from_str(&text).unwrap()
}

/// A JSON array of numbers as a vector.
pub fn numbers(value: &serde_json::Value) -> Vec<f64> {
    value
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect()
}

/// Lee–Carter settings with the config defaults.
pub fn lee_carter(method: LeeCarterMethod, refit_kt: bool) -> LeeCarter {
    LeeCarterParams {
        method,
        refit_kt,
        closure_fit_ages: 10,
        max_age: 120,
        tolerance: 1e-8,
        max_iterations: 1000,
    }
    .check()
    .unwrap()
}

/// CBD settings with the config defaults, but a tolerance fine enough for 1e-6 checks.
pub fn cbd() -> Cbd {
    CbdParams {
        closure_fit_ages: 10,
        max_age: 120,
        tolerance: 1e-12,
        max_iterations: 100,
    }
    .check()
    .unwrap()
}

/// Largest |a − b| relative to the largest |b| (at least 1e-300).
pub fn relative_gap(a: &[f64], b: &[f64]) -> f64 {
    assert_eq!(a.len(), b.len());
    let scale = b.iter().fold(1e-300f64, |m, v| m.max(v.abs()));
    a.iter()
        .zip(b)
        .map(|(x, y)| (x - y).abs())
        .fold(0.0, f64::max)
        / scale
}

/// The cohort reference fits made by tests/fixtures/make_cohort_fixtures.py.
pub fn cohort_reference() -> serde_json::Value {
    let text = std::fs::read_to_string(fixture("cohort_reference.json")).unwrap();
    serde_json::from_str(&text).unwrap()
}

/// Age–period–cohort settings with the config defaults and a fine tolerance.
pub fn apc() -> Apc {
    ApcParams {
        min_cohort_cells: 3,
        cohort_series: CohortSeriesKind::Arima110Drift,
        closure_fit_ages: 5,
        max_age: 120,
        tolerance: 1e-12,
        max_iterations: 100,
    }
    .check()
    .unwrap()
}

/// M6 or M7 settings with the config defaults and a fine tolerance.
pub fn cbd_cohort(variant: CbdCohortVariant) -> CbdCohort {
    CbdCohortParams {
        variant,
        min_cohort_cells: 3,
        cohort_series: CohortSeriesKind::Arima110Drift,
        closure_fit_ages: 5,
        max_age: 120,
        tolerance: 1e-12,
        max_iterations: 100,
    }
    .check()
    .unwrap()
}

/// Renshaw–Haberman settings with the config defaults.
pub fn renshaw_haberman(loading: CohortLoading) -> RenshawHaberman {
    RenshawHabermanParams {
        loading,
        min_cohort_cells: 3,
        cohort_series: CohortSeriesKind::Arima110Drift,
        closure_fit_ages: 5,
        max_age: 120,
        tolerance: 1e-9,
        max_iterations: 20000,
    }
    .check()
    .unwrap()
}

/// The values of `all` where `mask` is true.
pub fn masked(all: &[f64], mask: &[bool]) -> Vec<f64> {
    all.iter()
        .zip(mask)
        .filter(|(_, m)| **m)
        .map(|(v, _)| *v)
        .collect()
}
