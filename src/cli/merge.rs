//! `tailspan merge`: combine a sharded run's part files into a single run's outputs.

use std::io::Write as _;
use std::path::PathBuf;

use crate::data::Config;
use crate::error::{Error, Result};
use crate::io::write_json;
use crate::risk::merge::merge_folder;

/// Arguments of `tailspan merge`.
#[derive(Debug, clap::Args)]
pub struct MergeArgs {
    /// Folder holding the `*.part-K-of-N.parquet` files of every shard (default: the
    /// config's output folder, where the shards wrote them).
    pub dir: Option<PathBuf>,
    /// The run configuration the shards were run with: it fixes the scenario block each
    /// shard must hold, and the central-path figures of the summary are recomputed from it.
    #[arg(long, value_name = "CONFIG")]
    pub config: PathBuf,
}

/// Runs `tailspan merge`: checks that the parts in DIR (or the config's output folder) form one complete run, writes
/// `book.parquet`, `cashflows.parquet`, `lifetimes.parquet` (and `paths`, `factors`,
/// `period` when projection parts are there) and the run's `summary.json` into DIR.
pub fn run(args: &MergeArgs) -> Result<()> {
    // Merging a long run frees large buffers over and over; see `io::memory`.
    crate::io::memory::return_large_frees();
    let config = Config::load(&args.config)?;
    let dir = args.dir.clone().unwrap_or_else(|| config.output_folder());
    let merged = merge_folder(&dir, &config)?;
    write_json(dir.join("summary.json"), &merged.summary)?;
    let mut text = format!("merged {} shards\n", merged.parts.count);
    for file in &merged.files {
        text.push_str(&format!("wrote {}\n", file.display()));
    }
    text.push_str(&format!("wrote {}\n", dir.join("summary.json").display()));
    {
        let mut out = std::io::stdout().lock();
        out.write_all(text.as_bytes())
            .and_then(|()| out.flush())
            .map_err(|e| Error::io("standard output", e))?;
    }
    crate::cli::value::print_summary(&merged.summary)
}
