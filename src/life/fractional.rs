//! Survival between integer ages, from one year's rate alone.
//!
//! A table of one-year rates says nothing about when in the year deaths fall, yet complete
//! expectations and m-thly annuities need it. The assumption is a value passed in (not a
//! global) so a config can switch it and tests can compare both.

use std::fmt;
use std::str::FromStr;

use serde::{Deserialize, Serialize};

/// How deaths are spread within each year of age.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Deserialize, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Fractional {
    /// Uniform distribution of deaths: `s p x = 1 − s q x` for 0 ≤ s ≤ 1.
    #[default]
    Udd,
    /// Constant force within the year: `s p x = (p x)^s`.
    ConstantForce,
}

impl Fractional {
    /// `s p x+k` for 0 ≤ s ≤ 1 given the year's rate `q` = q x+k.
    #[inline]
    pub fn survival(self, q: f64, s: f64) -> f64 {
        match self {
            Fractional::Udd => 1.0 - s * q,
            Fractional::ConstantForce => {
                if s <= 0.0 {
                    1.0
                } else {
                    // (1 − q)^s through ln_1p: exact to rounding when q is tiny.
                    (s * (-q).ln_1p()).exp()
                }
            }
        }
    }

    /// `∫_0^1 s p x+k ds`: the expected time lived in the year by a life alive at its start.
    ///
    /// UDD gives 1 − q/2. Constant force gives (1 − p)/μ with μ = −ln p, which tends to 1
    /// as q → 0 and to 0 as q → 1 (an infinite force kills at once).
    #[inline]
    pub fn year_lived(self, q: f64) -> f64 {
        match self {
            Fractional::Udd => 1.0 - 0.5 * q,
            Fractional::ConstantForce => {
                if q <= 0.0 {
                    1.0
                } else if q >= 1.0 {
                    0.0
                } else {
                    q / -(-q).ln_1p()
                }
            }
        }
    }

    /// The name used on the command line and in configs.
    pub fn name(self) -> &'static str {
        match self {
            Fractional::Udd => "udd",
            Fractional::ConstantForce => "constant-force",
        }
    }
}

impl fmt::Display for Fractional {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl FromStr for Fractional {
    type Err = String;

    /// Parses `udd` or `constant-force`.
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s.trim() {
            "udd" => Ok(Fractional::Udd),
            "constant-force" => Ok(Fractional::ConstantForce),
            other => Err(format!(
                "unknown fractional-age assumption `{other}`: use udd or constant-force"
            )),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ends_of_the_year_match_the_rate() {
        for method in [Fractional::Udd, Fractional::ConstantForce] {
            for q in [0.0, 1e-9, 0.01, 0.5, 1.0] {
                assert_eq!(method.survival(q, 0.0), 1.0);
                assert!((method.survival(q, 1.0) - (1.0 - q)).abs() < 1e-15);
            }
        }
    }

    #[test]
    fn year_lived_integrates_the_survival() {
        // Midpoint rule on a fine grid against the closed forms above.
        for method in [Fractional::Udd, Fractional::ConstantForce] {
            for q in [1e-6, 0.02, 0.3, 0.9] {
                let steps = 20_000;
                let h = 1.0 / steps as f64;
                let numeric: f64 = (0..steps)
                    .map(|i| method.survival(q, (i as f64 + 0.5) * h) * h)
                    .sum();
                assert!(
                    (numeric - method.year_lived(q)).abs() < 1e-9,
                    "{method} {q}"
                );
            }
        }
    }

    #[test]
    fn parses_names() {
        assert_eq!("udd".parse::<Fractional>(), Ok(Fractional::Udd));
        assert_eq!(
            "constant-force".parse::<Fractional>(),
            Ok(Fractional::ConstantForce)
        );
        assert!("balducci".parse::<Fractional>().is_err());
    }
}
