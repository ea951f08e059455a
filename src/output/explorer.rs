//! `explorer.html`: one self-contained page to browse the whole portfolio offline — a plan map of
//! the footprints coloured by damage category, a sortable and filterable table linked with the
//! map, a detail panel per structure (key numbers with uncertainty, verdict, observability notes,
//! vertical time series with its trend, predicted against observed near works, the PDF report
//! link), the cautions, the assessment window and the provenance.
//!
//! Owns the page's data document (built here from the results, the footprints, the works and the
//! detail files' series and works — kept by the run while it assessed, or read back by `merge`)
//! and its assembly from the static page parts in `templates/explorer/` (embedded
//! at build time, no network, no library). Data reaches the page only as JSON inside a
//! `<script type="application/json">` element, with `<`, `>` and `&` escaped as `\u003c`,
//! `\u003e` and `\u0026`, so no name from a user file can close the element; the script renders
//! every text with `textContent`. It computes nothing new: every number is the results' or the
//! detail file's, except the map's coordinates (shifted to a local origin, rounded to 1 cm) and
//! the series (values to 0.1 mm, the trend's ends to 0.01 mm).

use std::path::Path;

use anyhow::{Context, Result};
use geo::{Buffer, MultiPolygon};
use rayon::prelude::*;
use serde::Deserialize;
use serde_json::{Value, json};

use crate::results::{Results, StructureResult};
use crate::works::WorksGeometry;

/// File name of the explorer inside the output folder.
pub const FILE: &str = "explorer.html";

/// Format marker of the page's data document (`format` in the embedded JSON).
pub const DATA_FORMAT: &str = "plinth-explorer-data/1";

/// Half-width of a tunnel's drawn influence zone in trough widths i (dimensionless): 2.5 i, where
/// Peck's (1969) Gaussian settlement trough s = S_max·exp(−x²/(2i²)) has fallen to
/// exp(−2.5²/2) ≈ 4.4 % of S_max (docs/methods.md §5.8, §11.2). A drawing choice, not a limit of
/// the screening, which uses the whole trough.
pub const TUNNEL_ZONE_IN_I: f64 = 2.5;

const PAGE_HEAD: &str = include_str!("../../templates/explorer/head.html");
const PAGE_CSS: &str = include_str!("../../templates/explorer/explorer.css");
const PAGE_BODY: &str = include_str!("../../templates/explorer/body.html");
const PAGE_JS: &str = include_str!("../../templates/explorer/explorer.js");

/// Everything the page is built from.
pub struct ExplorerInput<'a> {
    /// The results document.
    pub results: &'a Results,
    /// Each structure's footprint in the analysis CRS (m), in the order of `results.structures`.
    pub footprints: Vec<&'a MultiPolygon<f64>>,
    /// The works in the analysis CRS, when the portfolio has `[works]`.
    pub works: Option<&'a WorksGeometry>,
    /// The manifest's `inputs` list (role, name, path, sha256).
    pub inputs: Value,
    /// The cautions, one paragraph each.
    pub cautions: Vec<String>,
    /// True when `reports/<stem>.pdf` files are written by this run.
    pub reports: bool,
    /// What the page shows of each detail file, kept by the run while it assessed (by the
    /// record's `detail_file`); a structure missing here is read from its file (as `merge` does).
    pub held: Option<&'a HeldParts>,
}

/// The page's local origin: the lower-left corner of all footprints, whole metres.
fn origin(footprints: &[&MultiPolygon<f64>]) -> [f64; 2] {
    let mut o = [f64::INFINITY, f64::INFINITY];
    for c in footprints
        .iter()
        .flat_map(|m| m.0.iter())
        .flat_map(|p| p.exterior().coords())
    {
        o = [o[0].min(c.x), o[1].min(c.y)];
    }
    if o.iter().all(|v| v.is_finite()) {
        [o[0].floor(), o[1].floor()]
    } else {
        [0.0, 0.0]
    }
}

fn cm(v: f64) -> f64 {
    (v * 100.0).round() / 100.0
}

/// A ring as a flat `[x0, y0, x1, y1, …]` list in local metres.
fn flat_ring<'c>(coords: impl Iterator<Item = &'c geo::Coord<f64>>, o: [f64; 2]) -> Vec<f64> {
    coords
        .flat_map(|c| [cm(c.x - o[0]), cm(c.y - o[1])])
        .collect()
}

/// Every ring (exteriors and holes) of a footprint; the page fills them with the even-odd rule.
fn footprint_rings(m: &MultiPolygon<f64>, o: [f64; 2]) -> Vec<Vec<f64>> {
    m.0.iter()
        .flat_map(|p| std::iter::once(p.exterior()).chain(p.interiors()))
        .map(|r| flat_ring(r.coords(), o))
        .collect()
}

/// The works layer: each tunnel's centreline with its zone ±2.5 i and inflection lines ±i per
/// segment, each excavation's outline with its influence zone (the outline buffered by
/// `influence_m`, the reach of the Clough & O'Rourke (1990) envelopes, docs/methods.md §11.3).
/// Coordinates in local metres of the analysis CRS (x east, y north of the page origin).
fn works_layer(w: &WorksGeometry, o: [f64; 2]) -> Value {
    let local = |p: [f64; 2]| [cm(p[0] - o[0]), cm(p[1] - o[1])];
    let tunnels: Vec<Value> = w
        .tunnels
        .iter()
        .map(|t| {
            let mut centreline: Vec<[f64; 2]> = t.segments.iter().map(|s| local(s.start)).collect();
            if let Some(last) = t.segments.last() {
                centreline.push(local(last.end));
            }
            let segments: Vec<Value> = t
                .segments
                .iter()
                .filter_map(|s| {
                    let (dx, dy) = (s.end[0] - s.start[0], s.end[1] - s.start[1]);
                    let len = dx.hypot(dy);
                    (len.is_finite() && len > 0.0).then(|| {
                        let n = [-dy / len, dx / len];
                        let i = s.trough.i_m;
                        let off = |p: [f64; 2], k: f64| local([p[0] + k * i * n[0], p[1] + k * i * n[1]]);
                        let z = TUNNEL_ZONE_IN_I;
                        json!({
                            "i_m": i,
                            "s_max_mm": s.trough.s_max_m * 1000.0,
                            "zone": [off(s.start, z), off(s.end, z), off(s.end, -z), off(s.start, -z)],
                            "inflection": [[off(s.start, 1.0), off(s.end, 1.0)], [off(s.start, -1.0), off(s.end, -1.0)]],
                        })
                    })
                })
                .collect();
            json!({
                "name": t.name,
                "volume_loss_percent": t.volume_loss_percent,
                "trough_width_k": t.trough_width_k,
                "centreline": centreline,
                "segments": segments,
            })
        })
        .collect();
    let excavations: Vec<Value> = w
        .excavations
        .iter()
        .map(|e| {
            let outline: Vec<[f64; 2]> = e.outline.iter().map(|p| local(*p)).collect();
            let reach = e.influence_m();
            let poly = geo::Polygon::new(
                geo::LineString::from(e.outline.iter().map(|p| (p[0], p[1])).collect::<Vec<_>>()),
                vec![],
            );
            let zone: Vec<Vec<f64>> = if reach.is_finite() && reach > 0.0 {
                poly.buffer(reach)
                    .0
                    .iter()
                    .map(|p| flat_ring(p.exterior().coords(), o))
                    .collect()
            } else {
                vec![]
            };
            json!({"name": e.name, "depth_m": e.depth_m, "influence_m": reach, "outline": outline, "zone": zone})
        })
        .collect();
    json!({"tunnels": tunnels, "excavations": excavations})
}

/// The parts of a detail file the page shows (the rest is ignored while reading).
#[derive(Debug, Default, Deserialize)]
struct DetailPart {
    #[serde(default)]
    series: Option<SeriesPart>,
    #[serde(default)]
    works: Option<WorksPart>,
}

#[derive(Debug, Deserialize)]
struct SeriesPart {
    time_origin: chrono::NaiveDate,
    #[serde(default)]
    vertical: Option<VerticalPart>,
}

#[derive(Debug, Deserialize)]
struct VerticalPart {
    label: String,
    dates: Vec<chrono::NaiveDate>,
    vertical_mm: Vec<Option<f64>>,
    #[serde(default)]
    fits: Option<FitsPart>,
}

#[derive(Debug, Deserialize)]
struct FitsPart {
    #[serde(default)]
    linear: Option<LinearPart>,
}

#[derive(Debug, Deserialize)]
struct LinearPart {
    intercept_mm: f64,
    velocity_mm_per_yr: f64,
}

#[derive(Debug, Deserialize)]
struct WorksPart {
    #[serde(default)]
    nearby: Vec<NearbyPart>,
    #[serde(default)]
    comparison: Option<Value>,
}

/// One of the works near a structure (`works.nearby` of the detail file).
#[derive(Debug, Deserialize)]
struct NearbyPart {
    name: String,
    kind: String,
    distance_m: f64,
    settlement_at_centroid_mm: f64,
}

impl NearbyPart {
    /// As shown: distance to 0.1 m, settlement to 0.01 mm.
    fn json(&self) -> Value {
        json!({
            "name": self.name,
            "kind": self.kind,
            "distance_m": tenth(self.distance_m),
            "settlement_at_centroid_mm": cm(self.settlement_at_centroid_mm),
        })
    }
}

/// A structure's vertical series as the page shows it: the values in whole tenths of a mm (a
/// chart's resolution; [`MISSING`] for an epoch without a value) and the linear trend's
/// intercept and velocity. Both sources — a detail file read back, or the assessment's own
/// numbers while the run goes on — become this one form, so the page is the same either way.
#[derive(Debug, Clone, PartialEq)]
struct PageSeries {
    label: String,
    time_origin: chrono::NaiveDate,
    dates: Vec<chrono::NaiveDate>,
    tenths: Vec<i32>,
    linear: Option<(f64, f64)>,
}

/// [`PageSeries::tenths`] of an epoch without a (finite) value.
const MISSING: i32 = i32::MIN;

/// A value in whole tenths of a mm, [`MISSING`] when not finite. Vertical values are bounded by
/// the readers' plausibility limit on every input value (far below the ±214 km an `i32` of
/// tenths holds); anything beyond saturates.
fn tenths_of(x: Option<f64>) -> i32 {
    match x.filter(|v| v.is_finite()) {
        Some(v) => ((v * 10.0).round() as i64).clamp(i32::MIN as i64 + 1, i32::MAX as i64) as i32,
        None => MISSING,
    }
}

impl PageSeries {
    fn new(
        label: &str,
        time_origin: chrono::NaiveDate,
        dates: &[chrono::NaiveDate],
        values_mm: &[Option<f64>],
        linear: Option<(f64, f64)>,
    ) -> Self {
        Self {
            label: label.to_string(),
            time_origin,
            dates: dates.to_vec(),
            tenths: values_mm.iter().map(|x| tenths_of(*x)).collect(),
            linear,
        }
    }

    fn of_part(s: &SeriesPart) -> Option<Self> {
        let v = s.vertical.as_ref()?;
        let linear = (v.fits.as_ref())
            .and_then(|f| f.linear.as_ref())
            .map(|l| (l.intercept_mm, l.velocity_mm_per_yr));
        Some(Self::new(
            &v.label,
            s.time_origin,
            &v.dates,
            &v.vertical_mm,
            linear,
        ))
    }

    fn of_series(s: &crate::series::StructureSeries) -> Option<Self> {
        let v = s.vertical.as_ref()?;
        let linear =
            (v.fits.as_ref()).map(|f| (f.linear.intercept_mm, f.linear.velocity_mm_per_yr));
        Some(Self::new(
            &v.label,
            s.time_origin,
            &v.dates,
            &v.vertical_mm,
            linear,
        ))
    }
}

/// What the page shows of one detail file.
#[derive(Debug, Default)]
pub struct PagePart {
    series: Option<PageSeries>,
    works: Option<WorksPart>,
}

impl PagePart {
    fn of_file(d: DetailPart) -> Self {
        Self {
            series: d.series.as_ref().and_then(PageSeries::of_part),
            works: d.works,
        }
    }

    /// The part of an assessed structure's detail (the same numbers the detail file holds).
    pub fn of_detail(d: &crate::assess::StructureDetail) -> Result<Self> {
        let works = match &d.works {
            // Rare (a portfolio with `[works]`): through the detail file's own JSON form.
            Some(w) => Some(
                serde_json::from_value(json!({"nearby": w.nearby, "comparison": w.comparison}))
                    .with_context(|| {
                        format!("the works near structure {} for explorer.html", d.id)
                    })?,
            ),
            None => None,
        };
        Ok(Self {
            series: d.series.as_ref().and_then(PageSeries::of_series),
            works,
        })
    }
}

/// The [`PagePart`]s a run kept while it assessed, by detail file (`details/<stem>.json`).
pub type HeldParts = std::collections::HashMap<String, PagePart>;

/// Read the parts of a structure's detail file the page needs; a missing file gives nothing
/// (the structure then has no series in the page, and says so), a malformed one is an error.
fn read_detail(dir: &Path, rel: Option<&str>) -> Result<DetailPart> {
    let Some(rel) = rel else {
        return Ok(DetailPart::default());
    };
    let path = dir.join(rel);
    let bytes = match std::fs::read(&path) {
        Ok(b) => b,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(DetailPart::default()),
        Err(e) => return Err(e).with_context(|| format!("cannot read {}", path.display())),
    };
    serde_json::from_slice(&bytes).map_err(|e| {
        anyhow::anyhow!(
            "{}: line {}: not a Plinth detail file ({e}); re-run `plinth assess` to rewrite it",
            path.display(),
            e.line()
        )
    })
}

/// Decimal years of 365.25 days from `origin`, the time axis of the series fits
/// (docs/methods.md §3.7).
fn years(d: chrono::NaiveDate, origin: chrono::NaiveDate) -> f64 {
    (d - origin).num_days() as f64 / 365.25
}

/// The vertical series as `{label, dates: index into the page's date sets, mm_tenths (integers
/// of 0.1 mm, a chart's resolution), trend}`; the trend is the linear fit's line at the first and
/// last epoch (mm, + up).
fn series_json(s: &PageSeries, dates: &mut DateTable) -> Value {
    let set = dates.set(&s.dates);
    let mm: Vec<Option<i32>> = (s.tenths.iter())
        .map(|t| (*t != MISSING).then_some(*t))
        .collect();
    let trend = s.linear.and_then(|(intercept_mm, velocity_mm_per_yr)| {
        let (first, last) = (s.dates.first()?, s.dates.last()?);
        let at =
            |d: chrono::NaiveDate| cm(intercept_mm + velocity_mm_per_yr * years(d, s.time_origin));
        Some(json!({
            "velocity_mm_per_yr": velocity_mm_per_yr,
            "from": [dates.index(*first), at(*first)],
            "to": [dates.index(*last), at(*last)],
        }))
    });
    json!({"label": s.label, "dates": set, "mm_tenths": mm, "trend": trend})
}

/// The page's table of dates (ISO) and of date sets (lists of date indices): each series refers
/// to its epochs by the index of its date set, as most structures share their epochs.
#[derive(Default)]
struct DateTable {
    dates: Vec<chrono::NaiveDate>,
    index: std::collections::HashMap<chrono::NaiveDate, usize>,
    sets: Vec<Vec<usize>>,
    set_index: std::collections::HashMap<Vec<usize>, usize>,
}

impl DateTable {
    fn index(&mut self, d: chrono::NaiveDate) -> usize {
        *self.index.entry(d).or_insert_with(|| {
            self.dates.push(d);
            self.dates.len() - 1
        })
    }

    fn set(&mut self, ds: &[chrono::NaiveDate]) -> usize {
        let idx: Vec<usize> = ds.iter().map(|d| self.index(*d)).collect();
        let n = self.sets.len();
        let k = *self.set_index.entry(idx.clone()).or_insert(n);
        if k == n {
            self.sets.push(idx);
        }
        k
    }
}

fn tenth(v: f64) -> f64 {
    (v * 10.0).round() / 10.0
}

/// Text fields repeated across structures, sent once in the page's `strings` table: in a row
/// each string of these fields is its index in that table (a list of strings, a list of indices).
pub const INTERNED_FIELDS: [&str; 5] = [
    "status_reasons",
    "evidence_grade_reasons",
    "damage_route",
    "look_directions",
    "datasets",
];

/// The page's table of repeated strings (see [`INTERNED_FIELDS`]).
#[derive(Default)]
struct Strings {
    list: Vec<String>,
    index: std::collections::HashMap<String, usize>,
}

impl Strings {
    fn index(&mut self, s: &str) -> usize {
        if let Some(&k) = self.index.get(s) {
            return k;
        }
        self.list.push(s.to_string());
        self.index.insert(s.to_string(), self.list.len() - 1);
        self.list.len() - 1
    }

    /// A string becomes its index, a list of strings a list of indices; anything else stays.
    fn intern(&mut self, v: &mut Value) {
        match v {
            Value::String(s) => *v = json!(self.index(s)),
            Value::Array(items) => items.iter_mut().for_each(|x| self.intern(x)),
            _ => {}
        }
    }
}

/// The entries' field names in first-seen order: the page receives the structures as columns,
/// `{fields: [name…], rows: [[value…]…]}` (the field names once instead of once per structure;
/// the page rebuilds the objects). Found from entries without details, which have every key an
/// entry has.
fn entry_fields(input: &ExplorerInput, o: [f64; 2]) -> Result<Vec<String>> {
    let mut fields: Vec<String> = Vec::new();
    let mut seen = std::collections::HashSet::new();
    let mut dates = DateTable::default();
    for (r, fp) in input.results.structures.iter().zip(&input.footprints) {
        let v = structure_json(r, fp, o, &PagePart::default(), &mut dates, input.reports)?;
        for k in v.as_object().into_iter().flat_map(|m| m.keys()) {
            if seen.insert(k.clone()) {
                fields.push(k.clone());
            }
        }
    }
    Ok(fields)
}

/// One entry as its row of values in `fields` order, the [`INTERNED_FIELDS`] interned.
fn row(mut entry: Value, fields: &[String], strings: &mut Strings) -> Value {
    Value::Array(
        fields
            .iter()
            .map(|f| {
                let mut v = entry.get_mut(f).map(Value::take).unwrap_or(Value::Null);
                if INTERNED_FIELDS.contains(&f.as_str()) {
                    strings.intern(&mut v);
                }
                v
            })
            .collect(),
    )
}

/// One structure's entry: its compact record as written to results.json, plus its footprint,
/// series, the works near it with the predicted-against-observed comparison (only where the
/// prediction reaches `MIN_PREDICTED_SETTLEMENT_MM`) and the report link.
fn structure_json(
    r: &StructureResult,
    fp: &MultiPolygon<f64>,
    o: [f64; 2],
    detail: &PagePart,
    dates: &mut DateTable,
    reports: bool,
) -> Result<Value> {
    let mut v = serde_json::to_value(r)?;
    if let Some(m) = v.as_object_mut() {
        for unused in ["assumptions", "detail_file", "report_file", "fallbacks"] {
            m.remove(unused);
        }
        m.insert("footprint".into(), json!(footprint_rings(fp, o)));
        let series = detail.series.as_ref().map(|s| series_json(s, dates));
        m.insert("series".into(), series.unwrap_or(Value::Null));
        // The comparison only where the works predict a settlement worth comparing (below it,
        // every ratio is "not meaningful"; most of a city is far from the works).
        let compared = r
            .predicted_settlement_mm
            .is_some_and(|p| p >= crate::works::compare::MIN_PREDICTED_SETTLEMENT_MM);
        let works = detail.works.as_ref().map(|w| {
            let nearby: Vec<Value> = w.nearby.iter().map(NearbyPart::json).collect();
            let comparison = w.comparison.as_ref().filter(|_| compared);
            json!({"nearby": nearby, "comparison": comparison})
        });
        m.insert("works".into(), works.unwrap_or(Value::Null));
        let pdf = r
            .report_file
            .as_ref()
            .filter(|_| reports)
            .map(|stem| format!("{}/{stem}.pdf", super::guard::REPORTS_DIR));
        m.insert("report_pdf".into(), json!(pdf));
    }
    Ok(v)
}

/// The page's data document as script-safe JSON text ([`script_safe`]). A structure's series and
/// works come from `input.held` or, when the run did not keep them (`merge`), from its detail
/// file, read and parsed in parallel a block at a time; each structure's row is serialised as
/// soon as it is built, so only one block's entries are held at once (a document of
/// `serde_json::Value`s would hold about 30 KB per structure).
pub fn data_text(input: &ExplorerInput, dir: &Path) -> Result<String> {
    const BLOCK: usize = 256;
    let o = origin(&input.footprints);
    let fields = entry_fields(input, o)?;
    let mut dates = DateTable::default();
    let mut strings = Strings::default();
    let mut rows = String::new();
    for (records, footprints) in
        (input.results.structures.chunks(BLOCK)).zip(input.footprints.chunks(BLOCK))
    {
        let held = |r: &StructureResult| {
            let rel = r.detail_file.as_deref()?;
            input.held?.get(rel)
        };
        // Only what the run did not keep is read back (everything, for `merge`).
        let read: Vec<Result<Option<PagePart>>> = (records.par_iter())
            .map(|r| match held(r) {
                Some(_) => Ok(None),
                None => {
                    read_detail(dir, r.detail_file.as_deref()).map(|d| Some(PagePart::of_file(d)))
                }
            })
            .collect();
        for ((r, fp), read) in records.iter().zip(footprints).zip(read) {
            let read = read?;
            let detail = match (&read, held(r)) {
                (Some(d), _) => d,
                (None, Some(d)) => d,
                (None, None) => &PagePart::default(),
            };
            let entry = structure_json(r, fp, o, detail, &mut dates, input.reports)?;
            if !rows.is_empty() {
                rows.push(',');
            }
            rows.push_str(&script_safe(&serde_json::to_string(&row(
                entry,
                &fields,
                &mut strings,
            ))?));
        }
    }
    let p = &input.results.portfolio;
    let head = json!({
        "format": DATA_FORMAT,
        "portfolio": {
            "name": p.name,
            "analysis_crs": p.analysis_crs,
            "window_start": p.window_start,
            "window_end": p.window_end,
            "analysis_date": p.analysis_date,
            "previous": p.previous,
            "gone_since_previous": p.gone_since_previous,
            "by_category": p.by_category,
            "shard": p.shard,
        },
        "provenance": {"tool": "plinth", "tool_version": p.tool_version, "inputs": input.inputs},
        "cautions": input.cautions,
        "origin": o,
        "dates": dates.dates.iter().map(|d| d.to_string()).collect::<Vec<_>>(),
        "date_sets": dates.sets,
        "works": input.works.map(|w| works_layer(w, o)),
    });
    // `{…head…,"structures":{"fields":[…],"rows":[…]},"strings":[…]}`
    let mut text = script_safe(&serde_json::to_string(&head)?);
    text.pop();
    for part in [
        ",\"structures\":{\"fields\":",
        &script_safe(&serde_json::to_string(&fields)?),
        ",\"rows\":[",
        &rows,
        "]},\"strings\":",
        &script_safe(&serde_json::to_string(&strings.list)?),
        "}",
    ] {
        text.push_str(part);
    }
    Ok(text)
}

/// JSON made safe inside a `<script>` element: `<`, `>` and `&` (which JSON allows only inside
/// strings) become `\u003c`, `\u003e` and `\u0026`, and U+2028/U+2029 are escaped too.
pub fn script_safe(json: &str) -> String {
    let mut out = String::with_capacity(json.len() + json.len() / 64);
    for ch in json.chars() {
        match ch {
            '<' => out.push_str("\\u003c"),
            '>' => out.push_str("\\u003e"),
            '&' => out.push_str("\\u0026"),
            '\u{2028}' => out.push_str("\\u2028"),
            '\u{2029}' => out.push_str("\\u2029"),
            c => out.push(c),
        }
    }
    out
}

/// Standard base64 (RFC 4648 §4, with padding) of `bytes`, the encoding a CSP hash source uses.
fn base64(bytes: &[u8]) -> String {
    use base64::Engine;
    base64::engine::general_purpose::STANDARD.encode(bytes)
}

/// The page's content security policy: nothing may be fetched (no network, no other file), and
/// the only script that may run is the page's own (allowed by its SHA-256), so even markup that
/// slipped into the page could not run an inline handler.
fn content_security_policy(script: &str) -> String {
    use sha2::{Digest, Sha256};
    let hash = base64(&Sha256::digest(script.as_bytes()));
    format!(
        "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; \
         script-src 'sha256-{hash}'; style-src 'unsafe-inline'; img-src data:; connect-src 'none'\">\n"
    )
}

/// The whole page around an already script-safe data document.
pub fn page(data_json: &str) -> String {
    let script = format!("\n{PAGE_JS}");
    let mut html = String::with_capacity(data_json.len() + 64 * 1024);
    html.push_str(PAGE_HEAD);
    html.push_str(&content_security_policy(&script));
    html.push_str("<style>\n");
    html.push_str(PAGE_CSS);
    html.push_str("</style>\n</head>\n");
    html.push_str(PAGE_BODY);
    html.push_str("<script type=\"application/json\" id=\"plinth-data\">");
    html.push_str(data_json);
    html.push_str("</script>\n<script>");
    html.push_str(&script);
    html.push_str("</script>\n</body>\n</html>\n");
    html
}

/// Write `explorer.html` into the output folder `dir` (whose detail files are already written).
pub fn write(dir: &Path, input: &ExplorerInput) -> Result<()> {
    let html = page(&data_text(input, dir)?);
    super::write_file(dir, FILE, html.as_bytes())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn script_safe_json_cannot_close_the_script_element() {
        let name = "</script><img src=x onerror=alert(1)> & \u{2028}";
        let s = script_safe(&serde_json::to_string(&json!({"name": name})).unwrap());
        assert!(
            !s.contains('<') && !s.contains('>') && !s.contains('&'),
            "{s}"
        );
        let back: Value = serde_json::from_str(&s).unwrap();
        assert_eq!(back["name"], name);
    }

    #[test]
    fn base64_matches_rfc_4648_test_vectors() {
        // RFC 4648 §10.
        for (plain, coded) in [
            ("", ""),
            ("f", "Zg=="),
            ("fo", "Zm8="),
            ("foo", "Zm9v"),
            ("foob", "Zm9vYg=="),
            ("fooba", "Zm9vYmE="),
            ("foobar", "Zm9vYmFy"),
        ] {
            assert_eq!(base64(plain.as_bytes()), coded, "{plain}");
        }
    }

    #[test]
    fn date_table_gives_each_date_one_index() {
        let mut t = DateTable::default();
        let d = |m| chrono::NaiveDate::from_ymd_opt(2024, m, 1).unwrap();
        assert_eq!([t.index(d(3)), t.index(d(1)), t.index(d(3))], [0, 1, 0]);
        assert_eq!(t.dates, vec![d(3), d(1)]);
        assert_eq!(
            [t.set(&[d(1), d(2)]), t.set(&[d(3)]), t.set(&[d(1), d(2)])],
            [0, 1, 0]
        );
        assert_eq!(t.sets, vec![vec![1, 2], vec![0]]);
    }

    #[test]
    fn rows_follow_the_fields_and_miss_nothing() {
        let mut st = Strings::default();
        let fields: Vec<String> = ["a", "b", "c"].map(String::from).to_vec();
        let rows =
            [json!({"a": 1, "b": 2}), json!({"b": 3, "c": 4})].map(|e| row(e, &fields, &mut st));
        assert_eq!(rows, [json!([1, 2, null]), json!([null, 3, 4])]);
        assert!(st.list.is_empty());
    }

    #[test]
    fn interned_fields_refer_to_one_table() {
        let mut st = Strings::default();
        let fields: Vec<String> = ["id", "look_directions", "damage_route"]
            .map(String::from)
            .to_vec();
        let rows = [
            json!({"id": "a", "look_directions": ["east-looking", "west-looking"], "damage_route": "x"}),
            json!({"id": "b", "look_directions": ["west-looking"], "damage_route": null}),
        ]
        .map(|e| row(e, &fields, &mut st));
        assert_eq!(st.list, ["east-looking", "west-looking", "x"]);
        assert_eq!(rows, [json!(["a", [0, 1], 2]), json!(["b", [1], null])]);
    }

    #[test]
    fn trend_is_the_linear_fit_at_the_first_and_last_epoch() {
        let d = |y, m, dd| chrono::NaiveDate::from_ymd_opt(y, m, dd).unwrap();
        let s = SeriesPart {
            time_origin: d(2023, 1, 1),
            vertical: Some(VerticalPart {
                label: "vertical".into(),
                dates: vec![d(2023, 1, 1), d(2024, 1, 1)],
                vertical_mm: vec![Some(0.0), None],
                fits: Some(FitsPart {
                    linear: Some(LinearPart {
                        intercept_mm: 1.0,
                        velocity_mm_per_yr: -3.0,
                    }),
                }),
            }),
        };
        let mut t = DateTable::default();
        let j = series_json(&PageSeries::of_part(&s).unwrap(), &mut t);
        assert_eq!(j["mm_tenths"], json!([0, null]), "a gap stays a gap");
        assert_eq!(j["dates"], 0);
        assert_eq!(t.sets, vec![vec![0, 1]]);
        assert_eq!(j["trend"]["from"], json!([0, 1.0]));
        // 365 days = 0.99932 yr: 1 − 3 × 0.99932 = −1.998 mm.
        assert_eq!(j["trend"]["to"], json!([1, -2.0]));
    }

    /// Tenths of a mm: rounded half away from zero, gaps and non-finite values missing, and
    /// (unreachable behind the readers' plausibility limit) saturated rather than wrapped.
    #[test]
    fn tenths_round_and_keep_gaps() {
        assert_eq!(tenths_of(Some(-1.25)), -13);
        assert_eq!(tenths_of(Some(1.24)), 12);
        assert_eq!(tenths_of(Some(f64::NAN)), MISSING);
        assert_eq!(tenths_of(None), MISSING);
        assert_eq!(tenths_of(Some(1e12)), i32::MAX);
        assert_eq!(tenths_of(Some(-1e12)), i32::MIN + 1);
    }
}
