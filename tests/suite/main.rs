//! The integration tests, as one binary: each module drives the library or the
//! `tailspan` binary the way users do. One binary links once, which keeps the test build
//! short; the modules stay one concern each.

mod models_support;
mod projection_support;

mod allocation_cli;
mod basis_cli;
mod basis_reference;
mod cli_check;
mod cohort_cli;
mod data_loaders;
mod data_synth;
mod guards_cli;
mod hedge_config;
mod hedge_pricing;
mod hedge_trend;
mod inputs_layouts;
mod kill_cli;
mod li_lee_cli;
mod li_lee_rates;
mod li_lee_recovery;
mod li_lee_reference;
mod life_cli;
mod life_properties;
mod life_tables;
mod merge_cli;
mod model_risk_cli;
mod models_closure;
mod models_cohort_fit;
mod models_cohort_recovery;
mod models_cohort_reference;
mod models_errors;
mod models_fit_cli;
mod models_fit_output;
mod models_recovery;
mod models_reference;
mod parser_regressions;
mod projection_cells;
mod projection_cli;
mod projection_cohort;
mod projection_files;
mod projection_moments;
mod properties_valuation;
mod provenance_cli;
mod report_layout;
mod report_page;
mod risk_one_year;
mod risk_quantiles;
mod run_cli;
mod valuation_book;
mod valuation_lifetimes;
mod value_cli;
