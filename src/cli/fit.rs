//! `tailspan fit`: calibrate the configured models and write `fit.json` and
//! `residuals.parquet`.
//!
//! Both files are completed under temporary names and only then renamed, so a failed fit
//! leaves the output folder as it was; `fit.json` is renamed last, after the residuals it
//! describes. Both record the run's provenance.

use std::io::Write;
use std::path::PathBuf;
use std::sync::Arc;

use arrow_array::{ArrayRef, Float64Array, Int32Array, StringArray};
use arrow_schema::{DataType, Field, Schema};

use crate::data::{Config, Experience, Population};
use crate::error::{Error, Result};
use crate::io::parquet::{DEFAULT_ROWS_PER_GROUP, ParquetSink};
use crate::io::provenance::{Recorded, retire_stale_records};
use crate::io::{AtomicFile, Provenance};
use crate::models::FitSet;

/// Arguments of `tailspan fit`.
#[derive(Debug, clap::Args)]
pub struct FitArgs {
    /// The run configuration (TOML).
    pub config: PathBuf,
}

/// Runs `tailspan fit`: loads the config and the experience, fits, writes, prints a table.
pub fn run(args: &FitArgs, _quiet: bool) -> Result<()> {
    let config = Config::load(&args.config)?;
    let provenance = crate::pipeline::provenance(&config)?;
    let experience = load_experience(&config)?;
    let fits = fit_and_write(&config, &provenance, &experience)?;
    print_table(&fits)
}

/// The experience the config names, restricted to its sexes, ages and years, after the
/// model settings are checked.
fn load_experience(config: &Config) -> Result<Experience> {
    crate::pipeline::inputs::check_models(config)?;
    Experience::from_config(config)
}

/// Fits every configured kind to every configured sex of `experience` and writes
/// `fit.json` and `residuals.parquet` into the config's output folder.
/// Both files record `provenance`.
pub fn fit_and_write(
    config: &Config,
    provenance: &Provenance,
    experience: &Experience,
) -> Result<FitSet> {
    let window = select_window(config, experience)?;
    let fits = FitSet::fit(&config.model, &window)?;
    let folder = config.output_folder();

    let json_path = folder.join("fit.json");
    let mut json = AtomicFile::create(&json_path)?;
    let document = fits.document();
    let recorded = Recorded {
        run: provenance,
        body: &document,
    };
    crate::io::atomic::check_finite_json(&json_path, &recorded)?;
    let mut text = serde_json::to_string_pretty(&recorded)
        .map_err(|e| Error::io(&json_path, std::io::Error::other(e)))?;
    text.push('\n');
    json.write_all(text.as_bytes())
        .map_err(|e| Error::io(&json_path, e))?;

    let residuals = write_residuals(&fits, config, provenance, folder.join("residuals.parquet"))?;
    retire_stale_records(&folder, provenance)?;
    residuals.commit()?;
    json.commit()?;
    Ok(fits)
}

/// The configured sexes, ages and years of the experience, or an error naming the config
/// key the experience cannot satisfy.
fn select_window(config: &Config, experience: &Experience) -> Result<Experience> {
    let (ages, years) = (config.ages(), config.years());
    let source = experience.source().display();
    let mut populations: Vec<Population> = Vec::new();
    for &sex in &config.data.sexes {
        let population = experience.population(sex).ok_or_else(|| {
            Error::config(
                &config.file,
                "data.sexes",
                format!("the experience {source} has no rows for sex {sex}"),
            )
        })?;
        if !population.ages.covers(&ages) {
            return Err(Error::config(
                &config.file,
                "data.ages",
                format!(
                    "asks for ages {}-{} but the experience {source} holds ages {}-{} for sex {sex}",
                    ages.first, ages.last, population.ages.first, population.ages.last
                ),
            ));
        }
        if !population.years.covers(&years) {
            return Err(Error::config(
                &config.file,
                "data.years",
                format!(
                    "asks for years {}-{} but the experience {source} holds years {}-{} for sex {sex}",
                    years.first, years.last, population.years.first, population.years.last
                ),
            ));
        }
        populations.push(population.restrict(ages, years)?);
    }
    Ok(Experience {
        source: experience.source.clone(),
        populations,
    })
}

/// Column description stored in the file's metadata.
const RESIDUALS_SCHEMA: &str = "model: model name (only when several kinds are fitted); \
    sex: F or M; year: calendar year; age: age last birthday; residual: signed deviance \
    residual of the cell (Poisson for lee-carter, apc and renshaw-haberman; binomial on \
    E0 = Ec + D/2 for cbd, m6 and m7), null where the cell has no exposure or, for the cohort \
    models, belongs to a cohort left out of the fit (model.min_cohort_cells)";

/// Writes the deviance residuals, one row per fitted cell, and returns the uncommitted file.
fn write_residuals(
    fits: &FitSet,
    config: &Config,
    provenance: &Provenance,
    path: PathBuf,
) -> Result<AtomicFile> {
    let with_model = fits.several_kinds();
    let mut fields = Vec::new();
    if with_model {
        fields.push(Field::new("model", DataType::Utf8, false));
    }
    fields.extend([
        Field::new("sex", DataType::Utf8, false),
        Field::new("year", DataType::Int32, false),
        Field::new("age", DataType::Int32, false),
        Field::new("residual", DataType::Float64, true),
    ]);
    let schema = Arc::new(Schema::new(fields));
    let mut sink = ParquetSink::create(
        &path,
        schema,
        config.output.compression,
        RESIDUALS_SCHEMA,
        provenance,
        DEFAULT_ROWS_PER_GROUP,
    )?;
    for fit in &fits.fits {
        let model = &fit.model;
        let residuals = model.residuals();
        let (ages, years) = (model.ages(), model.years());
        let rows = ages.len() * years.len();
        let (mut year_col, mut age_col, mut value_col) = (
            Vec::with_capacity(rows),
            Vec::with_capacity(rows),
            Vec::with_capacity(rows),
        );
        for (j, year) in years.iter().enumerate() {
            for (i, age) in ages.iter().enumerate() {
                year_col.push(year);
                age_col.push(age);
                let r = residuals[(i, j)];
                value_col.push(r.is_finite().then_some(r));
            }
        }
        let mut columns: Vec<ArrayRef> = Vec::new();
        if with_model {
            columns.push(Arc::new(StringArray::from(vec![model.name(); rows])));
        }
        columns.extend([
            Arc::new(StringArray::from(vec![model.sex().code(); rows])) as ArrayRef,
            Arc::new(Int32Array::from(year_col)),
            Arc::new(Int32Array::from(age_col)),
            Arc::new(Float64Array::from(value_col)),
        ]);
        sink.write_columns(columns)?;
    }
    sink.close()
}

/// Prints one line per fit: fit measures and the period indices' drift.
fn print_table(fits: &FitSet) -> Result<()> {
    let stdout = std::io::stdout();
    let mut out = stdout.lock();
    let err = |e| Error::io("<stdout>", e);
    writeln!(
        out,
        "{:<4}{:<17}{:<9}{:>14}{:>12}{:>8}{:>14}{:>14}{:>7}  drift",
        "sex", "model", "method", "loglik", "deviance", "params", "AIC", "BIC", "iter"
    )
    .map_err(err)?;
    for fit in &fits.fits {
        let (m, d) = (&fit.model, fit.model.diagnostics());
        let drift: Vec<String> = fit
            .random_walk
            .drift
            .iter()
            .zip(m.factor_names())
            .map(|(v, name)| format!("{name} {v:+.4}"))
            .collect();
        writeln!(
            out,
            "{:<4}{:<17}{:<9}{:>14.2}{:>12.2}{:>8}{:>14.2}{:>14.2}{:>7}  {}",
            m.sex().code(),
            m.name(),
            m.method(),
            d.log_likelihood,
            d.deviance,
            d.parameters,
            d.aic,
            d.bic,
            d.iterations,
            drift.join(", ")
        )
        .map_err(err)?;
    }
    if fits.several_kinds() {
        for entry in fits.ranking() {
            writeln!(
                out,
                "rank {} for {}: {} ({}), BIC {:.2} (+{:.2})",
                entry.rank, entry.sex, entry.model, entry.method, entry.bic, entry.delta_bic
            )
            .map_err(err)?;
        }
    }
    Ok(())
}
