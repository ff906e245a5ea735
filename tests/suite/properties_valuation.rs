//! Properties the valuation engine must have on any small book and any rate surface
//! (proptest): survival curves, truncated lifetimes, and how values move with the rate, a
//! mortality decrease, a guarantee and the simulation of individual deaths.
//!
//! Ages run from 60 to a closing age of 75 (q = 1 there), so every case is small; rates are
//! drawn at random per cell, from mild to extreme.

use proptest::prelude::*;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use tailspan::data::{Book, Policy, Sex};
use tailspan::interest::{DiscountCurve, Timing};
use tailspan::life::Fractional;
use tailspan::projection::RateSurface;
use tailspan::valuation::{
    Basis, LevelAdjustment, LifetimeTable, LifetimeWorkspace, PreparedBook, ScenarioValue,
    Workspace,
};

const FIRST_AGE: i32 = 60;
const MAX_AGE: i32 = 75;
const AGES: usize = (MAX_AGE - FIRST_AGE + 1) as usize;
const YEAR: i32 = 2030;
/// Enough calendar years for a life aged FIRST_AGE to reach MAX_AGE.
const YEARS: usize = AGES;

/// Relative tolerance of comparisons between sums taken in different orders.
const TOL: f64 = 1e-12;

/// A rate surface for both sexes: years × ages, q = 1 at MAX_AGE, others in [0, level].
#[derive(Debug, Clone)]
struct Rates {
    female: Vec<f64>,
    male: Vec<f64>,
}

impl Rates {
    fn surfaces(&self) -> [Option<RateSurface<'_>>; 2] {
        [Some(view(&self.female)), Some(view(&self.male))]
    }
}

fn view(q: &[f64]) -> RateSurface<'_> {
    RateSurface {
        first_year: YEAR,
        first_age: FIRST_AGE,
        ages: AGES,
        q,
    }
}

fn surface() -> impl Strategy<Value = Vec<f64>> {
    (
        prop::collection::vec(0.0..=1.0f64, AGES * YEARS),
        prop_oneof![Just(0.05), Just(0.3), Just(1.0)],
    )
        .prop_map(|(cells, level)| {
            cells
                .iter()
                .enumerate()
                .map(|(i, &u)| {
                    if FIRST_AGE + (i % AGES) as i32 == MAX_AGE {
                        1.0
                    } else {
                        u * level
                    }
                })
                .collect()
        })
}

fn rates() -> impl Strategy<Value = Rates> {
    (surface(), surface()).prop_map(|(female, male)| Rates { female, male })
}

/// Any policy the book can hold whose guarantee ends by the closing age.
fn policy() -> impl Strategy<Value = Policy> {
    (
        prop_oneof![Just(Sex::F), Just(Sex::M)],
        FIRST_AGE..MAX_AGE,
        1.0..10_000.0f64,
        0u32..6,
        prop::option::of(1u32..20),
        0u32..10,
        0.0..0.05f64,
        prop_oneof![Just(1.0), 0.3..4.0f64],
        prop_oneof![Just(1.0), 0.5..1.5f64],
    )
        .prop_map(
            |(sex, age, amount, deferral, term, guarantee, escalation, weight, factor)| {
                let room = (MAX_AGE - age) as u32 + 1;
                let deferral = deferral.min(room - 1);
                let mut guarantee = guarantee.min(room - deferral);
                if let Some(term) = term {
                    guarantee = guarantee.min(term);
                }
                Policy {
                    id: String::new(),
                    sex,
                    age,
                    amount,
                    deferral,
                    term,
                    guarantee,
                    escalation,
                    weight,
                    mortality_factor: factor,
                }
            },
        )
}

fn book() -> impl Strategy<Value = Book> {
    prop::collection::vec(policy(), 1..6).prop_map(|mut policies| {
        for (i, p) in policies.iter_mut().enumerate() {
            p.id = format!("P{i}");
        }
        Book {
            source: "".into(),
            policies,
        }
    })
}

fn timing() -> impl Strategy<Value = Timing> {
    prop_oneof![Just(Timing::Advance), Just(Timing::Arrears)]
}

fn frequency() -> impl Strategy<Value = u32> {
    prop_oneof![Just(1u32), Just(2), Just(4), Just(12)]
}

fn basis(timing: Timing, frequency: u32, rate_pa: f64) -> Basis {
    Basis {
        timing,
        frequency,
        curve: DiscountCurve::Flat { rate_pa },
    }
}

fn prepare(book: &Book, basis: &Basis) -> PreparedBook {
    PreparedBook::new(
        book,
        basis,
        LevelAdjustment::none(FIRST_AGE, MAX_AGE),
        YEAR,
        FIRST_AGE,
        MAX_AGE,
        YEAR + YEARS as i32 - 1,
    )
    .expect("a book inside the projected ages")
}

/// Values `book` with every q times `scale`; simulates deaths from stream `seed` if given.
fn value(
    book: &Book,
    basis: &Basis,
    rates: &Rates,
    scale: f64,
    seed: Option<u64>,
) -> ScenarioValue {
    let prepared = prepare(book, basis);
    let mut ws = Workspace::default();
    prepared
        .build_scaled_curves(&rates.surfaces(), scale, &mut ws)
        .unwrap();
    let mut out = ScenarioValue::default();
    let mut rng = seed.map(ChaCha8Rng::seed_from_u64);
    prepared.value(&mut ws, rng.as_mut(), &mut out);
    out
}

fn single(p: &Policy) -> Book {
    Book {
        source: "".into(),
        policies: vec![p.clone()],
    }
}

/// Present values of each payment the policy can make per unit amount, in time order, and
/// how many of them are guaranteed: listed one by one from the contract terms.
fn payment_pvs(p: &Policy, timing: Timing, m: u32, rate: f64) -> (Vec<f64>, usize) {
    let mf = f64::from(m);
    let offset = if timing == Timing::Arrears { 1.0 } else { 0.0 };
    // The life dies before MAX_AGE + 1; payments at or after that are never contingent.
    let limit = f64::from(MAX_AGE - p.age + 1);
    let term_end = p.term.map_or(f64::INFINITY, |n| f64::from(p.deferral + n));
    let mut pvs = Vec::new();
    for j in 0.. {
        let t = f64::from(p.deferral) + (f64::from(j) + offset) / mf;
        let in_term = if timing == Timing::Arrears {
            t <= term_end && t <= limit
        } else {
            t < term_end && t < limit
        };
        if !in_term {
            break;
        }
        let cash = (1.0 + p.escalation).powi(t.floor() as i32) / mf;
        pvs.push(cash * (1.0 + rate).powf(-t));
    }
    let guaranteed = ((p.guarantee * m) as usize).min(pvs.len());
    (pvs, guaranteed)
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 48, ..ProptestConfig::default() })]

    #[test]
    fn survival_curves_fall_within_the_unit_interval(
        book in book(),
        rates in rates(),
        scale in prop_oneof![Just(1.0), Just(0.8), 0.0..3.0f64],
    ) {
        let prepared = prepare(&book, &basis(Timing::Advance, 1, 0.03));
        let mut ws = Workspace::default();
        prepared.build_scaled_curves(&rates.surfaces(), scale, &mut ws).unwrap();
        for (c, cohort) in prepared.cohorts().iter().enumerate() {
            let s = prepared.survival(&ws, c);
            prop_assert_eq!(s.len(), (MAX_AGE - cohort.age) as usize + 2);
            prop_assert_eq!(s[0], 1.0);
            for pair in s.windows(2) {
                prop_assert!(pair[1] <= pair[0], "{:?}", s);
                prop_assert!((0.0..=1.0).contains(&pair[1]), "{:?}", s);
            }
            // q = 1 at the closing age: nobody survives it.
            prop_assert_eq!(*s.last().unwrap(), 0.0);
        }
    }

    #[test]
    fn truncated_expectations_are_ordered(
        book in book(),
        rates in rates(),
        horizons in prop::collection::vec(1usize..25, 0..4),
        fractional in prop_oneof![Just(Fractional::Udd), Just(Fractional::ConstantForce)],
    ) {
        let mut table = LifetimeTable::new(
            &book,
            &horizons,
            &basis(Timing::Advance, 1, 0.03),
            LevelAdjustment::none(FIRST_AGE, MAX_AGE),
            fractional,
            YEAR,
            MAX_AGE,
        );
        let mut rows = Vec::new();
        let surfaces = rates.surfaces();
        table.compute(&surfaces, None, &mut LifetimeWorkspace::default(), &mut rows).unwrap();
        prop_assert_eq!(rows.len(), table.rows_per_scenario());
        // Read off the book's curves where it has the cohort, the same rows to the bit.
        let prepared = prepare(&book, &basis(Timing::Advance, 1, 0.03));
        let mut ws = Workspace::default();
        prepared.build_curves(&surfaces, &mut ws).unwrap();
        table.share_curves(&prepared);
        let mut shared = Vec::new();
        let book_curves = Some((&prepared, &ws));
        table.compute(&surfaces, book_curves, &mut LifetimeWorkspace::default(), &mut shared).unwrap();
        prop_assert_eq!(&shared, &rows);
        for r in &rows {
            let n = f64::from(r.horizon);
            let slack = TOL * n;
            // 0 ≤ e°x:n ≤ n and e x:n ≤ e°x:n ≤ e x:n + 1, since min(K, n) ≤ min(T, n)
            // ≤ min(K, n) + 1 for K = ⌊T⌋ (common practice).
            prop_assert!(r.e_complete >= 0.0 && r.e_complete <= n + slack, "{:?}", r);
            prop_assert!(r.e_curtate >= 0.0, "{:?}", r);
            prop_assert!(r.e_curtate <= r.e_complete + slack, "{:?}", r);
            prop_assert!(r.e_complete <= r.e_curtate + 1.0 + slack, "{:?}", r);
            prop_assert!(r.annuity >= 0.0 && r.annuity <= n + slack, "{:?}", r);
        }
    }

    #[test]
    fn book_value_falls_as_the_flat_rate_rises(
        book in book(),
        rates in rates(),
        timing in timing(),
        m in frequency(),
        low in -0.05..0.20f64,
        step in 0.0005..0.05f64,
        seed in any::<u64>(),
    ) {
        let high = low + step;
        let at = |rate| value(&book, &basis(timing, m, rate), &rates, 1.0, Some(seed));
        let (a, b) = (at(low), at(high));
        prop_assert!(b.pv_expected <= a.pv_expected * (1.0 + TOL), "{} -> {}", a.pv_expected, b.pv_expected);
        prop_assert!(b.pv_expected >= 0.0);
        // The same stream gives the same deaths at both rates, so each payment received
        // is only discounted more.
        prop_assert!(b.pv_simulated <= a.pv_simulated * (1.0 + TOL), "{} -> {}", a.pv_simulated, b.pv_simulated);
    }

    #[test]
    fn a_twenty_percent_decrease_never_lowers_a_policy_value(
        book in book(),
        rates in rates(),
        timing in timing(),
        m in frequency(),
        rate in -0.02..0.08f64,
    ) {
        // The standard-formula longevity stress multiplies every q by 0.8 (Delegated
        // Regulation (EU) 2015/35, Art. 138); each payment's survival probability can only
        // rise, so no policy can lose value.
        let basis = basis(timing, m, rate);
        for p in &book.policies {
            let one = single(p);
            let base = value(&one, &basis, &rates, 1.0, None).pv_expected;
            let stressed = value(&one, &basis, &rates, 0.8, None).pv_expected;
            prop_assert!(stressed >= base * (1.0 - TOL), "policy {:?}: {} -> {}", p, base, stressed);
        }
    }

    #[test]
    fn a_guarantee_never_lowers_a_value(
        p in policy(),
        rates in rates(),
        timing in timing(),
        m in frequency(),
        rate in -0.02..0.08f64,
    ) {
        let basis = basis(timing, m, rate);
        let without = Policy { guarantee: 0, ..p.clone() };
        let v0 = value(&single(&without), &basis, &rates, 1.0, None).pv_expected;
        let v1 = value(&single(&p), &basis, &rates, 1.0, None).pv_expected;
        prop_assert!(v1 >= v0 * (1.0 - TOL), "guarantee {}: {} < {}", p.guarantee, v1, v0);
        if let Some(term) = p.term {
            // The longest guarantee makes the annuity certain: the sum of every payment.
            let certain = Policy { guarantee: term, ..p.clone() };
            let v2 = value(&single(&certain), &basis, &rates, 1.0, None).pv_expected;
            prop_assert!(v2 >= v1 * (1.0 - TOL), "{} < {}", v2, v1);
        }
    }

    #[test]
    fn one_simulated_life_receives_a_whole_number_of_payments(
        p in policy(),
        rates in rates(),
        timing in timing(),
        m in frequency(),
        rate in -0.02..0.08f64,
        seed in any::<u64>(),
    ) {
        let p = Policy { weight: 1.0, ..p };
        let v = value(&single(&p), &basis(timing, m, rate), &rates, 1.0, Some(seed));
        // The life receives the guaranteed payments and then the first j others, for some
        // j: the PV is one of finitely many partial sums of the payments listed directly.
        let (pvs, guaranteed) = payment_pvs(&p, timing, m, rate);
        let certain: f64 = pvs[..guaranteed].iter().sum();
        let mut sums = vec![certain];
        for pv in &pvs[guaranteed..] {
            sums.push(sums.last().unwrap() + pv);
        }
        let simulated = v.pv_simulated / p.amount;
        let tol = TOL * (1.0 + sums.last().unwrap());
        prop_assert!(simulated >= certain - tol && simulated <= sums.last().unwrap() + tol,
            "{} outside [{}, {}]", simulated, certain, sums.last().unwrap());
        prop_assert!(
            sums.iter().any(|s| (s - simulated).abs() <= tol),
            "{} is no partial sum of {:?}", simulated, sums
        );
    }
}
