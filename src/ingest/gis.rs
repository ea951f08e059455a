//! Footprints from GIS files: GeoPackage (`.gpkg`), Shapefile (`.shp` + `.dbf` + `.prj`) and
//! FlatGeobuf (`.fgb`).
//!
//! Owns choosing the reader by extension, choosing the GeoPackage layer, the CRS the file
//! declares (GeoPackage `gpkg_spatial_ref_sys`, Shapefile `.prj`, FlatGeobuf header) and its agreement with the
//! portfolio's `[structures] crs`, and turning each feature into the GeoJSON `Feature` value that
//! [`FeatureCheck`] validates, so the property mapping, validation and messages are the GeoJSON
//! reader's. Z and M values are dropped (x and y are used) with one `coordinates_3d` warning.
//! It does not reproject (see `ingest::load_structures`).

use std::path::Path;

use serde_json::{Value, json};

use super::footprints::{FeatureCheck, FootprintDefaults, RawStructure};
use crate::coords::Crs;
use crate::error::{InputError, Warnings};
use crate::portfolio::StructuresSpec;

/// The footprints file formats, chosen by extension.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    /// `.geojson`, `.json` and anything else: GeoJSON FeatureCollection.
    GeoJson,
    /// `.gpkg`: OGC GeoPackage.
    GeoPackage,
    /// `.shp` with its `.dbf` and `.prj`.
    Shapefile,
    /// `.fgb`: FlatGeobuf.
    FlatGeobuf,
}

/// The format of a footprints file, from its extension (case-insensitive).
pub fn format_of(path: &Path) -> Format {
    let ext = path
        .extension()
        .map(|e| e.to_string_lossy().to_ascii_lowercase());
    match ext.as_deref() {
        Some("gpkg") => Format::GeoPackage,
        Some("shp") => Format::Shapefile,
        Some("fgb") => Format::FlatGeobuf,
        _ => Format::GeoJson,
    }
}

/// The name of the format a footprints file (`points` false) or points file (`points` true) is
/// read as, chosen by its extension, for `plinth check`.
pub fn format_name(path: &Path, points: bool) -> &'static str {
    if points && super::parquet_points::is_parquet(path) {
        return "Parquet";
    }
    match (format_of(path), points) {
        (Format::GeoPackage, _) => "GeoPackage",
        (Format::Shapefile, _) => "Shapefile",
        (Format::FlatGeobuf, _) => "FlatGeobuf",
        (Format::GeoJson, false) => "GeoJSON",
        (Format::GeoJson, true) => "CSV",
    }
}

/// The files read beside a footprints file (a Shapefile's `.dbf`, `.prj` and `.shx` that exist),
/// for the manifest's input hashes.
pub fn sidecars(path: &Path) -> Vec<std::path::PathBuf> {
    if format_of(path) != Format::Shapefile {
        return Vec::new();
    }
    ["dbf", "prj", "shx"]
        .iter()
        .map(|e| path.with_extension(e))
        .filter(|p| p.is_file())
        .collect()
}

/// Read the footprints of a GeoPackage or Shapefile: the structures and the CRS of their
/// coordinates (the file's declared CRS, or the portfolio's when the file declares none).
pub fn read_footprints(
    spec: &StructuresSpec,
    format: Format,
    defaults: &FootprintDefaults,
    warnings: &mut Warnings,
) -> Result<(Vec<RawStructure>, Crs), InputError> {
    match format {
        Format::GeoPackage => gpkg::read(spec, defaults, warnings),
        Format::Shapefile => shp::read(spec, defaults, warnings),
        Format::FlatGeobuf => fgb::read(spec, defaults, warnings),
        Format::GeoJson => unreachable!("GeoJSON is read by ingest::footprints"),
    }
}

/// The CRS to use: the file's declared EPSG code (refused when the portfolio gave another), or
/// the portfolio's.
/// The CRS the portfolio states for a file: its `crs` key, whether it was written, and the key's
/// name for messages (`[structures] crs`, `datasets[0].crs`).
pub struct Stated<'a> {
    /// The CRS (the default when not written).
    pub crs: &'a str,
    /// True when written in the portfolio file.
    pub given: bool,
    /// The key, for messages.
    pub key: &'a str,
}

impl<'a> Stated<'a> {
    /// The `[structures]` CRS.
    pub fn structures(spec: &'a StructuresSpec) -> Stated<'a> {
        Stated {
            crs: &spec.crs,
            given: spec.crs_given,
            key: "[structures] crs",
        }
    }
}

pub(crate) fn settle_crs(
    spec: &Stated<'_>,
    file: &Path,
    loc: &str,
    declared: Option<u32>,
    warnings: &mut Warnings,
) -> Result<Crs, InputError> {
    let key = spec.key;
    let portfolio = Crs::parse(spec.crs).map_err(|e| {
        InputError::new(
            file,
            loc,
            e.to_string(),
            format!("set {key} to an EPSG code"),
        )
    })?;
    let Some(code) = declared else {
        if !spec.given {
            warnings.push(
                "default_applied",
                format!(
                    "{}: {loc}: the file does not declare its CRS; assuming {} ({key})",
                    file.display(),
                    spec.crs
                ),
            );
        }
        return Ok(portfolio);
    };
    if spec.given && portfolio.code() != code {
        return Err(InputError::new(
            file,
            loc,
            format!(
                "the file declares EPSG:{code} but the portfolio's {key} is {}",
                spec.crs
            ),
            format!(
                "remove {key} (the file's EPSG:{code} is used), or set it to \"EPSG:{code}\", \
                 or reproject the file"
            ),
        ));
    }
    Crs::from_epsg(code).map_err(|e| {
        InputError::new(
            file,
            loc,
            format!("the file's CRS EPSG:{code} is not supported: {e}"),
            "reproject the footprints to a supported CRS such as EPSG:4326 or a UTM zone",
        )
    })
}

/// A position list as GeoJSON `[[x, y], ...]`.
fn ring_json(points: impl Iterator<Item = (f64, f64)>) -> Value {
    Value::Array(points.map(|(x, y)| json!([x, y])).collect())
}

/// Warn (once per file) that Z/M values were dropped.
fn warn_zm(file: &Path, loc: &str, warnings: &mut Warnings) {
    {
        warnings.push(
            "coordinates_3d",
            format!(
                "{}: {loc}: geometries with Z (height) or M (measure) values; only x and y are used",
                file.display()
            ),
        );
    }
}

/// One feature of a GIS layer (its attributes and its geometry as GeoJSON) through the same
/// validation as a GeoJSON footprint.
fn check_feature(
    check: &mut FeatureCheck<'_>,
    i: usize,
    properties: serde_json::Map<String, Value>,
    geometry: Value,
) -> Result<(), InputError> {
    let feature = json!({"type": "Feature", "properties": properties, "geometry": geometry});
    check.feature(i, &feature)
}

/// The end every footprint reader shares: a layer of `features` features — none is refused,
/// `what` naming it ("the layer", "the Shapefile", …) — and dropped Z/M values noted once
/// (`loc` locates the layer, empty for a file of one layer).
fn finish_layer(
    mut check: FeatureCheck<'_>,
    file: &Path,
    loc: &str,
    what: &str,
    features: usize,
    zm_seen: bool,
) -> Result<Vec<RawStructure>, InputError> {
    if features == 0 {
        return Err(InputError::new(
            file,
            loc,
            format!("{what} has no features"),
            "a portfolio needs at least one structure",
        ));
    }
    if zm_seen {
        let at = if loc.is_empty() { "the layer" } else { loc };
        warn_zm(file, at, check.warnings());
    }
    Ok(check.finish())
}

/// Integral numbers become JSON integers (an id of 12 reads as "12", as in GeoJSON).
fn number_json(v: f64) -> Value {
    if v.fract() == 0.0 && v.abs() < 9.0e15 {
        json!(v as i64)
    } else {
        serde_json::Number::from_f64(v).map_or(Value::Null, Value::Number)
    }
}

/// The EPSG code a WKT CRS (a `.prj` file or a GeoPackage definition) names: its top-level
/// `AUTHORITY["EPSG", "code"]`, else a CRS of the bundled EPSG list with the same name once
/// case, punctuation and the Esri spellings (`GCS_`, `_1984`, `_1989`) are ignored.
pub fn wkt_epsg(wkt: &str) -> Option<u32> {
    let wkt = wkt.trim();
    if let Some(code) = top_level_authority(wkt) {
        return Some(code);
    }
    let name = normalise_crs_name(first_quoted(wkt)?);
    if name.is_empty() {
        return None;
    }
    (1024..=32767u16).find_map(|c| {
        let def = crs_definitions::from_code(c)?;
        let n = normalise_crs_name(first_quoted(def.wkt)?);
        (n == name).then_some(u32::from(c))
    })
}

fn first_quoted(s: &str) -> Option<&str> {
    let a = s.find('"')? + 1;
    let b = s[a..].find('"')? + a;
    Some(&s[a..b])
}

/// `AUTHORITY["EPSG","code"]` (or `ID["EPSG",code]`) at nesting depth 1 of the WKT.
fn top_level_authority(wkt: &str) -> Option<u32> {
    let mut depth = 0i32;
    let bytes = wkt.as_bytes();
    let mut found = None;
    for (i, &b) in bytes.iter().enumerate() {
        match b {
            b'[' | b'(' => depth += 1,
            b']' | b')' => depth -= 1,
            _ => {}
        }
        if depth == 1 && b == b',' {
            let rest = wkt[i + 1..].trim_start();
            for key in ["AUTHORITY[", "ID["] {
                if let Some(r) = rest.strip_prefix(key) {
                    let mut parts = r.splitn(3, ',');
                    let org = parts.next()?.trim().trim_matches('"');
                    let code = parts.next()?;
                    let code: String = code.chars().filter(char::is_ascii_digit).collect();
                    if org.eq_ignore_ascii_case("EPSG") {
                        found = code.parse().ok();
                    }
                }
            }
        }
    }
    found
}

fn normalise_crs_name(n: &str) -> String {
    let n = n.to_ascii_lowercase();
    let n = n.strip_prefix("gcs_").unwrap_or(&n);
    let n = n.replace("_1984", "84").replace("_1989", "89");
    n.chars().filter(char::is_ascii_alphanumeric).collect()
}

/// Parse ISO / extended WKB into a GeoJSON geometry value (2D). Polygon and MultiPolygon get
/// their coordinates; any other type only its name, which [`FeatureCheck`] refuses by name.
/// The flag is true when the geometry had Z or M values.
fn wkb_geometry(b: &[u8]) -> Result<(Value, bool), String> {
    let mut r = Wkb { b, at: 0 };
    let (v, zm) = r.geometry()?;
    Ok((v, zm))
}

struct Wkb<'a> {
    b: &'a [u8],
    at: usize,
}

impl Wkb<'_> {
    fn take(&mut self, n: usize) -> Result<&[u8], String> {
        let s = self
            .b
            .get(self.at..self.at + n)
            .ok_or("the geometry (WKB) is cut short")?;
        self.at += n;
        Ok(s)
    }

    fn u32(&mut self, le: bool) -> Result<u32, String> {
        let a: [u8; 4] = self.take(4)?.try_into().map_err(|_| "bad WKB")?;
        Ok(if le {
            u32::from_le_bytes(a)
        } else {
            u32::from_be_bytes(a)
        })
    }

    fn f64(&mut self, le: bool) -> Result<f64, String> {
        let a: [u8; 8] = self.take(8)?.try_into().map_err(|_| "bad WKB")?;
        Ok(if le {
            f64::from_le_bytes(a)
        } else {
            f64::from_be_bytes(a)
        })
    }

    /// Byte order, base type (1–7) and the number of ordinates per position.
    fn head(&mut self) -> Result<(bool, u32, usize), String> {
        let le = match self.take(1)?[0] {
            0 => false,
            1 => true,
            o => return Err(format!("the geometry (WKB) has an unknown byte order {o}")),
        };
        let t = self.u32(le)?;
        // Extended WKB: high flag bits for Z, M and an embedded SRID.
        let (ez, em, srid) = (
            t & 0x8000_0000 != 0,
            t & 0x4000_0000 != 0,
            t & 0x2000_0000 != 0,
        );
        if srid {
            self.u32(le)?;
        }
        let iso = t & 0x0FFF_FFFF;
        let (base, iz, im) = (
            iso % 1000,
            matches!(iso / 1000, 1 | 3),
            matches!(iso / 1000, 2 | 3),
        );
        let dims = 2 + usize::from(ez || iz) + usize::from(em || im);
        Ok((le, base, dims))
    }

    fn ring(&mut self, le: bool, dims: usize) -> Result<Value, String> {
        let n = self.u32(le)? as usize;
        if n > self.b.len() / 16 {
            return Err("the geometry (WKB) declares more positions than it holds".into());
        }
        let mut pts = Vec::with_capacity(n);
        for _ in 0..n {
            let x = self.f64(le)?;
            let y = self.f64(le)?;
            for _ in 2..dims {
                self.f64(le)?;
            }
            pts.push((x, y));
        }
        Ok(ring_json(pts.into_iter()))
    }

    fn polygon_body(&mut self, le: bool, dims: usize) -> Result<Value, String> {
        let n = self.u32(le)? as usize;
        let rings = (0..n)
            .map(|_| self.ring(le, dims))
            .collect::<Result<Vec<_>, _>>()?;
        Ok(Value::Array(rings))
    }

    fn geometry(&mut self) -> Result<(Value, bool), String> {
        let (le, base, dims) = self.head()?;
        let zm = dims > 2;
        let v = match base {
            3 => json!({"type": "Polygon", "coordinates": self.polygon_body(le, dims)?}),
            6 => {
                let n = self.u32(le)? as usize;
                let mut polys = Vec::with_capacity(n.min(1 << 16));
                for _ in 0..n {
                    let (ple, pbase, pdims) = self.head()?;
                    if pbase != 3 {
                        return Err(format!("a MultiPolygon holds a WKB type {pbase} part"));
                    }
                    polys.push(self.polygon_body(ple, pdims)?);
                }
                json!({"type": "MultiPolygon", "coordinates": polys})
            }
            1 => {
                let (x, y) = (self.f64(le)?, self.f64(le)?);
                for _ in 2..dims {
                    self.f64(le)?;
                }
                json!({"type": "Point", "coordinates": [x, y]})
            }
            2 => json!({"type": "LineString", "coordinates": []}),
            4 => json!({"type": "MultiPoint", "coordinates": []}),
            5 => json!({"type": "MultiLineString", "coordinates": []}),
            7 => json!({"type": "GeometryCollection", "coordinates": []}),
            other => json!({"type": format!("WKB type {other}"), "coordinates": []}),
        };
        Ok((v, zm))
    }
}

pub(crate) mod gpkg {
    use rusqlite::types::ValueRef;
    use rusqlite::{Connection, OpenFlags};

    use super::*;

    /// One feature layer: table, geometry column, srs_id.
    pub(crate) struct Layer {
        pub(crate) table: String,
        pub(crate) column: String,
        pub(crate) srs_id: i64,
    }

    pub(crate) fn sql_err(file: &Path, e: rusqlite::Error) -> InputError {
        let not_db = matches!(
            &e,
            rusqlite::Error::SqliteFailure(f, _) if f.code == rusqlite::ErrorCode::NotADatabase
        );
        if not_db {
            InputError::new(
                file,
                "",
                "not a GeoPackage: the file is not an SQLite database",
                "export the footprints again as GeoPackage (.gpkg), or give the file its real extension",
            )
        } else {
            InputError::new(
                file,
                "",
                format!("cannot read the GeoPackage: {e}"),
                "check the file opens in a GIS; export it again if it is damaged",
            )
        }
    }

    pub(crate) fn layers(conn: &Connection, file: &Path) -> Result<Vec<Layer>, InputError> {
        let mut stmt = conn
            .prepare(
                "SELECT c.table_name, g.column_name, g.srs_id FROM gpkg_contents c \
                 JOIN gpkg_geometry_columns g ON g.table_name = c.table_name \
                 WHERE c.data_type = 'features' ORDER BY c.table_name",
            )
            .map_err(|e| match e {
                rusqlite::Error::SqliteFailure(..) if e.to_string().contains("no such table") => {
                    InputError::new(
                        file,
                        "",
                        "not a GeoPackage: an SQLite file without the gpkg_contents and \
                         gpkg_geometry_columns tables",
                        "export the footprints as GeoPackage from a GIS",
                    )
                }
                e => sql_err(file, e),
            })?;
        let rows = stmt
            .query_map([], |r| {
                Ok(Layer {
                    table: r.get(0)?,
                    column: r.get(1)?,
                    srs_id: r.get(2)?,
                })
            })
            .map_err(|e| sql_err(file, e))?;
        rows.collect::<Result<_, _>>().map_err(|e| sql_err(file, e))
    }

    /// The layer named by the portfolio key `key` (`structures.layer`, `datasets[0].layer`), or
    /// the only one.
    pub(crate) fn choose(
        layers: Vec<Layer>,
        wanted: Option<&str>,
        key: &str,
        file: &Path,
    ) -> Result<Layer, InputError> {
        let names = layers
            .iter()
            .map(|l| format!("`{}`", l.table))
            .collect::<Vec<_>>()
            .join(", ");
        match wanted {
            Some(w) => {
                let n = layers.len();
                layers.into_iter().find(|l| l.table == w).ok_or_else(|| {
                    InputError::new(
                        file,
                        format!("key {key}"),
                        format!(
                            "no feature layer `{w}`; the file has {}",
                            if n == 0 {
                                "none".to_string()
                            } else {
                                names.clone()
                            }
                        ),
                        format!("set {key} to one of the names listed"),
                    )
                })
            }
            None if layers.len() == 1 => Ok(layers.into_iter().next().expect("one layer")),
            None if layers.is_empty() => Err(InputError::new(
                file,
                "",
                "the GeoPackage has no feature layer",
                "export the footprints polygons into it",
            )),
            None => Err(InputError::new(
                file,
                "",
                format!(
                    "the GeoPackage has {} feature layers: {names}",
                    layers.len()
                ),
                format!("choose one with {key} = \"NAME\""),
            )),
        }
    }

    /// The EPSG code of a GeoPackage srs_id (None for the undefined systems 0 and -1).
    pub(crate) fn declared_epsg(conn: &Connection, srs_id: i64) -> Option<u32> {
        let (org, code, def): (String, i64, String) = conn
            .query_row(
                "SELECT organization, organization_coordsys_id, definition \
                 FROM gpkg_spatial_ref_sys WHERE srs_id = ?1",
                [srs_id],
                |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)),
            )
            .ok()?;
        if org.eq_ignore_ascii_case("EPSG") && code > 0 {
            return u32::try_from(code).ok();
        }
        if srs_id <= 0 {
            return None;
        }
        wkt_epsg(&def)
    }

    /// The GeoJSON geometry of a GeoPackage geometry blob (None when NULL or empty).
    pub(crate) fn blob_geometry(b: &[u8]) -> Result<Option<(Value, bool)>, String> {
        if b.len() < 8 || &b[0..2] != b"GP" {
            return Err("the geometry is not a GeoPackage geometry blob".into());
        }
        let flags = b[3];
        if flags & (1 << 4) != 0 {
            return Ok(None);
        }
        let env = match (flags >> 1) & 0b111 {
            0 => 0,
            1 => 32,
            2 | 3 => 48,
            4 => 64,
            e => {
                return Err(format!(
                    "the geometry header has an unknown envelope code {e}"
                ));
            }
        };
        let wkb = b.get(8 + env..).ok_or("the geometry blob is cut short")?;
        wkb_geometry(wkb).map(Some)
    }

    fn sql_json(v: ValueRef<'_>) -> Value {
        match v {
            ValueRef::Null | ValueRef::Blob(_) => Value::Null,
            ValueRef::Integer(i) => json!(i),
            ValueRef::Real(f) => number_json(f),
            ValueRef::Text(t) => Value::String(String::from_utf8_lossy(t).into_owned()),
        }
    }

    pub(super) fn read(
        spec: &StructuresSpec,
        defaults: &FootprintDefaults,
        warnings: &mut Warnings,
    ) -> Result<(Vec<RawStructure>, Crs), InputError> {
        let file = spec.path.as_path();
        let conn = Connection::open_with_flags(file, OpenFlags::SQLITE_OPEN_READ_ONLY)
            .map_err(|e| sql_err(file, e))?;
        let layer = choose(
            layers(&conn, file)?,
            spec.layer.as_deref(),
            "structures.layer",
            file,
        )?;
        let lloc = format!("layer `{}`", layer.table);
        let crs = settle_crs(
            &Stated::structures(spec),
            file,
            &lloc,
            declared_epsg(&conn, layer.srs_id),
            warnings,
        )?;
        let pk: String = conn
            .query_row(
                "SELECT name FROM pragma_table_info(?1) WHERE pk = 1",
                [&layer.table],
                |r| r.get(0),
            )
            .map_err(|e| sql_err(file, e))?;
        let q = |s: &str| format!("\"{}\"", s.replace('"', "\"\""));
        let mut stmt = conn
            .prepare(&format!(
                "SELECT * FROM {} ORDER BY {}",
                q(&layer.table),
                q(&pk)
            ))
            .map_err(|e| sql_err(file, e))?;
        let names: Vec<String> = stmt.column_names().iter().map(|s| s.to_string()).collect();
        let mut rows = stmt.query([]).map_err(|e| sql_err(file, e))?;
        let mut check = FeatureCheck::new(
            file,
            &spec.id_property,
            crs.is_geographic(),
            defaults,
            warnings,
        )
        .in_layer(&layer.table);
        let mut zm_seen = false;
        let mut features = 0usize;
        while let Some(row) = rows.next().map_err(|e| sql_err(file, e))? {
            features += 1;
            let mut fid = 0i64;
            let mut geometry = Value::Null;
            let mut props = serde_json::Map::new();
            for (i, n) in names.iter().enumerate() {
                let v = row.get_ref(i).map_err(|e| sql_err(file, e))?;
                if *n == pk {
                    fid = v.as_i64().unwrap_or(0);
                } else if *n == layer.column {
                    if let ValueRef::Blob(b) = v {
                        match blob_geometry(b) {
                            Ok(Some((g, zm))) => {
                                zm_seen |= zm;
                                geometry = g;
                            }
                            Ok(None) => {}
                            Err(e) => {
                                return Err(InputError::new(
                                    file,
                                    format!("{lloc}, feature {fid}"),
                                    e,
                                    "repair the geometry in a GIS or export the layer again",
                                ));
                            }
                        }
                    }
                } else {
                    props.insert(n.clone(), sql_json(v));
                }
            }
            check_feature(
                &mut check,
                usize::try_from(fid).unwrap_or(0),
                props,
                geometry,
            )?;
        }
        drop(rows);
        let out = finish_layer(check, file, &lloc, "the layer", features, zm_seen)?;
        Ok((out, crs))
    }
}

pub(crate) mod shp {
    use shapefile::dbase::FieldValue;
    use shapefile::{PolygonRing, Shape};

    use super::*;

    /// Outer rings start a polygon; inner rings are holes of the polygon before them.
    fn polygons<P>(
        rings: &[PolygonRing<P>],
        xy: impl Fn(&P) -> (f64, f64),
    ) -> Result<Value, String> {
        let mut polys: Vec<Vec<Value>> = Vec::new();
        for r in rings {
            let ring = ring_json(r.points().iter().map(&xy));
            match r {
                PolygonRing::Outer(_) => polys.push(vec![ring]),
                PolygonRing::Inner(_) => polys
                    .last_mut()
                    .ok_or("a hole (inner ring) comes before any outer ring")?
                    .push(ring),
            }
        }
        Ok(json!({"type": "MultiPolygon", "coordinates": polys}))
    }

    /// The GeoJSON geometry of a shape and whether it carried Z/M values.
    fn shape_geometry(s: &Shape) -> Result<(Value, bool), String> {
        let other = |t: &str| json!({"type": t, "coordinates": []});
        Ok(match s {
            Shape::NullShape => (Value::Null, false),
            Shape::Polygon(p) => (polygons(p.rings(), |q| (q.x, q.y))?, false),
            Shape::PolygonM(p) => (polygons(p.rings(), |q| (q.x, q.y))?, true),
            Shape::PolygonZ(p) => (polygons(p.rings(), |q| (q.x, q.y))?, true),
            Shape::Point(_) | Shape::PointM(_) | Shape::PointZ(_) => (other("Point"), false),
            Shape::Polyline(_) | Shape::PolylineM(_) | Shape::PolylineZ(_) => {
                (other("LineString"), false)
            }
            Shape::Multipoint(_) | Shape::MultipointM(_) | Shape::MultipointZ(_) => {
                (other("MultiPoint"), false)
            }
            Shape::Multipatch(_) => (other("Multipatch"), false),
        })
    }

    fn field_json(v: FieldValue) -> Value {
        match v {
            FieldValue::Character(Some(s)) | FieldValue::Memo(s) => {
                Value::String(s.trim_end().to_string())
            }
            FieldValue::Numeric(Some(f)) | FieldValue::Double(f) | FieldValue::Currency(f) => {
                number_json(f)
            }
            FieldValue::Float(Some(f)) => number_json(f64::from(f)),
            FieldValue::Integer(i) => json!(i),
            FieldValue::Logical(Some(b)) => Value::Bool(b),
            FieldValue::Date(Some(d)) => {
                Value::String(format!("{:04}-{:02}-{:02}", d.year(), d.month(), d.day()))
            }
            _ => Value::Null,
        }
    }

    /// The EPSG code the `.prj` beside the `.shp` names; an error when it is missing (unless the
    /// portfolio states the CRS) or names no CRS Plinth can identify.
    pub(crate) fn prj_epsg(
        spec: &Stated<'_>,
        file: &Path,
        warnings: &mut Warnings,
    ) -> Result<Option<u32>, InputError> {
        let prj = file.with_extension("prj");
        let text = match std::fs::read_to_string(&prj) {
            Ok(t) => t,
            Err(_) if spec.given => {
                warnings.push(
                    "default_applied",
                    format!(
                        "{}: no .prj beside the Shapefile; using {} = {}",
                        file.display(),
                        spec.key,
                        spec.crs
                    ),
                );
                return Ok(None);
            }
            Err(e) => {
                return Err(InputError::new(
                    &prj,
                    "",
                    format!(
                        "cannot read the Shapefile's .prj ({e}): the CRS of the footprints is unknown"
                    ),
                    format!(
                        "copy the .prj that came with the .shp beside it, or state the CRS with {} = \"EPSG:<code>\"",
                        spec.key
                    ),
                ));
            }
        };
        match wkt_epsg(&text) {
            Some(c) => Ok(Some(c)),
            None if spec.given => {
                warnings.push(
                    "default_applied",
                    format!(
                        "{}: the CRS `{}` is not one Plinth can identify; using {} = {}",
                        prj.display(),
                        first_quoted(&text).unwrap_or("?"),
                        spec.key,
                        spec.crs
                    ),
                );
                Ok(None)
            }
            None => Err(InputError::new(
                &prj,
                "",
                format!(
                    "the CRS `{}` is not one Plinth can identify (no EPSG code or known name)",
                    first_quoted(&text).unwrap_or(text.trim())
                ),
                format!(
                    "state it with {} = \"EPSG:<code>\" (it is then used as given)",
                    spec.key
                ),
            )),
        }
    }

    /// Check the `.shp` header's length against the file: a cut file is named before any
    /// record is read.
    pub(crate) fn check_length(file: &Path, header_words: i32) -> Result<(), InputError> {
        let actual = std::fs::metadata(file).map(|m| m.len()).unwrap_or(0);
        let declared = u64::try_from(header_words).unwrap_or(0) * 2;
        if actual < declared {
            return Err(InputError::new(
                file,
                "",
                format!(
                    "the .shp file is truncated: its header says {declared} bytes, the file has {actual}"
                ),
                "copy or export the Shapefile again (all of .shp, .shx, .dbf and .prj)",
            ));
        }
        Ok(())
    }

    /// The reader of the Shapefile `file`, its length checked against its header; a missing
    /// .dbf is named as such, `dbf_holds` saying what it would have held.
    pub(crate) fn open(
        file: &Path,
        dbf_holds: &str,
    ) -> Result<
        shapefile::Reader<std::io::BufReader<std::fs::File>, std::io::BufReader<std::fs::File>>,
        InputError,
    > {
        let reader = shapefile::Reader::from_path(file).map_err(|e| match e {
            shapefile::Error::MissingDbf => InputError::new(
                &file.with_extension("dbf"),
                "",
                format!("the Shapefile's .dbf ({dbf_holds}) is missing"),
                "copy the .dbf that came with the .shp beside it (same name)",
            ),
            e => InputError::new(
                file,
                "",
                format!("cannot read the Shapefile: {e}"),
                "check the file opens in a GIS; export it again if it is damaged",
            ),
        })?;
        check_length(file, reader.header().file_length)?;
        Ok(reader)
    }

    pub(super) fn read(
        spec: &StructuresSpec,
        defaults: &FootprintDefaults,
        warnings: &mut Warnings,
    ) -> Result<(Vec<RawStructure>, Crs), InputError> {
        let file = spec.path.as_path();
        let mut reader = open(file, "its attribute table")?;
        let stated = Stated::structures(spec);
        let declared = prj_epsg(&stated, file, warnings)?;
        let crs = settle_crs(&stated, file, "", declared, warnings)?;
        let mut check = FeatureCheck::new(
            file,
            &spec.id_property,
            crs.is_geographic(),
            defaults,
            warnings,
        );
        let mut zm_seen = false;
        let mut n = 0usize;
        for (i, item) in reader.iter_shapes_and_records().enumerate() {
            n += 1;
            let loc = format!("feature {i}");
            let (shape, record) = item.map_err(|e| {
                InputError::new(
                    file,
                    &loc,
                    format!(
                        "cannot read the record: {e} (the .shp or .dbf is truncated or damaged)"
                    ),
                    "copy or export the Shapefile again (all of .shp, .shx, .dbf and .prj)",
                )
            })?;
            let (geometry, zm) = shape_geometry(&shape).map_err(|e| {
                InputError::new(
                    file,
                    &loc,
                    e,
                    "repair the polygon in a GIS (outer ring first, then its holes)",
                )
            })?;
            zm_seen |= zm;
            let props: serde_json::Map<String, Value> = record
                .into_iter()
                .map(|(k, v)| (k, field_json(v)))
                .collect();
            check_feature(&mut check, i, props, geometry)?;
        }
        let out = finish_layer(check, file, "", "the Shapefile", n, zm_seen)?;
        Ok((out, crs))
    }
}

pub(crate) mod fgb {
    use flatgeobuf::geozero::{ColumnValue, FeatureProperties, PropertyProcessor};
    use flatgeobuf::{FallibleStreamingIterator, FgbReader, GeometryType};

    use super::*;

    fn damaged(file: &Path, loc: &str, e: impl std::fmt::Display) -> InputError {
        InputError::new(
            file,
            loc,
            format!("cannot read the FlatGeobuf file: {e}"),
            "check the file opens in a GIS; export it again if it is damaged or cut short",
        )
    }

    /// Typed attribute values into a JSON map.
    struct Props(serde_json::Map<String, Value>);

    impl PropertyProcessor for Props {
        fn property(
            &mut self,
            _: usize,
            name: &str,
            v: &ColumnValue,
        ) -> flatgeobuf::geozero::error::Result<bool> {
            let j = match v {
                ColumnValue::Byte(x) => json!(x),
                ColumnValue::UByte(x) => json!(x),
                ColumnValue::Bool(x) => json!(x),
                ColumnValue::Short(x) => json!(x),
                ColumnValue::UShort(x) => json!(x),
                ColumnValue::Int(x) => json!(x),
                ColumnValue::UInt(x) => json!(x),
                ColumnValue::Long(x) => json!(x),
                ColumnValue::ULong(x) => json!(x),
                ColumnValue::Float(x) => number_json(f64::from(*x)),
                ColumnValue::Double(x) => number_json(*x),
                ColumnValue::String(x) | ColumnValue::Json(x) | ColumnValue::DateTime(x) => {
                    json!(x)
                }
                ColumnValue::Binary(_) => Value::Null,
            };
            self.0.insert(name.to_string(), j);
            Ok(false)
        }
    }

    /// Rings of a polygon part: `xy` cut at `ends` (one ring when absent).
    fn rings(g: &flatgeobuf::Geometry<'_>) -> Value {
        let xy: Vec<f64> = g.xy().map(|v| v.iter().collect()).unwrap_or_default();
        let n = xy.len() / 2;
        let ends: Vec<usize> = match g.ends() {
            Some(e) if !e.is_empty() => e.iter().map(|x| x as usize).collect(),
            _ => vec![n],
        };
        let mut start = 0;
        let mut out = Vec::with_capacity(ends.len());
        for end in ends {
            let end = end.min(n);
            out.push(ring_json((start..end).map(|i| (xy[2 * i], xy[2 * i + 1]))));
            start = end;
        }
        Value::Array(out)
    }

    fn geometry(g: &flatgeobuf::Geometry<'_>, layer_type: GeometryType) -> Value {
        let t = if layer_type == GeometryType::Unknown {
            g.type_()
        } else {
            layer_type
        };
        match t {
            GeometryType::Polygon => json!({"type": "Polygon", "coordinates": rings(g)}),
            GeometryType::MultiPolygon => {
                let parts: Vec<Value> = g
                    .parts()
                    .map(|p| p.iter().map(|q| rings(&q)).collect())
                    .unwrap_or_else(|| vec![rings(g)]);
                json!({"type": "MultiPolygon", "coordinates": parts})
            }
            other => json!({"type": format!("{other:?}"), "coordinates": []}),
        }
    }

    pub(super) fn read(
        spec: &StructuresSpec,
        defaults: &FootprintDefaults,
        warnings: &mut Warnings,
    ) -> Result<(Vec<RawStructure>, Crs), InputError> {
        let file = spec.path.as_path();
        let f = std::fs::File::open(file).map_err(|e| damaged(file, "", e))?;
        let mut buf = std::io::BufReader::new(f);
        let reader = FgbReader::open(&mut buf).map_err(|e| damaged(file, "", e))?;
        let header = reader.header();
        let layer_type = header.geometry_type();
        let zm = header.has_z() || header.has_m();
        let declared = header.crs().and_then(|c| {
            let org = c.org().unwrap_or("EPSG");
            (org.eq_ignore_ascii_case("EPSG") && c.code() > 0)
                .then(|| u32::try_from(c.code()).ok())
                .flatten()
                .or_else(|| c.wkt().and_then(wkt_epsg))
        });
        let name = header.name().unwrap_or("").to_string();
        let lloc = if name.is_empty() {
            String::new()
        } else {
            format!("layer `{name}`")
        };
        let crs = settle_crs(&Stated::structures(spec), file, &lloc, declared, warnings)?;
        let mut iter = reader
            .select_all_seq()
            .map_err(|e| damaged(file, &lloc, e))?;
        let mut check = FeatureCheck::new(
            file,
            &spec.id_property,
            crs.is_geographic(),
            defaults,
            warnings,
        );
        if !name.is_empty() {
            check = check.in_layer(&name);
        }
        let mut i = 0usize;
        loop {
            let loc = format!(
                "{}feature {i}",
                if name.is_empty() {
                    String::new()
                } else {
                    format!("{lloc}, ")
                }
            );
            let Some(feature) = iter.next().map_err(|e| damaged(file, &loc, e))? else {
                break;
            };
            let mut props = Props(serde_json::Map::new());
            feature
                .process_properties(&mut props)
                .map_err(|e| damaged(file, &loc, e))?;
            let geom = feature
                .geometry()
                .map_or(Value::Null, |g| geometry(&g, layer_type));
            check_feature(&mut check, i, props.0, geom)?;
            i += 1;
        }
        let out = finish_layer(check, file, &lloc, "the FlatGeobuf file", i, zm)?;
        Ok((out, crs))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn format_follows_the_extension() {
        assert_eq!(format_of(Path::new("a/b.GPKG")), Format::GeoPackage);
        assert_eq!(format_of(Path::new("b.shp")), Format::Shapefile);
        assert_eq!(format_of(Path::new("b.geojson")), Format::GeoJson);
        assert_eq!(format_of(Path::new("b")), Format::GeoJson);
    }

    #[test]
    fn prj_names_are_identified() {
        let esri_utm = "PROJCS[\"WGS_1984_UTM_Zone_32N\",GEOGCS[\"GCS_WGS_1984\",DATUM[\"D_WGS_1984\",\
            SPHEROID[\"WGS_1984\",6378137.0,298.257223563]],PRIMEM[\"Greenwich\",0.0],\
            UNIT[\"Degree\",0.0174532925199433]],PROJECTION[\"Transverse_Mercator\"],UNIT[\"Meter\",1.0]]";
        assert_eq!(wkt_epsg(esri_utm), Some(32632));
        let esri_geo = "GEOGCS[\"GCS_WGS_1984\",DATUM[\"D_WGS_1984\",SPHEROID[\"WGS_1984\",6378137.0,\
            298.257223563]],PRIMEM[\"Greenwich\",0.0],UNIT[\"Degree\",0.0174532925199433]]";
        assert_eq!(wkt_epsg(esri_geo), Some(4326));
        assert_eq!(
            wkt_epsg("PROJCS[\"ETRS_1989_UTM_Zone_33N\",GEOGCS[\"x\"]]"),
            Some(25833)
        );
        // The top-level authority wins over the name; nested authorities are not the CRS's.
        let with_auth = "PROJCS[\"whatever\",GEOGCS[\"WGS 84\",AUTHORITY[\"EPSG\",\"4326\"]],\
            AUTHORITY[\"EPSG\",\"3035\"]]";
        assert_eq!(wkt_epsg(with_auth), Some(3035));
        assert_eq!(wkt_epsg("PROJCS[\"My local grid\",GEOGCS[\"x\"]]"), None);
    }

    fn le(v: &mut Vec<u8>, t: u32) {
        v.push(1);
        v.extend_from_slice(&t.to_le_bytes());
    }

    #[test]
    fn wkb_polygon_z_drops_z_and_keeps_rings() {
        let mut b = Vec::new();
        le(&mut b, 1003); // ISO Polygon Z
        b.extend_from_slice(&1u32.to_le_bytes());
        b.extend_from_slice(&4u32.to_le_bytes());
        for (x, y) in [(0.0, 0.0), (1.0, 0.0), (0.0, 1.0), (0.0, 0.0)] {
            for v in [x, y, 9.5f64] {
                b.extend_from_slice(&v.to_le_bytes());
            }
        }
        let (g, zm) = wkb_geometry(&b).unwrap();
        assert!(zm);
        assert_eq!(
            g,
            json!({"type": "Polygon", "coordinates": [[[0.0, 0.0], [1.0, 0.0], [0.0, 1.0], [0.0, 0.0]]]})
        );
    }

    #[test]
    fn wkb_big_endian_multipolygon_and_other_types() {
        let mut b = vec![0u8];
        b.extend_from_slice(&6u32.to_be_bytes());
        b.extend_from_slice(&1u32.to_be_bytes());
        b.push(0);
        b.extend_from_slice(&3u32.to_be_bytes());
        b.extend_from_slice(&1u32.to_be_bytes());
        b.extend_from_slice(&4u32.to_be_bytes());
        for (x, y) in [(2.0, 2.0), (3.0, 2.0), (2.0, 3.0), (2.0, 2.0)] {
            b.extend_from_slice(&f64::to_be_bytes(x));
            b.extend_from_slice(&f64::to_be_bytes(y));
        }
        let (g, zm) = wkb_geometry(&b).unwrap();
        assert!(!zm);
        assert_eq!(g["type"], "MultiPolygon");
        assert_eq!(g["coordinates"][0][0][1], json!([3.0, 2.0]));
        let mut p = Vec::new();
        le(&mut p, 1);
        p.extend_from_slice(&[0u8; 16]);
        assert_eq!(wkb_geometry(&p).unwrap().0["type"], "Point");
        assert!(wkb_geometry(&b[..20]).unwrap_err().contains("cut short"));
    }
}
