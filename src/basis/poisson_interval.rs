//! Exact confidence intervals for a Poisson count: how far the book's actual deaths may
//! stray from a rate by chance.
//!
//! Garwood (1936): for an observed count D the central 1 − a interval of the Poisson mean is
//! [χ²_{a/2}(2D)/2, χ²_{1−a/2}(2D + 2)/2], i.e. the a/2 quantile of a Gamma(D, 1) and the
//! 1 − a/2 quantile of a Gamma(D + 1, 1), with 0 as the lower end when D = 0. The gamma
//! quantile inverts the regularised incomplete gamma function P(a, x), evaluated by its
//! series for x < a + 1 and by its continued fraction otherwise (Press, Teukolsky,
//! Vetterling & Flannery, Numerical Recipes, 3rd ed., §6.2), then bisected: a few hundred
//! evaluations per interval, which is nothing beside a fit.

/// Regularised lower incomplete gamma P(a, x) = γ(a, x)/Γ(a), for a > 0 and x ≥ 0.
pub fn regularized_gamma_p(a: f64, x: f64) -> f64 {
    if x <= 0.0 {
        return 0.0;
    }
    let log_prefactor = a * x.ln() - x - libm::lgamma(a);
    if x < a + 1.0 {
        // Σ_n x^n / (a (a+1) … (a+n)), times x^a e^−x / Γ(a).
        let (mut term, mut sum, mut ap) = (1.0 / a, 1.0 / a, a);
        for _ in 0..10_000 {
            ap += 1.0;
            term *= x / ap;
            sum += term;
            if term.abs() < sum.abs() * 1e-17 {
                break;
            }
        }
        (sum.ln() + log_prefactor).exp().min(1.0)
    } else {
        // Q(a, x) by the modified Lentz method on its continued fraction.
        let tiny = 1e-300;
        let mut b = x + 1.0 - a;
        let mut c = 1.0 / tiny;
        let mut d = 1.0 / b;
        let mut h = d;
        for i in 1..10_000 {
            let an = -(i as f64) * (i as f64 - a);
            b += 2.0;
            d = an * d + b;
            if d.abs() < tiny {
                d = tiny;
            }
            c = b + an / c;
            if c.abs() < tiny {
                c = tiny;
            }
            d = 1.0 / d;
            let delta = d * c;
            h *= delta;
            if (delta - 1.0).abs() < 1e-17 {
                break;
            }
        }
        (1.0 - (h.ln() + log_prefactor).exp()).max(0.0)
    }
}

/// The p-quantile of a Gamma(shape, 1) distribution, for 0 < p < 1 and shape > 0.
pub fn gamma_quantile(p: f64, shape: f64) -> f64 {
    let mut high = shape + 10.0 * shape.sqrt() + 10.0;
    while regularized_gamma_p(shape, high) < p {
        high *= 2.0;
    }
    let mut low = 0.0;
    // Bisection to the last bit: P is monotone, and 200 halvings of any bracket reach it.
    for _ in 0..200 {
        let mid = 0.5 * (low + high);
        if mid <= low || mid >= high {
            break;
        }
        if regularized_gamma_p(shape, mid) < p {
            low = mid;
        } else {
            high = mid;
        }
    }
    0.5 * (low + high)
}

/// Garwood's exact central interval at `confidence` (0.95 for 95 %) for the mean of a
/// Poisson count observed as `count` (which may be fractional, as deaths spread over
/// cells are).
pub fn garwood(count: f64, confidence: f64) -> (f64, f64) {
    let tail = 0.5 * (1.0 - confidence);
    let lower = if count > 0.0 {
        gamma_quantile(tail, count)
    } else {
        0.0
    };
    (lower, gamma_quantile(1.0 - tail, count + 1.0))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn closed_forms_of_the_exponential_case() {
        // Shape 1 is the exponential distribution: P(1, x) = 1 − e^−x, quantile −ln(1 − p)
        // (closed form).
        for x in [0.1f64, 1.0, 2.5, 9.0] {
            assert!((regularized_gamma_p(1.0, x) - (1.0 - (-x).exp())).abs() < 1e-14);
        }
        for p in [0.025f64, 0.5, 0.975] {
            assert!((gamma_quantile(p, 1.0) + (1.0 - p).ln()).abs() < 1e-12);
        }
        // Zero deaths: the upper 95 % limit is −ln 0.025 = 3.689 (Garwood 1936, D = 0).
        let (lower, upper) = garwood(0.0, 0.95);
        assert_eq!(lower, 0.0);
        assert!((upper + 0.025f64.ln()).abs() < 1e-12);
    }
}
