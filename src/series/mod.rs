//! Time-series models of mortality indices, shared by the fits and the projection.
//!
//! The models rank and describe a fit by its series (drift, volatility, the cohort
//! index's ARIMA terms), and the projection draws the future from the same estimates, so
//! the series sit below both: a random walk with drift for one or several period indices
//! ([`random_walk`]) and the cohort index's ARIMA(1,1,0) and AR(1)-with-trend forms
//! ([`cohort_series`]), and the mean-reverting AR(1) of a book's spread over its
//! population ([`spread_ar1`]), and the AR(1) with constant of a population's own index in
//! a two-population model ([`ar1`]).

pub mod ar1;
pub mod cohort_series;
pub mod random_walk;
pub mod spread_ar1;

pub use ar1::Ar1;
pub use cohort_series::{CohortSeries, CohortSeriesKind, CohortSeriesSummary, SeriesTerms};
pub use random_walk::{RandomWalk, RandomWalkSummary};
pub use spread_ar1::SpreadAr1;
