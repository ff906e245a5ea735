//! tailspan: stochastic longevity-risk simulation.
//!
//! The flow is inputs ([`data`]) → fitted mortality models ([`models`]) → stochastic
//! scenarios ([`projection`]) → book values per scenario ([`valuation`]) → capital
//! ([`risk`]) and hedge prices ([`hedge`]) → files ([`io`]). The binary in `main.rs` is a
//! thin shell over [`cli`].

pub mod cli;
pub mod data;
pub mod error;
pub mod hedge;
pub mod io;
pub mod life;
pub mod models;
pub mod pipeline;
pub mod projection;
pub mod risk;
pub mod synth;
pub mod valuation;

pub use error::{Error, Result};

/// The crate version, recorded in every output.
pub const VERSION: &str = env!("CARGO_PKG_VERSION");
