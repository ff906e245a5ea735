//! Constrained Newton–Raphson for mortality models whose linear predictor is linear in
//! the parameters (age–period–cohort, M6, M7), and Fisher scoring for bilinear ones
//! (the joint stage of the Renshaw–Haberman fit).
//!
//! Each cell's predictor η = Σ θ_p z_p touches at most four parameters, so the score and
//! the expected information are accumulated cell by cell in O(cells). The models are not
//! identified without linear constraints C θ = 0, so each step solves the bordered
//! (Lagrange) system [I Cᵀ; C 0] [δ; λ] = [U; −C θ], which keeps every iterate on the
//! constraint set; the system is singular exactly when the constraints do not identify
//! the model on the cells given, which is reported as an error. For the canonical links
//! (log for Poisson, logit for binomial) Newton–Raphson is Fisher scoring, i.e. the IRLS
//! of a GLM, and the log-likelihood is concave, so with step halving it converges from any
//! start with a finite maximum.

use nalgebra::{DMatrix, DVector};

/// The error distribution and its canonical link.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Family {
    /// Deaths ~ Poisson(E exp(η)), `size` the central exposure.
    Poisson,
    /// Deaths ~ Binomial(E0, logistic(η)), `size` the initial exposure.
    Binomial,
}

/// One cell of data and its predictor's terms.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Cell {
    /// Deaths.
    pub deaths: f64,
    /// Exposure (central for Poisson, initial for binomial).
    pub size: f64,
    /// (parameter, coefficient) pairs; unused slots have coefficient 0.
    pub terms: [(usize, f64); 4],
}

/// ln(1 + e^η), stable for large |η|.
pub fn softplus(eta: f64) -> f64 {
    if eta > 0.0 {
        eta + (-eta).exp().ln_1p()
    } else {
        eta.exp().ln_1p()
    }
}

/// The logistic function, stable for large |η|.
pub fn logistic(eta: f64) -> f64 {
    if eta >= 0.0 {
        1.0 / (1.0 + (-eta).exp())
    } else {
        let e = eta.exp();
        e / (1.0 + e)
    }
}

impl Cell {
    /// The linear predictor at `theta`.
    pub fn eta(&self, theta: &[f64]) -> f64 {
        self.terms.iter().map(|&(p, z)| z * theta[p]).sum()
    }
}

/// A cell's predictor and its gradient terms at θ; unused slots have coefficient 0.
pub type Linearised = (f64, [(usize, f64); 5]);

/// `x ln(x / y)` with 0 ln 0 = 0.
fn xlog(x: f64, y: f64) -> f64 {
    if x > 0.0 { x * (x / y).ln() } else { 0.0 }
}

/// Log-likelihood minus the saturated model's (minus half the deviance) at `theta`: a sum
/// of small terms, so that the ascent check of a step keeps its precision where the
/// log-likelihood itself (large terms that cancel) would not.
fn kernel(
    family: Family,
    cells: &[Cell],
    theta: &[f64],
    predictor: &impl Fn(&Cell, &[f64]) -> Linearised,
) -> f64 {
    -cells
        .iter()
        .map(|c| {
            let eta = predictor(c, theta).0;
            let (d, n) = (c.deaths, c.size);
            match family {
                Family::Poisson => {
                    let mu = n * eta.exp();
                    let log_term = if d > 0.0 {
                        d * ((d / n).ln() - eta)
                    } else {
                        0.0
                    };
                    log_term - (d - mu)
                }
                // d ln(d / nq) + (n − d) ln((n − d) / n(1 − q)) with
                // ln q = −softplus(−η), ln(1 − q) = −softplus(η).
                Family::Binomial => {
                    let deaths = if d > 0.0 {
                        xlog(d, n) + d * softplus(-eta)
                    } else {
                        0.0
                    };
                    let survivors = if n > d {
                        xlog(n - d, n) + (n - d) * softplus(eta)
                    } else {
                        0.0
                    };
                    deaths + survivors
                }
            }
        })
        .sum::<f64>()
}

/// Maximises the likelihood of a predictor linear in θ (each cell's `terms`) subject to
/// `constraints` θ = 0 from `start` (which need not satisfy them). Returns the estimates
/// and the iterations, or the rule that failed.
pub fn fit(
    family: Family,
    cells: &[Cell],
    constraints: &DMatrix<f64>,
    start: Vec<f64>,
    tolerance: f64,
    max_iterations: usize,
) -> std::result::Result<(Vec<f64>, usize), String> {
    let targets = vec![0.0; constraints.nrows()];
    let linear = |c: &Cell, theta: &[f64]| -> Linearised {
        let t = c.terms;
        (c.eta(theta), [t[0], t[1], t[2], t[3], (0, 0.0)])
    };
    fit_scoring(
        family,
        cells,
        &linear,
        (constraints, &targets),
        start,
        tolerance,
        max_iterations,
    )
}

/// Fisher scoring for any predictor: `predictor` gives each cell's η and gradient at θ
/// (for a linear predictor this is Newton–Raphson), subject to `constraints` θ =
/// `targets`.
pub fn fit_scoring(
    family: Family,
    cells: &[Cell],
    predictor: &impl Fn(&Cell, &[f64]) -> Linearised,
    (constraints, targets): (&DMatrix<f64>, &[f64]),
    start: Vec<f64>,
    tolerance: f64,
    max_iterations: usize,
) -> std::result::Result<(Vec<f64>, usize), String> {
    let p = start.len();
    let r = constraints.nrows();
    let mut theta = start;
    let mut previous = kernel(family, cells, &theta, predictor);
    let mut system = DMatrix::zeros(p + r, p + r);
    let mut rhs = DVector::zeros(p + r);
    for it in 1..=max_iterations {
        system.fill(0.0);
        rhs.fill(0.0);
        for c in cells {
            let (eta, terms) = predictor(c, &theta);
            let (residual, weight) = match family {
                Family::Poisson => {
                    let mu = c.size * eta.exp();
                    (c.deaths - mu, mu)
                }
                Family::Binomial => {
                    let q = logistic(eta);
                    (c.deaths - c.size * q, c.size * q * (1.0 - q))
                }
            };
            for &(a, za) in &terms {
                if za == 0.0 {
                    continue;
                }
                rhs[a] += residual * za;
                for &(b, zb) in &terms {
                    system[(a, b)] += weight * za * zb;
                }
            }
        }
        let score = rhs.rows(0, p).into_owned();
        let theta_v = DVector::from_column_slice(&theta);
        let violation = constraints * &theta_v;
        for k in 0..r {
            for q in 0..p {
                system[(p + k, q)] = constraints[(k, q)];
                system[(q, p + k)] = constraints[(k, q)];
            }
            rhs[p + k] = targets[k] - violation[k];
        }
        let solution = system
            .clone()
            .lu()
            .solve(&rhs)
            .filter(|s| s.iter().all(|v| v.is_finite()))
            .ok_or_else(|| {
                "the information matrix is singular under the constraints, so the model is not \
                 identified on these cells"
                    .to_string()
            })?;
        let mut step: Vec<f64> = solution.rows(0, p).iter().copied().collect();
        let promised = 0.5
            * step
                .iter()
                .zip(score.iter())
                .map(|(s, u)| s * u)
                .sum::<f64>();
        let mut trial: Vec<f64> = theta.iter().zip(&step).map(|(t, s)| t + s).collect();
        let mut current = kernel(family, cells, &trial, predictor);
        let mut halvings = 0;
        // A step that only restores the constraints may lower ℓ; halving applies only once
        // the iterate is feasible.
        let feasible = violation
            .iter()
            .zip(targets)
            .all(|(v, t)| (v - t).abs() < 1e-9);
        while feasible
            && (current.is_nan() || current < previous - 1e-12 * previous.abs())
            && halvings < 40
        {
            for s in step.iter_mut() {
                *s *= 0.5;
            }
            trial = theta.iter().zip(&step).map(|(t, s)| t + s).collect();
            current = kernel(family, cells, &trial, predictor);
            halvings += 1;
        }
        theta = trial;
        if !current.is_finite() || theta.iter().any(|v| !v.is_finite()) {
            return Err("the fit diverged (non-finite log-likelihood)".into());
        }
        if feasible && promised.abs() < tolerance {
            return Ok((theta, it));
        }
        previous = current;
    }
    Err(format!(
        "the fit did not converge in {max_iterations} iterations; raise model.max_iterations \
         or model.tolerance"
    ))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn constrained_poisson_matches_closed_form() {
        // Two cells with one shared level θ0 + θ1 and θ1 = 0: the MLE is ln(Σd/ΣE).
        let cells = [
            Cell {
                deaths: 3.0,
                size: 100.0,
                terms: [(0, 1.0), (1, 1.0), (0, 0.0), (0, 0.0)],
            },
            Cell {
                deaths: 5.0,
                size: 100.0,
                terms: [(0, 1.0), (1, 1.0), (0, 0.0), (0, 0.0)],
            },
        ];
        let constraints = DMatrix::from_row_slice(1, 2, &[0.0, 1.0]);
        let (theta, _) = fit(
            Family::Poisson,
            &cells,
            &constraints,
            vec![0.0, 0.5],
            1e-12,
            100,
        )
        .unwrap();
        assert!((theta[0] - (8.0f64 / 200.0).ln()).abs() < 1e-10);
        assert!(theta[1].abs() < 1e-12);
    }
}
