//! The rate surface: what a projection hands to everything that reads its rates.
//!
//! The valuation, the hedges' reference rates and the one-year refits read a scenario's
//! rates through this view, so none of them depends on how the paths were generated.

/// One scenario's projected one-year rates of one sex: calendar years × ages, row-major by
/// year, every age from `first_age` to the model's `max_age`.
#[derive(Debug, Clone, Copy)]
pub struct RateSurface<'a> {
    /// Calendar year of row 0.
    pub first_year: i32,
    /// Age of column 0.
    pub first_age: i32,
    /// Ages per row (`max_age − first_age + 1`).
    pub ages: usize,
    /// The rates.
    pub q: &'a [f64],
}

impl RateSurface<'_> {
    /// Number of calendar years held.
    pub fn years(&self) -> usize {
        self.q.len() / self.ages
    }

    /// Last age held (q is 1 there).
    pub fn max_age(&self) -> i32 {
        self.first_age + self.ages as i32 - 1
    }

    /// Last calendar year held.
    pub fn last_year(&self) -> i32 {
        self.first_year + self.years() as i32 - 1
    }

    /// q(age, year); both must be held.
    #[inline]
    pub fn q(&self, age: i32, year: i32) -> f64 {
        let row = (year - self.first_year) as usize;
        let col = (age - self.first_age) as usize;
        self.q[row * self.ages + col]
    }
}
