//! The rules every parser's output must keep, checked after each fuzz input.
//!
//! A parser may reject any input, but it must never panic, its errors must name the input
//! at fault, and whatever it accepts must satisfy the rules its documentation states: the
//! rest of the crate relies on them without checking again.

use std::collections::HashSet;
use std::path::Path;

use tailspan::data::book::{MAX_ESCALATION, MAX_MORTALITY_FACTOR};
use tailspan::data::config::Config;
use tailspan::data::csv_input::MAX_AGE;
use tailspan::interest::curve::{MAX_RATE, MAX_TERM};
use tailspan::data::{Book, Experience, Sex, Span};
use tailspan::interest::DiscountCurve;
use tailspan::error::Error;
use tailspan::hedge::{NotionalChoice, PremiumChoice};

/// Name the fuzzed CSV inputs are read under.
pub const CSV_NAME: &str = "fuzz/input.csv";

/// Name the fuzzed config is read under.
pub const CONFIG_NAME: &str = "fuzz/config.toml";

/// Fitting windows the experience is read with: the window of the small good file in
/// tests/bad/good/, a single cell of one sex, and no sex at all (every row is still checked
/// but none is kept, so any well-formed file is accepted).
pub fn experience_windows() -> [(Span, Span, &'static [Sex]); 3] {
    let span = |a, b| Span::new(a, b).expect("ordered span");
    [
        (span(60, 62), span(2000, 2002), &Sex::ALL),
        (span(60, 60), span(2000, 2000), &[Sex::M]),
        (span(60, 60), span(2000, 2000), &[]),
    ]
}

/// Asserts a CSV loader's error names the input file and a rule (row, column or file-level).
pub fn assert_csv_error(err: &Error, path: &Path) {
    match err {
        Error::Cell {
            file, row, rule, ..
        }
        | Error::Row { file, row, rule } => {
            assert_eq!(file, path, "{err}");
            assert!(*row >= 1, "row numbers start at 1: {err}");
            assert!(!rule.is_empty(), "{err}");
        }
        Error::File { file, rule } => {
            assert_eq!(file, path, "{err}");
            assert!(!rule.is_empty(), "{err}");
        }
        other => panic!("a CSV error must name the file and the rule, got {other:?}"),
    }
    assert!(err.to_string().starts_with(&path.display().to_string()));
}

/// Asserts an accepted experience holds a full grid of finite, non-negative cells for
/// every sex asked for, with no deaths on zero exposure.
pub fn assert_experience(e: &Experience, path: &Path, ages: Span, years: Span, sexes: &[Sex]) {
    assert_eq!(e.source, path);
    assert_eq!(e.populations.len(), sexes.len());
    for (p, &sex) in e.populations.iter().zip(sexes) {
        assert_eq!(p.sex, sex);
        assert_eq!((p.ages, p.years), (ages, years));
        let shape = (ages.len(), years.len());
        assert_eq!(p.deaths.shape(), shape);
        assert_eq!(p.exposure.shape(), shape);
        for (&d, &x) in p.deaths.iter().zip(p.exposure.iter()) {
            assert!(d.is_finite() && d >= 0.0, "deaths {d}");
            assert!(x.is_finite() && x >= 0.0, "exposure {x}");
            assert!(d == 0.0 || x > 0.0, "{d} deaths on zero exposure");
        }
    }
}

/// Asserts an accepted book keeps every rule [`Book::load`] documents.
pub fn assert_book(book: &Book, path: &Path) {
    assert_eq!(book.source, path);
    assert!(!book.policies.is_empty(), "an empty book must be rejected");
    let mut ids = HashSet::new();
    for p in &book.policies {
        assert!(!p.id.is_empty(), "empty id");
        assert!(ids.insert(p.id.as_str()), "duplicate id {}", p.id);
        assert!((0..=MAX_AGE).contains(&p.age), "age {}", p.age);
        assert!(
            p.amount.is_finite() && p.amount > 0.0,
            "amount {}",
            p.amount
        );
        assert!(
            i64::from(p.age) + i64::from(p.deferral) <= i64::from(MAX_AGE),
            "deferral {} from age {}",
            p.deferral,
            p.age
        );
        if let Some(term) = p.term {
            assert!((1..=MAX_AGE as u32).contains(&term), "term {term}");
            assert!(
                p.guarantee <= term,
                "guarantee {} > term {term}",
                p.guarantee
            );
        }
        assert!(p.guarantee <= MAX_AGE as u32, "guarantee {}", p.guarantee);
        assert!(
            p.escalation.is_finite() && p.escalation.abs() <= MAX_ESCALATION,
            "escalation {}",
            p.escalation
        );
        assert!(
            p.weight.is_finite() && p.weight > 0.0,
            "weight {}",
            p.weight
        );
        assert!(
            p.mortality_factor.is_finite()
                && p.mortality_factor > 0.0
                && p.mortality_factor <= MAX_MORTALITY_FACTOR,
            "mortality factor {}",
            p.mortality_factor
        );
    }
}

/// Asserts an accepted curve has strictly increasing terms in (0, 300] and plausible rates,
/// and that it discounts every time to a finite positive factor.
pub fn assert_curve(curve: &DiscountCurve, path: &Path) {
    let DiscountCurve::Spot {
        source,
        terms,
        rates,
    } = curve
    else {
        panic!("a curve file must give a spot curve");
    };
    assert_eq!(source, path);
    assert!(!terms.is_empty());
    assert_eq!(terms.len(), rates.len());
    assert!(
        terms.iter().all(|t| *t > 0.0 && *t <= MAX_TERM),
        "{terms:?}"
    );
    assert!(terms.windows(2).all(|w| w[0] < w[1]), "terms {terms:?}");
    for &r in rates {
        assert!(r.is_finite() && r > -1.0 && r.abs() <= MAX_RATE, "rate {r}");
    }
    let lo = rates.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = rates.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let last = terms[terms.len() - 1];
    let times = terms
        .iter()
        .flat_map(|&t| [t, 0.5 * t])
        .chain([0.0, 0.25, 1.0, last + 1.0, 130.0]);
    for t in times {
        let s = curve.spot_rate(t);
        assert!(
            lo <= s && s <= hi,
            "spot rate {s} at {t} outside [{lo}, {hi}]"
        );
        let v = curve.discount(t);
        assert!(v.is_finite() && v > 0.0, "discount factor {v} at {t}");
    }
    assert!(!curve.to_string().is_empty());
}

/// Asserts a config error names the config file and a key (or is about the file itself).
pub fn assert_config_error(err: &Error, path: &Path) {
    match err {
        Error::Config { file, key, rule } => {
            assert_eq!(file, path, "{err}");
            assert!(!key.is_empty() && !rule.is_empty(), "{err}");
        }
        Error::File { file, rule } => {
            assert_eq!(file, path, "{err}");
            assert!(!rule.is_empty(), "{err}");
        }
        other => panic!("a config error must name the file and the key, got {other:?}"),
    }
}

/// Asserts an accepted config keeps every rule `Config::parse` checks, so later stages can
/// rely on them.
pub fn assert_config(c: &Config, path: &Path) {
    assert_eq!(c.file, path);
    assert_eq!(c.base, path.parent().unwrap());
    let d = &c.data;
    assert!(
        0 <= d.ages[0] && d.ages[0] < d.ages[1] && d.ages[1] <= MAX_AGE,
        "{:?}",
        d.ages
    );
    assert!(
        1700 <= d.years[0] && d.years[0] + 2 <= d.years[1] && d.years[1] <= 2300,
        "{:?}",
        d.years
    );
    assert!(!d.sexes.is_empty());
    assert_eq!(d.sexes.iter().collect::<HashSet<_>>().len(), d.sexes.len());

    let m = &c.model;
    assert!(!m.kinds().is_empty());
    assert!(
        d.ages[1] < m.max_age && m.max_age <= MAX_AGE,
        "max_age {}",
        m.max_age
    );
    let n_ages = c.ages().len();
    assert!((2..=n_ages).contains(&m.closure_fit_ages));
    assert!(m.tolerance.is_finite() && m.tolerance > 0.0);
    assert!(m.max_iterations >= 1);

    let p = &c.projection;
    assert!(p.scenarios >= 1);
    assert!((1..=200).contains(&p.horizon));
    let last_year = d.years[1] + p.horizon as i32;
    let year = c.valuation_year();
    assert!(
        d.years[1] < year && year <= last_year,
        "valuation year {year}"
    );

    let v = &c.valuation;
    assert!((1..=365).contains(&v.frequency));
    assert!(!(v.rate.is_some() && v.curve.is_some()));
    if let Some(r) = v.rate {
        assert!(r.is_finite() && r > -1.0 && r.abs() <= MAX_RATE, "rate {r}");
        // The config's rule and the discount basis's rule must agree.
        assert!(DiscountCurve::from_config(c).is_ok());
    }
    assert!(!v.horizons.contains(&0));
    for f in &v.mortality_factors {
        assert!(f.factor.is_finite() && f.factor > 0.0 && f.factor <= MAX_MORTALITY_FACTOR);
        assert!(0 <= f.ages[0] && f.ages[0] <= f.ages[1] && f.ages[1] <= MAX_AGE);
    }

    let k = &c.capital;
    assert!(
        k.levels.iter().all(|l| *l > 0.0 && *l < 1.0),
        "{:?}",
        k.levels
    );
    assert!((0.0..1.0).contains(&k.standard_stress));
    assert!(!k.one_year || k.one_year_scenarios >= 1);

    if let Some(h) = &c.hedge {
        assert!(!h.swap.is_empty() || !h.qforward.is_empty());
        assert!(d.book.is_some());
        assert!(h.cost_of_capital > 0.0 && h.cost_of_capital < 1.0);
        assert!(h.capital_level > 0.0 && h.capital_level < 1.0);
        assert!(h.target_sharpe.is_finite() && h.target_sharpe >= 0.0);
        let mut names = HashSet::new();
        for (i, s) in h.swap.iter().enumerate() {
            if let Some(term) = s.term {
                assert!(term >= 1);
                assert!(i64::from(year) + i64::from(term) - 1 <= i64::from(last_year));
            }
            assert!(s.share.is_finite() && s.share > 0.0 && s.share <= 1.0);
            if let PremiumChoice::Rate(r) = s.premium {
                assert!(r.is_finite() && r > -1.0 && r < 1.0);
            }
            let name = s.name_at(i);
            assert!(!name.trim().is_empty());
            assert!(names.insert(name));
        }
        for (i, q) in h.qforward.iter().enumerate() {
            assert!(d.sexes.contains(&q.sex));
            assert!(d.ages[0] <= q.age && q.age < m.max_age);
            assert!(year <= q.maturity && q.maturity <= last_year);
            assert!(q.premium.is_finite() && (0.0..1.0).contains(&q.premium));
            if let NotionalChoice::Amount(n) = q.notional {
                assert!(n.is_finite() && n >= 0.0);
            }
            let name = q.name_at(i);
            assert!(!name.trim().is_empty());
            assert!(names.insert(name));
        }
    }
}
