//! Scenario generation: time-series models of the period indices and random streams.
