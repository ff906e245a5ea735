//! Scenario generation streamed to Parquet, on invented CBD models for two sexes with
//! rates at 66 ages (55 to 120) over an 80-year horizon; generation alone also for an
//! invented Lee–Carter-like pair and the same pair with a drawn cohort index.
//!
//! `cargo bench --bench projection` measures small runs with criterion. The full-size run
//! (10,000 scenarios × 2 sexes × 66 ages × 80 years, `paths.parquet` written with zstd) is
//! timed once with
//!
//! ```text
//! TAILSPAN_BENCH_FULL=10000 cargo bench --bench projection
//! ```
//!
//! which prints the wall time and the file sizes instead of running criterion.

#[path = "../tests/suite/projection_support/mod.rs"]
mod projection_support;

use std::time::Instant;

use criterion::{Criterion, criterion_group};
use projection_support::{AGES, cbd_pair, cohort_pair, log_rate_pair};
use tailspan::data::config::{CohortSeriesKind, Compression};
use tailspan::projection::engine::ROW_GROUP_ROWS;
use tailspan::projection::{
    OutputOptions, Projector, Settings, Uncertainty, scenario_ids, write_projection,
};

fn projector() -> Projector {
    let settings = Settings {
        seed: 20261202,
        horizon: 80,
        noise: true,
        uncertainty: Uncertainty::Drift,
    };
    Projector::new(cbd_pair(AGES, 120), settings, None).expect("invented models project")
}

fn run(scenarios: usize, folder: &std::path::Path, paths: bool) -> u64 {
    let mut p = projector();
    let options = OutputOptions {
        folder: folder.to_path_buf(),
        paths: paths.into(),
        compression: Compression::Zstd,
        shard: None,
        row_group_rows: ROW_GROUP_ROWS,
        provenance: tailspan::io::Provenance::new(20_261_202, scenarios, Vec::new()),
    };
    write_projection(&mut p, scenario_ids(scenarios, true), &options, &|_| {})
        .expect("projection writes")
        .path_rows
}

fn small(c: &mut Criterion) {
    let dir = tempfile::tempdir().expect("temporary folder");
    let mut group = c.benchmark_group("project");
    group.sample_size(10);
    for scenarios in [50, 200] {
        group.bench_function(format!("cbd-{scenarios}-paths"), |b| {
            b.iter(|| run(scenarios, dir.path(), true))
        });
    }
    group.bench_function("cbd-200-no-paths", |b| {
        b.iter(|| run(200, dir.path(), false))
    });
    // A cohort model beside the same period model without one: the cost of drawing γ.
    for (name, fits) in [
        ("lc", log_rate_pair(120)),
        ("apc", cohort_pair(CohortSeriesKind::Arima110Drift)),
    ] {
        let settings = Settings {
            seed: 20261202,
            horizon: 80,
            noise: true,
            uncertainty: Uncertainty::Drift,
        };
        let p = Projector::new(fits, settings, None).expect("invented models project");
        group.bench_function(format!("{name}-generate-only-200"), |b| {
            let mut buf = p.buffer();
            b.iter(|| {
                for s in 1..=200 {
                    p.generate(s, &mut buf).expect("scenario");
                }
            })
        });
    }
    group.bench_function("cbd-generate-only-200", |b| {
        let p = projector();
        let mut buf = p.buffer();
        b.iter(|| {
            for s in 1..=200 {
                p.generate(s, &mut buf).expect("scenario");
            }
        })
    });
    group.finish();
}

criterion_group!(benches, small);

fn main() {
    if let Ok(n) = std::env::var("TAILSPAN_BENCH_FULL") {
        let scenarios: usize = n
            .parse()
            .expect("TAILSPAN_BENCH_FULL is a number of scenarios");
        let dir = tempfile::tempdir().expect("temporary folder");
        let start = Instant::now();
        let rows = run(
            scenarios,
            dir.path(),
            std::env::var("TAILSPAN_BENCH_PATHS").is_err(),
        );
        let seconds = start.elapsed().as_secs_f64();
        println!(
            "{scenarios} scenarios (+ central), {rows} path rows, {} threads: {seconds:.2} s",
            rayon::current_num_threads()
        );
        for f in ["paths", "factors", "period"] {
            let size = std::fs::metadata(dir.path().join(format!("{f}.parquet")))
                .map(|m| m.len())
                .unwrap_or(0);
            println!("  {f}.parquet: {:.1} MB", size as f64 / 1e6);
        }
        return;
    }
    benches();
    Criterion::default().configure_from_args().final_summary();
}
