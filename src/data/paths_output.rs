//! `output.paths`: which scenarios' rates go to `paths.parquet`.
//!
//! Every scenario's full rate grid is by far the largest output (about 10,000 rows a
//! scenario for two sexes over 80 years), while most readers look at a few hundred paths
//! for fan charts or checks. So besides all or none, a number N keeps the central path
//! (scenario 0) and the first N stochastic scenarios; the other files still hold every
//! scenario.

use std::fmt;

use serde::de::{self, Deserializer, Visitor};
use serde::{Deserialize, Serialize, Serializer};

/// The scenarios whose rates `paths.parquet` holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum PathsOutput {
    /// Every scenario (`true`).
    #[default]
    All,
    /// No `paths.parquet` (`false`).
    None,
    /// The central path and the first N stochastic scenarios, 0 ..= N (a number).
    First(u64),
}

impl PathsOutput {
    /// Whether `paths.parquet` is written at all.
    pub fn written(self) -> bool {
        self != PathsOutput::None
    }

    /// One past the last scenario number written (`u64::MAX` for all, 0 for none).
    pub fn end(self) -> u64 {
        match self {
            PathsOutput::All => u64::MAX,
            PathsOutput::None => 0,
            PathsOutput::First(n) => n.saturating_add(1),
        }
    }
}

impl From<bool> for PathsOutput {
    fn from(all: bool) -> Self {
        if all {
            PathsOutput::All
        } else {
            PathsOutput::None
        }
    }
}

impl Serialize for PathsOutput {
    fn serialize<S: Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        match self {
            PathsOutput::All => serializer.serialize_bool(true),
            PathsOutput::None => serializer.serialize_bool(false),
            PathsOutput::First(n) => serializer.serialize_u64(*n),
        }
    }
}

struct PathsVisitor;

impl Visitor<'_> for PathsVisitor {
    type Value = PathsOutput;

    fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
        f.write_str(
            "true (every scenario), false (no paths.parquet) or a number N >= 0 of \
             stochastic scenarios written after the central path",
        )
    }

    fn visit_bool<E: de::Error>(self, v: bool) -> Result<PathsOutput, E> {
        Ok(v.into())
    }

    fn visit_i64<E: de::Error>(self, v: i64) -> Result<PathsOutput, E> {
        u64::try_from(v).map(PathsOutput::First).map_err(|_| {
            E::custom(format!(
                "must be true, false or a number of scenarios N >= 0, found {v}"
            ))
        })
    }

    fn visit_u64<E: de::Error>(self, v: u64) -> Result<PathsOutput, E> {
        Ok(PathsOutput::First(v))
    }
}

impl<'de> Deserialize<'de> for PathsOutput {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        deserializer.deserialize_any(PathsVisitor)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[derive(Deserialize, Serialize)]
    struct Holder {
        paths: PathsOutput,
    }

    fn parse(text: &str) -> Result<PathsOutput, String> {
        toml::from_str::<Holder>(text)
            .map(|h| h.paths)
            .map_err(|e| e.to_string())
    }

    #[test]
    fn booleans_and_counts_parse_and_round_trip() {
        assert_eq!(parse("paths = true"), Ok(PathsOutput::All));
        assert_eq!(parse("paths = false"), Ok(PathsOutput::None));
        assert_eq!(parse("paths = 250"), Ok(PathsOutput::First(250)));
        assert_eq!(parse("paths = 0"), Ok(PathsOutput::First(0)));
        for p in [PathsOutput::All, PathsOutput::None, PathsOutput::First(7)] {
            let text = toml::to_string(&Holder { paths: p }).unwrap();
            assert_eq!(parse(&text), Ok(p));
        }
    }

    #[test]
    fn negative_counts_and_other_types_are_refused() {
        assert!(parse("paths = -3").unwrap_err().contains("found -3"));
        assert!(
            parse("paths = \"yes\"")
                .unwrap_err()
                .contains("expected true")
        );
        assert!(parse("paths = 2.5").is_err());
    }

    #[test]
    fn end_is_one_past_the_last_scenario() {
        assert_eq!(PathsOutput::All.end(), u64::MAX);
        assert_eq!(PathsOutput::None.end(), 0);
        assert_eq!(PathsOutput::First(0).end(), 1);
        assert_eq!(PathsOutput::First(100).end(), 101);
        assert_eq!(PathsOutput::First(u64::MAX).end(), u64::MAX);
    }
}
