//! The one-year re-calibration's warm-started refits land where cold fits do.

use std::path::Path;
use std::sync::Arc;

use nalgebra::DMatrix;
use tailspan::data::{Book, Config, Experience, Population, Span};
use tailspan::models::{FittedModel, LeeCarterFit, MortalityModel};
use tailspan::pipeline::{ProjectedFits, ValuationSetup};
use tailspan::risk::one_year::{Recalibration, one_year_values};

fn demo() -> (Config, Experience) {
    let config =
        Config::load(&Path::new(env!("CARGO_MANIFEST_DIR")).join("configs/demo.toml")).unwrap();
    let experience = Experience::from_config(&config).unwrap();
    (config, experience)
}

/// The population's first `years` years.
fn first_years(p: &Population, years: usize) -> Population {
    let ages = p.ages.len();
    Population::new(
        p.sex,
        p.ages,
        Span::new(p.years.first, p.years.first + years as i32 - 1).unwrap(),
        DMatrix::from(p.deaths.view((0, 0), (ages, years))),
        DMatrix::from(p.exposure.view((0, 0), (ages, years))),
    )
    .unwrap()
}

fn lee_carter(fit: &dyn FittedModel) -> &LeeCarterFit {
    let any: &dyn std::any::Any = fit;
    any.downcast_ref::<LeeCarterFit>().unwrap()
}

/// The Poisson log-likelihood Σ d ln(E m) − E m of the fitted rates, without the
/// constant −Σ ln d! (Brouhns, Denuit & Vermunt 2002, eq. 3).
fn log_likelihood(fit: &LeeCarterFit, population: &Population) -> f64 {
    let mut ll = 0.0;
    for i in 0..population.ages.len() {
        for j in 0..population.years.len() {
            let mean = population.exposure[(i, j)] * fit.central_rate(i, j);
            ll += population.deaths[(i, j)] * mean.ln() - mean;
        }
    }
    ll
}

#[test]
fn warm_refit_reaches_the_cold_fits_maximum_in_no_more_cycles() {
    // Base fit to 1975–2023, then 2024 added: the warm refit starts from the base fit.
    let (config, experience) = demo();
    let fits = ProjectedFits::fit(&config, &experience).unwrap();
    for (spec, full) in fits.specs.iter().zip(&experience.populations) {
        let base = spec.fit(&first_years(full, full.years.len() - 1)).unwrap();
        let cold = spec.fit(full).unwrap();
        let warm = spec.refit(full, base.as_ref()).unwrap();
        let (lc, lw) = (lee_carter(cold.as_ref()), lee_carter(warm.as_ref()));
        // Both stop when a cycle changes ℓ by less than model.tolerance (1e-8); the cycles
        // shrink geometrically, so each is within a few hundred tolerances of the maximum.
        // (A refit is not measured, so ℓ is computed here, up to the same constant.)
        let (c, w) = (log_likelihood(lc, full), log_likelihood(lw, full));
        assert!((c - w).abs() < 1e-5, "{}: ℓ {c} cold, {w} warm", full.sex);
        let (c, w) = (cold.diagnostics(), warm.diagnostics());
        assert!(
            w.iterations <= c.iterations,
            "{}: {} warm cycles, {} cold",
            full.sex,
            w.iterations,
            c.iterations
        );
        for i in 0..full.ages.len() {
            for j in 0..full.years.len() {
                let (mc, mw) = (lc.central_rate(i, j), lw.central_rate(i, j));
                assert!(
                    ((mc - mw) / mc).abs() < 1e-5,
                    "{} age {i} year {j}: m {mc} cold, {mw} warm",
                    full.sex
                );
            }
        }
    }
}

/// A model whose refits start cold, as before warm starts.
struct Cold(Arc<dyn MortalityModel>);

impl MortalityModel for Cold {
    fn fit(&self, population: &Population) -> tailspan::Result<Box<dyn FittedModel>> {
        self.0.fit(population)
    }
}

#[test]
fn one_year_values_equal_cold_refits_within_the_tolerance() {
    let (config, experience) = demo();
    let book = Book::from_config(&config).unwrap().unwrap();
    let fits = ProjectedFits::fit(&config, &experience).unwrap();
    let mut projector = fits.projector(&config, &experience).unwrap();
    let n = 6;
    projector.prepare(0..n as u64 + 1).unwrap();
    let setup = ValuationSetup::new(&config, book, &projector).unwrap();
    let values = |specs: &[Arc<dyn MortalityModel>]| {
        let recalibration = Recalibration {
            specs,
            populations: &experience.populations,
            year: setup.year,
            book_rates: None,
        };
        one_year_values(&projector, &setup.prepared, &recalibration, n).unwrap()
    };
    let cold: Vec<Arc<dyn MortalityModel>> = fits
        .specs
        .iter()
        .map(|s| Arc::new(Cold(s.clone())) as Arc<dyn MortalityModel>)
        .collect();
    let (warm, cold) = (values(&fits.specs), values(&cold));
    for (s, (w, c)) in warm.iter().zip(&cold).enumerate() {
        assert!(
            ((w - c) / c).abs() < 1e-7,
            "scenario {}: {w} warm, {c} cold",
            s + 1
        );
    }
    // The scenarios differ from each other by far more than warm from cold.
    assert!(((warm[0] - warm[1]) / warm[0]).abs() > 1e-5);
}

#[test]
fn the_first_years_of_a_path_equal_the_whole_paths() {
    // The one-year re-calibration generates only the years up to the valuation year.
    let (config, experience) = demo();
    let fits = ProjectedFits::fit(&config, &experience).unwrap();
    let mut projector = fits.projector(&config, &experience).unwrap();
    projector.prepare(0..4).unwrap();
    let (mut whole, mut first) = (projector.buffer(), projector.buffer());
    for scenario in 0..4 {
        projector.generate(scenario, &mut whole).unwrap();
        projector.generate_years(scenario, &mut first, 2).unwrap();
        for sex in 0..experience.populations.len() {
            for year in whole.years().first..whole.years().first + 2 {
                assert_eq!(
                    whole.year_rates(sex, year),
                    first.year_rates(sex, year),
                    "scenario {scenario}, year {year}"
                );
            }
        }
    }
    // Later rows were not filled.
    let later = whole.years().first + 5;
    assert_ne!(whole.year_rates(0, later), first.year_rates(0, later));
}
