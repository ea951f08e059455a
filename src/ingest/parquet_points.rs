//! Points from Parquet / GeoParquet (`.parquet`): one column per acquisition date.
//!
//! Owns reading the file one row group at a time (every column of the group decoded into typed
//! vectors, so memory holds one row group, never the file; the numeric entry decodes a group in
//! blocks of `BLOCK_ROWS` rows), the point position (the `columns.x`
//! and `columns.y` columns, or a GeoParquet WKB point geometry column, whose CRS is then the
//! file's declared one), refusing a date column stored as text, and handing the rows to the CSV
//! reader through the stream of `ingest::gis_points`, so the column map, `date_format`, units,
//! sign, validation and screening are the CSV's. Rows are named in messages by their 0-based
//! position in the file (`row N`); a row's `line` in points.csv is that position + 2.
//!
//! Row groups beyond reach are not read: when the positions come from the `columns.x` /
//! `columns.y` columns and the file records their min/max per row group (pyarrow and GDAL do),
//! a group whose box, carried into the analysis CRS with a margin (`box_in_analysis`), meets
//! no structure's reach (nor the `[reference]` area) is skipped. Its rows count as read and out
//! of reach, as a full read would find them, and keep their row numbers (the CSV stream gets one
//! empty line per skipped row); they are not validated, so a bad value there is not reported.
//! A file in spatial order (e.g. sorted along a Hilbert curve of x, y) makes the boxes small;
//! in another order every group may span the whole area and is then read.
//! It does not associate or screen points itself.

use std::path::Path;

use parquet::column::reader::{ColumnReader, ColumnReaderImpl};
use parquet::data_type::DataType;
use parquet::file::reader::{FileReader, SerializedFileReader};
use serde_json::Value;

use super::gis::{Stated, settle_crs};
use super::gis_points::{Naming, Sink, header, rename_lines};
use super::points::{ColumnMap, NumBlock, NumColumn};
use crate::association::PointAssociation;
use crate::coords::{Crs, Transformer};
use crate::error::{InputError, Warnings};
use crate::portfolio::DatasetSpec;

/// Whether a points file is Parquet (by extension: `.parquet`, `.geoparquet`, `.pq`).
pub fn is_parquet(path: &Path) -> bool {
    let ext = path
        .extension()
        .map(|e| e.to_string_lossy().to_ascii_lowercase());
    matches!(ext.as_deref(), Some("parquet" | "geoparquet" | "pq"))
}

/// A Parquet file read by position (`pread`): every reader handed out keeps its own offset, so
/// the columns of a block can be decoded on several threads at once. (`std::fs::File`'s own
/// `ChunkReader` clones the descriptor, whose offset all clones share: concurrent column readers
/// would read each other's bytes.)
struct PosFile(std::sync::Arc<std::fs::File>);

/// A reader of a [`PosFile`] from its own offset.
struct PosRead {
    file: std::sync::Arc<std::fs::File>,
    at: u64,
}

/// `buf.len()` bytes or fewer at `at`, without moving any shared offset.
fn read_at(file: &std::fs::File, buf: &mut [u8], at: u64) -> std::io::Result<usize> {
    #[cfg(unix)]
    {
        std::os::unix::fs::FileExt::read_at(file, buf, at)
    }
    #[cfg(windows)]
    {
        std::os::windows::fs::FileExt::seek_read(file, buf, at)
    }
}

impl std::io::Read for PosRead {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = read_at(&self.file, buf, self.at)?;
        self.at += n as u64;
        Ok(n)
    }
}

impl parquet::file::reader::Length for PosFile {
    fn len(&self) -> u64 {
        self.0.metadata().map_or(0, |m| m.len())
    }
}

impl parquet::file::reader::ChunkReader for PosFile {
    type T = std::io::BufReader<PosRead>;

    fn get_read(&self, start: u64) -> parquet::errors::Result<Self::T> {
        Ok(std::io::BufReader::new(PosRead {
            file: self.0.clone(),
            at: start,
        }))
    }

    fn get_bytes(&self, start: u64, length: usize) -> parquet::errors::Result<bytes::Bytes> {
        use std::io::Read;
        let mut buf = vec![0u8; length];
        let mut r = PosRead {
            file: self.0.clone(),
            at: start,
        };
        r.read_exact(&mut buf).map_err(|e| {
            parquet::errors::ParquetError::EOF(format!(
                "cannot read {length} bytes at offset {start}: {e}"
            ))
        })?;
        Ok(buf.into())
    }
}

/// An opened Parquet points file.
pub struct ParquetPoints {
    reader: SerializedFileReader<PosFile>,
    /// Index of the GeoParquet WKB geometry column, if the positions come from it.
    geometry: Option<usize>,
    /// CRS of the positions.
    pub crs: Crs,
}

fn damaged(file: &Path, loc: impl Into<String>, e: impl std::fmt::Display) -> InputError {
    InputError::new(
        file,
        loc,
        format!("cannot read the Parquet file: {e}"),
        "check the file (e.g. with pyarrow.parquet.read_metadata); write it again if it is damaged",
    )
}

/// The GeoParquet `geo` metadata: the primary geometry column and its EPSG code (None for an
/// undefined CRS; OGC:CRS84, the default when `crs` is absent, is EPSG:4326 in x = longitude order).
fn geo_metadata(text: &str) -> Option<(String, Option<u32>)> {
    let v: Value = serde_json::from_str(text).ok()?;
    let col = v.get("primary_column")?.as_str()?.to_string();
    let meta = v.get("columns")?.get(&col)?;
    let crs = match meta.get("crs") {
        None => Some(4326),
        Some(Value::Null) => None,
        Some(c) => {
            let id = c.get("id")?;
            let auth = id.get("authority")?.as_str()?;
            let code = &id["code"];
            let code = code
                .as_u64()
                .or_else(|| code.as_str().and_then(|s| s.parse().ok()))?;
            match auth.to_ascii_uppercase().as_str() {
                "EPSG" => u32::try_from(code).ok(),
                "OGC" if code == 84 => Some(4326),
                _ => None,
            }
        }
    };
    Some((col, crs))
}

/// Open the Parquet points file of dataset `i`: its schema checks and CRS.
pub fn open(
    spec: &DatasetSpec,
    i: usize,
    warnings: &mut Warnings,
) -> Result<ParquetPoints, InputError> {
    let file = spec.path.as_path();
    let f = std::fs::File::open(file).map_err(|e| damaged(file, "", e))?;
    let reader = SerializedFileReader::new(PosFile(std::sync::Arc::new(f)))
        .map_err(|e| damaged(file, "", e))?;
    let meta = reader.metadata().file_metadata();
    let schema = meta.schema_descr();
    let names: Vec<String> = schema.columns().iter().map(|c| c.path().string()).collect();
    // A date column must hold numbers.
    for (k, c) in schema.columns().iter().enumerate() {
        let is_date =
            chrono::NaiveDate::parse_from_str(&names[k], &spec.columns.date_format).is_ok();
        let numeric = matches!(
            c.physical_type(),
            parquet::basic::Type::FLOAT
                | parquet::basic::Type::DOUBLE
                | parquet::basic::Type::INT32
                | parquet::basic::Type::INT64
        );
        if is_date && !numeric {
            return Err(InputError::new(
                file,
                format!("column `{}`", names[k]),
                format!(
                    "the date column `{}` holds {:?} values (text or bytes), not numbers",
                    names[k],
                    c.physical_type()
                ),
                "write the displacements as float or double columns (e.g. pyarrow float64)",
            ));
        }
        if c.max_rep_level() > 0 {
            return Err(InputError::new(
                file,
                format!("column `{}`", names[k]),
                "a repeated (list) column: one value per point and column is expected",
                "write one flat column per acquisition date",
            ));
        }
    }
    let geo = meta
        .key_value_metadata()
        .and_then(|kv| kv.iter().find(|k| k.key == "geo"))
        .and_then(|k| k.value.as_deref())
        .and_then(geo_metadata);
    let has_xy = names.contains(&spec.columns.x) && names.contains(&spec.columns.y);
    let geometry = match &geo {
        Some((col, _)) if !has_xy => names.iter().position(|n| n == col),
        _ => None,
    };
    let crs = match (geometry, &geo) {
        (Some(_), Some((_, declared))) => {
            let key = format!("datasets[{i}].crs");
            let stated = Stated {
                crs: &spec.crs,
                given: spec.crs_given,
                key: &key,
            };
            settle_crs(&stated, file, "", *declared, warnings)?
        }
        _ => Crs::parse(&spec.crs).map_err(|e| {
            InputError::new(
                file,
                format!("datasets[{i}].crs"),
                e.to_string(),
                "use an EPSG code such as \"EPSG:4326\"",
            )
        })?,
    };
    Ok(ParquetPoints {
        reader,
        geometry,
        crs,
    })
}

/// The row groups of one Parquet points file: how many there are and how many were read, with
/// their compressed bytes (all columns of the group).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct RowGroupsRead {
    /// Row groups in the file.
    pub total: usize,
    /// Row groups read.
    pub read: usize,
    /// Compressed bytes of every row group.
    pub bytes_total: u64,
    /// Compressed bytes of the row groups read.
    pub bytes_read: u64,
    /// Rows of the row groups not read.
    pub rows_skipped: u64,
}

/// What may be skipped: the transform to the analysis CRS and the keep test on analysis-CRS boxes
/// (true when a point in the box `lo`–`hi` may be kept).
pub struct Reach<'a> {
    /// Points' CRS to the analysis CRS.
    pub to_analysis: &'a Transformer,
    /// True when a point in the box may be kept.
    pub may_keep: &'a (dyn Fn([f64; 2], [f64; 2]) -> bool + Sync),
}

/// The min and max a row group's statistics give for a numeric column; None without them.
fn column_range(c: &parquet::file::metadata::ColumnChunkMetaData) -> Option<(f64, f64)> {
    use parquet::file::statistics::Statistics as S;
    let (lo, hi) = match c.statistics()? {
        S::Double(s) => (*s.min_opt()?, *s.max_opt()?),
        S::Float(s) => (f64::from(*s.min_opt()?), f64::from(*s.max_opt()?)),
        S::Int32(s) => (f64::from(*s.min_opt()?), f64::from(*s.max_opt()?)),
        // Beyond 2⁵³ the float may round inward; such coordinates are not plausible anyway.
        S::Int64(s) => (*s.min_opt()? as f64, *s.max_opt()? as f64),
        _ => return None,
    };
    (lo <= hi).then_some((lo, hi))
}

/// Sample points per box edge in [`box_in_analysis`].
const EDGE_SAMPLES: usize = 8;

/// A box of the analysis CRS holding the image of the box `x` × `y` (min, max) of the points'
/// CRS: the bounding box of the images of 4 × (EDGE_SAMPLES + 1) points along the edges, grown
/// by 1 m plus 1 % of its larger side. The margin covers the bending of the edges between
/// samples: for a transverse Mercator image of a 1 000 km box the bend between samples
/// 125 km apart is about a third of a kilometre (sagitta L²/8R with R ≈ 6 400 km), against a
/// 10 km margin; a row group of a spatially ordered file spans a few hundred metres. None when a
/// sample does not transform (the group is then read).
fn box_in_analysis(t: &Transformer, x: (f64, f64), y: (f64, f64)) -> Option<([f64; 2], [f64; 2])> {
    let (mut lo, mut hi) = ([f64::MAX; 2], [f64::MIN; 2]);
    for i in 0..=EDGE_SAMPLES {
        let f = i as f64 / EDGE_SAMPLES as f64;
        let (xs, ys) = (x.0 + (x.1 - x.0) * f, y.0 + (y.1 - y.0) * f);
        for (px, py) in [(xs, y.0), (xs, y.1), (x.0, ys), (x.1, ys)] {
            let (ax, ay) = t.apply(px, py).ok()?;
            lo = [lo[0].min(ax), lo[1].min(ay)];
            hi = [hi[0].max(ax), hi[1].max(ay)];
        }
    }
    let pad = 1.0 + 0.01 * (hi[0] - lo[0]).max(hi[1] - lo[1]);
    Some(([lo[0] - pad, lo[1] - pad], [hi[0] + pad, hi[1] + pad]))
}

/// Whether row group `rg` may hold a point to keep: true unless the statistics of the x and y
/// columns (`xy`) place every point beyond reach.
fn group_may_reach(
    rg: &parquet::file::metadata::RowGroupMetaData,
    xy: (usize, usize),
    reach: &Reach,
) -> bool {
    let (Some(x), Some(y)) = (column_range(rg.column(xy.0)), column_range(rg.column(xy.1))) else {
        return true;
    };
    match box_in_analysis(reach.to_analysis, x, y) {
        Some((lo, hi)) => (reach.may_keep)(lo, hi),
        None => true,
    }
}

/// Count row group `g` in `groups` and say whether to read it (false: beyond `reach`, module
/// doc); `xy` are the x and y columns when the positions come from them.
fn take_group(
    p: &ParquetPoints,
    g: usize,
    reach: Option<&Reach>,
    xy: Option<(usize, usize)>,
    groups: &mut RowGroupsRead,
) -> bool {
    let meta = p.reader.metadata().row_group(g);
    let bytes = u64::try_from(meta.compressed_size()).unwrap_or(0);
    let wanted = match (reach, xy) {
        (Some(r), Some(cols)) => group_may_reach(meta, cols, r),
        _ => true,
    };
    groups.total += 1;
    groups.bytes_total += bytes;
    if wanted {
        groups.read += 1;
        groups.bytes_read += bytes;
    } else {
        groups.rows_skipped += u64::try_from(meta.num_rows()).unwrap_or(0);
    }
    wanted
}

/// One decoded column of a row group.
enum Col {
    Num(Vec<f64>),
    Int(Vec<Option<i64>>),
    Bytes(Vec<Option<Vec<u8>>>),
    Bool(Vec<Option<bool>>),
    Other,
}

/// Every value of a column chunk, None where null.
fn read_all<T: DataType>(
    r: &mut ColumnReaderImpl<T>,
    n: usize,
    max_def: i16,
) -> parquet::errors::Result<Vec<Option<T::T>>> {
    let mut values = Vec::with_capacity(n);
    let mut defs = Vec::with_capacity(n);
    let mut records = 0;
    while records < n {
        let (r_read, _, _) = r.read_records(n - records, Some(&mut defs), None, &mut values)?;
        if r_read == 0 {
            break;
        }
        records += r_read;
    }
    if max_def == 0 {
        return Ok(values.into_iter().map(Some).collect());
    }
    let mut it = values.into_iter();
    Ok(defs
        .iter()
        .map(|&d| if d == max_def { it.next() } else { None })
        .collect())
}

/// The next `n` values of a column (fewer at its end).
fn decode(reader: &mut ColumnReader, n: usize, max_def: i16) -> parquet::errors::Result<Col> {
    let nan = |v: Option<f64>| v.unwrap_or(f64::NAN);
    Ok(match reader {
        ColumnReader::DoubleColumnReader(r) => {
            Col::Num(read_all(r, n, max_def)?.into_iter().map(nan).collect())
        }
        ColumnReader::FloatColumnReader(r) => Col::Num(
            read_all(r, n, max_def)?
                .into_iter()
                .map(|v| nan(v.map(f64::from)))
                .collect(),
        ),
        ColumnReader::Int32ColumnReader(r) => Col::Int(
            read_all(r, n, max_def)?
                .into_iter()
                .map(|v| v.map(i64::from))
                .collect(),
        ),
        ColumnReader::Int64ColumnReader(r) => Col::Int(read_all(r, n, max_def)?),
        ColumnReader::ByteArrayColumnReader(r) => Col::Bytes(
            read_all(r, n, max_def)?
                .into_iter()
                .map(|v| v.map(|b| b.data().to_vec()))
                .collect(),
        ),
        ColumnReader::BoolColumnReader(r) => Col::Bool(read_all(r, n, max_def)?),
        _ => Col::Other,
    })
}

/// The next `n` values of a numeric column as `f64` (NaN where null; fewer at the column's end),
/// in one vector of exactly that size: a `double` column's values are not copied, nulls are
/// spread in place; None for a column that is not numeric.
fn decode_numbers(
    reader: &mut ColumnReader,
    n: usize,
    max_def: i16,
) -> parquet::errors::Result<Option<Vec<f64>>> {
    fn numbers<T: DataType>(
        r: &mut ColumnReaderImpl<T>,
        n: usize,
        max_def: i16,
        into_f64: impl FnOnce(Vec<T::T>) -> Vec<f64>,
    ) -> parquet::errors::Result<Vec<f64>> {
        let mut values = Vec::with_capacity(n);
        let mut defs = Vec::with_capacity(if max_def > 0 { n } else { 0 });
        let mut records = 0;
        while records < n {
            let defs = (max_def > 0).then_some(&mut defs);
            let (read, _, _) = r.read_records(n - records, defs, None, &mut values)?;
            if read == 0 {
                break;
            }
            records += read;
        }
        let mut values = into_f64(values);
        if max_def > 0 {
            spread_nulls(&mut values, &defs, max_def)?;
        }
        Ok(values)
    }
    fn widen<T: Into<f64>>(v: Vec<T>) -> Vec<f64> {
        v.into_iter().map(Into::into).collect()
    }
    Ok(Some(match reader {
        ColumnReader::DoubleColumnReader(r) => numbers(r, n, max_def, |v| v)?,
        ColumnReader::FloatColumnReader(r) => numbers(r, n, max_def, widen)?,
        ColumnReader::Int32ColumnReader(r) => numbers(r, n, max_def, widen)?,
        // Beyond 2⁵³ rounded, as the text of the number would be read.
        ColumnReader::Int64ColumnReader(r) => {
            numbers(r, n, max_def, |v| v.into_iter().map(|x| x as f64).collect())?
        }
        _ => return Ok(None),
    }))
}

/// Spread the values of the defined entries (`defs[i] == max_def`, one value each, in order) over
/// every entry of `defs` in place, NaN where an entry is null.
fn spread_nulls(values: &mut Vec<f64>, defs: &[i16], max_def: i16) -> parquet::errors::Result<()> {
    let (n_values, n_entries) = (values.len(), defs.len());
    let disagree = || {
        parquet::errors::ParquetError::General(format!(
            "{n_values} values for {n_entries} entries: their definition levels disagree"
        ))
    };
    if values.len() == defs.len() {
        // Every entry defined (the decoder reads one value per defined entry).
        return Ok(());
    }
    let mut k = values.len();
    if k > defs.len() {
        return Err(disagree());
    }
    values.resize(defs.len(), f64::NAN);
    // From the end: the value for entry i comes from index k ≤ i, not yet overwritten.
    for (i, &d) in defs.iter().enumerate().rev() {
        values[i] = if d == max_def {
            k = k.checked_sub(1).ok_or_else(disagree)?;
            values[k]
        } else {
            f64::NAN
        };
    }
    if k == 0 { Ok(()) } else { Err(disagree()) }
}

/// x, y of an ISO WKB point (Z/M ignored; the flag says whether there were any).
fn wkb_point(b: &[u8]) -> Result<(f64, f64, bool), String> {
    let le = match b.first() {
        Some(1) => true,
        Some(0) => false,
        _ => return Err("the geometry is not WKB".into()),
    };
    let word = |at: usize| -> Option<[u8; 8]> { b.get(at..at + 8)?.try_into().ok() };
    let t = b.get(1..5).ok_or("the geometry (WKB) is cut short")?;
    let t: [u8; 4] = t.try_into().map_err(|_| "bad WKB")?;
    let t = if le {
        u32::from_le_bytes(t)
    } else {
        u32::from_be_bytes(t)
    };
    let base = (t & 0x0FFF_FFFF) % 1000;
    if base != 1 {
        return Err(format!("geometry of WKB type {base} is not a point"));
    }
    let f = |w: [u8; 8]| {
        if le {
            f64::from_le_bytes(w)
        } else {
            f64::from_be_bytes(w)
        }
    };
    let x = f(word(5).ok_or("the geometry (WKB) is cut short")?);
    let y = f(word(13).ok_or("the geometry (WKB) is cut short")?);
    Ok((x, y, t > 1000 || t & 0xC000_0000 != 0))
}

/// The x and y columns when the positions come from them (not from a geometry column).
fn xy_columns(
    p: &ParquetPoints,
    names: &[String],
    xy: &(String, String),
) -> Option<(usize, usize)> {
    match p.geometry {
        None => names
            .iter()
            .position(|n| *n == xy.0)
            .zip(names.iter().position(|n| *n == xy.1)),
        Some(_) => None,
    }
}

/// Stream the row groups as CSV rows (an empty line for each row of a group skipped as beyond
/// `reach`), counting the groups in `groups`.
fn produce(
    p: &ParquetPoints,
    xy: &(String, String),
    file: &Path,
    (reach, groups): (Option<&Reach>, &mut RowGroupsRead),
    sink: &mut Sink,
    zm: &std::sync::atomic::AtomicBool,
) -> Result<(), InputError> {
    let schema = p.reader.metadata().file_metadata().schema_descr();
    let names: Vec<String> = schema.columns().iter().map(|c| c.path().string()).collect();
    let max_defs: Vec<i16> = schema.columns().iter().map(|c| c.max_def_level()).collect();
    // The geometry column is not an attribute; with it, x and y come last.
    let attrs: Vec<usize> = (0..names.len())
        .filter(|&k| Some(k) != p.geometry)
        .collect();
    let (h, keep) = match p.geometry {
        Some(_) => {
            let attr_names: Vec<String> = attrs.iter().map(|&k| names[k].clone()).collect();
            let (h, keep) = header(&attr_names, xy);
            (h, keep.into_iter().map(|k| attrs[k]).collect::<Vec<_>>())
        }
        None => (names.clone(), attrs),
    };
    if !sink.row(&h) {
        return Ok(());
    }
    let xy_cols = xy_columns(p, &names, xy);
    let mut row0 = 0usize;
    for g in 0..p.reader.num_row_groups() {
        if !take_group(p, g, reach, xy_cols, groups) {
            let n = usize::try_from(p.reader.metadata().row_group(g).num_rows()).unwrap_or(0);
            for _ in 0..n {
                if !sink.end() {
                    return Ok(());
                }
            }
            row0 += n;
            continue;
        }
        let rg = p
            .reader
            .get_row_group(g)
            .map_err(|e| damaged(file, format!("row group {g}"), e))?;
        let n = usize::try_from(rg.metadata().num_rows()).unwrap_or(0);
        let mut cols = Vec::with_capacity(names.len());
        for k in 0..names.len() {
            let needed = keep.contains(&k) || Some(k) == p.geometry;
            let col = if needed {
                let mut r = rg.get_column_reader(k).map_err(|e| {
                    damaged(file, format!("row group {g}, column `{}`", names[k]), e)
                })?;
                decode(&mut r, n, max_defs[k]).map_err(|e| {
                    damaged(file, format!("row group {g}, column `{}`", names[k]), e)
                })?
            } else {
                Col::Other
            };
            cols.push(col);
        }
        for r in 0..n {
            for &k in &keep {
                match &cols[k] {
                    Col::Num(v) => sink.num(v[r]),
                    Col::Int(v) => sink.int(v[r]),
                    Col::Bytes(v) => sink.text(v[r].as_deref().unwrap_or_default()),
                    Col::Bool(v) => sink.text(match v[r] {
                        Some(true) => b"true",
                        Some(false) => b"false",
                        None => b"",
                    }),
                    Col::Other => sink.text(b""),
                }
            }
            if let Some(gc) = p.geometry {
                let loc = || format!("row {}, column `{}`", row0 + r, names[gc]);
                let Col::Bytes(v) = &cols[gc] else {
                    return Err(InputError::new(
                        file,
                        loc(),
                        "the geometry column does not hold WKB bytes",
                        "write the geometry as WKB (GeoParquet)",
                    ));
                };
                let b = v[r].as_deref().ok_or_else(|| {
                    InputError::new(
                        file,
                        loc(),
                        "the point has no geometry",
                        "every point needs its position",
                    )
                })?;
                let (x, y, has_zm) = wkb_point(b).map_err(|m| {
                    InputError::new(file, loc(), m, "the geometry column must hold points")
                })?;
                if has_zm {
                    zm.store(true, std::sync::atomic::Ordering::Relaxed);
                }
                sink.num(x);
                sink.num(y);
            }
            if !sink.end() {
                return Ok(());
            }
        }
        row0 += n;
    }
    Ok(())
}

/// The column names of the file, in schema order.
fn column_names(p: &ParquetPoints) -> Vec<String> {
    let schema = p.reader.metadata().file_metadata().schema_descr();
    schema.columns().iter().map(|c| c.path().string()).collect()
}

/// The column map for the numeric entry (`super::points::read_numeric`), or None when the file
/// needs the text stream: positions from a geometry column, or a mapped or epoch column that is
/// not numeric (or an id that is neither text nor a number). Its warnings are recorded only when
/// the numeric entry is taken (the stream repeats them otherwise).
fn numeric_map(
    p: &ParquetPoints,
    spec: &DatasetSpec,
    warnings: &mut Warnings,
) -> Result<Option<ColumnMap>, InputError> {
    use parquet::basic::Type as T;
    if p.geometry.is_some() {
        return Ok(None);
    }
    let headers: Vec<String> = column_names(p)
        .iter()
        .map(|n| n.trim().to_string())
        .collect();
    let mut own = Warnings::default();
    let map = super::points::column_map(headers, &spec.path, spec, &mut own)?;
    let schema = p.reader.metadata().file_metadata().schema_descr();
    let readable = schema.columns().iter().enumerate().all(|(k, c)| {
        let num = matches!(
            c.physical_type(),
            T::DOUBLE | T::FLOAT | T::INT32 | T::INT64
        );
        if map.numeric(k) {
            num
        } else if k == map.id_col() {
            num || c.physical_type() == T::BYTE_ARRAY
        } else {
            true
        }
    });
    if !readable {
        return Ok(None);
    }
    warnings.extend(own);
    Ok(Some(map))
}

/// Which columns the numeric entry decodes: per column, whether it is read as a number or as the
/// id.
struct Wanted {
    numeric: Vec<bool>,
    id: usize,
}

impl Wanted {
    fn of(map: &ColumnMap, n: usize) -> Wanted {
        Wanted {
            numeric: (0..n).map(|k| map.numeric(k)).collect(),
            id: map.id_col(),
        }
    }
}

/// Rows of a block the numeric entry gets at a time: a row group is decoded in batches of this
/// many rows, every needed column's reader open at once (each holds one decompressed page), so
/// memory holds two blocks of 16 384 rows (≈ 20 MB at 150 epochs) instead of two row groups.
/// Four pieces per block keep both cores busy while the next block is decoded (8 192 rows: 30 MB
/// less peak memory on the medium city, ≈ 0.25 s more wall time).
const BLOCK_ROWS: usize = 16384;

/// The row groups of a file read as blocks of [`BLOCK_ROWS`] rows for the numeric entry,
/// skipping the groups beyond reach.
struct Blocks<'a> {
    p: &'a ParquetPoints,
    wanted: Wanted,
    names: Vec<String>,
    file: &'a Path,
    reach: Option<&'a Reach<'a>>,
    xy_cols: Option<(usize, usize)>,
    groups: &'a mut RowGroupsRead,
    /// Rows per block ([`BLOCK_ROWS`]; the tests take fewer).
    block_rows: usize,
    /// The next row group to look at.
    g: usize,
    /// Rows of the row groups before `g`.
    row0: u64,
    /// The row group being read.
    open: Option<OpenGroup>,
}

/// A row group being read in blocks: a reader per decoded column (None for the others).
struct OpenGroup {
    g: usize,
    readers: Vec<Option<ColumnReader>>,
    /// Line of its next row.
    next_line: u64,
    rows_left: usize,
}

impl Blocks<'_> {
    /// The next block of rows, None after the last.
    fn next_block(&mut self) -> Result<Option<NumBlock>, InputError> {
        loop {
            if let Some(open) = self.open.as_mut().filter(|o| o.rows_left > 0) {
                let n = open.rows_left.min(self.block_rows);
                let block = decode_block(open, n, &self.wanted, self.p, &self.names, self.file)?;
                open.rows_left -= n;
                open.next_line += n as u64;
                return Ok(Some(block));
            }
            self.open = None;
            let meta = self.p.reader.metadata();
            if self.g >= meta.num_row_groups() {
                return Ok(None);
            }
            let g = self.g;
            let rows = usize::try_from(meta.row_group(g).num_rows()).unwrap_or(0);
            let first_line = self.row0 + 2;
            self.g += 1;
            self.row0 += rows as u64;
            if take_group(self.p, g, self.reach, self.xy_cols, self.groups) {
                self.open = Some(self.open_group(g, rows, first_line)?);
            }
        }
    }

    /// Open the readers of the needed columns of row group `g`.
    fn open_group(&self, g: usize, rows: usize, first_line: u64) -> Result<OpenGroup, InputError> {
        let rg = self
            .p
            .reader
            .get_row_group(g)
            .map_err(|e| damaged(self.file, format!("row group {g}"), e))?;
        let mut readers = Vec::with_capacity(self.names.len());
        for (k, name) in self.names.iter().enumerate() {
            if !self.wanted.numeric[k] && k != self.wanted.id {
                readers.push(None);
                continue;
            }
            let r = rg
                .get_column_reader(k)
                .map_err(|e| damaged(self.file, format!("row group {g}, column `{name}`"), e))?;
            readers.push(Some(r));
        }
        Ok(OpenGroup {
            g,
            readers,
            next_line: first_line,
            rows_left: rows,
        })
    }
}

/// Decode the next `n` rows of the open row group's columns.
fn decode_block(
    open: &mut OpenGroup,
    n: usize,
    wanted: &Wanted,
    p: &ParquetPoints,
    names: &[String],
    file: &Path,
) -> Result<NumBlock, InputError> {
    use rayon::prelude::*;
    let g = open.g;
    let schema = p.reader.metadata().file_metadata().schema_descr();
    // The columns are independent: decoded (decompressed) in parallel, gathered in order; the
    // first failing column in column order is the error reported.
    let columns = names
        .par_iter()
        .zip(open.readers.par_iter_mut())
        .enumerate()
        .map(|(k, (name, reader))| {
            let Some(r) = reader else {
                return Ok(NumColumn::Skipped);
            };
            let bad = |e: parquet::errors::ParquetError| {
                damaged(file, format!("row group {g}, column `{name}`"), e)
            };
            let max_def = schema.column(k).max_def_level();
            if wanted.numeric[k] {
                let v = decode_numbers(r, n, max_def).map_err(bad)?;
                return Ok(v.map_or(NumColumn::Skipped, NumColumn::Num));
            }
            Ok(match decode(r, n, max_def).map_err(bad)? {
                Col::Num(v) => NumColumn::Num(v),
                Col::Int(v) if k == wanted.id => NumColumn::Text(
                    v.into_iter()
                        .map(|i| i.map(|i| i.to_string().into_bytes()).unwrap_or_default())
                        .collect(),
                ),
                Col::Int(v) => NumColumn::Num(
                    v.into_iter()
                        .map(|i| i.map_or(f64::NAN, |i| i as f64))
                        .collect(),
                ),
                Col::Bytes(v) => {
                    NumColumn::Text(v.into_iter().map(Option::unwrap_or_default).collect())
                }
                Col::Bool(_) | Col::Other => NumColumn::Skipped,
            })
        })
        .collect::<Vec<Result<NumColumn, InputError>>>()
        .into_iter()
        .collect::<Result<Vec<NumColumn>, InputError>>()?;
    Ok(NumBlock {
        first_line: open.next_line,
        rows: n,
        columns,
    })
}

/// Read the Parquet points of dataset `spec` (see [`super::points::read_points`]), skipping the
/// row groups beyond `reach` (module doc) when it is given.
pub fn read(
    p: ParquetPoints,
    spec: &DatasetSpec,
    to_analysis: &Transformer,
    associate: &(dyn Fn(f64, f64) -> Option<PointAssociation> + Sync),
    reach: Option<&Reach>,
    warnings: &mut Warnings,
) -> Result<super::points::Dataset, InputError> {
    let naming = Naming {
        label: String::new(),
        noun: "row",
        offset: 2,
    };
    let xy = (spec.columns.x.clone(), spec.columns.y.clone());
    let file = spec.path.clone();
    let geographic = p.crs.is_geographic();
    let mut groups = RowGroupsRead::default();
    if let Some(map) = numeric_map(&p, spec, warnings).map_err(|e| rename_lines(e, &naming))? {
        let columns = Wanted::of(
            &map,
            p.reader
                .metadata()
                .file_metadata()
                .schema_descr()
                .num_columns(),
        );
        let names = column_names(&p);
        let xy_cols = xy_columns(&p, &names, &xy);
        let mut blocks = Blocks {
            p: &p,
            wanted: columns,
            names,
            file: &file,
            reach,
            xy_cols,
            groups: &mut groups,
            block_rows: BLOCK_ROWS,
            g: 0,
            row0: 0,
            open: None,
        };
        let mut next = move || blocks.next_block();
        let mut ds = super::points::read_numeric(
            map,
            &spec.path,
            spec,
            to_analysis,
            geographic,
            associate,
            &mut next,
            u64::try_from(p.reader.metadata().file_metadata().num_rows()).unwrap_or(0),
            warnings,
        )
        .map_err(|e| rename_lines(e, &naming))?;
        drop(next);
        ds.rows_read += groups.rows_skipped;
        ds.rows_out_of_reach += groups.rows_skipped;
        ds.row_groups = Some(groups);
        return Ok(ds);
    }
    let counts = &mut groups;
    let mut ds = super::gis_points::read_stream(
        spec,
        geographic,
        &naming,
        to_analysis,
        associate,
        warnings,
        move |sink, zm| produce(&p, &xy, &file, (reach, counts), sink, zm),
    )?;
    ds.rows_read += groups.rows_skipped;
    ds.rows_out_of_reach += groups.rows_skipped;
    ds.row_groups = Some(groups);
    Ok(ds)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn geoparquet_metadata_gives_the_column_and_crs() {
        let m = r#"{"version":"1.0.0","primary_column":"geometry","columns":{"geometry":
            {"encoding":"WKB","geometry_types":["Point"],
             "crs":{"id":{"authority":"EPSG","code":32631}}}}}"#;
        assert_eq!(geo_metadata(m), Some(("geometry".into(), Some(32631))));
        let no_crs = r#"{"primary_column":"g","columns":{"g":{"encoding":"WKB"}}}"#;
        assert_eq!(geo_metadata(no_crs), Some(("g".into(), Some(4326))));
        let null_crs = r#"{"primary_column":"g","columns":{"g":{"encoding":"WKB","crs":null}}}"#;
        assert_eq!(geo_metadata(null_crs), Some(("g".into(), None)));
    }

    #[test]
    fn nulls_are_spread_in_place_and_a_mismatch_is_an_error() {
        let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        let nan = f64::NAN;
        for (vals, defs, want) in [
            (vec![1.0, 2.0], vec![1, 1], vec![1.0, 2.0]),
            (
                vec![1.0, 2.0],
                vec![0, 1, 0, 1, 0],
                vec![nan, 1.0, nan, 2.0, nan],
            ),
            (
                vec![1.0, -0.0, 3.0],
                vec![1, 1, 0, 1],
                vec![1.0, -0.0, nan, 3.0],
            ),
            (vec![], vec![0, 0], vec![nan, nan]),
            (vec![], vec![], vec![]),
        ] {
            let mut v = vals.clone();
            spread_nulls(&mut v, &defs, 1).unwrap();
            assert_eq!(bits(&v), bits(&want), "{vals:?} {defs:?}");
        }
        // More values than defined entries, or fewer.
        assert!(spread_nulls(&mut vec![1.0, 2.0], &[1, 0, 0], 1).is_err());
        assert!(spread_nulls(&mut vec![1.0], &[1, 1, 0], 1).is_err());
        assert!(spread_nulls(&mut vec![1.0, 2.0, 3.0], &[1, 1], 1).is_err());
    }

    /// A file of two row groups (7 and 5 rows; an id, a required and a nullable number column)
    /// read in blocks of 1 to 8 rows gives the rows, nulls and line numbers of one whole read.
    #[test]
    fn blocks_of_any_size_give_the_rows_of_the_row_groups() {
        use parquet::basic::{Repetition, Type as Physical};
        use parquet::data_type::{ByteArray, ByteArrayType, DoubleType};
        use parquet::schema::types::Type;
        use std::sync::Arc;
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("p.parquet");
        let field = |name: &str, t: Physical, rep: Repetition| {
            Arc::new(
                Type::primitive_type_builder(name, t)
                    .with_repetition(rep)
                    .build()
                    .unwrap(),
            )
        };
        let fields = vec![
            field("id", Physical::BYTE_ARRAY, Repetition::REQUIRED),
            field("a", Physical::DOUBLE, Repetition::REQUIRED),
            field("b", Physical::DOUBLE, Repetition::OPTIONAL),
        ];
        let schema = Arc::new(
            Type::group_type_builder("points")
                .with_fields(fields)
                .build()
                .unwrap(),
        );
        let props = Arc::new(parquet::file::properties::WriterProperties::builder().build());
        let file = std::fs::File::create(&path).unwrap();
        let mut w = parquet::file::writer::SerializedFileWriter::new(file, schema, props).unwrap();
        let b_cells = |n: usize, at: usize| -> Vec<Option<f64>> {
            (0..n)
                .map(|i| (i % 3 != 1).then_some((at + i) as f64 * -0.5))
                .collect()
        };
        for (n, at) in [(7usize, 0usize), (5, 7)] {
            let mut rg = w.next_row_group().unwrap();
            let ids: Vec<ByteArray> = (at..at + n)
                .map(|i| ByteArray::from(format!("p{i}").as_str()))
                .collect();
            let a: Vec<f64> = (at..at + n).map(|i| i as f64 + 0.25).collect();
            let cells = b_cells(n, at);
            let b: Vec<f64> = cells.iter().flatten().copied().collect();
            let defs: Vec<i16> = cells.iter().map(|c| i16::from(c.is_some())).collect();
            let mut col = rg.next_column().unwrap().unwrap();
            col.typed::<ByteArrayType>()
                .write_batch(&ids, None, None)
                .unwrap();
            col.close().unwrap();
            let mut col = rg.next_column().unwrap().unwrap();
            col.typed::<DoubleType>()
                .write_batch(&a, None, None)
                .unwrap();
            col.close().unwrap();
            let mut col = rg.next_column().unwrap().unwrap();
            col.typed::<DoubleType>()
                .write_batch(&b, Some(&defs), None)
                .unwrap();
            col.close().unwrap();
            rg.close().unwrap();
        }
        w.close().unwrap();
        let p = ParquetPoints {
            reader: SerializedFileReader::new(PosFile(std::sync::Arc::new(
                std::fs::File::open(&path).unwrap(),
            )))
            .unwrap(),
            geometry: None,
            crs: Crs::parse("EPSG:4326").unwrap(),
        };
        // Row by row: line, id, a, b (bits; NaN for a null).
        let rows_of = |block_rows: usize| {
            let mut groups = RowGroupsRead::default();
            let mut blocks = Blocks {
                p: &p,
                wanted: Wanted {
                    numeric: vec![false, true, true],
                    id: 0,
                },
                names: column_names(&p),
                file: &path,
                reach: None,
                xy_cols: None,
                groups: &mut groups,
                block_rows,
                g: 0,
                row0: 0,
                open: None,
            };
            let mut rows = Vec::new();
            while let Some(b) = blocks.next_block().unwrap() {
                assert!(b.rows <= block_rows);
                let (NumColumn::Text(id), NumColumn::Num(a), NumColumn::Num(bv)) =
                    (&b.columns[0], &b.columns[1], &b.columns[2])
                else {
                    panic!("column kinds");
                };
                assert_eq!((id.len(), a.len(), bv.len()), (b.rows, b.rows, b.rows));
                for r in 0..b.rows {
                    let id = String::from_utf8(id[r].clone()).unwrap();
                    rows.push((b.first_line + r as u64, id, a[r].to_bits(), bv[r].to_bits()));
                }
            }
            assert_eq!((groups.total, groups.read), (2, 2));
            rows
        };
        let whole = rows_of(usize::MAX);
        // Row i: line i + 2; b null at every third row of its own group from the second on.
        let want: Vec<_> = (0..12usize)
            .map(|i| {
                let local = if i < 7 { i } else { i - 7 };
                let b = if local % 3 == 1 {
                    f64::NAN
                } else {
                    i as f64 * -0.5
                };
                let a = i as f64 + 0.25;
                (i as u64 + 2, format!("p{i}"), a.to_bits(), b.to_bits())
            })
            .collect();
        assert_eq!(whole, want);
        for block_rows in 1..=8 {
            assert_eq!(rows_of(block_rows), whole, "blocks of {block_rows} rows");
        }
    }

    #[test]
    fn wkb_points_read_in_both_byte_orders() {
        let mut le = vec![1u8];
        le.extend_from_slice(&1u32.to_le_bytes());
        le.extend_from_slice(&3.5f64.to_le_bytes());
        le.extend_from_slice(&(-2.0f64).to_le_bytes());
        assert_eq!(wkb_point(&le), Ok((3.5, -2.0, false)));
        let mut be = vec![0u8];
        be.extend_from_slice(&1001u32.to_be_bytes());
        for v in [1.0f64, 2.0, 9.0] {
            be.extend_from_slice(&v.to_be_bytes());
        }
        assert_eq!(wkb_point(&be), Ok((1.0, 2.0, true)));
        let mut poly = vec![1u8];
        poly.extend_from_slice(&3u32.to_le_bytes());
        assert!(wkb_point(&poly).unwrap_err().contains("not a point"));
    }
}
