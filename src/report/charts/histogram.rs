//! Histograms of scenario values: the book's present value and cohort lifetimes.
//!
//! Bars show the share of scenarios in each bin, so the y axis is a probability whatever
//! the number of scenarios, and two distributions drawn together are comparable.

use plotters::coord::Shift;
use plotters::element::DashedPathElement;
use plotters::prelude::*;

use super::{
    LegendItem, Swatch, WIDTH, axis_style, draw_error, draw_legend, finite_range, label_style,
    legend_height, linear_ticks, max_ticks, padded, palette, svg,
};
use crate::data::Sex;
use crate::error::Result;
use crate::report::data::{LifetimeDistribution, PvDistribution};
use crate::report::format;

const HEIGHT: u32 = 340;
const Y_DESC: &str = "Probability (share of scenarios in bin)";

/// Shares of the finite `values` falling in each of `count` equal bins over `[lo, hi]`.
pub fn shares(values: &[f64], lo: f64, hi: f64, count: usize) -> Vec<f64> {
    let mut bins = Bins::new(lo, hi, count);
    values.iter().for_each(|&v| bins.add(v));
    bins.shares()
}

/// Equal bins over `[lo, hi]`, filled one value at a time (so a sample read back from a
/// file in passes is binned as one held in memory).
#[derive(Debug, Clone)]
pub struct Bins {
    lo: f64,
    width: f64,
    counts: Vec<usize>,
    total: usize,
}

impl Bins {
    /// `count` empty bins over `[lo, hi]`.
    pub fn new(lo: f64, hi: f64, count: usize) -> Self {
        let count = count.max(1);
        Bins {
            lo,
            width: (hi - lo) / count as f64,
            counts: vec![0; count],
            total: 0,
        }
    }

    /// The bins a PV histogram of `scenarios` values over `range` (smallest, largest)
    /// draws: the square-root rule over the range.
    pub fn for_sample(range: (f64, f64), scenarios: usize) -> Self {
        let (lo, hi) = padded(range, 0.0);
        Bins::new(lo, hi, bin_count(scenarios))
    }

    /// Counts `v` (non-finite values are left out; the ends take what falls beyond them).
    pub fn add(&mut self, v: f64) {
        if !v.is_finite() {
            return;
        }
        let i = ((v - self.lo) / self.width).floor();
        let i = if i < 0.0 {
            0
        } else {
            (i as usize).min(self.counts.len() - 1)
        };
        self.counts[i] += 1;
        self.total += 1;
    }

    /// Share of the counted values in each bin.
    pub fn shares(&self) -> Vec<f64> {
        self.counts
            .iter()
            .map(|&c| {
                if self.total == 0 {
                    0.0
                } else {
                    c as f64 / self.total as f64
                }
            })
            .collect()
    }
}

/// Bins for `n` values: the square-root rule, kept between 10 and 60.
fn bin_count(n: usize) -> usize {
    ((n as f64).sqrt().round() as usize).clamp(10, 60)
}

/// The PV chart's title.
pub fn pv_title(pv: &PvDistribution) -> String {
    format!("Distribution of the book's present value ({})", pv.label)
}

/// Draws the PV histogram with vertical markers at BE, VaR and the stressed value.
pub fn pv_chart(pv: &PvDistribution, currency: &str) -> Result<String> {
    let mut marks = vec![
        (
            pv.best_estimate,
            Swatch::Line(palette::BLACK, 3),
            "Best estimate".to_string(),
        ),
        (
            pv.var,
            Swatch::Dashed(palette::VERMILLION, 3),
            format!("VaR {}", format::level(pv.level)),
        ),
    ];
    if let Some(v) = pv.stressed {
        marks.push((
            v,
            Swatch::Dashed(palette::GREEN, 3),
            "Standard-formula stressed value".to_string(),
        ));
    }
    let markers: Vec<(f64, LegendItem)> = marks
        .into_iter()
        .filter(|(v, _, _)| v.is_finite())
        .map(|(v, swatch, text)| {
            let item = LegendItem::new(swatch, format!("{text}: {}", format::amount(v)));
            (v, item)
        })
        .collect();
    let mut legend = vec![LegendItem::new(
        Swatch::Fill(palette::SKY_BLUE),
        "Scenarios",
    )];
    legend.extend(markers.iter().map(|m| m.1.clone()));
    let data = pv.range.filter(|(lo, hi)| lo.is_finite() && hi.is_finite());
    let range = finite_range(
        data.iter()
            .flat_map(|&(lo, hi)| [lo, hi])
            .chain(markers.iter().map(|m| m.0)),
    )
    .unwrap_or((0.0, 1.0));
    let data_range = data.unwrap_or(range);
    let (scale, unit) = if range.0.abs().max(range.1.abs()) >= 1e6 {
        (1e6, format!("millions of {currency}"))
    } else {
        (1.0, currency.to_string())
    };
    let bins = pv.shares.len().max(1);
    let (lo, hi) = padded(data_range, 0.0);
    let bar_shares: Vec<f64> = pv
        .shares
        .iter()
        .map(|&s| if s.is_finite() { s } else { 0.0 })
        .collect();
    let width = (hi - lo) / bins as f64;
    let top = bar_shares.iter().copied().fold(0.0, f64::max).max(1e-9) * 1.08;
    let (x_lo, x_hi) = padded(range, 0.04);
    let (x_lo, x_hi) = (x_lo / scale, x_hi / scale);
    let legend_px = legend_height(&legend, WIDTH);
    svg(HEIGHT + legend_px, &pv_title(pv), |root| {
        let (strip, plot) = root.split_vertically(legend_px);
        draw_legend(&strip, &legend)?;
        let x_ticks = linear_ticks(x_lo, x_hi, max_ticks(WIDTH - 140, label_chars(x_lo, x_hi)));
        let y_ticks = linear_ticks(0.0, top, 6);
        let x_format = |v: &f64| x_ticks.label(*v);
        let y_format = |v: &f64| y_ticks.label(*v);
        let mut ctx = builder(&plot)
            .build_cartesian_2d(x_lo..x_hi, 0.0..top)
            .map_err(draw_error)?;
        ctx.configure_mesh()
            .x_desc(format!("Present value ({unit})"))
            .y_desc(Y_DESC)
            .x_labels(x_ticks.max_ticks)
            .y_labels(y_ticks.max_ticks)
            .x_label_formatter(&x_format)
            .y_label_formatter(&y_format)
            .label_style(label_style())
            .axis_desc_style(axis_style())
            .bold_line_style(palette::GRID)
            .light_line_style(TRANSPARENT)
            .draw()
            .map_err(draw_error)?;
        ctx.draw_series(bar_shares.iter().enumerate().map(|(i, &s)| {
            let x0 = (lo + i as f64 * width) / scale;
            let x1 = (lo + (i + 1) as f64 * width) / scale;
            Rectangle::new([(x0, 0.0), (x1, s)], palette::SKY_BLUE.filled())
        }))
        .map_err(draw_error)?;
        for (value, item) in &markers {
            let x = value / scale;
            let points = vec![(x, 0.0), (x, top)];
            match item.swatch {
                Swatch::Dashed(color, w) => ctx
                    .draw_series(std::iter::once(DashedPathElement::new(
                        points,
                        8,
                        5,
                        color.stroke_width(w),
                    )))
                    .map(|_| ()),
                Swatch::Line(color, w) => ctx
                    .draw_series(std::iter::once(PathElement::new(
                        points,
                        color.stroke_width(w),
                    )))
                    .map(|_| ()),
                _ => Ok(()),
            }
            .map_err(draw_error)?;
        }
        Ok(())
    })
}

/// Title of the lifetime chart for cohorts aged `age` with truncation `horizon`.
pub fn lifetime_title(age: u32, horizon: u32) -> String {
    format!("Distribution of cohort e°{age}:{horizon} (age {age}, truncated at {horizon} years)")
}

fn sex_colour(sex: Sex) -> RGBColor {
    match sex {
        Sex::F => palette::ORANGE,
        Sex::M => palette::BLUE,
    }
}

fn sex_name(sex: Sex) -> &'static str {
    match sex {
        Sex::F => "Females",
        Sex::M => "Males",
    }
}

/// Draws the distributions of one age and horizon (one outline per sex) as an `<svg>`.
pub fn lifetime_chart(group: &[&LifetimeDistribution]) -> Result<String> {
    let (age, horizon) = group.first().map(|d| (d.age, d.horizon)).unwrap_or((0, 0));
    let range =
        finite_range(group.iter().flat_map(|d| d.values.iter().copied())).unwrap_or((0.0, 1.0));
    let (lo, hi) = padded(range, 0.0);
    let n = group.iter().map(|d| d.values.len()).max().unwrap_or(0);
    let bins = bin_count(n);
    let width = (hi - lo) / bins as f64;
    let series: Vec<(Sex, Vec<f64>)> = group
        .iter()
        .map(|d| (d.sex, shares(&d.values, lo, hi, bins)))
        .collect();
    let top = series
        .iter()
        .flat_map(|s| s.1.iter().copied())
        .fold(0.0, f64::max)
        .max(1e-9)
        * 1.08;
    let legend: Vec<LegendItem> = series
        .iter()
        .map(|(sex, _)| LegendItem::new(Swatch::Line(sex_colour(*sex), 3), sex_name(*sex)))
        .collect();
    let legend_px = legend_height(&legend, WIDTH);
    let (x_lo, x_hi) = padded((lo, hi), 0.03);
    svg(HEIGHT + legend_px, &lifetime_title(age, horizon), |root| {
        let (strip, plot) = root.split_vertically(legend_px);
        draw_legend(&strip, &legend)?;
        let x_ticks = linear_ticks(x_lo, x_hi, max_ticks(WIDTH - 140, label_chars(x_lo, x_hi)));
        let y_ticks = linear_ticks(0.0, top, 6);
        let x_format = |v: &f64| x_ticks.label(*v);
        let y_format = |v: &f64| y_ticks.label(*v);
        let mut ctx = builder(&plot)
            .build_cartesian_2d(x_lo..x_hi, 0.0..top)
            .map_err(draw_error)?;
        ctx.configure_mesh()
            .x_desc(format!(
                "Truncated life expectancy e°{age}:{horizon} (years)"
            ))
            .y_desc(Y_DESC)
            .x_labels(x_ticks.max_ticks)
            .y_labels(y_ticks.max_ticks)
            .x_label_formatter(&x_format)
            .y_label_formatter(&y_format)
            .label_style(label_style())
            .axis_desc_style(axis_style())
            .bold_line_style(palette::GRID)
            .light_line_style(TRANSPARENT)
            .draw()
            .map_err(draw_error)?;
        for (sex, bar_shares) in &series {
            let colour = sex_colour(*sex);
            let mut outline = vec![(lo, 0.0)];
            for (i, &s) in bar_shares.iter().enumerate() {
                outline.push((lo + i as f64 * width, s));
                outline.push((lo + (i + 1) as f64 * width, s));
            }
            outline.push((hi, 0.0));
            ctx.draw_series(std::iter::once(Polygon::new(
                outline.clone(),
                colour.mix(0.18).filled(),
            )))
            .map_err(draw_error)?;
            // The outline leaves out empty bins at either end, so one sex's baseline is not
            // drawn across the other's distribution.
            let first = bar_shares.iter().position(|&s| s > 0.0).unwrap_or(0);
            let last = bar_shares.iter().rposition(|&s| s > 0.0).unwrap_or(0);
            let edge = outline[2 * first + 1..=2 * last + 2].to_vec();
            let start = (edge[0].0, 0.0);
            let end = (edge[edge.len() - 1].0, 0.0);
            let edge: Vec<(f64, f64)> = std::iter::once(start)
                .chain(edge)
                .chain(std::iter::once(end))
                .collect();
            ctx.draw_series(std::iter::once(PathElement::new(
                edge,
                colour.stroke_width(3),
            )))
            .map_err(draw_error)?;
        }
        Ok(())
    })
}

/// Characters in the widest tick label of an axis from `lo` to `hi`: the whole part with
/// its separators, plus room for a decimal or two.
fn label_chars(lo: f64, hi: f64) -> usize {
    let whole = |v: f64| format::fixed(v, 0).len();
    whole(lo).max(whole(hi)) + if hi - lo < 10.0 { 2 } else { 0 }
}

fn builder<'a, 'b, DB: DrawingBackend>(
    plot: &'a DrawingArea<DB, Shift>,
) -> ChartBuilder<'a, 'b, DB> {
    let mut b = ChartBuilder::on(plot);
    b.margin_left(10)
        .margin_right(30)
        .margin_top(10)
        .margin_bottom(5)
        .x_label_area_size(60)
        .y_label_area_size(95);
    b
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shares_sum_to_one_and_keep_the_ends() {
        let values = [0.0, 0.5, 1.0, 1.0, f64::NAN];
        let s = shares(&values, 0.0, 1.0, 2);
        assert_eq!(s, vec![0.25, 0.75]);
    }
}
