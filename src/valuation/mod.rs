//! Book valuation: cash flows, annuity factors and truncated lifetimes per scenario.
