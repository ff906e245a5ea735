//! Exact quantiles and tail means of a sample too large to keep, by reading it again.
//!
//! A million-scenario run should need no more memory than a ten-thousand-scenario one, so
//! its capital figures cannot come from a sorted in-memory copy of every PV. The PVs are
//! already written to `book.parquet`; a [`Sample`] reads them back, in the same order, as
//! often as asked. A pass keeps either a histogram of counts over the values' bit patterns
//! (ordered like the values) or the values of the few buckets that hold the wanted order
//! statistics, never more than `held` values at once, and a bucket too full to keep is
//! split again on the next pass. The figures equal those of sorting the whole sample, bit
//! for bit: the same order statistics, the same type-7 interpolation, the same sums taken
//! in the same order.

use crate::error::{Error, Result};
use crate::risk::quantile::{SampleSummary, Type7};

/// A sample that can be read again, in the same order, as often as needed.
pub trait Sample {
    /// Calls `each` with every value of the sample, in the same order on every call.
    fn pass(&self, each: &mut dyn FnMut(f64)) -> Result<()>;
}

impl Sample for [f64] {
    fn pass(&self, each: &mut dyn FnMut(f64)) -> Result<()> {
        self.iter().for_each(|&x| each(x));
        Ok(())
    }
}

/// Values a streamed summary holds at once by default: 256 KiB of f64, which at the
/// 99.5 % level is the whole tail of a 6-million-value sample, so one pass sums it; a
/// sample of up to this many is read three times in all (moments, order statistics,
/// tail), a larger one once more for a histogram.
pub const HELD: usize = 1 << 15;

/// Buckets of one histogram pass: 32 KiB of counts, and each pass narrows the keys to be
/// searched 4,096-fold, so even a 64-bit key range is resolved in six passes.
const BUCKETS: usize = 1 << 12;

/// The value's bits as an unsigned key ordered like `f64::total_cmp`.
fn key(x: f64) -> u64 {
    let bits = x.to_bits();
    if bits >> 63 == 1 {
        !bits
    } else {
        bits | 1 << 63
    }
}

/// The value whose key is `k`.
fn value(k: u64) -> f64 {
    f64::from_bits(if k >> 63 == 1 { k & !(1 << 63) } else { !k })
}

/// An inclusive range of keys.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Span {
    lo: u64,
    hi: u64,
}

impl Span {
    fn contains(&self, k: u64) -> bool {
        self.lo <= k && k <= self.hi
    }

    fn width(&self) -> u128 {
        u128::from(self.hi - self.lo) + 1
    }

    /// The histogram bucket of key `k` (in the span): monotone in `k`.
    fn bucket(&self, k: u64) -> usize {
        (u128::from(k - self.lo) * BUCKETS as u128 / self.width()) as usize
    }

    /// The keys of bucket `b`, if any fall in it.
    fn part(&self, b: usize) -> Option<Span> {
        let w = self.width();
        let start = (b as u128 * w).div_ceil(BUCKETS as u128);
        let end = ((b as u128 + 1) * w).div_ceil(BUCKETS as u128);
        (end > start).then(|| Span {
            lo: self.lo + start as u64,
            hi: self.lo + (end - 1) as u64,
        })
    }
}

/// What one pass does with the values of a span.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Work {
    /// Keep them (the span holds at most the allowance).
    Keep,
    /// Count them by bucket.
    Count,
    /// Leave them for a later pass.
    Wait,
}

/// A selection still to be made: the order statistics `ranks` lie in `span`, which holds
/// `count` values, above `below` smaller ones.
struct Search {
    span: Span,
    below: usize,
    count: usize,
    ranks: Vec<usize>,
}

/// A sample summarised pass by pass, holding at most `held` values at once.
pub struct Streamed<'a, S: Sample + ?Sized> {
    sample: &'a S,
    held: usize,
    span: Span,
    stats: SampleSummary,
    passes: std::cell::Cell<usize>,
}

fn changed() -> Error {
    Error::Numerical("the sample read back changed between passes".into())
}

impl<'a, S: Sample + ?Sized> Streamed<'a, S> {
    /// Reads `sample` twice for its count, mean, standard deviation and range (as
    /// [`crate::risk::summarize`] gives them); it must be non-empty and hold no NaN.
    pub fn new(sample: &'a S, held: usize) -> Result<Self> {
        let mut count = 0usize;
        // The empty sum is the neutral element `Iterator::sum` starts from, so the running
        // sum below is that of `values.iter().sum()`, bit for bit.
        let mut sum: f64 = std::iter::empty::<f64>().sum();
        let (mut min, mut max) = (f64::INFINITY, f64::NEG_INFINITY);
        let mut span = Span {
            lo: u64::MAX,
            hi: 0,
        };
        let mut nan = false;
        sample.pass(&mut |x| {
            count += 1;
            sum += x;
            min = f64::min(min, x);
            max = f64::max(max, x);
            nan |= x.is_nan();
            span.lo = span.lo.min(key(x));
            span.hi = span.hi.max(key(x));
        })?;
        if count == 0 || nan {
            return Err(Error::Numerical(
                "a summary needs a non-empty sample without NaN".into(),
            ));
        }
        let mean = sum / count as f64;
        let mut ss: f64 = std::iter::empty::<f64>().sum();
        sample.pass(&mut |x| ss += (x - mean) * (x - mean))?;
        let stats = SampleSummary {
            count,
            mean,
            std_dev: if count > 1 {
                (ss / (count - 1) as f64).sqrt()
            } else {
                0.0
            },
            min,
            max,
        };
        Ok(Streamed {
            sample,
            held: held.max(1),
            span,
            stats,
            passes: std::cell::Cell::new(2),
        })
    }

    /// Count, mean, standard deviation and range.
    pub fn stats(&self) -> &SampleSummary {
        &self.stats
    }

    /// Passes over the sample so far.
    pub fn passes(&self) -> usize {
        self.passes.get()
    }

    fn pass(&self, each: &mut dyn FnMut(f64)) -> Result<()> {
        self.passes.set(self.passes.get() + 1);
        self.sample.pass(each)
    }

    /// Hyndman–Fan type-7 quantiles at `probabilities` (each in [0, 1]), as
    /// [`crate::risk::quantile_sorted`] gives them on the sorted sample.
    pub fn quantiles(&self, probabilities: &[f64]) -> Result<Vec<f64>> {
        let n = self.stats.count;
        let positions: Vec<Type7> = probabilities.iter().map(|&p| Type7::new(n, p)).collect();
        let mut ranks: Vec<usize> = positions.iter().flat_map(|t| [t.lo, t.hi]).collect();
        ranks.sort_unstable();
        ranks.dedup();
        let values = self.order_statistics(&ranks)?;
        let at = |r: usize| values[ranks.partition_point(|&x| x < r)];
        Ok(positions
            .iter()
            .map(|t| t.interpolate(at(t.lo), at(t.hi)))
            .collect())
    }

    /// The mean of the values at or above `var`, summed in ascending order as
    /// [`crate::risk::tvar_sorted`] sums them (NaN when there are none).
    pub fn tail_mean(&self, var: f64) -> Result<f64> {
        // `!(x < var)` is the tail `tvar_sorted` takes; in key order that starts at var,
        // or at −0 when var is a zero of either sign.
        let lo = if var == 0.0 { key(-0.0) } else { key(var) };
        let mut sum: f64 = std::iter::empty::<f64>().sum();
        let mut count = 0usize;
        if lo <= self.span.hi {
            let tail = Span {
                lo: lo.max(self.span.lo),
                hi: self.span.hi,
            };
            self.fold_ascending(tail, &mut |x| {
                sum += x;
                count += 1;
            })?;
        }
        Ok(sum / count as f64)
    }

    /// The values of the 0-based `ranks` (sorted, distinct, below the count) in the
    /// sample sorted by `f64::total_cmp`.
    pub fn order_statistics(&self, ranks: &[usize]) -> Result<Vec<f64>> {
        let mut found: Vec<(usize, f64)> = Vec::with_capacity(ranks.len());
        let mut searches = vec![Search {
            span: self.span,
            below: 0,
            count: self.stats.count,
            ranks: ranks.to_vec(),
        }];
        while !searches.is_empty() {
            // A span of one key holds one value, however many times.
            searches.retain(|s| {
                if s.span.lo == s.span.hi {
                    found.extend(s.ranks.iter().map(|&r| (r, value(s.span.lo))));
                }
                s.span.lo != s.span.hi
            });
            if searches.is_empty() {
                break;
            }
            searches.sort_by_key(|s| s.span.lo);
            let mut allowance = self.held;
            let work: Vec<Work> = searches
                .iter()
                .map(|s| {
                    if s.count > self.held {
                        Work::Count
                    } else if s.count <= allowance {
                        allowance -= s.count;
                        Work::Keep
                    } else {
                        Work::Wait
                    }
                })
                .collect();
            let mut kept: Vec<Vec<f64>> = searches
                .iter()
                .zip(&work)
                .map(|(s, w)| match w {
                    Work::Keep => Vec::with_capacity(s.count),
                    _ => Vec::new(),
                })
                .collect();
            let mut counts: Vec<Vec<usize>> = work
                .iter()
                .map(|w| match w {
                    Work::Count => vec![0; BUCKETS],
                    _ => Vec::new(),
                })
                .collect();
            self.pass(&mut |x| {
                let k = key(x);
                let i = searches.partition_point(|s| s.span.hi < k);
                if i < searches.len() && searches[i].span.contains(k) {
                    match work[i] {
                        Work::Keep => kept[i].push(x),
                        Work::Count => counts[i][searches[i].span.bucket(k)] += 1,
                        Work::Wait => {}
                    }
                }
            })?;
            let mut next = Vec::new();
            for ((search, work), (mut values, counts)) in searches
                .into_iter()
                .zip(work)
                .zip(kept.into_iter().zip(counts))
            {
                match work {
                    Work::Keep => {
                        if values.len() != search.count {
                            return Err(changed());
                        }
                        values.sort_unstable_by(f64::total_cmp);
                        for &r in &search.ranks {
                            found.push((r, values[r - search.below]));
                        }
                    }
                    Work::Count => {
                        if counts.iter().sum::<usize>() != search.count {
                            return Err(changed());
                        }
                        let mut below = search.below;
                        for (b, &count) in counts.iter().enumerate() {
                            let ranks: Vec<usize> = search
                                .ranks
                                .iter()
                                .copied()
                                .filter(|&r| r >= below && r < below + count)
                                .collect();
                            if !ranks.is_empty() {
                                let span = search.span.part(b).ok_or_else(changed)?;
                                next.push(Search {
                                    span,
                                    below,
                                    count,
                                    ranks,
                                });
                            }
                            below += count;
                        }
                    }
                    Work::Wait => next.push(search),
                }
            }
            searches = next;
        }
        found.sort_by_key(|&(r, _)| r);
        Ok(found.into_iter().map(|(_, v)| v).collect())
    }

    /// Calls `each` with the values whose keys lie in `span`, in ascending order.
    fn fold_ascending(&self, span: Span, each: &mut dyn FnMut(f64)) -> Result<()> {
        // Spans still to visit, the lowest last; a count is known once counted.
        let mut stack: Vec<(Span, Option<usize>)> = vec![(span, None)];
        while let Some((span, count)) = stack.pop() {
            if let (Some(c), true) = (count, span.lo == span.hi) {
                // One key: `c` copies of one value, however many.
                (0..c).for_each(|_| each(value(span.lo)));
                continue;
            }
            if count.is_none_or(|c| c <= self.held) {
                // Keep the span's values if they fit, counting them in any case.
                let (mut values, mut seen) = (Vec::new(), 0usize);
                self.pass(&mut |x| {
                    if span.contains(key(x)) {
                        seen += 1;
                        if seen <= self.held {
                            values.push(x);
                        }
                    }
                })?;
                if count.is_some_and(|c| c != seen) {
                    return Err(changed());
                }
                if seen <= self.held {
                    values.sort_unstable_by(f64::total_cmp);
                    values.into_iter().for_each(&mut *each);
                } else {
                    stack.push((span, Some(seen)));
                }
                continue;
            }
            // Too many to keep: count by bucket, then visit runs of buckets that fit.
            let mut counts = vec![0usize; BUCKETS];
            self.pass(&mut |x| {
                let k = key(x);
                if span.contains(k) {
                    counts[span.bucket(k)] += 1;
                }
            })?;
            if Some(counts.iter().sum::<usize>()) != count {
                return Err(changed());
            }
            let mut runs: Vec<(Span, Option<usize>)> = Vec::new();
            for (b, &c) in counts.iter().enumerate() {
                let Some(part) = span.part(b).filter(|_| c > 0) else {
                    continue;
                };
                match runs.last_mut() {
                    Some((run, Some(n))) if *n + c <= self.held && run.hi + 1 == part.lo => {
                        run.hi = part.hi;
                        *n += c;
                    }
                    _ => runs.push((part, Some(c))),
                }
            }
            stack.extend(runs.into_iter().rev());
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::risk::quantile::{quantile_sorted, sorted, summarize, tvar_sorted};

    /// An invented sample: a few thousand values with ties, both signs, zeros of both
    /// signs and a wide range, in no order.
    fn awkward(n: usize) -> Vec<f64> {
        let mut state = 0x2545_f491_4f6c_dd1d_u64;
        (0..n)
            .map(|i| {
                state ^= state << 13;
                state ^= state >> 7;
                state ^= state << 17;
                let u = (state >> 11) as f64 / (1u64 << 53) as f64;
                match i % 11 {
                    0 => 1.0e6 * u,
                    1 => -0.0,
                    2 => 0.0,
                    3 => 123.25,
                    4 => -3.0 * u,
                    _ => 1.0e9 + 1.0e3 * u,
                }
            })
            .collect()
    }

    #[test]
    fn keys_order_like_total_cmp() {
        let v = [-1.0e300, -2.5, -0.0, 0.0, 1.0e-310, 1.0, f64::INFINITY];
        for w in v.windows(2) {
            assert!(key(w[0]) < key(w[1]), "{} {}", w[0], w[1]);
        }
        for &x in &v {
            assert_eq!(value(key(x)).to_bits(), x.to_bits());
        }
        let span = Span { lo: 10, hi: 10_000 };
        let mut last = 0;
        for k in span.lo..=span.hi {
            let b = span.bucket(k);
            assert!(b >= last && b < BUCKETS);
            assert!(span.part(b).is_some_and(|p| p.contains(k)));
            last = b;
        }
    }

    #[test]
    fn streamed_figures_equal_the_sorted_ones_bit_for_bit() {
        // The reference is the in-memory path: type 7 on the sorted copy (itself checked
        // against numpy.quantile in tests/risk_quantiles.rs).
        let probabilities = [0.0, 0.005, 0.1, 0.25, 0.5, 0.9, 0.995, 0.999, 1.0];
        for (n, allowances) in [
            (1, &[1, HELD][..]),
            (2, &[1, HELD]),
            (3, &[1, 2, HELD]),
            (50, &[1, 7, HELD]),
            (5_000, &[64, 1_000, HELD]),
        ] {
            let values = awkward(n);
            let s = sorted(&values);
            for &held in allowances {
                let streamed = Streamed::new(&values[..], held).unwrap();
                assert_eq!(*streamed.stats(), summarize(&values), "n={n} held={held}");
                let ours = streamed.quantiles(&probabilities).unwrap();
                for (&p, q) in probabilities.iter().zip(ours) {
                    let expected = quantile_sorted(&s, p);
                    assert_eq!(q.to_bits(), expected.to_bits(), "n={n} held={held} p={p}");
                    let tvar = streamed.tail_mean(q).unwrap();
                    let expected = tvar_sorted(&s, p);
                    assert_eq!(
                        tvar.to_bits(),
                        expected.to_bits(),
                        "n={n} held={held} p={p}: {tvar} vs {expected}"
                    );
                }
            }
        }
    }

    #[test]
    fn small_allowances_take_more_passes_not_more_memory() {
        let values = awkward(5_000);
        let roomy = Streamed::new(&values[..], HELD).unwrap();
        roomy.quantiles(&[0.995]).unwrap();
        roomy.tail_mean(0.0).unwrap();
        // Two passes for the moments, one to keep each span.
        assert_eq!(roomy.passes(), 4);
        let tight = Streamed::new(&values[..], 16).unwrap();
        tight.quantiles(&[0.995]).unwrap();
        assert!(tight.passes() > 3, "{}", tight.passes());
    }

    #[test]
    fn a_sample_that_changes_between_passes_is_an_error() {
        struct Drifting(std::cell::Cell<f64>);
        impl Sample for Drifting {
            fn pass(&self, each: &mut dyn FnMut(f64)) -> Result<()> {
                let shift = self.0.get();
                self.0.set(shift + 1.0);
                (0..100).for_each(|i| each(f64::from(i) * shift));
                Ok(())
            }
        }
        let sample = Drifting(std::cell::Cell::new(1.0));
        let streamed = Streamed::new(&sample, 10).unwrap();
        assert!(streamed.quantiles(&[0.5]).is_err());
        assert!(Streamed::new(&[][..], 10).is_err());
        assert!(Streamed::new(&[1.0, f64::NAN][..], 10).is_err());
    }
}
