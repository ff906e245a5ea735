//! `tailspan project`: fit every configured model kind to each sex and write scenario paths.

use std::io::Write as _;
use std::path::PathBuf;

use crate::cli::progress::Progress;
use crate::data::{Config, Experience};
use crate::error::{Error, Result};
use crate::io::provenance::retire_stale_records;
use crate::pipeline::ProjectedFits;
use crate::pipeline::models::{
    ModelFiles, Staging, gather_model_files, model_options, refuse_sharded_models,
};
use crate::projection::{
    OutputOptions, Shard, Written, engine::ROW_GROUP_ROWS, scenario_ids, write_projection,
};

/// Arguments of `tailspan project`.
#[derive(Debug, clap::Args)]
pub struct ProjectArgs {
    /// The run configuration (TOML).
    pub config: PathBuf,
    /// Write only shard K of N (a contiguous block of scenarios), e.g. `2/8`, to
    /// `part-K-of-N` files.
    #[arg(long, value_name = "K/N")]
    pub shard: Option<String>,
}

/// Runs `tailspan project`: loads the config and experience, fits each configured model
/// kind to each sex, generates the scenarios and writes `paths.parquet`, `factors.parquet`
/// and `period.parquet` to the output folder (with a `model` column for several kinds).
pub fn run(args: &ProjectArgs, quiet: bool) -> Result<()> {
    let shard: Option<Shard> = args.shard.as_deref().map(str::parse).transpose()?;
    let config = Config::load(&args.config)?;
    let provenance = crate::pipeline::provenance(&config)?;
    // The shard is checked against the run's scenarios before the (slower) fit.
    let ids = scenario_ids(config.projection.scenarios, config.projection.noise);
    let total = match shard {
        Some(s) => s.range(ids.clone())?,
        None => ids.clone(),
    };
    refuse_sharded_models(&config, shard.is_some())?;
    let experience = Experience::from_config(&config)?;
    let staging = Staging::for_config(&config)?;
    let base_options = OutputOptions {
        folder: config.output_folder(),
        paths: config.output.paths,
        compression: config.output.compression,
        shard,
        row_group_rows: ROW_GROUP_ROWS,
        provenance: provenance.clone(),
    };
    // Every listed kind is projected on the same scenario streams.
    let mut projected = Vec::new();
    for kind in config.model.kinds() {
        let fits = ProjectedFits::fit_kind(&config, &experience, kind)?;
        let mut projector = fits.projector(&config, &experience)?;
        let options = model_options(&base_options, staging.as_ref(), kind);
        let stage = match &staging {
            Some(_) => format!("projecting {}", kind.name()),
            None => "projecting".to_string(),
        };
        let bar = Progress::new(&stage, total.end - total.start, quiet);
        let written = write_projection(&mut projector, ids.clone(), &options, &|n| bar.advance(n))?;
        bar.finish();
        projected.push((fits.kind, written));
    }
    if staging.is_none() {
        let (kind, written) = &projected[0];
        return report(written, kind);
    }
    let parts = projected
        .iter()
        .map(|(kind, written)| ModelFiles {
            model: kind,
            written: written.files.clone(),
            pending: Vec::new(),
        })
        .collect();
    let gathered = gather_model_files(&config, &provenance, parts)?;
    retire_stale_records(&config.output_folder(), &provenance)?;
    let mut written = projected[0].1.clone();
    written.files.clear();
    for file in gathered {
        written.files.push(file.target().to_path_buf());
        file.commit()?;
    }
    drop(staging);
    let kinds: Vec<&str> = projected.iter().map(|(k, _)| *k).collect();
    report(&written, &kinds.join(", "))
}

fn report(written: &Written, model: &str) -> Result<()> {
    let mut out = std::io::stdout().lock();
    let mut text = format!(
        "projected {model}: scenarios {}..={}\n",
        written.scenarios.start,
        written.scenarios.end.saturating_sub(1)
    );
    for file in &written.files {
        text.push_str(&format!("wrote {}\n", file.display()));
    }
    out.write_all(text.as_bytes())
        .and_then(|()| out.flush())
        .map_err(|e| Error::io("standard output", e))
}
