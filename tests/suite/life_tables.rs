//! Life-table functions and annuity factors against published tables, closed forms,
//! a scipy quadrature fixture and the standard actuarial identities.

use tailspan::interest::DiscountCurve;
use tailspan::life::{
    Annuity, Discount, FlatRate, Fractional, MortalityLaw, annuity_due, annuity_immediate,
    complete_expectation, complete_expectation_n, curtate_expectation, curtate_expectation_n,
    lives, survival_at, survival_curve,
};

/// The Standard Ultimate Life Table's Makeham law: A = 0.00022, B = 2.7e-6, c = 1.124.
const SULT: MortalityLaw = MortalityLaw::Makeham {
    a: 0.00022,
    b: 2.7e-6,
    c: 1.124,
};

/// Highest age of the test tables; q is 1 there.
const MAX_AGE: u32 = 120;

/// One-year rates from `age` to MAX_AGE under `law`, closed with q = 1 at MAX_AGE.
fn rates(law: MortalityLaw, age: u32) -> Vec<f64> {
    (age..=MAX_AGE)
        .map(|x| {
            if x == MAX_AGE {
                1.0
            } else {
                law.q(f64::from(x))
            }
        })
        .collect()
}

fn close(actual: f64, expected: f64, tol: f64, what: &str) {
    assert!(
        (actual - expected).abs() <= tol,
        "{what}: got {actual}, expected {expected} (tolerance {tol})"
    );
}

fn close_rel(actual: f64, expected: f64, rel: f64, what: &str) {
    let tol = rel * expected.abs().max(f64::MIN_POSITIVE);
    close(actual, expected, tol, what);
}

// ---------------------------------------------------------------------------------------
// Published table: the Society of Actuaries' Standard Ultimate Life Table at 5 % interest.
// ---------------------------------------------------------------------------------------

#[test]
fn sult_annuity_due_at_five_percent() {
    // Society of Actuaries, Standard Ultimate Life Table, i = 5 %; values from memory,
    // printed to 4 decimals: ä60 = 14.9041, ä65 = 13.5498, ä70 = 12.0083.
    let flat = FlatRate::new(0.05);
    for (age, published) in [(60, 14.9041), (65, 13.5498), (70, 12.0083)] {
        let value = annuity_due(&rates(SULT, age), &flat);
        close(value, published, 5e-5, &format!("SULT ä{age}"));
    }
}

#[test]
fn sult_whole_life_assurance_at_five_percent() {
    // Society of Actuaries, Standard Ultimate Life Table, i = 5 %; from memory:
    // A65 = 0.35477, via A = 1 − d ä (common practice).
    let d = 0.05 / 1.05;
    let assurance = 1.0 - d * annuity_due(&rates(SULT, 65), &FlatRate::new(0.05));
    close(assurance, 0.35477, 5e-6, "SULT A65");
}

#[test]
fn sult_lives_at_sixty_five_from_radix_at_twenty() {
    // Society of Actuaries, Standard Ultimate Life Table; from memory: l20 = 100,000,
    // l65 = 94,579.7.
    let q = rates(SULT, 20);
    let mut l = vec![0.0; q.len() + 1];
    lives(&q, 100_000.0, &mut l);
    close(l[65 - 20], 94_579.7, 0.05, "SULT l65");
}

// ---------------------------------------------------------------------------------------
// Closed forms.
// ---------------------------------------------------------------------------------------

#[test]
fn constant_force_truncated_expectation_is_closed_form() {
    // Constant force μ: e°x:n = ∫_0^n e^(−μt) dt = (1 − e^(−μn))/μ (closed form).
    for mu in [0.001, 0.02, 0.05, 0.3, 2.0] {
        let law = MortalityLaw::Constant { mu };
        let q = vec![law.q(0.0); 200];
        for n in [1usize, 2, 7, 25, 60] {
            let want = -(-mu * n as f64).exp_m1() / mu;
            let got = complete_expectation_n(&q, n, Fractional::ConstantForce);
            close_rel(got, want, 1e-12, &format!("e°:n, μ = {mu}, n = {n}"));
        }
    }
}

#[test]
fn constant_force_fractional_survival_is_exponential() {
    // Constant force μ: t p x = e^(−μt) at every t (closed form).
    let mu = 0.07;
    let q = vec![MortalityLaw::Constant { mu }.q(0.0); 50];
    for t in [0.0, 0.3, 1.0, 2.75, 10.5, 49.99] {
        let got = survival_at(&q, t, Fractional::ConstantForce);
        close_rel(got, (-mu * t).exp(), 1e-13, &format!("t p x at t = {t}"));
    }
}

#[test]
fn de_moivre_expectations_are_closed_form() {
    // De Moivre with limiting age ω: e°x = (ω − x)/2, exact under UDD, and
    // e x = (ω − x − 1)/2 (closed forms).
    let omega = 100.0;
    let law = MortalityLaw::DeMoivre { omega };
    for age in [0u32, 30, 65, 90, 99] {
        let q: Vec<f64> = (age..100).map(|x| law.q(f64::from(x))).collect();
        assert_eq!(*q.last().unwrap(), 1.0);
        let x = f64::from(age);
        close(
            complete_expectation(&q, Fractional::Udd),
            (omega - x) / 2.0,
            1e-10,
            &format!("de Moivre e°{age}"),
        );
        close(
            curtate_expectation(&q),
            (omega - x - 1.0) / 2.0,
            1e-10,
            &format!("de Moivre e{age}"),
        );
        // Under de Moivre, UDD is exact, so t p x = (ω − x − t)/(ω − x) at any t.
        for t in [0.5, 3.25, 9.9] {
            if x + t < omega {
                close(
                    survival_at(&q, t, Fractional::Udd),
                    (omega - x - t) / (omega - x),
                    1e-12,
                    &format!("de Moivre {t} p {age}"),
                );
            }
        }
    }
}

/// Rows of tests/fixtures/gompertz_quad.csv: (x, t, B, c, survival).
fn gompertz_fixture() -> Vec<(f64, f64, f64, f64, f64)> {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/fixtures/gompertz_quad.csv"
    );
    let mut reader = csv::Reader::from_path(path).expect("fixture readable");
    let rows: Vec<_> = reader
        .deserialize::<(f64, f64, f64, f64, f64)>()
        .map(|row| row.expect("fixture row"))
        .collect();
    assert!(rows.len() > 100, "fixture has {} rows", rows.len());
    rows
}

#[test]
fn gompertz_survival_matches_quadrature() {
    // Fixture: t p x = exp(−∫ B c^s ds) by scipy.integrate.quad
    // (tests/fixtures/gompertz_quad.py).
    for (x, t, b, c, want) in gompertz_fixture() {
        let what = format!("{t} p {x}, B = {b}, c = {c}");
        close_rel(
            MortalityLaw::Gompertz { b, c }.survival(x, t),
            want,
            1e-12,
            &what,
        );
        // Makeham with A = 0 is the same law.
        close_rel(
            MortalityLaw::Makeham { a: 0.0, b, c }.survival(x, t),
            want,
            1e-12,
            &what,
        );
    }
}

#[test]
fn gompertz_table_survival_matches_quadrature_at_whole_years() {
    // Fixture as above: the product of one-year p's over whole years must equal the
    // integrated survival, k p x = Π p x+j (common practice).
    let mut checked = 0;
    for (x, t, b, c, want) in gompertz_fixture() {
        if t.fract() != 0.0 || x.fract() != 0.0 {
            continue;
        }
        let law = MortalityLaw::Gompertz { b, c };
        let years = t as usize;
        let q: Vec<f64> = (0..years).map(|k| law.q(x + k as f64)).collect();
        let mut curve = vec![0.0; years + 1];
        survival_curve(&q, &mut curve);
        close_rel(curve[years], want, 1e-12, &format!("table {t} p {x}"));
        checked += 1;
    }
    assert!(checked > 50, "only {checked} whole-year cases");
}

// ---------------------------------------------------------------------------------------
// Identities (common practice), on the SULT.
// ---------------------------------------------------------------------------------------

#[test]
fn curtate_expectation_recursion() {
    // e x = p x (1 + e x+1) (common practice).
    let q = rates(SULT, 20);
    for k in 0..q.len() - 1 {
        let lhs = curtate_expectation(&q[k..]);
        let rhs = (1.0 - q[k]) * (1.0 + curtate_expectation(&q[k + 1..]));
        close_rel(lhs, rhs, 1e-12, &format!("e{}", 20 + k));
    }
}

#[test]
fn truncated_expectations_are_sums_over_the_curve() {
    // Under UDD e°x:n = Σ_{k<n} (k p x + k+1 p x)/2 and e x:n = Σ_{k=1}^n k p x
    // (common practice).
    let q = rates(SULT, 40);
    let mut curve = vec![0.0; q.len() + 1];
    survival_curve(&q, &mut curve);
    for n in [0usize, 1, 5, 10, 30, 80, 200] {
        let m = n.min(q.len());
        let trapezoids: f64 = (0..m).map(|k| (curve[k] + curve[k + 1]) / 2.0).sum();
        let sum: f64 = curve[1..=m].iter().sum();
        close_rel(
            complete_expectation_n(&q, n, Fractional::Udd),
            trapezoids,
            1e-13,
            &format!("e°40:{n}"),
        );
        close_rel(
            curtate_expectation_n(&q, n),
            sum,
            1e-13,
            &format!("e40:{n}"),
        );
    }
}

#[test]
fn complete_exceeds_curtate_by_about_a_half() {
    // e°x ≈ e x + 1/2 (common practice): exact under UDD for a closed table, within 0.01
    // for realistic one-year rates. Constant force lives (1 − p)/μ ≈ 1 − q/2 − q²/12 of the
    // year instead of 1 − q/2, so its gap falls short by about Σ k p x q²/12, about 0.01
    // when most deaths come at old ages where q ≈ 0.3; allow 0.02 there. Since p^s is
    // convex in s, it lies below the UDD chord 1 − s q, so constant force never gives
    // the longer complete expectation (common practice).
    for age in [20, 40, 65, 85] {
        let q = rates(SULT, age);
        let curtate = curtate_expectation(&q);
        let udd = complete_expectation(&q, Fractional::Udd);
        let constant_force = complete_expectation(&q, Fractional::ConstantForce);
        close(udd - curtate, 0.5, 1e-10, &format!("UDD e°{age} − e{age}"));
        close(
            constant_force - curtate,
            0.5,
            0.02,
            &format!("constant-force e°{age} − e{age}"),
        );
        assert!(constant_force <= udd, "age {age}");
    }
    // Realistic rates only (ages 30 to 90, where q < 0.2), the open table cut at 90:
    // e°30:60 − e30:60 = 1/2 − 60 p 30 / 2 under UDD, and within 0.01 of it under
    // constant force.
    let q = &rates(SULT, 30)[..60];
    let end_survival = survival_at(q, 60.0, Fractional::Udd);
    let udd_gap = 0.5 - end_survival / 2.0;
    let curtate = curtate_expectation_n(q, 60);
    close(
        complete_expectation_n(q, 60, Fractional::Udd) - curtate,
        udd_gap,
        1e-10,
        "UDD e°30:60 − e30:60",
    );
    close(
        complete_expectation_n(q, 60, Fractional::ConstantForce) - curtate,
        udd_gap,
        0.01,
        "constant-force e°30:60 − e30:60",
    );
}

#[test]
fn annuity_due_recursion() {
    // ä x = 1 + v p x ä x+1 (common practice).
    let flat = FlatRate::new(0.05);
    let q = rates(SULT, 20);
    for k in 0..q.len() - 1 {
        let lhs = annuity_due(&q[k..], &flat);
        let rhs = 1.0 + (1.0 - q[k]) / 1.05 * annuity_due(&q[k + 1..], &flat);
        close_rel(lhs, rhs, 1e-12, &format!("ä{}", 20 + k));
    }
}

#[test]
fn immediate_is_due_less_one() {
    // a x = ä x − 1 for a whole-life annuity (common practice); m-thly, ä(m) − a(m) = 1/m.
    let flat = FlatRate::new(0.04);
    for age in [30, 65, 100] {
        let q = rates(SULT, age);
        close_rel(
            annuity_immediate(&q, &flat),
            annuity_due(&q, &flat) - 1.0,
            1e-12,
            &format!("a{age}"),
        );
        for m in [2, 4, 12] {
            let due = Annuity::due().frequency(m).value(&q, &flat);
            let immediate = Annuity::immediate().frequency(m).value(&q, &flat);
            close(
                due - immediate,
                1.0 / f64::from(m),
                1e-12,
                &format!("m = {m}"),
            );
        }
    }
}

#[test]
fn monthly_annuity_against_woolhouse_and_udd_closed_form() {
    // Woolhouse, two terms: ä(m) ≈ ä − (m − 1)/(2m) (common practice); the third term,
    // −(m² − 1)/(12 m²)(δ + μ), is about 0.005 here, so allow 0.01.
    // Under UDD, exactly ä(m) = α(m) ä − β(m) with α(m) = i d/(i(m) d(m)) and
    // β(m) = (i − i(m))/(i(m) d(m)) (common practice).
    let rate = 0.05f64;
    let flat = FlatRate::new(rate);
    let d = rate / (1.0 + rate);
    for m in [2u32, 4, 12] {
        let mf = f64::from(m);
        let i_m = mf * ((1.0 + rate).powf(1.0 / mf) - 1.0);
        let d_m = mf * (1.0 - (1.0 + rate).powf(-1.0 / mf));
        let alpha = rate * d / (i_m * d_m);
        let beta = (rate - i_m) / (i_m * d_m);
        for age in [50, 65, 80] {
            let q = rates(SULT, age);
            let annual = annuity_due(&q, &flat);
            let mthly = Annuity::due().frequency(m).value(&q, &flat);
            let what = format!("ä({m}){age}");
            close(mthly, annual - (mf - 1.0) / (2.0 * mf), 0.01, &what);
            close_rel(mthly, alpha * annual - beta, 1e-12, &what);
        }
    }
}

#[test]
fn guarantee_equal_to_term_is_an_annuity_certain() {
    // ä n-certain = (1 − v^n)/d(m) in advance and (1 − v^n)/i(m) in arrears
    // (closed forms).
    let rate = 0.045f64;
    let flat = FlatRate::new(rate);
    let q = rates(SULT, 75);
    for m in [1u32, 12] {
        let mf = f64::from(m);
        let i_m = mf * ((1.0 + rate).powf(1.0 / mf) - 1.0);
        let d_m = mf * (1.0 - (1.0 + rate).powf(-1.0 / mf));
        for n in [1u32, 5, 10, 20, 60] {
            let vn = (1.0 + rate).powf(-f64::from(n));
            let due = Annuity::due().frequency(m).temporary(n).guaranteed(n);
            let imm = Annuity::immediate().frequency(m).temporary(n).guaranteed(n);
            let what = format!("m = {m}, n = {n}");
            close_rel(due.value(&q, &flat), (1.0 - vn) / d_m, 1e-12, &what);
            close_rel(imm.value(&q, &flat), (1.0 - vn) / i_m, 1e-12, &what);
            // A guarantee longer than the term is cut to the term.
            let longer = Annuity::due().frequency(m).temporary(n).guaranteed(n + 5);
            close_rel(longer.value(&q, &flat), (1.0 - vn) / d_m, 1e-12, &what);
        }
    }
}

#[test]
fn deferred_and_temporary_split_the_whole_life_annuity() {
    // n|ä x = v^n n p x ä x+n and ä x = ä x:n + n|ä x (common practice), also m-thly.
    let flat = FlatRate::new(0.03);
    let q = rates(SULT, 60);
    let mut curve = vec![0.0; q.len() + 1];
    survival_curve(&q, &mut curve);
    for m in [1u32, 12] {
        let whole = Annuity::due().frequency(m).value(&q, &flat);
        for n in [1u32, 5, 20] {
            let k = n as usize;
            let deferred = Annuity::due().frequency(m).deferred(n).value(&q, &flat);
            let later = Annuity::due().frequency(m).value(&q[k..], &flat);
            let what = format!("m = {m}, n = {n}");
            close_rel(
                deferred,
                1.03f64.powf(-f64::from(n)) * curve[k] * later,
                1e-12,
                &what,
            );
            let temporary = Annuity::due().frequency(m).temporary(n).value(&q, &flat);
            close_rel(temporary + deferred, whole, 1e-12, &what);
        }
    }
}

#[test]
fn deferred_guarantee_starts_when_payments_start() {
    // d|ä with a g-year guarantee = v^d d p x ä g-certain + v^(d+g) d+g p x ä x+d+g
    // (common practice for a guarantee that attaches at the first payment).
    let rate = 0.04f64;
    let flat = FlatRate::new(rate);
    let q = rates(SULT, 55);
    let mut curve = vec![0.0; q.len() + 1];
    survival_curve(&q, &mut curve);
    let (d, g) = (10u32, 5u32);
    let v = |t: f64| (1.0 + rate).powf(-t);
    let certain = (1.0 - v(f64::from(g))) / (rate / (1.0 + rate));
    let want = v(f64::from(d)) * curve[d as usize] * certain
        + v(f64::from(d + g))
            * curve[(d + g) as usize]
            * annuity_due(&q[(d + g) as usize..], &flat);
    let got = Annuity::due().deferred(d).guaranteed(g).value(&q, &flat);
    close_rel(got, want, 1e-12, "10|ä55 with 5 years guaranteed");
}

#[test]
fn escalation_at_the_interest_rate_cancels_discounting() {
    // With escalation e = i, v^k (1 + e)^k = 1, so the annual annuity-due is 1 + e x
    // (common practice).
    let rate = 0.035;
    let flat = FlatRate::new(rate);
    for age in [45, 70] {
        let q = rates(SULT, age);
        let value = Annuity::due().escalating(rate).value(&q, &flat);
        close_rel(
            value,
            1.0 + curtate_expectation(&q),
            1e-12,
            &format!("age {age}"),
        );
    }
}

#[test]
fn escalation_steps_once_a_year() {
    // (1 + e)^⌊t⌋: the twelve payments of year k all carry (1 + e)^k, so a 12-thly
    // annuity-certain escalating at e is Σ_k (1 + e)^k v^k ä(12) 1-certain (closed form).
    let (rate, e, n) = (0.05f64, 0.02f64, 10u32);
    let flat = FlatRate::new(rate);
    let one_year: f64 = (0..12)
        .map(|j| (1.0 + rate).powf(-f64::from(j) / 12.0) / 12.0)
        .sum();
    let want: f64 = (0..n)
        .map(|k| ((1.0 + e) / (1.0 + rate)).powi(k as i32) * one_year)
        .sum();
    let q = rates(SULT, 60);
    let got = Annuity::due()
        .frequency(12)
        .temporary(n)
        .guaranteed(n)
        .escalating(e)
        .value(&q, &flat);
    close_rel(got, want, 1e-12, "escalating 12-thly annuity-certain");
}

#[test]
fn spot_curve_and_closure_discount_alike() {
    // A flat spot curve equals the flat rate; a sloping curve equals Σ k p x v(k) summed
    // by hand (common practice).
    let q = rates(SULT, 65);
    let flat_curve = DiscountCurve::Flat { rate_pa: 0.05 };
    close_rel(
        annuity_due(&q, &flat_curve),
        annuity_due(&q, &FlatRate::new(0.05)),
        1e-12,
        "flat curve",
    );
    let curve = DiscountCurve::Spot {
        source: "invented".into(),
        terms: vec![1.0, 10.0, 30.0],
        rates: vec![0.02, 0.03, 0.035],
    };
    let mut survival = vec![0.0; q.len() + 1];
    survival_curve(&q, &mut survival);
    let by_hand: f64 = survival[..q.len()]
        .iter()
        .enumerate()
        .map(|(k, s)| s * curve.discount(k as f64))
        .sum();
    close_rel(annuity_due(&q, &curve), by_hand, 1e-12, "spot curve");
    let closure = |t: f64| curve.discount(t);
    close_rel(annuity_due(&q, &closure), by_hand, 1e-12, "closure");
    let dynamic: &dyn Fn(f64) -> f64 = &closure;
    close_rel(annuity_due(&q, dynamic), by_hand, 1e-12, "dyn closure");
    let as_trait: &dyn Discount = &curve;
    close_rel(annuity_due(&q, as_trait), by_hand, 1e-12, "dyn Discount");
}
