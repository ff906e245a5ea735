//! Actual against expected deaths: the book's experience read against the population's
//! fitted rates, overall, by five-year age band and by year, each with an exact Poisson
//! interval so that a reader can tell a real difference from chance.

use serde::Serialize;

use crate::basis::book_experience::BookCell;
use crate::basis::poisson_interval::garwood;

/// Confidence of the intervals.
pub const CONFIDENCE: f64 = 0.95;

/// Width of the age bands, in years of age.
pub const BAND_YEARS: i32 = 5;

/// Actual and expected deaths of a group of cells.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Comparison {
    /// The book's deaths.
    pub actual: f64,
    /// Deaths at the population's fitted rates, Σ E · m̂_pop.
    pub expected: f64,
    /// actual / expected.
    pub ratio: f64,
    /// Lower end of the 95 % interval of the ratio (Garwood 1936).
    pub lower: f64,
    /// Upper end of the 95 % interval of the ratio (Garwood 1936).
    pub upper: f64,
}

impl Comparison {
    /// The comparison of `cells`.
    pub fn of<'a>(cells: impl Iterator<Item = &'a BookCell>) -> Comparison {
        let (actual, expected) =
            cells.fold((0.0, 0.0), |(a, e), c| (a + c.deaths, e + c.expected()));
        let (lower, upper) = garwood(actual, CONFIDENCE);
        Comparison {
            actual,
            expected,
            ratio: actual / expected,
            lower: lower / expected,
            upper: upper / expected,
        }
    }
}

/// One age band's comparison.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BandComparison {
    /// First and last age of the band, inclusive.
    pub ages: [i32; 2],
    /// Its figures.
    #[serde(flatten)]
    pub comparison: Comparison,
}

/// One year's comparison.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct YearComparison {
    /// Calendar year.
    pub year: i32,
    /// Its figures.
    #[serde(flatten)]
    pub comparison: Comparison,
}

/// The book's actual-to-expected figures.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ActualToExpected {
    /// How the intervals are made.
    pub interval: &'static str,
    /// Every cell together.
    pub overall: Comparison,
    /// By five-year age band (60–64, 65–69, …), youngest first.
    pub by_age_band: Vec<BandComparison>,
    /// By calendar year.
    pub by_year: Vec<YearComparison>,
}

impl ActualToExpected {
    /// The figures of `cells`.
    pub fn of(cells: &[BookCell]) -> ActualToExpected {
        let band = |age: i32| age - age.rem_euclid(BAND_YEARS);
        let mut bands: Vec<i32> = cells.iter().map(|c| band(c.age)).collect();
        bands.sort_unstable();
        bands.dedup();
        let mut years: Vec<i32> = cells.iter().map(|c| c.year).collect();
        years.sort_unstable();
        years.dedup();
        ActualToExpected {
            interval: "95 % exact Poisson interval of the deaths (Garwood 1936), over expected",
            overall: Comparison::of(cells.iter()),
            by_age_band: bands
                .into_iter()
                .map(|b| BandComparison {
                    ages: [b, b + BAND_YEARS - 1],
                    comparison: Comparison::of(cells.iter().filter(|c| band(c.age) == b)),
                })
                .collect(),
            by_year: years
                .into_iter()
                .map(|y| YearComparison {
                    year: y,
                    comparison: Comparison::of(cells.iter().filter(|c| c.year == y)),
                })
                .collect(),
        }
    }
}
