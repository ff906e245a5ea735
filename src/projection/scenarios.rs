//! Scenario generation: any fitted model's indices projected by the joint random walk and
//! mapped to rates at every age up to `max_age`.
//!
//! Scenario numbering: scenario 0 is always the central path (drift only, no innovations,
//! no parameter uncertainty) — the best-estimate basis — and, with noise on, scenarios
//! 1..=N are the stochastic ones. A scenario is a pure function of (seed, scenario), so the
//! valuation can regenerate any one of them on demand instead of reading files.

use std::ops::Range;
use std::sync::Arc;

use nalgebra::DVector;
use rand::RngExt;
use rand_distr::StandardNormal;
use rayon::prelude::*;

use crate::data::config::{ProjectionConfig, UncertaintyMethod};
use crate::data::{Sex, Span};
use crate::error::{Error, Result};
use crate::models::FittedModel;
use crate::projection::cells::CellPlan;
use crate::projection::cohort_paths::{CohortDraw, CohortPath};
use crate::projection::joint::JointBasis;
use crate::projection::streams::{Purpose, stream};
use crate::projection::surface::RateSurface;
use crate::projection::uncertainty::{BootstrapSource, Uncertainty, bootstrap_basis, drawn_drift};

/// How scenarios are drawn.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Settings {
    /// Seed of every stream.
    pub seed: u64,
    /// Years projected after the last fitted year.
    pub horizon: usize,
    /// `false`: only the central path exists (scenario 0).
    pub noise: bool,
    /// Parameter uncertainty of the stochastic scenarios.
    pub uncertainty: Uncertainty,
}

impl Settings {
    /// The settings of the `[projection]` table.
    pub fn from_config(config: &ProjectionConfig) -> Settings {
        let uncertainty = match config.parameter_uncertainty.method() {
            UncertaintyMethod::None => Uncertainty::None,
            UncertaintyMethod::Drift => Uncertainty::Drift,
            UncertaintyMethod::Bootstrap => Uncertainty::Bootstrap {
                samples: config.bootstrap_samples,
            },
        };
        Settings {
            seed: config.seed,
            horizon: config.horizon,
            noise: config.noise,
            uncertainty,
        }
    }
}

/// The scenario numbers of a run: `0..=scenarios` with noise, only `0` without.
pub fn scenario_ids(scenarios: usize, noise: bool) -> Range<u64> {
    if noise { 0..scenarios as u64 + 1 } else { 0..1 }
}

/// Generates scenarios from fitted models.
pub struct Projector {
    central: Arc<JointBasis>,
    settings: Settings,
    source: Option<BootstrapSource>,
    replicates: Vec<Option<Arc<JointBasis>>>,
}

impl std::fmt::Debug for Projector {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Projector")
            .field("central", &self.central)
            .field("settings", &self.settings)
            .finish_non_exhaustive()
    }
}

/// One scenario's projected indices and rates, reused from scenario to scenario.
#[derive(Debug, Clone)]
pub struct ScenarioPaths {
    scenario: u64,
    sexes: Vec<Sex>,
    years: Span,
    ages: Span,
    offsets: Vec<usize>,
    dims: usize,
    factors: Vec<f64>,
    rates: Vec<f64>,
    cohorts: Vec<Option<CohortPath>>,
    /// The cells [`Projector::generate`] computes; the others hold NaN.
    cells: CellPlan,
}

impl ScenarioPaths {
    /// The scenario held.
    pub fn scenario(&self) -> u64 {
        self.scenario
    }

    /// The sexes, in order.
    pub fn sexes(&self) -> &[Sex] {
        &self.sexes
    }

    /// Projected years: the year after the last fitted year to the end of the horizon.
    pub fn years(&self) -> Span {
        self.years
    }

    /// Ages of the rates: the first fitted age to `max_age`.
    pub fn ages(&self) -> Span {
        self.ages
    }

    /// Computes only the cells of `plan` from the next scenario on (a new plan sets every
    /// rate to NaN until it is computed). A buffer starts with the full grid.
    pub fn set_cells(&mut self, plan: &CellPlan) {
        if self.cells != *plan {
            self.cells.clone_from(plan);
            self.rates.fill(f64::NAN);
        }
    }

    /// The cells computed.
    pub fn cells(&self) -> &CellPlan {
        &self.cells
    }

    /// Rates q of the sex at `sex_index`, years × ages in row-major order (NaN outside
    /// the buffer's [`CellPlan`]).
    pub fn rates(&self, sex_index: usize) -> &[f64] {
        let block = self.years.len() * self.ages.len();
        &self.rates[sex_index * block..(sex_index + 1) * block]
    }

    /// Rates q of `sex`, years × ages in row-major order, if the sex is projected.
    pub fn rates_for(&self, sex: Sex) -> Option<&[f64]> {
        let i = self.sexes.iter().position(|&s| s == sex)?;
        Some(self.rates(i))
    }

    /// Rates q of the sex at `sex_index` in projected `year`, by age.
    pub fn year_rates(&self, sex_index: usize, year: i32) -> Option<&[f64]> {
        let j = self.years.index(year)?;
        let n = self.ages.len();
        Some(&self.rates(sex_index)[j * n..(j + 1) * n])
    }

    /// q of the sex at `sex_index` at `age` in `year`, if both are projected.
    pub fn q(&self, sex_index: usize, year: i32, age: i32) -> Option<f64> {
        Some(self.year_rates(sex_index, year)?[self.ages.index(age)?])
    }

    /// Rates of the sex at `sex_index` as the valuation reads them.
    pub fn surface(&self, sex_index: usize) -> RateSurface<'_> {
        RateSurface {
            first_year: self.years.first,
            first_age: self.ages.first,
            ages: self.ages.len(),
            q: self.rates(sex_index),
        }
    }

    /// The rate surfaces by sex slot (F, M), as the valuation reads them.
    pub fn surfaces(&self) -> [Option<RateSurface<'_>>; 2] {
        let mut out = [None, None];
        for (i, &sex) in self.sexes().iter().enumerate() {
            out[crate::data::sex::sex_index(sex)] = Some(self.surface(i));
        }
        out
    }

    /// Projected indices of the sex at `sex_index` in projected year number `h` (1-based).
    pub fn factors(&self, sex_index: usize, h: usize) -> &[f64] {
        let row = &self.factors[(h - 1) * self.dims..h * self.dims];
        &row[self.offsets[sex_index]..self.offsets[sex_index + 1]]
    }

    /// The drawn cohort index of the sex at `sex_index` (cohort models only).
    pub fn cohort(&self, sex_index: usize) -> Option<&CohortPath> {
        self.cohorts.get(sex_index)?.as_ref()
    }

    /// The whole stacked index vector in projected year number `h` (1-based).
    pub fn stacked(&self, h: usize) -> &[f64] {
        &self.factors[(h - 1) * self.dims..h * self.dims]
    }
}

impl Projector {
    /// A projector over `fits` (one fitted model per sex); `source` is needed only for the
    /// bootstrap.
    pub fn new(
        fits: Vec<(Sex, Box<dyn FittedModel>)>,
        settings: Settings,
        source: Option<BootstrapSource>,
    ) -> Result<Projector> {
        let fits = fits
            .into_iter()
            .map(|(s, m)| (s, Arc::<dyn FittedModel>::from(m)))
            .collect();
        Projector::from_basis(Arc::new(JointBasis::new(fits)?), settings, source)
    }

    /// A projector over an already stacked basis.
    pub fn from_basis(
        central: Arc<JointBasis>,
        settings: Settings,
        source: Option<BootstrapSource>,
    ) -> Result<Projector> {
        if settings.horizon == 0 {
            return Err(Error::model(
                "projection",
                "the horizon must be at least one year",
            ));
        }
        let replicates = match settings.uncertainty {
            Uncertainty::Bootstrap { samples } if settings.noise => {
                if samples == 0 {
                    return Err(Error::model("bootstrap", "needs at least one replicate"));
                }
                if source.is_none() {
                    return Err(Error::model(
                        "bootstrap",
                        "needs the model specifications and experience to refit",
                    ));
                }
                vec![None; samples]
            }
            _ => Vec::new(),
        };
        Ok(Projector {
            central,
            settings,
            source,
            replicates,
        })
    }

    /// The settings.
    pub fn settings(&self) -> &Settings {
        &self.settings
    }

    /// The central basis (the fits to the observed experience).
    pub fn basis(&self) -> &JointBasis {
        &self.central
    }

    /// Projected years.
    pub fn years(&self) -> Span {
        let last = self.central.years().last;
        Span {
            first: last + 1,
            last: last + self.settings.horizon as i32,
        }
    }

    /// Ages of the rates.
    pub fn ages(&self) -> Span {
        self.central.rate_ages()
    }

    /// An empty buffer shaped for this projector's scenarios.
    pub fn buffer(&self) -> ScenarioPaths {
        let b = &self.central;
        let n = b.sexes().len();
        let mut offsets: Vec<usize> = (0..n).map(|i| b.range(i).start).collect();
        offsets.push(b.dims());
        let (years, ages) = (self.years(), self.ages());
        ScenarioPaths {
            scenario: 0,
            sexes: b.sexes().to_vec(),
            years,
            ages,
            offsets,
            dims: b.dims(),
            factors: vec![0.0; years.len() * b.dims()],
            rates: vec![0.0; n * years.len() * ages.len()],
            cohorts: b.cohorts().paths(self.settings.horizon),
            cells: CellPlan::full(b.sexes(), years, ages),
        }
    }

    /// A plan of no cells on this projector's grid, to add readers' cells to.
    pub fn no_cells(&self) -> CellPlan {
        CellPlan::empty(self.central.sexes(), self.years(), self.ages())
    }

    /// Builds, in parallel, the bootstrap replicates that `scenarios` use and that are not
    /// built yet. Needed before [`Projector::generate`] under the bootstrap; a no-op otherwise.
    pub fn prepare(&mut self, scenarios: Range<u64>) -> Result<()> {
        let b = self.replicates.len() as u64;
        if b == 0 {
            return Ok(());
        }
        let mut wanted: Vec<u64> = if scenarios.end - scenarios.start >= b {
            (0..b).collect()
        } else {
            scenarios
                .clone()
                .filter(|&s| s != 0)
                .map(|s| s % b)
                .collect()
        };
        wanted.sort_unstable();
        wanted.dedup();
        wanted.retain(|&r| self.replicates[r as usize].is_none());
        let (central, seed) = (&self.central, self.settings.seed);
        let Some(source) = self.source.as_ref() else {
            return Err(Error::model("bootstrap", "needs the experience to refit"));
        };
        let built: Vec<(u64, JointBasis)> = wanted
            .par_iter()
            .map(|&r| bootstrap_basis(central, source, seed, r).map(|basis| (r, basis)))
            .collect::<Result<_>>()?;
        for (r, basis) in built {
            self.replicates[r as usize] = Some(Arc::new(basis));
        }
        Ok(())
    }

    /// The basis scenario `scenario` is drawn from: the central fit, or under the bootstrap
    /// replicate `scenario mod B` (scenario 0 always uses the central fit).
    pub fn basis_of(&self, scenario: u64) -> Result<&JointBasis> {
        if scenario == 0 || self.replicates.is_empty() {
            return Ok(&self.central);
        }
        let r = scenario % self.replicates.len() as u64;
        self.replicates[r as usize].as_deref().ok_or_else(|| {
            Error::model(
                "bootstrap",
                format!("replicate {r} for scenario {scenario} was not prepared"),
            )
        })
    }

    /// Fills `out` with scenario `scenario` (the rates of its [`CellPlan`]); a rate outside
    /// (0, 1) below `max_age` (or outside (0, 1] at `max_age`, where the closure sets it to
    /// 1), or a non-finite one, is an error naming the scenario, sex, year and age.
    pub fn generate(&self, scenario: u64, out: &mut ScenarioPaths) -> Result<()> {
        self.generate_years(scenario, out, usize::MAX)
    }

    /// Like [`Projector::generate`], but the rates of only the first `years` projected
    /// years (every index is still drawn, so those rows equal `generate`'s); later rows keep
    /// whatever `out` held. For readers of the first years alone, such as the one-year
    /// re-calibration.
    pub fn generate_years(
        &self,
        scenario: u64,
        out: &mut ScenarioPaths,
        years: usize,
    ) -> Result<()> {
        let s = &self.settings;
        let central_path = scenario == 0;
        if !s.noise && !central_path {
            return Err(Error::model(
                "projection",
                format!("without noise only scenario 0 exists, asked for scenario {scenario}"),
            ));
        }
        let basis = self.basis_of(scenario)?;
        out.scenario = scenario;
        let dims = basis.dims();
        if dims != out.dims {
            return Err(Error::model(
                "projection",
                "scenario buffer has the wrong shape",
            ));
        }
        let last = basis.last();
        if central_path {
            // Exactly k_T + h·d, not a running sum, so the best estimate carries no rounding drift.
            let d = &basis.walk().drift;
            for h in 1..=s.horizon {
                let row = &mut out.factors[(h - 1) * dims..h * dims];
                for i in 0..dims {
                    row[i] = last[i] + h as f64 * d[i];
                }
            }
        } else {
            let drift = match s.uncertainty {
                Uncertainty::Drift => drawn_drift(basis, s.seed, scenario),
                _ => basis.walk().drift.clone(),
            };
            let l = basis.cholesky();
            let mut rng = stream(s.seed, scenario, Purpose::Innovations);
            let mut k = last.clone();
            let mut z = DVector::zeros(dims);
            // `l * z` into a buffer kept across years: the same product as the operator,
            // without two heap allocations a projected year.
            let mut shock = DVector::zeros(dims);
            for h in 1..=s.horizon {
                z.iter_mut().for_each(|v| *v = rng.sample(StandardNormal));
                l.mul_to(&z, &mut shock);
                for i in 0..dims {
                    k[i] += drift[i] + shock[i];
                }
                out.factors[(h - 1) * dims..h * dims].copy_from_slice(k.as_slice());
            }
        }
        // The cohort index comes from streams of its own, so period paths are unchanged.
        let how = if central_path {
            CohortDraw::Central
        } else {
            CohortDraw::Noise {
                drift: s.uncertainty == Uncertainty::Drift,
            }
        };
        basis
            .cohorts()
            .draw(s.seed, scenario, how, &mut out.cohorts)?;
        self.fill_rates(basis, out, years)
    }

    fn fill_rates(&self, basis: &JointBasis, out: &mut ScenarioPaths, years: usize) -> Result<()> {
        let (n_years, n_ages) = (out.years.len(), out.ages.len());
        let dims = out.dims;
        for (i, &sex) in out.sexes.iter().enumerate() {
            let model = basis.model(i);
            let range = basis.range(i);
            let block = &mut out.rates[i * n_years * n_ages..(i + 1) * n_years * n_ages];
            let cohort = out.cohorts[i].as_ref();
            for (h, row) in block.chunks_exact_mut(n_ages).take(years).enumerate() {
                let cells = out.cells.cells(i, h);
                if cells.is_empty() {
                    continue;
                }
                let k = &out.factors[h * dims + range.start..h * dims + range.end];
                // Age x in year T + h takes γ of the cohort born in T + h − x.
                let gamma = cohort.map_or(&[][..], |c| c.by_age(h + 1));
                model.cohort_rates_in(k, gamma, cells.clone(), row);
                if let Some(a) = first_bad_rate_in(row, cells) {
                    return Err(Error::Numerical(format!(
                        "scenario {}, sex {sex}, year {}, age {}: projected rate q = {} is not in \
                         (0, 1) (indices {:?}); the projected index has run so far that the rate \
                         rounds to 0 or 1 or overflows: shorten projection.horizon or check the \
                         fit (model.kind, data.years)",
                        out.scenario,
                        out.years.first + h as i32,
                        out.ages.first + a as i32,
                        row[a],
                        k
                    )));
                }
            }
        }
        Ok(())
    }
}

/// The index of the first rate of one year's row (ages up to `max_age`) that no life table
/// can hold: q must lie in (0, 1) below `max_age`, where q = 1 can only come from an index
/// driven so far that exp() or the logistic function saturated (a rate of 1 kills every
/// life at once), and in (0, 1] at `max_age` itself.
pub fn first_bad_rate(row: &[f64]) -> Option<usize> {
    first_bad_rate_in(row, 0..row.len())
}

/// As [`first_bad_rate`] among the cells `cells` of the row (an index into the row).
pub fn first_bad_rate_in(row: &[f64], cells: Range<usize>) -> Option<usize> {
    let last = row.len().checked_sub(1)?;
    let start = cells.start;
    row[cells]
        .iter()
        .enumerate()
        .position(|(i, &q)| {
            let below_one = if start + i == last { q <= 1.0 } else { q < 1.0 };
            !(q > 0.0 && below_one)
        })
        .map(|i| start + i)
}

#[cfg(test)]
mod guard_tests {
    use super::first_bad_rate;

    #[test]
    fn rates_of_zero_or_one_below_the_top_age_are_refused() {
        assert_eq!(first_bad_rate(&[0.01, 0.5, 1.0]), None);
        assert_eq!(first_bad_rate(&[0.01, 1.0, 1.0]), Some(1));
        assert_eq!(first_bad_rate(&[0.0, 0.5, 1.0]), Some(0));
        assert_eq!(first_bad_rate(&[0.01, f64::NAN, 1.0]), Some(1));
        assert_eq!(first_bad_rate(&[0.01, 0.5, f64::INFINITY]), Some(2));
        assert_eq!(first_bad_rate(&[0.01, 0.5, 1.5]), Some(2));
        assert_eq!(first_bad_rate(&[]), None);
    }
}
