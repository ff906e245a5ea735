//! `tailspan check`.

use crate::error::{Error, Result};

/// Arguments of `tailspan check`.
#[derive(Debug, clap::Args)]
pub struct CheckArgs {}

/// Runs `tailspan check`.
pub fn run(_args: &CheckArgs) -> Result<()> {
    Err(Error::argument("check", "not built yet"))
}
