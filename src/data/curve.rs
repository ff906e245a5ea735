//! Discounting: a flat annual rate or a curve of annual spot rates.

use std::path::PathBuf;

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
        /// Terms in years, strictly increasing, all > 0.
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
