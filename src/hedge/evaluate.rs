//! Every configured hedge priced, valued per scenario and tested against the book in one
//! call, so the `hedge` command and the hedge stage of `run` only gather inputs and write.

use serde::Serialize;

use crate::data::Sex;
use crate::error::{Error, Result};
use crate::hedge::effectiveness::{Effectiveness, effectiveness};
use crate::hedge::legs::{BookSample, Distribution, LegValues};
use crate::hedge::pricing::{
    CostOfCapitalPrice, PremiumQuote, SharpePrice, cost_of_capital, sharpe,
};
use crate::hedge::qforward::{QForwardTerms, ReferenceRates, hedge_ratio};
use crate::hedge::spec::{
    FloatingBasis, HedgeConfig, NotionalChoice, PremiumChoice, QForwardConfig, Side, SwapConfig,
};
use crate::hedge::swap::SwapTerms;
use crate::interest::DiscountCurve;

/// Column names of `hedge.parquet`, in order.
pub const HEDGE_COLUMNS: [&str; 5] = ["scenario", "contract", "fixed_leg", "floating_leg", "net"];

/// What the hedges are evaluated on.
#[derive(Debug, Clone, Copy)]
pub struct HedgeInputs<'a> {
    /// The book's per-scenario figures.
    pub book: &'a BookSample,
    /// Discounting of the settlements (the valuation's basis).
    pub curve: &'a DiscountCurve,
    /// Valuation year V: policy year k is calendar year V + k.
    pub valuation_year: i32,
    /// Reference rates of each `[[hedge.qforward]]`, in config order.
    pub references: &'a [ReferenceRates],
    /// Confidence levels of the effectiveness figures (`capital.levels`).
    pub levels: &'a [f64],
}

/// Which loading a swap is valued at.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum PremiumBasis {
    /// The rate given in the config.
    Given,
    /// The cost-of-capital price.
    CostOfCapital,
    /// The target-Sharpe price.
    Sharpe,
}

/// How a q-forward's notional was set.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum NotionalBasis {
    /// The amount given in the config.
    Given,
    /// The minimum-variance hedge ratio.
    HedgeRatio,
}

/// One swap for `summary.json` and the report.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SwapSummary {
    /// Contract name.
    pub name: String,
    /// What the floating leg pays.
    pub floating: FloatingBasis,
    /// The book owner's side.
    pub side: Side,
    /// Configured term in years; `None` is to run-off.
    pub term_years: Option<usize>,
    /// Policy years actually covered (the term, or the book's run-off).
    pub covered_years: usize,
    /// Share of the book covered.
    pub share: f64,
    /// PV of the fixed leg at π = 0: the best-estimate benefits covered.
    pub fixed_leg_at_zero: f64,
    /// Price by cost of capital.
    pub cost_of_capital: CostOfCapitalPrice,
    /// Price by target Sharpe ratio.
    pub sharpe: SharpePrice,
    /// Which price the legs below are valued at.
    pub applied_basis: PremiumBasis,
    /// The loading applied.
    pub applied: PremiumQuote,
    /// PV of the fixed leg at the applied loading.
    pub fixed_leg: f64,
    /// PV of the floating leg across scenarios.
    pub floating_leg: Distribution,
    /// Value to the book's owner across scenarios.
    pub net: Distribution,
    /// The book with and without the swap.
    pub effectiveness: Effectiveness,
    /// For a parametric swap on a book with its own basis (`[basis]`): per capital level,
    /// hedged capital less the hedged capital of the book had it followed the index at
    /// its fitted level and spread (the same scenarios and deaths).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub capital_left_by_basis_risk: Option<Vec<f64>>,
}

/// One q-forward for `summary.json` and the report.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct QForwardSummary {
    /// Contract name.
    pub name: String,
    /// The book owner's side.
    pub side: Side,
    /// Reference sex.
    pub sex: Sex,
    /// Reference age.
    pub age: i32,
    /// Reference calendar year.
    pub maturity: i32,
    /// Years from the valuation date to settlement (end of the maturity year).
    pub settlement_years: f64,
    /// Reference rate on the central path.
    pub central_rate: f64,
    /// Risk premium below the central rate.
    pub premium: f64,
    /// Fixed rate q_central × (1 − premium).
    pub fixed_rate: f64,
    /// Notional used.
    pub notional: f64,
    /// How the notional was set.
    pub notional_basis: NotionalBasis,
    /// Minimum-variance notional against the book; `None` when the rate does not vary.
    pub hedge_ratio: Option<f64>,
    /// The realised reference rate across scenarios.
    pub realised_rate: Distribution,
    /// PV of the fixed leg.
    pub fixed_leg: f64,
    /// PV of the floating leg across scenarios.
    pub floating_leg: Distribution,
    /// Value to the book's owner across scenarios.
    pub net: Distribution,
    /// The book with and without the q-forward.
    pub effectiveness: Effectiveness,
    /// Standard deviation of the book's idiosyncratic PV, which an index hedge leaves in
    /// place; `None` when individual deaths were not simulated.
    pub unhedgeable_sd: Option<f64>,
    /// On a book with its own basis (`[basis]`): per capital level, hedged capital less
    /// the hedged capital of the book had it followed the index at its fitted level and
    /// spread (the same scenarios and deaths).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub capital_left_by_basis_risk: Option<Vec<f64>>,
}

/// One contract's summary, tagged by kind.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "kebab-case")]
pub enum ContractSummary {
    /// A longevity swap.
    Swap(SwapSummary),
    /// A q-forward.
    #[serde(rename = "qforward")]
    QForward(QForwardSummary),
}

/// The `hedge` block of `summary.json`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct HedgeSummary {
    /// Annual cost-of-capital rate.
    pub cost_of_capital: f64,
    /// Confidence level of the provider's capital.
    pub capital_level: f64,
    /// Target Sharpe ratio.
    pub target_sharpe: f64,
    /// Standard deviation of the book's idiosyncratic PV; `None` when not simulated.
    pub idiosyncratic_sd: Option<f64>,
    /// Every contract, swaps first, in config order.
    pub contracts: Vec<ContractSummary>,
}

/// Everything the hedge stage produces.
#[derive(Debug, Clone, PartialEq)]
pub struct HedgeResults {
    /// For `summary.json` and the report.
    pub summary: HedgeSummary,
    /// Per-scenario legs by contract name, in the order of `summary.contracts`.
    pub values: Vec<(String, LegValues)>,
}

/// The rows of `hedge.parquet` as columns (see [`HEDGE_COLUMNS`]).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct HedgeTable {
    /// Scenario number.
    pub scenario: Vec<u64>,
    /// Contract name.
    pub contract: Vec<String>,
    /// PV of the fixed leg.
    pub fixed_leg: Vec<f64>,
    /// PV of the floating leg.
    pub floating_leg: Vec<f64>,
    /// Value to the book's owner.
    pub net: Vec<f64>,
}

impl HedgeResults {
    /// The per-scenario rows, contract by contract; `scenario_ids[s]` numbers scenario s.
    pub fn table(&self, scenario_ids: &[u64]) -> Result<HedgeTable> {
        let mut t = HedgeTable::default();
        for (name, v) in &self.values {
            if v.net.len() != scenario_ids.len() {
                return Err(Error::Numerical(format!(
                    "hedge `{name}` has {} scenarios but {} scenario numbers were given",
                    v.net.len(),
                    scenario_ids.len()
                )));
            }
            t.scenario.extend_from_slice(scenario_ids);
            t.contract
                .extend(std::iter::repeat_n(name.clone(), scenario_ids.len()));
            t.fixed_leg
                .extend(std::iter::repeat_n(v.fixed_leg, scenario_ids.len()));
            t.floating_leg.extend_from_slice(&v.floating_leg);
            t.net.extend_from_slice(&v.net);
        }
        Ok(t)
    }
}

/// Prices and values every contract of `config` on `inputs`.
pub fn evaluate(config: &HedgeConfig, inputs: &HedgeInputs<'_>) -> Result<HedgeResults> {
    let book = inputs.book;
    book.check()?;
    if inputs.references.len() != config.qforward.len() {
        return Err(Error::Numerical(format!(
            "{} q-forwards configured but reference rates given for {}",
            config.qforward.len(),
            inputs.references.len()
        )));
    }
    let pv = &book.pv;
    let idiosyncratic_sd = book.idiosyncratic_sd();
    let mut contracts = Vec::new();
    let mut values = Vec::new();
    for (i, s) in config.swap.iter().enumerate() {
        let (summary, v) = evaluate_swap(config, s, i, inputs, pv)?;
        values.push((summary.name.clone(), v));
        contracts.push(ContractSummary::Swap(summary));
    }
    for (i, (q, reference)) in config.qforward.iter().zip(inputs.references).enumerate() {
        let (mut summary, v) = evaluate_qforward(q, i, reference, inputs, pv)?;
        summary.unhedgeable_sd = idiosyncratic_sd;
        values.push((summary.name.clone(), v));
        contracts.push(ContractSummary::QForward(summary));
    }
    Ok(HedgeResults {
        summary: HedgeSummary {
            cost_of_capital: config.cost_of_capital,
            capital_level: config.capital_level,
            target_sharpe: config.target_sharpe,
            idiosyncratic_sd,
            contracts,
        },
        values,
    })
}

/// Hedged capital less the hedged capital of the book on the index's rates, per level,
/// when the sample holds the book's PV on the index's rates.
fn basis_risk_capital(inputs: &HedgeInputs<'_>, net: &[f64], net_central: f64) -> Option<Vec<f64>> {
    let book = inputs.book;
    if book.pv_index.len() != book.pv.len() || book.pv.is_empty() {
        return None;
    }
    let best_estimate = book.best_estimate();
    let own = effectiveness(&book.pv, best_estimate, net, net_central, inputs.levels);
    let index = effectiveness(
        &book.pv_index,
        best_estimate,
        net,
        net_central,
        inputs.levels,
    );
    Some(
        own.tails
            .iter()
            .zip(&index.tails)
            .map(|(o, i)| o.capital_hedged - i.capital_hedged)
            .collect(),
    )
}

fn evaluate_swap(
    config: &HedgeConfig,
    s: &SwapConfig,
    index: usize,
    inputs: &HedgeInputs<'_>,
    pv: &[f64],
) -> Result<(SwapSummary, LegValues)> {
    let terms = SwapTerms {
        name: s.name_at(index),
        term_years: s.term.map(|t| t as usize),
        share: s.share,
        floating: s.floating,
        side: s.side,
    };
    let legs = terms.legs_of(inputs.book, index, inputs.curve)?;
    let coc = cost_of_capital(&legs, s.share, config.cost_of_capital, config.capital_level);
    let sh = sharpe(&legs, s.share, config.target_sharpe);
    let (applied_basis, applied) = match s.premium {
        PremiumChoice::Rate(rate) => (
            PremiumBasis::Given,
            PremiumQuote {
                rate,
                amount: s.share * rate * legs.fixed_at_zero,
            },
        ),
        PremiumChoice::CostOfCapital => (PremiumBasis::CostOfCapital, coc.premium.clone()),
        PremiumChoice::Sharpe => (PremiumBasis::Sharpe, sh.premium.clone()),
    };
    let v = terms.values(&legs, applied.rate);
    let summary = SwapSummary {
        covered_years: legs.discounts.len(),
        fixed_leg_at_zero: s.share * legs.fixed_at_zero,
        fixed_leg: v.fixed_leg,
        floating_leg: Distribution::of(&v.floating_leg),
        net: Distribution::of(&v.net),
        effectiveness: effectiveness(
            pv,
            inputs.book.best_estimate(),
            &v.net,
            v.net_central,
            inputs.levels,
        ),
        capital_left_by_basis_risk: (terms.floating == FloatingBasis::Parametric)
            .then(|| basis_risk_capital(inputs, &v.net, v.net_central))
            .flatten(),
        name: terms.name,
        floating: terms.floating,
        side: terms.side,
        term_years: terms.term_years,
        share: s.share,
        cost_of_capital: coc,
        sharpe: sh,
        applied_basis,
        applied,
    };
    Ok((summary, v))
}

fn evaluate_qforward(
    q: &QForwardConfig,
    index: usize,
    reference: &ReferenceRates,
    inputs: &HedgeInputs<'_>,
    pv: &[f64],
) -> Result<(QForwardSummary, LegValues)> {
    let terms = QForwardTerms {
        name: q.name_at(index),
        sex: q.sex,
        age: q.age,
        maturity: q.maturity,
        premium: q.premium,
        side: q.side,
    };
    terms.check(reference, pv.len())?;
    let discount = terms.settlement_discount(inputs.curve, inputs.valuation_year);
    let ratio = hedge_ratio(pv, &reference.realised, discount);
    let (notional, notional_basis) = match q.notional {
        NotionalChoice::Amount(n) => (n, NotionalBasis::Given),
        NotionalChoice::HedgeRatio => match ratio {
            Some(n) => (n, NotionalBasis::HedgeRatio),
            None => {
                return Err(Error::Numerical(format!(
                    "`hedge.qforward[{index}].notional`: the reference rate q({}, {}) for sex {} is the same in every scenario, so there is no hedge ratio; give an amount",
                    q.age, q.maturity, q.sex
                )));
            }
        },
    };
    let v = terms.values(notional, reference, discount);
    let summary = QForwardSummary {
        settlement_years: terms.settlement_years(inputs.valuation_year),
        central_rate: reference.central,
        fixed_rate: terms.fixed_rate(reference.central),
        notional,
        notional_basis,
        hedge_ratio: ratio,
        realised_rate: Distribution::of(&reference.realised),
        fixed_leg: v.fixed_leg,
        floating_leg: Distribution::of(&v.floating_leg),
        net: Distribution::of(&v.net),
        effectiveness: effectiveness(
            pv,
            inputs.book.best_estimate(),
            &v.net,
            v.net_central,
            inputs.levels,
        ),
        unhedgeable_sd: None,
        capital_left_by_basis_risk: basis_risk_capital(inputs, &v.net, v.net_central),
        name: terms.name,
        side: terms.side,
        sex: terms.sex,
        age: terms.age,
        maturity: terms.maturity,
        premium: terms.premium,
    };
    Ok((summary, v))
}
