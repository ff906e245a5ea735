//! The book's own deaths and exposures, cell by cell beside the population's fitted rate.
//!
//! A book's experience is a few years and a few ages of a few thousand lives, so its window
//! is the file's own (every cell between its lowest and highest age and year must be
//! present, as for the population) rather than the config's fitted window, which it must
//! lie inside: the population's fitted rate m̂_pop(x, t) of every book cell is the offset
//! the book is measured against.

use std::path::Path;

use crate::data::csv_input::Table;
use crate::data::experience::EXPERIENCE_COLUMNS;
use crate::data::{Config, Experience, Sex, Span};
use crate::error::{Error, Result};
use crate::models::FittedModel;

/// One cell of the book's experience with the population's fitted rate.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BookCell {
    /// Sex of the lives.
    pub sex: Sex,
    /// Age last birthday.
    pub age: i32,
    /// Calendar year.
    pub year: i32,
    /// The book's deaths.
    pub deaths: f64,
    /// The book's central exposure in person-years.
    pub exposure: f64,
    /// The population's fitted central rate m̂_pop(x, t).
    pub population_rate: f64,
}

impl BookCell {
    /// Deaths expected at the population's fitted rate, E · m̂_pop.
    pub fn expected(&self) -> f64 {
        self.exposure * self.population_rate
    }
}

/// Reads `data.book_experience` over the file's own window, for the sexes the config fits
/// that the file holds.
pub fn load(config: &Config, path: &Path) -> Result<Experience> {
    let table = Table::read(path, &EXPERIENCE_COLUMNS, &[])?;
    // (lowest age, highest age, first year, last year) over every row.
    let mut window: Option<(i32, i32, i32, i32)> = None;
    let mut sexes = Vec::new();
    for row in table.rows() {
        // Bad values are reported by the full load below, with their row and column.
        let (Ok(age), Ok(year)) = (row.whole("age"), row.whole("year")) else {
            continue;
        };
        let (Ok(age), Ok(year)) = (i32::try_from(age), i32::try_from(year)) else {
            continue;
        };
        if let Ok(sex) = row.required("sex").unwrap_or("").parse::<Sex>()
            && config.data.sexes.contains(&sex)
            && !sexes.contains(&sex)
        {
            sexes.push(sex);
        }
        window = Some(match window {
            None => (age, age, year, year),
            Some((a0, a1, y0, y1)) => (a0.min(age), a1.max(age), y0.min(year), y1.max(year)),
        });
    }
    let Some((a0, a1, y0, y1)) = window else {
        return Err(table.file_error("no data rows after the header"));
    };
    let (ages, years) = (
        Span {
            first: a0,
            last: a1,
        },
        Span {
            first: y0,
            last: y1,
        },
    );
    if sexes.is_empty() {
        return Err(table.file_error(format!(
            "holds none of the sexes fitted (`data.sexes` = {:?})",
            config.data.sexes
        )));
    }
    sexes.sort();
    let fitted = (config.ages(), config.years());
    if !fitted.0.covers(&ages) || !fitted.1.covers(&years) {
        return Err(Error::config(
            &config.file,
            "data.book_experience",
            format!(
                "{} covers ages {}-{} and years {}-{}, which must lie inside the fitted window \
                 (`data.ages` = [{}, {}], `data.years` = [{}, {}]): the book is measured \
                 against the population's fitted rates",
                path.display(),
                ages.first,
                ages.last,
                years.first,
                years.last,
                fitted.0.first,
                fitted.0.last,
                fitted.1.first,
                fitted.1.last
            ),
        ));
    }
    Experience::load(path, ages, years, &sexes).map_err(|e| match e {
        // The grid's window is the file's own here, not the config's fitted window.
        Error::File { file, rule } if rule.starts_with("missing cell") => {
            let cell = rule.split("; ").next().unwrap_or(&rule).to_string();
            Error::File {
                file,
                rule: format!(
                    "{cell}; `data.book_experience` must hold every cell between its lowest and \
                     highest age ({}-{}) and year ({}-{}) for each sex it holds",
                    ages.first, ages.last, years.first, years.last
                ),
            }
        }
        other => other,
    })
}

/// Every book cell with positive exposure beside the population's fitted rate from
/// `models` (one fitted model per sex, with `sexes`).
pub fn cells(
    book: &Experience,
    sexes: &[Sex],
    models: &[std::sync::Arc<dyn FittedModel>],
) -> Result<Vec<BookCell>> {
    let mut cells = Vec::new();
    for population in &book.populations {
        let slot = sexes.iter().position(|&s| s == population.sex);
        let Some(model) = slot.map(|i| &models[i]) else {
            return Err(Error::model(
                "basis",
                format!("no population model is fitted to sex {}", population.sex),
            ));
        };
        let fitted_ages = model.ages();
        let fitted_years = model.years();
        let mut q = vec![0.0; (model.max_age() - fitted_ages.first + 1) as usize];
        let cohorts = model.cohort_effects();
        for (j, year) in population.years.iter().enumerate() {
            let Some(column) = fitted_years.index(year) else {
                return Err(Error::model(
                    "basis",
                    format!("year {year} of the book is not a fitted year of the population"),
                ));
            };
            let factors: Vec<f64> = model.factors().column(column).iter().copied().collect();
            match &cohorts {
                Some(c) => model.cohort_rates(&factors, &c.by_age(year, fitted_ages.first), &mut q),
                None => model.rates(&factors, &mut q),
            }
            for (i, age) in population.ages.iter().enumerate() {
                let exposure = population.exposure[(i, j)];
                if exposure <= 0.0 {
                    continue;
                }
                let qx = q[(age - fitted_ages.first) as usize];
                cells.push(BookCell {
                    sex: population.sex,
                    age,
                    year,
                    deaths: population.deaths[(i, j)],
                    exposure,
                    population_rate: -(-qx).ln_1p(),
                });
            }
        }
    }
    if cells.is_empty() {
        return Err(Error::model(
            "basis",
            "the book's experience has no cell with positive exposure",
        ));
    }
    Ok(cells)
}
