//! When within each payment period an annuity pays.

use serde::{Deserialize, Serialize};

/// Payment timing within each period.
#[derive(Debug, Clone, Copy, Deserialize, Serialize, PartialEq, Eq)]
#[serde(rename_all = "kebab-case")]
pub enum Timing {
    /// Payments at the start of each period (annuity-due).
    Advance,
    /// Payments at the end of each period (annuity-immediate).
    Arrears,
}
