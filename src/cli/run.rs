//! `tailspan run`: the whole job the config asks for, with a report.

use std::io::Write as _;
use std::path::PathBuf;
use std::time::Instant;

use crate::cli::fit::fit_and_write;
use crate::cli::hedge::print_hedges;
use crate::cli::progress::Progress;
use crate::cli::value::print_summary;
use crate::data::{Book, Config, Experience};
use crate::error::{Error, Result};
use crate::hedge::qforward::ReferenceCells;
use crate::io::provenance::retire_stale_records;
use crate::io::write_json;
use crate::pipeline::{
    LIFETIME_SCENARIOS_KEPT, ProjectedFits, ValuationSetup, ValueRequest, hedge_stage, summarize,
    value_book, write_hedge_table,
};
use crate::projection::engine::ROW_GROUP_ROWS;
use crate::projection::{OutputOptions, scenario_ids, write_projection};
use crate::report::gather::{ReportInputs, fan_probes, report_data};
use crate::valuation::Extracts;

/// Arguments of `tailspan run`.
#[derive(Debug, clap::Args)]
pub struct RunArgs {
    /// The run configuration (TOML).
    pub config: PathBuf,
}

/// Times the stages for `--verbose`.
struct Stages {
    verbose: bool,
    start: Instant,
    last: Instant,
}

impl Stages {
    fn new(verbose: bool) -> Self {
        let now = Instant::now();
        Stages {
            verbose,
            start: now,
            last: now,
        }
    }

    fn done(&mut self, stage: &str) {
        let now = Instant::now();
        if self.verbose {
            eprintln!(
                "tailspan: {stage:<10} {:>8.2} s   (total {:.2} s)",
                (now - self.last).as_secs_f64(),
                (now - self.start).as_secs_f64()
            );
        }
        self.last = now;
    }
}

/// Runs `tailspan run`: checks the inputs, fits every configured model (fit.json,
/// residuals.parquet), projects (paths, factors, period), values the book with capital
/// (book, cash-flow and lifetime files, summary.json), prices the hedges (hedge.parquet),
/// writes report.html and prints the headline figures.
pub fn run(args: &RunArgs, quiet: bool, verbose: bool) -> Result<()> {
    let run_at = now_utc();
    let mut stages = Stages::new(verbose);
    let config = Config::load(&args.config)?;
    let provenance = crate::pipeline::provenance(&config)?;
    let experience = Experience::from_config(&config)?;
    let book = Book::from_config(&config)?;
    if book.is_some() {
        crate::interest::DiscountCurve::from_config(&config)?;
    }
    stages.done("check");

    let fit_set = fit_and_write(&config, &provenance, &experience)?;
    let fits = ProjectedFits::fit(&config, &experience)?;
    stages.done("fit");

    let mut projector = fits.projector(&config, &experience)?;
    let ids = scenario_ids(config.projection.scenarios, config.projection.noise);
    let options = OutputOptions {
        folder: config.output_folder(),
        paths: config.output.paths,
        compression: config.output.compression,
        shard: None,
        row_group_rows: ROW_GROUP_ROWS,
        provenance: provenance.clone(),
    };
    let bar = Progress::new("projecting", ids.end - ids.start, quiet);
    write_projection(&mut projector, ids.clone(), &options, &|n| bar.advance(n))?;
    bar.finish();
    stages.done("project");

    let mut summary = None;
    let mut outcome = None;
    let mut hedges = None;
    let mut probe_offset = 0;
    let mut basis = None;
    if let Some(book) = book {
        let setup = ValuationSetup::new(&config, book, &projector)?;
        crate::pipeline::write_basis(&config, &provenance, &setup)?;
        basis = setup.basis.clone();
        let mut probes = Vec::new();
        if let Some(h) = &config.hedge {
            probes.extend(ReferenceCells::of(h).cells);
        }
        probe_offset = probes.len();
        probes.extend(fan_probes(&config, &projector));
        // The charts draw the first stochastic scenarios (and the central path).
        let extracts = Extracts {
            probes,
            every_scenario: probe_offset,
            period: true,
            charts_end: ids.start.max(1) + LIFETIME_SCENARIOS_KEPT as u64,
        };
        let request = ValueRequest {
            ids,
            options: &options,
            hedges: config.hedge.as_ref(),
            report: true,
            extracts: &extracts,
        };
        let bar = Progress::new("valuing", request.ids.end - request.ids.start, quiet);
        let (valued, files) =
            value_book(&config, &setup, &projector, &request, &|n| bar.advance(n))?;
        bar.finish();
        stages.done("value");
        let mut figures = summarize(
            &config,
            &provenance,
            &fits,
            &experience,
            &setup,
            &projector,
            &valued,
        )?;
        stages.done("capital");
        let mut hedge_file = None;
        if let Some(h) = &config.hedge {
            let results = hedge_stage(&config, h, &setup, &valued)?;
            hedge_file = Some(write_hedge_table(&config, &provenance, &results, &valued)?);
            figures.hedges = Some(serde_json::to_value(&results.summary).map_err(|e| {
                Error::Numerical(format!("hedge summary could not be written: {e}"))
            })?);
            hedges = Some(results);
            stages.done("hedge");
        }
        retire_stale_records(&config.output_folder(), &provenance)?;
        for file in files.into_iter().chain(hedge_file) {
            file.commit()?;
        }
        write_json(config.output_folder().join("summary.json"), &figures)?;
        summary = Some(figures);
        outcome = Some(valued);
    }

    let data = report_data(&ReportInputs {
        config: &config,
        experience: &experience,
        fits: &fit_set,
        projector: &projector,
        outcome: outcome.as_ref(),
        probe_offset,
        summary: summary.as_ref(),
        hedges: hedges.as_ref(),
        provenance: &provenance,
        run_at,
        basis: basis.as_ref(),
    })?;
    let report = config.output_folder().join("report.html");
    crate::report::write(&report, &data)?;
    stages.done("report");

    if let Some(summary) = &summary {
        print_summary(summary)?;
        if let Some(h) = &hedges {
            print_hedges(h)?;
        }
    }
    let mut out = std::io::stdout().lock();
    writeln!(out, "results in {}", config.output_folder().display())
        .map_err(|e| Error::io("standard output", e))
}

/// The current time in UTC as ISO 8601, from the system clock, or the time that
/// `SOURCE_DATE_EPOCH` gives in seconds (the reproducible-builds.org convention), so that a
/// rerun can reproduce the report byte for byte.
fn now_utc() -> String {
    let fixed = std::env::var("SOURCE_DATE_EPOCH")
        .ok()
        .and_then(|s| s.trim().parse::<u64>().ok());
    let secs = fixed.unwrap_or_else(|| {
        std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .map(|d| d.as_secs())
            .unwrap_or(0)
    });
    let (days, rem) = (secs / 86_400, secs % 86_400);
    let (y, m, d) = civil_from_days(days as i64);
    format!(
        "{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}Z",
        rem / 3600,
        (rem % 3600) / 60,
        rem % 60
    )
}

/// Gregorian date of a day count from 1970-01-01 (H. Hinnant's civil-from-days algorithm).
fn civil_from_days(z: i64) -> (i64, u32, u32) {
    let z = z + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = (doy - (153 * mp + 2) / 5 + 1) as u32;
    let m = if mp < 10 { mp + 3 } else { mp - 9 } as u32;
    (yoe + era * 400 + i64::from(m <= 2), m, d)
}

#[cfg(test)]
mod tests {
    use super::civil_from_days;

    #[test]
    fn civil_dates_of_known_days() {
        // 1970-01-01 is day 0; 2000-03-01 is day 11,017; 2026-12-02 is day 20,789
        // (day counts from the proleptic Gregorian calendar, hand-checked).
        assert_eq!(civil_from_days(0), (1970, 1, 1));
        assert_eq!(civil_from_days(11_017), (2000, 3, 1));
        assert_eq!(civil_from_days(20_789), (2026, 12, 2));
    }
}
