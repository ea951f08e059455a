//! Damage interaction chart: deflection ratio Δ/L against horizontal strain ε_h, with the
//! category zones redrawn for the structure's own L/H and bending mode and for the criteria set
//! actually used (its limiting-strain thresholds, E/G, ν and neutral-axis positions; the method
//! of Burland 1995), and the structure plotted with its uncertainty as error bars. The legend
//! names the set and its thresholds, so a user set is never shown with Burland's boundaries.
//!
//! Owns: drawing. The boundary curves come from
//! [`crate::damage::burland_1995::interaction_curves`] (the inverted limiting-tensile-strain
//! relations, damage-relations.md §3.4); this file only paints the zones between them.
//! Does not own: classification (the category in the report is computed from ε_max directly).
//!
//! Both axes are shown in percent, as on Burland's chart (Δ/L in %, ε_h in %, + tension);
//! values are stored absolute and scaled only here.

use std::sync::atomic::AtomicU32;

use plotters::prelude::*;

use super::palette::category_color;
use super::{DESC_SIZE, LABEL_SIZE, TITLE_SIZE};
use super::{
    FONT, GRID_BOLD, GRID_LIGHT, INK, Swatch, WHITE, chart_error, draw_legend, finite_range, tint,
};
use crate::damage::burland_1995::interaction_curves_with_policy;
use crate::damage::{Mode, StrainThresholds};
use crate::report::ReportError;
use crate::report::format::fixed;
use crate::report::model::{BendingMode, CategoryView, InteractionChart};

const NAME: &str = "interaction";
const SIZE: (u32, u32) = (800, 620);
const LEGEND_H: u32 = 96;

/// Draws the interaction chart as an SVG string.
///
/// Degenerate input: invalid L/H, E/G, ν or thresholds (rejected by the damage relations) is an
/// error; a non-finite structure value is drawn without the structure marker and the legend
/// says so.
pub fn draw(data: &InteractionChart) -> Result<String, ReportError> {
    // Legend height this chart needed last time (see `with_fitted_legend`).
    static LAST_LEGEND_H: AtomicU32 = AtomicU32::new(60);
    super::with_fitted_legend(SIZE.0, &LAST_LEGEND_H, |h| draw_with(data, h))
}

/// Draws with a legend strip of `legend_h` pixels; returns the SVG and the legend entries
/// (so [`draw`] can size the strip to fit).
fn draw_with(
    data: &InteractionChart,
    legend_h: u32,
) -> Result<(String, Vec<(Swatch, String)>), ReportError> {
    let err = chart_error(NAME);
    let mode = match data.mode {
        BendingMode::Hogging => Mode::Hogging,
        BendingMode::Sagging => Mode::Sagging,
    };
    let chart_err = |e: crate::damage::DamageError| ReportError::Chart {
        chart: NAME,
        reason: e.to_string(),
    };
    let thresholds = StrainThresholds::new(data.thresholds).map_err(chart_err)?;
    let curves = interaction_curves_with_policy(
        data.l_over_h,
        data.e_over_g,
        data.poisson,
        mode,
        &thresholds,
        &data.neutral_axis,
    )
    .map_err(chart_err)?;
    // Percent scaling for display.
    let pct = |v: f64| v * 100.0;
    let top_curve = curves
        .last()
        .and_then(|c| c.points.first())
        .map(|p| p.1)
        .unwrap_or(3.0e-3);
    let last_limit = curves.last().map(|c| c.limiting_strain).unwrap_or(3.0e-3);
    let dr = data.deflection_ratio;
    let eh = data.horizontal_strain;
    let point_ok = dr.value.is_finite() && eh.value.is_finite();
    let (_, x_data_hi) = finite_range([eh.value, eh.upper]).unwrap_or((0.0, 0.0));
    let (_, y_data_hi) = finite_range([dr.value, dr.upper]).unwrap_or((0.0, 0.0));
    let x1 = pct((last_limit * 1.15).max(x_data_hi * 1.15));
    let y1 = pct((top_curve * 1.12).max(y_data_hi * 1.15));
    let (x0, y0) = (0.0, 0.0);

    let mut legend: Vec<(Swatch, String)> = Vec::new();
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (SIZE.0, SIZE.1 - LEGEND_H + legend_h))
            .into_drawing_area();
        root.fill(&WHITE).map_err(&err)?;
        let (plot_area, legend_area) = root.split_vertically(SIZE.1 - LEGEND_H);
        let mut chart = ChartBuilder::on(&plot_area)
            .caption(&data.title, (FONT, TITLE_SIZE).into_font().color(&INK))
            .margin(14)
            .x_label_area_size(54)
            .y_label_area_size(80)
            .build_cartesian_2d(x0..x1, y0..y1)
            .map_err(&err)?;

        // Painter's order: the whole plot in the highest category, then each lower zone on top.
        let fills: Vec<RGBColor> = (0..=4u8).map(|k| tint(category_color(k), 0.6)).collect();
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(x0, y0), (x1, y1)],
                fills[4].filled(),
            )))
            .map_err(&err)?;
        for (k, curve) in curves.iter().enumerate().rev() {
            let mut ring: Vec<(f64, f64)> = curve
                .points
                .iter()
                .map(|&(e, d)| (pct(e), pct(d)))
                .collect();
            ring.push((pct(curve.limiting_strain), 0.0));
            ring.push((0.0, 0.0));
            chart
                .draw_series(std::iter::once(Polygon::new(ring, fills[k].filled())))
                .map_err(&err)?;
        }

        chart
            .configure_mesh()
            .x_labels(8)
            .y_labels(8)
            .x_label_formatter(&|x| fixed(*x, 2))
            .y_label_formatter(&|y| fixed(*y, 2))
            .x_desc("Horizontal strain ε_h (%, + tension)")
            .y_desc("Deflection ratio |Δ/L| (%)")
            .label_style((FONT, LABEL_SIZE).into_font().color(&INK))
            .axis_desc_style((FONT, DESC_SIZE).into_font().color(&INK))
            .max_light_lines(0)
            .light_line_style(GRID_LIGHT)
            .bold_line_style(GRID_BOLD)
            .axis_style(INK)
            .draw()
            .map_err(&err)?;

        for curve in &curves {
            chart
                .draw_series(LineSeries::new(
                    curve.points.iter().map(|&(e, d)| (pct(e), pct(d))),
                    INK.stroke_width(1),
                ))
                .map_err(&err)?;
        }
        // Zone labels near the vertical axis, between successive curves at ε_h = 0.
        let starts: Vec<f64> = curves
            .iter()
            .map(|c| c.points.first().map(|p| p.1).unwrap_or(0.0))
            .collect();
        let label_font = (FONT, DESC_SIZE).into_font().color(&INK);
        for k in 0..=4usize {
            let lo = if k == 0 { 0.0 } else { starts[k - 1] };
            let hi = if k < starts.len() {
                starts[k]
            } else {
                top_curve * 1.12
            };
            let y = pct((lo + hi) / 2.0);
            if let Some(c) = CategoryView::from_index(k as u8) {
                chart
                    .draw_series(std::iter::once(Text::new(
                        c.code.clone(),
                        (x1 * 0.015, y),
                        label_font.clone(),
                    )))
                    .map_err(&err)?;
                legend.push((
                    Swatch::Fill(fills[k], INK),
                    format!("{} {}", c.code, c.name),
                ));
            }
        }

        if point_ok {
            let clamp_x = |v: f64| pct(v).clamp(x0, x1);
            let clamp_y = |v: f64| pct(v).clamp(y0, y1);
            let (px, py) = (clamp_x(eh.value), clamp_y(dr.value));
            let style = INK.stroke_width(2);
            chart
                .draw_series([
                    PathElement::new(
                        vec![(clamp_x(eh.lower), py), (clamp_x(eh.upper), py)],
                        style,
                    ),
                    PathElement::new(
                        vec![(px, clamp_y(dr.lower)), (px, clamp_y(dr.upper))],
                        style,
                    ),
                ])
                .map_err(&err)?;
            chart
                .draw_series(std::iter::once(Circle::new(
                    (px, py),
                    5,
                    super::BLUE.filled(),
                )))
                .map_err(&err)?;
            chart
                .draw_series(std::iter::once(Circle::new(
                    (px, py),
                    5,
                    INK.stroke_width(1),
                )))
                .map_err(&err)?;
            // The values go into the legend: near the origin a label beside the marker would
            // collide with the zone labels.
            legend.push((
                Swatch::Dot(super::BLUE),
                format!(
                    "this structure: Δ/L {} %, ε_h {} % (bars = interval)",
                    fixed(pct(dr.value), 4),
                    fixed(pct(eh.value), 4)
                ),
            ));
        } else {
            legend.push((
                Swatch::Ring(INK),
                "structure value not computed".to_string(),
            ));
        }
        let limits: Vec<String> = data.thresholds.iter().map(|t| fixed(pct(*t), 3)).collect();
        legend.push((
            Swatch::Line(INK, 1),
            format!(
                "boundaries of criteria set `{}` (ε_lim {} %) for L/H = {}, E/G = {}, ν = {}, {}",
                data.criteria_name,
                limits.join(" / "),
                fixed(data.l_over_h, 2),
                fixed(data.e_over_g, 1),
                fixed(data.poisson, 2),
                data.mode.label()
            ),
        ));
        if !data.note.is_empty() {
            legend.push((Swatch::Fill(WHITE, WHITE), data.note.clone()));
        }
        draw_legend(&legend_area, &legend)?;
        root.present().map_err(&err)?;
    }
    Ok((svg, legend))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::model::Interval;

    fn sample() -> InteractionChart {
        InteractionChart {
            title: "Damage interaction".into(),
            l_over_h: 1.0,
            e_over_g: 2.6,
            poisson: 0.3,
            mode: BendingMode::Hogging,
            criteria_name: "masonry".into(),
            thresholds: [5.0e-4, 7.5e-4, 1.5e-3, 3.0e-3],
            neutral_axis: crate::damage::burland_wroth::NeutralAxisPolicy::BURLAND_WROTH,
            deflection_ratio: Interval {
                value: 8.43e-5,
                lower: 5.0e-5,
                upper: 1.2e-4,
            },
            horizontal_strain: Interval {
                value: 4.33e-5,
                lower: 0.0,
                upper: 9.0e-5,
            },
            note: "ε_h clamped at 0 (compression not credited)".into(),
        }
    }

    #[test]
    fn draws_all_zones_and_axis_units() {
        let svg = draw(&sample()).unwrap();
        assert!(svg.contains("Horizontal strain ε_h (%, + tension)"));
        assert!(svg.contains("Deflection ratio |Δ/L| (%)"));
        assert!(svg.contains("4–5 Severe to very severe"));
        assert!(svg.contains("L/H = 1.00, E/G = 2.6"));
        assert!(svg.contains("criteria set `masonry` (ε_lim 0.050 / 0.075 / 0.150 / 0.300 %)"));
        assert!(!svg.contains("opacity=\"0."));
    }

    /// The 0|1 boundary meets the ε_h axis at the set's first threshold: with a user set of
    /// 0.1 % the zone-0 polygon must close at ε_h = 0.1 % (plotted in %), not at Burland's
    /// 0.05 %. Hand check: at Δ/L = 0 the curves end at ε_h = ε_lim (damage-relations.md §3.4).
    #[test]
    fn draws_the_boundaries_of_the_set_used() {
        let mut s = sample();
        s.criteria_name = "stiff-frame".into();
        s.thresholds = [1.0e-3, 2.0e-3, 4.0e-3, 8.0e-3];
        let own = draw(&s).unwrap();
        let burland = draw(&sample()).unwrap();
        assert_ne!(own, burland);
        assert!(own.contains("criteria set `stiff-frame` (ε_lim 0.100 / 0.200 / 0.400 / 0.800 %)"));
        // The x axis reaches past the last threshold (0.8 % × 1.15 = 0.92 %), so it carries a
        // 0.80 % tick; Burland's axis ends at 0.3 % × 1.15 = 0.345 %.
        assert!(
            own.contains("\n0.80\n"),
            "x axis does not extend to the set's last threshold"
        );
        assert!(!burland.contains("\n0.80\n"));
    }

    #[test]
    fn invalid_thresholds_are_an_error() {
        let mut s = sample();
        s.thresholds = [1.0e-3, 5.0e-4, 4.0e-3, 8.0e-3];
        assert!(draw(&s).is_err());
    }

    #[test]
    fn invalid_geometry_is_an_error() {
        let mut s = sample();
        s.l_over_h = -1.0;
        assert!(draw(&s).is_err());
    }

    #[test]
    fn missing_structure_value_is_stated() {
        let mut s = sample();
        s.deflection_ratio.value = f64::NAN;
        let svg = draw(&s).unwrap();
        assert!(svg.contains("structure value not computed"));
    }
}
