//! One-year capital by re-calibration on the demo data: a handful of refits (each
//! simulates a year of deaths for both sexes, refits the Poisson Lee–Carter model, projects
//! the refitted central path and revalues the 20,000-policy demo book). Multiply the time
//! per refit by the configured sample (`capital.one_year_scenarios`).
//!
//! Target: 10,000 refits within 5 s wall on two cores, i.e. at most 1 ms of CPU a refit.

use std::hint::black_box;
use std::path::Path;

use criterion::{Criterion, Throughput, criterion_group, criterion_main};
use tailspan::data::{Book, Config, Experience};
use tailspan::pipeline::{ProjectedFits, ValuationSetup};
use tailspan::risk::one_year::{Recalibration, one_year_values};

const REFITS: usize = 4;

fn bench(c: &mut Criterion) {
    let config = Config::load(&Path::new(env!("CARGO_MANIFEST_DIR")).join("configs/demo.toml"))
        .expect("configs/demo.toml loads");
    let experience = Experience::from_config(&config).expect("demo experience");
    let book = Book::from_config(&config)
        .expect("demo book")
        .expect("the demo config names a book");
    let fits = ProjectedFits::fit(&config, &experience).expect("demo fit");
    let mut projector = fits.projector(&config, &experience).expect("projector");
    projector.prepare(0..REFITS as u64 + 1).expect("prepare");
    let setup = ValuationSetup::new(&config, book, &projector).expect("valuation setup");
    let recalibration = Recalibration {
        specs: &fits.specs,
        populations: &experience.populations,
        year: setup.year,
        book_rates: setup.book_rates(),
    };
    let mut group = c.benchmark_group("one_year");
    group.sample_size(10);
    group.throughput(Throughput::Elements(REFITS as u64));
    group.bench_function("refits", |b| {
        b.iter(|| {
            black_box(
                one_year_values(&projector, &setup.prepared, &recalibration, REFITS)
                    .expect("refits"),
            )
        })
    });
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
