//! Scenario generation: time-series models of the period indices and random streams.

pub mod cohort_series;
pub mod random_walk;

pub use cohort_series::CohortSeries;
pub use random_walk::RandomWalk;
