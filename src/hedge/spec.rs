//! The `[hedge]` config section: which contracts to price, on what basis.
//!
//! The section is optional; when present it must list at least one contract. Each rule a
//! contract can break is checked here, before any projection work, with the dotted key at
//! fault (`hedge.swap[0].term`) in the message.

use std::collections::HashMap;
use std::fmt;

use serde::de::{self, Visitor};
use serde::{Deserialize, Deserializer, Serialize, Serializer};

use crate::data::{Config, Sex};
use crate::error::{Error, Result};

/// Default cost-of-capital rate: the 6 % of the Solvency II risk margin (Delegated
/// Regulation (EU) 2015/35, Art. 39).
pub const DEFAULT_COST_OF_CAPITAL: f64 = 0.06;

/// Default confidence level of the provider's capital (Solvency II calibration, 99.5 %).
pub const DEFAULT_CAPITAL_LEVEL: f64 = 0.995;

/// Default target Sharpe ratio of the provider's net position. 0.25 is the level suggested
/// for longevity risk by Loeys, Panigirtzoglou & Ribeiro, "Longevity: a market in the
/// making" (J.P. Morgan, 2007) — from memory.
pub const DEFAULT_TARGET_SHARPE: f64 = 0.25;

/// `[hedge]`: pricing basis and the contracts.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct HedgeConfig {
    /// Annual cost-of-capital rate charged by the provider, in (0, 1).
    #[serde(default = "default_cost_of_capital")]
    pub cost_of_capital: f64,
    /// Confidence level of the provider's run-off capital, in (0, 1).
    #[serde(default = "default_capital_level")]
    pub capital_level: f64,
    /// Target Sharpe ratio (mean over standard deviation) of the provider's net position.
    #[serde(default = "default_target_sharpe")]
    pub target_sharpe: f64,
    /// Longevity swaps on the book (`[[hedge.swap]]`).
    #[serde(default)]
    pub swap: Vec<SwapConfig>,
    /// q-forwards on the population (`[[hedge.qforward]]`).
    #[serde(default)]
    pub qforward: Vec<QForwardConfig>,
}

/// Which side of a contract the book's owner holds.
#[derive(Debug, Clone, Copy, Default, Deserialize, Serialize, PartialEq, Eq)]
#[serde(rename_all = "kebab-case")]
pub enum Side {
    /// Lays off longevity risk: pays the swap's fixed leg and receives the benefits; receives
    /// the q-forward's fixed rate and pays the realised rate.
    #[default]
    Hedger,
    /// Takes longevity risk on: the reverse of every leg.
    Provider,
}

impl Side {
    /// +1 for the hedger, −1 for the provider: the sign of the hedger's net.
    pub fn sign(self) -> f64 {
        match self {
            Side::Hedger => 1.0,
            Side::Provider => -1.0,
        }
    }
}

/// What a swap's floating leg pays.
#[derive(Debug, Clone, Copy, Default, Deserialize, Serialize, PartialEq, Eq)]
#[serde(rename_all = "kebab-case")]
pub enum FloatingBasis {
    /// The book's realised benefits, individual deaths included (trend and idiosyncratic).
    #[default]
    Indemnity,
    /// The book's expected benefits on the realised mortality path (trend only).
    Parametric,
}

/// How a swap's fixed-leg loading π is set: a rate, or one of the two pricing methods.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub enum PremiumChoice {
    /// A given loading (0.01 is 1 %).
    Rate(f64),
    /// The cost-of-capital price.
    #[default]
    CostOfCapital,
    /// The target-Sharpe price.
    Sharpe,
}

/// A q-forward's notional: an amount, or the minimum-variance hedge ratio.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub enum NotionalChoice {
    /// A given notional (money per unit of q).
    Amount(f64),
    /// Minimum-variance notional against the book's PV.
    #[default]
    HedgeRatio,
}

/// `[[hedge.swap]]`: a longevity swap on the book's benefits.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct SwapConfig {
    /// Contract name in outputs (default `swap-1`, `swap-2`, …).
    #[serde(default)]
    pub name: Option<String>,
    /// Years covered from the valuation date; absent: to run-off.
    #[serde(default)]
    pub term: Option<u32>,
    /// Share of the book's benefits covered, in (0, 1].
    #[serde(default = "default_share")]
    pub share: f64,
    /// Fixed-leg loading π: a rate, `"cost-of-capital"` (default) or `"sharpe"`.
    #[serde(default)]
    pub premium: PremiumChoice,
    /// What the floating leg pays: `"indemnity"` (default) or `"parametric"`.
    #[serde(default)]
    pub floating: FloatingBasis,
    /// The book owner's side: `"hedger"` (default) or `"provider"`.
    #[serde(default)]
    pub side: Side,
}

/// `[[hedge.qforward]]`: a q-forward on one population rate.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct QForwardConfig {
    /// Contract name in outputs (default `qforward-1`, …).
    #[serde(default)]
    pub name: Option<String>,
    /// Reference sex.
    pub sex: Sex,
    /// Reference age (last birthday).
    pub age: i32,
    /// Calendar year whose one-year rate q(age, maturity) settles the contract.
    pub maturity: i32,
    /// Risk premium: fixed rate = central q × (1 − premium), in [0, 1).
    #[serde(default)]
    pub premium: f64,
    /// Notional: an amount, or `"hedge-ratio"` (default) for the minimum-variance hedge.
    #[serde(default)]
    pub notional: NotionalChoice,
    /// The book owner's side: `"hedger"` (default) or `"provider"`.
    #[serde(default)]
    pub side: Side,
}

fn default_cost_of_capital() -> f64 {
    DEFAULT_COST_OF_CAPITAL
}
fn default_capital_level() -> f64 {
    DEFAULT_CAPITAL_LEVEL
}
fn default_target_sharpe() -> f64 {
    DEFAULT_TARGET_SHARPE
}
fn default_share() -> f64 {
    1.0
}

impl SwapConfig {
    /// The name in outputs for the swap at position `index`.
    pub fn name_at(&self, index: usize) -> String {
        self.name
            .clone()
            .unwrap_or_else(|| format!("swap-{}", index + 1))
    }
}

impl QForwardConfig {
    /// The name in outputs for the q-forward at position `index`.
    pub fn name_at(&self, index: usize) -> String {
        self.name
            .clone()
            .unwrap_or_else(|| format!("qforward-{}", index + 1))
    }
}

impl HedgeConfig {
    /// The population cells (sex, age, calendar year) whose rates the q-forwards need, in
    /// config order.
    pub fn reference_cells(&self) -> Vec<(Sex, i32, i32)> {
        self.qforward
            .iter()
            .map(|q| (q.sex, q.age, q.maturity))
            .collect()
    }

    /// Checks every rule serde's types cannot express against the rest of `config`.
    pub fn check(&self, config: &Config) -> Result<()> {
        let err = |key: String, rule: String| Error::config(&config.file, key, rule);
        if self.swap.is_empty() && self.qforward.is_empty() {
            return Err(err(
                "hedge".into(),
                "lists no contract: add a `[[hedge.swap]]` or `[[hedge.qforward]]` table, or remove `[hedge]`".into(),
            ));
        }
        if config.data.book.is_none() {
            return Err(err(
                "hedge".into(),
                "hedges are priced and tested against the book: set `data.book`".into(),
            ));
        }
        if !open_unit(self.cost_of_capital) {
            return Err(err(
                "hedge.cost_of_capital".into(),
                format!(
                    "must be a rate in (0, 1) such as 0.06 for 6 %, found {}",
                    self.cost_of_capital
                ),
            ));
        }
        if !open_unit(self.capital_level) {
            return Err(err(
                "hedge.capital_level".into(),
                format!(
                    "must be a probability in (0, 1) such as 0.995, found {}",
                    self.capital_level
                ),
            ));
        }
        if !(self.target_sharpe.is_finite() && self.target_sharpe >= 0.0) {
            return Err(err(
                "hedge.target_sharpe".into(),
                format!(
                    "must be a finite number at least 0, found {}",
                    self.target_sharpe
                ),
            ));
        }

        let year = config.valuation_year();
        let last_year = config.data.years[1] + config.projection.horizon as i32;
        let mut names: HashMap<String, String> = HashMap::new();
        for (i, s) in self.swap.iter().enumerate() {
            let key = format!("hedge.swap[{i}]");
            if let Some(term) = s.term {
                if term == 0 {
                    return Err(err(format!("{key}.term"), "must be at least 1 year".into()));
                }
                // In i64: a term near u32::MAX does not fit an i32 year.
                let end = i64::from(year) + i64::from(term) - 1;
                if end > i64::from(last_year) {
                    return Err(err(
                        format!("{key}.term"),
                        format!(
                            "{term} years from {year} runs to {end}, beyond the projection's last year {last_year}: shorten the term or raise `projection.horizon`"
                        ),
                    ));
                }
            }
            if !(s.share.is_finite() && s.share > 0.0 && s.share <= 1.0) {
                return Err(err(
                    format!("{key}.share"),
                    format!(
                        "must be a fraction in (0, 1] such as 0.5 for half the book, found {}",
                        s.share
                    ),
                ));
            }
            if let PremiumChoice::Rate(r) = s.premium
                && !(r.is_finite() && r > -1.0 && r < 1.0)
            {
                return Err(err(
                    format!("{key}.premium"),
                    format!(
                        "a loading must be a decimal in (-1, 1) such as 0.02 for 2 %, found {r}"
                    ),
                ));
            }
            unique(&mut names, s.name_at(i), format!("{key}.name"))
                .map_err(|r| err(format!("{key}.name"), r))?;
        }

        let ages = config.ages();
        let max_age = config.model.max_age;
        for (i, q) in self.qforward.iter().enumerate() {
            let key = format!("hedge.qforward[{i}]");
            if !config.data.sexes.contains(&q.sex) {
                return Err(err(
                    format!("{key}.sex"),
                    format!("{} is not among the projected sexes `data.sexes`", q.sex),
                ));
            }
            if q.age < ages.first || q.age >= max_age {
                return Err(err(
                    format!("{key}.age"),
                    format!(
                        "must be a fitted or closed age from {} to {} (q is 1 at `model.max_age` {max_age}), found {}",
                        ages.first,
                        max_age - 1,
                        q.age
                    ),
                ));
            }
            if q.maturity < year || q.maturity > last_year {
                return Err(err(
                    format!("{key}.maturity"),
                    format!(
                        "must be a projected year from the valuation year {year} to {last_year}, found {}",
                        q.maturity
                    ),
                ));
            }
            if !(q.premium.is_finite() && q.premium >= 0.0 && q.premium < 1.0) {
                return Err(err(
                    format!("{key}.premium"),
                    format!(
                        "must be a fraction in [0, 1) such as 0.05 for 5 % below the central rate, found {}",
                        q.premium
                    ),
                ));
            }
            if let NotionalChoice::Amount(n) = q.notional
                && !(n.is_finite() && n >= 0.0)
            {
                return Err(err(
                    format!("{key}.notional"),
                    format!("must be a finite amount at least 0, or \"hedge-ratio\", found {n}"),
                ));
            }
            unique(&mut names, q.name_at(i), format!("{key}.name"))
                .map_err(|r| err(format!("{key}.name"), r))?;
        }
        Ok(())
    }
}

/// Whether `x` lies in the open interval (0, 1).
fn open_unit(x: f64) -> bool {
    x > 0.0 && x < 1.0
}

/// Records `name` for `key`; an error if it is empty or already taken.
fn unique(
    names: &mut HashMap<String, String>,
    name: String,
    key: String,
) -> std::result::Result<(), String> {
    if name.trim().is_empty() {
        return Err("must not be empty".into());
    }
    if let Some(first) = names.get(&name) {
        return Err(format!("contract name `{name}` is also used by `{first}`"));
    }
    names.insert(name, key);
    Ok(())
}

/// Accepts a number or one of the given words; `word` maps a word to a value.
struct NumberOrWord<T> {
    expecting: &'static str,
    number: fn(f64) -> T,
    word: fn(&str) -> Option<T>,
}

impl<T> Visitor<'_> for NumberOrWord<T> {
    type Value = T;

    fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.expecting)
    }

    fn visit_f64<E: de::Error>(self, v: f64) -> std::result::Result<T, E> {
        Ok((self.number)(v))
    }

    fn visit_i64<E: de::Error>(self, v: i64) -> std::result::Result<T, E> {
        Ok((self.number)(v as f64))
    }

    fn visit_u64<E: de::Error>(self, v: u64) -> std::result::Result<T, E> {
        Ok((self.number)(v as f64))
    }

    fn visit_str<E: de::Error>(self, v: &str) -> std::result::Result<T, E> {
        (self.word)(v).ok_or_else(|| E::invalid_value(de::Unexpected::Str(v), &self.expecting))
    }
}

impl<'de> Deserialize<'de> for PremiumChoice {
    fn deserialize<D: Deserializer<'de>>(d: D) -> std::result::Result<Self, D::Error> {
        d.deserialize_any(NumberOrWord {
            expecting: "a loading such as 0.02, or \"cost-of-capital\" or \"sharpe\"",
            number: PremiumChoice::Rate,
            word: |w| match w {
                "cost-of-capital" => Some(PremiumChoice::CostOfCapital),
                "sharpe" => Some(PremiumChoice::Sharpe),
                _ => None,
            },
        })
    }
}

impl Serialize for PremiumChoice {
    fn serialize<S: Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        match self {
            PremiumChoice::Rate(r) => s.serialize_f64(*r),
            PremiumChoice::CostOfCapital => s.serialize_str("cost-of-capital"),
            PremiumChoice::Sharpe => s.serialize_str("sharpe"),
        }
    }
}

impl<'de> Deserialize<'de> for NotionalChoice {
    fn deserialize<D: Deserializer<'de>>(d: D) -> std::result::Result<Self, D::Error> {
        d.deserialize_any(NumberOrWord {
            expecting: "an amount such as 1000000, or \"hedge-ratio\"",
            number: NotionalChoice::Amount,
            word: |w| (w == "hedge-ratio").then_some(NotionalChoice::HedgeRatio),
        })
    }
}

impl Serialize for NotionalChoice {
    fn serialize<S: Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        match self {
            NotionalChoice::Amount(n) => s.serialize_f64(*n),
            NotionalChoice::HedgeRatio => s.serialize_str("hedge-ratio"),
        }
    }
}
