//! "Did you mean ...": the nearest known name to a misspelt one.
//!
//! A misspelt config key or column is refused (it must never fall back to a default), and
//! the refusal is more useful when it names what was probably meant.

/// The name in `known` nearest to `name` by edit distance (ignoring case), if it is close
/// enough to be a likely misspelling: at most 2 edits, or a third of the name's length.
pub fn nearest<'a>(name: &str, known: impl IntoIterator<Item = &'a str>) -> Option<&'a str> {
    let lower = name.to_lowercase();
    let limit = (lower.chars().count() / 3).max(2);
    known
        .into_iter()
        .map(|k| (strsim::levenshtein(&lower, &k.to_lowercase()), k))
        .filter(|(d, _)| *d <= limit)
        .min_by_key(|(d, _)| *d)
        .map(|(_, k)| k)
}

/// `" (did you mean `x`?)"` for the name in `known` nearest to `name`, or nothing.
pub fn hint<'a>(name: &str, known: impl IntoIterator<Item = &'a str>) -> String {
    nearest(name, known)
        .map(|k| format!(" (did you mean `{k}`?)"))
        .unwrap_or_default()
}

/// Adds a hint to serde's "unknown field `x`, expected one of `a`, `b`" or "unknown
/// variant ..." message, from the names it lists.
pub fn serde_hint(message: &str) -> String {
    let Some(rest) = message
        .strip_prefix("unknown field `")
        .or_else(|| message.strip_prefix("unknown variant `"))
    else {
        return message.to_string();
    };
    let Some((name, listed)) = rest.split_once('`') else {
        return message.to_string();
    };
    let known: Vec<&str> = listed.split('`').skip(1).step_by(2).collect();
    format!("{message}{}", hint(name, known))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn suggests_the_close_name_only() {
        let known = ["experience", "book", "ages", "years", "sexes"];
        assert_eq!(nearest("experiance", known), Some("experience"));
        assert_eq!(nearest("Sexs", known), Some("sexes"));
        assert_eq!(nearest("horizon", known), None);
    }

    #[test]
    fn reads_serde_messages() {
        let m = "unknown field `scenarioz`, expected one of `scenarios`, `seed`, `horizon`";
        assert_eq!(serde_hint(m), format!("{m} (did you mean `scenarios`?)"));
        let m = "unknown variant `lee-carer`, expected one of `lee-carter`, `cbd`";
        assert!(serde_hint(m).ends_with("(did you mean `lee-carter`?)"));
        let m = "unknown field `zzz`, expected `a` or `b`";
        assert_eq!(serde_hint(m), m);
        assert_eq!(serde_hint("invalid type"), "invalid type");
    }
}
