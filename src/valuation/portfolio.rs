//! The book prepared for valuation in many scenarios, and the per-scenario valuation.
//!
//! Preparation groups policies into cohorts (shared survival curves) and shapes (shared
//! payment schedules), so one scenario costs one curve per cohort, one short dot product per
//! (cohort, shape) block for the expected value, and — with individual deaths simulated —
//! one random word, a guided search of the curve and one payout read per life
//! (`valuation::deaths`). Nothing in the per-scenario path allocates once the workspace has
//! grown to size.

use std::collections::HashMap;
use std::path::Path;

use rand::Rng;

use crate::data::coverage::{ProjectedRange, check_book_coverage};
use crate::data::sex::sex_index;
use crate::data::{Book, Sex};
use crate::error::{Error, Result};
use crate::projection::RateSurface;
use crate::valuation::cohort::{Cohort, LevelAdjustment, cohort_curve};
use crate::valuation::deaths::{DeathSearch, DeathYear, simulate_lives};
use crate::valuation::schedule::{Basis, PaymentShape, PayoutTable, Schedule};

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
    /// Sum of the run's amounts, in order.
    amount: f64,
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
    /// Each schedule's payouts by death time, for the simulation.
    payouts: Vec<PayoutTable>,
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
    searches: Vec<DeathSearch>,
    by_year: Vec<DeathYear>,
    /// Every entry of `by_year` is zero: the cash pass leaves it so, sparing the next
    /// scenario a clearing pass.
    by_year_zero: bool,
    /// Random words of the lives being simulated.
    words: Vec<[u8; 4]>,
}

/// Random words drawn in one call: 4 KB, in L1 while their lives are simulated.
const WORDS_AT_ONCE: usize = 1024;

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
                    amount: 0.0,
                }),
            }
        }
        let amounts: Vec<f64> = lives.iter().map(|l| l.amount).collect();
        for r in &mut runs {
            r.amount = amounts[r.start as usize..r.end as usize].iter().sum();
        }
        let payouts = schedules.iter().map(Schedule::payouts).collect();
        let life_policy = lives.iter().map(|l| l.policy).collect();
        let expected = CohortSchedules::new(&blocks, &schedules, cohorts.len(), years);
        Ok(PreparedBook {
            year,
            cohorts,
            schedules,
            payouts,
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

    /// Cohort `c`'s rates `q` and survival curve built by the last [`Self::build_curves`].
    pub fn curve<'w>(&self, ws: &'w Workspace, c: usize) -> (&'w [f64], &'w [f64]) {
        (&ws.q[c], &ws.survival[c])
    }

    /// The multipliers of the population q by sex and attained age.
    pub fn level(&self) -> &LevelAdjustment {
        &self.level
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
    /// Draw order (a replay of one policy follows it): one 32-bit word of `rng` per life,
    /// in the order `next_u32` gives them (drawn by `fill_bytes` for up to
    /// [`WORDS_AT_ONCE`] lives at a time: the same words), lives in the prepared order — sorted by (cohort, shape), each
    /// numbered in order of first appearance in the book, policies in book order within a
    /// run, a policy of weight w as round(w) (at least one) consecutive lives. The step of
    /// one life is `deaths::simulate_lives`, and nowhere else.
    fn simulate<R: Rng, P: PolicySink>(
        &self,
        ws: &mut Workspace,
        rng: &mut R,
        out: &mut ScenarioValue,
        policies: &mut P,
    ) {
        let n_shapes = self.schedules.len();
        ws.searches
            .resize_with(self.cohorts.len(), DeathSearch::default);
        for (search, s) in ws.searches.iter_mut().zip(&ws.survival) {
            search.rebuild(s);
        }
        let stride = self.years + 1;
        if ws.by_year.len() != n_shapes * stride || !ws.by_year_zero {
            ws.by_year.clear();
            ws.by_year.resize(n_shapes * stride, DeathYear::default());
        }
        ws.by_year_zero = false;
        ws.words.resize(WORDS_AT_ONCE, [0; 4]);
        let words = ws.words.as_mut_slice();
        // Lives drawn..drawn_to have their words in `words`.
        let (mut drawn, mut drawn_to) = (0, 0);
        let mut pv = 0.0;
        for run in &self.runs {
            let sched = &self.schedules[run.shape as usize];
            let (search, payouts) = (
                &ws.searches[run.cohort as usize],
                &self.payouts[run.shape as usize],
            );
            let row = run.shape as usize * stride;
            let by_year = &mut ws.by_year[row..row + stride];
            let lives = run.start as usize..run.end as usize;
            let mut run_pv = 0.0;
            let mut life = lives.start;
            while life < lives.end {
                if life == drawn_to {
                    let n = WORDS_AT_ONCE.min(self.amounts.len() - life);
                    rng.fill_bytes(words[..n].as_flattened_mut());
                    (drawn, drawn_to) = (life, life + n);
                }
                let end = lives.end.min(drawn_to);
                run_pv = simulate_lives(
                    search,
                    payouts,
                    by_year,
                    &words[life - drawn..end - drawn],
                    &self.amounts[life..end],
                    run_pv,
                    |i, life_pv| policies.life(life + i, life_pv),
                );
                life = end;
            }
            policies.certain(lives, sched.certain_pv);
            pv += run_pv + run.amount * sched.certain_pv;
        }
        out.pv_simulated = pv;
        // Year k pays: guaranteed cash to all, full contingent cash to lives dying after
        // year k, and the part-year cash of lives dying in year k.
        out.cash_simulated.clear();
        out.cash_simulated.resize(self.years, 0.0);
        // One pass per shape and year (about 170 × 70 a scenario in the bench book), so
        // written as zipped slices: no bounds check inside.
        for (sh, sched) in self.schedules.iter().enumerate() {
            let by_year = &mut ws.by_year[sh * stride..(sh + 1) * stride];
            let mut alive_after: f64 = by_year.iter().map(|y| y.dying).sum();
            let amount = self.shape_amount[sh];
            for (((cash, year), &certain), &level) in out
                .cash_simulated
                .iter_mut()
                .zip(by_year)
                .zip(&sched.certain_cash)
                .zip(&sched.cash_level)
            {
                let year = std::mem::take(year);
                alive_after -= year.dying;
                *cash += amount * certain + alive_after.max(0.0) * level + year.partial;
            }
        }
        // The simulation writes years below `self.years` only, all taken above.
        ws.by_year_zero = true;
    }
}
