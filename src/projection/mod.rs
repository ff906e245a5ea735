//! Scenario generation: projected indices and rates, random streams and the rate surface.
//!
//! A scenario is a pure function of (seed, scenario number): the fitted models' stacked
//! period indices are projected by one joint random walk with drift ([`joint`], estimated
//! by [`crate::series::random_walk`]), with optional parameter uncertainty ([`uncertainty`]), cohort
//! models' younger cohorts drawn from their index's time series ([`cohort_paths`]), and
//! mapped to rates by each model ([`scenarios`]). The [`engine`] runs scenarios in parallel and
//! streams them to Parquet.
//!
//! Choices the files rely on:
//! - Scenario 0 is always the central path (k_T + h·d̂: no innovations, no parameter
//!   uncertainty), the best-estimate basis; with `projection.noise = true` scenarios
//!   1..=N are stochastic, so a run holds N + 1 scenarios. With noise off only scenario 0
//!   is written.
//! - `paths.parquet` holds the projected years only (last fitted year + 1 to + horizon)
//!   at every age from the first fitted age to `max_age`. `m = −ln(1 − q)` is written for
//!   log-rate models (null where q = 1) and left out for CBD, which models q itself.
//! - `factors.parquet` holds the projected years only; the fitted history is in `fit.json`.
//!   Cohort models add rows `factor = "gamma"` with `year` the birth year: the cohort
//!   index of every cohort the scenario draws (born after the last estimated cohort, up
//!   to the first fitted age in the last projected year).
//! - `period.parquet` holds e°65 per scenario, sex and projected year, computed from that
//!   year's rates under UDD; it is skipped when age 65 is not among the rates' ages.
//! - A shard K/N is block K of N contiguous, nearly equal blocks of the scenario numbers
//!   (scenario 0 is in shard 1), written to `paths.part-K-of-N.parquet` and so on.
//! - The bootstrap resamples D* ~ Poisson(E^c · m̂) with m̂ = −ln(1 − q̂) from the fitted
//!   rates (the constant-force convention), for Lee–Carter and CBD alike.

pub mod cells;
pub mod cohort_paths;
pub mod engine;
pub mod joint;
pub mod period;
pub mod scenarios;
pub mod streams;
pub mod surface;
pub mod uncertainty;

pub use cells::CellPlan;
pub use cohort_paths::{CohortBasis, CohortDraw, CohortPath};
pub use engine::{OutputOptions, Shard, Written, write_projection};
pub use joint::JointBasis;
pub use scenarios::{Projector, ScenarioPaths, Settings, scenario_ids};
pub use streams::{Purpose, stream};
pub use surface::RateSurface;
pub use uncertainty::{BootstrapSource, Uncertainty};
