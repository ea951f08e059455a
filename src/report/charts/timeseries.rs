//! Time-series chart: the structure's aggregate vertical displacement (mm, + up) with its
//! spread band, the fitted trend (and the seasonal/acceleration model when significant), a
//! detected breakpoint, the assessment window, and the surroundings for comparison.
//!
//! Owns: drawing only. Does not own: fitting (the curves arrive sampled in
//! [`TimeSeriesChart`]). x is the calendar date (labels `YYYY-MM`), y is mm, positive up.

use std::sync::atomic::AtomicU32;

use plotters::prelude::*;

use super::{
    BLUE, FONT, GREY, GRID_BOLD, GRID_LIGHT, INK, ORANGE, Swatch, WHITE, chart_error, date_label,
    day, draw_legend, finite_range, pad_range, tint,
};
use super::{DESC_SIZE, LABEL_SIZE, TITLE_SIZE};
use crate::report::ReportError;
use crate::report::format::fixed;
use crate::report::model::TimeSeriesChart;

const NAME: &str = "time series";
const SIZE: (u32, u32) = (820, 440);
const LEGEND_H: u32 = 52;

/// Draws the time-series chart as an SVG string.
///
/// Degenerate input: an empty aggregate series is an error (the caller shows "not computed");
/// a single epoch is drawn as one point with a ±1 mm axis.
pub fn draw(data: &TimeSeriesChart) -> Result<String, ReportError> {
    // Legend height this chart needed last time (see `with_fitted_legend`).
    static LAST_LEGEND_H: AtomicU32 = AtomicU32::new(60);
    super::with_fitted_legend(SIZE.0, &LAST_LEGEND_H, |h| draw_with(data, h))
}

/// Draws with a legend strip of `legend_h` pixels; returns the SVG and the legend entries
/// (so [`draw`] can size the strip to fit).
fn draw_with(
    data: &TimeSeriesChart,
    legend_h: u32,
) -> Result<(String, Vec<(Swatch, String)>), ReportError> {
    let err = chart_error(NAME);
    if data.aggregate.iter().all(|p| !p.value_mm.is_finite()) {
        return Err(ReportError::Chart {
            chart: NAME,
            reason: "no finite values in the aggregate series".to_string(),
        });
    }
    let curves = [&data.trend, &data.model, &data.surroundings];
    let dates = data
        .aggregate
        .iter()
        .map(|p| day(p.date))
        .chain(
            curves
                .iter()
                .filter_map(|c| c.as_ref())
                .flat_map(|c| c.values.iter().map(|p| day(p.date))),
        )
        .chain(data.window.iter().flat_map(|(a, b)| [day(*a), day(*b)]));
    let (x0, x1) = pad_range(finite_range(dates).unwrap_or((0.0, 1.0)), 0.02, 15.0);
    let values = data
        .aggregate
        .iter()
        .map(|p| p.value_mm)
        .chain(data.spread.iter().flat_map(|b| [b.lower_mm, b.upper_mm]))
        .chain(
            curves
                .iter()
                .filter_map(|c| c.as_ref())
                .flat_map(|c| c.values.iter().map(|p| p.value_mm)),
        );
    let (y0, y1) = pad_range(finite_range(values).unwrap_or((-1.0, 1.0)), 0.08, 1.0);
    let y_decimals = if y1 - y0 < 5.0 { 1 } else { 0 };

    let band_fill = tint(BLUE, 0.22);
    let window_fill = RGBColor(246, 243, 232);
    let mut legend: Vec<(Swatch, String)> = Vec::new();

    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (SIZE.0, SIZE.1 - LEGEND_H + legend_h))
            .into_drawing_area();
        root.fill(&WHITE).map_err(&err)?;
        let (plot_area, legend_area) = root.split_vertically(SIZE.1 - LEGEND_H);
        let mut chart = ChartBuilder::on(&plot_area)
            .caption(&data.title, (FONT, TITLE_SIZE).into_font().color(&INK))
            .margin(12)
            .x_label_area_size(52)
            .y_label_area_size(74)
            .build_cartesian_2d(x0..x1, y0..y1)
            .map_err(&err)?;

        if let Some((a, b)) = data.window {
            chart
                .draw_series(std::iter::once(Rectangle::new(
                    [(day(a), y0), (day(b), y1)],
                    window_fill.filled(),
                )))
                .map_err(&err)?;
            legend.push((
                Swatch::Fill(window_fill, GREY),
                format!(
                    "assessment window {} to {}",
                    a.format("%Y-%m-%d"),
                    b.format("%Y-%m-%d")
                ),
            ));
        }
        if data.spread.len() >= 2 {
            let mut ring: Vec<(f64, f64)> = data
                .spread
                .iter()
                .filter(|b| b.lower_mm.is_finite() && b.upper_mm.is_finite())
                .map(|b| (day(b.date), b.upper_mm))
                .collect();
            ring.extend(
                data.spread
                    .iter()
                    .rev()
                    .filter(|b| b.lower_mm.is_finite() && b.upper_mm.is_finite())
                    .map(|b| (day(b.date), b.lower_mm)),
            );
            chart
                .draw_series(std::iter::once(Polygon::new(ring, band_fill.filled())))
                .map_err(&err)?;
            legend.push((
                Swatch::Fill(band_fill, band_fill),
                data.spread_label.clone(),
            ));
        }

        chart
            .configure_mesh()
            .x_labels(9)
            .y_labels(8)
            .x_label_formatter(&|x| date_label(*x))
            .y_label_formatter(&|y| fixed(*y, y_decimals))
            .x_desc("Date (acquisition epoch)")
            .y_desc("Vertical displacement (mm, + up)")
            .label_style((FONT, LABEL_SIZE).into_font().color(&INK))
            .axis_desc_style((FONT, DESC_SIZE).into_font().color(&INK))
            .max_light_lines(0)
            .light_line_style(GRID_LIGHT)
            .bold_line_style(GRID_BOLD)
            .axis_style(INK)
            .draw()
            .map_err(&err)?;

        // Zero line.
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(x0, 0.0), (x1, 0.0)],
                GREY.stroke_width(1),
            )))
            .map_err(&err)?;

        if let Some(s) = &data.surroundings {
            chart
                .draw_series(LineSeries::new(
                    s.values
                        .iter()
                        .filter(|p| p.value_mm.is_finite())
                        .map(|p| (day(p.date), p.value_mm)),
                    GREY.stroke_width(2),
                ))
                .map_err(&err)?;
            legend.push((Swatch::Line(GREY, 2), s.label.clone()));
        }

        let agg: Vec<(f64, f64)> = data
            .aggregate
            .iter()
            .filter(|p| p.value_mm.is_finite())
            .map(|p| (day(p.date), p.value_mm))
            .collect();
        chart
            .draw_series(LineSeries::new(agg.iter().copied(), BLUE.stroke_width(1)))
            .map_err(&err)?;
        chart
            .draw_series(
                agg.iter()
                    .map(|&(x, y)| Circle::new((x, y), 2, BLUE.filled())),
            )
            .map_err(&err)?;
        legend.push((
            Swatch::Dot(BLUE),
            "structure (aggregate of kept points)".to_string(),
        ));

        if let Some(t) = &data.trend {
            chart
                .draw_series(LineSeries::new(
                    t.values
                        .iter()
                        .filter(|p| p.value_mm.is_finite())
                        .map(|p| (day(p.date), p.value_mm)),
                    ORANGE.stroke_width(2),
                ))
                .map_err(&err)?;
            legend.push((Swatch::Line(ORANGE, 2), t.label.clone()));
        }
        if let Some(m) = &data.model {
            chart
                .draw_series(DashedLineSeries::new(
                    m.values
                        .iter()
                        .filter(|p| p.value_mm.is_finite())
                        .map(|p| (day(p.date), p.value_mm)),
                    6,
                    4,
                    INK.stroke_width(1),
                ))
                .map_err(&err)?;
            legend.push((Swatch::Dashed(INK, 1), m.label.clone()));
        }
        if let Some(b) = data.breakpoint {
            let x = day(b);
            chart
                .draw_series(DashedLineSeries::new(
                    vec![(x, y0), (x, y1)],
                    8,
                    5,
                    ORANGE.stroke_width(2),
                ))
                .map_err(&err)?;
            legend.push((
                Swatch::Dashed(ORANGE, 2),
                format!("breakpoint {}", b.format("%Y-%m-%d")),
            ));
        }
        draw_legend(&legend_area, &legend)?;
        root.present().map_err(&err)?;
    }
    Ok((svg, legend))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::model::{DatedValue, LabelledCurve};
    use chrono::NaiveDate;

    fn d(y: i32, m: u32, day: u32) -> NaiveDate {
        NaiveDate::from_ymd_opt(y, m, day).unwrap()
    }

    fn sample() -> TimeSeriesChart {
        let aggregate: Vec<DatedValue> = (0..40)
            .map(|i| DatedValue {
                date: d(2021, 1, 1) + chrono::Days::new(12 * i),
                value_mm: -0.01 * i as f64,
            })
            .collect();
        TimeSeriesChart {
            title: "Vertical displacement".into(),
            trend: Some(LabelledCurve {
                label: "linear trend -3.0 mm/yr".into(),
                values: vec![aggregate[0], aggregate[39]],
            }),
            aggregate,
            spread: vec![],
            spread_label: "interquartile range".into(),
            model: None,
            breakpoint: Some(d(2021, 8, 1)),
            window: Some((d(2021, 1, 1), d(2022, 4, 1))),
            surroundings: None,
        }
    }

    #[test]
    fn svg_names_the_bundled_font_and_units() {
        let svg = draw(&sample()).unwrap();
        assert!(svg.starts_with("<svg"));
        assert!(svg.contains("DejaVu Sans"));
        assert!(
            !svg.contains("sans-serif"),
            "a generic family would fall back to the serif font"
        );
        assert!(svg.contains("Vertical displacement (mm, + up)"));
        assert!(svg.contains("breakpoint 2021-08-01"));
    }

    #[test]
    fn svg_has_no_translucency() {
        let svg = draw(&sample()).unwrap();
        for attr in ["opacity=\"0.", "fill-opacity=\"0.", "stroke-opacity=\"0."] {
            assert!(!svg.contains(attr), "found {attr}");
        }
    }

    #[test]
    fn empty_series_is_an_error() {
        let mut s = sample();
        s.aggregate.clear();
        assert!(draw(&s).is_err());
    }
}
