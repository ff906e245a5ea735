//! The stages a run chains together, shared by `fit`, `project`, `value`, `hedge` and `run`.
//!
//! Each command needs the same first steps — the config's experience, the first configured
//! model fitted to each sex, a projector over the joint basis — and must build them the same
//! way, or a `value` would not reproduce the paths a `project` wrote for the same seed.

use std::sync::Arc;

use crate::data::{Config, Experience, Sex};
use crate::error::Result;
use crate::models::{FittedModel, MortalityModel, build_model};
use crate::projection::{BootstrapSource, Projector, Settings, Uncertainty};

/// The projected model fitted to each sex, with the specifications that can refit it.
pub struct ProjectedFits {
    /// Kind name, e.g. `lee-carter`.
    pub kind: &'static str,
    /// Fitted model per sex, in the config's order.
    pub fits: Vec<(Sex, Arc<dyn FittedModel>)>,
    /// The checked model per sex (the same spec for every sex), for refits.
    pub specs: Vec<Arc<dyn MortalityModel>>,
}

impl ProjectedFits {
    /// Fits the first configured model kind to each sex of `experience`.
    pub fn fit(config: &Config, experience: &Experience) -> Result<Self> {
        let kind = config.model.kinds()[0];
        let mut fits = Vec::new();
        let mut specs: Vec<Arc<dyn MortalityModel>> = Vec::new();
        for population in &experience.populations {
            let spec: Arc<dyn MortalityModel> = Arc::from(build_model(&config.model, kind)?);
            fits.push((population.sex, Arc::from(spec.fit(population)?)));
            specs.push(spec);
        }
        Ok(ProjectedFits {
            kind: kind.name(),
            fits,
            specs,
        })
    }

    /// A projector over these fits with the config's projection settings.
    pub fn projector(&self, config: &Config, experience: &Experience) -> Result<Projector> {
        let settings = Settings::from_config(&config.projection);
        let source = matches!(settings.uncertainty, Uncertainty::Bootstrap { .. }).then(|| {
            BootstrapSource {
                models: self.specs.clone(),
                populations: experience.populations.clone(),
            }
        });
        let basis = crate::projection::JointBasis::new(self.fits.clone())?;
        Projector::from_basis(Arc::new(basis), settings, source)
    }
}
