//! The cohort index γ_c drawn per scenario, for models with a cohort effect γ_{t−x}.
//!
//! Holding each age's γ at its value in the last fitted year would give every future
//! cohort the youngest fitted one's effect and no uncertainty at all. Instead, cohorts
//! estimated from the data keep their fitted γ in every scenario, and the cohorts born
//! after the last estimated one — the grid's young corner, left out of the fit for having
//! fewer than `model.min_cohort_cells` cells, and each cohort first seen in a projected
//! year — follow the index's fitted time series, with innovations from the scenario's own
//! stream ([`Purpose::CohortInnovations`]) so that a scenario's period draws are those a
//! period-only model would make. Scenario 0 takes the series' conditional mean (no
//! shocks). The grid's old corner keeps the oldest estimate, as in the fit.
//!
//! Under drift uncertainty the series' intercept (and trend) is redrawn per scenario from
//! its own stream ([`Purpose::CohortDrift`]); under the bootstrap each replicate brings its
//! own refitted γ and series. With two sexes whose series cover the same cohorts, their
//! innovations and drawn terms are correlated as their fitted residuals are, for the
//! reason the period indices are stacked ([`crate::projection::joint`]).

use std::sync::Arc;

use rand::RngExt;
use rand_chacha::ChaCha8Rng;
use rand_distr::StandardNormal;

use crate::error::{Error, Result};
use crate::models::{CohortEffects, FittedModel};
use crate::projection::streams::{Purpose, stream};

/// How a scenario's cohort index is drawn.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CohortDraw {
    /// The conditional mean: no innovations, estimated terms.
    Central,
    /// Innovations from the scenario's stream; `drift` also redraws the series' terms.
    Noise {
        /// Draw the intercept (and trend) from its estimation distribution.
        drift: bool,
    },
}

/// The cohort effects of a projection basis, one entry per sex (`None` for a period-only
/// model).
#[derive(Debug, Clone)]
pub struct CohortBasis {
    plans: Vec<Option<CohortPlan>>,
    /// The two correlated sexes' positions and their innovation correlation.
    pair: Option<(usize, usize, f64)>,
}

#[derive(Debug, Clone)]
struct CohortPlan {
    effects: CohortEffects,
    /// Position in `effects.values` of the first drawn cohort (after the last estimated).
    first_drawn: usize,
    /// Fitted ages.
    ages: usize,
}

/// One sex's cohort index in one scenario, reused from scenario to scenario.
#[derive(Debug, Clone, PartialEq)]
pub struct CohortPath {
    first_cohort: i32,
    drawn: Vec<f64>,
    /// γ of every cohort from the youngest projected to the oldest on the grid, so that
    /// one projected year's ages read a contiguous slice.
    reversed: Vec<f64>,
    ages: usize,
    horizon: usize,
}

impl CohortPath {
    /// Birth year of the first drawn cohort, `gamma()[0]`.
    pub fn first_cohort(&self) -> i32 {
        self.first_cohort
    }

    /// The drawn γ, one per birth year from [`CohortPath::first_cohort`] to the youngest
    /// cohort of the projection (first projected age in the last projected year).
    pub fn gamma(&self) -> &[f64] {
        &self.drawn
    }

    /// γ_{t−x} at each fitted age x (from the first) in projected year number `h` (1-based).
    pub fn by_age(&self, h: usize) -> &[f64] {
        let start = self.horizon - h;
        &self.reversed[start..start + self.ages]
    }
}

impl CohortBasis {
    /// The cohort effects of `models` (one per sex, in stacking order).
    pub fn new(models: &[Arc<dyn FittedModel>]) -> Result<CohortBasis> {
        let mut plans = Vec::with_capacity(models.len());
        for model in models {
            plans.push(match model.cohort_effects() {
                Some(effects) => Some(plan(model.as_ref(), effects)?),
                None => None,
            });
        }
        let with: Vec<usize> = (0..plans.len()).filter(|&i| plans[i].is_some()).collect();
        let pair = match with.as_slice() {
            [a, b] => {
                let (pa, pb) = (plans[*a].as_ref(), plans[*b].as_ref());
                pa.zip(pb)
                    .and_then(|(pa, pb)| correlation(pa, pb))
                    .map(|rho| (*a, *b, rho))
            }
            _ => None,
        };
        Ok(CohortBasis { plans, pair })
    }

    /// Whether any sex has a cohort effect.
    pub fn any(&self) -> bool {
        self.plans.iter().any(Option::is_some)
    }

    /// Correlation of the two sexes' cohort innovations (0 unless both have aligned series).
    pub fn correlation(&self) -> f64 {
        self.pair.map_or(0.0, |(_, _, rho)| rho)
    }

    /// Empty per-sex paths shaped for `horizon` projected years.
    pub fn paths(&self, horizon: usize) -> Vec<Option<CohortPath>> {
        self.plans
            .iter()
            .map(|p| {
                p.as_ref().map(|p| {
                    let count = p.effects.values.len();
                    CohortPath {
                        first_cohort: p.effects.first_cohort + p.first_drawn as i32,
                        drawn: vec![0.0; count - p.first_drawn + horizon],
                        reversed: vec![0.0; count + horizon],
                        ages: p.ages,
                        horizon,
                    }
                })
            })
            .collect()
    }

    /// Fills `paths` (from [`CohortBasis::paths`]) with scenario `scenario`'s cohort index.
    pub fn draw(
        &self,
        seed: u64,
        scenario: u64,
        how: CohortDraw,
        paths: &mut [Option<CohortPath>],
    ) -> Result<()> {
        if paths.len() != self.plans.len() {
            return Err(shape_error());
        }
        for (plan, path) in self.plans.iter().zip(paths.iter()) {
            let fits = match (plan, path) {
                (Some(p), Some(c)) => {
                    c.reversed.len() == p.effects.values.len() + c.horizon
                        && c.drawn.len() == c.reversed.len() - p.first_drawn
                        && c.ages == p.ages
                }
                (None, None) => true,
                _ => false,
            };
            if !fits {
                return Err(shape_error());
            }
        }
        // 1. Standard normal innovations (zero on the central path), sexes in order.
        let mut innovations = match how {
            CohortDraw::Central => None,
            CohortDraw::Noise { .. } => Some(stream(seed, scenario, Purpose::CohortInnovations)),
        };
        for path in paths.iter_mut().flatten() {
            match innovations.as_mut() {
                Some(rng) => fill_normal(rng, &mut path.drawn),
                None => path.drawn.fill(0.0),
            }
        }
        // 2. The second sex's innovations correlated with the first's.
        if let (Some((a, b, rho)), Some(_)) = (self.pair, innovations.as_ref()) {
            let (head, tail) = paths.split_at_mut(b);
            if let (Some(first), Some(second)) = (head[a].as_ref(), tail[0].as_mut()) {
                let rest = (1.0 - rho * rho).max(0.0).sqrt();
                for (z2, z1) in second.drawn.iter_mut().zip(&first.drawn) {
                    *z2 = rho * z1 + rest * *z2;
                }
            }
        }
        // 3. The series' terms, then the recursion in place, then the reversed lookup.
        let mut drift = match how {
            CohortDraw::Noise { drift: true } => Some(stream(seed, scenario, Purpose::CohortDrift)),
            _ => None,
        };
        let mut first_z: Option<[f64; 2]> = None;
        for (i, (plan, path)) in self.plans.iter().zip(paths.iter_mut()).enumerate() {
            let (Some(plan), Some(path)) = (plan, path.as_mut()) else {
                continue;
            };
            let series = &plan.effects.series;
            let terms = match drift.as_mut() {
                Some(rng) => {
                    let mut z = [rng.sample(StandardNormal), rng.sample(StandardNormal)];
                    if let (Some((_, b, rho)), Some(z1)) = (self.pair, first_z)
                        && b == i
                    {
                        let rest = (1.0 - rho * rho).max(0.0).sqrt();
                        z = [rho * z1[0] + rest * z[0], rho * z1[1] + rest * z[1]];
                    }
                    first_z.get_or_insert(z);
                    series.drawn_terms(z)
                }
                None => series.terms(),
            };
            series.project_into(terms, &mut path.drawn);
            let fixed = &plan.effects.values[..plan.first_drawn];
            let (young, old) = path.reversed.split_at_mut(path.drawn.len());
            young
                .iter_mut()
                .zip(path.drawn.iter().rev())
                .for_each(|(r, g)| *r = *g);
            old.iter_mut()
                .zip(fixed.iter().rev())
                .for_each(|(r, g)| *r = *g);
            if let Some(bad) = path.drawn.iter().position(|g| !g.is_finite()) {
                return Err(Error::Numerical(format!(
                    "scenario {scenario}: the cohort index of the cohort born {} is not finite; \
                     shorten projection.horizon or try model.cohort_series = \"ar1-trend\"",
                    path.first_cohort + bad as i32
                )));
            }
        }
        Ok(())
    }
}

fn fill_normal(rng: &mut ChaCha8Rng, out: &mut [f64]) {
    out.iter_mut().for_each(|v| *v = rng.sample(StandardNormal));
}

fn shape_error() -> Error {
    Error::model(
        "projection",
        "the cohort buffer does not match the basis's cohort grid",
    )
}

/// Checks that `effects` span `model`'s age × year grid and finds the first drawn cohort.
fn plan(model: &dyn FittedModel, effects: CohortEffects) -> Result<CohortPlan> {
    let (ages, years) = (model.ages(), model.years());
    let count = ages.len() + years.len() - 1;
    let first_drawn = effects.fitted.iter().rposition(|&f| f).map(|k| k + 1);
    let consistent = effects.values.len() == count
        && effects.fitted.len() == count
        && effects.loading.len() == ages.len()
        && effects.first_cohort == years.first - ages.last
        && first_drawn.is_some_and(|f| f >= effects.series.len());
    match first_drawn {
        Some(first_drawn) if consistent => Ok(CohortPlan {
            effects,
            first_drawn,
            ages: ages.len(),
        }),
        _ => Err(Error::model(
            model.name(),
            format!(
                "sex {}: the cohort effects do not match the fitted {} ages × {} years",
                model.sex(),
                ages.len(),
                years.len()
            ),
        )),
    }
}

/// Correlation of two series' residuals when they were fitted to the same cohorts.
fn correlation(a: &CohortPlan, b: &CohortPlan) -> Option<f64> {
    let aligned = a.effects.first_cohort == b.effects.first_cohort
        && a.effects.fitted == b.effects.fitted
        && a.effects.values.len() == b.effects.values.len()
        && a.effects.series.kind == b.effects.series.kind;
    if !aligned {
        return None;
    }
    let (ra, rb) = (a.effects.series.residuals(), b.effects.series.residuals());
    let (mut sab, mut saa, mut sbb) = (0.0, 0.0, 0.0);
    for (x, y) in ra.iter().zip(&rb) {
        sab += x * y;
        saa += x * x;
        sbb += y * y;
    }
    let rho = sab / (saa * sbb).sqrt();
    rho.is_finite().then(|| rho.clamp(-1.0, 1.0))
}
