//! Which birth cohorts a cohort model estimates, and their effects once fitted.
//!
//! Cell (x, t) belongs to the cohort born in c = t − x. The cohorts at the two corners of
//! the age × year grid are seen in only a cell or two, so their γ_c would be fitted to
//! those cells' noise (and would make the corner cells fit exactly). Cohorts seen in fewer
//! than `min_cohort_cells` cells are therefore left out: their cells get no weight in the
//! likelihood, γ_c is not estimated, and after the fit the young end is filled by the
//! central projection of the cohort index's time series and the old end by holding the
//! oldest estimated value (a time series has no backward projection worth the name).
//! The projection draws the young end afresh in every scenario
//! (`projection/cohort_paths.rs`); the central values filled here are scenario 0's.

use crate::data::config::CohortSeriesKind;
use crate::data::{Population, Span};
use crate::error::{Error, Result};
use crate::series::CohortSeries;

/// The cohorts of an age × year grid and which of them are estimated.
#[derive(Debug, Clone, PartialEq)]
pub struct CohortGrid {
    /// Fitted ages.
    pub ages: Span,
    /// Fitted years.
    pub years: Span,
    /// Birth year of the oldest cohort, `years.first − ages.last`.
    pub first_cohort: i32,
    /// Estimated-parameter position of each cohort (oldest first), `None` if left out.
    pub position: Vec<Option<usize>>,
    /// Number of estimated cohorts.
    pub estimated: usize,
}

impl CohortGrid {
    /// The cohorts of `ages` × `years` with at least `min_cells` cells each. The model
    /// `name` needs at least `needed` estimated cohorts to be identified.
    pub fn new(
        name: &str,
        ages: Span,
        years: Span,
        min_cells: usize,
        needed: usize,
    ) -> Result<CohortGrid> {
        let (na, nt) = (ages.len(), years.len());
        let count = na + nt - 1;
        let mut position = vec![None; count];
        let mut estimated = 0;
        for (k, slot) in position.iter_mut().enumerate() {
            let cells = (k + 1).min(na).min(nt).min(count - k);
            if cells >= min_cells {
                *slot = Some(estimated);
                estimated += 1;
            }
        }
        if estimated < needed {
            return Err(Error::model(
                name,
                format!(
                    "the cohort effect is not identified: {na} ages × {nt} years give {estimated} \
                     cohorts with at least {min_cells} cells (model.min_cohort_cells), and the \
                     model needs at least {needed}; widen data.years or data.ages, or lower \
                     model.min_cohort_cells"
                ),
            ));
        }
        Ok(CohortGrid {
            ages,
            years,
            first_cohort: years.first - ages.last,
            position,
            estimated,
        })
    }

    /// Cohort index (0 for the oldest) of the cell at age row `i`, year column `j`.
    pub fn cohort(&self, i: usize, j: usize) -> usize {
        j + self.ages.len() - 1 - i
    }

    /// Number of cohorts on the grid.
    pub fn count(&self) -> usize {
        self.position.len()
    }

    /// Birth years of every cohort, oldest first.
    pub fn cohort_years(&self) -> Vec<i32> {
        (0..self.count() as i32)
            .map(|k| self.first_cohort + k)
            .collect()
    }

    /// Whether each cohort is estimated from the data.
    pub fn fitted_mask(&self) -> Vec<bool> {
        self.position.iter().map(Option::is_some).collect()
    }

    /// Birth years of the estimated cohorts.
    pub fn estimated_years(&self) -> Vec<f64> {
        self.position
            .iter()
            .enumerate()
            .filter(|(_, p)| p.is_some())
            .map(|(k, _)| f64::from(self.first_cohort + k as i32))
            .collect()
    }

    /// Whether the cell at age row `i`, year column `j` is in an estimated cohort.
    pub fn used(&self, i: usize, j: usize) -> bool {
        self.position[self.cohort(i, j)].is_some()
    }

    /// Every age, year and estimated cohort needs deaths among its weighted cells, or its
    /// parameter has no finite maximum-likelihood estimate.
    pub fn require_deaths(&self, name: &str, population: &Population) -> Result<()> {
        let (na, nt) = (self.ages.len(), self.years.len());
        let mut by_age = vec![0.0; na];
        let mut by_year = vec![0.0; nt];
        let mut by_cohort = vec![0.0; self.count()];
        for j in 0..nt {
            for i in 0..na {
                if self.used(i, j) && population.exposure[(i, j)] > 0.0 {
                    let d = population.deaths[(i, j)];
                    by_age[i] += d;
                    by_year[j] += d;
                    by_cohort[self.cohort(i, j)] += d;
                }
            }
        }
        let sex = population.sex;
        let rule = "so its parameter has no finite estimate";
        if let Some(i) = by_age.iter().position(|d| *d <= 0.0) {
            return Err(Error::model(
                name,
                format!(
                    "sex {sex}, age {}: no deaths in the cells of estimated cohorts, {rule}; \
                     narrow data.ages",
                    self.ages.first + i as i32
                ),
            ));
        }
        if let Some(j) = by_year.iter().position(|d| *d <= 0.0) {
            return Err(Error::model(
                name,
                format!(
                    "sex {sex}, year {}: no deaths in the cells of estimated cohorts, {rule}; \
                     narrow data.years",
                    self.years.first + j as i32
                ),
            ));
        }
        for (k, d) in by_cohort.iter().enumerate() {
            if self.position[k].is_some() && *d <= 0.0 {
                return Err(Error::model(
                    name,
                    format!(
                        "sex {sex}, cohort born {}: no deaths in any of its cells, {rule}; \
                         raise model.min_cohort_cells",
                        self.first_cohort + k as i32
                    ),
                ));
            }
        }
        Ok(())
    }

    /// Every cohort's value from the estimated ones: the series `kind` is fitted to the
    /// estimated values; younger cohorts take its central projection and older ones the
    /// oldest estimate.
    pub fn complete(
        &self,
        estimated: &[f64],
        kind: CohortSeriesKind,
    ) -> Result<(Vec<f64>, CohortSeries)> {
        let series = CohortSeries::fit(kind, estimated)?;
        let first = self.position.iter().position(Option::is_some).unwrap_or(0);
        let after = self.count() - first - estimated.len();
        let ahead = series.project(&vec![0.0; after]);
        let mut values = vec![estimated[0]; first];
        values.extend_from_slice(estimated);
        values.extend(ahead);
        Ok((values, series))
    }
}

/// The cohort index of a fitted model, for projections that follow each cohort.
#[derive(Debug, Clone, PartialEq)]
pub struct CohortEffects {
    /// Birth year of `values[0]` (the oldest cohort of the fitted grid).
    pub first_cohort: i32,
    /// γ_c for every cohort of the fitted grid, oldest first; left-out cohorts are filled
    /// as described in the module notes.
    pub values: Vec<f64>,
    /// Whether each γ_c was estimated from the data.
    pub fitted: Vec<bool>,
    /// How γ enters the linear predictor at each fitted age: b0_x for Renshaw–Haberman,
    /// 1 for the others (log m for APC and Renshaw–Haberman, logit q for M6 and M7).
    pub loading: Vec<f64>,
    /// The time series fitted to the estimated γ_c, to project younger cohorts.
    pub series: CohortSeries,
}

impl CohortEffects {
    /// γ of the cohort born in `year`, if it lies on the fitted grid.
    pub fn value(&self, year: i32) -> Option<f64> {
        let k = usize::try_from(year - self.first_cohort).ok()?;
        self.values.get(k).copied()
    }

    /// γ_{year − x} for each fitted age x from `first_age`, as many as `loading` holds;
    /// `year` must lie within the fitted years.
    pub fn by_age(&self, year: i32, first_age: i32) -> Vec<f64> {
        (0..self.loading.len())
            .map(|i| self.value(year - first_age - i as i32).unwrap_or(0.0))
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn corner_cohorts_are_left_out() {
        let grid = CohortGrid::new(
            "apc",
            Span::new(60, 63).unwrap(),
            Span::new(2000, 2005).unwrap(),
            3,
            3,
        )
        .unwrap();
        // 4 ages × 6 years: 9 cohorts with 1, 2, 3, 4, 4, 4, 3, 2, 1 cells.
        assert_eq!(grid.count(), 9);
        assert_eq!(grid.first_cohort, 1937);
        assert_eq!(grid.estimated, 5);
        assert_eq!(grid.position[2], Some(0));
        assert_eq!(grid.position[7], None);
        assert_eq!(grid.cohort(3, 0), 0);
        assert_eq!(grid.cohort(0, 5), 8);
    }
}
