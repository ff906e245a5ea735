//! Life-table functions, annuity factors and parametric mortality laws.
//!
//! Everything here works on plain one-year rates `q x, q x+1, ...` so the same code serves a
//! deterministic table, one cohort diagonal of one scenario, and the valuation inner loop.
//! The main functions are re-exported here so callers write `life::annuity_due` without
//! caring which small module holds it; the modules stay split by concern (laws, survival
//! and expectations, fractional ages, annuities) so each can be read and tested alone.

pub mod annuity;
pub mod closure;
pub mod exp;
pub mod fractional;
pub mod laws;
pub mod table;

pub use annuity::{Annuity, Discount, FlatRate, Timing, annuity_due, annuity_immediate};
pub use fractional::Fractional;
pub use laws::MortalityLaw;
pub use table::{
    complete_expectation, complete_expectation_n, curtate_expectation, curtate_expectation_n,
    lives, survival_at, survival_curve,
};
