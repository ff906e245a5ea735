//! Heat maps of deviance residuals by age and calendar year.
//!
//! A good fit leaves residuals without pattern; diagonals reveal cohort effects and
//! vertical stripes period shocks the model misses. The diverging scale is centred at 0
//! and shared by every map of a report so maps can be compared at a glance.

use plotters::prelude::*;

use super::{axis_style, draw_error, label_style, max_ticks, palette, svg};
use crate::error::{Error, Result};
use crate::report::data::ResidualMap;
use crate::report::format;

const HEIGHT: u32 = 420;
const LEGEND_WIDTH: u32 = 130;
/// Residuals beyond this are drawn at the end colours, so one outlier cannot wash out a map.
pub const MAX_LIMIT: f64 = 4.0;

/// ColorBrewer RdBu (Brewer, colorbrewer2.org; rated colour-blind safe there): blue for
/// fewer deaths than fitted, red for more.
const STOPS: [(f64, RGBColor); 5] = [
    (-1.0, RGBColor(33, 102, 172)),
    (-0.5, RGBColor(146, 197, 222)),
    (0.0, RGBColor(247, 247, 247)),
    (0.5, RGBColor(244, 165, 130)),
    (1.0, RGBColor(178, 24, 43)),
];

/// Colour of residual `r` on a scale running from `-limit` to `limit`.
pub fn colour(r: f64, limit: f64) -> RGBColor {
    let t = (r / limit).clamp(-1.0, 1.0);
    for pair in STOPS.windows(2) {
        let ((t0, c0), (t1, c1)) = (pair[0], pair[1]);
        if t <= t1 {
            let w = (t - t0) / (t1 - t0);
            let mix = |a: u8, b: u8| (a as f64 + w * (b as f64 - a as f64)).round() as u8;
            return RGBColor(mix(c0.0, c1.0), mix(c0.1, c1.1), mix(c0.2, c1.2));
        }
    }
    STOPS[4].1
}

/// Half-width of the colour scale for `maps`: the largest |residual| rounded up to a half,
/// at least 1 and at most [`MAX_LIMIT`].
pub fn scale_limit<'a>(maps: impl IntoIterator<Item = &'a ResidualMap>) -> f64 {
    let largest = maps
        .into_iter()
        .flat_map(|m| m.residuals.iter().flatten())
        .filter(|r| r.is_finite())
        .fold(0.0f64, |acc, r| acc.max(r.abs()));
    ((largest * 2.0).ceil() / 2.0).clamp(1.0, MAX_LIMIT)
}

/// The map's title.
pub fn title(map: &ResidualMap) -> String {
    let sex = match map.sex {
        crate::data::Sex::F => "females",
        crate::data::Sex::M => "males",
    };
    format!("Deviance residuals, {}, {sex}", map.model)
}

/// Checks that the matrix matches its ages and years.
pub fn check(map: &ResidualMap) -> Result<()> {
    let bad = |rule: String| Error::Report {
        section: format!("residuals of {} {}", map.model, map.sex),
        rule,
    };
    if map.residuals.len() != map.ages.len() {
        return Err(bad(format!(
            "{} rows of residuals for {} ages",
            map.residuals.len(),
            map.ages.len()
        )));
    }
    if let Some((i, row)) = map
        .residuals
        .iter()
        .enumerate()
        .find(|(_, row)| row.len() != map.years.len())
    {
        return Err(bad(format!(
            "row {i} (age {}) has {} residuals for {} years",
            map.ages[i],
            row.len(),
            map.years.len()
        )));
    }
    Ok(())
}

/// Draws one residual map with its colour legend as an `<svg>` element.
pub fn residual_heatmap(map: &ResidualMap, limit: f64) -> Result<String> {
    check(map)?;
    let (Some(&a0), Some(&a1)) = (map.ages.iter().min(), map.ages.iter().max()) else {
        return Err(Error::Report {
            section: title(map),
            rule: "no ages".to_string(),
        });
    };
    let (Some(&y0), Some(&y1)) = (map.years.iter().min(), map.years.iter().max()) else {
        return Err(Error::Report {
            section: title(map),
            rule: "no years".to_string(),
        });
    };
    svg(HEIGHT, &title(map), |root| {
        let (main, _) = root.split_horizontally(super::WIDTH - LEGEND_WIDTH);
        let x_range = (y0 as f64 - 0.5)..(y1 as f64 + 0.5);
        let y_range = (a0 as f64 - 0.5)..(a1 as f64 + 0.5);
        let mut ctx = ChartBuilder::on(&main)
            .margin(10)
            .x_label_area_size(60)
            .y_label_area_size(80)
            .build_cartesian_2d(x_range, y_range)
            .map_err(draw_error)?;
        let whole = |v: &f64| format!("{v:.0}");
        ctx.configure_mesh()
            .x_desc("Calendar year")
            .y_desc("Age (years)")
            .x_labels(max_ticks(super::WIDTH - LEGEND_WIDTH - 100, 4))
            .y_labels(10)
            .x_label_formatter(&whole)
            .y_label_formatter(&whole)
            .label_style(label_style())
            .axis_desc_style(axis_style())
            .disable_mesh()
            .draw()
            .map_err(draw_error)?;
        let cells = map.ages.iter().zip(&map.residuals).flat_map(|(&age, row)| {
            map.years
                .iter()
                .zip(row)
                .filter(|(_, r)| r.is_finite())
                .map(move |(&year, &r)| {
                    let (x, y) = (year as f64, age as f64);
                    Rectangle::new(
                        [(x - 0.5, y - 0.5), (x + 0.5, y + 0.5)],
                        colour(r, limit).filled(),
                    )
                })
        });
        ctx.draw_series(cells).map_err(draw_error)?;

        // The colour bar spans the plot's height, with ticks on its right.
        let (_, top) = ctx.backend_coord(&(y0 as f64, a1 as f64 + 0.5));
        let (_, bottom) = ctx.backend_coord(&(y0 as f64, a0 as f64 - 0.5));
        draw_colour_bar(root, limit, top, bottom)?;
        Ok(())
    })
}

/// Draws the colour scale from `-limit` (at `bottom`) to `limit` (at `top`) in the strip
/// right of the map.
fn draw_colour_bar<DB: DrawingBackend>(
    root: &DrawingArea<DB, plotters::coord::Shift>,
    limit: f64,
    top: i32,
    bottom: i32,
) -> Result<()> {
    use plotters::style::text_anchor::{HPos, Pos, VPos};
    let x0 = (super::WIDTH - LEGEND_WIDTH) as i32 + 16;
    let x1 = x0 + 22;
    let height = (bottom - top).max(1) as f64;
    let y_of = |v: f64| bottom - ((v + limit) / (2.0 * limit) * height).round() as i32;
    let steps = 64;
    for i in 0..steps {
        let lo = -limit + 2.0 * limit * i as f64 / steps as f64;
        let hi = -limit + 2.0 * limit * (i + 1) as f64 / steps as f64;
        root.draw(&Rectangle::new(
            [(x0, y_of(hi)), (x1, y_of(lo))],
            colour((lo + hi) / 2.0, limit).filled(),
        ))
        .map_err(draw_error)?;
    }
    root.draw(&Rectangle::new(
        [(x0, top), (x1, bottom)],
        palette::BLACK.stroke_width(1),
    ))
    .map_err(draw_error)?;
    let ticks = super::linear_ticks(-limit, limit, 9);
    let text = label_style().pos(Pos::new(HPos::Left, VPos::Center));
    for &v in &ticks.values {
        let y = y_of(v);
        root.draw(&PathElement::new(
            vec![(x1, y), (x1 + 5, y)],
            palette::BLACK.stroke_width(1),
        ))
        .map_err(draw_error)?;
        let label = if v > 0.0 {
            format!("+{}", ticks.label(v))
        } else {
            ticks.label(v)
        };
        root.draw_text(&label, &text, (x1 + 8, y))
            .map_err(draw_error)?;
    }
    let title = axis_style()
        .transform(FontTransform::Rotate270)
        .pos(Pos::new(HPos::Center, VPos::Center));
    root.draw_text("Deviance residual", &title, (x1 + 62, (top + bottom) / 2))
        .map_err(draw_error)?;
    Ok(())
}

/// Caption note on the scale, saying when cells were clipped to it.
pub fn scale_note(maps: &[ResidualMap], limit: f64) -> String {
    let clipped = maps
        .iter()
        .flat_map(|m| m.residuals.iter().flatten())
        .any(|r| r.is_finite() && r.abs() > limit);
    let l = format::fixed(limit, 1);
    if clipped {
        format!(
            "Colour scale from -{l} (blue: fewer deaths than fitted) to +{l} (red: more); \
             cells beyond it are drawn at the end colours."
        )
    } else {
        format!("Colour scale from -{l} (blue: fewer deaths than fitted) to +{l} (red: more).")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn scale_is_centred_and_clipped() {
        assert_eq!(colour(0.0, 2.0), RGBColor(247, 247, 247));
        assert_eq!(colour(-2.0, 2.0), RGBColor(33, 102, 172));
        assert_eq!(colour(9.0, 2.0), RGBColor(178, 24, 43));
        assert_eq!(colour(1.0, 2.0), RGBColor(244, 165, 130));
    }
}
