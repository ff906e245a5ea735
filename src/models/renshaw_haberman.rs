//! Renshaw–Haberman (2006): log m(x, t) = a_x + b_x k_t + b0_x γ_{t−x}, by Poisson
//! maximum likelihood.
//!
//! The predictor is bilinear, so the fit cycles one-dimensional Newton updates of a, k,
//! b, γ and b0 in turn, as the Poisson Lee–Carter fit does (Brouhns, Denuit & Vermunt
//! 2002; Renshaw & Haberman 2006, section 3). The likelihood surface is known to have
//! flat ridges and poor local maxima from a naive start, so the start is the Poisson
//! Lee–Carter fit for (a, b, k), and γ is then profiled by Newton sweeps with those held,
//! i.e. γ starts as the cohort pattern the Lee–Carter fit leaves in the data. The cycles
//! converge only linearly, so after a hundred of them the fit finishes
//! with joint Fisher scoring on all parameters under the same constraints.
//!
//! With the free loading the likelihood can keep rising along a degenerate path (b0_x
//! piling onto a few ages while γ grows) when the data hold little cohort signal: on the
//! invented demo population, which has none, no maximum was reached. The fit then stops
//! at `model.max_iterations` with an error that points to the unit loading.
//!
//! Constraints: Σ b_x = 1 and Σ k_t = 0 (as for Lee–Carter); Σ_c γ_c = 0 over the
//! estimated cohorts, the level moving into a_x (a_x → a_x + b0_x γ̄); with the free
//! loading Σ b0_x = 1 (scale, γ → γ Σb0). With the common simplification b0_x = 1
//! (`model.cohort_loading = "unit"`) only the level of γ needs fixing among the exact
//! invariances. A linear trend in γ is not exactly confounded (b_x varies with age) but
//! nearly so, and the unconstrained fit creeps along that ridge: on the 20 × 20 test data
//! the trend of γ was still growing after 1000 cycles. So Σ_c (c − c̄) γ_c = 0 is imposed
//! too, as Hunt & Villegas (2015, from memory) recommend; it is a restriction, not a pure
//! normalisation. Both cohort constraints are kept at every γ update by projecting the
//! Newton step in the metric of its diagonal information.
//! Effective parameters: A + (A − 1) + (T − 1) + (C − 2), plus (A − 1) for a free b0_x.

use nalgebra::DMatrix;

use crate::data::Population;
use crate::data::config::{CohortLoading, CohortSeriesKind};
use crate::error::{Error, Result};
use crate::life::closure::KannistoClosure;
use crate::models::apc::{check_common, check_window};
use crate::models::cohort::{CohortEffects, CohortGrid};
use crate::models::glm::{self, Cell, Family, Linearised};
use crate::models::likelihood::measure_fit;
use crate::models::{FitBasis, FittedModel, LeeCarterMethod, LeeCarterParams, MortalityModel};

const NAME: &str = "renshaw-haberman";

/// Unchecked Renshaw–Haberman settings.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RenshawHabermanParams {
    /// Free age loading b0_x or the unit simplification.
    pub loading: CohortLoading,
    /// Cohorts seen in fewer cells are not estimated.
    pub min_cohort_cells: usize,
    /// Time series of the cohort index.
    pub cohort_series: CohortSeriesKind,
    /// Top fitted ages the Kannisto closure is fitted to.
    pub closure_fit_ages: usize,
    /// Highest age of the closed table.
    pub max_age: i32,
    /// Convergence tolerance on the change in log-likelihood per cycle.
    pub tolerance: f64,
    /// Cycle cap; reaching it is an error.
    pub max_iterations: usize,
}

/// Checked Renshaw–Haberman settings, ready to fit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RenshawHaberman {
    params: RenshawHabermanParams,
}

/// A fitted Renshaw–Haberman model for one population.
#[derive(Debug, Clone)]
pub struct RenshawHabermanFit {
    basis: FitBasis,
    loading: CohortLoading,
    /// Age pattern a_x.
    pub ax: Vec<f64>,
    /// Period sensitivity b_x, Σ b_x = 1.
    pub bx: Vec<f64>,
    /// Period index k_t as a 1 × years matrix, Σ k_t = 0.
    pub kt: DMatrix<f64>,
    /// Cohort loading b0_x (Σ b0_x = 1, or all 1 for the unit loading).
    pub b0x: Vec<f64>,
    /// The cohort grid: which cohorts were estimated.
    pub grid: CohortGrid,
    /// Cohort effects, every cohort of the grid (left-out ones filled).
    pub cohorts: CohortEffects,
    /// γ_{T−x} by fitted age in the last fitted year T, held by [`FittedModel::rates`];
    /// kept so that `rates` allocates nothing.
    last_year_gamma: Vec<f64>,
}

impl RenshawHabermanParams {
    /// Checks the settings that do not depend on the data.
    pub fn check(self) -> Result<RenshawHaberman> {
        check_common(
            NAME,
            self.tolerance,
            self.max_iterations,
            self.closure_fit_ages,
            self.min_cohort_cells,
        )?;
        Ok(RenshawHaberman { params: self })
    }
}

impl MortalityModel for RenshawHaberman {
    fn fit(&self, population: &Population) -> Result<Box<dyn FittedModel>> {
        Ok(Box::new(self.fit_population(population)?))
    }

    fn check_population(&self, population: &Population) -> Result<()> {
        self.grid(population).map(drop)
    }
}

/// The working state of the cycled Newton fit, column-major cells (ages within a year).
struct State<'a> {
    na: usize,
    deaths: &'a [f64],
    exposure: &'a [f64],
    /// Cohort parameter of each cell, `None` when the cell carries no weight.
    cohort: Vec<Option<usize>>,
    a: Vec<f64>,
    b: Vec<f64>,
    k: Vec<f64>,
    b0: Vec<f64>,
    g: Vec<f64>,
    fitted: Vec<f64>,
}

impl State<'_> {
    fn eta(&self, i: usize, j: usize, c: usize) -> f64 {
        self.a[i] + self.b[i] * self.k[j] + self.b0[i] * self.g[c]
    }

    /// Refreshes every fitted death count; returns half the deviance,
    /// Σ [d (ln(d/E) − η) − (d − fitted)], a sum of small non-negative terms that keeps
    /// its precision where the log-likelihood (large terms that cancel) would not.
    fn refresh(&mut self) -> f64 {
        let mut total = 0.0;
        for idx in 0..self.fitted.len() {
            let (i, j) = (idx % self.na, idx / self.na);
            self.fitted[idx] = match self.cohort[idx] {
                Some(c) => {
                    let eta = self.eta(i, j, c);
                    let (d, e) = (self.deaths[idx], self.exposure[idx]);
                    let f = e * eta.exp();
                    let log_term = if d > 0.0 {
                        d * ((d / e).ln() - eta)
                    } else {
                        0.0
                    };
                    total += log_term - (d - f);
                    f
                }
                None => 0.0,
            };
        }
        total
    }

    /// One Newton step for every member of a parameter group: `key` gives the member a
    /// cell belongs to and `slope` the derivative of η in that member.
    fn sweep(
        &self,
        members: usize,
        key: impl Fn(usize, usize, usize) -> usize,
        slope: impl Fn(&Self, usize, usize, usize) -> f64,
    ) -> Vec<f64> {
        let (num, den) = self.score(members, key, slope);
        num.iter()
            .zip(&den)
            .map(|(n, d)| if *d > 0.0 { n / d } else { 0.0 })
            .collect()
    }

    /// Score and diagonal information of a parameter group (see [`State::sweep`]).
    fn score(
        &self,
        members: usize,
        key: impl Fn(usize, usize, usize) -> usize,
        slope: impl Fn(&Self, usize, usize, usize) -> f64,
    ) -> (Vec<f64>, Vec<f64>) {
        let (mut num, mut den) = (vec![0.0; members], vec![0.0; members]);
        for idx in 0..self.fitted.len() {
            if let Some(c) = self.cohort[idx] {
                let (i, j) = (idx % self.na, idx / self.na);
                let z = slope(self, i, j, c);
                let m = key(i, j, c);
                num[m] += (self.deaths[idx] - self.fitted[idx]) * z;
                den[m] += self.fitted[idx] * z * z;
            }
        }
        (num, den)
    }

    /// The weighted cells, with their (age, year, cohort) positions in the terms.
    fn cells(&self) -> Vec<Cell> {
        (0..self.fitted.len())
            .filter_map(|idx| {
                let c = self.cohort[idx]?;
                let (i, j) = (idx % self.na, idx / self.na);
                Some(Cell {
                    deaths: self.deaths[idx],
                    size: self.exposure[idx],
                    terms: [(i, 0.0), (j, 0.0), (c, 0.0), (0, 0.0)],
                })
            })
            .collect()
    }

    /// The Newton step of γ (diagonal information W) projected in the W metric onto
    /// Σ γ_c = 0, Σ (c − c̄) γ_c = 0: δ = s − W⁻¹Cᵀλ with (C W⁻¹ Cᵀ) λ = C (γ + s).
    fn cohort_step(&self, centred: &[f64]) -> Vec<f64> {
        let (num, den) = self.score(self.g.len(), |_, _, c| c, |st, i, _, _| st.b0[i]);
        let s: Vec<f64> = num.iter().zip(&den).map(|(n, d)| n / d).collect();
        let (mut m00, mut m01, mut m11, mut r0, mut r1) = (0.0, 0.0, 0.0, 0.0, 0.0);
        for c in 0..s.len() {
            let (w, z, target) = (1.0 / den[c], centred[c], self.g[c] + s[c]);
            m00 += w;
            m01 += w * z;
            m11 += w * z * z;
            r0 += target;
            r1 += z * target;
        }
        let det = m00 * m11 - m01 * m01;
        let (l0, l1) = ((m11 * r0 - m01 * r1) / det, (m00 * r1 - m01 * r0) / det);
        (0..s.len())
            .map(|c| s[c] - (l0 + l1 * centred[c]) / den[c])
            .collect()
    }
}

impl RenshawHaberman {
    /// The window's checks and its cohort grid: what the fit refuses before iterating.
    fn grid(&self, population: &Population) -> Result<CohortGrid> {
        let p = &self.params;
        check_window(NAME, population, p.closure_fit_ages, p.max_age)?;
        let needed = p.cohort_series.minimum_length().max(3);
        CohortGrid::new(
            NAME,
            population.ages,
            population.years,
            p.min_cohort_cells,
            needed,
        )
    }

    /// Fits one population.
    pub fn fit_population(&self, population: &Population) -> Result<RenshawHabermanFit> {
        let p = &self.params;
        let grid = self.grid(population)?;
        let (ages, years, sex) = (population.ages, population.years, population.sex);
        let (na, nt) = (ages.len(), years.len());
        grid.require_deaths(NAME, population)?;
        let nc = grid.estimated;
        let start = LeeCarterParams {
            method: LeeCarterMethod::Poisson,
            refit_kt: false,
            closure_fit_ages: p.closure_fit_ages,
            max_age: p.max_age,
            tolerance: p.tolerance,
            max_iterations: p.max_iterations,
        }
        .check()?
        .fit_population(population)
        .map_err(|e| {
            Error::model(
                NAME,
                format!("sex {sex}: the Lee–Carter start could not be fitted: {e}"),
            )
        })?;
        let mut cohort = vec![None; na * nt];
        for j in 0..nt {
            for i in 0..na {
                if population.exposure[(i, j)] > 0.0 {
                    cohort[j * na + i] = grid.position[grid.cohort(i, j)];
                }
            }
        }
        let free = p.loading == CohortLoading::Free;
        let mut s = State {
            na,
            deaths: population.deaths.as_slice(),
            exposure: population.exposure.as_slice(),
            cohort,
            a: start.ax.iter().copied().collect(),
            b: start.bx.iter().copied().collect(),
            k: start.kt.iter().copied().collect(),
            b0: vec![1.0; na],
            g: vec![0.0; nc],
            fitted: vec![0.0; na * nt],
        };
        let mut previous = s.refresh();
        let cohort_years = grid.estimated_years();
        let cbar = cohort_years.iter().sum::<f64>() / nc as f64;
        let centred: Vec<f64> = cohort_years.iter().map(|c| c - cbar).collect();
        // Profile γ given the Lee–Carter start.
        for _ in 0..20 {
            let step = s.cohort_step(&centred);
            s.g.iter_mut().zip(&step).for_each(|(g, d)| *g += d);
            previous = s.refresh();
        }
        let mut cycles = 0;
        let mut converged = false;
        for cycle in 1..=p.max_iterations.min(UNIDIMENSIONAL_CYCLES) {
            let step = s.sweep(na, |i, _, _| i, |_, _, _, _| 1.0);
            s.a.iter_mut().zip(&step).for_each(|(a, d)| *a += d);
            s.refresh();
            let step = s.sweep(nt, |_, j, _| j, |st, i, _, _| st.b[i]);
            s.k.iter_mut().zip(&step).for_each(|(k, d)| *k += d);
            s.refresh();
            let step = s.sweep(na, |i, _, _| i, |st, _, j, _| st.k[j]);
            s.b.iter_mut().zip(&step).for_each(|(b, d)| *b += d);
            s.refresh();
            let step = s.cohort_step(&centred);
            s.g.iter_mut().zip(&step).for_each(|(g, d)| *g += d);
            let mut current = s.refresh();
            if free {
                let step = s.sweep(na, |i, _, _| i, |st, _, _, c| st.g[c]);
                s.b0.iter_mut().zip(&step).for_each(|(b, d)| *b += d);
                current = s.refresh();
            }
            if !current.is_finite() {
                return Err(Error::model(
                    NAME,
                    format!(
                        "sex {sex}: the Poisson fit diverged (non-finite log-likelihood at cycle \
                         {cycle})"
                    ),
                ));
            }
            cycles = cycle;
            if (current - previous).abs() < p.tolerance {
                converged = true;
                break;
            }
            previous = current;
        }
        let cells = s.cells();
        let mut parameters = normalise(s.a, s.b, s.k, s.b0, s.g, free)?;
        if !converged {
            let remaining = p.max_iterations.saturating_sub(cycles).max(1);
            let (estimates, steps) =
                joint_fit(&cells, parameters, free, &centred, p.tolerance, remaining).map_err(
                    |rule| {
                        Error::model(
                            NAME,
                            format!(
                                "sex {sex}: {rule} (after {cycles} cycles of one-dimensional \
                                 updates){}",
                                if free {
                                    "; or set model.cohort_loading = \"unit\""
                                } else {
                                    ""
                                }
                            ),
                        )
                    },
                )?;
            parameters = estimates;
            cycles += steps;
        }
        let (ax, bx, kt, b0x, gamma) = parameters;
        let (values, series) = grid.complete(&gamma, p.cohort_series)?;
        let cohorts = CohortEffects {
            first_cohort: grid.first_cohort,
            values,
            fitted: grid.fitted_mask(),
            loading: b0x.clone(),
            series,
        };
        let mut fit = RenshawHabermanFit {
            loading: p.loading,
            ax,
            bx,
            kt: DMatrix::from_row_slice(1, nt, &kt),
            b0x,
            grid,
            last_year_gamma: cohorts.by_age(years.last, ages.first),
            cohorts,
            basis: FitBasis::unmeasured(
                sex,
                ages,
                years,
                KannistoClosure {
                    fit_ages: p.closure_fit_ages,
                    max_age: p.max_age,
                },
            ),
        };
        fit.measure(population, cycles)?;
        Ok(fit)
    }
}

/// One-dimensional cycles before the joint Fisher-scoring stage. The cycles are cheap
/// and robust far from the optimum but converge only linearly along the correlated
/// directions of (b, k) and (b0, γ): on the invented demo population (46 ages × 50 years)
/// the change per cycle still shrank by only 0.3 % a cycle after 4000 cycles. Joint
/// scoring from where the cycles leave off converges in a few steps.
const UNIDIMENSIONAL_CYCLES: usize = 100;

/// Fisher scoring on all parameters at once, θ = (a, b, k, γ, b0 if free), under the
/// linear constraints Σb = 1, Σk = 0, Σγ = 0, Σ(c − c̄)γ = 0 (and Σb0 = 1), from the
/// normalised `start`. Returns the normalised estimates and the steps taken.
fn joint_fit(
    cells: &[Cell],
    start: Parameters,
    free: bool,
    centred: &[f64],
    tolerance: f64,
    max_iterations: usize,
) -> std::result::Result<(Parameters, usize), String> {
    let (a, b, k, b0, g) = start;
    let (na, nt, nc) = (a.len(), k.len(), g.len());
    let (ob, ok, og, ob0) = (na, 2 * na, 2 * na + nt, 2 * na + nt + nc);
    let p = ob0 + if free { na } else { 0 };
    let mut theta: Vec<f64> = a.iter().chain(&b).chain(&k).chain(&g).copied().collect();
    if free {
        theta.extend(&b0);
    }
    let rows = if free { 5 } else { 4 };
    let mut constraints = DMatrix::zeros(rows, p);
    let mut targets = vec![0.0; rows];
    for i in 0..na {
        constraints[(0, ob + i)] = 1.0;
        if free {
            constraints[(4, ob0 + i)] = 1.0;
        }
    }
    targets[0] = 1.0;
    if free {
        targets[4] = 1.0;
    }
    for j in 0..nt {
        constraints[(1, ok + j)] = 1.0;
    }
    for (c, z) in centred.iter().enumerate() {
        constraints[(2, og + c)] = 1.0;
        constraints[(3, og + c)] = *z;
    }
    // Each cell's terms carry its (age, year, cohort) positions.
    let predictor = |cell: &Cell, th: &[f64]| -> Linearised {
        let (i, j, c) = (cell.terms[0].0, cell.terms[1].0, cell.terms[2].0);
        let loading = if free { th[ob0 + i] } else { 1.0 };
        let (bi, kj, gc) = (th[ob + i], th[ok + j], th[og + c]);
        let eta = th[i] + bi * kj + loading * gc;
        let last = if free { (ob0 + i, gc) } else { (0, 0.0) };
        (
            eta,
            [
                (i, 1.0),
                (ob + i, kj),
                (ok + j, bi),
                (og + c, loading),
                last,
            ],
        )
    };
    let (theta, steps) = glm::fit_scoring(
        Family::Poisson,
        cells,
        &predictor,
        (&constraints, &targets),
        theta,
        tolerance,
        max_iterations,
    )?;
    let b0 = if free {
        theta[ob0..].to_vec()
    } else {
        vec![1.0; na]
    };
    let parameters = normalise(
        theta[..na].to_vec(),
        theta[ob..ok].to_vec(),
        theta[ok..og].to_vec(),
        b0,
        theta[og..ob0].to_vec(),
        free,
    )
    .map_err(|e| e.to_string())?;
    Ok((parameters, steps))
}

/// (a, b, k, b0, γ).
type Parameters = (Vec<f64>, Vec<f64>, Vec<f64>, Vec<f64>, Vec<f64>);

/// Applies the constraints without changing any fitted rate: k → k − k̄ with
/// a → a + b k̄; b → b/Σb with k → k Σb; γ → γ − γ̄ with a → a + b0 γ̄ (γ̄ is zero up to
/// rounding, as the γ updates keep Σγ = 0); and for the free loading b0 → b0/Σb0 with
/// γ → γ Σb0, which keeps both cohort constraints.
fn normalise(
    mut a: Vec<f64>,
    mut b: Vec<f64>,
    mut k: Vec<f64>,
    mut b0: Vec<f64>,
    mut g: Vec<f64>,
    free: bool,
) -> Result<Parameters> {
    let kbar = k.iter().sum::<f64>() / k.len() as f64;
    k.iter_mut().for_each(|v| *v -= kbar);
    a.iter_mut().zip(&b).for_each(|(a, b)| *a += b * kbar);
    let scale = b.iter().sum::<f64>();
    let norm = b.iter().map(|v| v * v).sum::<f64>().sqrt();
    if scale.is_nan() || scale.abs() <= 1e-10 * norm {
        return Err(Error::model(
            NAME,
            "the fitted b_x sum to zero, so they cannot be normalised to Σ b_x = 1",
        ));
    }
    b.iter_mut().for_each(|v| *v /= scale);
    k.iter_mut().for_each(|v| *v *= scale);
    let gbar = g.iter().sum::<f64>() / g.len() as f64;
    g.iter_mut().for_each(|v| *v -= gbar);
    a.iter_mut().zip(&b0).for_each(|(a, b0)| *a += b0 * gbar);
    if free {
        let scale = b0.iter().sum::<f64>();
        let norm = b0.iter().map(|v| v * v).sum::<f64>().sqrt();
        if scale.is_nan() || scale.abs() <= 1e-10 * norm {
            return Err(Error::model(
                NAME,
                "the fitted b0_x sum to zero, so they cannot be normalised to Σ b0_x = 1; \
                 set model.cohort_loading = \"unit\"",
            ));
        }
        b0.iter_mut().for_each(|v| *v /= scale);
        g.iter_mut().for_each(|v| *v *= scale);
    }
    Ok((a, b, k, b0, g))
}

impl RenshawHabermanFit {
    /// Fitted central rate m(x, t) at row `i` (age) and column `j` (year).
    pub fn central_rate(&self, i: usize, j: usize) -> f64 {
        let g = self.cohorts.values[self.grid.cohort(i, j)];
        (self.ax[i] + self.bx[i] * self.kt[(0, j)] + self.b0x[i] * g).exp()
    }

    /// Free or unit cohort loading.
    pub fn loading(&self) -> CohortLoading {
        self.loading
    }

    fn measure(&mut self, population: &Population, iterations: usize) -> Result<()> {
        let (na, nt) = (self.basis.ages.len(), self.basis.years.len());
        let mut count = na + (na - 1) + (nt - 1) + (self.grid.estimated - 2);
        if self.loading == CohortLoading::Free {
            count += na - 1;
        }
        let (diagnostics, residuals) = measure_fit(
            NAME,
            self.basis.sex,
            Family::Poisson,
            &population.deaths,
            &population.exposure,
            count,
            iterations,
            |i, j| self.grid.used(i, j).then(|| self.central_rate(i, j)),
        )?;
        self.basis.record(diagnostics, residuals);
        Ok(())
    }
}

impl FittedModel for RenshawHabermanFit {
    fn name(&self) -> &'static str {
        NAME
    }

    fn method(&self) -> &'static str {
        "poisson"
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

    /// Rates with the cohort effects of the last fitted year's cohorts frozen: age x takes
    /// γ of the cohort born in `years().last − x`, whatever year the indices belong to.
    fn rates(&self, factors: &[f64], out: &mut [f64]) {
        self.cohort_rates(factors, &self.last_year_gamma, out);
    }

    fn cohort_rates(&self, factors: &[f64], gamma_by_age: &[f64], out: &mut [f64]) {
        self.cohort_rates_in(factors, gamma_by_age, 0..out.len(), out);
    }

    fn cohort_rates_in(
        &self,
        factors: &[f64],
        gamma_by_age: &[f64],
        cells: std::ops::Range<usize>,
        out: &mut [f64],
    ) {
        let k = factors[0];
        let (first, n) = (self.basis.ages.first, self.ax.len());
        let central = self.basis.closure.central_cells(first, n, cells.clone());
        for i in central.clone() {
            out[i] = self.ax[i] + self.bx[i] * k + self.b0x[i] * gamma_by_age[i];
        }
        crate::life::exp::exp_in_place(&mut out[central]);
        self.basis.closure.close_cells(first, n, cells, out);
    }

    fn cohort_effects(&self) -> Option<CohortEffects> {
        Some(self.cohorts.clone())
    }

    fn parameters_json(&self) -> serde_json::Value {
        serde_json::json!({
            "ax": self.ax,
            "bx": self.bx,
            "kt": self.kt.as_slice(),
            "b0x": self.b0x,
            "cohort_loading": match self.loading {
                CohortLoading::Free => "free",
                CohortLoading::Unit => "unit",
            },
            "gamma": self.cohorts.values,
            "cohorts": self.grid.cohort_years(),
            "fitted_cohorts": self.cohorts.fitted,
        })
    }
}
