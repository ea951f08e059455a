//! Settlement profile along one principal axis: measured point settlements, the fitted profile,
//! the chord between the ends, the relative deflection Δ, and hogging/sagging zones.
//!
//! Owns: drawing. Does not own: the profile fit, zone split or Δ (they arrive in
//! [`ProfileChart`]).
//!
//! Sign convention (damage-relations.md §0.2): settlement is **+ down**, and it is plotted
//! downward (larger settlement lower on the page), as a settlement trough looks. The axis
//! title says so. Internally the chart plots −settlement and labels the ticks with the
//! settlement value.

use std::sync::atomic::AtomicU32;

use plotters::prelude::*;

use super::{
    BLUE, FONT, GREY, GRID_BOLD, GRID_LIGHT, INK, ORANGE, Swatch, WHITE, chart_error, draw_legend,
    finite_range, pad_range, tint,
};
use super::{DESC_SIZE, LABEL_SIZE, TITLE_SIZE};
use crate::report::ReportError;
use crate::report::format::fixed;
use crate::report::model::{BendingMode, ProfileChart};

const NAME: &str = "profile";
const SIZE: (u32, u32) = (820, 390);
const LEGEND_H: u32 = 52;

/// Opaque tint of a bending zone.
fn zone_fill(mode: BendingMode) -> RGBColor {
    match mode {
        BendingMode::Hogging => tint(ORANGE, 0.16),
        BendingMode::Sagging => tint(BLUE, 0.14),
    }
}

/// Draws the profile chart as an SVG string.
///
/// Degenerate input: no finite point settlement is an error; an empty or reversed extent is
/// replaced by the points' own chainage range.
pub fn draw(data: &ProfileChart) -> Result<String, ReportError> {
    // Legend height this chart needed last time (see `with_fitted_legend`).
    static LAST_LEGEND_H: AtomicU32 = AtomicU32::new(60);
    super::with_fitted_legend(SIZE.0, &LAST_LEGEND_H, |h| draw_with(data, h))
}

/// Draws with a legend strip of `legend_h` pixels; returns the SVG and the legend entries
/// (so [`draw`] can size the strip to fit).
fn draw_with(
    data: &ProfileChart,
    legend_h: u32,
) -> Result<(String, Vec<(Swatch, String)>), ReportError> {
    let err = chart_error(NAME);
    let finite_pts: Vec<(f64, f64)> = data
        .points
        .iter()
        .filter(|p| p.chainage_m.is_finite() && p.settlement_mm.is_finite())
        .map(|p| (p.chainage_m, p.settlement_mm))
        .collect();
    if finite_pts.is_empty() {
        return Err(ReportError::Chart {
            chart: NAME,
            reason: "no point with a finite settlement".to_string(),
        });
    }
    let [e0, e1] = data.extent_m;
    let (xa, xb) = if e0.is_finite() && e1.is_finite() && e1 > e0 {
        (e0, e1)
    } else {
        finite_range(finite_pts.iter().map(|p| p.0)).unwrap_or((0.0, 1.0))
    };
    let (x0, x1) = pad_range(
        finite_range([xa, xb].into_iter().chain(finite_pts.iter().map(|p| p.0)))
            .unwrap_or((xa, xb)),
        0.04,
        1.0,
    );
    let settlements = finite_pts
        .iter()
        .map(|p| p.1)
        .chain(data.fitted.iter().map(|p| p.settlement_mm))
        .chain(
            data.chord
                .iter()
                .flat_map(|c| c.iter().map(|p| p.settlement_mm)),
        );
    let (s_lo, s_hi) = pad_range(finite_range(settlements).unwrap_or((0.0, 1.0)), 0.12, 1.0);
    // Plotted value is −settlement, so the larger settlement is lower.
    let (y0, y1) = (-s_hi, -s_lo);
    let decimals = if s_hi - s_lo < 5.0 { 1 } else { 0 };

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

        let mut seen = [false, false];
        for z in &data.zones {
            if !(z.start_m.is_finite() && z.end_m.is_finite()) {
                continue;
            }
            chart
                .draw_series(std::iter::once(Rectangle::new(
                    [(z.start_m.max(x0), y0), (z.end_m.min(x1), y1)],
                    zone_fill(z.mode).filled(),
                )))
                .map_err(&err)?;
            let i = usize::from(z.mode == BendingMode::Sagging);
            if !seen[i] {
                seen[i] = true;
                legend.push((
                    Swatch::Fill(zone_fill(z.mode), zone_fill(z.mode)),
                    format!("{} zone", z.mode.label()),
                ));
            }
        }

        chart
            .configure_mesh()
            .x_labels(10)
            .y_labels(7)
            .x_label_formatter(&|x| fixed(*x, 0))
            .y_label_formatter(&|y| fixed(-*y, decimals))
            .x_desc("Chainage along the axis (m)")
            .y_desc("Settlement (mm, + down, plotted downward)")
            .label_style((FONT, LABEL_SIZE).into_font().color(&INK))
            .axis_desc_style((FONT, DESC_SIZE).into_font().color(&INK))
            .max_light_lines(0)
            .light_line_style(GRID_LIGHT)
            .bold_line_style(GRID_BOLD)
            .axis_style(INK)
            .draw()
            .map_err(&err)?;

        // Footprint ends.
        for x in [xa, xb] {
            chart
                .draw_series(DashedLineSeries::new(
                    vec![(x, y0), (x, y1)],
                    4,
                    4,
                    GREY.stroke_width(1),
                ))
                .map_err(&err)?;
        }
        legend.push((Swatch::Dashed(GREY, 1), "footprint ends".to_string()));

        if let Some([a, b]) = &data.chord {
            chart
                .draw_series(LineSeries::new(
                    vec![
                        (a.chainage_m, -a.settlement_mm),
                        (b.chainage_m, -b.settlement_mm),
                    ],
                    GREY.stroke_width(2),
                ))
                .map_err(&err)?;
            legend.push((Swatch::Line(GREY, 2), "chord".to_string()));
        }
        if !data.fitted.is_empty() {
            chart
                .draw_series(LineSeries::new(
                    data.fitted
                        .iter()
                        .filter(|p| p.chainage_m.is_finite() && p.settlement_mm.is_finite())
                        .map(|p| (p.chainage_m, -p.settlement_mm)),
                    BLUE.stroke_width(2),
                ))
                .map_err(&err)?;
            legend.push((Swatch::Line(BLUE, 2), "fitted profile".to_string()));
        }
        chart
            .draw_series(
                finite_pts
                    .iter()
                    .map(|&(x, s)| Circle::new((x, -s), 4, INK.filled())),
            )
            .map_err(&err)?;
        legend.push((Swatch::Dot(INK), "points (settlement)".to_string()));

        if let Some(d) = &data.delta {
            if d.chainage_m.is_finite() && d.chord_mm.is_finite() && d.profile_mm.is_finite() {
                chart
                    .draw_series(std::iter::once(PathElement::new(
                        vec![(d.chainage_m, -d.chord_mm), (d.chainage_m, -d.profile_mm)],
                        ORANGE.stroke_width(3),
                    )))
                    .map_err(&err)?;
                // The value goes into the legend only: a label beside the bar sat on the
                // points and the fitted curve (the bar is drawn where Δ is largest, i.e. in
                // the middle of the data).
                legend.push((
                    Swatch::Line(ORANGE, 3),
                    format!("relative deflection ({})", d.label),
                ));
            }
        }
        draw_legend(&legend_area, &legend)?;
        root.present().map_err(&err)?;
    }
    Ok((svg, legend))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::model::{DeltaMark, ProfilePoint, ZoneSpan};

    fn sample() -> ProfileChart {
        // insar-methods.md §7.11: quadratic S = 6.060 + 0.1578 s + 0.01124 s², L = 30 m (hogging)
        let s = |x: f64| 6.060 + 0.1578 * x + 0.01124 * x * x;
        ProfileChart {
            title: "Profile along axis A".into(),
            points: [-13.998, -8.0026, -1.9973, 3.9944, 9.9988, 13.003]
                .iter()
                .map(|&x| ProfilePoint {
                    chainage_m: x,
                    settlement_mm: s(x) + 0.3,
                })
                .collect(),
            fitted: (0..=30)
                .map(|i| {
                    let x = -15.0 + i as f64;
                    ProfilePoint {
                        chainage_m: x,
                        settlement_mm: s(x),
                    }
                })
                .collect(),
            chord: Some([
                ProfilePoint {
                    chainage_m: -15.0,
                    settlement_mm: s(-15.0),
                },
                ProfilePoint {
                    chainage_m: 15.0,
                    settlement_mm: s(15.0),
                },
            ]),
            delta: Some(DeltaMark {
                chainage_m: 0.0,
                chord_mm: (s(-15.0) + s(15.0)) / 2.0,
                profile_mm: s(0.0),
                label: "Δ = 2.5 mm".into(),
            }),
            zones: vec![ZoneSpan {
                start_m: -15.0,
                end_m: 15.0,
                mode: BendingMode::Hogging,
            }],
            extent_m: [-15.0, 15.0],
        }
    }

    #[test]
    fn states_the_downward_convention() {
        let svg = draw(&sample()).unwrap();
        assert!(svg.contains("Settlement (mm, + down, plotted downward)"));
        assert!(svg.contains("hogging zone"));
        assert!(svg.contains("Δ = 2.5 mm"));
        // Only in the legend, never as a label over the data.
        assert_eq!(svg.matches("Δ = 2.5 mm").count(), 1);
        assert!(!svg.contains("opacity=\"0."));
    }

    #[test]
    fn no_points_is_an_error() {
        let mut p = sample();
        p.points.clear();
        assert!(draw(&p).is_err());
    }
}
