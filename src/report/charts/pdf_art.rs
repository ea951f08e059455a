//! A chart's drawing (its SVG without text) written as a one-page PDF that typst places as an
//! image, instead of an SVG that typst has to parse and convert.
//!
//! Owns: [`to_pdf`]. The drawing plotters writes uses a handful of opaque shapes (`<rect>`,
//! `<line>`, `<polyline>`, `<polygon>`, `<circle>`) with `#RRGGBB` paint, one element per line.
//! typst reads an SVG image through its SVG parser (an element tree, a path and a bounding
//! box per element) and then converts every path into PDF drawing operators, once per report;
//! that was most of a chart's rendering cost (docs/performance.md, "Report rendering"). The
//! same operators are written here directly, and the PDF writer copies the page into the report
//! as a form XObject.
//!
//! Geometry and paint follow SVG 1.1 §8–§11 and map one to one onto PDF 1.7 §8.5: the page is
//! the SVG's `width` × `height` (one SVG pixel = one PDF unit, y flipped by the page matrix),
//! shapes are painted in document order, fill before stroke (`B`), nonzero fill rule (`f`),
//! SVG's default miter limit 4, butt caps and miter joins (the defaults of both). Circles are
//! four cubic Béziers (control distance 0.5523 r, the usual quarter-circle approximation, as
//! the SVG renderer also draws them). Colours are DeviceRGB.
//!
//! Only the exact form plotters writes is accepted: any other element, attribute, unit,
//! colour form or opacity gives `None`, and the caller keeps the SVG (slower, never wrong).

use std::fmt::Write;

use super::svg_element::{self, Tag, is_number};

/// The drawing `art` (an SVG as [`super::labels::split`] leaves it) as a one-page PDF of
/// `width` × `height` units; `None` when the SVG uses anything outside the accepted form.
pub fn to_pdf(art: &str, width: f64, height: f64) -> Option<Vec<u8>> {
    if !(width > 0.0 && height > 0.0 && width.is_finite() && height.is_finite()) {
        return None;
    }
    let mut lines = art.lines().map(str::trim).filter(|l| !l.is_empty());
    check_root(lines.next()?, width, height)?;
    let mut w = Writer::default();
    w.out.reserve(art.len());
    w.out.push_str("1 0 0 -1 0 ");
    push_num(&mut w.out, height);
    w.out.push_str(" cm 4 M\n");
    let mut closed = false;
    for line in lines {
        if closed {
            return None;
        }
        if line == "</svg>" {
            closed = true;
            continue;
        }
        w.element(parse_element(line)?)?;
    }
    w.flush_disc();
    closed.then(|| document(&w.out, width, height))
}

/// The root element: `<svg width="W" height="H" [viewBox="0 0 W H"] [xmlns="…"]>`.
fn check_root(line: &str, width: f64, height: f64) -> Option<()> {
    let attrs = svg_element::attributes(line.strip_prefix("<svg ")?.strip_suffix('>')?)?;
    for (key, value) in attrs {
        let ok = match key {
            "width" => value.parse::<f64>().ok() == Some(width),
            "height" => value.parse::<f64>().ok() == Some(height),
            "viewBox" => {
                let v: Vec<f64> = value
                    .split_whitespace()
                    .map(str::parse)
                    .collect::<Result<_, _>>()
                    .ok()?;
                v == [0.0, 0.0, width, height]
            }
            "xmlns" => value == "http://www.w3.org/2000/svg",
            _ => false,
        };
        if !ok {
            return None;
        }
    }
    Some(())
}

/// The geometry of one element, numbers as written in the SVG where they are copied.
enum Geometry<'a> {
    /// `<line>`: x1, y1, x2, y2.
    Line([&'a str; 4]),
    /// `<polyline>` (open) or `<polygon>` (closed): `x,y` pairs.
    Points(&'a str, bool),
    /// `<rect>`: x, y, width, height.
    Rect([&'a str; 4]),
    /// `<circle>`: cx, cy, r.
    Circle([f64; 3]),
}

/// One shape element: geometry and paint.
struct Element<'a> {
    geometry: Geometry<'a>,
    fill: Option<[u8; 3]>,
    stroke: Option<[u8; 3]>,
    width: &'a str,
}

/// One self-closing shape element as plotters writes it ([`super::svg_element`]), opaque
/// (`opacity` absent or 1), with `#RRGGBB` or `none` paint; `None` for anything else.
fn parse_element(line: &str) -> Option<Element<'_>> {
    let e = svg_element::Element::parse(line)?;
    if e.get("opacity").is_some_and(|o| o != "1") {
        return None;
    }
    // SVG defaults: black fill (none for a line, which has no inside), no stroke, width 1.
    let fill = match (e.tag, e.get("fill")) {
        (Tag::Line, _) => None,
        (_, None) => Some([0, 0, 0]),
        (_, Some(f)) => paint(f)?,
    };
    let stroke = paint(e.get("stroke").unwrap_or("none"))?;
    let width = e.get("stroke-width").unwrap_or("1");
    if !is_number(width) || width.starts_with('-') {
        return None;
    }
    let four = |k: [&str; 4]| -> Option<[&str; 4]> {
        Some([
            e.number(k[0])?,
            e.number(k[1])?,
            e.number(k[2])?,
            e.number(k[3])?,
        ])
    };
    let geometry = match e.tag {
        Tag::Line => Geometry::Line(four(["x1", "y1", "x2", "y2"])?),
        Tag::Rect => {
            let r = four(["x", "y", "width", "height"])?;
            if r[2].starts_with('-') || r[3].starts_with('-') {
                return None;
            }
            Geometry::Rect(r)
        }
        Tag::Circle => {
            let c = [e.value("cx")?, e.value("cy")?, e.value("r")?];
            if c[2] <= 0.0 {
                return None;
            }
            Geometry::Circle(c)
        }
        Tag::Polyline | Tag::Polygon => Geometry::Points(e.get("points")?, e.tag == Tag::Polygon),
    };
    Some(Element {
        geometry,
        fill,
        stroke,
        width,
    })
}

/// The content stream and the graphics state last set in it (set again only on change).
#[derive(Default)]
struct Writer {
    out: String,
    fill: Option<[u8; 3]>,
    stroke: Option<[u8; 3]>,
    width: String,
    round_caps: bool,
    /// A filled circle not yet written: its outline may follow as the next element.
    disc: Option<([f64; 3], [u8; 3])>,
}

impl Writer {
    /// Appends one element. Circles are written as dots: a zero-length line with round caps
    /// is a disc of the line width's diameter (PDF 1.7 §8.5.3.2), far shorter than four
    /// curves. A filled circle followed by its own outline (how plotters draws a marker with
    /// a border) becomes a disc in the outline colour, `r + w/2`, under a disc in the fill
    /// colour, `r − w/2`: the same picture, since both are opaque.
    fn element(&mut self, e: Element<'_>) -> Option<()> {
        let (circle, fill, stroke) = match e.geometry {
            Geometry::Circle(c) => (c, e.fill, e.stroke),
            _ => {
                self.flush_disc();
                return self.shape(&e);
            }
        };
        let w: f64 = e.width.parse().ok()?;
        match (fill, stroke) {
            (Some(f), None) => {
                self.flush_disc();
                self.disc = Some((circle, f));
            }
            (fill, Some(s)) if w < 2.0 * circle[2] => {
                let inner = match (fill, self.disc.take()) {
                    (Some(f), _) => Some(f),
                    (None, Some((c, f))) if c == circle => Some(f),
                    (None, other) => {
                        self.disc = other;
                        self.flush_disc();
                        None
                    }
                };
                match inner {
                    Some(f) => {
                        let [cx, cy, r] = circle;
                        self.dot(cx, cy, 2.0 * r + w, s);
                        self.dot(cx, cy, 2.0 * r - w, f);
                    }
                    None => {
                        self.shape(&e)?;
                    }
                }
            }
            _ => {
                self.flush_disc();
                self.shape(&e)?;
            }
        }
        Some(())
    }

    /// Writes the pending filled circle, if any.
    fn flush_disc(&mut self) {
        if let Some(([cx, cy, r], f)) = self.disc.take() {
            self.dot(cx, cy, 2.0 * r, f);
        }
    }

    /// A disc of `diameter` centred on (`cx`, `cy`).
    fn dot(&mut self, cx: f64, cy: f64, diameter: f64, colour: [u8; 3]) {
        self.set_stroke(colour);
        let mut width = String::new();
        push_num(&mut width, diameter);
        self.set_width(&width);
        if !self.round_caps {
            self.out.push_str("1 J ");
            self.round_caps = true;
        }
        for op in ["m ", "l S\n"] {
            push_num(&mut self.out, cx);
            self.out.push(' ');
            push_num(&mut self.out, cy);
            self.out.push(' ');
            self.out.push_str(op);
        }
    }

    /// Any element as a path: paint state, path construction, painting operator.
    fn shape(&mut self, e: &Element<'_>) -> Option<()> {
        let op = match (e.fill.is_some(), e.stroke.is_some()) {
            (true, true) => "B",
            (true, false) => "f",
            (false, true) => "S",
            // Nothing painted.
            (false, false) => return Some(()),
        };
        // Paint operators go before the path: PDF forbids them between construction and
        // painting.
        if let Some(c) = e.fill.filter(|c| self.fill != Some(*c)) {
            self.out.push_str(&colour(c));
            self.out.push_str(" rg ");
            self.fill = Some(c);
        }
        if let Some(c) = e.stroke {
            self.set_stroke(c);
            self.set_width(e.width);
            if self.round_caps {
                self.out.push_str("0 J ");
                self.round_caps = false;
            }
        }
        match e.geometry {
            Geometry::Line([x1, y1, x2, y2]) => {
                for part in [x1, " ", y1, " m ", x2, " ", y2, " l "] {
                    self.out.push_str(part);
                }
            }
            Geometry::Rect([x, y, w, h]) => {
                for part in [x, " ", y, " ", w, " ", h, " re "] {
                    self.out.push_str(part);
                }
            }
            Geometry::Circle([cx, cy, r]) => write_circle(&mut self.out, cx, cy, r),
            Geometry::Points(points, close) => write_points(&mut self.out, points, close)?,
        }
        self.out.push_str(op);
        self.out.push('\n');
        Some(())
    }

    fn set_stroke(&mut self, c: [u8; 3]) {
        if self.stroke != Some(c) {
            self.out.push_str(&colour(c));
            self.out.push_str(" RG ");
            self.stroke = Some(c);
        }
    }

    fn set_width(&mut self, width: &str) {
        if self.width != width {
            self.out.push_str(width);
            self.out.push_str(" w ");
            self.width = width.to_string();
        }
    }
}

/// `x,y` pairs separated by spaces as one open (polyline) or closed (polygon) subpath.
fn write_points(out: &mut String, points: &str, close: bool) -> Option<()> {
    let mut n = 0;
    for pair in points.split(' ').filter(|p| !p.is_empty()) {
        let (x, y) = pair.split_once(',')?;
        if !is_number(x) || !is_number(y) {
            return None;
        }
        let op = if n == 0 { " m " } else { " l " };
        for part in [x, " ", y, op] {
            out.push_str(part);
        }
        n += 1;
    }
    if n == 0 {
        return None;
    }
    if close {
        out.push_str("h ");
    }
    Some(())
}

/// A full circle as four cubic Béziers, starting at its rightmost point.
fn write_circle(out: &mut String, cx: f64, cy: f64, r: f64) {
    const KAPPA: f64 = 0.552_284_75;
    let k = KAPPA * r;
    let points = [
        (cx + r, cy, "m"),
        (cx + r, cy + k, ""),
        (cx + k, cy + r, ""),
        (cx, cy + r, "c"),
        (cx - k, cy + r, ""),
        (cx - r, cy + k, ""),
        (cx - r, cy, "c"),
        (cx - r, cy - k, ""),
        (cx - k, cy - r, ""),
        (cx, cy - r, "c"),
        (cx + k, cy - r, ""),
        (cx + r, cy - k, ""),
        (cx + r, cy, "c"),
    ];
    for (x, y, op) in points {
        push_num(out, x);
        out.push(' ');
        push_num(out, y);
        out.push(' ');
        if !op.is_empty() {
            out.push_str(op);
            out.push(' ');
        }
    }
    out.push_str("h ");
}

/// `#RRGGBB` as a colour, `none` as no paint; `None` (outer) for any other form.
fn paint(value: &str) -> Option<Option<[u8; 3]>> {
    if value == "none" {
        return Some(None);
    }
    let hex = value.strip_prefix('#').filter(|h| h.len() == 6)?;
    let byte = |i: usize| u8::from_str_radix(hex.get(i..i + 2)?, 16).ok();
    Some(Some([byte(0)?, byte(2)?, byte(4)?]))
}

/// An sRGB colour as three PDF components in 0–1 (four decimals: below 1/255 of a step).
fn colour(c: [u8; 3]) -> String {
    let mut s = String::with_capacity(24);
    for (i, v) in c.into_iter().enumerate() {
        if i > 0 {
            s.push(' ');
        }
        push_num(&mut s, f64::from(v) / 255.0);
    }
    s
}

/// Appends a number for the content stream: rounded to four decimals, no trailing zeros, no
/// `-0`. Integer arithmetic: formatting floats with a precision is slow, and a report writes
/// thousands of these.
fn push_num(out: &mut String, v: f64) {
    let scaled = (v * 10_000.0).round();
    if !scaled.is_finite() || scaled.abs() >= 1e15 {
        let _ = write!(out, "{v}");
        return;
    }
    // In range of i64 (checked above); the cast drops nothing but the sign of -0.
    let mut n = scaled as i64;
    if n < 0 {
        out.push('-');
        n = -n;
    }
    let _ = write!(out, "{}", n / 10_000);
    let mut frac = n % 10_000;
    if frac != 0 {
        let mut digits = 4;
        while frac % 10 == 0 {
            frac /= 10;
            digits -= 1;
        }
        let _ = write!(out, ".{frac:0digits$}");
    }
}

/// [`push_num`] into a new string.
fn num(v: f64) -> String {
    let mut s = String::new();
    push_num(&mut s, v);
    s
}

/// A complete one-page PDF around `content` (uncompressed: the report's PDF writer copies the
/// page and compresses it there).
fn document(content: &str, width: f64, height: f64) -> Vec<u8> {
    let objects = [
        "<</Type/Catalog/Pages 2 0 R>>".to_string(),
        "<</Type/Pages/Kids[3 0 R]/Count 1>>".to_string(),
        format!(
            "<</Type/Page/Parent 2 0 R/MediaBox[0 0 {} {}]/Resources<<>>/Contents 4 0 R>>",
            num(width),
            num(height)
        ),
        format!(
            "<</Length {}>>\nstream\n{content}\nendstream",
            content.len() + 1
        ),
    ];
    let mut pdf = String::with_capacity(content.len() + 512);
    pdf.push_str("%PDF-1.7\n");
    let mut offsets = Vec::with_capacity(objects.len());
    for (i, object) in objects.iter().enumerate() {
        offsets.push(pdf.len());
        let _ = writeln!(pdf, "{} 0 obj\n{object}\nendobj", i + 1);
    }
    let xref = pdf.len();
    let _ = writeln!(pdf, "xref\n0 {}\n0000000000 65535 f ", objects.len() + 1);
    for offset in offsets {
        let _ = writeln!(pdf, "{offset:010} 00000 n ");
    }
    let _ = writeln!(
        pdf,
        "trailer\n<</Size {}/Root 1 0 R>>\nstartxref\n{xref}\n%%EOF",
        objects.len() + 1
    );
    pdf.into_bytes()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn art(body: &str) -> String {
        format!(
            "<svg width=\"20\" height=\"10\" viewBox=\"0 0 20 10\" xmlns=\"http://www.w3.org/2000/svg\">\n{body}</svg>\n"
        )
    }

    fn content(pdf: &[u8]) -> String {
        let text = String::from_utf8(pdf.to_vec()).unwrap();
        let start = text.find("stream\n").unwrap() + "stream\n".len();
        let end = text.find("\nendstream").unwrap();
        text[start..end].to_string()
    }

    #[test]
    fn shapes_become_operators_in_order_with_paint_set_on_change() {
        let svg = art(concat!(
            "<rect x=\"0\" y=\"0\" width=\"20\" height=\"10\" opacity=\"1\" fill=\"#FFFFFF\" stroke=\"none\"/>\n",
            "<line opacity=\"1\" stroke=\"#FF0000\" stroke-width=\"2\" x1=\"1\" y1=\"2\" x2=\"3\" y2=\"4\"/>\n",
            "<polyline fill=\"none\" opacity=\"1\" stroke=\"#FF0000\" stroke-width=\"2\" points=\"0,5 9,5 \"/>\n",
            "<polygon opacity=\"1\" fill=\"#000000\" points=\"0,0 5,0 5,5 \"/>\n",
        ));
        let pdf = to_pdf(&svg, 20.0, 10.0).unwrap();
        assert_eq!(
            content(&pdf),
            concat!(
                "1 0 0 -1 0 10 cm 4 M\n",
                "1 1 1 rg 0 0 20 10 re f\n",
                "1 0 0 RG 2 w 1 2 m 3 4 l S\n",
                "0 5 m 9 5 l S\n",
                "0 0 0 rg 0 0 m 5 0 l 5 5 l h f\n",
            )
        );
    }

    #[test]
    fn markers_become_dots_and_a_lone_outline_four_curves() {
        let svg = art(concat!(
            // A marker with a border, as plotters draws it: fill, then outline.
            "<circle cx=\"5\" cy=\"5\" r=\"2\" opacity=\"1\" fill=\"#1F5696\" stroke=\"none\" stroke-width=\"1\"/>\n",
            "<circle cx=\"5\" cy=\"5\" r=\"2\" opacity=\"1\" fill=\"none\" stroke=\"#212121\" stroke-width=\"1\"/>\n",
            // A plain dot.
            "<circle cx=\"9\" cy=\"5\" r=\"2\" opacity=\"1\" fill=\"#1F5696\" stroke=\"none\" stroke-width=\"1\"/>\n",
            // An outline alone (its inside stays see-through).
            "<circle cx=\"15\" cy=\"5\" r=\"2\" opacity=\"1\" fill=\"none\" stroke=\"#212121\" stroke-width=\"1\"/>\n",
            "<line opacity=\"1\" stroke=\"#212121\" stroke-width=\"1\" x1=\"0\" y1=\"0\" x2=\"1\" y2=\"0\"/>\n",
        ));
        let c = content(&to_pdf(&svg, 20.0, 10.0).unwrap());
        let lines: Vec<&str> = c.lines().collect();
        assert_eq!(
            lines[1..4],
            [
                // Border colour, r + w/2 = 2.5; fill colour, r - w/2 = 1.5.
                "0.1294 0.1294 0.1294 RG 5 w 1 J 5 5 m 5 5 l S",
                "0.1216 0.3373 0.5882 RG 3 w 5 5 m 5 5 l S",
                "4 w 9 5 m 9 5 l S",
            ]
        );
        assert!(
            lines[4]
                .starts_with("0.1294 0.1294 0.1294 RG 1 w 0 J 17 5 m 17 6.1046 16.1046 7 15 7 c"),
            "{c}"
        );
        assert_eq!(lines[4].matches(" c ").count(), 4, "{c}");
        assert!(lines[4].ends_with("h S"), "{c}");
        // Caps back to butt for other strokes; unchanged state is not set again.
        assert_eq!(lines[5], "0 0 m 1 0 l S");
    }

    #[test]
    fn numbers_have_four_decimals_at_most() {
        let cases = [
            (0.0, "0"),
            (-0.0, "0"),
            (-0.00001, "0"),
            (12.0, "12"),
            (-3.5, "-3.5"),
            (0.12941177, "0.1294"),
            (-0.5, "-0.5"),
            (6.10456, "6.1046"),
            (1.00004, "1"),
            (2.05, "2.05"),
        ];
        for (v, want) in cases {
            assert_eq!(num(v), want, "{v}");
        }
    }

    #[test]
    fn xref_offsets_point_at_the_objects() {
        let pdf = to_pdf(&art(""), 20.0, 10.0).unwrap();
        let text = String::from_utf8(pdf).unwrap();
        let xref = text.find("xref\n").unwrap();
        let startxref: usize = text
            .split("startxref\n")
            .nth(1)
            .unwrap()
            .lines()
            .next()
            .unwrap()
            .parse()
            .unwrap();
        assert_eq!(startxref, xref);
        for (i, entry) in text[xref..].lines().skip(3).take(4).enumerate() {
            let offset: usize = entry[..10].parse().unwrap();
            assert!(text[offset..].starts_with(&format!("{} 0 obj", i + 1)));
        }
    }

    /// Every chart of the sample asset reports and of the sample overview, as the report
    /// pipeline draws them, has the plain form and becomes a PDF drawing (none falls back to
    /// the slower SVG).
    #[test]
    fn every_chart_plotters_draws_for_the_reports_becomes_a_pdf() {
        use crate::report::render::ReportJob;
        use crate::report::sample;
        let (asset, charts) = sample::assessed_asset("sample").unwrap();
        let (empty, empty_charts) = sample::insufficient_asset().unwrap();
        let (overview, overview_charts) = sample::portfolio().unwrap();
        let jobs = [
            ReportJob::asset(asset, charts),
            ReportJob::asset(empty, empty_charts),
            ReportJob::portfolio(overview, overview_charts),
        ];
        let mut drawn = 0;
        for job in jobs {
            for (file, svg) in job.prepare().unwrap().charts {
                let (art, labels) = crate::report::charts::labels::split(&svg)
                    .unwrap_or_else(|| panic!("{file:?}: labels split"));
                assert!(
                    to_pdf(&art, labels.width, labels.height).is_some(),
                    "{file:?} fell back to SVG"
                );
                drawn += 1;
            }
        }
        assert!(drawn >= 5, "{drawn} charts");
    }

    #[test]
    fn anything_else_keeps_the_svg() {
        let odd = [
            "<rect x=\"0\" y=\"0\" width=\"1\" height=\"1\" opacity=\"0.5\" fill=\"#000000\"/>\n",
            "<rect x=\"0\" y=\"0\" width=\"1\" height=\"1\" fill=\"red\"/>\n",
            "<path d=\"M0 0L1 1\" stroke=\"#000000\"/>\n",
            "<text x=\"1\" y=\"1\">a</text>\n",
            "<line x1=\"1e3\" y1=\"0\" x2=\"0\" y2=\"0\" stroke=\"#000000\"/>\n",
            "<rect x=\"0\" y=\"0\" width=\"1\" height=\"1\" fill=\"#000000\" stroke-dasharray=\"2\"/>\n",
        ];
        for body in odd {
            assert!(to_pdf(&art(body), 20.0, 10.0).is_none(), "{body}");
        }
        // Size must match the root element.
        assert!(to_pdf(&art(""), 30.0, 10.0).is_none());
        // Something after the end of the SVG.
        assert!(to_pdf(&(art("") + "<rect/>\n"), 20.0, 10.0).is_none());
    }
}
