//! The simulation of individual deaths: the per-life step and the tables it reads.
//!
//! The step runs once per simulated life and scenario, the only work of a valuation that
//! grows with both, so what it reads is laid out for it beforehand: per cohort and scenario,
//! the survival curve with its guide table and year-on-year drops, put in the form the
//! search relies on; per payment shape, what a life receives for each death time
//! ([`PayoutTable`]); the scenario's random words, drawn in one call. The step then reads
//! its tables unchecked, each read kept in bounds by an invariant that is checked once per
//! run of lives, not once per life.

use crate::valuation::schedule::PayoutTable;

/// log2 of the buckets of the guide table that starts each death-time search near its
/// answer. 256 buckets leave the forward scan under one step on average for a cohort with
/// 60 years of deaths (32 left about two, each a likely branch miss); the table costs 1 KB
/// per cohort and is rebuilt per scenario in O(buckets + years). Which bucket starts the
/// scan never changes the death year it finds.
const GUIDE_BITS: u32 = 8;
/// Buckets of the guide table.
const GUIDE_BUCKETS: usize = 1 << GUIDE_BITS;
/// 2^32: the tables the step reads are kept in units of 2^−32, so a word's bits need no
/// scaling (the scaling is exact, see [`DeathSearch`]).
const WORD_SCALE: f64 = 4_294_967_296.0;
/// 2^−32: turns 32 random bits into a uniform on (0, 1).
const UNIT_32: f64 = 1.0 / WORD_SCALE;
/// The least uniform drawn, 2^−33: a survival below it is never reached.
const LEAST_U: f64 = 0.5 * UNIT_32;
/// The greatest uniform drawn, 1 − 2^−33.
const GREATEST_U: f64 = 1.0 - LEAST_U;

/// One cohort's survival curve ready for the death-time search in one scenario.
///
/// The curve is stored in the units of the random words: T_k = 2^32 S_k − 1/2 against a
/// word's bits w, since U = (w + 1/2)/2^32, so S_k ≥ U exactly when T_k ≥ w, and
/// (S_k − U)/(S_k − S_k+1) = (T_k − w)/(2^32 (S_k − S_k+1)) to the bit: scaling by a power
/// of two is exact, and 2^32 S_k − 1/2 is exact for every S_k ≥ 2^−33 (Sterbenz), the
/// only values the fraction reads (a smaller S_k gives T_k < 0 ≤ w, as S_k < U did).
///
/// Invariants (set by [`Self::rebuild`], relied on by [`simulate_lives`]): the curve S
/// has n + 1 ≥ 2 non-increasing values in [0, 1] with S_0 ≥ the greatest uniform and S_n
/// below the least; `threshold` holds T_0 ..= T_n and `drop` the n values
/// 2^32 (S_k − S_k+1); every guide entry g of bucket b is at most n − 1 with
/// S_g ≥ (b + 1)/G or g = 0.
#[derive(Debug, Clone)]
pub struct DeathSearch {
    /// guide[b] = K((b + 1)/G) = max{k : S_k ≥ (b + 1)/G}: a lower bound on the death
    /// year of any U in bucket b, from which a short forward scan finds it.
    guide: [u32; GUIDE_BUCKETS],
    /// T_k = 2^32 S_k − 1/2, k = 0 ..= n.
    threshold: Vec<f64>,
    /// 2^32 (S_k − S_k+1), k < n: the UDD fraction's denominator, once per year not per
    /// life.
    drop: Vec<f64>,
}

impl Default for DeathSearch {
    fn default() -> Self {
        DeathSearch {
            guide: [0; GUIDE_BUCKETS],
            threshold: Vec::new(),
            drop: Vec::new(),
        }
    }
}

impl DeathSearch {
    /// Prepares the search on the curve `survival` = S_0 ..= S_n.
    ///
    /// A cohort curve starts at 1, ends at 0 (q = 1 at the table's last age), never rises
    /// and stays in [0, 1], and is then taken as it is. Anything else (a NaN from broken
    /// rates) is forced into that form rather than read out of bounds: the figures are
    /// then meaningless, as they would be anyway, but memory stays safe.
    pub fn rebuild(&mut self, survival: &[f64]) {
        let n = survival.len().max(2) - 1;
        let clamped = |k: usize| match survival.get(k) {
            Some(&x) if x >= 0.0 => x.min(1.0),
            _ => 0.0,
        };
        self.threshold.resize(n + 1, 0.0);
        self.drop.resize(n, 0.0);
        let (threshold, drop, guide) = (
            &mut self.threshold[..=n],
            &mut self.drop[..n],
            &mut self.guide,
        );
        let mut below = clamped(n);
        if below >= LEAST_U {
            below = 0.0;
        }
        threshold[n] = below * WORD_SCALE - 0.5;
        // One pass down the years: the drop and threshold of year k, and how many years
        // k ≥ 1 have ⌊G S_k⌋ = t. A curve is forced non-increasing on the way (a cohort
        // curve is: S_k+1 = S_k (1 − q) ≤ S_k), so S_k ≥ (b + 1)/G holds exactly for the
        // years k up to the bucket's answer K(b): guide[b] = K(b) counts the years
        // k ≥ 1 with ⌊G S_k⌋ > b (G S_k is exact). No branch depends on the curve: the
        // short fills this replaced mispredicted about once a year.
        let mut counts = [0u32; GUIDE_BUCKETS + 1];
        let mut year = |k: usize, here: f64, below: f64| {
            drop[k] = (here - below) * WORD_SCALE;
            threshold[k] = here * WORD_SCALE - 0.5;
            // S_k in [0, 1]: at most G.
            (here * GUIDE_BUCKETS as f64) as i32 as usize
        };
        for k in (1..n).rev() {
            let here = clamped(k).max(below);
            counts[year(k, here, below).min(GUIDE_BUCKETS)] += 1;
            below = here;
        }
        let mut first = clamped(0).max(below);
        if first < GREATEST_U {
            first = 1.0;
        }
        year(0, first, below);
        let mut above = 0;
        for (g, &count) in guide.iter_mut().zip(&counts[1..]).rev() {
            above += count;
            *g = above;
        }
    }

    /// Years of the curve, n.
    pub fn years(&self) -> usize {
        self.drop.len()
    }
}

/// Sums over one payment shape's simulated lives by policy year of death.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct DeathYear {
    /// Amount of the lives dying in the year.
    pub dying: f64,
    /// Their contingent cash received in the year, before death.
    pub partial: f64,
}

/// Simulates lives of one run (one cohort, one shape): life i of `amounts` draws
/// `words[i]`, dies in year K at K + f and receives what `payouts` gives for (K, ⌈f m⌉).
/// Each life's PV (its amount applied) goes to `each(i, pv)` and is added, in order, to
/// `run_pv`, which is returned; its amount and cash in the year of death go into
/// `by_year[K]`.
///
/// U = (bits + 0.5) / 2^32; K = max{k : S_k ≥ U}; f = (S_K − U)/(S_K − S_K+1) (UDD within
/// the year), computed as (T_K − bits)/(2^32 (S_K − S_K+1)) with the same bits (see
/// [`DeathSearch`]).
#[inline(always)]
pub fn simulate_lives(
    search: &DeathSearch,
    payouts: &PayoutTable,
    by_year: &mut [DeathYear],
    words: &[[u8; 4]],
    amounts: &[f64],
    run_pv: f64,
    each: impl FnMut(usize, f64),
) -> f64 {
    let n = search.years();
    // What bounds the unchecked reads of `lives` with the tables' own invariants.
    assert!(
        n <= payouts.years() && n <= by_year.len(),
        "a cohort's curve outlives its payment table"
    );
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx") {
        // SAFETY: the CPU has AVX; the bounds of `lives` were checked above.
        return unsafe { lives_avx(search, payouts, by_year, words, amounts, run_pv, each) };
    }
    // SAFETY: the bounds of `lives` were checked above.
    unsafe { lives::<false>(search, payouts, by_year, words, amounts, run_pv, each) }
}

/// [`lives`] compiled for AVX (with SSE4.1's rounding): ⌈x⌉ in one instruction, and
/// three-operand arithmetic that needs fewer register copies. Same figures to the bit:
/// every operation is the same IEEE-754 one.
///
/// # Safety
/// As [`lives`], and the CPU has AVX.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx")]
unsafe fn lives_avx(
    search: &DeathSearch,
    payouts: &PayoutTable,
    by_year: &mut [DeathYear],
    words: &[[u8; 4]],
    amounts: &[f64],
    run_pv: f64,
    each: impl FnMut(usize, f64),
) -> f64 {
    // SAFETY: passed on from the caller.
    unsafe { lives::<true>(search, payouts, by_year, words, amounts, run_pv, each) }
}

/// The per-life step of [`simulate_lives`]; `ROUND` takes ⌈x⌉ by `f64::ceil` (one
/// instruction with SSE4.1, a library call without), else from the truncation.
///
/// # Safety
/// The curve's years n are at most `payouts.years()` and `by_year.len()`.
#[inline(always)]
unsafe fn lives<const ROUND: bool>(
    search: &DeathSearch,
    payouts: &PayoutTable,
    by_year: &mut [DeathYear],
    words: &[[u8; 4]],
    amounts: &[f64],
    mut run_pv: f64,
    mut each: impl FnMut(usize, f64),
) -> f64 {
    let n = search.years();
    let (threshold, drop, guide) = (&search.threshold[..=n], &search.drop[..n], &search.guide);
    let (entries, periods, m) = (payouts.entries(), payouts.periods(), payouts.frequency());
    let mut step = |i: usize, word: [u8; 4], amount: f64| {
        let bits = u32::from_le_bytes(word);
        // The word in the tables' units: U = (w + 1/2)/2^32 is compared as T_k ≥ w.
        let w = f64::from(bits);
        let mut k = guide[(bits >> (32 - GUIDE_BITS)) as usize] as usize;
        // SAFETY: by `DeathSearch`'s invariants, k ≤ n − 1 and S_k ≥ U to start with (U
        // lies below its bucket's upper edge (b + 1)/G, and S_0 above every U); the scan
        // steps only while S_k+1 ≥ U (T_k+1 ≥ w), and S_n < U, so it stops at a K ≤ n − 1
        // with S_K ≥ U > S_K+1: every threshold index is at most n, every drop index below
        // n. With S in [0, 1], rounding keeps 0 ≤ S_K − U ≤ S_K − S_K+1, the latter positive,
        // so f lies in [0, 1] and x = f m in [0, m] (finite, within i64); c = ⌈x⌉ ≤ m =
        // periods − 1, so the entry index is below n × periods ≤ entries.len() (the
        // table's invariants), and K below by_year.len() (the function's contract).
        let (payout, year) = unsafe {
            // Written as a test before the loop, the rare steps (about one life in
            // twenty) keep the year's index arithmetic out of the common path.
            if *threshold.get_unchecked(k + 1) >= w {
                k += 1;
                while *threshold.get_unchecked(k + 1) >= w {
                    k += 1;
                }
            }
            let f = (*threshold.get_unchecked(k) - w) / *drop.get_unchecked(k);
            let x = f * m;
            let c: i64 = if ROUND {
                x.ceil().to_int_unchecked()
            } else {
                let whole: i64 = x.to_int_unchecked();
                whole + i64::from((whole as f64) < x)
            };
            (
                entries.get_unchecked(k * periods + c as usize),
                by_year.get_unchecked_mut(k),
            )
        };
        let life_pv = amount * payout.pv;
        each(i, life_pv);
        run_pv += life_pv;
        let add = [amount, amount * payout.cash_in_year];
        year.dying += add[0];
        year.partial += add[1];
    };
    // Two lives a turn (the order of every sum unchanged): the loop's test is paid once
    // a pair, though the compiler spends about as much on the second life's addressing
    // (29 instructions a life either way, measured).
    let lives = words.len().min(amounts.len());
    let (pairs, last) = words[..lives].as_chunks::<2>();
    for (p, (pair, amount)) in pairs.iter().zip(amounts.as_chunks::<2>().0).enumerate() {
        step(2 * p, pair[0], amount[0]);
        step(2 * p + 1, pair[1], amount[1]);
    }
    if let [word] = last {
        step(lives - 1, *word, amounts[lives - 1]);
    }
    run_pv
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A Gompertz-like survival curve: q_k = q0 growth^k for `years` years, then 0.
    fn gompertz_curve(q0: f64, growth: f64, years: i32) -> Vec<f64> {
        let mut survival = vec![1.0];
        let mut alive: f64 = 1.0;
        for k in 0..years {
            alive *= 1.0 - (q0 * growth.powi(k)).min(1.0);
            survival.push(alive);
        }
        survival.push(0.0);
        survival
    }

    #[test]
    fn guide_starts_at_or_below_the_death_year() {
        // Brute force: for uniforms at every bucket's edges and inside, the guide's start
        // is at most the death year found by a scan from 0, on a Gompertz-like curve.
        let survival = gompertz_curve(0.01, 1.12, 40);
        let mut search = DeathSearch::default();
        search.rebuild(&survival);
        for bits in (0..=u32::MAX).step_by(1 << 20).chain([u32::MAX, 1, 0]) {
            let u = (f64::from(bits) + 0.5) * UNIT_32;
            let death_year = (0..survival.len() - 1)
                .find(|&k| survival[k + 1] < u)
                .unwrap();
            let start = search.guide[(bits >> (32 - GUIDE_BITS)) as usize] as usize;
            assert!(start <= death_year, "bits {bits}");
            assert!(survival[start] >= u);
        }
    }

    #[test]
    fn both_compilations_of_the_step_agree_to_the_bit() {
        use crate::interest::{DiscountCurve, Timing};
        use crate::valuation::schedule::{Basis, PaymentShape, Schedule};
        use rand::{Rng, SeedableRng};
        let survival = gompertz_curve(0.02, 1.15, 30);
        let mut search = DeathSearch::default();
        search.rebuild(&survival);
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
            let shape = PaymentShape {
                deferral: 1,
                term: None,
                guarantee: 2,
                escalation_bits: 0.01f64.to_bits(),
            };
            let payouts = Schedule::new(&shape, &basis, 31).payouts();
            assert_eq!(payouts.entries().len(), 31 * (m as usize + 1));
            let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
            let mut words = vec![[0u8; 4]; 4000];
            rng.fill_bytes(words.as_flattened_mut());
            // Words at the curve's points, where f is 0 or 1 and x may be whole.
            for (w, s) in words.iter_mut().zip(&survival) {
                *w = ((s * 4_294_967_296.0).min(4_294_967_295.0) as u32).to_le_bytes();
            }
            let amounts: Vec<f64> = (0..4000).map(|i| 1.0 + i as f64 / 7.0).collect();
            let run = |round: bool| {
                let mut by_year = vec![DeathYear::default(); 31];
                let mut each = Vec::new();
                // SAFETY: 30 years ≤ 31, the table is the schedule's own.
                let pv = unsafe {
                    if round {
                        lives::<true>(
                            &search,
                            &payouts,
                            &mut by_year,
                            &words,
                            &amounts,
                            0.0,
                            |_, v| each.push(v.to_bits()),
                        )
                    } else {
                        lives::<false>(
                            &search,
                            &payouts,
                            &mut by_year,
                            &words,
                            &amounts,
                            0.0,
                            |_, v| each.push(v.to_bits()),
                        )
                    }
                };
                (pv.to_bits(), each, by_year)
            };
            let public = simulate_lives(
                &search,
                &payouts,
                &mut vec![DeathYear::default(); 31],
                &words,
                &amounts,
                0.0,
                |_, _| {},
            );
            let (truncated, rounded) = (run(false), run(true));
            assert_eq!(truncated, rounded);
            assert_eq!(public.to_bits(), truncated.0);
        }
    }

    #[test]
    fn thresholds_give_the_plain_uniforms_year_and_fraction_to_the_bit() {
        // The claim of `DeathSearch`'s units, checked against the plain formulas on a curve
        // with values near 2^−33, neighbours one ulp apart and a subnormal tail, for words
        // at, next to and between its points.
        let mut survival = vec![1.0, 1.0 - f64::EPSILON, 0.7, 0.7 - 1e-16, 0.3, 1e-3];
        survival.extend([
            LEAST_U * 3.0,
            LEAST_U * 1.5,
            LEAST_U,
            LEAST_U * 0.99,
            1e-310,
        ]);
        survival.push(0.0);
        let mut search = DeathSearch::default();
        search.rebuild(&survival);
        let mut words: Vec<u32> = (0..=u32::MAX).step_by(65_537).collect();
        for s in &survival {
            let w = (s * WORD_SCALE).min(4_294_967_295.0) as u32;
            words.extend([w.saturating_sub(1), w, w.saturating_add(1)]);
        }
        words.extend([0, 1, 2, u32::MAX - 1, u32::MAX]);
        for bits in words {
            let u = (f64::from(bits) + 0.5) * UNIT_32;
            let k = (0..survival.len() - 1)
                .find(|&k| survival[k + 1] < u)
                .unwrap();
            let f = (survival[k] - u) / (survival[k] - survival[k + 1]);
            let w = f64::from(bits);
            let k_scaled = (0..survival.len() - 1)
                .find(|&k| search.threshold[k + 1] < w)
                .unwrap();
            assert_eq!(k_scaled, k, "bits {bits}");
            let f_scaled = (search.threshold[k] - w) / search.drop[k];
            assert_eq!(f_scaled.to_bits(), f.to_bits(), "bits {bits}");
        }
    }

    #[test]
    fn guide_is_the_last_year_at_or_above_each_buckets_edge() {
        // guide[b] = max{k ≤ n − 1 : S_k ≥ (b + 1)/G}, or 0, by brute force, on curves
        // with years of no deaths, points exactly on bucket edges and a steep fall.
        let edge = |b: usize| (b + 1) as f64 / GUIDE_BUCKETS as f64;
        let curves = [
            vec![1.0, 1.0, 1.0, 0.9, 0.9, edge(100), edge(99), 0.2, 0.0],
            vec![1.0, edge(254), edge(3), edge(2), 1e-9, 1e-12],
            vec![1.0, 0.5, 0.5, 0.5, 0.0],
        ];
        for survival in curves {
            let mut search = DeathSearch::default();
            search.rebuild(&survival);
            let n = survival.len() - 1;
            for b in 0..GUIDE_BUCKETS {
                let expected = (0..n).rev().find(|&k| survival[k] >= edge(b)).unwrap_or(0);
                assert_eq!(
                    search.guide[b] as usize, expected,
                    "bucket {b} of {survival:?}"
                );
            }
        }
    }

    #[test]
    fn broken_curves_are_kept_in_bounds() {
        let mut search = DeathSearch::default();
        search.rebuild(&[f64::NAN, 2.0, -1.0, 0.5]);
        let top = WORD_SCALE - 0.5;
        assert_eq!(search.threshold, [top, top, -0.5, -0.5]);
        assert!(search.guide.iter().all(|&g| (g as usize) < search.years()));
    }
}
