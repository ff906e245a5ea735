//! Allocated capital summed over segments of the book: sex × 5-year age band, and each
//! optional feature a policy may have (deferred, guaranteed, escalating, fixed-term).
//!
//! Euler contributions add up, so a segment's contribution is the sum of its policies'
//! and equals what the segment alone would average over the same tail scenarios: the
//! figure a risk team charges to a scheme or product.

use serde::Serialize;

use crate::data::{Book, Policy};
use crate::risk::allocation::{Allocation, LevelContributions};

/// Width of the age bands, in years.
pub const AGE_BAND_YEARS: i32 = 5;

/// One segment's share of one measure's capital at one level.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SegmentFigures {
    /// What the book is cut by: `sex_age_band`, `deferred`, `guaranteed`, `escalating` or
    /// `fixed_term`.
    pub by: &'static str,
    /// The segment, e.g. `F 65-69`, `deferred`, `in payment`.
    pub segment: String,
    /// Policies in the segment.
    pub policies: usize,
    /// Sum of the policies' best estimates.
    pub best_estimate: f64,
    /// Sum of their TVaR contributions.
    pub tvar_contribution: f64,
    /// Sum of their VaR contributions.
    pub var_contribution: f64,
    /// The segment's share of the TVaR capital.
    pub capital_share: f64,
}

/// A feature cut: its name, and the segment names of policies with and without it.
struct Feature {
    by: &'static str,
    has: fn(&Policy) -> bool,
    with: &'static str,
    without: &'static str,
}

const FEATURES: [Feature; 4] = [
    Feature {
        by: "deferred",
        has: |p| p.deferral > 0,
        with: "deferred",
        without: "in payment",
    },
    Feature {
        by: "guaranteed",
        has: |p| p.guarantee > 0,
        with: "guaranteed",
        without: "no guarantee",
    },
    Feature {
        by: "escalating",
        has: |p| p.escalation != 0.0,
        with: "escalating",
        without: "level",
    },
    Feature {
        by: "fixed_term",
        has: |p| p.term.is_some(),
        with: "fixed term",
        without: "whole life",
    },
];

/// The age band `[lo, lo + 4]` holding `age`.
pub fn age_band(age: i32) -> (i32, i32) {
    let lo = age.div_euclid(AGE_BAND_YEARS) * AGE_BAND_YEARS;
    (lo, lo + AGE_BAND_YEARS - 1)
}

/// Each cut of `book` as (by, segment names in display order, each policy's segment).
/// Features no policy has are left out.
pub fn cuts(book: &Book) -> Vec<(&'static str, Vec<String>, Vec<usize>)> {
    let mut out = Vec::new();
    let mut keys: Vec<(&str, i32)> = book
        .policies
        .iter()
        .map(|p| (p.sex.code(), age_band(p.age).0))
        .collect();
    keys.sort_unstable();
    keys.dedup();
    let names = keys
        .iter()
        .map(|&(sex, lo)| format!("{sex} {lo}-{}", lo + AGE_BAND_YEARS - 1))
        .collect();
    let of = book
        .policies
        .iter()
        .map(|p| {
            let key = (p.sex.code(), age_band(p.age).0);
            keys.binary_search(&key).unwrap_or(0)
        })
        .collect();
    out.push(("sex_age_band", names, of));
    for f in &FEATURES {
        if !book.policies.iter().any(f.has) {
            continue;
        }
        let of = book
            .policies
            .iter()
            .map(|p| usize::from(!(f.has)(p)))
            .collect();
        out.push((f.by, vec![f.with.to_string(), f.without.to_string()], of));
    }
    out
}

/// Every segment's figures for one measure at one level; segments without policies are
/// left out.
pub fn segment_figures(
    book: &Book,
    allocation: &Allocation,
    level: &LevelContributions,
) -> Vec<SegmentFigures> {
    let total: f64 = level.tvar_contribution.iter().sum();
    let mut out = Vec::new();
    for (by, names, of) in cuts(book) {
        let mut figures: Vec<SegmentFigures> = names
            .into_iter()
            .map(|segment| SegmentFigures {
                by,
                segment,
                policies: 0,
                best_estimate: 0.0,
                tvar_contribution: 0.0,
                var_contribution: 0.0,
                capital_share: 0.0,
            })
            .collect();
        for (i, &s) in of.iter().enumerate() {
            let f = &mut figures[s];
            f.policies += 1;
            f.best_estimate += allocation.best_estimate[i];
            f.tvar_contribution += level.tvar_contribution[i];
            f.var_contribution += level.var_contribution[i];
        }
        for f in &mut figures {
            f.capital_share = f.tvar_contribution / total;
        }
        out.extend(figures.into_iter().filter(|f| f.policies > 0));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn age_bands_are_five_years_from_multiples_of_five() {
        assert_eq!(age_band(65), (65, 69));
        assert_eq!(age_band(69), (65, 69));
        assert_eq!(age_band(70), (70, 74));
        assert_eq!(age_band(101), (100, 104));
    }
}
