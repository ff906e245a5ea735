//! Book valuation against independent computations and published values.

use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use tailspan::data::{Book, Policy, Sex};
use tailspan::interest::{DiscountCurve, Timing};
use tailspan::life::MortalityLaw;
use tailspan::projection::RateSurface;
use tailspan::valuation::{Basis, LevelAdjustment, PreparedBook, ScenarioValue, Workspace};

const FIRST_AGE: i32 = 20;
const MAX_AGE: i32 = 120;
const FIRST_YEAR: i32 = 2025;
const YEARS: usize = 110;

/// The Standard Ultimate Life Table's Makeham law (Society of Actuaries; A = 0.00022,
/// B = 2.7e-6, c = 1.124, from memory).
fn sult() -> MortalityLaw {
    MortalityLaw::Makeham {
        a: 0.00022,
        b: 2.7e-6,
        c: 1.124,
    }
}

/// Rates q(x, t) = law q(x) × (1 − improvement)^(t − 2025), q = 1 at MAX_AGE.
fn surface(law: MortalityLaw, improvement: f64) -> Vec<f64> {
    let ages = (MAX_AGE - FIRST_AGE + 1) as usize;
    let mut q = Vec::with_capacity(ages * YEARS);
    for y in 0..YEARS {
        for a in 0..ages {
            let age = FIRST_AGE + a as i32;
            q.push(if age >= MAX_AGE {
                1.0
            } else {
                law.q(f64::from(age)) * (1.0 - improvement).powi(y as i32)
            });
        }
    }
    q
}

fn view(q: &[f64]) -> RateSurface<'_> {
    RateSurface {
        first_year: FIRST_YEAR,
        first_age: FIRST_AGE,
        ages: (MAX_AGE - FIRST_AGE + 1) as usize,
        q,
    }
}

fn prepared(book: &Book, timing: Timing, m: u32, rate: f64) -> PreparedBook {
    let basis = Basis {
        timing,
        frequency: m,
        curve: DiscountCurve::Flat { rate_pa: rate },
    };
    PreparedBook::new(
        book,
        &basis,
        LevelAdjustment::none(FIRST_AGE, MAX_AGE),
        FIRST_YEAR,
        FIRST_AGE,
        MAX_AGE,
        FIRST_YEAR + YEARS as i32 - 1,
    )
    .unwrap()
}

fn expected_value(book: &PreparedBook, q: &[f64]) -> ScenarioValue {
    let mut ws = Workspace::default();
    book.build_curves(&[Some(view(q)), Some(view(q))], &mut ws)
        .unwrap();
    let mut out = ScenarioValue::default();
    book.value::<ChaCha8Rng>(&mut ws, None, &mut out);
    out
}

#[test]
fn single_life_reproduces_published_annuity_due() {
    // SULT at 5 %: ä65 = 13.5498, ä60 = 14.9041, ä70 = 12.0083 (Society of Actuaries'
    // Standard Ultimate Life Table, values from memory).
    let q = surface(sult(), 0.0);
    for (age, published) in [(65, 13.5498), (60, 14.9041), (70, 12.0083)] {
        let book = Book {
            source: "".into(),
            policies: vec![Policy::whole_life("a", Sex::F, age, 1.0)],
        };
        let v = expected_value(&prepared(&book, Timing::Advance, 1, 0.05), &q);
        assert!(
            (v.pv_expected - published).abs() < 5e-5,
            "ä{age} = {} vs {published}",
            v.pv_expected
        );
    }
}

/// Brute force: every payment, its UDD survival probability along the cohort diagonal and
/// its discount factor, summed directly.
fn brute_force(p: &Policy, q: &[f64], timing: Timing, m: u32, rate: f64) -> f64 {
    let surf = view(q);
    let diag = |k: i32| {
        let age = p.age + k;
        if age >= MAX_AGE {
            1.0
        } else {
            surf.q(age, FIRST_YEAR + k) * p.mortality_factor
        }
    };
    let survival = |t: f64| {
        let k = t.floor() as i32;
        let mut s = 1.0;
        for j in 0..k {
            s *= 1.0 - diag(j);
        }
        s * (1.0 - (t - f64::from(k)) * diag(k))
    };
    let mf = f64::from(m);
    let horizon = (MAX_AGE - p.age) as u32 + 1;
    let years = p
        .term
        .unwrap_or(horizon)
        .min(horizon.saturating_sub(p.deferral));
    let mut total = 0.0;
    for j in 0..years * m {
        let t = f64::from(p.deferral)
            + f64::from(j) / mf
            + if timing == Timing::Arrears {
                1.0 / mf
            } else {
                0.0
            };
        let certain = f64::from(j) < f64::from(p.guarantee) * mf;
        let alive = if certain { 1.0 } else { survival(t) };
        let cash = p.amount / mf * (1.0 + p.escalation).powi(t.floor() as i32);
        total += cash * alive * (1.0 + rate).powf(-t) * p.weight;
    }
    total
}

fn mixed_book() -> Book {
    let mut policies = Vec::new();
    let shapes = [
        (0, None, 0, 0.0),
        (5, None, 0, 0.0),
        (0, Some(10), 0, 0.0),
        (0, None, 10, 0.0),
        (0, None, 5, 0.03),
        (3, Some(15), 5, 0.02),
    ];
    for (i, (deferral, term, guarantee, escalation)) in shapes.into_iter().enumerate() {
        for (j, age) in [58, 67, 81, 96].into_iter().enumerate() {
            policies.push(Policy {
                id: format!("p{i}-{j}"),
                sex: if j % 2 == 0 { Sex::F } else { Sex::M },
                age,
                amount: 1000.0 + 100.0 * i as f64,
                deferral,
                term,
                guarantee,
                escalation,
                weight: 1.0 + j as f64,
                mortality_factor: if i == 2 { 0.8 } else { 1.0 },
            });
        }
    }
    Book {
        source: "".into(),
        policies,
    }
}

#[test]
fn book_value_equals_payment_by_payment_sum() {
    // Independent check: the sum over every payment of amount × UDD survival × discount
    // (DESIGN.md conventions; UDD survival t p x = k p x (1 − f q) is common practice).
    let q = surface(sult(), 0.015);
    let book = mixed_book();
    for (timing, m) in [
        (Timing::Advance, 1),
        (Timing::Advance, 12),
        (Timing::Arrears, 4),
        (Timing::Arrears, 1),
    ] {
        let prepared = prepared(&book, timing, m, 0.03);
        let ours = expected_value(&prepared, &q).pv_expected;
        let theirs: f64 = book
            .policies
            .iter()
            .map(|p| brute_force(p, &q, timing, m, 0.03))
            .sum();
        assert!(
            (ours - theirs).abs() < 1e-9 * theirs,
            "{timing:?} m={m}: {ours} vs {theirs}"
        );
    }
}

#[test]
fn simulated_mean_converges_to_expected() {
    // Law of large numbers: the idiosyncratic mean lies within four standard errors of the
    // expected PV (standard Monte Carlo result).
    let q = surface(sult(), 0.01);
    let book = mixed_book();
    let prepared = prepared(&book, Timing::Advance, 12, 0.03);
    let mut ws = Workspace::default();
    prepared
        .build_curves(&[Some(view(&q)), Some(view(&q))], &mut ws)
        .unwrap();
    let mut out = ScenarioValue::default();
    let n = 4000;
    let (mut sum, mut sum2) = (0.0, 0.0);
    let mut cash_mean = vec![0.0; prepared.years()];
    for s in 0..n {
        let mut rng = ChaCha8Rng::seed_from_u64(7);
        rng.set_stream(s);
        prepared.value(&mut ws, Some(&mut rng), &mut out);
        sum += out.pv_simulated;
        sum2 += out.pv_simulated * out.pv_simulated;
        for (c, x) in cash_mean.iter_mut().zip(&out.cash_simulated) {
            *c += x / n as f64;
        }
    }
    let mean = sum / n as f64;
    let sd = ((sum2 / n as f64 - mean * mean) * n as f64 / (n - 1) as f64).sqrt();
    let se = sd / (n as f64).sqrt();
    assert!(
        (mean - out.pv_expected).abs() < 4.0 * se,
        "mean {mean} vs {} (se {se})",
        out.pv_expected
    );
    // Expected cash flows in the first years match the simulated means closely.
    for (k, (mean, &e)) in cash_mean.iter().zip(&out.cash_expected).take(5).enumerate() {
        assert!((mean - e).abs() < 0.02 * e, "year {k}: {mean} vs {e}");
    }
}

#[test]
fn deaths_in_year_one_have_binomial_variance() {
    // N lives aged 80 paying 1 a year in advance: the payment at time 1 counts survivors,
    // so its variance is N q (1 − q) (binomial variance).
    let q = surface(sult(), 0.0);
    let n_lives = 500.0;
    let mut p = Policy::whole_life("c", Sex::M, 80, 1.0);
    p.weight = n_lives;
    let book = Book {
        source: "".into(),
        policies: vec![p],
    };
    let prepared = prepared(&book, Timing::Advance, 1, 0.0);
    let mut ws = Workspace::default();
    prepared
        .build_curves(&[Some(view(&q)), Some(view(&q))], &mut ws)
        .unwrap();
    let mut out = ScenarioValue::default();
    let reps = 5000;
    let xs: Vec<f64> = (0..reps)
        .map(|s| {
            let mut rng = ChaCha8Rng::seed_from_u64(11);
            rng.set_stream(s);
            prepared.value(&mut ws, Some(&mut rng), &mut out);
            out.cash_simulated[1]
        })
        .collect();
    let mean = xs.iter().sum::<f64>() / reps as f64;
    let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (reps - 1) as f64;
    let q80 = sult().q(80.0);
    let binomial = n_lives * q80 * (1.0 - q80);
    // The sample variance of a near-normal sample has relative s.e. ≈ sqrt(2/(n−1)).
    let tol = 4.0 * (2.0 / (reps as f64 - 1.0)).sqrt();
    assert!(
        (var / binomial - 1.0).abs() < tol,
        "variance {var} vs binomial {binomial}"
    );
    assert!((mean - n_lives * (1.0 - q80)).abs() < 4.0 * (binomial / reps as f64).sqrt());
}

#[test]
fn standard_stress_raises_every_annuity() {
    // A 20 % decrease in every q (Delegated Regulation (EU) 2015/35, Art. 138) lengthens
    // every life, so every annuity is worth more.
    let q = surface(sult(), 0.01);
    for p in mixed_book().policies {
        let book = Book {
            source: "".into(),
            policies: vec![p.clone()],
        };
        let prepared = prepared(&book, Timing::Advance, 12, 0.03);
        let base = expected_value(&prepared, &q).pv_expected;
        let mut ws = Workspace::default();
        prepared
            .build_scaled_curves(&[Some(view(&q)), Some(view(&q))], 0.8, &mut ws)
            .unwrap();
        let mut out = ScenarioValue::default();
        prepared.value::<ChaCha8Rng>(&mut ws, None, &mut out);
        assert!(
            out.pv_expected > base,
            "{}: {} <= {base}",
            p.id,
            out.pv_expected
        );
    }
}

#[test]
fn guarantees_outlive_the_table() {
    // A 5-year certain period paid to a life aged 118 (q = 1 at 120): at 0 % the five
    // certain payments are worth exactly 5 whatever the mortality (definition of a
    // guarantee); the schedule must not stop at the table's end.
    let q = surface(sult(), 0.0);
    let mut p = Policy::whole_life("g", Sex::F, 118, 1.0);
    p.guarantee = 5;
    let book = Book {
        source: "".into(),
        policies: vec![p],
    };
    for (timing, m) in [(Timing::Advance, 1), (Timing::Arrears, 12)] {
        let prepared = prepared(&book, timing, m, 0.0);
        let v = expected_value(&prepared, &q);
        assert!(
            (v.pv_expected - 5.0).abs() < 1e-12,
            "{timing:?}: {}",
            v.pv_expected
        );
        let paid: f64 = v.cash_expected.iter().sum();
        assert!((paid - 5.0).abs() < 1e-12, "cash flows sum to {paid}");
    }
}

/// The simulated PV written plainly, as the definition the engine's per-life loop must
/// reproduce bit for bit (and a replay of one policy must follow): cohorts (sex, age,
/// multiplier) and payment shapes numbered by first appearance in the book; a policy of
/// weight w is round(w) lives (at least one) sharing amount × w; lives sorted stably by
/// (cohort, shape); one `next_u32` per life in that order, U = (bits + 0.5) / 2^32; death
/// year K = max{k : S_k ≥ U} by a scan from 0, time K + (S_K − U)/(S_K − S_K+1) (UDD);
/// the life receives the payments due strictly before it (counted from their times), and
/// each run of one (cohort, shape) adds Σ amount × PV of those payments, then the run's
/// amount × PV of the guaranteed payments.
fn naive_simulated_pv(
    book: &Book,
    prepared: &PreparedBook,
    ws: &Workspace,
    basis: &Basis,
    rng: &mut ChaCha8Rng,
) -> f64 {
    use rand::Rng;
    use tailspan::valuation::{PaymentShape, Schedule};
    let cohorts = prepared.cohorts();
    let mut shapes: Vec<PaymentShape> = Vec::new();
    let mut lives: Vec<(usize, usize, f64)> = Vec::new();
    for p in &book.policies {
        let c = cohorts
            .iter()
            .position(|c| {
                c.sex == p.sex
                    && c.age == p.age
                    && c.factor.to_bits() == p.mortality_factor.to_bits()
            })
            .unwrap();
        let shape = PaymentShape::of(p);
        if !shapes.contains(&shape) {
            shapes.push(shape);
        }
        let s = shapes.iter().position(|x| *x == shape).unwrap();
        let n = p.weight.round().max(1.0) as usize;
        for _ in 0..n {
            lives.push((c, s, p.amount * p.weight / n as f64));
        }
    }
    lives.sort_by_key(|l| (l.0, l.1));
    let schedules: Vec<Schedule> = shapes
        .iter()
        .map(|s| Schedule::new(s, basis, prepared.years()))
        .collect();
    let m = f64::from(basis.frequency);
    let mut pv = 0.0;
    let mut i = 0;
    while i < lives.len() {
        let (c, sh) = (lives[i].0, lives[i].1);
        let end = i + lives[i..]
            .iter()
            .take_while(|l| l.0 == c && l.1 == sh)
            .count();
        let (s, sched, shape) = (prepared.survival(ws, c), &schedules[sh], &shapes[sh]);
        let first = f64::from(shape.deferral)
            + if basis.timing == Timing::Arrears {
                1.0 / m
            } else {
                0.0
            };
        let mut run_pv = 0.0;
        for &(_, _, amount) in &lives[i..end] {
            let u = (f64::from(rng.next_u32()) + 0.5) / 4_294_967_296.0;
            let mut k = 0;
            while s[k + 1] >= u {
                k += 1;
            }
            let f = (s[k] - u) / (s[k] - s[k + 1]);
            let paid = (0..sched.pv_prefix.len() - 1)
                .filter(|&j| {
                    let t = first + j as f64 / m;
                    let year = match basis.timing {
                        Timing::Advance => t.floor(),
                        Timing::Arrears => t.ceil() - 1.0,
                    };
                    year < k as f64 || (year == k as f64 && t - year < f)
                })
                .count();
            run_pv += amount * sched.pv_prefix[paid];
        }
        let run_amount: f64 = lives[i..end].iter().map(|l| l.2).sum();
        pv += run_pv + run_amount * sched.certain_pv;
        i = end;
    }
    pv
}

#[test]
fn simulated_value_equals_the_naive_loop_bit_for_bit() {
    let q = surface(sult(), 0.015);
    let mut book = mixed_book();
    // A fractional weight and a policy seen again after others, out of cohort order.
    book.policies[3].weight = 2.6;
    let again = book.policies[0].clone();
    book.policies.push(again);
    for (timing, m) in [
        (Timing::Advance, 12),
        (Timing::Arrears, 4),
        (Timing::Advance, 1),
    ] {
        let basis = Basis {
            timing,
            frequency: m,
            curve: DiscountCurve::Flat { rate_pa: 0.03 },
        };
        let prepared = prepared(&book, timing, m, 0.03);
        let mut ws = Workspace::default();
        prepared
            .build_curves(&[Some(view(&q)), Some(view(&q))], &mut ws)
            .unwrap();
        for seed in 0..20u64 {
            let mut out = ScenarioValue::default();
            let mut rng = ChaCha8Rng::seed_from_u64(seed);
            prepared.value(&mut ws, Some(&mut rng), &mut out);
            let mut rng = ChaCha8Rng::seed_from_u64(seed);
            let naive = naive_simulated_pv(&book, &prepared, &ws, &basis, &mut rng);
            assert_eq!(
                out.pv_simulated.to_bits(),
                naive.to_bits(),
                "{timing:?} m={m} seed {seed}: {} vs {naive}",
                out.pv_simulated
            );
        }
    }
}
