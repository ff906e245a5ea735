//! `tailspan run` on a reduced `configs/li-lee-basis.toml`: the book as a second large
//! population fitted with the index population by Li & Lee (2005), its basis.json, the
//! capital decomposition, index hedges against the indemnity swap, and bad inputs.

use std::path::{Path, PathBuf};
use std::process::Command;

/// Policies of the demo book the reduced runs value.
const POLICIES: usize = 2000;

fn demo() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("configs/demo")
}

/// The example config for `scenarios` scenarios on the first [`POLICIES`] policies, with
/// `edit` applied to its text, written into `dir`.
fn config(dir: &Path, scenarios: usize, edit: impl Fn(String) -> String) -> PathBuf {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("configs");
    let book: String = std::fs::read_to_string(demo().join("book.csv"))
        .unwrap()
        .lines()
        .take(POLICIES + 1)
        .map(|l| format!("{l}\n"))
        .collect();
    std::fs::write(dir.join("book.csv"), book).unwrap();
    let text = std::fs::read_to_string(root.join("li-lee-basis.toml"))
        .unwrap()
        .replace("scenarios = 400", &format!("scenarios = {scenarios}"))
        .replace("book = \"demo/book.csv\"", "book = \"book.csv\"")
        .replace("demo/", &format!("{}/", demo().display()))
        .replace("folder = \"out/li-lee-basis\"", "folder = \"out\"");
    let path = dir.join("run.toml");
    std::fs::write(&path, edit(text)).unwrap();
    path
}

fn run(config: &Path, threads: Option<&str>) -> std::process::Output {
    let mut command = Command::new(env!("CARGO_BIN_EXE_tailspan"));
    command.args(["run", "--quiet"]).arg(config);
    if let Some(t) = threads {
        command.env("RAYON_NUM_THREADS", t);
    }
    command.output().unwrap()
}

fn json(path: PathBuf) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

fn succeeded(out: &std::process::Output) {
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn li_lee_run_writes_the_fit_the_decomposition_and_hedges() {
    let dir = tempfile::tempdir().unwrap();
    let out = run(&config(dir.path(), 60, |t| t), None);
    succeeded(&out);
    let basis = json(dir.path().join("out/basis.json"));
    assert_eq!(basis["kind"], "li-lee");
    // The contract fields come from the relative GLM, comparable across kinds.
    for key in ["level", "slope", "log_likelihood", "deviance"] {
        assert!(basis[key].is_f64(), "{key}");
    }
    assert!(basis["covariance"][0][0].as_f64().unwrap() > 0.0);
    // The second population is lighter than the index population (synth's gap −0.10).
    assert!(
        basis["actual_to_expected"]["overall"]["ratio"]
            .as_f64()
            .unwrap()
            < 1.0
    );
    let li_lee = basis["li_lee"].as_array().unwrap();
    assert_eq!(li_lee.len(), 2);
    for sex in li_lee {
        // The years the two populations share: synth's second population starts in 1985.
        assert_eq!(sex["years"], serde_json::json!([1985, 2024]));
        assert_eq!(sex["common_b"].as_array().unwrap().len(), 46);
        assert_eq!(sex["common_k"].as_array().unwrap().len(), 40);
        assert!(sex["common_walk"]["drift"].as_f64().unwrap() < 0.0);
        assert!(sex["common_walk"]["drift_standard_error"].as_f64().unwrap() > 0.0);
        for population in ["index", "book"] {
            let p = &sex[population];
            assert_eq!(p["a"].as_array().unwrap().len(), 46);
            assert_eq!(p["k"].as_array().unwrap().len(), 40);
            for key in ["constant", "phi", "sigma", "constant_standard_error"] {
                assert!(p["ar1"][key].is_f64(), "{population} {key}");
            }
            assert!(p["ar1"]["phi_standard_error"].as_f64().unwrap() > 0.0);
        }
        let rho = sex["innovation_correlation"].as_f64().unwrap();
        assert!((-1.0..=1.0).contains(&rho));
    }
    // `spread` is the first sex's book population's own index AR(1).
    assert_eq!(basis["spread"]["phi"], li_lee[0]["book"]["ar1"]["phi"]);
    assert_eq!(basis["spread"]["sigma"], li_lee[0]["book"]["ar1"]["sigma"]);

    let summary = json(dir.path().join("out/summary.json"));
    let d = &summary["decomposition"];
    assert_eq!(d["scenarios"], 60);
    let capital = |section: &str, i: usize| d[section][i]["capital"][0].as_f64().unwrap();
    // No level is drawn under Li–Lee: adding it changes nothing and alone it is zero.
    assert_eq!(d["level_modelled"], false);
    assert_eq!(d["standalone"][0]["measure"], "level");
    assert_eq!(capital("standalone", 0), 0.0);
    assert_eq!(capital("cumulative", 1), capital("cumulative", 0));
    assert!(capital("standalone", 1) > 0.0);
    let trend = summary["trend"]["tails"][0]["capital"].as_f64().unwrap();
    assert_eq!(capital("cumulative", 2), trend);

    let report = std::fs::read_to_string(dir.path().join("out/report.html")).unwrap();
    assert!(report.contains("Book against population"));
    assert!(report.contains("Li &amp; Lee (2005)"));
    assert!(report.contains("own index k_t, females: fitted and projected"));
    assert!(report.contains("not drawn"));

    // Index hedges float on the index population: the gap between the populations is
    // basis risk they leave, which the indemnity swap on the book's own benefits does not.
    let contracts = summary["hedges"]["contracts"].as_array().unwrap();
    let reduction = |name: &str| {
        contracts.iter().find(|c| c["name"] == name).unwrap()["effectiveness"]["tails"][0]
            ["capital_reduction_pct"]
            .as_f64()
            .unwrap()
    };
    assert!(reduction("m75-2035") < reduction("indemnity-runoff"));
    assert!(reduction("parametric-runoff") < reduction("indemnity-runoff"));
}

#[test]
fn li_lee_results_do_not_depend_on_threads() {
    // One folder for both runs, so the inputs and the run's provenance are the same.
    let dir = tempfile::tempdir().unwrap();
    let path = config(dir.path(), 24, |t| t);
    let results = |threads: &str| {
        succeeded(&run(&path, Some(threads)));
        let mut basis = json(dir.path().join("out/basis.json"));
        basis["run"] = serde_json::Value::Null;
        let summary = json(dir.path().join("out/summary.json"));
        let book = std::fs::read(dir.path().join("out/book.parquet")).unwrap();
        (
            basis,
            summary["decomposition"].clone(),
            summary["hedges"].clone(),
            book,
        )
    };
    let one = results("1");
    let two = results("2");
    assert_eq!(one.0, two.0);
    assert_eq!(one.1, two.1);
    assert_eq!(one.2, two.2);
    assert!(
        one.3 == two.3,
        "book.parquet differs between 1 and 2 threads"
    );
}

#[test]
fn level_uncertainty_is_refused_under_li_lee() {
    let dir = tempfile::tempdir().unwrap();
    let path = config(dir.path(), 10, |t| {
        t.replace("spread = true ", "level_uncertainty = true\nspread = true ")
    });
    let out = run(&path, None);
    assert_eq!(out.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(stderr.contains("basis.level_uncertainty"), "{stderr}");
    assert!(stderr.contains("li-lee"), "{stderr}");
    assert!(!dir.path().join("out").exists());
}

#[test]
fn a_second_population_missing_a_fitted_age_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(demo().join("second-population.csv")).unwrap();
    // Drop age 100, the last fitted age, for every sex and year.
    let kept: String = text
        .lines()
        .filter(|l| l.split(',').nth(1) != Some("100"))
        .map(|l| format!("{l}\n"))
        .collect();
    assert!(kept.len() < text.len());
    let csv = dir.path().join("second.csv");
    std::fs::write(&csv, kept).unwrap();
    let path = config(dir.path(), 10, |t| {
        t.replace(
            &format!("{}/second-population.csv", demo().display()),
            &csv.display().to_string(),
        )
    });
    for command in ["check", "run"] {
        let out = Command::new(env!("CARGO_BIN_EXE_tailspan"))
            .arg(command)
            .arg(&path)
            .output()
            .unwrap();
        assert_eq!(out.status.code(), Some(2), "{command}");
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert!(stderr.contains("second.csv"), "{command}: {stderr}");
        assert!(stderr.contains("every fitted age"), "{command}: {stderr}");
    }
    assert!(!dir.path().join("out").exists());
}
