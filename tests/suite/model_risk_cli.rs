//! Model risk: several kinds valued side by side in one run. Each model's figures equal a
//! run of that kind alone (common random numbers, bit for bit), the scenario files gain a
//! `model` column, the weights follow the BIC, and the mixture's quantiles agree with a
//! numpy recomputation.

use std::path::{Path, PathBuf};
use std::process::Command;

use arrow_array::{Array, Float64Array, RecordBatch, StringArray, UInt32Array};
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;
use serde_json::Value;
use tailspan::risk::model_average::Mixture;

/// The shipped swap-pricing example cut down to a few scenarios, with `kind` as given.
fn config(dir: &Path, name: &str, kind: &str) -> PathBuf {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("configs");
    let text = std::fs::read_to_string(root.join("swap-pricing.toml"))
        .unwrap()
        .replace("scenarios = 4000", "scenarios = 30")
        .replace("demo/", &format!("{}/demo/", root.display()))
        .replace(
            "folder = \"out/swap-pricing\"",
            &format!("folder = \"{name}\""),
        )
        .replace("paths = false", "paths = true")
        .replace("kind = \"lee-carter\"", &format!("kind = {kind}"))
        .replace(
            "[capital]\n",
            "[capital]\none_year = true\none_year_scenarios = 4\n",
        );
    let path = dir.join(format!("{name}.toml"));
    std::fs::write(&path, text).unwrap();
    path
}

fn tailspan(args: &[&str]) -> (i32, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_tailspan"))
        .args(args)
        .arg("--quiet")
        .output()
        .unwrap();
    let text =
        String::from_utf8_lossy(&out.stdout).into_owned() + &String::from_utf8_lossy(&out.stderr);
    (out.status.code().unwrap(), text)
}

fn batches(path: &Path) -> Vec<RecordBatch> {
    let file = std::fs::File::open(path).unwrap();
    ParquetRecordBatchReaderBuilder::try_new(file)
        .unwrap()
        .build()
        .unwrap()
        .map(|b| b.unwrap())
        .collect()
}

/// Every row of a file as text, each value by its debug form (bit-exact for floats),
/// with the `model` column split off.
fn rows(path: &Path) -> (Vec<String>, Vec<Option<String>>) {
    let (mut names, mut out) = (Vec::new(), Vec::new());
    for batch in batches(path) {
        let schema = batch.schema();
        let model = batch
            .column_by_name("model")
            .map(|c| c.as_any().downcast_ref::<StringArray>().unwrap().clone());
        for i in 0..batch.num_rows() {
            let mut row = String::new();
            for (f, c) in schema.fields().iter().zip(batch.columns()) {
                if f.name() == "model" {
                    continue;
                }
                // A column the single-kind file lacks is all null in the gathered file.
                if c.is_null(i) && f.name() == "m" {
                    continue;
                }
                let v = match c.as_any().downcast_ref::<Float64Array>() {
                    Some(x) if !x.is_null(i) => format!("{:?}", x.value(i).to_bits()),
                    _ => format!("{:?}", c.slice(i, 1)),
                };
                row.push_str(&v);
                row.push('|');
            }
            out.push(row);
            names.push(model.as_ref().map(|m| m.value(i).to_string()));
        }
    }
    (out, names)
}

fn json(path: &Path) -> Value {
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

#[test]
fn each_model_equals_its_own_run_and_the_weights_follow_the_bic() {
    let dir = tempfile::tempdir().unwrap();
    let both = config(dir.path(), "both", "[\"lee-carter\", \"cbd\"]");
    let cbd = config(dir.path(), "cbd", "\"cbd\"");
    let (code, text) = tailspan(&["run", both.to_str().unwrap()]);
    assert_eq!(code, 0, "{text}");
    assert!(text.contains("model risk"), "{text}");
    let (code, text) = tailspan(&["run", cbd.to_str().unwrap()]);
    assert_eq!(code, 0, "{text}");
    let out = |name: &str, file: &str| dir.path().join(name).join(file);

    for stem in [
        "book",
        "cashflows",
        "lifetimes",
        "factors",
        "period",
        "paths",
        "hedge",
    ] {
        let file = format!("{stem}.parquet");
        let (all, models) = rows(&out("both", &file));
        let (alone, none) = rows(&out("cbd", &file));
        assert!(none.iter().all(Option::is_none), "{stem}: no model column");
        let picked: Vec<String> = all
            .iter()
            .zip(&models)
            .filter(|(_, m)| m.as_deref() == Some("cbd"))
            .map(|(r, _)| r.clone())
            .collect();
        assert_eq!(picked, alone, "{stem}: cbd rows differ from a cbd run");
        let first = models.iter().position(|m| m.as_deref() == Some("cbd"));
        assert!(
            models[..first.unwrap()]
                .iter()
                .all(|m| m.as_deref() == Some("lee-carter")),
            "{stem}: lee-carter rows come first"
        );
    }

    // The report's model-risk section: the table names both models, the chart overlays
    // their distributions; a one-model report has no such section.
    let page = std::fs::read_to_string(out("both", "report.html")).unwrap();
    let section = &page[page.find("<section id=\"model-risk\">").unwrap()..];
    let section = &section[..section.find("</section>").unwrap()];
    for piece in [
        "<th>lee-carter</th>",
        "<th>cbd</th>",
        "<th>model average</th>",
        "<svg",
    ] {
        assert!(section.contains(piece), "{piece}");
    }
    let alone_page = std::fs::read_to_string(out("cbd", "report.html")).unwrap();
    assert!(!alone_page.contains("model-risk"));

    let summary = json(&out("both", "summary.json"));
    let alone = json(&out("cbd", "summary.json"));
    let models = summary["models"].as_array().unwrap();
    assert_eq!(models.len(), 2);
    assert_eq!(models[1]["model"], "cbd");
    for key in [
        "best_estimate",
        "trend",
        "trend_idiosyncratic",
        "standard_stress",
        "one_year",
        "hedges",
    ] {
        assert_eq!(models[1][key], alone[key], "{key}");
    }
    // The top-level figures stay the first kind's.
    assert_eq!(models[0]["best_estimate"], summary["best_estimate"]);
    assert!(alone.get("models").is_none() && alone.get("model_average").is_none());

    // BIC weights by hand: w ∝ exp(−(BIC − BIC_min)/2) on the BIC summed over sexes,
    // which is fit.json's per-sex BIC.
    let fit = json(&out("both", "fit.json"));
    let totals: Vec<f64> = models
        .iter()
        .map(|m| {
            let name = m["model"].as_str().unwrap();
            let per_sex: f64 = fit["fits"]
                .as_array()
                .unwrap()
                .iter()
                .filter(|f| f["model"] == name)
                .map(|f| f["bic"].as_f64().unwrap())
                .sum();
            assert!((m["bic"]["total"].as_f64().unwrap() - per_sex).abs() < 1e-9);
            per_sex
        })
        .collect();
    let least = totals[0].min(totals[1]);
    let raw: Vec<f64> = totals.iter().map(|b| (-(b - least) / 2.0).exp()).collect();
    for (m, r) in models.iter().zip(&raw) {
        let w = m["weight"].as_f64().unwrap();
        assert!((w - r / (raw[0] + raw[1])).abs() < 1e-12, "{w}");
    }
    let average = &summary["model_average"];
    assert_eq!(average["weights_from"], "bic");
    let be: Vec<f64> = models
        .iter()
        .map(|m| m["best_estimate"].as_f64().unwrap())
        .collect();
    let spread = average["best_estimate_spread"].as_f64().unwrap();
    assert_eq!(spread, (be[0] - be[1]).abs());

    // The hedges on the mixture, recomputed from the files: per model the book's PV with
    // deaths simulated and each contract's net value per scenario; VaR the smallest value
    // whose weighted empirical distribution functions reach the level (written out here).
    let weights: Vec<f64> = models
        .iter()
        .map(|m| m["weight"].as_f64().unwrap())
        .collect();
    let names = ["lee-carter", "cbd"];
    let pvs = samples(&out("both", "book.parquet"), "pv_simulated", &names);
    let var = |values: &[Vec<f64>], p: f64| -> f64 {
        let mut support: Vec<f64> = values.iter().flatten().copied().collect();
        support.sort_by(f64::total_cmp);
        let cdf = |v: f64| -> f64 {
            values
                .iter()
                .zip(&weights)
                .map(|(x, w)| w * (x.iter().filter(|&&y| y <= v).count() as f64 / x.len() as f64))
                .sum()
        };
        *support.iter().find(|&&v| cdf(v) >= p).unwrap()
    };
    let hedge = batches(&out("both", "hedge.parquet"));
    let mixed = average["hedges"].as_array().unwrap();
    assert_eq!(mixed.len(), 3);
    for (c, contract) in mixed.iter().enumerate() {
        let name = contract["contract"].as_str().unwrap();
        let nets: Vec<Vec<f64>> = names
            .iter()
            .map(|model| {
                let mut v = Vec::new();
                for b in &hedge {
                    let m = b.column_by_name("model").unwrap();
                    let m = m.as_any().downcast_ref::<StringArray>().unwrap();
                    let k = b.column_by_name("contract").unwrap();
                    let k = k.as_any().downcast_ref::<StringArray>().unwrap();
                    let n = b.column_by_name("net").unwrap();
                    let n = n.as_any().downcast_ref::<Float64Array>().unwrap();
                    v.extend(
                        (0..b.num_rows())
                            .filter(|&i| m.value(i) == *model && k.value(i) == name)
                            .map(|i| n.value(i)),
                    );
                }
                v
            })
            .collect();
        let hedged: Vec<Vec<f64>> = pvs
            .iter()
            .zip(&nets)
            .map(|(p, n)| p.iter().zip(n).map(|(p, n)| p - n).collect())
            .collect();
        let be_hedged: f64 = models
            .iter()
            .zip(&weights)
            .map(|(m, w)| {
                w * m["hedges"]["contracts"][c]["effectiveness"]["best_estimate_hedged"]
                    .as_f64()
                    .unwrap()
            })
            .sum();
        let tail = &contract["tails"][0];
        let level = tail["level"].as_f64().unwrap();
        assert_eq!(
            tail["var_unhedged"].as_f64().unwrap(),
            var(&pvs, level),
            "{name}"
        );
        assert_eq!(
            tail["var_hedged"].as_f64().unwrap(),
            var(&hedged, level),
            "{name}"
        );
        let capital = tail["capital_hedged"].as_f64().unwrap();
        assert!(
            (capital - (var(&hedged, level) - be_hedged)).abs() < 1e-6,
            "{name}"
        );
    }
}

#[test]
fn hedge_prices_every_kind_as_a_multi_model_run_does() {
    // `tailspan hedge` of two kinds against `run` of the same two (itself checked against
    // each kind alone and the mixture recomputed above): the same hedge rows with their
    // `model` column, each kind's prices and the mixture's.
    let dir = tempfile::tempdir().unwrap();
    let both = config(dir.path(), "both", "[\"lee-carter\", \"cbd\"]");
    let (code, text) = tailspan(&["run", both.to_str().unwrap()]);
    assert_eq!(code, 0, "{text}");
    let run_dir = dir.path().join("run-both");
    std::fs::rename(dir.path().join("both"), &run_dir).unwrap();
    // A killed run's staging folder (its lock free) goes; a live run's (held) stays.
    let hedge_dir = dir.path().join("both");
    let (abandoned, live) = (
        hedge_dir.join(".models-abandoned"),
        hedge_dir.join(".models-live"),
    );
    for folder in [&abandoned, &live] {
        std::fs::create_dir_all(folder.join("cbd")).unwrap();
        std::fs::write(folder.join("cbd").join("hedge.parquet"), b"part").unwrap();
        std::fs::write(folder.join(".owner"), b"").unwrap();
    }
    let held = std::fs::File::open(live.join(".owner")).unwrap();
    held.lock().unwrap();
    let (code, text) = tailspan(&["hedge", both.to_str().unwrap()]);
    assert_eq!(code, 0, "{text}");
    assert!(!abandoned.exists() && live.join("cbd").exists());
    drop(held);
    std::fs::remove_dir_all(&live).unwrap();
    for piece in [
        "lee-carter (weight",
        "cbd (weight",
        "model average (weights from bic)",
    ] {
        assert!(text.contains(piece), "{piece}: {text}");
    }
    assert_eq!(
        rows(&hedge_dir.join("hedge.parquet")),
        rows(&run_dir.join("hedge.parquet"))
    );
    let priced = json(&hedge_dir.join("hedge.json"));
    let summary = json(&run_dir.join("summary.json"));
    let (models, run_models) = (
        priced["models"].as_array().unwrap(),
        summary["models"].as_array().unwrap(),
    );
    assert_eq!(models.len(), 2);
    let average = priced["model_average"]["hedges"].as_array().unwrap();
    assert_eq!(average.len(), 3, "two swaps and a q-forward");
    for (m, r) in models.iter().zip(run_models) {
        assert_eq!(m["hedges"]["contracts"].as_array().unwrap().len(), 3);
        assert_eq!(m["model"], r["model"]);
        assert_eq!(m["weight"], r["weight"]);
        assert_eq!(m["hedges"], r["hedges"], "{}", m["model"]);
    }
    assert_eq!(
        priced["model_average"]["hedges"],
        summary["model_average"]["hedges"]
    );
    assert_eq!(priced["model_average"]["weights_from"], "bic");
    // Nothing of the staging is left beside the files.
    let left: Vec<_> = std::fs::read_dir(&hedge_dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert!(left.iter().all(|n| !n.starts_with(".models-")), "{left:?}");
}

#[test]
fn a_sharded_run_of_several_kinds_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let both = config(dir.path(), "both", "[\"lee-carter\", \"cbd\"]");
    for command in ["value", "project"] {
        let (code, text) = tailspan(&[command, both.to_str().unwrap(), "--shard", "1/2"]);
        assert_eq!(code, 2, "{text}");
        assert!(
            text.contains("model.kind") && text.contains("--shard"),
            "{text}"
        );
    }
    assert!(
        !dir.path()
            .join("both")
            .join("book.part-1-of-2.parquet")
            .exists()
    );
}

/// The PVs of `column` per model in `book.parquet` with a `model` column, central path
/// left out.
fn samples(path: &Path, column: &str, models: &[&str]) -> Vec<Vec<f64>> {
    let mut out = vec![Vec::new(); models.len()];
    for batch in batches(path) {
        let m = batch.column_by_name("model").unwrap();
        let m = m.as_any().downcast_ref::<StringArray>().unwrap();
        let s = batch.column_by_name("scenario").unwrap();
        let s = s.as_any().downcast_ref::<UInt32Array>().unwrap();
        let v = batch.column_by_name(column).unwrap();
        let v = v.as_any().downcast_ref::<Float64Array>().unwrap();
        for i in 0..batch.num_rows() {
            if s.value(i) != 0 {
                let k = models.iter().position(|x| *x == m.value(i)).unwrap();
                out[k].push(v.value(i));
            }
        }
    }
    out
}

#[test]
fn mixture_quantiles_match_numpy() {
    // Reference: tests/fixtures/model_average.py (numpy: the smallest PV at which the
    // weighted sum of the models' empirical distribution functions reaches p, and the
    // weighted mean beyond it) on a committed two-model book.parquet.
    let fixtures = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures");
    let expected = json(&fixtures.join("model_average.json"));
    let models: Vec<&str> = expected["models"]
        .as_array()
        .unwrap()
        .iter()
        .map(|m| m.as_str().unwrap())
        .collect();
    let book = fixtures.join("model_average_book.parquet");
    let cases = expected["cases"].as_array().unwrap();
    assert_eq!(cases.len(), 30);
    for case in cases {
        let column = case["column"].as_str().unwrap();
        let weights: Vec<f64> = case["weights"]
            .as_array()
            .unwrap()
            .iter()
            .map(|w| w.as_f64().unwrap())
            .collect();
        let mixture = Mixture::new(&weights, samples(&book, column, &models)).unwrap();
        let level = case["level"].as_f64().unwrap();
        let var = mixture.var(level);
        assert_eq!(var, case["var"].as_f64().unwrap(), "{case}");
        let tvar = case["tvar"].as_f64().unwrap();
        assert!(
            (mixture.tail_mean(var) - tvar).abs() <= 1e-9 * tvar,
            "{case}"
        );
    }
}

#[test]
fn on_the_demo_a_cohort_model_ranks_first_and_renshaw_haberman_converges() {
    // The demo population carries an invented cohort band (see `synth`): a cohort model
    // must beat the period-only ones by BIC for each sex, and the Renshaw–Haberman fit
    // with a free age loading (the default) must converge (a fit that does not is an
    // error, exit 2).
    let dir = tempfile::tempdir().unwrap();
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("configs/demo");
    let config = dir.path().join("fit.toml");
    std::fs::write(
        &config,
        format!(
            "[data]\nexperience = \"{}\"\nages = [55, 100]\nyears = [1975, 2024]\n\n\
             [model]\nkind = [\"lee-carter\", \"cbd\", \"apc\", \"renshaw-haberman\"]\n\
             max_age = 120\n\n[output]\nfolder = \"out\"\n",
            root.join("experience.csv").display()
        ),
    )
    .unwrap();
    let (code, text) = tailspan(&["fit", config.to_str().unwrap()]);
    assert_eq!(code, 0, "{text}");
    let fit = json(&dir.path().join("out/fit.json"));
    let fits = fit["fits"].as_array().unwrap();
    for sex in ["F", "M"] {
        let of_sex: Vec<&Value> = fits.iter().filter(|f| f["sex"] == sex).collect();
        assert_eq!(of_sex.len(), 4, "{sex}");
        let best = of_sex
            .iter()
            .min_by(|a, b| {
                a["bic"]
                    .as_f64()
                    .unwrap()
                    .total_cmp(&b["bic"].as_f64().unwrap())
            })
            .unwrap();
        let name = best["model"].as_str().unwrap();
        assert!(
            ["apc", "renshaw-haberman"].contains(&name),
            "{sex}: {name} ranks first"
        );
        assert!(
            of_sex.iter().any(|f| f["model"] == "renshaw-haberman"),
            "{sex}: Renshaw–Haberman fitted"
        );
    }
}
