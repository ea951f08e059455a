//! Footprints GeoJSON reader: a FeatureCollection of Polygon/MultiPolygon structures.
//!
//! Owns: parsing, validating every feature (id present and unique, rings closed with ≥ 4
//! positions, non-zero area, no self-intersection, coordinates in range for geographic CRSs),
//! reading the documented properties with recorded fallbacks. Returns footprints in the
//! footprint file's own CRS; reprojection happens in `ingest::load`.
//! It does not associate points or compute metrics.

use std::path::Path;

use geo::{Area, LineString, MultiPolygon, Polygon, Validation};
use serde_json::Value;

use crate::coords::{GeographicCheck, check_geographic};
use crate::error::{InputError, Warnings};

/// One structure read from the footprints file (coordinates still in the file's CRS).
#[derive(Debug, Clone)]
pub struct RawStructure {
    /// 0-based feature index in the file.
    pub feature_index: usize,
    /// Structure id (from the id property; numbers are written as text).
    pub id: String,
    /// Display name (`name` property; falls back to the id).
    pub name: String,
    /// Height to eaves, m (`height_m`; falls back to the portfolio default).
    pub height_m: f64,
    /// `masonry` | `frame` (`structure`; falls back to the portfolio default).
    pub structure_type: String,
    /// Optional criteria set name (`criteria`).
    pub criteria: Option<String>,
    /// Footprint in the file's CRS, as read (`load_structures` empties it once the analysis,
    /// WGS84 and local copies are made).
    pub footprint: MultiPolygon<f64>,
    /// Which properties fell back to defaults, e.g. `height_m = 6 (default)`.
    pub fallbacks: Vec<String>,
}

/// Defaults for missing optional properties.
#[derive(Debug, Clone)]
pub struct FootprintDefaults {
    /// Height used when `height_m` is absent, m.
    pub height_m: f64,
    /// Structure type used when `structure` is absent.
    pub structure_type: String,
}

fn feature_loc(i: usize, id: Option<&str>) -> String {
    match id {
        Some(id) => format!("feature {} (id \"{}\")", i, id),
        None => format!("feature {}", i),
    }
}

fn parse_ring(
    v: &Value,
    file: &Path,
    loc: &str,
    geographic: bool,
    warnings: &mut Warnings,
    warned_3d: &mut bool,
) -> Result<LineString<f64>, InputError> {
    let arr = v.as_array().ok_or_else(|| {
        InputError::new(
            file,
            loc,
            "a polygon ring is not an array of positions",
            "each ring is [[x, y], [x, y], ...]",
        )
    })?;
    let mut coords = Vec::with_capacity(arr.len());
    for (j, pos) in arr.iter().enumerate() {
        let p = pos.as_array().ok_or_else(|| {
            InputError::new(
                file,
                loc,
                format!("position {j} is not an array"),
                "positions are [x, y] or [x, y, z]",
            )
        })?;
        if p.len() < 2 {
            return Err(InputError::new(
                file,
                loc,
                format!("position {j} has fewer than 2 coordinates"),
                "positions are [x, y] or [x, y, z]",
            ));
        }
        if p.len() > 2 && !*warned_3d {
            *warned_3d = true;
            warnings.push(
                "coordinates_3d",
                format!(
                    "{}: {loc}: 3-D coordinates found; the third value (height) is ignored",
                    file.display()
                ),
            );
        }
        let x = p[0].as_f64();
        let y = p[1].as_f64();
        let (Some(x), Some(y)) = (x, y) else {
            return Err(InputError::new(
                file,
                loc,
                format!("position {j} has a non-numeric coordinate"),
                "coordinates must be JSON numbers",
            ));
        };
        if !x.is_finite() || !y.is_finite() {
            return Err(InputError::new(
                file,
                loc,
                format!("position {j} is not finite"),
                "coordinates must be finite numbers",
            ));
        }
        if geographic {
            match check_geographic(x, y) {
                GeographicCheck::Plausible => {}
                GeographicCheck::LooksSwapped => {
                    return Err(InputError::new(
                        file,
                        loc,
                        format!(
                            "position {j} ({x}, {y}) is not a valid longitude/latitude: latitude beyond ±90°"
                        ),
                        "the axes look swapped: GeoJSON positions are [longitude, latitude]",
                    ));
                }
                GeographicCheck::LooksProjected => {
                    return Err(InputError::new(
                        file,
                        loc,
                        format!(
                            "position {j} ({x}, {y}) is out of range for longitude/latitude degrees"
                        ),
                        "these look like projected metres: set [structures] crs = \"EPSG:<code>\" of the file",
                    ));
                }
            }
        }
        coords.push(geo::Coord { x, y });
    }
    if coords.len() < 4 {
        return Err(InputError::new(
            file,
            loc,
            format!(
                "a ring has {} positions; at least 4 are needed (a closed triangle)",
                coords.len()
            ),
            "remove empty or degenerate rings",
        ));
    }
    if coords.first() != coords.last() {
        return Err(InputError::new(
            file,
            loc,
            "a ring is not closed (its first and last positions differ)",
            "repeat the first position at the end of the ring (RFC 7946 §3.1.6)",
        ));
    }
    Ok(LineString::new(coords))
}

fn parse_polygon(
    v: &Value,
    file: &Path,
    loc: &str,
    geographic: bool,
    warnings: &mut Warnings,
    warned_3d: &mut bool,
) -> Result<Polygon<f64>, InputError> {
    let rings = v.as_array().ok_or_else(|| {
        InputError::new(
            file,
            loc,
            "polygon coordinates are not an array of rings",
            "a Polygon is [[ring], [hole], ...]",
        )
    })?;
    if rings.is_empty() {
        return Err(InputError::new(
            file,
            loc,
            "the polygon has no rings (empty geometry)",
            "remove the feature or give it a footprint",
        ));
    }
    let mut parsed = Vec::with_capacity(rings.len());
    for r in rings {
        parsed.push(parse_ring(r, file, loc, geographic, warnings, warned_3d)?);
    }
    let exterior = parsed.remove(0);
    Ok(Polygon::new(exterior, parsed))
}

/// Validates footprint features one at a time and keeps the structures read. Every footprint
/// reader (GeoJSON here, GeoPackage, Shapefile and FlatGeobuf in `ingest::gis`) hands it each
/// feature as a GeoJSON `Feature` value, so the property mapping, validation and messages are one.
pub struct FeatureCheck<'a> {
    path: &'a Path,
    id_property: &'a str,
    geographic: bool,
    defaults: &'a FootprintDefaults,
    warnings: &'a mut Warnings,
    /// Put before `feature N` in locations, e.g. ``layer `buildings`, ``.
    loc_prefix: String,
    out: Vec<RawStructure>,
    seen: std::collections::HashMap<String, usize>,
    warned_3d: bool,
}

impl<'a> FeatureCheck<'a> {
    /// A check of the features of `path`.
    pub fn new(
        path: &'a Path,
        id_property: &'a str,
        geographic: bool,
        defaults: &'a FootprintDefaults,
        warnings: &'a mut Warnings,
    ) -> FeatureCheck<'a> {
        FeatureCheck {
            path,
            id_property,
            geographic,
            defaults,
            warnings,
            loc_prefix: String::new(),
            out: Vec::new(),
            seen: std::collections::HashMap::new(),
            warned_3d: false,
        }
    }

    /// Name a layer in every location (``layer `NAME`, feature N``).
    pub fn in_layer(mut self, layer: &str) -> FeatureCheck<'a> {
        self.loc_prefix = format!("layer `{layer}`, ");
        self
    }

    /// Structures read so far.
    pub fn count(&self) -> usize {
        self.out.len()
    }

    /// The structures read, in feature order.
    pub fn finish(self) -> Vec<RawStructure> {
        self.out
    }

    /// The run's warnings (for a reader's own notes while the check holds them).
    pub fn warnings(&mut self) -> &mut Warnings {
        self.warnings
    }

    /// Validate feature number `i` (a GeoJSON `Feature` value) and keep its structure.
    pub fn feature(&mut self, i: usize, f: &Value) -> Result<(), InputError> {
        let (path, id_property, geographic, defaults) =
            (self.path, self.id_property, self.geographic, self.defaults);
        let warnings = &mut *self.warnings;
        let feature_loc =
            |i: usize, id: Option<&str>| format!("{}{}", self.loc_prefix, feature_loc(i, id));
        let props = f.get("properties").and_then(Value::as_object);
        let id = props
            .and_then(|p| p.get(id_property))
            .and_then(|v| match v {
                Value::String(s) if !s.trim().is_empty() => Some(s.trim().to_string()),
                Value::Number(n) => Some(n.to_string()),
                _ => None,
            });
        let Some(id) = id else {
            return Err(InputError::new(
                path,
                feature_loc(i, None),
                format!("the id property `{id_property}` is missing or empty"),
                format!(
                    "give every feature a unique \"{id_property}\" property, or set [structures] id_property"
                ),
            ));
        };
        let loc = feature_loc(i, Some(&id));
        if let Some(first) = self.seen.get(&id) {
            return Err(InputError::new(
                path,
                loc,
                format!("duplicate id \"{id}\" (also feature {first})"),
                "structure ids must be unique",
            ));
        }
        self.seen.insert(id.clone(), i);
        let geom = f.get("geometry").filter(|g| !g.is_null()).ok_or_else(|| {
            InputError::new(
                path,
                &loc,
                "the feature has no geometry",
                "give it a Polygon or MultiPolygon footprint",
            )
        })?;
        let gtype = geom.get("type").and_then(Value::as_str).unwrap_or("");
        let coords = geom.get("coordinates").ok_or_else(|| {
            InputError::new(
                path,
                &loc,
                "the geometry has no coordinates",
                "a Polygon needs \"coordinates\"",
            )
        })?;
        let footprint = match gtype {
            "Polygon" => MultiPolygon::new(vec![parse_polygon(
                coords,
                path,
                &loc,
                geographic,
                warnings,
                &mut self.warned_3d,
            )?]),
            "MultiPolygon" => {
                let parts = coords.as_array().ok_or_else(|| {
                    InputError::new(
                        path,
                        &loc,
                        "MultiPolygon coordinates are not an array",
                        "a MultiPolygon is [[[ring]], ...]",
                    )
                })?;
                if parts.is_empty() {
                    return Err(InputError::new(
                        path,
                        &loc,
                        "the MultiPolygon is empty",
                        "remove the feature or give it a footprint",
                    ));
                }
                let mut polys = Vec::new();
                for p in parts {
                    polys.push(parse_polygon(
                        p,
                        path,
                        &loc,
                        geographic,
                        warnings,
                        &mut self.warned_3d,
                    )?);
                }
                MultiPolygon::new(polys)
            }
            other => {
                return Err(InputError::new(
                    path,
                    &loc,
                    format!("geometry type `{other}` is not a footprint"),
                    "structures must be Polygon or MultiPolygon",
                ));
            }
        };
        // A ring whose vertices are all collinear has zero area; a crossed ("bow-tie") ring can
        // also have zero net signed area, so the zero-area message is given only when the ring
        // is otherwise valid or degenerate, and self-intersection is reported first.
        // All vertices of every exterior ring on one straight line (through the first vertex and
        // the vertex farthest from it): zero area.
        let collinear = footprint.0.iter().all(|p| {
            let c = &p.exterior().0;
            let p0 = c[0];
            let far = c
                .iter()
                .copied()
                .max_by(|a, b| {
                    let da = (a.x - p0.x).powi(2) + (a.y - p0.y).powi(2);
                    let db = (b.x - p0.x).powi(2) + (b.y - p0.y).powi(2);
                    da.total_cmp(&db)
                })
                .unwrap_or(p0);
            let (ux, uy) = (far.x - p0.x, far.y - p0.y);
            let len2 = ux * ux + uy * uy;
            len2 == 0.0
                || c.iter().all(|q| {
                    let cross = ux * (q.y - p0.y) - uy * (q.x - p0.x);
                    cross * cross <= 1e-18 * len2 * len2
                })
        });
        if collinear {
            return Err(InputError::new(
                path,
                &loc,
                "the footprint has zero area",
                "a footprint must enclose an area; check for repeated or collinear vertices",
            ));
        }
        if let Err(e) = footprint.check_validation() {
            return Err(InputError::new(
                path,
                &loc,
                format!("the footprint is not a valid polygon: {e}"),
                "fix self-intersections and overlapping parts in a GIS (e.g. a 'make valid' tool)",
            ));
        }
        if footprint.unsigned_area() <= 0.0 {
            return Err(InputError::new(
                path,
                &loc,
                "the footprint has zero area",
                "a footprint must enclose an area; check for repeated or collinear vertices",
            ));
        }
        let mut fallbacks = Vec::new();
        let name = match props.and_then(|p| p.get("name")) {
            Some(Value::String(s)) if !s.trim().is_empty() => s.clone(),
            _ => {
                fallbacks.push("name = id (no name property)".to_string());
                id.clone()
            }
        };
        let height_m = match props.and_then(|p| p.get("height_m")) {
            Some(v) if !v.is_null() => {
                let h = v.as_f64().ok_or_else(|| {
                    InputError::new(
                        path,
                        &loc,
                        "height_m is not a number",
                        "give the height to eaves in metres as a number",
                    )
                })?;
                if !(h > 0.0 && h < 1000.0) {
                    return Err(InputError::new(
                        path,
                        &loc,
                        format!("height_m = {h} is not a plausible height"),
                        "give the height to eaves in metres (> 0)",
                    ));
                }
                h
            }
            _ => {
                fallbacks.push(format!("height_m = {} m (default)", defaults.height_m));
                defaults.height_m
            }
        };
        let structure_type = match props.and_then(|p| p.get("structure")) {
            Some(Value::String(s)) => {
                let s = s.trim().to_lowercase();
                if s != "masonry" && s != "frame" {
                    return Err(InputError::new(
                        path,
                        &loc,
                        format!("structure = \"{s}\" is not a known structure type"),
                        "use \"masonry\" or \"frame\" (or set a `criteria` property)",
                    ));
                }
                s
            }
            Some(Value::Null) | None => {
                fallbacks.push(format!("structure = {} (default)", defaults.structure_type));
                defaults.structure_type.clone()
            }
            Some(_) => {
                return Err(InputError::new(
                    path,
                    &loc,
                    "structure is not a string",
                    "use \"masonry\" or \"frame\"",
                ));
            }
        };
        let criteria = match props.and_then(|p| p.get("criteria")) {
            Some(Value::String(s)) if !s.trim().is_empty() => Some(s.trim().to_string()),
            _ => None,
        };
        self.out.push(RawStructure {
            feature_index: i,
            id,
            name,
            height_m,
            structure_type,
            criteria,
            footprint,
            fallbacks,
        });
        Ok(())
    }
}

/// Read and validate a footprints file.
pub fn read_footprints(
    path: &Path,
    id_property: &str,
    geographic: bool,
    defaults: &FootprintDefaults,
    warnings: &mut Warnings,
) -> Result<Vec<RawStructure>, InputError> {
    let text = std::fs::read_to_string(path).map_err(|e| {
        InputError::new(
            path,
            "",
            format!("cannot read the footprints file: {e}"),
            "check [structures] path in the portfolio file",
        )
    })?;
    parse_footprints(&text, path, id_property, geographic, defaults, warnings)
}

/// Parse footprints GeoJSON text (see [`read_footprints`]).
pub fn parse_footprints(
    text: &str,
    path: &Path,
    id_property: &str,
    geographic: bool,
    defaults: &FootprintDefaults,
    warnings: &mut Warnings,
) -> Result<Vec<RawStructure>, InputError> {
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let mut check = FeatureCheck::new(path, id_property, geographic, defaults, warnings);
    let mut handle = |i: usize, f: &Value| check.feature(i, f);
    let mut stream = FeatureStream {
        handle: &mut handle,
        kind: None,
        has_features: false,
        count: 0,
        error: None,
    };
    let parsed = {
        let mut de = serde_json::Deserializer::from_str(text);
        serde::de::DeserializeSeed::deserialize(&mut stream, &mut de).and_then(|()| de.end())
    };
    if let Some(e) = stream.error.take() {
        return Err(e);
    }
    if stream
        .kind
        .as_deref()
        .is_some_and(|k| k != "FeatureCollection")
    {
        return Err(not_a_collection(path));
    }
    if let Err(e) = parsed {
        return Err(InputError::new(
            path,
            format!("line {}, column {}", e.line(), e.column()),
            format!("not valid JSON: {e}"),
            "the footprints file must be GeoJSON (RFC 7946); check it with a GIS or a JSON validator",
        ));
    }
    if stream.kind.as_deref() != Some("FeatureCollection") {
        return Err(not_a_collection(path));
    }
    if !stream.has_features {
        return Err(InputError::new(
            path,
            "top level",
            "the FeatureCollection has no \"features\" array",
            "add \"features\": [...]",
        ));
    }
    if stream.count == 0 {
        return Err(InputError::new(
            path,
            "top level",
            "the FeatureCollection has no features",
            "a portfolio needs at least one structure",
        ));
    }
    Ok(check.finish())
}

fn not_a_collection(path: &Path) -> InputError {
    InputError::new(
        path,
        "top level",
        "not a GeoJSON FeatureCollection",
        "the file must be {\"type\": \"FeatureCollection\", \"features\": [...]}",
    )
}

/// Streams a FeatureCollection: each feature is parsed into a `Value`, handed to `handle` and
/// dropped, so memory holds one feature at a time (a whole-document `Value` of a large footprints
/// file costs tens of bytes per coordinate). The first error of `handle` stops the parse and is
/// kept in `error`. `type` is checked as soon as it is seen (before the features when it comes
/// first, as in nearly every file) and again at the end.
struct FeatureStream<'h> {
    handle: &'h mut dyn FnMut(usize, &Value) -> Result<(), InputError>,
    kind: Option<String>,
    has_features: bool,
    count: usize,
    error: Option<InputError>,
}

/// Visitor methods that accept and ignore every scalar (the streamed GeoJSON visitors look only at
/// objects and arrays; a scalar where they expect one is reported after the parse).
macro_rules! ignore_scalars {
    () => {
        fn visit_str<E: serde::de::Error>(self, _: &str) -> Result<(), E> {
            Ok(())
        }
        fn visit_bool<E: serde::de::Error>(self, _: bool) -> Result<(), E> {
            Ok(())
        }
        fn visit_i64<E: serde::de::Error>(self, _: i64) -> Result<(), E> {
            Ok(())
        }
        fn visit_u64<E: serde::de::Error>(self, _: u64) -> Result<(), E> {
            Ok(())
        }
        fn visit_f64<E: serde::de::Error>(self, _: f64) -> Result<(), E> {
            Ok(())
        }
        fn visit_unit<E: serde::de::Error>(self) -> Result<(), E> {
            Ok(())
        }
    };
}

impl<'de> serde::de::DeserializeSeed<'de> for &mut FeatureStream<'_> {
    type Value = ();
    fn deserialize<D: serde::Deserializer<'de>>(self, d: D) -> Result<(), D::Error> {
        d.deserialize_any(self)
    }
}

impl<'de> serde::de::Visitor<'de> for &mut FeatureStream<'_> {
    type Value = ();
    fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
        f.write_str("a GeoJSON FeatureCollection object")
    }
    fn visit_map<A: serde::de::MapAccess<'de>>(self, mut map: A) -> Result<(), A::Error> {
        use serde::de::Error;
        while let Some(key) = map.next_key::<String>()? {
            match key.as_str() {
                "type" => {
                    let v: Value = map.next_value()?;
                    self.kind = Some(v.as_str().unwrap_or("").to_string());
                }
                "features" => {
                    if self
                        .kind
                        .as_deref()
                        .is_some_and(|k| k != "FeatureCollection")
                    {
                        return Err(A::Error::custom("not a FeatureCollection"));
                    }
                    map.next_value_seed(FeatureList(&mut *self))?;
                }
                _ => {
                    map.next_value::<serde::de::IgnoredAny>()?;
                }
            }
        }
        Ok(())
    }
    // Anything but an object: not a FeatureCollection (reported after the parse).
    fn visit_seq<A: serde::de::SeqAccess<'de>>(self, mut seq: A) -> Result<(), A::Error> {
        while seq.next_element::<serde::de::IgnoredAny>()?.is_some() {}
        Ok(())
    }
    ignore_scalars!();
}

/// The `features` member: an array streamed element by element (anything else is ignored, so
/// `has_features` stays false and the caller reports the missing array).
struct FeatureList<'s, 'h>(&'s mut FeatureStream<'h>);

impl<'de> serde::de::DeserializeSeed<'de> for FeatureList<'_, '_> {
    type Value = ();
    fn deserialize<D: serde::Deserializer<'de>>(self, d: D) -> Result<(), D::Error> {
        d.deserialize_any(self)
    }
}

impl<'de> serde::de::Visitor<'de> for FeatureList<'_, '_> {
    type Value = ();
    fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
        f.write_str("an array of features")
    }
    fn visit_seq<A: serde::de::SeqAccess<'de>>(self, mut seq: A) -> Result<(), A::Error> {
        use serde::de::Error;
        self.0.has_features = true;
        while let Some(f) = seq.next_element::<Value>()? {
            let i = self.0.count;
            if let Err(e) = (self.0.handle)(i, &f) {
                self.0.error = Some(e);
                return Err(A::Error::custom("feature error"));
            }
            self.0.count += 1;
        }
        Ok(())
    }
    fn visit_map<A: serde::de::MapAccess<'de>>(self, mut map: A) -> Result<(), A::Error> {
        while map
            .next_entry::<serde::de::IgnoredAny, serde::de::IgnoredAny>()?
            .is_some()
        {}
        Ok(())
    }
    ignore_scalars!();
}

#[cfg(test)]
mod tests {
    use super::*;

    fn defaults() -> FootprintDefaults {
        FootprintDefaults {
            height_m: 6.0,
            structure_type: "masonry".into(),
        }
    }

    fn parse(text: &str) -> Result<Vec<RawStructure>, InputError> {
        parse_footprints(
            text,
            Path::new("f.geojson"),
            "id",
            true,
            &defaults(),
            &mut Warnings::default(),
        )
    }

    const SQUARE: &str = "[[[9.0,45.0],[9.001,45.0],[9.001,45.001],[9.0,45.001],[9.0,45.0]]]";

    fn fc(features: &[String]) -> String {
        format!(
            "{{\"type\":\"FeatureCollection\",\"features\":[{}]}}",
            features.join(",")
        )
    }

    fn feat(id: &str, coords: &str) -> String {
        format!(
            "{{\"type\":\"Feature\",\"properties\":{{\"id\":\"{id}\"}},\"geometry\":{{\"type\":\"Polygon\",\"coordinates\":{coords}}}}}"
        )
    }

    #[test]
    fn reads_polygon_with_fallbacks() {
        let s = parse(&fc(&[feat("A", SQUARE)])).unwrap();
        assert_eq!(s[0].id, "A");
        assert_eq!(s[0].height_m, 6.0);
        assert_eq!(s[0].fallbacks.len(), 3);
    }

    #[test]
    fn duplicate_ids_are_rejected() {
        let e = parse(&fc(&[feat("A", SQUARE), feat("A", SQUARE)])).unwrap_err();
        assert!(e.message.contains("duplicate id"), "{e}");
        assert!(e.location.contains("feature 1"));
    }

    #[test]
    fn unclosed_ring_is_rejected() {
        let e = parse(&fc(&[feat(
            "A",
            "[[[9.0,45.0],[9.001,45.0],[9.001,45.001],[9.0,45.001]]]",
        )]))
        .unwrap_err();
        assert!(e.message.contains("not closed"), "{e}");
    }

    #[test]
    fn self_intersection_is_rejected() {
        let bow = "[[[9.0,45.0],[9.002,45.002],[9.002,45.0],[9.0,45.001],[9.0,45.0]]]";
        let e = parse(&fc(&[feat("A", bow)])).unwrap_err();
        assert!(e.message.contains("not a valid polygon"), "{e}");
    }

    #[test]
    fn swapped_axes_are_detected() {
        let sw = "[[[45.0,99.0],[45.001,99.0],[45.001,99.001],[45.0,99.001],[45.0,99.0]]]";
        let e = parse(&fc(&[feat("A", sw)])).unwrap_err();
        assert!(e.hint.contains("swapped"), "{e}");
    }

    #[test]
    fn not_a_feature_collection() {
        let e = parse("{\"type\":\"Feature\"}").unwrap_err();
        assert!(e.message.contains("FeatureCollection"));
        let e = parse("not json").unwrap_err();
        assert!(e.message.contains("not valid JSON"));
    }
}
