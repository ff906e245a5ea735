//! Small fitted models with known rates, for testing the projection engine on its own.
//!
//! The histories are invented: random walks drawn from a fixed stream, with correlated
//! innovations between the sexes.
#![allow(dead_code)]

use nalgebra::DMatrix;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::StandardNormal;
use tailspan::data::config::CohortSeriesKind;
use tailspan::data::{Population, Sex, Span};
use tailspan::life::closure::KannistoClosure;
use tailspan::models::{CohortEffects, FitBasis, FitDiagnostics, FittedModel, MortalityModel};
use tailspan::series::CohortSeries;

/// The data window of a fake fit, with zero diagnostics and residuals. The fakes close
/// their own rates, so the closure only carries `max_age`.
pub fn basis(sex: Sex, ages: Span, years: Span, max_age: i32) -> FitBasis {
    FitBasis {
        sex,
        ages,
        years,
        closure: KannistoClosure {
            fit_ages: 2,
            max_age,
        },
        diagnostics: FitDiagnostics {
            log_likelihood: 0.0,
            deviance: 0.0,
            parameters: 0,
            observations: 0,
            aic: 0.0,
            bic: 0.0,
            iterations: 0,
        },
        residuals: DMatrix::zeros(ages.len(), years.len()),
    }
}

/// log m(x, t) = a_x + b_x k_t at the fitted ages; above them log m rises by 0.1 a year
/// of age from the top fitted age; q = 1 − exp(−m) and q = 1 at `max_age`.
pub struct FakeLogRate {
    pub basis: FitBasis,
    pub ax: Vec<f64>,
    pub bx: Vec<f64>,
    pub kt: DMatrix<f64>,
}

impl FittedModel for FakeLogRate {
    fn name(&self) -> &'static str {
        "lee-carter"
    }
    fn method(&self) -> &'static str {
        "fixed"
    }
    fn basis(&self) -> &FitBasis {
        &self.basis
    }
    fn factor_names(&self) -> &'static [&'static str] {
        &["k"]
    }
    fn factors(&self) -> &DMatrix<f64> {
        &self.kt
    }
    fn rates(&self, factors: &[f64], out: &mut [f64]) {
        let n = self.basis.ages.len();
        let top = self.ax[n - 1] + self.bx[n - 1] * factors[0];
        for (i, q) in out.iter_mut().enumerate() {
            let log_m = if i < n {
                self.ax[i] + self.bx[i] * factors[0]
            } else {
                top + 0.1 * (i + 1 - n) as f64
            };
            *q = -(-log_m.exp()).exp_m1();
        }
        *out.last_mut().unwrap() = 1.0;
    }
    fn parameters_json(&self) -> serde_json::Value {
        serde_json::Value::Null
    }
}

/// logit q(x, t) = k1_t + (x − x̄) k2_t at every age below `max_age`, q = 1 there.
pub struct FakeCbd {
    pub basis: FitBasis,
    pub kt: DMatrix<f64>,
}

impl FakeCbd {
    pub fn xbar(&self) -> f64 {
        0.5 * (self.basis.ages.first + self.basis.ages.last) as f64
    }
}

impl FittedModel for FakeCbd {
    fn name(&self) -> &'static str {
        "cbd"
    }
    fn method(&self) -> &'static str {
        "fixed"
    }
    fn basis(&self) -> &FitBasis {
        &self.basis
    }
    fn factor_names(&self) -> &'static [&'static str] {
        &["k1", "k2"]
    }
    fn factors(&self) -> &DMatrix<f64> {
        &self.kt
    }
    fn rates(&self, factors: &[f64], out: &mut [f64]) {
        let xbar = self.xbar();
        for (i, q) in out.iter_mut().enumerate() {
            let x = (self.basis.ages.first + i as i32) as f64;
            let eta = factors[0] + (x - xbar) * factors[1];
            *q = 1.0 / (1.0 + (-eta).exp());
        }
        *out.last_mut().unwrap() = 1.0;
    }
    fn parameters_json(&self) -> serde_json::Value {
        serde_json::Value::Null
    }
}

/// Invented index histories for two sexes: `dims` indices each, random walks with drift
/// `drift` and innovations of scale `scale`, female and male innovations correlated `rho`.
pub fn histories(
    seed: u64,
    years: usize,
    start: &[f64],
    drift: &[f64],
    scale: &[f64],
    rho: f64,
) -> [DMatrix<f64>; 2] {
    let dims = start.len();
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut f = DMatrix::zeros(dims, years);
    let mut m = DMatrix::zeros(dims, years);
    for i in 0..dims {
        f[(i, 0)] = start[i];
        // Male mortality starts higher in level, with the same age slope.
        m[(i, 0)] = start[i] + if i == 0 { 0.3 } else { 0.0 };
    }
    for t in 1..years {
        for i in 0..dims {
            let z1: f64 = rng.sample(StandardNormal);
            let z2: f64 = rng.sample(StandardNormal);
            f[(i, t)] = f[(i, t - 1)] + drift[i] + scale[i] * z1;
            m[(i, t)] = m[(i, t - 1)]
                + drift[i] * 0.9
                + scale[i] * (rho * z1 + (1.0 - rho * rho).sqrt() * z2);
        }
    }
    [f, m]
}

pub const YEARS: Span = Span {
    first: 1985,
    last: 2024,
};
pub const AGES: Span = Span {
    first: 55,
    last: 100,
};

/// A two-sex Lee–Carter-like pair of fitted models.
pub fn log_rate_pair(max_age: i32) -> Vec<(Sex, Box<dyn FittedModel>)> {
    let [kf, km] = histories(11, YEARS.len(), &[5.0], &[-1.2], &[0.9], 0.8);
    let n = AGES.len();
    let make = |sex: Sex, k: DMatrix<f64>, shift: f64| -> Box<dyn FittedModel> {
        Box::new(FakeLogRate {
            basis: basis(sex, AGES, YEARS, max_age),
            ax: (0..n).map(|i| -5.0 + shift + 0.09 * i as f64).collect(),
            bx: vec![1.0 / n as f64; n],
            kt: k,
        })
    };
    vec![
        (Sex::F, make(Sex::F, kf, -0.3)),
        (Sex::M, make(Sex::M, km, 0.0)),
    ]
}

/// A two-sex CBD-like pair of fitted models.
pub fn cbd_pair(ages: Span, max_age: i32) -> Vec<(Sex, Box<dyn FittedModel>)> {
    let [kf, km] = histories(
        12,
        YEARS.len(),
        &[-3.6, 0.095],
        &[-0.02, 0.0006],
        &[0.04, 0.0015],
        0.7,
    );
    let make = |sex: Sex, k: DMatrix<f64>| -> Box<dyn FittedModel> {
        Box::new(FakeCbd {
            basis: basis(sex, ages, YEARS, max_age),
            kt: k,
        })
    };
    vec![(Sex::F, make(Sex::F, kf)), (Sex::M, make(Sex::M, km))]
}

/// Fits [`FakeCbd`] year by year: least squares of the empirical logit of D / E0 on x − x̄.
pub struct FakeCbdSpec {
    pub max_age: i32,
}

impl MortalityModel for FakeCbdSpec {
    fn fit(&self, population: &Population) -> tailspan::Result<Box<dyn FittedModel>> {
        let ages = population.ages;
        let xbar = 0.5 * (ages.first + ages.last) as f64;
        let e0 = population.initial_exposure();
        let mut kt = DMatrix::zeros(2, population.years.len());
        for t in 0..population.years.len() {
            let (mut sy, mut sxy, mut sxx) = (0.0, 0.0, 0.0);
            for (i, age) in ages.iter().enumerate() {
                let q = (population.deaths[(i, t)] + 0.5) / (e0[(i, t)] + 1.0);
                let y = (q / (1.0 - q)).ln();
                let x = age as f64 - xbar;
                sy += y;
                sxy += x * y;
                sxx += x * x;
            }
            kt[(0, t)] = sy / ages.len() as f64;
            kt[(1, t)] = sxy / sxx;
        }
        Ok(Box::new(FakeCbd {
            basis: basis(population.sex, ages, population.years, self.max_age),
            kt,
        }))
    }
}

/// Invented experience whose deaths are the expected deaths of `model` on exposures of
/// `exposure` lives per cell, rounded.
pub fn experience_of(model: &dyn FittedModel, sex: Sex, exposure: f64) -> Population {
    let (ages, years) = (model.ages(), model.years());
    let mut q = vec![0.0; (model.max_age() - ages.first + 1) as usize];
    let mut deaths = DMatrix::zeros(ages.len(), years.len());
    for t in 0..years.len() {
        let k: Vec<f64> = model.factors().column(t).iter().copied().collect();
        model.rates(&k, &mut q);
        for i in 0..ages.len() {
            deaths[(i, t)] = (exposure * -(-q[i]).ln_1p()).round();
        }
    }
    Population::new(
        sex,
        ages,
        years,
        deaths,
        DMatrix::from_element(ages.len(), years.len(), exposure),
    )
    .unwrap()
}

/// log m(x, t) = a_x + k_t + γ_{t−x} at the fitted ages; above them log m rises by 0.1 a
/// year of age from the top fitted age; q = 1 − exp(−m) and q = 1 at `max_age`.
pub struct FakeCohort {
    pub basis: FitBasis,
    pub ax: Vec<f64>,
    pub kt: DMatrix<f64>,
    pub effects: CohortEffects,
    pub frozen: Vec<f64>,
}

impl FittedModel for FakeCohort {
    fn name(&self) -> &'static str {
        "apc"
    }
    fn method(&self) -> &'static str {
        "fixed"
    }
    fn basis(&self) -> &FitBasis {
        &self.basis
    }
    fn factor_names(&self) -> &'static [&'static str] {
        &["k"]
    }
    fn factors(&self) -> &DMatrix<f64> {
        &self.kt
    }
    fn rates(&self, factors: &[f64], out: &mut [f64]) {
        self.cohort_rates(factors, &self.frozen, out);
    }
    fn cohort_rates(&self, factors: &[f64], gamma_by_age: &[f64], out: &mut [f64]) {
        let n = self.basis.ages.len();
        let top = self.ax[n - 1] + factors[0] + gamma_by_age[n - 1];
        for (i, q) in out.iter_mut().enumerate() {
            let log_m = if i < n {
                self.ax[i] + factors[0] + gamma_by_age[i]
            } else {
                top + 0.1 * (i + 1 - n) as f64
            };
            *q = -(-log_m.exp()).exp_m1();
        }
        *out.last_mut().unwrap() = 1.0;
    }
    fn cohort_effects(&self) -> Option<CohortEffects> {
        Some(self.effects.clone())
    }
    fn parameters_json(&self) -> serde_json::Value {
        serde_json::Value::Null
    }
}

/// Cohorts on the 46 × 40 grid: 85, of which the two at each corner (fewer than three
/// cells) are left out, as `min_cohort_cells = 3` would.
pub const COHORTS: usize = 85;
pub const LEFT_OUT: usize = 2;
pub const ESTIMATED: usize = COHORTS - 2 * LEFT_OUT;

/// Invented estimated cohort indices of two sexes, drawn from `kind` with correlated
/// innovations.
pub fn invented_gamma(kind: CohortSeriesKind) -> [Vec<f64>; 2] {
    let mut rng = ChaCha8Rng::seed_from_u64(41);
    let rho: f64 = 0.6;
    let mut out = [vec![0.0, 0.004], vec![0.01, 0.012]];
    for i in 2..ESTIMATED {
        let z1: f64 = rng.sample(StandardNormal);
        let z2: f64 = rng.sample(StandardNormal);
        let shocks = [z1, rho * z1 + (1.0 - rho * rho).sqrt() * z2];
        for (g, z) in out.iter_mut().zip(shocks) {
            let next = match kind {
                CohortSeriesKind::Arima110Drift => {
                    g[i - 1] + (-0.002 + 0.5 * (g[i - 1] - g[i - 2])) + 0.01 * z
                }
                CohortSeriesKind::Ar1Trend => {
                    0.01 - 0.0005 * (i + 1) as f64 + 0.7 * g[i - 1] + 0.015 * z
                }
            };
            g.push(next);
        }
    }
    out
}

/// A two-sex pair of cohort models sharing the period histories of `log_rate_pair`.
pub fn cohort_pair(kind: CohortSeriesKind) -> Vec<(Sex, Box<dyn FittedModel>)> {
    let [kf, km] = histories(11, YEARS.len(), &[5.0], &[-1.2], &[0.9], 0.8);
    let n = AGES.len();
    let [gf, gm] = invented_gamma(kind);
    let make = |sex: Sex, k: DMatrix<f64>, gamma: Vec<f64>, shift: f64| -> Box<dyn FittedModel> {
        let series = CohortSeries::fit(kind, &gamma).unwrap();
        let mut values = vec![gamma[0]; LEFT_OUT];
        values.extend_from_slice(&gamma);
        values.extend(series.project(&[0.0; LEFT_OUT]));
        let mut fitted = vec![false; COHORTS];
        fitted[LEFT_OUT..LEFT_OUT + ESTIMATED].fill(true);
        let effects = CohortEffects {
            first_cohort: YEARS.first - AGES.last,
            values,
            fitted,
            loading: vec![1.0; n],
            series,
        };
        Box::new(FakeCohort {
            basis: basis(sex, AGES, YEARS, 120),
            ax: (0..n).map(|i| -5.0 + shift + 0.09 * i as f64).collect(),
            kt: k / n as f64,
            frozen: effects.by_age(YEARS.last, AGES.first),
            effects,
        })
    };
    vec![
        (Sex::F, make(Sex::F, kf, gf, -0.3)),
        (Sex::M, make(Sex::M, km, gm, 0.0)),
    ]
}
