//! Cohort-model fits checked against reference libraries on a small invented dataset.
//!
//! References come from tests/fixtures/make_cohort_fixtures.py: statsmodels' GLM with age,
//! period and cohort dummies (Poisson with offset ln E for the age–period–cohort model;
//! binomial on [D, E0 − D] for M6 and M7 of Cairns et al. 2009), brought to the same
//! identifiability constraints; and statsmodels' AutoReg (conditional maximum likelihood)
//! for the cohort-index time series.

use crate::models_support;

use models_support::*;
use tailspan::data::config::CohortSeriesKind;
use tailspan::models::{CbdCohortVariant, FittedModel};
use tailspan::series::CohortSeries;

fn close(label: &str, ours: &[f64], theirs: &serde_json::Value, tolerance: f64) {
    let theirs = numbers(theirs);
    assert_eq!(ours.len(), theirs.len(), "{label}: lengths");
    for (r, (a, b)) in ours.iter().zip(&theirs).enumerate() {
        assert!((a - b).abs() < tolerance, "{label}[{r}]: {a} vs {b}");
    }
}

fn check_diagnostics(fit: &dyn FittedModel, reference: &serde_json::Value) {
    let d = fit.diagnostics();
    let dev = reference["deviance"].as_f64().unwrap();
    let ll = reference["log_likelihood"].as_f64().unwrap();
    assert!((d.deviance - dev).abs() < 1e-6, "{} vs {dev}", d.deviance);
    assert!(
        (d.log_likelihood - ll).abs() < 1e-6,
        "{} vs {ll}",
        d.log_likelihood
    );
    // The GLM's full-rank design has exactly the effective parameters after constraints.
    assert_eq!(
        d.parameters as u64,
        reference["parameter_count"].as_u64().unwrap()
    );
    assert_eq!(
        d.observations as u64,
        reference["observations"].as_u64().unwrap()
    );
}

#[test]
fn apc_matches_statsmodels_poisson_glm() {
    // Source: statsmodels GLM, Poisson family, offset ln E, age/period/cohort dummies.
    let population = load_population("cohort_experience.csv");
    let reference = &cohort_reference()["apc"];
    let fit = apc().fit_population(&population).unwrap();
    close("ax", &fit.ax, &reference["ax"], 1e-7);
    close("kt", fit.kt.as_slice(), &reference["kt"], 1e-7);
    let gamma = masked(&fit.cohorts.values, &fit.cohorts.fitted);
    close("gamma", &gamma, &reference["gamma"], 1e-7);
    let years: Vec<f64> = fit
        .grid
        .estimated_years()
        .iter()
        .map(|c| c.round())
        .collect();
    close("cohorts", &years, &reference["cohorts"], 0.5);
    check_diagnostics(&fit, reference);
    // The constraints themselves.
    let cbar = years.iter().sum::<f64>() / years.len() as f64;
    assert!(fit.kt.sum().abs() < 1e-10);
    assert!(gamma.iter().sum::<f64>().abs() < 1e-10);
    let trend: f64 = gamma.iter().zip(&years).map(|(g, c)| g * (c - cbar)).sum();
    assert!(trend.abs() < 1e-9);
}

#[test]
fn m6_and_m7_match_statsmodels_binomial_glm() {
    // Source: statsmodels GLM, Binomial family (logit), endog [D, E0 − D], per-year level,
    // slope and curvature columns and cohort dummies; constraints of Cairns et al. (2009).
    let population = load_population("cohort_experience.csv");
    let all = cohort_reference();
    for (variant, key) in [(CbdCohortVariant::M6, "m6"), (CbdCohortVariant::M7, "m7")] {
        let reference = &all[key];
        let fit = cbd_cohort(variant).fit_population(&population).unwrap();
        assert_eq!(fit.xbar, reference["xbar"].as_f64().unwrap());
        let row = |r: usize| -> Vec<f64> { fit.factors.row(r).iter().copied().collect() };
        close(&format!("{key} k1"), &row(0), &reference["k1"], 1e-7);
        close(&format!("{key} k2"), &row(1), &reference["k2"], 1e-7);
        if variant == CbdCohortVariant::M7 {
            close("m7 k3", &row(2), &reference["k3"], 1e-7);
            assert!((fit.sigma2 - reference["sigma2"].as_f64().unwrap()).abs() < 1e-12);
        }
        let gamma = masked(&fit.cohorts.values, &fit.cohorts.fitted);
        close(&format!("{key} gamma"), &gamma, &reference["gamma"], 1e-7);
        check_diagnostics(&fit, reference);
    }
}

#[test]
fn cohort_series_match_statsmodels_autoreg() {
    // Source: statsmodels AutoReg (conditional ML): lags=1, trend="c" on the differences
    // for ARIMA(1,1,0) with drift; trend="ct" on the levels for AR(1) about a trend.
    let reference = &cohort_reference()["series"];
    let series = numbers(&reference["arima110_series"]);
    let fit = CohortSeries::fit(CohortSeriesKind::Arima110Drift, &series).unwrap();
    let theirs = &reference["arima110"];
    for (name, ours) in [
        ("intercept", fit.intercept),
        ("phi", fit.phi),
        ("sigma2", fit.sigma2),
        ("log_likelihood", fit.log_likelihood),
    ] {
        let value = theirs[name].as_f64().unwrap();
        assert!(
            (ours - value).abs() < 1e-4,
            "arima110 {name}: {ours} vs {value}"
        );
    }
    assert_eq!(
        fit.observations as u64,
        theirs["observations"].as_u64().unwrap()
    );

    let series = numbers(&reference["ar1_trend_series"]);
    let fit = CohortSeries::fit(CohortSeriesKind::Ar1Trend, &series).unwrap();
    let theirs = &reference["ar1_trend"];
    for (name, ours) in [
        ("intercept", fit.intercept),
        ("trend", fit.trend),
        ("phi", fit.phi),
        ("sigma2", fit.sigma2),
        ("log_likelihood", fit.log_likelihood),
    ] {
        let value = theirs[name].as_f64().unwrap();
        assert!(
            (ours - value).abs() < 1e-4,
            "ar1-trend {name}: {ours} vs {value}"
        );
    }
    assert_eq!(
        fit.observations as u64,
        theirs["observations"].as_u64().unwrap()
    );
}
