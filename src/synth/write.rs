//! Writers for the files Plinth reads — footprints GeoJSON, wide points CSV, portfolio TOML — and
//! for `truth.json`.
//!
//! Owns the exact text layout: fixed decimals, fixed key order, `\n` line ends, no timestamps,
//! so the same scenario always gives the same bytes. The points CSV is streamed row by row.
//! It does not decide what is written (`demo`, `bench`, `generate`, `truth` do).

use std::io::{BufWriter, Write};
use std::path::Path;

use serde_json::{Value, json};

use super::SynthError;
use super::generate::GeneratedGeometry;
use super::model::Scenario;
use super::truth::Truth;

/// Decimals of longitude/latitude in the written files (1e-7° ≈ 1 cm).
pub const COORD_DECIMALS: usize = 7;

fn io_err(path: &Path) -> impl FnOnce(std::io::Error) -> SynthError + '_ {
    move |source| SynthError::Io {
        path: path.to_path_buf(),
        source,
    }
}

/// Round to `decimals` places for JSON output (keeps the files short and stable).
fn round_to(x: f64, decimals: i32) -> f64 {
    let f = 10f64.powi(decimals);
    (x * f).round() / f
}

/// Format a value with fixed decimals, never printing "-0.00".
pub fn fixed(x: f64, decimals: usize) -> String {
    let s = format!("{x:.decimals$}");
    if s.starts_with('-') && s[1..].chars().all(|c| c == '0' || c == '.') {
        s[1..].to_string()
    } else {
        s
    }
}

/// The footprints FeatureCollection (lon/lat, EPSG:4326) with properties `id`, `name`,
/// `height_m`, `structure`. Single-part footprints are Polygons, others MultiPolygons; rings are
/// closed and anticlockwise (RFC 7946 §3.1.6).
pub fn footprints_geojson(sc: &Scenario) -> String {
    let d = COORD_DECIMALS as i32;
    let features: Vec<Value> = sc
        .structures
        .iter()
        .map(|s| {
            let rings: Vec<Value> = s
                .footprint
                .parts
                .iter()
                .map(|r| {
                    let mut coords: Vec<Value> = r
                        .iter()
                        .map(|v| {
                            let (lon, lat) = sc.frame.to_lon_lat(v[0], v[1]);
                            json!([round_to(lon, d), round_to(lat, d)])
                        })
                        .collect();
                    if let Some(first) = coords.first().cloned() {
                        coords.push(first);
                    }
                    Value::Array(vec![Value::Array(coords)])
                })
                .collect();
            let geometry = if rings.len() == 1 {
                json!({"type": "Polygon", "coordinates": rings[0]})
            } else {
                json!({"type": "MultiPolygon", "coordinates": rings})
            };
            json!({
                "type": "Feature",
                "properties": {
                    "id": s.id,
                    "name": s.name,
                    "height_m": s.height_m,
                    "structure": s.kind.label(),
                },
                "geometry": geometry,
            })
        })
        .collect();
    let fc = json!({"type": "FeatureCollection", "features": features});
    let mut text = serde_json::to_string_pretty(&fc).unwrap_or_default();
    text.push('\n');
    text
}

/// Stream one geometry's points as the wide CSV: `point_id,lon,lat,coherence,<dates>`; values in
/// mm with `decimals` places, an empty cell for a missing value.
pub fn write_points_csv<W: Write>(
    out: W,
    g: &GeneratedGeometry,
    decimals: usize,
) -> std::io::Result<()> {
    let mut w = BufWriter::new(out);
    write!(w, "point_id,lon,lat,coherence")?;
    for d in &g.dates {
        write!(w, ",{}", d.format("%Y-%m-%d"))?;
    }
    writeln!(w)?;
    for p in &g.points {
        write!(
            w,
            "{},{},{},{}",
            p.id,
            fixed(p.lon_deg, COORD_DECIMALS),
            fixed(p.lat_deg, COORD_DECIMALS),
            fixed(p.coherence, 3)
        )?;
        for v in &p.values_mm {
            match v {
                Some(x) => write!(w, ",{}", fixed(*x, decimals))?,
                None => write!(w, ",")?,
            }
        }
        writeln!(w)?;
    }
    w.flush()
}

/// Options of the portfolio file.
#[derive(Debug, Clone)]
pub struct PortfolioText {
    /// Header comment lines (without `#`).
    pub comments: Vec<String>,
    /// Analysis CRS, e.g. `EPSG:32631`.
    pub crs: Option<String>,
    /// Assessment window written as `start`/`end` (None = Plinth's default).
    pub window: Option<(chrono::NaiveDate, chrono::NaiveDate)>,
    /// Footprints file name.
    pub structures_file: String,
    /// Extra TOML appended verbatim (assessment, report, triggers).
    pub extra: String,
}

/// Escape a string for a TOML basic string.
pub fn toml_string(s: &str) -> String {
    let mut o = String::with_capacity(s.len() + 2);
    o.push('"');
    for c in s.chars() {
        match c {
            '"' => o.push_str("\\\""),
            '\\' => o.push_str("\\\\"),
            '\n' => o.push_str("\\n"),
            c => o.push(c),
        }
    }
    o.push('"');
    o
}

/// The portfolio TOML for a scenario.
pub fn portfolio_toml(sc: &Scenario, opts: &PortfolioText) -> String {
    let mut t = String::new();
    for c in &opts.comments {
        t.push_str(&format!("# {c}\n"));
    }
    t.push_str("[portfolio]\n");
    t.push_str(&format!("name = {}\n", toml_string(&sc.name)));
    if let Some(c) = &opts.crs {
        t.push_str(&format!("crs = {}\n", toml_string(c)));
    }
    if let Some((start, end)) = opts.window {
        t.push_str(&format!("start = \"{start}\"\nend = \"{end}\"\n"));
    }
    t.push_str("\n[structures]\n");
    t.push_str(&format!("path = {}\n", toml_string(&opts.structures_file)));
    t.push_str("id_property = \"id\"\n");
    for g in &sc.geometries {
        t.push_str("\n[[datasets]]\n");
        t.push_str(&format!("name = {}\n", toml_string(&g.name)));
        t.push_str(&format!("path = {}\n", toml_string(&g.file_name)));
        t.push_str(&format!("pass = {}\n", toml_string(&g.pass)));
        t.push_str(&format!("incidence_deg = {:.1}\n", g.incidence_deg));
        t.push_str(&format!("heading_deg = {:.1}\n", g.heading_deg));
    }
    if !opts.extra.is_empty() {
        t.push('\n');
        t.push_str(&opts.extra);
        if !opts.extra.ends_with('\n') {
            t.push('\n');
        }
    }
    t
}

/// `truth.json` text (pretty, key order as declared, trailing newline).
pub fn truth_json(truth: &Truth) -> String {
    let mut s = serde_json::to_string_pretty(truth).unwrap_or_default();
    s.push('\n');
    s
}

/// Write a text file, creating nothing else.
pub fn write_text(path: &Path, text: &str) -> Result<(), SynthError> {
    std::fs::write(path, text).map_err(io_err(path))
}

/// Write one geometry's CSV to `path`.
pub fn write_points_file(
    path: &Path,
    g: &GeneratedGeometry,
    decimals: usize,
) -> Result<(), SynthError> {
    let f = std::fs::File::create(path).map_err(io_err(path))?;
    write_points_csv(f, g, decimals).map_err(io_err(path))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fixed_never_negative_zero() {
        assert_eq!(fixed(-0.001, 2), "0.00");
        assert_eq!(fixed(-0.006, 2), "-0.01");
        assert_eq!(fixed(27.7329, 2), "27.73");
    }

    #[test]
    fn toml_strings_are_escaped() {
        assert_eq!(toml_string("a \"b\" \\ c"), "\"a \\\"b\\\" \\\\ c\"");
    }
}
