//! The book-against-population fit against statsmodels and scipy
//! (tests/fixtures/make_basis_fixtures.py), and the valuation on the book's own rates.

use std::path::Path;

use tailspan::basis::poisson_interval::garwood;
use tailspan::basis::relative::{fit_level, year_factors};
use tailspan::basis::{ActualToExpected, BookCell, BookRates, RelativeFit, Uncertainty};
use tailspan::data::{Book, Config, Experience, Sex};
use tailspan::pipeline::{ProjectedFits, ValuationSetup};
use tailspan::series::SpreadAr1;
use tailspan::valuation::{DriverSettings, Extracts, value_scenarios};

use crate::models_support::fixture;

fn reference() -> serde_json::Value {
    let text = std::fs::read_to_string(fixture("basis_reference.json")).unwrap();
    serde_json::from_str(&text).unwrap()
}

fn cells() -> Vec<BookCell> {
    let text = std::fs::read_to_string(fixture("basis_cells.csv")).unwrap();
    text.lines()
        .skip(1)
        .map(|line| {
            let f: Vec<&str> = line.split(',').collect();
            BookCell {
                sex: Sex::F,
                year: f[0].parse().unwrap(),
                age: f[1].parse().unwrap(),
                deaths: f[2].parse().unwrap(),
                exposure: f[3].parse().unwrap(),
                population_rate: f[4].parse().unwrap(),
            }
        })
        .collect()
}

fn close(actual: f64, expected: f64, relative: f64) {
    assert!(
        (actual - expected).abs() <= relative * expected.abs().max(1e-12),
        "{actual} against {expected}"
    );
}

#[test]
fn level_and_slope_match_statsmodels_poisson_glm_with_offset() {
    // statsmodels GLM(Poisson, offset = log(E m_pop)) on [1, x − x̄]: params, cov_params,
    // llf, deviance (make_basis_fixtures.py).
    let r = reference();
    let fit = fit_level(&cells(), r["mean_age"].as_f64().unwrap()).unwrap();
    close(fit.level, r["level"].as_f64().unwrap(), 1e-9);
    close(fit.slope, r["slope"].as_f64().unwrap(), 1e-9);
    for i in 0..2 {
        for j in 0..2 {
            close(
                fit.covariance[i][j],
                r["covariance"][i][j].as_f64().unwrap(),
                1e-7,
            );
        }
    }
    close(
        fit.log_likelihood,
        r["log_likelihood"].as_f64().unwrap(),
        1e-10,
    );
    close(fit.deviance, r["deviance"].as_f64().unwrap(), 1e-9);
}

#[test]
fn year_factors_and_their_ar1_match_statsmodels() {
    // Year-dummy Poisson GLM on the offset plus the fitted level, then
    // AutoReg(lags=1, trend="n") (make_basis_fixtures.py).
    let r = reference();
    let cells = cells();
    let level = fit_level(&cells, r["mean_age"].as_f64().unwrap()).unwrap();
    let spread = year_factors(&cells, &level).unwrap();
    let kappa: Vec<f64> = r["kappa"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    assert_eq!(spread.values.len(), kappa.len());
    for (a, b) in spread.values.iter().zip(&kappa) {
        assert!((a - b).abs() < 1e-8, "{a} against {b}");
    }
    let ar = SpreadAr1::fit(&kappa).unwrap();
    close(ar.phi, r["phi"].as_f64().unwrap(), 1e-10);
    close(ar.sigma * ar.sigma, r["sigma2"].as_f64().unwrap(), 1e-10);
    close(
        ar.log_likelihood,
        r["ar_log_likelihood"].as_f64().unwrap(),
        1e-10,
    );
}

#[test]
fn garwood_intervals_match_scipy_chi_square_quantiles() {
    // scipy.stats.chi2.ppf(0.025, 2D)/2 and chi2.ppf(0.975, 2D + 2)/2 (Garwood 1936).
    for row in reference()["garwood"].as_array().unwrap() {
        let deaths = row["deaths"].as_f64().unwrap();
        let (lower, upper) = garwood(deaths, 0.95);
        close(lower, row["lower"].as_f64().unwrap(), 1e-10);
        close(upper, row["upper"].as_f64().unwrap(), 1e-10);
    }
}

#[test]
fn actual_to_expected_adds_up_over_bands_and_years() {
    let cells = cells();
    let ae = ActualToExpected::of(&cells);
    let bands: f64 = ae.by_age_band.iter().map(|b| b.comparison.actual).sum();
    let years: f64 = ae.by_year.iter().map(|y| y.comparison.expected).sum();
    close(bands, ae.overall.actual, 1e-12);
    close(years, ae.overall.expected, 1e-12);
    assert_eq!(ae.by_age_band[0].ages, [60, 64]);
    assert_eq!(ae.by_age_band.last().unwrap().ages, [90, 94]);
    for b in &ae.by_age_band {
        let c = &b.comparison;
        assert!(c.lower < c.ratio && c.ratio < c.upper);
    }
}

/// A reduced demo run's projector, book and setup.
fn demo(scenarios: usize) -> (Config, tailspan::projection::Projector, ValuationSetup) {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("configs/basis-risk.toml");
    let mut config = Config::load(&path).unwrap();
    config.projection.scenarios = scenarios;
    config.projection.parameter_uncertainty =
        tailspan::data::config::UncertaintySetting::Switch(false);
    let experience = Experience::from_config(&config).unwrap();
    let book = Book::from_config(&config).unwrap().unwrap();
    let fits = ProjectedFits::fit(&config, &experience).unwrap();
    let projector = fits.projector(&config, &experience).unwrap();
    let setup = ValuationSetup::new(&config, book, &projector).unwrap();
    (config, projector, setup)
}

fn values(
    projector: &tailspan::projection::Projector,
    setup: &ValuationSetup,
    book_rates: Option<&BookRates>,
    scenarios: u64,
) -> Vec<(f64, f64)> {
    let mut out = Vec::new();
    let settings = DriverSettings {
        seed: 11,
        idiosyncratic: true,
        book_rates,
        index_cash: false,
    };
    value_scenarios(
        projector,
        &setup.prepared,
        None,
        0..scenarios,
        settings,
        &Extracts::default(),
        |chunk| {
            out.extend(
                chunk
                    .iter()
                    .map(|r| (r.value.pv_expected, r.value.pv_simulated)),
            );
            Ok(())
        },
    )
    .unwrap();
    out
}

#[test]
fn a_book_at_the_population_level_values_as_the_population() {
    let (_, projector, setup) = demo(6);
    let fitted = setup.basis.as_ref().expect("the example has a [basis]");
    let mut neutral: RelativeFit = fitted.rates.fit().clone();
    neutral.level.level = 0.0;
    neutral.level.slope = 0.0;
    neutral.years.values.iter_mut().for_each(|v| *v = 0.0);
    neutral.spread.last = 0.0;
    let off = Uncertainty {
        level: false,
        spread: false,
    };
    let rates = BookRates::new(neutral, off, 11).unwrap();
    let today = values(&projector, &setup, None, 7);
    let neutral = values(&projector, &setup, Some(&rates), 7);
    // Bit for bit: α = 0 and κ = 0 leave every q as it is.
    assert_eq!(today, neutral);
    // The fitted basis (lighter mortality) raises every scenario's value.
    let own = values(&projector, &setup, Some(&fitted.rates), 7);
    for (a, b) in own.iter().zip(&today) {
        assert!(a.0 > b.0);
    }
}

#[test]
fn level_and_spread_draws_widen_the_book_values_and_leave_the_centre() {
    let (_, projector, setup) = demo(40);
    let fitted = setup.basis.as_ref().unwrap();
    let fixed = BookRates::new(
        fitted.rates.fit().clone(),
        Uncertainty {
            level: false,
            spread: false,
        },
        11,
    )
    .unwrap();
    let drawn = BookRates::new(
        fitted.rates.fit().clone(),
        Uncertainty {
            level: true,
            spread: true,
        },
        11,
    )
    .unwrap();
    let a = values(&projector, &setup, Some(&fixed), 41);
    let b = values(&projector, &setup, Some(&drawn), 41);
    // Scenario 0 is the central path in both.
    assert_eq!(a[0], b[0]);
    let spread = |v: &[(f64, f64)]| {
        let n = v.len() as f64 - 1.0;
        let mean = v[1..].iter().map(|x| x.0).sum::<f64>() / n;
        v[1..].iter().map(|x| (x.0 - mean).powi(2)).sum::<f64>() / n
    };
    assert!(spread(&b) > spread(&a));
}
