//! `tailspan run` and `tailspan value` through the binary with every cohort kind on a
//! trimmed demo: the whole pipeline works, every figure is finite, the cohort index is
//! drawn per scenario (not frozen at the last fitted year's values), and results do not
//! depend on threads or shards.

use std::collections::{BTreeMap, HashMap};
use std::fs::File;
use std::path::{Path, PathBuf};
use std::process::Command;

use parquet::file::reader::{FileReader, SerializedFileReader};
use parquet::record::Field;

const LAST_YEAR: i32 = 2024;
const FIRST_AGE: i32 = 60;
const HORIZON: i32 = 60;
/// Young-corner cohorts left out of the fit with `min_cohort_cells = 3`.
const LEFT_OUT: i32 = 2;
const SCENARIOS: u32 = 24;

/// A small invented book, ages within the fitted range.
const BOOK: &str = "id,sex,age,amount\nA1,F,62,1000\nA2,M,65,1500\nA3,F,70,800\n\
                    A4,M,75,1200\nA5,F,80,600\nA6,M,85,900\n";

fn config(dir: &Path, kind: &str, one_year: bool) -> PathBuf {
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("configs/demo/experience.csv");
    std::fs::write(dir.join("book.csv"), BOOK).unwrap();
    let text = format!(
        r#"
[data]
experience = "{}"
book = "book.csv"
ages = [{FIRST_AGE}, 95]
years = [1995, {LAST_YEAR}]

[model]
kind = "{kind}"
cohort_loading = "unit"
cohort_series = "ar1-trend"
max_age = 120

[projection]
scenarios = {SCENARIOS}
seed = 5
horizon = {HORIZON}
parameter_uncertainty = true

[valuation]
rate = 0.03
frequency = 12

[capital]
levels = [0.995]
one_year = {one_year}
one_year_scenarios = 3

[output]
folder = "out"
paths = true
"#,
        demo.display()
    );
    let path = dir.join("run.toml");
    std::fs::write(&path, text).unwrap();
    path
}

fn tailspan(args: &[&str], threads: Option<&str>) {
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_tailspan"));
    cmd.args(args);
    if let Some(t) = threads {
        cmd.env("RAYON_NUM_THREADS", t);
    }
    let out = cmd.output().unwrap();
    assert!(
        out.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
}

/// Every row of a Parquet file by column name, via the parquet crate's record reader.
fn rows(path: &Path) -> Vec<BTreeMap<String, Field>> {
    let reader = SerializedFileReader::new(File::open(path).unwrap()).unwrap();
    reader
        .get_row_iter(None)
        .unwrap()
        .map(|r| {
            r.unwrap()
                .get_column_iter()
                .map(|(n, f)| (n.clone(), f.clone()))
                .collect()
        })
        .collect()
}

fn int(f: &Field) -> i64 {
    match f {
        Field::UInt(v) => *v as i64,
        Field::Short(v) => *v as i64,
        Field::Int(v) => *v as i64,
        other => panic!("unexpected integer {other:?}"),
    }
}

fn float(f: &Field) -> f64 {
    match f {
        Field::Double(v) => *v,
        other => panic!("unexpected float {other:?}"),
    }
}

fn text(f: &Field) -> String {
    match f {
        Field::Str(s) => s.clone(),
        other => panic!("unexpected string {other:?}"),
    }
}

/// Every float column of every row is finite (nulls are allowed where q = 1).
fn assert_finite(path: &Path) {
    for row in rows(path) {
        for (name, f) in &row {
            if let Field::Double(v) = f {
                assert!(v.is_finite(), "{}: {name} = {v}", path.display());
            }
        }
    }
}

/// (scenario, sex, year, factor) → value.
type Factors = HashMap<(i64, String, i64, String), f64>;

fn factors(path: &Path) -> Factors {
    rows(path)
        .iter()
        .map(|r| {
            (
                (
                    int(&r["scenario"]),
                    text(&r["sex"]),
                    int(&r["year"]),
                    text(&r["factor"]),
                ),
                float(&r["value"]),
            )
        })
        .collect()
}

/// Runs `kind` and checks what every cohort kind must give; returns the output folder.
fn run_kind(dir: &Path, kind: &str, one_year: bool) -> PathBuf {
    let cfg = config(dir, kind, one_year);
    tailspan(&["run", cfg.to_str().unwrap(), "--quiet"], None);
    let out = dir.join("out");
    for f in [
        "fit.json",
        "paths.parquet",
        "factors.parquet",
        "period.parquet",
        "book.parquet",
        "lifetimes.parquet",
        "summary.json",
        "report.html",
    ] {
        assert!(out.join(f).exists(), "{kind}: {f} missing");
    }
    for f in [
        "paths.parquet",
        "factors.parquet",
        "period.parquet",
        "book.parquet",
        "lifetimes.parquet",
    ] {
        assert_finite(&out.join(f));
    }
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    let be = summary["best_estimate"].as_f64().unwrap();
    assert!(be.is_finite() && be > 0.0, "{kind}: best estimate {be}");

    // The drawn cohorts: the young corner left out of the fit, then one per projected year.
    let f = factors(&out.join("factors.parquet"));
    let first = LAST_YEAR - FIRST_AGE - LEFT_OUT + 1;
    let last = LAST_YEAR + HORIZON - FIRST_AGE;
    for sex in ["F", "M"] {
        let mut births: Vec<i64> = f
            .keys()
            .filter(|k| k.0 == 0 && k.1 == sex && k.3 == "gamma")
            .map(|k| k.2)
            .collect();
        births.sort_unstable();
        assert_eq!(
            births,
            (first..=last).map(i64::from).collect::<Vec<_>>(),
            "{kind} {sex}"
        );
        // Every drawn cohort's γ differs across scenarios; a frozen index would not.
        for birth in [first, last] {
            let values: Vec<f64> = (0..=SCENARIOS as i64)
                .map(|s| f[&(s, sex.to_string(), i64::from(birth), "gamma".into())])
                .collect();
            let mean = values.iter().sum::<f64>() / values.len() as f64;
            let spread = values.iter().map(|v| (v - mean).abs()).fold(0.0, f64::max);
            assert!(
                spread > 1e-6,
                "{kind} {sex} cohort {birth}: γ is the same in every scenario"
            );
        }
    }
    out
}

#[test]
fn apc_rates_take_each_cohorts_drawn_index() {
    let dir = tempfile::tempdir().unwrap();
    let out = run_kind(dir.path(), "apc", true);
    // log m = a_x + k_t + γ_{t−x}: between scenario s and the central path, log m moves by
    // Δk_t at an age whose cohort was fitted and by Δk_t + Δγ_{t−x} where it was drawn.
    let f = factors(&out.join("factors.parquet"));
    let mut log_m: HashMap<(i64, String, i64, i64), f64> = HashMap::new();
    for r in rows(&out.join("paths.parquet")) {
        let age = int(&r["age"]);
        if age <= 95 {
            let key = (int(&r["scenario"]), text(&r["sex"]), int(&r["year"]), age);
            // paths.parquet holds q as a 32-bit float and leaves m = −ln(1 − q) to the reader.
            let q = match &r["q"] {
                Field::Float(q) => f64::from(*q),
                other => panic!("q = {other:?}"),
            };
            log_m.insert(key, (-(-q).ln_1p()).ln());
        }
    }
    let first_drawn = i64::from(LAST_YEAR - FIRST_AGE - LEFT_OUT + 1);
    let mut drawn_cells = 0;
    for s in [1i64, 7, 24] {
        for sex in ["F", "M"] {
            let sx = sex.to_string();
            for year in [2025i64, 2040, 2084] {
                let dk =
                    f[&(s, sx.clone(), year, "k".into())] - f[&(0, sx.clone(), year, "k".into())];
                for age in 60..=95i64 {
                    let birth = year - age;
                    let dgamma = if birth >= first_drawn {
                        drawn_cells += 1;
                        f[&(s, sx.clone(), birth, "gamma".into())]
                            - f[&(0, sx.clone(), birth, "gamma".into())]
                    } else {
                        0.0
                    };
                    let moved =
                        log_m[&(s, sx.clone(), year, age)] - log_m[&(0, sx.clone(), year, age)];
                    // q's 32-bit rounding (relative 6e-8) moves log m by about as much.
                    assert!(
                        (moved - dk - dgamma).abs() < 1e-6,
                        "scenario {s} {sex} {year} age {age}: Δ log m {moved} vs Δk {dk} + Δγ {dgamma}"
                    );
                }
            }
        }
    }
    assert!(drawn_cells > 100);
}

#[test]
fn renshaw_haberman_with_unit_loading_runs() {
    let dir = tempfile::tempdir().unwrap();
    run_kind(dir.path(), "renshaw-haberman", false);
}

#[test]
fn m6_runs() {
    let dir = tempfile::tempdir().unwrap();
    run_kind(dir.path(), "m6", true);
}

#[test]
fn m7_runs() {
    let dir = tempfile::tempdir().unwrap();
    run_kind(dir.path(), "m7", false);
}

#[test]
fn cohort_values_do_not_depend_on_threads_or_shards() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = config(dir.path(), "m6", false);
    let cfg = cfg.to_str().unwrap();
    let out = dir.path().join("out");
    tailspan(&["value", cfg, "--quiet"], Some("1"));
    let single = std::fs::read(out.join("book.parquet")).unwrap();
    let summary = std::fs::read(out.join("summary.json")).unwrap();
    std::fs::remove_dir_all(&out).unwrap();
    tailspan(&["value", cfg, "--quiet"], Some("2"));
    assert!(std::fs::read(out.join("book.parquet")).unwrap() == single);
    assert!(std::fs::read(out.join("summary.json")).unwrap() == summary);
    let whole: Vec<String> = rows(&out.join("book.parquet"))
        .iter()
        .map(|r| format!("{r:?}"))
        .collect();
    let mut sharded = Vec::new();
    for k in 1..=3 {
        let shard = format!("{k}/3");
        tailspan(&["value", cfg, "--quiet", "--shard", &shard], Some("2"));
        sharded.extend(
            rows(&out.join(format!("book.part-{k}-of-3.parquet")))
                .iter()
                .map(|r| format!("{r:?}")),
        );
    }
    assert_eq!(sharded, whole);
}
