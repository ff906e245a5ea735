//! Longevity swap on the book: the floating leg pays the book's benefits of policy years
//! k < T, the fixed leg pays the best-estimate benefits of those years times (1 + π).
//!
//! The legs are computed once at π = 0 and for the whole book; a loading, a share of the
//! book and a side then only scale and shift them, so both pricing methods and every
//! reported figure reuse one pass over the scenarios.

use crate::error::{Error, Result};
use crate::hedge::legs::{
    BookResults, BookSample, LegValues, floating_pv, settled_pv, settlement_discounts,
};
use crate::hedge::spec::{FloatingBasis, Side};
use crate::interest::DiscountCurve;

/// The terms of one swap.
#[derive(Debug, Clone, PartialEq)]
pub struct SwapTerms {
    /// Contract name.
    pub name: String,
    /// Policy years covered; `None` is to run-off.
    pub term_years: Option<usize>,
    /// Share of the book's benefits covered.
    pub share: f64,
    /// What the floating leg pays.
    pub floating: FloatingBasis,
    /// The book owner's side.
    pub side: Side,
}

/// Policy years a swap of `term_years` (`None`: to run-off) covers on a book with `years`
/// years of cash flow.
pub fn covered_years(term_years: Option<usize>, years: usize) -> usize {
    term_years.map_or(years, |t| t.min(years))
}

/// A whole-book swap's legs at π = 0, before share and side.
#[derive(Debug, Clone, PartialEq)]
pub struct SwapLegs {
    /// Best-estimate benefits of the covered years (the fixed leg's amounts at π = 0).
    pub best_estimate_cash: Vec<f64>,
    /// Settlement discount factors v(k + 1) of the covered years.
    pub discounts: Vec<f64>,
    /// PV of the fixed leg at π = 0.
    pub fixed_at_zero: f64,
    /// PV of the floating leg per scenario.
    pub floating: Vec<f64>,
    /// PV of the floating leg on the central path.
    pub floating_central: f64,
}

impl SwapTerms {
    /// Policy years the swap covers on a book with `years` years of cash flow.
    pub fn covered_years(&self, years: usize) -> usize {
        covered_years(self.term_years, years)
    }

    /// The legs at π = 0 for the whole book, discounted on `curve`.
    pub fn legs(&self, book: &BookResults<'_>, curve: &DiscountCurve) -> Result<SwapLegs> {
        let discounts = settlement_discounts(curve, self.covered_years(book.years()));
        let floating = book
            .scenarios
            .iter()
            .map(|v| floating_pv(self.floating, v, &discounts))
            .collect();
        self.assemble(&book.central.cash_expected, floating, discounts)
    }

    /// The legs at π = 0 from a [`BookSample`], where this swap is `[[hedge.swap]]` number
    /// `index` of the config the sample was gathered for.
    pub fn legs_of(
        &self,
        sample: &BookSample,
        index: usize,
        curve: &DiscountCurve,
    ) -> Result<SwapLegs> {
        let floating = sample.floating.get(index).cloned().ok_or_else(|| {
            Error::Numerical(format!(
                "swap `{}`: no floating leg was gathered for swap {index}",
                self.name
            ))
        })?;
        let discounts = settlement_discounts(curve, self.covered_years(sample.years()));
        self.assemble(&sample.central.cash_expected, floating, discounts)
    }

    fn assemble(
        &self,
        central_cash: &[f64],
        floating: Vec<f64>,
        discounts: Vec<f64>,
    ) -> Result<SwapLegs> {
        let years = discounts.len();
        let best_estimate_cash = central_cash[..years].to_vec();
        let fixed_at_zero = settled_pv(&best_estimate_cash, &discounts);
        if fixed_at_zero <= 0.0 {
            return Err(Error::Numerical(format!(
                "swap `{}`: the best-estimate benefits of the {years} covered years are worth {fixed_at_zero}; a swap needs benefits to exchange",
                self.name
            )));
        }
        Ok(SwapLegs {
            floating_central: settled_pv(central_cash, &discounts),
            best_estimate_cash,
            discounts,
            fixed_at_zero,
            floating,
        })
    }

    /// The owner's legs at loading `premium`: fixed `share (1 + π) X₀`, floating `share F`,
    /// net `floating − fixed` for the hedger and `fixed − floating` for the provider.
    pub fn values(&self, legs: &SwapLegs, premium: f64) -> LegValues {
        let fixed_leg = self.share * (1.0 + premium) * legs.fixed_at_zero;
        let sign = self.side.sign();
        let floating_leg: Vec<f64> = legs.floating.iter().map(|f| self.share * f).collect();
        let net = floating_leg
            .iter()
            .map(|f| sign * (f - fixed_leg))
            .collect();
        LegValues {
            fixed_leg,
            net,
            net_central: sign * (self.share * legs.floating_central - fixed_leg),
            floating_leg,
        }
    }
}
