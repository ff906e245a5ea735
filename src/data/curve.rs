//! The spot-rate CSV loader and the config's choice of discount basis.
//!
//! The curve itself lives in [`crate::interest`]; this file only turns a user's file or
//! `[valuation]` keys into one, naming the row, column or key at fault.

use std::io::Read;
use std::path::Path;

use crate::data::Config;
use crate::data::csv_input::Table;
use crate::error::{Error, Result};
use crate::interest::DiscountCurve;
use crate::interest::curve::{MAX_TERM, check_rate};

/// Columns of the spot-rate CSV.
pub const CURVE_COLUMNS: [&str; 2] = ["term", "rate"];

impl DiscountCurve {
    /// Reads a spot-rate CSV `term,rate`: terms in years, in (0, 300] and strictly increasing;
    /// annual effective rates above −1 and at most 25 % in size.
    pub fn load(path: &Path) -> Result<DiscountCurve> {
        let file = std::fs::File::open(path).map_err(|e| Error::io(path, e))?;
        DiscountCurve::from_reader(path, file)
    }

    /// As [`DiscountCurve::load`] on any reader; `path` names the input in messages.
    pub fn from_reader(path: &Path, reader: impl Read) -> Result<DiscountCurve> {
        let table = Table::from_reader(reader, path, &CURVE_COLUMNS, &[])?;
        if table.is_empty() {
            return Err(table.file_error("no rates after the header"));
        }
        let mut terms: Vec<f64> = Vec::with_capacity(table.len());
        let mut rates = Vec::with_capacity(table.len());
        for row in table.rows() {
            let term = row.number("term")?;
            if term <= 0.0 {
                return Err(row.error("term", format!("must be above 0 years, found {term}")));
            }
            if term > MAX_TERM {
                return Err(row.error(
                    "term",
                    format!(
                        "{term} years is implausible: terms are in years, at most {MAX_TERM} (a date, or a term in months or days?)"
                    ),
                ));
            }
            if let Some(&previous) = terms.last()
                && term <= previous
            {
                return Err(row.error(
                    "term",
                    format!("terms must increase strictly: {term} follows {previous}"),
                ));
            }
            let rate = row.number("rate")?;
            check_rate(rate).map_err(|rule| row.error("rate", rule))?;
            terms.push(term);
            rates.push(rate);
        }
        Ok(DiscountCurve::Spot {
            source: path.to_path_buf(),
            terms,
            rates,
        })
    }

    /// The discount basis a config asks for: `valuation.rate` (flat) or `valuation.curve`.
    /// Neither is an error naming `valuation.rate`: a book is never valued at a rate
    /// nobody chose.
    pub fn from_config(config: &Config) -> Result<DiscountCurve> {
        let v = &config.valuation;
        match (v.rate, &v.curve) {
            (Some(_), Some(_)) => Err(Error::config(
                &config.file,
                "valuation.rate",
                "give either `rate` or `curve`, not both",
            )),
            (Some(rate_pa), None) => {
                check_rate(rate_pa)
                    .map_err(|rule| Error::config(&config.file, "valuation.rate", rule))?;
                Ok(DiscountCurve::Flat { rate_pa })
            }
            (None, Some(curve)) => DiscountCurve::load(&config.resolve(curve)),
            (None, None) => Err(Error::config(
                &config.file,
                "valuation.rate",
                "no discount basis: set `valuation.rate` (e.g. 0.03 for 3 %) or `valuation.curve` (a `term,rate` CSV) to value the book",
            )),
        }
    }
}
