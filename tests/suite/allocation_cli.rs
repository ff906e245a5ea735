//! Capital allocation end to end on a reduced demo: a replayed scenario gives its
//! `book.parquet` row, the contributions add up to the TVaR capital, a segment's share is
//! what the segment alone averages over the same tail, results do not depend on threads,
//! and a tranche's marginal capital is the difference of separate runs.

use std::path::{Path, PathBuf};
use std::process::Command;

use arrow_array::{Array, Float64Array, StringArray, UInt32Array};
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;
use tailspan::data::{Book, Config, Experience};
use tailspan::pipeline::{ProjectedFits, ValuationSetup};
use tailspan::projection::scenario_ids;
use tailspan::valuation::DriverSettings;
use tailspan::valuation::replay::{PolicyReplay, PolicyValues};

fn demo(file: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("configs/demo")
        .join(file)
}

/// Rows `from..to` of the demo book (data rows, 0-based), with ids prefixed by `prefix`;
/// some policies get a fractional weight so that one row stands for several lives.
fn book_slice(path: &Path, from: usize, to: usize, prefix: &str) {
    let text = std::fs::read_to_string(demo("book.csv")).unwrap();
    let mut lines = text.lines();
    let header = lines.next().unwrap();
    let weight = header.split(',').position(|c| c == "weight").unwrap();
    let mut out = format!("{header}\n");
    for (i, line) in lines.enumerate().skip(from).take(to - from) {
        let mut cells: Vec<String> = line.split(',').map(str::to_string).collect();
        if i % 7 == 3 {
            cells[weight] = "3.4".to_string();
        }
        out.push_str(prefix);
        out.push_str(&cells.join(","));
        out.push('\n');
    }
    std::fs::write(path, out).unwrap();
}

/// A reduced demo valuing `book` (and the candidate, if any) with allocation on.
fn config(dir: &Path, book: &str, extra_data: &str, extra_capital: &str) -> PathBuf {
    let text = format!(
        r#"
[data]
experience = "{}"
book = "{book}"
ages = [55, 100]
years = [1995, 2024]
{extra_data}

[model]
kind = "lee-carter"
max_age = 120

[projection]
scenarios = 200
seed = 7
horizon = 70
parameter_uncertainty = true

[valuation]
rate = 0.03
frequency = 12

[capital]
levels = [0.9, 0.99]
{extra_capital}

[output]
folder = "out"
paths = false
"#,
        demo("experience.csv").display(),
    );
    let path = dir.join(format!("run-{}.toml", book.trim_end_matches(".csv")));
    std::fs::write(&path, text).unwrap();
    path
}

fn tailspan(args: &[&str], threads: Option<&str>) -> std::process::Output {
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_tailspan"));
    cmd.args(args);
    if let Some(t) = threads {
        cmd.env("RAYON_NUM_THREADS", t);
    }
    cmd.output().unwrap()
}

fn value(config: &Path, threads: Option<&str>) -> serde_json::Value {
    let out = tailspan(&["value", config.to_str().unwrap(), "--quiet"], threads);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let summary = config.parent().unwrap().join("out/summary.json");
    serde_json::from_str(&std::fs::read_to_string(summary).unwrap()).unwrap()
}

/// (scenario, pv_expected, pv_simulated) of `book.parquet`.
fn book_rows(path: &Path) -> Vec<(u64, f64, f64)> {
    let file = std::fs::File::open(path).unwrap();
    let mut rows = Vec::new();
    for batch in ParquetRecordBatchReaderBuilder::try_new(file)
        .unwrap()
        .build()
        .unwrap()
    {
        let batch = batch.unwrap();
        let s = batch.column(0);
        let s = s.as_any().downcast_ref::<UInt32Array>().unwrap();
        let e = batch.column(1);
        let e = e.as_any().downcast_ref::<Float64Array>().unwrap();
        let m = batch.column(2);
        let m = m.as_any().downcast_ref::<Float64Array>().unwrap();
        for i in 0..batch.num_rows() {
            rows.push((u64::from(s.value(i)), e.value(i), m.value(i)));
        }
    }
    rows
}

/// Float column `name` of a Parquet file, with the `level` column beside it.
fn allocation_column(path: &Path, name: &str) -> Vec<(f64, f64)> {
    let file = std::fs::File::open(path).unwrap();
    let builder = ParquetRecordBatchReaderBuilder::try_new(file).unwrap();
    let (li, ci) = (
        builder.schema().index_of("level").unwrap(),
        builder.schema().index_of(name).unwrap(),
    );
    let mut out = Vec::new();
    for batch in builder.build().unwrap() {
        let batch = batch.unwrap();
        let l = batch.column(li);
        let l = l.as_any().downcast_ref::<Float64Array>().unwrap();
        let c = batch.column(ci);
        let c = c.as_any().downcast_ref::<Float64Array>().unwrap();
        out.extend((0..batch.num_rows()).map(|i| (l.value(i), c.value(i))));
    }
    out
}

fn ids(path: &Path) -> Vec<String> {
    let file = std::fs::File::open(path).unwrap();
    let mut out = Vec::new();
    for batch in ParquetRecordBatchReaderBuilder::try_new(file)
        .unwrap()
        .build()
        .unwrap()
    {
        let batch = batch.unwrap();
        let c = batch.column_by_name("id").unwrap();
        let c = c.as_any().downcast_ref::<StringArray>().unwrap();
        out.extend(c.iter().map(|v| v.unwrap().to_string()));
    }
    out
}

fn quantile7(values: &[f64], p: f64) -> f64 {
    // Hyndman–Fan type 7 (numpy's default), written out independently of the crate.
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    let h = (v.len() - 1) as f64 * p;
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(v.len() - 1);
    v[lo] + (h - lo as f64) * (v[hi] - v[lo])
}

/// The scenarios whose PV is at or above the level's VaR (the TVaR's tail).
fn tail(rows: &[(u64, f64, f64)], level: f64, simulated: bool) -> Vec<u64> {
    let pv = |r: &(u64, f64, f64)| if simulated { r.2 } else { r.1 };
    let stochastic: Vec<&(u64, f64, f64)> = rows.iter().filter(|r| r.0 != 0).collect();
    let values: Vec<f64> = stochastic.iter().map(|r| pv(r)).collect();
    let var = quantile7(&values, level);
    stochastic
        .iter()
        .filter(|r| pv(r) >= var)
        .map(|r| r.0)
        .collect()
}

/// The library's view of a config: its book, prepared, and a prepared projector.
struct Setup {
    config: Config,
    fits_projector: tailspan::projection::Projector,
}

fn setup(path: &Path) -> Setup {
    let config = Config::load(path).unwrap();
    let experience = Experience::from_config(&config).unwrap();
    let fits = ProjectedFits::fit(&config, &experience).unwrap();
    let mut projector = fits.projector(&config, &experience).unwrap();
    projector
        .prepare(scenario_ids(
            config.projection.scenarios,
            config.projection.noise,
        ))
        .unwrap();
    Setup {
        config,
        fits_projector: projector,
    }
}

fn settings(config: &Config) -> DriverSettings<'static> {
    DriverSettings {
        seed: config.projection.seed,
        idiosyncratic: config.valuation.idiosyncratic,
        book_rates: None,
        index_cash: false,
    }
}

#[test]
fn contributions_add_up_and_segments_are_their_tail_alone() {
    let dir = tempfile::tempdir().unwrap();
    book_slice(&dir.path().join("book.csv"), 0, 400, "");
    let cfg = config(dir.path(), "book.csv", "", "allocation = true");
    let summary = value(&cfg, None);
    let out = dir.path().join("out");
    let rows = book_rows(&out.join("book.parquet"));
    let be = summary["best_estimate"].as_f64().unwrap();
    let allocation = &summary["allocation"];

    for (m, measure) in ["trend", "trend_idiosyncratic"].iter().enumerate() {
        let suffix = if m == 0 { "" } else { "_simulated" };
        let tvar_c = allocation_column(
            &out.join("allocation.parquet"),
            &format!("tvar_contribution{suffix}"),
        );
        let share = allocation_column(
            &out.join("allocation.parquet"),
            &format!("capital_share{suffix}"),
        );
        for (j, tail_figures) in summary[measure]["tails"]
            .as_array()
            .unwrap()
            .iter()
            .enumerate()
        {
            let level = tail_figures["level"].as_f64().unwrap();
            let tvar = tail_figures["tvar"].as_f64().unwrap();
            // Exact additivity: the policies' contributions add up to TVaR − BE, to the
            // rounding of adding 400 terms (relative 1e-12).
            let sum: f64 = tvar_c
                .iter()
                .filter(|(l, _)| *l == level)
                .map(|(_, c)| c)
                .sum();
            let capital = tvar - be;
            assert!(
                (sum - capital).abs() <= 1e-12 * capital.abs() * 400.0_f64.sqrt() + 1e-9,
                "{measure} at {level}: contributions {sum} against TVaR − BE {capital}"
            );
            let shares: f64 = share
                .iter()
                .filter(|(l, _)| *l == level)
                .map(|(_, c)| c)
                .sum();
            assert!((shares - 1.0).abs() < 1e-12, "{shares}");
            // The tail replayed is the tail of book.parquet (type-7 VaR written out here).
            let block = &allocation["levels"][j][measure];
            assert_eq!(
                block["tail_scenarios"].as_u64().unwrap() as usize,
                tail(&rows, level, m == 1).len()
            );
        }
    }

    // A segment valued alone in the tail scenarios of the whole book, with the same seed:
    // its mean PV less its BE is the segment's trend-only contribution.
    let s = setup(&cfg);
    let book = Book::from_config(&s.config).unwrap().unwrap();
    let level_index = 1;
    let level = s.config.capital.levels[level_index];
    let scenarios = tail(&rows, level, false);
    let segments = allocation["levels"][level_index]["trend"]["segments"]
        .as_array()
        .unwrap();
    let checked = [
        ("sex_age_band", "F 65-69"),
        ("sex_age_band", "M 70-74"),
        ("deferred", "deferred"),
        ("guaranteed", "guaranteed"),
    ];
    for (by, name) in checked {
        let figures = segments
            .iter()
            .find(|f| f["by"] == by && f["segment"] == name)
            .unwrap_or_else(|| panic!("no segment {by} {name}"));
        let alone = Book {
            source: book.source.clone(),
            policies: book
                .policies
                .iter()
                .filter(|p| match by {
                    "sex_age_band" => {
                        format!("{} {}-{}", p.sex.code(), p.age / 5 * 5, p.age / 5 * 5 + 4) == name
                    }
                    "deferred" => p.deferral > 0,
                    _ => p.guarantee > 0,
                })
                .cloned()
                .collect(),
        };
        assert_eq!(
            figures["policies"].as_u64().unwrap() as usize,
            alone.policies.len()
        );
        let prepared = ValuationSetup::new(&s.config, alone, &s.fits_projector).unwrap();
        let replay = PolicyReplay::new(
            &prepared.book,
            &prepared.prepared,
            &s.fits_projector,
            settings(&s.config),
        )
        .unwrap();
        let mut buffers = replay.buffers();
        let mut v = PolicyValues::default();
        replay.replay(0, &mut buffers, &mut v).unwrap();
        let segment_be = v.book.pv_expected;
        let mut sum = 0.0;
        for &scenario in &scenarios {
            replay.replay(scenario, &mut buffers, &mut v).unwrap();
            sum += v.book.pv_expected;
        }
        let expected = sum / scenarios.len() as f64 - segment_be;
        let got = figures["tvar_contribution"].as_f64().unwrap();
        assert!(
            (got - expected).abs() <= 1e-10 * segment_be,
            "{by} {name}: {got} against the segment alone {expected}"
        );
        let be_got = figures["best_estimate"].as_f64().unwrap();
        assert!((be_got - segment_be).abs() <= 1e-12 * segment_be);
    }
}

#[test]
fn a_replayed_scenario_gives_its_book_row() {
    let dir = tempfile::tempdir().unwrap();
    book_slice(&dir.path().join("book.csv"), 100, 400, "");
    let cfg = config(dir.path(), "book.csv", "", "");
    value(&cfg, None);
    let rows = book_rows(&dir.path().join("out/book.parquet"));
    let s = setup(&cfg);
    let book = Book::from_config(&s.config).unwrap().unwrap();
    let prepared = ValuationSetup::new(&s.config, book, &s.fits_projector).unwrap();
    let replay = PolicyReplay::new(
        &prepared.book,
        &prepared.prepared,
        &s.fits_projector,
        settings(&s.config),
    )
    .unwrap();
    let mut buffers = replay.buffers();
    let mut v = PolicyValues::default();
    for &(scenario, expected, simulated) in rows.iter().filter(|r| [0, 1, 57, 200].contains(&r.0)) {
        replay.replay(scenario, &mut buffers, &mut v).unwrap();
        // The book's totals, bit for bit.
        assert_eq!(
            v.book.pv_expected.to_bits(),
            expected.to_bits(),
            "scenario {scenario}"
        );
        if scenario != 0 {
            assert_eq!(
                v.book.pv_simulated.to_bits(),
                simulated.to_bits(),
                "scenario {scenario}"
            );
        }
        // The policies' values add up to them, to the rounding of the additions: the
        // book multiplies each block's summed amount once, the policies each their own.
        for (parts, total) in [(&v.expected, expected), (&v.simulated, v.book.pv_simulated)] {
            let sum: f64 = parts.iter().sum();
            let bound = 4.0
                * parts.len() as f64
                * f64::EPSILON
                * parts.iter().map(|x| x.abs()).sum::<f64>();
            assert!(
                (sum - total).abs() <= bound,
                "scenario {scenario}: {sum} against {total}"
            );
        }
    }
}

#[test]
fn allocation_does_not_depend_on_threads() {
    let dir = tempfile::tempdir().unwrap();
    book_slice(&dir.path().join("book.csv"), 0, 150, "");
    let cfg = config(dir.path(), "book.csv", "", "allocation = true");
    let one = value(&cfg, Some("1"));
    let first = std::fs::read(dir.path().join("out/allocation.parquet")).unwrap();
    let two = value(&cfg, Some("2"));
    let second = std::fs::read(dir.path().join("out/allocation.parquet")).unwrap();
    assert_eq!(one["allocation"], two["allocation"]);
    assert_eq!(first, second);
    assert_eq!(
        ids(&dir.path().join("out/allocation.parquet")).len(),
        2 * 150
    );
}

#[test]
fn marginal_capital_is_the_difference_of_separate_runs() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    book_slice(&d.join("book.csv"), 0, 300, "");
    book_slice(&d.join("tranche.csv"), 1000, 1080, "T");
    // The book and the tranche in one file, as the combined book.
    let tranche_text = std::fs::read_to_string(d.join("tranche.csv")).unwrap();
    let mut combined = std::fs::read_to_string(d.join("book.csv")).unwrap();
    combined.push_str(tranche_text.split_once('\n').unwrap().1);
    std::fs::write(d.join("combined.csv"), combined).unwrap();

    let with = value(
        &config(
            d,
            "book.csv",
            "candidate_book = \"tranche.csv\"",
            "allocation = true\ncost_of_capital_rate = 0.05",
        ),
        None,
    );
    let alone = value(&config(d, "tranche.csv", "", ""), None);
    let alone_cash = {
        let file = std::fs::File::open(d.join("out/cashflows.parquet")).unwrap();
        let mut cash = Vec::new();
        for batch in ParquetRecordBatchReaderBuilder::try_new(file)
            .unwrap()
            .build()
            .unwrap()
        {
            let batch = batch.unwrap();
            let s = batch.column(0);
            let s = s.as_any().downcast_ref::<UInt32Array>().unwrap();
            let e = batch.column(2);
            let e = e.as_any().downcast_ref::<Float64Array>().unwrap();
            cash.extend(
                (0..batch.num_rows())
                    .filter(|&i| s.value(i) == 0)
                    .map(|i| e.value(i)),
            );
        }
        cash
    };
    let together = value(&config(d, "combined.csv", "", ""), None);
    let tranche = &with["allocation"]["tranche"];
    assert_eq!(tranche["policies"], 80);
    assert_eq!(tranche["best_estimate"], alone["best_estimate"]);
    for measure in ["trend", "trend_idiosyncratic"] {
        for (i, t) in tranche[measure].as_array().unwrap().iter().enumerate() {
            let capital =
                |s: &serde_json::Value| s[measure]["tails"][i]["capital"].as_f64().unwrap();
            let tvar_capital = |s: &serde_json::Value| {
                s[measure]["tails"][i]["tvar"].as_f64().unwrap()
                    - s["best_estimate"].as_f64().unwrap()
            };
            // Same seed, same scenarios: the separate runs' figures exactly, but for the
            // last bit serde_json's float parsing may lose (it is not correctly rounded
            // without its `float_roundtrip` feature).
            // The figures are differences of PVs near the combined BE, so a bit lost there
            // is a bit of the BE's size.
            let scale = together["best_estimate"].as_f64().unwrap();
            let same = |a: f64, b: f64| {
                assert!(
                    (a - b).abs() <= 4.0 * f64::EPSILON * scale,
                    "{a} against {b}"
                );
            };
            let f = |key: &str| t[key].as_f64().unwrap();
            same(f("capital_alone"), capital(&alone));
            same(f("capital_book"), capital(&with));
            same(f("capital_combined"), capital(&together));
            same(f("marginal_capital"), capital(&together) - capital(&with));
            same(f("tvar_capital_alone"), tvar_capital(&alone));
            same(
                f("marginal_tvar_capital"),
                tvar_capital(&together) - tvar_capital(&with),
            );
            // Cost of capital: rate × marginal capital × Σ_t R_t v(t + 1), with R_t the
            // share of the tranche's central expected benefits paid from year t on and
            // v(t) = 1.03^−t (closed form of the flat 3 % rate).
            let total: f64 = alone_cash.iter().sum();
            let mut remaining = total;
            let mut annuity = 0.0;
            for (k, c) in alone_cash.iter().enumerate() {
                annuity += remaining / total * 1.03_f64.powi(-(k as i32 + 1));
                remaining -= c;
            }
            let marginal = t["marginal_capital"].as_f64().unwrap();
            let cost = t["cost_of_capital"].as_f64().unwrap();
            assert!((cost - 0.05 * marginal * annuity).abs() <= 1e-9 * cost.abs().max(1.0));
            assert!(
                (t["annual_cost_of_capital"].as_f64().unwrap() - 0.05 * marginal).abs()
                    <= 1e-9 * marginal.abs().max(1.0)
            );
            let premium = t["premium"].as_f64().unwrap();
            assert!((premium - alone["best_estimate"].as_f64().unwrap() - cost).abs() <= 1e-6);
        }
    }
}

#[test]
fn a_tranche_needs_the_allocation_and_new_ids() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    book_slice(&d.join("book.csv"), 0, 50, "");
    book_slice(&d.join("clash.csv"), 40, 60, "");
    let cfg = config(d, "book.csv", "candidate_book = \"clash.csv\"", "");
    let out = tailspan(&["check", cfg.to_str().unwrap()], None);
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("data.candidate_book") && err.contains("capital.allocation"),
        "{err}"
    );

    let cfg = config(
        d,
        "book.csv",
        "candidate_book = \"clash.csv\"",
        "allocation = true",
    );
    let out = tailspan(&["value", cfg.to_str().unwrap(), "--quiet"], None);
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("clash.csv") && err.contains("row 2") && err.contains("P0000"),
        "{err}"
    );
    assert!(!d.join("out/book.parquet").exists());
}

#[test]
fn a_tranche_leaves_no_file_behind() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    book_slice(&d.join("book.csv"), 0, 50, "");
    book_slice(&d.join("tranche.csv"), 1000, 1020, "T");
    // What a run killed while valuing the tranche would have left (no process holds it).
    std::fs::create_dir_all(d.join("out")).unwrap();
    std::fs::write(d.join("out/.tranche-alone.parquet.a1B2c3.partial"), b"torn").unwrap();
    let cfg = config(
        d,
        "book.csv",
        "candidate_book = \"tranche.csv\"",
        "allocation = true",
    );
    let summary = value(&cfg, None);
    assert_eq!(summary["allocation"]["tranche"]["policies"], 20);
    let left: Vec<String> = std::fs::read_dir(d.join("out"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.contains("tranche"))
        .collect();
    assert!(left.is_empty(), "{left:?}");
}
