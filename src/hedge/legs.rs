//! What every hedge shares: the book's per-scenario results as inputs, year-end settlement
//! discounting, per-scenario leg values and the summary of their distributions.
//!
//! Hedges settle once a year, at the end of each policy year (time k + 1 for policy year
//! k), because a year's realised benefits or rate are known only when the year is over;
//! annual net settlement in arrears is common practice for longevity swaps and q-forwards.

use serde::Serialize;

use crate::error::{Error, Result};
use crate::hedge::spec::{FloatingBasis, HedgeConfig};
use crate::hedge::swap::covered_years;
use crate::interest::DiscountCurve;
use crate::risk::capital::REPORTED_QUANTILES;
use crate::risk::quantile::{quantile_sorted, sorted, summarize};
use crate::valuation::ScenarioValue;

/// The book's valuation results as the hedges see them.
#[derive(Debug, Clone, Copy)]
pub struct BookResults<'a> {
    /// The central path (noise off): its `cash_expected` are the best-estimate benefits and
    /// its `pv_expected` is the best estimate.
    pub central: &'a ScenarioValue,
    /// Every scenario's values, in scenario order.
    pub scenarios: &'a [ScenarioValue],
}

impl BookResults<'_> {
    /// Policy years of cash flow.
    pub fn years(&self) -> usize {
        self.central.cash_expected.len()
    }

    /// The figures the hedges of `config` use, discounted on `curve`, checked.
    pub fn sample(&self, config: &HedgeConfig, curve: &DiscountCurve) -> Result<BookSample> {
        let sampler = BookSampler::new(config, curve, self.years());
        let mut sample = BookSample::with_central(self.central.clone());
        for (s, v) in self.scenarios.iter().enumerate() {
            sampler.push(&mut sample, s, v)?;
        }
        sample.check()?;
        Ok(sample)
    }
}

/// What the hedges need of the book, a few numbers a scenario: its PV, its idiosyncratic
/// part, and each swap's floating leg at π = 0. Gathered while the scenarios are valued,
/// so that pricing a million scenarios does not keep a million scenarios' cash flows.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct BookSample {
    /// The central path in full: its expected cash flows are the fixed legs' amounts.
    pub central: ScenarioValue,
    /// The book's PV per scenario (simulated when individual deaths were simulated).
    pub pv: Vec<f64>,
    /// `pv_simulated − pv_expected` per scenario (NaN when not simulated).
    pub idiosyncratic: Vec<f64>,
    /// Per `[[hedge.swap]]`, in config order: the floating leg's PV at π = 0 per scenario.
    pub floating: Vec<Vec<f64>>,
    /// With `[basis]` and index hedges: the book's PV per scenario had it followed the
    /// index population at its fitted level and the spread's expected path (its own level
    /// and spread not drawn), with the same individual deaths; empty otherwise.
    pub pv_index: Vec<f64>,
}

impl BookSample {
    /// An empty sample around the central path.
    pub fn with_central(central: ScenarioValue) -> Self {
        BookSample {
            central,
            ..BookSample::default()
        }
    }

    /// Checks the central path and that there is a scenario.
    pub fn check(&self) -> Result<()> {
        if self.pv.is_empty() {
            return Err(Error::Numerical("hedges need at least one scenario".into()));
        }
        if self.central.cash_expected.is_empty() || !all_finite(&self.central.cash_expected) {
            return Err(Error::Numerical(
                "the central path has no finite best-estimate cash flows".into(),
            ));
        }
        if !self.central.pv_expected.is_finite() {
            return Err(Error::Numerical("the best estimate is not finite".into()));
        }
        Ok(())
    }

    /// Policy years of cash flow.
    pub fn years(&self) -> usize {
        self.central.cash_expected.len()
    }

    /// The best estimate of the book's PV.
    pub fn best_estimate(&self) -> f64 {
        self.central.pv_expected
    }

    /// Standard deviation of the idiosyncratic part of the PV; `None` when individual
    /// deaths were not simulated.
    pub fn idiosyncratic_sd(&self) -> Option<f64> {
        all_finite(&self.idiosyncratic).then(|| summarize(&self.idiosyncratic).std_dev)
    }
}

/// Reduces each scenario's values to its [`BookSample`] figures.
#[derive(Debug, Clone)]
pub struct BookSampler {
    years: usize,
    swaps: Vec<(FloatingBasis, Vec<f64>)>,
}

impl BookSampler {
    /// For the swaps of `config` on a book with `years` policy years of cash flow.
    pub fn new(config: &HedgeConfig, curve: &DiscountCurve, years: usize) -> Self {
        let swaps = config
            .swap
            .iter()
            .map(|s| {
                let covered = covered_years(s.term.map(|t| t as usize), years);
                (s.floating, settlement_discounts(curve, covered))
            })
            .collect();
        BookSampler { years, swaps }
    }

    /// Adds scenario `s` (counted from 0 among the stochastic ones) to `sample`.
    pub fn push(&self, sample: &mut BookSample, s: usize, v: &ScenarioValue) -> Result<()> {
        self.push_with_index(sample, s, v, &v.cash_expected)
    }

    /// As [`Self::push`], with the parametric swaps floating on `index_cash`: the book's
    /// expected benefits on the index population's path, when the book's own rates
    /// (`[basis]`) add a level and spread of their own that an index does not see.
    pub fn push_with_index(
        &self,
        sample: &mut BookSample,
        s: usize,
        v: &ScenarioValue,
        index_cash: &[f64],
    ) -> Result<()> {
        let years = self.years;
        if index_cash.len() != years || !all_finite(index_cash) {
            return Err(Error::Numerical(format!(
                "scenario {s}: the index's expected cash flows must cover {years} policy years with finite values"
            )));
        }
        let cash = realised_cash(v);
        if cash.len() != years || !all_finite(cash) || !book_pv(v).is_finite() {
            return Err(Error::Numerical(format!(
                "scenario {s}: cash flows must cover {years} policy years with finite values, found {} years",
                cash.len()
            )));
        }
        if !v.cash_simulated.is_empty() && v.cash_expected.len() != years {
            return Err(Error::Numerical(format!(
                "scenario {s}: expected cash flows cover {} policy years, not {years}",
                v.cash_expected.len()
            )));
        }
        sample.pv.push(book_pv(v));
        sample.idiosyncratic.push(v.pv_simulated - v.pv_expected);
        sample.floating.resize_with(self.swaps.len(), Vec::new);
        for ((basis, discounts), out) in self.swaps.iter().zip(&mut sample.floating) {
            let cash = match basis {
                FloatingBasis::Indemnity => realised_cash(v),
                FloatingBasis::Parametric => index_cash,
            };
            out.push(settled_pv(cash, discounts));
        }
        Ok(())
    }
}

/// PV at π = 0 of a swap's floating leg in one scenario.
pub fn floating_pv(basis: FloatingBasis, v: &ScenarioValue, discounts: &[f64]) -> f64 {
    let cash = match basis {
        FloatingBasis::Indemnity => realised_cash(v),
        FloatingBasis::Parametric => &v.cash_expected,
    };
    settled_pv(cash, discounts)
}

/// The realised benefits of a scenario: simulated when individual deaths were simulated,
/// else the expected benefits on its path.
pub fn realised_cash(v: &ScenarioValue) -> &[f64] {
    if v.cash_simulated.is_empty() {
        &v.cash_expected
    } else {
        &v.cash_simulated
    }
}

/// The book's PV in a scenario: simulated when individual deaths were simulated.
pub fn book_pv(v: &ScenarioValue) -> f64 {
    if v.pv_simulated.is_finite() {
        v.pv_simulated
    } else {
        v.pv_expected
    }
}

fn all_finite(values: &[f64]) -> bool {
    values.iter().all(|x| x.is_finite())
}

/// Discount factors of the year-end settlements of policy years `0..years`: v(k + 1).
pub fn settlement_discounts(curve: &DiscountCurve, years: usize) -> Vec<f64> {
    (0..years).map(|k| curve.discount(k as f64 + 1.0)).collect()
}

/// PV of yearly amounts settled at year-end, over the years `discounts` covers.
pub fn settled_pv(cash: &[f64], discounts: &[f64]) -> f64 {
    cash.iter().zip(discounts).map(|(c, v)| c * v).sum()
}

/// One contract's legs per scenario, as PVs at the valuation date, seen by the book's owner.
#[derive(Debug, Clone, PartialEq)]
pub struct LegValues {
    /// PV of the fixed leg (the same in every scenario).
    pub fixed_leg: f64,
    /// PV of the floating leg per scenario.
    pub floating_leg: Vec<f64>,
    /// Value to the book's owner per scenario (its side's receipts less its payments).
    pub net: Vec<f64>,
    /// Value to the book's owner on the central path.
    pub net_central: f64,
}

/// Mean, spread and quantiles of a per-scenario quantity.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Distribution {
    /// Arithmetic mean.
    pub mean: f64,
    /// Sample standard deviation (divisor n − 1).
    pub std_dev: f64,
    /// Smallest value.
    pub min: f64,
    /// Largest value.
    pub max: f64,
    /// (probability, Hyndman–Fan type-7 quantile) pairs.
    pub quantiles: Vec<(f64, f64)>,
}

impl Distribution {
    /// Summarises a non-empty sample.
    pub fn of(values: &[f64]) -> Self {
        let stats = summarize(values);
        let s = sorted(values);
        Distribution {
            mean: stats.mean,
            std_dev: stats.std_dev,
            min: stats.min,
            max: stats.max,
            quantiles: REPORTED_QUANTILES
                .iter()
                .map(|&p| (p, quantile_sorted(&s, p)))
                .collect(),
        }
    }
}
