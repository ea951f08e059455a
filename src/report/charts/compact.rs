//! Fewer, larger SVG elements for the same picture: runs of consecutive simple shapes painted
//! alike become one `<path>`.
//!
//! Owns: [`merge_runs`]. plotters writes every point marker, grid line, tick and dash as its
//! own element, one per line; each element costs the SVG parser a node and the PDF a
//! save/transform/colour/restore sequence of its own (docs/performance.md, "Report
//! rendering"). Consecutive `<line>`, `<polyline>`, `<polygon>`, `<rect>` and `<circle>`
//! elements with the same paint are written as the subpaths of one path instead, in the same
//! order, so nothing that was drawn over something else changes places.
//!
//! When merging leaves the picture unchanged (SVG 1.1 §8–§11): opaque paint only
//! (`opacity="1"`, no other opacity or dash attribute), and either stroke only or fill only.
//! Stroked subpaths are stroked one by one, exactly as the separate elements were. Filled
//! subpaths are filled together under the nonzero rule, which is their union only while they
//! all wind the same way: rectangles and circles are written clockwise (as seen on screen), and
//! filled polygons, whose winding is the data's, are never merged. Anything else is copied
//! unchanged.

use super::svg_element::{Element, Tag};

/// The SVG with runs of alike simple shapes merged into one `<path>` each.
pub fn merge_runs(svg: &str) -> String {
    let mut out = String::with_capacity(svg.len());
    let mut run = Run::default();
    for line in svg.split_inclusive('\n') {
        match shape(line) {
            Some((paint, shape)) => {
                if run.paint.as_ref() != Some(&paint) {
                    run.flush(&mut out);
                    run.paint = Some(paint);
                }
                if !run.data.is_empty() {
                    run.data.push(' ');
                }
                shape.write_path(&mut run.data);
                run.lines.push(line);
            }
            None => {
                run.flush(&mut out);
                out.push_str(line);
            }
        }
    }
    run.flush(&mut out);
    out
}

/// Consecutive alike elements: their paint, their joined path data and their own lines.
#[derive(Default)]
struct Run<'a> {
    paint: Option<Paint<'a>>,
    data: String,
    lines: Vec<&'a str>,
}

impl Run<'_> {
    /// Writes the run (one `<path>` for two or more elements, the element itself for one) and
    /// empties it.
    fn flush(&mut self, out: &mut String) {
        match (&self.paint, self.lines.len()) {
            (Some(p), n) if n > 1 => {
                for part in [
                    "<path d=\"",
                    &self.data,
                    "\" fill=\"",
                    p.fill,
                    "\" stroke=\"",
                    p.stroke,
                    "\" stroke-width=\"",
                    p.stroke_width,
                    "\" opacity=\"1\"/>\n",
                ] {
                    out.push_str(part);
                }
            }
            _ => self.lines.iter().for_each(|l| out.push_str(l)),
        }
        self.paint = None;
        self.data.clear();
        self.lines.clear();
    }
}

/// How a shape is painted; equal paint is the condition for merging.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct Paint<'a> {
    fill: &'a str,
    stroke: &'a str,
    stroke_width: &'a str,
}

/// The geometry of one mergeable element, numbers as written in the SVG.
enum Shape<'a> {
    /// `<line>`: two points.
    Line([&'a str; 4]),
    /// `<polyline>` (open) or `<polygon>` (closed): `x,y` pairs.
    Points(&'a str, bool),
    /// `<rect>`: x, y, width, height.
    Rect([f64; 4]),
    /// `<circle>`: cx, cy, r.
    Circle([f64; 3]),
}

impl Shape<'_> {
    /// Appends the shape as path data.
    fn write_path(&self, d: &mut String) {
        use std::fmt::Write;
        // Writing into a String cannot fail.
        let _ = match self {
            Self::Line([x1, y1, x2, y2]) => write!(d, "M{x1} {y1}L{x2} {y2}"),
            Self::Points(points, close) => {
                for (i, pair) in points.split(' ').filter(|p| !p.is_empty()).enumerate() {
                    d.push(if i == 0 { 'M' } else { 'L' });
                    if let Some((x, y)) = pair.split_once(',') {
                        d.push_str(x);
                        d.push(' ');
                        d.push_str(y);
                    }
                }
                if *close {
                    d.push('Z');
                }
                Ok(())
            }
            // Clockwise on screen, as SVG draws a rect.
            Self::Rect([x, y, w, h]) => write!(d, "M{x} {y}H{}V{}H{x}Z", x + w, y + h),
            // Two half arcs, clockwise on screen (sweep flag 1 with y down), like the rect.
            Self::Circle([cx, cy, r]) => write!(
                d,
                "M{} {cy}A{r} {r} 0 1 1 {} {cy}A{r} {r} 0 1 1 {} {cy}Z",
                cx + r,
                cx - r,
                cx + r
            ),
        };
    }
}

/// The paint and geometry of one mergeable element on one line; `None` otherwise.
fn shape(line: &str) -> Option<(Paint<'_>, Shape<'_>)> {
    let e = Element::parse(line)?;
    if e.get("opacity") != Some("1") {
        return None;
    }
    // `<line>` has no fill; the other shapes must name theirs (the SVG default is black).
    let fill = if e.tag == Tag::Line {
        "none"
    } else {
        e.get("fill")?
    };
    let stroke = e.get("stroke").unwrap_or("none");
    let stroked = stroke != "none";
    let filled = fill != "none";
    if stroked == filled || (filled && e.tag == Tag::Polygon) {
        return None;
    }
    let paint = Paint {
        fill,
        stroke,
        stroke_width: if stroked {
            e.get("stroke-width").unwrap_or("1")
        } else {
            "0"
        },
    };
    let shape = match e.tag {
        Tag::Line => Shape::Line([
            e.number("x1")?,
            e.number("y1")?,
            e.number("x2")?,
            e.number("y2")?,
        ]),
        Tag::Rect => {
            let r = [
                e.value("x")?,
                e.value("y")?,
                e.value("width")?,
                e.value("height")?,
            ];
            if r[2] < 0.0 || r[3] < 0.0 {
                return None;
            }
            Shape::Rect(r)
        }
        Tag::Circle => {
            let c = [e.value("cx")?, e.value("cy")?, e.value("r")?];
            if c[2] <= 0.0 {
                return None;
            }
            Shape::Circle(c)
        }
        Tag::Polyline | Tag::Polygon => {
            let points = e.get("points")?;
            // `x,y` pairs of plain numbers separated by spaces.
            let valid = points
                .bytes()
                .all(|b| b.is_ascii_digit() || matches!(b, b'.' | b'-' | b',' | b' '))
                && points.split(' ').filter(|p| !p.is_empty()).all(|pair| {
                    pair.split_once(',')
                        .is_some_and(|(x, y)| !x.is_empty() && !y.is_empty() && !y.contains(','))
                });
            if !valid || points.trim().is_empty() {
                return None;
            }
            Shape::Points(points, e.tag == Tag::Polygon)
        }
    };
    Some((paint, shape))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn alike_neighbours_become_one_path_in_place() {
        let svg = concat!(
            "<svg width=\"10\" height=\"10\">\n",
            "<rect x=\"0\" y=\"0\" width=\"10\" height=\"10\" opacity=\"1\" fill=\"#FFFFFF\" stroke=\"none\"/>\n",
            "<line opacity=\"1\" stroke=\"#D8D8D8\" stroke-width=\"1\" x1=\"1\" y1=\"0\" x2=\"1\" y2=\"9\"/>\n",
            "<line opacity=\"1\" stroke=\"#D8D8D8\" stroke-width=\"1\" x1=\"2\" y1=\"0\" x2=\"2\" y2=\"9\"/>\n",
            "<polyline fill=\"none\" opacity=\"1\" stroke=\"#D8D8D8\" stroke-width=\"1\" points=\"0,5 9,5 \"/>\n",
            "<circle cx=\"4\" cy=\"4\" r=\"2\" opacity=\"1\" fill=\"#1F5696\" stroke=\"none\" stroke-width=\"1\"/>\n",
            "<circle cx=\"6\" cy=\"4\" r=\"2\" opacity=\"1\" fill=\"#1F5696\" stroke=\"none\" stroke-width=\"1\"/>\n",
            "</svg>\n",
        );
        let out = merge_runs(svg);
        let lines: Vec<&str> = out.lines().collect();
        assert_eq!(lines.len(), 5, "{out}");
        // The single background rect stays as written; the grid run and the dot run merge.
        assert!(lines[1].starts_with("<rect"));
        assert_eq!(
            lines[2],
            "<path d=\"M1 0L1 9 M2 0L2 9 M0 5L9 5\" fill=\"none\" stroke=\"#D8D8D8\" stroke-width=\"1\" opacity=\"1\"/>"
        );
        assert_eq!(
            lines[3],
            "<path d=\"M6 4A2 2 0 1 1 2 4A2 2 0 1 1 6 4Z M8 4A2 2 0 1 1 4 4A2 2 0 1 1 8 4Z\" fill=\"#1F5696\" stroke=\"none\" stroke-width=\"0\" opacity=\"1\"/>"
        );
        assert_eq!(lines[4], "</svg>");
    }

    #[test]
    fn paint_changes_and_unsafe_shapes_break_runs() {
        let svg = concat!(
            // Fill then outline alternate: no two neighbours alike.
            "<circle cx=\"4\" cy=\"4\" r=\"2\" opacity=\"1\" fill=\"#AA0000\" stroke=\"none\"/>\n",
            "<circle cx=\"4\" cy=\"4\" r=\"2\" opacity=\"1\" fill=\"none\" stroke=\"#212121\" stroke-width=\"1\"/>\n",
            "<circle cx=\"6\" cy=\"4\" r=\"2\" opacity=\"1\" fill=\"#00AA00\" stroke=\"none\"/>\n",
            // Filled polygons keep their own winding: never merged.
            "<polygon opacity=\"1\" fill=\"#E2E2E2\" points=\"0,0 5,0 5,5 \"/>\n",
            "<polygon opacity=\"1\" fill=\"#E2E2E2\" points=\"5,5 0,5 0,0 \"/>\n",
            // Translucent and both-painted shapes are copied as they are.
            "<rect x=\"0\" y=\"0\" width=\"1\" height=\"1\" opacity=\"0.5\" fill=\"#000000\" stroke=\"none\"/>\n",
            "<rect x=\"0\" y=\"0\" width=\"1\" height=\"1\" opacity=\"0.5\" fill=\"#000000\" stroke=\"none\"/>\n",
            "<rect x=\"0\" y=\"0\" width=\"1\" height=\"1\" opacity=\"1\" fill=\"#000000\" stroke=\"#000000\"/>\n",
            "<rect x=\"0\" y=\"0\" width=\"1\" height=\"1\" opacity=\"1\" fill=\"#000000\" stroke=\"#000000\"/>\n",
        );
        assert_eq!(merge_runs(svg), svg);
    }
}
