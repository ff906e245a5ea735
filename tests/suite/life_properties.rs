//! Properties every life table and annuity must have, whatever the rates (proptest).

use proptest::prelude::*;
use tailspan::life::{
    Annuity, FlatRate, Fractional, Timing, complete_expectation_n, curtate_expectation_n,
    survival_at, survival_curve,
};

/// One-year rates in [0, 1], open or closed with q = 1 at the end.
fn rates() -> impl Strategy<Value = Vec<f64>> {
    (prop::collection::vec(0.0..=1.0f64, 1..60), any::<bool>()).prop_map(|(mut q, closed)| {
        if closed {
            *q.last_mut().unwrap() = 1.0;
        }
        q
    })
}

fn fractional() -> impl Strategy<Value = Fractional> {
    prop_oneof![Just(Fractional::Udd), Just(Fractional::ConstantForce)]
}

/// Any annuity shape the book can hold.
fn annuity() -> impl Strategy<Value = Annuity> {
    (
        prop_oneof![Just(Timing::Advance), Just(Timing::Arrears)],
        prop_oneof![Just(1u32), Just(2), Just(4), Just(12)],
        0u32..8,
        prop::option::of(0u32..40),
        0u32..12,
        0.0..0.06f64,
        fractional(),
    )
        .prop_map(|(timing, m, d, n, g, e, fractional)| Annuity {
            timing,
            frequency: m,
            deferral_years: d,
            term_years: n,
            guarantee_years: g,
            escalation: e,
            fractional,
        })
}

proptest! {
    #[test]
    fn survival_is_a_non_increasing_probability(q in rates(), fractional in fractional()) {
        let mut curve = vec![0.0; q.len() + 1];
        survival_curve(&q, &mut curve);
        prop_assert_eq!(curve[0], 1.0);
        for pair in curve.windows(2) {
            prop_assert!(pair[1] <= pair[0]);
            prop_assert!((0.0..=1.0).contains(&pair[1]));
        }
        let mut previous = 1.0;
        for step in 0..=(4 * q.len() + 4) {
            let s = survival_at(&q, step as f64 / 4.0, fractional);
            prop_assert!((0.0..=1.0).contains(&s));
            prop_assert!(s <= previous);
            previous = s;
        }
    }

    #[test]
    fn truncated_expectations_are_ordered(
        q in rates(),
        n in 0usize..80,
        fractional in fractional(),
    ) {
        // 0 ≤ e°x:n ≤ n and e x:n ≤ e°x:n ≤ e x:n + 1 (common practice).
        let complete = complete_expectation_n(&q, n, fractional);
        let curtate = curtate_expectation_n(&q, n);
        let slack = 1e-12 * (1.0 + n as f64);
        prop_assert!(complete >= 0.0);
        prop_assert!(complete <= n as f64 + slack);
        prop_assert!(curtate <= complete + slack);
        prop_assert!(complete <= curtate + 1.0 + slack);
    }

    #[test]
    fn lower_mortality_never_lowers_an_annuity(
        q in rates(),
        scale in 0.0..=1.0f64,
        shape in annuity(),
        rate in -0.02..0.1f64,
    ) {
        let lighter: Vec<f64> = q.iter().map(|&qk| qk * scale).collect();
        let flat = FlatRate::new(rate);
        let base = shape.value(&q, &flat);
        let improved = shape.value(&lighter, &flat);
        prop_assert!(improved >= base * (1.0 - 1e-12), "{improved} < {base}");
    }

    #[test]
    fn annuity_falls_as_the_rate_rises(
        q in rates(),
        shape in annuity(),
        rate in -0.02..0.1f64,
        step in 0.0..0.05f64,
    ) {
        let low = shape.value(&q, &FlatRate::new(rate));
        let high = shape.value(&q, &FlatRate::new(rate + step));
        prop_assert!(high <= low * (1.0 + 1e-12), "{high} > {low}");
        prop_assert!(high >= 0.0);
    }
}
