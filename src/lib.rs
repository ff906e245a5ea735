//! tailspan: stochastic longevity-risk simulation.
//!
//! The flow is inputs ([`data`]) → fitted mortality models ([`models`]) → stochastic
//! scenarios ([`projection`]) → book values per scenario ([`valuation`]) → capital
//! ([`risk`]) and hedge prices ([`hedge`]) → files ([`io`]) and the page a committee reads
//! ([`report`]). The binary in `main.rs` is a thin shell over [`cli`].
//!
//! Layers, each using only those below it:
//!
//! ```text
//! cli → report → pipeline → hedge → risk → valuation → basis → projection → models → life
//!                                                               series, interest, io, data, error
//! ```
//!
//! [`series`] (random walks, the cohort index's ARIMA and AR(1) forms) serves both the fits
//! that rank and describe a model and the projection that draws from it; [`interest`]
//! (discount curves, discount functions, payment timing) serves the life-table maths and
//! the valuation; [`projection`] owns the rate surface that the valuation, hedges and
//! one-year refits read, and [`basis`] turns it into the book's own rates, between the
//! projection that draws the population and the valuation that reads the book; [`report`]
//! reads finished results, and [`io`] only writes.
//! Three edges still point upwards and are known: `risk::merge` drives the pipeline's
//! stages (it is the `merge` command's work), `valuation::files` fills `risk::order`'s PV
//! sample, and the config in [`data`] holds the hedges' terms (`hedge::spec`).

pub mod basis;
pub mod cli;
pub mod data;
pub mod error;
pub mod hedge;
pub mod interest;
pub mod io;
pub mod layouts;
pub mod life;
pub mod models;
pub mod pipeline;
pub mod projection;
pub mod report;
pub mod risk;
pub mod series;
pub mod synth;
pub mod valuation;

pub use error::{Error, Result};

/// The crate version, recorded in every output.
pub const VERSION: &str = env!("CARGO_PKG_VERSION");
