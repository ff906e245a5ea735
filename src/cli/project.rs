//! `tailspan project`: fit the first configured model to each sex and write scenario paths.

use std::io::Write as _;
use std::path::PathBuf;

use crate::cli::progress::Progress;
use crate::data::{Config, Experience};
use crate::error::{Error, Result};
use crate::pipeline::ProjectedFits;
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

/// Runs `tailspan project`: loads the config and experience, fits the first configured
/// model kind to each sex, generates the scenarios and writes `paths.parquet`,
/// `factors.parquet` and `period.parquet` to the output folder.
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
    let experience = Experience::from_config(&config)?;
    let fits = ProjectedFits::fit(&config, &experience)?;
    let mut projector = fits.projector(&config, &experience)?;
    let options = OutputOptions {
        folder: config.output_folder(),
        paths: config.output.paths,
        compression: config.output.compression,
        shard,
        row_group_rows: ROW_GROUP_ROWS,
        provenance,
    };
    let bar = Progress::new("projecting", total.end - total.start, quiet);
    let written = write_projection(&mut projector, ids, &options, &|n| bar.advance(n))?;
    bar.finish();
    report(&written, fits.kind)
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
