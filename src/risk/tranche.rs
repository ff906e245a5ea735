//! A candidate tranche's marginal capital against the book, and what it costs to hold.
//!
//! A reinsurer taking on a tranche needs the capital it adds to the portfolio, not the
//! capital it would need alone: the tranche is valued alone and with the book, and the
//! combined capital less the book's is its marginal capital. Its Euler contribution within
//! the combined book is reported beside it (the two differ by the diversification the
//! tranche brings or takes away at the margin). The cost of holding the marginal capital
//! follows the cost-of-capital method of the Solvency II risk margin (Delegated Regulation
//! (EU) 2015/35, Art. 37, with the 6 % rate of Art. 39; from memory): the capital is
//! assumed to run off with the tranche's expected benefits on the central path.

use serde::Serialize;

use crate::risk::capital::CapitalSummary;

/// The tranche's figures for one measure at one level.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TrancheLevel {
    /// Confidence level α.
    pub level: f64,
    /// VaR_α − BE of the tranche valued alone.
    pub capital_alone: f64,
    /// VaR_α − BE of the book without the tranche.
    pub capital_book: f64,
    /// VaR_α − BE of the book with the tranche.
    pub capital_combined: f64,
    /// capital_combined − capital_book.
    pub marginal_capital: f64,
    /// The tranche's policies' summed VaR contributions within the combined book.
    pub euler_var_contribution: f64,
    /// TVaR_α − BE of the tranche alone.
    pub tvar_capital_alone: f64,
    /// TVaR_α − BE of the book without the tranche.
    pub tvar_capital_book: f64,
    /// TVaR_α − BE of the book with the tranche.
    pub tvar_capital_combined: f64,
    /// tvar_capital_combined − tvar_capital_book.
    pub marginal_tvar_capital: f64,
    /// The tranche's policies' summed TVaR contributions within the combined book.
    pub euler_tvar_contribution: f64,
    /// The first year's cost of holding the marginal capital: rate × marginal capital.
    pub annual_cost_of_capital: f64,
    /// Cost of holding the marginal capital until the tranche runs off:
    /// rate × Σ_t marginal capital × R_t × v(t + 1).
    pub cost_of_capital: f64,
    /// Premium for the tranche: its best estimate plus `cost_of_capital`.
    pub premium: f64,
}

/// A candidate tranche's marginal capital and premium figures.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TrancheFigures {
    /// Policies in the tranche.
    pub policies: usize,
    /// The tranche's best estimate (expected PV on the central path).
    pub best_estimate: f64,
    /// Annual cost-of-capital rate (`capital.cost_of_capital_rate`).
    pub cost_of_capital_rate: f64,
    /// Σ_t R_t v(t + 1): the run-off annuity that turns a capital into its cost, R_t being
    /// the share of the tranche's expected benefits paid from year t on.
    pub runoff_annuity: f64,
    /// Trend only, per level.
    pub trend: Vec<TrancheLevel>,
    /// Trend and idiosyncratic risk, per level, when deaths are simulated.
    pub trend_idiosyncratic: Option<Vec<TrancheLevel>>,
}

/// Σ_t R_t v(t + 1), where R_t is the share of `cash` (expected benefits by policy year)
/// paid in year t or later and `discount(t)` the discount factor to time t.
pub fn runoff_annuity(cash: &[f64], discount: impl Fn(f64) -> f64) -> f64 {
    let total: f64 = cash.iter().sum();
    if total <= 0.0 {
        return 0.0;
    }
    let mut remaining = total;
    let mut annuity = 0.0;
    for (t, &c) in cash.iter().enumerate() {
        annuity += remaining / total * discount((t + 1) as f64);
        remaining -= c;
    }
    annuity
}

/// Capitals of one measure: the tranche alone, the book, the combined book.
pub struct Capitals<'a> {
    /// The tranche valued alone.
    pub alone: &'a CapitalSummary,
    /// The book without the tranche.
    pub book: &'a CapitalSummary,
    /// The book with the tranche.
    pub combined: &'a CapitalSummary,
}

/// The tranche's figures per level of one measure: `euler` holds its summed (VaR, TVaR)
/// contributions within the combined book per level, `best_estimate` its own BE.
pub fn tranche_levels(
    capitals: &Capitals<'_>,
    euler: &[(f64, f64)],
    best_estimate: f64,
    rate: f64,
    runoff_annuity: f64,
) -> Vec<TrancheLevel> {
    let tvar_capital = |c: &CapitalSummary, i: usize| c.tails[i].tvar - c.best_estimate;
    (0..capitals.combined.tails.len())
        .map(|i| {
            let capital_book = capitals.book.tails[i].capital;
            let capital_combined = capitals.combined.tails[i].capital;
            let marginal_capital = capital_combined - capital_book;
            let cost_of_capital = rate * marginal_capital * runoff_annuity;
            TrancheLevel {
                level: capitals.combined.tails[i].level,
                capital_alone: capitals.alone.tails[i].capital,
                capital_book,
                capital_combined,
                marginal_capital,
                euler_var_contribution: euler[i].0,
                tvar_capital_alone: tvar_capital(capitals.alone, i),
                tvar_capital_book: tvar_capital(capitals.book, i),
                tvar_capital_combined: tvar_capital(capitals.combined, i),
                marginal_tvar_capital: tvar_capital(capitals.combined, i)
                    - tvar_capital(capitals.book, i),
                euler_tvar_contribution: euler[i].1,
                annual_cost_of_capital: rate * marginal_capital,
                cost_of_capital,
                premium: best_estimate + cost_of_capital,
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn runoff_annuity_of_a_single_payment_is_an_annuity_certain() {
        // One benefit paid in year n − 1: R_t = 1 for t < n, so Σ_{t<n} v^{t+1} is the
        // n-year annuity-immediate a_n = (1 − v^n)/i (closed form).
        let (n, i) = (10, 0.04);
        let mut cash = vec![0.0; n];
        cash[n - 1] = 1.0;
        let v = 1.0 / (1.0 + i);
        let closed = (1.0 - f64::powi(v, n as i32)) / i;
        let got = runoff_annuity(&cash, |t| (1.0 + i).powf(-t));
        assert!((got - closed).abs() < 1e-12, "{got} against {closed}");
    }

    #[test]
    fn runoff_annuity_of_level_benefits_decreases_linearly() {
        // Level benefits over n years: R_t = (n − t)/n, so at rate 0 the sum is (n + 1)/2.
        let cash = vec![5.0; 8];
        assert!((runoff_annuity(&cash, |_| 1.0) - 4.5).abs() < 1e-12);
    }
}
