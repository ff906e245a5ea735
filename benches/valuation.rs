//! The valuation inner loop: one scenario of a 100,000-policy book, with and without
//! simulated individual deaths. Divide the time by the policy count for ns per
//! policy-scenario.

use criterion::{Criterion, Throughput, criterion_group, criterion_main};
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use tailspan::data::{Book, Policy, Sex};
use tailspan::interest::{DiscountCurve, Timing};
use tailspan::life::MortalityLaw;
use tailspan::projection::RateSurface;
use tailspan::valuation::{Basis, LevelAdjustment, PreparedBook, ScenarioValue, Workspace};

const POLICIES: usize = 100_000;

fn book() -> Book {
    let mut rng = ChaCha8Rng::seed_from_u64(1);
    let policies = (0..POLICIES)
        .map(|i| {
            let mut p = Policy::whole_life(
                format!("B{i:06}"),
                if rng.random_bool(0.55) {
                    Sex::F
                } else {
                    Sex::M
                },
                rng.random_range(55..96),
                rng.random_range(1_000.0..20_000.0),
            );
            p.guarantee = [0, 0, 5, 10][rng.random_range(0..4)];
            p.escalation = [0.0, 0.0, 0.0, 0.025][rng.random_range(0..4)];
            p
        })
        .collect();
    Book {
        source: "bench".into(),
        policies,
    }
}

fn bench(c: &mut Criterion) {
    let law = MortalityLaw::Makeham {
        a: 0.0002,
        b: 3e-6,
        c: 1.12,
    };
    let (first_age, max_age, first_year, years) = (50, 120, 2025, 80);
    let ages = (max_age - first_age + 1) as usize;
    let q: Vec<f64> = (0..years * ages)
        .map(|i| {
            let age = first_age + (i % ages) as i32;
            if age >= max_age {
                1.0
            } else {
                law.q(f64::from(age))
            }
        })
        .collect();
    let surface = RateSurface {
        first_year,
        first_age,
        ages,
        q: &q,
    };
    let basis = Basis {
        timing: Timing::Advance,
        frequency: 12,
        curve: DiscountCurve::Flat { rate_pa: 0.03 },
    };
    let prepared = PreparedBook::new(
        &book(),
        &basis,
        LevelAdjustment::none(first_age, max_age),
        first_year,
        first_age,
        max_age,
        first_year + years as i32 - 1,
    )
    .unwrap();
    let mut ws = Workspace::default();
    let mut out = ScenarioValue::default();
    let surfaces = [Some(surface), Some(surface)];
    let mut group = c.benchmark_group("valuation");
    group.throughput(Throughput::Elements(POLICIES as u64));
    group.bench_function("scenario_expected_100k", |b| {
        b.iter(|| {
            prepared.build_curves(&surfaces, &mut ws).unwrap();
            prepared.value::<ChaCha8Rng>(&mut ws, None, &mut out);
            out.pv_expected
        })
    });
    let mut s = 0u64;
    group.bench_function("scenario_simulated_100k", |b| {
        b.iter(|| {
            s += 1;
            let mut rng = ChaCha8Rng::seed_from_u64(3);
            rng.set_stream(s);
            prepared.build_curves(&surfaces, &mut ws).unwrap();
            prepared.value(&mut ws, Some(&mut rng), &mut out);
            out.pv_simulated
        })
    });
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
