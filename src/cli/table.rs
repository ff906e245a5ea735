//! `tailspan table`.

use crate::error::{Error, Result};

/// Arguments of `tailspan table`.
#[derive(Debug, clap::Args)]
pub struct TableArgs {}

/// Runs `tailspan table`.
pub fn run(_args: &TableArgs) -> Result<()> {
    Err(Error::argument("table", "not built yet"))
}
