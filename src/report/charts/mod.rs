//! SVG charts for the report, drawn with plotters' SVG backend.
//!
//! Text is emitted as SVG `<text>` and laid out by the reader's browser, so no font is
//! embedded or needed at build time; plotters' built-in size estimate (no font features)
//! is used only to place axis labels, and every chart leaves generous room for them.
//! Legends are drawn in a strip above the plot so they never cover data.

pub mod fan;
pub mod heatmap;
pub mod histogram;
pub mod models;

pub use fan::fan_chart;
pub use heatmap::residual_heatmap;
pub use histogram::{lifetime_chart, lifetime_title, pv_chart, pv_title};
pub use models::{models_chart, models_title};

use plotters::coord::Shift;
use plotters::element::DashedPathElement;
use plotters::prelude::*;

use crate::error::{Error, Result};
use crate::report::format;

/// Width of every chart in SVG pixels; the page scales it down to fit.
pub const WIDTH: u32 = 720;

/// Okabe & Ito's colour-blind-safe palette (Okabe & Ito 2008, "Color Universal Design").
pub mod palette {
    use plotters::style::RGBColor;

    /// Black.
    pub const BLACK: RGBColor = RGBColor(0, 0, 0);
    /// Orange.
    pub const ORANGE: RGBColor = RGBColor(230, 159, 0);
    /// Sky blue.
    pub const SKY_BLUE: RGBColor = RGBColor(86, 180, 233);
    /// Bluish green.
    pub const GREEN: RGBColor = RGBColor(0, 158, 115);
    /// Blue.
    pub const BLUE: RGBColor = RGBColor(0, 114, 178);
    /// Vermillion.
    pub const VERMILLION: RGBColor = RGBColor(213, 94, 0);
    /// Reddish purple.
    pub const PURPLE: RGBColor = RGBColor(204, 121, 167);
    /// Grid lines.
    pub const GRID: RGBColor = RGBColor(225, 225, 225);
}

/// Font size (plotters units; SVG shows 1/1.24 of it) of tick labels and legend text.
const LABEL_SIZE: f64 = 18.0;
/// Font size of axis descriptions.
const AXIS_SIZE: f64 = 19.0;
/// Estimated width of one character of legend or tick text in SVG pixels (DejaVu Sans and
/// Liberation Sans average about 0.6 em at the 14.5 px the labels are shown at).
const CHAR_PX: f64 = 8.2;
/// Height of one legend row in SVG pixels.
const LEGEND_ROW: u32 = 26;

/// Tick label style.
fn label_style() -> TextStyle<'static> {
    ("sans-serif", LABEL_SIZE)
        .into_font()
        .color(&palette::BLACK)
}

/// Axis description style.
fn axis_style() -> TextStyle<'static> {
    ("sans-serif", AXIS_SIZE).into_font().color(&palette::BLACK)
}

/// How a legend entry is drawn.
#[derive(Debug, Clone, Copy)]
pub enum Swatch {
    /// A line segment.
    Line(RGBColor, u32),
    /// A dashed line segment.
    Dashed(RGBColor, u32),
    /// A filled box.
    Fill(RGBColor),
    /// A dot.
    Dot(RGBColor),
}

/// One legend entry.
#[derive(Debug, Clone)]
pub struct LegendItem {
    /// How the entry is drawn.
    pub swatch: Swatch,
    /// Its text.
    pub text: String,
}

impl LegendItem {
    /// An entry drawn with `swatch` and labelled `text`.
    pub fn new(swatch: Swatch, text: impl Into<String>) -> Self {
        LegendItem {
            swatch,
            text: text.into(),
        }
    }
}

const SWATCH_PX: i32 = 26;
const ITEM_GAP_PX: i32 = 28;
const LEGEND_LEFT_PX: i32 = 70;

/// Width an item takes in the legend strip.
fn item_width(item: &LegendItem) -> i32 {
    SWATCH_PX + 8 + text_width(&item.text) as i32 + ITEM_GAP_PX
}

/// Estimated width of `text` in SVG pixels.
fn text_width(text: &str) -> f64 {
    text.chars().count() as f64 * CHAR_PX
}

/// Rows the legend needs at `width` pixels.
fn legend_rows(items: &[LegendItem], width: u32) -> Vec<Vec<&LegendItem>> {
    let mut rows: Vec<Vec<&LegendItem>> = Vec::new();
    let mut used = 0;
    for item in items {
        let w = item_width(item);
        match rows.last_mut() {
            Some(row) if LEGEND_LEFT_PX + used + w <= width as i32 => row.push(item),
            _ => {
                rows.push(vec![item]);
                used = 0;
            }
        }
        used += w;
    }
    rows
}

/// Height of the legend strip for `items` on a chart `width` wide.
pub fn legend_height(items: &[LegendItem], width: u32) -> u32 {
    if items.is_empty() {
        return 0;
    }
    legend_rows(items, width).len() as u32 * LEGEND_ROW + 10
}

/// Draws `items` into `area` (the strip above the plot), wrapping rows to its width.
pub fn draw_legend<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    items: &[LegendItem],
) -> Result<()> {
    let width = area.dim_in_pixel().0;
    let text = label_style().pos(plotters::style::text_anchor::Pos::new(
        plotters::style::text_anchor::HPos::Left,
        plotters::style::text_anchor::VPos::Center,
    ));
    for (r, row) in legend_rows(items, width).into_iter().enumerate() {
        let y = 8 + r as i32 * LEGEND_ROW as i32 + LEGEND_ROW as i32 / 2;
        let mut x = LEGEND_LEFT_PX;
        for item in row {
            let (x0, x1) = (x, x + SWATCH_PX);
            match item.swatch {
                Swatch::Line(color, w) => area.draw(&PathElement::new(
                    vec![(x0, y), (x1, y)],
                    color.stroke_width(w),
                )),
                Swatch::Dashed(color, w) => area.draw(&DashedPathElement::new(
                    vec![(x0, y), (x1, y)],
                    6,
                    4,
                    color.stroke_width(w),
                )),
                Swatch::Fill(color) => {
                    area.draw(&Rectangle::new([(x0, y - 7), (x1, y + 7)], color.filled()))
                }
                Swatch::Dot(color) => {
                    area.draw(&Circle::new(((x0 + x1) / 2, y), 4, color.filled()))
                }
            }
            .map_err(draw_error)?;
            area.draw_text(&item.text, &text, (x1 + 8, y))
                .map_err(draw_error)?;
            x += item_width(item);
        }
    }
    Ok(())
}

/// Turns a plotters error into ours.
fn draw_error<E: std::fmt::Display>(e: E) -> Error {
    Error::Report {
        section: "charts".to_string(),
        rule: format!("drawing failed: {e}"),
    }
}

/// Draws a chart `height` pixels tall with `draw` and returns the `<svg>` element, with
/// `title` as its accessible name.
pub fn svg<F>(height: u32, title: &str, draw: F) -> Result<String>
where
    F: FnOnce(&DrawingArea<SVGBackend<'_>, Shift>) -> Result<()>,
{
    let mut buffer = String::new();
    {
        let root = SVGBackend::with_string(&mut buffer, (WIDTH, height)).into_drawing_area();
        root.fill(&WHITE).map_err(draw_error)?;
        draw(&root)?;
        root.present().map_err(draw_error)?;
    }
    Ok(with_title(&buffer, title))
}

/// Inserts `<title>` as the first child of the `<svg>` element and marks it as an image.
fn with_title(svg: &str, title: &str) -> String {
    let escaped = crate::report::html::escape(title);
    match svg.find('>') {
        Some(end) if svg.starts_with("<svg") => format!(
            "{} role=\"img\"><title>{}</title>{}",
            &svg[..end],
            escaped,
            &svg[end + 1..]
        ),
        _ => svg.to_string(),
    }
}

/// Tick positions plotters draws on a linear axis, and the step between them.
#[derive(Debug, Clone, PartialEq)]
pub struct LinearTicks {
    /// The label count asked of plotters; pass it to `x_labels` / `y_labels`.
    pub max_ticks: usize,
    /// Tick values, ascending.
    pub values: Vec<f64>,
    /// Distance between neighbouring ticks.
    pub step: f64,
}

impl LinearTicks {
    /// The label of tick `value`, with as many decimals as the step needs.
    pub fn label(&self, value: f64) -> String {
        format::tick(value, self.step)
    }
}

/// The ticks plotters puts on a linear axis over `[lo, hi]` when asked for at most
/// `max_ticks` (steps of 1, 2 or 5 × 10^k), so labels can show exactly the decimals the
/// step needs: `20`, `21` rather than `20.0`, `21.0`, and never `0.1`, `0.1` for 0.12, 0.14.
pub fn linear_ticks(lo: f64, hi: f64, max_ticks: usize) -> LinearTicks {
    use plotters::coord::ranged1d::Ranged;
    use plotters::coord::types::RangedCoordf64;
    let values = if lo.is_finite() && hi.is_finite() && hi > lo {
        RangedCoordf64::from(lo..hi).key_points(max_ticks)
    } else {
        Vec::new()
    };
    let step = values
        .windows(2)
        .map(|w| w[1] - w[0])
        .fold(f64::INFINITY, f64::min);
    LinearTicks {
        max_ticks,
        values,
        step: if step.is_finite() && step > 0.0 {
            step
        } else {
            1.0
        },
    }
}

/// Ticks for a log axis over `[lo, hi]`: powers of ten, or 1-2-5 or 1-to-9 multiples of
/// them, whichever is the coarsest to give at least three ticks; then thinned so that no
/// two are closer than `1 / max_ticks` of the axis.
pub fn log_ticks(lo: f64, hi: f64, max_ticks: usize) -> Vec<f64> {
    if !(lo > 0.0 && hi > lo && lo.is_finite() && hi.is_finite()) {
        return Vec::new();
    }
    let sets: [&[f64]; 3] = [
        &[1.0],
        &[1.0, 2.0, 5.0],
        &[1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0],
    ];
    let mut ticks = Vec::new();
    for multipliers in sets {
        ticks.clear();
        let (first, last) = (lo.log10().floor() as i32, hi.log10().ceil() as i32);
        for k in first..=last {
            let decade = 10f64.powi(k);
            for m in multipliers {
                let v = m * decade;
                if v >= lo * (1.0 - 1e-9) && v <= hi * (1.0 + 1e-9) {
                    ticks.push(v);
                }
            }
        }
        if ticks.len() >= 3 {
            break;
        }
    }
    let min_gap = (hi / lo).log10() / max_ticks.max(1) as f64;
    let mut kept: Vec<f64> = Vec::with_capacity(ticks.len());
    for t in ticks {
        if kept
            .last()
            .is_none_or(|&k| (t / k).log10() >= min_gap * (1.0 - 1e-9))
        {
            kept.push(t);
        }
    }
    kept
}

/// Ticks that fit along an axis `pixels` long when each label is about `label_chars` wide.
pub fn max_ticks(pixels: u32, label_chars: usize) -> usize {
    let per_label = text_width(&"0".repeat(label_chars.max(1))) + 36.0;
    ((pixels as f64 / per_label).floor() as usize).clamp(2, 12)
}

/// Smallest and largest finite value of `values`, or `None` if there is none.
pub fn finite_range(values: impl IntoIterator<Item = f64>) -> Option<(f64, f64)> {
    values
        .into_iter()
        .filter(|v| v.is_finite())
        .fold(None, |acc, v| match acc {
            None => Some((v, v)),
            Some((lo, hi)) => Some((lo.min(v), hi.max(v))),
        })
}

/// Widens `(lo, hi)` by `fraction` of its span on each side (or by a unit if it is flat).
pub fn padded((lo, hi): (f64, f64), fraction: f64) -> (f64, f64) {
    let span = hi - lo;
    if span <= 0.0 {
        let pad = if lo == 0.0 { 1.0 } else { lo.abs() * 0.05 };
        (lo - pad, hi + pad)
    } else {
        (lo - span * fraction, hi + span * fraction)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn linear_ticks_use_nice_steps() {
        let t = linear_ticks(1975.0, 2105.0, 10);
        assert_eq!(t.step, 20.0);
        assert_eq!(t.values.first(), Some(&1980.0));
        assert_eq!(t.values.last(), Some(&2100.0));
        let t = linear_ticks(0.0, 0.087, 6);
        assert!((t.step - 0.02).abs() < 1e-12);
        assert_eq!(t.values.len(), 5);
        assert_eq!(t.label(t.values[3]), "0.06");
        let t = linear_ticks(19.2, 23.6, 8);
        assert_eq!(t.step, 1.0);
        assert_eq!(t.label(t.values[0]), "20");
        let t = linear_ticks(-4.0, 4.0, 9);
        assert_eq!(t.values, [-4.0, -3.0, -2.0, -1.0, 0.0, 1.0, 2.0, 3.0, 4.0]);
    }

    #[test]
    fn log_ticks_get_denser_on_short_ranges() {
        let close = |a: Vec<f64>, b: &[f64]| {
            a.len() == b.len() && a.iter().zip(b).all(|(x, y)| (x / y - 1.0).abs() < 1e-9)
        };
        assert!(close(
            log_ticks(1e-4, 1.0, 8),
            &[1e-4, 1e-3, 1e-2, 0.1, 1.0]
        ));
        assert!(close(
            log_ticks(0.002, 0.03, 8),
            &[0.002, 0.005, 0.01, 0.02]
        ));
        assert!(close(
            log_ticks(0.03, 0.09, 10),
            &[0.03, 0.04, 0.05, 0.06, 0.07, 0.08, 0.09]
        ));
        assert!(close(log_ticks(0.05, 0.2, 8), &[0.05, 0.1, 0.2]));
        // log10(3) / 4 = 0.119 apart at least: 0.05 is too close to 0.04, 0.07 to 0.06, ...
        assert!(close(log_ticks(0.03, 0.09, 4), &[0.03, 0.04, 0.06, 0.08]));
    }

    #[test]
    fn title_goes_first() {
        let svg = "<svg width=\"1\" height=\"1\">\n<rect/></svg>";
        assert_eq!(
            with_title(svg, "A & B"),
            "<svg width=\"1\" height=\"1\" role=\"img\"><title>A &amp; B</title>\n<rect/></svg>"
        );
    }

    #[test]
    fn legends_wrap() {
        let items: Vec<_> = (0..8)
            .map(|i| LegendItem::new(Swatch::Dot(palette::BLUE), format!("entry number {i}")))
            .collect();
        let rows = legend_rows(&items, WIDTH);
        assert!(rows.len() > 1);
        for row in rows {
            let used: i32 = row.iter().map(|i| item_width(i)).sum();
            assert!(LEGEND_LEFT_PX + used <= WIDTH as i32 + ITEM_GAP_PX);
        }
    }
}
