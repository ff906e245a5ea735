//! `fit.json` and `residuals.parquet` from a config and an in-memory experience.

use crate::models_support;

use std::path::Path;

use arrow_array::{Array, Float64Array, Int32Array, StringArray};
use models_support::*;
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;
use tailspan::cli::fit::fit_and_write;
use tailspan::data::{Config, Experience};
use tailspan::io::Provenance;

fn config(folder: &Path, model: &str, ages: [i32; 2]) -> Config {
    let text = format!(
        r#"
[data]
experience = "unused.csv"
ages = [{}, {}]
years = [2000, 2019]
sexes = ["F"]

[model]
{model}

[output]
folder = "{}"
"#,
        ages[0],
        ages[1],
        folder.display()
    );
    Config::parse(&text, Path::new("test.toml")).unwrap()
}

/// A provenance without input files: the config here is built in memory.
fn unrecorded() -> Provenance {
    Provenance::new(0, 0, Vec::new())
}

fn experience(file: &str) -> Experience {
    Experience {
        source: fixture(file),
        populations: vec![load_population(file)],
    }
}

#[test]
fn both_kinds_are_written_and_ranked() {
    let dir = tempfile::tempdir().unwrap();
    let config = config(dir.path(), r#"kind = ["lee-carter", "cbd"]"#, [60, 79]);
    let fits = fit_and_write(&config, &unrecorded(), &experience("small_experience.csv")).unwrap();
    assert_eq!(fits.fits.len(), 2);

    let doc: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("fit.json")).unwrap())
            .unwrap();
    let lc = &doc["fits"][0];
    assert_eq!(lc["model"], "lee-carter");
    assert_eq!(lc["method"], "poisson");
    assert_eq!(lc["sex"], "F");
    assert_eq!(lc["parameters"]["ax"].as_array().unwrap().len(), 20);
    assert_eq!(lc["parameter_count"], 58);
    let drift = lc["time_series"]["estimates"]["drift"][0].as_f64().unwrap();
    let kt = numbers(&lc["parameters"]["kt"]);
    assert!((drift - (kt[19] - kt[0]) / 19.0).abs() < 1e-12);
    let cbd = &doc["fits"][1];
    assert_eq!(cbd["model"], "cbd");
    assert_eq!(cbd["parameters"]["xbar"], 69.5);
    assert_eq!(cbd["parameters"]["k2"].as_array().unwrap().len(), 20);
    assert_eq!(
        cbd["time_series"]["estimates"]["covariance"]
            .as_array()
            .unwrap()
            .len(),
        2
    );
    let ranking = doc["ranking"].as_array().unwrap();
    assert_eq!(ranking.len(), 2);
    assert_eq!(ranking[0]["rank"], 1);
    assert!(ranking[0]["bic"].as_f64().unwrap() <= ranking[1]["bic"].as_f64().unwrap());

    let file = std::fs::File::open(dir.path().join("residuals.parquet")).unwrap();
    let reader = ParquetRecordBatchReaderBuilder::try_new(file)
        .unwrap()
        .build()
        .unwrap();
    let batches: Vec<_> = reader.map(|b| b.unwrap()).collect();
    let schema = batches[0].schema();
    let names: Vec<&str> = schema.fields().iter().map(|f| f.name().as_str()).collect();
    assert_eq!(names, ["model", "sex", "year", "age", "residual"]);
    let rows: usize = batches.iter().map(|b| b.num_rows()).sum();
    assert_eq!(rows, 2 * 400);
    let first = &batches[0];
    let col = |name: &str| first.column(schema.index_of(name).unwrap()).clone();
    let model = col("model");
    let model = model.as_any().downcast_ref::<StringArray>().unwrap();
    let year = col("year");
    let year = year.as_any().downcast_ref::<Int32Array>().unwrap();
    let age = col("age");
    let age = age.as_any().downcast_ref::<Int32Array>().unwrap();
    let residual = col("residual");
    let residual = residual.as_any().downcast_ref::<Float64Array>().unwrap();
    assert_eq!(
        (model.value(0), year.value(0), age.value(0)),
        ("lee-carter", 2000, 60)
    );
    assert_eq!((year.value(21), age.value(21)), (2001, 61));
    let expected = fits.fits[0].model.residuals()[(1, 1)];
    assert_eq!(residual.value(21), expected);
    let names: Vec<_> = std::fs::read_dir(dir.path()).unwrap().collect();
    assert_eq!(names.len(), 2, "no temporary files are left behind");
}

#[test]
fn ages_outside_the_experience_name_the_key_and_write_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let config = config(dir.path(), r#"kind = "cbd""#, [60, 85]);
    let err = fit_and_write(&config, &unrecorded(), &experience("small_experience.csv"))
        .unwrap_err()
        .to_string();
    assert!(err.contains("data.ages"), "{err}");
    assert!(err.contains("60-79"), "{err}");
    assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
}

#[test]
fn svd_on_zero_cells_fails_cleanly() {
    let dir = tempfile::tempdir().unwrap();
    let config = config(dir.path(), r#"fit = "svd""#, [60, 79]);
    let err = fit_and_write(&config, &unrecorded(), &experience("sparse_experience.csv"))
        .unwrap_err()
        .to_string();
    assert!(err.contains("poisson"), "{err}");
    assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
}

#[test]
fn one_kind_has_no_model_column_or_ranking() {
    let dir = tempfile::tempdir().unwrap();
    let config = config(dir.path(), r#"fit = "svd""#, [60, 79]);
    fit_and_write(&config, &unrecorded(), &experience("small_experience.csv")).unwrap();
    let doc: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("fit.json")).unwrap())
            .unwrap();
    assert!(doc.get("ranking").is_none());
    assert_eq!(doc["fits"][0]["method"], "svd");
    let file = std::fs::File::open(dir.path().join("residuals.parquet")).unwrap();
    let builder = ParquetRecordBatchReaderBuilder::try_new(file).unwrap();
    let names: Vec<String> = builder
        .schema()
        .fields()
        .iter()
        .map(|f| f.name().clone())
        .collect();
    assert_eq!(names, ["sex", "year", "age", "residual"]);
}
