//! Output: atomic writers for JSON, CSV and Parquet, the report and its charts.

pub mod atomic;
pub mod finite;
pub mod hash;
pub mod memory;
pub mod parquet;
pub mod provenance;
pub mod report;
pub mod spill;

pub use atomic::{AtomicFile, write_bytes, write_json};
pub use parquet::ParquetSink;
pub use provenance::Provenance;
