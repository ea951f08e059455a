//! The report model: the data a template receives as `/data.json`, and the plain data structs
//! the chart functions draw from.
//!
//! Owns: `AssetReport` (one structure) and `PortfolioReport` (the overview), their field order
//! (serde serialises struct fields in declaration order, so the JSON is deterministic), the
//! display table of damage categories, and the chart input structs (`*Chart`). Numbers are
//! pre-formatted as strings with units (see [`super::format`]); raw numbers are included only
//! where a template needs them for colouring or thresholds.
//!
//! Does not own: computing any of the values (the adapter from the pipeline's results fills
//! these structs), drawing (see [`super::charts`]), or rendering.
//!
//! Rule: a section whose data was not computed carries the text `not computed: <reason>` (see
//! [`not_computed`]); nothing is replaced by zero. An `insufficient_data` structure is shown as
//! "insufficient data — not assessable", never as category 0.

use chrono::{Datelike, NaiveDate};
use serde::Serialize;

use super::ReportError;
use super::world::ChartFile;

/// Prefix of every "not computed" text, so templates and tests can recognise it.
pub const NOT_COMPUTED: &str = "not computed";

/// The status text of a structure that cannot be assessed.
pub const INSUFFICIENT_LABEL: &str = "insufficient data — not assessable";

/// `"not computed: <reason>"`.
///
/// # Examples
/// ```
/// use plinth::report::model::not_computed;
/// assert_eq!(not_computed("fewer than 5 points"), "not computed: fewer than 5 points");
/// ```
pub fn not_computed(reason: &str) -> String {
    format!("{NOT_COMPUTED}: {reason}")
}

// ---------------------------------------------------------------------------------------------
// Shared pieces
// ---------------------------------------------------------------------------------------------

/// A calendar date taken from the data (never from the clock).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct ReportDate {
    /// Year, e.g. 2024.
    pub year: i32,
    /// Month 1–12.
    pub month: u32,
    /// Day 1–31.
    pub day: u32,
}

impl ReportDate {
    /// Builds a date, refusing impossible ones.
    pub fn new(year: i32, month: u32, day: u32) -> Result<Self, ReportError> {
        NaiveDate::from_ymd_opt(year, month, day)
            .map(Self::from)
            .ok_or_else(|| ReportError::Model {
                ident: String::new(),
                reason: format!("invalid report date {year:04}-{month:02}-{day:02}"),
            })
    }

    /// ISO 8601 text, `YYYY-MM-DD`.
    pub fn iso(&self) -> String {
        format!("{:04}-{:02}-{:02}", self.year, self.month, self.day)
    }
}

impl From<NaiveDate> for ReportDate {
    fn from(d: NaiveDate) -> Self {
        Self {
            year: d.year(),
            month: d.month(),
            day: d.day(),
        }
    }
}

/// Title-block data common to both report kinds.
#[derive(Debug, Clone, Serialize)]
pub struct ReportMeta {
    /// Portfolio name (user text, shown literally).
    pub portfolio_name: String,
    /// Report date as ISO text (from the data).
    pub report_date: String,
    /// Report date as numbers (for `datetime(...)` in the template).
    pub report_date_parts: ReportDate,
    /// Revision label, e.g. "A" or "2".
    pub revision: String,
    /// Who prepared the assessment ("not stated" when unknown).
    pub prepared_by: String,
    /// Who checked it ("not stated" when unknown).
    pub checked_by: String,
    /// Tool name and version, e.g. "Plinth 0.1.0".
    pub tool: String,
}

impl ReportMeta {
    /// Builds the title-block data; empty names become "not stated".
    pub fn new(
        portfolio_name: &str,
        report_date: ReportDate,
        revision: &str,
        prepared_by: &str,
        checked_by: &str,
    ) -> Self {
        let or_not_stated = |s: &str| {
            let s = super::format::one_line(s);
            if s.is_empty() {
                "not stated".to_string()
            } else {
                s
            }
        };
        Self {
            portfolio_name: super::format::one_line(portfolio_name),
            report_date: report_date.iso(),
            report_date_parts: report_date,
            revision: or_not_stated(revision),
            prepared_by: or_not_stated(prepared_by),
            checked_by: or_not_stated(checked_by),
            tool: tool_label(),
        }
    }
}

/// `"Plinth <crate version>"`; also the PDF creator string.
pub fn tool_label() -> String {
    format!("Plinth {}", env!("CARGO_PKG_VERSION"))
}

/// The assessment window (start and end epoch of the analysed period).
#[derive(Debug, Clone, Serialize)]
pub struct WindowView {
    /// First date, ISO.
    pub start: String,
    /// Last date, ISO.
    pub end: String,
    /// Length, e.g. "3.0 yr".
    pub span: String,
}

impl WindowView {
    /// Window from two dates; the span uses 365.25-day years.
    pub fn new(start: NaiveDate, end: NaiveDate) -> Self {
        let days = (end - start).num_days() as f64;
        Self {
            start: start.format("%Y-%m-%d").to_string(),
            end: end.format("%Y-%m-%d").to_string(),
            span: super::format::with_unit(days / 365.25, 1, "yr"),
        }
    }
}

/// A name/value pair for parameter lists.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Param {
    /// Parameter name.
    pub name: String,
    /// Formatted value with unit.
    pub value: String,
}

impl Param {
    /// Convenience constructor.
    pub fn new(name: impl Into<String>, value: impl Into<String>) -> Self {
        Self {
            name: name.into(),
            value: value.into(),
        }
    }
}

/// One figure in the document: which fixed virtual file it is, whether it exists, and the
/// caption or the reason it is missing.
#[derive(Debug, Clone, Serialize)]
pub struct FigureSlot {
    /// True when the SVG is supplied.
    pub available: bool,
    /// Virtual path, e.g. `/chart-map.svg`.
    pub file: String,
    /// Caption (when available) or `not computed: <reason>`.
    pub caption: String,
}

impl FigureSlot {
    /// A slot that will be filled with `file`.
    pub fn present(file: ChartFile, caption: &str) -> Self {
        Self {
            available: true,
            file: file.virtual_path().to_string(),
            caption: caption.to_string(),
        }
    }

    /// A slot with no chart, and why.
    pub fn missing(file: ChartFile, reason: &str) -> Self {
        Self {
            available: false,
            file: file.virtual_path().to_string(),
            caption: not_computed(reason),
        }
    }
}

/// Provenance: tool, inputs with checksums, parameters, method references.
#[derive(Debug, Clone, Serialize)]
pub struct Provenance {
    /// Tool and version.
    pub tool: String,
    /// Input files with their SHA-256.
    pub inputs: Vec<InputFile>,
    /// Run parameters (name, value with unit).
    pub parameters: Vec<Param>,
    /// Full citations of the methods used, in citation order.
    pub references: Vec<String>,
}

/// One input file.
#[derive(Debug, Clone, Serialize)]
pub struct InputFile {
    /// Path as given by the user (relative to the portfolio file when possible).
    pub path: String,
    /// Lower-case hex SHA-256 of the bytes read.
    pub sha256: String,
}

// ---------------------------------------------------------------------------------------------
// Damage categories (display table)
// ---------------------------------------------------------------------------------------------

/// One damage category as shown in a report.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct CategoryView {
    /// Index 0–4 (4 stands for "4–5", which strain cannot separate).
    pub index: u8,
    /// Display code: "0", "1", "2", "3", "4–5".
    pub code: String,
    /// Normal degree of severity (published name).
    pub name: String,
    /// What such damage typically looks like (our paraphrase).
    pub description: String,
    /// Approximate crack width.
    pub crack_width: String,
    /// Limiting tensile strain band, %.
    pub strain_band: String,
    /// Aesthetic / serviceability / stability.
    pub group: String,
    /// Fill colour `#rrggbb`, the same as in the charts (see `charts::palette`).
    pub colour: String,
}

/// Category names, crack widths and strain bands: Burland et al. (1977), limiting strains from
/// Boscardin & Cording (1989) as restated by Burland (1995); damage-relations.md §3.2 \[R\].
/// Descriptions are our own short paraphrase. Category 5 cannot be separated from 4 by strain
/// (damage-relations.md §3.3), so index 4 and 5 both display as "4–5".
const CATEGORIES: [(&str, &str, &str, &str, &str, &str); 5] = [
    (
        "0",
        "Negligible",
        "Hairline cracks at most.",
        "< 0.1 mm",
        "0 – 0.050 %",
        "aesthetic",
    ),
    (
        "1",
        "Very slight",
        "Fine cracks that normal redecoration deals with; exterior cracks visible only close up.",
        "up to 1 mm",
        "0.050 – 0.075 %",
        "aesthetic",
    ),
    (
        "2",
        "Slight",
        "Cracks easily filled; some repointing; doors and windows may stick slightly.",
        "up to 5 mm",
        "0.075 – 0.150 %",
        "aesthetic",
    ),
    (
        "3",
        "Moderate",
        "Cracks need opening up and patching by a mason; doors and windows stick; services may fracture.",
        "5 – 15 mm, or several > 3 mm",
        "0.150 – 0.300 %",
        "serviceability",
    ),
    (
        "4–5",
        "Severe to very severe",
        "Extensive repair up to partial rebuilding; distorted frames, sloping floors, leaning walls; possible instability.",
        "> 15 mm",
        "> 0.300 %",
        "serviceability / stability",
    ),
];

impl CategoryView {
    /// The display row for a category index; 5 maps to the combined "4–5"; `None` above 5.
    ///
    /// # Examples
    /// ```
    /// use plinth::report::model::CategoryView;
    /// let c = CategoryView::from_index(2).unwrap();
    /// assert_eq!((c.code.as_str(), c.name.as_str()), ("2", "Slight"));
    /// assert_eq!(CategoryView::from_index(5).unwrap().code, "4–5");
    /// assert!(CategoryView::from_index(6).is_none());
    /// ```
    pub fn from_index(index: u8) -> Option<Self> {
        let i = match index {
            0..=4 => index,
            5 => 4,
            _ => return None,
        };
        let (code, name, description, crack_width, strain_band, group) = CATEGORIES[i as usize];
        Some(Self {
            index: i,
            code: code.to_string(),
            name: name.to_string(),
            description: description.to_string(),
            crack_width: crack_width.to_string(),
            strain_band: strain_band.to_string(),
            group: group.to_string(),
            colour: super::charts::palette::hex(super::charts::palette::category_color(i)),
        })
    }

    /// All displayable categories, 0 to 4–5.
    pub fn all() -> Vec<Self> {
        (0..=4).filter_map(Self::from_index).collect()
    }

    /// `"Category 2 — Slight"`.
    pub fn headline(&self) -> String {
        format!("Category {} — {}", self.code, self.name)
    }
}

// ---------------------------------------------------------------------------------------------
// Asset report
// ---------------------------------------------------------------------------------------------

/// How far a structure could be assessed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum AssessmentStatus {
    /// All required metrics were computed.
    Assessed,
    /// Too few or too poor points: not assessable from InSAR.
    InsufficientData,
    /// Excluded or failed for another reason (see the reasons list).
    NotAssessed,
}

impl AssessmentStatus {
    /// Wording used in reports.
    pub fn label(self) -> &'static str {
        match self {
            Self::Assessed => "assessed",
            Self::InsufficientData => INSUFFICIENT_LABEL,
            Self::NotAssessed => "not assessed",
        }
    }

    /// Machine code, as serialised.
    pub fn code(self) -> &'static str {
        match self {
            Self::Assessed => "assessed",
            Self::InsufficientData => "insufficient_data",
            Self::NotAssessed => "not_assessed",
        }
    }
}

/// The structure's identity and the geometry used.
#[derive(Debug, Clone, Serialize)]
pub struct StructureView {
    /// Structure id (user text).
    pub id: String,
    /// Structure name (user text, one line).
    pub name: String,
    /// Structure type as used for E/G, e.g. "masonry, load-bearing walls".
    pub kind: String,
    /// Footprint length along the principal axis, e.g. "30.0 m".
    pub length: String,
    /// Height used in L/H, e.g. "10.0 m".
    pub height: String,
    /// Footprint area, e.g. "360 m²".
    pub footprint_area: String,
}

/// Verdict summary.
#[derive(Debug, Clone, Serialize)]
pub struct VerdictView {
    /// `assessed` / `insufficient_data` / `not_assessed`.
    pub status_code: String,
    /// Human wording of the status.
    pub status_label: String,
    /// True only for `assessed`; templates branch on this, never on the category.
    pub assessable: bool,
    /// Reasons behind the status (why insufficient, what was excluded).
    pub status_reasons: Vec<String>,
    /// The one-line verdict: "Category 1 — Very slight" or the insufficient-data wording.
    pub headline: String,
    /// The category, only when assessable and computed.
    pub category: Option<CategoryView>,
    /// Probability of the reported category (Monte Carlo), e.g. "72 %".
    pub category_probability: Option<String>,
    /// Probability of each category, in category order (empty when not computed).
    pub category_distribution: Vec<Param>,
    /// Probability of any higher category, e.g. "6 %"; `None` without a category.
    pub higher_probability: Option<String>,
    /// What the radar could not observe and what that does to the verdict, in plain words
    /// (horizontal strain not observable, category a lower bound); shown in the verdict box.
    pub observability_notes: Vec<String>,
    /// Which relation decided the category, or "not computed: ...".
    pub governing_route: String,
    /// Evidence grade (high / medium / low / insufficient).
    pub evidence_grade: String,
    /// Trigger status text, e.g. "below alert level".
    pub trigger_status: String,
    /// Trigger level code for colouring: `none`, `alert`, `action`, `not_evaluated`.
    pub trigger_level: String,
    /// Change since the previous period, when a previous period was given.
    pub change_since_previous: Option<String>,
}

/// Inputs to [`VerdictView::new`].
#[derive(Debug, Clone)]
pub struct VerdictInput {
    /// Status.
    pub status: AssessmentStatus,
    /// Reasons for the status.
    pub status_reasons: Vec<String>,
    /// Category index 0–5 when computed.
    pub category_index: Option<u8>,
    /// Probability of that category.
    pub category_probability: Option<f64>,
    /// Probabilities of categories 0..=4 (4 = "4–5"); empty when not computed.
    pub category_distribution: Vec<f64>,
    /// Probability of a category above the stated one.
    pub higher_probability: Option<f64>,
    /// Observability notes (see [`VerdictView::observability_notes`]).
    pub observability_notes: Vec<String>,
    /// Governing route, e.g. "limiting tensile strain, hogging, diagonal".
    pub governing_route: Option<String>,
    /// Evidence grade label.
    pub evidence_grade: String,
    /// Trigger status text and code.
    pub trigger: Option<(String, String)>,
    /// Change since the previous period.
    pub change_since_previous: Option<String>,
}

impl VerdictView {
    /// Builds the verdict; a category is shown only when the status is `Assessed`.
    pub fn new(input: VerdictInput) -> Self {
        let assessable = input.status == AssessmentStatus::Assessed;
        let category = if assessable {
            input.category_index.and_then(CategoryView::from_index)
        } else {
            None
        };
        let headline = match (&category, input.status) {
            (Some(c), _) => c.headline(),
            (None, AssessmentStatus::Assessed) => {
                format!(
                    "Category {}",
                    not_computed("no damage route could be evaluated")
                )
            }
            (None, AssessmentStatus::InsufficientData) => {
                "Insufficient data — not assessable".to_string()
            }
            (None, AssessmentStatus::NotAssessed) => "Not assessed".to_string(),
        };
        let category_distribution = if category.is_some() {
            input
                .category_distribution
                .iter()
                .enumerate()
                .filter_map(|(i, p)| {
                    let c = CategoryView::from_index(u8::try_from(i).ok()?)?;
                    Some(Param::new(c.code, super::format::probability(*p)))
                })
                .collect()
        } else {
            Vec::new()
        };
        let (trigger_status, trigger_level) = input.trigger.unwrap_or_else(|| {
            (
                not_computed("no trigger levels configured"),
                "not_evaluated".to_string(),
            )
        });
        Self {
            status_code: input.status.code().to_string(),
            status_label: input.status.label().to_string(),
            assessable,
            status_reasons: input.status_reasons,
            headline,
            category_probability: category
                .as_ref()
                .and(input.category_probability)
                .map(super::format::probability),
            higher_probability: category
                .as_ref()
                .and(input.higher_probability)
                .map(super::format::probability),
            observability_notes: input.observability_notes,
            category,
            category_distribution,
            governing_route: match input.governing_route {
                Some(r) if assessable => r,
                Some(_) | None => not_computed(if assessable {
                    "no governing route recorded"
                } else {
                    "structure not assessable"
                }),
            },
            evidence_grade: input.evidence_grade,
            trigger_status,
            trigger_level,
            change_since_previous: input.change_since_previous,
        }
    }
}

/// One row of the metrics table.
#[derive(Debug, Clone, Serialize)]
pub struct MetricRow {
    /// Quantity, e.g. "Vertical velocity".
    pub quantity: String,
    /// Symbol, e.g. "v_U" (plain text).
    pub symbol: String,
    /// Value with unit, or "not computed".
    pub value: String,
    /// Uncertainty with unit (standard error or interval), or "—" when none.
    pub uncertainty: String,
    /// Sign convention or basis, or the reason it was not computed.
    pub note: String,
    /// False when not computed (templates grey these rows).
    pub computed: bool,
}

impl MetricRow {
    /// A computed metric: value and uncertainty already formatted with units.
    pub fn computed(
        quantity: &str,
        symbol: &str,
        value: String,
        uncertainty: Option<String>,
        note: &str,
    ) -> Self {
        Self {
            quantity: quantity.to_string(),
            symbol: symbol.to_string(),
            value,
            uncertainty: uncertainty.unwrap_or_else(|| "—".to_string()),
            note: note.to_string(),
            computed: true,
        }
    }

    /// A metric that could not be computed, with the reason.
    pub fn not_computed(quantity: &str, symbol: &str, reason: &str) -> Self {
        Self {
            quantity: quantity.to_string(),
            symbol: symbol.to_string(),
            value: NOT_COMPUTED.to_string(),
            uncertainty: "—".to_string(),
            note: reason.to_string(),
            computed: false,
        }
    }
}

/// The criteria set and its parameters.
#[derive(Debug, Clone, Serialize)]
pub struct CriteriaView {
    /// Criteria set name.
    pub name: String,
    /// Where the thresholds come from.
    pub source: String,
    /// Parameters (E/G, ν, H, thresholds ...).
    pub parameters: Vec<Param>,
}

/// One input data set (one geometry / track).
#[derive(Debug, Clone, Serialize)]
pub struct DatasetView {
    /// Data set name (user text).
    pub name: String,
    /// "ascending" / "descending".
    pub geometry: String,
    /// "east-looking" / "west-looking" (from the sign of the unit vector's east component).
    pub look: String,
    /// Ground→satellite unit vector (east, north, up), e.g. "(−0.616, −0.131, 0.777)".
    pub unit_vector: String,
    /// Incidence angle, e.g. "39.0°".
    pub incidence: String,
    /// Number of epochs (text: "not stated" when the adapter does not know it).
    pub epochs: String,
    /// First and last epoch, ISO.
    pub first_epoch: String,
    /// Last epoch, ISO.
    pub last_epoch: String,
    /// Points of this data set kept for the structure (text, as `epochs`).
    pub points_kept: String,
}

/// Count of points rejected for one reason.
#[derive(Debug, Clone, Serialize)]
pub struct RejectionCount {
    /// Reason, e.g. "coherence below 0.7".
    pub reason: String,
    /// How many points.
    pub count: usize,
}

/// Assumptions and data quality.
#[derive(Debug, Clone, Serialize)]
pub struct DataQualityView {
    /// Points kept for the structure.
    pub points_kept: usize,
    /// Points rejected in total.
    pub points_rejected: usize,
    /// Rejections by reason (sorted by count, then reason).
    pub rejected_by_reason: Vec<RejectionCount>,
    /// Points used for the surroundings comparison.
    pub surroundings_points: usize,
    /// Data sets / geometries.
    pub datasets: Vec<DatasetView>,
    /// Assumptions made (plain sentences).
    pub assumptions: Vec<String>,
}

/// The whole per-structure report model (`/data.json` for `asset.typ`).
#[derive(Debug, Clone, Serialize)]
pub struct AssetReport {
    /// Model format version, bumped on breaking changes of this JSON.
    pub model_version: u32,
    /// Title-block data.
    pub meta: ReportMeta,
    /// Structure identity and geometry.
    pub structure: StructureView,
    /// Assessment window.
    pub window: WindowView,
    /// Verdict summary.
    pub verdict: VerdictView,
    /// Narrative paragraphs (plain text from the text blocks).
    pub narrative: Vec<String>,
    /// Figures (filled by [`AssetCharts::figure_slots`]).
    pub figures: AssetFigures,
    /// Metrics table.
    pub metrics: Vec<MetricRow>,
    /// Criteria set and parameters.
    pub criteria: CriteriaView,
    /// Assumptions and data quality.
    pub data_quality: DataQualityView,
    /// Caution paragraphs (plain text from the text blocks).
    pub cautions: Vec<String>,
    /// Planned works section; `None` (JSON `null`) when the portfolio has no `[works]`.
    pub works: Option<WorksView>,
    /// Provenance.
    pub provenance: Provenance,
}

/// Version of the JSON model written by this code.
pub const MODEL_VERSION: u32 = 1;

/// The figure slots of an asset report.
#[derive(Debug, Clone, Serialize)]
pub struct AssetFigures {
    /// Plan map.
    pub map: FigureSlot,
    /// Time series.
    pub timeseries: FigureSlot,
    /// Settlement profiles, one per principal axis (always two slots).
    pub profiles: Vec<FigureSlot>,
    /// Damage interaction chart.
    pub interaction: FigureSlot,
}

impl AssetReport {
    /// Serialises the model to JSON (deterministic: struct field order, no maps).
    pub fn to_json(&self) -> Result<String, ReportError> {
        serde_json::to_string_pretty(self).map_err(|e| ReportError::Model {
            ident: self.structure.id.clone(),
            reason: e.to_string(),
        })
    }
}

// ---------------------------------------------------------------------------------------------
// Chart input data
// ---------------------------------------------------------------------------------------------

/// A dated value in mm.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DatedValue {
    /// Epoch.
    pub date: NaiveDate,
    /// Value, mm (sign as stated by the series it belongs to).
    pub value_mm: f64,
}

/// A dated band in mm.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DatedBand {
    /// Epoch.
    pub date: NaiveDate,
    /// Lower edge, mm.
    pub lower_mm: f64,
    /// Upper edge, mm.
    pub upper_mm: f64,
}

/// A fitted curve with its legend label.
#[derive(Debug, Clone, PartialEq)]
pub struct LabelledCurve {
    /// Legend text, e.g. "linear trend -3.2 mm/yr".
    pub label: String,
    /// Curve values.
    pub values: Vec<DatedValue>,
}

/// Data for the time-series chart: aggregate vertical displacement of the structure,
/// **mm, positive up**.
#[derive(Debug, Clone, PartialEq)]
pub struct TimeSeriesChart {
    /// Chart title.
    pub title: String,
    /// Aggregate series (e.g. median of the kept points), mm, + up.
    pub aggregate: Vec<DatedValue>,
    /// Spread band around the aggregate (e.g. interquartile range), mm, + up.
    pub spread: Vec<DatedBand>,
    /// Legend label of the spread band, e.g. "interquartile range of points".
    pub spread_label: String,
    /// Fitted linear trend.
    pub trend: Option<LabelledCurve>,
    /// Full model with seasonal and/or acceleration terms, only when significant.
    pub model: Option<LabelledCurve>,
    /// Detected breakpoint date.
    pub breakpoint: Option<NaiveDate>,
    /// Assessment window (start, end).
    pub window: Option<(NaiveDate, NaiveDate)>,
    /// Surroundings series for comparison, mm, + up.
    pub surroundings: Option<LabelledCurve>,
}

/// A point on the plan map in local metres.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MapPoint {
    /// Local east, m.
    pub x_m: f64,
    /// Local north, m.
    pub y_m: f64,
    /// Vertical velocity, mm/yr, + up.
    pub velocity_mm_per_yr: f64,
}

/// Data for the plan map, in a local metric frame whose origin is `origin` in the analysis CRS.
#[derive(Debug, Clone, PartialEq)]
pub struct MapChart {
    /// Chart title.
    pub title: String,
    /// Analysis CRS label, e.g. "EPSG:32631".
    pub crs_label: String,
    /// Easting and northing of the local origin in the analysis CRS, m.
    pub origin_m: [f64; 2],
    /// Footprint ring (local m; closing vertex optional).
    pub footprint: Vec<[f64; 2]>,
    /// Buffer outline rings (local m).
    pub buffer: Vec<Vec<[f64; 2]>>,
    /// Neighbouring footprints (local m).
    pub neighbours: Vec<Vec<[f64; 2]>>,
    /// Kept points, coloured by velocity.
    pub kept: Vec<MapPoint>,
    /// Rejected points (drawn hollow grey; their velocity is ignored).
    pub rejected: Vec<MapPoint>,
    /// Colour scale limit, mm/yr (symmetric ±limit); `None` = from the data.
    pub velocity_limit_mm_per_yr: Option<f64>,
}

/// Hogging or sagging.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum BendingMode {
    /// Concave downward (ends settle more).
    Hogging,
    /// Concave upward (middle settles more).
    Sagging,
}

impl BendingMode {
    /// "hogging" / "sagging".
    pub fn label(self) -> &'static str {
        match self {
            Self::Hogging => "hogging",
            Self::Sagging => "sagging",
        }
    }
}

/// A point of a settlement profile.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ProfilePoint {
    /// Chainage along the axis, m.
    pub chainage_m: f64,
    /// Settlement, mm, **+ down**.
    pub settlement_mm: f64,
}

/// A hogging or sagging zone along the axis.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ZoneSpan {
    /// Start chainage, m.
    pub start_m: f64,
    /// End chainage, m.
    pub end_m: f64,
    /// Mode.
    pub mode: BendingMode,
}

/// Data for one settlement profile along a principal axis; settlement **mm, + down**.
#[derive(Debug, Clone, PartialEq)]
pub struct ProfileChart {
    /// Chart title, e.g. "Profile along axis A (azimuth 60°)".
    pub title: String,
    /// Measured point settlements.
    pub points: Vec<ProfilePoint>,
    /// Fitted profile (e.g. quadratic), sampled.
    pub fitted: Vec<ProfilePoint>,
    /// Chord between the profile ends.
    pub chord: Option<[ProfilePoint; 2]>,
    /// Relative deflection mark: chainage, chord value and profile value.
    pub delta: Option<DeltaMark>,
    /// Hogging/sagging zones.
    pub zones: Vec<ZoneSpan>,
    /// Footprint extent along the axis, m.
    pub extent_m: [f64; 2],
}

/// Where Δ is marked on the profile.
#[derive(Debug, Clone, PartialEq)]
pub struct DeltaMark {
    /// Chainage, m.
    pub chainage_m: f64,
    /// Chord settlement there, mm.
    pub chord_mm: f64,
    /// Profile settlement there, mm.
    pub profile_mm: f64,
    /// Label, e.g. "Δ = 2.5 mm".
    pub label: String,
}

/// A value with an interval for error bars.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Interval {
    /// Central value.
    pub value: f64,
    /// Lower bound.
    pub lower: f64,
    /// Upper bound.
    pub upper: f64,
}

/// Data for the damage interaction chart (Burland 1995 method, redrawn for the structure's
/// own L/H and E/G). All strains and ratios absolute (not %).
#[derive(Debug, Clone, PartialEq)]
pub struct InteractionChart {
    /// Chart title.
    pub title: String,
    /// Length-to-height ratio of the bending zone.
    pub l_over_h: f64,
    /// Ratio of Young's to shear modulus.
    pub e_over_g: f64,
    /// Poisson's ratio used in the diagonal strain.
    pub poisson: f64,
    /// Bending mode of the zone.
    pub mode: BendingMode,
    /// Name of the criteria set whose boundaries are drawn (shown in the legend).
    pub criteria_name: String,
    /// The set's category boundaries 0|1, 1|2, 2|3, 3|4–5 as absolute limiting tensile strain.
    pub thresholds: [f64; 4],
    /// The set's neutral-axis positions (sagging, hogging) used for the boundary curves.
    pub neutral_axis: crate::damage::burland_wroth::NeutralAxisPolicy,
    /// Deflection ratio magnitude |Δ/L| with interval.
    pub deflection_ratio: Interval,
    /// Horizontal strain used (+ tension) with interval.
    pub horizontal_strain: Interval,
    /// Note under the chart, e.g. "ε_h clamped at 0 (compression not credited)".
    pub note: String,
}

/// Data for the portfolio overview map.
#[derive(Debug, Clone, PartialEq)]
pub struct PortfolioMapChart {
    /// Chart title.
    pub title: String,
    /// Analysis CRS label.
    pub crs_label: String,
    /// Easting and northing of the local origin in the analysis CRS, m.
    pub origin_m: [f64; 2],
    /// Structures.
    pub structures: Vec<PortfolioMapItem>,
}

/// One structure on the portfolio map.
#[derive(Debug, Clone, PartialEq)]
pub struct PortfolioMapItem {
    /// Structure id (used for labels when few structures).
    pub id: String,
    /// Footprint ring, local m.
    pub footprint: Vec<[f64; 2]>,
    /// Category index 0–5; `None` = insufficient data / not assessed.
    pub category_index: Option<u8>,
}

/// All chart data of one asset report; `Err(reason)` where a chart is not computed.
#[derive(Debug, Clone)]
pub struct AssetCharts {
    /// Plan map.
    pub map: Result<MapChart, String>,
    /// Time series.
    pub timeseries: Result<TimeSeriesChart, String>,
    /// Profiles along the principal axes (at most two are drawn).
    pub profiles: Vec<Result<ProfileChart, String>>,
    /// Interaction chart.
    pub interaction: Result<InteractionChart, String>,
    /// Planned-works charts; `None` without `[works]`.
    pub works: Option<WorksCharts>,
}

impl AssetCharts {
    /// Chart data with every chart marked "not supplied" (a starting point for adapters).
    pub fn empty() -> Self {
        let reason = || "not supplied".to_string();
        Self {
            map: Err(reason()),
            timeseries: Err(reason()),
            profiles: vec![],
            interaction: Err(reason()),
            works: None,
        }
    }

    /// Figure slots matching this chart data, with the given captions.
    pub fn figure_slots(&self) -> AssetFigures {
        fn slot<T>(data: &Result<T, String>, file: ChartFile, caption: &str) -> FigureSlot {
            match data {
                Ok(_) => FigureSlot::present(file, caption),
                Err(reason) => FigureSlot::missing(file, reason),
            }
        }
        let profile_files = [ChartFile::ProfileA, ChartFile::ProfileB];
        let profiles = profile_files
            .iter()
            .enumerate()
            .map(|(i, file)| match self.profiles.get(i) {
                Some(p) => slot(
                    p,
                    *file,
                    if i == 0 {
                        "Settlement along the principal (long) axis (mm, positive down, plotted downward)."
                    } else {
                        "Settlement along the secondary (short) axis (mm, positive down, plotted downward)."
                    },
                ),
                None => FigureSlot::missing(*file, "no profile along this axis"),
            })
            .collect();
        AssetFigures {
            map: slot(
                &self.map,
                ChartFile::Map,
                "Plan: footprint, buffer and points coloured by vertical velocity.",
            ),
            timeseries: slot(
                &self.timeseries,
                ChartFile::TimeSeries,
                "Vertical displacement of the structure (mm, positive up) with trend and surroundings.",
            ),
            profiles,
            interaction: slot(
                &self.interaction,
                ChartFile::Interaction,
                "Deflection ratio against horizontal strain with category boundaries for this structure's L/H and E/G.",
            ),
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Portfolio report
// ---------------------------------------------------------------------------------------------

/// A count in a summary table.
#[derive(Debug, Clone, Serialize)]
pub struct CountRow {
    /// Label, e.g. "2 — Slight" or "insufficient data".
    pub label: String,
    /// Key for colouring: category index as text, or `insufficient`.
    pub key: String,
    /// Swatch colour `#rrggbb`; `None` for rows without a colour (not assessable, grades).
    pub colour: Option<String>,
    /// Count.
    pub count: usize,
}

/// One row of the ranked table.
#[derive(Debug, Clone, Serialize)]
pub struct RankRow {
    /// Rank, 1 = worst; assessable structures only (`None` for the not-assessable ones).
    pub rank: Option<usize>,
    /// Structure id.
    pub id: String,
    /// Structure name.
    pub name: String,
    /// "2 — Slight" or the insufficient-data wording.
    pub category: String,
    /// Category index for colouring; `None` when not assessable.
    pub category_index: Option<u8>,
    /// Category colour `#rrggbb`; `None` when not assessable.
    pub category_colour: Option<String>,
    /// Governing tensile strain, e.g. "0.081 %", or "not computed".
    pub governing_strain: String,
    /// Probability of the stated category and of a higher one, e.g. "p 84 %; higher 6 %";
    /// empty without a category.
    pub category_probability: String,
    /// Vertical velocity, e.g. "-3.2 ± 0.4 mm/yr".
    pub velocity: String,
    /// Evidence grade.
    pub evidence_grade: String,
    /// Trigger status text.
    pub trigger_status: String,
    /// Predicted category from the planned works, e.g. "1 — Very slight"; `None` without
    /// `[works]` (filled by the pipeline after ranking).
    pub predicted_category: Option<String>,
    /// Observed / predicted settlement, e.g. "1.02"; `None` without `[works]`.
    pub observed_to_predicted: Option<String>,
}

/// Raw inputs for one ranked row, sorted by [`rank_rows`].
#[derive(Debug, Clone)]
pub struct RankInput {
    /// Structure id.
    pub id: String,
    /// Structure name.
    pub name: String,
    /// Status.
    pub status: AssessmentStatus,
    /// Category index when computed.
    pub category_index: Option<u8>,
    /// Governing strain (absolute, + tension).
    pub governing_strain: Option<f64>,
    /// Vertical velocity, mm/yr, + up, with its standard error.
    pub velocity_mm_per_yr: Option<(f64, Option<f64>)>,
    /// Probability of the stated category and of a higher one.
    pub category_probability: Option<(f64, f64)>,
    /// Evidence grade label.
    pub evidence_grade: String,
    /// Trigger status text.
    pub trigger_status: String,
}

/// Sorts worst first: assessable structures by category (high first), then governing strain
/// (high first; missing strain after present), then id; not-assessable structures follow,
/// by id, without a rank. NaN strains count as missing.
///
/// Choice: not-assessable structures are listed after the ranked ones rather than interleaved,
/// because "worst" is undefined for them; they are shown in full, not dropped.
pub fn rank_rows(mut inputs: Vec<RankInput>) -> Vec<RankRow> {
    let key_strain = |r: &RankInput| r.governing_strain.filter(|s| s.is_finite());
    inputs.sort_by(|a, b| {
        let a_ok = a.status == AssessmentStatus::Assessed;
        let b_ok = b.status == AssessmentStatus::Assessed;
        b_ok.cmp(&a_ok)
            .then_with(|| b.category_index.cmp(&a.category_index))
            .then_with(|| match (key_strain(a), key_strain(b)) {
                (Some(x), Some(y)) => y.total_cmp(&x),
                (Some(_), None) => std::cmp::Ordering::Less,
                (None, Some(_)) => std::cmp::Ordering::Greater,
                (None, None) => std::cmp::Ordering::Equal,
            })
            .then_with(|| a.id.cmp(&b.id))
    });
    let mut rank = 0;
    inputs
        .into_iter()
        .map(|r| {
            let assessable = r.status == AssessmentStatus::Assessed;
            let category = if assessable {
                r.category_index.and_then(CategoryView::from_index)
            } else {
                None
            };
            let rank_here = if assessable {
                rank += 1;
                Some(rank)
            } else {
                None
            };
            RankRow {
                rank: rank_here,
                id: super::format::one_line(&r.id),
                name: super::format::one_line(&r.name),
                category: match (&category, r.status) {
                    (Some(c), _) => format!("{} — {}", c.code, c.name),
                    (None, AssessmentStatus::Assessed) => NOT_COMPUTED.to_string(),
                    (None, s) => s.label().to_string(),
                },
                category_index: category.as_ref().map(|c| c.index),
                category_colour: category.as_ref().map(|c| c.colour.clone()),
                governing_strain: match key_strain(&r) {
                    Some(s) if assessable => super::format::percent(s, 3),
                    _ => NOT_COMPUTED.to_string(),
                },
                category_probability: match (&category, r.category_probability) {
                    (Some(_), Some((p, hi))) => format!(
                        "p {}; higher {}",
                        super::format::probability(p),
                        super::format::probability(hi)
                    ),
                    _ => String::new(),
                },
                velocity: match r.velocity_mm_per_yr {
                    Some((v, se)) if v.is_finite() => {
                        super::format::with_uncertainty(v, se, 1, "mm/yr")
                    }
                    _ => NOT_COMPUTED.to_string(),
                },
                evidence_grade: r.evidence_grade,
                trigger_status: r.trigger_status,
                predicted_category: None,
                observed_to_predicted: None,
            }
        })
        .collect()
}

/// A change of a structure since the previous period.
#[derive(Debug, Clone, Serialize)]
pub struct ChangeRow {
    /// Structure id.
    pub id: String,
    /// Previous category or status.
    pub previous: String,
    /// Current category or status.
    pub current: String,
    /// Note, e.g. "velocity -1.2 → -3.4 mm/yr".
    pub note: String,
}

/// The portfolio overview model (`/data.json` for `portfolio.typ`).
#[derive(Debug, Clone, Serialize)]
pub struct PortfolioReport {
    /// Model format version.
    pub model_version: u32,
    /// Title-block data.
    pub meta: ReportMeta,
    /// Assessment window.
    pub window: WindowView,
    /// Narrative paragraphs.
    pub narrative: Vec<String>,
    /// Number of structures in total / assessed / not assessable.
    pub totals: Vec<Param>,
    /// Counts per category, then the not-assessable count (always present, also when 0).
    pub category_counts: Vec<CountRow>,
    /// Counts per evidence grade.
    pub grade_counts: Vec<CountRow>,
    /// Ranked table (worst first).
    pub ranked: Vec<RankRow>,
    /// True when the portfolio has `[works]`: the ranked table then shows the predicted
    /// category and the observed/predicted settlement.
    pub has_works: bool,
    /// Changes since the previous period.
    pub changes: Vec<ChangeRow>,
    /// Why there is no change table, when there is none.
    pub changes_note: Option<String>,
    /// Data coverage facts.
    pub coverage: Vec<Param>,
    /// Portfolio map slot.
    pub map: FigureSlot,
    /// Caution paragraphs.
    pub cautions: Vec<String>,
    /// Provenance.
    pub provenance: Provenance,
}

impl PortfolioReport {
    /// Serialises the model to JSON.
    pub fn to_json(&self) -> Result<String, ReportError> {
        serde_json::to_string_pretty(self).map_err(|e| ReportError::Model {
            ident: self.meta.portfolio_name.clone(),
            reason: e.to_string(),
        })
    }
}

/// Counts per category (0..=4, "4–5" combined) plus the not-assessable count, from the
/// ranked rows. Every category row is present even when its count is zero.
pub fn category_counts(rows: &[RankRow]) -> Vec<CountRow> {
    let mut out: Vec<CountRow> = CategoryView::all()
        .into_iter()
        .map(|c| CountRow {
            label: format!("{} — {}", c.code, c.name),
            key: c.index.to_string(),
            colour: Some(c.colour.clone()),
            count: rows
                .iter()
                .filter(|r| r.category_index == Some(c.index))
                .count(),
        })
        .collect();
    out.push(CountRow {
        label: "not assessable (insufficient data or not assessed)".to_string(),
        key: "insufficient".to_string(),
        colour: None,
        count: rows.iter().filter(|r| r.category_index.is_none()).count(),
    });
    out
}

/// Counts per evidence grade in the fixed order of `crate::grade` (robust, adequate, indicative,
/// insufficient), then any other label alphabetically.
pub fn grade_counts(rows: &[RankRow]) -> Vec<CountRow> {
    let mut labels: Vec<String> = ["robust", "adequate", "indicative", "insufficient"]
        .iter()
        .map(|s| s.to_string())
        .collect();
    let mut others: Vec<String> = rows
        .iter()
        .map(|r| r.evidence_grade.clone())
        .filter(|g| !labels.contains(g))
        .collect();
    others.sort();
    others.dedup();
    labels.extend(others);
    labels
        .into_iter()
        .map(|g| CountRow {
            count: rows.iter().filter(|r| r.evidence_grade == g).count(),
            key: g.clone(),
            colour: None,
            label: g,
        })
        .collect()
}

/// Chart data of the portfolio report.
#[derive(Debug, Clone)]
pub struct PortfolioCharts {
    /// Portfolio map by category.
    pub map: Result<PortfolioMapChart, String>,
}

impl PortfolioCharts {
    /// The map slot matching this data.
    pub fn figure_slot(&self) -> FigureSlot {
        match &self.map {
            Ok(_) => FigureSlot::present(
                ChartFile::PortfolioMap,
                "Structures by damage category; hatched outlines are not assessable (insufficient data), not category 0.",
            ),
            Err(reason) => FigureSlot::missing(ChartFile::PortfolioMap, reason),
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Planned works (only when the portfolio has `[works]`)
// ---------------------------------------------------------------------------------------------

/// One predicted-against-observed row of the works section, formatted with units.
#[derive(Debug, Clone, Serialize)]
pub struct WorksRow {
    /// Quantity in words, e.g. "Largest settlement".
    pub quantity: String,
    /// Unit or form of the values, e.g. "mm, + down" or "1/n".
    pub unit: String,
    /// Predicted for the comparison period, or "not computed".
    pub predicted: String,
    /// Observed, or "not observed".
    pub observed: String,
    /// Observed / predicted, or "—" with the reason in `note`.
    pub ratio: String,
    /// "yes" / "no" / "—": the observation exceeds the prediction.
    pub exceeds: String,
    /// Why a value or the ratio is missing, or "—".
    pub note: String,
}

/// The "Planned works" section of a structure report (`works` in `/data.json`; `null` without
/// `[works]`).
#[derive(Debug, Clone, Serialize)]
pub struct WorksView {
    /// Largest predicted greenfield settlement on the footprint, all works complete, e.g.
    /// "16.9 mm".
    pub predicted_settlement: String,
    /// Predicted ("possible") category, e.g. "0 — Negligible", or "not computed: ...".
    pub predicted_category: String,
    /// Observed / predicted largest settlement for the comparison period, e.g. "1.02", or
    /// "not computed: ...".
    pub observed_to_predicted: String,
    /// Stage 1 verdict in one sentence.
    pub stage1: String,
    /// Stage 2 verdict in one sentence (or why there is none).
    pub stage2: String,
    /// Facts about the stages (section, parts, factors).
    pub facts: Vec<Param>,
    /// Works near the structure, nearest first ("Drive A (tunnel): 10.0 m, chainage 500 m").
    pub nearby: Vec<String>,
    /// What the predicted side of the comparison covers.
    pub comparison_period: String,
    /// Predicted against observed.
    pub comparison: Vec<WorksRow>,
    /// Plan view of the structure and the works.
    pub plan: FigureSlot,
    /// Predicted against observed chart (face history, or bars without history).
    pub comparison_chart: FigureSlot,
    /// Assumptions of the screening, in plain sentences.
    pub assumptions: Vec<String>,
}

/// A straight line in local metres.
pub type LocalLine = [[f64; 2]; 2];

/// One tunnel drive on the works plan (local metres of the structure's frame).
#[derive(Debug, Clone, PartialEq)]
pub struct WorksPlanTunnel {
    /// Drive name.
    pub name: String,
    /// Alignment vertices.
    pub centreline: Vec<[f64; 2]>,
    /// Per segment, the band between the inflection lines (±i from the axis): a closed ring.
    pub bands: Vec<Vec<[f64; 2]>>,
    /// Per segment, the two inflection lines (offset ±i).
    pub inflection_lines: Vec<LocalLine>,
    /// Trough width parameters i of the segments, m (for the legend).
    pub i_m: Vec<f64>,
    /// Face position at the end of the assessment window, when the drive has face records.
    pub face_at_window_end: Option<[f64; 2]>,
}

/// One excavation on the works plan.
#[derive(Debug, Clone, PartialEq)]
pub struct WorksPlanExcavation {
    /// Name.
    pub name: String,
    /// Outline ring.
    pub outline: Vec<[f64; 2]>,
    /// Outline grown by the settlement envelope's reach (rings).
    pub influence: Vec<Vec<[f64; 2]>>,
    /// The reach, m.
    pub influence_m: f64,
}

/// Data for the works plan view, in the structure's local frame (origin `origin_m`).
#[derive(Debug, Clone, PartialEq)]
pub struct WorksPlanChart {
    /// Chart title.
    pub title: String,
    /// Analysis CRS label.
    pub crs_label: String,
    /// Easting and northing of the local origin in the analysis CRS, m.
    pub origin_m: [f64; 2],
    /// Footprint rings.
    pub footprint: Vec<Vec<[f64; 2]>>,
    /// Tunnels.
    pub tunnels: Vec<WorksPlanTunnel>,
    /// Excavations.
    pub excavations: Vec<WorksPlanExcavation>,
    /// The stage-2 section line drawn across the structure (extended beyond it).
    pub section: Option<LocalLine>,
    /// The part of the section covered by the structure (the assessed extent).
    pub section_extent: Option<LocalLine>,
    /// Where the largest predicted settlement on the footprint is, and its label.
    pub max_settlement: Option<([f64; 2], String)>,
    /// View box to draw (min x, max x, min y, max y), local m; geometry beyond it is cut.
    pub view_m: [f64; 4],
    /// Works beyond the view, named in the legend ("Drive B 320 m away").
    pub outside_view: Vec<String>,
}

/// One epoch of the settlement history next to a dated drive.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WorksEpoch {
    /// Date.
    pub date: NaiveDate,
    /// Observed settlement since the reference date, mm, **+ down**; `None` without data.
    pub observed_mm: Option<f64>,
    /// Predicted settlement since the reference date, mm, **+ down**.
    pub predicted_mm: f64,
}

/// Observed and predicted settlement over time as a drive passes the structure.
#[derive(Debug, Clone, PartialEq)]
pub struct WorksHistoryChart {
    /// Chart title.
    pub title: String,
    /// Drive name.
    pub tunnel: String,
    /// Reference date of both series.
    pub reference_date: NaiveDate,
    /// Epochs in date order.
    pub epochs: Vec<WorksEpoch>,
    /// First epoch at which the face has passed the structure's chainage, if any.
    pub face_passes: Option<NaiveDate>,
}

/// A pair of bars (predicted, observed) for one quantity.
#[derive(Debug, Clone, PartialEq)]
pub struct WorksBarPair {
    /// Panel title, e.g. "Largest settlement".
    pub quantity: String,
    /// Axis title with unit, e.g. "mm, + down".
    pub unit: String,
    /// Predicted value in the axis unit.
    pub predicted: Option<f64>,
    /// Observed value in the axis unit.
    pub observed: Option<f64>,
}

/// Predicted against observed as bars, one panel per quantity (used without a face history).
#[derive(Debug, Clone, PartialEq)]
pub struct WorksBarChart {
    /// Chart title.
    pub title: String,
    /// Panels.
    pub pairs: Vec<WorksBarPair>,
}

/// The predicted-against-observed chart of the works section.
#[derive(Debug, Clone, PartialEq)]
pub enum WorksComparisonChart {
    /// Settlement history against date with the face passing.
    History(WorksHistoryChart),
    /// Bars per quantity.
    Bars(WorksBarChart),
}

/// Chart data of the works section; `Err(reason)` where a chart is not computed.
#[derive(Debug, Clone)]
pub struct WorksCharts {
    /// Plan view.
    pub plan: Result<WorksPlanChart, String>,
    /// Predicted against observed.
    pub comparison: Result<WorksComparisonChart, String>,
}

impl WorksCharts {
    /// Caption of the plan view.
    pub const PLAN_CAPTION: &'static str = "Plan: the structure and the planned works near it; \
        shaded band between the tunnel trough's inflection lines (±i), and the section line \
        of the stage-2 assessment.";
    /// Caption of the history chart.
    pub const HISTORY_CAPTION: &'static str = "Settlement of the structure (mm, positive down, \
        plotted downward) as the drive passes: observed against the greenfield prediction.";
    /// Caption of the bar chart.
    pub const BARS_CAPTION: &'static str = "Predicted against observed over the comparison \
        period: settlement, slope and deflection ratio.";

    /// The two figure slots matching this chart data.
    pub fn figure_slots(&self) -> (FigureSlot, FigureSlot) {
        let plan = match &self.plan {
            Ok(_) => FigureSlot::present(ChartFile::WorksPlan, Self::PLAN_CAPTION),
            Err(r) => FigureSlot::missing(ChartFile::WorksPlan, r),
        };
        let cmp = match &self.comparison {
            Ok(WorksComparisonChart::History(_)) => {
                FigureSlot::present(ChartFile::WorksComparison, Self::HISTORY_CAPTION)
            }
            Ok(WorksComparisonChart::Bars(_)) => {
                FigureSlot::present(ChartFile::WorksComparison, Self::BARS_CAPTION)
            }
            Err(r) => FigureSlot::missing(ChartFile::WorksComparison, r),
        };
        (plan, cmp)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn verdict(status: AssessmentStatus, cat: Option<u8>) -> VerdictView {
        VerdictView::new(VerdictInput {
            status,
            status_reasons: vec![],
            category_index: cat,
            category_probability: Some(0.7),
            category_distribution: vec![0.2, 0.7, 0.1, 0.0, 0.0],
            higher_probability: Some(0.1),
            observability_notes: vec![],
            governing_route: Some("limiting tensile strain".into()),
            evidence_grade: "medium".into(),
            trigger: None,
            change_since_previous: None,
        })
    }

    #[test]
    fn insufficient_data_never_reads_as_category_zero() {
        // Even if a category index leaks in, an insufficient structure shows no category.
        let v = verdict(AssessmentStatus::InsufficientData, Some(0));
        assert!(v.category.is_none());
        assert!(!v.assessable);
        assert_eq!(v.headline, "Insufficient data — not assessable");
        assert_eq!(v.status_label, INSUFFICIENT_LABEL);
        assert!(v.category_probability.is_none());
        assert!(v.category_distribution.is_empty());
        assert!(v.governing_route.starts_with(NOT_COMPUTED));
        assert!(!v.headline.contains("Negligible"));
    }

    #[test]
    fn assessed_verdict_shows_category_and_probability() {
        let v = verdict(AssessmentStatus::Assessed, Some(1));
        assert_eq!(v.headline, "Category 1 — Very slight");
        assert_eq!(v.category_probability.as_deref(), Some("70 %"));
        assert_eq!(v.category_distribution[1], Param::new("1", "70 %"));
        assert_eq!(v.category_distribution[4].name, "4–5");
        assert_eq!(v.trigger_level, "not_evaluated");
        assert!(v.trigger_status.starts_with("not computed:"));
    }

    #[test]
    fn assessed_without_category_says_not_computed() {
        let v = verdict(AssessmentStatus::Assessed, None);
        assert!(v.headline.contains("not computed"));
    }

    #[test]
    fn category_table_matches_published_bands() {
        // damage-relations.md §3.2: boundaries 0.05, 0.075, 0.15, 0.3 %
        let bands: Vec<String> = CategoryView::all()
            .into_iter()
            .map(|c| c.strain_band)
            .collect();
        assert_eq!(
            bands,
            [
                "0 – 0.050 %",
                "0.050 – 0.075 %",
                "0.075 – 0.150 %",
                "0.150 – 0.300 %",
                "> 0.300 %"
            ]
        );
    }

    #[test]
    fn ranking_is_worst_first_and_keeps_unassessable_last() {
        let mk = |id: &str, status, cat, strain| RankInput {
            id: id.into(),
            name: format!("name {id}"),
            status,
            category_index: cat,
            governing_strain: strain,
            velocity_mm_per_yr: Some((-1.0, None)),
            category_probability: None,
            evidence_grade: "low".into(),
            trigger_status: "none".into(),
        };
        let rows = rank_rows(vec![
            mk("a", AssessmentStatus::Assessed, Some(1), Some(6.0e-4)),
            mk("b", AssessmentStatus::InsufficientData, None, None),
            mk("c", AssessmentStatus::Assessed, Some(2), Some(8.0e-4)),
            mk("d", AssessmentStatus::Assessed, Some(1), Some(7.0e-4)),
            mk("e", AssessmentStatus::Assessed, Some(1), Some(f64::NAN)),
        ]);
        let ids: Vec<&str> = rows.iter().map(|r| r.id.as_str()).collect();
        assert_eq!(ids, ["c", "d", "a", "e", "b"]);
        assert_eq!(rows[0].rank, Some(1));
        assert_eq!(rows[4].rank, None);
        assert_eq!(rows[4].category, INSUFFICIENT_LABEL);
        assert_eq!(rows[0].governing_strain, "0.080 %");
        assert_eq!(rows[3].governing_strain, NOT_COMPUTED);
        let counts = category_counts(&rows);
        assert_eq!(counts.len(), 6);
        assert_eq!(counts[1].count, 3);
        assert_eq!(
            counts[0].count, 0,
            "insufficient data is not counted as category 0"
        );
        assert_eq!(counts[5].count, 1);
    }

    #[test]
    fn window_span_in_years() {
        let w = WindowView::new(
            NaiveDate::from_ymd_opt(2021, 1, 1).unwrap(),
            NaiveDate::from_ymd_opt(2024, 1, 1).unwrap(),
        );
        assert_eq!(w.span, "3.0 yr");
        assert_eq!(w.start, "2021-01-01");
    }

    #[test]
    fn invalid_report_date_is_refused() {
        assert!(ReportDate::new(2023, 2, 29).is_err());
        assert_eq!(ReportDate::new(2024, 2, 29).unwrap().iso(), "2024-02-29");
    }
}
