//! Quantiles and tail measures of a sample of present values.
//!
//! Quantiles are Hyndman & Fan (1996) type 7 — linear interpolation between order
//! statistics, the default of numpy and R — so a user can reproduce any figure from the
//! Parquet columns with one library call. TVaR follows DESIGN.md: the mean of the values at
//! or above VaR.

/// Where the type-7 quantile at probability p of n sorted values lies: order statistics
/// `lo` and `hi` (zero-based) and the fraction of the way from one to the other.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Type7 {
    /// The lower order statistic.
    pub lo: usize,
    /// The upper order statistic.
    pub hi: usize,
    frac: f64,
    single: bool,
}

impl Type7 {
    /// The position for `n` (non-zero) values at `p` in [0, 1].
    pub fn new(n: usize, p: f64) -> Self {
        debug_assert!(n > 0);
        debug_assert!((0.0..=1.0).contains(&p));
        if n == 1 {
            return Type7 {
                lo: 0,
                hi: 0,
                frac: 0.0,
                single: true,
            };
        }
        // h = (n − 1) p on zero-based order statistics.
        let h = (n - 1) as f64 * p;
        let lo = h.floor() as usize;
        Type7 {
            lo,
            hi: (lo + 1).min(n - 1),
            frac: h - lo as f64,
            single: false,
        }
    }

    /// The quantile from the values of order statistics `lo` and `hi`.
    pub fn interpolate(&self, lo: f64, hi: f64) -> f64 {
        if self.single {
            lo
        } else {
            lo + self.frac * (hi - lo)
        }
    }
}

/// Hyndman–Fan type 7 quantile of a sorted, non-empty sample at probability `p` in [0, 1].
pub fn quantile_sorted(sorted: &[f64], p: f64) -> f64 {
    let t = Type7::new(sorted.len(), p);
    t.interpolate(sorted[t.lo], sorted[t.hi])
}

/// Tail value at risk at level `p`: the mean of the sorted values at or above VaR_p.
pub fn tvar_sorted(sorted: &[f64], p: f64) -> f64 {
    let var = quantile_sorted(sorted, p);
    let start = sorted.partition_point(|&x| x < var);
    let tail = &sorted[start..];
    tail.iter().sum::<f64>() / tail.len() as f64
}

/// Summary statistics of a sample of present values.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct SampleSummary {
    /// Number of values.
    pub count: usize,
    /// Arithmetic mean.
    pub mean: f64,
    /// Sample standard deviation (divisor n − 1; 0 for one value).
    pub std_dev: f64,
    /// Smallest value.
    pub min: f64,
    /// Largest value.
    pub max: f64,
}

/// Sorts a copy of the sample (total order; NaN is rejected earlier by the guards).
pub fn sorted(values: &[f64]) -> Vec<f64> {
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    v
}

/// Mean, standard deviation and range of a non-empty sample.
pub fn summarize(values: &[f64]) -> SampleSummary {
    let n = values.len();
    let mean = values.iter().sum::<f64>() / n as f64;
    let ss: f64 = values.iter().map(|x| (x - mean) * (x - mean)).sum();
    SampleSummary {
        count: n,
        mean,
        std_dev: if n > 1 {
            (ss / (n - 1) as f64).sqrt()
        } else {
            0.0
        },
        min: values.iter().copied().fold(f64::INFINITY, f64::min),
        max: values.iter().copied().fold(f64::NEG_INFINITY, f64::max),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn type7_matches_numpy_on_small_samples() {
        // numpy.quantile([1, 2, 3, 4], q) with the default method "linear" (Hyndman–Fan
        // type 7): 0.25 → 1.75, 0.5 → 2.5, 0.995 → 3.985 (hand-checked: h = 3·0.995).
        let s = [1.0, 2.0, 3.0, 4.0];
        assert!((quantile_sorted(&s, 0.25) - 1.75).abs() < 1e-15);
        assert!((quantile_sorted(&s, 0.5) - 2.5).abs() < 1e-15);
        assert!((quantile_sorted(&s, 0.995) - 3.985).abs() < 1e-12);
        assert_eq!(quantile_sorted(&s, 0.0), 1.0);
        assert_eq!(quantile_sorted(&s, 1.0), 4.0);
    }

    #[test]
    fn tvar_by_hand_count() {
        // Values 1..=10, p = 0.8: VaR = 1 + 9·0.8 = 8.2; values ≥ 8.2 are 9 and 10 → 9.5.
        let s: Vec<f64> = (1..=10).map(f64::from).collect();
        assert!((tvar_sorted(&s, 0.8) - 9.5).abs() < 1e-15);
    }
}
