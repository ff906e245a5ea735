//! Every output of `tailspan run` and `tailspan hedge` records the tool version, the seed,
//! the scenario count and the SHA-256 of the config and of every input, checked here against
//! digests computed independently from the files' bytes; no Parquet column holds a NaN or
//! an infinity; and `merge` refuses a part written by another run.

use std::collections::BTreeMap;
use std::path::Path;
use std::process::{Command, Output};

use arrow_array::{Array, Float32Array, Float64Array};
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;
use sha2::{Digest, Sha256};

/// The shipped swap-pricing example cut down, written to `dir/NAME` with output `dir/out`.
fn write_config(dir: &Path, name: &str, seed: u64, scenarios: usize) {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("configs");
    let text = std::fs::read_to_string(root.join("swap-pricing.toml"))
        .unwrap()
        .replace("scenarios = 4000", &format!("scenarios = {scenarios}"))
        .replace("seed = 20261202", &format!("seed = {seed}"))
        .replace("demo/", &format!("{}/demo/", root.display()))
        .replace("folder = \"out/swap-pricing\"", "folder = \"out\"")
        .replace("paths = false", "paths = true");
    std::fs::write(dir.join(name), text).unwrap();
}

fn tailspan(dir: &Path, args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_tailspan"))
        .args(args)
        .arg("--quiet")
        .current_dir(dir)
        .output()
        .unwrap()
}

fn ok(dir: &Path, args: &[&str]) {
    let out = tailspan(dir, args);
    assert!(
        out.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
}

/// Lower-case hexadecimal SHA-256 of a file's bytes (FIPS 180-4, via the sha2 crate).
fn sha256_of(path: &Path) -> String {
    let digest = Sha256::digest(std::fs::read(path).unwrap());
    digest.iter().map(|b| format!("{b:02x}")).collect()
}

/// The Parquet file's key-value metadata, after reading every value of every Float64
/// column and checking that none is NaN or infinite.
fn metadata_of_finite_file(path: &Path) -> BTreeMap<String, String> {
    let builder = ParquetRecordBatchReaderBuilder::try_new(std::fs::File::open(path).unwrap())
        .unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let kv = builder
        .metadata()
        .file_metadata()
        .key_value_metadata()
        .cloned()
        .unwrap_or_default()
        .into_iter()
        .map(|k| (k.key, k.value.unwrap_or_default()))
        .collect();
    let mut values = 0;
    for batch in builder.build().unwrap() {
        let batch = batch.unwrap();
        for (field, column) in batch.schema().fields().iter().zip(batch.columns()) {
            // paths.parquet holds q as a 32-bit float.
            let values64: Vec<Option<f64>> =
                if let Some(c) = column.as_any().downcast_ref::<Float64Array>() {
                    c.iter().collect()
                } else if let Some(c) = column.as_any().downcast_ref::<Float32Array>() {
                    c.iter().map(|v| v.map(f64::from)).collect()
                } else {
                    continue;
                };
            for (i, v) in values64.into_iter().enumerate() {
                if let Some(v) = v {
                    assert!(
                        v.is_finite(),
                        "{}: column {} row {i} holds {v}",
                        path.display(),
                        field.name()
                    );
                    values += 1;
                }
            }
        }
    }
    assert!(
        values > 0,
        "{} has no floating-point values",
        path.display()
    );
    kv
}

/// JSON keys whose value is null when the figure does not apply.
const OPTIONAL: [&str; 4] = [
    ".one_year",
    ".term_years",
    ".cohort_time_series",
    ".idiosyncratic_sd",
];

/// The paths of every null in `value`.
fn null_paths(value: &serde_json::Value, path: String, out: &mut Vec<String>) {
    match value {
        serde_json::Value::Null => out.push(path),
        serde_json::Value::Array(items) => {
            for (i, v) in items.iter().enumerate() {
                null_paths(v, format!("{path}[{i}]"), out);
            }
        }
        serde_json::Value::Object(map) => {
            for (k, v) in map {
                null_paths(v, format!("{path}.{k}"), out);
            }
        }
        _ => {}
    }
}

#[test]
fn every_output_records_version_seed_scenarios_and_input_hashes() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write_config(d, "run.toml", 4242, 30);
    ok(d, &["run", "run.toml"]);
    // Same config, same run: the hedge command's record sits beside the run's.
    ok(d, &["hedge", "run.toml"]);
    let out = d.join("out");

    // The inputs, hashed here from their bytes.
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("configs/demo");
    let expected: Vec<(&str, String)> = vec![
        ("config", sha256_of(&d.join("run.toml"))),
        ("experience", sha256_of(&root.join("experience.csv"))),
        ("book", sha256_of(&root.join("book.csv"))),
    ];
    // The run id as documented: SHA-256 of "tailspan VERSION\n" and one "ROLE SHA256\n"
    // line per input, in order.
    let mut digest = Sha256::new();
    digest.update(format!("tailspan {}\n", env!("CARGO_PKG_VERSION")));
    for (role, sha) in &expected {
        digest.update(format!("{role} {sha}\n"));
    }
    let run_id: String = digest
        .finalize()
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect();

    let check_inputs = |inputs: &serde_json::Value, file: &str| {
        let inputs = inputs.as_array().unwrap();
        assert_eq!(inputs.len(), expected.len(), "{file}");
        for (input, (role, sha)) in inputs.iter().zip(&expected) {
            assert_eq!(input["role"], *role, "{file}");
            assert_eq!(input["sha256"], sha.as_str(), "{file}: {role}");
            // The recorded path leads to the file hashed.
            let path = Path::new(input["path"].as_str().unwrap());
            assert_eq!(sha256_of(&d.join(path)), *sha, "{file}: {role} path");
        }
    };

    let mut parquet_files = 0;
    for entry in std::fs::read_dir(&out).unwrap() {
        let path = entry.unwrap().path();
        let name = path.file_name().unwrap().to_string_lossy().into_owned();
        if !name.ends_with(".parquet") {
            continue;
        }
        parquet_files += 1;
        let kv = metadata_of_finite_file(&path);
        assert_eq!(kv["tailspan.version"], env!("CARGO_PKG_VERSION"), "{name}");
        assert_eq!(kv["tailspan.run_id"], run_id, "{name}");
        assert_eq!(kv["tailspan.seed"], "4242", "{name}");
        assert_eq!(kv["tailspan.scenarios"], "30", "{name}");
        assert_eq!(kv["tailspan.config_sha256"], expected[0].1, "{name}");
        assert!(!kv["tailspan.schema"].is_empty(), "{name}");
        let inputs: serde_json::Value = serde_json::from_str(&kv["tailspan.inputs"]).unwrap();
        check_inputs(&inputs, &name);
    }
    // residuals, paths, factors, period, book, cashflows, lifetimes, hedge.
    assert_eq!(parquet_files, 8);

    for name in ["fit.json", "summary.json", "hedge.json"] {
        let doc: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(out.join(name)).unwrap()).unwrap();
        let run = &doc["run"];
        assert_eq!(run["version"], env!("CARGO_PKG_VERSION"), "{name}");
        assert_eq!(run["run_id"], run_id.as_str(), "{name}");
        assert_eq!(run["seed"], 4242, "{name}");
        assert_eq!(run["scenarios"], 30, "{name}");
        assert_eq!(run["config_sha256"], expected[0].1.as_str(), "{name}");
        check_inputs(&run["inputs"], name);
        // serde_json writes a NaN or an infinity as null: nulls may stand only where a
        // figure is optional by design.
        let mut nulls = Vec::new();
        null_paths(&doc, String::new(), &mut nulls);
        for path in nulls {
            assert!(
                OPTIONAL.iter().any(|o| path.ends_with(o)),
                "{name}: null at {path}"
            );
        }
    }

    let report = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(report.contains(&format!(
        "<meta name=\"tailspan-run-id\" content=\"{run_id}\" />"
    )));
    assert!(report.contains(&format!("<tr><th>Run id</th><td>{run_id}</td></tr>")));
    assert!(report.contains("<tr><th>Seed</th><td>4242</td></tr>"));
    for (_, sha) in &expected {
        assert!(report.contains(sha.as_str()), "report lacks {sha}");
    }
}

#[test]
fn a_different_seed_gives_another_run_id_and_merge_refuses_its_part() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write_config(d, "a.toml", 1, 12);
    write_config(d, "b.toml", 2, 12);
    ok(d, &["value", "a.toml", "--shard", "1/2"]);
    // Shard 2 of the run with another seed: the same scenario block, other numbers.
    ok(d, &["value", "b.toml", "--shard", "2/2"]);
    let failed = tailspan(d, &["merge", "--config", "a.toml"]);
    assert_eq!(failed.status.code(), Some(2));
    let err = String::from_utf8_lossy(&failed.stderr);
    assert!(
        err.contains("book.part-2-of-2.parquet") && err.contains("another run"),
        "{err}"
    );
    assert!(!d.join("out/book.parquet").exists(), "nothing merged");
    ok(d, &["value", "a.toml", "--shard", "2/2"]);
    ok(d, &["merge", "--config", "a.toml"]);
    assert!(d.join("out/summary.json").exists());
}
