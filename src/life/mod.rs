//! Life-table functions and parametric mortality laws.
//!
//! Everything here works on plain one-year rates `q x, q x+1, ...` so the same code serves a
//! deterministic table, one cohort diagonal of one scenario, and the valuation inner loop.

pub mod closure;
pub mod laws;

pub use laws::MortalityLaw;
