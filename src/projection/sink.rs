//! Parquet output written one row group at a time, with the encoding done off the writer.
//!
//! Encoding and compressing column chunks is most of the cost of a large projection, so it
//! runs on the worker that generated the rows; the file writer only appends finished
//! chunks, in scenario order. Memory is bounded by the row groups in flight, whatever the
//! number of scenarios, and the bytes do not depend on the number of threads.

use std::path::{Path, PathBuf};
use std::sync::Arc;

use arrow_array::ArrayRef;
use arrow_schema::SchemaRef;
use parquet::arrow::ArrowWriter;
use parquet::arrow::arrow_writer::{ArrowColumnChunk, ArrowRowGroupWriterFactory, compute_leaves};
use parquet::basic::{Compression as Codec, Encoding, ZstdLevel};
use parquet::file::properties::{EnabledStatistics, WriterProperties};
use parquet::file::writer::SerializedFileWriter;
use parquet::schema::types::ColumnPath;

use crate::data::config::Compression;
use crate::error::{Error, Result};
use crate::io::AtomicFile;

/// Encodes row groups for one file; shared by the workers.
pub struct Encoder {
    path: PathBuf,
    schema: SchemaRef,
    factory: ArrowRowGroupWriterFactory,
}

/// A row group encoded and compressed, ready to append.
pub struct EncodedRowGroup {
    chunks: Vec<ArrowColumnChunk>,
}

/// A Parquet file being written under a temporary name.
pub struct ParquetSink {
    path: PathBuf,
    writer: SerializedFileWriter<AtomicFile>,
}

/// A finished file waiting to be renamed into place.
pub struct FinishedFile(AtomicFile);

fn parquet_err(path: &Path, e: impl std::fmt::Display) -> Error {
    Error::Parquet {
        path: path.to_path_buf(),
        message: e.to_string(),
    }
}

/// Writer properties: the configured codec, no dictionaries, and each named column's
/// encoding; statistics per column chunk only.
pub fn properties(
    compression: Compression,
    encodings: Vec<(String, Encoding)>,
) -> WriterProperties {
    let codec = match compression {
        Compression::Zstd => Codec::ZSTD(ZstdLevel::default()),
        Compression::Snappy => Codec::SNAPPY,
        Compression::None => Codec::UNCOMPRESSED,
    };
    let mut builder = WriterProperties::builder()
        .set_compression(codec)
        .set_dictionary_enabled(false)
        .set_statistics_enabled(EnabledStatistics::Chunk)
        .set_created_by(format!("tailspan {}", crate::VERSION));
    for (name, encoding) in encodings {
        builder = builder.set_column_encoding(ColumnPath::from(name), encoding);
    }
    builder.build()
}

impl ParquetSink {
    /// Starts `path` with `schema`; returns the sink and the encoder for its row groups.
    pub fn create(
        path: &Path,
        schema: SchemaRef,
        props: WriterProperties,
    ) -> Result<(ParquetSink, Arc<Encoder>)> {
        let file = AtomicFile::create(path)?;
        let writer = ArrowWriter::try_new(file, Arc::clone(&schema), Some(props))
            .map_err(|e| parquet_err(path, e))?;
        let (writer, factory) = writer
            .into_serialized_writer()
            .map_err(|e| parquet_err(path, e))?;
        let encoder = Encoder {
            path: path.to_path_buf(),
            schema,
            factory,
        };
        Ok((
            ParquetSink {
                path: path.to_path_buf(),
                writer,
            },
            Arc::new(encoder),
        ))
    }

    /// Appends a row group.
    pub fn append(&mut self, group: EncodedRowGroup) -> Result<()> {
        let path = &self.path;
        let mut row_group = self
            .writer
            .next_row_group()
            .map_err(|e| parquet_err(path, e))?;
        for chunk in group.chunks {
            chunk
                .append_to_row_group(&mut row_group)
                .map_err(|e| parquet_err(path, e))?;
        }
        row_group.close().map_err(|e| parquet_err(path, e))?;
        Ok(())
    }

    /// Writes the footer; the file still has its temporary name.
    pub fn finish(self) -> Result<FinishedFile> {
        let path = self.path;
        let file = self
            .writer
            .into_inner()
            .map_err(|e| parquet_err(&path, e))?;
        Ok(FinishedFile(file))
    }
}

impl FinishedFile {
    /// Renames the file into place.
    pub fn commit(self) -> Result<()> {
        self.0.commit()
    }
}

impl Encoder {
    /// Encodes `columns` (in schema order) as one row group.
    pub fn encode(&self, columns: &[ArrayRef]) -> Result<EncodedRowGroup> {
        let path = &self.path;
        let mut writers = self
            .factory
            .create_column_writers(0)
            .map_err(|e| parquet_err(path, e))?;
        let mut writer_iter = writers.iter_mut();
        for (field, array) in self.schema.fields().iter().zip(columns) {
            for leaf in compute_leaves(field, array).map_err(|e| parquet_err(path, e))? {
                let Some(w) = writer_iter.next() else {
                    return Err(parquet_err(path, "more columns than the schema"));
                };
                w.write(&leaf).map_err(|e| parquet_err(path, e))?;
            }
        }
        let chunks = writers
            .into_iter()
            .map(|w| w.close())
            .collect::<std::result::Result<Vec<_>, _>>()
            .map_err(|e| parquet_err(path, e))?;
        Ok(EncodedRowGroup { chunks })
    }
}
