//! `tailspan check` through the real binary: the demo config passes, and every bad input
//! under tests/bad/ fails with exit code 2, a message naming the file, the row and column
//! or the config key, and the rule, and no output written.
//!
//! The CSV cases are copies of the small valid inputs in tests/bad/good/ with one fault
//! each; a config naming the faulty file and the good others is written to a fresh folder
//! whose output folder must still not exist afterwards.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_tailspan"))
}

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn bad(kind: &str, name: &str) -> PathBuf {
    root().join("tests/bad").join(kind).join(name)
}

fn check(config: &Path) -> Output {
    bin().arg("check").arg(config).output().unwrap()
}

/// Asserts a failed check: exit code 2, nothing on standard output, and every expected
/// piece of the message on standard error.
fn assert_rejected(case: &str, out: &Output, expected: &[&str]) {
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(
        out.status.code(),
        Some(2),
        "{case}: exit code; stderr: {stderr}"
    );
    assert!(
        out.stdout.is_empty(),
        "{case}: printed a summary despite failing"
    );
    for piece in expected {
        assert!(
            stderr.contains(piece),
            "{case}: message lacks `{piece}`:\n{stderr}"
        );
    }
}

/// A config over the good inputs, with `kind` (experience, book or curve) replaced by
/// `file`; window ages 60–62, years 2000–2002, valuation date 2003-07-01 (for the books
/// with dates, copies of `good/book_dates.csv`); output folder `out` beside the config.
fn config_with(dir: &Path, kind: &str, file: &Path) -> PathBuf {
    let pick = |k: &str| {
        if k == kind {
            file.to_path_buf()
        } else {
            bad("good", &format!("{k}.csv"))
        }
    };
    // Published deaths replace the experience, beside the good exposures table.
    let experience = if kind == "deaths" {
        format!(
            "deaths = {:?}\nexposures = {:?}",
            file,
            bad("good", "exposures.txt")
        )
    } else {
        format!("experience = {:?}", pick("experience"))
    };
    let text = format!(
        "[data]\n{experience}\nbook = {:?}\nages = [60, 62]\nyears = [2000, 2002]\n\n\
         [model]\nclosure_fit_ages = 3\n\n[valuation]\ncurve = {:?}\ndate = \"2003-07-01\"\n\n\
         [output]\nfolder = \"out\"\n",
        pick("book"),
        pick("curve")
    );
    let path = dir.join("config.toml");
    std::fs::write(&path, text).unwrap();
    path
}

/// (file under tests/bad/<kind>/, pieces the message must contain besides the file name).
type Case = (&'static str, &'static [&'static str]);

const EXPERIENCE: &[Case] = &[
    (
        "truncated_row.csv",
        &["row 5", "has 4 field(s)", "5 columns"],
    ),
    ("truncated_file.csv", &["row 11", "has 2 field(s)"]),
    (
        "text_deaths.csv",
        &["row 4", "column `deaths`", "`twelve` is not a number"],
    ),
    (
        "nan_exposure.csv",
        &["row 6", "column `exposure`", "not a finite number"],
    ),
    (
        "inf_deaths.csv",
        &["row 7", "column `deaths`", "not a finite number"],
    ),
    (
        "negative_deaths.csv",
        &["row 3", "column `deaths`", "must not be negative"],
    ),
    (
        "negative_exposure.csv",
        &["row 9", "column `exposure`", "must not be negative"],
    ),
    (
        "fractional_age.csv",
        &["row 4", "column `age`", "whole number"],
    ),
    (
        "impossible_age.csv",
        &["row 20", "column `age`", "131 is impossible"],
    ),
    (
        "negative_age.csv",
        &["row 21", "column `age`", "-1 is impossible"],
    ),
    (
        "impossible_year.csv",
        &[
            "row 12",
            "column `year`",
            "1066 is not a plausible calendar year",
        ],
    ),
    (
        "fractional_year.csv",
        &["row 2", "column `year`", "whole number"],
    ),
    (
        "unknown_sex.csv",
        &["row 5", "column `sex`", "`F` or `M`", "`X`"],
    ),
    (
        "lowercase_sex.csv",
        &["row 5", "column `sex`", "`F` or `M`"],
    ),
    (
        "duplicate_cell.csv",
        &[
            "row 8",
            "duplicate cell",
            "sex M, age 60, year 2000",
            "also on row 3",
        ],
    ),
    (
        "missing_cell.csv",
        &[
            "missing cell",
            "sex F, age 61, year 2001",
            "`data.ages`",
            "`data.years`",
        ],
    ),
    (
        "deaths_zero_exposure.csv",
        &["row 10", "column `deaths`", "zero exposure"],
    ),
    ("empty_field.csv", &["row 6", "column `deaths`", "is empty"]),
    ("non_utf8.csv", &["row 4", "not valid UTF-8"]),
    ("empty.csv", &["empty file", "year,age,sex,deaths,exposure"]),
    ("blank_lines.csv", &["empty file"]),
    ("header_only.csv", &["no data rows"]),
    (
        "no_header.csv",
        &["row 1", "missing header", "year,age,sex,deaths,exposure"],
    ),
    (
        "semicolons.csv",
        &["row 1", "separated by ';'", "separated by commas"],
    ),
    ("long_line.csv", &["row 3", "limited to 4096 bytes"]),
    ("unknown_column.csv", &["row 1", "unknown column `cause`"]),
    (
        "missing_column.csv",
        &["row 1", "missing column `exposure`"],
    ),
    (
        "duplicate_column.csv",
        &["row 1", "column `deaths` appears twice"],
    ),
];

/// Published deaths tables (`data.deaths`), copies of `good/deaths.txt`.
const DEATHS: &[Case] = &[
    (
        "missing_female.txt",
        &[
            "row 10",
            "column `Female`",
            "is missing",
            "`data.ages` = [60, 62]",
        ],
    ),
    (
        "total_not_the_sum.txt",
        &["row 6", "column `Total`", "64 is not Female + Male = 63"],
    ),
    (
        "no_header.txt",
        &["no header line `Year Age Female Male Total`"],
    ),
    (
        "text_figure.txt",
        &["row 13", "column `Male`", "`3x3` is not a number"],
    ),
    (
        "negative_deaths.txt",
        &["row 11", "column `Male`", "must not be negative"],
    ),
    (
        "open_group_in_window.txt",
        &["row 11", "column `Age`", "`62+` is an open age group"],
    ),
    (
        "repeated_age.txt",
        &[
            "row 14",
            "duplicate or out-of-order age 60 in 2002",
            "line 13",
        ],
    ),
    (
        "misspelt_header.txt",
        &["row 4", "unknown column `Males` (did you mean `Male`?)"],
    ),
    ("extra_field.txt", &["row 7", "has 6 fields", "5 columns"]),
];

const BOOK: &[Case] = &[
    (
        "duplicate_id.csv",
        &["row 5", "column `id`", "duplicate id `A2`", "also on row 3"],
    ),
    ("zero_amount.csv", &["row 2", "column `amount`", "positive"]),
    (
        "negative_amount.csv",
        &["row 3", "column `amount`", "positive"],
    ),
    (
        "amount_with_comma.csv",
        &["row 2", "column `amount`", "`5,200` is not a number"],
    ),
    (
        "impossible_age.csv",
        &["row 6", "column `age`", "131 is impossible"],
    ),
    (
        "fractional_age.csv",
        &["row 2", "column `age`", "whole number"],
    ),
    (
        "guarantee_over_term.csv",
        &["row 5", "column `guarantee`", "longer than the term"],
    ),
    (
        "escalation_percent.csv",
        &["row 7", "column `escalation`", "0.03 for 3 %"],
    ),
    (
        "misspelt_column.csv",
        &[
            "row 1",
            "unknown column `gaurantee`",
            "did you mean `guarantee`",
        ],
    ),
    ("empty_book.csv", &["empty book"]),
    (
        "fractional_deferral.csv",
        &["row 4", "column `deferral`", "whole number"],
    ),
    (
        "deferral_beyond_130.csv",
        &["row 6", "column `deferral`", "beyond age 130"],
    ),
    (
        "negative_term.csv",
        &["row 5", "column `term`", "not negative"],
    ),
    (
        "zero_term.csv",
        &["row 5", "column `term`", "at least 1 year"],
    ),
    ("zero_weight.csv", &["row 5", "column `weight`", "positive"]),
    (
        "negative_mortality_factor.csv",
        &["row 6", "column `mortality_factor`", "positive"],
    ),
    ("unknown_sex.csv", &["row 3", "column `sex`", "`Male`"]),
    (
        "truncated_row.csv",
        &["row 4", "has 9 field(s)", "10 columns"],
    ),
    (
        "missing_amount_column.csv",
        &["row 1", "missing column `amount`"],
    ),
    ("empty_id.csv", &["row 4", "column `id`", "is empty"]),
    ("tab_separated.csv", &["row 1", "separated by '\\t'"]),
    (
        "birth_date_29_february_1943.csv",
        &[
            "row 4",
            "column `birth_date`",
            "`1943-02-29`",
            "no such day",
        ],
    ),
    (
        "birth_date_after_valuation.csv",
        &[
            "row 7",
            "column `birth_date`",
            "after the valuation date 2003-07-01",
        ],
    ),
    (
        "birth_date_day_first.csv",
        &["row 2", "column `birth_date`", "YYYY-MM-DD"],
    ),
    (
        "birth_date_aged_131.csv",
        &["row 6", "column `birth_date`", "131 is impossible"],
    ),
    (
        "start_date_beyond_130.csv",
        &["row 4", "column `start_date`", "beyond age 130"],
    ),
    (
        "deferral_and_start_date.csv",
        &["row 1", "`deferral` or `start_date`, not both"],
    ),
    (
        "aged_130.csv",
        &[
            "policy `A5` is aged 130",
            "outside the projected ages 60..120",
            "`model.max_age`",
        ],
    ),
];

const CURVE: &[Case] = &[
    (
        "rate_percent.csv",
        &["row 5", "column `rate`", "0.03 for 3 %"],
    ),
    (
        "terms_not_increasing.csv",
        &["row 4", "column `term`", "increase strictly"],
    ),
    ("zero_term.csv", &["row 2", "column `term`", "above 0"]),
    (
        "rate_below_minus_one.csv",
        &["row 3", "column `rate`", "above -1"],
    ),
    (
        "nan_rate.csv",
        &["row 6", "column `rate`", "not a finite number"],
    ),
    ("empty_curve.csv", &["no rates"]),
    ("no_header.csv", &["row 1", "missing header", "term,rate"]),
];

/// Config cases: the file at fault may be the config or an input it names.
const CONFIG: &[Case] = &[
    (
        "unknown_key.toml",
        &[
            "unknown_key.toml",
            "`data.experiance`",
            "unknown field",
            "did you mean `experience`",
        ],
    ),
    (
        "unknown_section.toml",
        &[
            "unknown_section.toml",
            "`valuaton`",
            "unknown field",
            "did you mean `valuation`",
        ],
    ),
    (
        "rate_percent.toml",
        &["rate_percent.toml", "`valuation.rate`", "0.03 for 3 %"],
    ),
    (
        "ages_reversed.toml",
        &["ages_reversed.toml", "`data.ages`", "[62, 60]"],
    ),
    ("missing_experience.toml", &["nonexistent.csv"]),
    (
        "book_without_rate.toml",
        &[
            "book_without_rate.toml",
            "`valuation.rate`",
            "no discount basis",
        ],
    ),
    (
        "rate_and_curve.toml",
        &["rate_and_curve.toml", "`valuation.rate`", "not both"],
    ),
    (
        "invalid_toml.toml",
        &["invalid_toml.toml", "not valid TOML", "line 5"],
    ),
    (
        "non_utf8.toml",
        &["non_utf8.toml", "not valid UTF-8", "line 6"],
    ),
    (
        "window_beyond_file.toml",
        &[
            "experience.csv",
            "missing cell",
            "year 2003",
            "`data.years` = [2000, 2005]",
        ],
    ),
    (
        "policy_below_window.toml",
        &[
            "policy_below_window.toml",
            "`data.ages`",
            "policy `A3`",
            "book.csv",
            "below the first fitted age 61",
        ],
    ),
    (
        "unknown_sex.toml",
        &["unknown_sex.toml", "`data.sexes[1]`", "`X`"],
    ),
    (
        "wrong_type.toml",
        &["wrong_type.toml", "`projection.scenarios`", "invalid type"],
    ),
    (
        "paths_negative.toml",
        &["paths_negative.toml", "`output.paths`", "found -5"],
    ),
    ("empty.toml", &["empty.toml", "missing field `data`"]),
    (
        "max_age_below_window.toml",
        &[
            "max_age_below_window.toml",
            "`model.max_age`",
            "above the top fitted age 62",
        ],
    ),
    (
        "valuation_year_in_window.toml",
        &[
            "valuation_year_in_window.toml",
            "`valuation.year`",
            "after the last fitted year 2002",
        ],
    ),
    (
        "curve_percent.toml",
        &["rate_percent.csv", "row 5", "column `rate`", "0.03 for 3 %"],
    ),
    (
        "missing_data_key.toml",
        &["missing_data_key.toml", "`data`", "missing field `years`"],
    ),
    (
        "horizon_too_short.toml",
        &[
            "horizon_too_short.toml",
            "`projection.horizon`",
            "needs rates to 2063",
            "ends in 2042",
        ],
    ),
    (
        // A cohort model's window is checked before any data are fitted, by the fit's
        // own rule (`MortalityModel::check_population`).
        "cohorts_too_few.toml",
        &[
            "model `apc`",
            "cohort effect is not identified",
            "model.min_cohort_cells",
            "needs at least 5",
        ],
    ),
    (
        "misspelt_model_kind.toml",
        &[
            "misspelt_model_kind.toml",
            "`model.kind`",
            "unknown variant `lee-carer`",
            "did you mean `lee-carter`",
        ],
    ),
    (
        "book_dates_without_valuation_date.toml",
        &[
            "book_dates_without_valuation_date.toml",
            "`valuation.date`",
            "book_dates.csv gives dates",
        ],
    ),
    (
        "valuation_date_outside_year.toml",
        &[
            "valuation_date_outside_year.toml",
            "`valuation.date`",
            "2004-01-01 is not in the valuation year 2003",
        ],
    ),
    (
        "hedge_without_noise.toml",
        &[
            "hedge_without_noise.toml",
            "`projection.noise`",
            "set `noise = true`",
        ],
    ),
];

fn run_csv_cases(kind: &str, cases: &[Case]) {
    for (name, expected) in cases {
        let dir = tempfile::tempdir().unwrap();
        let config = config_with(dir.path(), kind, &bad(kind, name));
        let out = check(&config);
        let mut pieces = vec![*name];
        pieces.extend_from_slice(expected);
        assert_rejected(&format!("{kind}/{name}"), &out, &pieces);
        let left: Vec<_> = std::fs::read_dir(dir.path()).unwrap().collect();
        assert_eq!(left.len(), 1, "{kind}/{name}: check wrote something");
        assert!(!dir.path().join("out").exists());
    }
}

/// Runs `command` on `config` and requires the refusal `check` gave: exit code 2, the
/// same message, nothing on standard output, and no output folder.
fn assert_command_agrees(case: &str, command: &str, config: &Path, checked: &Output) {
    let out = bin()
        .args(["--quiet", command])
        .arg(config)
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        checked.status.code(),
        "{case}: `{command}` exit code; stderr: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert_eq!(
        String::from_utf8_lossy(&out.stderr),
        String::from_utf8_lossy(&checked.stderr),
        "{case}: `{command}` and `check` refuse differently"
    );
    assert!(out.stdout.is_empty(), "{case}: `{command}` printed output");
    let folder = config.parent().unwrap().join("out");
    assert!(!folder.exists(), "{case}: `{command}` wrote {folder:?}");
}

/// The commands that must refuse each kind of bad input as `check` does: `run` always,
/// and the command that first reads the input.
fn commands_for(kind: &str) -> &'static [&'static str] {
    match kind {
        "experience" | "deaths" => &["run", "fit", "project"],
        "book" | "curve" => &["run", "value"],
        _ => &["run", "value"],
    }
}

#[test]
fn commands_refuse_every_bad_input_as_check_does() {
    for (kind, cases) in [
        ("experience", EXPERIENCE),
        ("deaths", DEATHS),
        ("book", BOOK),
        ("curve", CURVE),
    ] {
        for (name, _) in cases {
            let dir = tempfile::tempdir().unwrap();
            let config = config_with(dir.path(), kind, &bad(kind, name));
            let checked = check(&config);
            assert_eq!(checked.status.code(), Some(2), "{kind}/{name}");
            for command in commands_for(kind) {
                assert_command_agrees(&format!("{kind}/{name}"), command, &config, &checked);
            }
        }
    }
    for (name, _) in CONFIG {
        let config = bad("config", name);
        let checked = check(&config);
        assert_eq!(checked.status.code(), Some(2), "config/{name}");
        for command in commands_for("config") {
            assert_command_agrees(&format!("config/{name}"), command, &config, &checked);
        }
    }
}

#[test]
fn good_inputs_pass() {
    let dir = tempfile::tempdir().unwrap();
    let config = config_with(dir.path(), "none", Path::new(""));
    let out = check(&config);
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    // 3 ages × 3 years × 2 sexes; the age-63 rows lie outside the window.
    assert!(stdout.contains("18 cells"), "{stdout}");
    // Deaths of F in the window: (20+23+26) + (19+22+25) + (18+21+24) = 198.
    assert!(stdout.contains("sex F     deaths 198,"), "{stdout}");
    assert!(
        stdout.contains("policies  6 (7 lives), ages 60-90"),
        "{stdout}"
    );
    assert!(stdout.contains("1 deferred, 3 guaranteed, 2 escalating, 1 fixed-term"));
    assert!(stdout.contains("spot curve"));
    assert!(stdout.contains("valuation   year 2003"));
    assert!(!dir.path().join("out").exists());
}

#[test]
fn book_with_dates_checks() {
    let dir = tempfile::tempdir().unwrap();
    let config = config_with(dir.path(), "book", &bad("good", "book_dates.csv"));
    let out = check(&config);
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    // Ages last birthday at 2003-07-01: D3 born 1943-01-01 is 60, D5 born 1912-02-29 is 91;
    // D3 starts on 2008-07-01, five years on.
    assert!(
        stdout.contains("policies  6 (7 lives), ages 60-91"),
        "{stdout}"
    );
    assert!(stdout.contains("1 deferred, 3 guaranteed"), "{stdout}");
}

#[test]
fn bad_experience_files_are_rejected() {
    run_csv_cases("experience", EXPERIENCE);
}

#[test]
fn bad_published_tables_are_rejected() {
    run_csv_cases("deaths", DEATHS);
}

#[test]
fn published_tables_check_and_print_what_was_read() {
    let dir = tempfile::tempdir().unwrap();
    let config = config_with(dir.path(), "deaths", &bad("good", "deaths.txt"));
    let out = check(&config);
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    // The same cells as good/experience.csv in the window: 18 cells, F deaths 198.
    assert!(stdout.contains("18 cells"), "{stdout}");
    assert!(stdout.contains("sex F     deaths 198,"), "{stdout}");
    assert!(
        stdout.contains("12 lines, years 2000-2002, ages 60-62 and 63+, 6 missing cell(s)"),
        "{stdout}"
    );
    assert!(
        stdout.contains("9 lines, years 2000-2002, ages 60-62, 0 missing cell(s)"),
        "{stdout}"
    );
}

#[test]
fn bad_books_are_rejected() {
    run_csv_cases("book", BOOK);
}

#[test]
fn bad_curves_are_rejected() {
    run_csv_cases("curve", CURVE);
}

#[test]
fn bad_configs_are_rejected() {
    let out_folder = root().join("tests/bad/config/out");
    for (name, expected) in CONFIG {
        let out = check(&bad("config", name));
        assert_rejected(&format!("config/{name}"), &out, expected);
        assert!(
            !out_folder.exists(),
            "config/{name}: created an output folder"
        );
    }
}

#[test]
fn every_bad_file_has_a_case() {
    // A file added under tests/bad/ without a row in the tables would never be run.
    for (kind, cases) in [
        ("experience", EXPERIENCE),
        ("deaths", DEATHS),
        ("book", BOOK),
        ("curve", CURVE),
        ("config", CONFIG),
    ] {
        for entry in std::fs::read_dir(root().join("tests/bad").join(kind)).unwrap() {
            let name = entry.unwrap().file_name().to_string_lossy().into_owned();
            assert!(
                cases.iter().any(|(case, _)| *case == name),
                "tests/bad/{kind}/{name} has no case"
            );
        }
    }
}

#[test]
fn demo_config_checks() {
    let out = check(&root().join("configs/demo.toml"));
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(stdout.contains("ages 55-100 (46), years 1975-2024 (50), sexes F M: 4600 cells"));
    assert!(stdout.contains("policies  20 000"), "{stdout}");
    assert!(stdout.contains("discount    flat 3.00 % a year"));
    assert!(stdout.trim_end().ends_with("ok"));
}

#[test]
fn check_without_config_is_a_usage_error() {
    let out = bin().arg("check").output().unwrap();
    assert_eq!(out.status.code(), Some(2));
}

#[test]
fn synth_is_deterministic_in_the_seed() {
    let dir = tempfile::tempdir().unwrap();
    let write = |name: &str, seed: &str| {
        let out = bin()
            .args(["synth", "--policies", "300", "--seed", seed, "--out"])
            .arg(dir.path().join(name))
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        let read = |f: &str| std::fs::read(dir.path().join(name).join(f)).unwrap();
        (
            read("experience.csv"),
            read("book.csv"),
            read("book-experience.csv"),
            read("second-population.csv"),
        )
    };
    let a = write("a", "7");
    let b = write("b", "7");
    let c = write("c", "8");
    assert_eq!(a, b);
    assert_ne!(a.0, c.0);
    assert_ne!(a.1, c.1);
    assert_ne!(a.2, c.2);
    assert_ne!(a.3, c.3);
    // Only the four files, no temporary leftovers.
    assert_eq!(std::fs::read_dir(dir.path().join("a")).unwrap().count(), 4);
}

#[test]
fn synth_rejects_an_empty_book_and_writes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let target = dir.path().join("demo");
    let out = bin()
        .args(["synth", "--policies", "0", "--out"])
        .arg(&target)
        .output()
        .unwrap();
    assert_rejected(
        "synth --policies 0",
        &out,
        &["`--policies`", "between 1 and"],
    );
    assert!(!target.exists());
}
