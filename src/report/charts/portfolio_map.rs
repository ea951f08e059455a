//! Portfolio overview map: every structure's footprint filled by its damage category; a
//! structure that is not assessable is drawn white with grey hatching and a grey outline, so it
//! can never be mistaken for category 0 (pale yellow, solid).
//!
//! Owns: drawing. Does not own: the categories (they arrive in [`PortfolioMapChart`]).

use std::sync::atomic::AtomicU32;

use plotters::prelude::*;

use super::SMALL_SIZE;
use super::map::{bounds, hatch_segments, plan_chart, ring, scale_and_north};
use super::palette::category_color;
use super::{FONT, GREY, INK, Swatch, WHITE, chart_error, draw_legend};
use crate::report::ReportError;
use crate::report::model::{CategoryView, PortfolioMapChart};

const NAME: &str = "portfolio map";
const SIZE: (u32, u32) = (820, 700);
const TITLE_H: u32 = 34;
const LEGEND_H: u32 = 60;
/// Structure ids are written on the map only up to this many structures (else clutter).
const MAX_LABELS: usize = 40;

/// A footprint ring, its category and its id.
type Item<'a> = (Vec<(f64, f64)>, Option<u8>, &'a str);

/// Draws the portfolio map as an SVG string.
///
/// Degenerate input: no structure with a drawable footprint is an error.
pub fn draw(data: &PortfolioMapChart) -> Result<String, ReportError> {
    // Legend height this chart needed last time (see `with_fitted_legend`).
    static LAST_LEGEND_H: AtomicU32 = AtomicU32::new(60);
    super::with_fitted_legend(SIZE.0, &LAST_LEGEND_H, |h| draw_with(data, h))
}

/// Draws with a legend strip of `legend_h` pixels; returns the SVG and the legend entries
/// (so [`draw`] can size the strip to fit).
fn draw_with(
    data: &PortfolioMapChart,
    legend_h: u32,
) -> Result<(String, Vec<(Swatch, String)>), ReportError> {
    let err = chart_error(NAME);
    let items: Vec<Item<'_>> = data
        .structures
        .iter()
        .map(|s| (ring(&s.footprint), s.category_index, s.id.as_str()))
        .filter(|(r, _, _)| r.len() >= 4)
        .collect();
    if items.is_empty() {
        return Err(ReportError::Chart {
            chart: NAME,
            reason: "no structure has a footprint with three or more vertices".to_string(),
        });
    }
    let frame = bounds(items.iter().flat_map(|(r, _, _)| r.iter()));
    let mut legend: Vec<(Swatch, String)>;
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (SIZE.0, SIZE.1 - LEGEND_H + legend_h))
            .into_drawing_area();
        root.fill(&WHITE).map_err(&err)?;
        let (title_area, rest) = root.split_vertically(TITLE_H);
        let (map_area, legend_area) = rest.split_vertically(SIZE.1 - TITLE_H - LEGEND_H);
        super::draw_centred_title(&title_area, &data.title, SIZE.0, 10, NAME)?;
        let mut chart = plan_chart(&map_area, frame, data.origin_m, &data.crs_label)?;
        let xr = chart.x_range();
        let global_spacing = (xr.end - xr.start) / 150.0;
        for (r, cat, _) in &items {
            match cat {
                Some(c) => {
                    chart
                        .draw_series(std::iter::once(Polygon::new(
                            r.clone(),
                            category_color(*c).filled(),
                        )))
                        .map_err(&err)?;
                    chart
                        .draw_series(std::iter::once(PathElement::new(
                            r.clone(),
                            INK.stroke_width(1),
                        )))
                        .map_err(&err)?;
                }
                None => {
                    chart
                        .draw_series(std::iter::once(Polygon::new(r.clone(), WHITE.filled())))
                        .map_err(&err)?;
                    let (xs, ys) = bounds(r.iter());
                    let local = ((xs.1 - xs.0).min(ys.1 - ys.0)) / 10.0;
                    let spacing = local.max(global_spacing);
                    chart
                        .draw_series(
                            hatch_segments(r, spacing)
                                .into_iter()
                                .map(|[a, b]| PathElement::new(vec![a, b], GREY.stroke_width(1))),
                        )
                        .map_err(&err)?;
                    chart
                        .draw_series(std::iter::once(PathElement::new(
                            r.clone(),
                            GREY.stroke_width(2),
                        )))
                        .map_err(&err)?;
                }
            }
        }
        if items.len() <= MAX_LABELS {
            for (r, _, id) in &items {
                let n = (r.len() - 1) as f64;
                let (cx, cy) = r[..r.len() - 1]
                    .iter()
                    .fold((0.0, 0.0), |(a, b), p| (a + p.0 / n, b + p.1 / n));
                chart
                    .draw_series(std::iter::once(Text::new(
                        id.to_string(),
                        (cx, cy),
                        (FONT, SMALL_SIZE).into_font().color(&INK),
                    )))
                    .map_err(&err)?;
            }
        }
        scale_and_north(&mut chart)?;
        legend = CategoryView::all()
            .into_iter()
            .map(|c| {
                (
                    Swatch::Fill(category_color(c.index), INK),
                    format!("{} {}", c.code, c.name),
                )
            })
            .collect();
        legend.push((
            Swatch::Hatch,
            "not assessable (insufficient data)".to_string(),
        ));
        draw_legend(&legend_area, &legend)?;
        root.present().map_err(&err)?;
    }
    Ok((svg, legend))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::model::PortfolioMapItem;

    fn rect(x0: f64, y0: f64, w: f64, h: f64) -> Vec<[f64; 2]> {
        vec![[x0, y0], [x0 + w, y0], [x0 + w, y0 + h], [x0, y0 + h]]
    }

    #[test]
    fn insufficient_is_drawn_distinct_from_category_zero() {
        let data = PortfolioMapChart {
            title: "Portfolio".into(),
            crs_label: "EPSG:32631".into(),
            origin_m: [0.0, 0.0],
            structures: vec![
                PortfolioMapItem {
                    id: "A".into(),
                    footprint: rect(0.0, 0.0, 20.0, 10.0),
                    category_index: Some(0),
                },
                PortfolioMapItem {
                    id: "B".into(),
                    footprint: rect(40.0, 0.0, 20.0, 10.0),
                    category_index: None,
                },
            ],
        };
        let svg = draw(&data).unwrap();
        let zero = super::super::palette::hex(category_color(0));
        assert!(
            svg.to_lowercase().contains(&zero),
            "category 0 fill missing"
        );
        assert!(svg.contains("not assessable (insufficient data)"));
        assert!(!svg.contains("opacity=\"0."));
    }

    #[test]
    fn nothing_drawable_is_an_error() {
        let data = PortfolioMapChart {
            title: "P".into(),
            crs_label: "x".into(),
            origin_m: [0.0, 0.0],
            structures: vec![],
        };
        assert!(draw(&data).is_err());
    }
}
