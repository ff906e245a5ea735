//! What every fitted model holds besides its own parameters.
//!
//! Each model reports the same facts about its fit (the data window, the old-age closure,
//! the fit quality and the residuals); holding them in one value lets [`FittedModel`] read
//! them once for all models instead of each model repeating the same accessors.
//!
//! [`FittedModel`]: super::FittedModel

use nalgebra::DMatrix;

use super::FitDiagnostics;
use crate::data::{Sex, Span};
use crate::life::closure::KannistoClosure;

/// The data window, closure and fit quality shared by every fitted model.
#[derive(Debug, Clone)]
pub struct FitBasis {
    /// Sex of the population fitted.
    pub sex: Sex,
    /// The population's fitted ages.
    pub ages: Span,
    /// The fitted calendar years.
    pub years: Span,
    /// Old-age closure of the fitted rates up to its `max_age`.
    pub closure: KannistoClosure,
    /// Fit quality.
    pub diagnostics: FitDiagnostics,
    /// Deviance residuals, ages × years (NaN where the exposure is zero).
    pub residuals: DMatrix<f64>,
}

impl FitBasis {
    /// A basis for a fit not yet measured against its data: empty diagnostics and
    /// residuals until [`FitBasis::record`] sets them.
    pub fn unmeasured(sex: Sex, ages: Span, years: Span, closure: KannistoClosure) -> Self {
        FitBasis {
            sex,
            ages,
            years,
            closure,
            diagnostics: FitDiagnostics::new(0.0, 0.0, 0, 0, 0),
            residuals: DMatrix::zeros(0, 0),
        }
    }

    /// Records the fit quality and residuals measured against the data.
    pub fn record(&mut self, diagnostics: FitDiagnostics, residuals: DMatrix<f64>) {
        self.diagnostics = diagnostics;
        self.residuals = residuals;
    }
}
