//! One self-closing SVG shape element on one line, in the plain form plotters writes: the
//! grammar shared by [`super::compact`] (which merges alike elements into paths) and
//! [`super::pdf_art`] (which writes them as PDF operators).
//!
//! Owns: [`Element::parse`]. Accepted: `<TAG k="v" …/>` with TAG one of `line`, `polyline`,
//! `polygon`, `rect`, `circle`, attribute values without entities, and no attribute other than
//! the tag's geometry (SVG 1.1 §9: `x1 y1 x2 y2`; `points`; `x y width height`; `cx cy r`) and
//! the paint keys `fill`, `stroke`, `stroke-width`, `opacity`. Anything else gives `None`, and
//! each caller keeps the SVG as written. What each caller then requires of the paint (opacity,
//! fill-or-stroke) stays with the caller.

/// The shape elements accepted.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Tag {
    /// `<line>`.
    Line,
    /// `<polyline>` (open).
    Polyline,
    /// `<polygon>` (closed).
    Polygon,
    /// `<rect>`.
    Rect,
    /// `<circle>`.
    Circle,
}

impl Tag {
    fn of(name: &str) -> Option<Tag> {
        Some(match name {
            "line" => Tag::Line,
            "polyline" => Tag::Polyline,
            "polygon" => Tag::Polygon,
            "rect" => Tag::Rect,
            "circle" => Tag::Circle,
            _ => return None,
        })
    }

    /// The geometry attributes of the element (SVG 1.1 §9).
    fn geometry_keys(self) -> &'static [&'static str] {
        match self {
            Tag::Line => &["x1", "y1", "x2", "y2"],
            Tag::Polyline | Tag::Polygon => &["points"],
            Tag::Rect => &["x", "y", "width", "height"],
            Tag::Circle => &["cx", "cy", "r"],
        }
    }
}

/// The paint attributes accepted beside the geometry.
const PAINT_KEYS: [&str; 4] = ["fill", "stroke", "stroke-width", "opacity"];

/// One parsed element: its tag and its attributes as written.
pub(super) struct Element<'a> {
    /// The element's tag.
    pub tag: Tag,
    attrs: Vec<(&'a str, &'a str)>,
}

impl<'a> Element<'a> {
    /// The element on `line` (surrounding white space ignored); `None` for anything outside
    /// the accepted form (see the module documentation).
    pub fn parse(line: &'a str) -> Option<Element<'a>> {
        let body = line.trim().strip_prefix('<')?.strip_suffix("/>")?;
        let (name, attrs) = body.split_once(' ')?;
        let tag = Tag::of(name)?;
        let attrs = attributes(attrs)?;
        let keys = tag.geometry_keys();
        if attrs
            .iter()
            .any(|(k, _)| !keys.contains(k) && !PAINT_KEYS.contains(k))
        {
            return None;
        }
        Some(Element { tag, attrs })
    }

    /// The value of attribute `key` as written.
    pub fn get(&self, key: &str) -> Option<&'a str> {
        self.attrs.iter().find(|(k, _)| *k == key).map(|(_, v)| *v)
    }

    /// The value of attribute `key` when it is a plain decimal number ([`is_number`]).
    pub fn number(&self, key: &str) -> Option<&'a str> {
        self.get(key).filter(|v| is_number(v))
    }

    /// The value of attribute `key` as a number.
    pub fn value(&self, key: &str) -> Option<f64> {
        self.number(key)?.parse().ok()
    }
}

/// A plain decimal number as plotters writes coordinates (`-12`, `3.5`): an optional leading
/// `-`, digits and at most one `.`, so nothing that could change meaning when copied into path
/// data or PDF operators.
pub(super) fn is_number(s: &str) -> bool {
    let digits = s.strip_prefix('-').unwrap_or(s);
    digits.bytes().any(|b| b.is_ascii_digit())
        && digits.bytes().all(|b| b.is_ascii_digit() || b == b'.')
        && digits.bytes().filter(|b| *b == b'.').count() <= 1
}

/// `key="value"` pairs (values without entities, as plotters writes numbers and colours).
pub(super) fn attributes(s: &str) -> Option<Vec<(&str, &str)>> {
    let mut out = Vec::with_capacity(8);
    let mut rest = s.trim();
    while !rest.is_empty() {
        let eq = rest.find('=')?;
        let key = rest[..eq].trim();
        let after = rest[eq + 1..].strip_prefix('"')?;
        let close = after.find('"')?;
        let value = &after[..close];
        if value.contains('&') {
            return None;
        }
        out.push((key, value));
        rest = after[close + 1..].trim_start();
    }
    Some(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn accepts_the_plain_form_and_reads_values() {
        let e = Element::parse(
            "<circle cx=\"4\" cy=\"-4.5\" r=\"2\" opacity=\"1\" fill=\"#1F5696\" stroke=\"none\"/>\n",
        )
        .unwrap();
        assert_eq!(e.tag, Tag::Circle);
        assert_eq!(e.get("fill"), Some("#1F5696"));
        assert_eq!(e.value("cy"), Some(-4.5));
        assert_eq!(e.get("stroke-width"), None);
    }

    #[test]
    fn refuses_other_elements_keys_entities_and_numbers() {
        for line in [
            "<path d=\"M0 0\" fill=\"none\"/>",
            "<rect x=\"0\" y=\"0\" width=\"1\" height=\"1\" transform=\"scale(2)\"/>",
            "<line x1=\"0\" y1=\"0\" x2=\"1\" y2=\"1\" stroke-dasharray=\"2\"/>",
            "<rect x=\"0\" y=\"0\" width=\"1\" height=\"1\" fill=\"&#35;000\"/>",
            "<rect x=\"0\" y=\"0\" width=\"1\" height=\"1\">",
            "<circle cx=\"1\" cy=\"2\" r=\"3\" fill=\"#000/>",
        ] {
            assert!(Element::parse(line).is_none(), "{line}");
        }
        let e = Element::parse("<rect x=\"1e3\" y=\"0\" width=\"1\" height=\"1\"/>").unwrap();
        assert_eq!(
            e.number("x"),
            None,
            "exponents are not copied into path data"
        );
        assert!(!is_number("-") && !is_number(".") && is_number("-0.5"));
        assert!(!is_number("1-2") && !is_number("1.2.3") && !is_number("--1"));
    }
}
