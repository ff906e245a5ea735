//! The `allocation` block of `summary.json`: capital by segment, and a tranche's marginal
//! capital. Per-policy figures go to `allocation.parquet`; the summary keeps what a reader
//! compares across runs, so it stays small whatever the book's size.

use serde::Serialize;

use crate::data::Book;
use crate::risk::allocation::{Allocation, LevelContributions};
use crate::risk::segments::{SegmentFigures, segment_figures};
use crate::risk::tranche::TrancheFigures;

/// One measure's allocation at one level.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MeasureAllocation {
    /// VaR of the book's PV.
    pub var: f64,
    /// TVaR of the book's PV.
    pub tvar: f64,
    /// TVaR − BE: what the TVaR contributions add up to.
    pub tvar_capital: f64,
    /// Sum of the policies' TVaR contributions.
    pub tvar_contribution: f64,
    /// Sum of the policies' VaR contributions (near VaR − BE; see the README).
    pub var_contribution: f64,
    /// Tail scenarios replayed (PV at or above VaR).
    pub tail_scenarios: usize,
    /// Window scenarios replayed around VaR.
    pub window_scenarios: usize,
    /// Figures by segment.
    pub segments: Vec<SegmentFigures>,
}

/// Allocation at one level.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LevelAllocation {
    /// Confidence level α.
    pub level: f64,
    /// Trend only.
    pub trend: MeasureAllocation,
    /// Trend and idiosyncratic risk, when deaths are simulated.
    pub trend_idiosyncratic: Option<MeasureAllocation>,
}

/// The whole `allocation` block.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AllocationSummary {
    /// Scenarios on each side of the VaR's rank averaged for the VaR contributions.
    pub var_window_each_side: usize,
    /// Per configured level.
    pub levels: Vec<LevelAllocation>,
    /// The candidate tranche's marginal capital, when `data.candidate_book` is given.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub tranche: Option<TrancheFigures>,
}

fn measure(book: &Book, allocation: &Allocation, level: &LevelContributions) -> MeasureAllocation {
    let best_estimate: f64 = allocation.best_estimate.iter().sum();
    MeasureAllocation {
        var: level.var,
        tvar: level.tvar,
        tvar_capital: level.tvar - best_estimate,
        tvar_contribution: level.tvar_contribution.iter().sum(),
        var_contribution: level.var_contribution.iter().sum(),
        tail_scenarios: level.tail_scenarios,
        window_scenarios: level.window_scenarios,
        segments: segment_figures(book, allocation, level),
    }
}

impl AllocationSummary {
    /// The summary of `allocation` of `book`.
    pub fn new(book: &Book, allocation: &Allocation) -> Self {
        let levels = allocation
            .trend
            .iter()
            .enumerate()
            .map(|(i, t)| LevelAllocation {
                level: t.level,
                trend: measure(book, allocation, t),
                trend_idiosyncratic: allocation
                    .trend_idiosyncratic
                    .as_ref()
                    .map(|s| measure(book, allocation, &s[i])),
            })
            .collect();
        AllocationSummary {
            var_window_each_side: allocation.var_window,
            levels,
            tranche: None,
        }
    }
}
