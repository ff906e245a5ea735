//! The report page: well-formed, self-contained, every chart present, numbers formatted,
//! and sections left out when their data is absent.

use tailspan::Error;
use tailspan::data::Sex;
use tailspan::report::{self, CapitalColumn, CapitalTable, HedgeRow, ReportData, StandardFormula};

fn parse(html: &str) -> roxmltree::Document<'_> {
    let options = roxmltree::ParsingOptions {
        allow_dtd: true,
        ..Default::default()
    };
    roxmltree::Document::parse_with_options(html, options)
        .unwrap_or_else(|e| panic!("report is not well-formed: {e}"))
}

/// Titles of every `<svg>` element, in page order.
fn svg_titles(doc: &roxmltree::Document<'_>) -> Vec<String> {
    doc.descendants()
        .filter(|n| n.has_tag_name("svg"))
        .map(|svg| {
            svg.children()
                .find(|c| c.has_tag_name("title"))
                .and_then(|t| t.text())
                .unwrap_or_default()
                .to_string()
        })
        .collect()
}

/// Every `<svg>…</svg>` fragment as text.
fn svg_fragments(html: &str) -> Vec<&str> {
    let mut out = Vec::new();
    let mut rest = html;
    while let Some(start) = rest.find("<svg") {
        let end = rest[start..].find("</svg>").expect("unclosed svg") + start + "</svg>".len();
        out.push(&rest[start..end]);
        rest = &rest[end..];
    }
    out
}

#[test]
fn example_report_is_well_formed_and_has_every_chart() {
    let data = ReportData::example();
    let html = report::render(&data).unwrap();
    let doc = parse(&html);
    let titles = svg_titles(&doc);
    let expected = [
        "Distribution of the book's present value (trend + idiosyncratic)",
        "Period life expectancy at age 65, females: observed and projected",
        "Period life expectancy at age 65, males: observed and projected",
        "Probability of death at age 70, females: observed and projected",
        "Probability of death at age 85, males: observed and projected",
        "Distribution of cohort e°65:30 (age 65, truncated at 30 years)",
        "Distribution of cohort e°80:20 (age 80, truncated at 20 years)",
        "Deviance residuals, Lee–Carter (Poisson), females",
        "Deviance residuals, CBD (binomial), males",
    ];
    for title in expected {
        assert!(
            titles.iter().any(|t| t == title),
            "no chart titled {title:?}"
        );
    }
    // 1 PV + 6 fans + 2 lifetime + 4 residual maps.
    assert_eq!(titles.len(), 13, "{titles:#?}");

    let fragments = svg_fragments(&html);
    assert_eq!(fragments.len(), 13);
    for svg in fragments {
        let doc = roxmltree::Document::parse(svg).expect("SVG fragment parses on its own");
        let root = doc.root_element();
        assert_eq!(
            root.tag_name().namespace(),
            Some("http://www.w3.org/2000/svg")
        );
        // Not an empty frame: every chart draws more than its axes.
        assert!(root.descendants().count() > 40);
    }
}

#[test]
fn page_loads_nothing_from_the_network() {
    let html = report::render(&ReportData::example()).unwrap();
    let lower = html.to_lowercase();
    let allowed = "http://www.w3.org/2000/svg";
    let mut rest = lower.as_str();
    while let Some(i) = rest.find("http") {
        let here = &rest[i..];
        assert!(
            here.starts_with(allowed),
            "external reference: {}",
            &here[..here.len().min(60)]
        );
        rest = &here[allowed.len()..];
    }
    for banned in [
        "<script", "<link", "<img", "@import", "url(", "<iframe", "src=",
    ] {
        assert!(!lower.contains(banned), "page contains {banned}");
    }
}

/// A capital table with round invented figures whose formatted forms are worked out by
/// hand below.
fn capital_only() -> ReportData {
    let mut data = ReportData::example();
    data.fit.clear();
    data.residuals.clear();
    data.fans.clear();
    data.lifetimes.clear();
    data.present_values = None;
    data.hedges.clear();
    data.capital = Some(CapitalTable {
        level: 0.995,
        best_estimate: 12_345_678.9,
        run_off: vec![
            CapitalColumn {
                label: "Trend only".to_string(),
                mean: 12_400_000.4,
                std_dev: 456_789.49,
                var: 13_579_246.8,
                tvar: 13_800_000.6,
            },
            CapitalColumn {
                label: "Trend + idiosyncratic".to_string(),
                mean: 12_401_000.0,
                std_dev: 470_000.0,
                var: 13_700_000.0,
                tvar: 13_950_000.0,
            },
        ],
        one_year: Some(654_321.0),
        standard_formula: Some(StandardFormula {
            decrease: 0.20,
            stressed_value: 13_209_876.7,
        }),
    });
    data
}

/// Text of every cell of the table whose header row starts with `first_header`.
fn table_rows(doc: &roxmltree::Document<'_>, first_header: &str) -> Vec<Vec<String>> {
    let table = doc
        .descendants()
        .filter(|n| n.has_tag_name("table"))
        .find(|t| {
            t.descendants()
                .find(|n| n.has_tag_name("th"))
                .and_then(|th| th.text())
                == Some(first_header)
        })
        .unwrap_or_else(|| panic!("no table headed {first_header:?}"));
    table
        .descendants()
        .filter(|n| n.has_tag_name("tr"))
        .map(|tr| {
            tr.children()
                .filter(|c| c.is_element())
                .map(|c| c.text().unwrap_or_default().to_string())
                .collect()
        })
        .collect()
}

#[test]
fn capital_figures_are_formatted_with_separators() {
    let html = report::render(&capital_only()).unwrap();
    let doc = parse(&html);
    let rows = table_rows(&doc, "Run-off view");
    let find = |label: &str| {
        rows.iter()
            .find(|r| r[0] == label)
            .unwrap_or_else(|| panic!("no row {label:?} in {rows:#?}"))
            .clone()
    };
    // Whole currency units rounded to nearest, commas every three digits.
    assert_eq!(
        find("Best estimate (central path)")[1..],
        ["12,345,679", "12,345,679"]
    );
    assert_eq!(
        find("Mean over scenarios")[1..],
        ["12,400,000", "12,401,000"]
    );
    assert_eq!(find("Standard deviation")[1..], ["456,789", "470,000"]);
    assert_eq!(find("VaR 99.5 %")[1..], ["13,579,247", "13,700,000"]);
    assert_eq!(find("TVaR 99.5 %")[1..], ["13,800,001", "13,950,000"]);
    // 13,579,246.8 − 12,345,678.9 = 1,233,567.9; / 12,345,678.9 = 9.9919 %.
    // 13,700,000 − 12,345,678.9 = 1,354,321.1; / 12,345,678.9 = 10.9700 %.
    assert_eq!(
        find("Run-off capital (VaR 99.5 % − BE)")[1..],
        ["1,233,568", "1,354,321"]
    );
    assert_eq!(find("Run-off capital, % of BE")[1..], ["9.99 %", "10.97 %"]);

    let other = table_rows(&doc, "Other measures");
    let find = |label: &str| {
        other
            .iter()
            .find(|r| r[0] == label)
            .unwrap_or_else(|| panic!("no row {label:?} in {other:#?}"))
            .clone()
    };
    // 654,321 / 12,345,678.9 = 5.3000 %.
    assert_eq!(
        find("One-year capital at 99.5 % (re-calibration)")[1..],
        ["654,321", "5.30 %"]
    );
    // 13,209,876.7 − 12,345,678.9 = 864,197.8 → 7.0000 % of BE; stressed/BE = 107.00 %.
    assert_eq!(
        find("Best estimate after a permanent 20 % decrease in q")[1..],
        ["13,209,877", "107.00 %"]
    );
    assert_eq!(
        find("Standard-formula longevity capital (stressed − BE)")[1..],
        ["864,198", "7.00 %"]
    );
}

#[test]
fn hedge_table_shows_reduction() {
    let mut data = capital_only();
    data.hedges = vec![HedgeRow {
        contract: "Indemnity swap".to_string(),
        premium_rate: 0.0125,
        premium_amount: 1_543_209.86,
        capital_without: 1_354_321.1,
        capital_with: 541_728.44,
    }];
    let html = report::render(&data).unwrap();
    let doc = parse(&html);
    let rows = table_rows(&doc, "Contract");
    // (1,354,321.1 − 541,728.44) / 1,354,321.1 = 0.6000 → 60.0 %.
    assert_eq!(
        rows[1],
        [
            "Indemnity swap",
            "1.25 %",
            "1,543,210",
            "1,354,321",
            "541,728",
            "60.0 %"
        ]
    );
}

#[test]
fn absent_sections_are_left_out() {
    let full = report::render(&ReportData::example()).unwrap();
    for id in [
        "capital",
        "hedges",
        "projection",
        "lifetimes",
        "fit",
        "run",
        "cautions",
    ] {
        assert!(
            full.contains(&format!("<section id=\"{id}\"")),
            "{id} missing"
        );
    }

    let html = report::render(&capital_only()).unwrap();
    let doc = parse(&html);
    assert!(svg_titles(&doc).is_empty(), "charts drawn without data");
    for id in ["hedges", "projection", "lifetimes", "fit"] {
        assert!(
            !html.contains(&format!("<section id=\"{id}\"")),
            "{id} drawn empty"
        );
    }
    assert!(!html.contains("Contract"));
    assert!(html.contains("<section id=\"capital\""));

    // A fit-only run: no capital, no PV chart, but the fit and its residual maps.
    let mut fit_only = ReportData::example();
    fit_only.capital = None;
    fit_only.present_values = None;
    fit_only.hedges.clear();
    fit_only.lifetimes.clear();
    fit_only.fans.clear();
    let html = report::render(&fit_only).unwrap();
    let doc = parse(&html);
    let titles = svg_titles(&doc);
    assert_eq!(titles.len(), 4);
    assert!(titles.iter().all(|t| t.starts_with("Deviance residuals")));
    assert!(!html.contains("<section id=\"capital\""));
    assert!(!html.contains("Run-off"));

    // A chart whose data is all missing is left out, not drawn as an empty frame.
    let mut sparse = ReportData::example();
    for fan in &mut sparse.fans {
        fan.history.clear();
        fan.projection.clear();
    }
    let html = report::render(&sparse).unwrap();
    assert!(!html.contains("<section id=\"projection\""));
}

#[test]
fn cautions_are_always_there() {
    let mut data = capital_only();
    data.capital = None;
    let html = report::render(&data).unwrap();
    assert!(html.contains("qualified actuary"));
    assert!(html.contains("approved internal-model standards"));
    assert!(html.contains("not financial advice"));
}

#[test]
fn bic_ranks_within_each_sex() {
    let html = report::render(&ReportData::example()).unwrap();
    let doc = parse(&html);
    let rows = table_rows(&doc, "Model");
    // Example: Lee–Carter deviance is lower than CBD's by 1,400 and its BIC penalty is
    // 40 ln 2300 ≈ 310 higher, so Lee–Carter ranks first for both sexes.
    let ranks: Vec<(&str, &str, &str)> = rows[1..]
        .iter()
        .map(|r| (r[0].as_str(), r[1].as_str(), r[7].as_str()))
        .collect();
    assert_eq!(
        ranks,
        [
            ("Lee–Carter (Poisson)", "Females", "1"),
            ("CBD (binomial)", "Females", "2"),
            ("Lee–Carter (Poisson)", "Males", "1"),
            ("CBD (binomial)", "Males", "2"),
        ]
    );
}

#[test]
fn mismatched_residual_matrix_is_an_error() {
    let mut data = ReportData::example();
    data.residuals[0].residuals.pop();
    match report::render(&data) {
        Err(Error::Report { section, rule }) => {
            assert!(section.contains("residuals"), "{section}");
            assert!(rule.contains("45 rows of residuals for 46 ages"), "{rule}");
        }
        other => panic!("expected a report error, got {other:?}"),
    }
    let mut data = ReportData::example();
    data.residuals[1].residuals[3].push(0.0);
    assert!(report::render(&data).is_err());
}

#[test]
fn write_is_atomic_and_serialises() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("out").join("report.html");
    let data = ReportData::example();
    report::write(&path, &data).unwrap();
    let written = std::fs::read_to_string(&path).unwrap();
    assert_eq!(written, report::render(&data).unwrap());
    assert_eq!(
        std::fs::read_dir(path.parent().unwrap()).unwrap().count(),
        1
    );
    let json = serde_json::to_value(&data).unwrap();
    assert_eq!(json["capital"]["level"], 0.995);
    assert_eq!(
        json["fans"][0]["measure"]["measure"],
        "period_life_expectancy"
    );

    // A failed render leaves no file behind.
    let mut bad = data.clone();
    bad.residuals[0].ages.pop();
    let failed = dir.path().join("failed.html");
    assert!(report::write(&failed, &bad).is_err());
    assert!(!failed.exists());
}

#[test]
fn sexes_in_fit_table_use_words() {
    let html = report::render(&ReportData::example()).unwrap();
    assert!(html.contains("<td>Females</td>"));
    assert!(!html.contains(&format!("<td>{}</td>", Sex::F)));
}

#[test]
fn missing_values_show_as_not_available_without_failing() {
    let mut data = ReportData::example();
    let nan = f64::NAN;
    for fan in &mut data.fans {
        fan.history[3].value = nan;
        fan.projection[5].q950 = nan;
        fan.projection[6].q500 = f64::INFINITY;
    }
    data.residuals[0].residuals[2][2] = nan;
    data.lifetimes[0].values[0] = nan;
    if let Some(pv) = &mut data.present_values {
        pv.shares[0] = nan;
        pv.stressed = Some(nan);
    }
    if let Some(c) = &mut data.capital {
        c.run_off[0].tvar = nan;
    }
    data.fit[1].bic = nan;
    data.hedges[0].capital_without = 0.0;
    let html = report::render(&data).unwrap();
    let doc = parse(&html);
    assert_eq!(svg_titles(&doc).len(), 13);
    let rows = table_rows(&doc, "Run-off view");
    let tvar = rows.iter().find(|r| r[0] == "TVaR 99.5 %").unwrap();
    assert_eq!(tvar[1], "n/a");
    // A hedge on a book without capital has no reduction to show.
    let hedges = table_rows(&doc, "Contract");
    assert_eq!(hedges[1][5], "n/a");
    // A model without a BIC is not ranked.
    let fit = table_rows(&doc, "Model");
    assert!(fit.iter().any(|r| r[7] == "n/a"));
    // The stressed marker is left out of the legend rather than drawn at NaN.
    assert!(!html.contains("Standard-formula stressed value"));
}
