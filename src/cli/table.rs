//! `tailspan table`: a deterministic life table from a mortality law, as CSV on stdout.
//!
//! Every argument is checked and every row computed before the first byte is written, so
//! a bad argument leaves no partial table behind. Numbers are printed in full (shortest
//! round-trip) precision so the output can be checked against other tools.

use std::fmt;
use std::io::{self, BufWriter, Write};

use crate::error::{Error, Result};
use crate::life::{
    Annuity, FlatRate, Fractional, MortalityLaw, complete_expectation, complete_expectation_n,
    curtate_expectation, curtate_expectation_n, survival_curve,
};

/// The CSV header, fixed by the command-line contract.
pub const HEADER: &str = "age,qx,px,lx,e_complete,e_curtate,e_complete_n,e_curtate_n,annuity_due";

/// Oldest `--max-age` accepted: far past any human lifetime, small enough to stay cheap.
const MAX_AGE_LIMIT: u32 = 150;

/// Arguments of `tailspan table`.
#[derive(Debug, clap::Args)]
pub struct TableArgs {
    /// Mortality law: gompertz:B,c | makeham:A,B,c | constant:mu | de-moivre:omega.
    #[arg(long, value_name = "LAW")]
    pub law: String,
    /// Flat annual effective interest rate for the annuity column (0.05 is 5 %).
    #[arg(long, value_name = "RATE", allow_negative_numbers = true)]
    pub rate: f64,
    /// Ages shown: FIRST,LAST (inclusive) or a single AGE.
    #[arg(long, value_name = "FIRST,LAST")]
    pub ages: String,
    /// Horizon in years of the truncated expectations e_complete_n and e_curtate_n.
    #[arg(long, value_name = "YEARS")]
    pub horizon: u32,
    /// Highest age of the table; q is 1 there.
    #[arg(long, value_name = "AGE", default_value_t = 120)]
    pub max_age: u32,
    /// Number of lives at the radix age.
    #[arg(long, value_name = "LIVES", default_value_t = 100_000.0)]
    pub radix: f64,
    /// Age at which lx equals the radix (default: the first age shown).
    #[arg(long, value_name = "AGE")]
    pub radix_age: Option<u32>,
    /// Survival between integer ages: udd or constant-force.
    #[arg(long, value_name = "METHOD", default_value = "udd")]
    pub fractional: String,
    /// Payments a year in the annuity column, each of 1/m, survival within the year per --fractional.
    #[arg(long, value_name = "M", default_value_t = 1)]
    pub frequency: u32,
}

/// Checked arguments: everything [`TableArgs`] holds, validated.
#[derive(Debug, Clone, Copy)]
struct TableSpec {
    law: MortalityLaw,
    rate_pa: f64,
    first_age: u32,
    last_age: u32,
    horizon_years: u32,
    max_age: u32,
    radix: f64,
    radix_age: u32,
    fractional: Fractional,
    frequency: u32,
}

/// One row of the table.
#[derive(Debug, Clone, Copy)]
struct Row {
    age: u32,
    qx: f64,
    px: f64,
    lx: f64,
    e_complete: f64,
    e_curtate: f64,
    e_complete_n: f64,
    e_curtate_n: f64,
    annuity_due: f64,
}

/// Runs `tailspan table`: checks the arguments, computes the table, prints it as CSV.
pub fn run(args: &TableArgs) -> Result<()> {
    let spec = check(args)?;
    let rows = compute(&spec)?;
    let stdout = io::stdout();
    let mut out = BufWriter::new(stdout.lock());
    write_rows(&mut out, &rows)
        .and_then(|()| out.flush())
        .map_err(|e| Error::io("<stdout>", e))
}

fn check(args: &TableArgs) -> Result<TableSpec> {
    let law: MortalityLaw = args
        .law
        .parse()
        .map_err(|rule| Error::argument("--law", rule))?;
    if !(args.rate.is_finite() && args.rate > -1.0) {
        return Err(Error::argument(
            "--rate",
            format!("must be a finite rate above -1, found {}", args.rate),
        ));
    }
    if args.max_age == 0 || args.max_age > MAX_AGE_LIMIT {
        return Err(Error::argument(
            "--max-age",
            format!(
                "must be between 1 and {MAX_AGE_LIMIT}, found {}",
                args.max_age
            ),
        ));
    }
    if let Some(omega) = law.limiting_age()
        && omega > f64::from(args.max_age) + 1.0
    {
        return Err(Error::argument(
            "--max-age",
            format!(
                "{law} reaches age {omega}, past the table's end at {} + 1; raise --max-age",
                args.max_age
            ),
        ));
    }
    let (first_age, last_age) = parse_ages(&args.ages, args.max_age)?;
    if !(args.radix.is_finite() && args.radix > 0.0) {
        return Err(Error::argument(
            "--radix",
            format!("must be a positive number, found {}", args.radix),
        ));
    }
    let radix_age = args.radix_age.unwrap_or(first_age);
    if radix_age > args.max_age {
        return Err(Error::argument(
            "--radix-age",
            format!(
                "must not exceed --max-age {}, found {radix_age}",
                args.max_age
            ),
        ));
    }
    let fractional: Fractional = args
        .fractional
        .parse()
        .map_err(|rule| Error::argument("--fractional", rule))?;
    if args.frequency == 0 || args.frequency > 365 {
        return Err(Error::argument(
            "--frequency",
            format!(
                "must be between 1 and 365 payments a year, found {}",
                args.frequency
            ),
        ));
    }
    Ok(TableSpec {
        law,
        rate_pa: args.rate,
        first_age,
        last_age,
        horizon_years: args.horizon,
        max_age: args.max_age,
        radix: args.radix,
        radix_age,
        fractional,
        frequency: args.frequency,
    })
}

/// Parses `FIRST,LAST` or `AGE` into an inclusive range within 0..=max_age.
fn parse_ages(text: &str, max_age: u32) -> Result<(u32, u32)> {
    let bad = |rule: String| Error::argument("--ages", rule);
    let parse = |part: &str| {
        part.trim().parse::<u32>().map_err(|_| {
            bad(format!(
                "`{part}` is not a whole age; write FIRST,LAST such as 60,65"
            ))
        })
    };
    let (first, last) = match text.split_once(',') {
        Some((a, b)) => (parse(a)?, parse(b)?),
        None => {
            let age = parse(text)?;
            (age, age)
        }
    };
    if first > last {
        return Err(bad(format!("first age {first} is above last age {last}")));
    }
    if last > max_age {
        return Err(bad(format!("last age {last} is above --max-age {max_age}")));
    }
    Ok((first, last))
}

fn compute(spec: &TableSpec) -> Result<Vec<Row>> {
    // Rates from the youngest age needed (shown or radix) up to max_age, where q is 1.
    let base = spec.first_age.min(spec.radix_age);
    let q: Vec<f64> = (base..=spec.max_age)
        .map(|age| {
            if age == spec.max_age {
                1.0
            } else {
                spec.law.q(f64::from(age)).clamp(0.0, 1.0)
            }
        })
        .collect();
    let mut survival = vec![0.0; q.len() + 1];
    survival_curve(&q, &mut survival);
    let radix_survival = survival[(spec.radix_age - base) as usize];
    if radix_survival <= 0.0 {
        return Err(Error::argument(
            "--radix-age",
            format!(
                "no one survives to age {} under {}",
                spec.radix_age, spec.law
            ),
        ));
    }
    let discount = FlatRate::new(spec.rate_pa);
    let annuity = Annuity::due()
        .frequency(spec.frequency)
        .fractional(spec.fractional);
    let horizon = spec.horizon_years as usize;
    let rows: Vec<Row> = (spec.first_age..=spec.last_age)
        .map(|age| {
            let k = (age - base) as usize;
            let rates = &q[k..];
            Row {
                age,
                qx: rates[0],
                // From the law, not 1 − q, which keeps few digits where q is close to 1.
                px: if age == spec.max_age {
                    0.0
                } else {
                    spec.law.survival(f64::from(age), 1.0)
                },
                lx: spec.radix * survival[k] / radix_survival,
                e_complete: complete_expectation(rates, spec.fractional),
                e_curtate: curtate_expectation(rates),
                e_complete_n: complete_expectation_n(rates, horizon, spec.fractional),
                e_curtate_n: curtate_expectation_n(rates, horizon),
                annuity_due: annuity.value(rates, &discount),
            }
        })
        .collect();
    if let Some(row) = rows.iter().find(|r| !row_is_finite(r)) {
        return Err(Error::Numerical(format!(
            "non-finite value in the table at age {} under {}",
            row.age, spec.law
        )));
    }
    Ok(rows)
}

fn row_is_finite(row: &Row) -> bool {
    [
        row.qx,
        row.px,
        row.lx,
        row.e_complete,
        row.e_curtate,
        row.e_complete_n,
        row.e_curtate_n,
        row.annuity_due,
    ]
    .iter()
    .all(|v| v.is_finite())
}

fn write_rows(out: &mut impl Write, rows: &[Row]) -> io::Result<()> {
    writeln!(out, "{HEADER}")?;
    for r in rows {
        writeln!(
            out,
            "{},{},{},{},{},{},{},{},{}",
            r.age,
            Number(r.qx),
            Number(r.px),
            Number(r.lx),
            Number(r.e_complete),
            Number(r.e_curtate),
            Number(r.e_complete_n),
            Number(r.e_curtate_n),
            Number(r.annuity_due)
        )?;
    }
    Ok(())
}

/// A value printed in full (shortest round-trip) precision, in scientific notation when
/// tiny so that the survivors at extreme ages do not print as fifty zeros.
struct Number(f64);

impl fmt::Display for Number {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.0 == 0.0 || self.0.abs() >= 1e-4 {
            write!(f, "{}", self.0)
        } else {
            write!(f, "{:e}", self.0)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_round_trip() {
        for v in [
            0.0,
            1.0,
            13.549790037743087,
            1e-4,
            9.646151100106692e-9,
            8e-300,
        ] {
            let text = Number(v).to_string();
            assert_eq!(text.parse::<f64>().unwrap(), v, "{text}");
            assert!(text.len() < 30, "{text}");
        }
    }

    #[test]
    fn ages_parse_as_an_inclusive_range() {
        assert_eq!(parse_ages("60,65", 120).unwrap(), (60, 65));
        assert_eq!(parse_ages(" 65 ", 120).unwrap(), (65, 65));
        assert!(parse_ages("65,60", 120).is_err());
        assert!(parse_ages("60,121", 120).is_err());
        assert!(parse_ages("sixty", 120).is_err());
        assert!(parse_ages("-1,5", 120).is_err());
    }
}
