//! The book prepared for valuation in many scenarios, and the per-scenario valuation.
//!
//! Preparation groups policies into cohorts (shared survival curves) and shapes (shared
//! payment schedules), so one scenario costs one curve per cohort, one short dot product per
//! (cohort, shape) block for the expected value, and — with individual deaths simulated —
//! one uniform draw, a guided table look-up and two array reads per life. Nothing in the
//! per-scenario path allocates once the workspace has grown to size.

use std::collections::HashMap;
use std::path::Path;

use rand::Rng;

use crate::data::coverage::{ProjectedRange, check_book_coverage};
use crate::data::sex::sex_index;
use crate::data::{Book, Sex};
use crate::error::{Error, Result};
use crate::projection::RateSurface;
use crate::valuation::cohort::{Cohort, LevelAdjustment, cohort_curve};
use crate::valuation::schedule::{Basis, PaymentShape, Schedule};

/// log2 of the buckets of the guide table that starts each death-time search near its
/// answer. 256 buckets leave the forward scan under one step on average for a cohort with
/// 60 years of deaths (32 left about two, each a likely branch miss); the table costs 512
/// bytes per cohort and is rebuilt per scenario in O(buckets + years). Which bucket starts
/// the scan never changes the death year it finds.
const GUIDE_BITS: u32 = 8;
/// Buckets of the guide table.
const GUIDE_BUCKETS: usize = 1 << GUIDE_BITS;
/// 2^−32: turns 32 random bits into a uniform on (0, 1).
const UNIT_32: f64 = 1.0 / 4_294_967_296.0;

/// Policies with the same cohort and shape, amounts summed (amount × weight).
#[derive(Debug, Clone, Copy, PartialEq)]
struct Block {
    cohort: u32,
    shape: u32,
    amount: f64,
}

/// One simulated life.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Life {
    cohort: u32,
    shape: u32,
    amount: f64,
    /// Index of its policy in the book.
    policy: u32,
}

/// Receives the per-policy pieces of one scenario's valuation (see `valuation::replay`):
/// the book's own loop calls it where it adds each piece to the total, so a per-policy
/// replay shares every draw and every product with the book's value. Each method defaults
/// to nothing, and [`NoPolicies`] keeps the book's own valuation free of it.
pub trait PolicySink {
    /// Whether the sink takes the blocks' expected values ([`Self::block`]); the book's own
    /// valuation does not, and skips computing them.
    const PER_BLOCK: bool = true;
    /// Block `block` (an index into [`PreparedBook::policy_blocks`]'s values) is worth
    /// `pv_per_amount` per unit of amount × weight on the scenario's path.
    #[inline(always)]
    fn block(&mut self, _block: usize, _pv_per_amount: f64) {}
    /// Simulated life `life` (see [`PreparedBook::life_policies`]) receives contingent
    /// payments worth `pv` (its amount already applied).
    #[inline(always)]
    fn life(&mut self, _life: usize, _pv: f64) {}
    /// Lives `lives` also receive the certain payments, `certain_pv` per unit of amount.
    #[inline(always)]
    fn certain(&mut self, _lives: std::ops::Range<usize>, _certain_pv: f64) {}
}

/// The sink of the book's own valuation: keeps nothing.
#[derive(Debug, Clone, Copy, Default)]
pub struct NoPolicies;

impl PolicySink for NoPolicies {
    const PER_BLOCK: bool = false;
}

/// Consecutive simulated lives sharing a cohort and a shape: the simulation looks up the
/// curve and the schedule once per run, not once per life.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Run {
    cohort: u32,
    shape: u32,
    start: u32,
    end: u32,
}

/// Every (cohort, shape) block's schedule vectors, amount-weighted and summed per cohort:
/// the expected value is linear in them, so a scenario costs one pass over each cohort's
/// years instead of one per block (16 blocks a cohort in the demo book, 24 in the bench
/// book).
#[derive(Debug, Clone, Default)]
struct CohortSchedules {
    /// Σ amount × A_k per cohort, cohort-major with `years` entries a cohort.
    pv_level: Vec<f64>,
    /// Σ amount × B_k.
    pv_slope: Vec<f64>,
    /// Σ amount × contingent cash in year k.
    cash_level: Vec<f64>,
    /// Σ amount × contingent cash in year k weighted by f.
    cash_slope: Vec<f64>,
    /// Σ amount × PV of the guaranteed payments.
    certain_pv: f64,
    /// Σ amount × guaranteed cash in year k.
    certain_cash: Vec<f64>,
}

impl CohortSchedules {
    fn new(blocks: &[Block], schedules: &[Schedule], cohorts: usize, years: usize) -> Self {
        let mut e = CohortSchedules {
            pv_level: vec![0.0; cohorts * years],
            pv_slope: vec![0.0; cohorts * years],
            cash_level: vec![0.0; cohorts * years],
            cash_slope: vec![0.0; cohorts * years],
            certain_pv: 0.0,
            certain_cash: vec![0.0; years],
        };
        for b in blocks {
            let sched = &schedules[b.shape as usize];
            let row = b.cohort as usize * years;
            let a = b.amount;
            for k in 0..years.min(sched.years) {
                e.pv_level[row + k] += a * sched.pv_level[k];
                e.pv_slope[row + k] += a * sched.pv_slope[k];
                e.cash_level[row + k] += a * sched.cash_level[k];
                e.cash_slope[row + k] += a * sched.cash_slope[k];
                e.certain_cash[k] += a * sched.certain_cash[k];
            }
            e.certain_pv += a * sched.certain_pv;
        }
        e
    }
}

/// A book ready to be valued in any scenario.
#[derive(Debug, Clone)]
pub struct PreparedBook {
    /// Valuation year V.
    pub year: i32,
    cohorts: Vec<Cohort>,
    schedules: Vec<Schedule>,
    /// The (cohort, shape) blocks, for the per-policy replay's expected values.
    blocks: Vec<Block>,
    /// Amount of each simulated life, grouped into `runs`.
    amounts: Vec<f64>,
    runs: Vec<Run>,
    /// Policy (book index) of each simulated life, in the order of `amounts`.
    life_policy: Vec<u32>,
    /// Block (index into `blocks`) of each policy, in book order.
    policy_block: Vec<u32>,
    level: LevelAdjustment,
    /// The blocks' schedules summed per cohort, weighted by the blocks' amounts.
    expected: CohortSchedules,
    /// Total amount of lives per shape, for the simulated cash flows.
    shape_amount: Vec<f64>,
    years: usize,
    max_age: i32,
}

/// What one scenario gives.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ScenarioValue {
    /// Expected PV given the scenario's path (trend risk only).
    pub pv_expected: f64,
    /// PV with each life's death simulated (trend + idiosyncratic); NaN when not simulated.
    pub pv_simulated: f64,
    /// Expected benefit cash flow in policy year k (calendar year V + k).
    pub cash_expected: Vec<f64>,
    /// Simulated benefit cash flow in policy year k (empty when not simulated).
    pub cash_simulated: Vec<f64>,
}

/// Reusable buffers for one thread.
#[derive(Debug, Default, Clone)]
pub struct Workspace {
    q: Vec<Vec<f64>>,
    survival: Vec<Vec<f64>>,
    guide: Vec<[u16; GUIDE_BUCKETS]>,
    dying: Vec<f64>,
    partial: Vec<f64>,
}

impl PreparedBook {
    /// Prepares `book` for valuation at the start of `year` on `basis`, with rates for ages
    /// up to `max_age` and calendar years up to `last_year`, from `first_age`.
    pub fn new(
        book: &Book,
        basis: &Basis,
        level: LevelAdjustment,
        year: i32,
        first_age: i32,
        max_age: i32,
        last_year: i32,
    ) -> Result<Self> {
        if book.policies.is_empty() {
            return Err(Error::File {
                file: book.source.clone(),
                rule: "the book has no policies".into(),
            });
        }
        let youngest = book
            .policies
            .iter()
            .map(|p| p.age)
            .min()
            .unwrap_or(first_age);
        check_book_coverage(
            book,
            &ProjectedRange {
                first_age,
                max_age,
                year,
                last_year,
            },
            Path::new(""),
        )?;
        // Rates are needed to the youngest life's max_age; guaranteed payments can run
        // beyond it (a certain period outlives the table), so the schedules cover both.
        let rate_years = (max_age - youngest + 1) as usize;
        let certain_years = book
            .policies
            .iter()
            .map(|p| (p.deferral + p.guarantee) as usize)
            .max()
            .unwrap_or(0);
        let years = rate_years.max(certain_years);

        let mut cohort_index: HashMap<(Sex, i32, u64), u32> = HashMap::new();
        let mut shape_index: HashMap<PaymentShape, u32> = HashMap::new();
        let mut cohorts = Vec::new();
        let mut shapes = Vec::new();
        let mut block_index: HashMap<(u32, u32), usize> = HashMap::new();
        let mut blocks: Vec<Block> = Vec::new();
        let mut lives = Vec::with_capacity(book.policies.len());
        let mut policy_block = Vec::with_capacity(book.policies.len());
        for (i, p) in book.policies.iter().enumerate() {
            let c = *cohort_index
                .entry((p.sex, p.age, p.mortality_factor.to_bits()))
                .or_insert_with(|| {
                    cohorts.push(Cohort {
                        sex: p.sex,
                        age: p.age,
                        factor: p.mortality_factor,
                    });
                    (cohorts.len() - 1) as u32
                });
            let shape = PaymentShape::of(p);
            let s = *shape_index.entry(shape).or_insert_with(|| {
                shapes.push(shape);
                (shapes.len() - 1) as u32
            });
            let total = p.amount * p.weight;
            let b = *block_index.entry((c, s)).or_insert_with(|| {
                blocks.push(Block {
                    cohort: c,
                    shape: s,
                    amount: 0.0,
                });
                blocks.len() - 1
            });
            blocks[b].amount += total;
            policy_block.push(b as u32);
            // A weight of w stands for w lives; a fractional weight is spread over
            // round(w) lives (at least one) so the total amount is kept.
            let n = p.weight.round().max(1.0) as usize;
            let each = total / n as f64;
            lives.extend(std::iter::repeat_n(
                Life {
                    cohort: c,
                    shape: s,
                    amount: each,
                    policy: i as u32,
                },
                n,
            ));
        }
        // Lives of one cohort together keep the curve and guide table hot in cache.
        lives.sort_by_key(|l| (l.cohort, l.shape));
        let schedules: Vec<Schedule> = shapes
            .iter()
            .map(|s| Schedule::new(s, basis, years))
            .collect();
        let mut shape_amount = vec![0.0; schedules.len()];
        let mut runs: Vec<Run> = Vec::new();
        for (i, l) in lives.iter().enumerate() {
            shape_amount[l.shape as usize] += l.amount;
            match runs.last_mut() {
                Some(r) if r.cohort == l.cohort && r.shape == l.shape => r.end = i as u32 + 1,
                _ => runs.push(Run {
                    cohort: l.cohort,
                    shape: l.shape,
                    start: i as u32,
                    end: i as u32 + 1,
                }),
            }
        }
        let amounts = lives.iter().map(|l| l.amount).collect();
        let life_policy = lives.iter().map(|l| l.policy).collect();
        let expected = CohortSchedules::new(&blocks, &schedules, cohorts.len(), years);
        Ok(PreparedBook {
            year,
            cohorts,
            schedules,
            blocks,
            amounts,
            runs,
            life_policy,
            policy_block,
            level,
            expected,
            shape_amount,
            years,
            max_age,
        })
    }

    /// Highest age of the rates (q = 1 there).
    pub fn max_age(&self) -> i32 {
        self.max_age
    }

    /// Policy years covered (from the valuation year to `max_age` of the youngest life).
    pub fn years(&self) -> usize {
        self.years
    }

    /// The cohorts, in first-seen order.
    pub fn cohorts(&self) -> &[Cohort] {
        &self.cohorts
    }

    /// Number of simulated lives.
    pub fn lives(&self) -> usize {
        self.amounts.len()
    }

    /// Policy (index in the book) of each simulated life, in simulation order.
    pub fn life_policies(&self) -> &[u32] {
        &self.life_policy
    }

    /// Amount of each simulated life, in simulation order.
    pub fn life_amounts(&self) -> &[f64] {
        &self.amounts
    }

    /// Valuation block of each policy, in book order.
    pub fn policy_blocks(&self) -> &[u32] {
        &self.policy_block
    }

    /// Number of valuation blocks (cohort × shape).
    pub fn blocks(&self) -> usize {
        self.blocks.len()
    }

    /// Builds every cohort's curve for one scenario into `ws`; `surfaces[i]` holds sex i's
    /// rates (F then M).
    pub fn build_curves(
        &self,
        surfaces: &[Option<RateSurface<'_>>; 2],
        ws: &mut Workspace,
    ) -> Result<()> {
        self.build_scaled_curves(surfaces, 1.0, ws)
    }

    /// As [`Self::build_curves`] with every q multiplied by `scale` (capped at 1): 0.8 is
    /// the standard-formula 20 % decrease.
    pub fn build_scaled_curves(
        &self,
        surfaces: &[Option<RateSurface<'_>>; 2],
        scale: f64,
        ws: &mut Workspace,
    ) -> Result<()> {
        ws.q.resize_with(self.cohorts.len(), Vec::new);
        ws.survival.resize_with(self.cohorts.len(), Vec::new);
        for (c, cohort) in self.cohorts.iter().enumerate() {
            let surface = surfaces[sex_index(cohort.sex)].as_ref().ok_or_else(|| {
                Error::model(
                    "projection",
                    format!(
                        "the book has sex {} but no rates were projected for it",
                        cohort.sex
                    ),
                )
            })?;
            cohort_curve(
                cohort,
                surface,
                self.year,
                &self.level,
                scale,
                &mut ws.q[c],
                &mut ws.survival[c],
            );
        }
        Ok(())
    }

    /// The survival curve `k p x` of cohort `c` built by the last [`Self::build_curves`].
    pub fn survival<'w>(&self, ws: &'w Workspace, c: usize) -> &'w [f64] {
        &ws.survival[c]
    }

    /// Values the book in one scenario whose curves are in `ws`; simulates individual deaths
    /// with `rng` when given.
    pub fn value<R: Rng>(&self, ws: &mut Workspace, rng: Option<&mut R>, out: &mut ScenarioValue) {
        self.value_policies(ws, rng, out, &mut NoPolicies);
    }

    /// As [`Self::value`], handing each policy's pieces of the value to `policies` on the way.
    pub fn value_policies<R: Rng, P: PolicySink>(
        &self,
        ws: &mut Workspace,
        rng: Option<&mut R>,
        out: &mut ScenarioValue,
        policies: &mut P,
    ) {
        // Guaranteed payments are paid whatever happens, also beyond a cohort's last year
        // (to the estate); the contingent ones follow the cohort's curve:
        // S_k (A_k − B_k q_k) under UDD, summed over the cohort's blocks beforehand.
        let e = &self.expected;
        out.cash_expected.clear();
        out.cash_expected.extend_from_slice(&e.certain_cash);
        let mut pv = e.certain_pv;
        for c in 0..self.cohorts.len() {
            let (q, s) = (&ws.q[c], &ws.survival[c]);
            let n = q.len().min(self.years);
            let row = c * self.years..c * self.years + n;
            let (pl, ps) = (&e.pv_level[row.clone()], &e.pv_slope[row.clone()]);
            let (cl, cs) = (&e.cash_level[row.clone()], &e.cash_slope[row]);
            let cash = &mut out.cash_expected[..n];
            let (q, s) = (&q[..n], &s[..n]);
            for k in 0..n {
                pv += s[k] * (pl[k] - ps[k] * q[k]);
                cash[k] += s[k] * (cl[k] - cs[k] * q[k]);
            }
        }
        out.pv_expected = pv;
        // The total above sums per cohort; a per-policy sink takes each block's own value
        // (its policies' sum equals the total to rounding, not to the bit).
        if P::PER_BLOCK {
            for (i, b) in self.blocks.iter().enumerate() {
                let (q, s) = (&ws.q[b.cohort as usize], &ws.survival[b.cohort as usize]);
                policies.block(i, self.schedules[b.shape as usize].expected_pv(s, q));
            }
        }
        match rng {
            Some(rng) => self.simulate(ws, rng, out, policies),
            None => {
                out.pv_simulated = f64::NAN;
                out.cash_simulated.clear();
            }
        }
    }

    /// Draws each life's time of death from its cohort curve (UDD within the year, by
    /// inversion of one uniform) and adds up the payments it receives.
    ///
    /// Draw order (a replay of one policy follows it): one `next_u32` of `rng` per life,
    /// lives in the prepared order — sorted by (cohort, shape), each numbered in order of
    /// first appearance in the book, policies in book order within a run, a policy of
    /// weight w as round(w) (at least one) consecutive lives. This loop is the only place
    /// a life's step is written.
    fn simulate<R: Rng, P: PolicySink>(
        &self,
        ws: &mut Workspace,
        rng: &mut R,
        out: &mut ScenarioValue,
        policies: &mut P,
    ) {
        let n_shapes = self.schedules.len();
        ws.guide.resize(self.cohorts.len(), [0; GUIDE_BUCKETS]);
        for (c, s) in ws.survival.iter().enumerate().take(self.cohorts.len()) {
            ws.guide[c] = guide_table(s);
        }
        ws.dying.clear();
        ws.dying.resize(n_shapes * (self.years + 1), 0.0);
        ws.partial.clear();
        ws.partial.resize(n_shapes * (self.years + 1), 0.0);
        let stride = self.years + 1;
        let mut pv = 0.0;
        for run in &self.runs {
            let s = ws.survival[run.cohort as usize].as_slice();
            let guide = &ws.guide[run.cohort as usize];
            let sched = &self.schedules[run.shape as usize];
            let lookup = sched.death_lookup();
            let row = run.shape as usize * stride;
            let dying = &mut ws.dying[row..row + stride];
            let partial = &mut ws.partial[row..row + stride];
            let mut run_pv = 0.0;
            let lives = run.start as usize..run.end as usize;
            for (life, &amount) in lives.clone().zip(&self.amounts[lives.clone()]) {
                // U in (0, 1) from 32 random bits; its top bits pick the guide bucket.
                let bits = rng.next_u32();
                let u = (f64::from(bits) + 0.5) * UNIT_32;
                let mut k = guide[(bits >> (32 - GUIDE_BITS)) as usize] as usize;
                // Death year K = max{k : S_k ≥ U}; S ends at 0 < U, so the scan stops.
                while s[k + 1] >= u {
                    k += 1;
                }
                // Under UDD the time of death within year K is linear in U.
                let f = (s[k] - u) / (s[k] - s[k + 1]);
                let paid = lookup.payments_before(k, f);
                let life_pv = amount * lookup.pv_prefix[paid];
                policies.life(life, life_pv);
                run_pv += life_pv;
                dying[k] += amount;
                let year_start = lookup.year_start[k] as usize;
                partial[k] += amount * (lookup.cash_prefix[paid] - lookup.cash_prefix[year_start]);
            }
            let run_amount: f64 = self.amounts[run.start as usize..run.end as usize]
                .iter()
                .sum();
            policies.certain(lives, sched.certain_pv);
            pv += run_pv + run_amount * sched.certain_pv;
        }
        out.pv_simulated = pv;
        // Year k pays: guaranteed cash to all, full contingent cash to lives dying after
        // year k, and the part-year cash of lives dying in year k.
        out.cash_simulated.clear();
        out.cash_simulated.resize(self.years, 0.0);
        for (sh, sched) in self.schedules.iter().enumerate() {
            let dying = &ws.dying[sh * stride..(sh + 1) * stride];
            let partial = &ws.partial[sh * stride..(sh + 1) * stride];
            let mut alive_after: f64 = dying.iter().sum();
            for k in 0..self.years {
                alive_after -= dying[k];
                out.cash_simulated[k] += self.shape_amount[sh] * sched.certain_cash[k]
                    + alive_after.max(0.0) * sched.cash_level[k]
                    + partial[k];
            }
        }
    }
}

/// guide[b] = K((b + 1)/G) = max{k : S_k ≥ (b + 1)/G}: a lower bound on the death year of
/// any U in bucket b, from which a short forward scan finds it.
///
/// Built per cohort and scenario, so by runs rather than bucket by bucket: S_k ≥ (b + 1)/G
/// exactly when b < c_k = ⌊G S_k⌋ (G is a power of two, so G S_k is exact), and c_k does
/// not increase with k, so year k is the answer for buckets c_{k+1} ≤ b < c_k.
fn guide_table(survival: &[f64]) -> [u16; GUIDE_BUCKETS] {
    let mut guide = [0u16; GUIDE_BUCKETS];
    let bucket_end = |s: f64| ((s * GUIDE_BUCKETS as f64).floor() as usize).min(GUIDE_BUCKETS);
    let mut end = survival.first().map_or(0, |&s| bucket_end(s));
    for (k, &next) in survival.iter().skip(1).chain([&0.0]).enumerate() {
        let start = bucket_end(next).min(end);
        guide[start..end].fill(k as u16);
        end = start;
    }
    guide
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The table bucket by bucket: walk down from the previous bucket's answer.
    fn guide_by_buckets(survival: &[f64]) -> [u16; GUIDE_BUCKETS] {
        let mut guide = [0u16; GUIDE_BUCKETS];
        let mut k = survival.len() - 1;
        for (b, slot) in guide.iter_mut().enumerate() {
            let threshold = (b + 1) as f64 / GUIDE_BUCKETS as f64;
            while k > 0 && survival[k] < threshold {
                k -= 1;
            }
            *slot = k as u16;
        }
        guide
    }

    #[test]
    fn the_guide_built_by_runs_is_the_guide_built_by_buckets() {
        use rand::{RngExt, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
        for case in 0..500 {
            let years = rng.random_range(1..80);
            let mut s = vec![1.0];
            for k in 0..years {
                // Rates of 0 (ties), exact bucket edges, tiny and certain deaths.
                let q: f64 = match rng.random_range(0..6) {
                    0 => 0.0,
                    1 => 1.0 / GUIDE_BUCKETS as f64,
                    2 => 1e-9,
                    _ => rng.random_range(0.0..0.3),
                };
                let last = s[k];
                s.push(if k + 1 == years {
                    0.0
                } else {
                    last * (1.0 - q)
                });
            }
            if case % 7 == 0 {
                // Survival exactly on the edges of buckets.
                for (i, v) in s.iter_mut().enumerate().skip(1) {
                    *v = ((GUIDE_BUCKETS - i.min(GUIDE_BUCKETS)) as f64) / GUIDE_BUCKETS as f64;
                }
            }
            assert_eq!(guide_table(&s), guide_by_buckets(&s), "case {case}: {s:?}");
        }
    }
}
