//! The plain data a report is drawn from.
//!
//! Every field is a number, a string or a list of them, so the pipeline can fill a report
//! without the report knowing about models or scenarios, and the whole thing serialises to
//! JSON for inspection. Figures the report can derive (run-off capital, percentages, BIC
//! ranks, lifetime histograms) are derived when rendering, so the page can never
//! contradict itself. The PV histogram comes binned: its values can be a million
//! scenarios read back from `book.parquet`, which the pipeline bins in one pass.

use serde::Serialize;

use crate::data::Sex;
use crate::models::FitDiagnostics;
use crate::report::charts::finite_range;
use crate::report::charts::histogram::Bins;
use crate::risk::capital::CapitalSummary;

/// Everything `report.html` shows; every section is optional.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ReportData {
    /// Page heading.
    pub title: String,
    /// Name of the currency the book is valued in, for axis and column labels.
    pub currency: String,
    /// Run metadata and inputs.
    pub run: RunInfo,
    /// Fit statistics, one row per model and sex; empty leaves the fit table out.
    pub fit: Vec<FitRow>,
    /// Deviance-residual heat maps; empty leaves them out.
    pub residuals: Vec<ResidualMap>,
    /// Fan charts of projected measures by year; empty leaves them out.
    pub fans: Vec<FanChart>,
    /// Distributions of cohort truncated life expectancy; empty leaves them out.
    pub lifetimes: Vec<LifetimeDistribution>,
    /// Distribution of the book's present value; `None` leaves the chart out.
    pub present_values: Option<PvDistribution>,
    /// Capital figures; `None` leaves the capital tables out.
    pub capital: Option<CapitalTable>,
    /// Hedge comparison, one row per contract; empty leaves the table out.
    pub hedges: Vec<HedgeRow>,
    /// Several models side by side; `None` leaves the model-risk section out.
    pub model_risk: Option<ModelRisk>,
    /// Capital allocated to segments (and a tranche's marginal capital); `None` leaves
    /// the section out.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub allocation: Option<crate::risk::allocation_summary::AllocationSummary>,
    /// The book against its population (`[basis]`); `None` leaves the section out.
    pub book_basis: Option<crate::report::basis::BookBasisReport>,
}

/// Model risk: each valued model's fit, weight and figures, the mixture's, and the
/// models' PV distributions over common bins.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModelRisk {
    /// What the values are, e.g. `trend only`.
    pub label: String,
    /// Where the weights came from, as shown (`BIC` or `model.weights`).
    pub weights_from: String,
    /// Confidence level of the VaR and capital shown.
    pub level: f64,
    /// One row per model, in the config's order.
    pub models: Vec<ModelRiskRow>,
    /// The weighted mixture's row (its `bic` is `None`, its weight 1).
    pub average: ModelRiskRow,
    /// Largest less smallest best estimate.
    pub best_estimate_spread: f64,
    /// Smallest and largest PV over all models: the bins' range.
    pub range: (f64, f64),
}

/// One model's (or the mixture's) figures in the model-risk table and chart.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModelRiskRow {
    /// Model kind, or `model average`.
    pub model: String,
    /// BIC summed over sexes.
    pub bic: Option<f64>,
    /// Weight in the average.
    pub weight: f64,
    /// Best estimate.
    pub best_estimate: f64,
    /// VaR at `level`.
    pub var: f64,
    /// TVaR at `level`.
    pub tvar: f64,
    /// VaR − best estimate.
    pub capital: f64,
    /// Share of the model's scenarios in each common bin (empty for the average).
    pub shares: Vec<f64>,
}

/// Run metadata: what was run, on what, and when.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RunInfo {
    /// tailspan version that produced the results.
    pub tool_version: String,
    /// When the run started, as the caller wants it shown (ISO 8601, UTC recommended).
    pub run_at: String,
    /// The config file of the run.
    pub config_path: Option<String>,
    /// The run's id, as recorded in every file it wrote (see `io::provenance`).
    pub run_id: Option<String>,
    /// Master seed of the random streams.
    pub seed: Option<u64>,
    /// Number of scenarios simulated.
    pub scenarios: Option<u64>,
    /// Model kinds fitted, e.g. `lee-carter (poisson)`.
    pub models: Vec<String>,
    /// Fitted age range, inclusive.
    pub ages: Option<[u32; 2]>,
    /// Fitted calendar years, inclusive.
    pub years: Option<[i32; 2]>,
    /// Valuation year.
    pub valuation_year: Option<i32>,
    /// Valuation and projection basis, as (item, value) pairs in display order.
    pub basis: Vec<BasisItem>,
    /// Input files and their hashes.
    pub inputs: Vec<InputFile>,
}

/// One line of the valuation basis, e.g. ("Discount rate", "3.00 % p.a. flat").
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BasisItem {
    /// What the line is about.
    pub item: String,
    /// Its value as shown.
    pub value: String,
}

/// An input file with its SHA-256 hash.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct InputFile {
    /// What the file is, e.g. `experience`.
    pub role: String,
    /// Path as given in the config.
    pub path: String,
    /// Lower-case hex SHA-256 of the file's bytes.
    pub sha256: String,
}

/// Fit statistics of one model for one sex.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FitRow {
    /// Model name as shown.
    pub model: String,
    /// Sex fitted.
    pub sex: Sex,
    /// Maximised log-likelihood.
    pub log_likelihood: f64,
    /// Deviance against the saturated model.
    pub deviance: f64,
    /// Akaike information criterion.
    pub aic: f64,
    /// Bayesian information criterion; the ranking within a sex is by this.
    pub bic: f64,
    /// Number of free parameters.
    pub parameters: usize,
}

impl FitRow {
    /// The row for `model` fitted to `sex` with diagnostics `fit`.
    pub fn from_diagnostics(model: &str, sex: Sex, fit: &FitDiagnostics) -> Self {
        FitRow {
            model: model.to_string(),
            sex,
            log_likelihood: fit.log_likelihood,
            deviance: fit.deviance,
            aic: fit.aic,
            bic: fit.bic,
            parameters: fit.parameters,
        }
    }
}

/// Deviance residuals of one fit by age and year.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ResidualMap {
    /// Model name as shown.
    pub model: String,
    /// Sex fitted.
    pub sex: Sex,
    /// Ages of the rows, ascending and consecutive.
    pub ages: Vec<u32>,
    /// Years of the columns, ascending and consecutive.
    pub years: Vec<i32>,
    /// `residuals[i][j]` is the residual at `ages[i]` in `years[j]`; non-finite cells are
    /// shown blank.
    pub residuals: Vec<Vec<f64>>,
}

/// What a fan chart shows.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(tag = "measure", rename_all = "snake_case")]
pub enum FanMeasure {
    /// Period life expectancy e°x at `age`, in years.
    PeriodLifeExpectancy {
        /// Age of the expectation.
        age: u32,
    },
    /// One-year probability of death q at `age`, drawn on a log axis.
    MortalityRate {
        /// Age of the rate.
        age: u32,
    },
    /// The book's spread against the population (`[basis]`): κ_t of the relative model,
    /// or the book population's own index k_t under Li–Lee.
    BookSpread {
        /// Whether the spread is Li–Lee's own index.
        li_lee: bool,
    },
}

/// Observed history and projected quantiles of one measure for one sex.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FanChart {
    /// The measure shown.
    pub measure: FanMeasure,
    /// Sex shown.
    pub sex: Sex,
    /// Values computed from the experience, by year.
    pub history: Vec<YearValue>,
    /// Quantiles of the projected scenarios, by year.
    pub projection: Vec<FanPoint>,
}

/// A value in one calendar year.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct YearValue {
    /// Calendar year.
    pub year: i32,
    /// The value.
    pub value: f64,
}

/// Quantiles of a projected measure in one year, at the probabilities in the field names.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct FanPoint {
    /// Calendar year.
    pub year: i32,
    /// 0.5 % quantile.
    pub q005: f64,
    /// 5 % quantile.
    pub q050: f64,
    /// 25 % quantile.
    pub q250: f64,
    /// Median.
    pub q500: f64,
    /// 75 % quantile.
    pub q750: f64,
    /// 95 % quantile.
    pub q950: f64,
    /// 99.5 % quantile.
    pub q995: f64,
}

/// Probabilities of the quantiles a [`FanPoint`] holds, in field order.
pub const FAN_PROBABILITIES: [f64; 7] = [0.005, 0.05, 0.25, 0.5, 0.75, 0.95, 0.995];

impl FanPoint {
    /// Builds a point from quantiles at [`FAN_PROBABILITIES`], in that order.
    pub fn from_quantiles(year: i32, q: [f64; 7]) -> Self {
        FanPoint {
            year,
            q005: q[0],
            q050: q[1],
            q250: q[2],
            q500: q[3],
            q750: q[4],
            q950: q[5],
            q995: q[6],
        }
    }
}

/// Scenario values of a cohort's truncated complete life expectancy e°x:n.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LifetimeDistribution {
    /// Sex of the cohort.
    pub sex: Sex,
    /// Age x at the valuation date.
    pub age: u32,
    /// Truncation n, in years.
    pub horizon: u32,
    /// e°x:n in each scenario, in years.
    pub values: Vec<f64>,
}

/// Scenario present values of the book, binned, with the reference values marked on the
/// chart.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PvDistribution {
    /// What the values are, e.g. `trend + idiosyncratic`.
    pub label: String,
    /// Scenarios valued.
    pub scenarios: usize,
    /// Smallest and largest finite value; `None` when there is none.
    pub range: Option<(f64, f64)>,
    /// Share of the scenarios in each bin of [`Bins::for_sample`] over `range`.
    pub shares: Vec<f64>,
    /// Best estimate (PV on the central path).
    pub best_estimate: f64,
    /// Confidence level of `var`, e.g. 0.995.
    pub level: f64,
    /// VaR at `level` of the values.
    pub var: f64,
    /// Best estimate under the standard-formula longevity stress.
    pub stressed: Option<f64>,
}

impl PvDistribution {
    /// Bins `values` held in memory; the reference values are set by the caller.
    pub fn of(label: &str, values: &[f64]) -> Self {
        let range = finite_range(values.iter().copied());
        let shares = range.map_or_else(Vec::new, |r| {
            let mut bins = Bins::for_sample(r, values.len());
            values.iter().for_each(|&v| bins.add(v));
            bins.shares()
        });
        PvDistribution {
            label: label.to_string(),
            scenarios: values.len(),
            range,
            shares,
            best_estimate: f64::NAN,
            level: f64::NAN,
            var: f64::NAN,
            stressed: None,
        }
    }
}

/// Capital figures at one confidence level.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CapitalTable {
    /// Confidence level of VaR and TVaR, e.g. 0.995.
    pub level: f64,
    /// Best estimate (PV on the central path); capital percentages are of this.
    pub best_estimate: f64,
    /// Run-off figures, one column per PV measure (trend only; trend + idiosyncratic).
    pub run_off: Vec<CapitalColumn>,
    /// One-year capital by re-calibration.
    pub one_year: Option<f64>,
    /// The standard-formula longevity stress.
    pub standard_formula: Option<StandardFormula>,
}

/// The run-off distribution of one PV measure.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CapitalColumn {
    /// Column heading, e.g. `Trend only`.
    pub label: String,
    /// Mean PV over the scenarios.
    pub mean: f64,
    /// Standard deviation of the PV.
    pub std_dev: f64,
    /// VaR at the table's level.
    pub var: f64,
    /// TVaR at the table's level.
    pub tvar: f64,
}

impl CapitalColumn {
    /// Takes a column from a capital summary at `level`; `None` if the level was not computed.
    pub fn from_summary(label: &str, summary: &CapitalSummary, level: f64) -> Option<Self> {
        let tail = summary
            .tails
            .iter()
            .find(|t| (t.level - level).abs() < 1e-12)?;
        Some(CapitalColumn {
            label: label.to_string(),
            mean: summary.mean,
            std_dev: summary.std_dev,
            var: tail.var,
            tvar: tail.tvar,
        })
    }
}

/// The standard-formula longevity stress and the value it gives.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StandardFormula {
    /// Decrease applied to every future q, e.g. 0.20.
    pub decrease: f64,
    /// Best estimate under the stress.
    pub stressed_value: f64,
}

/// Capital with and without one hedge.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct HedgeRow {
    /// Contract as shown, e.g. `Indemnity swap, 10 years`.
    pub contract: String,
    /// Premium as a rate, e.g. 0.015 for 1.5 % of the hedged fixed leg.
    pub premium_rate: f64,
    /// Premium as an amount in currency units.
    pub premium_amount: f64,
    /// Capital of the unhedged book.
    pub capital_without: f64,
    /// Capital of the hedged book.
    pub capital_with: f64,
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pv_values_are_binned_by_the_square_root_rule() {
        // 100 evenly spaced values: 10 bins (√100) over [0, 99], a tenth in each.
        let values: Vec<f64> = (0..100).map(f64::from).collect();
        let pv = PvDistribution::of("trend only", &values);
        assert_eq!(pv.scenarios, 100);
        assert_eq!(pv.range, Some((0.0, 99.0)));
        assert_eq!(pv.shares.len(), 10);
        assert!(
            pv.shares.iter().all(|&s| (s - 0.1).abs() < 1e-12),
            "{:?}",
            pv.shares
        );
        // Non-finite values are left out of the shares but counted as scenarios.
        let mut gappy = values.clone();
        gappy[0] = f64::NAN;
        let pv = PvDistribution::of("trend only", &gappy);
        assert_eq!(pv.range, Some((1.0, 99.0)));
        assert!((pv.shares.iter().sum::<f64>() - 1.0).abs() < 1e-12);
        assert!(PvDistribution::of("none", &[]).range.is_none());
    }
}
