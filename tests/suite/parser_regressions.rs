//! Inputs that once made a parser panic or accept a value its rules forbid, found by the
//! fuzz targets in tests/fuzz/ (or by reading the code the fuzzer pointed at). Each must now
//! be refused with the config key or file position at fault.

use std::path::Path;

use tailspan::data::Config;

/// Parses `text` as a config and returns the message of the error it must give.
fn refused(text: &str) -> String {
    Config::parse(text, Path::new("c.toml"))
        .expect_err("the config must be refused")
        .to_string()
}

const DATA: &str = "[data]\nexperience = \"e.csv\"\n";

#[test]
fn extreme_ages_are_refused_without_overflow() {
    // The default closure window was sized from `ages` before they were checked, so an
    // age range wider than an i32 overflowed.
    for ages in [
        "[-2147483648, 2147483647]",
        "[0, 2147483647]",
        "[-2147483648, 0]",
    ] {
        let err = refused(&format!("{DATA}ages = {ages}\nyears = [2000, 2002]\n"));
        assert!(err.contains("`data.ages`"), "{ages}: {err}");
    }
}

#[test]
fn a_swap_term_beyond_any_projection_is_refused_without_overflow() {
    // The term's last year was computed in i32: 2147483647 overflowed, and 4294967295 wrapped
    // to −1 and was accepted as ending before the valuation year.
    for term in ["2147483647", "2147483648", "4294967295"] {
        let text = format!(
            "{DATA}book = \"b.csv\"\nages = [60, 62]\nyears = [2000, 2002]\n\
             [valuation]\nrate = 0.03\n[[hedge.swap]]\nterm = {term}\n"
        );
        let err = refused(&text);
        assert!(err.contains("`hedge.swap[0].term`"), "{term}: {err}");
        assert!(err.contains("beyond the projection"), "{term}: {err}");
    }
}

#[test]
fn an_empty_table_name_is_named_as_the_top_level() {
    // `[""]` made the message name the key `` (nothing), which points nowhere.
    let err = refused("[\"\"]");
    assert!(err.contains("config key `(top level)`"), "{err}");
    assert!(err.contains("unknown field"), "{err}");
}

#[test]
fn an_absurd_curve_term_is_refused() {
    // A term of 1.2e81 years was accepted, and the curve discounted it to exactly 0. No cash
    // flow lies beyond 131 years; such a number is a date or a term in months or days.
    let dir = tempfile::tempdir().unwrap();
    for term in [
        "1222222222222222222222222222222222222222222",
        "20250101",
        "360",
    ] {
        let path = dir.path().join("curve.csv");
        std::fs::write(&path, format!("term,rate\n1,0.02\n{term},0.02033\n")).unwrap();
        let err = tailspan::interest::DiscountCurve::load(&path)
            .expect_err(term)
            .to_string();
        assert!(err.contains("row 3, column `term`"), "{term}: {err}");
        assert!(err.contains("at most 300"), "{term}: {err}");
    }
}

#[test]
fn a_huge_weight_is_refused_before_any_life_is_simulated() {
    // Each life on a row is simulated one by one, so 1e20 lives would exhaust memory.
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("book.csv");
    std::fs::write(&path, "id,sex,age,amount,weight\nP1,F,70,1000,1e20\n").unwrap();
    let err = tailspan::data::Book::load(&path).unwrap_err().to_string();
    assert!(err.contains("row 2") && err.contains("weight"), "{err}");
}
