//! The swap's fixed-leg loading π, priced two ways from the provider's side.
//!
//! Cost of capital: the provider holds capital against its run-off loss on the swap and
//! charges a rate on it each year — the method of the Solvency II risk margin (Delegated
//! Regulation (EU) 2015/35, Art. 37: RM = CoC Σ_{t≥0} SCR(t) / (1 + r(t+1))^{t+1}; the 6 %
//! rate is Art. 39). The capital is projected over the contract's life in proportion to
//! the remaining best-estimate fixed-leg value, a common practice for running off the
//! risk margin's future capital (a proportional proxy, not a re-simulation).
//!
//! Target Sharpe: π such that the provider's expected net gain is the target number of
//! standard deviations of that gain. The fixed leg is certain, so the spread does not
//! depend on π and the answer is closed-form.

use serde::Serialize;

use crate::hedge::swap::SwapLegs;
use crate::risk::quantile::{quantile_sorted, sorted, summarize};

/// The run-off assumption for future capital, as reported.
pub const CAPITAL_PROJECTION: &str = "in proportion to the remaining best-estimate fixed-leg value (common practice for running off risk-margin capital)";

/// A loading as a rate and as an amount.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PremiumQuote {
    /// π: the fixed leg pays best-estimate benefits × (1 + π).
    pub rate: f64,
    /// π × PV(fixed leg at π = 0) × share: the PV of the loading.
    pub amount: f64,
}

/// The cost-of-capital price and how it was reached.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CostOfCapitalPrice {
    /// The loading.
    pub premium: PremiumQuote,
    /// Annual cost-of-capital rate.
    pub cost_of_capital: f64,
    /// Confidence level of the capital.
    pub capital_level: f64,
    /// Capital at the start: VaR of the provider's run-off loss less its mean (share applied).
    pub capital: f64,
    /// How future capital was projected, for the report.
    pub capital_projection: &'static str,
    /// Projected capital held through policy year t, t = 0 .. term − 1 (share applied).
    pub capital_by_year: Vec<f64>,
    /// PV of the capital charges (share applied); equals `premium.amount`.
    pub charges_pv: f64,
}

/// The target-Sharpe price.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SharpePrice {
    /// The loading.
    pub premium: PremiumQuote,
    /// Target Sharpe ratio of the provider's net position.
    pub target: f64,
    /// Mean PV of the floating leg (share applied).
    pub floating_mean: f64,
    /// Standard deviation of the floating leg's PV (share applied).
    pub floating_sd: f64,
}

/// The provider's run-off loss at π = 0 per scenario: floating − fixed.
pub fn provider_loss(legs: &SwapLegs) -> Vec<f64> {
    legs.floating
        .iter()
        .map(|f| f - legs.fixed_at_zero)
        .collect()
}

/// Cost-of-capital loading for a swap covering `share` of the book.
///
/// Capital C₀ = VaR_level(L) − mean(L) of the loss L = floating − fixed at π = 0 (floored at
/// 0), projected as C_t = C₀ R_t / R₀ with R_t the value at t of the fixed-leg payments
/// still due; the charge CoC × C_t falls at t + 1 and π solves π X₀ = Σ_t CoC C_t v(t + 1).
pub fn cost_of_capital(
    legs: &SwapLegs,
    share: f64,
    cost_of_capital: f64,
    capital_level: f64,
) -> CostOfCapitalPrice {
    let loss = provider_loss(legs);
    let var = quantile_sorted(&sorted(&loss), capital_level);
    let capital = (var - summarize(&loss).mean).max(0.0);
    let years = legs.best_estimate_cash.len();
    // remaining[t] = Σ_{k ≥ t} BE_k v(k + 1): the PV at 0 of the fixed-leg payments still due.
    let mut remaining = vec![0.0; years + 1];
    for k in (0..years).rev() {
        remaining[k] = remaining[k + 1] + legs.best_estimate_cash[k] * legs.discounts[k];
    }
    let x0 = legs.fixed_at_zero;
    let mut capital_by_year = Vec::with_capacity(years);
    let mut charges = 0.0;
    // v(t) at the start of year t, v(t + 1) at its end when the charge falls.
    let mut start_discount = 1.0;
    for (due, &end_discount) in remaining.iter().zip(&legs.discounts) {
        // Value at t of what is still due, relative to the value at 0.
        let c_t = capital * (due / start_discount) / x0;
        charges += cost_of_capital * c_t * end_discount;
        capital_by_year.push(share * c_t);
        start_discount = end_discount;
    }
    let rate = charges / x0;
    CostOfCapitalPrice {
        premium: PremiumQuote {
            rate,
            amount: share * rate * x0,
        },
        cost_of_capital,
        capital_level,
        capital: share * capital,
        capital_projection: CAPITAL_PROJECTION,
        capital_by_year,
        charges_pv: share * charges,
    }
}

/// Target-Sharpe loading: π with E[(1 + π) X₀ − F] = target × sd[F], that is
/// π = (mean F + target × sd F) / X₀ − 1. With no spread it is the loading that makes the
/// provider's expected gain zero.
pub fn sharpe(legs: &SwapLegs, share: f64, target: f64) -> SharpePrice {
    let stats = summarize(&legs.floating);
    let x0 = legs.fixed_at_zero;
    let rate = (stats.mean + target * stats.std_dev) / x0 - 1.0;
    SharpePrice {
        premium: PremiumQuote {
            rate,
            amount: share * rate * x0,
        },
        target,
        floating_mean: share * stats.mean,
        floating_sd: share * stats.std_dev,
    }
}
