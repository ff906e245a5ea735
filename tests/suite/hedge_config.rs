//! The `[hedge]` config section: every bad value is refused with the key at fault, and the
//! binary exits with code 2 on it.

use std::path::Path;
use std::process::Command;

use tailspan::data::Config;
use tailspan::hedge::{FloatingBasis, NotionalChoice, PremiumChoice, Side};

/// Fitted ages 60–100, years 2000–2024, horizon 10 (projection to 2034), valuation 2025,
/// max_age 120, female only.
const BASE: &str = r#"
[data]
experience = "e.csv"
book = "b.csv"
ages = [60, 100]
years = [2000, 2024]
sexes = ["F"]

[projection]
horizon = 10
"#;

fn parse(hedge: &str) -> Result<Config, String> {
    Config::parse(&format!("{BASE}\n{hedge}"), Path::new("c.toml")).map_err(|e| e.to_string())
}

/// Asserts the section is refused with a message naming `key` and containing `rule`.
fn refused(hedge: &str, key: &str, rule: &str) {
    let err = parse(hedge).expect_err(hedge);
    assert!(
        err.contains(&format!("`{key}`")),
        "message for\n{hedge}\nlacks key `{key}`: {err}"
    );
    assert!(err.contains(rule), "message lacks `{rule}`: {err}");
}

const SWAP: &str = "[[hedge.swap]]\n";
const QF: &str = "[[hedge.qforward]]\nsex = \"F\"\nage = 75\nmaturity = 2030\n";

#[test]
fn defaults_and_choices_are_read() {
    let c = parse(&format!(
        "{SWAP}{QF}[[hedge.swap]]\nterm = 10\npremium = \"sharpe\"\nfloating = \"parametric\"\nside = \"provider\"\nshare = 0.5\n\
         [[hedge.qforward]]\nname = \"x\"\nsex = \"F\"\nage = 119\nmaturity = 2034\nnotional = 250000\npremium = 0.05\n"
    ))
    .unwrap();
    let h = c.hedge.unwrap();
    assert_eq!(h.cost_of_capital, 0.06);
    assert_eq!(h.capital_level, 0.995);
    assert_eq!(h.target_sharpe, 0.25);
    assert_eq!(h.swap[0].term, None);
    assert_eq!(h.swap[0].premium, PremiumChoice::CostOfCapital);
    assert_eq!(h.swap[0].floating, FloatingBasis::Indemnity);
    assert_eq!(h.swap[0].side, Side::Hedger);
    assert_eq!(h.swap[0].share, 1.0);
    assert_eq!(h.swap[0].name_at(0), "swap-1");
    assert_eq!(h.swap[1].premium, PremiumChoice::Sharpe);
    assert_eq!(h.swap[1].floating, FloatingBasis::Parametric);
    assert_eq!(h.qforward[0].notional, NotionalChoice::HedgeRatio);
    assert_eq!(h.qforward[0].premium, 0.0);
    assert_eq!(h.qforward[1].notional, NotionalChoice::Amount(250000.0));
    let c = parse(&format!("{SWAP}premium = 0.015\n")).unwrap();
    assert_eq!(c.hedge.unwrap().swap[0].premium, PremiumChoice::Rate(0.015));
    // No section, no hedges.
    assert!(parse("").unwrap().hedge.is_none());
}

#[test]
fn section_level_values_are_checked() {
    refused(
        &format!("[hedge]\ncost_of_capital = 0\n{SWAP}"),
        "hedge.cost_of_capital",
        "(0, 1)",
    );
    refused(
        &format!("[hedge]\ncost_of_capital = 6\n{SWAP}"),
        "hedge.cost_of_capital",
        "(0, 1)",
    );
    refused(
        &format!("[hedge]\ncapital_level = 1.0\n{SWAP}"),
        "hedge.capital_level",
        "(0, 1)",
    );
    refused(
        &format!("[hedge]\ntarget_sharpe = -0.1\n{SWAP}"),
        "hedge.target_sharpe",
        "at least 0",
    );
    refused("[hedge]\ncost_of_capital = 0.06\n", "hedge", "no contract");
    refused(
        &format!("[hedge]\ncapital = 0.06\n{SWAP}"),
        "hedge.capital",
        "unknown field `capital`",
    );
    let no_book = format!("{}\n{SWAP}", BASE.replace("book = \"b.csv\"\n", ""));
    let err = Config::parse(&no_book, Path::new("c.toml"))
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("`hedge`") && err.contains("data.book"),
        "{err}"
    );
}

#[test]
fn swap_values_are_checked() {
    // Projection ends 2034: a 10-year term from 2025 fits, 11 years does not.
    assert!(parse(&format!("{SWAP}term = 10\n")).is_ok());
    refused(
        &format!("{SWAP}term = 11\n"),
        "hedge.swap[0].term",
        "beyond the projection's last year 2034",
    );
    refused(
        &format!("{SWAP}term = 0\n"),
        "hedge.swap[0].term",
        "at least 1 year",
    );
    refused(&format!("{SWAP}term = -3\n"), "hedge.swap[0].term", "");
    refused(
        &format!("{SWAP}share = 0\n"),
        "hedge.swap[0].share",
        "(0, 1]",
    );
    refused(
        &format!("{SWAP}share = 1.5\n"),
        "hedge.swap[0].share",
        "(0, 1]",
    );
    refused(
        &format!("{SWAP}{SWAP}share = -1\n"),
        "hedge.swap[1].share",
        "(0, 1]",
    );
    refused(
        &format!("{SWAP}premium = 2\n"),
        "hedge.swap[0].premium",
        "0.02 for 2 %",
    );
    refused(
        &format!("{SWAP}premium = \"cheap\"\n"),
        "hedge.swap[0].premium",
        "\"cost-of-capital\"",
    );
    refused(
        &format!("{SWAP}floating = \"index\"\n"),
        "hedge.swap[0].floating",
        "indemnity",
    );
    refused(
        &format!("{SWAP}side = \"buyer\"\n"),
        "hedge.swap[0].side",
        "hedger",
    );
    refused(
        &format!("{SWAP}notional = 5\n"),
        "hedge.swap[0].notional",
        "unknown field `notional`",
    );
}

#[test]
fn q_forward_values_are_checked() {
    let with = |extra: &str| QF.replace("age = 75\n", extra);
    // Fitted 60–100, closed to 119 (q is 1 at max_age 120).
    assert!(parse(&with("age = 60\n")).is_ok());
    assert!(parse(&with("age = 119\n")).is_ok());
    refused(
        &with("age = 59\n"),
        "hedge.qforward[0].age",
        "fitted or closed age from 60 to 119",
    );
    refused(
        &with("age = 120\n"),
        "hedge.qforward[0].age",
        "fitted or closed age",
    );
    refused(
        &QF.replace("2030", "2024"),
        "hedge.qforward[0].maturity",
        "from the valuation year 2025 to 2034",
    );
    refused(
        &QF.replace("2030", "2035"),
        "hedge.qforward[0].maturity",
        "2034",
    );
    refused(
        &QF.replace("\"F\"", "\"M\""),
        "hedge.qforward[0].sex",
        "data.sexes",
    );
    refused(&QF.replace("\"F\"", "\"X\""), "hedge.qforward[0].sex", "");
    refused(
        &format!("{QF}notional = -1000\n"),
        "hedge.qforward[0].notional",
        "at least 0",
    );
    refused(
        &format!("{QF}notional = \"full\"\n"),
        "hedge.qforward[0].notional",
        "\"hedge-ratio\"",
    );
    refused(
        &format!("{QF}premium = 1.0\n"),
        "hedge.qforward[0].premium",
        "[0, 1)",
    );
    refused(
        &format!("{QF}premium = -0.05\n"),
        "hedge.qforward[0].premium",
        "[0, 1)",
    );
    refused(
        &QF.replace("maturity = 2030\n", ""),
        "hedge.qforward[0]",
        "missing field `maturity`",
    );
    refused(
        &format!("{QF}term = 5\n"),
        "hedge.qforward[0].term",
        "unknown field `term`",
    );
}

#[test]
fn contract_names_are_unique() {
    refused(
        &format!("{SWAP}name = \"a\"\n{QF}name = \"a\"\n"),
        "hedge.qforward[0].name",
        "also used by `hedge.swap[0].name`",
    );
    // A default name taken explicitly clashes too.
    refused(
        &format!("{SWAP}{SWAP}name = \"swap-1\"\n"),
        "hedge.swap[1].name",
        "also used",
    );
    refused(
        &format!("{SWAP}name = \" \"\n"),
        "hedge.swap[0].name",
        "empty",
    );
}

#[test]
fn the_binary_exits_2_on_a_bad_hedge() {
    let dir = tempfile::tempdir().unwrap();
    let config = dir.path().join("c.toml");
    std::fs::write(&config, format!("{BASE}\n{SWAP}term = 40\n")).unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_tailspan"))
        .arg("check")
        .arg(&config)
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{stderr}");
    assert!(out.stdout.is_empty());
    assert!(stderr.contains("hedge.swap[0].term"), "{stderr}");
}
