//! Points CSV reader ("wide" layout): one row per measurement point, one column per acquisition.
//!
//! Owns: delimiter detection (comma, semicolon, tab), UTF-8 BOM and CRLF handling, the column map,
//! epoch headers parsed with the dataset's `date_format`, unit conversion to mm and the LOS sign
//! convention (values are stored positive towards the satellite), per-row validation with the file
//! and line in every error, and streaming: rows are parsed one at a time and only points within
//! reach of some structure (a caller-supplied test on analysis-CRS coordinates) are kept, so memory
//! grows with the retained points, not with the file.
//!
//! Speed: the body is read in 8 MiB blocks cut at line ends and parsed in parallel pieces (rayon,
//! memchr for line ends and delimiters, fast-float2 for numbers); results merge in file order so
//! errors, line numbers and warnings are those of a row-by-row read. From the first row holding a
//! quote (or a bare carriage return) the rest of the file goes through the `csv` crate instead.
//! Memory: the block, the kept points, and 16 bytes per row for the duplicate-id check.
//!
//! It does not associate points with structures or screen them (see `association`).

use std::hash::{Hash, Hasher};
use std::io::Read;
use std::path::Path;

use chrono::NaiveDate;
use rayon::prelude::*;

use crate::association::PointAssociation;
use crate::coords::{GeographicCheck, Transformer, check_geographic};
use crate::error::{InputError, Warnings};
use crate::portfolio::{DatasetSpec, LosSign};

/// Largest plausible |LOS displacement| relative to the first epoch, mm. Larger values are errors.
pub const MAX_ABS_DISPLACEMENT_MM: f64 = 10_000.0;

pub use super::store::{Dataset, Point, PointRef, SeriesRef};
use super::store::{PerPoint, RowMeta, StoreBuilder};

fn detect_delimiter(header: &[u8]) -> u8 {
    let count = |d: u8| header.iter().filter(|&&b| b == d).count();
    let (c, s, t) = (count(b','), count(b';'), count(b'\t'));
    if t > c && t > s {
        b'\t'
    } else if s > c {
        b';'
    } else {
        b','
    }
}

/// Parse a number cell. Empty, `NaN`, `NA` and `null` are missing (None). Errors on anything else
/// that is not a finite number.
fn parse_cell(raw: &[u8]) -> Result<Option<f64>, String> {
    if let Some(v) = super::decimal::parse_plain(raw) {
        return Ok(Some(v));
    }
    let t = trim(raw);
    if t.is_empty()
        || t.eq_ignore_ascii_case(b"nan")
        || t.eq_ignore_ascii_case(b"na")
        || t.eq_ignore_ascii_case(b"null")
    {
        return Ok(None);
    }
    match fast_float2::parse::<f64, _>(t) {
        Ok(v) if v.is_finite() => Ok(Some(v)),
        Ok(_) => Err(format!(
            "`{}` is not a finite number",
            String::from_utf8_lossy(t)
        )),
        Err(_) => Err(format!("`{}` is not a number", String::from_utf8_lossy(t))),
    }
}

fn trim(b: &[u8]) -> &[u8] {
    let s = b
        .iter()
        .position(|c| !c.is_ascii_whitespace())
        .unwrap_or(b.len());
    let e = b
        .iter()
        .rposition(|c| !c.is_ascii_whitespace())
        .map_or(s, |p| p + 1);
    &b[s..e.max(s)]
}

fn id_hash(id: &[u8]) -> u64 {
    let mut h = std::collections::hash_map::DefaultHasher::new();
    id.hash(&mut h);
    h.finish()
}

/// Read a points file.
///
/// `to_analysis` maps the file's coordinates to the analysis CRS;
/// `associate(x, y)` (analysis CRS) decides whether a row is kept (`None`: out of reach) and
/// gives a kept point's association with the structures.
pub fn read_points(
    spec: &DatasetSpec,
    to_analysis: &Transformer,
    geographic: bool,
    associate: &(dyn Fn(f64, f64) -> Option<PointAssociation> + Sync),
    warnings: &mut Warnings,
) -> Result<Dataset, InputError> {
    let file = spec.path.as_path();
    let f = std::fs::File::open(file).map_err(|e| {
        InputError::new(
            file,
            "",
            format!("cannot open the points file: {e}"),
            "check the dataset path in the portfolio file",
        )
    })?;
    let expected_bytes = f.metadata().ok().map(|m| m.len());
    read_points_from(
        std::io::BufReader::with_capacity(1 << 20, f),
        file,
        spec,
        to_analysis,
        geographic,
        associate,
        expected_bytes,
        warnings,
    )
}

/// Bytes read per block of the points body (each block is parsed in parallel).
pub const BLOCK_BYTES: usize = 1 << 20;

/// Read the next block of whole lines: `carry` (the partial line left by the previous block) and
/// then at least [`BLOCK_BYTES`] more, cut after the last line end; the part after it becomes the
/// new `carry`. At the end of the file the block is everything left and `eof` is set. `buf` is a
/// recycled buffer (its contents are discarded).
fn read_block<R: std::io::Read>(
    reader: &mut R,
    carry: &mut Vec<u8>,
    eof: &mut bool,
    mut buf: Vec<u8>,
) -> std::io::Result<Vec<u8>> {
    buf.clear();
    buf.append(carry);
    loop {
        let want = (BLOCK_BYTES + buf.len()).saturating_sub(buf.len()) as u64;
        let n = reader.by_ref().take(want).read_to_end(&mut buf)?;
        if n == 0 {
            *eof = true;
            return Ok(buf);
        }
        if let Some(p) = memchr::memrchr(b'\n', &buf) {
            carry.extend_from_slice(&buf[p + 1..]);
            buf.truncate(p + 1);
            return Ok(buf);
        }
        // One line longer than the block: read more.
    }
}

/// `line` without its trailing `\n` / `\r\n`.
fn strip_eol(line: &[u8]) -> &[u8] {
    let l = line.strip_suffix(b"\n").unwrap_or(line);
    l.strip_suffix(b"\r").unwrap_or(l)
}

/// Split `region` (whole lines) into pieces for parallel parsing: `(start, end, first line)`, and
/// the line number after the region. The first line of each piece is found by counting line ends
/// (memchr), so every piece knows its absolute line numbers before it is parsed.
fn split_pieces(region: &[u8], first_line: u64) -> (Vec<(usize, usize, u64)>, u64) {
    let n_pieces = (rayon::current_num_threads() * 4).max(1);
    let target = (region.len() / n_pieces).max(64 << 10);
    let mut out = Vec::with_capacity(n_pieces + 1);
    let mut lo = 0usize;
    let mut line = first_line;
    while lo < region.len() {
        let want = (lo + target).min(region.len());
        let hi = if want >= region.len() {
            region.len()
        } else {
            match memchr::memchr(b'\n', &region[want..]) {
                Some(p) => want + p + 1,
                None => region.len(),
            }
        };
        out.push((lo, hi, line));
        line += memchr::memchr_iter(b'\n', &region[lo..hi]).count() as u64;
        lo = hi;
    }
    (out, line)
}

/// The earliest repeated point id among `ids` (`(id hash, line)` of rows, in any order):
/// `(line of the first occurrence, line of the repeat)`, the repeat being the earliest second
/// occurrence of any id. Sorts `ids`.
///
/// Choice: ids are checked once after reading (a sorted list of 12 bytes per row) rather than in a
/// hash table while reading (about twice the memory); a reading error further down the file is
/// compared by line with the earliest repeat, so the reported error is the one a row-by-row reading
/// meets first.
fn first_duplicate(ids: &mut [IdSeen]) -> Option<(u64, u64)> {
    ids.par_sort_unstable();
    ids.windows(2)
        .filter(|w| w[0].hash() == w[1].hash())
        .map(|w| (w[0].line(), w[1].line()))
        .min_by_key(|&(_, repeat)| repeat)
}

/// A row's id hash and line in 12 bytes (hash high word, hash low word, line), so that sorting
/// orders by hash and then line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
struct IdSeen([u32; 3]);

impl IdSeen {
    /// `None` past line 4 294 967 295.
    fn new(hash: u64, line: u64) -> Option<Self> {
        Some(IdSeen([
            (hash >> 32) as u32,
            hash as u32,
            u32::try_from(line).ok()?,
        ]))
    }
    fn hash(&self) -> u64 {
        (u64::from(self.0[0]) << 32) | u64::from(self.0[1])
    }
    fn line(&self) -> u64 {
        u64::from(self.0[2])
    }
}

/// The error for a repeated id; the id text is taken from the retained points when the row was
/// kept (points are in line order), otherwise the message names the lines only.
fn duplicate_error(file: &Path, store: &StoreBuilder, first: u64, repeat: u64) -> InputError {
    let text = [repeat, first].iter().find_map(|l| {
        let i = store
            .points
            .binary_search_by_key(l, |p| p.line_u64())
            .ok()?;
        let start = store.points[i].id_at() as usize;
        let end = store
            .points
            .get(i + 1)
            .map_or(store.ids.len(), |n| n.id_at() as usize);
        Some(store.ids[start..end].to_string())
    });
    let message = match text {
        Some(t) => format!("duplicate point id `{t}` (first on line {first})"),
        None => format!("duplicate point id: the id on line {first} appears again"),
    };
    InputError::new(
        file,
        format!("line {repeat}"),
        message,
        "point ids must be unique within a file",
    )
}

/// `err` unless a repeated id comes first (at or before its line), which is then the error.
fn first_error(file: &Path, total: &mut Acc, err: InputError) -> InputError {
    let err_line = err
        .location
        .strip_prefix("line ")
        .and_then(|r| r.split(|c: char| !c.is_ascii_digit()).next())
        .and_then(|n| n.parse::<u64>().ok())
        .unwrap_or(u64::MAX);
    match first_duplicate(&mut total.ids) {
        Some((first, repeat)) if repeat <= err_line => {
            duplicate_error(file, &total.store, first, repeat)
        }
        _ => err,
    }
}

/// What a piece (or the slow path) accumulated.
#[derive(Default)]
struct Acc {
    store: StoreBuilder,
    /// Values of the row being parsed, mm (reused).
    scratch: Vec<f64>,
    /// Mantissas and digit counts of the row being parsed (fast path, reused).
    ints: Vec<i64>,
    /// Id hash and line of every data row whose id was read, in file order.
    ids: Vec<IdSeen>,
    rows: u64,
    out_of_reach: u64,
    swapped_in_reach: u64,
    /// Rows whose per-point incidence lies outside the usual [15°, 60°] (insar-methods.md §2.4
    /// rule 4: a warning, not an error).
    unusual_incidence: u64,
    max_abs_mm: f64,
    n_values: u64,
}

impl Acc {
    fn absorb(&mut self, o: Acc, file: &Path) -> Result<(), InputError> {
        self.store
            .append(o.store)
            .map_err(|e| InputError::new(file, "", e.0, "split the points file"))?;
        self.ids.extend(o.ids);
        self.rows += o.rows;
        self.out_of_reach += o.out_of_reach;
        self.swapped_in_reach += o.swapped_in_reach;
        self.unusual_incidence += o.unusual_incidence;
        self.max_abs_mm = self.max_abs_mm.max(o.max_abs_mm);
        self.n_values += o.n_values;
        Ok(())
    }
}

/// Byte offsets of line ends seen by a [`CountingReader`] and not yet passed by a record.
#[derive(Default)]
struct LineEnds {
    pending: std::collections::VecDeque<u64>,
    passed: u64,
    /// The last line end passed.
    last: Option<u64>,
}

impl LineEnds {
    /// Number of line ends before byte `offset` (offsets asked for never decrease).
    fn before(&mut self, offset: u64) -> u64 {
        while let Some(&o) = self.pending.front() {
            if o >= offset {
                break;
            }
            self.pending.pop_front();
            self.passed += 1;
            self.last = Some(o);
        }
        self.passed
    }
}

/// A reader that records where its line ends are (for physical line numbers on the slow path).
struct CountingReader<R> {
    inner: R,
    ends: std::rc::Rc<std::cell::RefCell<LineEnds>>,
    offset: u64,
}

impl<R: std::io::Read> std::io::Read for CountingReader<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.inner.read(buf)?;
        let mut ends = self.ends.borrow_mut();
        for p in memchr::memchr_iter(b'\n', &buf[..n]) {
            ends.pending.push_back(self.offset + p as u64);
        }
        self.offset += n as u64;
        Ok(n)
    }
}

/// What the fast path learnt of a row's epoch values (see `RowParser::fast_fields`).
#[derive(Debug, Clone, Copy)]
struct FastRow {
    /// Largest number of decimals written (before the unit conversion; trailing zeros not
    /// counted).
    decimals: u32,
    /// Largest |value|, mm.
    max_abs_mm: f64,
    /// Values present.
    n_values: u64,
    /// `Some(k)` when every value was written with exactly k digits after the point: the
    /// mantissas are then in `ints` (see [`Self::code`]); `None`: the values (mm) are in
    /// `values`.
    uniform_digits: Option<u32>,
}

/// A missing epoch in the fast path's mantissa list.
const MISSING_INT: i64 = i64::MIN;

/// 10⁻ᵏ for the k digits after the point the fast path accepts.
const INV_POW10: [f64; 16] = [
    1e0, 1e-1, 1e-2, 1e-3, 1e-4, 1e-5, 1e-6, 1e-7, 1e-8, 1e-9, 1e-10, 1e-11, 1e-12, 1e-13, 1e-14,
    1e-15,
];

impl FastRow {
    /// The exact code of one entry of `ints`: `mantissa · mul / div`, where the caller sets
    /// `mul / div` = ±10^e for e = (decimals lost by the unit conversion) + (decimals stored) −
    /// (digits after the point): `mul` = ±10^e, `div` = 1 for e ≥ 0; `mul` = ±1, `div` = 10^−e for
    /// e < 0, then exact (the digits dropped are trailing zeros). ± is the LOS sign.
    #[inline(always)]
    fn code(entry: i64, mul: i64, div: i64) -> i16 {
        if entry == MISSING_INT {
            super::store::MISSING
        } else {
            ((entry >> 5) * mul / div) as i16
        }
    }
}

/// How a piece ended.
enum PieceEnd {
    /// Every line parsed.
    Done,
    /// The first error in the piece (rows before it are in the accumulator).
    Error(InputError),
    /// A line that needs the general CSV reader starts at `offset` (in the block), line `line`.
    Slow { offset: usize, line: u64 },
}

/// The result of parsing one piece.
struct Piece {
    acc: Acc,
    end: PieceEnd,
}

/// A number cell of a row by column: `Ok(None)` for an empty cell; the error names the cell
/// (`what` is e.g. "x coordinate").
type NumField<'f> = dyn Fn(usize, &str) -> Result<Option<f64>, InputError> + 'f;

/// A kept point's analysis-CRS position (m) and association.
type Placed = ((f64, f64), PointAssociation);

/// The checked values of a row besides its epochs (see [`RowParser::row_head`]).
struct RowHead {
    x: f64,
    y: f64,
    coherence: Option<f32>,
    incidence_deg: f64,
    heading_deg: f64,
    height_m: Option<f32>,
}

/// Everything needed to turn one row into a point (shared read-only by the parallel pieces).
struct RowParser<'a> {
    file: &'a Path,
    spec: &'a DatasetSpec,
    /// The header's column map (mapped columns and their names).
    cols: &'a ColumnMap,
    delimiter: u8,
    n_cols: usize,
    /// The epoch columns in order (from `cols`, without their dates).
    epoch_cols: Vec<usize>,
    factor: f64,
    /// Per header column: true for an epoch column (parsed by the fast path).
    is_epoch: Vec<bool>,
    /// Decimals lost by the unit conversion to mm (0 for mm, 3 for m).
    decimal_shift: u32,
    geographic: bool,
    to_analysis: &'a Transformer,
    associate: &'a (dyn Fn(f64, f64) -> Option<PointAssociation> + Sync),
}

impl RowParser<'_> {
    /// Parse whole lines `bytes` (starting at `offset` in the block, first line `first_line`).
    fn parse_piece(&self, bytes: &[u8], offset: usize, first_line: u64) -> Piece {
        let mut acc = Acc::default();
        let mut ranges: Vec<std::ops::Range<usize>> = Vec::with_capacity(self.n_cols + 1);
        let mut line = first_line;
        let mut lo = 0usize;
        let delim = self.delimiter;
        while lo < bytes.len() {
            let hi = memchr::memchr(b'\n', &bytes[lo..]).map_or(bytes.len(), |p| lo + p);
            let row = &bytes[lo..hi];
            let row = row.strip_suffix(b"\r").unwrap_or(row);
            if memchr::memchr2(b'"', b'\r', row).is_some() {
                return Piece {
                    acc,
                    end: PieceEnd::Slow {
                        offset: offset + lo,
                        line,
                    },
                };
            }
            let pre = self.fast_fields(row, &mut ranges, &mut acc.ints, &mut acc.scratch);
            if pre.is_none() {
                ranges.clear();
                let mut s = 0usize;
                for p in memchr::memchr_iter(delim, row) {
                    ranges.push(s..p);
                    s = p + 1;
                }
                ranges.push(s..row.len());
            }
            if let Err(e) = self.row(row, &ranges, line, &mut acc, pre) {
                return Piece {
                    acc,
                    end: PieceEnd::Error(e),
                };
            }
            line += 1;
            lo = hi + 1;
        }
        Piece {
            acc,
            end: PieceEnd::Done,
        }
    }
}

impl RowParser<'_> {
    /// The fast path of a row: split it into fields and parse every epoch field in the same scan
    /// (plain decimals only, see [`super::decimal`]; an empty field is a missing epoch). `ranges`
    /// ends with one entry per header column (only the non-epoch entries are filled: the general
    /// path does not read the epoch ones when the values are pre-parsed); `values` receives the
    /// epoch values in mm (unit and sign applied, NaN = missing). Returns the largest number of
    /// decimals written, the largest |value| (mm) and the count of values; `None` for anything
    /// else — a field count other than the header's, whitespace, `NaN`, exponents, more than 15
    /// digits, a value beyond the plausibility limit — and the row then goes through the general
    /// path, which gives the same values or the proper error in the proper order.
    fn fast_fields(
        &self,
        row: &[u8],
        ranges: &mut Vec<std::ops::Range<usize>>,
        ints: &mut Vec<i64>,
        values: &mut Vec<f64>,
    ) -> Option<FastRow> {
        // Values are formed as m · 10⁻ᵏ · factor with a multiplication (within an ulp or two of
        // the correctly rounded value): only their 16-bit codes are kept (see `store`), and for a
        // decimal-exact row the code round(v · 10ᵈ) is the exact integer either way.
        let delim = self.delimiter;
        if ranges.len() != self.n_cols {
            ranges.clear();
            ranges.resize(self.n_cols, 0..0);
        }
        ints.clear();
        let mut decimals = 0u32;
        let mut n_values = 0u64;
        let (mut k_min, mut k_max) = (u32::MAX, 0u32);
        let mut max_m = 0u64;
        let mut pos = 0usize;
        let n = row.len();
        for (col, &is_epoch) in self.is_epoch.iter().enumerate() {
            if col > 0 {
                // The previous field ended at a delimiter.
                if pos >= n || row[pos] != delim {
                    return None;
                }
                pos += 1;
            }
            let start = pos;
            if !is_epoch {
                pos = memchr::memchr(delim, &row[pos..]).map_or(n, |p| pos + p);
                ranges[col] = start..pos;
                continue;
            }
            if pos == n || row[pos] == delim {
                ints.push(MISSING_INT); // empty field: a missing epoch
                continue;
            }
            let sc = super::decimal::scan(row, pos)?;
            pos = sc.end;
            if pos < n && row[pos] != delim {
                return None;
            }
            decimals = decimals.max(sc.written);
            let (m, k, neg) = (sc.mantissa as i64, sc.after_point, sc.negative);
            max_m = max_m.max(m as u64);
            k_min = k_min.min(k);
            k_max = k_max.max(k);
            n_values += 1;
            ints.push(((if neg { -m } else { m }) << 5) | i64::from(k));
        }
        if pos != n {
            return None;
        }
        let mut out = FastRow {
            decimals,
            max_abs_mm: 0.0,
            n_values,
            uniform_digits: None,
        };
        if k_min >= k_max {
            // One digit count for the whole row (or no value at all).
            let k = if n_values == 0 { 0 } else { k_max };
            // |m · (10⁻ᵏ · factor)|, the same float the per-value form gives for the largest m.
            let a = (max_m as f64 * (INV_POW10[k as usize] * self.factor)).abs();
            if a > MAX_ABS_DISPLACEMENT_MM {
                return None;
            }
            out.max_abs_mm = a;
            out.uniform_digits = Some(k);
            return Some(out);
        }
        values.clear();
        for &e in ints.iter() {
            if e == MISSING_INT {
                values.push(f64::NAN);
                continue;
            }
            let v = (e >> 5) as f64 * (INV_POW10[(e & 31) as usize] * self.factor);
            let a = v.abs();
            if a > MAX_ABS_DISPLACEMENT_MM {
                return None;
            }
            out.max_abs_mm = out.max_abs_mm.max(a);
            values.push(v);
        }
        Some(out)
    }

    /// The rest of the file from `first_line` on, through the general CSV reader.
    fn read_slow<R: std::io::Read>(
        &self,
        reader: R,
        first_line: u64,
        total: &mut Acc,
    ) -> Result<(), InputError> {
        // The csv crate does not count skipped empty lines, so line ends are counted on the way in.
        let ends = std::rc::Rc::new(std::cell::RefCell::new(LineEnds::default()));
        let counted = CountingReader {
            inner: reader,
            ends: ends.clone(),
            offset: 0,
        };
        let mut rdr = csv::ReaderBuilder::new()
            .delimiter(self.delimiter)
            .has_headers(false)
            .flexible(true)
            .from_reader(counted);
        let mut rec = csv::ByteRecord::new();
        let mut ranges: Vec<std::ops::Range<usize>> = Vec::with_capacity(self.n_cols + 1);
        let mut last_line = first_line.saturating_sub(1);
        loop {
            match rdr.read_byte_record(&mut rec) {
                Ok(true) => {}
                Ok(false) => return Ok(()),
                Err(e) => {
                    return Err(InputError::new(
                        self.file,
                        format!("line {}", last_line + 1),
                        format!("cannot read the row: {e}"),
                        "the file must be UTF-8 CSV with the declared delimiter",
                    ));
                }
            }
            // The record's start position includes the empty lines skipped before it, so the line
            // is found from its end: the line holding the end, minus line breaks inside fields.
            let end = rdr.position().byte();
            let line = {
                let mut e = ends.borrow_mut();
                let before_end = e.before(end);
                let terminated = end > 0 && e.last == Some(end - 1);
                let inner = memchr::memchr_iter(b'\n', rec.as_slice()).count() as u64;
                (first_line + before_end)
                    .saturating_sub(u64::from(terminated) + inner)
                    .max(last_line + 1)
            };
            last_line = line;
            let inner_breaks = memchr::memchr_iter(b'\n', rec.as_slice()).count();
            if inner_breaks > 0 && rec.len() != self.n_cols {
                return Err(InputError::new(
                    self.file,
                    format!("line {line}"),
                    format!(
                        "a quoted field is never closed: the row runs over {} more lines and has {} fields, the header has {}",
                        inner_breaks,
                        rec.len(),
                        self.n_cols
                    ),
                    "close the quote (\"...\") or remove the stray quote character",
                ));
            }
            ranges.clear();
            ranges.extend((0..rec.len()).filter_map(|i| rec.range(i)));
            let mut acc = Acc::default();
            let r = self.row(rec.as_slice(), &ranges, line, &mut acc, None);
            total.absorb(acc, self.file)?;
            r?;
        }
    }

    /// Parse one row (`buf` with its field ranges) at `line` into `acc`. Validation order (and so
    /// which error a bad row reports first): field count, id, duplicate id (by the caller, from
    /// `acc.ids`), x, y, geographic plausibility, coherence, incidence, heading, height, epochs in
    /// column order, the coordinate transform, then the reach test.
    ///
    /// `pre`: the epoch values were already parsed and checked by [`Self::fast_fields`] into
    /// `acc.scratch`.
    fn row(
        &self,
        buf: &[u8],
        ranges: &[std::ops::Range<usize>],
        line: u64,
        acc: &mut Acc,
        pre: Option<FastRow>,
    ) -> Result<(), InputError> {
        let file = self.file;
        let field = |i: usize| &buf[ranges[i].clone()];
        if ranges.len() == 1 && trim(field(0)).is_empty() {
            return Ok(()); // blank line
        }
        acc.rows += 1;
        let loc = || format!("line {line}");
        let n_cols = self.n_cols;
        if ranges.len() != n_cols {
            return Err(InputError::new(
                file,
                loc(),
                format!(
                    "the row has {} fields but the header has {n_cols}",
                    ranges.len()
                ),
                if ranges.len() < n_cols {
                    "the row is short: the file may be truncated, or a delimiter is missing"
                } else {
                    "the row is long: a value may contain the delimiter (quote it) or a column is extra"
                },
            ));
        }
        let id_raw = trim(field(self.cols.id_col));
        if id_raw.is_empty() {
            return Err(InputError::new(
                file,
                loc(),
                "empty point id",
                "every point needs an id",
            ));
        }
        let seen = IdSeen::new(id_hash(id_raw), line).ok_or_else(|| {
            InputError::new(
                file,
                loc(),
                "the file has more than 4 294 967 295 lines",
                "split it into several datasets",
            )
        })?;
        acc.ids.push(seen);
        self.row_values(buf, ranges, line, id_raw, acc, pre)
    }

    /// Per-point LOS angles get the checks of the dataset-level ones (insar-methods.md §2.4): the
    /// heading must agree with the declared pass and look side (rule 3), and an incidence
    /// outside [15°, 60°] is counted for one warning (rule 4). The ranges are checked by the
    /// caller. The error names the heading column when it is mapped (the east component's sign
    /// comes from the heading alone), else the incidence column.
    fn check_point_geometry(
        &self,
        line: u64,
        incidence_deg: f64,
        heading_deg: f64,
        acc: &mut Acc,
    ) -> Result<(), InputError> {
        use crate::series::los;
        let spec = self.spec;
        let look = match spec.look {
            crate::portfolio::LookSide::Right => los::LookSide::Right,
            crate::portfolio::LookSide::Left => los::LookSide::Left,
        };
        let pass = match spec.pass {
            crate::portfolio::Pass::Ascending => los::Pass::Ascending,
            crate::portfolio::Pass::Descending => los::Pass::Descending,
        };
        let Some(col) = self.cols.head_col.or(self.cols.inc_col) else {
            return Ok(());
        };
        match los::los_from_angles(incidence_deg, heading_deg, look, pass) {
            Ok(g) => {
                if self.cols.inc_col.is_some() && !g.warnings.is_empty() {
                    acc.unusual_incidence += 1;
                }
                Ok(())
            }
            Err(e) => {
                let value = if Some(col) == self.cols.head_col {
                    heading_deg
                } else {
                    incidence_deg
                };
                Err(InputError::new(
                    self.file,
                    format!("line {line}, column `{}`", self.cols.headers[col]),
                    format!(
                        "value {value}° gives a line of sight that is not valid for this {} dataset: {e}",
                        pass.label()
                    ),
                    "check the dataset's pass and look side, and that the column holds the flight azimuth (degrees clockwise from north) or the incidence it is mapped as",
                ))
            }
        }
    }

    /// The checks of a row before its epochs, in the order of [`Self::row`] (x, y, geographic
    /// plausibility, coherence, incidence, heading, the per-point geometry, height), on numbers
    /// given by `num(column, what)` (None: empty cell); per-point angles out of the usual range are
    /// counted in `acc`.
    fn row_head(&self, line: u64, num: &NumField, acc: &mut Acc) -> Result<RowHead, InputError> {
        let file = self.file;
        let headers = &self.cols.headers;
        let spec = self.spec;
        let loc = || format!("line {line}");
        let req = |col: usize, what: &str| -> Result<f64, InputError> {
            num(col, what)?.ok_or_else(|| {
                InputError::new(
                    file,
                    format!("{}, column `{}`", loc(), headers[col]),
                    format!("{what} is missing"),
                    format!("every point needs its {what}"),
                )
            })
        };
        let x = req(self.cols.x_col, "x coordinate")?;
        let y = req(self.cols.y_col, "y coordinate")?;
        if self.geographic {
            match check_geographic(x, y) {
                GeographicCheck::Plausible => {}
                GeographicCheck::LooksSwapped => {
                    return Err(InputError::new(
                        file,
                        loc(),
                        format!("({x}, {y}) is not a longitude/latitude: latitude beyond ±90°"),
                        "the x and y columns look swapped: map columns.x to longitude and columns.y to latitude",
                    ));
                }
                GeographicCheck::LooksProjected => {
                    return Err(InputError::new(
                        file,
                        loc(),
                        format!("({x}, {y}) is out of range for longitude/latitude degrees"),
                        "these look like projected metres: set the dataset's crs = \"EPSG:<code>\"",
                    ));
                }
            }
        }
        let coherence = match self.cols.coh_col {
            Some(col) => {
                let v = num(col, "coherence")?;
                if let Some(v) = v {
                    if !(0.0..=1.0).contains(&v) {
                        return Err(InputError::new(
                            file,
                            format!("{}, column `{}`", loc(), headers[col]),
                            format!("coherence {v} is outside 0–1"),
                            "temporal coherence is between 0 and 1; check the column mapping",
                        ));
                    }
                }
                v.map(|v| v as f32)
            }
            None => None,
        };
        let incidence_deg = match self.cols.inc_col {
            Some(col) => {
                let v = req(col, "incidence angle")?;
                if !(v > 0.0 && v < 90.0) {
                    return Err(InputError::new(
                        file,
                        format!("{}, column `{}`", loc(), headers[col]),
                        format!("incidence {v}° is outside (0°, 90°)"),
                        "the incidence is the angle between the line of sight and the vertical, in degrees",
                    ));
                }
                v
            }
            None => spec.incidence_deg.unwrap_or(f64::NAN),
        };
        let heading_deg = match self.cols.head_col {
            Some(col) => {
                let v = req(col, "heading")?;
                if !(-360.0..=360.0).contains(&v) {
                    return Err(InputError::new(
                        file,
                        format!("{}, column `{}`", loc(), headers[col]),
                        format!("heading {v}° is not an angle in [-360°, 360°]"),
                        "the heading is the flight azimuth in degrees clockwise from north, e.g. -12 (ascending) or 192 (descending)",
                    ));
                }
                v
            }
            None => spec.heading_deg.unwrap_or(f64::NAN),
        };
        self.check_point_geometry(line, incidence_deg, heading_deg, acc)?;
        let height_m = match self.cols.h_col {
            Some(col) => num(col, "height")?.map(|v| v as f32),
            None => None,
        };
        Ok(RowHead {
            x,
            y,
            coherence,
            incidence_deg,
            heading_deg,
            height_m,
        })
    }

    /// The analysis-CRS position of (x, y) and its association; None (counted in `acc`) when
    /// the point is out of reach.
    fn place(
        &self,
        line: u64,
        x: f64,
        y: f64,
        acc: &mut Acc,
    ) -> Result<Option<Placed>, InputError> {
        let file = self.file;
        let loc = || format!("line {line}");
        let (ax, ay) = self.to_analysis.apply(x, y).map_err(|e| {
            InputError::new(
                file,
                loc(),
                e.to_string(),
                "check the dataset's crs and the x/y column mapping",
            )
        })?;
        let Some(association) = (self.associate)(ax, ay) else {
            acc.out_of_reach += 1;
            if self.geographic {
                if let Ok((sx, sy)) = self.to_analysis.apply(y, x) {
                    if (self.associate)(sx, sy).is_some() {
                        acc.swapped_in_reach += 1;
                    }
                }
            }
            return Ok(None);
        };
        Ok(Some(((ax, ay), association)))
    }

    /// What a kept row stores besides its values.
    fn meta<'r>(
        &self,
        id: &'r str,
        line: u64,
        xy: (f64, f64),
        association: PointAssociation,
        h: &RowHead,
    ) -> RowMeta<'r> {
        RowMeta {
            id,
            line,
            xy,
            association,
            coherence: h.coherence,
            incidence_deg: self.cols.inc_col.map(|_| h.incidence_deg as f32),
            heading_deg: self.cols.head_col.map(|_| h.heading_deg as f32),
            height_m: self.cols.h_col.map(|_| h.height_m.unwrap_or(f32::NAN)),
        }
    }

    /// The numeric part of [`Self::row`]: values, transform, reach; pushes a kept point.
    fn row_values(
        &self,
        buf: &[u8],
        ranges: &[std::ops::Range<usize>],
        line: u64,
        id_raw: &[u8],
        acc: &mut Acc,
        pre: Option<FastRow>,
    ) -> Result<(), InputError> {
        let file = self.file;
        let headers = &self.cols.headers;
        let field = |i: usize| &buf[ranges[i].clone()];
        let loc = || format!("line {line}");
        let num = |col: usize, what: &str| -> Result<Option<f64>, InputError> {
            parse_cell(field(col)).map_err(|m| {
                InputError::new(
                    file,
                    format!("{}, column `{}`", loc(), headers[col]),
                    m,
                    format!("{what} must be a number (decimal point `.`)"),
                )
            })
        };
        let h = self.row_head(line, &num, acc)?;
        let mut values = std::mem::take(&mut acc.scratch);
        let mut max_abs_mm = acc.max_abs_mm;
        let mut row_max_abs_mm = 0.0f64;
        let mut n_values = 0u64;
        // Decimals written (after the unit conversion), for an exact store; None once unknown.
        let mut decimals: Option<u32> = Some(0);
        if let Some(fr) = pre {
            // Parsed and checked by the fast path.
            decimals = Some(fr.decimals.saturating_sub(self.decimal_shift));
            row_max_abs_mm = fr.max_abs_mm;
            n_values = fr.n_values;
        } else {
            values.clear();
        }
        let slow_cols: &[usize] = if pre.is_some() { &[] } else { &self.epoch_cols };
        for &col in slow_cols {
            let parsed = match super::decimal::parse_plain_decimals(field(col)) {
                Some((v, k)) => {
                    decimals = decimals.map(|d| d.max(k.saturating_sub(self.decimal_shift)));
                    Some(v)
                }
                None => {
                    let v = num(col, "a displacement")?;
                    if v.is_some() {
                        decimals = None;
                    }
                    v
                }
            };
            let mm = match parsed {
                Some(v) => {
                    let mm = v * self.factor;
                    if mm.abs() > MAX_ABS_DISPLACEMENT_MM {
                        return Err(self.implausible(line, col, v, mm));
                    }
                    row_max_abs_mm = row_max_abs_mm.max(mm.abs());
                    n_values += 1;
                    mm
                }
                None => f64::NAN,
            };
            values.push(mm);
        }
        max_abs_mm = max_abs_mm.max(row_max_abs_mm);
        acc.max_abs_mm = max_abs_mm;
        acc.n_values += n_values;
        let Some((xy, association)) = self.place(line, h.x, h.y, acc)? else {
            acc.scratch = values;
            return Ok(());
        };
        let id = String::from_utf8_lossy(id_raw);
        let meta = self.meta(&id, line, xy, association, &h);
        let pushed = match pre.and_then(|fr| fr.uniform_digits) {
            Some(k) => {
                // Mantissas with k digits after the point each: the exact codes straight from
                // them when the row is decimal-exact (the codes `quantise` would give), else the
                // values for the scaled store.
                let d = decimals.unwrap_or(u32::MAX);
                match super::store::exact_codes_per_mm(d, row_max_abs_mm) {
                    Some(per_mm) => {
                        // code = m · sign · 10^(shift + d − k).
                        let e = i64::from(self.decimal_shift) + i64::from(d) - i64::from(k);
                        let p = 10i64.pow(e.unsigned_abs() as u32);
                        let sign = if self.factor < 0.0 { -1 } else { 1 };
                        let (mul, div) = if e >= 0 { (sign * p, 1) } else { (sign, p) };
                        let ints = &acc.ints;
                        // Two loops so that the usual case (no division) compiles without one.
                        if div == 1 {
                            acc.store.push_exact(
                                meta,
                                ints.iter().map(|&v| FastRow::code(v, mul, 1)),
                                per_mm as f32,
                            )
                        } else {
                            acc.store.push_exact(
                                meta,
                                ints.iter().map(|&v| FastRow::code(v, mul, div)),
                                per_mm as f32,
                            )
                        }
                    }
                    None => {
                        values.clear();
                        let step = INV_POW10[k as usize] * self.factor;
                        values.extend(acc.ints.iter().map(|&v| {
                            if v == MISSING_INT {
                                f64::NAN
                            } else {
                                (v >> 5) as f64 * step
                            }
                        }));
                        acc.store.push(meta, &values, decimals, row_max_abs_mm)
                    }
                }
            }
            None => acc.store.push(meta, &values, decimals, row_max_abs_mm),
        };
        acc.scratch = values;
        pushed.map_err(|e| InputError::new(file, loc(), e.0, "split the points file"))
    }
}

/// Read points from any reader (see [`read_points`]); `file` is used in messages.
///
/// The body is read in blocks of [`BLOCK_BYTES`], each cut at its last line end, split into
/// pieces at line boundaries and parsed in parallel (rayon); results are merged in file order, so
/// the kept points, their line numbers, the warnings and the first error are exactly those of a
/// row-by-row reading. A row containing a quote character (or a bare carriage return, which the
/// CSV convention also treats as a line end) switches the rest of the file to the general `csv`
/// crate reader (the slow path), so quoted fields keep their CSV meaning.
///
/// Choice: line numbers are physical line numbers (blank lines count), so messages point at the
/// line an editor shows.
#[allow(clippy::too_many_arguments)]
pub fn read_points_from<R: std::io::BufRead + Send>(
    mut reader: R,
    file: &Path,
    spec: &DatasetSpec,
    to_analysis: &Transformer,
    geographic: bool,
    associate: &(dyn Fn(f64, f64) -> Option<PointAssociation> + Sync),
    expected_bytes: Option<u64>,
    warnings: &mut Warnings,
) -> Result<Dataset, InputError> {
    let io_err = |e: std::io::Error, line: u64| {
        InputError::new(
            file,
            format!("line {line}"),
            format!("cannot read the row: {e}"),
            "the file must be UTF-8 CSV with the declared delimiter",
        )
    };
    // The header: the first line that is not empty (empty lines before it are skipped, as the
    // CSV convention does).
    let mut header_line = Vec::new();
    let mut line_no = 0u64;
    let mut any_bytes = false;
    loop {
        header_line.clear();
        let n = reader
            .read_until(b'\n', &mut header_line)
            .map_err(|e| io_err(e, line_no + 1))?;
        if n == 0 {
            break;
        }
        any_bytes = true;
        line_no += 1;
        if !strip_eol(&header_line).is_empty() {
            break;
        }
    }
    if !any_bytes {
        return Err(InputError::new(
            file,
            "line 1",
            "the points file is empty",
            "export the points with a header row: point id, x, y, optional coherence, then one column per date",
        ));
    }
    if strip_eol(&header_line).is_empty() {
        return Err(InputError::new(
            file,
            "line 1",
            "the points file is empty",
            "export the points with a header row",
        ));
    }
    let delimiter = spec
        .delimiter
        .unwrap_or_else(|| detect_delimiter(strip_eol(&header_line)));
    let mut hdr = csv::ReaderBuilder::new()
        .delimiter(delimiter)
        .has_headers(false)
        .flexible(true)
        .from_reader(strip_eol(&header_line));
    let mut rec = csv::ByteRecord::new();
    hdr.read_byte_record(&mut rec).map_err(|e| {
        InputError::new(
            file,
            "line 1",
            format!("cannot read the header: {e}"),
            "the file must be UTF-8 text",
        )
    })?;
    let headers: Vec<String> = rec
        .iter()
        .enumerate()
        .map(|(i, h)| {
            let mut s = String::from_utf8_lossy(h).trim().to_string();
            if i == 0 {
                s = s.trim_start_matches('\u{feff}').to_string();
            }
            s
        })
        .collect();
    let map = column_map(headers, file, spec, warnings)?;
    let rp = map.row_parser(file, spec, delimiter, geographic, to_analysis, associate);
    let mut total = Acc::default();
    let mut next_line = line_no + 1;
    // Double buffering: while the pieces of one block are parsed on the thread pool, the next
    // block is read (rayon::join), so reading the file overlaps parsing it.
    let mut carry: Vec<u8> = Vec::new();
    let mut eof = false;
    let mut cur = read_block(&mut reader, &mut carry, &mut eof, Vec::new())
        .map_err(|e| io_err(e, next_line))?;
    if let Some(total_bytes) = expected_bytes {
        // Room for every row, estimated from the first block, taken once: the big arrays then
        // never move while growing (untouched room costs address space, not memory).
        let rows_in_block = memchr::memchr_iter(b'\n', &cur).count().max(1) as u64;
        let per_row = (cur.len() as u64 / rows_in_block).max(1);
        let rows = total_bytes / per_row + total_bytes / per_row / 20 + 16;
        total
            .store
            .reserve_rows(rows, map.epoch_cols.len(), per_row.min(32));
        if let Ok(r) = usize::try_from(rows) {
            let _ = total.ids.try_reserve_exact(r);
        }
    }
    let mut spare: Vec<u8> = Vec::new();
    let slow_from: Option<(Vec<u8>, u64)> = loop {
        if cur.is_empty() && eof {
            break None;
        }
        let was_eof = eof;
        let (next, parsed) = rayon::join(
            || {
                if was_eof {
                    Ok(Vec::new())
                } else {
                    read_block(
                        &mut reader,
                        &mut carry,
                        &mut eof,
                        std::mem::take(&mut spare),
                    )
                }
            },
            || {
                let (pieces, end_line) = split_pieces(&cur, next_line);
                let parsed: Vec<Piece> = pieces
                    .par_iter()
                    .map(|&(lo, hi, first_line)| rp.parse_piece(&cur[lo..hi], lo, first_line))
                    .collect();
                (parsed, end_line - next_line)
            },
        );
        let (parsed, lines) = parsed;
        let mut switch = None;
        for p in parsed {
            total.absorb(p.acc, file)?;
            match p.end {
                PieceEnd::Done => {}
                PieceEnd::Error(e) => return Err(first_error(file, &mut total, e)),
                PieceEnd::Slow { offset, line } => {
                    switch = Some((offset, line));
                    break;
                }
            }
        }
        let next = next.map_err(|e| io_err(e, next_line + lines))?;
        if let Some((offset, line)) = switch {
            // The rest of the file, in order: this block from the row, the block read ahead, the
            // partial line carried over; the reader continues after them.
            let mut rest = cur.split_off(offset);
            rest.extend_from_slice(&next);
            rest.extend_from_slice(&carry);
            break Some((rest, line));
        }
        next_line += lines;
        cur.clear();
        spare = std::mem::replace(&mut cur, next);
    };
    if let Some((rest, first_line)) = slow_from {
        let chained = std::io::Cursor::new(rest).chain(reader);
        if let Err(e) = rp.read_slow(chained, first_line, &mut total) {
            return Err(first_error(file, &mut total, e));
        }
    }
    finish(total, map, file, spec, warnings)
}

/// Rows a piece of a decoded block holds (pieces are checked in parallel).
const NUM_PIECE_ROWS: usize = 4096;

/// One column of a block of decoded rows (see [`read_numeric`]).
pub(crate) enum NumColumn {
    /// Numbers; a non-finite value (a null) is an empty cell.
    Num(Vec<f64>),
    /// Text (ids).
    Text(Vec<Vec<u8>>),
    /// Not decoded: a column that is neither mapped nor an epoch.
    Skipped,
}

/// Rows decoded column by column (a Parquet row group).
pub(crate) struct NumBlock {
    /// Line of the first row, counted as in a CSV export (the header is line 1).
    pub(crate) first_line: u64,
    /// Number of rows.
    pub(crate) rows: usize,
    /// One per header column: `Num` for every column [`ColumnMap::numeric`] names, `Num` or
    /// `Text` for the id.
    pub(crate) columns: Vec<NumColumn>,
}

/// Digits after the point in the shortest text of `v` when at most `limit` (see
/// [`reads_back_with`]); None beyond. The tests' reference for [`max_text_decimals`].
#[cfg(test)]
fn text_decimals(v: f64, limit: u32) -> Option<u32> {
    (0..=limit).find(|&k| reads_back_with(v, k))
}

/// Whether some decimal with `k` digits after the point reads back as `v`: for |v| < 10¹¹ and
/// |v|·10ᵏ < 2⁵³ (else false).
///
/// The shortest text of v (what Rust's `{}` writes, trailing zeros never written) has k digits
/// after the point exactly when k is the least count for which some decimal m·10⁻ᵏ reads back as
/// v (lies in v's rounding interval). Within these bounds that decimal is unique, m is the
/// integer nearest v·10ᵏ (the product is within 10⁻⁴ of m), and m / 10ᵏ, with m and 10ᵏ exact in
/// `f64`, is one correctly rounded division: the reading of the text.
#[inline]
fn reads_back_with(v: f64, k: u32) -> bool {
    // Infinities fail the size test, NaN its own.
    if k > 15 || v.abs() >= 1e11 || v.is_nan() {
        return false;
    }
    let p = super::decimal::pow10(k);
    let t = v * p;
    if t.abs() >= 9_007_199_254_740_992.0 {
        return false;
    }
    // Nearest integer by a cast (no call into libm); exact below 2⁵³.
    let m = (t + 0.5f64.copysign(t)) as i64;
    m as f64 / p == v
}

/// The largest count of digits after the point in the shortest texts of `values` (non-finite ones
/// skipped), when every one is at most `limit`. Each value is first tried at the largest count so
/// far (one test for most values). The plain form of one row; the reader finds it for a tile of
/// rows column by column ([`raise_text_decimals`]), and the tests compare the two.
#[cfg(test)]
fn max_text_decimals(values: impl Iterator<Item = f64>, limit: u32) -> Option<u32> {
    let mut d = 0u32;
    for v in values.filter(|v| v.is_finite()) {
        if !reads_back_with(v, d) {
            d = (d + 1..=limit).find(|&k| reads_back_with(v, k))?;
        }
    }
    Some(d)
}

/// Rows of a piece summarised together (see `RowParser::num_piece`): 128 rows of 150 epochs
/// are 150 KB of values, which stay in the L2 cache between the two passes.
const NUM_TILE_ROWS: usize = 128;

/// [`RowSums::decimals`] of a row with a value beyond the decimal limit.
const NO_DECIMALS: u8 = u8::MAX;

/// The epoch values of a tile of rows, transposed to rows and summarised per row, column by
/// column (see `RowParser::num_piece`).
#[derive(Default)]
struct TileSums {
    /// The values row by row, mm (NaN = missing).
    values_mm: Vec<f64>,
    /// Epochs per row.
    n_epochs: usize,
    /// Per row.
    rows: Vec<RowAcc>,
}

/// What [`TileSums`] gathers of one row.
#[derive(Debug, Clone, Copy, Default)]
struct RowAcc {
    /// Largest |value|, mm (implausible values included).
    max_abs_mm: f64,
    /// Values present (finite).
    n_values: u32,
    /// Whether some value lies beyond [`MAX_ABS_DISPLACEMENT_MM`] after the unit conversion.
    implausible: bool,
    /// [`max_text_decimals`] of the values so far, [`NO_DECIMALS`] for None.
    decimals: u8,
    /// 10^`decimals`; 0 for [`NO_DECIMALS`].
    scale: f64,
}

/// One row of a [`TileSums`].
#[derive(Debug, Clone, Copy, PartialEq)]
struct RowSums<'t> {
    /// The values, mm (NaN = missing).
    values_mm: &'t [f64],
    max_abs_mm: f64,
    n_values: u32,
    decimals: Option<u32>,
    implausible: bool,
}

impl TileSums {
    /// Summarise rows `rows` of the columns `epochs` (values as written; `factor` converts them
    /// to mm; `limit`: see [`max_text_decimals`]).
    fn of(&mut self, epochs: &[&[f64]], rows: std::ops::Range<usize>, factor: f64, limit: u32) {
        let n_epochs = epochs.len();
        self.n_epochs = n_epochs;
        self.values_mm.clear();
        self.values_mm.resize(rows.len() * n_epochs, f64::NAN);
        self.rows.clear();
        let start = RowAcc {
            scale: 1.0,
            ..RowAcc::default()
        };
        self.rows.resize(rows.len(), start);
        for (j, c) in epochs.iter().enumerate() {
            let c = &c[rows.clone()];
            for ((&v, acc), out) in c
                .iter()
                .zip(&mut self.rows)
                .zip(self.values_mm.chunks_exact_mut(n_epochs.max(1)))
            {
                let present = v.is_finite();
                let mm = if present { v * factor } else { f64::NAN };
                out[j] = mm;
                let a = mm.abs();
                // NaN compares false: a missing value changes neither.
                if a > acc.max_abs_mm {
                    acc.max_abs_mm = a;
                }
                acc.implausible |= a > MAX_ABS_DISPLACEMENT_MM;
                acc.n_values += u32::from(present);
                if present && !reads_back_fast(v, acc.scale) {
                    acc.raise_decimals(v, limit);
                }
            }
        }
    }

    /// Row `i` of the tile.
    fn row(&self, i: usize) -> RowSums<'_> {
        let acc = &self.rows[i];
        RowSums {
            values_mm: &self.values_mm[i * self.n_epochs..(i + 1) * self.n_epochs],
            max_abs_mm: acc.max_abs_mm,
            n_values: acc.n_values,
            decimals: Some(acc.decimals)
                .filter(|&d| d != NO_DECIMALS)
                .map(u32::from),
            implausible: acc.implausible,
        }
    }
}

impl RowAcc {
    /// One step of [`max_text_decimals`]: raise the row's decimals to cover the finite value `v`
    /// ([`NO_DECIMALS`] beyond `limit`).
    #[cold]
    fn raise_decimals(&mut self, v: f64, limit: u32) {
        let d = u32::from(self.decimals);
        if self.decimals == NO_DECIMALS || reads_back_with(v, d) {
            return;
        }
        match (d + 1..=limit).find(|&k| reads_back_with(v, k)) {
            Some(k) => {
                self.decimals = k as u8;
                self.scale = super::decimal::pow10(k);
            }
            None => {
                self.decimals = NO_DECIMALS;
                self.scale = 0.0;
            }
        }
    }
}

/// 1.5 · 2⁵²: adding and subtracting it rounds an `f64` below 2⁵¹ in magnitude to an integer.
const ROUND_MAGIC: f64 = 6_755_399_441_055_744.0;

/// A cheaper [`reads_back_with`]`(v, k)` for the scale `p` = 10ᵏ: true only when that is true;
/// false when it is false or the value is beyond this test's range (|v·p| ≥ 2⁵¹, |v| ≥ 10¹¹;
/// p = 0 always), where the caller asks `reads_back_with` itself.
///
/// No integer conversion: m = (t + 1.5·2⁵²) − 1.5·2⁵² is an integer nearest t = v·p (ties to
/// even) for |t| < 2⁵¹. The rounding of ties does not matter: if some decimal m*·10⁻ᵏ reads back
/// as v (|v − m*/p| ≤ ulp(v)/2), then |v·p − m*| ≤ p·ulp(v)/2 ≤ ulp(v·p), so |t − m*| ≤
/// 1.5·ulp(t) ≤ 0.375 below 2⁵¹: m* is the integer nearest t, whichever way ties go, and then
/// both tests compute m*/p; if none does, both fail.
#[inline(always)]
fn reads_back_fast(v: f64, p: f64) -> bool {
    let t = v * p;
    let m = (t + ROUND_MAGIC) - ROUND_MAGIC;
    v.abs() < 1e11 && t.abs() < 2_251_799_813_685_248.0 && m / p == v
}

/// Read points from blocks of decoded columns (the Parquet reader's numeric entry): `next` gives
/// the blocks in file order (None after the last). Every row gets the CSV reader's checks, in its
/// order and with its messages (`line N` as in a CSV export), applied to the numbers; a kept row
/// is stored as the CSV reader stores the shortest decimal text of its values
/// ([`max_text_decimals`]: the same decimal-exact codes), so a file gives the results of its CSV
/// export. Limit: a row that needs the scaled store (more than 4 decimals in mm) is scaled from
/// `value · unit factor`, where the CSV reader's fast path forms `mantissa · 10⁻ᵏ · factor`; the two
/// agree to an ulp or two, which changes a 16-bit code only when the scaled value lies that close
/// to a half. `rows` (the file's row count) sizes the store once. The next block is decoded while
/// the current one is checked in parallel pieces: memory holds two blocks, never the file.
#[allow(clippy::too_many_arguments)]
pub(crate) fn read_numeric(
    map: ColumnMap,
    file: &Path,
    spec: &DatasetSpec,
    to_analysis: &Transformer,
    geographic: bool,
    associate: &(dyn Fn(f64, f64) -> Option<PointAssociation> + Sync),
    next: &mut (dyn FnMut() -> Result<Option<NumBlock>, InputError> + Send),
    rows: u64,
    warnings: &mut Warnings,
) -> Result<Dataset, InputError> {
    let mut total = Acc::default();
    // Room for every row, taken once (untouched room costs address space, not memory).
    total.store.reserve_rows(rows, map.epoch_cols.len(), 16);
    {
        let rp = map.row_parser(file, spec, b',', geographic, to_analysis, associate);
        let mut cur = next()?;
        while let Some(block) = cur.take() {
            let starts: Vec<usize> = (0..block.rows).step_by(NUM_PIECE_ROWS).collect();
            let (following, pieces) = rayon::join(&mut *next, || {
                starts
                    .par_iter()
                    .map(|&lo| rp.num_piece(&block, lo..(lo + NUM_PIECE_ROWS).min(block.rows)))
                    .collect::<Vec<Piece>>()
            });
            for p in pieces {
                total.absorb(p.acc, file)?;
                if let PieceEnd::Error(e) = p.end {
                    return Err(first_error(file, &mut total, e));
                }
            }
            cur = following?;
        }
    }
    finish(total, map, file, spec, warnings)
}

impl RowParser<'_> {
    /// Rows `rows` of a decoded block, a tile of [`NUM_TILE_ROWS`] at a time: the tile's epoch
    /// values are first summarised column by column ([`TileSums::of`], reading each column in
    /// order, which the memory prefetch follows), then its rows are checked and stored while
    /// those values are still in cache. Reading the columns row by row instead touches one cache
    /// line per column and row (150 streams at once), most of them a miss.
    fn num_piece(&self, b: &NumBlock, rows: std::ops::Range<usize>) -> Piece {
        let mut acc = Acc::default();
        // The epoch columns (all numbers, see `ColumnMap::numeric`).
        let epochs: Vec<&[f64]> = self
            .epoch_cols
            .iter()
            .map(|&c| match &b.columns[c] {
                NumColumn::Num(v) => v.as_slice(),
                _ => &[],
            })
            .collect();
        if epochs.iter().any(|c| c.len() < b.rows) {
            return Piece {
                acc,
                end: PieceEnd::Error(InputError::new(
                    self.file,
                    format!("line {}", b.first_line + rows.start as u64),
                    "an epoch column was not decoded as numbers",
                    "write the displacements as float or double columns",
                )),
            };
        }
        let mut sums = TileSums::default();
        for lo in rows.clone().step_by(NUM_TILE_ROWS) {
            let tile = lo..(lo + NUM_TILE_ROWS).min(rows.end);
            sums.of(&epochs, tile.clone(), self.factor, 4 + self.decimal_shift);
            for r in tile {
                if let Err(e) = self.num_row(b, &epochs, r, sums.row(r - lo), &mut acc) {
                    return Piece {
                        acc,
                        end: PieceEnd::Error(e),
                    };
                }
            }
        }
        Piece {
            acc,
            end: PieceEnd::Done,
        }
    }

    /// Row `r` of a decoded block: the checks of [`Self::row`] in its order, on numbers; `sums`
    /// summarises its epoch values.
    fn num_row(
        &self,
        b: &NumBlock,
        epochs: &[&[f64]],
        r: usize,
        sums: RowSums,
        acc: &mut Acc,
    ) -> Result<(), InputError> {
        let line = b.first_line + r as u64;
        let loc = || format!("line {line}");
        acc.rows += 1;
        let id_text;
        let id_raw: &[u8] = match &b.columns[self.cols.id_col] {
            NumColumn::Text(v) => trim(&v[r]),
            NumColumn::Num(v) => {
                id_text = super::gis_points::num_text(v[r]);
                trim(id_text.as_bytes())
            }
            NumColumn::Skipped => b"",
        };
        if id_raw.is_empty() {
            return Err(InputError::new(
                self.file,
                loc(),
                "empty point id",
                "every point needs an id",
            ));
        }
        let seen = IdSeen::new(id_hash(id_raw), line).ok_or_else(|| {
            InputError::new(
                self.file,
                loc(),
                "the file has more than 4 294 967 295 lines",
                "split it into several datasets",
            )
        })?;
        acc.ids.push(seen);
        let cell = |col: usize| match &b.columns[col] {
            NumColumn::Num(v) if v[r].is_finite() => Some(v[r]),
            _ => None,
        };
        let h = self.row_head(line, &|col, _| Ok(cell(col)), acc)?;
        if sums.implausible {
            // The first implausible value of the row, in column order.
            for (&col, c) in self.epoch_cols.iter().zip(epochs) {
                let (v, mm) = (c[r], c[r] * self.factor);
                if mm.abs() > MAX_ABS_DISPLACEMENT_MM {
                    return Err(self.implausible(line, col, v, mm));
                }
            }
        }
        acc.n_values += u64::from(sums.n_values);
        acc.max_abs_mm = acc.max_abs_mm.max(sums.max_abs_mm);
        let Some((xy, association)) = self.place(line, h.x, h.y, acc)? else {
            return Ok(());
        };
        // Decimals of the values' shortest texts after the unit conversion; beyond the store's
        // exact range the exact figure does not matter (the row is stored scaled either way).
        let decimals = sums.decimals.map(|d| d.saturating_sub(self.decimal_shift));
        let id = String::from_utf8_lossy(id_raw);
        let meta = self.meta(&id, line, xy, association, &h);
        let pushed = acc
            .store
            .push(meta, sums.values_mm, decimals, sums.max_abs_mm);
        pushed.map_err(|e| InputError::new(self.file, loc(), e.0, "split the points file"))
    }

    /// The error for a displacement beyond [`MAX_ABS_DISPLACEMENT_MM`] (`v` as written, `mm`
    /// converted).
    fn implausible(&self, line: u64, col: usize, v: f64, mm: f64) -> InputError {
        InputError::new(
            self.file,
            format!("line {line}, column `{}`", self.cols.headers[col]),
            format!(
                "displacement {v} {} = {mm:.0} mm is implausible (more than {MAX_ABS_DISPLACEMENT_MM} mm)",
                if self.spec.unit == crate::portfolio::Unit::M {
                    "m"
                } else {
                    "mm"
                }
            ),
            "check the dataset's unit (\"mm\" or \"m\") and the column mapping",
        )
    }
}

/// The column map of a points header: the mapped columns, the epoch columns with their dates
/// and the ignored ones (also used by the numeric entry, see [`read_numeric`]).
pub(crate) struct ColumnMap {
    /// Header names, trimmed.
    pub(crate) headers: Vec<String>,
    id_col: usize,
    x_col: usize,
    y_col: usize,
    coh_col: Option<usize>,
    inc_col: Option<usize>,
    head_col: Option<usize>,
    h_col: Option<usize>,
    epoch_cols: Vec<(usize, NaiveDate)>,
    ignored: Vec<String>,
}

/// Resolve the header against the dataset's column map and `date_format` (errors name
/// `line 1 (header)`); warns of ignored columns and of a missing coherence column.
pub(crate) fn column_map(
    headers: Vec<String>,
    file: &Path,
    spec: &DatasetSpec,
    warnings: &mut Warnings,
) -> Result<ColumnMap, InputError> {
    let find = |name: &str| headers.iter().position(|h| h == name);
    let require = |name: &str, key: &str| {
        find(name).ok_or_else(|| {
            InputError::new(
                file,
                "line 1 (header)",
                format!("column `{name}` (columns.{key}) not found"),
                format!(
                    "the header has: {}; map the right column with [datasets.columns] {key} = \"...\"",
                    headers.join(", ")
                ),
            )
        })
    };
    let c = &spec.columns;
    let id_col = require(&c.id, "id")?;
    let x_col = require(&c.x, "x")?;
    let y_col = require(&c.y, "y")?;
    let coh_col = match find(&c.coherence) {
        Some(i) => Some(i),
        None if c.coherence_explicit => {
            return Err(require(&c.coherence, "coherence").unwrap_err());
        }
        None => None,
    };
    let inc_col = c
        .incidence
        .as_deref()
        .map(|n| require(n, "incidence"))
        .transpose()?;
    let head_col = c
        .heading
        .as_deref()
        .map(|n| require(n, "heading"))
        .transpose()?;
    let h_col = c
        .height
        .as_deref()
        .map(|n| require(n, "height"))
        .transpose()?;
    let mapped: Vec<usize> = [
        Some(id_col),
        Some(x_col),
        Some(y_col),
        coh_col,
        inc_col,
        head_col,
        h_col,
    ]
    .into_iter()
    .flatten()
    .collect();

    let mut epoch_cols: Vec<(usize, NaiveDate)> = Vec::new();
    let mut ignored = Vec::new();
    for (i, h) in headers.iter().enumerate() {
        if mapped.contains(&i) {
            continue;
        }
        match NaiveDate::parse_from_str(h, &c.date_format) {
            Ok(d) => {
                if let Some((j, _)) = epoch_cols.iter().find(|(_, e)| *e == d) {
                    return Err(InputError::new(
                        file,
                        "line 1 (header)",
                        format!("date {d} appears twice (columns {} and {})", j + 1, i + 1),
                        "each acquisition date must have exactly one column",
                    ));
                }
                if let Some((_, prev)) = epoch_cols.last() {
                    if d < *prev {
                        return Err(InputError::new(
                            file,
                            "line 1 (header)",
                            format!(
                                "epoch columns are out of date order: column {} ({d}) follows {prev}",
                                i + 1
                            ),
                            "sort the epoch columns by date",
                        ));
                    }
                }
                epoch_cols.push((i, d));
            }
            Err(e) if looks_like_date(h, &c.date_format, e.kind()) => {
                return Err(InputError::new(
                    file,
                    format!("line 1 (header), column {} `{h}`", i + 1),
                    format!(
                        "`{h}` looks like an acquisition date but is not a valid date in format `{}` ({e}); its epoch would be lost",
                        c.date_format
                    ),
                    "correct the date in the header (month 01–12, a day that exists in that month), or set [datasets.columns] date_format to match it",
                ));
            }
            Err(_) => ignored.push(h.clone()),
        }
    }
    if epoch_cols.is_empty() {
        return Err(InputError::new(
            file,
            "line 1 (header)",
            format!(
                "no epoch columns: no header parses as a date with date_format `{}`",
                c.date_format
            ),
            "set [datasets.columns] date_format to match the headers, e.g. \"%Y%m%d\" for 20230115",
        ));
    }
    if !ignored.is_empty() {
        warnings.push(
            "ignored_columns",
            format!(
                "{}: columns ignored (neither mapped nor dates in format `{}`): {}",
                file.display(),
                c.date_format,
                ignored.join(", ")
            ),
        );
    }
    if coh_col.is_none() {
        warnings.push(
            "no_coherence",
            format!(
                "{}: no `{}` column: points are not screened by coherence",
                file.display(),
                c.coherence
            ),
        );
    }
    Ok(ColumnMap {
        headers,
        id_col,
        x_col,
        y_col,
        coh_col,
        inc_col,
        head_col,
        h_col,
        epoch_cols,
        ignored,
    })
}

impl ColumnMap {
    /// The id column.
    pub(crate) fn id_col(&self) -> usize {
        self.id_col
    }

    /// Whether column `i` is read as a number: a mapped column other than the id, or an epoch.
    pub(crate) fn numeric(&self, i: usize) -> bool {
        [
            Some(self.x_col),
            Some(self.y_col),
            self.coh_col,
            self.inc_col,
            self.head_col,
            self.h_col,
        ]
        .contains(&Some(i))
            || self.epoch_cols.iter().any(|(c, _)| *c == i)
    }

    #[allow(clippy::too_many_arguments)]
    fn row_parser<'a>(
        &'a self,
        file: &'a Path,
        spec: &'a DatasetSpec,
        delimiter: u8,
        geographic: bool,
        to_analysis: &'a Transformer,
        associate: &'a (dyn Fn(f64, f64) -> Option<PointAssociation> + Sync),
    ) -> RowParser<'a> {
        let epoch_cols = &self.epoch_cols;
        let n_cols = self.headers.len();
        let factor = spec.unit.to_mm()
            * match spec.positive {
                LosSign::Towards => 1.0,
                LosSign::Away => -1.0,
            };
        RowParser {
            file,
            spec,
            cols: self,
            delimiter,
            n_cols,
            epoch_cols: epoch_cols.iter().map(|(c, _)| *c).collect(),
            is_epoch: (0..n_cols)
                .map(|i| epoch_cols.iter().any(|(c, _)| *c == i))
                .collect(),
            factor,
            decimal_shift: if spec.unit == crate::portfolio::Unit::M {
                3
            } else {
                0
            },
            geographic,
            to_analysis,
            associate,
        }
    }
}

/// The dataset from everything read: the duplicate-id check, the dataset-level warnings.
fn finish(
    mut total: Acc,
    map: ColumnMap,
    file: &Path,
    spec: &DatasetSpec,
    warnings: &mut Warnings,
) -> Result<Dataset, InputError> {
    let ColumnMap {
        coh_col,
        inc_col,
        head_col,
        epoch_cols,
        ignored,
        ..
    } = map;
    if let Some((first, repeat)) = first_duplicate(&mut total.ids) {
        return Err(duplicate_error(file, &total.store, first, repeat));
    }
    total.ids = Vec::new();
    let Acc {
        store,
        rows,
        out_of_reach,
        swapped_in_reach,
        unusual_incidence,
        max_abs_mm,
        n_values,
        ..
    } = total;
    if unusual_incidence > 0 {
        warnings.push(
            "los_geometry",
            format!(
                "{}: {unusual_incidence} point(s) have an incidence outside the usual range [15°, 60°]",
                file.display()
            ),
        );
    }
    if rows == 0 {
        return Err(InputError::new(
            file,
            "line 2",
            "the points file has a header but no data rows",
            "export the points, one row per point",
        ));
    }
    if store.points.is_empty() && swapped_in_reach > 0 {
        return Err(InputError::new(
            file,
            "",
            format!(
                "no point lies near any structure, but {swapped_in_reach} would if x and y were swapped"
            ),
            "the x/y (longitude/latitude) columns look swapped: map columns.x to longitude and columns.y to latitude",
        ));
    }
    if store.points.is_empty() {
        warnings.push(
            "no_points_near_structures",
            format!(
                "{}: none of the {rows} points lies within reach of a structure; check the dataset's crs and the structures' crs",
                file.display()
            ),
        );
    } else if out_of_reach > 0 {
        warnings.push(
            "outside_every_buffer",
            format!(
                "{}: {out_of_reach} of {rows} points lie outside every structure's surroundings and were not kept",
                file.display()
            ),
        );
    }
    if n_values > 20 {
        if spec.unit == crate::portfolio::Unit::Mm && max_abs_mm < 0.5 && max_abs_mm > 0.0 {
            warnings.push(
                "implausible_magnitude",
                format!(
                    "{}: the largest |displacement| is {max_abs_mm:.4} mm: values look like metres declared as mm",
                    file.display()
                ),
            );
        }
        if spec.unit == crate::portfolio::Unit::M && max_abs_mm > 2000.0 {
            warnings.push(
                "implausible_magnitude",
                format!(
                    "{}: the largest |displacement| is {:.1} m: values look like millimetres declared as m",
                    file.display(),
                    max_abs_mm / 1000.0
                ),
            );
        }
        if max_abs_mm == 0.0 {
            warnings.push(
                "all_zero",
                format!(
                    "{}: every displacement is exactly zero; check the export",
                    file.display()
                ),
            );
        }
    }
    let per_point = |mapped: bool, each: Vec<f32>, constant: Option<f64>| {
        if mapped {
            PerPoint::Each(each)
        } else {
            PerPoint::Constant(constant.unwrap_or(f64::NAN))
        }
    };
    Ok(Dataset {
        name: spec.name.clone(),
        epochs: epoch_cols.into_iter().map(|(_, d)| d).collect(),
        points: store.points,
        ids: store.ids,
        codes: store.codes,
        series_at: vec![],
        association: store.association,
        incidence_deg: per_point(inc_col.is_some(), store.incidence_deg, spec.incidence_deg),
        heading_deg: per_point(head_col.is_some(), store.heading_deg, spec.heading_deg),
        height_m: store.height_m,
        rows_read: rows,
        rows_out_of_reach: out_of_reach,
        has_coherence: coh_col.is_some(),
        ignored_columns: ignored,
        max_rounding_mm: store.max_rounding_mm,
        reference: None,
        row_groups: None,
    })
}

/// Whether a header that did not parse with `format` is nevertheless meant as a date, so that
/// ignoring it would silently lose an epoch.
///
/// Yes when chrono read every field but the values do not form a calendar date (month 13, 30
/// February: `OutOfRange`/`Impossible`), or when the header has the shape of the format: only
/// digits and the format's literal characters, the latter in the format's order, and at least
/// six digits (e.g. `2023-1-150` for `%Y-%m-%d`). Other headers (names such as `velocity` or
/// `2023-01-15_std`) are left as ignored columns.
fn looks_like_date(header: &str, format: &str, kind: chrono::format::ParseErrorKind) -> bool {
    use chrono::format::ParseErrorKind;
    if matches!(
        kind,
        ParseErrorKind::OutOfRange | ParseErrorKind::Impossible
    ) {
        return true;
    }
    let mut literals = String::new();
    let mut chars = format.chars();
    while let Some(ch) = chars.next() {
        if ch == '%' {
            // Skip the specifier (and a padding modifier such as `%-d`).
            match chars.next() {
                Some('-' | '_' | '0') => {
                    chars.next();
                }
                Some('%') => literals.push('%'),
                _ => {}
            }
        } else {
            literals.push(ch);
        }
    }
    let digits = header.chars().filter(char::is_ascii_digit).count();
    let rest: String = header.chars().filter(|c| !c.is_ascii_digit()).collect();
    digits >= 6 && rest == literals
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::coords::Crs;
    use crate::portfolio::{Columns, LookSide, Pass, Unit};

    fn spec() -> DatasetSpec {
        DatasetSpec {
            name: "a".into(),
            path: "a.csv".into(),
            pass: Pass::Ascending,
            incidence_deg: Some(38.0),
            heading_deg: Some(-12.0),
            crs: "EPSG:4326".into(),
            unit: Unit::Mm,
            positive: LosSign::Towards,
            look: LookSide::Right,
            wavelength_mm: 55.47,
            delimiter: None,
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

    fn read(text: &str, spec: &DatasetSpec) -> Result<Dataset, InputError> {
        let w = Crs::wgs84();
        let t = Transformer::new(&w, &w);
        read_points_from(
            std::io::Cursor::new(text.as_bytes().to_vec()),
            Path::new("a.csv"),
            spec,
            &t,
            true,
            &|_, _| Some(PointAssociation::default()),
            None,
            &mut Warnings::default(),
        )
    }

    #[test]
    fn reads_semicolon_bom_crlf_and_gaps() {
        let text = "\u{feff}point_id;lon;lat;coherence;2023-01-01;2023-01-13\r\np1;9.0;45.0;0.9;0;-1.5\r\np2;9.0;45.0;0.8;0;\r\n";
        let d = read(text, &spec()).unwrap();
        assert_eq!(d.points.len(), 2);
        assert_eq!(d.epochs.len(), 2);
        assert_eq!(d.point(0).series().unwrap().get(1), -1.5);
        assert!(d.point(1).series().unwrap().get(1).is_nan());
        assert_eq!(d.point(1).line(), 3);
    }

    #[test]
    fn away_sign_and_metres_are_converted() {
        let mut s = spec();
        s.positive = LosSign::Away;
        s.unit = Unit::M;
        let d = read("point_id,lon,lat,2023-01-01\np,9,45,0.002\n", &s).unwrap();
        assert_eq!(d.point(0).series().unwrap().get(0), -2.0);
    }

    #[test]
    fn errors_name_line_and_column() {
        let e = read(
            "point_id,lon,lat,2023-01-01,2023-01-13\np,9,45,0,abc\n",
            &spec(),
        )
        .unwrap_err();
        assert_eq!(e.location, "line 2, column `2023-01-13`");
        let e = read("point_id,lon,lat,2023-01-01\np,9,45,0\nq,9,45\n", &spec()).unwrap_err();
        assert!(e.message.contains("fields"), "{e}");
        let e = read("point_id,lon,lat,2023-01-01\np,9,45,0\np,9,45,1\n", &spec()).unwrap_err();
        assert!(e.message.contains("duplicate point id"), "{e}");
        let e = read(
            "point_id,lon,lat,coherence,2023-01-01\np,9,45,1.5,0\n",
            &spec(),
        )
        .unwrap_err();
        assert!(e.message.contains("outside 0–1"), "{e}");
        let e = read(
            "point_id,lon,lat,2023-01-13,2023-01-01\np,9,45,0,0\n",
            &spec(),
        )
        .unwrap_err();
        assert!(e.message.contains("out of date order"), "{e}");
        let e = read(
            "point_id,lon,lat,2023-01-01,2023-01-01\np,9,45,0,0\n",
            &spec(),
        )
        .unwrap_err();
        assert!(e.message.contains("twice"), "{e}");
        let e = read("point_id,lon,lat,2023-01-01\n", &spec()).unwrap_err();
        assert!(e.message.contains("no data rows"), "{e}");
        let e = read("", &spec()).unwrap_err();
        assert!(e.message.contains("empty"), "{e}");
        let e = read("id,lon,lat,2023-01-01\np,9,45,0\n", &spec()).unwrap_err();
        assert!(e.message.contains("point_id"), "{e}");
        let e = read("point_id,lon,lat,2023-01-01\np,9,45,inf\n", &spec()).unwrap_err();
        assert!(e.message.contains("finite"), "{e}");
    }

    /// A header that has the form of a date but is not one stops the read, naming the column
    /// and the value; names that are not dates stay ignored columns.
    #[test]
    fn impossible_date_header_is_an_error() {
        for bad in ["2023-13-15", "2023-02-30", "2023-1-150"] {
            let e = read(
                &format!("point_id,lon,lat,2023-01-01,{bad},2023-03-01\np,9,45,0,1,2\n"),
                &spec(),
            )
            .unwrap_err();
            assert_eq!(
                e.location,
                format!("line 1 (header), column 5 `{bad}`"),
                "{e}"
            );
            assert!(e.message.contains("not a valid date"), "{e}");
        }
        let mut s = spec();
        s.columns.date_format = "%Y%m%d".into();
        let e = read("point_id,lon,lat,20230101,20231315\np,9,45,0,1\n", &s).unwrap_err();
        assert!(e.location.contains("`20231315`"), "{e}");
        // Not dates: ignored with a warning, as before.
        for ok in ["velocity", "2023-01-15_std", "v2023"] {
            let d = read(
                &format!("point_id,lon,lat,2023-01-01,{ok}\np,9,45,0,1\n"),
                &spec(),
            )
            .unwrap();
            assert_eq!(d.epochs.len(), 1, "{ok}");
        }
    }

    fn angle_spec(inc: bool, head: bool) -> DatasetSpec {
        let mut s = spec();
        if inc {
            s.columns.incidence = Some("inc".into());
            s.incidence_deg = None;
        }
        if head {
            s.columns.heading = Some("head".into());
            s.heading_deg = None;
        }
        s
    }

    /// Per-point angle columns get the dataset-level checks (insar-methods.md §2.4): a heading that
    /// contradicts the pass, a heading out of range and an incidence out of range are errors
    /// naming line, column and value; valid per-point angles are read.
    #[test]
    fn per_point_angles_are_validated() {
        let s = angle_spec(true, true);
        let head = "point_id,lon,lat,inc,head,2023-01-01\n";
        let d = read(
            &format!("{head}p,9,45,39.0,-12.0,0\nq,9,45,41.0,-11.0,0\n"),
            &s,
        )
        .unwrap();
        assert_eq!(d.points.len(), 2);
        // Descending heading in an ascending dataset (θ = 37°, α = 192° → u_E > 0; LOS-2).
        let e = read(
            &format!("{head}p,9,45,39.0,-12.0,0\nq,9,45,37.0,192.0,0\n"),
            &s,
        )
        .unwrap_err();
        assert_eq!(e.location, "line 3, column `head`");
        assert!(
            e.message.contains("192") && e.message.contains("ascending"),
            "{e}"
        );
        let e = read(&format!("{head}p,9,45,39.0,400.0,0\n"), &s).unwrap_err();
        assert_eq!(e.location, "line 2, column `head`");
        assert!(e.message.contains("400"), "{e}");
        let e = read(&format!("{head}p,9,45,0.0,-12.0,0\n"), &s).unwrap_err();
        assert_eq!(e.location, "line 2, column `inc`");
        // Heading per point, incidence from the dataset: the pass check still runs.
        let s = angle_spec(false, true);
        let e = read("point_id,lon,lat,head,2023-01-01\np,9,45,190.0,0\n", &s).unwrap_err();
        assert_eq!(e.location, "line 2, column `head`");
        // A heading just past due east gives u_E > 0 (looking west): not an ascending
        // right-looking geometry.
        let e = read("point_id,lon,lat,head,2023-01-01\np,9,45,100.0,0\n", &s).unwrap_err();
        assert!(e.message.contains("contradicts"), "{e}");
        // Incidence per point outside [15°, 60°]: read, with one warning for the file.
        let s = angle_spec(true, false);
        let w = Crs::wgs84();
        let t = Transformer::new(&w, &w);
        let mut warnings = Warnings::default();
        let d = read_points_from(
            std::io::Cursor::new(
                b"point_id,lon,lat,inc,2023-01-01\np,9,45,12.0,0\nq,9,45,65.0,0\nr,9,45,39.0,0\n"
                    .to_vec(),
            ),
            Path::new("a.csv"),
            &s,
            &t,
            true,
            &|_, _| Some(PointAssociation::default()),
            None,
            &mut warnings,
        )
        .unwrap();
        assert_eq!(d.points.len(), 3);
        let w: Vec<&str> = warnings
            .items
            .iter()
            .filter(|w| w.kind == "los_geometry")
            .map(|w| w.message.as_str())
            .collect();
        assert_eq!(w.len(), 1, "{w:?}");
        assert!(w[0].contains("2 point(s)"), "{w:?}");
    }

    /// A file of `n` rows `p<i>,9,45,0.9,<i mod 7>,<-(i mod 5)>`; row i is on line i + 2.
    fn big(n: usize) -> String {
        let mut t = String::from("point_id,lon,lat,coherence,2023-01-01,2023-01-13\n");
        for i in 0..n {
            t.push_str(&format!(
                "p{i},9.0,45.0,0.9,{},{}\n",
                i % 7,
                -((i % 5) as i64)
            ));
        }
        t
    }

    #[test]
    fn many_pieces_keep_file_order_and_line_numbers() {
        // ~40 k rows ≈ 1.1 MB: several parallel pieces (pieces are at least 64 KiB).
        let n = 40_000;
        let d = read(&big(n), &spec()).unwrap();
        assert_eq!(d.points.len(), n);
        assert_eq!(d.rows_read, n as u64);
        for (i, p) in d.iter_points().enumerate() {
            assert_eq!(p.id(), format!("p{i}"));
            assert_eq!(p.line(), i as u64 + 2);
            assert_eq!(p.series().unwrap().get(0), (i % 7) as f32);
            assert_eq!(p.series().unwrap().get(1), -((i % 5) as f32));
        }
    }

    /// The size hint only reserves room: a hint far too small, far too large or absent reads the
    /// same points, and every kept point carries the association the callback gave it.
    #[test]
    fn size_hint_changes_nothing_and_associations_follow_the_points() {
        use crate::association::SpatialIndex;
        let w = Crs::wgs84();
        let t = Transformer::new(&w, &w);
        let mut text = String::from("point_id,lon,lat,2023-01-01,2023-01-13\n");
        for i in 0..30_000 {
            text.push_str(&format!("q{i},{},0.5,{},-{}.25\n", i % 40, i % 9, i % 4));
        }
        // Unit squares at x = 0, 10, 20, 30 (degrees treated as metres: identity transform).
        let rect = |x0: f64| {
            geo::MultiPolygon::new(vec![geo::Polygon::new(
                geo::LineString::from(vec![
                    (x0, 0.0),
                    (x0 + 1.0, 0.0),
                    (x0 + 1.0, 1.0),
                    (x0, 1.0),
                    (x0, 0.0),
                ]),
                vec![],
            )])
        };
        let idx = SpatialIndex::new(
            (0..4).map(|k| rect(f64::from(k) * 10.0)).collect(),
            1.0,
            3.0,
        );
        let assoc = |x: f64, y: f64| idx.summarise(x, y);
        let run = |hint: Option<u64>| {
            read_points_from(
                std::io::Cursor::new(text.clone().into_bytes()),
                Path::new("a.csv"),
                &spec(),
                &t,
                false,
                &assoc,
                hint,
                &mut Warnings::default(),
            )
            .unwrap()
        };
        let base = run(None);
        for hint in [Some(10), Some(1 << 30)] {
            let d = run(hint);
            assert_eq!(d.points.len(), base.points.len());
            assert_eq!(d.association, base.association);
            for (a, b) in d.iter_points().zip(base.iter_points()) {
                assert_eq!((a.id(), a.line()), (b.id(), b.line()));
                assert_eq!(a.series().unwrap().to_vec(), b.series().unwrap().to_vec());
            }
        }
        // x = 0..3 and 10..13, ...: within 3 m of a square; x = 4..6 etc. are out of reach.
        assert!(base.points.len() < 30_000 && base.rows_out_of_reach > 0);
        assert_eq!(base.association.len(), base.points.len());
        for (p, a) in base.iter_points().zip(&base.association) {
            assert_eq!(Some(*a), idx.summarise(p.x(), p.y()), "{}", p.id());
        }
    }

    /// Duplicate-id bookkeeping sorts by hash, then line, like the `(u64, u64)` pairs it packs.
    #[test]
    fn id_records_sort_by_hash_then_line() {
        let pairs = [(u64::MAX, 7u64), (1 << 40, 3), (1 << 40, 2), (5, 9), (0, 1)];
        let mut packed: Vec<IdSeen> = pairs
            .iter()
            .map(|&(h, l)| IdSeen::new(h, l).unwrap())
            .collect();
        packed.sort();
        let mut want = pairs.to_vec();
        want.sort();
        let got: Vec<(u64, u64)> = packed.iter().map(|s| (s.hash(), s.line())).collect();
        assert_eq!(got, want);
        assert!(IdSeen::new(1, u64::from(u32::MAX) + 1).is_none());
        let mut dup = vec![
            IdSeen::new(9, 2).unwrap(),
            IdSeen::new(4, 3).unwrap(),
            IdSeen::new(9, 5).unwrap(),
            IdSeen::new(4, 4).unwrap(),
        ];
        assert_eq!(first_duplicate(&mut dup), Some((3, 4)));
    }

    #[test]
    fn reach_filter_counts_rows_not_kept() {
        let w = Crs::wgs84();
        let t = Transformer::new(&w, &w);
        let d = read_points_from(
            std::io::Cursor::new(big(1000).into_bytes()),
            Path::new("a.csv"),
            &spec(),
            &t,
            true,
            &|_, _| None,
            Some(1 << 20),
            &mut Warnings::default(),
        )
        .unwrap();
        assert!(d.points.is_empty());
        assert_eq!((d.rows_read, d.rows_out_of_reach), (1000, 1000));
    }

    #[test]
    fn duplicate_far_apart_names_both_lines_and_wins_over_later_errors() {
        let mut t = big(30_000);
        // Row 29 000 (line 29 002) repeats the id of row 3 (line 5); a later row is malformed.
        t = t.replace("p29000,", "p3,");
        t.push_str("bad,9,45\n");
        let e = read(&t, &spec()).unwrap_err();
        assert_eq!(e.location, "line 29002");
        assert_eq!(e.message, "duplicate point id `p3` (first on line 5)");
        // The same duplicate on a row that is also malformed later in the row: duplicate first.
        let t = big(10).replace("p7,9.0,45.0,0.9,0,-2", "p2,9.0,45.0,0.9,x,-2");
        let e = read(&t, &spec()).unwrap_err();
        assert!(e.message.contains("duplicate point id `p2`"), "{e}");
    }

    #[test]
    fn blank_lines_count_as_lines() {
        let text = "point_id,lon,lat,2023-01-01\np,9,45,0\n\n  \nq,9,45,x\n";
        let e = read(text, &spec()).unwrap_err();
        assert_eq!(e.location, "line 5, column `2023-01-01`");
    }

    #[test]
    fn quoted_rows_use_the_csv_reader_from_there_on() {
        let text = "point_id,lon,lat,2023-01-01\np1,9,45,1\n\"p,2\",9,45,2\np3,9,45,3\n";
        let d = read(text, &spec()).unwrap();
        let ids: Vec<&str> = d.iter_points().map(|p| p.id()).collect();
        assert_eq!(ids, ["p1", "p,2", "p3"]);
        assert_eq!(d.point(2).line(), 4);
        assert_eq!(d.point(2).series().unwrap().get(0), 3.0);
        // A slow-path error keeps its physical line number.
        let text = "point_id,lon,lat,2023-01-01\n\"p1\",9,45,1\n\np3,9,45,z\n";
        let e = read(text, &spec()).unwrap_err();
        assert_eq!(e.location, "line 4, column `2023-01-01`");
        // Duplicate found on the slow path, first seen on the fast path.
        let text = "point_id,lon,lat,2023-01-01\np1,9,45,1\n\"p1\",9,45,1\n";
        let e = read(text, &spec()).unwrap_err();
        assert_eq!(e.message, "duplicate point id `p1` (first on line 2)");
    }

    /// The fast path forms codes straight from the written digits; the general path (here: every
    /// row after a quoted one) goes through floats and `quantise`. Both store the same codes at the
    /// same codes-per-mm: mm and m, both LOS signs, trailing zeros, mixed digit counts, gaps,
    /// values at the 16-bit limit and values that need the scaled store.
    #[test]
    fn fast_codes_equal_the_general_path() {
        let rows = [
            "1.25,-0.50,,3.75",
            "0.001,0.0100,-0.1000,0",
            "327.67,-327.67,0.01,",
            "3276.8,1,2,3",
            "12.5,3.25,-7,0.125",
            "0.00001,0.00002,0.5,1",
            "1,2,3,4",
            ",,,",
            "-0,0.0,+2.50,-.5",
            "1.20,3.40,-5.60,7.00",
        ];
        // In metres: the same kinds of rows within the plausibility limit (10 m).
        let rows_m = [
            "0.00125,-0.00050,,0.00375",
            "0.001,0.0100,-0.1000,0",
            "0.32767,-0.32767,0.00001,",
            "3.2768,0.001,0.002,0.003",
            "0.0125,0.00325,-0.007,0.000125",
            "0.0000001,0.0000002,0.5,1",
            "1,2,3,4",
            ",,,",
            "-0,0.0,+2.50,-.5",
            "0.00120,0.00340,-0.00560,0.00700",
        ];
        let header = "point_id,lon,lat,2023-01-01,2023-01-13,2023-01-25,2023-02-06\n";
        for (unit, rows) in [(Unit::Mm, rows), (Unit::M, rows_m)] {
            for positive in [LosSign::Towards, LosSign::Away] {
                let mut s = spec();
                s.unit = unit;
                s.positive = positive;
                let mut fast = String::from(header);
                let mut general = format!("{header}\"q\",9,45,0,0,0,0\n");
                for (i, r) in rows.iter().enumerate() {
                    fast.push_str(&format!("r{i},9,45,{r}\n"));
                    general.push_str(&format!("r{i},9,45,{r}\n"));
                }
                let (a, b) = (read(&fast, &s).unwrap(), read(&general, &s).unwrap());
                assert_eq!(a.points.len() + 1, b.points.len());
                assert_eq!(a.points.len(), rows.len());
                for (i, pa) in a.iter_points().enumerate() {
                    let pb = b.point(i + 1);
                    match (pa.series().unwrap(), pb.series().unwrap()) {
                        (
                            SeriesRef::Codes {
                                codes: ca,
                                per_mm: ma,
                            },
                            SeriesRef::Codes {
                                codes: cb,
                                per_mm: mb,
                            },
                        ) => {
                            assert_eq!((ca, ma), (cb, mb), "{unit:?} {positive:?} row {i}")
                        }
                        _ => panic!("the store keeps codes"),
                    }
                }
                assert_eq!(a.max_rounding_mm, b.max_rounding_mm);
            }
        }
    }

    /// Digits after the point in Rust's shortest text of `v`.
    fn written_decimals(v: f64) -> u32 {
        let t = format!("{v}");
        t.split_once('.').map_or(0, |(_, f)| f.len() as u32)
    }

    /// A xorshift64 stream (Marsaglia 2003) for test values: seeded, no dependency.
    fn xorshift(mut seed: u64) -> impl FnMut() -> u64 {
        move || {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            seed
        }
    }

    #[test]
    fn text_decimals_counts_the_digits_of_the_shortest_text() {
        let mut next = xorshift(0x9e37_79b9_7f4a_7c15);
        for i in 0..200_000 {
            let v = match i % 4 {
                // Short decimals of every sign and size the files hold.
                0 => (next() % 2_000_001) as f64 / 10f64.powi((next() % 8) as i32) - 1000.0,
                1 => -((next() % 100_000) as f64) / 1e3,
                // Values from 32-bit floats (long texts) and arbitrary doubles.
                2 => f64::from(f32::from_bits((next() as u32 & 0x3fff_ffff) | 0x3000_0000)),
                _ => f64::from_bits((next() & 0x000f_ffff_ffff_ffff) | 0x4000_0000_0000_0000),
            };
            let w = written_decimals(v);
            for limit in [0, 3, 4, 7] {
                let want = (w <= limit).then_some(w);
                assert_eq!(text_decimals(v, limit), want, "{v} (`{v}`), limit {limit}");
            }
        }
        assert_eq!(text_decimals(-0.0, 4), Some(0));
        assert_eq!(text_decimals(f64::NAN, 4), None);
        assert_eq!(text_decimals(0.1 + 0.2, 7), None);
        let d = |v: &[f64]| max_text_decimals(v.iter().copied(), 4);
        assert_eq!(d(&[1.5, 2.0, f64::NAN, -0.25, 3.1]), Some(2));
        assert_eq!(d(&[]), Some(0));
        assert_eq!(d(&[1.5, 0.1 + 0.2]), None);
        assert_eq!(d(&[0.00001]), None);
    }

    /// Values at the edges of the decimal count: signed zeros, 15 significant digits, sums with no
    /// short decimal, 32-bit floats, magnitudes around 10¹¹ and the 2⁵¹ bound of the fast test,
    /// halves, non-finite values.
    fn edge_values() -> Vec<f64> {
        let mut v = vec![
            0.0,
            -0.0,
            1.0,
            -1.5,
            0.1,
            0.1 + 0.2,
            1.0 - 0.9,
            0.3,
            -2.675,
            123_456_789_012_345.0,
            0.123_456_789_012_345,
            12_345.678_901_234_5,
            99_999_999_999.999,
            1e10,
            1e11,
            -1e11 + 0.5,
            1e15,
            2_251_799_813_685_248.0,
            225_179_981_368_524.8,
            22_517_998_136_852.48,
            4_503_599_627_370_495.5,
            0.5,
            2.5,
            -0.000_05,
            0.000_049_999,
            5e-324,
            f64::MIN_POSITIVE,
            f64::MAX,
            f64::from(0.1f32),
            f64::from(-3.3f32),
            f64::from(1234.567f32),
            f64::NAN,
            f64::INFINITY,
            f64::NEG_INFINITY,
        ];
        let mut next = xorshift(0x2545_f491_4f6c_dd1d);
        for i in 0..4000 {
            v.push(match i % 4 {
                0 => (next() % 2_000_001) as f64 / 10f64.powi((next() % 9) as i32) - 1000.0,
                1 => (next() % 1_000_000_000_000_000) as f64 / 10f64.powi((next() % 16) as i32),
                2 => f64::from(f32::from_bits((next() as u32 & 0x3fff_ffff) | 0x3000_0000)),
                _ => f64::from_bits(next()),
            });
        }
        v
    }

    #[test]
    fn fast_read_back_test_agrees_with_the_plain_one() {
        for v in edge_values() {
            for k in 0..=15u32 {
                let p = super::super::decimal::pow10(k);
                let plain = reads_back_with(v, k);
                let fast = reads_back_fast(v, p);
                // Never true where the plain test is false; equal within its range.
                assert!(!fast || plain, "{v:e} at {k} decimals");
                if v.is_finite() && v.abs() < 1e11 && (v * p).abs() < 2_251_799_813_685_248.0 {
                    assert_eq!(fast, plain, "{v:e} at {k} decimals");
                }
            }
            assert!(
                !reads_back_fast(v, 0.0),
                "{v:e}: scale 0 always asks the plain test"
            );
        }
    }

    /// The tile's per-row figures, found column by column, equal the plain row-by-row ones
    /// (`max_text_decimals` and the loop the CSV rows get) over rows mixing edge values.
    #[test]
    fn tile_sums_equal_the_row_by_row_figures() {
        let values = edge_values();
        let (n_rows, n_cols) = (300usize, 7usize);
        // Column c of row r: a value picked so that most rows mix several kinds.
        let columns: Vec<Vec<f64>> = (0..n_cols)
            .map(|c| {
                (0..n_rows)
                    .map(|r| values[(r * 7 + c * 131 + r * c * 17) % values.len()])
                    .collect()
            })
            .collect();
        // A few rows of short decimals only, one all missing; then each of the first 40 values
        // among short decimals (column 3), in rows 130–169 (the second tile).
        let mut columns = columns;
        for (c, col) in columns.iter_mut().enumerate() {
            col[5] = [1.25, -0.5, 3.0, 0.0, -0.0, 7.125, 2.5][c];
            col[6] = f64::NAN;
            col[7] = [0.001, 0.01, 0.1, 1.0, 10.0, 100.0, 1000.0][c] * 3.0;
            for (i, &v) in values[..40].iter().enumerate() {
                col[130 + i] = if c == 3 { v } else { 0.25 * c as f64 };
            }
        }
        let epochs: Vec<&[f64]> = columns.iter().map(Vec::as_slice).collect();
        for (factor, limit) in [(1.0, 4), (-1.0, 4), (1000.0, 7), (-1000.0, 7)] {
            let mut sums = TileSums::default();
            for lo in (0..n_rows).step_by(NUM_TILE_ROWS) {
                let tile = lo..(lo + NUM_TILE_ROWS).min(n_rows);
                sums.of(&epochs, tile.clone(), factor, limit);
                for r in tile {
                    let row: Vec<f64> = columns.iter().map(|c| c[r]).collect();
                    let mm: Vec<f64> = row
                        .iter()
                        .map(|&v| if v.is_finite() { v * factor } else { f64::NAN })
                        .collect();
                    let present: Vec<f64> = mm.iter().copied().filter(|v| !v.is_nan()).collect();
                    let got = sums.row(r - lo);
                    let want_max = present.iter().fold(0.0f64, |m, v| m.max(v.abs()));
                    assert_eq!(
                        got.decimals,
                        max_text_decimals(row.iter().copied(), limit),
                        "row {r}: {row:?}, limit {limit}"
                    );
                    assert_eq!(got.max_abs_mm.to_bits(), want_max.to_bits(), "row {r}");
                    assert_eq!(got.n_values as usize, present.len(), "row {r}");
                    assert_eq!(
                        got.implausible,
                        want_max > MAX_ABS_DISPLACEMENT_MM,
                        "row {r}"
                    );
                    let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
                    assert_eq!(bits(got.values_mm), bits(&mm), "row {r}");
                }
            }
        }
    }

    #[test]
    fn no_trailing_newline_and_crlf() {
        let d = read("point_id,lon,lat,2023-01-01\r\np,9,45,4.5", &spec()).unwrap();
        assert_eq!(d.point(0).series().unwrap().get(0), 4.5);
    }
}
