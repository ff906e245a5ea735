//! Columnar output: an append-only Parquet writer that commits atomically.
//!
//! Large outputs (scenario paths) are produced in batches and must never sit whole in
//! memory, so the writer takes Arrow record batches one at a time and flushes a row group
//! whenever `rows_per_group` rows have gathered. The file is written under a temporary name
//! and renamed only by [`ParquetSink::finish`]; a run that fails part way leaves nothing.
//! Each file carries a plain-text description of its columns in the key-value metadata
//! (key `tailspan.schema`), the crate version (key `tailspan.version`) and the run's
//! provenance (run id, seed, scenarios, the SHA-256 of the config and of every input; see
//! `io::provenance`), so a reader downstream can tell what it holds and where it came from
//! without this code. A floating-point value that is NaN or infinite is refused before it
//! is written: a missing value is a null, never a NaN.

use std::path::{Path, PathBuf};
use std::sync::Arc;

use ::parquet::arrow::ArrowWriter;
use ::parquet::arrow::arrow_writer::{
    ArrowColumnChunk, ArrowRowGroupWriterFactory, ArrowWriterOptions, compute_leaves,
};
use ::parquet::basic::{Compression as Codec, Encoding, ZstdLevel};
use ::parquet::file::metadata::KeyValue;
use ::parquet::file::properties::{EnabledStatistics, WriterProperties, WriterPropertiesBuilder};
use ::parquet::file::writer::SerializedFileWriter;
use ::parquet::schema::types::ColumnPath;
use arrow_array::{Array, ArrayRef, Float64Array, RecordBatch, UInt32Array};
use arrow_schema::SchemaRef;

use crate::data::config::Compression;
use crate::error::{Error, Result};
use crate::io::atomic::AtomicFile;
use crate::io::provenance::Provenance;
use crate::io::spill::SpillFactory;

/// Key of the column description in the file's key-value metadata.
pub const SCHEMA_KEY: &str = "tailspan.schema";
/// Key of the crate version in the file's key-value metadata.
pub const VERSION_KEY: &str = "tailspan.version";

/// Default rows per row group: large enough for good compression and fast scans, small
/// enough that a group of a few numeric columns stays within tens of megabytes.
pub const DEFAULT_ROWS_PER_GROUP: usize = 1 << 20;

/// Rows per row group of the files written batch by batch over a whole run (valuation
/// files, projected factors and period figures): 4,194,304 rows, 90–160 MB before
/// compression, near the 128 MB row groups parquet-mr writes by default (from memory).
/// [`ParquetSink`] spills finished pages to disk (`io::spill`), so its memory does not
/// depend on this; what does is the footer, one entry per column chunk kept until the
/// file closes, which large groups keep small: a million scenarios of the 1,000-policy
/// bench book make about 35 row groups of valuation files, not the 1,100 that 2^17-row
/// groups made.
pub const STREAMED_ROWS_PER_GROUP: usize = 1 << 22;

/// A Parquet file being written batch by batch.
pub struct ParquetSink {
    path: PathBuf,
    schema: SchemaRef,
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
        provenance: &Provenance,
        rows_per_group: usize,
    ) -> Result<Self> {
        let path = path.as_ref().to_path_buf();
        // The writer keeps every page's statistics and offsets (the page index) until the
        // footer, so they grow with the rows of a long run; min/max per column chunk is
        // what readers prune row groups on, and all that `RowGroupSink` files carry too.
        let mut props = base_properties(compression, description, provenance)
            .set_max_row_group_row_count(Some(rows_per_group.max(1)))
            .set_statistics_enabled(EnabledStatistics::Chunk)
            .set_offset_index_disabled(true);
        // Only labels repeat enough for a dictionary. Measured floats rarely repeat: a
        // dictionary hashes every value and holds up to 1 MB of them (131,072 f64) per
        // column before falling back to plain encoding; for the valuation files its tables
        // were 20 MB of the heap (massif, 30,000 scenarios) and made the files 20 % larger.
        // The scenario key of a 2^22-row group has tens of thousands of values, whose hash
        // table alone took 3.5 MB (heaptrack, 200,000 scenarios). Plain sorted keys compress
        // to almost nothing under zstd; byte-stream-split floats compress about 10 %
        // smaller (as in the projection's files).
        for field in schema.fields() {
            let column = ColumnPath::from(field.name().as_str());
            match field.data_type() {
                arrow_schema::DataType::Utf8 => {}
                arrow_schema::DataType::Float64 => {
                    props = props
                        .set_column_dictionary_enabled(column.clone(), false)
                        .set_column_encoding(column, Encoding::BYTE_STREAM_SPLIT);
                }
                _ => props = props.set_column_dictionary_enabled(column, false),
            }
        }
        let file = AtomicFile::create(&path)?;
        // Finished pages wait on disk, not on the heap, until their row group closes.
        let options = ArrowWriterOptions::new()
            .with_properties(props.build())
            .with_page_store_factory(Arc::new(SpillFactory::new(file.folder())));
        let writer = ArrowWriter::try_new_with_options(file, Arc::clone(&schema), options)
            .map_err(|e| parquet_error(&path, e))?;
        Ok(ParquetSink {
            path,
            schema,
            writer,
            rows: 0,
        })
    }

    /// Appends one batch; its schema must be the file's.
    pub fn write(&mut self, batch: &RecordBatch) -> Result<()> {
        check_finite(&self.path, batch.schema().fields(), batch.columns())?;
        self.writer
            .write(batch)
            .map_err(|e| parquet_error(&self.path, e))?;
        self.rows += batch.num_rows();
        Ok(())
    }

    /// Appends one batch made of `columns`, one array per field of the file's schema.
    pub fn write_columns(&mut self, columns: Vec<ArrayRef>) -> Result<()> {
        let batch = RecordBatch::try_new(Arc::clone(&self.schema), columns)
            .map_err(|e| parquet_error(&self.path, e))?;
        self.write(&batch)
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
    provenance: &Provenance,
) -> Result<()> {
    let mut sink = ParquetSink::create(
        path,
        Arc::clone(&batch.schema()),
        compression,
        description,
        provenance,
        DEFAULT_ROWS_PER_GROUP,
    )?;
    sink.write(batch)?;
    sink.finish()
}

/// The codec and the metadata every tailspan Parquet file carries.
fn base_properties(
    compression: Compression,
    description: &str,
    provenance: &Provenance,
) -> WriterPropertiesBuilder {
    let codec = match compression {
        Compression::Zstd => Codec::ZSTD(ZstdLevel::default()),
        Compression::Snappy => Codec::SNAPPY,
        Compression::None => Codec::UNCOMPRESSED,
    };
    let mut metadata = vec![
        KeyValue::new(SCHEMA_KEY.to_string(), description.to_string()),
        KeyValue::new(VERSION_KEY.to_string(), crate::VERSION.to_string()),
    ];
    metadata.extend(provenance.key_values());
    WriterProperties::builder()
        .set_compression(codec)
        .set_key_value_metadata(Some(metadata))
}

/// Refuses a batch with a NaN or an infinity in a floating-point column, naming the file,
/// the column and (where the batch has one) the scenario.
fn check_finite(path: &Path, fields: &arrow_schema::Fields, columns: &[ArrayRef]) -> Result<()> {
    let scenarios = fields
        .iter()
        .position(|f| f.name() == "scenario")
        .and_then(|i| columns.get(i))
        .and_then(|c| c.as_any().downcast_ref::<UInt32Array>());
    for (field, column) in fields.iter().zip(columns) {
        let Some(values) = column.as_any().downcast_ref::<Float64Array>() else {
            continue;
        };
        let bad = values
            .iter()
            .enumerate()
            .find(|(_, v)| v.is_some_and(|v| !v.is_finite()));
        if let Some((row, Some(value))) = bad {
            let at = match scenarios {
                Some(s) if row < s.len() => format!("scenario {}", s.value(row)),
                _ => format!("row {row} of a batch"),
            };
            return Err(Error::Numerical(format!(
                "{}: column `{}` would hold {value} at {at}; non-finite values are never \
                 written (nothing was committed)",
                path.display(),
                field.name()
            )));
        }
    }
    Ok(())
}

/// A Parquet file whose row groups are encoded and compressed elsewhere (on worker
/// threads, see [`RowGroupEncoder`]) and appended here in order.
///
/// Encoding is most of the cost of a large output; done on the thread that produced the
/// rows it runs on every core, while the file itself is written by one thread in a fixed
/// order, so the bytes do not depend on the number of threads.
pub struct RowGroupSink {
    path: PathBuf,
    writer: SerializedFileWriter<AtomicFile>,
}

/// How one column of a [`RowGroupSink`] is written.
#[derive(Debug, Clone, PartialEq)]
pub struct ColumnLayout {
    /// Column name.
    pub name: String,
    /// Parquet encoding of its values.
    pub encoding: Encoding,
    /// Keep min/max statistics per column chunk (worth it only where readers filter).
    pub statistics: bool,
}

/// Encodes whole row groups for one [`RowGroupSink`]; shared by the workers.
pub struct RowGroupEncoder {
    path: PathBuf,
    schema: SchemaRef,
    factory: ArrowRowGroupWriterFactory,
}

/// A row group encoded and compressed, ready to append.
pub struct EncodedRowGroup {
    chunks: Vec<ArrowColumnChunk>,
}

impl RowGroupSink {
    /// Starts writing `path` with `schema`; `description` says what each column means and
    /// `columns` how named columns are written (dictionaries are off: the columns this
    /// writer is for are sorted keys and measured values, where a dictionary costs a hash
    /// per row and saves little).
    pub fn create(
        path: impl AsRef<Path>,
        schema: SchemaRef,
        compression: Compression,
        description: &str,
        provenance: &Provenance,
        columns: &[ColumnLayout],
    ) -> Result<(RowGroupSink, Arc<RowGroupEncoder>)> {
        let path = path.as_ref().to_path_buf();
        let mut props = base_properties(compression, description, provenance)
            .set_dictionary_enabled(false)
            .set_statistics_enabled(EnabledStatistics::Chunk);
        for c in columns {
            let column = ColumnPath::from(c.name.as_str());
            props = props.set_column_encoding(column.clone(), c.encoding);
            if !c.statistics {
                props = props.set_column_statistics_enabled(column, EnabledStatistics::None);
            }
        }
        let file = AtomicFile::create(&path)?;
        let (writer, factory) =
            ArrowWriter::try_new(file, Arc::clone(&schema), Some(props.build()))
                .and_then(ArrowWriter::into_serialized_writer)
                .map_err(|e| parquet_error(&path, e))?;
        let encoder = RowGroupEncoder {
            path: path.clone(),
            schema,
            factory,
        };
        Ok((RowGroupSink { path, writer }, Arc::new(encoder)))
    }

    /// Appends a row group.
    pub fn append(&mut self, group: EncodedRowGroup) -> Result<()> {
        let path = &self.path;
        let mut row_group = self
            .writer
            .next_row_group()
            .map_err(|e| parquet_error(path, e))?;
        for chunk in group.chunks {
            chunk
                .append_to_row_group(&mut row_group)
                .map_err(|e| parquet_error(path, e))?;
        }
        row_group.close().map_err(|e| parquet_error(path, e))?;
        Ok(())
    }

    /// Writes the footer but leaves the file under its temporary name, so that several
    /// outputs can be completed first and then committed together.
    pub fn close(self) -> Result<AtomicFile> {
        self.writer
            .into_inner()
            .map_err(|e| parquet_error(&self.path, e))
    }
}

impl RowGroupEncoder {
    /// Encodes `columns` (one array per schema field, in order) as one row group.
    pub fn encode(&self, columns: &[ArrayRef]) -> Result<EncodedRowGroup> {
        let path = &self.path;
        if columns.len() != self.schema.fields().len() {
            return Err(parquet_error(
                path,
                format!(
                    "{} columns given for a schema of {}",
                    columns.len(),
                    self.schema.fields().len()
                ),
            ));
        }
        check_finite(path, self.schema.fields(), columns)?;
        let mut writers = self
            .factory
            .create_column_writers(0)
            .map_err(|e| parquet_error(path, e))?;
        let mut writer_iter = writers.iter_mut();
        for (field, array) in self.schema.fields().iter().zip(columns) {
            for leaf in compute_leaves(field, array).map_err(|e| parquet_error(path, e))? {
                let Some(w) = writer_iter.next() else {
                    return Err(parquet_error(path, "more leaf columns than the schema"));
                };
                w.write(&leaf).map_err(|e| parquet_error(path, e))?;
            }
        }
        let chunks = writers
            .into_iter()
            .map(|w| w.close())
            .collect::<std::result::Result<Vec<_>, _>>()
            .map_err(|e| parquet_error(path, e))?;
        Ok(EncodedRowGroup { chunks })
    }
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
        let provenance = Provenance::new(7, 3, Vec::new());
        let mut sink = ParquetSink::create(
            &path,
            schema.clone(),
            Compression::Snappy,
            "year; q",
            &provenance,
            4,
        )
        .unwrap();
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
        // The spilled page buffers had no names: only the output is in the folder.
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
    }

    #[test]
    fn row_groups_of_many_spilled_pages_read_back_exactly() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("t.parquet");
        let schema = Arc::new(Schema::new(vec![
            Field::new("scenario", DataType::UInt32, false),
            Field::new("sex", DataType::Utf8, false),
            Field::new("value", DataType::Float64, false),
        ]));
        let n = 50_000u32;
        let value = |i: u32| (f64::from(i) * 0.618_033_988_749_895).fract() * 1e6;
        let mut sink = ParquetSink::create(
            &path,
            schema.clone(),
            Compression::Zstd,
            "scenario; sex; value",
            &Provenance::new(1, 3, Vec::new()),
            120_000,
        )
        .unwrap();
        for b in 0..3 {
            let ids = (b * n..(b + 1) * n).collect::<Vec<_>>();
            let batch = RecordBatch::try_new(
                schema.clone(),
                vec![
                    Arc::new(UInt32Array::from(ids.clone())),
                    Arc::new(arrow_array::StringArray::from_iter_values(
                        ids.iter().map(|i| if i % 2 == 0 { "F" } else { "M" }),
                    )),
                    Arc::new(Float64Array::from_iter_values(
                        ids.iter().map(|&i| value(i)),
                    )),
                ],
            )
            .unwrap();
            sink.write(&batch).unwrap();
        }
        sink.finish().unwrap();
        let builder =
            ParquetRecordBatchReaderBuilder::try_new(std::fs::File::open(&path).unwrap()).unwrap();
        assert_eq!(builder.metadata().num_row_groups(), 2);
        let mut next = 0u32;
        for batch in builder.build().unwrap() {
            let batch = batch.unwrap();
            let ids = batch
                .column(0)
                .as_any()
                .downcast_ref::<UInt32Array>()
                .unwrap();
            let values = batch
                .column(2)
                .as_any()
                .downcast_ref::<Float64Array>()
                .unwrap();
            for (id, v) in ids.iter().zip(values.iter()) {
                assert_eq!(id, Some(next));
                assert_eq!(v.map(f64::to_bits), Some(value(next).to_bits()));
                next += 1;
            }
        }
        assert_eq!(next, 3 * n);
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
    }

    #[test]
    fn provenance_is_recorded_and_non_finite_values_are_refused() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("t.parquet");
        let schema = Arc::new(Schema::new(vec![
            Field::new("scenario", DataType::UInt32, false),
            Field::new("q", DataType::Float64, true),
        ]));
        let provenance = Provenance::new(11, 5, Vec::new());
        let batch = |q: Vec<Option<f64>>| {
            RecordBatch::try_new(
                schema.clone(),
                vec![
                    Arc::new(UInt32Array::from_iter_values(3..3 + q.len() as u32)),
                    Arc::new(Float64Array::from(q)),
                ],
            )
            .unwrap()
        };
        for bad in [f64::NAN, f64::INFINITY, f64::NEG_INFINITY] {
            let mut sink = ParquetSink::create(
                &path,
                schema.clone(),
                Compression::Zstd,
                "scenario; q",
                &provenance,
                8,
            )
            .unwrap();
            let err = sink
                .write(&batch(vec![Some(0.1), Some(bad)]))
                .unwrap_err()
                .to_string();
            assert!(
                err.contains("column `q`") && err.contains("scenario 4"),
                "{err}"
            );
            drop(sink);
            assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
        }
        // A missing value is a null, which is written.
        write_batch(
            &path,
            &batch(vec![Some(0.1), None]),
            Compression::Zstd,
            "scenario; q",
            &provenance,
        )
        .unwrap();
        let file = std::fs::File::open(&path).unwrap();
        let builder = ParquetRecordBatchReaderBuilder::try_new(file).unwrap();
        let kv = builder
            .metadata()
            .file_metadata()
            .key_value_metadata()
            .unwrap();
        let value = |key: &str| {
            kv.iter()
                .find(|k| k.key == key)
                .and_then(|k| k.value.clone())
                .unwrap()
        };
        assert_eq!(value(crate::io::provenance::SEED_KEY), "11");
        assert_eq!(value(crate::io::provenance::SCENARIOS_KEY), "5");
        assert_eq!(value(crate::io::provenance::RUN_ID_KEY), provenance.run_id);
        assert_eq!(value(VERSION_KEY), crate::VERSION);
    }
}
