//! `tailspan value` through the binary on the invented demo data: files agree with each
//! other and with the summary, and results do not depend on threads or shards.

use std::path::{Path, PathBuf};
use std::process::Command;

use arrow_array::{Array, Float64Array, UInt32Array};
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;

fn demo(file: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("configs/demo")
        .join(file)
}

/// A reduced demo: few scenarios, a short history, a small one-year sample.
fn config(dir: &Path, extra: &str) -> PathBuf {
    let text = format!(
        r#"
[data]
experience = "{}"
book = "{}"
ages = [55, 100]
years = [1995, 2024]

[model]
kind = "lee-carter"
max_age = 120

[projection]
scenarios = 60
seed = 11
horizon = 70
parameter_uncertainty = true

[valuation]
rate = 0.03
frequency = 12
horizons = [10, 20]

[capital]
levels = [0.9, 0.995]
one_year = true
one_year_scenarios = 8

[output]
folder = "out"
{extra}
"#,
        demo("experience.csv").display(),
        demo("book.csv").display()
    );
    let path = dir.join("run.toml");
    std::fs::write(&path, text).unwrap();
    path
}

fn tailspan(args: &[&str], threads: Option<&str>) -> std::process::Output {
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_tailspan"));
    cmd.args(args);
    if let Some(t) = threads {
        cmd.env("RAYON_NUM_THREADS", t);
    }
    let out = cmd.output().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    out
}

/// (scenario, pv_expected, pv_simulated) read back with the parquet crate's reader.
fn book_rows(path: &Path) -> Vec<(u32, f64, f64)> {
    let file = std::fs::File::open(path).unwrap();
    let reader = ParquetRecordBatchReaderBuilder::try_new(file)
        .unwrap()
        .build()
        .unwrap();
    let mut rows = Vec::new();
    for batch in reader {
        let batch = batch.unwrap();
        let col = |i: usize| batch.column(i).clone();
        let s = col(0);
        let s = s.as_any().downcast_ref::<UInt32Array>().unwrap();
        let e = col(1);
        let e = e.as_any().downcast_ref::<Float64Array>().unwrap();
        let m = col(2);
        let m = m.as_any().downcast_ref::<Float64Array>().unwrap();
        for i in 0..batch.num_rows() {
            rows.push((s.value(i), e.value(i), m.value(i)));
        }
    }
    rows
}

fn quantile7(values: &[f64], p: f64) -> f64 {
    // Hyndman–Fan type 7, written out independently of the crate's code.
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    let h = (v.len() - 1) as f64 * p;
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(v.len() - 1);
    v[lo] + (h - lo as f64) * (v[hi] - v[lo])
}

#[test]
fn value_writes_consistent_files_and_summary() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = config(dir.path(), "");
    tailspan(&["value", cfg.to_str().unwrap(), "--quiet"], None);
    let out = dir.path().join("out");
    for f in [
        "book.parquet",
        "cashflows.parquet",
        "lifetimes.parquet",
        "summary.json",
    ] {
        assert!(out.join(f).exists(), "{f} missing");
    }
    let rows = book_rows(&out.join("book.parquet"));
    assert_eq!(rows.len(), 61, "scenario 0 plus 60");
    assert_eq!(rows[0].0, 0);
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    // The best estimate is the central path's trend-only PV.
    assert_eq!(summary["best_estimate"].as_f64().unwrap(), rows[0].1);
    // The summary's VaR is the type-7 quantile of the file's stochastic scenarios.
    let trend: Vec<f64> = rows[1..].iter().map(|r| r.1).collect();
    let simulated: Vec<f64> = rows[1..].iter().map(|r| r.2).collect();
    for (key, values) in [("trend", &trend), ("trend_idiosyncratic", &simulated)] {
        let tails = summary[key]["tails"].as_array().unwrap();
        for t in tails {
            let level = t["level"].as_f64().unwrap();
            let var = t["var"].as_f64().unwrap();
            let ours = quantile7(values, level);
            assert!(
                (var - ours).abs() <= 1e-9 * ours.abs(),
                "{key} {level}: {var} vs {ours}"
            );
            let be = summary["best_estimate"].as_f64().unwrap();
            assert!((t["capital"].as_f64().unwrap() - (var - be)).abs() < 1e-6 * be);
        }
    }
    // `value` keeps no PV in memory and reads them back from book.parquet for the capital
    // figures; they equal the in-memory computation (a sorted copy, type 7) bit for bit.
    let be = summary["best_estimate"].as_f64().unwrap();
    for (key, values) in [("trend", &trend), ("trend_idiosyncratic", &simulated)] {
        let in_memory = tailspan::risk::CapitalSummary::new(values, be, &[0.9, 0.995]);
        // Both sides go through the same text and parser (serde_json's default parser may
        // round the last bit; equal shortest texts parse equal).
        let text = serde_json::to_string(&in_memory).unwrap();
        let in_memory: serde_json::Value = serde_json::from_str(&text).unwrap();
        assert_eq!(summary[key], in_memory, "{key}");
    }
    assert_eq!(summary["run"]["scenarios"].as_u64(), Some(60));
    // The standard-formula stress raises the best estimate (a 20 % lower q).
    let stress = &summary["standard_stress"];
    assert!(stress["stressed_pv"].as_f64().unwrap() > summary["best_estimate"].as_f64().unwrap());
    assert_eq!(summary["one_year"]["scenarios"].as_u64(), Some(8));
    assert_eq!(summary["run"]["inputs"].as_array().unwrap().len(), 3);
}

#[test]
fn results_do_not_depend_on_threads_or_shards() {
    let dir = tempfile::tempdir().unwrap();
    let one = config(dir.path(), "");
    tailspan(&["value", one.to_str().unwrap(), "--quiet"], Some("1"));
    let single = std::fs::read(dir.path().join("out/book.parquet")).unwrap();
    let single_summary = std::fs::read(dir.path().join("out/summary.json")).unwrap();
    std::fs::remove_dir_all(dir.path().join("out")).unwrap();
    tailspan(&["value", one.to_str().unwrap(), "--quiet"], Some("2"));
    assert_eq!(
        std::fs::read(dir.path().join("out/book.parquet")).unwrap(),
        single
    );
    assert_eq!(
        std::fs::read(dir.path().join("out/summary.json")).unwrap(),
        single_summary
    );
    // Four shards' rows, concatenated, are the single run's rows.
    let mut sharded = Vec::new();
    for k in 1..=4 {
        let shard = format!("{k}/4");
        tailspan(
            &["value", one.to_str().unwrap(), "--quiet", "--shard", &shard],
            Some("2"),
        );
        sharded.extend(book_rows(
            &dir.path().join(format!("out/book.part-{k}-of-4.parquet")),
        ));
    }
    assert_eq!(sharded, book_rows(&dir.path().join("out/book.parquet")));
}

#[test]
fn a_different_seed_changes_the_results() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = config(dir.path(), "");
    tailspan(&["value", cfg.to_str().unwrap(), "--quiet"], None);
    let first = book_rows(&dir.path().join("out/book.parquet"));
    let text = std::fs::read_to_string(&cfg)
        .unwrap()
        .replace("seed = 11", "seed = 12");
    std::fs::write(&cfg, text).unwrap();
    tailspan(&["value", cfg.to_str().unwrap(), "--quiet"], None);
    let second = book_rows(&dir.path().join("out/book.parquet"));
    assert_eq!(
        first[0].1, second[0].1,
        "the central path's best estimate does not depend on the seed"
    );
    assert_ne!(first[1..], second[1..]);
}
