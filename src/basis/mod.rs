//! The book's own mortality against the population's: its experience read against the
//! population's fitted rates, the level, slope and spread fitted to it, and the book's
//! rates in every scenario made from the population's.
//!
//! A book or pension scheme is a few thousand lives: too few to fit a mortality model of
//! its own, enough to say how far its level and slope by age sit from the population's
//! and how much that gap moves from year to year. So the population carries the trend, and
//! the book is a relative model on top of it ([`relative`]); the valuation reads the
//! book's rates through [`BookRates`], never the population's directly.

pub mod actual_expected;
pub mod book_experience;
pub mod book_rates;
pub mod document;
pub mod poisson_interval;
pub mod relative;

use crate::data::Config;
use crate::data::config::BasisKind;
use crate::error::{Error, Result};
use crate::projection::JointBasis;

pub use actual_expected::ActualToExpected;
pub use book_experience::BookCell;
pub use book_rates::{BookBuffers, BookRates, ScenarioBasis, Uncertainty};
pub use document::BasisDocument;
pub use relative::RelativeFit;

/// The fitted basis of a run: the book's rates and what `basis.json` reports.
#[derive(Debug, Clone)]
pub struct FittedBasis {
    /// The book's rates per scenario.
    pub rates: BookRates,
    /// The document written to `basis.json`.
    pub document: BasisDocument,
}

/// Fits the config's `[basis]`, if any, against the population's central fits in
/// `population`.
pub fn from_config(config: &Config, population: &JointBasis) -> Result<Option<FittedBasis>> {
    let Some(settings) = &config.basis else {
        return Ok(None);
    };
    let Some(path) = &config.data.book_experience else {
        return Err(Error::config(
            &config.file,
            "data.book_experience",
            "`[basis]` needs the book's own deaths and exposures",
        ));
    };
    if settings.kind != BasisKind::Relative {
        return Err(Error::config(
            &config.file,
            "basis.kind",
            "`li-lee` is not available in this version; use `relative`",
        ));
    }
    let book = book_experience::load(config, &config.resolve(path))?;
    let cells = book_experience::cells(&book, population.sexes(), population.models())?;
    let ages = config.ages();
    let mean_age = 0.5 * f64::from(ages.first + ages.last);
    let fit = RelativeFit::fit(&cells, mean_age)?;
    let document = BasisDocument::new(&fit, &cells);
    let uncertainty = Uncertainty {
        level: settings.level_uncertainty,
        spread: settings.spread,
    };
    Ok(Some(FittedBasis {
        rates: BookRates::new(fit, uncertainty, config.projection.seed)?,
        document,
    }))
}
