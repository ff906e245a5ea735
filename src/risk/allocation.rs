//! Capital allocated to each policy by the Euler principle, from replays of the tail.
//!
//! TVaR is a mean over the tail scenarios T, so its capital TVaR − BE splits exactly into
//! per-policy terms: policy i's contribution is the mean over T of PV_i − BE_i, and the
//! terms add up to the capital (Euler allocation for a homogeneous risk measure). VaR is
//! one order statistic, whose per-policy split is noisy; it is estimated by the same
//! average over a window of scenarios ranked around the VaR.
//!
//! The tail and the window are found from the per-scenario PVs the run already wrote (read
//! back a pass at a time, as the capital figures are); only those scenarios are valued
//! again, policy by policy ([`PolicyReplay`]), and their values summed into one running
//! total per policy and selection. Memory grows with the policies, not the scenarios.

use rayon::prelude::*;

use crate::error::{Error, Result};
use crate::risk::capital::CapitalSummary;
use crate::risk::order::{HELD, Sample, Streamed};
use crate::risk::quantile::Type7;
use crate::valuation::files::WrittenBook;
use crate::valuation::replay::{PolicyReplay, PolicyValues};

/// Scenarios on each side of the VaR's rank that the VaR allocation averages over, per
/// scenario of the run: one per thousand (10 each side at 10,000 scenarios), at least one.
pub const VAR_WINDOW_PER_SCENARIO: f64 = 0.001;

/// Scenarios on each side of the VaR's rank averaged for `scenarios` stochastic scenarios.
pub fn var_window(scenarios: usize) -> usize {
    ((scenarios as f64 * VAR_WINDOW_PER_SCENARIO).ceil() as usize).max(1)
}

/// Per-scenario PVs that can be read again in scenario order: a file of `book.parquet`'s
/// layout as written (the run's book, or a tranche's temporary one).
pub trait PvSource {
    /// Calls `each` with every stochastic scenario's number and PV, in scenario order:
    /// trend only (`pv_expected`), or with deaths simulated (`pv_simulated`).
    fn pass(&self, simulated: bool, each: &mut dyn FnMut(u64, f64)) -> Result<()>;
}

impl PvSource for WrittenBook {
    fn pass(&self, simulated: bool, each: &mut dyn FnMut(u64, f64)) -> Result<()> {
        let column = if simulated {
            "pv_simulated"
        } else {
            "pv_expected"
        };
        self.column(column).pass_scenarios(each)
    }
}

/// One PV column of a [`PvSource`] as a [`Sample`].
pub struct Column<'a, S: PvSource + ?Sized> {
    /// The source.
    pub source: &'a S,
    /// With deaths simulated or trend only.
    pub simulated: bool,
}

impl<S: PvSource + ?Sized> Sample for Column<'_, S> {
    fn pass(&self, each: &mut dyn FnMut(f64)) -> Result<()> {
        self.source.pass(self.simulated, &mut |_, x| each(x))
    }
}

/// One measure's allocation at one level, policy by policy in book order.
#[derive(Debug, Clone, PartialEq)]
pub struct LevelContributions {
    /// Confidence level α.
    pub level: f64,
    /// VaR_α of the book's PV.
    pub var: f64,
    /// TVaR_α of the book's PV.
    pub tvar: f64,
    /// Scenarios in the tail (PV at or above VaR).
    pub tail_scenarios: usize,
    /// Scenarios in the window around VaR.
    pub window_scenarios: usize,
    /// Mean over the tail of PV_i − BE_i.
    pub tvar_contribution: Vec<f64>,
    /// Mean over the window of PV_i − BE_i.
    pub var_contribution: Vec<f64>,
}

impl LevelContributions {
    /// Each policy's share of the TVaR capital: its contribution over their sum.
    pub fn capital_share(&self) -> Vec<f64> {
        let total: f64 = self.tvar_contribution.iter().sum();
        self.tvar_contribution.iter().map(|c| c / total).collect()
    }
}

/// A book's capital allocated to its policies.
#[derive(Debug, Clone, PartialEq)]
pub struct Allocation {
    /// Each policy's best estimate: its expected PV on the central path.
    pub best_estimate: Vec<f64>,
    /// Scenarios on each side of the VaR's rank in the VaR window.
    pub var_window: usize,
    /// Trend only, per level.
    pub trend: Vec<LevelContributions>,
    /// Trend and idiosyncratic risk, per level, when deaths are simulated.
    pub trend_idiosyncratic: Option<Vec<LevelContributions>>,
}

/// Which scenarios one (measure, level) averages over.
struct Selection {
    simulated: bool,
    /// Tail: PV at or above this.
    var: f64,
    /// Window: PV within these bounds.
    window: (f64, f64),
    tail_count: usize,
    window_count: usize,
    tail_sum: Vec<f64>,
    window_sum: Vec<f64>,
}

/// Scenarios replayed at once: enough to keep every thread busy, while each holds only its
/// scenario's per-policy values.
fn replay_chunk() -> usize {
    2 * rayon::current_num_threads()
}

/// Allocates the capital of a book whose per-scenario PVs are `source` and whose capital
/// figures are `trend` (and `trend_idiosyncratic`), replaying its tail with `replay`.
pub fn allocate<S: PvSource + ?Sized>(
    replay: &PolicyReplay<'_>,
    source: &S,
    trend: &CapitalSummary,
    trend_idiosyncratic: Option<&CapitalSummary>,
) -> Result<Allocation> {
    let n = replay.policies();
    let scenarios = trend.scenarios;
    if scenarios < 2 {
        return Err(Error::model(
            "allocation",
            "capital allocation needs stochastic scenarios: set `projection.noise = true` and at least 2 scenarios",
        ));
    }
    let m = var_window(scenarios);
    let measures: Vec<(bool, &CapitalSummary)> = std::iter::once((false, trend))
        .chain(trend_idiosyncratic.map(|c| (true, c)))
        .collect();
    let mut selections = Vec::new();
    for &(simulated, capital) in &measures {
        let column = Column { source, simulated };
        let sample = Streamed::new(&column, HELD)?;
        if sample.stats().count != scenarios {
            return Err(Error::model(
                "allocation",
                format!(
                    "{} PVs read back for {scenarios} scenarios",
                    sample.stats().count
                ),
            ));
        }
        for tail in &capital.tails {
            let rank = Type7::new(scenarios, tail.level).lo;
            let ranks = [rank.saturating_sub(m - 1), (rank + m).min(scenarios - 1)];
            let bounds = sample.order_statistics(&ranks)?;
            selections.push(Selection {
                simulated,
                var: tail.var,
                window: (bounds[0], bounds[1]),
                tail_count: 0,
                window_count: 0,
                tail_sum: vec![0.0; n],
                window_sum: vec![0.0; n],
            });
        }
    }
    // Each scenario to replay, with the selections it belongs to (bit 2s: tail of s,
    // bit 2s + 1: window of s).
    let mut wanted: std::collections::BTreeMap<u64, Vec<u16>> = Default::default();
    for &(simulated, _) in &measures {
        source.pass(simulated, &mut |scenario, x| {
            for (i, sel) in selections.iter_mut().enumerate() {
                if sel.simulated != simulated {
                    continue;
                }
                // `!(x < var)`: the tail the TVaR takes.
                if x >= sel.var {
                    sel.tail_count += 1;
                    wanted.entry(scenario).or_default().push(2 * i as u16);
                }
                if sel.window.0 <= x && x <= sel.window.1 {
                    sel.window_count += 1;
                    wanted.entry(scenario).or_default().push(2 * i as u16 + 1);
                }
            }
        })?;
    }
    let mut central = PolicyValues::default();
    replay.replay(0, &mut replay.buffers(), &mut central)?;
    let best_estimate = central.expected;

    let ids: Vec<(u64, Vec<u16>)> = wanted.into_iter().collect();
    for chunk in ids.chunks(replay_chunk()) {
        let values = chunk
            .par_iter()
            .map_init(
                || replay.buffers(),
                |buffers, (scenario, _)| {
                    let mut v = PolicyValues::default();
                    replay.replay(*scenario, buffers, &mut v)?;
                    Ok(v)
                },
            )
            .collect::<Result<Vec<_>>>()?;
        // In scenario order, whatever the thread count.
        for ((_, members), v) in chunk.iter().zip(&values) {
            for &bit in members {
                let sel = &mut selections[(bit / 2) as usize];
                let policy_pv = if sel.simulated {
                    &v.simulated
                } else {
                    &v.expected
                };
                let sum = if bit % 2 == 0 {
                    &mut sel.tail_sum
                } else {
                    &mut sel.window_sum
                };
                for (s, &x) in sum.iter_mut().zip(policy_pv) {
                    *s += x;
                }
            }
        }
    }

    let mut per_measure: Vec<Vec<LevelContributions>> = vec![Vec::new(); measures.len()];
    let mut selections = selections.into_iter();
    for (k, &(_, capital)) in measures.iter().enumerate() {
        for tail in &capital.tails {
            let sel = selections
                .next()
                .ok_or_else(|| Error::Numerical("allocation lost track of a selection".into()))?;
            let mean_less_be = |sum: &[f64], count: usize| -> Vec<f64> {
                sum.iter()
                    .zip(&best_estimate)
                    .map(|(s, be)| s / count as f64 - be)
                    .collect()
            };
            per_measure[k].push(LevelContributions {
                level: tail.level,
                var: tail.var,
                tvar: tail.tvar,
                tail_scenarios: sel.tail_count,
                window_scenarios: sel.window_count,
                tvar_contribution: mean_less_be(&sel.tail_sum, sel.tail_count),
                var_contribution: mean_less_be(&sel.window_sum, sel.window_count),
            });
        }
    }
    let mut per_measure = per_measure.into_iter();
    Ok(Allocation {
        best_estimate,
        var_window: m,
        trend: per_measure.next().unwrap_or_default(),
        trend_idiosyncratic: per_measure.next(),
    })
}
