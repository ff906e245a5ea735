//! Combining a sharded run's part files into the files and the summary a single run gives.
//!
//! A shard is a contiguous block of scenario numbers, so the whole run's rows are the parts'
//! rows in shard order. The parts carry every per-scenario figure the capital needs, but not
//! the figures of the central path under a stress or after a refit; those are recomputed from
//! the config with the same library code a single run uses, so the merged `summary.json` is
//! byte-identical to the single run's. The config, not a manifest written beside the parts,
//! is the source of truth: a merge checks each part's scenarios against the block the config
//! assigns to that shard, which catches gaps and overlaps, and each part must carry the run id
//! of the config (see `io::provenance`), which catches a part of another run (another seed,
//! say) even when its scenario block fits.

use std::collections::BTreeMap;
use std::ops::Range;
use std::path::{Path, PathBuf};
use std::sync::Arc;

use arrow_array::{Array, Float64Array, RecordBatch, UInt32Array};
use arrow_schema::Schema;
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;

use crate::data::config::Compression;
use crate::data::{Book, Config, Experience};
use crate::error::{Error, Result};
use crate::io::parquet::{ParquetSink, SCHEMA_KEY, STREAMED_ROWS_PER_GROUP};
use crate::io::provenance::{RUN_ID_KEY, retire_stale_records};
use crate::io::{AtomicFile, Provenance};
use crate::pipeline::{ProjectedFits, ValuationOutcome, ValuationSetup, summarize};
use crate::projection::engine::ROW_GROUP_ROWS;
use crate::projection::{Shard, scenario_ids};
use crate::risk::summary::RunSummary;
use crate::valuation::files::WrittenBook;

/// The kinds of part file a merge knows, in the order they are merged.
pub const STEMS: [&str; 6] = [
    "book",
    "cashflows",
    "lifetimes",
    "paths",
    "factors",
    "period",
];

/// The part files found in a folder: every kind present, all from one N-way split.
#[derive(Debug, Clone, PartialEq)]
pub struct PartSet {
    /// The folder holding the parts.
    pub folder: PathBuf,
    /// N, the number of shards.
    pub count: usize,
    /// The kinds present (each with all N parts), in [`STEMS`] order.
    pub stems: Vec<&'static str>,
}

impl PartSet {
    /// The path of part `index` (from 1) of `stem`.
    pub fn part(&self, stem: &str, index: usize) -> PathBuf {
        let shard = Shard {
            index,
            count: self.count,
        };
        self.folder.join(shard.file_name(stem))
    }
}

/// `(stem, K, N)` of a part file name `stem.part-K-of-N.parquet`.
fn parse_part_name(name: &str) -> Option<(&'static str, usize, usize)> {
    let rest = name.strip_suffix(".parquet")?;
    let (stem, rest) = rest.split_once(".part-")?;
    let stem = STEMS.into_iter().find(|s| *s == stem)?;
    let (k, n) = rest.split_once("-of-")?;
    Some((stem, k.parse().ok()?, n.parse().ok()?))
}

fn file_error(file: impl Into<PathBuf>, rule: impl Into<String>) -> Error {
    Error::File {
        file: file.into(),
        rule: rule.into(),
    }
}

/// Finds the part files in `folder` and checks that they form one complete split: one N
/// for every file, and parts 1..=N of every kind present. `book` parts must be there.
pub fn find_parts(folder: &Path) -> Result<PartSet> {
    let entries = std::fs::read_dir(folder).map_err(|e| Error::io(folder, e))?;
    let mut found: BTreeMap<(usize, &'static str), Vec<usize>> = BTreeMap::new();
    let mut first_name: Option<(String, usize)> = None;
    for entry in entries {
        let entry = entry.map_err(|e| Error::io(folder, e))?;
        let name = entry.file_name().to_string_lossy().into_owned();
        let Some((stem, k, n)) = parse_part_name(&name) else {
            continue;
        };
        if k == 0 || n == 0 || k > n {
            return Err(file_error(
                folder.join(&name),
                "a part file is named stem.part-K-of-N.parquet with 1 <= K <= N",
            ));
        }
        match &first_name {
            Some((other, count)) if *count != n => {
                return Err(file_error(
                    folder.join(&name),
                    format!(
                        "is one of {n} shards but {other} is one of {count}: the folder mixes \
                         runs split different ways"
                    ),
                ));
            }
            Some(_) => {}
            None => first_name = Some((name.clone(), n)),
        }
        found
            .entry((STEMS.iter().position(|s| *s == stem).unwrap_or(0), stem))
            .or_default()
            .push(k);
    }
    let Some((_, count)) = first_name else {
        return Err(file_error(
            folder,
            "holds no part files (book.part-K-of-N.parquet and the like) to merge",
        ));
    };
    let set = PartSet {
        folder: folder.to_path_buf(),
        count,
        stems: found.keys().map(|&(_, stem)| stem).collect(),
    };
    if !set.stems.contains(&"book") {
        return Err(file_error(
            set.part("book", 1),
            "is missing: a merge needs the book parts that `tailspan value --shard` writes",
        ));
    }
    for (&(_, stem), parts) in &found {
        for k in 1..=count {
            if !parts.contains(&k) {
                return Err(file_error(
                    set.part(stem, k),
                    format!("is missing: shard {k} of {count} of `{stem}` was not found"),
                ));
            }
        }
    }
    Ok(set)
}

/// Scenario numbers seen in one part, and whether they were in order.
struct Seen {
    first: Option<u32>,
    last: Option<u32>,
}

impl Seen {
    fn observe(&mut self, ids: &UInt32Array, path: &Path) -> Result<()> {
        for &id in ids.values().iter() {
            if let Some(last) = self.last
                && id < last
            {
                return Err(file_error(
                    path,
                    format!("scenario {id} follows scenario {last}: rows are out of order"),
                ));
            }
            self.first.get_or_insert(id);
            self.last = Some(id);
        }
        Ok(())
    }
}

/// The first 12 characters of a run id, enough to tell runs apart in a message.
fn short(run_id: &str) -> String {
    if run_id.is_empty() {
        "none".to_string()
    } else {
        run_id.chars().take(12).collect()
    }
}

fn shown(range: &Range<u64>) -> String {
    format!("{}..={}", range.start, range.end.saturating_sub(1))
}

/// Concatenates the parts of `stem` into `stem.parquet` (left uncommitted), checking that
/// part K holds exactly the scenarios `blocks[K-1]`; `each` sees every batch in order.
pub fn concat_parts(
    set: &PartSet,
    stem: &str,
    blocks: &[Range<u64>],
    compression: Compression,
    provenance: &Provenance,
    each: &mut dyn FnMut(&RecordBatch) -> Result<()>,
) -> Result<AtomicFile> {
    let rows_per_group = match stem {
        "paths" => ROW_GROUP_ROWS,
        "factors" | "period" => STREAMED_ROWS_PER_GROUP,
        _ => crate::valuation::files::rows_per_group(stem),
    };
    let mut sink: Option<ParquetSink> = None;
    let mut schema = None;
    for (k, block) in (1..=set.count).zip(blocks) {
        let path = set.part(stem, k);
        let parquet_error = |e: &dyn std::fmt::Display| Error::Parquet {
            path: path.clone(),
            message: e.to_string(),
        };
        let file = std::fs::File::open(&path).map_err(|e| Error::io(&path, e))?;
        let builder =
            ParquetRecordBatchReaderBuilder::try_new(file).map_err(|e| parquet_error(&e))?;
        // The columns only: the schema's metadata holds each file's key-value metadata,
        // which is checked on its own below and written afresh for the merged file.
        let part_schema = Arc::new(Schema::new(builder.schema().fields().clone()));
        let kv = |key: &str| {
            builder
                .metadata()
                .file_metadata()
                .key_value_metadata()
                .and_then(|kv| kv.iter().find(|k| k.key == key))
                .and_then(|k| k.value.clone())
        };
        let part_run = kv(RUN_ID_KEY).unwrap_or_default();
        if part_run != provenance.run_id {
            return Err(file_error(
                &path,
                format!(
                    "was written by another run (run id `{}`, this config's is `{}`): its \
                     seed, scenarios, inputs or version differ from the config's",
                    short(&part_run),
                    short(&provenance.run_id)
                ),
            ));
        }
        match &schema {
            None => schema = Some(part_schema.clone()),
            Some(s) if *s != part_schema => {
                return Err(file_error(
                    &path,
                    format!("has other columns than {}", set.part(stem, 1).display()),
                ));
            }
            Some(_) => {}
        }
        if sink.is_none() {
            let description = kv(SCHEMA_KEY).unwrap_or_default();
            sink = Some(ParquetSink::create(
                set.folder.join(format!("{stem}.parquet")),
                part_schema.clone(),
                compression,
                &description,
                provenance,
                rows_per_group,
            )?);
        }
        let Some(out) = sink.as_mut() else {
            continue;
        };
        let mut seen = Seen {
            first: None,
            last: None,
        };
        for batch in builder.build().map_err(|e| parquet_error(&e))? {
            let batch = batch.map_err(|e| parquet_error(&e))?;
            let ids = batch
                .column_by_name("scenario")
                .and_then(|c| c.as_any().downcast_ref::<UInt32Array>())
                .ok_or_else(|| file_error(&path, "has no UInt32 `scenario` column"))?;
            seen.observe(ids, &path)?;
            each(&batch)?;
            out.write(&batch)?;
        }
        let held = match (seen.first, seen.last) {
            (Some(a), Some(b)) => a as u64..b as u64 + 1,
            _ => 0..0,
        };
        if held != *block {
            let what = if held.is_empty() {
                "holds no scenarios".to_string()
            } else {
                format!("holds scenarios {}", shown(&held))
            };
            return Err(file_error(
                &path,
                format!(
                    "{what}, but shard {k} of {} of this config's run is scenarios {}: a gap, \
                     an overlap or a part of another run",
                    set.count,
                    shown(block)
                ),
            ));
        }
    }
    sink.ok_or_else(|| file_error(set.part(stem, 1), "is missing"))?
        .close()
}

/// Takes the central path's figures from `book.parquet` rows and counts the stochastic
/// scenarios; the capital figures read the stochastic PVs back from the merged file.
fn collect_book(outcome: &mut ValuationOutcome, batch: &RecordBatch, path: &Path) -> Result<()> {
    let column = |name: &str| {
        batch
            .column_by_name(name)
            .ok_or_else(|| file_error(path, format!("has no `{name}` column")))
    };
    let ids = column("scenario")?;
    let ids = ids.as_any().downcast_ref::<UInt32Array>();
    let expected = column("pv_expected")?;
    let expected = expected.as_any().downcast_ref::<Float64Array>();
    let simulated = column("pv_simulated")?;
    let simulated = simulated.as_any().downcast_ref::<Float64Array>();
    let (Some(ids), Some(expected), Some(simulated)) = (ids, expected, simulated) else {
        return Err(file_error(path, "has columns of the wrong type"));
    };
    for i in 0..batch.num_rows() {
        let pv_simulated = if simulated.is_null(i) {
            f64::NAN
        } else {
            simulated.value(i)
        };
        if ids.value(i) == 0 {
            let central = outcome.central.get_or_insert_with(Default::default);
            central.pv_expected = expected.value(i);
            central.pv_simulated = pv_simulated;
            continue;
        }
        outcome.stochastic += 1;
    }
    Ok(())
}

/// What a merge wrote.
#[derive(Debug)]
pub struct Merged {
    /// The part files found.
    pub parts: PartSet,
    /// The whole files written, in [`STEMS`] order.
    pub files: Vec<PathBuf>,
    /// The figures written to `summary.json`.
    pub summary: RunSummary,
}

/// Merges the parts in `folder` of the run `config` describes: writes `book.parquet` and
/// the other whole files beside them and returns the run's summary (the caller writes it).
/// Nothing is renamed into place unless every check and the summary succeed.
pub fn merge_folder(folder: &Path, config: &Config) -> Result<Merged> {
    crate::pipeline::models::refuse_sharded_models(config, true)?;
    let parts = find_parts(folder)?;
    let all = scenario_ids(config.projection.scenarios, config.projection.noise);
    let blocks = (1..=parts.count)
        .map(|index| {
            Shard {
                index,
                count: parts.count,
            }
            .range(all.clone())
        })
        .collect::<Result<Vec<_>>>()?;
    let compression = config.output.compression;
    let provenance = crate::pipeline::provenance(config)?;
    let mut outcome = ValuationOutcome::default();
    let mut pending = Vec::new();
    let mut files = Vec::new();
    for &stem in &parts.stems {
        let file = if stem == "book" {
            let path = parts.part("book", 1);
            let mut file = concat_parts(
                &parts,
                stem,
                &blocks,
                compression,
                &provenance,
                &mut |batch| collect_book(&mut outcome, batch, &path),
            )?;
            outcome.book = Some(WrittenBook::reopen(&mut file)?);
            file
        } else if stem == "paths" {
            // Paths cover only the scenarios `output.paths` names: each shard's share of them.
            let end = config.output.paths.end();
            let held: Vec<Range<u64>> = blocks
                .iter()
                .map(|b| match b.start..b.end.min(end) {
                    r if r.is_empty() => 0..0,
                    r => r,
                })
                .collect();
            concat_parts(&parts, stem, &held, compression, &provenance, &mut |_| {
                Ok(())
            })?
        } else {
            concat_parts(&parts, stem, &blocks, compression, &provenance, &mut |_| {
                Ok(())
            })?
        };
        pending.push(file);
        files.push(folder.join(format!("{stem}.parquet")));
    }
    let summary = summarize_config(config, &provenance, &outcome)?;
    retire_stale_records(folder, &provenance)?;
    for file in pending {
        file.commit()?;
    }
    Ok(Merged {
        parts,
        files,
        summary,
    })
}

/// The summary of the run `config` describes from its per-scenario figures, recomputing the
/// central-path figures (stress, one-year refits) as a single run does.
pub fn summarize_config(
    config: &Config,
    provenance: &Provenance,
    outcome: &ValuationOutcome,
) -> Result<RunSummary> {
    let experience = Experience::from_config(config)?;
    let book = Book::from_config(config)?
        .ok_or_else(|| Error::config(&config.file, "data.book", "a merge needs the run's book"))?;
    let fits = ProjectedFits::fit(config, &experience)?;
    let mut projector = fits.projector(config, &experience)?;
    let one_year = config.capital.one_year_scenarios as u64;
    // The central path and the scenarios the one-year refits and the decomposition follow.
    let decomposed = if config.basis.is_some() {
        (outcome
            .stochastic
            .min(crate::pipeline::DECOMPOSITION_SCENARIOS)) as u64
    } else {
        0
    };
    projector.prepare(0..one_year.max(decomposed) + 1)?;
    let setup = ValuationSetup::new(config, book, &projector)?;
    summarize(
        config,
        provenance,
        &fits,
        &experience,
        &setup,
        &projector,
        outcome,
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn part_names_parse() {
        assert_eq!(
            parse_part_name("book.part-2-of-4.parquet"),
            Some(("book", 2, 4))
        );
        assert_eq!(
            parse_part_name("paths.part-10-of-12.parquet"),
            Some(("paths", 10, 12))
        );
        assert_eq!(parse_part_name("book.parquet"), None);
        assert_eq!(parse_part_name("other.part-1-of-2.parquet"), None);
        assert_eq!(parse_part_name("book.part-x-of-2.parquet"), None);
    }

    #[test]
    fn missing_and_mixed_parts_are_named() {
        let dir = tempfile::tempdir().unwrap();
        let touch = |name: &str| std::fs::write(dir.path().join(name), b"").unwrap();
        let err = find_parts(dir.path()).unwrap_err().to_string();
        assert!(err.contains("no part files"), "{err}");
        touch("book.part-1-of-3.parquet");
        touch("book.part-3-of-3.parquet");
        let err = find_parts(dir.path()).unwrap_err().to_string();
        assert!(err.contains("book.part-2-of-3.parquet"), "{err}");
        touch("book.part-2-of-3.parquet");
        let set = find_parts(dir.path()).unwrap();
        assert_eq!((set.count, set.stems.clone()), (3, vec!["book"]));
        touch("cashflows.part-1-of-2.parquet");
        let err = find_parts(dir.path()).unwrap_err().to_string();
        assert!(err.contains("split different ways"), "{err}");
    }
}
