//! Book valuation: cash flows, annuity factors and truncated lifetimes per scenario.

pub mod cells;
pub mod cohort;
pub mod deaths;
pub mod driver;
pub mod files;
pub mod lifetimes;
pub mod portfolio;
pub mod replay;
pub mod schedule;

pub use cells::ScenarioCells;
pub use cohort::{Cohort, LevelAdjustment};
pub use driver::{DriverSettings, Extracts, ScenarioResult, value_scenarios};
pub use lifetimes::{LifetimeRow, LifetimeTable, LifetimeWorkspace};
pub use portfolio::{PreparedBook, ScenarioValue, Workspace};
pub use schedule::{Basis, PaymentShape, Schedule};
