//! Chart text stays readable: tick labels do not overlap and nothing runs off the chart.
//!
//! Widths are estimated pessimistically at 0.64 em a character: a digit in DejaVu Sans, the
//! widest common fallback sans-serif font, advances 1303 units on its 2048-unit em (read
//! from the `hmtx` table of Debian's fonts-dejavu-core DejaVuSans.ttf). Digits dominate
//! tick labels; commas and points (651 units) are narrower.

use tailspan::report::{self, ReportData};

const EM_PER_CHAR: f64 = 0.64;

struct Label {
    x: f64,
    y: f64,
    anchor: String,
    size: f64,
    text: String,
    rotated: bool,
}

impl Label {
    fn width(&self) -> f64 {
        self.text.chars().count() as f64 * EM_PER_CHAR * self.size
    }

    /// Horizontal extent of an unrotated label.
    fn span(&self) -> (f64, f64) {
        let w = self.width();
        match self.anchor.as_str() {
            "middle" => (self.x - w / 2.0, self.x + w / 2.0),
            "end" => (self.x - w, self.x),
            _ => (self.x, self.x + w),
        }
    }
}

fn labels(svg: roxmltree::Node<'_, '_>) -> Vec<Label> {
    svg.descendants()
        .filter(|n| n.has_tag_name("text"))
        .map(|t| {
            let num = |a: &str| t.attribute(a).and_then(|v| v.parse().ok()).unwrap_or(0.0);
            Label {
                x: num("x"),
                y: num("y"),
                anchor: t.attribute("text-anchor").unwrap_or("start").to_string(),
                size: num("font-size"),
                text: t.text().unwrap_or_default().trim().to_string(),
                rotated: t.attribute("transform").is_some(),
            }
        })
        .collect()
}

#[test]
fn tick_labels_do_not_overlap_and_text_stays_inside() {
    let html = report::render(&ReportData::example()).unwrap();
    let options = roxmltree::ParsingOptions {
        allow_dtd: true,
        ..Default::default()
    };
    let doc = roxmltree::Document::parse_with_options(&html, options).unwrap();
    let mut checked = 0;
    for svg in doc.descendants().filter(|n| n.has_tag_name("svg")) {
        let title = svg
            .children()
            .find(|c| c.has_tag_name("title"))
            .and_then(|t| t.text())
            .unwrap_or_default()
            .to_string();
        let width: f64 = svg.attribute("width").unwrap().parse().unwrap();
        let all = labels(svg);
        assert!(!all.is_empty(), "{title}: no text");

        // Every unrotated label lies within the chart.
        for l in all.iter().filter(|l| !l.rotated) {
            let (left, right) = l.span();
            assert!(
                left >= 0.0 && right <= width,
                "{title}: `{}` runs off the chart ({left:.0}..{right:.0} of {width})",
                l.text
            );
        }

        // x-axis tick labels: centred, on one baseline; neighbours must not touch.
        let mut rows: std::collections::BTreeMap<i64, Vec<&Label>> = Default::default();
        for l in all.iter().filter(|l| !l.rotated && l.anchor == "middle") {
            rows.entry(l.y as i64).or_default().push(l);
        }
        for row in rows.values().filter(|r| r.len() > 1) {
            let mut row = row.clone();
            row.sort_by(|a, b| a.x.total_cmp(&b.x));
            for pair in row.windows(2) {
                let gap = pair[1].span().0 - pair[0].span().1;
                assert!(
                    gap >= 4.0,
                    "{title}: x labels `{}` and `{}` overlap",
                    pair[0].text,
                    pair[1].text
                );
            }
            checked += 1;
        }

        // y-axis tick labels: right-aligned in a column; neighbours at least a line apart.
        let mut columns: std::collections::BTreeMap<i64, Vec<&Label>> = Default::default();
        for l in all.iter().filter(|l| !l.rotated && l.anchor == "end") {
            columns.entry(l.x as i64).or_default().push(l);
        }
        for column in columns.values().filter(|c| c.len() > 1) {
            let mut column = column.clone();
            column.sort_by(|a, b| a.y.total_cmp(&b.y));
            for pair in column.windows(2) {
                assert!(
                    pair[1].y - pair[0].y >= 1.2 * pair[0].size,
                    "{title}: y labels `{}` and `{}` overlap",
                    pair[0].text,
                    pair[1].text
                );
            }
            checked += 1;
        }

        // Tick labels are distinct: a formatter with too few decimals would repeat them.
        for row in rows.values().chain(columns.values()) {
            let mut texts: Vec<&str> = row.iter().map(|l| l.text.as_str()).collect();
            texts.sort();
            let n = texts.len();
            texts.dedup();
            assert_eq!(texts.len(), n, "{title}: repeated tick labels {texts:?}");
        }
    }
    assert!(checked >= 20, "only {checked} axes checked");
}
