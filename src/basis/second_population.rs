//! The book's population under `[basis] kind = "li-lee"`: `data.book_experience` then holds
//! a full second population, read with the experience file's rules.
//!
//! The two populations are fitted together on the years they share, so the rule is:
//! the file must hold every fitted sex (`data.sexes`) at every fitted age (`data.ages`) in
//! every year it shares with the population's window (`data.years`); those shared years
//! must run to the window's last year, where the population model's projection starts and
//! so the two populations' own indices must too, and there must be at least
//! [`MIN_SHARED_YEARS`] of them. Ages and years outside the window are checked like every
//! other row but not used.

use std::path::Path;

use crate::data::csv_input::Table;
use crate::data::experience::EXPERIENCE_COLUMNS;
use crate::data::{Config, Experience, Sex, Span};
use crate::error::{Error, Result};

/// Fewest years the two populations must share: the own indices' AR(1)s need a series.
pub const MIN_SHARED_YEARS: usize = 10;

/// Reads the second population over the fitted ages and the years it shares with the
/// population's window.
pub fn load(config: &Config, path: &Path) -> Result<Experience> {
    let table = Table::read(path, &EXPERIENCE_COLUMNS, &[])?;
    let fitted_ages = config.ages();
    let fitted_years = config.years();
    // Ages and years held per fitted sex; bad values are reported by the full load below.
    let mut ages: Vec<Option<Span>> = vec![None; config.data.sexes.len()];
    let mut years: Option<Span> = None;
    for row in table.rows() {
        let (Ok(age), Ok(year)) = (row.whole("age"), row.whole("year")) else {
            continue;
        };
        let (Ok(age), Ok(year)) = (i32::try_from(age), i32::try_from(year)) else {
            continue;
        };
        let Ok(sex) = row.required("sex").unwrap_or("").parse::<Sex>() else {
            continue;
        };
        let Some(slot) = config.data.sexes.iter().position(|&s| s == sex) else {
            continue;
        };
        ages[slot] = Some(Span::widened(ages[slot], age));
        years = Some(Span::widened(years, year));
    }
    let file_error = |rule: String| table.file_error(rule);
    for (slot, held) in ages.iter().enumerate() {
        let sex = config.data.sexes[slot];
        match held {
            None => {
                return Err(file_error(format!(
                    "holds no row of sex {sex}; with `[basis] kind = \"li-lee\"`, \
                     `data.book_experience` is a second population and must hold every fitted \
                     sex (`data.sexes`)"
                )));
            }
            Some(span) if !span.covers(&fitted_ages) => {
                return Err(file_error(format!(
                    "sex {sex} is held at ages {}-{} only; with `[basis] kind = \"li-lee\"`, \
                     `data.book_experience` must hold every fitted age (`data.ages` = [{}, {}])",
                    span.first, span.last, fitted_ages.first, fitted_ages.last
                )));
            }
            Some(_) => {}
        }
    }
    let Some(held) = years else {
        return Err(table.file_error("no data rows after the header"));
    };
    let shared = Span {
        first: held.first.max(fitted_years.first),
        last: held.last.min(fitted_years.last),
    };
    if held.last < fitted_years.last
        || shared.last < shared.first
        || shared.len() < MIN_SHARED_YEARS
    {
        return Err(file_error(format!(
            "holds years {}-{}; with `[basis] kind = \"li-lee\"`, `data.book_experience` must \
             share at least {MIN_SHARED_YEARS} years with `data.years` = [{}, {}], up to its \
             last year {} (where the projection starts)",
            held.first, held.last, fitted_years.first, fitted_years.last, fitted_years.last
        )));
    }
    Experience::load(path, fitted_ages, shared, &config.data.sexes).map_err(|e| match e {
        Error::File { file, rule } if rule.starts_with("missing cell") => {
            let cell = rule.split("; ").next().unwrap_or(&rule).to_string();
            Error::File {
                file,
                rule: format!(
                    "{cell}; with `[basis] kind = \"li-lee\"`, `data.book_experience` must hold \
                     every fitted age ({}-{}) of every fitted sex in every year it shares with \
                     `data.years` ({}-{})",
                    fitted_ages.first, fitted_ages.last, shared.first, shared.last
                ),
            }
        }
        other => other,
    })
}
