//! Inputs in the layouts practitioners keep them in: spreadsheets (made by openpyxl and
//! odfpy, tests/fixtures/make_spreadsheet_fixtures.py), books with dates of birth, and
//! published deaths and exposures tables. Each must read to the same values as the CSV,
//! and `synth --formats` must give the CSV demo's fit and value bit for bit.

use std::path::{Path, PathBuf};
use std::process::Command;

use tailspan::data::{Book, Config, Experience, Sex, Span};

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn sheet(name: &str) -> PathBuf {
    root().join("tests/fixtures/spreadsheets").join(name)
}

fn good(name: &str) -> PathBuf {
    root().join("tests/bad/good").join(name)
}

fn window() -> (Span, Span) {
    (
        Span {
            first: 60,
            last: 62,
        },
        Span {
            first: 2000,
            last: 2002,
        },
    )
}

#[test]
fn spreadsheet_books_read_as_the_csv() {
    let csv = Book::load(&good("book.csv")).unwrap();
    for name in ["book.xlsx", "book.ods", "book.xlsx#Policies"] {
        let book = Book::load(&sheet(name)).unwrap();
        assert_eq!(book.policies, csv.policies, "{name}");
        assert!(
            book.source.to_string_lossy().ends_with("#Policies"),
            "{name}"
        );
    }
}

#[test]
fn spreadsheet_experience_reads_as_the_csv_from_the_named_sheet() {
    let (ages, years) = window();
    let csv = Experience::load(&good("experience.csv"), ages, years, &Sex::ALL).unwrap();
    for name in ["experience.xlsx#Experience", "experience.ods#Experience"] {
        let e = Experience::load(&sheet(name), ages, years, &Sex::ALL).unwrap();
        assert_eq!(e.populations, csv.populations, "{name}");
    }
    // Without a sheet name the first sheet (a note) is read, and refused by its header.
    let err = Experience::load(&sheet("experience.xlsx"), ages, years, &Sex::ALL)
        .unwrap_err()
        .to_string();
    assert!(err.contains("experience.xlsx#Notes: row 1"), "{err}");
}

#[test]
fn spreadsheet_errors_name_sheet_row_and_column() {
    for name in ["book_impossible_age.xlsx", "book_impossible_age.ods"] {
        let err = Book::load(&sheet(name)).unwrap_err().to_string();
        assert!(
            err.contains(&format!(
                "{name}#Policies: row 6, column `age`: 131 is impossible"
            )),
            "{err}"
        );
    }
    let err = Book::load(&sheet("book.xlsx#Polices"))
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("no sheet `Polices` (did you mean `Policies`?)"),
        "{err}"
    );
}

/// A config over the corpus's good inputs with `book` and the valuation date 2003-07-01.
fn dated_config(dir: &Path, book: &Path, basis: &str) -> Config {
    let text = format!(
        "[data]\nexperience = {:?}\nbook = {:?}\nages = [60, 62]\nyears = [2000, 2002]\n\
         [model]\nclosure_fit_ages = 3\n[valuation]\nrate = 0.03\ndate = \"2003-07-01\"\n\
         age_basis = \"{basis}\"\n",
        good("experience.csv"),
        book
    );
    let path = dir.join("c.toml");
    std::fs::write(&path, text).unwrap();
    Config::load(&path).unwrap()
}

#[test]
fn dates_of_birth_give_ages_by_the_basis() {
    let dir = tempfile::tempdir().unwrap();
    let ages = |book: &Path, basis: &str| -> Vec<(i32, u32)> {
        let config = dated_config(dir.path(), book, basis);
        Book::from_config(&config)
            .unwrap()
            .unwrap()
            .policies
            .iter()
            .map(|p| (p.age, p.deferral))
            .collect()
    };
    // Hand-worked at 2003-07-01: 1936-05-14 is 67 last birthday (nearest 67); 1931-02-28
    // 72 (72); 1943-01-01 60 (60: 181 days since, 184 to the next), starting 2008-07-01,
    // five years on; 1923-08-30 79 (80); 1912-02-29 91 (91, its 2003 birthday being
    // 1 March, common practice); 1938-07-02 64 (65: the birthday is tomorrow).
    let last = vec![(67, 0), (72, 0), (60, 5), (79, 0), (91, 0), (64, 0)];
    let nearest = vec![(67, 0), (72, 0), (60, 5), (80, 0), (91, 0), (65, 0)];
    assert_eq!(ages(&good("book_dates.csv"), "last-birthday"), last);
    assert_eq!(ages(&good("book_dates.csv"), "nearest"), nearest);
    // Date cells in spreadsheets read as the same dates.
    assert_eq!(ages(&sheet("book_dates.xlsx"), "last-birthday"), last);
    assert_eq!(ages(&sheet("book_dates.ods"), "nearest"), nearest);
}

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_tailspan"))
}

fn ok(out: std::process::Output) {
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

/// A reduced demo config over the files in `demo` with `data` lines for the inputs.
fn layout_config(dir: &Path, name: &str, data: &str, valuation: &str) -> PathBuf {
    let text = format!(
        "[data]\n{data}\nages = [55, 100]\nyears = [1975, 2024]\n\n[model]\nkind = \"lee-carter\"\n\n\
         [projection]\nscenarios = 12\nseed = 7\nhorizon = 80\n\n\
         [valuation]\nyear = 2025\nrate = 0.03\nfrequency = 12\n{valuation}\n\n\
         [output]\nfolder = \"out-{name}\"\npaths = false\n"
    );
    let path = dir.join(format!("{name}.toml"));
    std::fs::write(&path, text).unwrap();
    path
}

/// A JSON document without its `run` block (which names the inputs and so differs).
fn body(path: &Path) -> serde_json::Value {
    let mut v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    v.as_object_mut().unwrap().remove("run");
    v
}

#[test]
fn synth_formats_fit_and_value_as_the_csv_demo() {
    let dir = tempfile::tempdir().unwrap();
    let demo = dir.path().join("demo");
    ok(bin()
        .args(["synth", "--policies", "400", "--formats", "--out"])
        .arg(&demo)
        .output()
        .unwrap());
    // The same seed writes the same bytes in every layout.
    let again = dir.path().join("again");
    ok(bin()
        .args(["synth", "--policies", "400", "--formats", "--out"])
        .arg(&again)
        .output()
        .unwrap());
    let mut names: Vec<_> = std::fs::read_dir(&demo)
        .unwrap()
        .map(|e| e.unwrap().file_name())
        .collect();
    names.sort();
    assert_eq!(names.len(), 11, "{names:?}");
    for name in &names {
        assert_eq!(
            std::fs::read(demo.join(name)).unwrap(),
            std::fs::read(again.join(name)).unwrap(),
            "{name:?}"
        );
    }
    let d = |f: &str| format!("{:?}", demo.join(f));
    let layouts = [
        (
            "csv",
            format!(
                "experience = {}\nbook = {}",
                d("experience.csv"),
                d("book.csv")
            ),
            String::new(),
        ),
        (
            "dates",
            format!(
                "experience = {}\nbook = {}",
                d("experience.csv"),
                d("book-dates.csv")
            ),
            "date = \"2025-01-01\"".to_string(),
        ),
        (
            "published",
            format!(
                "deaths = {}\nexposures = {}\nbook = {}",
                d("deaths.txt"),
                d("exposures.txt"),
                d("book.csv")
            ),
            String::new(),
        ),
        (
            "xlsx",
            format!(
                "experience = {}\nbook = {}",
                d("experience.xlsx#Experience"),
                d("book.xlsx")
            ),
            String::new(),
        ),
        (
            "ods",
            format!(
                "experience = {}\nbook = {}",
                d("experience.ods"),
                d("book.ods#Policies")
            ),
            String::new(),
        ),
    ];
    let mut results = Vec::new();
    for (name, data, valuation) in &layouts {
        let config = layout_config(dir.path(), name, data, valuation);
        ok(bin()
            .args(["--quiet", "value"])
            .arg(&config)
            .output()
            .unwrap());
        ok(bin()
            .args(["--quiet", "fit"])
            .arg(&config)
            .output()
            .unwrap());
        let out = dir.path().join(format!("out-{name}"));
        results.push((
            *name,
            body(&out.join("fit.json")),
            body(&out.join("summary.json")),
        ));
    }
    let (_, fit, summary) = &results[0];
    assert!(summary["best_estimate"].as_f64().unwrap() > 0.0);
    for (name, f, s) in &results[1..] {
        assert_eq!(f, fit, "{name}: fit.json differs from the CSV demo's");
        assert_eq!(
            s, summary,
            "{name}: summary.json differs from the CSV demo's"
        );
    }
    // check prints what it read from the published tables.
    let config = dir.path().join("published.toml");
    let out = bin().arg("check").arg(&config).output().unwrap();
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(
        stdout.contains("years 1975-2024, ages 50-100 and 101+, 150 missing cell(s)"),
        "{stdout}"
    );
}
