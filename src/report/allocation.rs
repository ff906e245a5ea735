//! The report's allocation section: the capital by segment at the highest level, and a
//! tranche's marginal capital beside its Euler contribution.

use super::format::{self, amount, percent};
use super::html::{row, table_head};
use crate::risk::allocation_summary::{AllocationSummary, MeasureAllocation};
use crate::risk::tranche::TrancheLevel;

/// `n` and `noun`, plural unless `n` is one: "1 tail scenario", "12 tail scenarios".
fn scenarios(n: usize, noun: &str) -> String {
    if n == 1 {
        format!("1 {noun}")
    } else {
        format!("{n} {noun}s")
    }
}

fn segment_table(m: &MeasureAllocation, title: &str, level: &str, currency: &str) -> String {
    let mut out = table_head(
        Some(&format!(
            "{title}: TVaR {level} capital by segment ({}; VaR over {} around it). Amounts in {currency}.",
            scenarios(m.tail_scenarios, "tail scenario"),
            scenarios(m.window_scenarios, "scenario")
        )),
        &[
            "Segment",
            "#Policies",
            "#Best estimate",
            "#TVaR contribution",
            "#VaR contribution",
            "#Share of TVaR capital",
        ],
    );
    let mut last = "";
    for s in &m.segments {
        if s.by != last && !last.is_empty() {
            out.push_str("<tr><td colspan=\"6\"></td></tr>\n");
        }
        last = s.by;
        out.push_str(&row(
            &s.segment,
            &[
                format::fixed(s.policies as f64, 0),
                amount(s.best_estimate),
                amount(s.tvar_contribution),
                amount(s.var_contribution),
                percent(s.capital_share, 1),
            ],
            None,
        ));
    }
    out.push_str(&row(
        "Whole book",
        &[
            String::new(),
            String::new(),
            amount(m.tvar_contribution),
            amount(m.var_contribution),
            percent(1.0, 1),
        ],
        Some("key"),
    ));
    out.push_str("</tbody>\n</table>\n");
    out
}

fn tranche_rows(out: &mut String, name: &str, levels: &[TrancheLevel]) {
    for t in levels {
        let level = format::level(t.level);
        out.push_str(&row(
            &format!("{name}, {level}"),
            &[
                amount(t.capital_alone),
                amount(t.marginal_capital),
                amount(t.euler_var_contribution),
                amount(t.marginal_tvar_capital),
                amount(t.euler_tvar_contribution),
                amount(t.cost_of_capital),
                amount(t.premium),
            ],
            None,
        ));
    }
}

/// The section's heading and body, when the run allocated its capital.
pub fn allocation_section(
    allocation: Option<&AllocationSummary>,
    currency: &str,
) -> Option<(&'static str, String)> {
    let a = allocation?;
    let top = a.levels.iter().max_by(|x, y| x.level.total_cmp(&y.level))?;
    let level = format::level(top.level);
    let mut body = segment_table(&top.trend, "Trend risk only", &level, currency);
    if let Some(m) = &top.trend_idiosyncratic {
        body.push_str(&segment_table(
            m,
            "Trend and idiosyncratic risk",
            &level,
            currency,
        ));
    }
    if let Some(t) = &a.tranche {
        let mut table = table_head(
            Some(&format!(
                "Candidate tranche of {} policies, best estimate {}: capital alone, marginal capital against the book and Euler contribution within the combined book; cost of capital at {} a year while the tranche runs off. Amounts in {currency}.",
                format::fixed(t.policies as f64, 0),
                amount(t.best_estimate),
                percent(t.cost_of_capital_rate, 1)
            )),
            &[
                "Measure, level",
                "#Capital alone (VaR)",
                "#Marginal capital (VaR)",
                "#Euler contribution (VaR)",
                "#Marginal capital (TVaR)",
                "#Euler contribution (TVaR)",
                "#Cost of capital",
                "#Premium",
            ],
        );
        tranche_rows(&mut table, "Trend", &t.trend);
        if let Some(s) = &t.trend_idiosyncratic {
            tranche_rows(&mut table, "Trend + idiosyncratic", s);
        }
        table.push_str("</tbody>\n</table>\n");
        body.push_str(&table);
    }
    Some(("Capital allocation", body))
}

#[cfg(test)]
mod tests {
    use super::scenarios;

    #[test]
    fn counts_agree_with_their_noun() {
        assert_eq!(scenarios(1, "tail scenario"), "1 tail scenario");
        assert_eq!(scenarios(0, "tail scenario"), "0 tail scenarios");
        assert_eq!(scenarios(51, "scenario"), "51 scenarios");
    }
}
