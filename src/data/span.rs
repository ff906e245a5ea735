//! Inclusive integer ranges of ages or calendar years.

use serde::{Deserialize, Serialize};

/// An inclusive range `first..=last` of integer ages or calendar years.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
pub struct Span {
    /// First value, inclusive.
    pub first: i32,
    /// Last value, inclusive.
    pub last: i32,
}

impl Span {
    /// A span from `first` to `last` inclusive; `None` if `last < first`.
    pub fn new(first: i32, last: i32) -> Option<Self> {
        (last >= first).then_some(Span { first, last })
    }

    /// `span` widened to hold `value` (the span of `value` alone when there is none yet).
    pub fn widened(span: Option<Span>, value: i32) -> Span {
        match span {
            None => Span {
                first: value,
                last: value,
            },
            Some(s) => Span {
                first: s.first.min(value),
                last: s.last.max(value),
            },
        }
    }

    /// Number of values in the span.
    pub fn len(&self) -> usize {
        (self.last - self.first + 1) as usize
    }

    /// Always false: a span holds at least one value.
    pub fn is_empty(&self) -> bool {
        false
    }

    /// Whether `value` lies in the span.
    pub fn contains(&self, value: i32) -> bool {
        (self.first..=self.last).contains(&value)
    }

    /// Whether `other` lies wholly inside this span.
    pub fn covers(&self, other: &Span) -> bool {
        self.first <= other.first && other.last <= self.last
    }

    /// Zero-based position of `value`, if it lies in the span.
    pub fn index(&self, value: i32) -> Option<usize> {
        self.contains(value).then(|| (value - self.first) as usize)
    }

    /// The values in order.
    pub fn iter(&self) -> impl Iterator<Item = i32> + use<> {
        self.first..=self.last
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn index_and_len_agree() {
        let s = Span::new(55, 100).unwrap();
        assert_eq!(s.len(), 46);
        assert_eq!(s.index(55), Some(0));
        assert_eq!(s.index(100), Some(45));
        assert_eq!(s.index(101), None);
        assert!(Span::new(3, 2).is_none());
    }
}
