//! `tailspan merge` through the binary: one shard or four, merged, give the single run's
//! `summary.json` byte for byte and its Parquet rows exactly; incomplete or mismatched
//! shard sets are refused with the missing or offending file named.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use arrow_array::{Array, Float32Array, Float64Array, Int16Array, StringArray, UInt32Array};
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;

fn demo(file: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("configs/demo")
        .join(file)
}

/// A reduced demo run writing to `folder` (relative to the config).
fn config(dir: &Path, name: &str, folder: &str) -> PathBuf {
    let text = format!(
        r#"
[data]
experience = "{}"
book = "{}"
ages = [55, 100]
years = [2005, 2024]

[model]
kind = "lee-carter"
max_age = 120

[projection]
scenarios = 41
seed = 7
horizon = 70
parameter_uncertainty = true

[valuation]
rate = 0.03
frequency = 12
horizons = [10, 20]

[capital]
levels = [0.9, 0.995]
one_year = true
one_year_scenarios = 4

[output]
folder = "{folder}"
paths = 15
"#,
        demo("experience.csv").display(),
        demo("book.csv").display()
    );
    let path = dir.join(name);
    std::fs::write(&path, text).unwrap();
    path
}

fn tailspan(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_tailspan"))
        .args(args)
        .arg("--quiet")
        .output()
        .unwrap()
}

fn ok(args: &[&str]) {
    let out = tailspan(args);
    assert!(
        out.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
}

/// Every row of a Parquet file as text, columns in order, floats by their bits.
fn rows(path: &Path) -> Vec<String> {
    let file = std::fs::File::open(path).unwrap();
    let reader = ParquetRecordBatchReaderBuilder::try_new(file)
        .unwrap()
        .build()
        .unwrap();
    let mut out = Vec::new();
    for batch in reader {
        let batch = batch.unwrap();
        for i in 0..batch.num_rows() {
            let mut row = String::new();
            for column in batch.columns() {
                let any = column.as_any();
                let cell = if column.is_null(i) {
                    "null".to_string()
                } else if let Some(a) = any.downcast_ref::<UInt32Array>() {
                    a.value(i).to_string()
                } else if let Some(a) = any.downcast_ref::<Int16Array>() {
                    a.value(i).to_string()
                } else if let Some(a) = any.downcast_ref::<Float64Array>() {
                    format!("{:x}", a.value(i).to_bits())
                } else if let Some(a) = any.downcast_ref::<Float32Array>() {
                    format!("{:x}", a.value(i).to_bits())
                } else if let Some(a) = any.downcast_ref::<StringArray>() {
                    a.value(i).to_string()
                } else {
                    panic!("unexpected column type {:?}", column.data_type())
                };
                row.push_str(&cell);
                row.push(',');
            }
            out.push(row);
        }
    }
    out
}

/// Runs `config` in `shards` shards (value and project), merges them and moves the
/// outputs aside to `dir/keep`. The same config file serves every split, so the summaries'
/// recorded inputs (the config's path and hash among them) are the same.
fn run_split(dir: &Path, config: &Path, shards: usize, keep: &str) -> PathBuf {
    let c = config.to_str().unwrap();
    let out = dir.join("out");
    if shards == 0 {
        ok(&["value", c]);
        ok(&["project", c]);
    } else {
        for k in 1..=shards {
            let shard = format!("{k}/{shards}");
            ok(&["value", c, "--shard", &shard]);
            ok(&["project", c, "--shard", &shard]);
        }
        assert!(
            !out.join("summary.json").exists(),
            "a shard writes no summary"
        );
        ok(&["merge", out.to_str().unwrap(), "--config", c]);
    }
    let kept = dir.join(keep);
    std::fs::rename(&out, &kept).unwrap();
    kept
}

#[test]
fn merged_shards_reproduce_the_single_run() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = config(dir.path(), "run.toml", "out");
    let single = run_split(dir.path(), &cfg, 0, "single");
    let summary = std::fs::read_to_string(single.join("summary.json")).unwrap();
    // paths = 15: the central path and scenarios 1..=15; of 4 shards (0..10, 10..21,
    // 21..31, 31..42) the second holds part of them and the last two none.
    let scenarios: std::collections::BTreeSet<u32> = rows(&single.join("paths.parquet"))
        .iter()
        .map(|r| r.split(',').next().unwrap().parse().unwrap())
        .collect();
    assert_eq!(scenarios, (0..=15).collect());

    for shards in [1, 4] {
        let merged = run_split(dir.path(), &cfg, shards, &format!("split{shards}"));
        assert_eq!(
            std::fs::read_to_string(merged.join("summary.json")).unwrap(),
            summary,
            "{shards} shards: summary.json differs"
        );
        for stem in [
            "book",
            "cashflows",
            "lifetimes",
            "paths",
            "factors",
            "period",
        ] {
            let file = format!("{stem}.parquet");
            let whole = rows(&single.join(&file));
            assert!(!whole.is_empty(), "{file} is empty");
            assert_eq!(rows(&merged.join(&file)), whole, "{shards} shards: {file}");
        }
    }
}

#[test]
fn incomplete_or_foreign_shards_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = config(dir.path(), "run.toml", "out");
    let c = cfg.to_str().unwrap();
    for k in [1, 2, 4] {
        ok(&["value", c, "--shard", &format!("{k}/4")]);
    }
    let out = dir.path().join("out");
    let o = out.to_str().unwrap();
    let failed = tailspan(&["merge", o, "--config", c]);
    assert_eq!(failed.status.code(), Some(2));
    let err = String::from_utf8_lossy(&failed.stderr);
    assert!(err.contains("book.part-3-of-4.parquet"), "{err}");
    assert!(!out.join("book.parquet").exists(), "nothing written");

    // Shard 3 of a run with more scenarios: its block does not fit this run's.
    let other = config(dir.path(), "other.toml", "out");
    let text = std::fs::read_to_string(&other)
        .unwrap()
        .replace("scenarios = 41", "scenarios = 45");
    std::fs::write(&other, text).unwrap();
    ok(&["value", other.to_str().unwrap(), "--shard", "3/4"]);
    let failed = tailspan(&["merge", o, "--config", c]);
    assert_eq!(failed.status.code(), Some(2));
    let err = String::from_utf8_lossy(&failed.stderr);
    assert!(
        err.contains("part-3-of-4") && err.contains("scenarios"),
        "{err}"
    );
    assert!(!out.join("summary.json").exists());

    // The right shard 3 completes the set.
    ok(&["value", c, "--shard", "3/4"]);
    ok(&["merge", o, "--config", c]);
    assert!(out.join("summary.json").exists());
}
