//! The report's "Book against population" section: how the book's deaths compare with
//! the population's fitted rates, where its spread may go, and what each source of risk
//! adds to the capital. Gathered from the fitted basis and the summary, rendered as tables
//! a committee can read without the JSON.

use serde::Serialize;

use crate::basis::actual_expected::{BandComparison, Comparison};
use crate::basis::book_rates::ScenarioBasis;
use crate::basis::{BookRates, FittedBasis};
use crate::data::Sex;
use crate::report::data::{FAN_PROBABILITIES, FanChart, FanMeasure, FanPoint, YearValue};
use crate::risk::decomposition::Decomposition;
use crate::risk::quantile::{quantile_sorted, sorted};
use crate::risk::summary::RunSummary;

/// Scenarios whose spread paths make the fan: enough for its 5 % and 95 % quantiles.
pub const FAN_SCENARIOS: u64 = 2_000;

/// Projected years between the fan's rows.
pub const FAN_STEP_YEARS: i32 = 5;

/// Quantiles of the projected spread κ_t in one year.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct SpreadQuantiles {
    /// Calendar year.
    pub year: i32,
    /// 5 % quantile.
    pub p05: f64,
    /// Median.
    pub p50: f64,
    /// 95 % quantile.
    pub p95: f64,
}

/// What the section shows.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BookBasisReport {
    /// α0 and α1.
    pub level: f64,
    /// α1.
    pub slope: f64,
    /// Standard errors of α0 and α1.
    pub standard_errors: [f64; 2],
    /// φ and σ of the spread.
    pub spread: [f64; 2],
    /// Every cell together.
    pub overall: Comparison,
    /// By five-year age band.
    pub bands: Vec<BandComparison>,
    /// The spread's fan, every [`FAN_STEP_YEARS`] years (empty when the spread is not
    /// drawn).
    pub fan: Vec<SpreadQuantiles>,
    /// The spread's fitted values and yearly projected quantiles, drawn as a fan (`None`
    /// when the spread is not drawn).
    pub spread_chart: Option<FanChart>,
    /// The capital decomposition, when the run was stochastic.
    pub decomposition: Option<Decomposition>,
    /// Under Li–Lee, each sex's two-population fit in brief (empty otherwise).
    pub li_lee: Vec<LiLeeBrief>,
}

/// One sex's Li–Lee fit as the section states it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LiLeeBrief {
    /// Sex of the lives.
    pub sex: crate::data::Sex,
    /// First and last fitted year.
    pub years: [i32; 2],
    /// Drift of the common index K_t.
    pub drift: f64,
    /// Its standard error.
    pub drift_standard_error: f64,
    /// φ of the index population's own index.
    pub index_phi: f64,
    /// φ of the book population's own index.
    pub book_phi: f64,
    /// σ of the book population's own index.
    pub book_sigma: f64,
    /// Correlation of the own indices' innovations.
    pub correlation: f64,
}

/// The section's data from the fitted basis, the summary and the projection's last year.
pub fn gather(
    basis: &FittedBasis,
    summary: Option<&RunSummary>,
    last_year: i32,
    scenarios: u64,
) -> BookBasisReport {
    let d = &basis.document;
    let rates = &basis.rates;
    let n = scenarios.min(FAN_SCENARIOS);
    let mut fan = Vec::new();
    let mut spread_chart = None;
    if rates.uncertainty().spread && n > 0 {
        let mut paths: Vec<Vec<f64>> = Vec::with_capacity(n as usize);
        let (mut draw, mut shocks) = (ScenarioBasis::default(), Vec::new());
        for s in 1..=n {
            rates.draw(rates.uncertainty(), s, last_year, &mut draw, &mut shocks);
            paths.push(draw.spread.clone());
        }
        let first = draw.first_year;
        // Each projected year's spreads over the scenarios, sorted once for the chart and
        // the table.
        let years = paths.first().map_or(0, Vec::len);
        let columns: Vec<Vec<f64>> = (0..years)
            .map(|h| sorted(&paths.iter().map(|p| p[h]).collect::<Vec<_>>()))
            .collect();
        for (h, column) in columns.iter().enumerate().step_by(FAN_STEP_YEARS as usize) {
            fan.push(SpreadQuantiles {
                year: first + h as i32,
                p05: quantile_sorted(column, 0.05),
                p50: quantile_sorted(column, 0.5),
                p95: quantile_sorted(column, 0.95),
            });
        }
        spread_chart = Some(spread_fan(rates, &columns, first));
    }
    BookBasisReport {
        level: d.level,
        slope: d.slope,
        standard_errors: [d.covariance[0][0].sqrt(), d.covariance[1][1].sqrt()],
        spread: [d.spread.phi, d.spread.sigma],
        overall: d.actual_to_expected.overall.clone(),
        bands: d.actual_to_expected.by_age_band.clone(),
        fan,
        spread_chart,
        decomposition: summary.and_then(|s| s.decomposition.clone()),
        li_lee: rates
            .li_lee_fits()
            .unwrap_or_default()
            .iter()
            .map(|f| LiLeeBrief {
                sex: f.sex,
                years: [f.years.first, f.years.last],
                drift: f.common.drift,
                drift_standard_error: f.common.drift_standard_error,
                index_phi: f.own[0].phi,
                book_phi: f.own[1].phi,
                book_sigma: f.own[1].sigma,
                correlation: f.correlation,
            })
            .collect(),
    }
}

/// The fan of the spread: its fitted values from the book's experience (the relative
/// model's κ̂_t, or Li–Lee's k_t of the book population, first sex) and every projected
/// year's quantiles from `columns` (each year's sorted spreads, from `first_year` on).
fn spread_fan(rates: &BookRates, columns: &[Vec<f64>], first_year: i32) -> FanChart {
    let (li_lee, sex, history) = match rates.li_lee_fits().and_then(|f| f.first()) {
        Some(fit) => (
            true,
            fit.sex,
            fit.years
                .iter()
                .zip(fit.components.own_index[1].iter())
                .map(|(year, &value)| YearValue { year, value })
                .collect(),
        ),
        None => {
            let years = &rates.fit().years;
            (
                false,
                Sex::F,
                years
                    .years
                    .iter()
                    .zip(&years.values)
                    .map(|(&year, &value)| YearValue { year, value })
                    .collect(),
            )
        }
    };
    let projection = columns
        .iter()
        .enumerate()
        .map(|(h, column)| {
            let q = FAN_PROBABILITIES.map(|p| quantile_sorted(column, p));
            FanPoint::from_quantiles(first_year + h as i32, q)
        })
        .collect();
    FanChart {
        measure: FanMeasure::BookSpread { li_lee },
        sex,
        history,
        projection,
    }
}
