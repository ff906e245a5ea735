//! The models' PV distributions overlaid: model risk at a glance.
//!
//! Each model's histogram is drawn as an outline over the same bins, so where the
//! distributions sit against each other shows without one hiding another.

use plotters::prelude::*;

use super::{
    LegendItem, Swatch, WIDTH, axis_style, draw_error, draw_legend, label_style, legend_height,
    linear_ticks, max_ticks, padded, palette, svg,
};
use crate::error::Result;
use crate::report::data::ModelRisk;
use crate::report::format;

const HEIGHT: u32 = 340;

/// Line colours of the models, in order (cycled).
const COLOURS: [RGBColor; 6] = [
    palette::BLUE,
    palette::VERMILLION,
    palette::GREEN,
    palette::ORANGE,
    palette::PURPLE,
    palette::SKY_BLUE,
];

/// The chart's title.
pub fn models_title(risk: &ModelRisk) -> String {
    format!(
        "Distribution of the book's present value by model ({})",
        risk.label
    )
}

/// Draws each model's PV histogram as an outline over common bins, the legend giving
/// each model's weight.
pub fn models_chart(risk: &ModelRisk, currency: &str) -> Result<String> {
    let (lo, hi) = risk.range;
    let legend: Vec<LegendItem> = risk
        .models
        .iter()
        .enumerate()
        .map(|(i, m)| {
            LegendItem::new(
                Swatch::Line(COLOURS[i % COLOURS.len()], 3),
                format!("{} (weight {})", m.model, format::fixed(m.weight, 3)),
            )
        })
        .collect();
    let (scale, unit) = if lo.abs().max(hi.abs()) >= 1e6 {
        (1e6, format!("millions of {currency}"))
    } else {
        (1.0, currency.to_string())
    };
    let bins = risk
        .models
        .iter()
        .map(|m| m.shares.len())
        .max()
        .unwrap_or(1)
        .max(1);
    let width = (hi - lo) / bins as f64;
    let top = risk
        .models
        .iter()
        .flat_map(|m| m.shares.iter().copied())
        .filter(|s| s.is_finite())
        .fold(0.0, f64::max)
        .max(1e-9)
        * 1.08;
    let (x_lo, x_hi) = padded((lo, hi), 0.04);
    let (x_lo, x_hi) = (x_lo / scale, x_hi / scale);
    let legend_px = legend_height(&legend, WIDTH);
    svg(HEIGHT + legend_px, &models_title(risk), |root| {
        let (strip, plot) = root.split_vertically(legend_px);
        draw_legend(&strip, &legend)?;
        let chars = format!("{:.0}", x_hi.abs().max(x_lo.abs())).len() + 2;
        let x_ticks = linear_ticks(x_lo, x_hi, max_ticks(WIDTH - 140, chars));
        let y_ticks = linear_ticks(0.0, top, 6);
        let x_format = |v: &f64| x_ticks.label(*v);
        let y_format = |v: &f64| y_ticks.label(*v);
        let mut ctx = ChartBuilder::on(&plot)
            .margin_left(10)
            .margin_right(30)
            .margin_top(10)
            .margin_bottom(5)
            .x_label_area_size(60)
            .y_label_area_size(95)
            .build_cartesian_2d(x_lo..x_hi, 0.0..top)
            .map_err(draw_error)?;
        ctx.configure_mesh()
            .x_desc(format!("Present value ({unit})"))
            .y_desc("Probability (share of scenarios in bin)")
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
        for (i, m) in risk.models.iter().enumerate() {
            let colour = COLOURS[i % COLOURS.len()];
            // A step outline: up and across each bin, down at the ends.
            let mut points = vec![(lo / scale, 0.0)];
            for (b, &s) in m.shares.iter().enumerate() {
                let s = if s.is_finite() { s } else { 0.0 };
                points.push(((lo + b as f64 * width) / scale, s));
                points.push(((lo + (b + 1) as f64 * width) / scale, s));
            }
            points.push((hi / scale, 0.0));
            ctx.draw_series(std::iter::once(PathElement::new(
                points,
                colour.stroke_width(2),
            )))
            .map_err(draw_error)?;
        }
        Ok(())
    })
}
