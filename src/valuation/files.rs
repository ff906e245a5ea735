//! The valuation's Parquet outputs, streamed chunk by chunk in scenario order.
//!
//! `book.parquet` (`scenario, pv_expected, pv_simulated`), `cashflows.parquet`
//! (`scenario, year, expected, simulated`) and `lifetimes.parquet` (`scenario, sex, age,
//! horizon, e_complete, e_curtate, annuity`). Key columns use the same types as the
//! projection's files (scenario UInt32, year and age Int16, sex a plain string) so the files
//! join without casts. Simulated columns are null when individual deaths are not simulated.
//! All three are closed together and committed only when the run has succeeded.

use std::fs::File;
use std::path::{Path, PathBuf};
use std::sync::Arc;

use arrow_array::{Array, Float64Array, Int16Array, StringArray, UInt32Array};
use arrow_schema::{DataType, Field, Schema, SchemaRef};
use parquet::arrow::ProjectionMask;
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;

use crate::data::config::Compression;
use crate::error::{Error, Result};
use crate::io::parquet::{ParquetSink, STREAMED_ROWS_PER_GROUP};
use crate::io::{AtomicFile, Provenance};
use crate::projection::OutputOptions;
use crate::risk::order::Sample;
use crate::valuation::driver::ScenarioResult;

const BOOK_DESCRIPTION: &str = "scenario: scenario number, 0 is the central path; \
    pv_expected: present value of the book's benefits given the scenario's path (trend \
    risk only); pv_simulated: present value with each life's death simulated (trend and \
    idiosyncratic risk), null when not simulated";
const CASHFLOWS_DESCRIPTION: &str = "scenario: scenario number; year: calendar year of \
    payment (policy year k from the valuation year); expected: expected benefits given the \
    path; simulated: benefits paid with deaths simulated, null when not simulated";
const LIFETIMES_DESCRIPTION: &str = "scenario: scenario number; sex: F or M; age: age at \
    the valuation date; horizon: n in years (the largest is the whole future to max_age); \
    e_complete: E[min(T, n)]; e_curtate: E[min(K, n)]; annuity: n-year temporary annuity \
    on the valuation basis";

/// Rows per row group of `cashflows` and `lifetimes` (see [`STREAMED_ROWS_PER_GROUP`]).
pub const ROWS_PER_GROUP: usize = STREAMED_ROWS_PER_GROUP;

/// Rows per row group of `book.parquet`, one row a scenario: a million scenarios fit one
/// group, and the summary reads it back a batch at a time.
pub const BOOK_ROWS_PER_GROUP: usize = 1 << 20;

/// Rows per row group of a valuation file (`book`, `cashflows`, `lifetimes`).
pub fn rows_per_group(stem: &str) -> usize {
    if stem == "book" {
        BOOK_ROWS_PER_GROUP
    } else {
        ROWS_PER_GROUP
    }
}

/// The valuation files being written.
pub struct ValuationFiles {
    book: ParquetSink,
    cashflows: ParquetSink,
    lifetimes: Option<ParquetSink>,
    valuation_year: i32,
}

fn schema(fields: Vec<Field>) -> SchemaRef {
    Arc::new(Schema::new(fields))
}

fn book_schema() -> SchemaRef {
    schema(vec![
        Field::new("scenario", DataType::UInt32, false),
        Field::new("pv_expected", DataType::Float64, false),
        Field::new("pv_simulated", DataType::Float64, true),
    ])
}

fn cashflows_schema() -> SchemaRef {
    schema(vec![
        Field::new("scenario", DataType::UInt32, false),
        Field::new("year", DataType::Int16, false),
        Field::new("expected", DataType::Float64, false),
        Field::new("simulated", DataType::Float64, true),
    ])
}

fn lifetimes_schema() -> SchemaRef {
    schema(vec![
        Field::new("scenario", DataType::UInt32, false),
        Field::new("sex", DataType::Utf8, false),
        Field::new("age", DataType::Int16, false),
        Field::new("horizon", DataType::Int16, false),
        Field::new("e_complete", DataType::Float64, false),
        Field::new("e_curtate", DataType::Float64, false),
        Field::new("annuity", DataType::Float64, false),
    ])
}

fn sink(
    options: &OutputOptions,
    stem: &str,
    schema: SchemaRef,
    compression: Compression,
    description: &str,
) -> Result<ParquetSink> {
    ParquetSink::create(
        options.file(stem),
        schema,
        compression,
        description,
        &options.provenance,
        rows_per_group(stem),
    )
}

fn simulated(value: f64) -> Option<f64> {
    (!value.is_nan()).then_some(value)
}

impl ValuationFiles {
    /// Opens the files in `options.folder` (shard names when sharded).
    pub fn create(options: &OutputOptions, valuation_year: i32, lifetimes: bool) -> Result<Self> {
        let c = options.compression;
        Ok(ValuationFiles {
            book: sink(options, "book", book_schema(), c, BOOK_DESCRIPTION)?,
            cashflows: sink(
                options,
                "cashflows",
                cashflows_schema(),
                c,
                CASHFLOWS_DESCRIPTION,
            )?,
            lifetimes: if lifetimes {
                Some(sink(
                    options,
                    "lifetimes",
                    lifetimes_schema(),
                    c,
                    LIFETIMES_DESCRIPTION,
                )?)
            } else {
                None
            },
            valuation_year,
        })
    }

    /// Appends one chunk of results (in scenario order).
    pub fn write(&mut self, results: &[ScenarioResult]) -> Result<()> {
        write_book(&mut self.book, results)?;

        let rows: usize = results.iter().map(|r| r.value.cash_expected.len()).sum();
        let (mut scenario, mut year, mut expected, mut sim) = (
            Vec::with_capacity(rows),
            Vec::with_capacity(rows),
            Vec::with_capacity(rows),
            Vec::with_capacity(rows),
        );
        for r in results {
            for (k, &e) in r.value.cash_expected.iter().enumerate() {
                scenario.push(r.scenario as u32);
                year.push((self.valuation_year + k as i32) as i16);
                expected.push(e);
                sim.push(r.value.cash_simulated.get(k).copied());
            }
        }
        self.cashflows.write_columns(vec![
            Arc::new(UInt32Array::from(scenario)),
            Arc::new(Int16Array::from(year)),
            Arc::new(Float64Array::from(expected)),
            Arc::new(Float64Array::from(sim)),
        ])?;

        if let Some(sink) = self.lifetimes.as_mut() {
            let rows = results
                .iter()
                .flat_map(|r| r.lifetimes.iter().map(move |l| (r.scenario, l)));
            let n: usize = results.iter().map(|r| r.lifetimes.len()).sum();
            let (mut s, mut sex, mut age, mut horizon, mut ec, mut ek, mut an) = (
                Vec::with_capacity(n),
                Vec::with_capacity(n),
                Vec::with_capacity(n),
                Vec::with_capacity(n),
                Vec::with_capacity(n),
                Vec::with_capacity(n),
                Vec::with_capacity(n),
            );
            for (id, l) in rows {
                s.push(id as u32);
                sex.push(l.sex.code());
                age.push(l.age as i16);
                horizon.push(l.horizon as i16);
                ec.push(l.e_complete);
                ek.push(l.e_curtate);
                an.push(l.annuity);
            }
            sink.write_columns(vec![
                Arc::new(UInt32Array::from(s)),
                Arc::new(StringArray::from(sex)),
                Arc::new(Int16Array::from(age)),
                Arc::new(Int16Array::from(horizon)),
                Arc::new(Float64Array::from(ec)),
                Arc::new(Float64Array::from(ek)),
                Arc::new(Float64Array::from(an)),
            ])?;
        }
        Ok(())
    }

    /// Writes the footers; the files stay under temporary names until committed. The
    /// book comes first, then the cash flows and the lifetimes.
    pub fn close(self) -> Result<Vec<AtomicFile>> {
        let mut files = vec![self.book.close()?, self.cashflows.close()?];
        if let Some(l) = self.lifetimes {
            files.push(l.close()?);
        }
        Ok(files)
    }
}

/// Opens a file of `book.parquet`'s layout at `path` on its own, without the other
/// valuation files: for a book's PVs that are only read back, never committed.
pub fn book_sink(
    path: &Path,
    compression: Compression,
    provenance: &Provenance,
) -> Result<ParquetSink> {
    ParquetSink::create(
        path,
        book_schema(),
        compression,
        BOOK_DESCRIPTION,
        provenance,
        BOOK_ROWS_PER_GROUP,
    )
}

/// Appends one chunk of results (in scenario order) to a sink of `book.parquet`'s layout.
pub fn write_book(book: &mut ParquetSink, results: &[ScenarioResult]) -> Result<()> {
    let ids: Vec<u32> = results.iter().map(|r| r.scenario as u32).collect();
    book.write_columns(vec![
        Arc::new(UInt32Array::from(ids)),
        Arc::new(Float64Array::from_iter_values(
            results.iter().map(|r| r.value.pv_expected),
        )),
        Arc::new(Float64Array::from_iter(
            results.iter().map(|r| simulated(r.value.pv_simulated)),
        )),
    ])
}

/// A written `book.parquet`, open for reading before it is committed.
#[derive(Debug)]
pub struct WrittenBook {
    file: File,
    path: PathBuf,
}

impl WrittenBook {
    /// Reopens the closed (not yet committed) `book` file for reading.
    pub fn reopen(book: &mut AtomicFile) -> Result<Self> {
        Ok(WrittenBook {
            file: book.reopen()?,
            path: book.target().to_path_buf(),
        })
    }

    /// The stochastic scenarios' values of PV column `column` (`pv_expected` or
    /// `pv_simulated`), in scenario order; the central path and nulls are left out.
    pub fn column(&self, column: &'static str) -> BookColumn<'_> {
        BookColumn { book: self, column }
    }
}

/// One PV column of a [`WrittenBook`], read again on every pass a summary asks for.
pub struct BookColumn<'a> {
    book: &'a WrittenBook,
    column: &'static str,
}

/// Rows decoded at a time when reading the book back.
const READ_BATCH_ROWS: usize = 8192;

fn read_error(path: &Path, e: impl std::fmt::Display) -> Error {
    Error::Parquet {
        path: path.to_path_buf(),
        message: e.to_string(),
    }
}

impl Sample for BookColumn<'_> {
    fn pass(&self, each: &mut dyn FnMut(f64)) -> Result<()> {
        self.pass_scenarios(&mut |_, x| each(x))
    }
}

impl BookColumn<'_> {
    /// Calls `each` with every stochastic scenario's number and value, in scenario order.
    pub fn pass_scenarios(&self, each: &mut dyn FnMut(u64, f64)) -> Result<()> {
        let path = &self.book.path;
        let file = self.book.file.try_clone().map_err(|e| Error::io(path, e))?;
        let builder =
            ParquetRecordBatchReaderBuilder::try_new(file).map_err(|e| read_error(path, e))?;
        let mask = ProjectionMask::columns(builder.parquet_schema(), ["scenario", self.column]);
        let reader = builder
            .with_projection(mask)
            .with_batch_size(READ_BATCH_ROWS)
            .build()
            .map_err(|e| read_error(path, e))?;
        for batch in reader {
            let batch = batch.map_err(|e| read_error(path, e))?;
            let ids = batch
                .column_by_name("scenario")
                .and_then(|c| c.as_any().downcast_ref::<UInt32Array>());
            let values = batch
                .column_by_name(self.column)
                .and_then(|c| c.as_any().downcast_ref::<Float64Array>());
            let (Some(ids), Some(values)) = (ids, values) else {
                return Err(read_error(path, format!("no `{}` column", self.column)));
            };
            for i in 0..batch.num_rows() {
                if ids.value(i) != 0 && !values.is_null(i) {
                    each(u64::from(ids.value(i)), values.value(i));
                }
            }
        }
        Ok(())
    }
}
