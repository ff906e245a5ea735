//! Survival and expectation of life from a slice of one-year rates.
//!
//! Every function takes `q` with `q[k] = q x+k` for k = 0, 1, …: the rates a life aged x
//! meets year by year, whether from a law, a period table or one scenario's cohort
//! diagonal. The slice is the whole future: survival past time `q.len()` is taken as 0,
//! so a closed table ends with q = 1 (as tables do at `max_age`). Rates must lie in
//! [0, 1]; they are not checked here because these functions sit in the valuation inner
//! loop and the rates have been validated where they were made.
//!
//! Nothing here allocates: curves are written into caller-owned slices and expectations
//! are accumulated with a running survival product.

use super::fractional::Fractional;

/// Writes `k p x` for k = 0..=q.len() into `out` (length `q.len() + 1`).
///
/// # Panics
/// If `out.len() != q.len() + 1`.
pub fn survival_curve(q: &[f64], out: &mut [f64]) {
    assert_eq!(
        out.len(),
        q.len() + 1,
        "survival curve needs q.len() + 1 slots"
    );
    let mut survival = 1.0;
    out[0] = survival;
    for (slot, &qk) in out[1..].iter_mut().zip(q) {
        survival *= 1.0 - qk;
        *slot = survival;
    }
}

/// Writes `l x+k = radix · k p x` for k = 0..=q.len() into `out` (length `q.len() + 1`).
///
/// # Panics
/// If `out.len() != q.len() + 1`.
pub fn lives(q: &[f64], radix: f64, out: &mut [f64]) {
    survival_curve(q, out);
    for l in out.iter_mut() {
        *l *= radix;
    }
}

/// `t p x` at any duration t ≥ 0, with `fractional` between integer ages.
///
/// 1 for t ≤ 0; 0 for t > q.len().
pub fn survival_at(q: &[f64], t: f64, fractional: Fractional) -> f64 {
    if t <= 0.0 {
        return 1.0;
    }
    let whole = t.floor();
    if whole > q.len() as f64 {
        return 0.0;
    }
    let whole_years = whole as usize;
    let survival: f64 = q[..whole_years].iter().map(|&qk| 1.0 - qk).product();
    let part = t - whole;
    if whole_years == q.len() {
        // t = len exactly (a larger t returned above unless part == 0).
        return if part > 0.0 { 0.0 } else { survival };
    }
    survival * fractional.survival(q[whole_years], part)
}

/// Complete expectation of life `e°x = ∫_0^∞ t p x dt`.
pub fn complete_expectation(q: &[f64], fractional: Fractional) -> f64 {
    complete_expectation_n(q, q.len(), fractional)
}

/// Curtate expectation of life `e x = Σ_{k≥1} k p x`.
pub fn curtate_expectation(q: &[f64]) -> f64 {
    curtate_expectation_n(q, q.len())
}

/// Truncated complete expectation `e°x:n = ∫_0^n t p x dt = E[min(Tx, n)]`.
///
/// Under UDD this is Σ_{k<n} (k p x + k+1 p x)/2 exactly; under constant force it is
/// Σ_{k<n} k p x · (1 − p x+k)/μ x+k with μ = −ln p. A horizon past the slice is cut
/// to `q.len()`.
pub fn complete_expectation_n(q: &[f64], n_years: usize, fractional: Fractional) -> f64 {
    let mut survival = 1.0;
    let mut lived = 0.0;
    for &qk in &q[..n_years.min(q.len())] {
        lived += survival * fractional.year_lived(qk);
        survival *= 1.0 - qk;
    }
    lived
}

/// Truncated curtate expectation `e x:n = Σ_{k=1}^{n} k p x = E[min(Kx, n)]`.
///
/// A horizon past the slice is cut to `q.len()`.
pub fn curtate_expectation_n(q: &[f64], n_years: usize) -> f64 {
    let mut survival = 1.0;
    let mut total = 0.0;
    for &qk in &q[..n_years.min(q.len())] {
        survival *= 1.0 - qk;
        total += survival;
    }
    total
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn survival_at_integer_and_fractional_durations() {
        let q = [0.1, 0.2, 1.0];
        let mut curve = [0.0; 4];
        survival_curve(&q, &mut curve);
        assert_eq!(curve, [1.0, 0.9, 0.9 * 0.8, 0.0]);
        for (k, &s) in curve.iter().enumerate() {
            assert_eq!(survival_at(&q, k as f64, Fractional::Udd), s);
        }
        // UDD: halfway through the second year, 0.9 · (1 − 0.5 · 0.2).
        assert!((survival_at(&q, 1.5, Fractional::Udd) - 0.81).abs() < 1e-15);
        // Constant force: 0.9 · 0.8^0.5.
        let cf = survival_at(&q, 1.5, Fractional::ConstantForce);
        assert!((cf - 0.9 * 0.8f64.sqrt()).abs() < 1e-15);
        assert_eq!(survival_at(&q, 3.5, Fractional::Udd), 0.0);
        assert_eq!(survival_at(&q, -1.0, Fractional::Udd), 1.0);
    }

    #[test]
    fn open_table_stops_at_its_end() {
        let q = [0.5];
        assert_eq!(survival_at(&q, 1.0, Fractional::Udd), 0.5);
        assert_eq!(survival_at(&q, 1.25, Fractional::Udd), 0.0);
        assert_eq!(curtate_expectation(&q), 0.5);
        assert_eq!(curtate_expectation_n(&q, 10), 0.5);
    }

    #[test]
    fn lives_scale_the_curve() {
        let q = [0.5, 0.5];
        let mut l = [0.0; 3];
        lives(&q, 1000.0, &mut l);
        assert_eq!(l, [1000.0, 500.0, 250.0]);
    }
}
