//! `tailspan fit`.

use crate::error::{Error, Result};

/// Arguments of `tailspan fit`.
#[derive(Debug, clap::Args)]
pub struct FitArgs {}

/// Runs `tailspan fit`.
pub fn run(_args: &FitArgs, _quiet: bool) -> Result<()> {
    Err(Error::argument("fit", "not built yet"))
}
