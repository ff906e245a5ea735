//! The discount curve: a flat annual rate or a curve of annual spot rates.
//!
//! Rates are annual effective decimals. A rate above 25 % a year is refused rather than
//! used: in practice it is a percentage typed as a number (3 for 3 %), and discounting at
//! 300 % would silently wipe out the book's value.

use std::fmt;
use std::path::PathBuf;

use super::discount::Discount;

/// Largest absolute annual rate accepted; larger values are taken for percentages.
pub const MAX_RATE: f64 = 0.25;

/// Longest term accepted, in years. No cash flow lies further out (payments stop by age 130),
/// so a larger number is a date, or a term in months or days, and would be misread.
pub const MAX_TERM: f64 = 300.0;

/// A discount curve: v(t) for any time t ≥ 0 in years.
#[derive(Debug, Clone, PartialEq)]
pub enum DiscountCurve {
    /// Flat annual effective rate.
    Flat {
        /// Annual effective rate (0.03 is 3 %).
        rate_pa: f64,
    },
    /// Annual effective spot rates by term in years, linearly interpolated in the rate
    /// and held flat beyond the last term.
    Spot {
        /// The file it came from.
        source: PathBuf,
        /// Terms in years, strictly increasing, all in (0, [`MAX_TERM`]].
        terms: Vec<f64>,
        /// Spot rates at those terms.
        rates: Vec<f64>,
    },
}

impl DiscountCurve {
    /// The annual spot rate for term `t` years.
    pub fn spot_rate(&self, t: f64) -> f64 {
        match self {
            DiscountCurve::Flat { rate_pa } => *rate_pa,
            DiscountCurve::Spot { terms, rates, .. } => {
                if t <= terms[0] {
                    return rates[0];
                }
                let last = terms.len() - 1;
                if t >= terms[last] {
                    return rates[last];
                }
                let i = terms.partition_point(|&x| x <= t) - 1;
                let w = (t - terms[i]) / (terms[i + 1] - terms[i]);
                rates[i] + w * (rates[i + 1] - rates[i])
            }
        }
    }

    /// The discount factor v(t) = (1 + s(t))^(−t).
    pub fn discount(&self, t: f64) -> f64 {
        (1.0 + self.spot_rate(t)).powf(-t)
    }
}

/// Checks an annual effective rate is above −1 and plausibly a decimal, not a percentage.
pub fn check_rate(rate: f64) -> Result<(), String> {
    if !rate.is_finite() || rate <= -1.0 {
        return Err(format!("{rate} must be a number above -1"));
    }
    if rate.abs() > MAX_RATE {
        return Err(format!(
            "{rate} would be an annual rate of {:.0} %; write rates as decimals ({} for {rate} %), at most {MAX_RATE} in size",
            rate * 100.0,
            rate / 100.0
        ));
    }
    Ok(())
}

impl fmt::Display for DiscountCurve {
    /// A one-line description of the basis, for summaries.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            DiscountCurve::Flat { rate_pa } => {
                write!(f, "flat {:.2} % a year", rate_pa * 100.0)
            }
            DiscountCurve::Spot {
                source,
                terms,
                rates,
            } => {
                let lo = rates.iter().copied().fold(f64::INFINITY, f64::min);
                let hi = rates.iter().copied().fold(f64::NEG_INFINITY, f64::max);
                write!(
                    f,
                    "spot curve {} ({} terms, {}-{} years, rates {:.2} % to {:.2} %, flat beyond)",
                    source.display(),
                    terms.len(),
                    terms[0],
                    terms[terms.len() - 1],
                    lo * 100.0,
                    hi * 100.0
                )
            }
        }
    }
}

impl Discount for DiscountCurve {
    fn discount(&self, t: f64) -> f64 {
        DiscountCurve::discount(self, t)
    }
}
