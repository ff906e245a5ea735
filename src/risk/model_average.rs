//! Model risk: the models' weights and the mixture of their PV distributions.
//!
//! Several fitted models are each a defensible view of the same experience; their spread
//! is a risk of its own, which a single model's capital hides. The view across models is
//! the mixture: model m's scenarios 1..N give the empirical distribution F_m, and the
//! mixture's is Σ_m w_m F_m. Its VaR at level p is the smallest v with Σ_m w_m F_m(v) ≥ p
//! (an inverse distribution function, so for one model it is the empirical quantile
//! without interpolation, not the type-7 figure of a single run), and its TVaR the mixture
//! mean of the values at or above that VaR. Default weights are BIC weights
//! (w_m ∝ exp(−ΔBIC_m / 2), an approximation of posterior model probabilities under equal
//! priors: Kass & Raftery 1995, "Bayes factors", JASA 90, §4.1).
//!
//! The mixture keeps every model's sorted values in memory (8 bytes a scenario and model):
//! unlike a single model's streamed capital, a quantile of a weighted mixture of samples
//! of different models is not a rank statistic of one sample.

use std::collections::BTreeMap;

use serde::Serialize;

use crate::error::{Error, Result};
use crate::risk::capital::{CapitalSummary, StressFigures, TailFigures};
use crate::risk::summary::{OneYearFigures, RunSummary};

/// Weights w_m ∝ exp(−(BIC_m − BIC_min)/2), summing to 1.
pub fn bic_weights(bics: &[f64]) -> Vec<f64> {
    let best = bics.iter().copied().fold(f64::INFINITY, f64::min);
    normalized(
        &bics
            .iter()
            .map(|b| (-(b - best) / 2.0).exp())
            .collect::<Vec<_>>(),
    )
}

/// `weights` scaled to sum to 1 (non-negative, with a positive sum: checked by the config).
pub fn normalized(weights: &[f64]) -> Vec<f64> {
    let total: f64 = weights.iter().sum();
    weights.iter().map(|w| w / total).collect()
}

/// A weighted mixture of empirical distributions.
#[derive(Debug, Clone)]
pub struct Mixture {
    /// (weight, sorted sample) per model; weights sum to 1.
    components: Vec<(f64, Vec<f64>)>,
    /// Every value of every sample, sorted: the candidates for a quantile.
    support: Vec<f64>,
}

impl Mixture {
    /// The mixture of `samples` (each non-empty, without NaN) with `weights` (normalised
    /// here).
    pub fn new(weights: &[f64], samples: Vec<Vec<f64>>) -> Result<Self> {
        if weights.len() != samples.len() || samples.is_empty() {
            return Err(Error::Numerical(format!(
                "a mixture needs one weight per sample: {} weights, {} samples",
                weights.len(),
                samples.len()
            )));
        }
        if samples
            .iter()
            .any(|s| s.is_empty() || s.iter().any(|x| x.is_nan()))
        {
            return Err(Error::Numerical(
                "a mixture needs non-empty samples without NaN".into(),
            ));
        }
        let weights = normalized(weights);
        let components: Vec<(f64, Vec<f64>)> = weights
            .into_iter()
            .zip(samples)
            .map(|(w, mut s)| {
                s.sort_by(f64::total_cmp);
                (w, s)
            })
            .collect();
        let mut support: Vec<f64> = components
            .iter()
            .flat_map(|(_, s)| s.iter().copied())
            .collect();
        support.sort_by(f64::total_cmp);
        support.dedup();
        Ok(Mixture {
            components,
            support,
        })
    }

    /// Σ_m w_m F_m(v), F_m(v) the share of model m's values at or below v.
    pub fn cdf(&self, v: f64) -> f64 {
        self.components
            .iter()
            .map(|(w, s)| w * (s.partition_point(|&x| x <= v) as f64 / s.len() as f64))
            .sum()
    }

    /// The smallest value v of the samples with Σ_m w_m F_m(v) ≥ p (the largest value
    /// when rounding leaves the total weight just short of p).
    pub fn var(&self, p: f64) -> f64 {
        let i = self.support.partition_point(|&v| self.cdf(v) < p);
        self.support[i.min(self.support.len() - 1)]
    }

    /// Mixture mean of the values at or above `v`: Σ_m w_m S_m / Σ_m w_m C_m, with S_m the
    /// sum and C_m the count of model m's values ≥ v, each over that model's sample size.
    pub fn tail_mean(&self, v: f64) -> f64 {
        let (mut sum, mut mass) = (0.0, 0.0);
        for (w, s) in &self.components {
            let tail = &s[s.partition_point(|&x| x < v)..];
            let n = s.len() as f64;
            sum += w * tail.iter().sum::<f64>() / n;
            mass += w * tail.len() as f64 / n;
        }
        sum / mass
    }

    /// Mixture mean Σ_m w_m mean_m.
    pub fn mean(&self) -> f64 {
        self.components
            .iter()
            .map(|(w, s)| w * s.iter().sum::<f64>() / s.len() as f64)
            .sum()
    }
}

/// The mixture's figures for one PV measure.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MixtureFigures {
    /// Mixture mean of the PV.
    pub mean: f64,
    /// VaR (mixture quantile, no interpolation), TVaR and capital against the averaged
    /// best estimate, at each configured level.
    pub tails: Vec<TailFigures>,
}

impl MixtureFigures {
    /// Figures of `mixture` at `levels` against `best_estimate`.
    pub fn new(mixture: &Mixture, best_estimate: f64, levels: &[f64]) -> Self {
        MixtureFigures {
            mean: mixture.mean(),
            tails: levels
                .iter()
                .map(|&level| {
                    let var = mixture.var(level);
                    TailFigures {
                        level,
                        var,
                        tvar: mixture.tail_mean(var),
                        capital: var - best_estimate,
                        capital_pct: 100.0 * (var - best_estimate) / best_estimate,
                    }
                })
                .collect(),
        }
    }
}

/// `summary.json` → `model_average`: the view across the valued models.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModelAverage {
    /// Where the weights came from: `bic` or `config` (`model.weights`).
    pub weights_from: &'static str,
    /// Weighted best estimate Σ_m w_m BE_m.
    pub best_estimate: f64,
    /// Largest less smallest best estimate across the models.
    pub best_estimate_spread: f64,
    /// Trend risk only (`pv_expected`).
    pub trend: MixtureFigures,
    /// Trend and idiosyncratic risk (`pv_simulated`), when individual deaths are simulated.
    pub trend_idiosyncratic: Option<MixtureFigures>,
    /// Each hedge's effect on the mixture, when hedges are priced.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub hedges: Option<Vec<MixtureHedge>>,
}

/// One hedge on the mixture: each model's scenarios carry the hedge as priced under that
/// model, and the mixture's capital is compared with and without it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MixtureHedge {
    /// Contract name from the config.
    pub contract: String,
    /// Σ_m w_m BE_m (the hedges' own best estimate: the PV on each central path).
    pub best_estimate_unhedged: f64,
    /// Σ_m w_m (BE_m − hedge value to the owner on model m's central path).
    pub best_estimate_hedged: f64,
    /// Per level: mixture VaR and capital without and with the hedge.
    pub tails: Vec<MixtureHedgeTail>,
}

/// The mixture's tail at one level with and without a hedge.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MixtureHedgeTail {
    /// Confidence level.
    pub level: f64,
    /// Mixture VaR of the book's PV.
    pub var_unhedged: f64,
    /// Mixture VaR of the PV less the hedge's value to the owner.
    pub var_hedged: f64,
    /// VaR − BE without the hedge.
    pub capital_unhedged: f64,
    /// VaR − BE with the hedge (both hedged).
    pub capital_hedged: f64,
    /// 100 × (1 − hedged / unhedged capital); `None` when the book needs no capital.
    pub capital_reduction_pct: Option<f64>,
}

/// One model's view of one hedge: the book's PV and the hedge's value to the owner per
/// scenario, and on the central path.
#[derive(Debug, Clone, Copy)]
pub struct HedgedSample<'a> {
    /// The book's PV per scenario.
    pub book_pv: &'a [f64],
    /// The book's best estimate.
    pub best_estimate: f64,
    /// The hedge's value to the owner per scenario.
    pub net: &'a [f64],
    /// Its value on the central path.
    pub net_central: f64,
}

impl MixtureHedge {
    /// The hedge `contract` on the mixture of `samples` (one per model) with `weights`.
    pub fn new(
        contract: &str,
        weights: &[f64],
        samples: &[HedgedSample<'_>],
        levels: &[f64],
    ) -> Result<Self> {
        let w = normalized(weights);
        let unhedged = Mixture::new(&w, samples.iter().map(|s| s.book_pv.to_vec()).collect())?;
        let hedged = Mixture::new(
            &w,
            samples
                .iter()
                .map(|s| s.book_pv.iter().zip(s.net).map(|(p, h)| p - h).collect())
                .collect(),
        )?;
        let be: f64 = samples
            .iter()
            .zip(&w)
            .map(|(s, w)| w * s.best_estimate)
            .sum();
        let be_hedged: f64 = samples
            .iter()
            .zip(&w)
            .map(|(s, w)| w * (s.best_estimate - s.net_central))
            .sum();
        let tails = levels
            .iter()
            .map(|&level| {
                let (var_unhedged, var_hedged) = (unhedged.var(level), hedged.var(level));
                let (capital_unhedged, capital_hedged) =
                    (var_unhedged - be, var_hedged - be_hedged);
                MixtureHedgeTail {
                    level,
                    var_unhedged,
                    var_hedged,
                    capital_unhedged,
                    capital_hedged,
                    capital_reduction_pct: (capital_unhedged > 0.0)
                        .then(|| 100.0 * (1.0 - capital_hedged / capital_unhedged)),
                }
            })
            .collect();
        Ok(MixtureHedge {
            contract: contract.to_string(),
            best_estimate_unhedged: be,
            best_estimate_hedged: be_hedged,
            tails,
        })
    }
}

/// `summary.json` → `models[]`: one valued model's fit quality, weight and figures.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModelFigures {
    /// Model kind.
    pub model: String,
    /// BIC by sex code and their sum (`total`), the sum being what the weights use.
    pub bic: BTreeMap<String, f64>,
    /// Weight in the model average (the weights sum to 1).
    pub weight: f64,
    /// Best estimate: the book's PV on this model's central path.
    pub best_estimate: f64,
    /// Trend risk only.
    pub trend: CapitalSummary,
    /// Trend and idiosyncratic risk.
    pub trend_idiosyncratic: Option<CapitalSummary>,
    /// The standard-formula stress on this model's best-estimate basis.
    pub standard_stress: StressFigures,
    /// One-year capital by re-calibration of this model, when asked for.
    pub one_year: Option<OneYearFigures>,
    /// This model's hedge prices and effectiveness, when hedges are configured.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub hedges: Option<serde_json::Value>,
}

impl ModelFigures {
    /// The figures of `summary` (a one-model summary) with the model's BIC by sex and
    /// its weight.
    pub fn new(summary: &RunSummary, bic_by_sex: &[(&str, f64)], weight: f64) -> Self {
        let mut bic: BTreeMap<String, f64> = bic_by_sex
            .iter()
            .map(|(sex, b)| (sex.to_string(), *b))
            .collect();
        bic.insert("total".into(), bic_by_sex.iter().map(|(_, b)| b).sum());
        ModelFigures {
            model: summary.run.model.clone(),
            bic,
            weight,
            best_estimate: summary.best_estimate,
            trend: summary.trend.clone(),
            trend_idiosyncratic: summary.trend_idiosyncratic.clone(),
            standard_stress: summary.standard_stress.clone(),
            one_year: summary.one_year.clone(),
            hedges: summary.hedges.clone(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bic_weights_match_a_hand_computation() {
        // BIC 1000, 1002, 1010: exp(0), exp(-1), exp(-5) = 1, 0.36787944117, 0.00673794700
        // (hand computation with e = 2.718281828...), total 1.37461738817, so weights
        // 0.72747516, 0.26762315, 0.00490169 for the models in the order 1002, 1000, 1010.
        let w = bic_weights(&[1002.0, 1000.0, 1010.0]);
        let expected = [0.267_623_154, 0.727_475_157, 0.004_901_689];
        for (got, want) in w.iter().zip(expected) {
            assert!((got - want).abs() < 1e-8, "{w:?}");
        }
        assert!((w.iter().sum::<f64>() - 1.0).abs() < 1e-15);
    }

    #[test]
    fn mixture_quantile_is_the_smallest_value_reaching_the_level() {
        // Model a: 1..=10, model b: 11..=20, weights 0.25, 0.75 (hand count): G(10) =
        // 0.25, G(11) = 0.25 + 0.075 = 0.325, G(20) = 1. p = 0.5 needs 0.75·k/10 ≥ 0.25,
        // k ≥ 3.33, so v = 14; p = 0.25 is reached at v = 10.
        let a: Vec<f64> = (1..=10).map(f64::from).collect();
        let b: Vec<f64> = (11..=20).map(f64::from).collect();
        let m = Mixture::new(&[1.0, 3.0], vec![a, b]).unwrap();
        assert_eq!(m.var(0.5), 14.0);
        assert_eq!(m.var(0.25), 10.0);
        assert_eq!(m.var(1.0), 20.0);
        // Tail at 19: only b's 19 and 20, each of mass 0.075, mean 19.5.
        assert!((m.tail_mean(19.0) - 19.5).abs() < 1e-12);
        // Mean 0.25·5.5 + 0.75·15.5 = 13.
        assert!((m.mean() - 13.0).abs() < 1e-12);
    }

    #[test]
    fn a_hedge_that_pays_the_excess_removes_the_mixture_capital() {
        // Two models, PVs 1..=10 and 11..=20, BE 5 and 15, weights 1:1; a hedge paying
        // PV − BE_m in every scenario (and 0 on the central path) leaves every hedged PV
        // at its model's BE, so the hedged mixture VaR at 0.89 is 15 (G(5) = 0.5,
        // G(15) = 1) and the hedged capital 15 − 10 = 5; unhedged, G(17) = 0.5 + 0.35 <
        // 0.89 ≤ G(18) = 0.5 + 0.4, so VaR 18 and capital 18 − 10 = 8 (hand count).
        let a: Vec<f64> = (1..=10).map(f64::from).collect();
        let b: Vec<f64> = (11..=20).map(f64::from).collect();
        let na: Vec<f64> = a.iter().map(|x| x - 5.0).collect();
        let nb: Vec<f64> = b.iter().map(|x| x - 15.0).collect();
        let samples = [
            HedgedSample {
                book_pv: &a,
                best_estimate: 5.0,
                net: &na,
                net_central: 0.0,
            },
            HedgedSample {
                book_pv: &b,
                best_estimate: 15.0,
                net: &nb,
                net_central: 0.0,
            },
        ];
        let h = MixtureHedge::new("swap", &[1.0, 1.0], &samples, &[0.89]).unwrap();
        let t = &h.tails[0];
        assert_eq!((t.var_unhedged, t.capital_unhedged), (18.0, 8.0));
        assert_eq!((t.var_hedged, t.capital_hedged), (15.0, 5.0));
        assert!((t.capital_reduction_pct.unwrap() - 100.0 * (1.0 - 5.0 / 8.0)).abs() < 1e-12);
    }

    #[test]
    fn one_model_gives_the_empirical_quantile() {
        // Without interpolation, the 0.9 quantile of 1..=100 is the 90th value (inverse
        // of the empirical distribution function: common practice, Hyndman–Fan type 1).
        let v: Vec<f64> = (1..=100).rev().map(f64::from).collect();
        let m = Mixture::new(&[2.0], vec![v]).unwrap();
        assert_eq!(m.var(0.9), 90.0);
        assert_eq!(m.var(0.905), 91.0);
    }
}
