//! `tailspan synth`: write the invented demo data, so the whole pipeline can be tried
//! without any real experience or book.

use std::path::PathBuf;

use crate::error::Result;
use crate::synth;

/// Arguments of `tailspan synth`.
#[derive(Debug, clap::Args)]
pub struct SynthArgs {
    /// Folder to write `experience.csv` and `book.csv` into (created if missing).
    #[arg(long)]
    pub out: PathBuf,
    /// Seed of the random streams; the same seed gives the same files.
    #[arg(long, default_value_t = synth::DEFAULT_SEED)]
    pub seed: u64,
    /// Number of policies in the book.
    #[arg(long, default_value_t = synth::DEFAULT_POLICIES)]
    pub policies: usize,
    /// Also write the demo in the other input layouts: a book with dates of birth
    /// (`book-dates.csv`), published tables (`deaths.txt`, `exposures.txt`) and
    /// spreadsheets (`book.xlsx`, `experience.xlsx`, `book.ods`, `experience.ods`).
    #[arg(long)]
    pub formats: bool,
}

/// Runs `tailspan synth`: writes the invented experience and book into `--out`.
pub fn run(args: &SynthArgs) -> Result<()> {
    synth::write(&args.out, args.seed, args.policies)?;
    if args.formats {
        crate::layouts::write_demo(&args.out, args.seed, args.policies)?;
    }
    Ok(())
}
