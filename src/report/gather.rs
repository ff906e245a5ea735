//! Gathers a run's results into the report's plain data.
//!
//! The report draws only what it is given; everything it shows is taken here from the
//! same values that go to `summary.json` and the Parquet files, so the three agree.

use crate::data::{Config, Experience, Sex};
use crate::error::Result;
use crate::hedge::HedgeResults;
use crate::hedge::evaluate::ContractSummary;
use crate::life::closure::KannistoClosure;
use crate::models::FitSet;
use crate::pipeline::ValuationOutcome;
use crate::projection::Projector;
use crate::projection::period::{PERIOD_AGE, complete_expectancy};
use crate::report::charts::histogram::Bins;
use crate::report::{
    BasisItem, CapitalColumn, CapitalTable, FAN_PROBABILITIES, FanChart, FanMeasure, FanPoint,
    FitRow, HedgeRow, InputFile, LifetimeDistribution, PvDistribution, ReportData, ResidualMap,
    RunInfo, StandardFormula, YearValue,
};
use crate::risk::order::Sample;
use crate::risk::quantile::{quantile_sorted, sorted};
use crate::risk::summary::RunSummary;

/// Ages whose q is drawn as a fan chart.
pub const FAN_AGES: [i32; 3] = [65, 75, 85];
/// Ages whose cohort e°x distribution is drawn.
pub const LIFETIME_AGES: [i32; 3] = [65, 75, 85];

/// The (sex, age, year) cells the report's q fans read, in the order [`fans`] expects.
pub fn fan_probes(config: &Config, projector: &Projector) -> Vec<(Sex, i32, i32)> {
    let ages = projector.ages();
    let mut cells = Vec::new();
    for &sex in &config.data.sexes {
        for age in FAN_AGES.iter().copied().filter(|a| ages.contains(*a)) {
            for year in projector.years().iter() {
                cells.push((sex, age, year));
            }
        }
    }
    cells
}

/// Everything the report is built from.
pub struct ReportInputs<'a> {
    /// The run's config.
    pub config: &'a Config,
    /// The fitted experience.
    pub experience: &'a Experience,
    /// Every configured model's fit.
    pub fits: &'a FitSet,
    /// The projector (years and ages of the projection).
    pub projector: &'a Projector,
    /// The valuation, when a book was valued.
    pub outcome: Option<&'a ValuationOutcome>,
    /// Offset of the report's probes within each scenario's probes.
    pub probe_offset: usize,
    /// The summary, when a book was valued.
    pub summary: Option<&'a RunSummary>,
    /// The hedges, when configured.
    pub hedges: Option<&'a HedgeResults>,
    /// The run's provenance, shown in the run section.
    pub provenance: &'a crate::io::Provenance,
    /// When the run started (ISO 8601, UTC).
    pub run_at: String,
    /// The book's fitted basis, when `[basis]` is configured and a book was valued.
    pub basis: Option<&'a crate::basis::FittedBasis>,
}

/// The report's data.
pub fn report_data(inputs: &ReportInputs<'_>) -> Result<ReportData> {
    let config = inputs.config;
    let (ages, years) = (config.ages(), config.years());
    let fit_rows = inputs
        .fits
        .fits
        .iter()
        .map(|f| {
            FitRow::from_diagnostics(
                &format!("{} ({})", f.model.name(), f.model.method()),
                f.model.sex(),
                f.model.diagnostics(),
            )
        })
        .collect();
    let residuals = inputs
        .fits
        .fits
        .iter()
        .map(|f| {
            let r = f.model.residuals();
            ResidualMap {
                model: f.model.name().to_string(),
                sex: f.model.sex(),
                ages: ages.iter().map(|a| a as u32).collect(),
                years: years.iter().collect(),
                residuals: (0..r.nrows())
                    .map(|i| r.row(i).iter().copied().collect())
                    .collect(),
            }
        })
        .collect();
    let mut data = ReportData {
        title: "Longevity risk report".to_string(),
        currency: "currency units".to_string(),
        run: run_info(inputs),
        fit: fit_rows,
        residuals,
        fans: Vec::new(),
        lifetimes: Vec::new(),
        present_values: None,
        capital: None,
        hedges: Vec::new(),
        model_risk: None,
        allocation: inputs.summary.and_then(|s| s.allocation.clone()),
        book_basis: inputs.basis.map(|b| {
            let scenarios = if config.projection.noise {
                config.projection.scenarios as u64
            } else {
                0
            };
            crate::report::basis::gather(
                b,
                inputs.summary,
                inputs.projector.years().last,
                scenarios,
            )
        }),
    };
    if let Some(outcome) = inputs.outcome {
        data.fans = fans(inputs, outcome);
        data.lifetimes = outcome
            .lifetimes
            .iter()
            .filter(|((_, age), _)| LIFETIME_AGES.contains(age))
            .map(|((sex, age), values)| LifetimeDistribution {
                sex: *sex,
                age: *age as u32,
                horizon: (config.model.max_age - age + 1) as u32,
                values: values.clone(),
            })
            .collect();
    }
    if let (Some(summary), Some(outcome)) = (inputs.summary, inputs.outcome) {
        let level = config.capital.levels.iter().copied().fold(0.0, f64::max);
        let (label, name, column) = match &summary.trend_idiosyncratic {
            Some(c) => ("trend + idiosyncratic", "pv_simulated", c),
            None => ("trend only", "pv_expected", &summary.trend),
        };
        let var = column
            .tails
            .iter()
            .find(|t| (t.level - level).abs() < 1e-12)
            .map(|t| t.var)
            .unwrap_or(f64::NAN);
        // Binned in one more pass over the written book, as the capital figures were read.
        if let (Some(book), true) = (&outcome.book, outcome.stochastic > 0) {
            let range = (column.min, column.max);
            let mut bins = Bins::for_sample(range, column.scenarios);
            book.column(name).pass(&mut |v| bins.add(v))?;
            data.present_values = Some(PvDistribution {
                label: label.to_string(),
                scenarios: column.scenarios,
                range: Some(range),
                shares: bins.shares(),
                best_estimate: summary.best_estimate,
                level,
                var,
                stressed: Some(summary.standard_stress.stressed_pv),
            });
        }
        let mut run_off = Vec::new();
        run_off.extend(CapitalColumn::from_summary(
            "Trend only",
            &summary.trend,
            level,
        ));
        if let Some(c) = &summary.trend_idiosyncratic {
            run_off.extend(CapitalColumn::from_summary(
                "Trend + idiosyncratic",
                c,
                level,
            ));
        }
        data.capital = Some(CapitalTable {
            level,
            best_estimate: summary.best_estimate,
            run_off,
            one_year: summary.one_year.as_ref().map(|o| o.capital),
            standard_formula: Some(StandardFormula {
                decrease: summary.standard_stress.decrease,
                stressed_value: summary.standard_stress.stressed_pv,
            }),
        });
    }
    if let Some(hedges) = inputs.hedges {
        data.hedges = hedge_rows(
            hedges,
            config.capital.levels.iter().copied().fold(0.0, f64::max),
        );
    }
    Ok(data)
}

fn run_info(inputs: &ReportInputs<'_>) -> RunInfo {
    let config = inputs.config;
    let v = &config.valuation;
    let rate = match (v.rate, &v.curve) {
        (Some(r), _) => format!("{:.2} % a year, flat", 100.0 * r),
        (None, Some(c)) => format!("spot curve {}", c.display()),
        _ => "none".to_string(),
    };
    let mut basis = vec![
        BasisItem {
            item: "Discounting".into(),
            value: rate,
        },
        BasisItem {
            item: "Payments".into(),
            value: format!("{:?}, {} a year", v.timing, v.frequency).to_lowercase(),
        },
        BasisItem {
            item: "Parameter uncertainty".into(),
            value: format!("{:?}", config.projection.parameter_uncertainty.method()).to_lowercase(),
        },
        BasisItem {
            item: "Old-age closure".into(),
            value: format!(
                "Kannisto on the top {} fitted ages, to age {}",
                config.model.closure_fit_ages, config.model.max_age
            ),
        },
        BasisItem {
            item: "Individual deaths simulated".into(),
            value: if v.idiosyncratic { "yes" } else { "no" }.into(),
        },
    ];
    if !v.mortality_factors.is_empty() {
        basis.push(BasisItem {
            item: "Book mortality level".into(),
            value: v
                .mortality_factors
                .iter()
                .map(|f| format!("{} {}-{}: {}", f.sex, f.ages[0], f.ages[1], f.factor))
                .collect::<Vec<_>>()
                .join("; "),
        });
    }
    let hashes = inputs.provenance.inputs.clone();
    RunInfo {
        tool_version: crate::VERSION.to_string(),
        run_at: inputs.run_at.clone(),
        config_path: Some(config.file.display().to_string()),
        run_id: Some(inputs.provenance.run_id.clone()),
        seed: Some(config.projection.seed),
        scenarios: Some(config.projection.scenarios as u64),
        models: config
            .model
            .kinds()
            .iter()
            .map(|k| format!("{} ({:?})", k.name(), config.model.method_for(*k)).to_lowercase())
            .collect(),
        ages: Some([config.ages().first as u32, config.ages().last as u32]),
        years: Some([config.years().first, config.years().last]),
        valuation_year: Some(config.valuation_year()),
        basis,
        inputs: hashes
            .into_iter()
            .map(|h| InputFile {
                role: h.role.to_string(),
                path: h.path,
                sha256: h.sha256,
            })
            .collect(),
    }
}

/// Seven quantiles of each column of `rows` (scenarios × years).
fn fan_points(rows: &[&[f64]], years: &[i32]) -> Vec<FanPoint> {
    years
        .iter()
        .enumerate()
        .map(|(j, &year)| {
            let column: Vec<f64> = rows.iter().map(|r| r[j]).collect();
            let s = sorted(&column);
            let mut q = [0.0; 7];
            for (slot, &p) in q.iter_mut().zip(&FAN_PROBABILITIES) {
                *slot = quantile_sorted(&s, p);
            }
            FanPoint::from_quantiles(year, q)
        })
        .collect()
}

fn fans(inputs: &ReportInputs<'_>, outcome: &ValuationOutcome) -> Vec<FanChart> {
    let config = inputs.config;
    let projector = inputs.projector;
    let years: Vec<i32> = projector.years().iter().collect();
    let n_years = years.len();
    let mut charts = Vec::new();
    if outcome.period.is_empty() {
        return charts;
    }
    let closure = KannistoClosure {
        fit_ages: config.model.closure_fit_ages,
        max_age: config.model.max_age,
    };
    for (i, population) in inputs.experience.populations.iter().enumerate() {
        // Observed period e°65: crude rates on the fitted ages, closed like the model's.
        let history = if population.ages.contains(PERIOD_AGE) {
            let crude = population.central_rates();
            let from = (PERIOD_AGE - population.ages.first) as usize;
            population
                .years
                .iter()
                .enumerate()
                .map(|(j, year)| {
                    let n = (config.model.max_age - population.ages.first + 1) as usize;
                    let mut q = vec![0.0; n];
                    for (a, slot) in q.iter_mut().enumerate().take(population.ages.len()) {
                        *slot = crude[(a, j)];
                    }
                    closure.close(population.ages.first, population.ages.len(), &mut q);
                    YearValue {
                        year,
                        value: complete_expectancy(&q[from..]),
                    }
                })
                .collect()
        } else {
            Vec::new()
        };
        let rows: Vec<&[f64]> = outcome
            .period
            .iter()
            .map(|p| &p[i * n_years..(i + 1) * n_years])
            .collect();
        if rows.iter().all(|r| r.len() == n_years) {
            charts.push(FanChart {
                measure: FanMeasure::PeriodLifeExpectancy {
                    age: PERIOD_AGE as u32,
                },
                sex: population.sex,
                history,
                projection: fan_points(&rows, &years),
            });
        }
    }
    // q at the fan ages, laid out by fan_probes after the hedges' cells.
    let mut offset = inputs.probe_offset;
    for (i, population) in inputs.experience.populations.iter().enumerate() {
        let sex = config.data.sexes[i];
        let crude = population.central_rates();
        for age in FAN_AGES
            .iter()
            .copied()
            .filter(|a| projector.ages().contains(*a))
        {
            let rows: Vec<&[f64]> = outcome
                .probes
                .iter()
                .filter(|p| p.len() >= offset + n_years)
                .map(|p| &p[offset..offset + n_years])
                .collect();
            offset += n_years;
            if rows.is_empty() {
                continue;
            }
            let history = match population.ages.index(age) {
                Some(a) => population
                    .years
                    .iter()
                    .enumerate()
                    .map(|(j, year)| YearValue {
                        year,
                        value: -(-crude[(a, j)]).exp_m1(),
                    })
                    .collect(),
                None => Vec::new(),
            };
            charts.push(FanChart {
                measure: FanMeasure::MortalityRate { age: age as u32 },
                sex,
                history,
                projection: fan_points(&rows, &years),
            });
        }
    }
    charts
}

fn hedge_rows(hedges: &HedgeResults, level: f64) -> Vec<HedgeRow> {
    hedges
        .summary
        .contracts
        .iter()
        .filter_map(|c| {
            let (name, rate, amount, eff) = match c {
                ContractSummary::Swap(s) => (
                    format!("Swap `{}`", s.name),
                    s.applied.rate,
                    s.applied.amount,
                    &s.effectiveness,
                ),
                // The q-forward's premium: the risk premium taken off the central rate,
                // on the notional, at settlement.
                ContractSummary::QForward(q) => (
                    format!("q-forward `{}`", q.name),
                    q.premium,
                    q.notional * (q.central_rate - q.fixed_rate),
                    &q.effectiveness,
                ),
            };
            let tail = eff.tails.iter().find(|t| (t.level - level).abs() < 1e-12)?;
            Some(HedgeRow {
                contract: name,
                premium_rate: rate,
                premium_amount: amount,
                capital_without: tail.capital_unhedged,
                capital_with: tail.capital_hedged,
            })
        })
        .collect()
}
