//! Output: atomic writers for JSON, CSV and Parquet, provenance, spill files and hashes.
//!
//! Only writing lives here; what a file says is decided by the layers above (the report
//! by `report/`).

pub mod atomic;
pub mod finite;
pub mod hash;
pub mod memory;
pub mod model_column;
pub mod parquet;
pub mod provenance;
pub mod spill;

pub use atomic::{AtomicFile, write_bytes, write_json};
pub use parquet::ParquetSink;
pub use provenance::Provenance;
