//! `results.gpkg`: the run's results as an OGC GeoPackage (version 1.3), written with SQLite.
//!
//! Owns the GeoPackage encoding: the required metadata tables (`gpkg_spatial_ref_sys`,
//! `gpkg_contents`, `gpkg_geometry_columns`, `gpkg_extensions`), the geometry blob (GeoPackage
//! binary header + envelope + ISO WKB, little-endian, 2D) and the R-tree spatial index of the
//! `gpkg_rtree_index` extension, one per layer. Both layers are in EPSG:4326 (x = longitude,
//! y = latitude, the same coordinates as the GeoJSON outputs): `structures` (MultiPolygon, the
//! footprints with the compact result fields of results.csv) and `points` (Point, the fields of
//! points.csv except lon/lat, which are the geometry). docs/formats.md describes the layers.
//!
//! The file is deterministic: the same results give the same bytes (`last_change` comes from the
//! analysis date, never the clock), and `plinth merge` rebuilds it from the shards' files
//! ([`read_layer`]) in the single run's order. It does not compute anything.

use std::path::Path;

use anyhow::{Context, Result, bail};
use rusqlite::Connection;
use rusqlite::types::{ToSqlOutput, Value as Sql, ValueRef};

use crate::results::StructureResult;

use super::{PointRow, rtree_pack};

/// The file name inside the output folder.
pub const FILE: &str = "results.gpkg";

/// The structures layer (footprints + compact result fields).
pub const STRUCTURES: &str = "structures";

/// The points layer (point geometry + association and screening fields).
pub const POINTS: &str = "points";

/// The geometry column of both layers.
pub const GEOM: &str = "geom";

/// `PRAGMA application_id` of a GeoPackage: the ASCII bytes `GPKG`.
const APPLICATION_ID: i32 = 0x4750_4B47;

/// `PRAGMA user_version` of a GeoPackage 1.3.0 file.
const USER_VERSION: i32 = 10300;

/// The spatial reference system of both layers.
const SRS_ID: i32 = 4326;

/// OGC WKT of EPSG:4326, as the GeoPackage standard's own example row gives it.
const WGS84_WKT: &str = "GEOGCS[\"WGS 84\",DATUM[\"WGS_1984\",SPHEROID[\"WGS 84\",6378137,298.257223563,\
AUTHORITY[\"EPSG\",\"7030\"]],AUTHORITY[\"EPSG\",\"6326\"]],PRIMEM[\"Greenwich\",0,AUTHORITY[\"EPSG\",\"8901\"]],\
UNIT[\"degree\",0.0174532925199433,AUTHORITY[\"EPSG\",\"9122\"]],AXIS[\"Latitude\",NORTH],AXIS[\"Longitude\",EAST],\
AUTHORITY[\"EPSG\",\"4326\"]]";

/// A column's GeoPackage data type.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FieldType {
    /// UTF-8 text; lists and maps are written as JSON text, as in results.geojson.
    Text,
    /// 64-bit integer.
    Integer,
    /// 64-bit float.
    Real,
    /// 0 or 1.
    Boolean,
}

impl FieldType {
    fn sql(self) -> &'static str {
        match self {
            FieldType::Text => "TEXT",
            FieldType::Integer => "INTEGER",
            FieldType::Real => "REAL",
            FieldType::Boolean => "BOOLEAN",
        }
    }
}

/// Geometry type of a layer.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum GeomType {
    /// One point per feature.
    Point,
    /// One multipolygon per feature.
    MultiPolygon,
}

impl GeomType {
    fn name(self) -> &'static str {
        match self {
            GeomType::Point => "POINT",
            GeomType::MultiPolygon => "MULTIPOLYGON",
        }
    }
}

/// A layer's table layout.
#[derive(Debug, Clone, Copy)]
pub struct LayerSpec<'a> {
    /// Table name.
    pub name: &'a str,
    /// Human description (gpkg_contents).
    pub description: &'a str,
    /// Geometry type.
    pub geometry: GeomType,
    /// Attribute columns in order.
    pub fields: &'a [(&'a str, FieldType)],
}

/// The structures layer's columns: [`crate::results::SCALAR_FIELDS`] with their types (a unit test keeps the two
/// lists in step).
pub const STRUCTURE_FIELDS: &[(&str, FieldType)] = {
    use FieldType::*;
    &[
        ("id", Text),
        ("name", Text),
        ("status", Text),
        ("status_reasons", Text),
        ("n_points", Integer),
        ("n_rejected", Text),
        ("n_surroundings", Integer),
        ("datasets", Text),
        ("settlement_mm", Real),
        ("differential_settlement_mm", Real),
        ("mean_vertical_mm", Real),
        ("mean_east_mm", Real),
        ("vertical_velocity_mm_per_yr", Real),
        ("east_velocity_mm_per_yr", Real),
        ("tilt", Real),
        ("tilt_azimuth_deg", Real),
        ("angular_distortion", Real),
        ("deflection_ratio", Real),
        ("horizontal_strain", Real),
        ("governing_strain", Real),
        ("damage_category", Integer),
        ("damage_route", Text),
        ("evidence_grade", Text),
        ("damage_category_probability", Real),
        ("damage_category_exceedance_probability", Real),
        ("horizontal_strain_status", Text),
        ("category_lower_bound", Boolean),
        ("look_directions", Text),
        ("vertical_velocity_se_mm_per_yr", Real),
        ("east_velocity_se_mm_per_yr", Real),
        ("tilt_se", Real),
        ("deflection_ratio_se", Real),
        ("angular_distortion_se", Real),
        ("damage_category_name", Text),
        ("criteria_set", Text),
        ("height_m", Real),
        ("structure_type", Text),
        ("trigger_status", Text),
        ("report_file", Text),
        ("detail_file", Text),
        ("predicted_settlement_mm", Real),
        ("predicted_category", Integer),
        ("observed_to_predicted_settlement", Real),
    ]
};

/// The points layer's columns (points.csv without lon/lat).
pub const POINT_FIELDS: &[(&str, FieldType)] = {
    use FieldType::*;
    &[
        ("dataset", Text),
        ("point_id", Text),
        ("line", Integer),
        ("structure_id", Text),
        ("role", Text),
        ("inside", Boolean),
        ("distance_m", Real),
        ("status", Text),
        ("reason", Text),
        ("vertical_velocity_mm_per_yr", Real),
        ("surroundings_of", Integer),
    ]
};

/// The structures layer.
pub const STRUCTURES_LAYER: LayerSpec<'static> = LayerSpec {
    name: STRUCTURES,
    description: "Structures: footprints with the compact result fields",
    geometry: GeomType::MultiPolygon,
    fields: STRUCTURE_FIELDS,
};

/// The points layer.
pub const POINTS_LAYER: LayerSpec<'static> = LayerSpec {
    name: POINTS,
    description: "Points within reach of a structure: association and screening",
    geometry: GeomType::Point,
    fields: POINT_FIELDS,
};

/// Bounding box `[min_x, max_x, min_y, max_y]` (the order of the GeoPackage envelope and R-tree).
pub type Envelope = [f64; 4];

/// One feature ready to insert: its geometry blob, the blob's envelope (None for an empty
/// geometry) and one value per attribute column.
#[derive(Debug, Clone, PartialEq)]
pub struct Feature {
    /// GeoPackage geometry blob.
    pub geom: Vec<u8>,
    /// Envelope of the geometry (None when empty).
    pub envelope: Option<Envelope>,
    /// Attribute values in the layer's column order.
    pub values: Vec<Sql>,
}

/// Flags byte of the blob header: little-endian (bit 0), envelope type in bits 1–3, empty (bit 4).
fn flags(envelope: bool, empty: bool) -> u8 {
    1 | if envelope { 1 << 1 } else { 0 } | if empty { 1 << 4 } else { 0 }
}

/// The blob header: magic `GP`, version 0, flags, srs_id, then the optional [minx, maxx, miny, maxy].
fn header(out: &mut Vec<u8>, envelope: Option<&Envelope>, empty: bool) {
    out.extend_from_slice(b"GP");
    out.push(0);
    out.push(flags(envelope.is_some(), empty));
    out.extend_from_slice(&SRS_ID.to_le_bytes());
    for v in envelope.into_iter().flatten() {
        out.extend_from_slice(&v.to_le_bytes());
    }
}

fn wkb_head(out: &mut Vec<u8>, kind: u32) {
    out.push(1);
    out.extend_from_slice(&kind.to_le_bytes());
}

fn wkb_xy(out: &mut Vec<u8>, x: f64, y: f64) {
    out.extend_from_slice(&x.to_le_bytes());
    out.extend_from_slice(&y.to_le_bytes());
}

/// Blob of a point; a point with a non-finite coordinate is written as the empty point
/// (NaN coordinates, empty flag set), as the standard prescribes.
pub fn point_blob(x: f64, y: f64) -> Feature {
    let (b, envelope) = point_geometry(x, y);
    Feature {
        geom: b.to_vec(),
        envelope,
        values: Vec::new(),
    }
}

/// Bytes of a point's blob: an 8-byte header without envelope and a 21-byte WKB point.
const POINT_BLOB_BYTES: usize = 29;

/// [`point_blob`]'s bytes and envelope, without allocating.
pub fn point_geometry(x: f64, y: f64) -> ([u8; POINT_BLOB_BYTES], Option<Envelope>) {
    let empty = !(x.is_finite() && y.is_finite());
    let (px, py) = if empty { (f64::NAN, f64::NAN) } else { (x, y) };
    // The layout `header` + `wkb_head` + `wkb_xy` write (a unit test compares the two).
    let mut b = [0u8; POINT_BLOB_BYTES];
    b[..4].copy_from_slice(&[b'G', b'P', 0, flags(false, empty)]);
    b[4..8].copy_from_slice(&SRS_ID.to_le_bytes());
    b[8] = 1;
    b[9..13].copy_from_slice(&1u32.to_le_bytes());
    b[13..21].copy_from_slice(&px.to_le_bytes());
    b[21..29].copy_from_slice(&py.to_le_bytes());
    (b, (!empty).then_some([x, x, y, y]))
}

/// Blob of a multipolygon, with its envelope in the header.
pub fn multipolygon_blob(mp: &geo::MultiPolygon<f64>) -> Feature {
    let mut env: Option<Envelope> = None;
    for c in mp.0.iter().flat_map(|p| p.exterior().0.iter()) {
        let e = env.get_or_insert([c.x, c.x, c.y, c.y]);
        *e = [e[0].min(c.x), e[1].max(c.x), e[2].min(c.y), e[3].max(c.y)];
    }
    let mut b = Vec::new();
    header(&mut b, env.as_ref(), env.is_none());
    wkb_head(&mut b, 6);
    b.extend_from_slice(&(mp.0.len() as u32).to_le_bytes());
    for p in &mp.0 {
        wkb_head(&mut b, 3);
        let rings: Vec<_> = std::iter::once(p.exterior()).chain(p.interiors()).collect();
        b.extend_from_slice(&(rings.len() as u32).to_le_bytes());
        for r in rings {
            b.extend_from_slice(&(r.0.len() as u32).to_le_bytes());
            for c in &r.0 {
                wkb_xy(&mut b, c.x, c.y);
            }
        }
    }
    Feature {
        geom: b,
        envelope: env,
        values: Vec::new(),
    }
}

/// The envelope of a blob this module wrote: from the header, or the point's coordinates; None
/// for an empty geometry or bytes that are not such a blob.
pub fn blob_envelope(b: &[u8]) -> Option<Envelope> {
    let f64_at = |i: usize| Some(f64::from_le_bytes(b.get(i..i + 8)?.try_into().ok()?));
    if b.get(0..3)? != b"GP\0" {
        return None;
    }
    let fl = b[3];
    if fl & 1 == 0 || fl & (1 << 4) != 0 {
        return None;
    }
    match (fl >> 1) & 0b111 {
        1 => Some([f64_at(8)?, f64_at(16)?, f64_at(24)?, f64_at(32)?]),
        0 => {
            // ISO WKB point after the 8-byte header: byte order, type 1, x, y.
            (b.get(8..13)? == [1, 1, 0, 0, 0]).then_some(())?;
            let (x, y) = (f64_at(13)?, f64_at(21)?);
            Some([x, x, y, y])
        }
        _ => None,
    }
}

/// Round to 1e-9 (degrees: 0.1 mm), as the GeoJSON outputs do.
fn round9(v: f64) -> f64 {
    (v * 1e9).round() / 1e9
}

/// A structure's feature: footprint (lon/lat, rounded as in results.geojson) and the scalar
/// fields; lists and maps become JSON text, as in results.geojson.
pub fn structure_feature(s: &StructureResult, fp: &geo::MultiPolygon<f64>) -> Result<Feature> {
    use geo::MapCoords;
    let rounded = fp.map_coords(|c| geo::coord! { x: round9(c.x), y: round9(c.y) });
    let full = serde_json::to_value(s)?;
    let values = STRUCTURE_FIELDS
        .iter()
        .map(|(f, t)| json_to_sql(full.get(*f).unwrap_or(&serde_json::Value::Null), *t))
        .collect();
    Ok(Feature {
        values,
        ..multipolygon_blob(&rounded)
    })
}

fn json_to_sql(v: &serde_json::Value, t: FieldType) -> Sql {
    use serde_json::Value as J;
    match v {
        J::Null => Sql::Null,
        J::Bool(b) => Sql::Integer(i64::from(*b)),
        J::Number(n) => match (t, n.as_i64()) {
            (FieldType::Integer, Some(i)) => Sql::Integer(i),
            _ => n.as_f64().map_or(Sql::Null, Sql::Real),
        },
        J::String(s) => Sql::Text(s.clone()),
        J::Array(_) | J::Object(_) => Sql::Text(v.to_string()),
    }
}

/// A points.csv row's feature: the lon/lat point (rounded as in points.geojson) and the other fields.
pub fn point_feature(r: &PointRow<'_>) -> Feature {
    let owned = |v: ValueRef<'_>| match v {
        ValueRef::Null => Sql::Null,
        ValueRef::Integer(i) => Sql::Integer(i),
        ValueRef::Real(x) => Sql::Real(x),
        ValueRef::Text(t) => Sql::Text(String::from_utf8_lossy(t).into_owned()),
        ValueRef::Blob(b) => Sql::Blob(b.to_vec()),
    };
    Feature {
        values: point_values(r).into_iter().map(owned).collect(),
        ..point_blob(round9(r.lon), round9(r.lat))
    }
}

/// The attribute values of a points.csv row, in the order of [`POINT_FIELDS`], borrowed.
pub fn point_values<'r>(r: &'r PointRow<'_>) -> [ValueRef<'r>; 11] {
    let text = |s: &'r str| ValueRef::Text(s.as_bytes());
    [
        text(r.dataset),
        text(r.point_id),
        ValueRef::Integer(r.line as i64),
        text(r.structure_id),
        text(r.role),
        ValueRef::Integer(i64::from(r.inside)),
        ValueRef::Real(r.distance_m),
        text(r.status),
        text(r.reason),
        r.vertical_velocity_mm_per_yr
            .map_or(ValueRef::Null, ValueRef::Real),
        ValueRef::Integer(r.surroundings_of as i64),
    ]
}

/// A GeoPackage being written. Call [`Gpkg::finish`] to complete it.
pub struct Gpkg {
    conn: Connection,
    last_change: String,
}

/// Quote an SQL identifier.
fn ident(s: &str) -> String {
    format!("\"{}\"", s.replace('"', "\"\""))
}

impl Gpkg {
    /// Create a new GeoPackage at `path` (which must not exist). `last_change` is the
    /// `gpkg_contents.last_change` timestamp of every layer (ISO 8601, UTC).
    pub fn create(path: &Path, last_change: &str) -> Result<Gpkg> {
        if path.exists() {
            bail!("{} already exists", path.display());
        }
        let conn = Connection::open(path)
            .with_context(|| format!("cannot create the GeoPackage {}", path.display()))?;
        conn.execute_batch(&format!(
            "PRAGMA application_id = {APPLICATION_ID};
             PRAGMA user_version = {USER_VERSION};
             PRAGMA journal_mode = OFF;
             PRAGMA synchronous = OFF;
             PRAGMA locking_mode = EXCLUSIVE;
             BEGIN;
             CREATE TABLE gpkg_spatial_ref_sys (
               srs_name TEXT NOT NULL, srs_id INTEGER NOT NULL PRIMARY KEY,
               organization TEXT NOT NULL, organization_coordsys_id INTEGER NOT NULL,
               definition TEXT NOT NULL, description TEXT);
             CREATE TABLE gpkg_contents (
               table_name TEXT NOT NULL PRIMARY KEY, data_type TEXT NOT NULL,
               identifier TEXT UNIQUE, description TEXT DEFAULT '',
               last_change DATETIME NOT NULL DEFAULT (strftime('%Y-%m-%dT%H:%M:%fZ','now')),
               min_x DOUBLE, min_y DOUBLE, max_x DOUBLE, max_y DOUBLE, srs_id INTEGER,
               CONSTRAINT fk_gc_r_srs_id FOREIGN KEY (srs_id) REFERENCES gpkg_spatial_ref_sys(srs_id));
             CREATE TABLE gpkg_geometry_columns (
               table_name TEXT NOT NULL, column_name TEXT NOT NULL,
               geometry_type_name TEXT NOT NULL, srs_id INTEGER NOT NULL,
               z TINYINT NOT NULL, m TINYINT NOT NULL,
               CONSTRAINT pk_geom_cols PRIMARY KEY (table_name, column_name),
               CONSTRAINT uk_gc_table_name UNIQUE (table_name),
               CONSTRAINT fk_gc_tn FOREIGN KEY (table_name) REFERENCES gpkg_contents(table_name),
               CONSTRAINT fk_gc_srs FOREIGN KEY (srs_id) REFERENCES gpkg_spatial_ref_sys (srs_id));
             CREATE TABLE gpkg_extensions (
               table_name TEXT, column_name TEXT, extension_name TEXT NOT NULL,
               definition TEXT NOT NULL, scope TEXT NOT NULL,
               CONSTRAINT ge_tce UNIQUE (table_name, column_name, extension_name));
             INSERT INTO gpkg_spatial_ref_sys VALUES
               ('Undefined cartesian SRS', -1, 'NONE', -1, 'undefined', 'undefined cartesian coordinate reference system'),
               ('Undefined geographic SRS', 0, 'NONE', 0, 'undefined', 'undefined geographic coordinate reference system'),
               ('WGS 84 geodetic', {SRS_ID}, 'EPSG', {SRS_ID}, '{WGS84_WKT}', 'longitude/latitude coordinates in decimal degrees on the WGS 84 spheroid');"
        ))
        .with_context(|| format!("cannot set up the GeoPackage {}", path.display()))?;
        Ok(Gpkg {
            conn,
            last_change: last_change.to_string(),
        })
    }

    /// Write one layer: its table, its features (fid 1, 2, ... in order), its metadata rows and
    /// its R-tree (see [`LayerWriter`]). Returns the number of features.
    pub fn write_layer(
        &mut self,
        spec: &LayerSpec<'_>,
        features: impl IntoIterator<Item = Result<Feature>>,
    ) -> Result<u64> {
        let mut layer = self.begin_layer(spec)?;
        for f in features {
            layer.push(f?)?;
        }
        layer.finish()
    }

    /// Write one layer whose rows are made from `pieces` by `make` (in order) and inserted by
    /// `put`: the pieces of the next wave are made on the other workers while this thread
    /// inserts the current wave, so that SQLite's single writer is all this thread does.
    pub fn write_layer_in_pieces<P: Sync, T: Send>(
        &mut self,
        spec: &LayerSpec<'_>,
        pieces: &[P],
        make: impl Fn(&P) -> Vec<T> + Sync,
        mut put: impl FnMut(&mut LayerWriter<'_>, T) -> Result<()>,
    ) -> Result<u64> {
        use rayon::prelude::*;
        let wave = 2 * rayon::current_num_threads().max(1);
        let make_wave = |w: &[P]| -> Vec<Vec<T>> { w.par_iter().map(&make).collect() };
        let mut waves = pieces.chunks(wave);
        let mut current = waves.next().map(make_wave).unwrap_or_default();
        let mut layer = self.begin_layer(spec)?;
        loop {
            let upcoming = waves.next();
            let mut next = None;
            // In place: this thread inserts (SQLite's statement stays on it) while the next
            // wave is made by the other workers, or by this one afterwards when there is none.
            let inserted = rayon::in_place_scope(|s| {
                if let Some(w) = upcoming {
                    let next = &mut next;
                    let make_wave = &make_wave;
                    s.spawn(move |_| *next = Some(make_wave(w)));
                }
                current
                    .drain(..)
                    .flatten()
                    .try_for_each(|row| put(&mut layer, row))
            });
            inserted?;
            match next {
                Some(n) => current = n,
                None => break,
            }
        }
        layer.finish()
    }

    /// Start a layer: its table and its R-tree table (see [`LayerWriter`]).
    pub fn begin_layer<'g>(&'g mut self, spec: &'g LayerSpec<'g>) -> Result<LayerWriter<'g>> {
        let (t, rtree) = (ident(spec.name), ident(&rtree_name(spec.name)));
        let cols: String = spec
            .fields
            .iter()
            .map(|(n, ty)| format!(", {} {}", ident(n), ty.sql()))
            .collect();
        self.conn.execute_batch(&format!(
            "CREATE TABLE {t} (fid INTEGER PRIMARY KEY AUTOINCREMENT NOT NULL, {g} {gt}{cols});
             CREATE VIRTUAL TABLE {rtree} USING rtree(id, minx, maxx, miny, maxy);",
            g = ident(GEOM),
            gt = spec.geometry.name(),
        ))?;
        let insert = self
            .conn
            .prepare(&insert_sql(&t, spec.fields.len(), ROWS_PER_INSERT))?;
        Ok(LayerWriter {
            conn: &self.conn,
            last_change: &self.last_change,
            spec,
            table: t,
            insert,
            pending: Vec::with_capacity(ROWS_PER_INSERT * (spec.fields.len() + 2)),
            arena: Vec::new(),
            index: Vec::new(),
            extent: None,
            n: 0,
        })
    }

    /// Commit and close the file.
    pub fn finish(self) -> Result<()> {
        self.conn.execute_batch("COMMIT;")?;
        self.conn.close().map_err(|(_, e)| e)?;
        Ok(())
    }
}

/// A layer being written: features go in with [`LayerWriter::push`] (fid 1, 2, ... in order);
/// [`LayerWriter::finish`] writes its metadata rows and its R-tree, packed in one pass once every
/// feature is in (output::rtree_pack) rather than grown one insertion at a time.
pub struct LayerWriter<'g> {
    conn: &'g Connection,
    last_change: &'g str,
    spec: &'g LayerSpec<'g>,
    /// The quoted table name.
    table: String,
    /// `INSERT` of [`ROWS_PER_INSERT`] rows.
    insert: rusqlite::Statement<'g>,
    /// Values (fid, geometry, fields) of the rows not yet inserted, fewer than
    /// [`ROWS_PER_INSERT`]; their text and blobs are kept in `arena`.
    pending: Vec<Cell>,
    arena: Vec<u8>,
    index: Vec<rtree_pack::Entry>,
    extent: Option<Envelope>,
    n: u64,
}

impl LayerWriter<'_> {
    /// Insert the next feature.
    pub fn push(&mut self, f: Feature) -> Result<()> {
        let values: Vec<ValueRef<'_>> = f.values.iter().map(ValueRef::from).collect();
        self.push_row(&f.geom, f.envelope, &values)
    }

    /// Insert the next feature from its geometry blob, its envelope (None for an empty
    /// geometry) and its attribute values, borrowed: they are copied into the writer's arena
    /// until the batch of [`ROWS_PER_INSERT`] rows goes in, with no allocation per value.
    pub fn push_row(
        &mut self,
        geom: &[u8],
        envelope: Option<Envelope>,
        values: &[ValueRef<'_>],
    ) -> Result<()> {
        self.n += 1;
        let n = self.n;
        if values.len() != self.spec.fields.len() {
            bail!(
                "layer `{}`: feature {n} has {} values for {} columns",
                self.spec.name,
                values.len(),
                self.spec.fields.len()
            );
        }
        let fid = n as i64;
        self.pending.push(Cell::Integer(fid));
        self.pending.push(Cell::Blob(stash(&mut self.arena, geom)));
        for v in values {
            let cell = match *v {
                ValueRef::Null => Cell::Null,
                ValueRef::Integer(i) => Cell::Integer(i),
                ValueRef::Real(x) => Cell::Real(x),
                ValueRef::Text(t) => Cell::Text(stash(&mut self.arena, t)),
                ValueRef::Blob(b) => Cell::Blob(stash(&mut self.arena, b)),
            };
            self.pending.push(cell);
        }
        if self.pending.len() == ROWS_PER_INSERT * (self.spec.fields.len() + 2) {
            let arena = &self.arena;
            self.insert.execute(rusqlite::params_from_iter(
                self.pending.iter().map(|c| c.value(arena)),
            ))?;
            self.pending.clear();
            self.arena.clear();
        }
        if let Some(e) = envelope {
            self.index.push(rtree_pack::Entry::new(fid, e));
            let x = self.extent.get_or_insert(e);
            *x = [
                x[0].min(e[0]),
                x[1].max(e[1]),
                x[2].min(e[2]),
                x[3].max(e[3]),
            ];
        }
        Ok(())
    }

    /// The layer's R-tree, its rows in gpkg_contents, gpkg_geometry_columns and gpkg_extensions,
    /// and the R-tree triggers. Returns the number of features.
    pub fn finish(self) -> Result<u64> {
        let LayerWriter {
            conn,
            last_change,
            spec,
            table,
            insert,
            pending,
            arena,
            index,
            extent,
            n,
        } = self;
        drop(insert);
        if !pending.is_empty() {
            let rows = pending.len() / (spec.fields.len() + 2);
            conn.execute(
                &insert_sql(&table, spec.fields.len(), rows),
                rusqlite::params_from_iter(pending.iter().map(|c| c.value(&arena))),
            )?;
        }
        rtree_pack::write(conn, &rtree_name(spec.name), index)?;
        let [min_x, max_x, min_y, max_y] = extent.map_or([None; 4], |e| e.map(Some));
        conn.execute(
            "INSERT INTO gpkg_contents VALUES (?1, 'features', ?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8)",
            rusqlite::params![
                spec.name,
                spec.description,
                last_change,
                min_x,
                min_y,
                max_x,
                max_y,
                SRS_ID
            ],
        )?;
        conn.execute(
            "INSERT INTO gpkg_geometry_columns VALUES (?1, ?2, ?3, ?4, 0, 0)",
            rusqlite::params![spec.name, GEOM, spec.geometry.name(), SRS_ID],
        )?;
        conn.execute(
            "INSERT INTO gpkg_extensions VALUES (?1, ?2, 'gpkg_rtree_index', \
             'http://www.geopackage.org/spec120/#extension_rtree', 'write-only')",
            rusqlite::params![spec.name, GEOM],
        )?;
        // Created after the rows: the triggers call ST_* functions that GIS software supplies
        // when it edits the layer, and keep the index in step with such edits.
        conn.execute_batch(&rtree_triggers(spec.name))?;
        Ok(n)
    }
}

/// A value of a row waiting in a [`LayerWriter`]: text and blobs as ranges of its arena.
enum Cell {
    Null,
    Integer(i64),
    Real(f64),
    Text(std::ops::Range<usize>),
    Blob(std::ops::Range<usize>),
}

impl Cell {
    fn value<'a>(&self, arena: &'a [u8]) -> ToSqlOutput<'a> {
        ToSqlOutput::Borrowed(match self {
            Cell::Null => ValueRef::Null,
            Cell::Integer(i) => ValueRef::Integer(*i),
            Cell::Real(x) => ValueRef::Real(*x),
            Cell::Text(r) => ValueRef::Text(&arena[r.clone()]),
            Cell::Blob(r) => ValueRef::Blob(&arena[r.clone()]),
        })
    }
}

/// Append `bytes` to `arena`; their range there.
fn stash(arena: &mut Vec<u8>, bytes: &[u8]) -> std::ops::Range<usize> {
    let start = arena.len();
    arena.extend_from_slice(bytes);
    start..arena.len()
}

/// Rows a layer's `INSERT` statement takes at once: SQLite runs a statement's fixed work (and
/// the `AUTOINCREMENT` bookkeeping of `sqlite_sequence`) once per statement, not per row. 64 rows
/// of a layer's columns stay far below SQLite's limit of 32 766 bound values.
pub const ROWS_PER_INSERT: usize = 64;

/// The layer's `INSERT` of `rows` rows: fid, geometry and `fields` attribute columns.
fn insert_sql(table: &str, fields: usize, rows: usize) -> String {
    rtree_pack::insert_sql(table, fields + 2, rows)
}

fn rtree_name(table: &str) -> String {
    format!("rtree_{table}_{GEOM}")
}

/// The triggers of the `gpkg_rtree_index` extension (GeoPackage 1.3 annex, "Spatial Indexes").
fn rtree_triggers(table: &str) -> String {
    let (t, c, r) = (ident(table), ident(GEOM), ident(&rtree_name(table)));
    let trig = |suffix: &str| ident(&format!("{}_{suffix}", rtree_name(table)));
    let insert_new = format!(
        "INSERT OR REPLACE INTO {r} VALUES (NEW.fid, ST_MinX(NEW.{c}), ST_MaxX(NEW.{c}), \
         ST_MinY(NEW.{c}), ST_MaxY(NEW.{c}));"
    );
    let present = format!("(NEW.{c} NOT NULL AND NOT ST_IsEmpty(NEW.{c}))");
    let absent = format!("(NEW.{c} ISNULL OR ST_IsEmpty(NEW.{c}))");
    format!(
        "CREATE TRIGGER {i} AFTER INSERT ON {t} WHEN {present} BEGIN {insert_new} END;
         CREATE TRIGGER {u1} AFTER UPDATE OF {c} ON {t} WHEN OLD.fid = NEW.fid AND {present}
           BEGIN {insert_new} END;
         CREATE TRIGGER {u2} AFTER UPDATE OF {c} ON {t} WHEN OLD.fid = NEW.fid AND {absent}
           BEGIN DELETE FROM {r} WHERE id = OLD.fid; END;
         CREATE TRIGGER {u3} AFTER UPDATE ON {t} WHEN OLD.fid != NEW.fid AND {present}
           BEGIN DELETE FROM {r} WHERE id = OLD.fid; {insert_new} END;
         CREATE TRIGGER {u4} AFTER UPDATE ON {t} WHEN OLD.fid != NEW.fid AND {absent}
           BEGIN DELETE FROM {r} WHERE id IN (OLD.fid, NEW.fid); END;
         CREATE TRIGGER {d} AFTER DELETE ON {t} WHEN OLD.{c} NOT NULL
           BEGIN DELETE FROM {r} WHERE id = OLD.fid; END;",
        i = trig("insert"),
        u1 = trig("update1"),
        u2 = trig("update2"),
        u3 = trig("update3"),
        u4 = trig("update4"),
        d = trig("delete"),
    )
}

/// Every feature of a layer this module wrote, in fid order (for `plinth merge`).
pub fn read_layer(path: &Path, spec: &LayerSpec<'_>) -> Result<Vec<Feature>> {
    let conn = Connection::open_with_flags(path, rusqlite::OpenFlags::SQLITE_OPEN_READ_ONLY)
        .with_context(|| format!("cannot open {}", path.display()))?;
    let cols: Vec<String> = std::iter::once(GEOM)
        .chain(spec.fields.iter().map(|(n, _)| *n))
        .map(ident)
        .collect();
    let sql = format!(
        "SELECT {} FROM {} ORDER BY fid",
        cols.join(", "),
        ident(spec.name)
    );
    let mut stmt = conn.prepare(&sql).with_context(|| {
        format!(
            "{}: no layer `{}` of this version",
            path.display(),
            spec.name
        )
    })?;
    let rows = stmt.query_map([], |row| {
        let geom: Vec<u8> = row.get(0)?;
        let values = (1..=spec.fields.len())
            .map(|i| row.get::<_, Sql>(i))
            .collect::<rusqlite::Result<Vec<_>>>()?;
        Ok(Feature {
            envelope: blob_envelope(&geom),
            geom,
            values,
        })
    })?;
    rows.collect::<rusqlite::Result<Vec<_>>>()
        .with_context(|| format!("cannot read layer `{}` of {}", spec.name, path.display()))
}

/// Write `results.gpkg` into the folder `dir` from the results, the WGS84 footprints (in
/// results order) and the points rows, given as `pieces` in order, each made into its rows by
/// `rows` (made on the other workers while the rows before them are inserted).
pub fn write_results<'a, P: Sync, R: Iterator<Item = PointRow<'a>>>(
    dir: &Path,
    structures: &[StructureResult],
    footprints_wgs84: &[&geo::MultiPolygon<f64>],
    (pieces, rows): (&[P], impl Fn(&P) -> R + Sync),
    analysis_date: Option<&str>,
) -> Result<()> {
    let path = dir.join(FILE);
    let mut g = Gpkg::create(&path, &last_change(analysis_date))?;
    g.write_layer(
        &STRUCTURES_LAYER,
        structures
            .iter()
            .zip(footprints_wgs84)
            .map(|(s, fp)| structure_feature(s, fp)),
    )
    .with_context(|| format!("cannot write layer `{STRUCTURES}` of {}", path.display()))?;
    g.write_layer_in_pieces(
        &POINTS_LAYER,
        pieces,
        |p| {
            rows(p)
                .map(|r| {
                    let geometry = point_geometry(round9(r.lon), round9(r.lat));
                    (r, geometry)
                })
                .collect()
        },
        |layer, (r, (blob, envelope))| layer.push_row(&blob, envelope, &point_values(&r)),
    )
    .with_context(|| format!("cannot write layer `{POINTS}` of {}", path.display()))?;
    g.finish()
        .with_context(|| format!("cannot write {}", path.display()))
}

/// `gpkg_contents.last_change`: midnight UTC of the analysis date (never the clock), or the
/// epoch when there is none.
pub fn last_change(analysis_date: Option<&str>) -> String {
    format!("{}T00:00:00.000Z", analysis_date.unwrap_or("1970-01-01"))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn le_f64(b: &[u8], at: usize) -> f64 {
        f64::from_le_bytes(b[at..at + 8].try_into().unwrap())
    }

    fn le_u32(b: &[u8], at: usize) -> u32 {
        u32::from_le_bytes(b[at..at + 4].try_into().unwrap())
    }

    #[test]
    fn structure_fields_follow_the_scalar_fields() {
        let names: Vec<&str> = STRUCTURE_FIELDS.iter().map(|(n, _)| *n).collect();
        assert_eq!(names, crate::results::SCALAR_FIELDS);
    }

    #[test]
    fn point_fields_are_the_points_csv_columns_without_lon_lat() {
        let names: Vec<&str> = POINT_FIELDS.iter().map(|(n, _)| *n).collect();
        let csv: Vec<&str> = super::super::POINT_COLUMNS
            .iter()
            .copied()
            .filter(|c| *c != "lon" && *c != "lat")
            .collect();
        assert_eq!(names, csv);
    }

    #[test]
    fn point_blob_is_header_without_envelope_then_iso_wkb() {
        let f = point_blob(11.25, 48.5);
        let b = &f.geom;
        assert_eq!(&b[0..3], b"GP\0");
        assert_eq!(b[3], 0b0000_0001, "little-endian, no envelope, not empty");
        assert_eq!(i32::from_le_bytes(b[4..8].try_into().unwrap()), 4326);
        assert_eq!(b[8], 1, "WKB little-endian");
        assert_eq!(le_u32(b, 9), 1, "WKB Point");
        assert_eq!((le_f64(b, 13), le_f64(b, 21)), (11.25, 48.5));
        assert_eq!(b.len(), 29);
        assert_eq!(f.envelope, Some([11.25, 11.25, 48.5, 48.5]));
        assert_eq!(blob_envelope(b), f.envelope);
    }

    #[test]
    fn a_point_without_coordinates_is_the_empty_point() {
        let f = point_blob(f64::NAN, 3.0);
        assert_eq!(f.geom[3], 0b0001_0001, "empty flag set");
        assert!(le_f64(&f.geom, 13).is_nan() && le_f64(&f.geom, 21).is_nan());
        assert_eq!(f.envelope, None);
        assert_eq!(blob_envelope(&f.geom), None);
    }

    #[test]
    fn multipolygon_blob_has_the_envelope_and_every_ring() {
        use geo::{LineString, MultiPolygon, Polygon};
        let outer = LineString::from(vec![
            (0.0, 0.0),
            (4.0, 0.0),
            (4.0, 2.0),
            (0.0, 2.0),
            (0.0, 0.0),
        ]);
        let hole = LineString::from(vec![(1.0, 0.5), (2.0, 0.5), (2.0, 1.5), (1.0, 0.5)]);
        let second = LineString::from(vec![(-3.0, 5.0), (-2.0, 5.0), (-2.0, 7.0), (-3.0, 5.0)]);
        let mp = MultiPolygon(vec![
            Polygon::new(outer, vec![hole]),
            Polygon::new(second, vec![]),
        ]);
        let f = multipolygon_blob(&mp);
        let b = &f.geom;
        assert_eq!(
            b[3], 0b0000_0011,
            "little-endian, envelope [minx, maxx, miny, maxy]"
        );
        let env = [le_f64(b, 8), le_f64(b, 16), le_f64(b, 24), le_f64(b, 32)];
        assert_eq!(env, [-3.0, 4.0, 0.0, 7.0]);
        assert_eq!(f.envelope, Some(env));
        assert_eq!(blob_envelope(b), Some(env));
        // WKB from byte 40: MultiPolygon of 2, first polygon of 2 rings (5 and 4 points).
        assert_eq!((b[40], le_u32(b, 41), le_u32(b, 45)), (1, 6, 2));
        assert_eq!((b[49], le_u32(b, 50), le_u32(b, 54)), (1, 3, 2));
        assert_eq!(le_u32(b, 58), 5);
        assert_eq!((le_f64(b, 62 + 16), le_f64(b, 62 + 24)), (4.0, 0.0));
        let hole_at = 62 + 5 * 16;
        assert_eq!(le_u32(b, hole_at), 4);
        let second_at = hole_at + 4 + 4 * 16;
        assert_eq!((le_u32(b, second_at + 1), le_u32(b, second_at + 5)), (3, 1));
        assert_eq!(b.len(), second_at + 9 + 4 + 4 * 16);
    }

    /// The fixed-size point blob is the one the general writers (`header`, `wkb_head`,
    /// `wkb_xy`) give, for a point and for the empty point.
    #[test]
    fn point_geometry_is_the_general_blob_layout() {
        for (x, y) in [
            (11.25, 48.5),
            (-0.0, 1e-9),
            (f64::NAN, 3.0),
            (2.0, f64::INFINITY),
        ] {
            let empty = !(x.is_finite() && y.is_finite());
            let mut b = Vec::new();
            header(&mut b, None, empty);
            wkb_head(&mut b, 1);
            if empty {
                wkb_xy(&mut b, f64::NAN, f64::NAN);
            } else {
                wkb_xy(&mut b, x, y);
            }
            let (fixed, envelope) = point_geometry(x, y);
            assert_eq!(fixed.as_slice(), b.as_slice(), "({x}, {y})");
            assert_eq!(envelope, (!empty).then_some([x, x, y, y]));
        }
    }

    /// Rows written in pieces (several waves, full batches of ROWS_PER_INSERT and a remainder)
    /// read back in order, each with its values, and the index holds every located point.
    #[test]
    fn a_layer_written_in_pieces_reads_back_in_order() {
        let t = tempfile::tempdir().unwrap();
        let path = t.path().join("x.gpkg");
        let mut g = Gpkg::create(&path, &last_change(None)).unwrap();
        let n = 5 * ROWS_PER_INSERT + 7;
        let pieces: Vec<std::ops::Range<usize>> =
            (0..n).step_by(37).map(|s| s..(s + 37).min(n)).collect();
        let row = |i: usize| -> Feature {
            let x = if i % 50 == 3 {
                f64::NAN
            } else {
                i as f64 / 10.0
            };
            let mut f = point_blob(x, 1.0);
            f.values = POINT_FIELDS
                .iter()
                .enumerate()
                .map(|(k, (_, t))| match t {
                    FieldType::Text => Sql::Text(format!("p{i}-{k}")),
                    FieldType::Real if i % 2 == 0 => Sql::Null,
                    FieldType::Real => Sql::Real(i as f64 + 0.5),
                    _ => Sql::Integer((i * 100 + k) as i64),
                })
                .collect();
            f
        };
        let written = g
            .write_layer_in_pieces(
                &POINTS_LAYER,
                &pieces,
                |r| r.clone().map(row).collect(),
                |layer, f| layer.push(f),
            )
            .unwrap();
        assert_eq!(written, n as u64);
        g.finish().unwrap();
        let back = read_layer(&path, &POINTS_LAYER).unwrap();
        assert_eq!(back.len(), n);
        for (i, f) in back.iter().enumerate() {
            assert_eq!(*f, row(i), "row {i}");
        }
        let c = Connection::open(&path).unwrap();
        let located: i64 = c
            .query_row("SELECT count(*) FROM rtree_points_geom", [], |r| r.get(0))
            .unwrap();
        assert_eq!(located as usize, n - (0..n).filter(|i| i % 50 == 3).count());
    }

    #[test]
    fn a_written_layer_reads_back_with_its_index_and_metadata() {
        let t = tempfile::tempdir().unwrap();
        let path = t.path().join("x.gpkg");
        let mut g = Gpkg::create(&path, &last_change(Some("2024-06-30"))).unwrap();
        let feats = [(1.0, 2.0), (f64::NAN, 0.0), (-1.5, 3.0)].map(|(x, y)| {
            let mut f = point_blob(x, y);
            f.values = POINT_FIELDS
                .iter()
                .map(|(_, t)| match t {
                    FieldType::Text => Sql::Text("a".into()),
                    FieldType::Real => Sql::Real(x),
                    _ => Sql::Integer(1),
                })
                .collect();
            f
        });
        assert_eq!(
            g.write_layer(&POINTS_LAYER, feats.clone().map(Ok)).unwrap(),
            3
        );
        g.finish().unwrap();
        let back = read_layer(&path, &POINTS_LAYER).unwrap();
        assert_eq!(back.len(), 3);
        assert_eq!(back[0], feats[0]);
        assert_eq!(back[2], feats[2]);
        let c = Connection::open(&path).unwrap();
        let q = |sql: &str| -> String {
            c.query_row(sql, [], |r| r.get::<_, Sql>(0))
                .map(|v| format!("{v:?}"))
                .unwrap()
        };
        assert_eq!(
            q("PRAGMA application_id"),
            format!("Integer({APPLICATION_ID})")
        );
        assert_eq!(
            q("SELECT count(*) FROM rtree_points_geom"),
            "Integer(2)",
            "the empty point is not indexed"
        );
        assert_eq!(
            q("SELECT min_x FROM gpkg_contents WHERE table_name = 'points'"),
            "Real(-1.5)"
        );
        assert_eq!(q("SELECT max_y FROM gpkg_contents"), "Real(3.0)");
        assert_eq!(
            q("SELECT last_change FROM gpkg_contents"),
            "Text(\"2024-06-30T00:00:00.000Z\")"
        );
        assert_eq!(
            q("SELECT geometry_type_name FROM gpkg_geometry_columns"),
            "Text(\"POINT\")"
        );
        assert_eq!(
            q("SELECT count(*) FROM sqlite_master WHERE type = 'trigger'"),
            "Integer(6)"
        );
        assert_eq!(q("PRAGMA integrity_check"), "Text(\"ok\")");
    }

    #[test]
    fn a_feature_with_the_wrong_number_of_values_is_an_error() {
        let t = tempfile::tempdir().unwrap();
        let mut g = Gpkg::create(&t.path().join("x.gpkg"), &last_change(None)).unwrap();
        let e = g
            .write_layer(&POINTS_LAYER, [Ok(point_blob(0.0, 0.0))])
            .unwrap_err();
        assert!(e.to_string().contains("0 values for 11 columns"), "{e}");
    }
}
