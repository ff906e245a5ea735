//! Cohort models through the config, `fit.json` and the binary; frozen cohort rates; and
//! models that the data cannot identify.

use crate::models_support;

use std::path::Path;
use std::process::Command;

use models_support::*;
use tailspan::cli::fit::fit_and_write;
use tailspan::data::config::CohortLoading;
use tailspan::data::{Config, Experience};
use tailspan::io::Provenance;
use tailspan::models::{CbdCohortVariant, FittedModel};

fn config(folder: &Path, model: &str, years: [i32; 2]) -> Config {
    let text = format!(
        "[data]\nexperience = \"unused.csv\"\nages = [60, 74]\nyears = [{}, {}]\nsexes = [\"F\"]\n\n\
         [model]\n{model}\n\n[output]\nfolder = \"{}\"\n",
        years[0],
        years[1],
        folder.display()
    );
    Config::parse(&text, Path::new("test.toml")).unwrap()
}

fn experience() -> Experience {
    Experience {
        source: fixture("cohort_experience.csv"),
        populations: vec![load_population("cohort_experience.csv")],
    }
}

#[test]
fn every_kind_is_written_and_ranked_by_bic() {
    let dir = tempfile::tempdir().unwrap();
    let config = config(
        dir.path(),
        "kind = [\"lee-carter\", \"cbd\", \"apc\", \"renshaw-haberman\", \"m6\", \"m7\"]\n\
         cohort_loading = \"unit\"\ncohort_series = \"ar1-trend\"",
        [2000, 2014],
    );
    fit_and_write(&config, &Provenance::new(0, 0, Vec::new()), &experience()).unwrap();
    let doc: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("fit.json")).unwrap())
            .unwrap();
    let fits = doc["fits"].as_array().unwrap();
    let names: Vec<&str> = fits.iter().map(|f| f["model"].as_str().unwrap()).collect();
    assert_eq!(
        names,
        ["lee-carter", "cbd", "apc", "renshaw-haberman", "m6", "m7"]
    );
    // 15 ages × 15 years: 29 cohorts, 25 with at least 3 cells, 4 corner cells left out.
    let (na, nt, nc) = (15, 15, 25);
    let expected_counts = [
        2 * na + nt - 2,
        2 * nt,
        na + (nt - 1) + (nc - 2),
        na + (na - 1) + (nt - 1) + (nc - 2),
        2 * nt + nc - 2,
        3 * nt + nc - 3,
    ];
    for (fit, count) in fits.iter().zip(expected_counts) {
        assert_eq!(fit["parameter_count"], count, "{}", fit["model"]);
    }
    assert!(fits[0].get("cohort_time_series").is_none());
    for fit in &fits[2..] {
        let params = &fit["parameters"];
        assert_eq!(params["gamma"].as_array().unwrap().len(), 29);
        assert_eq!(params["cohorts"][0], 2000 - 74);
        assert_eq!(params["fitted_cohorts"][1], false);
        assert_eq!(params["fitted_cohorts"][2], true);
        assert_eq!(fit["observations"], 225 - 6);
        let series = &fit["cohort_time_series"];
        assert_eq!(series["kind"], "ar1-trend");
        assert_eq!(series["observations"], nc - 1);
        assert!(series["phi"].as_f64().unwrap().is_finite());
    }
    assert_eq!(fits[3]["parameters"]["cohort_loading"], "unit");
    assert_eq!(fits[3]["parameters"]["b0x"][0], 1.0);
    assert!(fits[5]["parameters"]["k3"].is_array());
    assert_eq!(fits[5]["parameters"]["sigma2"], 18.666666666666668);
    let ranking = doc["ranking"].as_array().unwrap();
    assert_eq!(ranking.len(), 6);
    let bics: Vec<f64> = ranking.iter().map(|r| r["bic"].as_f64().unwrap()).collect();
    assert!(bics.windows(2).all(|w| w[0] <= w[1]));
    // The data have a cohort effect (make_cohort_fixtures.py), which the period-only
    // models cannot fit.
    let best = ranking[0]["model"].as_str().unwrap();
    assert!(!["lee-carter", "cbd"].contains(&best), "{best}");
}

#[test]
fn rates_freeze_the_last_years_cohorts() {
    let population = load_population("cohort_experience.csv");
    let fit = apc().fit_population(&population).unwrap();
    let last = population.years.len() - 1;
    let mut out = vec![0.0; (120 - 60 + 1) as usize];
    fit.rates(&[fit.kt[(0, last)]], &mut out);
    for (i, q) in out.iter().take(15).enumerate() {
        let expected = 1.0 - (-fit.central_rate(i, last)).exp();
        assert!((q - expected).abs() < 1e-14, "age {}", 60 + i);
    }
    // The first year's index still takes the last year's cohorts, not the first year's.
    let mut again = vec![0.0; out.len()];
    fit.rates(&[fit.kt[(0, 0)]], &mut again);
    let mut moved = 0;
    for (i, q) in again.iter().take(15).enumerate() {
        let cohort = fit.cohorts.value(2014 - 60 - i as i32).unwrap();
        let frozen = (fit.ax[i] + fit.kt[(0, 0)] + cohort).exp();
        assert!((q - (1.0 - (-frozen).exp())).abs() < 1e-14);
        if (q - (1.0 - (-fit.central_rate(i, 0)).exp())).abs() > 1e-6 {
            moved += 1;
        }
    }
    assert!(moved > 10, "{moved}");
    // With every cohort effect raised by 0.1, every fitted m rises by the factor e^0.1.
    let effects = fit.cohort_effects().unwrap();
    let shifted: Vec<f64> = effects.by_age(2014, 60).iter().map(|g| g + 0.1).collect();
    fit.cohort_rates(&[fit.kt[(0, last)]], &shifted, &mut again);
    for i in 0..15 {
        let ratio = (-again[i]).ln_1p() / (-out[i]).ln_1p();
        assert!((ratio - 0.1f64.exp()).abs() < 1e-12);
    }
    assert_eq!(effects.value(2014 - 74), Some(effects.values[14]));
    assert_eq!(effects.value(1900), None);

    let m7 = cbd_cohort(CbdCohortVariant::M7)
        .fit_population(&population)
        .unwrap();
    let k: Vec<f64> = m7.factors.column(last).iter().copied().collect();
    m7.rates(&k, &mut out);
    for (i, q) in out.iter().take(15).enumerate() {
        assert!((q - m7.death_rate(i, last)).abs() < 1e-14);
    }
    let rh = renshaw_haberman(CohortLoading::Free)
        .fit_population(&population)
        .unwrap();
    rh.rates(&[rh.kt[(0, last)]], &mut out);
    for (i, q) in out.iter().take(15).enumerate() {
        assert!((q - (1.0 - (-rh.central_rate(i, last)).exp())).abs() < 1e-14);
    }
    assert!((rh.b0x.iter().sum::<f64>() - 1.0).abs() < 1e-12);
}

#[test]
fn left_out_cohorts_are_filled_by_the_series() {
    let population = load_population("cohort_experience.csv");
    let fit = apc().fit_population(&population).unwrap();
    let effects = fit.cohort_effects().unwrap();
    let fitted = masked(&effects.values, &effects.fitted);
    // Old end: the oldest estimate held; young end: the series' central projection.
    assert_eq!(effects.values[0], fitted[0]);
    assert_eq!(effects.values[1], fitted[0]);
    let ahead = effects.series.project(&[0.0, 0.0]);
    assert_eq!(&effects.values[27..], &ahead[..]);
    assert_eq!(effects.fitted.iter().filter(|f| **f).count(), 25);
}

#[test]
fn cohorts_the_years_cannot_identify_are_a_model_error() {
    // Three years: no cohort is seen in four cells.
    let dir = tempfile::tempdir().unwrap();
    let config = config(
        dir.path(),
        "kind = \"apc\"\nmin_cohort_cells = 4",
        [2000, 2002],
    );
    let err =
        fit_and_write(&config, &Provenance::new(0, 0, Vec::new()), &experience()).unwrap_err();
    assert!(matches!(err, tailspan::Error::Model { .. }), "{err}");
    let text = err.to_string();
    assert!(text.contains("not identified"), "{text}");
    assert!(text.contains("model.min_cohort_cells"), "{text}");
    assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
}

#[test]
fn unidentified_cohorts_exit_2_through_the_binary() {
    // Four years: no cohort is seen in five cells.
    let dir = tempfile::tempdir().unwrap();
    let text = format!(
        "[data]\nexperience = \"{}\"\nages = [60, 74]\nyears = [2000, 2003]\nsexes = [\"F\"]\n\n\
         [model]\nkind = \"m6\"\nmin_cohort_cells = 5\n\n[output]\nfolder = \"out\"\n",
        fixture("cohort_experience.csv").display()
    );
    let path = dir.path().join("fit.toml");
    std::fs::write(&path, text).unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_tailspan"))
        .arg("fit")
        .arg(&path)
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{stderr}");
    assert!(stderr.contains("model `m6`"), "{stderr}");
    assert!(stderr.contains("not identified"), "{stderr}");
    assert!(stderr.contains("data.years"), "{stderr}");
    assert!(!dir.path().join("out").exists());

    // With four cells asked for, the same window has 12 such cohorts and fits.
    let text = std::fs::read_to_string(&path)
        .unwrap()
        .replace("min_cohort_cells = 5", "min_cohort_cells = 4");
    std::fs::write(&path, text).unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_tailspan"))
        .arg("fit")
        .arg(&path)
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(dir.path().join("out/fit.json").exists());
}

#[test]
fn sparse_cells_carry_no_weight_and_m7_needs_three_ages() {
    // Two cells of the sparse fixture have zero exposure (make_models_fixtures.py); with
    // 20 ages × 20 years the four corner cohorts hold 1 + 2 + 2 + 1 cells.
    let population = load_population("sparse_experience.csv");
    let fit = apc().fit_population(&population).unwrap();
    assert_eq!(fit.diagnostics().observations, 400 - 6 - 2);
    let residuals = fit.residuals();
    assert!(residuals[(19, 3)].is_nan() && residuals[(0, 19)].is_nan());
    assert_eq!(residuals.iter().filter(|r| r.is_finite()).count(), 392);
    let m6 = cbd_cohort(CbdCohortVariant::M6)
        .fit_population(&population)
        .unwrap();
    assert_eq!(m6.diagnostics().observations, 392);

    let two_ages = population
        .restrict(tailspan::data::Span::new(70, 71).unwrap(), population.years)
        .unwrap();
    let err = cbd_cohort(CbdCohortVariant::M7)
        .fit_population(&two_ages)
        .unwrap_err()
        .to_string();
    assert!(err.contains("at least 3 ages"), "{err}");
}
