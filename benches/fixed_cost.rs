//! The per-scenario fixed cost of a valuation: what a scenario costs before any policy,
//! on the demo fit (Lee–Carter, ages 55–100 closed to 120, 80 years, both sexes), one
//! thread.
//!
//! - `generate-whole-grid`: a scenario's indices and every rate (2 × 66 ages × 80 years).
//! - `generate-book-cells`: the same scenario, only the cells the valuation reads (the
//!   demo book's cohort diagonals from the valuation year).
//! - `value-one-per-cohort`: `tailspan value`'s per-scenario work (generation, cohort
//!   curves, simulated deaths, lifetimes, Parquet files) on a book of one policy per
//!   cohort of the demo book, so nearly all of it is the fixed part; the 100,000-policy
//!   book adds its per-life loop (`--bench valuation`) to this.
//!
//! - `value-bench-book` and `book-bench-book`: on the 100,000-policy bench book
//!   (`tailspan synth --policies 100000`), `tailspan value`'s whole per-scenario work,
//!   files included, and the book's valuation alone on the same scenarios' rates (cohort
//!   curves, death-search tables, simulated lives, expected and cash passes). The first
//!   less the second is that book's per-scenario fixed cost: rates, lifetimes, files.
//!
//! Criterion reports time per scenario (`Throughput::Elements`).

use std::hint::black_box;
use std::path::Path;

use criterion::{Criterion, Throughput, criterion_group, criterion_main};
use tailspan::data::{Book, Config, Experience};
use tailspan::io::Provenance;
use tailspan::pipeline::{ProjectedFits, ValuationSetup, ValueRequest, value_book};
use tailspan::projection::engine::ROW_GROUP_ROWS;
use tailspan::projection::{OutputOptions, Projector, Purpose, stream};
use tailspan::valuation::{Extracts, ScenarioCells, ScenarioValue, Workspace};

const SCENARIOS: u64 = 200;
/// Scenarios of the bench book per iteration: enough that a call's own setup (opening
/// and closing the files) is a small part of each.
const BENCH_BOOK_SCENARIOS: u64 = 200;

fn demo() -> (Config, Experience, Book, Projector) {
    let config = Config::load(&Path::new(env!("CARGO_MANIFEST_DIR")).join("configs/demo.toml"))
        .expect("configs/demo.toml loads");
    let experience = Experience::from_config(&config).expect("demo experience");
    let book = Book::from_config(&config)
        .expect("demo book")
        .expect("the demo config names a book");
    let fits = ProjectedFits::fit(&config, &experience).expect("demo fit");
    let projector = fits.projector(&config, &experience).expect("projector");
    (config, experience, book, projector)
}

/// One policy per (sex, age, multiplier) of `book`: the same cohorts, almost no lives.
fn one_per_cohort(book: &Book) -> Book {
    let mut seen = std::collections::HashSet::new();
    Book {
        source: book.source.clone(),
        policies: book
            .policies
            .iter()
            .filter(|p| seen.insert((p.sex, p.age, p.mortality_factor.to_bits())))
            .cloned()
            .collect(),
    }
}

fn bench(c: &mut Criterion) {
    let (config, _experience, book, projector) = demo();
    let one_thread = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .expect("a one-thread pool");
    let mut group = c.benchmark_group("fixed_cost");
    group.sample_size(10);
    group.throughput(Throughput::Elements(SCENARIOS));

    let setup = ValuationSetup::new(&config, book, &projector).expect("valuation setup");
    let cells = ScenarioCells::new(
        &projector,
        &setup.prepared,
        Some(&setup.lifetimes),
        &Extracts::default(),
    );
    group.bench_function("generate-whole-grid", |b| {
        let mut buf = projector.buffer();
        b.iter(|| {
            for s in 1..=SCENARIOS {
                projector.generate(s, &mut buf).expect("scenario");
            }
            black_box(buf.rates(0)[0])
        })
    });
    group.bench_function("generate-book-cells", |b| {
        let mut buf = projector.buffer();
        b.iter(|| {
            for s in 1..=SCENARIOS {
                buf.set_cells(cells.of(s));
                projector.generate(s, &mut buf).expect("scenario");
            }
            black_box(buf.rates(0)[0])
        })
    });

    let small = ValuationSetup::new(&config, one_per_cohort(&setup.book), &projector)
        .expect("valuation setup");
    let dir = tempfile::tempdir().expect("temporary folder");
    let options = OutputOptions {
        folder: dir.path().to_path_buf(),
        paths: false.into(),
        compression: config.output.compression,
        shard: None,
        row_group_rows: ROW_GROUP_ROWS,
        provenance: Provenance::new(config.projection.seed, SCENARIOS as usize, Vec::new()),
    };
    let extracts = Extracts::default();
    // `tailspan value`'s work for scenarios `ids` of `setup`, on one thread.
    let value = |setup: &ValuationSetup, ids: std::ops::Range<u64>| {
        one_thread.install(|| {
            let request = ValueRequest {
                ids,
                options: &options,
                hedges: None,
                report: false,
                extracts: &extracts,
            };
            let (outcome, files) =
                value_book(&config, setup, &projector, &request, &|_| {}).expect("value");
            black_box((outcome.stochastic, files.len()))
        })
    };
    group.bench_function("value-one-per-cohort", |b| {
        b.iter(|| value(&small, 1..SCENARIOS + 1))
    });
    group.finish();

    let mut group = c.benchmark_group("fixed_cost");
    group.sample_size(10);
    group.throughput(Throughput::Elements(BENCH_BOOK_SCENARIOS));
    let bench_book =
        tailspan::synth::book(tailspan::synth::DEFAULT_SEED, 100_000).expect("the bench book");
    let large = ValuationSetup::new(&config, bench_book, &projector).expect("valuation setup");
    let ids = 1..BENCH_BOOK_SCENARIOS + 1;
    group.bench_function("value-bench-book", |b| {
        b.iter(|| value(&large, ids.clone()))
    });
    let cells = ScenarioCells::new(
        &projector,
        &large.prepared,
        Some(&large.lifetimes),
        &extracts,
    );
    let paths: Vec<_> = ids
        .clone()
        .map(|s| {
            let mut buf = projector.buffer();
            buf.set_cells(cells.of(s));
            projector.generate(s, &mut buf).expect("scenario");
            (s, buf)
        })
        .collect();
    let mut ws = Workspace::default();
    let mut out = ScenarioValue::default();
    group.bench_function("book-bench-book", |b| {
        b.iter(|| {
            for (s, buf) in &paths {
                large
                    .prepared
                    .build_curves(&buf.surfaces(), &mut ws)
                    .expect("curves");
                let mut rng = stream(config.projection.seed, *s, Purpose::Deaths);
                large.prepared.value(&mut ws, Some(&mut rng), &mut out);
            }
            black_box(out.pv_simulated)
        })
    });
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
