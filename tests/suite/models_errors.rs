//! Bad data and impossible settings give clear model errors, never a silent result.

use crate::models_support;

use models_support::*;
use nalgebra::DMatrix;
use tailspan::data::{Population, Sex, Span};
use tailspan::models::{CbdParams, LeeCarterMethod, LeeCarterParams};

fn params(method: LeeCarterMethod, max_iterations: usize) -> LeeCarterParams {
    LeeCarterParams {
        method,
        refit_kt: false,
        closure_fit_ages: 2,
        max_age: 120,
        tolerance: 1e-8,
        max_iterations,
    }
}

#[test]
fn poisson_non_convergence_is_an_error() {
    let population = load_population("small_experience.csv");
    let err = params(LeeCarterMethod::Poisson, 2)
        .check()
        .unwrap()
        .fit_population(&population)
        .unwrap_err()
        .to_string();
    assert!(err.contains("did not converge in 2"), "{err}");
    assert!(err.contains("model.max_iterations"), "{err}");
}

#[test]
fn cbd_with_one_age_is_a_singular_design() {
    let population = load_population("small_experience.csv");
    let one_age = population
        .restrict(Span::new(70, 70).unwrap(), population.years)
        .unwrap();
    let err = CbdParams {
        closure_fit_ages: 2,
        max_age: 120,
        tolerance: 1e-8,
        max_iterations: 50,
    }
    .check()
    .unwrap()
    .fit_population(&one_age)
    .unwrap_err()
    .to_string();
    assert!(err.contains("at least two ages"), "{err}");
}

#[test]
fn cbd_year_with_one_exposed_age_is_a_singular_design() {
    let mut population = load_population("small_experience.csv");
    for i in 1..population.ages.len() {
        population.deaths[(i, 4)] = 0.0;
        population.exposure[(i, 4)] = 0.0;
    }
    let err = CbdParams {
        closure_fit_ages: 2,
        max_age: 120,
        tolerance: 1e-8,
        max_iterations: 50,
    }
    .check()
    .unwrap()
    .fit_population(&population)
    .unwrap_err()
    .to_string();
    assert!(err.contains("year 2004"), "{err}");
    assert!(err.contains("singular design"), "{err}");
}

#[test]
fn an_age_without_deaths_has_no_poisson_estimate() {
    let ages = Span::new(60, 62).unwrap();
    let years = Span::new(2000, 2003).unwrap();
    let mut deaths = DMatrix::from_element(3, 4, 5.0);
    deaths.row_mut(1).fill(0.0);
    let exposure = DMatrix::from_element(3, 4, 100.0);
    let population = Population::new(Sex::M, ages, years, deaths, exposure).unwrap();
    let err = params(LeeCarterMethod::Poisson, 100)
        .check()
        .unwrap()
        .fit_population(&population)
        .unwrap_err()
        .to_string();
    assert!(err.contains("age 61"), "{err}");
}

#[test]
fn settings_are_checked_before_fitting() {
    let mut bad = params(LeeCarterMethod::Poisson, 10);
    bad.tolerance = 0.0;
    assert!(bad.check().unwrap_err().to_string().contains("tolerance"));
    let mut refit = params(LeeCarterMethod::Poisson, 10);
    refit.refit_kt = true;
    assert!(refit.check().unwrap_err().to_string().contains("refit_kt"));
    let population = load_population("small_experience.csv");
    let mut low = params(LeeCarterMethod::Svd, 10);
    low.max_age = 79;
    let err = low
        .check()
        .unwrap()
        .fit_population(&population)
        .unwrap_err()
        .to_string();
    assert!(err.contains("max_age"), "{err}");
}
