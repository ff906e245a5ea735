//! Time-series models of mortality indices, shared by the fits and the projection.
//!
//! The models rank and describe a fit by its series (drift, volatility, the cohort
//! index's ARIMA terms), and the projection draws the future from the same estimates, so
//! the series sit below both: a random walk with drift for one or several period indices
//! ([`random_walk`]) and the cohort index's ARIMA(1,1,0) and AR(1)-with-trend forms
//! ([`cohort_series`]).

pub mod cohort_series;
pub mod random_walk;

pub use cohort_series::{CohortSeries, CohortSeriesKind, CohortSeriesSummary, SeriesTerms};
pub use random_walk::{RandomWalk, RandomWalkSummary};
