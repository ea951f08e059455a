//! Report charts drawn with plotters into SVG strings.
//!
//! Owns: one chart per file, each taking a plain data struct from [`super::model`] and
//! returning an SVG `String`; the shared look (font, opaque colours, palettes) lives here.
//!
//! - [`timeseries`]: structure's vertical displacement over time.
//! - [`map`]: plan map of the structure, its points and neighbours.
//! - [`profile`]: settlement profile along a principal axis.
//! - [`interaction`]: deflection ratio against horizontal strain with category zones.
//! - [`portfolio_map`]: all structures coloured by damage category.
//! - [`works`]: planned works plan view and predicted against observed.
//! - [`palette`]: the colour scales and their documentation.
//! - [`labels`]: the text of a drawn chart lifted out of the SVG for typst to set.
//! - [`compact`]: runs of alike shapes of a drawn chart merged into one path each.
//! - [`pdf_art`]: the drawing of a chart (without its text) as a one-page PDF.
//!
//! Does not own: any computation of the plotted quantities (only geometry for drawing, such as
//! the category boundary curves, which are inverted published relations), or file output.
//!
//! Rules for every chart (typst-embedding.md §2, §3): text names the bundled family
//! "DejaVu Sans" explicitly (a generic `sans-serif` would fall back to the serif body font);
//! every colour is OPAQUE (translucent elements each become a PDF transparency group and bloat
//! the file), so tints are blended by hand; every axis is labelled with its unit.

pub mod compact;
pub mod interaction;
pub mod labels;
pub mod map;
pub mod palette;
pub mod pdf_art;
pub mod portfolio_map;
pub mod profile;
mod svg_element;
pub mod timeseries;
pub mod works;

use std::sync::atomic::{AtomicU32, Ordering};

use plotters::style::RGBColor;

use super::ReportError;

/// Font family used in every chart (bundled, see `templates/fonts/`).
pub const FONT: &str = super::world::SANS_FAMILY;

/// Font sizes in plotters units (the SVG backend writes size / 1.24 px). Charts are about
/// 800 px wide and placed at the full text width (17 cm), so 16 units come out near 8 pt.
pub const TITLE_SIZE: u32 = 20;
/// Axis titles.
pub const DESC_SIZE: u32 = 17;
/// Tick labels and legend text.
pub const LABEL_SIZE: u32 = 16;
/// Labels written inside plots (structure ids).
pub const SMALL_SIZE: u32 = 13;

/// Near-black for text and outlines.
pub const INK: RGBColor = RGBColor(33, 33, 33);
/// Fine grid lines (opaque light grey).
pub const GRID_LIGHT: RGBColor = RGBColor(241, 241, 241);
/// Major grid lines (opaque grey).
pub const GRID_BOLD: RGBColor = RGBColor(216, 216, 216);
/// Mid grey for secondary elements.
pub const GREY: RGBColor = RGBColor(140, 140, 140);
/// Light grey fill (neighbours).
pub const GREY_FILL: RGBColor = RGBColor(226, 226, 226);
/// Main data colour (dark blue).
pub const BLUE: RGBColor = RGBColor(31, 86, 150);
/// Accent colour (dark orange), distinguishable from [`BLUE`] under colour-vision deficiency.
pub const ORANGE: RGBColor = RGBColor(196, 98, 16);
/// White.
pub const WHITE: RGBColor = RGBColor(255, 255, 255);

/// Blends `color` with white: `amount` = 0 gives white, 1 the colour (opaque result).
pub fn tint(color: RGBColor, amount: f64) -> RGBColor {
    let a = amount.clamp(0.0, 1.0);
    let mix = |c: u8| (255.0 - (255.0 - f64::from(c)) * a).round() as u8;
    RGBColor(mix(color.0), mix(color.1), mix(color.2))
}

/// Maps a plotters error to a chart error.
pub(crate) fn chart_error<E: std::fmt::Display>(chart: &'static str) -> impl Fn(E) -> ReportError {
    move |e| ReportError::Chart {
        chart,
        reason: e.to_string(),
    }
}

/// A "nice" step (1, 2 or 5 × 10^k) close to `raw`; 1 for non-positive or non-finite input.
pub(crate) fn nice_step(raw: f64) -> f64 {
    if !(raw.is_finite() && raw > 0.0) {
        return 1.0;
    }
    let exp = raw.log10().floor();
    let base = 10f64.powf(exp);
    let f = raw / base;
    let nice = if f < 1.5 {
        1.0
    } else if f < 3.5 {
        2.0
    } else if f < 7.5 {
        5.0
    } else {
        10.0
    };
    nice * base
}

/// Min and max of finite values; `None` if there are none.
pub(crate) fn finite_range(values: impl IntoIterator<Item = f64>) -> Option<(f64, f64)> {
    values
        .into_iter()
        .filter(|v| v.is_finite())
        .fold(None, |acc, v| match acc {
            None => Some((v, v)),
            Some((lo, hi)) => Some((lo.min(v), hi.max(v))),
        })
}

/// Widens a range by `fraction` of its span on each side; a zero span becomes ±`min_half`.
pub(crate) fn pad_range((lo, hi): (f64, f64), fraction: f64, min_half: f64) -> (f64, f64) {
    let span = hi - lo;
    if span <= 0.0 || !span.is_finite() {
        let mid = if lo.is_finite() { lo } else { 0.0 };
        return (mid - min_half, mid + min_half);
    }
    (lo - span * fraction, hi + span * fraction)
}

/// Equal-aspect data ranges covering `(x, y)` bounds in a plot of `px_w × px_h` pixels.
pub(crate) fn equal_aspect(
    (x0, x1): (f64, f64),
    (y0, y1): (f64, f64),
    px_w: f64,
    px_h: f64,
) -> ((f64, f64), (f64, f64)) {
    let (cx, cy) = ((x0 + x1) / 2.0, (y0 + y1) / 2.0);
    let scale = ((x1 - x0) / px_w).max((y1 - y0) / px_h).max(1e-9); // m per pixel
    let (hw, hh) = (scale * px_w / 2.0, scale * px_h / 2.0);
    ((cx - hw, cx + hw), (cy - hh, cy + hh))
}

/// What a legend entry shows next to its label.
#[derive(Debug, Clone, Copy)]
pub(crate) enum Swatch {
    /// A line of this colour and stroke width.
    Line(RGBColor, u32),
    /// A dashed line.
    Dashed(RGBColor, u32),
    /// A filled box with an outline colour.
    Fill(RGBColor, RGBColor),
    /// A filled circle with a dark outline.
    Dot(RGBColor),
    /// A hollow circle.
    Ring(RGBColor),
    /// A white box with grey diagonal hatching (insufficient data).
    Hatch,
}

/// Draws a horizontal, wrapping legend into `area` (a strip below the plot). Text widths are
/// estimated (plotters has no font metrics without its `ttf` feature): 0.6 em per character,
/// slightly generous for DejaVu Sans.
pub(crate) fn draw_legend<DB: plotters::prelude::DrawingBackend>(
    area: &plotters::prelude::DrawingArea<DB, plotters::coord::Shift>,
    entries: &[(Swatch, String)],
) -> Result<(), ReportError> {
    use plotters::prelude::*;
    let err = chart_error("legend");
    let (width, _) = area.dim_in_pixel();
    let font = (FONT, LABEL_SIZE).into_font().color(&INK);
    for ((x, y), (swatch, label)) in legend_layout(entries, width).into_iter().zip(entries) {
        let cy = y + 7;
        match *swatch {
            Swatch::Line(c, w) => {
                area.draw(&PathElement::new(
                    vec![(x, cy), (x + 24, cy)],
                    c.stroke_width(w),
                ))
                .map_err(&err)?;
            }
            Swatch::Dashed(c, w) => {
                for k in 0..3 {
                    let x0 = x + k * 9;
                    area.draw(&PathElement::new(
                        vec![(x0, cy), (x0 + 5, cy)],
                        c.stroke_width(w),
                    ))
                    .map_err(&err)?;
                }
            }
            Swatch::Fill(fill, outline) => {
                area.draw(&Rectangle::new(
                    [(x, cy - 6), (x + 24, cy + 6)],
                    fill.filled(),
                ))
                .map_err(&err)?;
                area.draw(&Rectangle::new(
                    [(x, cy - 6), (x + 24, cy + 6)],
                    outline.stroke_width(1),
                ))
                .map_err(&err)?;
            }
            Swatch::Dot(c) => {
                area.draw(&Circle::new((x + 12, cy), 5, c.filled()))
                    .map_err(&err)?;
                area.draw(&Circle::new((x + 12, cy), 5, INK.stroke_width(1)))
                    .map_err(&err)?;
            }
            Swatch::Ring(c) => {
                area.draw(&Circle::new((x + 12, cy), 5, c.stroke_width(1)))
                    .map_err(&err)?;
            }
            Swatch::Hatch => {
                area.draw(&Rectangle::new(
                    [(x, cy - 6), (x + 24, cy + 6)],
                    WHITE.filled(),
                ))
                .map_err(&err)?;
                for k in 0..5 {
                    let x0 = x + k * 6 - 6;
                    let (a, b) = (
                        (x0.max(x), cy + 6 - (x0.max(x) - x0)),
                        (
                            (x0 + 12).min(x + 24),
                            cy - 6 + ((x0 + 12) - (x0 + 12).min(x + 24)),
                        ),
                    );
                    area.draw(&PathElement::new(vec![a, b], GREY.stroke_width(1)))
                        .map_err(&err)?;
                }
                area.draw(&Rectangle::new(
                    [(x, cy - 6), (x + 24, cy + 6)],
                    GREY.stroke_width(1),
                ))
                .map_err(&err)?;
            }
        }
        area.draw(&Text::new(label.clone(), (x + 30, y), font.clone()))
            .map_err(&err)?;
    }
    Ok(())
}

/// Top-left pixel of every legend item, wrapping rows at `width`.
fn legend_layout(entries: &[(Swatch, String)], width: u32) -> Vec<(i32, i32)> {
    let char_w = 0.6 * f64::from(LABEL_SIZE) / 1.24;
    let (mut x, mut y) = (12i32, 6i32);
    let mut out = Vec::with_capacity(entries.len());
    for (_, label) in entries {
        let text_w = (label.chars().count() as f64 * char_w).ceil() as i32;
        let item_w = 30 + text_w + 18;
        if x + item_w > width as i32 && x > 12 {
            x = 12;
            y += LEGEND_ROW_H;
        }
        out.push((x, y));
        x += item_w;
    }
    out
}

/// Height of one legend row, px.
const LEGEND_ROW_H: i32 = 22;

/// Draw a chart whose legend strip must fit its entries: draw once with a guess of the strip
/// height, and again with the height the entries need when the guess was wrong. The guess is
/// the height the same chart needed last time (`last`, one per chart kind), so in a batch of
/// reports whose legends have the same number of rows each chart is drawn once. The result
/// does not depend on the guess: the kept drawing always has the needed height.
pub(crate) fn with_fitted_legend(
    width: u32,
    last: &AtomicU32,
    draw: impl Fn(u32) -> Result<(String, Vec<(Swatch, String)>), ReportError>,
) -> Result<String, ReportError> {
    let guess = last.load(Ordering::Relaxed);
    let (svg, legend) = draw(guess)?;
    let needed = legend_height(&legend, width);
    last.store(needed, Ordering::Relaxed);
    if needed == guess {
        Ok(svg)
    } else {
        draw(needed).map(|(svg, _)| svg)
    }
}

/// Pixel height a legend of `entries` needs at `width` (rows × row height + padding).
pub(crate) fn legend_height(entries: &[(Swatch, String)], width: u32) -> u32 {
    let last_y = legend_layout(entries, width)
        .last()
        .map(|p| p.1)
        .unwrap_or(0);
    u32::try_from(last_y + LEGEND_ROW_H + 8).unwrap_or(40)
}

/// A date as a chart x coordinate: days from the common era (chrono's day count).
pub(crate) fn day(d: chrono::NaiveDate) -> f64 {
    use chrono::Datelike;
    f64::from(d.num_days_from_ce())
}

/// Axis label `YYYY-MM` of a [`day`] coordinate; empty for non-finite values.
pub(crate) fn date_label(x: f64) -> String {
    if !x.is_finite() {
        return String::new();
    }
    chrono::NaiveDate::from_num_days_from_ce_opt(x.round() as i32)
        .map(|d| d.format("%Y-%m").to_string())
        .unwrap_or_default()
}

/// Draw a chart title centred at the top of `area` (`width` px wide, `top` px from its top edge).
pub(crate) fn draw_centred_title(
    area: &plotters::drawing::DrawingArea<plotters::backend::SVGBackend, plotters::coord::Shift>,
    title: &str,
    width: u32,
    top: i32,
    chart: &'static str,
) -> Result<(), ReportError> {
    use plotters::prelude::*;
    use plotters::style::text_anchor::{HPos, Pos, VPos};
    area.draw(&Text::new(
        title.to_string(),
        (width as i32 / 2, top),
        (FONT, TITLE_SIZE)
            .into_font()
            .color(&INK)
            .pos(Pos::new(HPos::Center, VPos::Top)),
    ))
    .map_err(chart_error(chart))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tint_is_opaque_blend_with_white() {
        assert_eq!(tint(RGBColor(0, 0, 0), 0.0), WHITE);
        assert_eq!(tint(RGBColor(0, 100, 200), 1.0), RGBColor(0, 100, 200));
        assert_eq!(tint(RGBColor(55, 155, 255), 0.5), RGBColor(155, 205, 255));
    }

    #[test]
    fn nice_steps() {
        assert_eq!(nice_step(7.0), 5.0);
        assert_eq!(nice_step(0.8), 1.0);
        assert_eq!(nice_step(23.0), 20.0);
        assert_eq!(nice_step(f64::NAN), 1.0);
    }

    #[test]
    fn equal_aspect_keeps_metres_per_pixel() {
        let ((x0, x1), (y0, y1)) = equal_aspect((0.0, 100.0), (0.0, 10.0), 400.0, 200.0);
        assert!(((x1 - x0) / 400.0 - (y1 - y0) / 200.0).abs() < 1e-12);
        assert!((x1 - x0 - 100.0).abs() < 1e-9);
    }
}
