//! The book's rates in a scenario, made from the population's: every q of the population
//! surface becomes the book's through m_book = m_pop · exp(α0 + α1 (x − x̄) + κ_t), i.e.
//! 1 − q_book = (1 − q_pop)^multiplier under a constant force within the year.
//!
//! The central path (scenario 0) and every scenario without uncertainty take the fitted
//! (α0, α1) and the spread's expected path φ^h κ_T. Under level uncertainty each scenario
//! draws (α0, α1) from their estimated normal distribution; under a stochastic spread it
//! draws κ's path from the AR(1). Draws come from their own streams (`BasisLevel`,
//! `BasisSpread`) keyed by (seed, scenario), so the population's draws are unchanged.
//!
//! Under Li–Lee ([`crate::basis::li_lee`]) the multiplier is instead the two populations'
//! gap exp((a_{x,2} − a_{x,1}) + b_{x,2} k_{t,2} − b_{x,1} k_{t,1}) per sex, the common factor
//! having cancelled; the own indices run on from the last fitted year on their expected
//! AR(1) paths, or under a stochastic spread jointly, with correlated innovations from the
//! same `BasisSpread` stream. There is no level draw under Li–Lee.

use std::sync::Arc;

use rand_distr::{Distribution, StandardNormal};

use crate::basis::li_lee::LiLeeSex;
use crate::basis::relative::RelativeFit;
use crate::error::{Error, Result};
use crate::projection::{Purpose, RateSurface, stream};

/// What varies by scenario.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Uncertainty {
    /// Draw (α0, α1) per scenario.
    pub level: bool,
    /// Draw the spread's path per scenario.
    pub spread: bool,
}

/// Turns a scenario's population rates into the book's.
#[derive(Debug, Clone)]
pub struct BookRates {
    fit: RelativeFit,
    uncertainty: Uncertainty,
    seed: u64,
    /// Lower-triangular L with L Lᵀ the covariance of (α0, α1).
    cholesky: [[f64; 2]; 2],
    /// Under Li–Lee, each population sex's fit, in the population's sex order (the
    /// surfaces' slots); the relative `fit` is then reported but does not move the rates.
    li_lee: Option<Arc<[LiLeeSex]>>,
}

/// One scenario's level, slope and spread path.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ScenarioBasis {
    /// α0 of the scenario.
    pub level: f64,
    /// α1 of the scenario.
    pub slope: f64,
    /// First calendar year of `spread` (the year after the book's last).
    pub first_year: i32,
    /// κ_t from `first_year` on; under Li–Lee the book population's own index k_{t,2} of
    /// the first sex.
    pub spread: Vec<f64>,
    /// Under Li–Lee, per sex slot, the own indices (k_{t,1}, k_{t,2}) from `first_year` on.
    pub own: Vec<[Vec<f64>; 2]>,
}

/// Per-thread buffers: the scenario's basis and the book's rates by sex slot.
#[derive(Debug, Clone, Default)]
pub struct BookBuffers {
    basis: ScenarioBasis,
    shocks: Vec<f64>,
    q: [Vec<f64>; 2],
    age_terms: Vec<f64>,
}

impl BookRates {
    /// Book rates from a relative fit, with the draws of run `seed`.
    pub fn new(fit: RelativeFit, uncertainty: Uncertainty, seed: u64) -> Result<BookRates> {
        let c = fit.level.covariance;
        let l00 = c[0][0].max(0.0).sqrt();
        let l10 = if l00 > 0.0 { c[1][0] / l00 } else { 0.0 };
        let l11 = (c[1][1] - l10 * l10).max(0.0).sqrt();
        if !(l00.is_finite() && l10.is_finite() && l11.is_finite()) {
            return Err(Error::model(
                "basis",
                "the covariance of the book's level and slope is not finite",
            ));
        }
        Ok(BookRates {
            fit,
            uncertainty,
            seed,
            cholesky: [[l00, 0.0], [l10, l11]],
            li_lee: None,
        })
    }

    /// Book rates from Li–Lee fits, one per population sex in the surfaces' slot order;
    /// `relative` is the relative fit reported beside them.
    pub fn li_lee(
        relative: RelativeFit,
        fits: Vec<LiLeeSex>,
        uncertainty: Uncertainty,
        seed: u64,
    ) -> Result<BookRates> {
        if fits.is_empty() || fits.iter().any(|f| f.years != fits[0].years) {
            return Err(Error::model(
                "basis",
                "the Li–Lee fits of the sexes must cover the same years",
            ));
        }
        let mut rates = BookRates::new(relative, uncertainty, seed)?;
        rates.li_lee = Some(fits.into());
        Ok(rates)
    }

    /// The Li–Lee fits per sex slot, when the rates come from them.
    pub fn li_lee_fits(&self) -> Option<&[LiLeeSex]> {
        self.li_lee.as_deref()
    }

    /// The same rates with other sources of uncertainty drawn (same streams, so a scenario
    /// that draws its level in both draws the same level).
    pub fn with_uncertainty(&self, uncertainty: Uncertainty) -> BookRates {
        BookRates {
            uncertainty,
            ..self.clone()
        }
    }

    /// The fit the rates come from.
    pub fn fit(&self) -> &RelativeFit {
        &self.fit
    }

    /// What varies by scenario.
    pub fn uncertainty(&self) -> Uncertainty {
        self.uncertainty
    }

    /// Fills `out` with scenario `scenario`'s level, slope and spread up to `last_year`,
    /// drawing what `uncertainty` says.
    pub fn draw(
        &self,
        uncertainty: Uncertainty,
        scenario: u64,
        last_year: i32,
        out: &mut ScenarioBasis,
        shocks: &mut Vec<f64>,
    ) {
        if let Some(fits) = &self.li_lee {
            self.draw_li_lee(fits, uncertainty, scenario, last_year, out);
            return;
        }
        let level = &self.fit.level;
        out.level = level.level;
        out.slope = level.slope;
        out.first_year = self.fit.last_year() + 1;
        let n = (last_year - self.fit.last_year()).max(0) as usize;
        out.spread.resize(n, 0.0);
        let stochastic = scenario > 0;
        if stochastic && uncertainty.level {
            let mut rng = stream(self.seed, scenario, Purpose::BasisLevel);
            let z: [f64; 2] = [
                StandardNormal.sample(&mut rng),
                StandardNormal.sample(&mut rng),
            ];
            let l = &self.cholesky;
            out.level += l[0][0] * z[0];
            out.slope += l[1][0] * z[0] + l[1][1] * z[1];
        }
        if stochastic && uncertainty.spread {
            let mut rng = stream(self.seed, scenario, Purpose::BasisSpread);
            shocks.clear();
            shocks.extend((0..n).map(|_| -> f64 { StandardNormal.sample(&mut rng) }));
            self.fit.spread.project_into(shocks, &mut out.spread);
        } else {
            self.fit.spread.central_into(&mut out.spread);
        }
    }

    /// Li–Lee's own indices of every sex from the year after the fit's last: expected
    /// paths, or under a stochastic spread paths driven by correlated normal innovations.
    fn draw_li_lee(
        &self,
        fits: &[LiLeeSex],
        uncertainty: Uncertainty,
        scenario: u64,
        last_year: i32,
        out: &mut ScenarioBasis,
    ) {
        let level = &self.fit.level;
        out.level = level.level;
        out.slope = level.slope;
        let fitted_last = fits[0].years.last;
        out.first_year = fitted_last + 1;
        let n = (last_year - fitted_last).max(0) as usize;
        out.own.resize_with(fits.len(), Default::default);
        let mut rng = (scenario > 0 && uncertainty.spread)
            .then(|| stream(self.seed, scenario, Purpose::BasisSpread));
        for (fit, paths) in fits.iter().zip(&mut out.own) {
            for path in paths.iter_mut() {
                path.resize(n, 0.0);
            }
            let [first, second] = &fit.own;
            match &mut rng {
                Some(rng) => {
                    let rho = fit.correlation;
                    let rest = (1.0 - rho * rho).max(0.0).sqrt();
                    let (mut k1, mut k2) = (first.last, second.last);
                    let [path1, path2] = paths;
                    for (v1, v2) in path1.iter_mut().zip(path2.iter_mut()) {
                        let z1: f64 = StandardNormal.sample(rng);
                        let z2: f64 = StandardNormal.sample(rng);
                        k1 = first.step(k1, z1);
                        k2 = second.step(k2, rho * z1 + rest * z2);
                        *v1 = k1;
                        *v2 = k2;
                    }
                }
                None => {
                    first.central_into(&mut paths[0]);
                    second.central_into(&mut paths[1]);
                }
            }
        }
        out.spread.clear();
        out.spread.extend_from_slice(&out.own[0][1]);
    }

    /// The book's rate surfaces in `scenario` from the population's `surfaces`, held in
    /// `buffers`.
    pub fn apply<'b>(
        &self,
        scenario: u64,
        surfaces: &[Option<RateSurface<'_>>; 2],
        buffers: &'b mut BookBuffers,
    ) -> [Option<RateSurface<'b>>; 2] {
        self.apply_with(self.uncertainty, scenario, surfaces, buffers)
    }

    /// As [`Self::apply`], drawing what `uncertainty` says rather than the configured.
    pub fn apply_with<'b>(
        &self,
        uncertainty: Uncertainty,
        scenario: u64,
        surfaces: &[Option<RateSurface<'_>>; 2],
        buffers: &'b mut BookBuffers,
    ) -> [Option<RateSurface<'b>>; 2] {
        let last_year = surfaces.iter().flatten().map(RateSurface::last_year).max();
        let BookBuffers {
            basis,
            shocks,
            q,
            age_terms,
        } = buffers;
        self.draw(
            uncertainty,
            scenario,
            last_year.unwrap_or(i32::MIN),
            basis,
            shocks,
        );
        for (slot, surface) in surfaces.iter().enumerate() {
            if let Some(s) = surface {
                match &self.li_lee {
                    Some(fits) => fill_li_lee(&fits[slot], basis, slot, s, &mut q[slot]),
                    None => self.fill(basis, s, age_terms, &mut q[slot]),
                }
            }
        }
        let mut out = [None, None];
        for (slot, surface) in surfaces.iter().enumerate() {
            if let Some(s) = surface {
                out[slot] = Some(RateSurface { q: &q[slot], ..*s });
            }
        }
        out
    }

    /// κ_t of `basis` in `year`: the fitted value within the book's years, the path after.
    fn spread_in(&self, basis: &ScenarioBasis, year: i32) -> f64 {
        if year >= basis.first_year {
            basis.spread[(year - basis.first_year) as usize]
        } else {
            let years = &self.fit.years;
            years
                .years
                .iter()
                .position(|&y| y == year)
                .map_or(0.0, |i| years.values[i])
        }
    }

    /// The book's q over one population surface. A NaN population rate, a cell the
    /// projection left out because no reader takes it, stays NaN without the three
    /// transcendental calls a rate costs.
    fn fill(
        &self,
        basis: &ScenarioBasis,
        surface: &RateSurface<'_>,
        age_terms: &mut Vec<f64>,
        out: &mut Vec<f64>,
    ) {
        out.clear();
        out.reserve(surface.q.len());
        age_terms.clear();
        age_terms.extend(
            (0..surface.ages).map(|i| self.fit.age_term(basis.slope, surface.first_age + i as i32)),
        );
        for (row, rates) in surface.q.chunks_exact(surface.ages).enumerate() {
            if rates.iter().all(|q| q.is_nan()) {
                out.extend_from_slice(rates);
                continue;
            }
            let year_term = basis.level + self.spread_in(basis, surface.first_year + row as i32);
            for (&q, &age_term) in rates.iter().zip(age_terms.iter()) {
                out.push(if q.is_nan() {
                    q
                } else {
                    book_q(q, (year_term + age_term).exp())
                });
            }
        }
    }
}

/// The book's q over one population surface under the Li–Lee fit of its sex, `slot`.
fn fill_li_lee(
    fit: &LiLeeSex,
    basis: &ScenarioBasis,
    slot: usize,
    surface: &RateSurface<'_>,
    out: &mut Vec<f64>,
) {
    out.clear();
    out.reserve(surface.q.len());
    let rows: Vec<usize> = (0..surface.ages)
        .map(|i| fit.row(surface.first_age + i as i32))
        .collect();
    for (r, rates) in surface.q.chunks_exact(surface.ages).enumerate() {
        let year = surface.first_year + r as i32;
        let k = fit.fitted_indices(year).unwrap_or_else(|| {
            let h = (year - basis.first_year) as usize;
            let own = &basis.own[slot];
            [own[0][h], own[1][h]]
        });
        for (&q, &row) in rates.iter().zip(&rows) {
            // A cell nobody reads (NaN) stays NaN without its exp.
            out.push(if q.is_nan() {
                q
            } else {
                book_q(q, fit.log_ratio(row, k).exp())
            });
        }
    }
}

/// The book's q from the population's q and the multiplier of the central rate:
/// 1 − q_book = (1 − q)^multiplier. A multiplier of exactly 1 leaves q as it is, and
/// q = 1 (at `max_age`) stays 1.
pub fn book_q(q: f64, multiplier: f64) -> f64 {
    if multiplier == 1.0 || q >= 1.0 {
        q
    } else {
        -(multiplier * (-q).ln_1p()).exp_m1()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn book_q_scales_the_force_of_mortality() {
        // Constant force: q = 1 − e^−m, so doubling m gives 1 − (1 − q)² (closed form).
        let q = 0.1;
        assert!((book_q(q, 2.0) - (1.0 - 0.9f64 * 0.9)).abs() < 1e-15);
        assert_eq!(book_q(q, 1.0), q);
        assert_eq!(book_q(1.0, 0.5), 1.0);
    }
}
