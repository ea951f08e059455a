//! Output files: results.json/csv/geojson, points.csv/geojson, results.gpkg, manifest.json, atomic
//! writes and
//! safe file names.
//!
//! Owns the on-disk formats (documented in docs/formats.md) and the rule that a run either
//! replaces the output folder completely or leaves it untouched: everything is written into a
//! temporary sibling folder, which is swapped in by rename only when the whole run succeeded.
//! Which folder may be written at all is decided first, by [`guard`]. It does not compute anything.

pub mod explorer;
pub mod gpkg;
pub mod guard;
pub mod rtree_pack;
pub mod safe_names;

use std::io::Write;
use std::path::{Path, PathBuf};

use anyhow::{Context, Result};
use sha2::{Digest, Sha256};

use crate::results::{Results, SCALAR_FIELDS};

/// Write a file inside the staging folder (the folder itself is swapped atomically).
pub fn write_file(dir: &Path, rel: &str, bytes: &[u8]) -> Result<()> {
    let p = dir.join(rel);
    if let Some(parent) = p.parent() {
        std::fs::create_dir_all(parent)
            .with_context(|| format!("cannot create {}", parent.display()))?;
    }
    let mut f =
        std::fs::File::create(&p).with_context(|| format!("cannot write {}", p.display()))?;
    f.write_all(bytes)
        .with_context(|| format!("cannot write {}", p.display()))?;
    Ok(())
}

/// Stream a file inside the staging folder through a buffered writer.
pub fn write_with(
    dir: &Path,
    rel: &str,
    f: impl FnOnce(&mut dyn Write) -> Result<()>,
) -> Result<()> {
    let p = dir.join(rel);
    if let Some(parent) = p.parent() {
        std::fs::create_dir_all(parent)
            .with_context(|| format!("cannot create {}", parent.display()))?;
    }
    let file =
        std::fs::File::create(&p).with_context(|| format!("cannot write {}", p.display()))?;
    let mut w = std::io::BufWriter::with_capacity(1 << 20, file);
    f(&mut w).with_context(|| format!("cannot write {}", p.display()))?;
    w.into_inner()
        .map_err(|e| anyhow::anyhow!("cannot write {}: {}", p.display(), e.error()))?;
    Ok(())
}

/// A staging folder next to the final output folder.
///
/// Built only from a [`guard::Target`]: the guard has already decided that the final folder is
/// new, empty, or a previous Plinth output folder.
pub struct Staging {
    /// Where files are written during the run.
    pub dir: PathBuf,
    /// The final folder (resolved path).
    pub target: PathBuf,
}

/// `(parent, name)` of a resolved target path.
fn parent_and_name(target: &Path) -> Result<(PathBuf, String)> {
    let parent = target
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .with_context(|| format!("{} has no parent folder to write beside", target.display()))?;
    let name = target
        .file_name()
        .with_context(|| format!("{} does not end in a folder name", target.display()))?;
    Ok((parent.to_path_buf(), name.to_string_lossy().into_owned()))
}

impl Staging {
    /// Create `.NAME.partial-PID` next to the accepted target.
    pub fn new(target: &guard::Target) -> Result<Staging> {
        let (parent, name) = parent_and_name(&target.path)?;
        std::fs::create_dir_all(&parent)
            .with_context(|| format!("cannot create {}", parent.display()))?;
        let dir = parent.join(format!(".{name}.partial-{}", std::process::id()));
        // `create_dir` (not `_all`) fails on anything already there: it is never reused or removed.
        std::fs::create_dir(&dir).with_context(|| {
            format!(
                "cannot create the staging folder {} (if it is left from an earlier run, delete it)",
                dir.display()
            )
        })?;
        Ok(Staging {
            dir,
            target: target.path.clone(),
        })
    }

    /// Swap the staging folder in place of the target. A folder already there (empty, or a
    /// previous output the guard accepted) is moved aside first and removed only after the new
    /// one is in place, and then only the names Plinth writes ([`guard::remove_replaced`]).
    pub fn commit(self) -> Result<()> {
        flush_to_disk(&self.dir);
        let (parent, name) = parent_and_name(&self.target)?;
        if std::fs::symlink_metadata(&self.target).is_err() {
            return std::fs::rename(&self.dir, &self.target).with_context(|| {
                format!(
                    "cannot move the new output from {} to {}; it is left in {}",
                    self.dir.display(),
                    self.target.display(),
                    self.dir.display()
                )
            });
        }
        let old = parent.join(format!(".{name}.old-{}", std::process::id()));
        if std::fs::symlink_metadata(&old).is_ok() {
            anyhow::bail!(
                "cannot move the previous {} aside: {} is already there (delete it yourself); the \
                 new output is left in {}",
                self.target.display(),
                old.display(),
                self.dir.display()
            );
        }
        std::fs::rename(&self.target, &old).with_context(|| {
            format!(
                "cannot move the previous {} aside; it is unchanged, and the new output is left in {}",
                self.target.display(),
                self.dir.display()
            )
        })?;
        if let Err(e) = std::fs::rename(&self.dir, &self.target) {
            return Err(match std::fs::rename(&old, &self.target) {
                Ok(()) => anyhow::anyhow!(
                    "cannot move the new output into {}: {e}; the previous output is back in \
                     place, and the new output is left in {}",
                    self.target.display(),
                    self.dir.display()
                ),
                Err(e2) => anyhow::anyhow!(
                    "cannot move the new output into {}: {e}; nor the previous output back: {e2}. \
                     The previous output is in {} and the new output in {}: move one of them to {} \
                     yourself",
                    self.target.display(),
                    old.display(),
                    self.dir.display(),
                    self.target.display()
                ),
            });
        }
        match guard::remove_replaced(&old) {
            Ok(None) => {}
            Ok(Some(entry)) => eprintln!(
                "warning: the previous output was moved to {} and not deleted: it now holds `{entry}`, \
                 which Plinth did not write; check it and delete it yourself",
                old.display()
            ),
            Err(e) => eprintln!(
                "warning: the previous output was moved to {} and could not be fully deleted ({e}); \
                 delete it yourself",
                old.display()
            ),
        }
        Ok(())
    }

    /// Remove the staging folder (on failure); the target is untouched.
    pub fn abandon(self) {
        std::fs::remove_dir_all(&self.dir).ok();
    }
}

/// Flush everything written into the staging folder to disk before it is swapped in: one
/// `syncfs` of its file system on Linux (instead of one `fsync` per file, about 0.4 ms each: 8 s
/// for the 20 000 files of a 10 000-structure run with reports), each file's `fsync` elsewhere.
/// Best effort: a failure here surfaces when the files are read, as it would after `fsync`.
fn flush_to_disk(dir: &Path) {
    #[cfg(target_os = "linux")]
    {
        if let Ok(d) = std::fs::File::open(dir) {
            rustix::fs::syncfs(&d).ok();
        }
    }
    #[cfg(not(target_os = "linux"))]
    {
        fn walk(p: &Path) {
            for e in std::fs::read_dir(p).into_iter().flatten().flatten() {
                match e.file_type() {
                    Ok(t) if t.is_dir() => walk(&e.path()),
                    Ok(t) if t.is_file() => {
                        if let Ok(f) = std::fs::File::open(e.path()) {
                            f.sync_all().ok();
                        }
                    }
                    _ => {}
                }
            }
        }
        walk(dir);
    }
}

/// Write a new folder for `init`, `demo` and `bench`: accepted only when it does not exist or is
/// empty ([`guard::Policy::NewOrEmpty`]), filled by `fill` in a staging folder, swapped in on
/// success.
pub fn write_new_folder(dir: &Path, fill: impl FnOnce(&Path) -> Result<()>) -> Result<()> {
    let target = guard::check(dir, guard::Policy::NewOrEmpty, &[])?;
    let staging = Staging::new(&target)?;
    match fill(&staging.dir) {
        Ok(()) => staging.commit(),
        Err(e) => {
            staging.abandon();
            Err(e)
        }
    }
}

/// SHA-256 of a file, hex.
pub fn sha256_file(path: &Path) -> Result<String> {
    let mut f = std::fs::File::open(path)
        .with_context(|| format!("cannot read {} to hash it", path.display()))?;
    let mut h = Sha256::new();
    let mut buf = vec![0u8; 1 << 20];
    loop {
        let n = std::io::Read::read(&mut f, &mut buf)?;
        if n == 0 {
            break;
        }
        h.update(&buf[..n]);
    }
    Ok(hex(&h.finalize()))
}

/// Lower-case hex of bytes.
pub fn hex(b: &[u8]) -> String {
    b.iter().map(|x| format!("{x:02x}")).collect()
}

/// results.json text (see [`results_json_to`]).
pub fn results_json(r: &Results) -> Result<String> {
    let mut v = Vec::new();
    results_json_to(r, &mut v)?;
    Ok(String::from_utf8(v)?)
}

/// Stream results.json: the portfolio block indented, then one structure record per line (a
/// city of records stays readable line by line and compact), stable field order.
pub fn results_json_to(r: &Results, w: &mut dyn Write) -> Result<()> {
    results_layout_to(&r.portfolio, &r.structures, w)
}

/// The results.json layout of [`results_json_to`] for any serialisable portfolio block and
/// records (`merge` writes parsed values with it).
pub fn results_layout_to<P: serde::Serialize, S: serde::Serialize>(
    portfolio: &P,
    structures: &[S],
    w: &mut dyn Write,
) -> Result<()> {
    w.write_all(b"{\n\"portfolio\": ")?;
    serde_json::to_writer_pretty(&mut *w, portfolio)?;
    w.write_all(b",\n\"structures\": [")?;
    for (i, s) in structures.iter().enumerate() {
        w.write_all(if i == 0 { b"\n" } else { b",\n" })?;
        serde_json::to_writer(&mut *w, s)?;
    }
    w.write_all(b"\n]\n}\n")?;
    Ok(())
}

/// results.csv text: one row per structure, the scalar fields.
pub fn results_csv(r: &Results) -> Result<Vec<u8>> {
    let mut v = Vec::new();
    results_csv_to(r, &mut v)?;
    Ok(v)
}

/// Stream results.csv.
pub fn results_csv_to(r: &Results, out: &mut dyn Write) -> Result<()> {
    let mut w = csv::Writer::from_writer(out);
    w.write_record(SCALAR_FIELDS)?;
    for s in &r.structures {
        w.write_record(s.csv_cells())?;
    }
    w.flush()?;
    Ok(())
}

fn ring_json(ls: &geo::LineString<f64>) -> serde_json::Value {
    serde_json::Value::Array(
        ls.0.iter()
            .map(|c| serde_json::json!([round9(c.x), round9(c.y)]))
            .collect(),
    )
}

fn round9(v: f64) -> f64 {
    (v * 1e9).round() / 1e9
}

/// GeoJSON MultiPolygon geometry of a footprint (lon/lat).
pub fn multipolygon_json(mp: &geo::MultiPolygon<f64>) -> serde_json::Value {
    let polys: Vec<serde_json::Value> =
        mp.0.iter()
            .map(|p| {
                let mut rings = vec![ring_json(p.exterior())];
                rings.extend(p.interiors().iter().map(ring_json));
                serde_json::Value::Array(rings)
            })
            .collect();
    serde_json::json!({"type": "MultiPolygon", "coordinates": polys})
}

/// results.geojson text: footprints (WGS84, RFC 7946) with the scalar fields as properties.
pub fn results_geojson(r: &Results, footprints_wgs84: &[geo::MultiPolygon<f64>]) -> Result<String> {
    let fps: Vec<&geo::MultiPolygon<f64>> = footprints_wgs84.iter().collect();
    let mut v = Vec::new();
    results_geojson_to(r, &fps, &mut v)?;
    Ok(String::from_utf8(v)?)
}

/// Stream results.geojson, one feature at a time.
pub fn results_geojson_to(
    r: &Results,
    footprints_wgs84: &[&geo::MultiPolygon<f64>],
    w: &mut dyn Write,
) -> Result<()> {
    w.write_all(b"{\"type\":\"FeatureCollection\",\"features\":[")?;
    for (i, (s, fp)) in r.structures.iter().zip(footprints_wgs84).enumerate() {
        let full = serde_json::to_value(s)?;
        let mut props = serde_json::Map::new();
        for f in SCALAR_FIELDS {
            let v = full.get(*f).cloned().unwrap_or(serde_json::Value::Null);
            // GIS tools want flat properties: lists and maps become text.
            let v = match v {
                serde_json::Value::Array(_) | serde_json::Value::Object(_) => {
                    serde_json::Value::String(v.to_string())
                }
                other => other,
            };
            props.insert((*f).to_string(), v);
        }
        let feat = serde_json::json!({
            "type": "Feature",
            "properties": props,
            "geometry": multipolygon_json(fp),
        });
        if i > 0 {
            w.write_all(b",")?;
        }
        serde_json::to_writer(&mut *w, &feat)?;
    }
    w.write_all(b"]}\n")?;
    Ok(())
}

/// One row of points.csv (borrowing the inputs: built on the fly while writing).
#[derive(Debug, Clone, serde::Serialize)]
pub struct PointRow<'a> {
    /// Dataset name.
    pub dataset: &'a str,
    /// Point id.
    pub point_id: &'a str,
    /// Line in the points file.
    pub line: u64,
    /// Longitude (WGS84).
    pub lon: f64,
    /// Latitude (WGS84).
    pub lat: f64,
    /// Structure id ("" for a tie).
    pub structure_id: &'a str,
    /// `structure` | `surroundings` | `tie`.
    pub role: &'static str,
    /// Inside the footprint.
    pub inside: bool,
    /// Distance to the footprint, m.
    pub distance_m: f64,
    /// `kept` | `rejected`.
    pub status: &'static str,
    /// Rejection reason ("" when kept).
    pub reason: &'static str,
    /// Vertical velocity of the point, mm/yr (+ up), when computed.
    pub vertical_velocity_mm_per_yr: Option<f64>,
    /// Number of structures whose surroundings ring holds the point.
    pub surroundings_of: usize,
}

/// Column names of points.csv, in order.
pub const POINT_COLUMNS: [&str; 13] = [
    "dataset",
    "point_id",
    "line",
    "lon",
    "lat",
    "structure_id",
    "role",
    "inside",
    "distance_m",
    "status",
    "reason",
    "vertical_velocity_mm_per_yr",
    "surroundings_of",
];

/// Stream points.csv.
pub fn points_csv_to<'a>(
    rows: impl IntoIterator<Item = PointRow<'a>>,
    out: &mut dyn Write,
) -> Result<()> {
    let mut buf = Vec::new();
    points_csv_header(&mut buf)?;
    points_csv_rows(rows, &mut buf)?;
    out.write_all(&buf)?;
    Ok(())
}

/// The header line of points.csv.
pub fn points_csv_header(buf: &mut Vec<u8>) -> Result<()> {
    let mut w = csv::WriterBuilder::new()
        .has_headers(false)
        .from_writer(buf);
    w.write_record(POINT_COLUMNS)?;
    w.flush()?;
    Ok(())
}

/// Append rows of points.csv (no header) to `buf`: one piece of the file, formatted on its own
/// so that pieces can be formatted in parallel and written in order.
pub fn points_csv_rows<'a>(
    rows: impl IntoIterator<Item = PointRow<'a>>,
    buf: &mut Vec<u8>,
) -> Result<()> {
    let mut w = csv::WriterBuilder::new()
        .has_headers(false)
        .from_writer(buf);
    for r in rows {
        w.serialize(r)?;
    }
    w.flush()?;
    Ok(())
}

/// The geometry member of a point feature.
#[derive(serde::Serialize)]
struct PointGeometry {
    r#type: &'static str,
    coordinates: [f64; 2],
}

/// One point feature of points.geojson.
#[derive(serde::Serialize)]
struct PointFeature<'r, 'a> {
    r#type: &'static str,
    properties: &'r PointRow<'a>,
    geometry: PointGeometry,
}

/// The text before the first feature of points.geojson.
pub const POINTS_GEOJSON_HEAD: &[u8] = b"{\"type\":\"FeatureCollection\",\"features\":[";
/// The text after the last feature of points.geojson.
pub const POINTS_GEOJSON_TAIL: &[u8] = b"]}\n";

/// Stream points.geojson, one feature at a time.
pub fn points_geojson_to<'a>(
    rows: impl IntoIterator<Item = PointRow<'a>>,
    w: &mut dyn Write,
) -> Result<()> {
    let mut buf = Vec::new();
    points_geojson_features(rows, &mut buf)?;
    w.write_all(POINTS_GEOJSON_HEAD)?;
    w.write_all(buf.get(1..).unwrap_or_default())?;
    w.write_all(POINTS_GEOJSON_TAIL)?;
    Ok(())
}

/// Append features of points.geojson to `buf`, each preceded by a comma (the writer drops the
/// comma before the file's first feature): one piece of the file, formatted on its own.
pub fn points_geojson_features<'a>(
    rows: impl IntoIterator<Item = PointRow<'a>>,
    buf: &mut Vec<u8>,
) -> Result<()> {
    for r in rows {
        let f = PointFeature {
            r#type: "Feature",
            properties: &r,
            geometry: PointGeometry {
                r#type: "Point",
                coordinates: [round9(r.lon), round9(r.lat)],
            },
        };
        buf.push(b',');
        serde_json::to_writer(&mut *buf, &f)?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn previous_output(dir: &Path) {
        std::fs::create_dir_all(dir).unwrap();
        let m = serde_json::json!({"tool": "plinth", (guard::FORMAT_KEY): guard::FORMAT_MARKER});
        std::fs::write(dir.join("manifest.json"), m.to_string()).unwrap();
        std::fs::write(dir.join("results.json"), "old").unwrap();
    }

    #[test]
    fn commit_replaces_a_previous_output_and_leaves_nothing_beside_it() {
        let t = tempfile::tempdir().unwrap();
        let out = t.path().join("out");
        previous_output(&out);
        let target = guard::check(&out, guard::Policy::ReplaceOutput, &[]).unwrap();
        let s = Staging::new(&target).unwrap();
        write_file(&s.dir, "results.json", b"new").unwrap();
        s.commit().unwrap();
        assert_eq!(std::fs::read(out.join("results.json")).unwrap(), b"new");
        assert!(!out.join("manifest.json").exists());
        let names: Vec<_> = std::fs::read_dir(t.path()).unwrap().collect();
        assert_eq!(names.len(), 1, "only `out` is left");
    }

    #[test]
    fn failed_swap_restores_the_previous_output_and_says_where_the_new_one_is() {
        let t = tempfile::tempdir().unwrap();
        let out = t.path().join("out");
        previous_output(&out);
        let target = guard::check(&out, guard::Policy::ReplaceOutput, &[]).unwrap();
        let s = Staging::new(&target).unwrap();
        let staged = s.dir.clone();
        // The staging folder vanishes before the swap: moving it into place fails.
        std::fs::remove_dir(&staged).unwrap();
        let msg = format!("{:#}", s.commit().unwrap_err());
        assert!(msg.contains("previous output is back in place"), "{msg}");
        assert!(msg.contains(&staged.display().to_string()), "{msg}");
        assert_eq!(std::fs::read(out.join("results.json")).unwrap(), b"old");
    }

    #[test]
    fn a_stale_staging_folder_is_never_removed() {
        let t = tempfile::tempdir().unwrap();
        let out = t.path().join("out");
        let stale = t
            .path()
            .join(format!(".out.partial-{}", std::process::id()));
        std::fs::create_dir(&stale).unwrap();
        std::fs::write(stale.join("keep.txt"), "x").unwrap();
        let target = guard::check(&out, guard::Policy::ReplaceOutput, &[]).unwrap();
        assert!(Staging::new(&target).is_err());
        assert!(stale.join("keep.txt").is_file());
    }
}
