//! Assembles the report page: one HTML file with inline CSS and inline SVG.
//!
//! The page must open offline, years later, on a machine with nothing installed, and
//! print legibly; so there are no scripts, links, web fonts or images, only markup. The
//! markup is also well-formed XML, which lets tests parse the whole page.

use std::fmt::Write as _;

use super::charts;
use super::data::{CapitalTable, FitRow, HedgeRow, LifetimeDistribution, ReportData, RunInfo};
use super::format::{self, NOT_AVAILABLE, amount, fixed, percent};
use crate::data::Sex;
use crate::error::Result;

/// Escapes text for HTML and XML content and attribute values.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            other => out.push(other),
        }
    }
    out
}

const STYLE: &str = r#"
:root { color-scheme: light; }
body { font-family: "DejaVu Sans", "Liberation Sans", Arial, Helvetica, sans-serif;
  color: #111; background: #fff; max-width: 960px; margin: 0 auto; padding: 24px;
  line-height: 1.45; font-size: 15px; }
h1 { font-size: 1.7em; margin: 0 0 .2em; }
h2 { font-size: 1.3em; border-bottom: 2px solid #0072b2; padding-bottom: .2em; margin-top: 2em; }
h3 { font-size: 1.05em; margin: 1.4em 0 .3em; }
p.meta { color: #333; margin-top: 0; }
table { border-collapse: collapse; margin: .6em 0 1em; font-variant-numeric: tabular-nums; }
th, td { border-bottom: 1px solid #c8c8c8; padding: .3em .7em; text-align: left; vertical-align: top; }
thead th { border-bottom: 2px solid #555; }
th.num { text-align: right; }
td.num { text-align: right; white-space: nowrap; }
caption { caption-side: top; text-align: left; font-size: .9em; color: #333; padding-bottom: .3em; }
tbody th { font-weight: normal; min-width: 11em; }
tbody td:first-child { white-space: nowrap; }
tr.key td, tr.key th { font-weight: bold; }
figure { margin: 1.2em 0 1.8em; break-inside: avoid; page-break-inside: avoid; }
figcaption { font-weight: bold; margin-bottom: .4em; }
p.note { font-size: .9em; color: #333; margin: .3em 0; }
svg { display: block; width: 100%; max-width: 720px; height: auto; }
code { font-family: "DejaVu Sans Mono", "Liberation Mono", monospace; font-size: .85em; }
code.hash { word-break: break-all; }
section.cautions { border: 1px solid #888; background: #f4f4f4; padding: .2em 1.2em .8em; margin-top: 2em; }
section.cautions h2 { margin-top: .6em; }
@page { size: A4; margin: 14mm; }
@media print {
  body { max-width: none; padding: 0; font-size: 10pt; }
  h2 { break-after: avoid; page-break-after: avoid; }
  table { break-inside: avoid; page-break-inside: avoid; }
  section.cautions { background: none; }
}
"#;

/// The cautions shown at the end of every report.
pub const CAUTIONS: [&str; 3] = [
    "These results come from stochastic models fitted to the data and assumptions listed in \
     this report. They depend on those choices and need review by a qualified actuary before \
     anyone relies on them.",
    "Any regulatory use follows the local rules that apply to the firm and, for internal \
     models, the approved internal-model standards; the standard-formula figure shown here is \
     for comparison only.",
    "This report is not financial advice.",
];

/// A titled section of the page; `None` bodies are left out.
struct Section {
    id: &'static str,
    heading: &'static str,
    body: String,
}

/// Renders the whole page.
pub fn page(data: &ReportData) -> Result<String> {
    let sections: Vec<Section> = [
        capital_section(data)?,
        model_risk_section(data)?,
        hedge_section(&data.hedges, &data.currency),
        super::allocation::allocation_section(data.allocation.as_ref(), &data.currency).map(
            |(heading, body)| Section {
                id: "allocation",
                heading,
                body,
            },
        ),
        basis_section(data)?,
        projection_section(data)?,
        lifetime_section(&data.lifetimes)?,
        fit_section(data)?,
        Some(run_section(&data.run)),
    ]
    .into_iter()
    .flatten()
    .collect();

    let mut out = String::with_capacity(1 << 20);
    out.push_str("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\" />\n");
    out.push_str("<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\" />\n");
    // The run id early in the head, where `io::provenance` looks for it.
    if let Some(id) = &data.run.run_id {
        let _ = writeln!(
            out,
            "<meta name=\"{}\" content=\"{}\" />",
            crate::io::provenance::REPORT_META_NAME,
            escape(id)
        );
    }
    let _ = writeln!(out, "<title>{}</title>", escape(&data.title));
    let _ = writeln!(out, "<style>{STYLE}</style>\n</head>\n<body>");
    let _ = writeln!(out, "<header>\n<h1>{}</h1>", escape(&data.title));
    let _ = writeln!(
        out,
        "<p class=\"meta\">{}</p>\n</header>",
        escape(&summary_line(&data.run))
    );
    if sections.len() > 2 {
        out.push_str("<nav><p class=\"note\">Contents: ");
        let links: Vec<String> = sections
            .iter()
            .enumerate()
            .map(|(i, s)| format!("<a href=\"#{}\">{}. {}</a>", s.id, i + 1, s.heading))
            .chain(std::iter::once(
                "<a href=\"#cautions\">Cautions</a>".to_string(),
            ))
            .collect();
        out.push_str(&links.join(" · "));
        out.push_str("</p></nav>\n");
    }
    for (i, s) in sections.iter().enumerate() {
        let _ = writeln!(
            out,
            "<section id=\"{}\">\n<h2>{}. {}</h2>\n{}</section>",
            s.id,
            i + 1,
            s.heading,
            s.body
        );
    }
    out.push_str("<section id=\"cautions\" class=\"cautions\">\n<h2>Cautions</h2>\n");
    for c in CAUTIONS {
        let _ = writeln!(out, "<p>{}</p>", escape(c));
    }
    out.push_str("</section>\n</body>\n</html>\n");
    Ok(out)
}

/// One line under the heading: when, which version, which basis.
fn summary_line(run: &RunInfo) -> String {
    let mut parts = vec![
        format!("Run {}", run.run_at),
        format!("tailspan {}", run.tool_version),
    ];
    if let Some(v) = run.valuation_year {
        parts.push(format!("valuation year {v}"));
    }
    if let Some(n) = run.scenarios {
        parts.push(format!("{} scenarios", fixed(n as f64, 0)));
    }
    if let Some(s) = run.seed {
        parts.push(format!("seed {s}"));
    }
    parts.join(" · ")
}

/// A figure holding one chart with its caption and optional note.
fn figure(svg: &str, caption: &str, note: Option<&str>) -> String {
    let mut out = format!("<figure>\n<figcaption>{}</figcaption>\n", escape(caption));
    out.push_str(svg);
    if let Some(n) = note {
        let _ = writeln!(out, "<p class=\"note\">{}</p>", escape(n));
    }
    out.push_str("</figure>\n");
    out
}

/// Opens a table with the given header cells; cells starting with `#` are numeric.
pub(crate) fn table_head(caption: Option<&str>, headers: &[&str]) -> String {
    let mut out = String::from("<table>\n");
    if let Some(c) = caption {
        let _ = writeln!(out, "<caption>{}</caption>", escape(c));
    }
    out.push_str("<thead><tr>");
    for h in headers {
        match h.strip_prefix('#') {
            Some(h) => {
                let _ = write!(out, "<th class=\"num\">{}</th>", escape(h));
            }
            None => {
                let _ = write!(out, "<th>{}</th>", escape(h));
            }
        }
    }
    out.push_str("</tr></thead>\n<tbody>\n");
    out
}

pub(crate) fn row(label: &str, cells: &[String], class: Option<&str>) -> String {
    let mut out = match class {
        Some(c) => format!("<tr class=\"{c}\"><th>{}</th>", escape(label)),
        None => format!("<tr><th>{}</th>", escape(label)),
    };
    for c in cells {
        let _ = write!(out, "<td class=\"num\">{}</td>", escape(c));
    }
    out.push_str("</tr>\n");
    out
}

fn sex_name(sex: Sex) -> &'static str {
    match sex {
        Sex::F => "Females",
        Sex::M => "Males",
    }
}

fn capital_section(data: &ReportData) -> Result<Option<Section>> {
    let mut body = String::new();
    if let Some(table) = &data.capital {
        body.push_str(&capital_tables(table, &data.currency));
    }
    if let Some(pv) = &data.present_values
        && pv.range.is_some()
    {
        let svg = charts::pv_chart(pv, &data.currency)?;
        body.push_str(&figure(
            &svg,
            &charts::pv_title(pv),
            Some(&format!(
                "{} scenarios. Vertical lines mark the best estimate, the VaR at {} and, where \
                 computed, the value under the standard-formula longevity stress.",
                fixed(pv.scenarios as f64, 0),
                format::level(pv.level)
            )),
        ));
    }
    Ok((!body.is_empty()).then_some(Section {
        id: "capital",
        heading: "Longevity capital",
        body,
    }))
}

fn capital_tables(t: &CapitalTable, currency: &str) -> String {
    let be = t.best_estimate;
    let level = format::level(t.level);
    let of_be = |x: f64| percent(x / be, 2);
    let mut out = String::new();
    if !t.run_off.is_empty() {
        let mut headers = vec![String::from("Run-off view")];
        headers.extend(t.run_off.iter().map(|c| format!("#{}", c.label)));
        let headers: Vec<&str> = headers.iter().map(String::as_str).collect();
        out.push_str(&table_head(
            Some(&format!("Amounts in {currency}.")),
            &headers,
        ));
        let cells = |f: &dyn Fn(&super::data::CapitalColumn) -> String| -> Vec<String> {
            t.run_off.iter().map(f).collect()
        };
        out.push_str(&row(
            "Best estimate (central path)",
            &cells(&|_| amount(be)),
            None,
        ));
        out.push_str(&row(
            "Mean over scenarios",
            &cells(&|c| amount(c.mean)),
            None,
        ));
        out.push_str(&row(
            "Standard deviation",
            &cells(&|c| amount(c.std_dev)),
            None,
        ));
        out.push_str(&row(
            &format!("VaR {level}"),
            &cells(&|c| amount(c.var)),
            None,
        ));
        out.push_str(&row(
            &format!("TVaR {level}"),
            &cells(&|c| amount(c.tvar)),
            None,
        ));
        out.push_str(&row(
            &format!("Run-off capital (VaR {level} − BE)"),
            &cells(&|c| amount(c.var - be)),
            Some("key"),
        ));
        out.push_str(&row(
            "Run-off capital, % of BE",
            &cells(&|c| of_be(c.var - be)),
            Some("key"),
        ));
        out.push_str("</tbody>\n</table>\n");
    }
    if t.one_year.is_some() || t.standard_formula.is_some() {
        out.push_str(&table_head(
            Some(&format!(
                "Amounts in {currency}; percentages of the best estimate."
            )),
            &["Other measures", "#Amount", "#% of BE"],
        ));
        if let Some(c) = t.one_year {
            out.push_str(&row(
                &format!("One-year capital at {level} (re-calibration)"),
                &[amount(c), of_be(c)],
                Some("key"),
            ));
        }
        if let Some(sf) = &t.standard_formula {
            let drop = percent(sf.decrease, 0);
            out.push_str(&row(
                &format!("Best estimate after a permanent {drop} decrease in q"),
                &[amount(sf.stressed_value), of_be(sf.stressed_value)],
                None,
            ));
            let capital = sf.stressed_value - be;
            out.push_str(&row(
                "Standard-formula longevity capital (stressed − BE)",
                &[amount(capital), of_be(capital)],
                Some("key"),
            ));
        }
        out.push_str("</tbody>\n</table>\n");
    }
    out
}

/// Several models side by side: a table of fit, weight, BE, VaR and capital, and their PV
/// distributions overlaid.
fn model_risk_section(data: &ReportData) -> Result<Option<Section>> {
    let Some(risk) = &data.model_risk else {
        return Ok(None);
    };
    let level = format::level(risk.level);
    let var_head = format!("#VaR {level}");
    let tvar_head = format!("#TVaR {level}");
    let mut body = table_head(
        Some(&format!(
            "Amounts in {}; {}; weights from {}. The average's VaR is the smallest PV at \
             which the weighted models' distribution functions reach the level.",
            data.currency, risk.label, risk.weights_from
        )),
        &[
            "Model",
            "#BIC (sum over sexes)",
            "#Weight",
            "#Best estimate",
            &var_head,
            &tvar_head,
            "#Capital (VaR − BE)",
            "#% of BE",
        ],
    );
    for (r, class) in risk
        .models
        .iter()
        .map(|r| (r, None))
        .chain(std::iter::once((&risk.average, Some("key"))))
    {
        body.push_str(&row(
            &r.model,
            &[
                r.bic.map_or(String::new(), |b| fixed(b, 1)),
                fixed(r.weight, 3),
                amount(r.best_estimate),
                amount(r.var),
                amount(r.tvar),
                amount(r.capital),
                percent(r.capital / r.best_estimate, 2),
            ],
            class,
        ));
    }
    body.push_str(&row(
        "Spread of best estimates (largest − smallest)",
        &[
            String::new(),
            String::new(),
            amount(risk.best_estimate_spread),
            String::new(),
            String::new(),
            String::new(),
            percent(risk.best_estimate_spread / risk.average.best_estimate, 2),
        ],
        None,
    ));
    body.push_str("</tbody>\n</table>\n");
    if risk.models.iter().any(|m| !m.shares.is_empty()) {
        let svg = charts::models_chart(risk, &data.currency)?;
        body.push_str(&figure(
            &svg,
            &charts::models_title(risk),
            Some("Each model's scenarios on the same scenario streams, over common bins."),
        ));
    }
    Ok(Some(Section {
        id: "model-risk",
        heading: "Model risk",
        body,
    }))
}

fn hedge_section(hedges: &[HedgeRow], currency: &str) -> Option<Section> {
    if hedges.is_empty() {
        return None;
    }
    let mut body = table_head(
        Some(&format!("Amounts in {currency}.")),
        &[
            "Contract",
            "#Premium rate",
            "#Premium",
            "#Capital without hedge",
            "#Capital with hedge",
            "#Reduction",
        ],
    );
    for h in hedges {
        let reduction = (h.capital_without - h.capital_with) / h.capital_without;
        body.push_str(&row(
            &h.contract,
            &[
                percent(h.premium_rate, 2),
                amount(h.premium_amount),
                amount(h.capital_without),
                amount(h.capital_with),
                percent(reduction, 1),
            ],
            None,
        ));
    }
    body.push_str("</tbody>\n</table>\n");
    Some(Section {
        id: "hedges",
        heading: "Hedges",
        body,
    })
}

/// Under Li–Lee, the two-population fit in a sentence per sex (empty otherwise).
fn li_lee_note(b: &crate::report::basis::BookBasisReport) -> String {
    b.li_lee
        .iter()
        .map(|s| {
            format!(
                "<p class=\"note\">{}</p>\n",
                escape(&format!(
                    "Sex {}: the book is a second population fitted with the index population \
                     by Li & Lee (2005) over {}–{}. The common index K_t drifts by {} a year \
                     (s.e. {}; reported only: the valuation's common trend is the population \
                     model's path); the populations' own indices are AR(1)s with φ = {} \
                     (index) and φ = {}, σ = {} (book), innovations correlated {}.",
                    s.sex,
                    s.years[0],
                    s.years[1],
                    fixed(s.drift, 3),
                    fixed(s.drift_standard_error, 3),
                    fixed(s.index_phi, 3),
                    fixed(s.book_phi, 3),
                    fixed(s.book_sigma, 3),
                    fixed(s.correlation, 2)
                ))
            )
        })
        .collect()
}

/// "Book against population": A/E by age band, the spread's fan, the decomposition.
fn basis_section(data: &ReportData) -> Result<Option<Section>> {
    let Some(b) = data.book_basis.as_ref() else {
        return Ok(None);
    };
    let mut body = li_lee_note(b);
    body += &format!(
        "<p class=\"note\">{}</p>\n",
        escape(&format!(
            "{}The book's log death rate against the population's fitted rate: level α0 = {} \
             (s.e. {}) at the mean fitted age, slope α1 = {} (s.e. {}) a year of age; the \
             yearly spread is an AR(1) with φ = {} and σ = {}.",
            if b.li_lee.is_empty() {
                ""
            } else {
                "For comparison with the relative kind: "
            },
            fixed(b.level, 4),
            fixed(b.standard_errors[0], 4),
            fixed(b.slope, 5),
            fixed(b.standard_errors[1], 5),
            fixed(b.spread[0], 3),
            fixed(b.spread[1], 4)
        ))
    );
    body.push_str(&table_head(
        Some(
            "Actual against expected deaths at the population's fitted rates, with the 95 % \
             exact Poisson interval (Garwood 1936).",
        ),
        &["Ages", "#Actual", "#Expected", "#A/E", "#95 % interval"],
    ));
    let cells = |c: &crate::basis::actual_expected::Comparison| {
        vec![
            fixed(c.actual, 0),
            fixed(c.expected, 1),
            fixed(c.ratio, 3),
            format!("{}–{}", fixed(c.lower, 3), fixed(c.upper, 3)),
        ]
    };
    for band in &b.bands {
        let label = format!("{}–{}", band.ages[0], band.ages[1]);
        body.push_str(&row(&label, &cells(&band.comparison), None));
    }
    body.push_str(&row("All ages", &cells(&b.overall), Some("total")));
    body.push_str("</tbody>\n</table>\n");
    if let Some(chart) = b.spread_chart.as_ref().filter(|c| charts::fan::has_data(c)) {
        body.push_str(&figure(
            &charts::fan_chart(chart)?,
            &charts::fan::title(chart),
            Some(
                "Dots: fitted from the book's experience. Line: median of the projected \
                 scenarios. Bands: central 50 %, 90 % and 99 % of the scenarios in each year.",
            ),
        ));
    }
    if !b.fan.is_empty() {
        body.push_str(&table_head(
            Some(if b.li_lee.is_empty() {
                "The spread κ_t projected: quantiles over the scenarios."
            } else {
                "The book population's own index k_t (first sex) projected: quantiles over the \
                 scenarios."
            }),
            &["Year", "#5 %", "#Median", "#95 %"],
        ));
        for q in &b.fan {
            body.push_str(&row(
                &q.year.to_string(),
                &[fixed(q.p05, 3), fixed(q.p50, 3), fixed(q.p95, 3)],
                None,
            ));
        }
        body.push_str("</tbody>\n</table>\n");
    }
    if let Some(d) = &b.decomposition {
        let headers: Vec<String> = std::iter::once("Sources of risk".to_string())
            .chain(
                d.levels
                    .iter()
                    .map(|l| format!("#Capital at {}", format::level(*l))),
            )
            .collect();
        let headers: Vec<&str> = headers.iter().map(String::as_str).collect();
        body.push_str(&table_head(
            Some(&format!(
                "Run-off capital by source, in {}, from the same {} scenarios.",
                data.currency, d.scenarios
            )),
            &headers,
        ));
        let name = |m: &str| match m {
            "trend" => "Trend",
            "trend_level" => "Trend + level",
            "trend_level_spread" => "Trend + level + spread",
            "all" => "All, with individual deaths",
            "level" => "Level alone",
            "spread" => "Spread alone",
            "idiosyncratic" => "Individual deaths alone",
            _ => "Other",
        };
        for m in d.cumulative.iter().chain(&d.standalone) {
            let values: Vec<String> = if m.measure == "level" && !d.level_modelled {
                vec!["not drawn".to_string(); m.capital.len()]
            } else {
                m.capital.iter().map(|c| amount(*c)).collect()
            };
            body.push_str(&row(name(m.measure), &values, None));
        }
        let values: Vec<String> = d.diversification.iter().map(|c| amount(*c)).collect();
        body.push_str(&row("Diversification", &values, Some("total")));
        body.push_str("</tbody>\n</table>\n");
    }
    Ok(Some(Section {
        id: "basis",
        heading: "Book against population",
        body,
    }))
}

fn projection_section(data: &ReportData) -> Result<Option<Section>> {
    let mut body = String::new();
    for chart in data.fans.iter().filter(|c| charts::fan::has_data(c)) {
        let svg = charts::fan_chart(chart)?;
        body.push_str(&figure(
            &svg,
            &charts::fan::title(chart),
            Some(
                "Dots: observed values. Line: median of the projected scenarios. Bands: \
                 central 50 %, 90 % and 99 % of the scenarios in each year.",
            ),
        ));
    }
    Ok((!body.is_empty()).then_some(Section {
        id: "projection",
        heading: "Projected mortality",
        body,
    }))
}

fn lifetime_section(lifetimes: &[LifetimeDistribution]) -> Result<Option<Section>> {
    // One chart per (age, horizon), sexes overlaid, in the order first given.
    let mut groups: Vec<Vec<&LifetimeDistribution>> = Vec::new();
    for d in lifetimes
        .iter()
        .filter(|d| d.values.iter().any(|v| v.is_finite()))
    {
        match groups
            .iter_mut()
            .find(|g| g[0].age == d.age && g[0].horizon == d.horizon)
        {
            Some(g) => g.push(d),
            None => groups.push(vec![d]),
        }
    }
    let mut body = String::new();
    for g in &groups {
        let svg = charts::lifetime_chart(g)?;
        body.push_str(&figure(
            &svg,
            &charts::lifetime_title(g[0].age, g[0].horizon),
            Some(
                "Expected years lived in the next n years by a life of the cohort, one value \
                 per scenario (trend risk only).",
            ),
        ));
    }
    Ok((!body.is_empty()).then_some(Section {
        id: "lifetimes",
        heading: "Cohort life expectancy",
        body,
    }))
}

/// BIC rank of each row among rows of the same sex (1 = lowest BIC); `None` if not finite.
pub fn bic_ranks(rows: &[FitRow]) -> Vec<Option<usize>> {
    rows.iter()
        .map(|r| {
            r.bic.is_finite().then(|| {
                1 + rows
                    .iter()
                    .filter(|o| o.sex == r.sex && o.bic.is_finite() && o.bic < r.bic)
                    .count()
            })
        })
        .collect()
}

fn fit_section(data: &ReportData) -> Result<Option<Section>> {
    let mut body = String::new();
    if !data.fit.is_empty() {
        let ranks = bic_ranks(&data.fit);
        let mut order: Vec<usize> = (0..data.fit.len()).collect();
        order.sort_by_key(|&i| (data.fit[i].sex, ranks[i].unwrap_or(usize::MAX)));
        body.push_str(&table_head(
            Some("Lower AIC and BIC are better; the BIC rank compares models within a sex."),
            &[
                "Model",
                "Sex",
                "#Parameters",
                "#Log-likelihood",
                "#Deviance",
                "#AIC",
                "#BIC",
                "#BIC rank",
            ],
        ));
        for i in order {
            let f = &data.fit[i];
            let cells = [
                f.model.clone(),
                sex_name(f.sex).to_string(),
                fixed(f.parameters as f64, 0),
                fixed(f.log_likelihood, 1),
                fixed(f.deviance, 1),
                fixed(f.aic, 1),
                fixed(f.bic, 1),
                ranks[i].map_or(NOT_AVAILABLE.to_string(), |r| r.to_string()),
            ];
            let class = if ranks[i] == Some(1) {
                " class=\"key\""
            } else {
                ""
            };
            let _ = write!(
                body,
                "<tr{class}><td>{}</td><td>{}</td>",
                escape(&cells[0]),
                escape(&cells[1])
            );
            for c in &cells[2..] {
                let _ = write!(body, "<td class=\"num\">{}</td>", escape(c));
            }
            body.push_str("</tr>\n");
        }
        body.push_str("</tbody>\n</table>\n");
    }
    let maps: Vec<_> = data
        .residuals
        .iter()
        .filter(|m| !m.ages.is_empty() && !m.years.is_empty())
        .cloned()
        .collect();
    if !maps.is_empty() {
        let limit = charts::heatmap::scale_limit(&maps);
        let note = charts::heatmap::scale_note(&maps, limit);
        for m in &maps {
            let svg = charts::residual_heatmap(m, limit)?;
            body.push_str(&figure(&svg, &charts::heatmap::title(m), Some(&note)));
        }
    }
    Ok((!body.is_empty()).then_some(Section {
        id: "fit",
        heading: "Model fit",
        body,
    }))
}

fn run_section(run: &RunInfo) -> Section {
    let mut items: Vec<(String, String)> = vec![
        ("tailspan version".into(), run.tool_version.clone()),
        ("Run at".into(), run.run_at.clone()),
    ];
    if let Some(c) = &run.config_path {
        items.push(("Config".into(), c.clone()));
    }
    if let Some(id) = &run.run_id {
        items.push(("Run id".into(), id.clone()));
    }
    if let Some(s) = run.seed {
        items.push(("Seed".into(), s.to_string()));
    }
    if let Some(n) = run.scenarios {
        items.push(("Scenarios".into(), fixed(n as f64, 0)));
    }
    if !run.models.is_empty() {
        items.push(("Models".into(), run.models.join(", ")));
    }
    if let Some([a, b]) = run.ages {
        items.push(("Ages fitted".into(), format!("{a}–{b}")));
    }
    if let Some([a, b]) = run.years {
        items.push(("Years fitted".into(), format!("{a}–{b}")));
    }
    if let Some(v) = run.valuation_year {
        items.push(("Valuation year".into(), v.to_string()));
    }
    items.extend(run.basis.iter().map(|b| (b.item.clone(), b.value.clone())));
    let mut body = String::from("<table>\n<tbody>\n");
    for (k, v) in &items {
        let _ = writeln!(
            body,
            "<tr><th>{}</th><td>{}</td></tr>",
            escape(k),
            escape(v)
        );
    }
    body.push_str("</tbody>\n</table>\n");
    if !run.inputs.is_empty() {
        body.push_str("<h3>Input files</h3>\n");
        body.push_str(&table_head(None, &["Role", "Path", "SHA-256"]));
        for f in &run.inputs {
            let _ = writeln!(
                body,
                "<tr><td>{}</td><td><code>{}</code></td><td><code class=\"hash\">{}</code></td></tr>",
                escape(&f.role),
                escape(&f.path),
                escape(&f.sha256)
            );
        }
        body.push_str("</tbody>\n</table>\n");
    }
    Section {
        id: "run",
        heading: "Run and inputs",
        body,
    }
}
