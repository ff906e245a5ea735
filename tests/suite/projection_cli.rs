//! `tailspan project` through the binary on the invented demo experience.

use std::path::{Path, PathBuf};
use std::process::Command;

use parquet::file::reader::{FileReader, SerializedFileReader};

fn demo_experience() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("configs/demo/experience.csv")
}

/// A small config on the demo experience, writing to `dir/out`.
fn config(dir: &Path, kind: &str, projection: &str) -> PathBuf {
    let text = format!(
        r#"
[data]
experience = "{}"
ages = [55, 100]
years = [1990, 2024]

[model]
kind = "{kind}"
max_age = 120

[projection]
{projection}

[output]
folder = "out"
"#,
        demo_experience().display()
    );
    let path = dir.join("run.toml");
    std::fs::write(&path, text).unwrap();
    path
}

fn tailspan(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_tailspan"))
        .args(args)
        .output()
        .unwrap()
}

fn row_count(path: &Path) -> i64 {
    let reader = SerializedFileReader::new(std::fs::File::open(path).unwrap()).unwrap();
    reader.metadata().file_metadata().num_rows()
}

#[test]
fn project_writes_the_three_files_and_shards_add_up() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = config(
        dir.path(),
        "cbd",
        "scenarios = 7\nseed = 5\nhorizon = 10\nparameter_uncertainty = \"drift\"",
    );
    let cfg = cfg.to_str().unwrap();
    let out = tailspan(&["project", cfg, "--quiet"]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(out.stderr.is_empty(), "quiet and not a terminal: no bar");
    let folder = dir.path().join("out");
    // 8 scenarios (0 central + 7) × 2 sexes × 10 years × 66 ages.
    assert_eq!(row_count(&folder.join("paths.parquet")), 8 * 2 * 10 * 66);
    assert_eq!(row_count(&folder.join("factors.parquet")), 8 * 2 * 10 * 2);
    assert_eq!(row_count(&folder.join("period.parquet")), 8 * 2 * 10);
    let mut total = 0;
    for k in 1..=3 {
        let shard = format!("{k}/3");
        let out = tailspan(&["project", cfg, "--shard", &shard]);
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        total += row_count(&folder.join(format!("paths.part-{k}-of-3.parquet")));
    }
    assert_eq!(total, 8 * 2 * 10 * 66);
}

#[test]
fn bad_shard_and_bad_key_exit_2_and_write_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = config(dir.path(), "lee-carter", "scenarios = 3\nhorizon = 5");
    let cfg = cfg.to_str().unwrap();
    let out = tailspan(&["project", cfg, "--shard", "4/3"]);
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("--shard"), "{err}");
    let cfg = config(
        dir.path(),
        "lee-carter",
        "scenarios = 3\nbootstrap_samples = 0",
    );
    let out = tailspan(&["project", cfg.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("projection.bootstrap_samples"), "{err}");
    assert!(!dir.path().join("out").exists());
}

#[test]
fn bootstrap_run_is_identical_on_one_and_two_threads() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = config(
        dir.path(),
        "lee-carter",
        "scenarios = 5\nseed = 9\nhorizon = 6\nparameter_uncertainty = \"bootstrap\"\nbootstrap_samples = 3",
    );
    let mut files = Vec::new();
    for threads in ["1", "2"] {
        let out = Command::new(env!("CARGO_BIN_EXE_tailspan"))
            .args(["project", cfg.to_str().unwrap(), "-q"])
            .env("RAYON_NUM_THREADS", threads)
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        let folder = dir.path().join("out");
        files.push(
            ["paths", "factors", "period"]
                .map(|f| std::fs::read(folder.join(format!("{f}.parquet"))).unwrap()),
        );
    }
    assert!(files[0] == files[1], "bytes differ between 1 and 2 threads");
}
