//! `tailspan synth`.

use crate::error::{Error, Result};

/// Arguments of `tailspan synth`.
#[derive(Debug, clap::Args)]
pub struct SynthArgs {}

/// Runs `tailspan synth`.
pub fn run(_args: &SynthArgs) -> Result<()> {
    Err(Error::argument("synth", "not built yet"))
}
