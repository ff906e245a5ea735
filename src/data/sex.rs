//! The two sexes the experience and the book are split by.

use std::fmt;
use std::str::FromStr;

use serde::{Deserialize, Serialize};

/// Sex code as written in every input and output: `F` or `M`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
pub enum Sex {
    /// Female.
    F,
    /// Male.
    M,
}

impl Sex {
    /// Both sexes in output order.
    pub const ALL: [Sex; 2] = [Sex::F, Sex::M];

    /// The one-letter code.
    pub fn code(self) -> &'static str {
        match self {
            Sex::F => "F",
            Sex::M => "M",
        }
    }
}

impl fmt::Display for Sex {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.code())
    }
}

impl FromStr for Sex {
    type Err = String;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s.trim() {
            "F" => Ok(Sex::F),
            "M" => Ok(Sex::M),
            other => Err(format!("sex must be `F` or `M`, found `{other}`")),
        }
    }
}

/// Row of a sex in per-sex arrays.
#[inline]
pub fn sex_index(sex: Sex) -> usize {
    match sex {
        Sex::F => 0,
        Sex::M => 1,
    }
}
