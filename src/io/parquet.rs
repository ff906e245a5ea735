//! Columnar output: an append-only Parquet writer that commits atomically.
//!
//! Large outputs (scenario paths) are produced in batches and must never sit whole in
//! memory, so the writer takes Arrow record batches one at a time and flushes a row group
//! whenever `rows_per_group` rows have gathered. The file is written under a temporary name
//! and renamed only by [`ParquetSink::finish`]; a run that fails part way leaves nothing.
//! Each file carries a plain-text description of its columns in the key-value metadata
//! (key `tailspan.schema`) and the crate version (key `tailspan.version`), so a reader
//! downstream can tell what it holds without this code.

use std::path::{Path, PathBuf};
use std::sync::Arc;

use ::parquet::arrow::ArrowWriter;
use ::parquet::basic::{Compression as Codec, ZstdLevel};
use ::parquet::file::metadata::KeyValue;
use ::parquet::file::properties::WriterProperties;
use arrow_array::RecordBatch;
use arrow_schema::SchemaRef;

use crate::data::config::Compression;
use crate::error::{Error, Result};
use crate::io::atomic::AtomicFile;

/// Key of the column description in the file's key-value metadata.
pub const SCHEMA_KEY: &str = "tailspan.schema";
/// Key of the crate version in the file's key-value metadata.
pub const VERSION_KEY: &str = "tailspan.version";

/// Default rows per row group: large enough for good compression and fast scans, small
/// enough that a group of a few numeric columns stays within tens of megabytes.
pub const DEFAULT_ROWS_PER_GROUP: usize = 1 << 20;

/// A Parquet file being written batch by batch.
pub struct ParquetSink {
    path: PathBuf,
    writer: ArrowWriter<AtomicFile>,
    rows: usize,
}

impl ParquetSink {
    /// Starts writing `path` with `schema`; `description` says what each column means.
    pub fn create(
        path: impl AsRef<Path>,
        schema: SchemaRef,
        compression: Compression,
        description: &str,
        rows_per_group: usize,
    ) -> Result<Self> {
        let path = path.as_ref().to_path_buf();
        let codec = match compression {
            Compression::Zstd => Codec::ZSTD(ZstdLevel::default()),
            Compression::Snappy => Codec::SNAPPY,
            Compression::None => Codec::UNCOMPRESSED,
        };
        let props = WriterProperties::builder()
            .set_compression(codec)
            .set_max_row_group_row_count(Some(rows_per_group.max(1)))
            .set_key_value_metadata(Some(vec![
                KeyValue::new(SCHEMA_KEY.to_string(), description.to_string()),
                KeyValue::new(VERSION_KEY.to_string(), crate::VERSION.to_string()),
            ]))
            .build();
        let file = AtomicFile::create(&path)?;
        let writer =
            ArrowWriter::try_new(file, schema, Some(props)).map_err(|e| parquet_error(&path, e))?;
        Ok(ParquetSink {
            path,
            writer,
            rows: 0,
        })
    }

    /// Appends one batch; its schema must be the file's.
    pub fn write(&mut self, batch: &RecordBatch) -> Result<()> {
        self.writer
            .write(batch)
            .map_err(|e| parquet_error(&self.path, e))?;
        self.rows += batch.num_rows();
        Ok(())
    }

    /// Rows written so far.
    pub fn rows(&self) -> usize {
        self.rows
    }

    /// Writes the footer and renames the file into place.
    pub fn finish(self) -> Result<()> {
        self.close()?.commit()
    }

    /// Writes the footer but leaves the file under its temporary name, so that several
    /// outputs can be completed first and then committed together.
    pub fn close(self) -> Result<AtomicFile> {
        self.writer
            .into_inner()
            .map_err(|e| parquet_error(&self.path, e))
    }
}

/// Writes one batch as a whole file.
pub fn write_batch(
    path: impl AsRef<Path>,
    batch: &RecordBatch,
    compression: Compression,
    description: &str,
) -> Result<()> {
    let mut sink = ParquetSink::create(
        path,
        Arc::clone(&batch.schema()),
        compression,
        description,
        DEFAULT_ROWS_PER_GROUP,
    )?;
    sink.write(batch)?;
    sink.finish()
}

fn parquet_error(path: &Path, e: impl std::fmt::Display) -> Error {
    Error::Parquet {
        path: path.to_path_buf(),
        message: e.to_string(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use ::parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;
    use arrow_array::{Float64Array, Int32Array};
    use arrow_schema::{DataType, Field, Schema};

    #[test]
    fn batches_append_into_row_groups_with_metadata() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("t.parquet");
        let schema = Arc::new(Schema::new(vec![
            Field::new("year", DataType::Int32, false),
            Field::new("q", DataType::Float64, true),
        ]));
        let mut sink =
            ParquetSink::create(&path, schema.clone(), Compression::Snappy, "year; q", 4).unwrap();
        for start in [0, 3, 6] {
            let batch = RecordBatch::try_new(
                schema.clone(),
                vec![
                    Arc::new(Int32Array::from_iter_values(start..start + 3)),
                    Arc::new(Float64Array::from(vec![Some(0.1), None, Some(0.3)])),
                ],
            )
            .unwrap();
            sink.write(&batch).unwrap();
        }
        assert!(!path.exists(), "nothing is visible before finish");
        assert_eq!(sink.rows(), 9);
        sink.finish().unwrap();

        let file = std::fs::File::open(&path).unwrap();
        let builder = ParquetRecordBatchReaderBuilder::try_new(file).unwrap();
        let meta = builder.metadata().clone();
        assert_eq!(meta.num_row_groups(), 3);
        let kv = meta.file_metadata().key_value_metadata().unwrap();
        assert!(
            kv.iter()
                .any(|k| k.key == SCHEMA_KEY && k.value.as_deref() == Some("year; q"))
        );
        let rows: usize = builder
            .build()
            .unwrap()
            .map(|b| b.unwrap().num_rows())
            .sum();
        assert_eq!(rows, 9);
    }
}
