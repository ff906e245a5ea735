//! Inputs: the experience grid, the book, the config and the spot-rate file.
//!
//! Everything a user hands in is loaded and validated here, once, so the rest of the
//! crate can assume clean data. Every rejection names the file, row and column or the
//! config key, and the rule broken.

pub mod book;
pub mod config;
pub mod coverage;
pub mod csv_input;
pub mod curve;
pub mod dates;
pub mod experience;
pub mod paths_output;
pub mod published;
pub mod sex;
pub mod span;
pub mod spreadsheet;
pub mod suggest;

pub use book::{Book, Policy};
pub use config::Config;
pub use experience::{Experience, Population};
pub use paths_output::PathsOutput;
pub use sex::Sex;
pub use span::Span;
