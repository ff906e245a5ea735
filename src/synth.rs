//! The invented demo population and annuity book.
