//! `tailspan check`: load everything a config names, exactly as a run would, and say what
//! was found, so a bad input fails in seconds rather than after a long fit.

use std::fmt::Write as _;
use std::io::Write as _;
use std::path::{Path, PathBuf};

use crate::data::published::PublishedTable;
use crate::data::{Book, Config, Experience, Sex};
use crate::error::{Error, Result};
use crate::interest::DiscountCurve;
use crate::pipeline::inputs::{CheckedInputs, checked_inputs};

/// Arguments of `tailspan check`.
#[derive(Debug, clap::Args)]
pub struct CheckArgs {
    /// The run configuration (TOML).
    pub config: PathBuf,
}

/// Runs `tailspan check`: validates the config and its inputs and prints a summary.
pub fn run(args: &CheckArgs) -> Result<()> {
    let text = summary(&args.config)?;
    let mut out = std::io::stdout().lock();
    out.write_all(text.as_bytes())
        .and_then(|()| out.flush())
        .map_err(|e| Error::io("standard output", e))
}

/// Loads the config at `path` and every input it names; returns a readable summary.
/// Writes nothing.
pub fn summary(path: &Path) -> Result<String> {
    let config = Config::load(path)?;
    let CheckedInputs {
        experience,
        book,
        curve,
    } = checked_inputs(&config)?;
    crate::pipeline::allocation::candidate_book(&config, book.as_ref())?;

    let mut s = String::new();
    // Writing to a String cannot fail.
    let _ = write_summary(&mut s, &config, &experience, book.as_ref(), curve.as_ref());
    let published = published_summary(&config)?;
    if let Some(at) = s.find("\nbook") {
        s.insert_str(at + 1, &published);
    }
    Ok(s)
}

/// What was read from published deaths and exposures tables, one line each.
fn published_summary(config: &Config) -> Result<String> {
    let mut s = String::new();
    for (role, path) in config.experience_inputs() {
        if role == "experience" {
            continue;
        }
        let table = PublishedTable::load(&path)?;
        let _ = writeln!(s, "{role:<11} {}", path.display());
        let _ = writeln!(s, "  read      {}", table.describe());
    }
    Ok(s)
}

fn write_summary(
    s: &mut String,
    config: &Config,
    experience: &Experience,
    book: Option<&Book>,
    curve: Option<&DiscountCurve>,
) -> std::fmt::Result {
    let (ages, years) = (config.ages(), config.years());
    let sexes: Vec<&str> = config.data.sexes.iter().map(|x| x.code()).collect();
    writeln!(s, "config      {}", config.file.display())?;
    writeln!(s, "experience  {}", experience.source.display())?;
    writeln!(
        s,
        "  window    ages {}-{} ({}), years {}-{} ({}), sexes {}: {} cells",
        ages.first,
        ages.last,
        ages.len(),
        years.first,
        years.last,
        years.len(),
        sexes.join(" "),
        ages.len() * years.len() * sexes.len()
    )?;
    for p in &experience.populations {
        let (deaths, exposure) = (p.total_deaths(), p.total_exposure());
        writeln!(
            s,
            "  sex {}     deaths {}, exposure {} person-years, crude death rate {:.5}",
            p.sex,
            grouped(deaths),
            grouped(exposure),
            deaths / exposure
        )?;
    }
    match book {
        None => writeln!(s, "book        none")?,
        Some(book) => {
            let lives: f64 = book.policies.iter().map(|p| p.weight).sum();
            let min_age = book.policies.iter().map(|p| p.age).min().unwrap_or(0);
            let max_age = book.policies.iter().map(|p| p.age).max().unwrap_or(0);
            writeln!(s, "book        {}", book.source.display())?;
            writeln!(
                s,
                "  policies  {} ({} lives), ages {min_age}-{max_age}",
                grouped(book.policies.len() as f64),
                grouped(lives)
            )?;
            for sex in Sex::ALL {
                let n = book.policies.iter().filter(|p| p.sex == sex).count();
                if n > 0 {
                    writeln!(
                        s,
                        "  sex {sex}     {} policies, {} lives, annual amount {}",
                        grouped(n as f64),
                        grouped(book.lives(sex)),
                        grouped(book.annual_amount(sex))
                    )?;
                }
            }
            let count = |f: &dyn Fn(&crate::data::Policy) -> bool| {
                book.policies.iter().filter(|p| f(p)).count()
            };
            writeln!(
                s,
                "  features  {} deferred, {} guaranteed, {} escalating, {} fixed-term",
                count(&|p| p.deferral > 0),
                count(&|p| p.guarantee > 0),
                count(&|p| p.escalation != 0.0),
                count(&|p| p.term.is_some())
            )?;
        }
    }
    match curve {
        None => writeln!(s, "discount    none")?,
        Some(curve) => writeln!(s, "discount    {curve}")?,
    }
    writeln!(
        s,
        "valuation   year {}, payments in {}, {} a year",
        config.valuation_year(),
        match config.valuation.timing {
            crate::interest::Timing::Advance => "advance",
            crate::interest::Timing::Arrears => "arrears",
        },
        config.valuation.frequency
    )?;
    writeln!(s, "ok")
}

/// `1234567.8` → `1 234 568`: whole units with thin grouping, easy to read at a glance.
fn grouped(value: f64) -> String {
    let digits = format!("{:.0}", value.abs());
    let mut out = String::new();
    for (i, c) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i) % 3 == 0 {
            out.push(' ');
        }
        out.push(c);
    }
    if value < 0.0 && digits != "0" {
        out.insert(0, '-');
    }
    out
}

#[cfg(test)]
mod tests {
    use super::grouped;

    #[test]
    fn groups_thousands() {
        assert_eq!(grouped(0.4), "0");
        assert_eq!(grouped(999.0), "999");
        assert_eq!(grouped(1000.0), "1 000");
        assert_eq!(grouped(1234567.8), "1 234 568");
        assert_eq!(grouped(-12345.0), "-12 345");
    }
}
