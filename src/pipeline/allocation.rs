//! The allocation stage of `value` and `run`: each policy's and segment's share of the
//! capital (`allocation.parquet`, the summary's `allocation` block), and a candidate
//! tranche's marginal capital.
//!
//! It runs after the capital figures, on the `book.parquet` just written, and replays only
//! the scenarios the allocation averages over; a tranche costs two more valuations of every
//! scenario (the tranche alone, and the book with it). Their PVs go to hidden temporary
//! files of `book.parquet`'s layout beside the outputs, read back as the book's are and
//! removed when done, so that memory stays bounded by the policies, not the scenarios.

use std::sync::Arc;

use arrow_array::{ArrayRef, Float64Array, Int16Array, StringArray};
use arrow_schema::{DataType, Field, Schema};

use crate::data::{Book, Config};
use crate::error::{Error, Result};
use crate::interest::DiscountCurve;
use crate::io::parquet::{DEFAULT_ROWS_PER_GROUP, ParquetSink};
use crate::io::{AtomicFile, Provenance};
use crate::pipeline::{ValuationOutcome, ValuationSetup};
use crate::projection::{Projector, scenario_ids};
use crate::risk::CapitalSummary;
use crate::risk::allocation::{Allocation, Column, allocate};
use crate::risk::allocation_summary::AllocationSummary;
use crate::risk::order::{HELD, Streamed};
use crate::risk::summary::RunSummary;
use crate::risk::tranche::{Capitals, TrancheFigures, runoff_annuity, tranche_levels};
use crate::valuation::files::{WrittenBook, book_sink, write_book};
use crate::valuation::replay::PolicyReplay;
use crate::valuation::{DriverSettings, Extracts, ScenarioValue, value_scenarios};

const ALLOCATION_DESCRIPTION: &str = "one row per level and policy, in book order. id, sex, \
    age: the policy; level: confidence level; best_estimate: the policy's expected PV on the \
    central path; tvar_contribution: mean over the tail scenarios (book PV at or above VaR) \
    of the policy's PV less its best estimate, trend only, adding up to TVaR - BE; \
    var_contribution: the same mean over the window of scenarios ranked around VaR; \
    capital_share: tvar_contribution over the book's TVaR - BE. The `_simulated` columns, \
    present when individual deaths are simulated, are the same with each life's death \
    simulated (trend and idiosyncratic risk)";

/// Rows of `allocation.parquet` built at a time.
const BATCH_ROWS: usize = 1 << 16;

/// Allocates the run's capital when `capital.allocation` is on: writes `allocation.parquet`
/// (returned uncommitted) and puts the `allocation` block into `summary`.
pub fn allocation_stage(
    config: &Config,
    provenance: &Provenance,
    setup: &ValuationSetup,
    projector: &Projector,
    outcome: &ValuationOutcome,
    summary: &mut RunSummary,
    candidate: Option<&Book>,
) -> Result<Option<AtomicFile>> {
    if !config.capital.allocation {
        return Ok(None);
    }
    let book = outcome.book.as_ref().ok_or_else(|| {
        Error::model("allocation", "book.parquet was not kept for the allocation")
    })?;
    let settings = settings(config, setup);
    let replay = PolicyReplay::new(&setup.book, &setup.prepared, projector, settings)?;
    let allocation = allocate(
        &replay,
        book,
        &summary.trend,
        summary.trend_idiosyncratic.as_ref(),
    )?;
    let file = write_allocation(config, provenance, &setup.book, &allocation)?;
    let mut block = AllocationSummary::new(&setup.book, &allocation);
    if let Some(candidate) = candidate {
        block.tranche = Some(tranche(
            config,
            setup,
            projector,
            summary,
            provenance,
            candidate.clone(),
        )?);
    }
    summary.allocation = Some(block);
    Ok(Some(file))
}

/// The run's driver settings for `setup`'s book: its seed, its deaths and, with `[basis]`,
/// its own rates.
fn settings<'a>(config: &Config, setup: &'a ValuationSetup) -> DriverSettings<'a> {
    DriverSettings {
        seed: config.projection.seed,
        idiosyncratic: config.valuation.idiosyncratic,
        book_rates: setup.book_rates(),
        index_cash: false,
    }
}

/// The candidate tranche `data.candidate_book` names, loaded and checked as the book is
/// and against it (`book`), so that a bad tranche stops a run before any work.
pub fn candidate_book(config: &Config, book: Option<&Book>) -> Result<Option<Book>> {
    let Some(path) = &config.data.candidate_book else {
        return Ok(None);
    };
    let candidate = Book::load(&config.resolve(path))?;
    candidate.check_window(config)?;
    if let Some(book) = book {
        combined_book(book, &candidate)?;
    }
    Ok(Some(candidate))
}

/// The book with the candidate's policies after its own; an id in both is an error naming
/// the candidate's row.
pub fn combined_book(book: &Book, candidate: &Book) -> Result<Book> {
    let ids: std::collections::HashSet<&str> =
        book.policies.iter().map(|p| p.id.as_str()).collect();
    if let Some((i, p)) = candidate
        .policies
        .iter()
        .enumerate()
        .find(|(_, p)| ids.contains(p.id.as_str()))
    {
        return Err(Error::Row {
            file: candidate.source.clone(),
            row: i + 2,
            rule: format!(
                "id `{}` is also in the book {}: a tranche's ids must be new",
                p.id,
                book.source.display()
            ),
        });
    }
    Ok(Book {
        source: candidate.source.clone(),
        policies: book
            .policies
            .iter()
            .chain(&candidate.policies)
            .cloned()
            .collect(),
    })
}

/// A book valued in every scenario of the run: its central value and its PVs, in a file
/// of `book.parquet`'s layout.
struct Valued {
    central: ScenarioValue,
    pvs: WrittenBook,
    /// The PVs' file, under its hidden temporary name: never committed, so removed when
    /// dropped (and, if the process is killed, by the next run that writes `stem`).
    _file: AtomicFile,
}

/// Values `setup`'s book in every scenario of the run, writing its PVs to a temporary
/// file for the target `STEM.parquet` in the output folder.
fn value_everywhere(
    config: &Config,
    provenance: &Provenance,
    setup: &ValuationSetup,
    projector: &Projector,
    stem: &str,
) -> Result<Valued> {
    let ids = scenario_ids(config.projection.scenarios, config.projection.noise);
    let mut central = None;
    let path = config.output_folder().join(format!("{stem}.parquet"));
    let mut sink = book_sink(&path, config.output.compression, provenance)?;
    let settings = settings(config, setup);
    value_scenarios(
        projector,
        &setup.prepared,
        None,
        ids,
        settings,
        &Extracts::default(),
        |chunk| {
            if let Some(r) = chunk.iter().find(|r| r.scenario == 0) {
                central = Some(r.value.clone());
            }
            write_book(&mut sink, chunk)
        },
    )?;
    let central = central.ok_or_else(|| {
        Error::model("allocation", "the central path (scenario 0) was not valued")
    })?;
    let mut file = sink.close()?;
    let pvs = WrittenBook::reopen(&mut file)?;
    Ok(Valued {
        central,
        pvs,
        _file: file,
    })
}

/// Capital summaries (trend; with deaths simulated) of a book valued everywhere.
fn capitals(config: &Config, valued: &Valued) -> Result<(CapitalSummary, Option<CapitalSummary>)> {
    let be = valued.central.pv_expected;
    let levels = &config.capital.levels;
    let of = |simulated| -> Result<CapitalSummary> {
        let column = Column {
            source: &valued.pvs,
            simulated,
        };
        CapitalSummary::streamed(&Streamed::new(&column, HELD)?, be, levels)
    };
    let simulated = config
        .valuation
        .idiosyncratic
        .then(|| of(true))
        .transpose()?;
    Ok((of(false)?, simulated))
}

/// The tranche's summed (VaR, TVaR) contributions per level: policies from `first` on.
fn euler(levels: &[crate::risk::allocation::LevelContributions], first: usize) -> Vec<(f64, f64)> {
    levels
        .iter()
        .map(|l| {
            (
                l.var_contribution[first..].iter().sum(),
                l.tvar_contribution[first..].iter().sum(),
            )
        })
        .collect()
}

fn tranche(
    config: &Config,
    setup: &ValuationSetup,
    projector: &Projector,
    summary: &RunSummary,
    provenance: &Provenance,
    candidate: Book,
) -> Result<TrancheFigures> {
    let combined = combined_book(&setup.book, &candidate)?;
    let alone = ValuationSetup::new(config, candidate, projector)?;
    let together = ValuationSetup::new(config, combined, projector)?;
    let valued_alone = value_everywhere(config, provenance, &alone, projector, "tranche-alone")?;
    let valued_together = value_everywhere(
        config,
        provenance,
        &together,
        projector,
        "tranche-with-book",
    )?;
    let (alone_trend, alone_sim) = capitals(config, &valued_alone)?;
    let (together_trend, together_sim) = capitals(config, &valued_together)?;
    let replay = PolicyReplay::new(
        &together.book,
        &together.prepared,
        projector,
        settings(config, &together),
    )?;
    let allocation: Allocation = allocate(
        &replay,
        &valued_together.pvs,
        &together_trend,
        together_sim.as_ref(),
    )?;
    let first = setup.book.policies.len();
    let curve = DiscountCurve::from_config(config)?;
    let annuity = runoff_annuity(&valued_alone.central.cash_expected, |t| curve.discount(t));
    let rate = config.capital.cost_of_capital_rate;
    let best_estimate = valued_alone.central.pv_expected;
    let trend = tranche_levels(
        &Capitals {
            alone: &alone_trend,
            book: &summary.trend,
            combined: &together_trend,
        },
        &euler(&allocation.trend, first),
        best_estimate,
        rate,
        annuity,
    );
    let trend_idiosyncratic = match (&alone_sim, &summary.trend_idiosyncratic, &together_sim) {
        (Some(alone), Some(book), Some(combined)) => Some(tranche_levels(
            &Capitals {
                alone,
                book,
                combined,
            },
            &euler(
                allocation.trend_idiosyncratic.as_deref().unwrap_or(&[]),
                first,
            ),
            best_estimate,
            rate,
            annuity,
        )),
        _ => None,
    };
    Ok(TrancheFigures {
        policies: alone.book.policies.len(),
        best_estimate,
        cost_of_capital_rate: rate,
        runoff_annuity: annuity,
        trend,
        trend_idiosyncratic,
    })
}

/// Writes `allocation.parquet`: one row per level and policy.
pub fn write_allocation(
    config: &Config,
    provenance: &Provenance,
    book: &Book,
    allocation: &Allocation,
) -> Result<AtomicFile> {
    let simulated = allocation.trend_idiosyncratic.as_ref();
    let mut fields = vec![
        Field::new("id", DataType::Utf8, false),
        Field::new("sex", DataType::Utf8, false),
        Field::new("age", DataType::Int16, false),
        Field::new("level", DataType::Float64, false),
        Field::new("best_estimate", DataType::Float64, false),
        Field::new("tvar_contribution", DataType::Float64, false),
        Field::new("var_contribution", DataType::Float64, false),
        Field::new("capital_share", DataType::Float64, false),
    ];
    if simulated.is_some() {
        fields.extend([
            Field::new("tvar_contribution_simulated", DataType::Float64, false),
            Field::new("var_contribution_simulated", DataType::Float64, false),
            Field::new("capital_share_simulated", DataType::Float64, false),
        ]);
    }
    let path = config.output_folder().join("allocation.parquet");
    let mut sink = ParquetSink::create(
        &path,
        Arc::new(Schema::new(fields)),
        config.output.compression,
        ALLOCATION_DESCRIPTION,
        provenance,
        DEFAULT_ROWS_PER_GROUP,
    )?;
    let n = book.policies.len();
    for (i, trend) in allocation.trend.iter().enumerate() {
        let share = trend.capital_share();
        let sim = simulated.map(|s| (&s[i], s[i].capital_share()));
        for start in (0..n).step_by(BATCH_ROWS) {
            let end = (start + BATCH_ROWS).min(n);
            let policies = &book.policies[start..end];
            let floats =
                |v: &[f64]| -> ArrayRef { Arc::new(Float64Array::from(v[start..end].to_vec())) };
            let mut columns: Vec<ArrayRef> = vec![
                Arc::new(StringArray::from_iter_values(
                    policies.iter().map(|p| p.id.as_str()),
                )),
                Arc::new(StringArray::from_iter_values(
                    policies.iter().map(|p| p.sex.code()),
                )),
                Arc::new(Int16Array::from_iter_values(
                    policies.iter().map(|p| p.age as i16),
                )),
                Arc::new(Float64Array::from(vec![trend.level; end - start])),
                floats(&allocation.best_estimate),
                floats(&trend.tvar_contribution),
                floats(&trend.var_contribution),
                floats(&share),
            ];
            if let Some((s, s_share)) = &sim {
                columns.extend([
                    floats(&s.tvar_contribution),
                    floats(&s.var_contribution),
                    floats(s_share),
                ]);
            }
            sink.write_columns(columns)?;
        }
    }
    sink.close()
}
