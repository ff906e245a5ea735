//! One file from several models' files of the same kind, with a leading `model` column.
//!
//! When a run values several model kinds, each kind is projected and valued exactly as a
//! single-model run would be, into files of its own; this gathers them afterwards, so the
//! writers of a single-model run stay as they are and a model's rows are those its own run
//! writes, byte for byte in every value. The parts' columns may differ where a model lacks
//! one (`m` in `paths.parquet` for the CBD family): the gathered file has every column,
//! null in the rows of a model without it.

use std::fs::File;
use std::path::{Path, PathBuf};
use std::sync::Arc;

use arrow_array::{ArrayRef, RecordBatch, StringArray, new_null_array};
use arrow_schema::{DataType, Field, Schema, SchemaRef};
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;

use crate::data::config::Compression;
use crate::error::{Error, Result};
use crate::io::AtomicFile;
use crate::io::parquet::{ParquetSink, SCHEMA_KEY};
use crate::io::provenance::Provenance;

/// Name of the column that tells the models' rows apart.
pub const MODEL_COLUMN: &str = "model";

/// What the `model` column means, put before the parts' own description.
const MODEL_DESCRIPTION: &str = "model: the model kind that drove the row (only when several \
    kinds are valued); ";

/// Rows decoded at a time from a part.
const READ_BATCH_ROWS: usize = 1 << 16;

/// One model's file to gather.
#[derive(Debug)]
pub struct ModelPart {
    /// The model kind's name, written in every row of the part.
    pub model: &'static str,
    /// The part, open for reading.
    pub file: File,
    /// Where the part lives (for messages).
    pub path: PathBuf,
}

fn parquet_error(path: &Path, e: impl std::fmt::Display) -> Error {
    Error::Parquet {
        path: path.to_path_buf(),
        message: e.to_string(),
    }
}

/// The gathered file's columns after `model`: every part's, in order of first appearance,
/// nullable when nullable or missing in some part.
fn union_fields(schemas: &[(PathBuf, SchemaRef)]) -> Result<Vec<Field>> {
    let mut fields: Vec<Field> = Vec::new();
    for (path, schema) in schemas {
        for field in schema.fields() {
            if field.name() == MODEL_COLUMN {
                return Err(parquet_error(path, "already has a `model` column"));
            }
            match fields.iter_mut().find(|f| f.name() == field.name()) {
                Some(f) if f.data_type() != field.data_type() => {
                    return Err(parquet_error(
                        path,
                        format!(
                            "column `{}` is {} here but {} in another model's file",
                            field.name(),
                            field.data_type(),
                            f.data_type()
                        ),
                    ));
                }
                Some(f) => {
                    if field.is_nullable() {
                        *f = f.clone().with_nullable(true);
                    }
                }
                None => fields.push(field.as_ref().clone()),
            }
        }
    }
    let fields = fields
        .into_iter()
        .map(|f| {
            let everywhere = schemas
                .iter()
                .all(|(_, s)| s.field_with_name(f.name()).is_ok());
            if everywhere { f } else { f.with_nullable(true) }
        })
        .collect();
    Ok(fields)
}

/// Writes `target` from `parts` in the order given, each part's rows preceded by its model
/// name in a first `model` column, and returns the file uncommitted. The description is
/// the first part's with the `model` column's in front.
pub fn gather_models(
    target: &Path,
    parts: Vec<ModelPart>,
    compression: Compression,
    provenance: &Provenance,
    rows_per_group: usize,
) -> Result<AtomicFile> {
    let mut readers = Vec::with_capacity(parts.len());
    let mut schemas = Vec::with_capacity(parts.len());
    let mut description = None;
    for part in parts {
        let builder = ParquetRecordBatchReaderBuilder::try_new(part.file)
            .map_err(|e| parquet_error(&part.path, e))?;
        if description.is_none() {
            description = builder
                .metadata()
                .file_metadata()
                .key_value_metadata()
                .and_then(|kv| kv.iter().find(|k| k.key == SCHEMA_KEY))
                .and_then(|k| k.value.clone());
        }
        let schema = Arc::new(Schema::new(builder.schema().fields().clone()));
        schemas.push((part.path.clone(), schema));
        readers.push((part.model, part.path, builder));
    }
    let mut fields = vec![Field::new(MODEL_COLUMN, DataType::Utf8, false)];
    fields.extend(union_fields(&schemas)?);
    let schema = Arc::new(Schema::new(fields));
    let description = format!("{MODEL_DESCRIPTION}{}", description.unwrap_or_default());
    let mut sink = ParquetSink::create(
        target,
        Arc::clone(&schema),
        compression,
        &description,
        provenance,
        rows_per_group,
    )?;
    for (model, path, builder) in readers {
        let reader = builder
            .with_batch_size(READ_BATCH_ROWS)
            .build()
            .map_err(|e| parquet_error(&path, e))?;
        for batch in reader {
            let batch = batch.map_err(|e| parquet_error(&path, e))?;
            let rows = batch.num_rows();
            let mut columns: Vec<ArrayRef> = vec![Arc::new(StringArray::from_iter_values(
                std::iter::repeat_n(model, rows),
            ))];
            for field in schema.fields().iter().skip(1) {
                columns.push(match batch.column_by_name(field.name()) {
                    Some(c) => Arc::clone(c),
                    None => new_null_array(field.data_type(), rows),
                });
            }
            let gathered = RecordBatch::try_new(Arc::clone(&schema), columns)
                .map_err(|e| parquet_error(&path, e))?;
            sink.write(&gathered)?;
        }
    }
    sink.close()
}

#[cfg(test)]
mod tests {
    use super::*;
    use arrow_array::{Array, Float64Array, UInt32Array};

    fn write_part(dir: &Path, name: &str, with_m: bool, q: f64) -> PathBuf {
        let mut fields = vec![
            Field::new("scenario", DataType::UInt32, false),
            Field::new("q", DataType::Float64, false),
        ];
        let mut columns: Vec<ArrayRef> = vec![
            Arc::new(UInt32Array::from(vec![0, 1])),
            Arc::new(Float64Array::from(vec![q, q / 2.0])),
        ];
        if with_m {
            fields.push(Field::new("m", DataType::Float64, true));
            columns.push(Arc::new(Float64Array::from(vec![Some(0.1), None])));
        }
        let path = dir.join(name);
        let mut sink = ParquetSink::create(
            &path,
            Arc::new(Schema::new(fields)),
            Compression::Zstd,
            "scenario: number; q: rate",
            &Provenance::new(1, 1, Vec::new()),
            1024,
        )
        .unwrap();
        sink.write_columns(columns).unwrap();
        sink.finish().unwrap();
        path
    }

    #[test]
    fn parts_are_gathered_in_order_with_missing_columns_null() {
        let dir = tempfile::tempdir().unwrap();
        let a = write_part(dir.path(), "a.parquet", true, 0.5);
        let b = write_part(dir.path(), "b.parquet", false, 0.25);
        let parts = [("lee-carter", &a), ("cbd", &b)]
            .into_iter()
            .map(|(model, path)| ModelPart {
                model,
                file: File::open(path).unwrap(),
                path: path.clone(),
            })
            .collect();
        let target = dir.path().join("all.parquet");
        gather_models(
            &target,
            parts,
            Compression::Zstd,
            &Provenance::new(1, 1, Vec::new()),
            1024,
        )
        .unwrap()
        .commit()
        .unwrap();
        let reader = ParquetRecordBatchReaderBuilder::try_new(File::open(&target).unwrap())
            .unwrap()
            .build()
            .unwrap();
        let batches: Vec<RecordBatch> = reader.map(|b| b.unwrap()).collect();
        assert_eq!(batches.len(), 1, "four rows read back in one batch");
        let batch = &batches[0];
        let names: Vec<String> = batch
            .schema_ref()
            .fields()
            .iter()
            .map(|f| f.name().clone())
            .collect();
        assert_eq!(names, ["model", "scenario", "q", "m"]);
        let model = batch
            .column(0)
            .as_any()
            .downcast_ref::<StringArray>()
            .unwrap();
        let got: Vec<&str> = (0..4).map(|i| model.value(i)).collect();
        assert_eq!(got, ["lee-carter", "lee-carter", "cbd", "cbd"]);
        let q = batch
            .column(2)
            .as_any()
            .downcast_ref::<Float64Array>()
            .unwrap();
        assert_eq!(q.values().to_vec(), [0.5, 0.25, 0.25, 0.125]);
        let m = batch.column(3);
        assert_eq!(m.null_count(), 3);
        assert!(batch.schema().field(3).is_nullable());
    }
}
