//! The model-risk section's data, from the valued models' figures and their books.
//!
//! Kept apart from `gather` because it reads several models' valuations, which a
//! single-model report never has.

use crate::error::Result;
use crate::pipeline::ValuationOutcome;
use crate::report::charts::histogram::Bins;
use crate::report::data::{ModelRisk, ModelRiskRow};
use crate::risk::TailFigures;
use crate::risk::model_average::{ModelAverage, ModelFigures};
use crate::risk::order::Sample;

/// The tail at `level` among `tails`.
fn at(tails: &[TailFigures], level: f64) -> Option<&TailFigures> {
    tails.iter().find(|t| (t.level - level).abs() < 1e-12)
}

/// The section's data: each model's trend-only figures at the highest configured level
/// and its PV histogram over bins common to all models (read back from its book), and
/// the mixture's figures. `models` pairs each model's figures with its valuation.
pub fn model_risk(
    models: &[(&ModelFigures, &ValuationOutcome)],
    average: &ModelAverage,
    level: f64,
) -> Result<ModelRisk> {
    let lo = models
        .iter()
        .map(|(f, _)| f.trend.min)
        .fold(f64::INFINITY, f64::min);
    let hi = models
        .iter()
        .map(|(f, _)| f.trend.max)
        .fold(f64::NEG_INFINITY, f64::max);
    let scenarios = models
        .iter()
        .map(|(f, _)| f.trend.scenarios)
        .max()
        .unwrap_or(1);
    let mut rows = Vec::with_capacity(models.len());
    for (figures, outcome) in models {
        let mut bins = Bins::for_sample((lo, hi), scenarios);
        let shares = match &outcome.book {
            Some(book) if outcome.stochastic > 0 => {
                book.column("pv_expected").pass(&mut |v| bins.add(v))?;
                bins.shares()
            }
            _ => Vec::new(),
        };
        let tail = at(&figures.trend.tails, level);
        rows.push(ModelRiskRow {
            model: figures.model.clone(),
            bic: figures.bic.get("total").copied(),
            weight: figures.weight,
            best_estimate: figures.best_estimate,
            var: tail.map_or(f64::NAN, |t| t.var),
            tvar: tail.map_or(f64::NAN, |t| t.tvar),
            capital: tail.map_or(f64::NAN, |t| t.capital),
            shares,
        });
    }
    let tail = at(&average.trend.tails, level);
    Ok(ModelRisk {
        label: "trend only".to_string(),
        weights_from: match average.weights_from {
            "bic" => "BIC".to_string(),
            _ => "model.weights".to_string(),
        },
        level,
        models: rows,
        average: ModelRiskRow {
            model: "model average".to_string(),
            bic: None,
            weight: 1.0,
            best_estimate: average.best_estimate,
            var: tail.map_or(f64::NAN, |t| t.var),
            tvar: tail.map_or(f64::NAN, |t| t.tvar),
            capital: tail.map_or(f64::NAN, |t| t.capital),
            shares: Vec::new(),
        },
        best_estimate_spread: average.best_estimate_spread,
        range: (lo, hi),
    })
}
