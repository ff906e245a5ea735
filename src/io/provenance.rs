//! What every output records about the run that wrote it, and how a folder is kept from
//! holding a record of one run beside data of another.
//!
//! A result is only useful if it can be traced to the inputs and the version that made it,
//! so every Parquet file (key-value metadata), every JSON file (a `run` block) and the report
//! carry the same [`Provenance`]. Its `run_id` is a digest of the tool version and of every
//! input's SHA-256 (the config included, so seed and scenario count are covered): two runs
//! with the same id produce the same bytes, so files of the same id may be mixed freely.
//!
//! Files are committed one at a time (see `io::atomic`), so a run that is killed part way
//! can leave new data files beside an older run's. The record files that describe other
//! files — `summary.json`, `hedge.json`, `report.html` — are therefore removed when they
//! carry another run's id, before the first data file of a run is committed
//! ([`retire_stale_records`]), and written only after the data files they describe. A record
//! present in a folder thus always describes data files of its own run.

use std::io::Read;
use std::path::Path;

use ::parquet::file::metadata::KeyValue;
use serde::Serialize;
use sha2::{Digest, Sha256};

use crate::error::{Error, Result};
use crate::io::hash::InputHash;

/// Key-value metadata key of the run id.
pub const RUN_ID_KEY: &str = "tailspan.run_id";
/// Key-value metadata key of the master seed.
pub const SEED_KEY: &str = "tailspan.seed";
/// Key-value metadata key of the number of stochastic scenarios.
pub const SCENARIOS_KEY: &str = "tailspan.scenarios";
/// Key-value metadata key of the config file's SHA-256.
pub const CONFIG_SHA256_KEY: &str = "tailspan.config_sha256";
/// Key-value metadata key of the inputs (a JSON array of `{role, path, sha256}`).
pub const INPUTS_KEY: &str = "tailspan.inputs";

/// The files that describe other files of a run, in the order they are checked.
pub const RECORD_FILES: [&str; 3] = ["summary.json", "hedge.json", "report.html"];

/// Name of the report's `<meta>` element that holds the run id.
pub const REPORT_META_NAME: &str = "tailspan-run-id";

/// The run an output came from.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Provenance {
    /// Always `tailspan`.
    pub tool: &'static str,
    /// Crate version.
    pub version: &'static str,
    /// SHA-256 of the version and of every input's role and SHA-256.
    pub run_id: String,
    /// Seed of every random stream.
    pub seed: u64,
    /// Stochastic scenarios of the run (scenario 0, the central path, comes on top; 0
    /// without noise).
    pub scenarios: usize,
    /// SHA-256 of the config file (also the first input).
    pub config_sha256: String,
    /// Every input file, the config first.
    pub inputs: Vec<InputHash>,
}

impl Provenance {
    /// The provenance of a run with `seed` and `scenarios` over `inputs` (the config first).
    pub fn new(seed: u64, scenarios: usize, inputs: Vec<InputHash>) -> Provenance {
        let mut digest = Sha256::new();
        digest.update(format!("tailspan {}\n", crate::VERSION).as_bytes());
        for input in &inputs {
            digest.update(format!("{} {}\n", input.role, input.sha256).as_bytes());
        }
        let run_id = digest
            .finalize()
            .iter()
            .map(|b| format!("{b:02x}"))
            .collect();
        let config_sha256 = inputs
            .iter()
            .find(|i| i.role == "config")
            .map(|i| i.sha256.clone())
            .unwrap_or_default();
        Provenance {
            tool: "tailspan",
            version: crate::VERSION,
            run_id,
            seed,
            scenarios,
            config_sha256,
            inputs,
        }
    }

    /// The Parquet key-value metadata entries (the version is written with the schema).
    pub fn key_values(&self) -> Vec<KeyValue> {
        let inputs = serde_json::to_string(&self.inputs).unwrap_or_default();
        [
            (RUN_ID_KEY, self.run_id.clone()),
            (SEED_KEY, self.seed.to_string()),
            (SCENARIOS_KEY, self.scenarios.to_string()),
            (CONFIG_SHA256_KEY, self.config_sha256.clone()),
            (INPUTS_KEY, inputs),
        ]
        .into_iter()
        .map(|(k, v)| KeyValue::new(k.to_string(), v))
        .collect()
    }
}

/// A JSON document with the run's provenance as its first key, `run`.
#[derive(Debug, Serialize)]
pub struct Recorded<'a, T: Serialize> {
    /// Where the document came from.
    pub run: &'a Provenance,
    /// The document's own keys.
    #[serde(flatten)]
    pub body: &'a T,
}

/// The run id a record file in `folder` carries: `Ok(None)` when the file is absent,
/// `Ok(Some(""))` when it is present but carries none (an older version's file).
pub fn record_run_id(folder: &Path, name: &str) -> Result<Option<String>> {
    let path = folder.join(name);
    let file = match std::fs::File::open(&path) {
        Ok(f) => f,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(None),
        Err(e) => return Err(Error::io(&path, e)),
    };
    if name.ends_with(".json") {
        let value: serde_json::Value =
            serde_json::from_reader(std::io::BufReader::new(file)).unwrap_or_default();
        let id = value["run"]["run_id"].as_str().unwrap_or_default();
        return Ok(Some(id.to_string()));
    }
    // The report names its run in a <meta> element near the top of its head.
    let mut bytes = Vec::new();
    file.take(4096)
        .read_to_end(&mut bytes)
        .map_err(|e| Error::io(&path, e))?;
    let head = String::from_utf8_lossy(&bytes);
    let marker = format!("<meta name=\"{REPORT_META_NAME}\" content=\"");
    let id = head
        .find(&marker)
        .map(|at| &head[at + marker.len()..])
        .and_then(|rest| rest.split('"').next())
        .unwrap_or_default();
    Ok(Some(id.to_string()))
}

/// Removes the record files in `folder` that describe another run than `own`, so that no
/// record is left beside the data files `own` is about to commit.
pub fn retire_stale_records(folder: &Path, own: &Provenance) -> Result<()> {
    for name in RECORD_FILES {
        match record_run_id(folder, name)? {
            Some(id) if id != own.run_id => {
                let path = folder.join(name);
                match std::fs::remove_file(&path) {
                    Ok(()) => {}
                    Err(e) if e.kind() == std::io::ErrorKind::NotFound => {}
                    Err(e) => return Err(Error::io(&path, e)),
                }
            }
            _ => {}
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn input(role: &'static str, sha: &str) -> InputHash {
        InputHash {
            role,
            path: format!("{role}.txt"),
            sha256: sha.to_string(),
        }
    }

    #[test]
    fn run_id_follows_the_inputs_not_their_paths() {
        let a = Provenance::new(
            1,
            10,
            vec![input("config", "aa"), input("experience", "bb")],
        );
        let mut moved = vec![input("config", "aa"), input("experience", "bb")];
        moved[1].path = "elsewhere/experience.csv".into();
        assert_eq!(a.run_id, Provenance::new(1, 10, moved).run_id);
        let b = Provenance::new(
            1,
            10,
            vec![input("config", "ab"), input("experience", "bb")],
        );
        assert_ne!(a.run_id, b.run_id);
        assert_eq!(a.config_sha256, "aa");
        assert_eq!(a.run_id.len(), 64);
    }

    #[test]
    fn records_of_another_run_are_retired() {
        let dir = tempfile::tempdir().unwrap();
        let own = Provenance::new(1, 10, vec![input("config", "aa")]);
        let other = Provenance::new(1, 10, vec![input("config", "ab")]);
        let json = |p: &Provenance| serde_json::json!({ "run": p }).to_string();
        std::fs::write(dir.path().join("summary.json"), json(&own)).unwrap();
        std::fs::write(dir.path().join("hedge.json"), json(&other)).unwrap();
        std::fs::write(
            dir.path().join("report.html"),
            format!(
                "<head><meta name=\"{REPORT_META_NAME}\" content=\"{}\" />",
                other.run_id
            ),
        )
        .unwrap();
        assert_eq!(
            record_run_id(dir.path(), "report.html").unwrap(),
            Some(other.run_id.clone())
        );
        retire_stale_records(dir.path(), &own).unwrap();
        assert!(dir.path().join("summary.json").exists());
        assert!(!dir.path().join("hedge.json").exists());
        assert!(!dir.path().join("report.html").exists());
        // A record without a run id (or unreadable) is another run's.
        std::fs::write(dir.path().join("summary.json"), "{}").unwrap();
        std::fs::write(dir.path().join("report.html"), [0xff, 0xfe, b'<']).unwrap();
        retire_stale_records(dir.path(), &own).unwrap();
        assert!(!dir.path().join("summary.json").exists());
        assert!(!dir.path().join("report.html").exists());
    }
}
