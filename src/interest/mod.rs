//! Interest: discount curves, discount functions and payment timing.
//!
//! These sit below the life-table maths and the valuation, which only ask "what is 1 at
//! time t worth now" and "when in the period is it paid"; loading a curve from a user's
//! file belongs to the input layer (`data/curve.rs`). Stochastic interest will grow here.

pub mod curve;
pub mod discount;
pub mod timing;

pub use curve::DiscountCurve;
pub use discount::{Discount, FlatRate};
pub use timing::Timing;
