//! The retained points of one dataset, held compactly: a fixed-size record per point, the ids in
//! one text buffer, and every LOS series as 16-bit codes in one array.
//!
//! Why: a portfolio may keep a million points of 150 epochs; as 32-bit floats with a heap
//! allocation per point that is over 0.8 GB before any analysis. Here a point costs 32 bytes plus
//! its id text plus 2 bytes per epoch.
//!
//! Series codes: value_mm = code / per_mm, code `i16::MIN` = missing epoch. `per_mm` (codes per
//! millimetre) is chosen per point by [`quantise`]:
//! - *decimal-exact*: when every value of the row was written with at most d ≤ 4 decimals (after
//!   the unit conversion) and max|value| · 10ᵈ ≤ 32 767, per_mm = 10ᵈ and each code is the exact
//!   integer value · 10ᵈ; decoding code / 10ᵈ in `f32` gives the same `f32` as parsing the text
//!   directly (one correctly rounded division), so nothing is lost;
//! - otherwise *scaled*: per_mm = 32 767 / max|value|, and the rounding error is at most
//!   0.5 / per_mm = max|value| / 65 534 mm (≤ 0.0016 mm for a 100 mm series; ≤ 0.153 mm at the
//!   10 m plausibility limit), recorded per dataset as [`Dataset::max_rounding_mm`].
//!
//! Choice \[Rec\]: 16 bits, because that bound is two to three orders below the ~1–3 mm noise of one
//! InSAR epoch (insar-methods.md §6.1) while halving memory against `f32`.

use crate::association::PointAssociation;
use chrono::NaiveDate;

/// Code of a missing epoch.
pub const MISSING: i16 = i16::MIN;
/// Series position of a point whose series was dropped (see [`Dataset::drop_series`]).
pub const NO_SERIES: u32 = u32::MAX;
/// Largest code magnitude.
const MAX_CODE: f64 = 32_767.0;
/// Largest decimal scale tried (10⁴ codes per mm = 0.1 µm).
const MAX_DECIMALS: u32 = 4;

/// One retained measurement point: position and metadata (32 bytes). Its id, series and optional
/// per-point geometry live in the [`Dataset`]; use [`Dataset::point`] for a view with accessors.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Point {
    /// Easting in the analysis CRS, m.
    pub x: f64,
    /// Northing in the analysis CRS, m.
    pub y: f64,
    /// 1-based line number in the file.
    line: u32,
    /// Start of the id in [`Dataset::ids`] (it ends where the next point's id starts).
    id_at: u32,
    /// Temporal coherence 0–1; NaN when the file has none.
    coherence: f32,
    /// Codes per millimetre of the series (see the module doc); 0 for an all-zero series.
    per_mm: f32,
}

impl Point {
    /// 1-based line number in the file.
    pub fn line_u64(&self) -> u64 {
        u64::from(self.line)
    }
    /// Start of the id in the id text.
    pub(crate) fn id_at(&self) -> u32 {
        self.id_at
    }
}

/// How one row's values were turned into codes.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Quantised {
    /// Codes per mm.
    pub per_mm: f32,
    /// Largest rounding error of the row, mm (0 when decimal-exact).
    pub rounding_mm: f64,
}

/// Turn one row's values (mm, NaN = missing) into codes appended to `out`.
///
/// `decimals` is the largest number of decimals any value of the row was written with, after the
/// unit conversion (None when unknown, e.g. a value in exponent form); `max_abs_mm` the largest
/// |value|. See the module doc for the two cases and the error bound.
pub fn quantise(
    values_mm: &[f64],
    decimals: Option<u32>,
    max_abs_mm: f64,
    out: &mut Vec<i16>,
) -> Quantised {
    let exact = decimals.and_then(|d| exact_codes_per_mm(d, max_abs_mm));
    let (per_mm, rounding_mm) = match exact {
        Some(s) => (s, 0.0),
        None if max_abs_mm > 0.0 => {
            let s = MAX_CODE / max_abs_mm;
            (s, 0.5 / s)
        }
        None => (1.0, 0.0),
    };
    out.extend(values_mm.iter().map(|v| {
        if v.is_nan() {
            MISSING
        } else {
            // Round half away from zero (the float-to-int cast truncates toward zero).
            let x = (v * per_mm).clamp(-MAX_CODE, MAX_CODE);
            (x + 0.5f64.copysign(x)) as i16
        }
    }));
    Quantised {
        per_mm: per_mm as f32,
        rounding_mm,
    }
}

/// The decimal-exact codes-per-mm [`quantise`] chooses for a row written with `decimals`
/// decimals (after the unit conversion) and largest |value| `max_abs_mm`: `Some(10^decimals)`
/// when that store is exact, `None` when the row needs the scaled store.
pub fn exact_codes_per_mm(decimals: u32, max_abs_mm: f64) -> Option<f64> {
    Some(decimals)
        .filter(|d| *d <= MAX_DECIMALS)
        .map(|d| 10f64.powi(d as i32))
        .filter(|s| max_abs_mm * s <= MAX_CODE)
}

/// Decode one code, mm (NaN for a missing epoch).
#[inline]
pub fn decode(code: i16, per_mm: f32) -> f32 {
    if code == MISSING {
        f32::NAN
    } else {
        code as f32 / per_mm
    }
}

/// A point's LOS series (mm, positive towards the satellite), decoded on access: stored codes, or
/// plain `f32` values (tests and synthetic inputs).
#[derive(Debug, Clone, Copy)]
pub enum SeriesRef<'a> {
    /// 16-bit codes with their codes-per-mm.
    Codes {
        /// The codes.
        codes: &'a [i16],
        /// Codes per mm.
        per_mm: f32,
    },
    /// Values in mm (NaN = missing).
    Floats(&'a [f32]),
}

impl<'a> SeriesRef<'a> {
    /// A series over codes.
    pub fn new(codes: &'a [i16], per_mm: f32) -> Self {
        SeriesRef::Codes { codes, per_mm }
    }
    /// A series over plain values, mm.
    pub fn floats(values_mm: &'a [f32]) -> Self {
        SeriesRef::Floats(values_mm)
    }
    /// Number of epochs.
    pub fn len(&self) -> usize {
        match self {
            SeriesRef::Codes { codes, .. } => codes.len(),
            SeriesRef::Floats(v) => v.len(),
        }
    }
    /// True when the series has no epochs.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
    /// Value at epoch `i`, mm (NaN = missing).
    #[inline]
    pub fn get(&self, i: usize) -> f32 {
        match self {
            SeriesRef::Codes { codes, per_mm } => decode(codes[i], *per_mm),
            SeriesRef::Floats(v) => v[i],
        }
    }
    /// Every value as a vector, mm.
    pub fn to_vec(&self) -> Vec<f32> {
        (0..self.len()).map(|i| self.get(i)).collect()
    }
}

/// Per-point incidence or heading: the dataset's value, or one per point from a mapped column.
#[derive(Debug, Clone, PartialEq)]
pub enum PerPoint {
    /// The dataset value for every point (NaN when not given).
    Constant(f64),
    /// One value per retained point, in point order.
    Each(Vec<f32>),
}

impl PerPoint {
    fn at(&self, i: usize) -> f64 {
        match self {
            PerPoint::Constant(v) => *v,
            PerPoint::Each(v) => f64::from(v[i]),
        }
    }
}

/// One points file after reading.
#[derive(Debug, Clone)]
pub struct Dataset {
    /// Dataset name from the portfolio.
    pub name: String,
    /// Acquisition dates, strictly increasing.
    pub epochs: Vec<NaiveDate>,
    /// Retained points (within reach of a structure), in file order.
    pub points: Vec<Point>,
    /// Every retained point's id, concatenated.
    pub(crate) ids: String,
    /// Every retained point's series codes, `epochs.len()` per series, in point order.
    pub(crate) codes: Vec<i16>,
    /// Where each point's series starts in `codes`, counted in series ([`NO_SERIES`] when the
    /// series was dropped, see [`Dataset::drop_series`]); empty while every point keeps its
    /// series (point `i`'s series is then the `i`-th).
    pub(crate) series_at: Vec<u32>,
    /// Every retained point's association with the structures (owner or nearest ring, tie),
    /// worked out by the reader with [`crate::association::SpatialIndex::summarise`].
    pub association: Vec<PointAssociation>,
    /// Incidence angle per point, degrees.
    pub(crate) incidence_deg: PerPoint,
    /// Heading per point, degrees clockwise from north.
    pub(crate) heading_deg: PerPoint,
    /// Height per point, m (NaN = not given); empty when no height column is mapped.
    pub(crate) height_m: Vec<f32>,
    /// Data rows read.
    pub rows_read: u64,
    /// Rows not within reach of any structure (not kept).
    pub rows_out_of_reach: u64,
    /// True when the file has a coherence column (coherence screening applies).
    pub has_coherence: bool,
    /// Header columns that were neither mapped nor epochs (ignored).
    pub ignored_columns: Vec<String>,
    /// Largest rounding error of any stored value, mm (0 when every series is decimal-exact).
    pub max_rounding_mm: f64,
    /// What re-referencing to the common area did (`[reference]`); `None` without it.
    pub reference: Option<super::reference::DatasetReference>,
    /// Row groups read and skipped (Parquet points files only).
    pub row_groups: Option<super::parquet_points::RowGroupsRead>,
}

impl Dataset {
    /// A view of point `i` with accessors for everything the dataset holds about it.
    #[inline]
    pub fn point(&self, i: usize) -> PointRef<'_> {
        PointRef { ds: self, index: i }
    }
    /// Views of every point, in order.
    pub fn iter_points(&self) -> impl Iterator<Item = PointRef<'_>> {
        (0..self.points.len()).map(move |i| self.point(i))
    }
    /// Subtract a per-epoch offset (mm; one per epoch) from every point's series, in place.
    ///
    /// The differences are stored again with [`quantise`] in the scaled store (their decimals
    /// are not known), so the dataset's [`Dataset::max_rounding_mm`] grows to at most
    /// max|value| / 65 534 mm per point (module doc). Missing epochs stay missing; an offset
    /// that is NaN makes that epoch missing for every point.
    pub fn subtract_per_epoch(&mut self, offset_mm: &[f64]) {
        let n = self.epochs.len();
        if n == 0 || offset_mm.len() != n {
            return;
        }
        let mut values = Vec::with_capacity(n);
        let mut out = Vec::with_capacity(n);
        for i in 0..self.points.len() {
            let Some(at) = self.series_index(i) else {
                continue;
            };
            let p = &mut self.points[i];
            let chunk = &mut self.codes[at * n..(at + 1) * n];
            values.clear();
            values.extend(
                chunk
                    .iter()
                    .zip(offset_mm)
                    .map(|(c, o)| f64::from(decode(*c, p.per_mm)) - o),
            );
            let max_abs = values
                .iter()
                .filter(|v| v.is_finite())
                .fold(0.0f64, |m, v| m.max(v.abs()));
            out.clear();
            let q = quantise(&values, None, max_abs, &mut out);
            chunk.copy_from_slice(&out);
            p.per_mm = q.per_mm;
            self.max_rounding_mm = self.max_rounding_mm.max(q.rounding_mm);
        }
    }

    /// Index of point `i`'s series in `codes` (in series), None when it was dropped.
    #[inline]
    fn series_index(&self, i: usize) -> Option<usize> {
        match self.series_at.get(i) {
            None => Some(i),
            Some(&NO_SERIES) => None,
            Some(&at) => Some(at as usize),
        }
    }

    /// Drop the series of every point for which `keep` is false (their records, ids and
    /// associations stay: they are still listed, as rejected, in the points outputs), moving the
    /// kept series together and giving the freed memory back. Used for points whose coherence
    /// is below the assessment's minimum: screening rejects them before any series is read, so
    /// holding their series would only cost memory (2 bytes an epoch a point).
    pub fn drop_series(&mut self, keep: impl Fn(PointRef) -> bool) {
        let n = self.epochs.len();
        let mut series_at = Vec::with_capacity(self.points.len());
        let mut next = 0usize;
        for i in 0..self.points.len() {
            let Some(at) = self.series_index(i) else {
                series_at.push(NO_SERIES);
                continue;
            };
            if !keep(self.point(i)) {
                series_at.push(NO_SERIES);
                continue;
            }
            if at != next {
                self.codes.copy_within(at * n..(at + 1) * n, next * n);
            }
            // At most `points.len()` < 2³² series (the store's 32-bit offsets), so this fits.
            series_at.push(next as u32);
            next += 1;
        }
        if next == self.points.len() {
            return;
        }
        self.codes.truncate(next * n);
        self.codes.shrink_to_fit();
        self.series_at = series_at;
    }

    /// Number of retained points.
    pub fn len(&self) -> usize {
        self.points.len()
    }
    /// True when no point was retained.
    pub fn is_empty(&self) -> bool {
        self.points.is_empty()
    }
}

/// A retained point together with its dataset (cheap to copy).
#[derive(Debug, Clone, Copy)]
pub struct PointRef<'a> {
    ds: &'a Dataset,
    index: usize,
}

impl<'a> PointRef<'a> {
    /// Index of the point in its dataset.
    pub fn index(&self) -> usize {
        self.index
    }
    fn rec(&self) -> &'a Point {
        &self.ds.points[self.index]
    }
    /// Point id as written in the file.
    pub fn id(&self) -> &'a str {
        let start = self.rec().id_at as usize;
        let end = self
            .ds
            .points
            .get(self.index + 1)
            .map_or(self.ds.ids.len(), |n| n.id_at as usize);
        &self.ds.ids[start..end]
    }
    /// 1-based line number in the file.
    pub fn line(&self) -> u64 {
        u64::from(self.rec().line)
    }
    /// Easting in the analysis CRS, m.
    pub fn x(&self) -> f64 {
        self.rec().x
    }
    /// Northing in the analysis CRS, m.
    pub fn y(&self) -> f64 {
        self.rec().y
    }
    /// Temporal coherence 0–1, when the file has a coherence column and the cell is filled.
    pub fn coherence(&self) -> Option<f32> {
        let c = self.rec().coherence;
        (!c.is_nan()).then_some(c)
    }
    /// Incidence angle, degrees (per point or the dataset value; NaN when neither is given).
    pub fn incidence_deg(&self) -> f64 {
        self.ds.incidence_deg.at(self.index)
    }
    /// Heading, degrees clockwise from north (per point or the dataset value).
    pub fn heading_deg(&self) -> f64 {
        self.ds.heading_deg.at(self.index)
    }
    /// Height, m, when mapped and given.
    pub fn height_m(&self) -> Option<f32> {
        self.ds
            .height_m
            .get(self.index)
            .copied()
            .filter(|h| !h.is_nan())
    }
    /// The LOS series, mm, positive towards the satellite; None when it was dropped
    /// ([`Dataset::drop_series`]).
    pub fn series(&self) -> Option<SeriesRef<'a>> {
        let n = self.ds.epochs.len();
        let at = self.ds.series_index(self.index)?;
        Some(SeriesRef::Codes {
            codes: &self.ds.codes[at * n..(at + 1) * n],
            per_mm: self.rec().per_mm,
        })
    }
}

/// Builder of a dataset's point store (one per parsed piece; pieces are appended in file order).
#[derive(Debug, Default)]
pub struct StoreBuilder {
    /// Point records.
    pub points: Vec<Point>,
    /// Id text.
    pub ids: String,
    /// Series codes.
    pub codes: Vec<i16>,
    /// Per-point incidence (only when a column is mapped).
    pub incidence_deg: Vec<f32>,
    /// Per-point heading (only when a column is mapped).
    pub heading_deg: Vec<f32>,
    /// Per-point height (only when a column is mapped).
    pub height_m: Vec<f32>,
    /// Per-point association.
    pub association: Vec<PointAssociation>,
    /// Largest rounding error so far, mm.
    pub max_rounding_mm: f64,
}

/// What one row contributes besides its values.
#[derive(Debug, Clone, Copy)]
pub struct RowMeta<'r> {
    /// Point id as written.
    pub id: &'r str,
    /// 1-based line.
    pub line: u64,
    /// Analysis-CRS position, m.
    pub xy: (f64, f64),
    /// The point's association with the structures (worked out while reading).
    pub association: PointAssociation,
    /// Coherence, when given.
    pub coherence: Option<f32>,
    /// Per-point incidence, when mapped.
    pub incidence_deg: Option<f32>,
    /// Per-point heading, when mapped.
    pub heading_deg: Option<f32>,
    /// Per-point height (NaN = empty cell), when mapped.
    pub height_m: Option<f32>,
}

/// Too many points or too long ids for the compact store (limits of its 32-bit offsets).
#[derive(Debug, Clone, PartialEq)]
pub struct StoreFull(pub &'static str);

impl StoreBuilder {
    /// Append one point.
    pub fn push(
        &mut self,
        meta: RowMeta,
        values_mm: &[f64],
        decimals: Option<u32>,
        max_abs_mm: f64,
    ) -> Result<(), StoreFull> {
        let (line, id_at) = self.check_room(&meta)?;
        let q = quantise(values_mm, decimals, max_abs_mm, &mut self.codes);
        self.push_record(meta, line, id_at, q);
        Ok(())
    }

    /// Push a point whose codes the reader formed itself from the written decimals (the values
    /// `codes / per_mm` exactly; see [`exact_codes_per_mm`]).
    pub fn push_exact(
        &mut self,
        meta: RowMeta,
        codes: impl Iterator<Item = i16>,
        per_mm: f32,
    ) -> Result<(), StoreFull> {
        let (line, id_at) = self.check_room(&meta)?;
        self.codes.extend(codes);
        let q = Quantised {
            per_mm,
            rounding_mm: 0.0,
        };
        self.push_record(meta, line, id_at, q);
        Ok(())
    }

    fn check_room(&self, meta: &RowMeta) -> Result<(u32, u32), StoreFull> {
        let line = u32::try_from(meta.line).map_err(|_| {
            StoreFull("the file has more than 4 294 967 295 lines; split it into several datasets")
        })?;
        let id_at = u32::try_from(self.ids.len())
            .map_err(|_| StoreFull("the point ids exceed 4 GB of text; split the file"))?;
        if self.ids.len() + meta.id.len() > u32::MAX as usize {
            return Err(StoreFull(
                "the point ids exceed 4 GB of text; split the file",
            ));
        }
        Ok((line, id_at))
    }

    fn push_record(&mut self, meta: RowMeta, line: u32, id_at: u32, q: Quantised) {
        self.ids.push_str(meta.id);
        self.max_rounding_mm = self.max_rounding_mm.max(q.rounding_mm);
        self.points.push(Point {
            x: meta.xy.0,
            y: meta.xy.1,
            line,
            id_at,
            coherence: meta.coherence.unwrap_or(f32::NAN),
            per_mm: q.per_mm,
        });
        self.association.push(meta.association);
        if let Some(v) = meta.incidence_deg {
            self.incidence_deg.push(v);
        }
        if let Some(v) = meta.heading_deg {
            self.heading_deg.push(v);
        }
        if let Some(v) = meta.height_m {
            self.height_m.push(v);
        }
    }

    /// Take room for `rows` more points of `n_epochs` values and `id_bytes` of id text each at
    /// once, as far as the allocator grants it (none taken is fine: the arrays then grow as
    /// usual). Capped at 2³¹ codes.
    pub fn reserve_rows(&mut self, rows: u64, n_epochs: usize, id_bytes: u64) {
        let rows = usize::try_from(rows).unwrap_or(usize::MAX);
        let codes = rows.saturating_mul(n_epochs).min(1 << 31);
        let rows = rows.min(codes / n_epochs.max(1) + 1);
        if self.codes.try_reserve_exact(codes).is_err() {
            return;
        }
        let _ = self.points.try_reserve_exact(rows);
        let _ = self.association.try_reserve_exact(rows);
        let _ = self
            .ids
            .try_reserve_exact(rows.saturating_mul(usize::try_from(id_bytes).unwrap_or(0)));
    }

    /// Append a later piece (its id offsets move by this builder's id text length).
    pub fn append(&mut self, mut o: StoreBuilder) -> Result<(), StoreFull> {
        let base = self.ids.len();
        if base + o.ids.len() > u32::MAX as usize {
            return Err(StoreFull(
                "the point ids exceed 4 GB of text; split the file",
            ));
        }
        for p in &mut o.points {
            p.id_at += base as u32;
        }
        self.points.append(&mut o.points);
        self.ids.push_str(&o.ids);
        self.codes.append(&mut o.codes);
        self.association.append(&mut o.association);
        self.incidence_deg.append(&mut o.incidence_deg);
        self.heading_deg.append(&mut o.heading_deg);
        self.height_m.append(&mut o.height_m);
        self.max_rounding_mm = self.max_rounding_mm.max(o.max_rounding_mm);
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_point_record_is_thirty_two_bytes() {
        assert_eq!(std::mem::size_of::<Point>(), 32);
    }

    #[test]
    fn decimal_values_round_trip_exactly() {
        let v = [0.0, -1.5, 2.25, f64::NAN, -12.34, 327.67];
        let mut codes = Vec::new();
        let q = quantise(&v, Some(2), 327.67, &mut codes);
        assert_eq!(q.per_mm, 100.0);
        assert_eq!(q.rounding_mm, 0.0);
        let s = SeriesRef::new(&codes, q.per_mm);
        for (i, want) in v.iter().enumerate() {
            let got = s.get(i);
            if want.is_nan() {
                assert!(got.is_nan());
            } else {
                // The same f32 as a direct parse of the text.
                assert_eq!(got, *want as f32, "epoch {i}");
            }
        }
    }

    #[test]
    fn out_of_range_or_unknown_decimals_are_scaled_within_the_stated_bound() {
        let v: Vec<f64> = (0..200).map(|i| (i as f64 * 0.731).sin() * 900.0).collect();
        let max = v.iter().fold(0.0f64, |m, x| m.max(x.abs()));
        for decimals in [None, Some(2), Some(7)] {
            let mut codes = Vec::new();
            let q = quantise(&v, decimals, max, &mut codes);
            assert!((q.rounding_mm - max / 65_534.0).abs() < 1e-12);
            let s = SeriesRef::new(&codes, q.per_mm);
            for (i, want) in v.iter().enumerate() {
                // Half a step, plus f32 representation of the decoded value.
                let tol = q.rounding_mm * (1.0 + 1e-5) + want.abs() * 1e-7;
                assert!((f64::from(s.get(i)) - want).abs() <= tol, "epoch {i}");
            }
        }
    }

    #[test]
    fn an_all_zero_series_stays_zero() {
        let mut codes = Vec::new();
        let q = quantise(&[0.0, 0.0, f64::NAN], None, 0.0, &mut codes);
        let s = SeriesRef::new(&codes, q.per_mm);
        assert_eq!(s.get(0), 0.0);
        assert!(s.get(2).is_nan());
    }

    #[test]
    fn pieces_append_with_their_ids_moved() {
        let meta = |id, line| RowMeta {
            id,
            line,
            xy: (1.0, 2.0),
            association: PointAssociation::default(),
            coherence: Some(0.9),
            incidence_deg: None,
            heading_deg: None,
            height_m: None,
        };
        let mut a = StoreBuilder::default();
        a.push(meta("P1", 2), &[0.0, 1.0], Some(0), 1.0).unwrap();
        let mut b = StoreBuilder::default();
        b.push(meta("Q22", 3), &[0.0, -2.5], Some(1), 2.5).unwrap();
        a.append(b).unwrap();
        let ds = Dataset {
            name: "d".into(),
            epochs: vec![
                NaiveDate::from_ymd_opt(2024, 1, 1).unwrap(),
                NaiveDate::from_ymd_opt(2024, 1, 13).unwrap(),
            ],
            points: a.points,
            ids: a.ids,
            codes: a.codes,
            series_at: vec![],
            association: a.association,
            incidence_deg: PerPoint::Constant(38.0),
            heading_deg: PerPoint::Constant(-12.0),
            height_m: a.height_m,
            rows_read: 2,
            rows_out_of_reach: 0,
            has_coherence: true,
            ignored_columns: vec![],
            max_rounding_mm: a.max_rounding_mm,
            reference: None,
            row_groups: None,
        };
        assert_eq!(ds.point(0).id(), "P1");
        assert_eq!(ds.point(1).id(), "Q22");
        assert_eq!(ds.point(1).line(), 3);
        assert_eq!(ds.point(1).series().unwrap().to_vec(), vec![0.0, -2.5]);
        assert_eq!(ds.point(0).coherence(), Some(0.9));
        assert_eq!(ds.point(0).incidence_deg(), 38.0);
        assert_eq!(ds.point(0).height_m(), None);
    }

    #[test]
    fn subtracting_an_offset_keeps_gaps_and_rounds_within_the_bound() {
        let mut out = Vec::new();
        let q = quantise(&[0.0, -2.5, f64::NAN, 4.25], Some(2), 4.25, &mut out);
        let mut points = vec![Point {
            x: 0.0,
            y: 0.0,
            line: 2,
            id_at: 0,
            coherence: 0.9,
            per_mm: q.per_mm,
        }];
        points[0].per_mm = q.per_mm;
        let mut ds = Dataset {
            name: "d".into(),
            epochs: (0..4)
                .map(|i| {
                    NaiveDate::from_ymd_opt(2024, 1, 1).unwrap() + chrono::Duration::days(12 * i)
                })
                .collect(),
            points,
            ids: "P".into(),
            codes: out,
            series_at: vec![],
            association: vec![Default::default()],
            incidence_deg: PerPoint::Constant(38.0),
            heading_deg: PerPoint::Constant(-12.0),
            height_m: vec![],
            rows_read: 1,
            rows_out_of_reach: 0,
            has_coherence: true,
            ignored_columns: vec![],
            max_rounding_mm: 0.0,
            reference: None,
            row_groups: None,
        };
        ds.subtract_per_epoch(&[0.0, 1.0, 1.0, 0.333]);
        let v = ds.point(0).series().unwrap().to_vec();
        let want = [0.0, -3.5, f32::NAN, 3.917];
        let bound = ds.max_rounding_mm as f32 + 1e-6;
        assert!(ds.max_rounding_mm > 0.0 && ds.max_rounding_mm <= 3.917 / 65_534.0 + 1e-12);
        for (a, b) in v.iter().zip(want) {
            assert!(
                a.is_nan() == b.is_nan() && (b.is_nan() || (a - b).abs() <= bound),
                "{v:?}"
            );
        }
    }

    /// Three points with distinct series; dropping the middle one keeps the others' values and
    /// gives `None` for it, and a second drop (of the first) still finds the last one's series.
    #[test]
    fn dropped_series_are_gone_and_the_others_unchanged() {
        let meta = |id, coherence| RowMeta {
            id,
            line: 2,
            xy: (0.0, 0.0),
            association: PointAssociation::default(),
            coherence: Some(coherence),
            incidence_deg: None,
            heading_deg: None,
            height_m: None,
        };
        let mut b = StoreBuilder::default();
        b.push(meta("A", 0.9), &[1.0, 2.0, 3.0], Some(0), 3.0)
            .unwrap();
        b.push(meta("B", 0.2), &[4.0, 5.0, 6.0], Some(0), 6.0)
            .unwrap();
        b.push(meta("C", 0.8), &[7.0, f64::NAN, 9.5], Some(1), 9.5)
            .unwrap();
        let mut ds = Dataset {
            name: "d".into(),
            epochs: (0..3)
                .map(|i| {
                    NaiveDate::from_ymd_opt(2024, 1, 1).unwrap() + chrono::Duration::days(12 * i)
                })
                .collect(),
            points: b.points,
            ids: b.ids,
            codes: b.codes,
            series_at: vec![],
            association: b.association,
            incidence_deg: PerPoint::Constant(38.0),
            heading_deg: PerPoint::Constant(-12.0),
            height_m: vec![],
            rows_read: 3,
            rows_out_of_reach: 0,
            has_coherence: true,
            ignored_columns: vec![],
            max_rounding_mm: 0.0,
            reference: None,
            row_groups: None,
        };
        ds.drop_series(|p| p.coherence().is_some_and(|c| c >= 0.5));
        assert_eq!(ds.codes.len(), 6, "two series of three epochs remain");
        assert_eq!(ds.point(0).series().unwrap().to_vec(), vec![1.0, 2.0, 3.0]);
        assert!(ds.point(1).series().is_none());
        assert_eq!(ds.point(1).id(), "B", "the record stays");
        let c = ds.point(2).series().unwrap().to_vec();
        assert_eq!((c[0], c[2]), (7.0, 9.5));
        assert!(c[1].is_nan());
        ds.drop_series(|p| p.id() != "A");
        assert!(ds.point(0).series().is_none() && ds.point(1).series().is_none());
        assert_eq!(ds.point(2).series().unwrap().get(2), 9.5);
        assert_eq!(ds.codes.len(), 3);
        ds.subtract_per_epoch(&[1.0, 1.0, 1.0]);
        assert!((ds.point(2).series().unwrap().get(2) - 8.5).abs() < 1e-3);
    }
}
