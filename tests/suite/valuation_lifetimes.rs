//! Truncated lifetimes per cohort against closed forms and published values.

use tailspan::data::{Book, Policy, Sex};
use tailspan::interest::{DiscountCurve, Timing};
use tailspan::life::{Fractional, MortalityLaw};
use tailspan::projection::RateSurface;
use tailspan::valuation::{Basis, LevelAdjustment, LifetimeTable, LifetimeWorkspace};

const FIRST_AGE: i32 = 20;
const MAX_AGE: i32 = 120;
const YEAR: i32 = 2025;
const YEARS: usize = 105;

fn rates(law: MortalityLaw) -> Vec<f64> {
    let ages = (MAX_AGE - FIRST_AGE + 1) as usize;
    (0..YEARS * ages)
        .map(|i| {
            let age = FIRST_AGE + (i % ages) as i32;
            if age >= MAX_AGE {
                1.0
            } else {
                law.q(f64::from(age))
            }
        })
        .collect()
}

fn rows(
    law: MortalityLaw,
    ages: &[i32],
    horizons: &[usize],
    fractional: Fractional,
    rate: f64,
) -> Vec<tailspan::valuation::LifetimeRow> {
    let q = rates(law);
    let surface = RateSurface {
        first_year: YEAR,
        first_age: FIRST_AGE,
        ages: (MAX_AGE - FIRST_AGE + 1) as usize,
        q: &q,
    };
    let book = Book {
        source: "".into(),
        policies: ages
            .iter()
            .map(|&a| Policy::whole_life(format!("a{a}"), Sex::M, a, 1.0))
            .collect(),
    };
    let basis = Basis {
        timing: Timing::Advance,
        frequency: 1,
        curve: DiscountCurve::Flat { rate_pa: rate },
    };
    let table = LifetimeTable::new(
        &book,
        horizons,
        &basis,
        LevelAdjustment::none(FIRST_AGE, MAX_AGE),
        fractional,
        YEAR,
        MAX_AGE,
    );
    let mut out = Vec::new();
    table
        .compute(
            &[None, Some(surface)],
            None,
            &mut LifetimeWorkspace::default(),
            &mut out,
        )
        .unwrap();
    assert_eq!(out.len(), table.rows_per_scenario());
    out
}

#[test]
fn constant_force_gives_the_closed_form() {
    // Constant force μ: e°x:n = (1 − e^(−μn))/μ and e x:n = Σ_{k=1}^n e^(−μk) (closed forms).
    let mu: f64 = 0.03;
    let all = rows(
        MortalityLaw::Constant { mu },
        &[60],
        &[5, 10, 25],
        Fractional::ConstantForce,
        0.0,
    );
    // The last row is the whole future, which ends with q = 1 at max_age.
    assert_eq!(all.len(), 4);
    for row in &all[..3] {
        let n = f64::from(row.horizon);
        let closed = (1.0 - (-mu * n).exp()) / mu;
        assert!(
            (row.e_complete - closed).abs() < 1e-12,
            "n={n}: {} vs {closed}",
            row.e_complete
        );
        let curtate: f64 = (1..=row.horizon).map(|k| (-mu * f64::from(k)).exp()).sum();
        assert!((row.e_curtate - curtate).abs() < 1e-12);
        // At zero interest the n-year annuity-due pays 1 + e x:n−1.
        let due: f64 = (0..row.horizon).map(|k| (-mu * f64::from(k)).exp()).sum();
        assert!((row.annuity - due).abs() < 1e-12);
    }
}

#[test]
fn de_moivre_gives_half_the_remaining_span() {
    // De Moivre with ω: e°x = (ω − x)/2 exactly under UDD (closed form).
    let omega = 110.0;
    for row in rows(
        MortalityLaw::DeMoivre { omega },
        &[50, 70, 95],
        &[],
        Fractional::Udd,
        0.0,
    ) {
        let closed = (omega - f64::from(row.age)) / 2.0;
        assert!(
            (row.e_complete - closed).abs() < 1e-9,
            "age {}: {} vs {closed}",
            row.age,
            row.e_complete
        );
        assert!((row.e_curtate - (closed - 0.5)).abs() < 1e-9);
    }
}

#[test]
fn whole_life_annuity_matches_the_published_table() {
    // SULT (Makeham A = 0.00022, B = 2.7e-6, c = 1.124) at 5 %: ä65 = 13.5498 (Society of
    // Actuaries' Standard Ultimate Life Table, from memory).
    let law = MortalityLaw::Makeham {
        a: 0.00022,
        b: 2.7e-6,
        c: 1.124,
    };
    let out = rows(law, &[65], &[10], Fractional::Udd, 0.05);
    let whole = out.iter().find(|r| r.horizon == 56).unwrap();
    assert!((whole.annuity - 13.5498).abs() < 5e-5, "{}", whole.annuity);
    // e x:n ≤ e°x:n ≤ e x:n + 1 and e°x:n ≤ n (common practice).
    for r in &out {
        assert!(r.e_curtate <= r.e_complete && r.e_complete <= r.e_curtate + 1.0);
        assert!(r.e_complete <= f64::from(r.horizon));
    }
}
