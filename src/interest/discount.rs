//! Discount functions: what the annuity maths asks of any interest basis.
//!
//! Annuity values take v(t) through one trait, so a flat rate, a spot curve or (later) a
//! stochastic interest path can all stand behind the same life-table code.

/// A discount function v(t): the value now of 1 paid at time t years.
pub trait Discount {
    /// Discount factor for time `t` ≥ 0 in years.
    fn discount(&self, t: f64) -> f64;
}

impl<F: Fn(f64) -> f64 + ?Sized> Discount for F {
    fn discount(&self, t: f64) -> f64 {
        self(t)
    }
}

/// A flat annual effective rate, with its force of interest computed once.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FlatRate {
    /// Force of interest δ = ln(1 + i).
    force: f64,
}

impl FlatRate {
    /// A flat annual effective rate `rate_pa` (0.05 is 5 %), which must exceed −1.
    pub fn new(rate_pa: f64) -> Self {
        FlatRate {
            force: rate_pa.ln_1p(),
        }
    }
}

impl Discount for FlatRate {
    #[inline]
    fn discount(&self, t: f64) -> f64 {
        (-self.force * t).exp()
    }
}
