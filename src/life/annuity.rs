//! Life annuity factors from one-year rates and a discount function.
//!
//! One routine values every annuity shape the book can hold, so the table command, the
//! valuation engine and the tests all share the payment conventions below rather than a
//! family of formulas that could drift apart. Times t are in years from the valuation
//! date; `q[k] = q x+k` as in [`table`](super::table), with survival past `q.len()` taken
//! as 0.
//!
//! # Payment conventions
//!
//! For frequency m, deferral d, term n, guarantee g and escalation e:
//!
//! - **Amount.** Each payment is 1/m, so a year of payments sums to 1 before escalation.
//! - **Timing.** In advance, payment j (j = 0, 1, …) falls at `t = d + j/m`; in arrears at
//!   `t = d + (j + 1)/m`. So a deferral moves the first payment to d (advance) or d + 1/m
//!   (arrears).
//! - **Term.** A term of n years allows the n·m payments j < n·m, i.e. payments stop after
//!   n years of payment; no term means for life.
//! - **Guarantee.** The first g·m payments (j < g·m, cut to the term) are paid whether or
//!   not the life survives, provided it was alive when the payment phase began at time d:
//!   they carry the probability `d p x` (1 when d = 0) instead of `t p x`. A guarantee
//!   longer than the table still pays every guaranteed payment.
//! - **Escalation.** The payment at time t is multiplied by (1 + e)^⌊t⌋, counting from the
//!   valuation date.
//! - **Survival within the year.** A payment at t = k + s (0 < s < 1) carries
//!   `k p x · s p x+k`, by UDD unless constant force is chosen; under UDD the m-thly value
//!   is the exact sum over the 1/m points, not the Woolhouse approximation.
//! - **Discounting.** Each payment is multiplied by v(t) from a [`Discount`].
//!
//! Valuing is allocation-free and linear in the number of payments.

use super::fractional::Fractional;
pub use crate::interest::{Discount, FlatRate, Timing};

/// The shape of a life annuity paying 1 a year; see the module docs for the conventions.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Annuity {
    /// Advance or arrears.
    pub timing: Timing,
    /// Payments a year, m ≥ 1.
    pub frequency: u32,
    /// Whole years from the valuation date to the start of the payment phase.
    pub deferral_years: u32,
    /// Years of payment; `None` for life.
    pub term_years: Option<u32>,
    /// Years of payments made whatever happens, once the payment phase starts.
    pub guarantee_years: u32,
    /// Annual escalation rate e > −1: the payment at t is multiplied by (1 + e)^⌊t⌋.
    pub escalation: f64,
    /// Survival between integer ages.
    pub fractional: Fractional,
}

impl Default for Annuity {
    fn default() -> Self {
        Annuity::due()
    }
}

impl Annuity {
    /// Whole-life annuity-due of 1 a year, paid annually: ä x.
    pub fn due() -> Self {
        Annuity {
            timing: Timing::Advance,
            frequency: 1,
            deferral_years: 0,
            term_years: None,
            guarantee_years: 0,
            escalation: 0.0,
            fractional: Fractional::Udd,
        }
    }

    /// Whole-life annuity-immediate of 1 a year, paid annually: a x.
    pub fn immediate() -> Self {
        Annuity {
            timing: Timing::Arrears,
            ..Annuity::due()
        }
    }

    /// The same annuity paid `m` times a year.
    pub fn frequency(self, m: u32) -> Self {
        Annuity {
            frequency: m,
            ..self
        }
    }

    /// The same annuity deferred `d` years.
    pub fn deferred(self, d: u32) -> Self {
        Annuity {
            deferral_years: d,
            ..self
        }
    }

    /// The same annuity paid for at most `n` years.
    pub fn temporary(self, n: u32) -> Self {
        Annuity {
            term_years: Some(n),
            ..self
        }
    }

    /// The same annuity with its first `g` years of payments guaranteed.
    pub fn guaranteed(self, g: u32) -> Self {
        Annuity {
            guarantee_years: g,
            ..self
        }
    }

    /// The same annuity escalating at `e` a year.
    pub fn escalating(self, e: f64) -> Self {
        Annuity {
            escalation: e,
            ..self
        }
    }

    /// The same annuity with another fractional-age assumption.
    pub fn fractional(self, fractional: Fractional) -> Self {
        Annuity { fractional, ..self }
    }

    /// Checks the shape can be valued: m ≥ 1 and a finite escalation above −1.
    pub fn check(&self) -> Result<(), String> {
        if self.frequency == 0 {
            return Err("payment frequency must be at least 1 a year".into());
        }
        if !(self.escalation.is_finite() && self.escalation > -1.0) {
            return Err(format!(
                "escalation must be a finite rate above -1, found {}",
                self.escalation
            ));
        }
        Ok(())
    }

    /// Present value of the annuity for a life with rates `q`, discounted by `discount`.
    ///
    /// # Panics
    /// If the frequency is 0 (see [`Annuity::check`]).
    pub fn value<D: Discount + ?Sized>(&self, q: &[f64], discount: &D) -> f64 {
        assert!(self.frequency > 0, "annuity frequency must be at least 1");
        // Payment points are counted in units of 1/m from the valuation date, so the year
        // and the position within it come from integer division, free of rounding.
        let m = u64::from(self.frequency);
        let per_year = m as f64;
        let len = q.len() as u64;
        let first = u64::from(self.deferral_years) * m + u64::from(self.timing == Timing::Arrears);
        let term = self.term_years.map(|n| u64::from(n) * m);
        let guaranteed = {
            let g = u64::from(self.guarantee_years) * m;
            term.map_or(g, |t| g.min(t))
        };
        // Life-contingent payments can fall no later than t = len (point len·m).
        let life_points = (len * m + 1).saturating_sub(first);
        let count = term.unwrap_or(u64::MAX).min(life_points.max(guaranteed));
        let deferral_survival = match q.get(..self.deferral_years as usize) {
            Some(before) => before.iter().map(|&qk| 1.0 - qk).product::<f64>(),
            None => 0.0,
        };

        // Running year-start survival and escalation, advanced as the year index grows.
        let growth = 1.0 + self.escalation;
        let mut year = 0u64;
        let mut year_survival = 1.0;
        let mut escalation = 1.0;
        let mut total = 0.0;
        for j in 0..count {
            let point = first + j;
            let point_year = point / m;
            while year < point_year {
                year_survival *= if year < len {
                    1.0 - q[year as usize]
                } else {
                    0.0
                };
                escalation *= growth;
                year += 1;
            }
            let within = point % m;
            let survival = if j < guaranteed {
                deferral_survival
            } else if year < len {
                year_survival
                    * self
                        .fractional
                        .survival(q[year as usize], within as f64 / per_year)
            } else if year == len && within == 0 {
                year_survival
            } else {
                0.0
            };
            if survival > 0.0 {
                total += escalation * survival * discount.discount(point as f64 / per_year);
            }
        }
        total / per_year
    }
}

/// Whole-life annuity-due ä x paying 1 a year in advance.
pub fn annuity_due<D: Discount + ?Sized>(q: &[f64], discount: &D) -> f64 {
    Annuity::due().value(q, discount)
}

/// Whole-life annuity-immediate a x paying 1 a year in arrears.
pub fn annuity_immediate<D: Discount + ?Sized>(q: &[f64], discount: &D) -> f64 {
    Annuity::immediate().value(q, discount)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hand_worked_two_year_table() {
        // q = (0.1, 1): ä = 1 + 0.9 v; a = 0.9 v; at 10 %, v = 1/1.1.
        let q = [0.1, 1.0];
        let v = 1.0 / 1.1;
        let flat = FlatRate::new(0.1);
        assert!((annuity_due(&q, &flat) - (1.0 + 0.9 * v)).abs() < 1e-15);
        assert!((annuity_immediate(&q, &flat) - 0.9 * v).abs() < 1e-15);
        // Half-yearly in advance under UDD: (1 + 0.95 v^½ + 0.9 v + 0.45 v^1.5) / 2.
        let half = Annuity::due().frequency(2).value(&q, &flat);
        let want = (1.0 + 0.95 * v.sqrt() + 0.9 * v + 0.45 * v.powf(1.5)) / 2.0;
        assert!((half - want).abs() < 1e-15);
    }

    #[test]
    fn guarantee_outlives_the_table() {
        // Five guaranteed annual payments from a table that ends after one year.
        let q = [1.0];
        let zero_rate = |_t: f64| 1.0;
        let value = Annuity::due().guaranteed(5).value(&q, &zero_rate);
        assert_eq!(value, 5.0);
    }

    #[test]
    fn rejects_bad_shapes() {
        assert!(Annuity::due().frequency(0).check().is_err());
        assert!(Annuity::due().escalating(-1.0).check().is_err());
        assert!(Annuity::due().escalating(f64::NAN).check().is_err());
        assert!(
            Annuity::due()
                .frequency(12)
                .escalating(0.02)
                .check()
                .is_ok()
        );
    }
}
