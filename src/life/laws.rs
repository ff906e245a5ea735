//! Parametric mortality laws with exact survival functions.
//!
//! Exact `t p x` (rather than numerically integrated forces) keeps the deterministic life
//! tables free of quadrature error, so they can be checked against published tables.

use std::fmt;
use std::str::FromStr;

/// A law of mortality given by its force μ(x).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum MortalityLaw {
    /// Gompertz: μ(x) = B c^x.
    Gompertz {
        /// Level B > 0.
        b: f64,
        /// Growth c > 1.
        c: f64,
    },
    /// Makeham: μ(x) = A + B c^x.
    Makeham {
        /// Age-independent hazard A ≥ 0.
        a: f64,
        /// Level B > 0.
        b: f64,
        /// Growth c > 1.
        c: f64,
    },
    /// Constant force μ.
    Constant {
        /// Force of mortality μ > 0.
        mu: f64,
    },
    /// De Moivre: uniform deaths up to the limiting age ω.
    DeMoivre {
        /// Limiting age ω > 0.
        omega: f64,
    },
}

impl MortalityLaw {
    /// Force of mortality μ(x).
    pub fn force(&self, x: f64) -> f64 {
        match *self {
            MortalityLaw::Gompertz { b, c } => b * c.powf(x),
            MortalityLaw::Makeham { a, b, c } => a + b * c.powf(x),
            MortalityLaw::Constant { mu } => mu,
            MortalityLaw::DeMoivre { omega } => {
                if x < omega {
                    1.0 / (omega - x)
                } else {
                    f64::INFINITY
                }
            }
        }
    }

    /// Integrated force `∫_0^t μ(x + s) ds` for t ≥ 0, exact (infinite past a limiting age).
    pub fn cumulative_force(&self, x: f64, t: f64) -> f64 {
        if t <= 0.0 {
            return 0.0;
        }
        // expm1 keeps c^t − 1 accurate for short intervals, where c^t is close to 1.
        let gompertz = |b: f64, c: f64| b * c.powf(x) * (t * c.ln()).exp_m1() / c.ln();
        match *self {
            MortalityLaw::Gompertz { b, c } => gompertz(b, c),
            MortalityLaw::Makeham { a, b, c } => a * t + gompertz(b, c),
            MortalityLaw::Constant { mu } => mu * t,
            MortalityLaw::DeMoivre { omega } => {
                if x + t >= omega {
                    f64::INFINITY
                } else {
                    -(-t / (omega - x)).ln_1p()
                }
            }
        }
    }

    /// Survival probability `t p x` for t ≥ 0, exact.
    pub fn survival(&self, x: f64, t: f64) -> f64 {
        if t <= 0.0 {
            return 1.0;
        }
        match *self {
            MortalityLaw::DeMoivre { omega } => {
                if x >= omega {
                    0.0
                } else {
                    ((omega - x - t) / (omega - x)).max(0.0)
                }
            }
            _ => (-self.cumulative_force(x, t)).exp(),
        }
    }

    /// One-year death probability q x = 1 − p x, accurate even where q is tiny.
    pub fn q(&self, x: f64) -> f64 {
        match *self {
            MortalityLaw::DeMoivre { .. } => 1.0 - self.survival(x, 1.0),
            _ => -(-self.cumulative_force(x, 1.0)).exp_m1(),
        }
    }

    /// Limiting age, if the law has one.
    pub fn limiting_age(&self) -> Option<f64> {
        match *self {
            MortalityLaw::DeMoivre { omega } => Some(omega),
            _ => None,
        }
    }
}

impl fmt::Display for MortalityLaw {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            MortalityLaw::Gompertz { b, c } => write!(f, "gompertz:{b},{c}"),
            MortalityLaw::Makeham { a, b, c } => write!(f, "makeham:{a},{b},{c}"),
            MortalityLaw::Constant { mu } => write!(f, "constant:{mu}"),
            MortalityLaw::DeMoivre { omega } => write!(f, "de-moivre:{omega}"),
        }
    }
}

impl FromStr for MortalityLaw {
    type Err = String;

    /// Parses `gompertz:B,c`, `makeham:A,B,c`, `constant:mu` or `de-moivre:omega`.
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        let (name, params) = s.split_once(':').ok_or_else(|| {
            format!("`{s}` is not NAME:PARAMS, e.g. makeham:0.00022,2.7e-6,1.124")
        })?;
        let values: Vec<f64> = params
            .split(',')
            .map(|p| {
                p.trim()
                    .parse::<f64>()
                    .map_err(|_| format!("`{p}` in `{s}` is not a number"))
            })
            .collect::<Result<_, _>>()?;
        if values.iter().any(|v| !v.is_finite()) {
            return Err(format!("`{s}`: parameters must be finite"));
        }
        let want = |n: usize| {
            if values.len() == n {
                Ok(())
            } else {
                Err(format!(
                    "`{name}` takes {n} parameter(s), found {}",
                    values.len()
                ))
            }
        };
        let law = match name.trim() {
            "gompertz" => {
                want(2)?;
                MortalityLaw::Gompertz {
                    b: values[0],
                    c: values[1],
                }
            }
            "makeham" => {
                want(3)?;
                MortalityLaw::Makeham {
                    a: values[0],
                    b: values[1],
                    c: values[2],
                }
            }
            "constant" => {
                want(1)?;
                MortalityLaw::Constant { mu: values[0] }
            }
            "de-moivre" => {
                want(1)?;
                MortalityLaw::DeMoivre { omega: values[0] }
            }
            other => {
                return Err(format!(
                    "unknown law `{other}`: use gompertz:B,c, makeham:A,B,c, constant:mu or de-moivre:omega"
                ));
            }
        };
        law.check()?;
        Ok(law)
    }
}

impl MortalityLaw {
    /// Checks the parameters describe a proper law.
    pub fn check(&self) -> Result<(), String> {
        match *self {
            MortalityLaw::Gompertz { b, c } | MortalityLaw::Makeham { b, c, .. }
                if !(b > 0.0 && c > 1.0) =>
            {
                Err(format!("{self}: need B > 0 and c > 1"))
            }
            MortalityLaw::Makeham { a, .. } if a < 0.0 => Err(format!("{self}: need A >= 0")),
            MortalityLaw::Constant { mu } if mu <= 0.0 => Err(format!("{self}: need mu > 0")),
            MortalityLaw::DeMoivre { omega } if omega <= 0.0 => {
                Err(format!("{self}: need omega > 0"))
            }
            _ => Ok(()),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_each_law() {
        let m: MortalityLaw = "makeham:0.00022,2.7e-6,1.124".parse().unwrap();
        assert_eq!(
            m,
            MortalityLaw::Makeham {
                a: 0.00022,
                b: 2.7e-6,
                c: 1.124
            }
        );
        assert!("gompertz:1".parse::<MortalityLaw>().is_err());
        assert!("weibull:1,2".parse::<MortalityLaw>().is_err());
        assert!("constant:-1".parse::<MortalityLaw>().is_err());
    }

    #[test]
    fn survival_multiplies_over_time() {
        // t+s p x = t p x · s p x+t (common practice).
        let law = MortalityLaw::Makeham {
            a: 0.00022,
            b: 2.7e-6,
            c: 1.124,
        };
        let lhs = law.survival(60.0, 7.5);
        let rhs = law.survival(60.0, 3.0) * law.survival(63.0, 4.5);
        assert!((lhs - rhs).abs() < 1e-14);
    }
}
