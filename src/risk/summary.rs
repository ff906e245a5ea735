//! `summary.json`: the figures a run reports, with what is needed to trace and rerun it.

use serde::Serialize;

use crate::io::hash::InputHash;
use crate::risk::capital::{CapitalSummary, StressFigures};
use crate::risk::quantile::{quantile_sorted, sorted, summarize};

/// One-year capital by re-calibration.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct OneYearFigures {
    /// Re-calibrated scenarios.
    pub scenarios: usize,
    /// Confidence level.
    pub level: f64,
    /// Mean of the re-calibrated values.
    pub mean: f64,
    /// Their standard deviation.
    pub std_dev: f64,
    /// Their α-quantile (Hyndman–Fan type 7).
    pub var: f64,
    /// VaR − BE.
    pub capital: f64,
    /// Capital as a percentage of BE.
    pub capital_pct: f64,
}

impl OneYearFigures {
    /// Figures from the re-calibrated values at `level` against `best_estimate`.
    pub fn new(values: &[f64], best_estimate: f64, level: f64) -> Self {
        let stats = summarize(values);
        let var = quantile_sorted(&sorted(values), level);
        OneYearFigures {
            scenarios: values.len(),
            level,
            mean: stats.mean,
            std_dev: stats.std_dev,
            var,
            capital: var - best_estimate,
            capital_pct: 100.0 * (var - best_estimate) / best_estimate,
        }
    }
}

/// Run metadata recorded in every summary.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RunInfo {
    /// Always `tailspan`.
    pub tool: &'static str,
    /// Crate version.
    pub version: &'static str,
    /// The run's id: the same in every file the run wrote (see `io::provenance`).
    pub run_id: String,
    /// Seed of every random stream.
    pub seed: u64,
    /// Stochastic scenarios (scenario 0, the central path, comes on top).
    pub scenarios: usize,
    /// Projected model kind.
    pub model: String,
    /// Valuation year.
    pub valuation_year: i32,
    /// SHA-256 of the config file.
    pub config_sha256: String,
    /// Input files and their SHA-256.
    pub inputs: Vec<InputHash>,
}

/// The whole `summary.json`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RunSummary {
    /// Where the figures came from.
    pub run: RunInfo,
    /// Best estimate: the book's PV on the central path.
    pub best_estimate: f64,
    /// Trend risk only: the expected PV given each scenario's path.
    pub trend: CapitalSummary,
    /// Trend and idiosyncratic risk: each life's death simulated.
    pub trend_idiosyncratic: Option<CapitalSummary>,
    /// The standard-formula longevity stress on the best-estimate basis.
    pub standard_stress: StressFigures,
    /// One-year capital by re-calibration, when asked for.
    pub one_year: Option<OneYearFigures>,
    /// Hedge prices and effectiveness, when hedges are configured.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub hedges: Option<serde_json::Value>,
    /// Every valued model's fit quality, weight and figures, when several kinds are valued
    /// (the figures above are the first kind's).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub models: Option<Vec<crate::risk::model_average::ModelFigures>>,
    /// The weighted mixture of the valued models' distributions.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub model_average: Option<crate::risk::model_average::ModelAverage>,
    /// Capital allocated to segments, and a tranche's marginal capital, when
    /// `capital.allocation` is on.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub allocation: Option<crate::risk::allocation_summary::AllocationSummary>,
    /// Run-off capital by source (trend, the book's level and spread, idiosyncratic), when
    /// the book has its own basis (`[basis]`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub decomposition: Option<crate::risk::decomposition::Decomposition>,
}
