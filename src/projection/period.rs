//! Period life expectancy: a one-number summary of a projected year's rates.
//!
//! A fan of e°65 over the projection shows at a glance whether the scenarios are plausible
//! before anything is valued.

use crate::life::Fractional;
use crate::life::table::complete_expectation;

/// Age at which the period expectation is reported.
pub const PERIOD_AGE: i32 = 65;

/// Complete expectation of life under UDD for rates `q` at consecutive ages from the age
/// of interest to `max_age` (where q is 1):
/// e° = Σ_k (k p + k+1 p) / 2, since under UDD ∫_k^{k+1} t p dt is the mean of its ends.
pub fn complete_expectancy(q: &[f64]) -> f64 {
    complete_expectation(q, Fractional::Udd)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn constant_rate_matches_geometric_series() {
        // Constant q below the top age and q = 1 there: with p = 1 − q and n ages before
        // the top, e° = (1 + p)/2 · (1 − pⁿ)/(1 − p) + pⁿ/2 (geometric series; UDD complete
        // expectation as in Dickson, Hardy & Waters, AMLCR, ch. 3 — from memory).
        let (q, n) = (0.05_f64, 55usize);
        let mut rates = vec![q; n];
        rates.push(1.0);
        let p = 1.0 - q;
        let expected =
            (1.0 + p) / 2.0 * (1.0 - p.powi(n as i32)) / (1.0 - p) + p.powi(n as i32) / 2.0;
        assert!((complete_expectancy(&rates) - expected).abs() < 1e-12);
        // Certain death within the year: half a year under UDD.
        assert_eq!(complete_expectancy(&[1.0]), 0.5);
    }
}
