//! Risk measures: quantiles, VaR/TVaR, capital and shocks.
//!
//! Kept apart from valuation so that the same measures serve a single run, a merge of
//! shards and the one-year framework.

pub mod allocation;
pub mod allocation_summary;
pub mod capital;
pub mod decomposition;
pub mod merge;
pub mod model_average;
pub mod one_year;
pub mod order;
pub mod quantile;
pub mod segments;
pub mod summary;
pub mod tranche;

pub use capital::{CapitalSummary, StressFigures, TailFigures};
pub use quantile::{quantile_sorted, summarize, tvar_sorted};
