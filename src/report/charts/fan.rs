//! Fan charts: the observed history of a measure and the bands of its projection.
//!
//! Bands are drawn opaque, widest first, in tints of one blue so the legend swatches match
//! the page exactly and the chart survives black-and-white printing as light-to-dark.

use plotters::coord::Shift;
use plotters::prelude::*;

use super::{
    LegendItem, Swatch, WIDTH, axis_style, draw_error, draw_legend, finite_range, label_style,
    legend_height, linear_ticks, max_ticks, padded, palette, svg,
};
use crate::error::Result;
use crate::report::data::{FanChart, FanMeasure, FanPoint};
use crate::report::format;

const HEIGHT: u32 = 350;
/// Band tints: Okabe–Ito blue mixed with white at 20 %, 40 % and 65 %.
const BAND_99: RGBColor = RGBColor(204, 227, 240);
const BAND_90: RGBColor = RGBColor(153, 199, 224);
const BAND_50: RGBColor = RGBColor(89, 160, 200);

/// The chart's title, also used as the figure caption.
pub fn title(chart: &FanChart) -> String {
    let sex = sex_word(chart.sex);
    match chart.measure {
        FanMeasure::PeriodLifeExpectancy { age } => {
            format!("Period life expectancy at age {age}, {sex}: observed and projected")
        }
        FanMeasure::MortalityRate { age } => {
            format!("Probability of death at age {age}, {sex}: observed and projected")
        }
        FanMeasure::BookSpread { li_lee: false } => {
            "The book's spread κ_t against the population: fitted and projected".to_string()
        }
        FanMeasure::BookSpread { li_lee: true } => {
            format!("The book population's own index k_t, {sex}: fitted and projected")
        }
    }
}

fn sex_word(sex: crate::data::Sex) -> &'static str {
    match sex {
        crate::data::Sex::F => "females",
        crate::data::Sex::M => "males",
    }
}

/// Whether the chart has anything to draw.
pub fn has_data(chart: &FanChart) -> bool {
    !usable_history(chart).is_empty() || !usable_projection(chart).is_empty()
}

fn is_log(chart: &FanChart) -> bool {
    matches!(chart.measure, FanMeasure::MortalityRate { .. })
}

fn usable(chart: &FanChart, v: f64) -> bool {
    v.is_finite() && (!is_log(chart) || v > 0.0)
}

fn usable_history(chart: &FanChart) -> Vec<(f64, f64)> {
    chart
        .history
        .iter()
        .filter(|p| usable(chart, p.value))
        .map(|p| (p.year as f64, p.value))
        .collect()
}

fn quantiles(p: &FanPoint) -> [f64; 7] {
    [p.q005, p.q050, p.q250, p.q500, p.q750, p.q950, p.q995]
}

fn usable_projection(chart: &FanChart) -> Vec<FanPoint> {
    chart
        .projection
        .iter()
        .filter(|p| quantiles(p).iter().all(|&v| usable(chart, v)))
        .copied()
        .collect()
}

/// Draws the fan chart as an `<svg>` element.
pub fn fan_chart(chart: &FanChart) -> Result<String> {
    let history = usable_history(chart);
    let projection = usable_projection(chart);
    let years = finite_range(
        history
            .iter()
            .map(|p| p.0)
            .chain(projection.iter().map(|p| p.year as f64)),
    )
    .unwrap_or((0.0, 1.0));
    let values = finite_range(
        history
            .iter()
            .map(|p| p.1)
            .chain(projection.iter().flat_map(|p| [p.q005, p.q995])),
    )
    .unwrap_or((0.0, 1.0));
    let mut legend = Vec::new();
    if !history.is_empty() {
        legend.push(LegendItem::new(
            Swatch::Dot(palette::BLACK),
            "Observed (from the experience)",
        ));
    }
    if !projection.is_empty() {
        legend.extend([
            LegendItem::new(Swatch::Line(palette::VERMILLION, 3), "Projected median"),
            LegendItem::new(Swatch::Fill(BAND_50), "50 % band"),
            LegendItem::new(Swatch::Fill(BAND_90), "90 % band"),
            LegendItem::new(Swatch::Fill(BAND_99), "99 % band"),
        ]);
    }
    let legend_px = legend_height(&legend, WIDTH);
    let title = title(chart);
    svg(HEIGHT + legend_px, &title, |root| {
        let (top, plot) = root.split_vertically(legend_px);
        draw_legend(&top, &legend)?;
        let x_range = (years.0 - 0.5)..(years.1 + 0.5);
        let x_ticks = max_ticks(WIDTH - 120, 4);
        let x_format = |v: &f64| format!("{v:.0}");
        match chart.measure {
            FanMeasure::MortalityRate { age } => {
                let (lo, hi) = values;
                let (lo, hi) = (lo / 1.15, hi * 1.15);
                let ticks = super::log_ticks(lo, hi, 8);
                let mut ctx = builder(&plot)
                    .build_cartesian_2d(x_range, (lo..hi).log_scale().with_key_points(ticks))
                    .map_err(draw_error)?;
                ctx.configure_mesh()
                    .x_desc("Calendar year")
                    .y_desc(format!("Probability of death q at age {age} (log scale)"))
                    .x_labels(x_ticks)
                    .y_labels(8)
                    .x_label_formatter(&x_format)
                    .y_label_formatter(&|v: &f64| format::probability(*v))
                    .label_style(label_style())
                    .axis_desc_style(axis_style())
                    .bold_line_style(palette::GRID)
                    .light_line_style(TRANSPARENT)
                    .draw()
                    .map_err(draw_error)?;
                draw_fan(&mut ctx, &history, &projection)
            }
            FanMeasure::PeriodLifeExpectancy { .. } | FanMeasure::BookSpread { .. } => {
                let y_desc = match chart.measure {
                    FanMeasure::PeriodLifeExpectancy { age } => {
                        format!("Period life expectancy at age {age} (years)")
                    }
                    FanMeasure::BookSpread { li_lee: false } => {
                        "κ_t: log of the book's rate over the fitted level".to_string()
                    }
                    _ => "k_t: the book population's own index".to_string(),
                };
                let (lo, hi) = padded(values, 0.05);
                let y_ticks = linear_ticks(lo, hi, 8);
                let y_format = |v: &f64| y_ticks.label(*v);
                let mut ctx = builder(&plot)
                    .build_cartesian_2d(x_range, lo..hi)
                    .map_err(draw_error)?;
                ctx.configure_mesh()
                    .x_desc("Calendar year")
                    .y_desc(y_desc)
                    .x_labels(x_ticks)
                    .y_labels(y_ticks.max_ticks)
                    .x_label_formatter(&x_format)
                    .y_label_formatter(&y_format)
                    .label_style(label_style())
                    .axis_desc_style(axis_style())
                    .bold_line_style(palette::GRID)
                    .light_line_style(TRANSPARENT)
                    .draw()
                    .map_err(draw_error)?;
                draw_fan(&mut ctx, &history, &projection)
            }
        }
    })
}

fn builder<'a, 'b, DB: DrawingBackend>(
    plot: &'a DrawingArea<DB, Shift>,
) -> ChartBuilder<'a, 'b, DB> {
    let mut b = ChartBuilder::on(plot);
    b.margin_left(10)
        .margin_right(25)
        .margin_top(10)
        .margin_bottom(5)
        .x_label_area_size(60)
        .y_label_area_size(95);
    b
}

/// Draws bands, median and history on a chart whose y axis is linear or logarithmic.
fn draw_fan<DB, X, Y>(
    ctx: &mut ChartContext<'_, DB, Cartesian2d<X, Y>>,
    history: &[(f64, f64)],
    projection: &[FanPoint],
) -> Result<()>
where
    DB: DrawingBackend,
    X: Ranged<ValueType = f64>,
    Y: Ranged<ValueType = f64>,
{
    let band = |lower: fn(&FanPoint) -> f64, upper: fn(&FanPoint) -> f64| -> Vec<(f64, f64)> {
        projection
            .iter()
            .map(|p| (p.year as f64, upper(p)))
            .chain(projection.iter().rev().map(|p| (p.year as f64, lower(p))))
            .collect()
    };
    if projection.len() > 1 {
        for (points, color) in [
            (band(|p| p.q005, |p| p.q995), BAND_99),
            (band(|p| p.q050, |p| p.q950), BAND_90),
            (band(|p| p.q250, |p| p.q750), BAND_50),
        ] {
            ctx.draw_series(std::iter::once(Polygon::new(points, color.filled())))
                .map_err(draw_error)?;
        }
    }
    if !projection.is_empty() {
        ctx.draw_series(LineSeries::new(
            projection.iter().map(|p| (p.year as f64, p.q500)),
            palette::VERMILLION.stroke_width(3),
        ))
        .map_err(draw_error)?;
    }
    ctx.draw_series(
        history
            .iter()
            .map(|&p| Circle::new(p, 3, palette::BLACK.filled())),
    )
    .map_err(draw_error)?;
    Ok(())
}
