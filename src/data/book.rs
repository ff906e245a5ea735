//! The annuity book: one row per policy.
//!
//! Durations (deferral, term, guarantee) are whole years so that every payment lines up
//! with the annual grid of projected rates; m-thly payments within a year use UDD.

use std::path::PathBuf;

use crate::data::Sex;

/// One annuity policy (or a group of identical lives, by `weight`).
#[derive(Debug, Clone, PartialEq)]
pub struct Policy {
    /// Identifier from the book.
    pub id: String,
    /// Sex of the annuitant.
    pub sex: Sex,
    /// Age last birthday at the valuation date.
    pub age: i32,
    /// Annual amount of annuity.
    pub amount: f64,
    /// Whole years to the first payment (0: in payment).
    pub deferral: u32,
    /// Whole years of payment; `None` is whole life.
    pub term: Option<u32>,
    /// Whole years paid whatever happens, counted from the first payment.
    pub guarantee: u32,
    /// Annual escalation rate (0.03 is 3 %).
    pub escalation: f64,
    /// Lives represented by the row.
    pub weight: f64,
    /// Multiplier of the population q for this policy (book's own mortality level).
    pub mortality_factor: f64,
}

/// A book of annuities.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Book {
    /// The file it came from (empty for a book built in memory).
    pub source: PathBuf,
    /// The policies in file order.
    pub policies: Vec<Policy>,
}

impl Policy {
    /// An immediate whole-life annuity of `amount` a year with no guarantee or escalation.
    pub fn whole_life(id: impl Into<String>, sex: Sex, age: i32, amount: f64) -> Policy {
        Policy {
            id: id.into(),
            sex,
            age,
            amount,
            deferral: 0,
            term: None,
            guarantee: 0,
            escalation: 0.0,
            weight: 1.0,
            mortality_factor: 1.0,
        }
    }
}

impl Book {
    /// Total lives (sum of weights) of `sex`.
    pub fn lives(&self, sex: Sex) -> f64 {
        self.policies
            .iter()
            .filter(|p| p.sex == sex)
            .map(|p| p.weight)
            .sum()
    }

    /// Total annual amount (amount × weight) of `sex`.
    pub fn annual_amount(&self, sex: Sex) -> f64 {
        self.policies
            .iter()
            .filter(|p| p.sex == sex)
            .map(|p| p.amount * p.weight)
            .sum()
    }
}
