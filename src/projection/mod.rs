//! Scenario generation: time-series models of the period indices and random streams.

pub mod random_walk;

pub use random_walk::RandomWalk;
