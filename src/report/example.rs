//! An invented but plausible report, for the tests and for looking at the page.
//!
//! The numbers only resemble a run on the demo data; nothing here is computed by a model.
//! Draws come from a fixed ChaCha8 stream so the example is the same on every machine.

use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use sha2::{Digest, Sha256};

use super::data::*;
use crate::data::Sex;
use crate::risk::capital::CapitalSummary;

const SCENARIOS: usize = 4000;
const LEVEL: f64 = 0.995;

/// A stream for the example, away from the seeds and streams real runs use.
fn stream() -> ChaCha8Rng {
    let mut rng = ChaCha8Rng::seed_from_u64(0x0065_7861_6d70_6c65);
    rng.set_stream(0x7265_706f_7274);
    rng
}

fn normal(rng: &mut ChaCha8Rng) -> f64 {
    StandardNormal.sample(rng)
}

fn hash(text: &str) -> String {
    Sha256::digest(text.as_bytes())
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

impl ReportData {
    /// An invented report with every section filled, for tests and demonstrations.
    #[doc(hidden)]
    pub fn example() -> Self {
        let mut rng = stream();
        let ages: Vec<u32> = (55..=100).collect();
        let years: Vec<i32> = (1975..=2024).collect();
        let cells = (ages.len() * years.len()) as f64;

        let models = [("Lee–Carter (Poisson)", 140usize), ("CBD (binomial)", 100)];
        let mut fit = Vec::new();
        for sex in Sex::ALL {
            for (i, (model, k)) in models.iter().enumerate() {
                let deviance = 2_950.0 + 1_400.0 * i as f64 + 180.0 * (sex as usize) as f64;
                let log_likelihood = -11_800.0 - deviance / 2.0;
                fit.push(FitRow {
                    model: model.to_string(),
                    sex,
                    log_likelihood,
                    deviance,
                    aic: 2.0 * *k as f64 - 2.0 * log_likelihood,
                    bic: *k as f64 * cells.ln() - 2.0 * log_likelihood,
                    parameters: *k,
                });
            }
        }

        let mut residuals = Vec::new();
        for sex in Sex::ALL {
            for (i, (model, _)) in models.iter().enumerate() {
                // A cohort ridge (born about 1925-1935) that period models leave behind.
                let grid = ages
                    .iter()
                    .map(|&a| {
                        years
                            .iter()
                            .map(|&y| {
                                let born = y - a as i32;
                                let ridge = if (1925..=1935).contains(&born) {
                                    1.2 + 0.6 * i as f64
                                } else {
                                    -0.15
                                };
                                ridge + normal(&mut rng) * (0.9 + 0.2 * i as f64)
                            })
                            .collect()
                    })
                    .collect();
                residuals.push(ResidualMap {
                    model: model.to_string(),
                    sex,
                    ages: ages.clone(),
                    years: years.clone(),
                    residuals: grid,
                });
            }
        }

        let mut fans = Vec::new();
        let (last, horizon) = (2024, 60);
        for sex in Sex::ALL {
            let (e0, slope) = match sex {
                Sex::F => (17.6, 0.085),
                Sex::M => (13.4, 0.115),
            };
            let history = years
                .iter()
                .map(|&y| YearValue {
                    year: y,
                    value: e0 + slope * (y - 1975) as f64 + 0.18 * normal(&mut rng),
                })
                .collect();
            let end = e0 + slope * 49.0;
            let projection = (1..=horizon)
                .map(|t| {
                    let t = t as f64;
                    let centre = end + slope * 0.8 * t - 0.0004 * t * t;
                    let sd = 0.16 * t.sqrt() + 0.004 * t;
                    fan_point(last + t as i32, centre, sd, false)
                })
                .collect();
            fans.push(FanChart {
                measure: FanMeasure::PeriodLifeExpectancy { age: 65 },
                sex,
                history,
                projection,
            });
        }
        for age in [70u32, 85] {
            for sex in Sex::ALL {
                // q at 70 in 1975 about 0.025 (F) and 0.045 (M), rising about 10 % a year of age.
                let base = match sex {
                    Sex::F => 0.025 * (0.10 * (age as f64 - 70.0)).exp(),
                    Sex::M => 0.045 * (0.09 * (age as f64 - 70.0)).exp(),
                };
                let improvement = if age < 80 { 0.022 } else { 0.013 };
                let history = years
                    .iter()
                    .map(|&y| YearValue {
                        year: y,
                        value: base
                            * (-improvement * (y - 1975) as f64 + 0.03 * normal(&mut rng)).exp(),
                    })
                    .collect();
                let start = (base.ln()) - improvement * 49.0;
                let projection = (1..=horizon)
                    .map(|t| {
                        let t = t as f64;
                        let centre = start - improvement * 0.9 * t;
                        let sd = 0.03 * t.sqrt() + 0.0015 * t;
                        fan_point(last + t as i32, centre, sd, true)
                    })
                    .collect();
                fans.push(FanChart {
                    measure: FanMeasure::MortalityRate { age },
                    sex,
                    history,
                    projection,
                });
            }
        }

        let mut lifetimes = Vec::new();
        for (age, n, f_mean, m_mean, sd) in
            [(65u32, 30u32, 22.1, 20.4, 0.35), (80, 20, 10.2, 8.9, 0.3)]
        {
            for (sex, mean) in [(Sex::F, f_mean), (Sex::M, m_mean)] {
                let values = (0..SCENARIOS)
                    .map(|_| mean + sd * normal(&mut rng) + 0.05 * normal(&mut rng).powi(2))
                    .collect();
                lifetimes.push(LifetimeDistribution {
                    sex,
                    age,
                    horizon: n,
                    values,
                });
            }
        }

        let best_estimate = 846_315_402.37;
        let trend: Vec<f64> = (0..SCENARIOS)
            .map(|_| {
                let z = normal(&mut rng);
                best_estimate * (1.003 + 0.021 * z + 0.004 * z * z)
            })
            .collect();
        let with_deaths: Vec<f64> = trend
            .iter()
            .map(|v| v + 2_100_000.0 * normal(&mut rng))
            .collect();
        let trend_summary = CapitalSummary::new(&trend, best_estimate, &[LEVEL]);
        let full_summary = CapitalSummary::new(&with_deaths, best_estimate, &[LEVEL]);
        let run_off: Vec<CapitalColumn> = [
            ("Trend only", &trend_summary),
            ("Trend + idiosyncratic", &full_summary),
        ]
        .into_iter()
        .filter_map(|(label, s)| CapitalColumn::from_summary(label, s, LEVEL))
        .collect();
        let full_var = run_off.last().map_or(best_estimate, |c| c.var);
        let stressed_value = best_estimate * 1.0712;
        let capital_without = full_var - best_estimate;

        ReportData {
            title: "Longevity risk report: demo book".to_string(),
            currency: "currency units".to_string(),
            run: RunInfo {
                tool_version: crate::VERSION.to_string(),
                run_at: "2026-12-02T05:00:00Z".to_string(),
                config_path: Some("configs/demo.toml".to_string()),
                run_id: None,
                seed: Some(20_261_202),
                scenarios: Some(SCENARIOS as u64),
                models: vec![
                    "lee-carter (poisson)".to_string(),
                    "cbd (binomial)".to_string(),
                ],
                ages: Some([55, 100]),
                years: Some([1975, 2024]),
                valuation_year: Some(2025),
                basis: vec![
                    item("Payments", "monthly in advance (UDD within the year)"),
                    item("Discount rate", "3.00 % a year, flat"),
                    item("Old-age closure", "Kannisto to age 120"),
                    item("Projection horizon", "80 years"),
                    item("Parameter uncertainty", "drift"),
                ],
                inputs: vec![
                    InputFile {
                        role: "experience".to_string(),
                        path: "demo/experience.csv".to_string(),
                        sha256: hash("invented experience"),
                    },
                    InputFile {
                        role: "book".to_string(),
                        path: "demo/book.csv".to_string(),
                        sha256: hash("invented book"),
                    },
                ],
            },
            fit,
            residuals,
            fans,
            lifetimes,
            present_values: Some(PvDistribution {
                best_estimate,
                level: LEVEL,
                var: full_var,
                stressed: Some(stressed_value),
                ..PvDistribution::of("trend + idiosyncratic", &with_deaths)
            }),
            capital: Some(CapitalTable {
                level: LEVEL,
                best_estimate,
                run_off,
                one_year: Some(0.58 * capital_without),
                standard_formula: Some(StandardFormula {
                    decrease: 0.20,
                    stressed_value,
                }),
            }),
            hedges: vec![
                HedgeRow {
                    contract: "Indemnity swap, whole book, 10-year term".to_string(),
                    premium_rate: 0.0125,
                    premium_amount: 0.0125 * best_estimate,
                    capital_without,
                    capital_with: 0.46 * capital_without,
                },
                HedgeRow {
                    contract: "q-forward, males aged 70, maturity 2035".to_string(),
                    premium_rate: 0.0040,
                    premium_amount: 1_850_000.0,
                    capital_without,
                    capital_with: 0.81 * capital_without,
                },
            ],
            model_risk: None,
            allocation: None,
            book_basis: None,
        }
    }
}

fn item(item: &str, value: &str) -> BasisItem {
    BasisItem {
        item: item.to_string(),
        value: value.to_string(),
    }
}

/// Quantiles of a normal (or, with `log`, lognormal) variable at [`FAN_PROBABILITIES`].
fn fan_point(year: i32, centre: f64, sd: f64, log: bool) -> FanPoint {
    // Standard normal quantiles at 0.005, 0.05, 0.25, 0.5, 0.75, 0.95, 0.995
    // (Abramowitz & Stegun 1964, table 26.5, to four decimals).
    const Z: [f64; 7] = [-2.5758, -1.6449, -0.6745, 0.0, 0.6745, 1.6449, 2.5758];
    let q = Z.map(|z| {
        let v = centre + sd * z;
        if log { v.exp() } else { v }
    });
    FanPoint::from_quantiles(year, q)
}
