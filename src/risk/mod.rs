//! Risk measures: quantiles, VaR/TVaR, capital and shocks.
