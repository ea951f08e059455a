//! Chart text set by typst on top of the SVG drawing, instead of inside the SVG.
//!
//! Owns: splitting a chart SVG as plotters' SVG backend writes it into the drawing without its
//! `<text>` elements (the "art") and the list of those texts as [`ChartLabels`] (anchor point,
//! anchor side, baseline shift, size, colour, weight, rotation). The world serves both next to
//! the full SVG (`/chart-ts-art.svg`, `/chart-ts-labels.json`), and `chart-image` in
//! `templates/plinth-style.typ` places the labels over the drawing.
//!
//! Why: inside an SVG, every text element is shaped with a freshly parsed font, outlined for
//! its bounding box, and written to the PDF one glyph at a time; about a third of a structure
//! report's rendering time went there (docs/performance.md, "Report rendering"). Set by typst,
//! the same labels are shaped once per run of text, written as one text run each, and reused
//! between reports when they repeat (axis titles, legend entries, tick labels).
//!
//! Geometry follows SVG 1.1 §10 as the SVG renderer used by typst applies it: `x`/`y` is the
//! anchor point on the baseline after the `dy` shift, `text-anchor` says which end of the line
//! (start, middle, end) sits there, `em` is the font size and `ex` half of it (the renderer's
//! rule), and `transform="rotate(a, x, y)"` turns the text by `a` degrees clockwise (y down)
//! around the unshifted anchor. Whitespace collapses as with the default `xml:space`.
//!
//! Only the exact form plotters writes is recognised. A `<text>` element in any other form
//! stays in the drawing, where the SVG renderer sets it as before: slower, never lost.

use serde::Serialize;

/// One label in SVG pixels of its chart.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ChartLabel {
    /// The text (whitespace collapsed, entities resolved).
    pub text: String,
    /// Anchor x, px from the left edge.
    pub x: f64,
    /// Anchor y before the baseline shift, px from the top edge (also the rotation centre).
    pub y: f64,
    /// Baseline below `y`, px (the resolved `dy`; negative = above).
    pub shift: f64,
    /// Which end of the line sits at the anchor: `start`, `middle` or `end`.
    pub anchor: String,
    /// Font size, px.
    pub size: f64,
    /// Font family, as named in the SVG.
    pub font: String,
    /// `regular` or `bold`.
    pub weight: String,
    /// `normal`, `italic` or `oblique`.
    pub style: String,
    /// Text colour `#RRGGBB`.
    pub fill: String,
    /// Clockwise rotation around (`x`, `y`), degrees (0 when not rotated).
    pub rotate: f64,
}

/// The labels of one chart and the chart's size in SVG pixels.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ChartLabels {
    /// SVG width, px.
    pub width: f64,
    /// SVG height, px.
    pub height: f64,
    /// The labels in drawing order.
    pub labels: Vec<ChartLabel>,
    /// Virtual path of the drawing to place under the labels when it is not the `…-art.svg`
    /// beside them (the world sets it when it serves the drawing as a PDF, see
    /// [`super::pdf_art`]).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub art: Option<String>,
}

/// Splits `svg` into the drawing without the recognised `<text>` elements and their labels.
/// `None` when the root element has no plain `width`/`height` (then serve the SVG unsplit).
pub fn split(svg: &str) -> Option<(String, ChartLabels)> {
    let root_end = svg.find('>')?;
    let root = svg.get(..root_end)?;
    let width = attr_number(root, "width")?;
    let height = attr_number(root, "height")?;
    let mut art = String::with_capacity(svg.len());
    let mut labels = Vec::new();
    let mut rest = svg;
    while let Some(start) = rest.find("<text ") {
        art.push_str(&rest[..start]);
        let element = &rest[start..];
        let Some(close) = element.find("</text>") else {
            art.push_str(element);
            rest = "";
            break;
        };
        let mut end = close + "</text>".len();
        match parse_text(&element[..end]) {
            Some(label) => {
                if element[end..].starts_with('\n') {
                    end += 1;
                }
                labels.push(label);
            }
            None => art.push_str(&element[..end]),
        }
        rest = &element[end..];
    }
    art.push_str(rest);
    Some((
        art,
        ChartLabels {
            width,
            height,
            labels,
            art: None,
        },
    ))
}

/// One `<text ...>content</text>` element as plotters writes it; `None` for any other form.
fn parse_text(element: &str) -> Option<ChartLabel> {
    let open_end = element.find('>')?;
    let open = element.get("<text".len()..open_end)?;
    let content = element.get(open_end + 1..element.len() - "</text>".len())?;
    if content.contains('<') {
        return None;
    }
    let attrs = attributes(open)?;
    let get = |key: &str| {
        attrs
            .iter()
            .find(|(k, _)| *k == key)
            .map(|(_, v)| v.as_str())
    };
    const KNOWN: [&str; 11] = [
        "x",
        "y",
        "dy",
        "text-anchor",
        "font-family",
        "font-size",
        "opacity",
        "fill",
        "font-weight",
        "font-style",
        "transform",
    ];
    if attrs.iter().any(|(k, _)| !KNOWN.contains(k)) || get("opacity")? != "1" {
        return None;
    }
    let size: f64 = get("font-size")?.parse().ok()?;
    let x: f64 = get("x")?.parse().ok()?;
    let y: f64 = get("y")?.parse().ok()?;
    let fill = get("fill")?;
    let anchor = get("text-anchor")?;
    let weight = match get("font-weight") {
        None => "regular",
        Some("bold") => "bold",
        Some(_) => return None,
    };
    let style = match get("font-style") {
        None => "normal",
        Some(s @ ("italic" | "oblique")) => s,
        Some(_) => return None,
    };
    let rotate = match get("transform") {
        None => 0.0,
        Some(t) => rotation_about(t, x, y)?,
    };
    let text = collapse_whitespace(&unescape(content)?);
    let valid_fill = fill.len() == 7
        && fill.starts_with('#')
        && fill[1..].chars().all(|c| c.is_ascii_hexdigit());
    let usable = !text.is_empty()
        && valid_fill
        && matches!(anchor, "start" | "middle" | "end")
        && size.is_finite()
        && x.is_finite()
        && y.is_finite();
    if !usable {
        return None;
    }
    Some(ChartLabel {
        text,
        x,
        y,
        shift: baseline_shift(get("dy").unwrap_or("0"), size)?,
        anchor: anchor.to_string(),
        size,
        font: get("font-family")?.to_string(),
        weight: weight.to_string(),
        style: style.to_string(),
        fill: fill.to_string(),
        rotate,
    })
}

/// `key="value"` pairs of an opening tag (values with entities resolved); `None` if malformed.
fn attributes(open: &str) -> Option<Vec<(&str, String)>> {
    let mut out = Vec::new();
    let mut rest = open.trim();
    while !rest.is_empty() {
        let eq = rest.find("=\"")?;
        let key = rest[..eq].trim();
        let after = &rest[eq + 2..];
        let close = after.find('"')?;
        out.push((key, unescape(&after[..close])?));
        rest = after[close + 1..].trim_start();
    }
    Some(out)
}

/// The number in `key="number"` of a tag.
fn attr_number(tag: &str, key: &str) -> Option<f64> {
    let pattern = format!(" {key}=\"");
    let start = tag.find(&pattern)? + pattern.len();
    let len = tag[start..].find('"')?;
    tag[start..start + len]
        .parse()
        .ok()
        .filter(|v: &f64| v.is_finite() && *v > 0.0)
}

/// `dy` in px: `em` = font size, `ex` = half of it (the SVG renderer's rule), bare or `px`.
fn baseline_shift(dy: &str, size: f64) -> Option<f64> {
    let (number, factor) = if let Some(n) = dy.strip_suffix("em") {
        (n, size)
    } else if let Some(n) = dy.strip_suffix("ex") {
        (n, size / 2.0)
    } else {
        (dy.strip_suffix("px").unwrap_or(dy), 1.0)
    };
    let n: f64 = number.trim().parse().ok()?;
    Some(n * factor).filter(|v| v.is_finite())
}

/// The angle of `rotate(a, x, y)` when it turns around the label's own anchor.
fn rotation_about(transform: &str, x: f64, y: f64) -> Option<f64> {
    let inner = transform.strip_prefix("rotate(")?.strip_suffix(')')?;
    let parts: Vec<f64> = inner
        .split(',')
        .map(|p| p.trim().parse::<f64>())
        .collect::<Result<_, _>>()
        .ok()?;
    match parts.as_slice() {
        [a, cx, cy] if *cx == x && *cy == y && a.is_finite() => Some(*a),
        _ => None,
    }
}

/// Resolves the five XML entities plotters writes; `None` for any other `&`.
fn unescape(s: &str) -> Option<String> {
    if !s.contains('&') {
        return Some(s.to_string());
    }
    let mut out = String::with_capacity(s.len());
    let mut rest = s;
    while let Some(i) = rest.find('&') {
        out.push_str(&rest[..i]);
        let tail = &rest[i..];
        let (ch, len) = [
            ("&lt;", '<'),
            ("&gt;", '>'),
            ("&amp;", '&'),
            ("&quot;", '"'),
            ("&apos;", '\''),
        ]
        .iter()
        .find(|(e, _)| tail.starts_with(e))
        .map(|(e, c)| (*c, e.len()))?;
        out.push(ch);
        rest = &tail[len..];
    }
    out.push_str(rest);
    Some(out)
}

/// Whitespace as SVG's default `xml:space` leaves it: runs become one space, ends trimmed.
fn collapse_whitespace(s: &str) -> String {
    s.split_whitespace().collect::<Vec<_>>().join(" ")
}

#[cfg(test)]
mod tests {
    use super::*;

    const SVG: &str = concat!(
        "<svg width=\"820\" height=\"490\" viewBox=\"0 0 820 490\" xmlns=\"http://www.w3.org/2000/svg\">\n",
        "<rect x=\"0\" y=\"0\" width=\"820\" height=\"490\" opacity=\"1\" fill=\"#FFFFFF\" stroke=\"none\"/>\n",
        "<text x=\"410\" y=\"17\" dy=\"0.76em\" text-anchor=\"middle\" font-family=\"DejaVu Sans\" ",
        "font-size=\"16\" opacity=\"1\" fill=\"#212121\">\nA &lt;b&gt; &amp; &quot;c&quot;\n</text>\n",
        "<text x=\"12\" y=\"181\" dy=\"-0.5ex\" text-anchor=\"end\" font-family=\"DejaVu Sans\" ",
        "font-size=\"10\" opacity=\"1\" fill=\"#1F5696\" font-weight=\"bold\" ",
        "transform=\"rotate(270, 12, 181)\">\nmm,  + up\n</text>\n",
        "<circle cx=\"1\" cy=\"2\" r=\"2\" opacity=\"1\" fill=\"#1F5696\" stroke=\"none\"/>\n",
        "</svg>\n",
    );

    #[test]
    fn text_leaves_the_drawing_and_keeps_its_geometry() {
        let (art, labels) = split(SVG).expect("split");
        assert!(!art.contains("<text"), "{art}");
        assert!(art.contains("<rect") && art.contains("<circle") && art.ends_with("</svg>\n"));
        assert_eq!((labels.width, labels.height), (820.0, 490.0));
        let [title, axis] = labels.labels.as_slice() else {
            panic!("two labels expected: {labels:?}")
        };
        assert_eq!(title.text, "A <b> & \"c\"");
        assert_eq!(
            (title.x, title.y, title.anchor.as_str()),
            (410.0, 17.0, "middle")
        );
        // 0.76 em of a 16 px font.
        assert!((title.shift - 12.16).abs() < 1e-12);
        assert_eq!((title.weight.as_str(), title.rotate), ("regular", 0.0));
        // −0.5 ex = −0.25 em of a 10 px font; rotation about the anchor itself.
        assert!((axis.shift + 2.5).abs() < 1e-12);
        assert_eq!(axis.text, "mm, + up");
        assert_eq!((axis.rotate, axis.weight.as_str()), (270.0, "bold"));
        assert_eq!(axis.fill, "#1F5696");
    }

    #[test]
    fn unknown_forms_stay_in_the_drawing() {
        let odd = [
            // Translucent.
            "<text x=\"1\" y=\"2\" dy=\"0.76em\" text-anchor=\"start\" font-family=\"F\" font-size=\"9\" opacity=\"0.5\" fill=\"#000000\">\na\n</text>\n",
            // Rotation about another point.
            "<text x=\"1\" y=\"2\" dy=\"0.76em\" text-anchor=\"start\" font-family=\"F\" font-size=\"9\" opacity=\"1\" fill=\"#000000\" transform=\"rotate(90, 5, 5)\">\na\n</text>\n",
            // Nested markup.
            "<text x=\"1\" y=\"2\" dy=\"0.76em\" text-anchor=\"start\" font-family=\"F\" font-size=\"9\" opacity=\"1\" fill=\"#000000\"><tspan>a</tspan></text>\n",
            // Unknown entity.
            "<text x=\"1\" y=\"2\" dy=\"0.76em\" text-anchor=\"start\" font-family=\"F\" font-size=\"9\" opacity=\"1\" fill=\"#000000\">\n&#233;\n</text>\n",
        ];
        for element in odd {
            let svg = format!("<svg width=\"10\" height=\"10\">\n{element}</svg>\n");
            let (art, labels) = split(&svg).expect("split");
            assert_eq!(art, svg, "kept unchanged");
            assert!(labels.labels.is_empty());
        }
    }

    #[test]
    fn root_without_size_is_not_split() {
        assert!(split("<svg viewBox=\"0 0 10 10\"></svg>").is_none());
    }
}
