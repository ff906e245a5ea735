//! Longevity hedges: indemnity (or parametric) swaps on the book and q-forwards on the
//! population, priced and tested against the book's per-scenario results.
//!
//! The hedges work on what valuation already produces — per scenario, the book's PV and its
//! benefit cash flows by policy year — plus, for q-forwards, one projected rate per
//! scenario. They never re-run a projection, so pricing many contracts costs a few passes
//! over vectors, and the `hedge` command and the hedge stage of `run` are one call to
//! [`evaluate`] once the inputs are gathered.
//!
//! # Config: `[hedge]`
//!
//! ```toml
//! [hedge]
//! cost_of_capital = 0.06   # provider's annual cost-of-capital rate, in (0, 1)
//! capital_level = 0.995    # level of the provider's VaR capital, in (0, 1)
//! target_sharpe = 0.25     # target Sharpe ratio of the provider's net, >= 0
//!
//! [[hedge.swap]]
//! name = "book-20y"        # contract name in outputs (default swap-1, swap-2, ...)
//! term = 20                # years covered; omit to cover to run-off
//! share = 1.0              # share of the book's benefits covered, in (0, 1]
//! premium = "cost-of-capital"  # fixed-leg loading: a rate such as 0.02, or
//!                              # "cost-of-capital" (default) or "sharpe"
//! floating = "indemnity"   # "indemnity": the book's realised benefits (default);
//!                          # "parametric": its expected benefits on the realised path
//! side = "hedger"          # "hedger" (default) or "provider"
//!
//! [[hedge.qforward]]
//! name = "m75-2035"
//! sex = "M"                # reference sex, one of data.sexes
//! age = 75                 # reference age, fitted or closed (below model.max_age)
//! maturity = 2035          # reference calendar year, settled at its end
//! premium = 0.05           # fixed rate = central q × (1 − premium), in [0, 1)
//! notional = "hedge-ratio" # an amount >= 0, or "hedge-ratio" (default)
//! side = "hedger"
//! ```
//!
//! # Conventions
//!
//! - Settlement is annual in arrears: policy year k's legs settle at time k + 1, a
//!   q-forward at the end of its maturity year. Discounting is the valuation's curve.
//! - The swap's floating leg pays the book's benefits of policy years k < term (simulated
//!   with individual deaths when they were simulated); its fixed leg pays the central
//!   path's expected benefits of those years × (1 + π).
//! - "Net" is the value to the book's owner on its side: for the hedger, floating − fixed on
//!   a swap and fixed − realised on a q-forward; the provider's is the negative.
//! - Hedge effectiveness compares the book's PV with its PV less the hedge's net value. An
//!   index hedge (q-forward, parametric swap) cannot remove the book's idiosyncratic risk;
//!   its size is reported as `idiosyncratic_sd`.

pub mod effectiveness;
pub mod evaluate;
pub mod legs;
pub mod pricing;
pub mod qforward;
pub mod spec;
pub mod swap;

pub use effectiveness::{Effectiveness, TailComparison, effectiveness, hedged_pv};
pub use evaluate::{
    ContractSummary, HEDGE_COLUMNS, HedgeInputs, HedgeResults, HedgeSummary, HedgeTable,
    NotionalBasis, PremiumBasis, QForwardSummary, SwapSummary, evaluate,
};
pub use legs::{BookResults, BookSample, BookSampler, Distribution, LegValues};
pub use pricing::{CostOfCapitalPrice, PremiumQuote, SharpePrice, cost_of_capital, sharpe};
pub use qforward::{QForwardTerms, ReferenceCells, ReferenceRates, hedge_ratio, rate_at};
pub use spec::{
    FloatingBasis, HedgeConfig, NotionalChoice, PremiumChoice, QForwardConfig, Side, SwapConfig,
};
pub use swap::{SwapLegs, SwapTerms};
