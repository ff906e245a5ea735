//! Whether a book can be valued on the rates a run will project.
//!
//! The valuation needs a rate for every age a life reaches up to `model.max_age` and every
//! year until then. These rules depend only on the book and a few config values, so they
//! live here, below the valuation, where `check` applies them to the config before any fit
//! and the valuation applies them to the projector it was given: one set of rules, one
//! message, whichever command meets the fault first.

use std::path::Path;

use crate::data::{Book, Config};
use crate::error::{Error, Result};

/// The ages and years of the rates a valuation reads.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct ProjectedRange {
    /// First projected age (the first fitted age).
    pub first_age: i32,
    /// Highest age (`model.max_age`), where q is 1.
    pub max_age: i32,
    /// Valuation year: the first year of rates read.
    pub year: i32,
    /// Last projected calendar year.
    pub last_year: i32,
}

impl ProjectedRange {
    /// The range a config's projection will cover, known before any fit.
    pub fn of_config(config: &Config) -> ProjectedRange {
        ProjectedRange {
            first_age: config.ages().first,
            max_age: config.model.max_age,
            year: config.valuation_year(),
            last_year: config.years().last + config.projection.horizon as i32,
        }
    }
}

/// Checks every policy's age lies in the projected ages and the projection reaches the
/// youngest life's `max_age`. A horizon error names `projection.horizon` in `config_file`.
pub fn check_book_coverage(book: &Book, range: &ProjectedRange, config_file: &Path) -> Result<()> {
    let ProjectedRange {
        first_age,
        max_age,
        year,
        last_year,
    } = *range;
    if let Some(p) = book
        .policies
        .iter()
        .find(|p| p.age < first_age || p.age >= max_age)
    {
        return Err(Error::File {
            file: book.source.clone(),
            rule: format!(
                "policy `{}` is aged {}, outside the projected ages {first_age}..{max_age}: widen `data.ages`{}",
                p.id,
                p.age,
                if p.age >= max_age {
                    " or raise `model.max_age`"
                } else {
                    ""
                }
            ),
        });
    }
    let Some(youngest) = book.policies.iter().map(|p| p.age).min() else {
        return Ok(());
    };
    let rate_years = max_age - youngest + 1;
    let needed = year + rate_years - 1;
    if needed > last_year {
        return Err(Error::config(
            config_file,
            "projection.horizon",
            format!(
                "valuing a life aged {youngest} from {year} to age {max_age} needs rates to {needed}, but the projection ends in {last_year}"
            ),
        ));
    }
    Ok(())
}
