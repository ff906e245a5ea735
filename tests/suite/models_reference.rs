//! Fits checked against reference libraries on a small invented dataset.
//!
//! References come from tests/fixtures/make_models_fixtures.py: numpy.linalg.svd for the
//! SVD fit (Lee & Carter 1992), statsmodels' binomial GLM per year for CBD (Cairns, Blake
//! & Dowd 2006), and scipy.optimize (BFGS on the full Poisson likelihood) for the Poisson
//! Lee–Carter fit (Brouhns, Denuit & Vermunt 2002).

use crate::models_support;

use models_support::*;
use tailspan::models::{FittedModel, LeeCarterMethod};

#[test]
fn svd_fit_matches_numpy() {
    // Source: numpy.linalg.svd of the centred log rates (make_models_fixtures.py).
    let population = load_population("small_experience.csv");
    let reference = reference();
    let fit = lee_carter(LeeCarterMethod::Svd, false)
        .fit_population(&population)
        .unwrap();
    for (name, ours) in [
        ("ax", fit.ax.as_slice()),
        ("bx", fit.bx.as_slice()),
        ("kt", fit.kt.as_slice()),
    ] {
        let gap = relative_gap(ours, &numbers(&reference["svd"][name]));
        assert!(gap < 1e-8, "{name}: relative gap {gap:e}");
    }
    assert!((fit.bx.sum() - 1.0).abs() < 1e-12);
    assert!(fit.kt.sum().abs() < 1e-9);
    // The diagnostics of the SVD rates, by the same formulas in numpy/scipy.
    let d = fit.diagnostics();
    let ll = reference["svd_log_likelihood"].as_f64().unwrap();
    let dev = reference["svd_deviance"].as_f64().unwrap();
    assert!(
        (d.log_likelihood - ll).abs() < 1e-8 * ll.abs(),
        "{}",
        d.log_likelihood
    );
    assert!((d.deviance - dev).abs() < 1e-8 * dev, "{}", d.deviance);
    assert_eq!(d.iterations, 0);
}

#[test]
fn cbd_fit_matches_statsmodels_glm() {
    // Source: statsmodels GLM, Binomial family (logit), endog [D, E0 − D], per year.
    let population = load_population("small_experience.csv");
    let reference = reference();
    let fit = cbd().fit_population(&population).unwrap();
    assert_eq!(fit.xbar, reference["cbd"]["xbar"].as_f64().unwrap());
    for (row, name) in [(0, "k1"), (1, "k2")] {
        let ours: Vec<f64> = fit.factors.row(row).iter().copied().collect();
        let theirs = numbers(&reference["cbd"][name]);
        for (a, b) in ours.iter().zip(&theirs) {
            assert!((a - b).abs() < 1e-6, "{name}: {a} vs {b}");
        }
    }
    assert_eq!(fit.diagnostics().parameters, 2 * 20);
}

#[test]
fn poisson_fit_matches_or_beats_scipy() {
    // Source: scipy.optimize.minimize (BFGS) on the Poisson Lee–Carter likelihood.
    let reference = reference();
    for (file, key) in [
        ("small_experience.csv", "poisson"),
        ("sparse_experience.csv", "poisson_sparse"),
    ] {
        let population = load_population(file);
        let fit = lee_carter(LeeCarterMethod::Poisson, false)
            .fit_population(&population)
            .unwrap();
        let d = fit.diagnostics();
        let theirs = reference[key]["deviance"].as_f64().unwrap();
        // Match or beat: the cycled Newton updates converge linearly, so "match" allows
        // a small remainder (in deviance units, i.e. twice the log-likelihood).
        assert!(
            d.deviance <= theirs + 1e-5,
            "{key}: {} vs {theirs}",
            d.deviance
        );
        // The log-likelihood keeps its constants: ℓ − ℓ_ref = −(D − D_ref)/2 exactly.
        let ll = reference[key]["log_likelihood"].as_f64().unwrap();
        let predicted = ll - (d.deviance - theirs) / 2.0;
        assert!(
            (d.log_likelihood - predicted).abs() < 1e-8,
            "{key}: {}",
            d.log_likelihood
        );
        assert!((fit.bx.sum() - 1.0).abs() < 1e-12);
        assert!(fit.kt.sum().abs() < 1e-9);
        assert!(d.iterations > 0);
    }
}

#[test]
fn sparse_data_count_only_exposed_cells() {
    // Two cells of the sparse fixture have zero exposure (make_models_fixtures.py).
    let population = load_population("sparse_experience.csv");
    let fit = lee_carter(LeeCarterMethod::Poisson, false)
        .fit_population(&population)
        .unwrap();
    assert_eq!(fit.diagnostics().observations, 400 - 2);
    let residuals = fit.residuals();
    assert!(residuals[(19, 3)].is_nan() && residuals[(18, 11)].is_nan());
    assert_eq!(residuals.iter().filter(|r| r.is_finite()).count(), 398);
}

#[test]
fn svd_refuses_zero_cells_and_suggests_poisson() {
    let population = load_population("sparse_experience.csv");
    let err = lee_carter(LeeCarterMethod::Svd, false)
        .fit_population(&population)
        .unwrap_err()
        .to_string();
    // The first cell of the fixture (age 60, year 2000) has no deaths.
    assert!(err.contains("age 60, year 2000"), "{err}");
    assert!(err.contains("zero deaths"), "{err}");
    assert!(err.contains("poisson"), "{err}");
}

#[test]
fn refit_kt_matches_observed_deaths_each_year() {
    // Second stage of Lee & Carter (1992): Σ_x E exp(a + b k_t) = Σ_x D for every t.
    let population = load_population("small_experience.csv");
    let fit = lee_carter(LeeCarterMethod::Svd, true)
        .fit_population(&population)
        .unwrap();
    for j in 0..population.years.len() {
        let fitted: f64 = (0..population.ages.len())
            .map(|i| population.exposure[(i, j)] * fit.central_rate(i, j))
            .sum();
        let observed = population.deaths.column(j).sum();
        assert!((fitted - observed).abs() < 1e-8 * observed, "year {j}");
    }
    assert!(fit.kt.sum().abs() < 1e-9);
    assert!((fit.bx.sum() - 1.0).abs() < 1e-12);
}
