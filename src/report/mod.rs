//! `report.html`: the page a risk committee reads.
//!
//! The report reads a run's results and nothing else: [`gather`] takes them from the same
//! values that go to `summary.json` and the Parquet files into [`ReportData`], plain
//! numbers and strings, and [`html`] and [`charts`] draw the page from that alone, never
//! touching models or scenario files. Sections whose data is absent are left out rather
//! than drawn empty. Writing the page is the atomic writer's job ([`crate::io`]).

pub mod allocation;
pub mod basis;
pub mod charts;
pub mod data;
mod example;
pub mod format;
pub mod gather;
pub mod html;
pub mod model_risk;

use std::path::Path;

pub use data::{
    BasisItem, CapitalColumn, CapitalTable, FAN_PROBABILITIES, FanChart, FanMeasure, FanPoint,
    FitRow, HedgeRow, InputFile, LifetimeDistribution, PvDistribution, ReportData, ResidualMap,
    RunInfo, StandardFormula, YearValue,
};

use crate::error::Result;

/// Renders the report as one self-contained HTML page.
pub fn render(data: &ReportData) -> Result<String> {
    html::page(data)
}

/// Renders the report and writes it to `path` atomically.
pub fn write(path: impl AsRef<Path>, data: &ReportData) -> Result<()> {
    let page = render(data)?;
    crate::io::atomic::write_bytes(path, page.as_bytes())
}
