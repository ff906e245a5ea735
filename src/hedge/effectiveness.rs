//! Hedge effectiveness: the book's PV distribution with and without a hedge.
//!
//! The hedged liability in a scenario is the book's PV less the hedge's value to the book's
//! owner, so a hedge that pays when the book costs more pulls in the upper tail. Run-off
//! capital is VaR − BE on each side (DESIGN.md), the hedged best estimate carrying the
//! hedge's cost on the central path; the reduction in capital is the hedge's capital relief.

use serde::Serialize;

use crate::risk::quantile::{quantile_sorted, sorted, summarize, tvar_sorted};

/// VaR, TVaR and run-off capital at one level, with and without the hedge.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TailComparison {
    /// Confidence level.
    pub level: f64,
    /// VaR of the book's PV.
    pub var_unhedged: f64,
    /// VaR of the hedged PV.
    pub var_hedged: f64,
    /// TVaR of the book's PV.
    pub tvar_unhedged: f64,
    /// TVaR of the hedged PV.
    pub tvar_hedged: f64,
    /// Run-off capital of the book: VaR − BE.
    pub capital_unhedged: f64,
    /// Run-off capital of the hedged book: VaR − BE, both hedged.
    pub capital_hedged: f64,
    /// 100 × (1 − hedged / unhedged capital); `None` when the book needs no capital.
    pub capital_reduction_pct: Option<f64>,
}

/// The book with and without one hedge.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Effectiveness {
    /// Best estimate of the book.
    pub best_estimate_unhedged: f64,
    /// Best estimate of the book less the hedge's value on the central path.
    pub best_estimate_hedged: f64,
    /// Standard deviation of the book's PV.
    pub sd_unhedged: f64,
    /// Standard deviation of the hedged PV.
    pub sd_hedged: f64,
    /// 100 × (1 − hedged / unhedged variance); `None` when the book's PV does not vary.
    pub variance_reduction_pct: Option<f64>,
    /// Tail figures at each level.
    pub tails: Vec<TailComparison>,
}

/// The hedged PV per scenario: the book's PV less the hedge's value to its owner.
pub fn hedged_pv(book_pv: &[f64], hedge_net: &[f64]) -> Vec<f64> {
    book_pv.iter().zip(hedge_net).map(|(p, h)| p - h).collect()
}

/// Compares the book's PV (`book_pv`, best estimate `best_estimate`) with the PV net of a
/// hedge worth `hedge_net` per scenario and `hedge_net_central` on the central path.
pub fn effectiveness(
    book_pv: &[f64],
    best_estimate: f64,
    hedge_net: &[f64],
    hedge_net_central: f64,
    levels: &[f64],
) -> Effectiveness {
    let hedged = hedged_pv(book_pv, hedge_net);
    let best_estimate_hedged = best_estimate - hedge_net_central;
    let (su, sh) = (sorted(book_pv), sorted(&hedged));
    let (sd_unhedged, sd_hedged) = (summarize(book_pv).std_dev, summarize(&hedged).std_dev);
    let tails = levels
        .iter()
        .map(|&level| {
            let (var_unhedged, var_hedged) =
                (quantile_sorted(&su, level), quantile_sorted(&sh, level));
            let capital_unhedged = var_unhedged - best_estimate;
            let capital_hedged = var_hedged - best_estimate_hedged;
            TailComparison {
                level,
                var_unhedged,
                var_hedged,
                tvar_unhedged: tvar_sorted(&su, level),
                tvar_hedged: tvar_sorted(&sh, level),
                capital_unhedged,
                capital_hedged,
                capital_reduction_pct: (capital_unhedged > 0.0)
                    .then(|| 100.0 * (1.0 - capital_hedged / capital_unhedged)),
            }
        })
        .collect();
    Effectiveness {
        best_estimate_unhedged: best_estimate,
        best_estimate_hedged,
        sd_unhedged,
        sd_hedged,
        variance_reduction_pct: (sd_unhedged > 0.0)
            .then(|| 100.0 * (1.0 - (sd_hedged / sd_unhedged).powi(2))),
        tails,
    }
}
