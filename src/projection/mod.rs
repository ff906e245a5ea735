//! Scenario generation: time-series models of the period indices and random streams.
//!
//! A scenario is a pure function of (seed, scenario number): the fitted models' stacked
//! period indices are projected by one joint random walk with drift ([`joint`]), with
//! optional parameter uncertainty ([`uncertainty`]), and mapped to rates by each model
//! ([`scenarios`]). The [`engine`] runs scenarios in parallel and streams them to Parquet.

pub mod engine;
pub mod joint;
pub mod period;
pub mod scenarios;
pub mod sink;
pub mod streams;
pub mod uncertainty;

pub use engine::{OutputOptions, Shard, Written, write_projection};
pub use joint::{JointBasis, WalkEstimate, estimate_walk};
pub use scenarios::{Projector, ScenarioPaths, Settings, scenario_ids};
pub use streams::{Purpose, stream};
pub use uncertainty::{BootstrapSource, Uncertainty};
