//! Deaths and central exposures by age and calendar year: the experience every model is
//! fitted to.
//!
//! Cells are held as dense age × year matrices (rows are ages, columns are years) because
//! every fit works on whole rows and columns; a missing cell is an error at load time, never
//! a hole to be patched later.
//!
//! The CSV has exactly the columns `year,age,sex,deaths,exposure`, in any order. Any other
//! column is rejected rather than ignored: a file carrying, say, adjusted deaths beside raw
//! ones should be cut down on purpose, not have one of them picked silently. Rows outside
//! the fitted window are checked like every other row but not kept, so one file can serve
//! several windows. Deaths need not be whole numbers: some sources spread deaths of
//! unknown age or date over cells, and the Poisson and binomial likelihoods accept that.

use std::collections::HashMap;
use std::io::Read;
use std::ops::RangeInclusive;
use std::path::{Path, PathBuf};

use nalgebra::DMatrix;

use crate::data::csv_input::{self, MAX_AGE, Table};
use crate::data::published::{PublishedTable, experience_from_published};
use crate::data::{Sex, Span};
use crate::error::{Error, Result};

/// Columns of the experience CSV, in the order they are written.
pub const EXPERIENCE_COLUMNS: [&str; 5] = ["year", "age", "sex", "deaths", "exposure"];

/// Calendar years accepted in an experience file.
pub const PLAUSIBLE_YEARS: RangeInclusive<i32> = 1700..=2300;

/// One sex's experience on a complete age × year grid.
#[derive(Debug, Clone, PartialEq)]
pub struct Population {
    /// Sex of the lives.
    pub sex: Sex,
    /// Ages last birthday, one matrix row each.
    pub ages: Span,
    /// Calendar years, one matrix column each.
    pub years: Span,
    /// Deaths D(x, t).
    pub deaths: DMatrix<f64>,
    /// Central exposure E^c(x, t) in person-years.
    pub exposure: DMatrix<f64>,
}

/// The experience of every sex read from one file.
#[derive(Debug, Clone, PartialEq)]
pub struct Experience {
    /// The file it came from (empty for experience built in memory).
    pub source: PathBuf,
    /// One population per sex, in the order asked for.
    pub populations: Vec<Population>,
}

impl Population {
    /// Checks shapes and values and builds a population.
    ///
    /// Rejects non-finite or negative values and deaths in cells with zero exposure.
    pub fn new(
        sex: Sex,
        ages: Span,
        years: Span,
        deaths: DMatrix<f64>,
        exposure: DMatrix<f64>,
    ) -> Result<Self> {
        let shape = (ages.len(), years.len());
        if deaths.shape() != shape || exposure.shape() != shape {
            return Err(Error::Numerical(format!(
                "experience grid for sex {sex} must be {} ages x {} years",
                shape.0, shape.1
            )));
        }
        for (i, age) in ages.iter().enumerate() {
            for (j, year) in years.iter().enumerate() {
                let (d, e) = (deaths[(i, j)], exposure[(i, j)]);
                if !(d.is_finite() && e.is_finite() && d >= 0.0 && e >= 0.0) {
                    return Err(Error::Numerical(format!(
                        "sex {sex}, age {age}, year {year}: deaths and exposure must be finite and non-negative"
                    )));
                }
                if d > 0.0 && e == 0.0 {
                    return Err(Error::Numerical(format!(
                        "sex {sex}, age {age}, year {year}: deaths with zero exposure"
                    )));
                }
            }
        }
        Ok(Population {
            sex,
            ages,
            years,
            deaths,
            exposure,
        })
    }

    /// The sub-grid for `ages` × `years`, which must lie inside this one.
    pub fn restrict(&self, ages: Span, years: Span) -> Result<Population> {
        if !self.ages.covers(&ages) || !self.years.covers(&years) {
            return Err(Error::Numerical(format!(
                "sex {}: ages {}-{} and years {}-{} are not all in the experience (ages {}-{}, years {}-{})",
                self.sex,
                ages.first,
                ages.last,
                years.first,
                years.last,
                self.ages.first,
                self.ages.last,
                self.years.first,
                self.years.last
            )));
        }
        let (r, c) = (
            (ages.first - self.ages.first) as usize,
            (years.first - self.years.first) as usize,
        );
        let (nr, nc) = (ages.len(), years.len());
        Ok(Population {
            sex: self.sex,
            ages,
            years,
            deaths: self.deaths.view((r, c), (nr, nc)).into_owned(),
            exposure: self.exposure.view((r, c), (nr, nc)).into_owned(),
        })
    }

    /// Crude central death rates D / E^c (zero where the exposure is zero).
    pub fn central_rates(&self) -> DMatrix<f64> {
        self.deaths
            .zip_map(&self.exposure, |d, e| if e > 0.0 { d / e } else { 0.0 })
    }

    /// Initial exposure E^0 ≈ E^c + D/2 (common practice), used by binomial fits.
    pub fn initial_exposure(&self) -> DMatrix<f64> {
        self.exposure.zip_map(&self.deaths, |e, d| e + 0.5 * d)
    }

    /// Total deaths over the grid.
    pub fn total_deaths(&self) -> f64 {
        self.deaths.sum()
    }

    /// Total central exposure over the grid.
    pub fn total_exposure(&self) -> f64 {
        self.exposure.sum()
    }
}

impl Experience {
    /// Reads the experience CSV at `path` and keeps the cells of `sexes` × `ages` × `years`,
    /// every one of which must be present.
    ///
    /// Every row is checked, inside the window or not: field count, numbers (finite,
    /// non-negative), whole ages in 0..=130 and years in 1700..=2300, sex codes, duplicate
    /// cells, and deaths with zero exposure. Errors name the file, line and column.
    /// A spreadsheet path (`.xlsx`, `.ods`, optionally `#sheet`) is read from its sheet.
    pub fn load(path: &Path, ages: Span, years: Span, sexes: &[Sex]) -> Result<Experience> {
        let table = Table::read(path, &EXPERIENCE_COLUMNS, &[])?;
        Experience::from_table(&table, ages, years, sexes)
    }

    /// As [`Experience::load`] on any reader; `path` names the input in messages and is
    /// kept as [`Experience::source`].
    pub fn from_reader(
        path: &Path,
        reader: impl Read,
        ages: Span,
        years: Span,
        sexes: &[Sex],
    ) -> Result<Experience> {
        let table = Table::from_reader(reader, path, &EXPERIENCE_COLUMNS, &[])?;
        Experience::from_table(&table, ages, years, sexes)
    }

    /// As [`Experience::load`] on a table already parsed with the experience's columns.
    pub fn from_table(table: &Table, ages: Span, years: Span, sexes: &[Sex]) -> Result<Experience> {
        if table.is_empty() {
            return Err(table.file_error("no data rows after the header"));
        }
        let cells = ages.len() * years.len();
        // Per sex asked for: (deaths, exposure) by age-major cell index, `None` until read.
        let mut grids: Vec<Vec<Option<(f64, f64)>>> = vec![vec![None; cells]; sexes.len()];
        let mut seen: HashMap<(Sex, i32, i32), usize> = HashMap::with_capacity(table.len());
        for row in table.rows() {
            let year = row.whole("year")?;
            if !(*PLAUSIBLE_YEARS.start() as i64..=*PLAUSIBLE_YEARS.end() as i64).contains(&year) {
                return Err(row.error(
                    "year",
                    format!(
                        "{year} is not a plausible calendar year ({} to {})",
                        PLAUSIBLE_YEARS.start(),
                        PLAUSIBLE_YEARS.end()
                    ),
                ));
            }
            let age = row.whole("age")?;
            if !(0..=MAX_AGE as i64).contains(&age) {
                return Err(row.error(
                    "age",
                    format!("{age} is impossible: ages last birthday run from 0 to {MAX_AGE}"),
                ));
            }
            let (year, age) = (year as i32, age as i32);
            let sex: Sex = row
                .required("sex")?
                .parse()
                .map_err(|rule: String| row.error("sex", rule))?;
            let deaths = row.number("deaths")?;
            if deaths < 0.0 {
                return Err(row.error("deaths", format!("must not be negative, found {deaths}")));
            }
            let exposure = row.number("exposure")?;
            if exposure < 0.0 {
                return Err(row.error(
                    "exposure",
                    format!("must not be negative, found {exposure}"),
                ));
            }
            if deaths > 0.0 && exposure == 0.0 {
                return Err(row.error(
                    "deaths",
                    format!(
                        "{deaths} deaths with zero exposure: a cell with deaths needs exposure"
                    ),
                ));
            }
            if let Some(first) = seen.insert((sex, age, year), row.line) {
                return Err(row.row_error(format!(
                    "duplicate cell (sex {sex}, age {age}, year {year}): also on row {first}"
                )));
            }
            let slot = sexes.iter().position(|&s| s == sex);
            if let (Some(s), Some(i), Some(j)) = (slot, ages.index(age), years.index(year)) {
                grids[s][i * years.len() + j] = Some((deaths, exposure));
            }
        }

        let mut populations = Vec::with_capacity(sexes.len());
        for (&sex, grid) in sexes.iter().zip(&grids) {
            let missing = grid.iter().filter(|c| c.is_none()).count();
            if let Some(first) = grid.iter().position(Option::is_none) {
                let (age, year) = (
                    ages.first + (first / years.len()) as i32,
                    years.first + (first % years.len()) as i32,
                );
                return Err(table.file_error(format!(
                    "missing cell: no row for sex {sex}, age {age}, year {year} ({missing} cell(s) of sex {sex} missing); \
                     the file must cover every cell of the window set by config keys \
                     `data.ages` = [{}, {}] and `data.years` = [{}, {}]",
                    ages.first, ages.last, years.first, years.last
                )));
            }
            let deaths = DMatrix::from_fn(ages.len(), years.len(), |i, j| {
                grid[i * years.len() + j].map_or(0.0, |c| c.0)
            });
            let exposure = DMatrix::from_fn(ages.len(), years.len(), |i, j| {
                grid[i * years.len() + j].map_or(0.0, |c| c.1)
            });
            populations.push(Population::new(sex, ages, years, deaths, exposure)?);
        }
        Ok(Experience {
            source: table.file.clone(),
            populations,
        })
    }

    /// The experience a config names (`data.experience`, or the published
    /// `data.deaths` and `data.exposures`), for its fitted ages, years and sexes.
    pub fn from_config(config: &crate::data::Config) -> Result<Experience> {
        let d = &config.data;
        match (&d.experience, &d.deaths, &d.exposures) {
            (Some(path), _, _) => Experience::load(
                &config.resolve(path),
                config.ages(),
                config.years(),
                &d.sexes,
            ),
            (None, Some(deaths), Some(exposures)) => {
                let deaths = PublishedTable::load(&config.resolve(deaths))?;
                let exposures = PublishedTable::load(&config.resolve(exposures))?;
                experience_from_published(
                    &deaths,
                    &exposures,
                    config.ages(),
                    config.years(),
                    &d.sexes,
                )
            }
            _ => Err(Error::config(
                &config.file,
                "data.experience",
                "no experience named",
            )),
        }
    }

    /// Writes the experience as CSV (`year,age,sex,deaths,exposure`, by sex, year, age) to
    /// `path` atomically. Numbers are written in their shortest exact form, so
    /// [`Experience::load`] gives back the same values.
    pub fn write_csv(&self, path: &Path) -> Result<()> {
        self.write_unpublished(path)?.commit()
    }

    /// As [`Experience::write_csv`] but left under a temporary name until committed, so
    /// several files can be written before any of them appears.
    pub fn write_unpublished(&self, path: &Path) -> Result<crate::io::AtomicFile> {
        let rows = self.populations.iter().flat_map(|p| {
            p.years.iter().enumerate().flat_map(move |(j, year)| {
                p.ages.iter().enumerate().map(move |(i, age)| {
                    vec![
                        year.to_string(),
                        age.to_string(),
                        p.sex.code().to_string(),
                        p.deaths[(i, j)].to_string(),
                        p.exposure[(i, j)].to_string(),
                    ]
                })
            })
        });
        csv_input::write_unpublished(path, &EXPERIENCE_COLUMNS, rows)
    }

    /// The population of `sex`, if present.
    pub fn population(&self, sex: Sex) -> Option<&Population> {
        self.populations.iter().find(|p| p.sex == sex)
    }

    /// The file name used in messages.
    pub fn source(&self) -> &Path {
        &self.source
    }
}
