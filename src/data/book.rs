//! The annuity book: one row per policy.
//!
//! Durations (deferral, term, guarantee) are whole years so that every payment lines up
//! with the annual grid of projected rates; m-thly payments within a year use UDD.
//!
//! The CSV needs `id,sex,age,amount` and may add `deferral`, `term`, `guarantee`,
//! `escalation`, `weight` and `mortality_factor`, in any order. Unknown columns are
//! rejected, so a misspelt optional column never falls back to its default unnoticed.
//! An empty optional field takes the default (an empty `term` is whole life).

use std::collections::HashMap;
use std::io::Read;
use std::path::{Path, PathBuf};

use chrono::NaiveDate;

use crate::data::coverage::{ProjectedRange, check_book_coverage};
use crate::data::csv_input::{self, MAX_AGE, Row, Table};
use crate::data::dates::{AgeBasis, age_on, deferral_years, parse_date};
use crate::data::{Config, Sex};
use crate::error::{Error, Result};

/// Columns every book must have.
pub const BOOK_REQUIRED: [&str; 4] = ["id", "sex", "age", "amount"];

/// Columns a book may add, each with a default.
pub const BOOK_OPTIONAL: [&str; 6] = [
    "deferral",
    "term",
    "guarantee",
    "escalation",
    "weight",
    "mortality_factor",
];

/// Columns a book must have when read: `age` may be given as `birth_date` instead.
const READ_REQUIRED: [&str; 3] = ["id", "sex", "amount"];

/// Columns a book may have when read, besides [`READ_REQUIRED`].
const READ_OPTIONAL: [&str; 9] = [
    "age",
    "birth_date",
    "deferral",
    "start_date",
    "term",
    "guarantee",
    "escalation",
    "weight",
    "mortality_factor",
];

/// The date a book's `birth_date` and `start_date` are read at, and how.
#[derive(Debug, Clone, Default)]
pub struct BookDates {
    /// `valuation.date`; a book with dates needs it.
    pub valuation_date: Option<NaiveDate>,
    /// `valuation.age_basis`.
    pub age_basis: AgeBasis,
    /// The config, named when `valuation.date` is missing.
    pub config_file: PathBuf,
}

/// Largest mortality factor accepted (the same bound as the config's factors).
pub const MAX_MORTALITY_FACTOR: f64 = 10.0;

/// Largest escalation rate accepted; above it the value is almost surely a percentage.
pub const MAX_ESCALATION: f64 = 0.25;

/// One annuity policy (or a group of identical lives, by `weight`).
#[derive(Debug, Clone, PartialEq)]
pub struct Policy {
    /// Identifier from the book.
    pub id: String,
    /// Sex of the annuitant.
    pub sex: Sex,
    /// Age last birthday at the valuation date.
    pub age: i32,
    /// Annual amount of annuity.
    pub amount: f64,
    /// Whole years to the first payment (0: in payment).
    pub deferral: u32,
    /// Whole years of payment; `None` is whole life.
    pub term: Option<u32>,
    /// Whole years paid whatever happens, counted from the first payment.
    pub guarantee: u32,
    /// Annual escalation rate (0.03 is 3 %).
    pub escalation: f64,
    /// Lives represented by the row.
    pub weight: f64,
    /// Multiplier of the population q for this policy (book's own mortality level).
    pub mortality_factor: f64,
}

/// A book of annuities.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Book {
    /// The file it came from (empty for a book built in memory).
    pub source: PathBuf,
    /// The policies in file order.
    pub policies: Vec<Policy>,
}

impl Policy {
    /// The book file's columns, required then optional: the order of [`Policy::fields`].
    pub fn columns() -> Vec<&'static str> {
        BOOK_REQUIRED
            .iter()
            .chain(&BOOK_OPTIONAL)
            .copied()
            .collect()
    }

    /// The policy's cells in the book file's column order (required, then optional).
    pub fn fields(&self) -> Vec<String> {
        vec![
            self.id.clone(),
            self.sex.code().to_string(),
            self.age.to_string(),
            self.amount.to_string(),
            self.deferral.to_string(),
            self.term.map(|t| t.to_string()).unwrap_or_default(),
            self.guarantee.to_string(),
            self.escalation.to_string(),
            self.weight.to_string(),
            self.mortality_factor.to_string(),
        ]
    }

    /// An immediate whole-life annuity of `amount` a year with no guarantee or escalation.
    pub fn whole_life(id: impl Into<String>, sex: Sex, age: i32, amount: f64) -> Policy {
        Policy {
            id: id.into(),
            sex,
            age,
            amount,
            deferral: 0,
            term: None,
            guarantee: 0,
            escalation: 0.0,
            weight: 1.0,
            mortality_factor: 1.0,
        }
    }
}

impl Book {
    /// Reads and checks the book CSV at `path`.
    ///
    /// Rejects: duplicate or empty ids, unknown sex codes, ages outside 0..=130, amounts
    /// that are not positive, durations that are not whole non-negative years, a zero term,
    /// a guarantee longer than the term, a first payment beyond age 130, escalation outside
    /// ±25 % (3 meaning 3 % gets a hint), weights or mortality factors that are not
    /// positive (or mortality factors above 10), an empty book, and unknown columns.
    /// A spreadsheet path (`.xlsx`, `.ods`, optionally `#sheet`) is read from its sheet.
    pub fn load(path: &Path) -> Result<Book> {
        let table = Table::read(path, &READ_REQUIRED, &READ_OPTIONAL)?;
        Book::from_table(&table, &BookDates::default())
    }

    /// As [`Book::load`] on any reader; `path` names the input in messages and is kept as
    /// [`Book::source`].
    pub fn from_reader(path: &Path, reader: impl Read) -> Result<Book> {
        let table = Table::from_reader(reader, path, &READ_REQUIRED, &READ_OPTIONAL)?;
        Book::from_table(&table, &BookDates::default())
    }

    /// Checks and reads the policies of a table already parsed with the book's columns;
    /// `birth_date` and `start_date` are read as at `dates`.
    pub fn from_table(table: &Table, dates: &BookDates) -> Result<Book> {
        if table.has("age") == table.has("birth_date") {
            let rule = if table.has("age") {
                "give `age` or `birth_date`, not both".to_string()
            } else {
                format!(
                    "missing column `age` (or `birth_date`); the header must name `{}`",
                    BOOK_REQUIRED.join(",")
                )
            };
            return Err(table.header_error(rule));
        }
        if table.has("deferral") && table.has("start_date") {
            return Err(table.header_error("give `deferral` or `start_date`, not both"));
        }
        let valuation_date = if table.has("birth_date") || table.has("start_date") {
            Some(dates.valuation_date.ok_or_else(|| {
                let rule = format!(
                    "{} gives dates (`birth_date` or `start_date`): set `valuation.date` (YYYY-MM-DD) to read them at",
                    table.file.display()
                );
                // Read without a config, the book itself is named.
                if dates.config_file.as_os_str().is_empty() {
                    table.file_error(rule)
                } else {
                    Error::config(&dates.config_file, "valuation.date", rule)
                }
            })?)
        } else {
            None
        };
        if table.is_empty() {
            return Err(table.file_error("empty book: no policies after the header"));
        }
        let mut policies = Vec::with_capacity(table.len());
        let mut ids: HashMap<String, usize> = HashMap::with_capacity(table.len());
        for row in table.rows() {
            let dated = valuation_date.map(|date| (date, dates.age_basis));
            let policy = read_policy(&row, dated)?;
            if let Some(first) = ids.insert(policy.id.clone(), row.line) {
                return Err(row.error(
                    "id",
                    format!("duplicate id `{}`: also on row {first}", policy.id),
                ));
            }
            policies.push(policy);
        }
        Ok(Book {
            source: table.file.clone(),
            policies,
        })
    }

    /// The book a config names (`None` if it names none), checked against the fitted
    /// window with [`Book::check_window`].
    pub fn from_config(config: &Config) -> Result<Option<Book>> {
        let Some(path) = &config.data.book else {
            return Ok(None);
        };
        let dates = BookDates {
            valuation_date: config.valuation_date(),
            age_basis: config.valuation.age_basis,
            config_file: config.file.clone(),
        };
        let path = config.resolve(path);
        let table = Table::read(&path, &READ_REQUIRED, &READ_OPTIONAL)?;
        let book = Book::from_table(&table, &dates)?;
        book.check_window(config)?;
        Ok(Some(book))
    }

    /// Checks every policy is of a fitted sex and no younger than the first fitted age
    /// (projected rates start there, so a younger life could not be valued), and that the
    /// projection covers the book ([`check_book_coverage`]).
    pub fn check_window(&self, config: &Config) -> Result<()> {
        let first_age = config.ages().first;
        for p in &self.policies {
            if !config.data.sexes.contains(&p.sex) {
                return Err(Error::config(
                    &config.file,
                    "data.sexes",
                    format!(
                        "policy `{}` in {} is of sex {}, which is not fitted",
                        p.id,
                        self.source.display(),
                        p.sex
                    ),
                ));
            }
            if p.age < first_age {
                return Err(Error::config(
                    &config.file,
                    "data.ages",
                    format!(
                        "policy `{}` in {} is aged {}, below the first fitted age {first_age}; rates are not projected below it",
                        p.id,
                        self.source.display(),
                        p.age
                    ),
                ));
            }
        }
        check_book_coverage(self, &ProjectedRange::of_config(config), &config.file)
    }

    /// Writes the book as CSV with every column (an empty `term` is whole life) to `path`
    /// atomically; [`Book::load`] gives back the same values.
    pub fn write_csv(&self, path: &Path) -> Result<()> {
        self.write_unpublished(path)?.commit()
    }

    /// As [`Book::write_csv`] but left under a temporary name until committed.
    pub fn write_unpublished(&self, path: &Path) -> Result<crate::io::AtomicFile> {
        let header = Policy::columns();
        let rows = self.policies.iter().map(Policy::fields);
        csv_input::write_unpublished(path, &header, rows)
    }

    /// Total lives (sum of weights) of `sex`.
    pub fn lives(&self, sex: Sex) -> f64 {
        self.policies
            .iter()
            .filter(|p| p.sex == sex)
            .map(|p| p.weight)
            .sum()
    }

    /// Total annual amount (amount × weight) of `sex`.
    pub fn annual_amount(&self, sex: Sex) -> f64 {
        self.policies
            .iter()
            .filter(|p| p.sex == sex)
            .map(|p| p.amount * p.weight)
            .sum()
    }
}

/// Reads and checks one policy row; dates are read as at `dated` (valuation date, basis).
fn read_policy(row: &Row<'_>, dated: Option<(NaiveDate, AgeBasis)>) -> Result<Policy> {
    let id = row.required("id")?.to_string();
    let sex: Sex = row
        .required("sex")?
        .parse()
        .map_err(|rule: String| row.error("sex", rule))?;
    let (age, age_column) = match dated {
        Some((valuation, basis)) if row.has("birth_date") => {
            let text = row.required("birth_date")?;
            let birth = parse_date(text).map_err(|rule| row.error("birth_date", rule))?;
            if birth > valuation {
                return Err(row.error(
                    "birth_date",
                    format!("{birth} is after the valuation date {valuation} (`valuation.date`)"),
                ));
            }
            (i64::from(age_on(birth, valuation, basis)), "birth_date")
        }
        _ => (row.whole("age")?, "age"),
    };
    if !(0..=MAX_AGE as i64).contains(&age) {
        return Err(row.error(
            age_column,
            format!("{age} is impossible: ages last birthday run from 0 to {MAX_AGE}"),
        ));
    }
    let age = age as i32;
    let amount = row.number("amount")?;
    if amount <= 0.0 {
        return Err(row.error(
            "amount",
            format!("must be a positive annual amount, found {amount}"),
        ));
    }
    let (deferral, deferral_column) = match (row.text("start_date"), dated) {
        (Some(text), Some((valuation, _))) => {
            let start = parse_date(text).map_err(|rule| row.error("start_date", rule))?;
            let years = deferral_years(valuation, start);
            if i64::from(age) + years > i64::from(MAX_AGE) {
                return Err(row.error(
                    "start_date",
                    format!(
                        "{start} is {years} years after the valuation date {valuation}, which from age {age} puts the first payment beyond age {MAX_AGE}"
                    ),
                ));
            }
            (years as u32, "start_date")
        }
        _ => (years(row, "deferral")?.unwrap_or(0), "deferral"),
    };
    let term = years(row, "term")?;
    if term == Some(0) {
        return Err(row.error(
            "term",
            "must be at least 1 year; leave it empty for a whole-life annuity",
        ));
    }
    let guarantee = years(row, "guarantee")?.unwrap_or(0);
    if let Some(term) = term
        && guarantee > term
    {
        return Err(row.error(
            "guarantee",
            format!("{guarantee} years is longer than the term of {term} years"),
        ));
    }
    if age as i64 + deferral as i64 > MAX_AGE as i64 {
        return Err(row.error(
            deferral_column,
            format!("{deferral} years from age {age} puts the first payment beyond age {MAX_AGE}"),
        ));
    }
    let escalation = row.optional_number("escalation")?.unwrap_or(0.0);
    if escalation.abs() > MAX_ESCALATION {
        let hint = if escalation >= 1.0 {
            format!(
                "; write rates as decimals ({} for {escalation} %)",
                escalation / 100.0
            )
        } else {
            String::new()
        };
        return Err(row.error(
            "escalation",
            format!(
                "{escalation} is not a plausible annual escalation rate (between -{MAX_ESCALATION} and {MAX_ESCALATION}){hint}"
            ),
        ));
    }
    let weight = positive(row, "weight", "lives represented by the row")?;
    if weight > MAX_WEIGHT {
        return Err(row.error(
            "weight",
            format!(
                "{weight} lives on one row is implausible: at most {MAX_WEIGHT} (each life's death is simulated; split the row)"
            ),
        ));
    }
    let mortality_factor = positive(row, "mortality_factor", "multiplier of the population q")?;
    if mortality_factor > MAX_MORTALITY_FACTOR {
        return Err(row.error(
            "mortality_factor",
            format!("{mortality_factor} is implausible: at most {MAX_MORTALITY_FACTOR}"),
        ));
    }
    Ok(Policy {
        id,
        sex,
        age,
        amount,
        deferral,
        term,
        guarantee,
        escalation,
        weight,
        mortality_factor,
    })
}

/// An optional whole, non-negative number of years.
fn years(row: &Row<'_>, column: &str) -> Result<Option<u32>> {
    match row.optional_whole(column)? {
        None => Ok(None),
        Some(v) if (0..=MAX_AGE as i64).contains(&v) => Ok(Some(v as u32)),
        Some(v) if v < 0 => Err(row.error(
            column,
            format!("must be a whole number of years, not negative, found {v}"),
        )),
        Some(v) => Err(row.error(
            column,
            format!("{v} years is longer than any lifetime (at most {MAX_AGE})"),
        )),
    }
}

/// An optional positive multiplier, default 1.
/// Largest `weight` of one row: every life on it is simulated one by one.
const MAX_WEIGHT: f64 = 1_000_000.0;

fn positive(row: &Row<'_>, column: &str, what: &str) -> Result<f64> {
    let value = row.optional_number(column)?.unwrap_or(1.0);
    if value <= 0.0 {
        return Err(row.error(
            column,
            format!("must be positive ({what}; default 1), found {value}"),
        ));
    }
    Ok(value)
}
