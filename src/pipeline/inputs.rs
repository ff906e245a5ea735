//! Every input a config names, loaded and checked the way the commands use them.
//!
//! `check` promises to refuse whatever `fit`, `project`, `value`, `hedge` or `run` would
//! refuse about the inputs and the config. It can keep that promise only if it runs the
//! same rules, so the commands and `check` both start here rather than each keeping a copy.

use crate::data::{Book, Config, Experience};
use crate::error::Result;
use crate::interest::DiscountCurve;
use crate::models::build_model;

/// The inputs of a run, each loaded and checked against the config.
#[derive(Debug)]
pub struct CheckedInputs {
    /// The experience in the fitted window.
    pub experience: Experience,
    /// The book, checked against the projected ages and years; `None` if none is named.
    pub book: Option<Book>,
    /// The discount basis, when a book or a rate or curve is named.
    pub curve: Option<DiscountCurve>,
}

/// Checks every model kind's settings, loads the experience, the book (against the
/// projection the config will make), the book's own experience under `[basis]` and the
/// discount basis.
pub fn checked_inputs(config: &Config) -> Result<CheckedInputs> {
    check_models(config)?;
    let experience = Experience::from_config(config)?;
    check_windows(config, &experience)?;
    let book = Book::from_config(config)?;
    if let (Some(_), Some(path)) = (&config.basis, &config.data.book_experience) {
        crate::basis::load_book_experience(config, &config.resolve(path))?;
    }
    let curve =
        if book.is_some() || config.valuation.rate.is_some() || config.valuation.curve.is_some() {
            Some(DiscountCurve::from_config(config)?)
        } else {
            None
        };
    Ok(CheckedInputs {
        experience,
        book,
        curve,
    })
}

/// Runs every configured kind's pre-fit checks of each sex's window (enough ages, years and
/// identifiable cohorts), in the order the fits meet them.
pub fn check_windows(config: &Config, experience: &Experience) -> Result<()> {
    for kind in config.model.kinds() {
        let model = build_model(&config.model, kind)?;
        for population in &experience.populations {
            model.check_population(population)?;
        }
    }
    Ok(())
}

/// Builds (and so checks) the settings of every configured model kind, as the fits do.
pub fn check_models(config: &Config) -> Result<()> {
    for kind in config.model.kinds() {
        build_model(&config.model, kind)?;
    }
    Ok(())
}
