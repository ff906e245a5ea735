//! q-forward on one population rate: at maturity the hedger receives notional × (q_fixed −
//! q_realised), q_fixed = q_central × (1 − premium).
//!
//! The contract pays when the reference rate falls below the fixed rate, which is when the
//! book's annuities cost more, so it offsets trend risk; it cannot offset the book's own
//! deaths (idiosyncratic risk) or the gap between the book and the reference cell (basis
//! risk). The payoff is settled at the end of the maturity year, once that year's rate is
//! known.

use crate::data::Sex;
use crate::data::sex::sex_index;
use crate::error::{Error, Result};
use crate::hedge::legs::LegValues;
use crate::hedge::spec::HedgeConfig;
use crate::hedge::spec::Side;
use crate::interest::DiscountCurve;
use crate::projection::RateSurface;
use crate::risk::quantile::summarize;

/// The terms of one q-forward.
#[derive(Debug, Clone, PartialEq)]
pub struct QForwardTerms {
    /// Contract name.
    pub name: String,
    /// Reference sex.
    pub sex: Sex,
    /// Reference age.
    pub age: i32,
    /// Calendar year of the reference rate.
    pub maturity: i32,
    /// Risk premium below the central rate.
    pub premium: f64,
    /// The book owner's side.
    pub side: Side,
}

/// The reference rate q(age, maturity) of one q-forward, central and per scenario.
#[derive(Debug, Clone, PartialEq)]
pub struct ReferenceRates {
    /// The rate on the central path.
    pub central: f64,
    /// The rate in each scenario, in scenario order.
    pub realised: Vec<f64>,
}

impl QForwardTerms {
    /// The fixed rate q_central × (1 − premium).
    pub fn fixed_rate(&self, central: f64) -> f64 {
        central * (1.0 - self.premium)
    }

    /// Years from the valuation date to settlement: the end of the maturity year.
    pub fn settlement_years(&self, valuation_year: i32) -> f64 {
        f64::from(self.maturity - valuation_year + 1)
    }

    /// The discount factor of the settlement date.
    pub fn settlement_discount(&self, curve: &DiscountCurve, valuation_year: i32) -> f64 {
        curve.discount(self.settlement_years(valuation_year))
    }

    /// Checks the reference rates: finite probabilities, one per scenario.
    pub fn check(&self, reference: &ReferenceRates, scenarios: usize) -> Result<()> {
        let ok = |q: f64| (0.0..=1.0).contains(&q);
        if reference.realised.len() != scenarios {
            return Err(Error::Numerical(format!(
                "q-forward `{}`: {} realised reference rates for {scenarios} scenarios",
                self.name,
                reference.realised.len()
            )));
        }
        if !ok(reference.central) || !reference.realised.iter().all(|&q| ok(q)) {
            return Err(Error::Numerical(format!(
                "q-forward `{}`: reference rates q({}, {}) for sex {} must be probabilities",
                self.name, self.age, self.maturity, self.sex
            )));
        }
        Ok(())
    }

    /// The owner's legs for `notional`, discounted by `discount`: fixed `N q_fixed v`,
    /// floating `N q_realised v`, net `fixed − floating` for the hedger and the reverse for
    /// the provider.
    pub fn values(&self, notional: f64, reference: &ReferenceRates, discount: f64) -> LegValues {
        let scale = notional * discount;
        let fixed_leg = scale * self.fixed_rate(reference.central);
        let sign = self.side.sign();
        let floating_leg: Vec<f64> = reference.realised.iter().map(|q| scale * q).collect();
        let net = floating_leg
            .iter()
            .map(|f| sign * (fixed_leg - f))
            .collect();
        LegValues {
            fixed_leg,
            net,
            net_central: sign * (fixed_leg - scale * reference.central),
            floating_leg,
        }
    }
}

/// Minimum-variance notional of a hedger's q-forward against the book's PV:
/// N* = −Cov(PV, q) / (v Var(q)), the regression of the PV on the reference rate (common
/// practice), divided by the settlement discount v because the payoff is paid at maturity.
/// `None` when the reference rate does not vary across the scenarios.
pub fn hedge_ratio(pv: &[f64], realised: &[f64], discount: f64) -> Option<f64> {
    let n = pv.len().min(realised.len());
    if n < 2 {
        return None;
    }
    let q_mean = summarize(&realised[..n]).mean;
    let pv_mean = summarize(&pv[..n]).mean;
    let (mut cov, mut var) = (0.0, 0.0);
    for (p, q) in pv[..n].iter().zip(&realised[..n]) {
        cov += (p - pv_mean) * (q - q_mean);
        var += (q - q_mean) * (q - q_mean);
    }
    // Below this the rate is constant up to rounding and the ratio is noise.
    if var <= f64::EPSILON * q_mean * q_mean * n as f64 || var == 0.0 {
        return None;
    }
    Some(-cov / (var * discount))
}

/// q(age, year) from one scenario's projected rates; `None` when the surface does not hold
/// that cell.
pub fn rate_at(surface: &RateSurface<'_>, age: i32, year: i32) -> Option<f64> {
    let held = age >= surface.first_age
        && age <= surface.max_age()
        && year >= surface.first_year
        && year <= surface.last_year();
    held.then(|| surface.q(age, year))
}

/// The population cells the q-forwards settle on, read from each scenario's projected rates
/// as the scenarios are generated (in any order, on any thread).
#[derive(Debug, Clone, PartialEq)]
pub struct ReferenceCells {
    /// (sex, age, calendar year) of each `[[hedge.qforward]]`, in config order.
    pub cells: Vec<(Sex, i32, i32)>,
}

impl ReferenceCells {
    /// The cells `config`'s q-forwards need.
    pub fn of(config: &HedgeConfig) -> Self {
        ReferenceCells {
            cells: config.reference_cells(),
        }
    }

    /// One rate per q-forward from one scenario's surfaces (index 0 F, 1 M).
    pub fn read(&self, surfaces: &[Option<RateSurface<'_>>; 2]) -> Result<Vec<f64>> {
        self.cells
            .iter()
            .map(|&(sex, age, year)| {
                surfaces[sex_index(sex)]
                    .as_ref()
                    .and_then(|s| rate_at(s, age, year))
                    .ok_or_else(|| {
                        Error::model(
                            "projection",
                            format!(
                                "a q-forward settles on q({age}, {year}) for sex {sex}, which the projected rates do not hold"
                            ),
                        )
                    })
            })
            .collect()
    }

    /// Per-contract reference rates from the central path's row and one row per scenario
    /// (rows as returned by [`Self::read`], in scenario order).
    pub fn assemble(&self, central: &[f64], scenarios: &[Vec<f64>]) -> Result<Vec<ReferenceRates>> {
        let n = self.cells.len();
        if central.len() != n || scenarios.iter().any(|row| row.len() != n) {
            return Err(Error::Numerical(format!(
                "reference rates must have one value per q-forward ({n}) in every row"
            )));
        }
        Ok((0..n)
            .map(|i| ReferenceRates {
                central: central[i],
                realised: scenarios.iter().map(|row| row[i]).collect(),
            })
            .collect())
    }
}
