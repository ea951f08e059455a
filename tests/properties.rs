//! Robustness properties of the three input readers: whatever bytes they are given, the points
//! CSV reader, the footprints GeoJSON parser and the portfolio parser return `Ok` or `Err` and
//! never panic (proptest turns a panic into a failing case with a shrunk input).
//!
//! Inputs are arbitrary bytes and mutations of the valid corpus base (`tests/bad_inputs/base/`):
//! byte flips, truncation, deletions and insertions of delimiters, quotes, line ends, a BOM and
//! number-ish bytes; for GeoJSON also structural mutations (one JSON node replaced by an edge
//! value) and random rings; for TOML also inserted `key = value` lines. Every error must name
//! its file. It does not check which message is produced (the corpus test `tests/bad_inputs.rs`
//! does that) and it does no file I/O beyond reading the base once.
//!
//! Also one end-to-end property: `plinth check` on the base with cells of the points file replaced
//! by edge values exits 0 or 2, never panics and never exits 1.
//!
//! Bounded: 256 cases per parser property, each a single parse of a few kilobytes; 48 for the
//! end-to-end property (one process each).

use std::path::{Path, PathBuf};

use proptest::prelude::*;
use proptest::sample::Index;

use plinth::coords::{Crs, Transformer};
use plinth::error::{InputError, Warnings};
use plinth::ingest::footprints::{FootprintDefaults, parse_footprints};
use plinth::ingest::points::read_points_from;
use plinth::portfolio::{Columns, DatasetSpec, LookSide, LosSign, Pass, Portfolio, Unit};

fn base_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/bad_inputs/base")
}

fn base_file(name: &str) -> Vec<u8> {
    let p = base_dir().join(name);
    std::fs::read(&p).unwrap_or_else(|e| panic!("cannot read {}: {e}", p.display()))
}

fn spec(unit: Unit, delimiter: Option<u8>) -> DatasetSpec {
    DatasetSpec {
        name: "asc".into(),
        path: "points.csv".into(),
        pass: Pass::Ascending,
        incidence_deg: Some(38.0),
        heading_deg: Some(-12.0),
        crs: "EPSG:4326".into(),
        unit,
        positive: LosSign::Towards,
        look: LookSide::Right,
        wavelength_mm: 55.47,
        delimiter,
        columns: Columns {
            id: "point_id".into(),
            x: "lon".into(),
            y: "lat".into(),
            coherence: "coherence".into(),
            coherence_explicit: false,
            incidence: None,
            heading: None,
            height: None,
            date_format: "%Y-%m-%d".into(),
        },
        crs_given: true,
        layer: None,
    }
}

/// Feed bytes to the CSV reader with a real projection (WGS84 → UTM 50N, the base's analysis CRS).
fn read_csv(bytes: &[u8], unit: Unit, delimiter: Option<u8>, keep: bool) -> Result<(), InputError> {
    let wgs = Crs::wgs84();
    let utm = Crs::from_epsg(32650).expect("EPSG:32650 is defined");
    let to_a = Transformer::new(&wgs, &utm);
    let reach = move |_x: f64, _y: f64| keep.then(plinth::association::PointAssociation::default);
    read_points_from(
        std::io::Cursor::new(bytes.to_vec()),
        Path::new("points.csv"),
        &spec(unit, delimiter),
        &to_a,
        true,
        &reach,
        None,
        &mut Warnings::default(),
    )
    .map(|_| ())
}

fn read_geojson(text: &str, geographic: bool) -> Result<(), InputError> {
    let defaults = FootprintDefaults {
        height_m: 6.0,
        structure_type: "masonry".into(),
    };
    parse_footprints(
        text,
        Path::new("structures.geojson"),
        "id",
        geographic,
        &defaults,
        &mut Warnings::default(),
    )
    .map(|_| ())
}

/// The portfolio is parsed as if it were the base's, so that its relative paths resolve.
fn read_portfolio(text: &str) -> Result<(), InputError> {
    Portfolio::parse(text, &base_dir().join("portfolio.toml")).map(|_| ())
}

fn assert_names_file(r: Result<(), InputError>, file: &str) -> Result<(), TestCaseError> {
    if let Err(e) = r {
        prop_assert!(e.file.ends_with(file), "error does not name {file}: {e}");
        prop_assert!(!e.message.is_empty(), "empty message: {e:?}");
    }
    Ok(())
}

/// One byte-level edit.
#[derive(Debug, Clone)]
enum Edit {
    /// XOR the byte at a position with a non-zero mask.
    Flip(Index, u8),
    /// Cut the input at a position.
    Truncate(Index),
    /// Remove up to n bytes from a position.
    Delete(Index, usize),
    /// Insert bytes at a position.
    Insert(Index, Vec<u8>),
}

/// Bytes that matter to CSV, JSON and TOML readers.
fn special_bytes() -> impl Strategy<Value = Vec<u8>> {
    prop_oneof![
        Just(b",".to_vec()),
        Just(b";".to_vec()),
        Just(b"\t".to_vec()),
        Just(b"\"".to_vec()),
        Just(b"'".to_vec()),
        Just(b"\n".to_vec()),
        Just(b"\r\n".to_vec()),
        Just(b"\r".to_vec()),
        Just("\u{feff}".as_bytes().to_vec()),
        Just(b"-".to_vec()),
        Just(b"e9999".to_vec()),
        Just(b"NaN".to_vec()),
        Just(b"inf".to_vec()),
        Just(b"[".to_vec()),
        Just(b"]".to_vec()),
        Just(b"{".to_vec()),
        Just(b"}".to_vec()),
        Just(b"=".to_vec()),
        Just(b"\\".to_vec()),
        Just(vec![0u8]),
        Just(vec![0xff, 0xfe]),
        prop::collection::vec(any::<u8>(), 1..6),
    ]
}

fn edit() -> impl Strategy<Value = Edit> {
    prop_oneof![
        (any::<Index>(), 1u8..=255).prop_map(|(i, m)| Edit::Flip(i, m)),
        any::<Index>().prop_map(Edit::Truncate),
        (any::<Index>(), 1usize..40).prop_map(|(i, n)| Edit::Delete(i, n)),
        (any::<Index>(), special_bytes()).prop_map(|(i, b)| Edit::Insert(i, b)),
    ]
}

fn apply(mut bytes: Vec<u8>, edits: &[Edit]) -> Vec<u8> {
    for e in edits {
        let len = bytes.len();
        match e {
            Edit::Flip(i, m) if len > 0 => {
                let k = i.index(len);
                bytes[k] ^= m;
            }
            Edit::Truncate(i) => {
                let k = i.index(len + 1);
                bytes.truncate(k);
            }
            Edit::Delete(i, n) if len > 0 => {
                let k = i.index(len);
                let end = (k + n).min(len);
                bytes.drain(k..end);
            }
            Edit::Insert(i, b) => {
                let k = i.index(len + 1);
                bytes.splice(k..k, b.iter().copied());
            }
            _ => {}
        }
    }
    bytes
}

fn unit() -> impl Strategy<Value = Unit> {
    prop_oneof![Just(Unit::Mm), Just(Unit::M)]
}

fn delimiter() -> impl Strategy<Value = Option<u8>> {
    prop_oneof![
        Just(None),
        Just(Some(b',')),
        Just(Some(b';')),
        Just(Some(b'\t'))
    ]
}

/// A JSON value at the edge of what the footprints parser expects.
fn edge_json() -> impl Strategy<Value = serde_json::Value> {
    use serde_json::json;
    prop_oneof![
        Just(json!(null)),
        Just(json!(true)),
        Just(json!(0)),
        Just(json!(-1)),
        Just(json!(1e308)),
        Just(json!(-1e308)),
        Just(json!(5e-324)),
        Just(json!(180.000_001)),
        Just(json!(90.5)),
        Just(json!(u64::MAX)),
        Just(json!(i64::MIN)),
        Just(json!("")),
        Just(json!("Polygon")),
        Just(json!("MultiPolygon")),
        Just(json!("FeatureCollection")),
        Just(json!([])),
        Just(json!({})),
        Just(json!([[]])),
        Just(json!([[[]]])),
        Just(json!([[[[]]]])),
        Just(json!([118.4, 31.6])),
        Just(json!([118.4, 31.6, 1.0, 2.0])),
        Just(json!([
            [118.4, 31.6],
            [118.4, 31.6],
            [118.4, 31.6],
            [118.4, 31.6]
        ])),
        any::<f64>()
            .prop_filter("JSON numbers are finite", |v| v.is_finite())
            .prop_map(|v| json!(v)),
    ]
}

/// Every node of a JSON tree, as a path of child indices (object members in their order).
fn node_paths(v: &serde_json::Value, prefix: &mut Vec<usize>, out: &mut Vec<Vec<usize>>) {
    out.push(prefix.clone());
    let children: Vec<&serde_json::Value> = match v {
        serde_json::Value::Array(a) => a.iter().collect(),
        serde_json::Value::Object(o) => o.values().collect(),
        _ => Vec::new(),
    };
    for (i, c) in children.into_iter().enumerate() {
        prefix.push(i);
        node_paths(c, prefix, out);
        prefix.pop();
    }
}

fn node_mut<'a>(v: &'a mut serde_json::Value, path: &[usize]) -> Option<&'a mut serde_json::Value> {
    let Some((first, rest)) = path.split_first() else {
        return Some(v);
    };
    let child = match v {
        serde_json::Value::Array(a) => a.get_mut(*first),
        serde_json::Value::Object(o) => o.values_mut().nth(*first),
        _ => None,
    }?;
    node_mut(child, rest)
}

/// A coordinate near the base site, on its edges, or far outside the valid range.
fn coordinate() -> impl Strategy<Value = (f64, f64)> {
    prop_oneof![
        4 => (118.3999..118.4001f64, 31.5999..31.6001f64),
        1 => (-180.0..180.0f64, -90.0..90.0f64),
        1 => prop_oneof![Just((180.0, 90.0)), Just((-180.0, -90.0)), Just((0.0, 0.0)), Just((118.4, 31.6))],
        1 => (-1e7..1e7f64, -1e7..1e7f64),
    ]
}

/// A random footprint: 1–3 polygons of 0–3 rings of 0–9 positions, closed or not.
fn random_footprints() -> impl Strategy<Value = String> {
    let ring =
        (prop::collection::vec(coordinate(), 0..9), any::<bool>()).prop_map(|(mut r, close)| {
            if close {
                if let Some(&p) = r.first() {
                    r.push(p);
                }
            }
            r.into_iter().map(|(x, y)| vec![x, y]).collect::<Vec<_>>()
        });
    let polygon = prop::collection::vec(ring, 0..3);
    prop::collection::vec(polygon, 1..3).prop_map(|polys| {
        let geometry = if polys.len() == 1 {
            serde_json::json!({"type": "Polygon", "coordinates": polys[0]})
        } else {
            serde_json::json!({"type": "MultiPolygon", "coordinates": polys})
        };
        serde_json::json!({
            "type": "FeatureCollection",
            "features": [{"type": "Feature", "properties": {"id": "H-1"}, "geometry": geometry}]
        })
        .to_string()
    })
}

/// A `key = value` line that a user might write, right or wrong.
fn toml_line() -> impl Strategy<Value = String> {
    let keys = prop::sample::select(vec![
        "name",
        "crs",
        "start",
        "end",
        "path",
        "pass",
        "incidence_deg",
        "heading_deg",
        "unit",
        "positive",
        "look",
        "wavelength_mm",
        "delimiter",
        "buffer_m",
        "surroundings_m",
        "min_coherence",
        "min_points",
        "min_epochs",
        "seed",
        "monte_carlo_draws",
        "id_property",
        "columns.coherence",
        "columns.date_format",
        "field",
        "above",
        "base",
        "thresholds",
        "[assessment]",
        "[[datasets]]",
        "[[triggers]]",
        "[criteria.x]",
        "[report]",
        "[portfolio]",
    ]);
    let values = prop::sample::select(vec![
        "\"\"",
        "\"EPSG:4326\"",
        "\"EPSG:99999\"",
        "\"2022-02-30\"",
        "\"2023-01-01\"",
        "2023-01-01",
        "1979-05-27T07:32:00Z",
        "0",
        "-1",
        "90",
        "1e999",
        "nan",
        "inf",
        "-inf",
        "18446744073709551616",
        "true",
        "[]",
        "[1, 2, 3, 4]",
        "{}",
        "\"descending\"",
        "\"m\"",
        "\"%d\"",
        "\"%Y-%m-%d %H\"",
        "\"tab\"",
        "\"../../../etc\"",
        "'''\nmulti\n'''",
    ]);
    (keys, values).prop_map(|(k, v)| {
        if k.starts_with('[') {
            k.to_string()
        } else {
            format!("{k} = {v}")
        }
    })
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 256, ..ProptestConfig::default() })]

    #[test]
    fn csv_reader_survives_arbitrary_bytes(
        bytes in prop::collection::vec(any::<u8>(), 0..2048),
        u in unit(), d in delimiter(), keep in any::<bool>(),
    ) {
        assert_names_file(read_csv(&bytes, u, d, keep), "points.csv")?;
    }

    #[test]
    fn csv_reader_survives_mutated_valid_file(
        edits in prop::collection::vec(edit(), 1..8),
        u in unit(), d in delimiter(), keep in any::<bool>(),
    ) {
        let bytes = apply(base_file("points.csv"), &edits);
        assert_names_file(read_csv(&bytes, u, d, keep), "points.csv")?;
    }

    #[test]
    fn geojson_parser_survives_arbitrary_text(
        bytes in prop::collection::vec(any::<u8>(), 0..1024), geographic in any::<bool>(),
    ) {
        let text = String::from_utf8_lossy(&bytes);
        assert_names_file(read_geojson(&text, geographic), "structures.geojson")?;
    }

    #[test]
    fn geojson_parser_survives_mutated_valid_file(
        edits in prop::collection::vec(edit(), 1..6), geographic in any::<bool>(),
    ) {
        let bytes = apply(base_file("structures.geojson"), &edits);
        let text = String::from_utf8_lossy(&bytes);
        assert_names_file(read_geojson(&text, geographic), "structures.geojson")?;
    }

    #[test]
    fn geojson_parser_survives_replaced_nodes(
        picks in prop::collection::vec((any::<Index>(), edge_json()), 1..4),
        geographic in any::<bool>(),
    ) {
        let text = String::from_utf8_lossy(&base_file("structures.geojson")).into_owned();
        let mut root: serde_json::Value =
            serde_json::from_str(&text).expect("the base footprints are valid JSON");
        for (i, v) in picks {
            let mut paths = Vec::new();
            node_paths(&root, &mut Vec::new(), &mut paths);
            let path = &paths[i.index(paths.len())];
            if let Some(node) = node_mut(&mut root, path) {
                *node = v;
            }
        }
        assert_names_file(read_geojson(&root.to_string(), geographic), "structures.geojson")?;
    }

    #[test]
    fn geojson_parser_survives_random_rings(text in random_footprints(), geographic in any::<bool>()) {
        assert_names_file(read_geojson(&text, geographic), "structures.geojson")?;
    }

    #[test]
    fn portfolio_parser_survives_arbitrary_text(bytes in prop::collection::vec(any::<u8>(), 0..1024)) {
        let text = String::from_utf8_lossy(&bytes);
        assert_names_file(read_portfolio(&text), "portfolio.toml")?;
    }

    #[test]
    fn portfolio_parser_survives_mutated_valid_file(edits in prop::collection::vec(edit(), 1..6)) {
        let bytes = apply(base_file("portfolio.toml"), &edits);
        let text = String::from_utf8_lossy(&bytes);
        assert_names_file(read_portfolio(&text), "portfolio.toml")?;
    }

    #[test]
    fn portfolio_parser_survives_inserted_lines(
        lines in prop::collection::vec((any::<Index>(), toml_line()), 1..5),
    ) {
        let base = String::from_utf8_lossy(&base_file("portfolio.toml")).into_owned();
        let mut all: Vec<String> = base.lines().map(str::to_string).collect();
        for (i, l) in lines {
            let k = i.index(all.len() + 1);
            all.insert(k, l);
        }
        assert_names_file(read_portfolio(&all.join("\n")), "portfolio.toml")?;
    }
}

/// A cell value at the edge of what the analysis expects (the CSV stays well-formed).
fn edge_cell() -> impl Strategy<Value = String> {
    prop_oneof![
        prop::sample::select(vec![
            "",
            "NaN",
            "0",
            "-0",
            "9999.99",
            "-9999.99",
            "1e-30",
            "0.5",
            "-0.49",
            "1",
            "118.4",
            "31.6",
            "180",
            "-90",
            "0.0000001",
        ])
        .prop_map(str::to_string),
        (-50.0..50.0f64).prop_map(|v| format!("{v:.3}")),
    ]
}

/// Run `plinth check` on the base with some cells of points.csv replaced; returns (code, stderr).
fn check_with_cells(edits: &[(Index, Index, String)]) -> (Option<i32>, String) {
    let text = String::from_utf8_lossy(&base_file("points.csv")).into_owned();
    let mut rows: Vec<Vec<String>> = text
        .lines()
        .map(|l| l.split(',').map(str::to_string).collect())
        .collect();
    for (r, c, v) in edits {
        let r = 1 + r.index(rows.len() - 1);
        let c = c.index(rows[r].len());
        rows[r][c] = v.clone();
    }
    let csv: String = rows.iter().map(|r| r.join(",") + "\n").collect();
    let dir = tempfile::tempdir().expect("temporary folder");
    for f in ["portfolio.toml", "structures.geojson"] {
        std::fs::write(dir.path().join(f), base_file(f)).expect("write base file");
    }
    std::fs::write(dir.path().join("points.csv"), csv).expect("write points");
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_plinth"))
        .current_dir(dir.path())
        .args(["check", "portfolio.toml"])
        .output()
        .expect("run plinth");
    (
        out.status.code(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

proptest! {
    // The whole pipeline (association, series, metrics, damage) on odd but well-formed values;
    // fewer cases because each one starts the binary.
    #![proptest_config(ProptestConfig { cases: 48, ..ProptestConfig::default() })]

    #[test]
    fn check_survives_edge_cell_values(
        edits in prop::collection::vec((any::<Index>(), any::<Index>(), edge_cell()), 1..12),
    ) {
        let (code, stderr) = check_with_cells(&edits);
        prop_assert!(
            !stderr.contains("panicked") && code != Some(101),
            "panic: {stderr}"
        );
        prop_assert!(
            code == Some(0) || code == Some(2),
            "exit {code:?}: {stderr}"
        );
    }
}

/// The mutation properties start from valid files: the unmutated base must parse.
#[test]
fn unmutated_base_files_parse() {
    let csv = base_file("points.csv");
    assert!(read_csv(&csv, Unit::Mm, None, true).is_ok());
    let geojson = String::from_utf8_lossy(&base_file("structures.geojson")).into_owned();
    assert!(read_geojson(&geojson, true).is_ok());
    let toml_text = String::from_utf8_lossy(&base_file("portfolio.toml")).into_owned();
    if let Err(e) = read_portfolio(&toml_text) {
        panic!("base portfolio does not parse: {e}");
    }
}
