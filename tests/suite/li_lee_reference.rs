//! The two-population fit's closed-form steps against numpy and statsmodels
//! (tests/fixtures/make_li_lee_fixtures.py): the SVD decomposition of Li & Lee (2005) and
//! the AR(1) with constant of each population's own index.

use nalgebra::DMatrix;
use tailspan::basis::li_lee::components;
use tailspan::series::Ar1;

use crate::models_support::fixture;

fn reference() -> serde_json::Value {
    let text = std::fs::read_to_string(fixture("li_lee_reference.json")).unwrap();
    serde_json::from_str(&text).unwrap()
}

fn vector(value: &serde_json::Value) -> Vec<f64> {
    value
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect()
}

fn matrix(value: &serde_json::Value) -> DMatrix<f64> {
    let rows: Vec<Vec<f64>> = value.as_array().unwrap().iter().map(vector).collect();
    DMatrix::from_fn(rows.len(), rows[0].len(), |i, j| rows[i][j])
}

fn close(label: &str, actual: &[f64], expected: &[f64], tolerance: f64) {
    assert_eq!(actual.len(), expected.len(), "{label}");
    for (i, (a, e)) in actual.iter().zip(expected).enumerate() {
        assert!(
            (a - e).abs() <= tolerance * (1.0 + e.abs()),
            "{label}[{i}]: {a} against {e}"
        );
    }
}

#[test]
fn svd_step_matches_numpy() {
    let r = reference();
    let svd = &r["svd"];
    let log_rates = [matrix(&svd["log_rates"][0]), matrix(&svd["log_rates"][1])];
    let combined = matrix(&svd["combined"]);
    let c = components([&log_rates[0], &log_rates[1]], &combined).unwrap();
    // numpy.linalg.svd, normalised Σ B = Σ b = 1 (make_li_lee_fixtures.py).
    close("B", c.common_loading.as_slice(), &vector(&svd["B"]), 1e-9);
    close("K", c.common_index.as_slice(), &vector(&svd["K"]), 1e-9);
    assert!(c.common_index.sum().abs() < 1e-9);
    for i in 0..2 {
        close("a", c.level[i].as_slice(), &vector(&svd["a"][i]), 1e-12);
        close(
            "b",
            c.own_loading[i].as_slice(),
            &vector(&svd["b"][i]),
            1e-8,
        );
        close("k", c.own_index[i].as_slice(), &vector(&svd["k"][i]), 1e-8);
        assert!((c.own_loading[i].sum() - 1.0).abs() < 1e-12);
    }
}

#[test]
fn ar1_with_constant_matches_statsmodels_autoreg() {
    let r = reference();
    let ar = &r["ar1"];
    let fit = Ar1::fit(&vector(&ar["series"])).unwrap();
    // statsmodels AutoReg(y, lags=1, trend="c"): params (const, phi), bse, sigma2
    // (SSR / nobs), llf (make_li_lee_fixtures.py).
    let params = vector(&ar["params"]);
    let bse = vector(&ar["bse"]);
    close("const", &[fit.constant], &[params[0]], 1e-10);
    close("phi", &[fit.phi], &[params[1]], 1e-10);
    close("se(const)", &[fit.constant_standard_error], &[bse[0]], 1e-9);
    close("se(phi)", &[fit.phi_standard_error], &[bse[1]], 1e-9);
    close(
        "sigma2",
        &[fit.sigma * fit.sigma],
        &[ar["sigma2"].as_f64().unwrap()],
        1e-10,
    );
    close(
        "llf",
        &[fit.log_likelihood],
        &[ar["llf"].as_f64().unwrap()],
        1e-10,
    );
}
