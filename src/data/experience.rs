//! Deaths and central exposures by age and calendar year: the experience every model is
//! fitted to.
//!
//! Cells are held as dense age × year matrices (rows are ages, columns are years) because
//! every fit works on whole rows and columns; a missing cell is an error at load time, never
//! a hole to be patched later.

use std::path::{Path, PathBuf};

use nalgebra::DMatrix;

use crate::data::{Sex, Span};
use crate::error::{Error, Result};

/// One sex's experience on a complete age × year grid.
#[derive(Debug, Clone, PartialEq)]
pub struct Population {
    /// Sex of the lives.
    pub sex: Sex,
    /// Ages last birthday, one matrix row each.
    pub ages: Span,
    /// Calendar years, one matrix column each.
    pub years: Span,
    /// Deaths D(x, t).
    pub deaths: DMatrix<f64>,
    /// Central exposure E^c(x, t) in person-years.
    pub exposure: DMatrix<f64>,
}

/// The experience of every sex read from one file.
#[derive(Debug, Clone, PartialEq)]
pub struct Experience {
    /// The file it came from (empty for experience built in memory).
    pub source: PathBuf,
    /// One population per sex, in the order asked for.
    pub populations: Vec<Population>,
}

impl Population {
    /// Checks shapes and values and builds a population.
    ///
    /// Rejects non-finite or negative values and deaths in cells with zero exposure.
    pub fn new(
        sex: Sex,
        ages: Span,
        years: Span,
        deaths: DMatrix<f64>,
        exposure: DMatrix<f64>,
    ) -> Result<Self> {
        let shape = (ages.len(), years.len());
        if deaths.shape() != shape || exposure.shape() != shape {
            return Err(Error::Numerical(format!(
                "experience grid for sex {sex} must be {} ages x {} years",
                shape.0, shape.1
            )));
        }
        for (i, age) in ages.iter().enumerate() {
            for (j, year) in years.iter().enumerate() {
                let (d, e) = (deaths[(i, j)], exposure[(i, j)]);
                if !(d.is_finite() && e.is_finite() && d >= 0.0 && e >= 0.0) {
                    return Err(Error::Numerical(format!(
                        "sex {sex}, age {age}, year {year}: deaths and exposure must be finite and non-negative"
                    )));
                }
                if d > 0.0 && e == 0.0 {
                    return Err(Error::Numerical(format!(
                        "sex {sex}, age {age}, year {year}: deaths with zero exposure"
                    )));
                }
            }
        }
        Ok(Population {
            sex,
            ages,
            years,
            deaths,
            exposure,
        })
    }

    /// The sub-grid for `ages` × `years`, which must lie inside this one.
    pub fn restrict(&self, ages: Span, years: Span) -> Result<Population> {
        if !self.ages.covers(&ages) || !self.years.covers(&years) {
            return Err(Error::Numerical(format!(
                "sex {}: ages {}-{} and years {}-{} are not all in the experience (ages {}-{}, years {}-{})",
                self.sex,
                ages.first,
                ages.last,
                years.first,
                years.last,
                self.ages.first,
                self.ages.last,
                self.years.first,
                self.years.last
            )));
        }
        let (r, c) = (
            (ages.first - self.ages.first) as usize,
            (years.first - self.years.first) as usize,
        );
        let (nr, nc) = (ages.len(), years.len());
        Ok(Population {
            sex: self.sex,
            ages,
            years,
            deaths: self.deaths.view((r, c), (nr, nc)).into_owned(),
            exposure: self.exposure.view((r, c), (nr, nc)).into_owned(),
        })
    }

    /// Crude central death rates D / E^c (zero where the exposure is zero).
    pub fn central_rates(&self) -> DMatrix<f64> {
        self.deaths
            .zip_map(&self.exposure, |d, e| if e > 0.0 { d / e } else { 0.0 })
    }

    /// Initial exposure E^0 ≈ E^c + D/2 (common practice), used by binomial fits.
    pub fn initial_exposure(&self) -> DMatrix<f64> {
        self.exposure.zip_map(&self.deaths, |e, d| e + 0.5 * d)
    }

    /// Total deaths over the grid.
    pub fn total_deaths(&self) -> f64 {
        self.deaths.sum()
    }

    /// Total central exposure over the grid.
    pub fn total_exposure(&self) -> f64 {
        self.exposure.sum()
    }
}

impl Experience {
    /// The population of `sex`, if present.
    pub fn population(&self, sex: Sex) -> Option<&Population> {
        self.populations.iter().find(|p| p.sex == sex)
    }

    /// The file name used in messages.
    pub fn source(&self) -> &Path {
        &self.source
    }
}
