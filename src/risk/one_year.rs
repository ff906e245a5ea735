//! One-year longevity capital by re-calibration (Richards, Currie & Ritchie, "A
//! value-at-risk framework for longevity trend risk", British Actuarial Journal, 2014).
//!
//! Per scenario: follow the stochastic path to the valuation year, simulate that year's
//! population deaths from it, refit the model with the new year added, re-estimate the
//! random walk and project its central path, then value the book with the realised rates
//! for the first year and the refitted best estimate after it. The 99.5 % quantile of
//! those values less the best estimate is the one-year capital: what one year's news can
//! do to the best estimate, as a regulator's one-year horizon asks.
//!
//! Choices: the new year's exposure is the last observed year's, age by age (common
//! simplification); deaths are Poisson with the path's central rate m = −ln(1 − q); the
//! one-year scenarios use the same projection streams as the run-off scenarios of the same
//! number (common random numbers), and their deaths a stream of their own.

use std::sync::Arc;

use nalgebra::DMatrix;
use rand_distr::{Distribution, Poisson};
use rayon::prelude::*;

use crate::basis::{BookBuffers, BookRates};
use crate::data::Population;
use crate::data::sex::sex_index;
use crate::error::{Error, Result};
use crate::models::{FittedModel, MortalityModel};
use crate::projection::{CellPlan, RateSurface, ScenarioPaths};
use crate::projection::{JointBasis, Projector, Purpose, Settings, Uncertainty, stream};
use crate::valuation::{PreparedBook, ScenarioValue, Workspace};

/// What the re-calibration needs beyond the projector and the book.
pub struct Recalibration<'a> {
    /// The model specification per sex, in the projector's sex order.
    pub specs: &'a [Arc<dyn MortalityModel>],
    /// The fitted experience per sex, in the projector's sex order.
    pub populations: &'a [Population],
    /// The valuation year (the year of simulated experience is the years after the data
    /// up to and including it).
    pub year: i32,
    /// The book's own rates (`[basis]`): the refitted population's rates become the
    /// book's at the fitted level and the spread's expected path.
    pub book_rates: Option<&'a BookRates>,
}

/// Values of the book after one year of news, one per scenario `1..=scenarios`.
pub fn one_year_values(
    projector: &Projector,
    book: &PreparedBook,
    recalibration: &Recalibration<'_>,
    scenarios: usize,
) -> Result<Vec<f64>> {
    // The stochastic path is read only up to the valuation year: the simulated years'
    // deaths and the realised first year of the valuation.
    let years = (recalibration.year - projector.basis().years().last).max(0) as usize;
    (1..=scenarios as u64)
        .into_par_iter()
        .map_init(
            || Buffers {
                paths: projector.buffer(),
                workspace: Workspace::default(),
                value: ScenarioValue::default(),
                book: BookBuffers::default(),
                hybrid: Vec::new(),
                central_cells: None,
            },
            |buffers, scenario| {
                projector.generate_years(scenario, &mut buffers.paths, years)?;
                one_scenario(projector, book, recalibration, buffers, scenario)
            },
        )
        .collect()
}

/// A thread's buffers, kept from one scenario to the next.
struct Buffers {
    paths: ScenarioPaths,
    workspace: Workspace,
    value: ScenarioValue,
    book: BookBuffers,
    hybrid: Vec<Vec<f64>>,
    /// The cells of the refitted central path that the book reads.
    central_cells: Option<CellPlan>,
}

fn one_scenario(
    projector: &Projector,
    book: &PreparedBook,
    recalibration: &Recalibration<'_>,
    buffers: &mut Buffers,
    scenario: u64,
) -> Result<f64> {
    let Buffers {
        paths,
        workspace,
        value,
        book: book_buffers,
        hybrid,
        central_cells,
    } = buffers;
    let basis = projector.basis();
    let settings = projector.settings();
    let last_fitted = basis.years().last;
    let new_years = recalibration.year - last_fitted;
    if new_years < 1 {
        return Err(Error::model(
            "one-year",
            "the valuation year must follow the last fitted year",
        ));
    }
    let mut rng = stream(settings.seed, scenario, Purpose::Experience);
    let mut refits: Vec<(crate::data::Sex, Arc<dyn FittedModel>)> = Vec::new();
    for (i, &sex) in basis.sexes().iter().enumerate() {
        let population = &recalibration.populations[i];
        let extended = extend(population, paths, i, new_years, &mut rng)?;
        // Warm-started from the base fit: the same maximum within the fit's tolerance.
        let refit = recalibration.specs[i]
            .refit(&extended, basis.model(i))
            .map_err(|e| {
                Error::model(
                    "one-year",
                    format!("scenario {scenario}, sex {sex}: the re-calibration refit failed: {e}"),
                )
            })?;
        refits.push((sex, Arc::from(refit)));
    }
    // The refitted central path: no noise, no parameter uncertainty.
    let central = Projector::from_basis(
        Arc::new(JointBasis::new(refits)?),
        Settings {
            seed: settings.seed,
            horizon: settings.horizon,
            noise: false,
            uncertainty: Uncertainty::None,
        },
        None,
    )?;
    // Only the book's cohort diagonals after the valuation year are computed: the plan is
    // the same for every refit (the refitted grid starts the year after the valuation).
    let cells = central_cells.get_or_insert_with(|| {
        let mut plan = central.no_cells();
        for cohort in book.cohorts() {
            plan.add_cohort(cohort.sex, cohort.age, book.year);
        }
        plan
    });
    let mut refitted = central.buffer();
    refitted.set_cells(cells);
    central.generate(0, &mut refitted)?;
    // Rates from the valuation year: the realised year, then the refitted best estimate.
    let ages = paths.ages().len();
    hybrid.resize_with(basis.sexes().len(), Vec::new);
    for (i, rows) in hybrid.iter_mut().enumerate() {
        let realised = paths.year_rates(i, recalibration.year).ok_or_else(|| {
            Error::model(
                "one-year",
                "the projection does not reach the valuation year",
            )
        })?;
        rows.clear();
        rows.extend_from_slice(realised);
        rows.extend_from_slice(refitted.rates(i));
    }
    let mut surfaces: [Option<RateSurface<'_>>; 2] = [None, None];
    for (i, &sex) in basis.sexes().iter().enumerate() {
        surfaces[sex_index(sex)] = Some(RateSurface {
            first_year: recalibration.year,
            first_age: paths.ages().first,
            ages,
            q: &hybrid[i],
        });
    }
    let surfaces = match recalibration.book_rates {
        Some(rates) => rates.apply(0, &surfaces, book_buffers),
        None => surfaces,
    };
    book.build_curves(&surfaces, workspace)?;
    book.value::<rand_chacha::ChaCha8Rng>(workspace, None, value);
    Ok(value.pv_expected)
}

/// The population with `new_years` simulated years appended: deaths Poisson with mean
/// E × m from the scenario's path, exposure that of the last observed year.
fn extend(
    population: &Population,
    paths: &ScenarioPaths,
    sex_slot: usize,
    new_years: i32,
    rng: &mut rand_chacha::ChaCha8Rng,
) -> Result<Population> {
    let (n_ages, n_years) = (population.ages.len(), population.years.len());
    let total = n_years + new_years as usize;
    let mut deaths = DMatrix::zeros(n_ages, total);
    let mut exposure = DMatrix::zeros(n_ages, total);
    deaths
        .view_mut((0, 0), (n_ages, n_years))
        .copy_from(&population.deaths);
    exposure
        .view_mut((0, 0), (n_ages, n_years))
        .copy_from(&population.exposure);
    let last = n_years - 1;
    for step in 0..new_years as usize {
        let year = population.years.last + 1 + step as i32;
        for (i, age) in population.ages.iter().enumerate() {
            let e = population.exposure[(i, last)];
            let q = paths.q(sex_slot, year, age).ok_or_else(|| {
                Error::model(
                    "one-year",
                    format!("no projected rate for age {age} in {year}"),
                )
            })?;
            let mean = e * -(-q).ln_1p();
            let d = if mean > 0.0 && mean.is_finite() {
                Poisson::new(mean)
                    .map_err(|e| Error::Numerical(format!("one-year deaths: {e}")))?
                    .sample(rng)
            } else {
                0.0
            };
            deaths[(i, n_years + step)] = d;
            exposure[(i, n_years + step)] = e;
        }
    }
    let years = crate::data::Span {
        first: population.years.first,
        last: population.years.last + new_years,
    };
    Population::new(population.sex, population.ages, years, deaths, exposure)
}
