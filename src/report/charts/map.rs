//! Plan map of one structure in its local metric frame: footprint, buffer outline, neighbouring
//! footprints (grey), kept points coloured by vertical velocity with a colour bar, rejected
//! points hollow grey, a scale bar, a north arrow, and frame coordinates labelled in the
//! analysis CRS.
//!
//! Owns: drawing, plus the plan-drawing helpers shared with the portfolio map (equal-aspect
//! frame, scale bar, north arrow, hatching). Does not own: coordinate transformation (points
//! arrive in local metres with the frame origin given in the analysis CRS).
//!
//! Choice: the local frame's +y is TRUE north (`coords::LocalFrame` rotates grid vectors by the
//! meridian convergence), so the arrow is labelled "N (true)".
//!
//! Known limitation (open): the axis tick labels are printed as origin + local coordinate, which
//! ignores the frame's rotation and scale factor (an error of about γ·distance, typically below
//! 1 m within 50 m of the origin). Correct analysis-CRS corner coordinates need the frame's
//! north bearing and scale in [`MapChart`] and `LocalFrame::to_analysis`; not done yet.

use std::sync::atomic::AtomicU32;

use plotters::coord::Shift;
use plotters::prelude::*;

use super::LABEL_SIZE;
use super::palette::velocity_color;
use super::{
    FONT, GREY, GREY_FILL, GRID_BOLD, GRID_LIGHT, INK, Swatch, WHITE, chart_error, draw_legend,
    equal_aspect, finite_range, nice_step,
};
use crate::report::ReportError;
use crate::report::format::{fixed, with_unit};
use crate::report::model::MapChart;

const NAME: &str = "map";
const SIZE: (u32, u32) = (800, 680);
const TITLE_H: u32 = 34;
const LEGEND_H: u32 = 56;
const BAR_W: u32 = 130;

type Ring = Vec<(f64, f64)>;

pub(crate) fn ring(points: &[[f64; 2]]) -> Ring {
    let mut r: Ring = points
        .iter()
        .filter(|p| p[0].is_finite() && p[1].is_finite())
        .map(|p| (p[0], p[1]))
        .collect();
    if r.len() >= 2 && r.first() != r.last() {
        let first = r[0];
        r.push(first);
    }
    r
}

/// Data bounds of all rings and points, padded by 8 % and at least ±5 m.
pub(crate) fn bounds<'a>(
    coords: impl Iterator<Item = &'a (f64, f64)> + Clone,
) -> ((f64, f64), (f64, f64)) {
    let xs = finite_range(coords.clone().map(|p| p.0)).unwrap_or((-10.0, 10.0));
    let ys = finite_range(coords.map(|p| p.1)).unwrap_or((-10.0, 10.0));
    let pad = |(lo, hi): (f64, f64)| {
        let span = (hi - lo).max(10.0);
        let mid = (lo + hi) / 2.0;
        (mid - span * 0.58, mid + span * 0.58)
    };
    (pad(xs), pad(ys))
}

/// Builds an equal-aspect cartesian chart over `bounds` in `area`, labelled in the analysis CRS
/// (local coordinate + origin).
pub(crate) fn plan_chart<'a, DB: DrawingBackend>(
    area: &'a DrawingArea<DB, Shift>,
    (xs, ys): ((f64, f64), (f64, f64)),
    origin: [f64; 2],
    crs: &str,
) -> Result<
    ChartContext<
        'a,
        DB,
        Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
    >,
    ReportError,
> {
    let err = chart_error(NAME);
    let build = |x: (f64, f64), y: (f64, f64)| {
        ChartBuilder::on(area)
            .margin(10)
            .x_label_area_size(46)
            .y_label_area_size(112)
            .build_cartesian_2d(x.0..x.1, y.0..y.1)
    };
    // Probe the plot size in pixels (building draws nothing), then fix the ranges.
    let (pw, ph) = build(xs, ys).map_err(&err)?.plotting_area().dim_in_pixel();
    let (xr, yr) = equal_aspect(xs, ys, f64::from(pw.max(1)), f64::from(ph.max(1)));
    let mut chart = build(xr, yr).map_err(&err)?;
    let [oe, on] = origin;
    chart
        .configure_mesh()
        .x_labels(6)
        .y_labels(6)
        .x_label_formatter(&|x| fixed(oe + *x, 0))
        .y_label_formatter(&|y| fixed(on + *y, 0))
        .x_desc(format!("Easting, {crs} (m)"))
        .y_desc(format!("Northing, {crs} (m)"))
        .label_style((FONT, LABEL_SIZE).into_font().color(&INK))
        .axis_desc_style((FONT, LABEL_SIZE).into_font().color(&INK))
        .max_light_lines(0)
        .bold_line_style(GRID_LIGHT)
        .axis_style(INK)
        .draw()
        .map_err(&err)?;
    Ok(chart)
}

type PlanChart<'a, DB> = ChartContext<
    'a,
    DB,
    Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
>;

/// Scale bar (lower left) and north arrow (upper right) in data coordinates.
pub(crate) fn scale_and_north<DB: DrawingBackend>(
    chart: &mut PlanChart<'_, DB>,
) -> Result<(), ReportError> {
    let err = chart_error(NAME);
    let xr = chart.x_range();
    let yr = chart.y_range();
    let (w, h) = (xr.end - xr.start, yr.end - yr.start);
    let len = nice_step(w / 5.0);
    let (sx, sy) = (xr.start + 0.05 * w, yr.start + 0.05 * h);
    let tick = 0.012 * h;
    chart
        .draw_series([
            PathElement::new(vec![(sx, sy), (sx + len, sy)], INK.stroke_width(3)),
            PathElement::new(vec![(sx, sy - tick), (sx, sy + tick)], INK.stroke_width(2)),
            PathElement::new(
                vec![(sx + len, sy - tick), (sx + len, sy + tick)],
                INK.stroke_width(2),
            ),
        ])
        .map_err(&err)?;
    let label = if len >= 1.0 {
        with_unit(len, 0, "m")
    } else {
        with_unit(len, 1, "m")
    };
    chart
        .draw_series(std::iter::once(Text::new(
            label,
            (sx, sy + 0.045 * h),
            (FONT, LABEL_SIZE).into_font().color(&INK),
        )))
        .map_err(&err)?;
    let (nx, ny) = (xr.end - 0.07 * w, yr.end - 0.17 * h);
    let head = 0.035 * h;
    chart
        .draw_series(std::iter::once(PathElement::new(
            vec![(nx, ny), (nx, ny + 0.08 * h)],
            INK.stroke_width(2),
        )))
        .map_err(&err)?;
    chart
        .draw_series(std::iter::once(Polygon::new(
            vec![
                (nx - head * 0.45, ny + 0.08 * h - head * 0.2),
                (nx + head * 0.45, ny + 0.08 * h - head * 0.2),
                (nx, ny + 0.08 * h + head),
            ],
            INK.filled(),
        )))
        .map_err(&err)?;
    chart
        .draw_series(std::iter::once(Text::new(
            "N (true)".to_string(),
            (nx - 0.04 * w, ny + 0.08 * h + head + 0.05 * h),
            (FONT, LABEL_SIZE).into_font().color(&INK),
        )))
        .map_err(&err)?;
    Ok(())
}

/// Segments of 45° hatching clipped to a closed ring, spaced `spacing` apart (data units).
pub(crate) fn hatch_segments(ring: &Ring, spacing: f64) -> Vec<[(f64, f64); 2]> {
    let mut out = Vec::new();
    if ring.len() < 4 || !(spacing.is_finite() && spacing > 0.0) {
        return out;
    }
    // Lines y = x + c; c ranges over the ring's (y − x) extent.
    let Some((c0, c1)) = finite_range(ring.iter().map(|p| p.1 - p.0)) else {
        return out;
    };
    let step = spacing * std::f64::consts::SQRT_2;
    let mut c = c0 + step / 2.0;
    let mut guard = 0;
    while c < c1 && guard < 2000 {
        guard += 1;
        let mut xs: Vec<f64> = ring
            .windows(2)
            .filter_map(|e| {
                let (a, b) = (e[0], e[1]);
                let (fa, fb) = (a.1 - a.0 - c, b.1 - b.0 - c);
                if (fa <= 0.0 && fb > 0.0) || (fb <= 0.0 && fa > 0.0) {
                    let t = fa / (fa - fb);
                    Some(a.0 + t * (b.0 - a.0))
                } else {
                    None
                }
            })
            .collect();
        xs.sort_by(f64::total_cmp);
        for pair in xs.chunks_exact(2) {
            out.push([(pair[0], pair[0] + c), (pair[1], pair[1] + c)]);
        }
        c += step;
    }
    out
}

/// Symmetric colour-scale limit: given, or the largest |v| of the kept points rounded up to a
/// nice step (at least 1 mm/yr).
fn velocity_limit(data: &MapChart) -> f64 {
    if let Some(l) = data
        .velocity_limit_mm_per_yr
        .filter(|l| l.is_finite() && *l > 0.0)
    {
        return l;
    }
    let max = data
        .kept
        .iter()
        .map(|p| p.velocity_mm_per_yr.abs())
        .filter(|v| v.is_finite())
        .fold(0.0, f64::max);
    if max <= 1.0 {
        return 1.0;
    }
    let step = nice_step(max / 4.0);
    (max / step).ceil() * step
}

/// Draws the plan map as an SVG string.
///
/// Degenerate input: a footprint with fewer than three finite vertices is an error; no kept
/// points is allowed (the legend says "no kept points").
pub fn draw(data: &MapChart) -> Result<String, ReportError> {
    // Legend height this chart needed last time (see `with_fitted_legend`).
    static LAST_LEGEND_H: AtomicU32 = AtomicU32::new(60);
    super::with_fitted_legend(SIZE.0, &LAST_LEGEND_H, |h| draw_with(data, h))
}

/// Draws with a legend strip of `legend_h` pixels; returns the SVG and the legend entries
/// (so [`draw`] can size the strip to fit).
fn draw_with(
    data: &MapChart,
    legend_h: u32,
) -> Result<(String, Vec<(Swatch, String)>), ReportError> {
    let err = chart_error(NAME);
    let footprint = ring(&data.footprint);
    if footprint.len() < 4 {
        return Err(ReportError::Chart {
            chart: NAME,
            reason: "footprint has fewer than three vertices".to_string(),
        });
    }
    let buffers: Vec<Ring> = data.buffer.iter().map(|r| ring(r)).collect();
    let neighbours: Vec<Ring> = data.neighbours.iter().map(|r| ring(r)).collect();
    let kept: Vec<(f64, f64, f64)> = data
        .kept
        .iter()
        .filter(|p| p.x_m.is_finite() && p.y_m.is_finite())
        .map(|p| (p.x_m, p.y_m, p.velocity_mm_per_yr))
        .collect();
    let rejected: Vec<(f64, f64)> = data
        .rejected
        .iter()
        .filter(|p| p.x_m.is_finite() && p.y_m.is_finite())
        .map(|p| (p.x_m, p.y_m))
        .collect();
    // Frame on the structure, its buffer and its points; neighbours may be cut at the edge.
    let kept_xy: Vec<(f64, f64)> = kept.iter().map(|p| (p.0, p.1)).collect();
    let frame_pts: Vec<(f64, f64)> = footprint
        .iter()
        .chain(buffers.iter().flatten())
        .chain(kept_xy.iter())
        .chain(rejected.iter())
        .copied()
        .collect();
    let frame = bounds(frame_pts.iter());
    let limit = velocity_limit(data);

    let mut legend: Vec<(Swatch, String)> = Vec::new();
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (SIZE.0, SIZE.1 - LEGEND_H + legend_h))
            .into_drawing_area();
        root.fill(&WHITE).map_err(&err)?;
        let (title_area, rest) = root.split_vertically(TITLE_H);
        let (body, legend_area) = rest.split_vertically(SIZE.1 - TITLE_H - LEGEND_H);
        let (map_area, bar_area) = body.split_horizontally(SIZE.0 - BAR_W);
        super::draw_centred_title(&title_area, &data.title, SIZE.0, 10, NAME)?;

        let mut chart = plan_chart(&map_area, frame, data.origin_m, &data.crs_label)?;
        for n in &neighbours {
            chart
                .draw_series(std::iter::once(Polygon::new(n.clone(), GREY_FILL.filled())))
                .map_err(&err)?;
            chart
                .draw_series(std::iter::once(PathElement::new(
                    n.clone(),
                    GREY.stroke_width(1),
                )))
                .map_err(&err)?;
        }
        if !neighbours.is_empty() {
            legend.push((
                Swatch::Fill(GREY_FILL, GREY),
                "neighbouring footprints".to_string(),
            ));
        }
        for b in &buffers {
            chart
                .draw_series(DashedLineSeries::new(b.clone(), 6, 4, GREY.stroke_width(1)))
                .map_err(&err)?;
        }
        if !buffers.is_empty() {
            legend.push((Swatch::Dashed(GREY, 1), "buffer outline".to_string()));
        }
        chart
            .draw_series(std::iter::once(Polygon::new(
                footprint.clone(),
                RGBColor(250, 250, 247).filled(),
            )))
            .map_err(&err)?;
        chart
            .draw_series(std::iter::once(PathElement::new(
                footprint.clone(),
                INK.stroke_width(2),
            )))
            .map_err(&err)?;
        legend.push((Swatch::Line(INK, 2), "footprint".to_string()));
        chart
            .draw_series(
                rejected
                    .iter()
                    .map(|&(x, y)| Circle::new((x, y), 4, GREY.stroke_width(1))),
            )
            .map_err(&err)?;
        if !rejected.is_empty() {
            legend.push((
                Swatch::Ring(GREY),
                format!("rejected points ({})", rejected.len()),
            ));
        }
        for &(x, y, v) in &kept {
            chart
                .draw_series(std::iter::once(Circle::new(
                    (x, y),
                    5,
                    velocity_color(v, limit).filled(),
                )))
                .map_err(&err)?;
            chart
                .draw_series(std::iter::once(Circle::new((x, y), 5, INK.stroke_width(1))))
                .map_err(&err)?;
        }
        legend.push((
            Swatch::Dot(velocity_color(-limit * 0.6, limit)),
            if kept.is_empty() {
                "no kept points".to_string()
            } else {
                format!("kept points ({}), colour = vertical velocity", kept.len())
            },
        ));
        scale_and_north(&mut chart)?;
        draw_colour_bar(&bar_area, limit)?;
        draw_legend(&legend_area, &legend)?;
        root.present().map_err(&err)?;
    }
    Ok((svg, legend))
}

/// Vertical colour bar from −limit to +limit (mm/yr, + up).
fn draw_colour_bar<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    limit: f64,
) -> Result<(), ReportError> {
    let err = chart_error(NAME);
    let mut bar = ChartBuilder::on(area)
        .margin_top(40)
        .margin_bottom(56)
        .margin_left(6)
        .margin_right(6)
        .right_y_label_area_size(70)
        .build_cartesian_2d(0.0..1.0, -limit..limit)
        .map_err(&err)?;
    let steps = 64;
    let dv = 2.0 * limit / f64::from(steps);
    // Each step reaches half a step into the next one, which is drawn over it: abutting
    // edges would let the page background show through as hairlines in some viewers.
    bar.draw_series((0..steps).map(|i| {
        let v0 = -limit + dv * f64::from(i);
        Rectangle::new(
            [(0.0, v0), (1.0, (v0 + 1.5 * dv).min(limit))],
            velocity_color(v0 + dv / 2.0, limit).filled(),
        )
    }))
    .map_err(&err)?;
    bar.draw_series(std::iter::once(Rectangle::new(
        [(0.0, -limit), (1.0, limit)],
        INK.stroke_width(1),
    )))
    .map_err(&err)?;
    let decimals = if limit < 5.0 { 1 } else { 0 };
    bar.configure_mesh()
        .disable_x_mesh()
        .disable_y_mesh()
        .disable_x_axis()
        .y_labels(9)
        .y_label_formatter(&|v| fixed(*v, decimals))
        .y_desc("Vertical velocity (mm/yr, + up)")
        .label_style((FONT, LABEL_SIZE).into_font().color(&INK))
        .axis_desc_style((FONT, LABEL_SIZE).into_font().color(&INK))
        .axis_style(INK)
        .light_line_style(GRID_BOLD)
        .draw()
        .map_err(&err)?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::model::MapPoint;

    fn rect(x0: f64, y0: f64, x1: f64, y1: f64) -> Vec<[f64; 2]> {
        vec![[x0, y0], [x1, y0], [x1, y1], [x0, y1]]
    }

    fn sample() -> MapChart {
        MapChart {
            title: "Plan".into(),
            crs_label: "EPSG:32631".into(),
            origin_m: [500_000.0, 5_800_000.0],
            footprint: rect(-15.0, -6.0, 15.0, 6.0),
            buffer: vec![rect(-25.0, -16.0, 25.0, 16.0)],
            neighbours: vec![rect(30.0, -6.0, 50.0, 6.0)],
            kept: vec![
                MapPoint {
                    x_m: -10.0,
                    y_m: 0.0,
                    velocity_mm_per_yr: -4.0,
                },
                MapPoint {
                    x_m: 10.0,
                    y_m: 2.0,
                    velocity_mm_per_yr: 1.0,
                },
            ],
            rejected: vec![MapPoint {
                x_m: 0.0,
                y_m: -12.0,
                velocity_mm_per_yr: f64::NAN,
            }],
            velocity_limit_mm_per_yr: None,
        }
    }

    #[test]
    fn labels_frame_in_the_analysis_crs() {
        let svg = draw(&sample()).unwrap();
        assert!(svg.contains("Easting, EPSG:32631 (m)"));
        assert!(svg.contains("Vertical velocity (mm/yr, + up)"));
        assert!(svg.contains("N (true)"));
        assert!(!svg.contains("N (grid)"));
        assert!(svg.contains("rejected points (1)"));
        // An easting near the origin is printed as a CRS coordinate, not a local one.
        assert!(
            svg.contains("\n500000\n") && svg.contains("\n5800000\n"),
            "no CRS tick: {svg}"
        );
        assert!(!svg.contains("opacity=\"0."));
    }

    #[test]
    fn degenerate_footprint_is_an_error() {
        let mut m = sample();
        m.footprint.truncate(2);
        assert!(draw(&m).is_err());
    }

    #[test]
    fn velocity_limit_rounds_up() {
        let m = sample();
        assert_eq!(velocity_limit(&m), 4.0);
        let mut m2 = sample();
        m2.kept[0].velocity_mm_per_yr = -7.3;
        assert_eq!(velocity_limit(&m2), 8.0);
    }

    #[test]
    fn hatching_stays_inside_a_square() {
        let sq = ring(&rect(0.0, 0.0, 10.0, 10.0));
        let segs = hatch_segments(&sq, 1.0);
        assert!(segs.len() > 5);
        for [a, b] in segs {
            for p in [a, b] {
                assert!(
                    p.0 >= -1e-9 && p.0 <= 10.0 + 1e-9 && p.1 >= -1e-9 && p.1 <= 10.0 + 1e-9,
                    "{p:?}"
                );
            }
        }
    }
}
