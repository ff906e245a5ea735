//! `tailspan run` on a reduced `configs/basis-risk.toml`: basis.json, the book valued on its
//! own rates, the capital decomposition, and index hedges against the indemnity swap.

use std::path::{Path, PathBuf};
use std::process::Command;

fn config(dir: &Path, scenarios: usize, extra: &str) -> PathBuf {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("configs");
    let text = std::fs::read_to_string(root.join("basis-risk.toml"))
        .unwrap()
        .replace("scenarios = 2000", &format!("scenarios = {scenarios}"))
        .replace("demo/", &format!("{}/demo/", root.display()))
        .replace("folder = \"out/basis-risk\"", "folder = \"out\"")
        + extra;
    let path = dir.join("run.toml");
    std::fs::write(&path, text).unwrap();
    path
}

fn run(config: &Path) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_tailspan"))
        .args(["run", "--quiet"])
        .arg(config)
        .output()
        .unwrap()
}

fn json(path: PathBuf) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

#[test]
fn basis_run_writes_the_fit_and_the_decomposition() {
    let dir = tempfile::tempdir().unwrap();
    let out = run(&config(dir.path(), 60, ""));
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let basis = json(dir.path().join("out/basis.json"));
    assert_eq!(basis["kind"], "relative");
    for key in ["level", "slope", "log_likelihood", "deviance"] {
        assert!(basis[key].is_f64(), "{key}");
    }
    assert!(basis["covariance"][1][1].as_f64().unwrap() > 0.0);
    assert!(basis["spread"]["phi"].is_f64() && basis["spread"]["sigma"].as_f64().unwrap() > 0.0);
    let ae = &basis["actual_to_expected"];
    let overall = &ae["overall"];
    // The invented book is lighter than the population (synth's level −0.12).
    assert!(overall["ratio"].as_f64().unwrap() < 1.0);
    assert!(overall["upper"].as_f64().unwrap() < 1.0);
    assert_eq!(ae["by_age_band"][0]["ages"], serde_json::json!([60, 64]));
    assert_eq!(ae["by_year"].as_array().unwrap().len(), 10);

    let report = std::fs::read_to_string(dir.path().join("out/report.html")).unwrap();
    assert!(report.contains("Book against population"));
    assert!(report.contains("Trend + level + spread"));
    // The spread's fan: a chart of the fitted κ̂_t and the projected years' quantiles.
    let section = &report[report.find("Book against population").unwrap()..];
    let chart = section
        .find("The book&#39;s spread κ_t against the population: fitted and projected")
        .expect("the spread's fan chart");
    assert!(section[chart..].find("<svg").unwrap() < section[chart..].find("</figure>").unwrap());

    let summary = json(dir.path().join("out/summary.json"));
    let d = &summary["decomposition"];
    assert_eq!(d["scenarios"], 60);
    let capital = |section: &str, i: usize| d[section][i]["capital"][0].as_f64().unwrap();
    // Trend + level + spread and all sources are the run's own trend and
    // trend+idiosyncratic capitals: the same scenarios (common random numbers).
    let trend = summary["trend"]["tails"][0]["capital"].as_f64().unwrap();
    let all = summary["trend_idiosyncratic"]["tails"][0]["capital"]
        .as_f64()
        .unwrap();
    assert_eq!(capital("cumulative", 2), trend);
    assert_eq!(capital("cumulative", 3), all);
    let standalone: f64 =
        capital("cumulative", 0) + (0..3).map(|i| capital("standalone", i)).sum::<f64>();
    let diversification = d["diversification"][0].as_f64().unwrap();
    assert!((diversification - (standalone - all)).abs() < 1e-6 * all);
    assert!(diversification > 0.0);

    // The index hedge (q-forward on the population) removes less capital than the
    // indemnity swap on the book's own benefits: basis risk is left.
    let contracts = summary["hedges"]["contracts"].as_array().unwrap();
    let reduction = |name: &str| {
        contracts.iter().find(|c| c["name"] == name).unwrap()["effectiveness"]["tails"][0]
            ["capital_reduction_pct"]
            .as_f64()
            .unwrap()
    };
    assert!(reduction("m75-2035") < reduction("indemnity-runoff"));
    assert!(reduction("parametric-runoff") < reduction("indemnity-runoff"));
    // What the index hedges leave because the book's level and spread are its own.
    for name in ["parametric-runoff", "m75-2035"] {
        let contract = contracts.iter().find(|c| c["name"] == name).unwrap();
        assert!(contract["capital_left_by_basis_risk"][0].is_f64(), "{name}");
    }
    let indemnity = contracts
        .iter()
        .find(|c| c["name"] == "indemnity-runoff")
        .unwrap();
    assert!(indemnity.get("capital_left_by_basis_risk").is_none());
}

#[test]
fn basis_without_book_experience_is_a_config_error() {
    let dir = tempfile::tempdir().unwrap();
    let path = config(dir.path(), 10, "");
    let text = std::fs::read_to_string(&path).unwrap();
    let text: String = text
        .lines()
        .filter(|l| !l.starts_with("book_experience"))
        .map(|l| format!("{l}\n"))
        .collect();
    std::fs::write(&path, text).unwrap();
    let out = run(&path);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("data.book_experience"));
}

#[test]
fn the_parametric_swap_leaves_the_books_level_and_spread_risk() {
    let reduction = |level_and_spread: bool| {
        let dir = tempfile::tempdir().unwrap();
        let path = config(dir.path(), 60, "");
        let on = if level_and_spread { "true" } else { "false" };
        let text = std::fs::read_to_string(&path)
            .unwrap()
            .replace(
                "level_uncertainty = true",
                &format!("level_uncertainty = {on}"),
            )
            .replace("spread = true", &format!("spread = {on}"));
        std::fs::write(&path, text).unwrap();
        let out = run(&path);
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        let summary = json(dir.path().join("out/summary.json"));
        let contracts = summary["hedges"]["contracts"].as_array().unwrap().clone();
        let parametric = contracts
            .iter()
            .find(|c| c["name"] == "parametric-runoff")
            .unwrap();
        parametric["effectiveness"]["tails"][0]["capital_reduction_pct"]
            .as_f64()
            .unwrap()
    };
    // The swap floats on the population's path at the book's fitted level: when the
    // book's own level and spread are drawn, it removes a smaller share of the capital.
    assert!(reduction(true) < reduction(false));
}

#[test]
fn a_missing_book_cell_is_named_with_the_files_own_window() {
    let dir = tempfile::tempdir().unwrap();
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("configs/demo");
    let text = std::fs::read_to_string(root.join("book-experience.csv")).unwrap();
    // Drop the row of one cell inside the file's window.
    let kept: String = text
        .lines()
        .filter(|l| !l.starts_with("2019,64,F,"))
        .map(|l| format!("{l}\n"))
        .collect();
    assert!(kept.len() < text.len());
    let csv = dir.path().join("book-experience.csv");
    std::fs::write(&csv, kept).unwrap();
    let path = config(dir.path(), 10, "");
    let text = std::fs::read_to_string(&path).unwrap();
    let text: String = text
        .lines()
        .map(|l| {
            if l.starts_with("book_experience") {
                format!("book_experience = \"{}\"\n", csv.display())
            } else {
                format!("{l}\n")
            }
        })
        .collect();
    std::fs::write(&path, text).unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_tailspan"))
        .arg("check")
        .arg(&path)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(
        stderr.contains("no row for sex F, age 64, year 2019"),
        "{stderr}"
    );
    assert!(
        stderr.contains("`data.book_experience` must hold every cell"),
        "{stderr}"
    );
}
