//! A projector straight from a run's config and experience, as every command that needs
//! scenarios (project, value, hedge, run) builds it the same way.

use std::sync::Arc;

use crate::data::{Config, Experience, Sex};
use crate::error::{Error, Result};
use crate::models::{FittedModel, MortalityModel, build_model};
use crate::projection::scenarios::{Projector, Settings};
use crate::projection::uncertainty::{BootstrapSource, Uncertainty};

/// Fits the first configured model kind to each sex of `experience` and returns the
/// projector of the `[projection]` settings (with what the bootstrap needs to refit).
pub fn projector_from_config(config: &Config, experience: &Experience) -> Result<Projector> {
    let Some(&kind) = config.model.kinds().first() else {
        return Err(Error::config(
            &config.file,
            "model.kind",
            "must name at least one model",
        ));
    };
    let mut fits: Vec<(Sex, Box<dyn FittedModel>)> = Vec::new();
    let mut specs: Vec<Arc<dyn MortalityModel>> = Vec::new();
    for population in &experience.populations {
        let spec: Arc<dyn MortalityModel> = Arc::from(build_model(&config.model, kind)?);
        fits.push((population.sex, spec.fit(population)?));
        specs.push(spec);
    }
    let settings = Settings::from_config(&config.projection);
    let source =
        matches!(settings.uncertainty, Uncertainty::Bootstrap { .. }).then(|| BootstrapSource {
            models: specs,
            populations: experience.populations.clone(),
        });
    Projector::new(fits, settings, source)
}
