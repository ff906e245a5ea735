//! Parallel scenario generation streamed to Parquet, optionally one shard of the run.
//!
//! Scenarios are generated and encoded in fixed-size chunks of consecutive scenario
//! numbers, several chunks at a time on the rayon pool, while the previous batch of
//! chunks is appended to the files in order. The chunking depends only on the scenario
//! range, never on the thread count, so a run's files are byte-identical on 1 or 16
//! threads; a shard is a contiguous block of scenarios, so the shards' rows together are
//! exactly the rows of the whole run.

use std::ops::Range;
use std::path::PathBuf;
use std::str::FromStr;
use std::sync::Arc;

use arrow_array::{ArrayRef, Float32Array, Float64Array, Int16Array, StringArray, UInt32Array};
use arrow_schema::{DataType, Field, Schema, SchemaRef};
use parquet::basic::Encoding;

use crate::data::PathsOutput;
use crate::data::config::Compression;
use crate::error::{Error, Result};
use crate::io::parquet::{
    ColumnLayout, EncodedRowGroup, ParquetSink, RowGroupEncoder, RowGroupSink,
    STREAMED_ROWS_PER_GROUP,
};
use crate::io::provenance::{Provenance, retire_stale_records};
use crate::projection::period::{PERIOD_AGE, complete_expectancy};
use crate::projection::scenarios::{Projector, ScenarioPaths};

/// Factor name of the cohort index rows in `factors.parquet` (their `year` is the birth year).
pub const GAMMA: &str = "gamma";

/// Default rows of `paths.parquet` per row group (about); a chunk holds whole scenarios.
/// Half a million rows keeps each worker's buffers near 10 MB and row groups large enough
/// to read efficiently.
pub const ROW_GROUP_ROWS: usize = 1 << 19;

/// Shard K of N (1-based): a contiguous block of the run's scenarios.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Shard {
    /// K, from 1.
    pub index: usize,
    /// N, at least 1.
    pub count: usize,
}

impl FromStr for Shard {
    type Err = Error;

    fn from_str(s: &str) -> Result<Shard> {
        let bad = || {
            Error::argument(
                "--shard",
                format!("must be K/N with 1 <= K <= N, such as 2/8, found `{s}`"),
            )
        };
        let (k, n) = s.split_once('/').ok_or_else(bad)?;
        let index: usize = k.trim().parse().map_err(|_| bad())?;
        let count: usize = n.trim().parse().map_err(|_| bad())?;
        if index == 0 || count == 0 || index > count {
            return Err(bad());
        }
        Ok(Shard { index, count })
    }
}

impl Shard {
    /// This shard's block of `ids`: block K of N nearly equal contiguous blocks.
    pub fn range(&self, ids: Range<u64>) -> Result<Range<u64>> {
        let total = ids.end - ids.start;
        if self.count as u64 > total {
            return Err(Error::argument(
                "--shard",
                format!(
                    "{} shards for {total} scenarios (scenario 0, the central path, included); use at most {total}",
                    self.count
                ),
            ));
        }
        let at = |k: u64| ids.start + k * total / self.count as u64;
        Ok(at(self.index as u64 - 1)..at(self.index as u64))
    }

    /// `stem.part-K-of-N.parquet`.
    pub fn file_name(&self, stem: &str) -> String {
        format!("{stem}.part-{}-of-{}.parquet", self.index, self.count)
    }
}

/// Where and what to write.
#[derive(Debug, Clone)]
pub struct OutputOptions {
    /// Output folder.
    pub folder: PathBuf,
    /// Which scenarios `paths.parquet` (the largest file) holds, if written.
    pub paths: PathsOutput,
    /// Parquet codec.
    pub compression: Compression,
    /// Write only this shard, to `part-K-of-N` files.
    pub shard: Option<Shard>,
    /// Target rows of `paths.parquet` per row group (whole scenarios, at least one).
    pub row_group_rows: usize,
    /// The run every file records (key-value metadata).
    pub provenance: Provenance,
}

impl OutputOptions {
    /// The path of the file `stem` (`paths`, `factors`, `period`).
    pub fn file(&self, stem: &str) -> PathBuf {
        let name = match self.shard {
            Some(shard) => shard.file_name(stem),
            None => format!("{stem}.parquet"),
        };
        self.folder.join(name)
    }
}

/// What a run wrote.
#[derive(Debug, Clone, PartialEq)]
pub struct Written {
    /// Scenarios written.
    pub scenarios: Range<u64>,
    /// Files written, in the order paths, factors, period.
    pub files: Vec<PathBuf>,
    /// Rows of `paths.parquet` (0 when it is not written).
    pub path_rows: u64,
}

fn label_field(name: &str) -> Field {
    Field::new(name, DataType::Utf8, false)
}

/// Schema of `paths.parquet`. q is a 32-bit float: its 24-bit significand keeps q to a
/// relative 6e-8, far inside any use of a path (the valuation and every other file work
/// from the 64-bit rates), and halves the file beside 64 bits; with the central rate
/// m = −ln(1 − q) left to the reader instead of stored, a row takes about a quarter of
/// the bytes it took.
pub fn paths_schema() -> SchemaRef {
    Arc::new(Schema::new(vec![
        Field::new("scenario", DataType::UInt32, false),
        label_field("sex"),
        Field::new("year", DataType::Int16, false),
        Field::new("age", DataType::Int16, false),
        Field::new("q", DataType::Float32, false),
    ]))
}

/// Schema of `factors.parquet`.
pub fn factors_schema() -> SchemaRef {
    Arc::new(Schema::new(vec![
        Field::new("scenario", DataType::UInt32, false),
        label_field("sex"),
        Field::new("year", DataType::Int16, false),
        label_field("factor"),
        Field::new("value", DataType::Float64, false),
    ]))
}

/// Schema of `period.parquet`.
pub fn period_schema() -> SchemaRef {
    Arc::new(Schema::new(vec![
        Field::new("scenario", DataType::UInt32, false),
        label_field("sex"),
        Field::new("year", DataType::Int16, false),
        Field::new("e65", DataType::Float64, false),
    ]))
}

/// Column descriptions stored in each file's metadata (key `tailspan.schema`).
const PATHS_DESCRIPTION: &str = "scenario: scenario number, 0 is the central path; \
    sex: F or M; year: projected calendar year; age: age last birthday; \
    q: one-year probability of death as a 32-bit float (the 64-bit rate rounded to nearest); \
    the central rate m = -ln(1 - q) is not stored: compute it from q, infinite where q = 1; \
    rows cover the central path and the scenarios output.paths asks for";
const FACTORS_DESCRIPTION: &str = "scenario: scenario number, 0 is the central path; \
    sex: F or M; year: projected calendar year, or birth year for factor gamma; \
    factor: period index name (k, k1, k2, k3) or gamma, the cohort index of cohort models \
    for the cohorts each scenario draws; value: the projected index";
const PERIOD_DESCRIPTION: &str = "scenario: scenario number, 0 is the central path; \
    sex: F or M; year: projected calendar year; \
    e65: period complete expectation of life at 65 from that year's rates, under UDD";

/// Column layouts of `paths.parquet`, chosen by measuring CBD runs of 2,000 and 3,000
/// scenarios (CPU time, zstd): dictionaries on the key columns cost a hash lookup per
/// row, and delta bit-packing of the sorted integer keys costs more CPU than letting zstd
/// squeeze their long runs from plain values (the file is the same size), so integer keys
/// are plain; the sex label is a length-delta string (readable by pyarrow, unlike a
/// dictionary-typed column without a dictionary page); byte-stream-split floats compress
/// about 10 % smaller under zstd at no extra cost. Min/max statistics of the labels cost
/// a string comparison per row and filter nothing (every row group holds every sex), so
/// they are left out.
fn column_layouts(schema: &Schema) -> Vec<ColumnLayout> {
    schema
        .fields()
        .iter()
        .map(|f| {
            let (encoding, statistics) = match f.data_type() {
                DataType::Float64 | DataType::Float32 => (Encoding::BYTE_STREAM_SPLIT, true),
                DataType::Utf8 => (Encoding::DELTA_LENGTH_BYTE_ARRAY, false),
                _ => (Encoding::PLAIN, true),
            };
            ColumnLayout {
                name: f.name().clone(),
                encoding,
                statistics,
            }
        })
        .collect()
}

/// The rows of one chunk of scenarios, column by column.
#[derive(Default)]
struct Columns {
    paths: Option<PathColumns>,
    factors: KeyColumns,
    factor_keys: Vec<i8>,
    factor_values: Vec<f64>,
    period: Option<(KeyColumns, Vec<f64>)>,
}

#[derive(Default)]
struct KeyColumns {
    scenario: Vec<u32>,
    sex: Vec<i8>,
    year: Vec<i16>,
}

#[derive(Default)]
struct PathColumns {
    keys: KeyColumns,
    age: Vec<i16>,
    q: Vec<f32>,
}

impl KeyColumns {
    fn push(&mut self, scenario: u64, sex: usize, year: i32, n: usize) {
        self.scenario
            .extend(std::iter::repeat_n(scenario as u32, n));
        self.sex.extend(std::iter::repeat_n(sex as i8, n));
        self.year.extend(std::iter::repeat_n(year as i16, n));
    }

    fn arrays(self, labels: &[&str]) -> Vec<ArrayRef> {
        vec![
            Arc::new(UInt32Array::from(self.scenario)),
            label_column(&self.sex, labels),
            Arc::new(Int16Array::from(self.year)),
        ]
    }
}

/// Labels as plain strings: a dictionary-typed column written without a dictionary page
/// is not readable by every Parquet reader (pyarrow 26 refuses it).
fn label_column(keys: &[i8], labels: &[&str]) -> ArrayRef {
    Arc::new(StringArray::from_iter_values(
        keys.iter().map(|&k| labels[k as usize]),
    ))
}

/// One chunk's row group for each of paths, factors and period (`None` where not written).
/// One chunk's output: the paths' row group, encoded on the worker (the bulk of the
/// work), and the factors' and period figures' columns, which their writers gather into
/// large row groups.
struct ChunkGroups {
    paths: Option<EncodedRowGroup>,
    factors: Vec<ArrayRef>,
    period: Option<Vec<ArrayRef>>,
    /// The period figures of the chunk's scenarios that the caller keeps, in order.
    kept: Vec<Vec<f64>>,
}

struct Layout {
    sex_labels: Vec<&'static str>,
    factor_labels: Vec<&'static str>,
    /// Offset of each sex's first index name in `factor_labels`.
    factor_offsets: Vec<usize>,
    /// Position of `gamma` in `factor_labels` (cohort models only).
    gamma_label: Option<usize>,
    period_index: Option<usize>,
}

/// Most scenarios a chunk holds when paths are not written.
const MAX_CHUNK_SCENARIOS: usize = 256;

/// Generates scenarios `range`: one row group of paths (when `paths_encoder` is given), and
/// the columns of the factors and period figures.
fn encode_chunk(
    projector: &Projector,
    layout: &Layout,
    range: Range<u64>,
    paths_encoder: Option<&RowGroupEncoder>,
    keep: &Range<u64>,
) -> Result<ChunkGroups> {
    let mut buf = projector.buffer();
    // Without its paths a scenario's rates feed only e°65: the ages from 65 up.
    if paths_encoder.is_none() {
        let mut plan = projector.no_cells();
        if layout.period_index.is_some() {
            plan.add_ages_from(PERIOD_AGE);
        }
        buf.set_cells(&plan);
    }
    let (years, ages) = (buf.years(), buf.ages());
    let n_sexes = buf.sexes().len();
    let per_scenario = n_sexes * years.len() * ages.len();
    let count = (range.end - range.start) as usize;
    let mut cols = Columns::default();
    if paths_encoder.is_some() {
        let rows = count * per_scenario;
        cols.paths = Some(PathColumns {
            keys: KeyColumns {
                scenario: Vec::with_capacity(rows),
                sex: Vec::with_capacity(rows),
                year: Vec::with_capacity(rows),
            },
            age: Vec::with_capacity(rows),
            q: Vec::with_capacity(rows),
        });
    }
    if layout.period_index.is_some() {
        cols.period = Some(Default::default());
    }
    let ages_column: Vec<i16> = ages.iter().map(|a| a as i16).collect();
    let mut kept = Vec::new();
    for scenario in range {
        projector.generate(scenario, &mut buf)?;
        append_scenario(&buf, layout, &ages_column, &mut cols)?;
        if let (true, Some((_, e65))) = (keep.contains(&scenario), cols.period.as_ref()) {
            let figures = n_sexes * years.len();
            kept.push(e65[e65.len() - figures..].to_vec());
        }
    }
    let Columns {
        paths,
        factors,
        factor_keys,
        factor_values,
        period,
    } = cols;
    let paths = match (paths, paths_encoder) {
        (Some(p), Some(enc)) => {
            let mut arrays = p.keys.arrays(&layout.sex_labels);
            arrays.push(Arc::new(Int16Array::from(p.age)));
            arrays.push(Arc::new(Float32Array::from(p.q)));
            Some(enc.encode(&arrays)?)
        }
        _ => None,
    };
    let mut factor_arrays = factors.arrays(&layout.sex_labels);
    factor_arrays.push(label_column(&factor_keys, &layout.factor_labels));
    factor_arrays.push(Arc::new(Float64Array::from(factor_values)));
    let period = period.map(|(keys, e65)| {
        let mut arrays = keys.arrays(&layout.sex_labels);
        arrays.push(Arc::new(Float64Array::from(e65)) as ArrayRef);
        arrays
    });
    Ok(ChunkGroups {
        paths,
        factors: factor_arrays,
        period,
        kept,
    })
}

fn append_scenario(
    buf: &ScenarioPaths,
    layout: &Layout,
    ages_column: &[i16],
    cols: &mut Columns,
) -> Result<()> {
    let (years, n_ages) = (buf.years(), buf.ages().len());
    let scenario = buf.scenario();
    for (i, &sex) in buf.sexes().iter().enumerate() {
        let rates = buf.rates(i);
        for (h, year) in years.iter().enumerate() {
            let row = &rates[h * n_ages..(h + 1) * n_ages];
            if let Some(p) = cols.paths.as_mut() {
                p.keys.push(scenario, i, year, n_ages);
                p.age.extend_from_slice(ages_column);
                // Rounded to nearest (IEEE-754 `as`): exact for q = 1.
                p.q.extend(row.iter().map(|&q| q as f32));
            }
            let k = buf.factors(i, h + 1);
            cols.factors.push(scenario, i, year, k.len());
            let first = layout.factor_offsets[i];
            cols.factor_keys
                .extend((0..k.len()).map(|j| (first + j) as i8));
            cols.factor_values.extend_from_slice(k);
            if let (Some((keys, e65)), Some(a)) = (cols.period.as_mut(), layout.period_index) {
                let e = complete_expectancy(&row[a..]);
                if !e.is_finite() {
                    return Err(Error::Numerical(format!(
                        "scenario {scenario}, sex {sex}, year {year}: period life expectancy at {PERIOD_AGE} is not finite"
                    )));
                }
                keys.push(scenario, i, year, 1);
                e65.push(e);
            }
        }
        // The drawn cohort index, keyed by birth year, after the sex's period indices.
        if let (Some(c), Some(label)) = (buf.cohort(i), layout.gamma_label) {
            for (j, &g) in c.gamma().iter().enumerate() {
                cols.factors
                    .push(scenario, i, c.first_cohort() + j as i32, 1);
                cols.factor_keys.push(label as i8);
                cols.factor_values.push(g);
            }
        }
    }
    Ok(())
}

/// Generates scenarios `ids` (or this shard's block of them) and writes `paths.parquet`
/// (if asked, for the scenarios `options.paths` names), `factors.parquet` and
/// `period.parquet` (when age 65 is among the rates' ages). `progress` is told how many scenarios each finished chunk held. Nothing is left
/// in the folder if any scenario fails.
pub fn write_projection(
    projector: &mut Projector,
    ids: Range<u64>,
    options: &OutputOptions,
    progress: &(dyn Fn(u64) + Sync),
) -> Result<Written> {
    write_projection_keeping(projector, ids, options, 0..0, progress).map(|(written, _)| written)
}

/// As [`write_projection`], also handing back the period e°65 of the scenarios in `keep`
/// that are written, in scenario order: per scenario, sex by sex, each projected year, so
/// that a run need not compute the rates they come from again to chart them. Empty when
/// age 65 is not projected.
pub fn write_projection_keeping(
    projector: &mut Projector,
    ids: Range<u64>,
    options: &OutputOptions,
    keep: Range<u64>,
    progress: &(dyn Fn(u64) + Sync),
) -> Result<(Written, Vec<Vec<f64>>)> {
    let ids = match options.shard {
        Some(shard) => shard.range(ids)?,
        None => ids,
    };
    projector.prepare(ids.clone())?;
    let basis = projector.basis();
    let mut factor_names = Vec::new();
    let mut factor_offsets = Vec::new();
    for model in basis.models() {
        factor_offsets.push(factor_names.len());
        factor_names.extend(model.factor_names().iter().copied());
    }
    let gamma_label = basis.cohorts().any().then(|| {
        factor_names.push(GAMMA);
        factor_names.len() - 1
    });
    let ages = projector.ages();
    let layout = Layout {
        sex_labels: basis.sexes().iter().map(|s| s.code()).collect(),
        factor_labels: factor_names,
        factor_offsets,
        gamma_label,
        period_index: ages.index(PERIOD_AGE),
    };
    // Paths, by far the largest file, are encoded on the workers a row group per chunk;
    // the factors and period figures are gathered by their writers into large row groups
    // (their pages wait on disk), so their footers stay small however many scenarios.
    let mut files = Vec::new();
    let mut paths_sink = None;
    let mut paths_encoder = None;
    if options.paths.written() {
        let path = options.file("paths");
        let schema = paths_schema();
        let layouts = column_layouts(&schema);
        let (sink, encoder) = RowGroupSink::create(
            &path,
            schema,
            options.compression,
            PATHS_DESCRIPTION,
            &options.provenance,
            &layouts,
        )?;
        paths_sink = Some(sink);
        paths_encoder = Some(encoder);
        files.push(path);
    }
    let streamed = |stem: &str, schema: SchemaRef, description: &str| {
        ParquetSink::create(
            options.file(stem),
            schema,
            options.compression,
            description,
            &options.provenance,
            STREAMED_ROWS_PER_GROUP,
        )
    };
    let mut factors_sink = streamed("factors", factors_schema(), FACTORS_DESCRIPTION)?;
    files.push(options.file("factors"));
    let mut period_sink = match layout.period_index {
        Some(_) => {
            files.push(options.file("period"));
            Some(streamed("period", period_schema(), PERIOD_DESCRIPTION)?)
        }
        None => None,
    };

    // Scenarios ids.start..path_end have their paths written. A chunk of them is one row
    // group of paths; after them, a chunk is a few hundred scenarios, enough to share out
    // among the threads and few enough that the chunks in flight stay small. The chunks
    // depend on the scenario range and `output.paths` alone, never on the threads.
    let path_end = options.paths.end().clamp(ids.start, ids.end);
    let paths_per_scenario = basis.sexes().len() * projector.years().len() * ages.len();
    let path_chunk = (options.row_group_rows / paths_per_scenario.max(1)).max(1);
    let figures = basis.sexes().len() * projector.years().len() * 2;
    let other_chunk = (options.row_group_rows / figures.max(1)).clamp(1, MAX_CHUNK_SCENARIOS);
    let split = |range: Range<u64>, chunk: usize| {
        let end = range.end;
        range
            .step_by(chunk)
            .map(move |s| s..(s + chunk as u64).min(end))
    };
    let chunks: Vec<Range<u64>> = split(ids.start..path_end, path_chunk)
        .chain(split(path_end..ids.end, other_chunk))
        .collect();
    // Two chunks per thread in flight: enough to keep every core busy while the previous
    // batch is appended, few enough that memory stays flat.
    let batch = 2 * rayon::current_num_threads().max(1);
    let projector = &*projector;
    let encode_batch = |batch: &[Range<u64>]| -> Result<Vec<ChunkGroups>> {
        use rayon::prelude::*;
        batch
            .par_iter()
            .map(|r| {
                let encoder = paths_encoder.as_deref().filter(|_| r.end <= path_end);
                encode_chunk(projector, &layout, r.clone(), encoder, &keep)
            })
            .collect()
    };
    let mut path_rows = 0u64;
    let mut kept = Vec::new();
    let mut append_batch = |groups: Vec<ChunkGroups>, ranges: &[Range<u64>]| -> Result<()> {
        for (group, range) in groups.into_iter().zip(ranges) {
            let n = range.end - range.start;
            if let (Some(sink), Some(encoded)) = (paths_sink.as_mut(), group.paths) {
                sink.append(encoded)?;
                path_rows += n * paths_per_scenario as u64;
            }
            factors_sink.write_columns(group.factors)?;
            kept.extend(group.kept);
            if let (Some(sink), Some(period)) = (period_sink.as_mut(), group.period) {
                sink.write_columns(period)?;
            }
            progress(n);
        }
        Ok(())
    };
    let mut pending: Option<(Vec<ChunkGroups>, &[Range<u64>])> = None;
    for ranges in chunks.chunks(batch) {
        let previous = pending.take();
        let (appended, encoded) = rayon::join(
            || match previous {
                Some((groups, r)) => append_batch(groups, r),
                None => Ok(()),
            },
            || encode_batch(ranges),
        );
        appended?;
        pending = Some((encoded?, ranges));
    }
    if let Some((groups, r)) = pending {
        append_batch(groups, r)?;
    }

    let mut finished = Vec::new();
    if let Some(sink) = paths_sink {
        finished.push(sink.close()?);
    }
    finished.push(factors_sink.close()?);
    if let Some(sink) = period_sink {
        finished.push(sink.close()?);
    }
    if options.shard.is_none() {
        retire_stale_records(&options.folder, &options.provenance)?;
    }
    for file in finished {
        file.commit()?;
    }
    Ok((
        Written {
            scenarios: ids,
            files,
            path_rows,
        },
        kept,
    ))
}
