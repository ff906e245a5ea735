//! `tailspan run` end to end on a reduced demo: every output exists, parses and agrees
//! with the others, and the printed figures are those of summary.json and the report.

use std::path::{Path, PathBuf};
use std::process::Command;

use arrow_array::{Array, Float64Array, StringArray, UInt32Array};
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;

/// The `contract` and `scenario` columns of `hedge.parquet`.
fn labels(path: &Path) -> (Vec<String>, Vec<u32>) {
    let file = std::fs::File::open(path).unwrap();
    let (mut names, mut ids) = (Vec::new(), Vec::new());
    for batch in ParquetRecordBatchReaderBuilder::try_new(file)
        .unwrap()
        .build()
        .unwrap()
    {
        let batch = batch.unwrap();
        let c = batch.column_by_name("contract").unwrap();
        let c = c.as_any().downcast_ref::<StringArray>().unwrap();
        names.extend(c.iter().map(|v| v.unwrap().to_string()));
        let s = batch.column_by_name("scenario").unwrap();
        let s = s.as_any().downcast_ref::<UInt32Array>().unwrap();
        ids.extend(s.values().iter().copied());
    }
    (names, ids)
}

fn config(dir: &Path) -> PathBuf {
    // The shipped swap-pricing example, cut down to a few scenarios.
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("configs");
    let text = std::fs::read_to_string(root.join("swap-pricing.toml"))
        .unwrap()
        .replace("scenarios = 4000", "scenarios = 80")
        .replace("demo/", &format!("{}/demo/", root.display()))
        .replace("folder = \"out/swap-pricing\"", "folder = \"out\"")
        .replace("paths = false", "paths = true")
        .replace(
            "[capital]\n",
            "[capital]\none_year = true\none_year_scenarios = 6\n",
        );
    let path = dir.join("run.toml");
    std::fs::write(&path, text).unwrap();
    path
}

fn column(path: &Path, name: &str) -> Vec<f64> {
    let file = std::fs::File::open(path).unwrap();
    let builder = ParquetRecordBatchReaderBuilder::try_new(file).unwrap();
    let index = builder.schema().index_of(name).unwrap();
    let mut values = Vec::new();
    for batch in builder.build().unwrap() {
        let batch = batch.unwrap();
        let c = batch.column(index);
        let c = c.as_any().downcast_ref::<Float64Array>().unwrap();
        values.extend((0..c.len()).map(|i| c.value(i)));
    }
    values
}

fn quantile7(values: &[f64], p: f64) -> f64 {
    // Hyndman–Fan type 7 (numpy's default), written out independently.
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    let h = (v.len() - 1) as f64 * p;
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(v.len() - 1);
    v[lo] + (h - lo as f64) * (v[hi] - v[lo])
}

/// Whole currency units with thousands separators, as printed.
fn grouped(x: f64) -> String {
    let digits = format!("{:.0}", x.abs());
    let mut out = String::new();
    for (i, c) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i) % 3 == 0 {
            out.push(',');
        }
        out.push(c);
    }
    if x < 0.0 { format!("-{out}") } else { out }
}

#[test]
fn run_writes_every_output_and_they_agree() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = config(dir.path());
    let output = Command::new(env!("CARGO_BIN_EXE_tailspan"))
        .args(["run", cfg.to_str().unwrap(), "--quiet"])
        .output()
        .unwrap();
    assert!(
        output.status.success(),
        "{}",
        String::from_utf8_lossy(&output.stderr)
    );
    let printed = String::from_utf8(output.stdout).unwrap();
    let out = dir.path().join("out");
    for f in [
        "fit.json",
        "residuals.parquet",
        "paths.parquet",
        "factors.parquet",
        "period.parquet",
        "book.parquet",
        "cashflows.parquet",
        "lifetimes.parquet",
        "hedge.parquet",
        "summary.json",
        "report.html",
    ] {
        assert!(out.join(f).exists(), "{f} missing");
    }
    let leftovers: Vec<_> = std::fs::read_dir(&out)
        .unwrap()
        .filter_map(|e| e.ok())
        .filter(|e| e.file_name().to_string_lossy().ends_with(".partial"))
        .collect();
    assert!(leftovers.is_empty(), "temporary files left behind");
    // Files streamed over the whole run gather it into large row groups (their pages wait
    // on disk), so the footer does not grow with the scenario count: 80 scenarios are one
    // group. Only paths.parquet is cut a group per chunk of scenarios.
    for f in [
        "factors",
        "period",
        "book",
        "cashflows",
        "lifetimes",
        "hedge",
    ] {
        let file = std::fs::File::open(out.join(format!("{f}.parquet"))).unwrap();
        let groups = ParquetRecordBatchReaderBuilder::try_new(file)
            .unwrap()
            .metadata()
            .num_row_groups();
        assert_eq!(groups, 1, "{f}.parquet has {groups} row groups");
    }

    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    let simulated = column(&out.join("book.parquet"), "pv_simulated");
    let var = summary["trend_idiosyncratic"]["tails"][0]["var"]
        .as_f64()
        .unwrap();
    let ours = quantile7(&simulated[1..], 0.995);
    assert!((var - ours).abs() <= 1e-9 * ours, "{var} vs {ours}");

    // The figures printed are those of summary.json, and the report shows them too.
    let report = std::fs::read_to_string(out.join("report.html")).unwrap();
    let be = summary["best_estimate"].as_f64().unwrap();
    let capital = summary["trend_idiosyncratic"]["tails"][0]["capital"]
        .as_f64()
        .unwrap();
    let stress = summary["standard_stress"]["capital"].as_f64().unwrap();
    let one_year = summary["one_year"]["capital"].as_f64().unwrap();
    for figure in [be, var, capital, stress, one_year] {
        let text = grouped(figure);
        assert!(printed.contains(&text), "{text} not printed:\n{printed}");
        assert!(report.contains(&text), "{text} not in the report");
    }
    assert!(summary["hedges"]["contracts"].as_array().unwrap().len() == 3);

    // Every chart is well-formed SVG.
    let mut charts = 0;
    let mut rest = report.as_str();
    while let Some(start) = rest.find("<svg") {
        let end = rest[start..].find("</svg>").unwrap() + start + "</svg>".len();
        roxmltree::Document::parse(&rest[start..end]).expect("well-formed SVG");
        charts += 1;
        rest = &rest[end..];
    }
    // PV histogram, two e65 fans, six q fans, lifetime charts, two residual maps at least.
    assert!(charts >= 10, "only {charts} charts");
}

#[test]
fn hedge_prices_the_contracts_and_needs_a_hedge_section() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = config(dir.path());
    let output = Command::new(env!("CARGO_BIN_EXE_tailspan"))
        .args(["hedge", cfg.to_str().unwrap(), "--quiet"])
        .output()
        .unwrap();
    assert!(
        output.status.success(),
        "{}",
        String::from_utf8_lossy(&output.stderr)
    );
    let out = dir.path().join("out");
    assert!(out.join("hedge.parquet").exists() && out.join("hedge.json").exists());
    assert!(
        !out.join("book.parquet").exists(),
        "hedge writes only the hedge results"
    );
    // Three contracts × 80 scenarios, contract by contract in config order, each over
    // scenarios 1..=80, and each contract's net averaging to hedge.json's mean.
    let hedge = out.join("hedge.parquet");
    let net = column(&hedge, "net");
    assert_eq!(net.len(), 240);
    let (contracts, scenarios) = labels(&hedge);
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("hedge.json")).unwrap()).unwrap();
    let listed = json["contracts"].as_array().unwrap();
    assert_eq!(listed.len(), 3);
    for (i, c) in listed.iter().enumerate() {
        let rows = i * 80..(i + 1) * 80;
        assert!(
            contracts[rows.clone()]
                .iter()
                .all(|n| n == c["name"].as_str().unwrap())
        );
        assert_eq!(scenarios[rows.clone()], (1..=80).collect::<Vec<u32>>()[..]);
        let mean = net[rows].iter().sum::<f64>() / 80.0;
        let expected = c["net"]["mean"].as_f64().unwrap();
        assert!(
            (mean - expected).abs() <= 1e-9 * expected.abs().max(1.0),
            "{}: {mean} against {expected}",
            c["name"]
        );
    }

    let text = std::fs::read_to_string(&cfg).unwrap();
    let cut = text.find("[hedge]").unwrap();
    let end = text.find("[output]").unwrap();
    std::fs::write(&cfg, format!("{}{}", &text[..cut], &text[end..])).unwrap();
    let output = Command::new(env!("CARGO_BIN_EXE_tailspan"))
        .args(["hedge", cfg.to_str().unwrap(), "--quiet"])
        .output()
        .unwrap();
    assert_eq!(output.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&output.stderr).contains("hedge"));
}
