//! Capital figures from a sample of book present values.
//!
//! A liability is at risk when it is large, so VaR_α is the α-quantile of the PV
//! distribution (not of a loss measured below zero), run-off capital is VaR_α − BE, and
//! TVaR_α is the mean of the PVs at or above VaR_α. BE is the PV on the central path;
//! the scenario mean is reported beside it because the two differ when the model is
//! non-linear in its indices.

use serde::Serialize;

use crate::error::Result;
use crate::risk::order::{Sample, Streamed};
use crate::risk::quantile::{quantile_sorted, sorted, summarize, tvar_sorted};

/// Tail figures at one confidence level.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TailFigures {
    /// Confidence level α.
    pub level: f64,
    /// VaR_α: the α-quantile of the PV (Hyndman–Fan type 7).
    pub var: f64,
    /// TVaR_α: mean PV at or above VaR_α.
    pub tvar: f64,
    /// Run-off capital VaR_α − BE.
    pub capital: f64,
    /// Run-off capital as a percentage of BE.
    pub capital_pct: f64,
}

/// The distribution of one PV measure and the capital it implies.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CapitalSummary {
    /// Scenarios in the sample.
    pub scenarios: usize,
    /// Best estimate: PV on the central path.
    pub best_estimate: f64,
    /// Mean PV over the scenarios.
    pub mean: f64,
    /// Sample standard deviation.
    pub std_dev: f64,
    /// Smallest PV.
    pub min: f64,
    /// Largest PV.
    pub max: f64,
    /// Selected quantiles as (probability, value).
    pub quantiles: Vec<(f64, f64)>,
    /// VaR, TVaR and capital at each configured level.
    pub tails: Vec<TailFigures>,
}

/// Probabilities reported in every summary besides the configured levels.
pub const REPORTED_QUANTILES: [f64; 9] = [0.005, 0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 0.95, 0.995];

impl CapitalSummary {
    /// Summarises `values` (non-empty, finite) against `best_estimate` at `levels`.
    pub fn new(values: &[f64], best_estimate: f64, levels: &[f64]) -> Self {
        let stats = summarize(values);
        let s = sorted(values);
        CapitalSummary {
            scenarios: stats.count,
            best_estimate,
            mean: stats.mean,
            std_dev: stats.std_dev,
            min: stats.min,
            max: stats.max,
            quantiles: REPORTED_QUANTILES
                .iter()
                .map(|&p| (p, quantile_sorted(&s, p)))
                .collect(),
            tails: levels
                .iter()
                .map(|&level| {
                    let var = quantile_sorted(&s, level);
                    TailFigures {
                        level,
                        var,
                        tvar: tvar_sorted(&s, level),
                        capital: var - best_estimate,
                        capital_pct: 100.0 * (var - best_estimate) / best_estimate,
                    }
                })
                .collect(),
        }
    }
}

impl CapitalSummary {
    /// The same figures from a sample read pass by pass (see [`crate::risk::order`]),
    /// equal to [`CapitalSummary::new`] on the whole sample bit for bit.
    pub fn streamed<S: Sample + ?Sized>(
        sample: &Streamed<'_, S>,
        best_estimate: f64,
        levels: &[f64],
    ) -> Result<Self> {
        let stats = sample.stats();
        let mut probabilities = REPORTED_QUANTILES.to_vec();
        probabilities.extend_from_slice(levels);
        let values = sample.quantiles(&probabilities)?;
        let (reported, vars) = values.split_at(REPORTED_QUANTILES.len());
        let tails = levels
            .iter()
            .zip(vars)
            .map(|(&level, &var)| {
                Ok(TailFigures {
                    level,
                    var,
                    tvar: sample.tail_mean(var)?,
                    capital: var - best_estimate,
                    capital_pct: 100.0 * (var - best_estimate) / best_estimate,
                })
            })
            .collect::<Result<Vec<_>>>()?;
        Ok(CapitalSummary {
            scenarios: stats.count,
            best_estimate,
            mean: stats.mean,
            std_dev: stats.std_dev,
            min: stats.min,
            max: stats.max,
            quantiles: REPORTED_QUANTILES
                .iter()
                .copied()
                .zip(reported.iter().copied())
                .collect(),
            tails,
        })
    }
}

/// The standard-formula longevity stress beside the stochastic figures.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StressFigures {
    /// Decrease in every future q (0.20 is 20 %).
    pub decrease: f64,
    /// PV on the best-estimate basis with q × (1 − decrease).
    pub stressed_pv: f64,
    /// Stressed PV − BE.
    pub capital: f64,
    /// Capital as a percentage of BE.
    pub capital_pct: f64,
}

impl StressFigures {
    /// Figures from the base and stressed best estimates.
    pub fn new(decrease: f64, best_estimate: f64, stressed_pv: f64) -> Self {
        StressFigures {
            decrease,
            stressed_pv,
            capital: stressed_pv - best_estimate,
            capital_pct: 100.0 * (stressed_pv - best_estimate) / best_estimate,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn capital_is_var_less_best_estimate() {
        // Values 1..=100: type-7 VaR at 0.99 is 1 + 99·0.99 = 99.01 (hand count).
        let v: Vec<f64> = (1..=100).map(f64::from).collect();
        let s = CapitalSummary::new(&v, 50.0, &[0.99]);
        let t = &s.tails[0];
        assert!((t.var - 99.01).abs() < 1e-12);
        assert!((t.capital - 49.01).abs() < 1e-12);
        assert!((t.tvar - 100.0).abs() < 1e-12);
        assert!((s.mean - 50.5).abs() < 1e-12);
    }

    #[test]
    fn streamed_summary_equals_the_sorted_one() {
        // Values 1..=1000 shuffled by a fixed stride; the reference is the in-memory path
        // (type 7 on the sorted copy), whose hand-counted case is the test above.
        let v: Vec<f64> = (0..1000).map(|i| f64::from((i * 379) % 1000 + 1)).collect();
        let levels = [0.9, 0.995];
        let expected = CapitalSummary::new(&v, 500.0, &levels);
        for held in [3, 100, 10_000] {
            let sample = Streamed::new(&v[..], held).unwrap();
            assert_eq!(
                CapitalSummary::streamed(&sample, 500.0, &levels).unwrap(),
                expected
            );
        }
    }
}
