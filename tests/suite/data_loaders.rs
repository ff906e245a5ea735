//! The input loaders: writing then loading gives back the same values, columns are found
//! by name, defaults fill optional book columns, and errors carry the row and column.

use std::path::{Path, PathBuf};

use tailspan::data::{Book, Config, Experience, Policy, Sex, Span};
use tailspan::interest::DiscountCurve;
use tailspan::{Error, synth};

fn good(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/bad/good")
        .join(name)
}

fn span(first: i32, last: i32) -> Span {
    Span::new(first, last).unwrap()
}

fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let path = dir.join(name);
    std::fs::write(&path, text).unwrap();
    path
}

#[test]
fn experience_round_trips_exactly() {
    let dir = tempfile::tempdir().unwrap();
    let original = synth::population(3).unwrap().experience;
    let path = dir.path().join("e.csv");
    original.write_csv(&path).unwrap();
    let loaded = Experience::load(&path, synth::AGES, synth::YEARS, &Sex::ALL).unwrap();
    assert_eq!(loaded.source, path);
    assert_eq!(loaded.populations, original.populations);
}

#[test]
fn experience_window_is_the_restricted_grid() {
    let dir = tempfile::tempdir().unwrap();
    let original = synth::population(4).unwrap().experience;
    let path = dir.path().join("e.csv");
    original.write_csv(&path).unwrap();
    let (ages, years) = (span(60, 70), span(1990, 2000));
    let loaded = Experience::load(&path, ages, years, &[Sex::M, Sex::F]).unwrap();
    // Populations come in the order asked for.
    assert_eq!(loaded.populations[0].sex, Sex::M);
    assert_eq!(loaded.populations[1].sex, Sex::F);
    for p in &loaded.populations {
        let full = original.population(p.sex).unwrap();
        assert_eq!(*p, full.restrict(ages, years).unwrap());
    }
}

#[test]
fn experience_columns_are_found_by_name_in_any_order() {
    let dir = tempfile::tempdir().unwrap();
    // Byte-order mark, capitalised and reordered header, padded fields.
    let text = "\u{feff}Sex, Exposure ,deaths,AGE,year\n\
                F, 1000.5 ,3,60,2000\nF,990,4,61,2000\nF,980,2,60,2001\nF,970,5,61,2001\n\
                F,960,6,60,2002\nF,950,7,61,2002\n";
    let path = write(dir.path(), "e.csv", text);
    let e = Experience::load(&path, span(60, 61), span(2000, 2002), &[Sex::F]).unwrap();
    let p = e.population(Sex::F).unwrap();
    assert_eq!(p.deaths[(0, 0)], 3.0);
    assert_eq!(p.exposure[(0, 0)], 1000.5);
    assert_eq!(p.deaths[(1, 2)], 7.0);
    assert_eq!(p.exposure[(1, 1)], 970.0);
    assert_eq!(p.total_deaths(), 27.0);
}

#[test]
fn experience_outside_the_window_is_checked_but_not_kept() {
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(good("experience.csv")).unwrap();
    let e = Experience::load(
        &good("experience.csv"),
        span(60, 62),
        span(2000, 2002),
        &Sex::ALL,
    )
    .unwrap();
    assert_eq!(e.populations[0].ages, span(60, 62));
    // A bad row outside the window is still an error: the file as a whole must be sound.
    let path = write(dir.path(), "e.csv", &format!("{text}1990,70,F,-1,100\n"));
    let err = Experience::load(&path, span(60, 62), span(2000, 2002), &Sex::ALL).unwrap_err();
    match err {
        Error::Cell { row, column, .. } => assert_eq!((row, column.as_str()), (22, "deaths")),
        other => panic!("unexpected {other}"),
    }
}

#[test]
fn experience_errors_carry_row_and_column() {
    let dir = tempfile::tempdir().unwrap();
    let text = "year,age,sex,deaths,exposure\n2000,60,F,1,10\n2000,61,F,x,10\n";
    let path = write(dir.path(), "e.csv", text);
    let err = Experience::load(&path, span(60, 61), span(2000, 2000), &[Sex::F]).unwrap_err();
    match err {
        Error::Cell {
            file, row, column, ..
        } => {
            assert_eq!(file, path);
            assert_eq!(row, 3);
            assert_eq!(column, "deaths");
        }
        other => panic!("unexpected {other}"),
    }
}

#[test]
fn book_round_trips_exactly() {
    let dir = tempfile::tempdir().unwrap();
    let mut original = synth::book(5, 400).unwrap();
    // Values whose decimal form is long must survive too.
    original.policies[0].amount = 1234.5678;
    original.policies[0].escalation = 0.0275;
    original.policies[1].weight = 2.5;
    original.policies[1].mortality_factor = 1.0 / 3.0;
    let path = dir.path().join("b.csv");
    original.write_csv(&path).unwrap();
    let loaded = Book::load(&path).unwrap();
    assert_eq!(loaded.source, path);
    assert_eq!(loaded.policies, original.policies);
}

#[test]
fn book_optional_columns_take_their_defaults() {
    let dir = tempfile::tempdir().unwrap();
    let text = "amount,age,sex,id,term\n1200,70,F,a,\n800.25,66,M,b,12\n";
    let path = write(dir.path(), "b.csv", text);
    let book = Book::load(&path).unwrap();
    assert_eq!(
        book.policies[0],
        Policy::whole_life("a", Sex::F, 70, 1200.0)
    );
    let b = &book.policies[1];
    assert_eq!(b.term, Some(12));
    assert_eq!((b.deferral, b.guarantee, b.escalation), (0, 0, 0.0));
    assert_eq!((b.weight, b.mortality_factor), (1.0, 1.0));
    assert_eq!(book.lives(Sex::M), 1.0);
    assert_eq!(book.annual_amount(Sex::M), 800.25);
}

#[test]
fn good_book_loads() {
    let book = Book::load(&good("book.csv")).unwrap();
    assert_eq!(book.policies.len(), 6);
    let a4 = &book.policies[3];
    assert_eq!((a4.term, a4.guarantee, a4.weight), (Some(10), 5, 2.0));
    assert_eq!(book.policies[2].deferral, 5);
}

#[test]
fn spot_curve_loads_and_discounts() {
    let curve = DiscountCurve::load(&good("curve.csv")).unwrap();
    // The file gives 3 % at 10 years and 2.6 % / 2.8 % at 2 / 5 years.
    // v(10) = 1.03^-10 (closed form).
    assert!((curve.discount(10.0) - 1.03f64.powi(-10)).abs() < 1e-15);
    // Linear in the rate between terms 2 and 5: at 3.5, halfway.
    assert!((curve.spot_rate(3.5) - 0.027).abs() < 1e-15);
    // Flat beyond the last term and before the first.
    assert_eq!(curve.spot_rate(60.0), 0.033);
    assert_eq!(curve.spot_rate(0.5), 0.025);
}

fn config(extra: &str) -> Config {
    let text = format!(
        "[data]\nexperience = \"e.csv\"\nages = [60, 62]\nyears = [2000, 2002]\n\
         [model]\nclosure_fit_ages = 3\n[valuation]\n{extra}\n"
    );
    Config::parse(&text, &good("c.toml")).unwrap()
}

#[test]
fn discount_basis_comes_from_the_config() {
    assert_eq!(
        DiscountCurve::from_config(&config("rate = 0.025")).unwrap(),
        DiscountCurve::Flat { rate_pa: 0.025 }
    );
    let spot = DiscountCurve::from_config(&config("curve = \"curve.csv\"")).unwrap();
    assert_eq!(spot, DiscountCurve::load(&good("curve.csv")).unwrap());
    let err = DiscountCurve::from_config(&config("")).unwrap_err();
    match err {
        Error::Config { key, .. } => assert_eq!(key, "valuation.rate"),
        other => panic!("unexpected {other}"),
    }
}

#[test]
fn windows_line_endings_and_quoted_ids_load() {
    let dir = tempfile::tempdir().unwrap();
    let text = "id,sex,age,amount\r\n\"X, 1\",F,70,100\r\nX2,M,71,200\r\n";
    let path = write(dir.path(), "b.csv", text);
    let book = Book::load(&path).unwrap();
    assert_eq!(book.policies.len(), 2);
    assert_eq!(book.policies[0].id, "X, 1");
    assert_eq!(book.policies[1].amount, 200.0);
}
