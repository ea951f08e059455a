//! Points from GIS point layers: GeoPackage (`.gpkg`) and Shapefile (`.shp` + `.dbf` + `.prj`),
//! one attribute per acquisition date.
//!
//! Owns: choosing the layer and the CRS (as for footprints, see `ingest::gis`), and turning the
//! layer into the CSV text the points reader (`ingest::points`) reads, streamed: a producer thread
//! walks the features one at a time and sends the rows in 1 MiB blocks through a bounded channel,
//! so memory holds a few blocks, never the layer. The attribute names are the header (the point
//! geometry gives the `columns.x` / `columns.y` columns; attributes of those names are dropped),
//! so the column map, `date_format` (e.g. `D%Y%m%d` for Shapefile fields such as `D20230115`),
//! units, sign, validation and screening are the CSV reader's. A row's line number is its
//! feature's position + 1 (the header is line 1: the line it has in a CSV export of the layer);
//! messages name the feature instead. Z/M values are dropped with one warning.
//! It does not associate or screen points itself.

use std::io::{BufRead, Read};
use std::path::Path;
use std::sync::mpsc::{Receiver, SyncSender, sync_channel};
use std::sync::{Arc, Mutex};

use super::gis::{Format, Stated, gpkg, settle_crs, shp};
use crate::association::PointAssociation;
use crate::coords::{Crs, Transformer};
use crate::error::{InputError, Warnings};
use crate::portfolio::DatasetSpec;

/// Rows are sent to the parser in blocks of about this many bytes.
const BLOCK: usize = 1 << 20;

/// Blocks in flight between the producer and the parser.
const IN_FLIGHT: usize = 4;

/// Whether a points file is a GIS layer (by extension) rather than CSV.
pub fn is_gis(path: &Path) -> bool {
    super::gis::format_of(path) != Format::GeoJson
}

/// An opened points layer: where its rows come from and the CRS of its coordinates.
pub struct Layer {
    source: Source,
    /// CRS of the point coordinates (declared by the file, or the dataset's `crs`).
    pub crs: Crs,
    /// How features are named in messages (``layer `x` `` or empty).
    label: String,
}

enum Source {
    Gpkg {
        conn: rusqlite::Connection,
        table: String,
        column: String,
    },
    Shp(Box<ShpReader>, Vec<String>),
}

type ShpReader =
    shapefile::Reader<std::io::BufReader<std::fs::File>, std::io::BufReader<std::fs::File>>;

/// Open a GeoPackage or Shapefile points layer of dataset `i` and settle its CRS.
pub fn open(spec: &DatasetSpec, i: usize, warnings: &mut Warnings) -> Result<Layer, InputError> {
    let file = spec.path.as_path();
    let key = format!("datasets[{i}].crs");
    let stated = Stated {
        crs: &spec.crs,
        given: spec.crs_given,
        key: &key,
    };
    match super::gis::format_of(file) {
        Format::GeoPackage => {
            let conn = rusqlite::Connection::open_with_flags(
                file,
                rusqlite::OpenFlags::SQLITE_OPEN_READ_ONLY,
            )
            .map_err(|e| gpkg::sql_err(file, e))?;
            let layer = gpkg::choose(
                gpkg::layers(&conn, file)?,
                spec.layer.as_deref(),
                &format!("datasets[{i}].layer"),
                file,
            )?;
            let label = format!("layer `{}`", layer.table);
            let declared = gpkg::declared_epsg(&conn, layer.srs_id);
            let crs = settle_crs(&stated, file, &label, declared, warnings)?;
            Ok(Layer {
                source: Source::Gpkg {
                    conn,
                    table: layer.table,
                    column: layer.column,
                },
                crs,
                label,
            })
        }
        Format::FlatGeobuf | Format::GeoJson => Err(InputError::new(
            file,
            "",
            "points are read from CSV, GeoPackage or Shapefile, not from this format",
            "convert the points, e.g. `ogr2ogr -f GPKG points.gpkg points.fgb`",
        )),
        Format::Shapefile => {
            let reader = shp::open(file, "its attribute table, with the dates")?;
            // Field names in file order (the records are maps).
            let dbf = file.with_extension("dbf");
            let names = shapefile::dbase::Reader::from_path(&dbf)
                .map_err(|e| {
                    InputError::new(
                        &dbf,
                        "",
                        format!("cannot read the .dbf: {e}"),
                        "copy or export the Shapefile again (all of .shp, .shx, .dbf and .prj)",
                    )
                })?
                .fields()
                .iter()
                .map(|f| f.name().to_string())
                .collect();
            let declared = shp::prj_epsg(&stated, file, warnings)?;
            let crs = settle_crs(&stated, file, "", declared, warnings)?;
            Ok(Layer {
                source: Source::Shp(Box::new(reader), names),
                crs,
                label: String::new(),
            })
        }
    }
}

/// The producer's first error (it wins over the parser's, which only sees the stream end).
type Failure = Arc<Mutex<Option<InputError>>>;

/// A `BufRead` over the blocks the producer sends.
struct Blocks {
    rx: Receiver<Vec<u8>>,
    cur: Vec<u8>,
    pos: usize,
}

impl Read for Blocks {
    fn read(&mut self, out: &mut [u8]) -> std::io::Result<usize> {
        let avail = self.fill_buf()?;
        let n = avail.len().min(out.len());
        out[..n].copy_from_slice(&avail[..n]);
        self.consume(n);
        Ok(n)
    }
}

impl BufRead for Blocks {
    fn fill_buf(&mut self) -> std::io::Result<&[u8]> {
        while self.pos >= self.cur.len() {
            match self.rx.recv() {
                Ok(b) => {
                    self.cur = b;
                    self.pos = 0;
                }
                Err(_) => return Ok(&[]),
            }
        }
        Ok(&self.cur[self.pos..])
    }

    fn consume(&mut self, n: usize) {
        self.pos += n;
    }
}

/// Writes CSV rows (comma-separated, quoted only where needed) into blocks and sends each
/// full block.
pub(crate) struct Sink {
    tx: SyncSender<Vec<u8>>,
    buf: Vec<u8>,
    /// True before the first field of a row.
    first: bool,
}

impl Sink {
    fn new(tx: SyncSender<Vec<u8>>) -> Sink {
        Sink {
            tx,
            buf: Vec::with_capacity(BLOCK + (64 << 10)),
            first: true,
        }
    }

    /// Write one row of text fields; false when the parser has stopped (nothing more is wanted).
    pub(crate) fn row<I: AsRef<[u8]>>(&mut self, fields: impl IntoIterator<Item = I>) -> bool {
        for f in fields {
            self.text(f.as_ref());
        }
        self.end()
    }

    fn sep(&mut self) {
        if !self.first {
            self.buf.push(b',');
        }
        self.first = false;
    }

    /// A text field, quoted when it holds a comma, a quote or a line break.
    pub(crate) fn text(&mut self, s: &[u8]) {
        self.sep();
        if memchr::memchr3(b',', b'"', b'\n', s).is_some() || memchr::memchr(b'\r', s).is_some() {
            self.buf.push(b'"');
            for &c in s {
                if c == b'"' {
                    self.buf.push(b'"');
                }
                self.buf.push(c);
            }
            self.buf.push(b'"');
        } else {
            self.buf.extend_from_slice(s);
        }
    }

    /// A number field ([`num_text`]; empty when not finite).
    pub(crate) fn num(&mut self, v: f64) {
        use std::io::Write;
        self.sep();
        if v.is_finite() {
            let _ = write!(self.buf, "{v}");
        }
    }

    /// An integer field (empty for None).
    pub(crate) fn int(&mut self, v: Option<i64>) {
        use std::io::Write;
        self.sep();
        if let Some(v) = v {
            let _ = write!(self.buf, "{v}");
        }
    }

    /// End the row; false when the parser has stopped.
    pub(crate) fn end(&mut self) -> bool {
        self.buf.push(b'\n');
        self.first = true;
        if self.buf.len() >= BLOCK {
            return self.flush();
        }
        true
    }

    fn flush(&mut self) -> bool {
        let full = std::mem::replace(&mut self.buf, Vec::with_capacity(BLOCK + (64 << 10)));
        full.is_empty() || self.tx.send(full).is_ok()
    }
}

/// Text of a number as the CSV reader expects it: the shortest decimal that reads back exactly.
pub(crate) fn num_text(v: f64) -> String {
    if v.is_finite() {
        format!("{v}")
    } else {
        String::new()
    }
}

/// Read the layer as dataset `spec` (see [`super::points::read_points`] for the other arguments).
pub fn read(
    layer: Layer,
    spec: &DatasetSpec,
    to_analysis: &Transformer,
    associate: &(dyn Fn(f64, f64) -> Option<PointAssociation> + Sync),
    warnings: &mut Warnings,
) -> Result<super::points::Dataset, InputError> {
    let gpkg = super::gis::format_of(&spec.path) == Format::GeoPackage;
    let naming = Naming {
        label: layer.label.clone(),
        noun: "feature",
        offset: if gpkg { 1 } else { 2 },
    };
    let geographic = layer.crs.is_geographic();
    let columns = (spec.columns.x.clone(), spec.columns.y.clone());
    let file = spec.path.clone();
    read_stream(
        spec,
        geographic,
        &naming,
        to_analysis,
        associate,
        warnings,
        move |sink, zm| match layer.source {
            Source::Gpkg {
                conn,
                table,
                column,
            } => produce_gpkg(&conn, &table, &column, &columns, &file, sink, zm),
            Source::Shp(reader, names) => produce_shp(*reader, &names, &columns, &file, sink, zm),
        },
    )
}

/// How the rows of a streamed source are named in messages: `line N` of the CSV stream becomes
/// `{label}, {noun} N-offset`.
pub(crate) struct Naming {
    /// E.g. ``layer `points` `` (may be empty).
    pub(crate) label: String,
    /// `feature` or `row`.
    pub(crate) noun: &'static str,
    /// Subtracted from the CSV line number.
    pub(crate) offset: u64,
}

/// Run `produce` on its own thread, streaming CSV blocks into the points reader; the producer's
/// error wins over the reader's. `produce` sets the flag when it dropped Z/M values.
pub(crate) fn read_stream(
    spec: &DatasetSpec,
    geographic: bool,
    naming: &Naming,
    to_analysis: &Transformer,
    associate: &(dyn Fn(f64, f64) -> Option<PointAssociation> + Sync),
    warnings: &mut Warnings,
    produce: impl FnOnce(&mut Sink, &std::sync::atomic::AtomicBool) -> Result<(), InputError> + Send,
) -> Result<super::points::Dataset, InputError> {
    let file = spec.path.clone();
    let mut csv_spec = spec.clone();
    csv_spec.delimiter = Some(b',');
    let (tx, rx) = sync_channel::<Vec<u8>>(IN_FLIGHT);
    let failure: Failure = Arc::default();
    let zm = Arc::new(std::sync::atomic::AtomicBool::new(false));
    let result = std::thread::scope(|scope| {
        let (failure2, zm2) = (failure.clone(), zm.clone());
        scope.spawn(move || {
            let mut sink = Sink::new(tx);
            match produce(&mut sink, &zm2) {
                Ok(()) => {
                    sink.flush();
                }
                Err(e) => *failure2.lock().expect("not poisoned") = Some(e),
            }
        });
        let blocks = Blocks {
            rx,
            cur: Vec::new(),
            pos: 0,
        };
        super::points::read_points_from(
            blocks,
            &file,
            &csv_spec,
            to_analysis,
            geographic,
            associate,
            None,
            warnings,
        )
    });
    if let Some(e) = failure.lock().expect("not poisoned").take() {
        return Err(e);
    }
    if zm.load(std::sync::atomic::Ordering::Relaxed) {
        warnings.push(
            "coordinates_3d",
            format!(
                "{}: points with Z (height) or M (measure) values; only x and y are used",
                file.display()
            ),
        );
    }
    result.map_err(|e| rename_lines(e, naming))
}

/// Locations `line N` of the CSV stream become `{noun} N-offset` (a GeoPackage feature counts
/// from 1 in fid order: its fid when the fids are 1, 2, ...; Shapefile features and Parquet rows
/// count from 0, as GIS software numbers them); `line 1 (header)` becomes the attribute names.
pub(crate) fn rename_lines(mut e: InputError, n: &Naming) -> InputError {
    let prefix = if n.label.is_empty() {
        String::new()
    } else {
        format!("{}, ", n.label)
    };
    let loc = e.location.clone();
    if let Some(rest) = loc.strip_prefix("line 1 (header)") {
        e.location = format!("{prefix}attribute names{rest}");
    } else if let Some(rest) = loc.strip_prefix("line ") {
        let digits: String = rest.chars().take_while(char::is_ascii_digit).collect();
        if let Ok(line) = digits.parse::<u64>() {
            e.location = format!(
                "{prefix}{} {}{}",
                n.noun,
                line.saturating_sub(n.offset),
                &rest[digits.len()..].replacen(", column", ", attribute", 1)
            );
        }
    }
    e
}

/// Header from the attribute names: every attribute but the x/y names, then x and y.
pub(crate) fn header(names: &[String], xy: &(String, String)) -> (Vec<String>, Vec<usize>) {
    let keep: Vec<usize> = (0..names.len())
        .filter(|&i| names[i] != xy.0 && names[i] != xy.1)
        .collect();
    let mut h: Vec<String> = keep.iter().map(|&i| names[i].clone()).collect();
    h.push(xy.0.clone());
    h.push(xy.1.clone());
    (h, keep)
}

fn produce_gpkg(
    conn: &rusqlite::Connection,
    table: &str,
    column: &str,
    xy: &(String, String),
    file: &Path,
    sink: &mut Sink,
    zm: &std::sync::atomic::AtomicBool,
) -> Result<(), InputError> {
    use rusqlite::types::ValueRef;
    let q = |s: &str| format!("\"{}\"", s.replace('"', "\"\""));
    let pk: String = conn
        .query_row(
            "SELECT name FROM pragma_table_info(?1) WHERE pk = 1",
            [table],
            |r| r.get(0),
        )
        .map_err(|e| gpkg::sql_err(file, e))?;
    let mut stmt = conn
        .prepare(&format!("SELECT * FROM {} ORDER BY {}", q(table), q(&pk)))
        .map_err(|e| gpkg::sql_err(file, e))?;
    let names: Vec<String> = stmt.column_names().iter().map(|s| s.to_string()).collect();
    let geom_col = names.iter().position(|n| n == column);
    let attrs: Vec<String> = names
        .iter()
        .filter(|n| **n != pk && Some(n.as_str()) != geom_col.map(|g| names[g].as_str()))
        .cloned()
        .collect();
    let attr_idx: Vec<usize> = (0..names.len())
        .filter(|&i| names[i] != pk && Some(i) != geom_col)
        .collect();
    let (h, keep) = header(&attrs, xy);
    if !sink.row(&h) {
        return Ok(());
    }
    let mut rows = stmt.query([]).map_err(|e| gpkg::sql_err(file, e))?;
    let mut fields: Vec<String> = Vec::with_capacity(h.len());
    let mut n = 0u64;
    while let Some(row) = rows.next().map_err(|e| gpkg::sql_err(file, e))? {
        n += 1;
        let loc = || format!("layer `{table}`, feature {n}");
        let blob = match geom_col.map(|g| row.get_ref(g)) {
            Some(Ok(ValueRef::Blob(b))) => b,
            _ => {
                return Err(InputError::new(
                    file,
                    loc(),
                    "the feature has no geometry",
                    "every point needs its position",
                ));
            }
        };
        let (x, y, has_zm) = point_of_blob(blob).map_err(|m| {
            InputError::new(
                file,
                loc(),
                m,
                "the points layer must hold Point geometries",
            )
        })?;
        if has_zm {
            zm.store(true, std::sync::atomic::Ordering::Relaxed);
        }
        fields.clear();
        for &k in &keep {
            let v = row
                .get_ref(attr_idx[k])
                .map_err(|e| gpkg::sql_err(file, e))?;
            fields.push(match v {
                ValueRef::Null | ValueRef::Blob(_) => String::new(),
                ValueRef::Integer(i) => i.to_string(),
                ValueRef::Real(f) => num_text(f),
                ValueRef::Text(t) => String::from_utf8_lossy(t).into_owned(),
            });
        }
        fields.push(num_text(x));
        fields.push(num_text(y));
        if !sink.row(&fields) {
            return Ok(());
        }
    }
    Ok(())
}

/// The x, y of a GeoPackage point blob, and whether it had Z/M.
fn point_of_blob(b: &[u8]) -> Result<(f64, f64, bool), String> {
    let (g, zm) = gpkg::blob_geometry(b)?.ok_or("the point geometry is empty")?;
    let _ = &g;
    match g["type"].as_str() {
        Some("Point") => {}
        Some(t) => return Err(format!("geometry type `{t}` is not a point")),
        None => return Err("unreadable geometry".into()),
    }
    let c = &g["coordinates"];
    match (c[0].as_f64(), c[1].as_f64()) {
        (Some(x), Some(y)) => Ok((x, y, zm)),
        _ => Err("the point geometry is empty".into()),
    }
}

fn produce_shp(
    mut reader: ShpReader,
    names: &[String],
    xy: &(String, String),
    file: &Path,
    sink: &mut Sink,
    zm: &std::sync::atomic::AtomicBool,
) -> Result<(), InputError> {
    use shapefile::Shape;
    use shapefile::dbase::FieldValue;
    let mut fields: Vec<String> = Vec::new();
    let (h, keep) = header(names, xy);
    if !sink.row(&h) {
        return Ok(());
    }
    let mut any = false;
    for (i, item) in reader.iter_shapes_and_records().enumerate() {
        let loc = || format!("feature {i}");
        let (shape, record) = item.map_err(|e| {
            InputError::new(
                file,
                loc(),
                format!("cannot read the record: {e} (the .shp or .dbf is truncated or damaged)"),
                "copy or export the Shapefile again (all of .shp, .shx, .dbf and .prj)",
            )
        })?;
        let (x, y, has_zm) = match shape {
            Shape::Point(p) => (p.x, p.y, false),
            Shape::PointM(p) => (p.x, p.y, true),
            Shape::PointZ(p) => (p.x, p.y, true),
            Shape::NullShape => {
                return Err(InputError::new(
                    file,
                    loc(),
                    "the feature has no geometry",
                    "every point needs its position",
                ));
            }
            other => {
                return Err(InputError::new(
                    file,
                    loc(),
                    format!("geometry type `{}` is not a point", other.shapetype()),
                    "the points layer must hold Point geometries",
                ));
            }
        };
        if has_zm {
            zm.store(true, std::sync::atomic::Ordering::Relaxed);
        }
        any = true;
        let mut record = record;
        fields.clear();
        for &k in &keep {
            fields.push(
                match &record
                    .remove(&names[k])
                    .unwrap_or(FieldValue::Character(None))
                {
                    FieldValue::Character(Some(s)) => s.trim().to_string(),
                    FieldValue::Memo(s) => s.trim().to_string(),
                    FieldValue::Numeric(Some(f))
                    | FieldValue::Double(f)
                    | FieldValue::Currency(f) => num_text(*f),
                    FieldValue::Float(Some(f)) => num_text(f64::from(*f)),
                    FieldValue::Integer(v) => v.to_string(),
                    FieldValue::Logical(Some(b)) => b.to_string(),
                    FieldValue::Date(Some(d)) => {
                        format!("{:04}-{:02}-{:02}", d.year(), d.month(), d.day())
                    }
                    _ => String::new(),
                },
            );
        }
        fields.push(num_text(x));
        fields.push(num_text(y));
        if !sink.row(&fields) {
            return Ok(());
        }
    }
    if !any {
        return Err(InputError::new(
            file,
            "",
            "the Shapefile has no points",
            "export the points, one feature per point",
        ));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn header_puts_the_geometry_columns_last_and_drops_same_named_attributes() {
        let names: Vec<String> = ["point_id", "lon", "coherence", "D20230115", "lat"]
            .map(String::from)
            .to_vec();
        let (h, keep) = header(&names, &("lon".into(), "lat".into()));
        assert_eq!(h, ["point_id", "coherence", "D20230115", "lon", "lat"]);
        assert_eq!(keep, [0, 2, 3]);
    }

    #[test]
    fn line_locations_become_features() {
        let gpkg = Naming {
            label: "layer `pts`".into(),
            noun: "feature",
            offset: 1,
        };
        let e = InputError::new(Path::new("p.gpkg"), "line 5, column `D20230115`", "m", "h");
        let r = rename_lines(e, &gpkg);
        assert_eq!(r.location, "layer `pts`, feature 4, attribute `D20230115`");
        let shp = Naming {
            label: String::new(),
            noun: "feature",
            offset: 2,
        };
        let e = InputError::new(Path::new("p.shp"), "line 2", "m", "h");
        assert_eq!(rename_lines(e, &shp).location, "feature 0");
        let e = InputError::new(Path::new("p.shp"), "line 1 (header)", "m", "h");
        assert_eq!(rename_lines(e, &shp).location, "attribute names");
    }

    #[test]
    fn numbers_are_written_as_the_shortest_exact_decimal() {
        assert_eq!(num_text(-1.2), "-1.2");
        assert_eq!(num_text(0.1 + 0.2), "0.30000000000000004");
        assert_eq!(num_text(f64::NAN), "");
        assert_eq!(num_text(1e-7), "0.0000001");
    }
}
