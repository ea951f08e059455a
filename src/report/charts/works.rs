//! Planned-works charts: the plan view (structure, tunnels with their ±i inflection band,
//! excavations with their reach, the stage-2 section) and predicted against observed (the
//! settlement history as a drive passes, or bars per quantity).
//!
//! Owns: drawing, and cutting geometry to the view box (plotters does not clip paths to the
//! plot area, and a 1 km alignment would run across the axes). Does not own: any prediction
//! (everything arrives in [`WorksPlanChart`] / [`WorksComparisonChart`]).
//!
//! Sign convention: settlement is **+ down** and plotted downward (larger settlement lower), as
//! in the settlement profiles; the axis title says so. Δ/L bars are + sagging, − hogging.

use plotters::prelude::*;

use super::map::{plan_chart, scale_and_north};
use super::{
    BLUE, DESC_SIZE, FONT, GREY, GRID_BOLD, GRID_LIGHT, INK, LABEL_SIZE, ORANGE, Swatch,
    TITLE_SIZE, WHITE, chart_error, date_label, day, draw_legend, finite_range, pad_range, tint,
};
use crate::report::ReportError;
use crate::report::format::{fixed, with_unit};
use crate::report::model::{
    WorksBarChart, WorksComparisonChart, WorksHistoryChart, WorksPlanChart,
};

const PLAN: &str = "works plan";
const CMP: &str = "works comparison";
const PLAN_SIZE: (u32, u32) = (800, 640);
const CMP_SIZE: (u32, u32) = (820, 420);
const TITLE_H: u32 = 34;
const LEGEND_GUESS: u32 = 60;

/// An axis-aligned box (x0, x1, y0, y1).
type View = (f64, f64, f64, f64);

/// Liang–Barsky: the part of segment a–b inside `v`, if any.
fn clip_segment(a: (f64, f64), b: (f64, f64), v: View) -> Option<((f64, f64), (f64, f64))> {
    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
    let (mut t0, mut t1) = (0.0f64, 1.0f64);
    for (p, q) in [
        (-dx, a.0 - v.0),
        (dx, v.1 - a.0),
        (-dy, a.1 - v.2),
        (dy, v.3 - a.1),
    ] {
        if p == 0.0 {
            if q < 0.0 {
                return None;
            }
        } else {
            let r = q / p;
            if p < 0.0 {
                t0 = t0.max(r);
            } else {
                t1 = t1.min(r);
            }
        }
    }
    (t0 <= t1 && t0.is_finite() && t1.is_finite()).then_some((
        (a.0 + t0 * dx, a.1 + t0 * dy),
        (a.0 + t1 * dx, a.1 + t1 * dy),
    ))
}

/// A polyline cut to `v`: the visible pieces.
fn clip_polyline(pts: &[[f64; 2]], v: View) -> Vec<Vec<(f64, f64)>> {
    let mut out: Vec<Vec<(f64, f64)>> = Vec::new();
    for w in pts.windows(2) {
        let Some((a, b)) = clip_segment((w[0][0], w[0][1]), (w[1][0], w[1][1]), v) else {
            continue;
        };
        match out.last_mut() {
            Some(last) if last.last() == Some(&a) => last.push(b),
            _ => out.push(vec![a, b]),
        }
    }
    out
}

/// Sutherland–Hodgman: a ring cut to `v` (for fills; may run along the border).
fn clip_ring(ring: &[[f64; 2]], v: View) -> Vec<(f64, f64)> {
    let mut poly: Vec<(f64, f64)> = ring
        .iter()
        .filter(|p| p[0].is_finite() && p[1].is_finite())
        .map(|p| (p[0], p[1]))
        .collect();
    if poly.first() == poly.last() {
        poly.pop();
    }
    type Inside = fn((f64, f64), f64) -> bool;
    let edges: [(Inside, f64, bool); 4] = [
        (|p, c| p.0 >= c, v.0, true),
        (|p, c| p.0 <= c, v.1, true),
        (|p, c| p.1 >= c, v.2, false),
        (|p, c| p.1 <= c, v.3, false),
    ];
    for (inside, c, vertical) in edges {
        if poly.is_empty() {
            break;
        }
        let input = std::mem::take(&mut poly);
        let cross = |a: (f64, f64), b: (f64, f64)| {
            if vertical {
                let t = (c - a.0) / (b.0 - a.0);
                (c, a.1 + t * (b.1 - a.1))
            } else {
                let t = (c - a.1) / (b.1 - a.1);
                (a.0 + t * (b.0 - a.0), c)
            }
        };
        for (k, &cur) in input.iter().enumerate() {
            let prev = input[(k + input.len() - 1) % input.len()];
            match (inside(cur, c), inside(prev, c)) {
                (true, true) => poly.push(cur),
                (true, false) => {
                    poly.push(cross(prev, cur));
                    poly.push(cur);
                }
                (false, true) => poly.push(cross(prev, cur)),
                (false, false) => {}
            }
        }
    }
    poly
}

/// Draws the plan view as an SVG string.
///
/// Degenerate input: a footprint without three vertices or a view box that is not finite is
/// an error (the report then shows "not computed").
pub fn draw_plan(data: &WorksPlanChart) -> Result<String, ReportError> {
    let (svg, legend) = draw_plan_with(data, LEGEND_GUESS)?;
    let needed = super::legend_height(&legend, PLAN_SIZE.0);
    if needed == LEGEND_GUESS {
        Ok(svg)
    } else {
        draw_plan_with(data, needed).map(|(svg, _)| svg)
    }
}

fn draw_plan_with(
    data: &WorksPlanChart,
    legend_h: u32,
) -> Result<(String, Vec<(Swatch, String)>), ReportError> {
    let err = chart_error(PLAN);
    let [vx0, vx1, vy0, vy1] = data.view_m;
    if !(vx0.is_finite() && vx1.is_finite() && vy0.is_finite() && vy1.is_finite())
        || vx1 <= vx0
        || vy1 <= vy0
    {
        return Err(ReportError::Chart {
            chart: PLAN,
            reason: "the view box is empty or not finite".into(),
        });
    }
    if data.footprint.iter().all(|r| r.len() < 3) {
        return Err(ReportError::Chart {
            chart: PLAN,
            reason: "footprint has fewer than three vertices".into(),
        });
    }
    let band_fill = tint(BLUE, 0.13);
    let pit_fill = tint(ORANGE, 0.22);
    let mut legend: Vec<(Swatch, String)> = Vec::new();
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (PLAN_SIZE.0, PLAN_SIZE.1 + legend_h))
            .into_drawing_area();
        root.fill(&WHITE).map_err(&err)?;
        let (title_area, rest) = root.split_vertically(TITLE_H);
        let (map_area, legend_area) = rest.split_vertically(PLAN_SIZE.1 - TITLE_H);
        super::draw_centred_title(&title_area, &data.title, PLAN_SIZE.0, 10, PLAN)?;
        let mut chart = plan_chart(
            &map_area,
            ((vx0, vx1), (vy0, vy1)),
            data.origin_m,
            &data.crs_label,
        )?;
        let (xr, yr) = (chart.x_range(), chart.y_range());
        let v: View = (xr.start, xr.end, yr.start, yr.end);
        let draw_lines = |chart: &mut ChartContext<'_, _, _>,
                          pts: &[[f64; 2]],
                          style: ShapeStyle,
                          dashed: bool|
         -> Result<bool, ReportError> {
            let pieces = clip_polyline(pts, v);
            for p in &pieces {
                if dashed {
                    chart
                        .draw_series(DashedLineSeries::new(p.clone(), 6, 4, style))
                        .map_err(&err)?;
                } else {
                    chart
                        .draw_series(std::iter::once(PathElement::new(p.clone(), style)))
                        .map_err(&err)?;
                }
            }
            Ok(!pieces.is_empty())
        };

        // Excavations: reach (dashed), outline (filled).
        let mut any_reach = false;
        let mut any_pit = false;
        for e in &data.excavations {
            for r in &e.influence {
                any_reach |= draw_lines(&mut chart, r, ORANGE.stroke_width(1), true)?;
            }
            let fill = clip_ring(&e.outline, v);
            if fill.len() >= 3 {
                chart
                    .draw_series(std::iter::once(Polygon::new(fill, pit_fill.filled())))
                    .map_err(&err)?;
                any_pit = true;
            }
            any_pit |= draw_lines(&mut chart, &e.outline, ORANGE.stroke_width(2), false)?;
        }
        if any_pit {
            legend.push((Swatch::Fill(pit_fill, ORANGE), "excavation".to_string()));
        }
        if any_reach {
            let reach = data
                .excavations
                .iter()
                .map(|e| e.influence_m)
                .filter(|r| r.is_finite())
                .fold(0.0, f64::max);
            legend.push((
                Swatch::Dashed(ORANGE, 1),
                format!(
                    "reach of the excavation settlement ({})",
                    with_unit(reach, 0, "m")
                ),
            ));
        }

        // Tunnels: band between the inflection lines, the lines, the centreline.
        let mut labels: Vec<(String, (f64, f64))> = Vec::new();
        let mut any_band = false;
        let mut any_axis = false;
        for t in &data.tunnels {
            for b in &t.bands {
                let fill = clip_ring(b, v);
                if fill.len() >= 3 {
                    chart
                        .draw_series(std::iter::once(Polygon::new(fill, band_fill.filled())))
                        .map_err(&err)?;
                    any_band = true;
                }
            }
            for l in &t.inflection_lines {
                draw_lines(&mut chart, l, BLUE.stroke_width(1), true)?;
            }
            let visible = clip_polyline(&t.centreline, v);
            for p in &visible {
                chart
                    .draw_series(std::iter::once(PathElement::new(
                        p.clone(),
                        BLUE.stroke_width(3),
                    )))
                    .map_err(&err)?;
            }
            // Name at 85 % along the longest visible piece (drawn after the footprint).
            if let Some((a, b)) = visible
                .iter()
                .flat_map(|p| p.windows(2).map(|w| (w[0], w[1])))
                .max_by(|x, y| {
                    let l = |s: &((f64, f64), (f64, f64))| (s.1.0 - s.0.0).hypot(s.1.1 - s.0.1);
                    l(x).total_cmp(&l(y))
                })
            {
                any_axis = true;
                let w = v.1 - v.0;
                labels.push((
                    t.name.clone(),
                    (
                        a.0 + 0.85 * (b.0 - a.0) + 0.01 * w,
                        a.1 + 0.85 * (b.1 - a.1),
                    ),
                ));
            }
        }
        if any_axis {
            legend.push((Swatch::Line(BLUE, 3), "tunnel axis".to_string()));
        }
        if any_band {
            let is: Vec<f64> = data
                .tunnels
                .iter()
                .flat_map(|t| t.i_m.iter().copied())
                .filter(|i| i.is_finite())
                .collect();
            let (lo, hi) = finite_range(is.iter().copied()).unwrap_or((0.0, 0.0));
            let i_text = if (hi - lo).abs() < 0.05 {
                with_unit(hi, 1, "m")
            } else {
                format!("{} to {}", fixed(lo, 1), with_unit(hi, 1, "m"))
            };
            legend.push((
                Swatch::Fill(band_fill, BLUE),
                format!("trough between the inflection lines, ±i (i = {i_text})"),
            ));
        }

        // The structure.
        for r in &data.footprint {
            let fill = clip_ring(r, v);
            if fill.len() >= 3 {
                chart
                    .draw_series(std::iter::once(Polygon::new(
                        fill,
                        RGBColor(250, 250, 247).filled(),
                    )))
                    .map_err(&err)?;
            }
            draw_lines(&mut chart, r, INK.stroke_width(2), false)?;
        }
        legend.push((Swatch::Line(INK, 2), "footprint".to_string()));
        for (name, at) in labels {
            chart
                .draw_series(std::iter::once(Text::new(
                    name,
                    at,
                    (FONT, LABEL_SIZE).into_font().color(&BLUE),
                )))
                .map_err(&err)?;
        }

        // Section.
        if let Some(line) = &data.section {
            if draw_lines(&mut chart, line, ORANGE.stroke_width(2), true)? {
                legend.push((Swatch::Dashed(ORANGE, 2), "stage-2 section".to_string()));
            }
        }
        if let Some(line) = &data.section_extent {
            if draw_lines(&mut chart, line, ORANGE.stroke_width(4), false)? {
                legend.push((
                    Swatch::Line(ORANGE, 4),
                    "structure on the section".to_string(),
                ));
            }
        }

        // Markers.
        for t in &data.tunnels {
            if let Some(p) = t.face_at_window_end {
                if p[0] >= v.0 && p[0] <= v.1 && p[1] >= v.2 && p[1] <= v.3 {
                    chart
                        .draw_series(std::iter::once(Circle::new((p[0], p[1]), 6, BLUE.filled())))
                        .map_err(&err)?;
                    legend.push((
                        Swatch::Dot(BLUE),
                        format!("face of {} at the window end", t.name),
                    ));
                }
            }
        }
        if let Some((p, label)) = &data.max_settlement {
            if p[0] >= v.0 && p[0] <= v.1 && p[1] >= v.2 && p[1] <= v.3 {
                let s = 0.012 * (v.1 - v.0);
                chart
                    .draw_series([
                        PathElement::new(
                            vec![(p[0] - s, p[1] - s), (p[0] + s, p[1] + s)],
                            INK.stroke_width(2),
                        ),
                        PathElement::new(
                            vec![(p[0] - s, p[1] + s), (p[0] + s, p[1] - s)],
                            INK.stroke_width(2),
                        ),
                    ])
                    .map_err(&err)?;
                legend.push((Swatch::Line(INK, 2), format!("× {label}")));
            }
        }
        for o in &data.outside_view {
            legend.push((Swatch::Dashed(GREY, 1), format!("outside the view: {o}")));
        }
        scale_and_north(&mut chart)?;
        draw_legend(&legend_area, &legend)?;
        root.present().map_err(&err)?;
    }
    Ok((svg, legend))
}

/// Draws the predicted-against-observed chart as an SVG string.
///
/// Degenerate input: no epoch (history) or no value at all (bars) is an error.
pub fn draw_comparison(data: &WorksComparisonChart) -> Result<String, ReportError> {
    match data {
        WorksComparisonChart::History(h) => {
            let (svg, legend) = draw_history(h, LEGEND_GUESS)?;
            let needed = super::legend_height(&legend, CMP_SIZE.0);
            if needed == LEGEND_GUESS {
                Ok(svg)
            } else {
                draw_history(h, needed).map(|(svg, _)| svg)
            }
        }
        WorksComparisonChart::Bars(b) => draw_bars(b),
    }
}

fn draw_history(
    data: &WorksHistoryChart,
    legend_h: u32,
) -> Result<(String, Vec<(Swatch, String)>), ReportError> {
    let err = chart_error(CMP);
    let (Some(first), Some(last)) = (data.epochs.first(), data.epochs.last()) else {
        return Err(ReportError::Chart {
            chart: CMP,
            reason: "no epoch".into(),
        });
    };
    let (x0, x1) = pad_range((day(first.date), day(last.date)), 0.02, 15.0);
    let values = data
        .epochs
        .iter()
        .flat_map(|e| [Some(e.predicted_mm), e.observed_mm])
        .flatten()
        .chain([0.0]);
    let (s_lo, s_hi) = pad_range(finite_range(values).unwrap_or((0.0, 1.0)), 0.1, 1.0);
    let (y0, y1) = (-s_hi, -s_lo);
    let decimals = if s_hi - s_lo < 5.0 { 1 } else { 0 };
    let mut legend: Vec<(Swatch, String)> = Vec::new();
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (CMP_SIZE.0, CMP_SIZE.1 + legend_h))
            .into_drawing_area();
        root.fill(&WHITE).map_err(&err)?;
        let (plot_area, legend_area) = root.split_vertically(CMP_SIZE.1);
        let mut chart = ChartBuilder::on(&plot_area)
            .caption(
                format!("{} (since {})", data.title, data.reference_date),
                (FONT, TITLE_SIZE).into_font().color(&INK),
            )
            .margin(12)
            .x_label_area_size(52)
            .y_label_area_size(74)
            .build_cartesian_2d(x0..x1, y0..y1)
            .map_err(&err)?;
        chart
            .configure_mesh()
            .x_labels(8)
            .y_labels(7)
            .x_label_formatter(&|x| date_label(*x))
            .y_label_formatter(&|y| fixed(-*y, decimals))
            .x_desc("Date (year-month)")
            .y_desc("Settlement (mm, + down, plotted downward)")
            .label_style((FONT, LABEL_SIZE).into_font().color(&INK))
            .axis_desc_style((FONT, DESC_SIZE).into_font().color(&INK))
            .max_light_lines(0)
            .light_line_style(GRID_LIGHT)
            .bold_line_style(GRID_BOLD)
            .axis_style(INK)
            .draw()
            .map_err(&err)?;
        if let Some(d) = data.face_passes {
            let x = day(d);
            chart
                .draw_series(DashedLineSeries::new(
                    vec![(x, y0), (x, y1)],
                    5,
                    4,
                    GREY.stroke_width(2),
                ))
                .map_err(&err)?;
            legend.push((
                Swatch::Dashed(GREY, 2),
                format!("face passes the structure ({d})"),
            ));
        }
        chart
            .draw_series(LineSeries::new(
                data.epochs.iter().map(|e| (day(e.date), -e.predicted_mm)),
                ORANGE.stroke_width(3),
            ))
            .map_err(&err)?;
        legend.push((
            Swatch::Line(ORANGE, 3),
            format!(
                "predicted (greenfield, mean over the footprint, all works, {})",
                data.tunnel
            ),
        ));
        let observed: Vec<(f64, f64)> = data
            .epochs
            .iter()
            .filter_map(|e| e.observed_mm.map(|o| (day(e.date), -o)))
            .collect();
        chart
            .draw_series(observed.iter().map(|&p| Circle::new(p, 4, BLUE.filled())))
            .map_err(&err)?;
        legend.push((
            Swatch::Dot(BLUE),
            if observed.is_empty() {
                "no observed epoch".to_string()
            } else {
                format!("observed settlement ({} epochs)", observed.len())
            },
        ));
        draw_legend(&legend_area, &legend)?;
        root.present().map_err(&err)?;
    }
    Ok((svg, legend))
}

fn draw_bars(data: &WorksBarChart) -> Result<String, ReportError> {
    let err = chart_error(CMP);
    if data.pairs.is_empty() {
        return Err(ReportError::Chart {
            chart: CMP,
            reason: "no quantity to compare".into(),
        });
    }
    let legend = vec![
        (Swatch::Fill(ORANGE, INK), "predicted".to_string()),
        (Swatch::Fill(BLUE, INK), "observed".to_string()),
    ];
    let legend_h = super::legend_height(&legend, CMP_SIZE.0);
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (CMP_SIZE.0, CMP_SIZE.1 + legend_h))
            .into_drawing_area();
        root.fill(&WHITE).map_err(&err)?;
        let (title_area, rest) = root.split_vertically(TITLE_H);
        let (plots, legend_area) = rest.split_vertically(CMP_SIZE.1 - TITLE_H);
        super::draw_centred_title(&title_area, &data.title, CMP_SIZE.0, 8, CMP)?;
        let panels = plots.split_evenly((1, data.pairs.len()));
        for (pair, area) in data.pairs.iter().zip(panels.iter()) {
            let vals = [pair.predicted, pair.observed];
            let (lo, hi) =
                finite_range(vals.iter().flatten().copied().chain([0.0])).unwrap_or((0.0, 1.0));
            let (lo, hi) = pad_range((lo, hi), 0.12, 0.5);
            let mut c = ChartBuilder::on(area)
                .caption(&pair.quantity, (FONT, DESC_SIZE).into_font().color(&INK))
                .margin(10)
                .x_label_area_size(36)
                .y_label_area_size(64)
                .build_cartesian_2d(0.0..2.0, lo..hi)
                .map_err(&err)?;
            c.configure_mesh()
                .disable_x_mesh()
                .x_labels(0)
                .y_labels(6)
                .y_label_formatter(&|y| fixed(*y, 2))
                .x_desc("predicted | observed")
                .y_desc(pair.unit.clone())
                .label_style((FONT, LABEL_SIZE).into_font().color(&INK))
                .axis_desc_style((FONT, LABEL_SIZE).into_font().color(&INK))
                .light_line_style(GRID_LIGHT)
                .bold_line_style(GRID_BOLD)
                .axis_style(INK)
                .draw()
                .map_err(&err)?;
            for (k, (value, colour)) in [(pair.predicted, ORANGE), (pair.observed, BLUE)]
                .into_iter()
                .enumerate()
            {
                let xa = k as f64 + 0.2;
                match value {
                    Some(v) => {
                        c.draw_series(std::iter::once(Rectangle::new(
                            [(xa, 0.0), (xa + 0.6, v)],
                            colour.filled(),
                        )))
                        .map_err(&err)?;
                    }
                    None => {
                        c.draw_series(std::iter::once(Text::new(
                            if k == 0 {
                                "not computed"
                            } else {
                                "not observed"
                            },
                            (xa, (lo + hi) / 2.0),
                            (FONT, LABEL_SIZE).into_font().color(&GREY),
                        )))
                        .map_err(&err)?;
                    }
                }
            }
        }
        draw_legend(&legend_area, &legend)?;
        root.present().map_err(&err)?;
    }
    Ok(svg)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::model::{WorksBarPair, WorksEpoch, WorksPlanTunnel};
    use chrono::NaiveDate;

    #[test]
    fn segments_are_cut_to_the_view() {
        let v = (0.0, 10.0, 0.0, 10.0);
        // A horizontal line through the box from x = −10 to 20 keeps x ∈ [0, 10].
        let (a, b) = clip_segment((-10.0, 5.0), (20.0, 5.0), v).expect("visible");
        assert_eq!((a, b), ((0.0, 5.0), (10.0, 5.0)));
        assert!(clip_segment((-10.0, 20.0), (20.0, 20.0), v).is_none());
        // A square larger than the box is cut to the box itself.
        let ring = clip_ring(
            &[
                [-5.0, -5.0],
                [15.0, -5.0],
                [15.0, 15.0],
                [-5.0, 15.0],
                [-5.0, -5.0],
            ],
            v,
        );
        let (xs, ys): (Vec<f64>, Vec<f64>) = ring.iter().copied().unzip();
        assert_eq!(finite_range(xs), Some((0.0, 10.0)));
        assert_eq!(finite_range(ys), Some((0.0, 10.0)));
    }

    fn plan() -> WorksPlanChart {
        WorksPlanChart {
            title: "Planned works near T".into(),
            crs_label: "EPSG:32632".into(),
            origin_m: [500_000.0, 4_980_000.0],
            footprint: vec![vec![
                [0.0, -6.0],
                [20.0, -6.0],
                [20.0, 6.0],
                [0.0, 6.0],
                [0.0, -6.0],
            ]],
            tunnels: vec![WorksPlanTunnel {
                name: "Drive A".into(),
                centreline: vec![[-10.0, -500.0], [-10.0, 500.0]],
                bands: vec![vec![
                    [-20.0, -500.0],
                    [-20.0, 500.0],
                    [0.0, 500.0],
                    [0.0, -500.0],
                    [-20.0, -500.0],
                ]],
                inflection_lines: vec![[[-20.0, -500.0], [-20.0, 500.0]]],
                i_m: vec![10.0],
                face_at_window_end: None,
            }],
            excavations: vec![],
            section: Some([[-20.0, 0.0], [30.0, 0.0]]),
            section_extent: Some([[0.0, 0.0], [20.0, 0.0]]),
            max_settlement: Some(([0.0, 0.0], "largest predicted settlement 16.9 mm".into())),
            view_m: [-30.0, 40.0, -30.0, 30.0],
            outside_view: vec![],
        }
    }

    #[test]
    fn plan_has_legend_labels_and_no_transparency() {
        let svg = draw_plan(&plan()).expect("svg");
        assert!(svg.contains("±i (i = 10.0 m)"), "band legend");
        assert!(svg.contains("stage-2 section") && svg.contains("Drive A"));
        assert!(svg.contains("Easting"));
        assert!(!svg.contains("opacity=\"0."));
    }

    #[test]
    fn history_and_bars_draw_with_units() {
        let d = |m: u32| NaiveDate::from_ymd_opt(2023, m, 1).expect("date");
        let h = WorksComparisonChart::History(WorksHistoryChart {
            title: "Settlement of T".into(),
            tunnel: "Drive A".into(),
            reference_date: d(1),
            epochs: vec![
                WorksEpoch {
                    date: d(1),
                    observed_mm: Some(0.0),
                    predicted_mm: 0.0,
                },
                WorksEpoch {
                    date: d(6),
                    observed_mm: None,
                    predicted_mm: 8.0,
                },
            ],
            face_passes: Some(d(6)),
        });
        let svg = draw_comparison(&h).expect("svg");
        assert!(svg.contains("mm, + down, plotted downward"));
        assert!(svg.contains("observed settlement (1 epochs)"));
        let b = WorksComparisonChart::Bars(WorksBarChart {
            title: "Predicted against observed".into(),
            pairs: vec![WorksBarPair {
                quantity: "Largest settlement".into(),
                unit: "Settlement (mm, + down)".into(),
                predicted: Some(10.0),
                observed: None,
            }],
        });
        let svg = draw_comparison(&b).expect("svg");
        assert!(svg.contains("not observed") && svg.contains("Settlement (mm, + down)"));
        assert!(!svg.contains("opacity=\"0."));
    }
}
