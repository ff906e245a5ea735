//! Numerical guards through the binary: a fit that hits its iteration cap, and a projection
//! whose index runs so far that a rate rounds to 1 (exp() or the logistic function
//! saturates), stop the command with exit code 2 and a message naming the config key to
//! change, and leave no output file behind.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use std::process::Command;

/// Invented experience with mortality rising steeply over time:
/// q(x, t) = logistic(−9 + 0.1 (x − 70) + 0.25 (t − 1990)), ages 60–80, years 1990–2019,
/// one million lives a cell, deaths rounded to whole numbers, exposure central (E0 − D/2).
fn steep_experience(dir: &Path) -> PathBuf {
    let mut text = String::from("year,age,sex,deaths,exposure\n");
    for year in 1990..=2019 {
        for age in 60..=80 {
            let eta = -9.0 + 0.1 * f64::from(age - 70) + 0.25 * f64::from(year - 1990);
            let q = 1.0 / (1.0 + (-eta).exp());
            let initial = 1.0e6;
            let deaths = (q * initial).round();
            let _ = writeln!(text, "{year},{age},F,{deaths},{}", initial - deaths / 2.0);
        }
    }
    let path = dir.join("steep.csv");
    std::fs::write(&path, text).unwrap();
    path
}

fn write_config(dir: &Path, experience: &Path, model: &str, horizon: usize) -> PathBuf {
    let text = format!(
        r#"
[data]
experience = "{}"
ages = [60, 80]
years = [1990, 2019]
sexes = ["F"]

[model]
{model}
max_age = 110

[projection]
scenarios = 3
seed = 9
horizon = {horizon}

[output]
folder = "out"
"#,
        experience.display()
    );
    let path = dir.join("run.toml");
    std::fs::write(&path, text).unwrap();
    path
}

/// Runs `command` on the config and expects exit code 2 with every piece in the message
/// and nothing in the output folder (not even a temporary).
fn refused(dir: &Path, command: &str, config: &Path, pieces: &[&str]) {
    let out = Command::new(env!("CARGO_BIN_EXE_tailspan"))
        .args([command, config.to_str().unwrap(), "--quiet"])
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{command}: {err}");
    for piece in pieces {
        assert!(
            err.contains(piece),
            "{command}: `{piece}` missing from: {err}"
        );
    }
    let left: Vec<_> = std::fs::read_dir(dir.join("out"))
        .map(|entries| entries.map(|e| e.unwrap().file_name()).collect())
        .unwrap_or_default();
    assert!(left.is_empty(), "{command} left {left:?}");
}

#[test]
fn a_fit_that_hits_its_iteration_cap_is_an_error_naming_the_keys() {
    let dir = tempfile::tempdir().unwrap();
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("configs/demo/experience.csv");
    for (kind, commands) in [
        ("lee-carter", &["fit", "project"][..]),
        ("cbd", &["fit", "project"]),
        ("apc", &["fit"]),
        ("renshaw-haberman", &["fit"]),
        ("m6", &["fit"]),
        ("m7", &["fit"]),
    ] {
        let model = format!("kind = \"{kind}\"\nmax_iterations = 1");
        let cfg = write_config(dir.path(), &demo, &model, 20);
        for &command in commands {
            refused(
                dir.path(),
                command,
                &cfg,
                &[
                    "did not converge in 1",
                    "model.max_iterations",
                    "model.tolerance",
                ],
            );
        }
    }
    // Lee–Carter by SVD with the period index re-estimated by Newton steps.
    let cfg = write_config(
        dir.path(),
        &demo,
        "kind = \"lee-carter\"\nfit = \"svd\"\nrefit_kt = true\nmax_iterations = 1",
        20,
    );
    refused(
        dir.path(),
        "fit",
        &cfg,
        &["did not converge in 1", "model.max_iterations"],
    );
}

#[test]
fn a_rate_driven_to_one_stops_the_projection_and_writes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let steep = steep_experience(dir.path());
    // Lee–Carter: log m grows about 0.25 a year, so exp() passes 37 (q rounds to 1) within
    // decades. CBD: logit q grows 0.25 a year, past 37 within 200 years.
    for (model, horizon) in [("kind = \"lee-carter\"", 100), ("kind = \"cbd\"", 200)] {
        let cfg = write_config(dir.path(), &steep, model, horizon);
        refused(
            dir.path(),
            "project",
            &cfg,
            &["scenario 0", "not in (0, 1)", "projection.horizon"],
        );
    }
    // The same data over a short horizon project cleanly, so the guard is what stopped them.
    let cfg = write_config(dir.path(), &steep, "kind = \"cbd\"", 5);
    let out = Command::new(env!("CARGO_BIN_EXE_tailspan"))
        .args(["project", cfg.to_str().unwrap(), "--quiet"])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}
