//! The book's own mortality against the population's: its experience read against the
//! population's fitted rates, the level, slope and spread fitted to it, and the book's
//! rates in every scenario made from the population's.
//!
//! A book or pension scheme is a few thousand lives: too few to fit a mortality model of
//! its own, enough to say how far its level and slope by age sit from the population's
//! and how much that gap moves from year to year. So the population carries the trend, and
//! the book is a relative model on top of it ([`relative`]); the valuation reads the
//! book's rates through [`BookRates`], never the population's directly. When the book is
//! itself a large population, the two are fitted together instead ([`li_lee`]), and the
//! book's rates are the population's times their fitted, projected gap.

pub mod actual_expected;
pub mod book_experience;
pub mod book_rates;
pub mod document;
pub mod li_lee;
pub mod poisson_interval;
pub mod relative;
pub mod second_population;

use crate::data::config::BasisKind;
use crate::data::{Config, Experience};
use crate::error::{Error, Result};
use crate::projection::JointBasis;

pub use actual_expected::ActualToExpected;
pub use book_experience::BookCell;
pub use book_rates::{BookBuffers, BookRates, ScenarioBasis, Uncertainty};
pub use document::BasisDocument;
pub use li_lee::LiLeeSex;
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
    let book = load_book_experience(config, &config.resolve(path))?;
    let cells = book_experience::cells(&book, population.sexes(), population.models())?;
    let ages = config.ages();
    let mean_age = 0.5 * f64::from(ages.first + ages.last);
    let fit = RelativeFit::fit(&cells, mean_age)?;
    let uncertainty = Uncertainty {
        level: settings.level_uncertainty,
        spread: settings.spread,
    };
    let seed = config.projection.seed;
    if settings.kind == BasisKind::LiLee {
        let fits = fit_li_lee(config, &book, population.sexes())?;
        let document = BasisDocument::li_lee(&fit, &cells, &fits);
        return Ok(Some(FittedBasis {
            rates: BookRates::li_lee(fit, fits, uncertainty, seed)?,
            document,
        }));
    }
    let document = BasisDocument::new(&fit, &cells);
    Ok(Some(FittedBasis {
        rates: BookRates::new(fit, uncertainty, seed)?,
        document,
    }))
}

/// Reads `data.book_experience` at `path` by the rules of the configured basis kind: the
/// book's own window for `relative`, a second population for `li-lee`.
pub fn load_book_experience(config: &Config, path: &std::path::Path) -> Result<Experience> {
    match config.basis.as_ref().map(|b| b.kind) {
        Some(BasisKind::LiLee) => second_population::load(config, path),
        _ => book_experience::load(config, path),
    }
}

/// Li–Lee fits of the population's `sexes`, in that order, to the population's experience
/// and the second population `book` on the years they share.
fn fit_li_lee(
    config: &Config,
    book: &Experience,
    sexes: &[crate::data::Sex],
) -> Result<Vec<LiLeeSex>> {
    let experience = Experience::from_config(config)?;
    let book_file = config
        .data
        .book_experience
        .as_ref()
        .map(|p| config.resolve(p))
        .unwrap_or_default();
    sexes
        .iter()
        .map(|&sex| {
            let missing =
                |what: &str| Error::model("li-lee", format!("no {what} experience of sex {sex}"));
            let second = book
                .population(sex)
                .ok_or_else(|| missing("book population's"))?;
            let first = experience
                .population(sex)
                .ok_or_else(|| missing("index population's"))?
                .restrict(second.ages, second.years)?;
            LiLeeSex::fit([&first, second], [experience.source(), &book_file])
        })
        .collect()
}
