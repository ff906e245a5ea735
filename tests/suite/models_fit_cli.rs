//! `tailspan fit CONFIG` through the binary: outputs on success, exit code 2 and a clear
//! message on bad input.

use crate::models_support;

use std::path::Path;
use std::process::Command;

use models_support::fixture;

fn write_config(dir: &Path, data: &str, model: &str) -> std::path::PathBuf {
    let text = format!(
        "[data]\nexperience = \"{}\"\n{data}\nsexes = [\"F\"]\n\n[model]\n{model}\n\n[output]\nfolder = \"out\"\n",
        fixture(if model.contains("svd") {
            "sparse_experience.csv"
        } else {
            "small_experience.csv"
        })
        .display()
    );
    let path = dir.join("fit.toml");
    std::fs::write(&path, text).unwrap();
    path
}

fn run(config: &Path) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_tailspan"))
        .arg("fit")
        .arg(config)
        .output()
        .unwrap();
    (
        out.status.code().unwrap(),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

#[test]
fn fits_and_prints_a_table() {
    let dir = tempfile::tempdir().unwrap();
    let config = write_config(
        dir.path(),
        "ages = [60, 79]\nyears = [2000, 2019]",
        "kind = [\"cbd\", \"lee-carter\"]",
    );
    let (code, stdout, stderr) = run(&config);
    assert_eq!(code, 0, "{stderr}");
    assert!(
        stdout.contains("cbd") && stdout.contains("lee-carter"),
        "{stdout}"
    );
    assert!(stdout.contains("rank 1 for F"), "{stdout}");
    assert!(dir.path().join("out/fit.json").exists());
    assert!(dir.path().join("out/residuals.parquet").exists());
}

#[test]
fn years_the_experience_lacks_exit_2() {
    let dir = tempfile::tempdir().unwrap();
    let config = write_config(dir.path(), "ages = [60, 79]\nyears = [1995, 2019]", "");
    let (code, _, stderr) = run(&config);
    assert_eq!(code, 2);
    assert!(stderr.contains("1995"), "{stderr}");
    assert!(!dir.path().join("out").exists());
}

#[test]
fn svd_with_zero_cells_exits_2_and_suggests_poisson() {
    let dir = tempfile::tempdir().unwrap();
    let config = write_config(
        dir.path(),
        "ages = [60, 79]\nyears = [2000, 2019]",
        "fit = \"svd\"",
    );
    let (code, _, stderr) = run(&config);
    assert_eq!(code, 2);
    assert!(stderr.contains("zero deaths"), "{stderr}");
    assert!(stderr.contains("fit = \"poisson\""), "{stderr}");
    assert!(!dir.path().join("out").exists());
}

#[test]
fn one_age_is_refused_before_fitting() {
    let dir = tempfile::tempdir().unwrap();
    let config = write_config(
        dir.path(),
        "ages = [70, 70]\nyears = [2000, 2019]",
        "kind = \"cbd\"",
    );
    let (code, _, stderr) = run(&config);
    assert_eq!(code, 2);
    assert!(stderr.contains("data.ages"), "{stderr}");
}
