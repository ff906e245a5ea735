//! Several model kinds valued side by side, and the view across them.
//!
//! Model risk is read off by comparing models on the same footing, so every listed kind
//! goes through the single-model stages unchanged: fitted, projected and valued with the
//! config's seed. Common random numbers need nothing more: every draw comes from a stream
//! keyed by (seed, scenario, purpose), never by the model, so scenario i of every model
//! takes the same innovations, drift and individual-death draws as far as the models'
//! dimensions agree, and each model's figures are those of a run of that kind alone, bit
//! for bit. Each kind writes its files into a staging folder of its own inside the output
//! folder; they are then gathered into the run's files with a leading `model` column
//! (`io::model_column`), and the staging folder goes.

use std::fs::File;
use std::path::{Path, PathBuf};

use tempfile::TempDir;

use crate::data::Config;
use crate::data::config::ModelKind;
use crate::error::{Error, Result};
use crate::hedge::{BookSample, HedgeResults};
use crate::io::model_column::{ModelPart, gather_models};
use crate::io::parquet::{DEFAULT_ROWS_PER_GROUP, STREAMED_ROWS_PER_GROUP};
use crate::io::{AtomicFile, Provenance};
use crate::pipeline::{ProjectedFits, ValuationOutcome};
use crate::projection::OutputOptions;
use crate::projection::engine::ROW_GROUP_ROWS;
use crate::risk::model_average::{
    HedgedSample, Mixture, MixtureFigures, MixtureHedge, ModelAverage, ModelFigures, bic_weights,
    normalized,
};
use crate::risk::order::Sample;
use crate::risk::summary::RunSummary;

/// The file in a staging folder that its run holds locked while it lives.
const OWNER_LOCK: &str = ".owner";

/// Where each kind of a multi-model run writes its own files before they are gathered.
#[derive(Debug)]
pub struct Staging {
    /// Held locked until the run drops the folder (declared first: closed before the
    /// folder is removed); none where the file system cannot lock.
    _owner: Option<File>,
    dir: TempDir,
}

impl Staging {
    /// A staging folder in the config's output folder when it lists several kinds; none
    /// for one kind, whose files go straight to the output folder.
    pub fn for_config(config: &Config) -> Result<Option<Staging>> {
        if config.model.kinds().len() < 2 {
            return Ok(None);
        }
        let folder = config.output_folder();
        std::fs::create_dir_all(&folder).map_err(|e| Error::io(&folder, e))?;
        retire_abandoned(&folder);
        let dir = tempfile::Builder::new()
            .prefix(STAGING_PREFIX)
            .tempdir_in(&folder)
            .map_err(|e| Error::io(&folder, e))?;
        Ok(Some(Staging {
            _owner: take_ownership(dir.path()),
            dir,
        }))
    }

    /// The folder of `kind`'s own files.
    pub fn folder(&self, kind: ModelKind) -> PathBuf {
        self.dir.path().join(kind.name())
    }
}

/// Locks the owner file of the staging folder `dir`. It is locked under another name and
/// then renamed, so a run looking for abandoned folders never finds it unlocked; where
/// the file system cannot lock, the folder gets no owner file and is never taken for
/// abandoned (a killed run's then stays, as before).
fn take_ownership(dir: &Path) -> Option<File> {
    let taking = dir.join(".owner-taking");
    let owner = File::create(&taking).ok()?;
    if owner.lock().is_err() {
        let _ = std::fs::remove_file(&taking);
        return None;
    }
    std::fs::rename(&taking, dir.join(OWNER_LOCK)).ok()?;
    Some(owner)
}

/// Name prefix of the staging folders.
const STAGING_PREFIX: &str = ".models-";

/// Removes the staging folders in `folder` that no live run owns: those a killed run
/// left (its lock went with its process). A folder whose lock is held, or that has no
/// lock file yet, is left alone; so is anything that cannot be read or removed.
fn retire_abandoned(folder: &Path) {
    let Ok(entries) = std::fs::read_dir(folder) else {
        return;
    };
    for entry in entries.flatten() {
        if !entry
            .file_name()
            .to_string_lossy()
            .starts_with(STAGING_PREFIX)
        {
            continue;
        }
        let path = entry.path();
        let Ok(lock) = File::open(path.join(OWNER_LOCK)) else {
            continue;
        };
        if lock.try_lock().is_ok() {
            drop(lock);
            let _ = std::fs::remove_dir_all(&path);
        }
    }
}

/// `base` with `kind`'s staging folder when there is one.
pub fn model_options(
    base: &OutputOptions,
    staging: Option<&Staging>,
    kind: ModelKind,
) -> OutputOptions {
    match staging {
        Some(s) => OutputOptions {
            folder: s.folder(kind),
            ..base.clone()
        },
        None => base.clone(),
    }
}

/// Refuses a sharded run of several kinds: a shard's rows would interleave the models'
/// scenario blocks, which `merge` cannot put back in order.
pub fn refuse_sharded_models(config: &Config, sharded: bool) -> Result<()> {
    if sharded && config.model.kinds().len() > 1 {
        return Err(Error::config(
            &config.file,
            "model.kind",
            "lists several kinds, and a sharded run (or its merge) values one: list one kind \
             per sharded run, or run without --shard",
        ));
    }
    Ok(())
}

/// One kind's files, ready to be gathered: committed projection files in its staging
/// folder, and uncommitted valuation or hedge files.
#[derive(Default)]
pub struct ModelFiles {
    /// The kind's name, written in the `model` column.
    pub model: &'static str,
    /// Files written and committed (in the staging folder).
    pub written: Vec<PathBuf>,
    /// Files closed but not committed.
    pub pending: Vec<AtomicFile>,
}

/// Rows per row group of a gathered file, as its single-model writer sets them.
fn rows_per_group(stem: &str) -> usize {
    match stem {
        "paths" => ROW_GROUP_ROWS,
        "factors" | "period" => STREAMED_ROWS_PER_GROUP,
        "hedge" => DEFAULT_ROWS_PER_GROUP,
        _ => crate::valuation::files::rows_per_group(stem),
    }
}

fn stem_of(path: &Path) -> String {
    path.file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default()
}

/// Gathers the kinds' files into the output folder, one file per stem with a `model`
/// column, the kinds in the order given; returns them uncommitted. Every kind must have
/// written the same files.
pub fn gather_model_files(
    config: &Config,
    provenance: &Provenance,
    models: Vec<ModelFiles>,
) -> Result<Vec<AtomicFile>> {
    let stems: Vec<String> = match models.first() {
        Some(m) => m
            .written
            .iter()
            .map(|p| stem_of(p))
            .chain(m.pending.iter().map(|f| stem_of(f.target())))
            .collect(),
        None => return Ok(Vec::new()),
    };
    let mut models = models;
    let mut gathered = Vec::new();
    for stem in &stems {
        let mut parts = Vec::new();
        for m in &mut models {
            let (file, path) = if let Some(p) = m.written.iter().find(|p| stem_of(p) == *stem) {
                (
                    std::fs::File::open(p).map_err(|e| Error::io(p, e))?,
                    p.clone(),
                )
            } else if let Some(f) = m.pending.iter_mut().find(|f| stem_of(f.target()) == *stem) {
                (f.reopen()?, f.target().to_path_buf())
            } else {
                return Err(Error::model(
                    m.model,
                    format!("wrote no `{stem}.parquet` where the first model did"),
                ));
            };
            parts.push(ModelPart {
                model: m.model,
                file,
                path,
            });
        }
        let target = config.output_folder().join(format!("{stem}.parquet"));
        gathered.push(gather_models(
            &target,
            parts,
            config.output.compression,
            provenance,
            rows_per_group(stem),
        )?);
    }
    Ok(gathered)
}

/// One valued kind: its fits, its valuation and its one-model summary.
pub struct ValuedModel<'a> {
    /// The kind's fits per sex.
    pub fits: &'a ProjectedFits,
    /// Its valuation (with its `book.parquet` still readable).
    pub outcome: &'a ValuationOutcome,
    /// Its figures as a run of this kind alone gives them.
    pub summary: &'a RunSummary,
    /// Its hedges' per-scenario values, when hedges were priced.
    pub hedges: Option<&'a HedgeResults>,
}

/// Every stochastic PV of `column` in the kind's book, or the central path's when there
/// are none (as the one-model summary does).
fn pvs(valued: &ValuedModel<'_>, column: &'static str) -> Result<Vec<f64>> {
    if valued.outcome.stochastic == 0 {
        let central = valued.outcome.central.as_ref().ok_or_else(|| {
            Error::model("valuation", "the central path (scenario 0) was not valued")
        })?;
        let v = match column {
            "pv_expected" => central.pv_expected,
            _ => central.pv_simulated,
        };
        return Ok(vec![v]);
    }
    let book =
        valued.outcome.book.as_ref().ok_or_else(|| {
            Error::model("valuation", "book.parquet was not kept for the summary")
        })?;
    let mut values = Vec::with_capacity(valued.outcome.stochastic);
    book.column(column).pass(&mut |x| values.push(x))?;
    Ok(values)
}

/// Each kind's fit quality, weight and figures, and the weighted mixture of their PV
/// distributions: BIC weights (BIC summed over sexes) unless `model.weights` gives them.
pub fn compare_models(
    config: &Config,
    models: &[ValuedModel<'_>],
) -> Result<(Vec<ModelFigures>, ModelAverage)> {
    let fits: Vec<&ProjectedFits> = models.iter().map(|m| m.fits).collect();
    let ModelWeights {
        bic_by_sex,
        weights,
        from: weights_from,
    } = model_weights(config, &fits);
    let figures: Vec<ModelFigures> = models
        .iter()
        .zip(&bic_by_sex)
        .zip(&weights)
        .map(|((m, bic), &w)| ModelFigures::new(m.summary, bic, w))
        .collect();
    let best: Vec<f64> = models.iter().map(|m| m.summary.best_estimate).collect();
    let best_estimate: f64 = best.iter().zip(&weights).map(|(b, w)| b * w).sum();
    let spread = best.iter().copied().fold(f64::NEG_INFINITY, f64::max)
        - best.iter().copied().fold(f64::INFINITY, f64::min);
    let levels = &config.capital.levels;
    let mixture = |column| -> Result<MixtureFigures> {
        let samples = models
            .iter()
            .map(|m| pvs(m, column))
            .collect::<Result<Vec<_>>>()?;
        let mixture = Mixture::new(&weights, samples)?;
        Ok(MixtureFigures::new(&mixture, best_estimate, levels))
    };
    let trend = mixture("pv_expected")?;
    let trend_idiosyncratic = config
        .valuation
        .idiosyncratic
        .then(|| mixture("pv_simulated"))
        .transpose()?;
    let priced: Option<Vec<_>> = models
        .iter()
        .map(|m| m.hedges.zip(m.outcome.hedge_sample.as_ref()))
        .collect();
    let hedges = priced
        .map(|priced| mixture_hedges(&priced, &weights, levels))
        .transpose()?
        .flatten();
    Ok((
        figures,
        ModelAverage {
            weights_from,
            best_estimate,
            best_estimate_spread: spread,
            trend,
            trend_idiosyncratic,
            hedges,
        },
    ))
}

/// The kinds' weights in the model average.
pub struct ModelWeights<'f> {
    /// Each kind's BIC by sex code.
    pub bic_by_sex: Vec<Vec<(&'f str, f64)>>,
    /// Each kind's weight (they sum to 1).
    pub weights: Vec<f64>,
    /// Where the weights came from: "config" (`model.weights`) or "bic".
    pub from: &'static str,
}

/// Each kind's weight in the model average: `model.weights` when given, else BIC weights
/// on the BIC summed over sexes.
pub fn model_weights<'f>(config: &Config, fits: &[&'f ProjectedFits]) -> ModelWeights<'f> {
    let bic_by_sex: Vec<Vec<(&str, f64)>> = fits
        .iter()
        .map(|f| {
            f.fits
                .iter()
                .map(|(sex, fit)| (sex.code(), fit.diagnostics().bic))
                .collect()
        })
        .collect();
    let totals: Vec<f64> = bic_by_sex
        .iter()
        .map(|b| b.iter().map(|(_, x)| x).sum())
        .collect();
    let (weights, weights_from) = match &config.model.weights {
        Some(w) => (normalized(w), "config"),
        None => (bic_weights(&totals), "bic"),
    };
    ModelWeights {
        bic_by_sex,
        weights,
        from: weights_from,
    }
}

/// Each hedge on the mixture of the kinds' distributions: per kind, its hedges' values
/// and the book's PV sample they were valued on.
pub fn mixture_hedges(
    priced: &[(&HedgeResults, &BookSample)],
    weights: &[f64],
    levels: &[f64],
) -> Result<Option<Vec<MixtureHedge>>> {
    let Some((first, _)) = priced.first() else {
        return Ok(None);
    };
    first
        .values
        .iter()
        .enumerate()
        .map(|(c, (name, _))| {
            let samples = priced
                .iter()
                .map(|(h, sample)| {
                    let legs = match h.values.get(c) {
                        Some((n, legs)) if n == name => legs,
                        _ => {
                            return Err(Error::model(
                                "hedge",
                                format!("contract `{name}` was not priced under every model"),
                            ));
                        }
                    };
                    Ok(HedgedSample {
                        book_pv: &sample.pv,
                        best_estimate: sample.best_estimate(),
                        net: &legs.net,
                        net_central: legs.net_central,
                    })
                })
                .collect::<Result<Vec<_>>>()?;
            MixtureHedge::new(name, weights, &samples, levels)
        })
        .collect::<Result<Vec<_>>>()
        .map(Some)
}
