//! The portfolio file (TOML): the model of one job and its validation.
//!
//! Owns parsing the portfolio file into [`Portfolio`], resolving paths relative to the file,
//! applying documented defaults (and recording each applied default) and validating every key with
//! an error that names the file, the key and the fix. Every key is documented in `docs/formats.md`.
//! It does not read the data files it points to (see `ingest`).

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use chrono::NaiveDate;
use serde::{Deserialize, Serialize};

use crate::error::InputError;

/// C-band radar wavelength at 5.405 GHz, mm: λ = c/f = 299 792 458 m/s / 5.405e9 Hz.
///
/// # References
/// insar-methods.md §2.7 (computed value \[C\]); the 5.405 GHz centre frequency is a typical value from memory.
pub const C_BAND_WAVELENGTH_MM: f64 = 299_792_458.0 / 5.405e9 * 1000.0;

/// The raw file as written by the user. Unknown keys are errors.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFile {
    portfolio: RawPortfolio,
    structures: RawStructures,
    #[serde(default)]
    datasets: Vec<RawDataset>,
    #[serde(default)]
    assessment: Option<RawAssessment>,
    #[serde(default)]
    report: Option<ReportSettings>,
    #[serde(default)]
    criteria: BTreeMap<String, toml::Table>,
    #[serde(default)]
    triggers: Vec<TriggerLevel>,
    #[serde(default)]
    works: Option<crate::works::RawWorks>,
    #[serde(default)]
    reference: Option<RawReference>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawReference {
    point: Vec<f64>,
    crs: Option<String>,
    radius_m: Option<f64>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawPortfolio {
    name: String,
    crs: Option<String>,
    start: Option<toml::Value>,
    end: Option<toml::Value>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawStructures {
    path: String,
    id_property: Option<String>,
    crs: Option<String>,
    layer: Option<String>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawDataset {
    name: String,
    path: String,
    pass: Pass,
    incidence_deg: Option<f64>,
    heading_deg: Option<f64>,
    crs: Option<String>,
    unit: Option<Unit>,
    positive: Option<LosSign>,
    look: Option<LookSide>,
    wavelength_mm: Option<f64>,
    delimiter: Option<String>,
    columns: Option<RawColumns>,
    layer: Option<String>,
}

#[derive(Debug, Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct RawColumns {
    id: Option<String>,
    x: Option<String>,
    y: Option<String>,
    coherence: Option<String>,
    incidence: Option<String>,
    heading: Option<String>,
    height: Option<String>,
    date_format: Option<String>,
}

#[derive(Debug, Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct RawAssessment {
    buffer_m: Option<f64>,
    surroundings_m: Option<f64>,
    min_coherence: Option<f64>,
    min_points: Option<usize>,
    min_epochs: Option<usize>,
    min_span_years: Option<f64>,
    outlier_z: Option<f64>,
    default_height_m: Option<f64>,
    default_structure: Option<String>,
    seed: Option<u64>,
    monte_carlo_draws: Option<usize>,
    bootstrap_draws: Option<usize>,
    max_condition_number: Option<f64>,
    strain_axis_max_angle_deg: Option<f64>,
}

/// Orbit direction of a dataset, as written in the portfolio file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Pass {
    /// Ascending pass (flying roughly north, right-looking sensors look east).
    Ascending,
    /// Descending pass (flying roughly south, right-looking sensors look west).
    Descending,
}

/// Units of the displacement values in a points file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Unit {
    /// Millimetres (default).
    Mm,
    /// Metres; multiplied by 1000 on ingest.
    M,
}

impl Unit {
    /// Factor that converts a value in this unit to millimetres.
    pub fn to_mm(self) -> f64 {
        match self {
            Unit::Mm => 1.0,
            Unit::M => 1000.0,
        }
    }
}

/// Sign convention of the LOS values in a points file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum LosSign {
    /// Positive = motion towards the satellite (range shortening). Plinth's internal convention.
    Towards,
    /// Positive = motion away from the satellite; values are negated on ingest.
    Away,
}

/// Look side of the sensor.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum LookSide {
    /// Right-looking (default; all common civil SAR missions).
    Right,
    /// Left-looking; must be declared explicitly.
    Left,
}

/// Column map of a points file.
#[derive(Debug, Clone, Serialize)]
pub struct Columns {
    /// Point id column.
    pub id: String,
    /// x / longitude column.
    pub x: String,
    /// y / latitude column.
    pub y: String,
    /// Coherence column name, and whether the user set it explicitly (then it must exist).
    pub coherence: String,
    /// True when `coherence` was written in the portfolio file.
    pub coherence_explicit: bool,
    /// Optional per-point incidence angle column (degrees).
    pub incidence: Option<String>,
    /// Optional per-point heading column (degrees clockwise from north).
    pub heading: Option<String>,
    /// Optional per-point height column (m).
    pub height: Option<String>,
    /// chrono format of the epoch column headers.
    pub date_format: String,
}

/// One InSAR points file (one viewing geometry).
#[derive(Debug, Clone, Serialize)]
pub struct DatasetSpec {
    /// Unique dataset name.
    pub name: String,
    /// Absolute or portfolio-relative path, resolved.
    pub path: PathBuf,
    /// Orbit direction.
    pub pass: Pass,
    /// Scene incidence angle, degrees (None when a per-point column is mapped).
    pub incidence_deg: Option<f64>,
    /// Scene heading (flight azimuth), degrees clockwise from true north.
    pub heading_deg: Option<f64>,
    /// CRS of the point coordinates, e.g. `EPSG:4326`.
    pub crs: String,
    /// Unit of the displacement values.
    pub unit: Unit,
    /// LOS sign convention of the values.
    pub positive: LosSign,
    /// Sensor look side.
    pub look: LookSide,
    /// Radar wavelength, mm (default C-band 55.47 mm).
    pub wavelength_mm: f64,
    /// Field delimiter, or None to detect from the header line.
    pub delimiter: Option<u8>,
    /// Column map.
    pub columns: Columns,
    /// True when `crs` was written in the portfolio file (a GeoPackage or Shapefile that declares
    /// another CRS is then refused).
    #[serde(skip)]
    pub crs_given: bool,
    /// Layer of a GeoPackage points file (None: its only feature layer).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub layer: Option<String>,
}

/// The `[structures]` section.
#[derive(Debug, Clone, Serialize)]
pub struct StructuresSpec {
    /// Path of the footprints GeoJSON, resolved.
    pub path: PathBuf,
    /// Feature property holding the structure id.
    pub id_property: String,
    /// CRS of the footprint coordinates (for a GeoPackage or Shapefile that declares its CRS,
    /// the file's CRS is used and must agree with this when it was given).
    pub crs: String,
    /// True when `crs` was written in the portfolio file (not the default).
    #[serde(skip)]
    pub crs_given: bool,
    /// Layer of a GeoPackage footprints file (None: its only feature layer).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub layer: Option<String>,
}

/// Largest accepted `min_points`: a plausibility bound against typing errors (a minimum above it
/// would leave almost every structure insufficient). Plinth choice.
pub const MAX_MIN_POINTS: usize = 1000;
/// Smallest accepted `min_epochs`: the period displacement averages 3 valid epochs at each end
/// of the window (insar-methods.md §5.11 \[Rec\]), so fewer than 6 cannot give one.
pub const MIN_MIN_EPOCHS: usize = 6;
/// Largest accepted `min_epochs`: valid epochs per point are counted up to 65 535.
pub const MAX_MIN_EPOCHS: usize = u16::MAX as usize;
/// Largest accepted `min_span_years`: longer than any radar archive (plausibility bound). Plinth
/// choice.
pub const MAX_MIN_SPAN_YEARS: f64 = 50.0;

/// The `[assessment]` parameters with defaults applied.
#[derive(Debug, Clone, Serialize)]
pub struct AssessmentSettings {
    /// Footprint buffer for point association, m (default 5.0).
    pub buffer_m: f64,
    /// Outer radius of the surroundings ring measured from the footprint, m (default 50.0).
    pub surroundings_m: f64,
    /// Minimum temporal coherence of a kept point (default 0.7, insar-methods.md §6.1 \[Rec\]).
    pub min_coherence: f64,
    /// Minimum kept points on a structure; fewer → `insufficient_data` (default 5).
    pub min_points: usize,
    /// Minimum acquisitions inside the window (default 20, insar-methods.md §6.4).
    pub min_epochs: usize,
    /// Minimum time span of the window, years (default 1.0, insar-methods.md §6.4 \[Rec\]).
    pub min_span_years: f64,
    /// Robust z-score above which a point velocity is an outlier (default 3.0, insar-methods.md §7.3).
    pub outlier_z: f64,
    /// Height to eaves used when a footprint has no `height_m`, m (default 6.0: two-storey domestic).
    pub default_height_m: f64,
    /// Structure type used when a footprint has no `structure` property (default `masonry`).
    pub default_structure: String,
    /// Seed for every Monte Carlo and bootstrap step (default 20_240_101); results are reproducible.
    pub seed: u64,
    /// Monte Carlo draws for metric uncertainty (default 300).
    pub monte_carlo_draws: usize,
    /// Largest number of bootstrap draws B for the breakpoint test (default 999, insar-methods
    /// §5.8 \[D\]; the test stops earlier once its decision is known, see `series::breakpoint`).
    pub bootstrap_draws: usize,
    /// Largest condition number of the geometry matrix for an east–west + vertical
    /// decomposition (default 3.0, insar-methods.md §4.2 \[Rec\]); one east-looking and one
    /// west-looking geometry are required whatever the value.
    pub max_condition_number: f64,
    /// Largest angle between a footprint axis and east–west for a horizontal strain along it,
    /// degrees (default 20: the unseen north–south normal strain then weighs at most
    /// sin² 20° ≈ 12 %; docs/methods.md).
    pub strain_axis_max_angle_deg: f64,
}

/// The `[report]` section: who signs and how reports look.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ReportSettings {
    /// Name shown as "prepared by".
    pub prepared_by: Option<String>,
    /// Name shown as "checked by".
    pub checked_by: Option<String>,
    /// Revision label, e.g. "A" or "P01".
    pub revision: Option<String>,
    /// Client or asset owner shown on the title block.
    pub client: Option<String>,
    /// A folder of user templates overriding the built-in ones by file name (relative to the portfolio file).
    pub template_dir: Option<PathBuf>,
    /// Free text shown in every report's notes.
    pub notes: Option<String>,
}

/// One user-defined trigger level on a result field.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TriggerLevel {
    /// The user's own name for the level, e.g. "review" or "act".
    pub name: String,
    /// Result field it applies to, e.g. `settlement_mm`, `vertical_velocity_mm_per_yr`, `tilt`.
    pub field: String,
    /// Exceeded when the value is greater than or equal to this.
    pub above: Option<f64>,
    /// Exceeded when the value is less than or equal to this.
    pub below: Option<f64>,
    /// Exceeded when |value| is greater than or equal to this.
    pub magnitude_above: Option<f64>,
    /// Rank of the level (higher = more severe); default: order in the file (1, 2, ...).
    pub severity: Option<u32>,
    /// Optional action text shown in reports.
    pub action: Option<String>,
}

/// The `[reference]` section: one stable area every dataset is re-referenced to before datasets
/// are combined (insar-methods.md §4.6, §6.6).
#[derive(Debug, Clone, Serialize)]
pub struct ReferenceSpec {
    /// Centre of the reference area, in `crs` (x = easting or longitude).
    pub point: [f64; 2],
    /// CRS of `point` (default `EPSG:4326`).
    pub crs: String,
    /// Radius of the reference area, m (required: there is no safe default).
    pub radius_m: f64,
}

/// A record that a default was applied (written to the manifest and the report).
#[derive(Debug, Clone, Serialize)]
pub struct AppliedDefault {
    /// The key, e.g. `assessment.buffer_m`.
    pub key: String,
    /// The value used, as text.
    pub value: String,
}

/// The validated portfolio.
#[derive(Debug, Clone, Serialize)]
pub struct Portfolio {
    /// The portfolio file itself.
    pub file: PathBuf,
    /// Job name.
    pub name: String,
    /// Analysis CRS if given (None → UTM zone of the structures' centroid).
    pub crs: Option<String>,
    /// Assessment window start if given.
    pub start: Option<NaiveDate>,
    /// Assessment window end if given.
    pub end: Option<NaiveDate>,
    /// Footprints.
    pub structures: StructuresSpec,
    /// Points files.
    pub datasets: Vec<DatasetSpec>,
    /// Assessment parameters.
    pub assessment: AssessmentSettings,
    /// Report settings.
    pub report: ReportSettings,
    /// User-defined criteria sets (validated by `criteria`).
    #[serde(skip)]
    pub criteria: BTreeMap<String, toml::Table>,
    /// Trigger levels.
    pub triggers: Vec<TriggerLevel>,
    /// Defaults applied.
    pub defaults_applied: Vec<AppliedDefault>,
    /// Planned or ongoing works (`[works]`, validated by `works::model`); None without the section.
    pub works: Option<crate::works::WorksSpec>,
    /// Common reference area (`[reference]`); None without the section.
    pub reference: Option<ReferenceSpec>,
}

/// Check the `[reference]` section; `def` records the defaults applied.
fn validate_reference(
    r: &RawReference,
    path: &Path,
    def: &mut impl FnMut(&str, String),
) -> Result<ReferenceSpec, InputError> {
    let [x, y] = r.point[..] else {
        return Err(InputError::new(
            path,
            "key reference.point",
            format!("expected two numbers [x, y], got {}", r.point.len()),
            "e.g. point = [9.1834, 45.4712] (longitude, latitude with the default crs)",
        ));
    };
    if !(x.is_finite() && y.is_finite()) {
        return Err(InputError::new(
            path,
            "key reference.point",
            "the coordinates are not finite numbers",
            "e.g. point = [9.1834, 45.4712]",
        ));
    }
    let crs = match &r.crs {
        Some(c) => c.clone(),
        None => {
            def("reference.crs", "EPSG:4326".into());
            "EPSG:4326".to_string()
        }
    };
    check_crs(&crs, path, "reference.crs")?;
    let Some(radius_m) = r.radius_m else {
        return Err(InputError::new(
            path,
            "key reference.radius_m",
            "the radius of the reference area is missing",
            "give the radius in metres of a stable area around the point, e.g. radius_m = 150.0",
        ));
    };
    if !(radius_m > 0.0 && radius_m <= 5000.0) {
        return Err(InputError::new(
            path,
            "key reference.radius_m",
            format!("{radius_m} m is outside (0, 5000] m"),
            "a reference area is a stable patch of ground, typically 50–500 m across",
        ));
    }
    Ok(ReferenceSpec {
        point: [x, y],
        crs,
        radius_m,
    })
}

/// Parse a date given as a TOML string `"2023-01-03"` or a TOML date literal.
fn parse_date(v: &toml::Value, file: &Path, key: &str) -> Result<NaiveDate, InputError> {
    let text = match v {
        toml::Value::String(s) => s.clone(),
        toml::Value::Datetime(d) => d.to_string(),
        other => {
            return Err(InputError::new(
                file,
                format!("key {key}"),
                format!("expected an ISO 8601 date, found {}", other.type_str()),
                format!("write {key} = \"2024-01-31\""),
            ));
        }
    };
    NaiveDate::parse_from_str(text.trim(), "%Y-%m-%d").map_err(|_| {
        InputError::new(
            file,
            format!("key {key}"),
            format!("`{text}` is not an ISO 8601 date (YYYY-MM-DD)"),
            format!("write {key} = \"2024-01-31\""),
        )
    })
}

fn line_of(text: &str, offset: usize) -> usize {
    text[..offset.min(text.len())]
        .bytes()
        .filter(|&b| b == b'\n')
        .count()
        + 1
}

/// Check a CRS string has the form `EPSG:<code>` and a known definition.
pub fn check_crs(crs: &str, file: &Path, key: &str) -> Result<(), InputError> {
    crate::coords::Crs::parse(crs).map(|_| ()).map_err(|e| {
        InputError::new(
            file,
            format!("key {key}"),
            e.to_string(),
            "write the CRS as an EPSG code, e.g. \"EPSG:4326\" or \"EPSG:32632\"",
        )
    })
}

impl Portfolio {
    /// Read and validate a portfolio file.
    pub fn load(path: &Path) -> Result<Portfolio, InputError> {
        let text = std::fs::read_to_string(path).map_err(|e| {
            InputError::new(
                path,
                "",
                format!("cannot read the portfolio file: {e}"),
                "check the path; `plinth init DIR` writes a commented example",
            )
        })?;
        Self::parse(&text, path)
    }

    /// Parse and validate portfolio text; `path` locates it (paths inside are relative to its folder).
    pub fn parse(text: &str, path: &Path) -> Result<Portfolio, InputError> {
        let raw: RawFile = toml::from_str(text).map_err(|e| {
            let loc = e
                .span()
                .map(|s| format!("line {}", line_of(text, s.start)))
                .unwrap_or_default();
            InputError::new(
                path,
                loc,
                e.message().trim().to_string(),
                "see docs/formats.md for every key of the portfolio file and its type",
            )
        })?;
        let base = path.parent().unwrap_or(Path::new("."));
        let resolve = |p: &str| -> PathBuf {
            let p = PathBuf::from(p);
            if p.is_absolute() { p } else { base.join(p) }
        };
        let mut defaults = Vec::new();
        let mut def = |key: &str, value: String| {
            defaults.push(AppliedDefault {
                key: key.to_string(),
                value,
            })
        };

        if raw.portfolio.name.trim().is_empty() {
            return Err(InputError::new(
                path,
                "key portfolio.name",
                "the portfolio name is empty",
                "give the job a name, e.g. name = \"Quarterly movement review\"",
            ));
        }
        if let Some(c) = &raw.portfolio.crs {
            check_crs(c, path, "portfolio.crs")?;
            let parsed = crate::coords::Crs::parse(c).map_err(|e| {
                InputError::new(path, "key portfolio.crs", e.to_string(), "use a metric CRS")
            })?;
            if parsed.is_geographic() {
                return Err(InputError::new(
                    path,
                    "key portfolio.crs",
                    format!("{c} is geographic (degrees); the analysis CRS must be metric"),
                    "use a projected CRS such as a UTM zone (EPSG:326zz) or leave it out to use the UTM zone of the structures",
                ));
            }
        } else {
            def(
                "portfolio.crs",
                "UTM zone of the structures' centroid".into(),
            );
        }
        let start = raw
            .portfolio
            .start
            .as_ref()
            .map(|v| parse_date(v, path, "portfolio.start"))
            .transpose()?;
        let end = raw
            .portfolio
            .end
            .as_ref()
            .map(|v| parse_date(v, path, "portfolio.end"))
            .transpose()?;
        if let (Some(s), Some(e)) = (start, end) {
            if e <= s {
                return Err(InputError::new(
                    path,
                    "key portfolio.end",
                    format!("the window end {e} is not after its start {s}"),
                    "swap the dates or correct the typo",
                ));
            }
        }

        // [structures]
        let structures_crs = raw.structures.crs.clone().unwrap_or_else(|| {
            def("structures.crs", "EPSG:4326".into());
            "EPSG:4326".into()
        });
        check_crs(&structures_crs, path, "structures.crs")?;
        let structures = StructuresSpec {
            path: resolve(&raw.structures.path),
            id_property: raw.structures.id_property.clone().unwrap_or_else(|| {
                def("structures.id_property", "id".into());
                "id".into()
            }),
            crs: structures_crs,
            crs_given: raw.structures.crs.is_some(),
            layer: raw.structures.layer.clone(),
        };
        if !structures.path.is_file() {
            return Err(InputError::new(
                path,
                "key structures.path",
                format!("file not found: {}", structures.path.display()),
                "paths are relative to the portfolio file's folder",
            ));
        }

        // [[datasets]]
        if raw.datasets.is_empty() {
            return Err(InputError::new(
                path,
                "key datasets",
                "no [[datasets]] section: at least one InSAR points file is required",
                "add a [[datasets]] table with name, path, pass, incidence_deg and heading_deg",
            ));
        }
        let mut datasets = Vec::new();
        for (i, d) in raw.datasets.iter().enumerate() {
            let k = |f: &str| format!("datasets[{i}].{f}");
            if d.name.trim().is_empty() {
                return Err(InputError::new(
                    path,
                    format!("key {}", k("name")),
                    "dataset name is empty",
                    "give each dataset a short unique name, e.g. \"asc-a\"",
                ));
            }
            if datasets.iter().any(|x: &DatasetSpec| x.name == d.name) {
                return Err(InputError::new(
                    path,
                    format!("key {}", k("name")),
                    format!("dataset name `{}` is used twice", d.name),
                    "dataset names must be unique",
                ));
            }
            let cols = d.columns.as_ref();
            let col = |get: fn(&RawColumns) -> &Option<String>| cols.and_then(|c| get(c).clone());
            let incidence_col = col(|c| &c.incidence);
            let heading_col = col(|c| &c.heading);
            if let Some(inc) = d.incidence_deg {
                if !(inc > 0.0 && inc < 90.0) {
                    return Err(InputError::new(
                        path,
                        format!("key {}", k("incidence_deg")),
                        format!(
                            "incidence angle {inc}° is outside (0°, 90°); it is the angle between the line of sight and the vertical"
                        ),
                        "typical C-band values are 29°-46°; check the product metadata",
                    ));
                }
            } else if incidence_col.is_none() {
                return Err(InputError::new(
                    path,
                    format!("key {}", k("incidence_deg")),
                    "missing: the incidence angle is required unless a per-point column is mapped",
                    format!(
                        "add {} = 38.0 (from the product metadata) or map columns.incidence",
                        k("incidence_deg")
                    ),
                ));
            }
            if let Some(h) = d.heading_deg {
                if !h.is_finite() || !(-360.0..=360.0).contains(&h) {
                    return Err(InputError::new(
                        path,
                        format!("key {}", k("heading_deg")),
                        format!("heading {h}° is not an angle in [-360°, 360°]"),
                        "give the flight azimuth in degrees clockwise from north, e.g. -12 (ascending) or 192 (descending)",
                    ));
                }
            } else if heading_col.is_none() {
                return Err(InputError::new(
                    path,
                    format!("key {}", k("heading_deg")),
                    "missing: the satellite heading is required unless a per-point column is mapped",
                    format!(
                        "add {} = -12.0 (flight azimuth, degrees clockwise from north) or map columns.heading",
                        k("heading_deg")
                    ),
                ));
            }
            let crs = d.crs.clone().unwrap_or_else(|| {
                def(&k("crs"), "EPSG:4326".into());
                "EPSG:4326".into()
            });
            check_crs(&crs, path, &k("crs"))?;
            let unit = d.unit.unwrap_or_else(|| {
                def(&k("unit"), "mm".into());
                Unit::Mm
            });
            let positive = d.positive.unwrap_or_else(|| {
                def(&k("positive"), "towards".into());
                LosSign::Towards
            });
            let look = d.look.unwrap_or(LookSide::Right);
            let wavelength_mm = d.wavelength_mm.unwrap_or(C_BAND_WAVELENGTH_MM);
            if !(wavelength_mm > 1.0 && wavelength_mm < 1000.0) {
                return Err(InputError::new(
                    path,
                    format!("key {}", k("wavelength_mm")),
                    format!("wavelength {wavelength_mm} mm is implausible"),
                    "C-band is about 55.5 mm, X-band 31.1 mm, L-band 238 mm",
                ));
            }
            let delimiter = match d.delimiter.as_deref() {
                None => None,
                Some(",") => Some(b','),
                Some(";") => Some(b';'),
                Some("\t") | Some("tab") => Some(b'\t'),
                Some(other) => {
                    return Err(InputError::new(
                        path,
                        format!("key {}", k("delimiter")),
                        format!("unsupported delimiter `{other}`"),
                        "use \",\", \";\" or \"tab\", or leave it out to detect it from the header",
                    ));
                }
            };
            let columns = Columns {
                id: col(|c| &c.id).unwrap_or_else(|| "point_id".into()),
                x: col(|c| &c.x).unwrap_or_else(|| "lon".into()),
                y: col(|c| &c.y).unwrap_or_else(|| "lat".into()),
                coherence: col(|c| &c.coherence).unwrap_or_else(|| "coherence".into()),
                coherence_explicit: col(|c| &c.coherence).is_some(),
                incidence: incidence_col,
                heading: heading_col,
                height: col(|c| &c.height),
                date_format: col(|c| &c.date_format).unwrap_or_else(|| "%Y-%m-%d".into()),
            };
            let spec = DatasetSpec {
                name: d.name.clone(),
                path: resolve(&d.path),
                pass: d.pass,
                incidence_deg: d.incidence_deg,
                heading_deg: d.heading_deg,
                crs,
                unit,
                positive,
                look,
                wavelength_mm,
                delimiter,
                columns,
                crs_given: d.crs.is_some(),
                layer: d.layer.clone(),
            };
            if !spec.path.is_file() {
                return Err(InputError::new(
                    path,
                    format!("key {}", k("path")),
                    format!("file not found: {}", spec.path.display()),
                    "paths are relative to the portfolio file's folder",
                ));
            }
            datasets.push(spec);
        }

        // [assessment]
        let a = raw.assessment.unwrap_or_default();
        macro_rules! take {
            ($field:ident, $default:expr) => {{
                match a.$field.clone() {
                    Some(v) => v,
                    None => {
                        let v = $default;
                        def(
                            concat!("assessment.", stringify!($field)),
                            format!("{:?}", v).trim_matches('"').to_string(),
                        );
                        v
                    }
                }
            }};
        }
        let assessment = AssessmentSettings {
            buffer_m: take!(buffer_m, 5.0),
            surroundings_m: take!(surroundings_m, 50.0),
            min_coherence: take!(min_coherence, 0.7),
            min_points: take!(min_points, 5usize),
            min_epochs: take!(min_epochs, 20usize),
            min_span_years: take!(min_span_years, 1.0),
            outlier_z: take!(outlier_z, 3.0),
            default_height_m: take!(default_height_m, 6.0),
            default_structure: take!(default_structure, "masonry".to_string()),
            seed: take!(seed, 20_240_101u64),
            monte_carlo_draws: take!(monte_carlo_draws, 300usize),
            bootstrap_draws: take!(bootstrap_draws, 999usize),
            max_condition_number: take!(max_condition_number, 3.0),
            strain_axis_max_angle_deg: take!(strain_axis_max_angle_deg, 20.0),
        };
        let bad = |key: &str, msg: String, hint: &str| {
            Err(InputError::new(
                path,
                format!("key assessment.{key}"),
                msg,
                hint,
            ))
        };
        if !(assessment.buffer_m >= 0.0 && assessment.buffer_m <= 100.0) {
            return bad(
                "buffer_m",
                format!("buffer {} m is outside 0–100 m", assessment.buffer_m),
                "5 m suits high-resolution data, 10 m medium-resolution C-band (insar-methods.md §7.2)",
            );
        }
        if !(assessment.surroundings_m >= assessment.buffer_m
            && assessment.surroundings_m <= 1000.0)
        {
            return bad(
                "surroundings_m",
                format!(
                    "surroundings ring {} m must be at least the buffer ({} m) and at most 1000 m",
                    assessment.surroundings_m, assessment.buffer_m
                ),
                "50 m is the default",
            );
        }
        if !(0.0..=1.0).contains(&assessment.min_coherence) {
            return bad(
                "min_coherence",
                format!("{} is outside 0–1", assessment.min_coherence),
                "temporal coherence is between 0 and 1; 0.7 is the default",
            );
        }
        if assessment.min_points < 3 {
            return bad(
                "min_points",
                format!("{} is below 3", assessment.min_points),
                "at least 3 points are needed for a robust mean; 5 is the default",
            );
        }
        if assessment.min_points > MAX_MIN_POINTS {
            return bad(
                "min_points",
                format!(
                    "{} is above {MAX_MIN_POINTS}: almost no structure would be assessed",
                    assessment.min_points
                ),
                "5 is the default; the evidence grade asks for 10 points for `robust`",
            );
        }
        if !(MIN_MIN_EPOCHS..=MAX_MIN_EPOCHS).contains(&assessment.min_epochs) {
            return bad(
                "min_epochs",
                format!(
                    "{} is outside {MIN_MIN_EPOCHS}–{MAX_MIN_EPOCHS}",
                    assessment.min_epochs
                ),
                "the period displacement needs 3 epochs at each end of the window, so at least 6; about 20 acquisitions is the usual minimum (insar-methods.md §6.4)",
            );
        }
        if !(assessment.min_span_years > 0.0 && assessment.min_span_years <= MAX_MIN_SPAN_YEARS) {
            return bad(
                "min_span_years",
                format!(
                    "{} years is outside (0, {MAX_MIN_SPAN_YEARS}]",
                    assessment.min_span_years
                ),
                "give the shortest usable window in years; 1.0 is the default (insar-methods.md §6.4)",
            );
        }
        if !(assessment.default_height_m > 0.0 && assessment.default_height_m < 500.0) {
            return bad(
                "default_height_m",
                format!(
                    "{} m is not a plausible height",
                    assessment.default_height_m
                ),
                "give the height to eaves in metres",
            );
        }
        if assessment.outlier_z.is_nan() || assessment.outlier_z <= 0.0 {
            return bad(
                "outlier_z",
                format!("{} must be positive", assessment.outlier_z),
                "3.0 is the default",
            );
        }
        if !(assessment.max_condition_number >= 1.0 && assessment.max_condition_number <= 10.0) {
            return bad(
                "max_condition_number",
                format!(
                    "{} is outside 1–10 (a condition number is at least 1)",
                    assessment.max_condition_number
                ),
                "3.0 is the default; ascending + descending pairs give about 1.0–1.8",
            );
        }
        if !(assessment.strain_axis_max_angle_deg >= 0.0
            && assessment.strain_axis_max_angle_deg <= 45.0)
        {
            return bad(
                "strain_axis_max_angle_deg",
                format!("{}° is outside 0–45°", assessment.strain_axis_max_angle_deg),
                "20 is the default; beyond 45° the unseen north–south motion would weigh more \
                 than the east–west motion that is measured",
            );
        }
        if !["masonry", "frame"].contains(&assessment.default_structure.as_str())
            && !raw.criteria.contains_key(&assessment.default_structure)
        {
            return bad(
                "default_structure",
                format!("unknown structure type `{}`", assessment.default_structure),
                "use \"masonry\" or \"frame\" or the name of a [criteria.NAME] set",
            );
        }

        let mut report = raw.report.unwrap_or_default();
        if let Some(t) = &report.template_dir {
            let p = if t.is_absolute() {
                t.clone()
            } else {
                base.join(t)
            };
            if !p.is_dir() {
                return Err(InputError::new(
                    path,
                    "key report.template_dir",
                    format!("template folder not found: {}", p.display()),
                    "give a folder holding asset.typ and/or portfolio.typ (see DEVELOPERS.md)",
                ));
            }
            report.template_dir = Some(p);
        }

        for (i, t) in raw.triggers.iter().enumerate() {
            let n = [t.above, t.below, t.magnitude_above]
                .iter()
                .filter(|x| x.is_some())
                .count();
            if n != 1 {
                return Err(InputError::new(
                    path,
                    format!("key triggers[{i}]"),
                    format!(
                        "trigger `{}` must set exactly one of above, below, magnitude_above",
                        t.name
                    ),
                    "e.g. field = \"settlement_mm\", above = 10.0",
                ));
            }
            if !crate::triggers::FIELDS.contains(&t.field.as_str()) {
                return Err(InputError::new(
                    path,
                    format!("key triggers[{i}].field"),
                    format!("`{}` is not a numeric result field", t.field),
                    format!("use one of: {}", crate::triggers::FIELDS.join(", ")),
                ));
            }
        }

        // [works] (optional): validated by its own module; errors name the key.
        let works = raw
            .works
            .as_ref()
            .map(|w| crate::works::model::validate(w, path))
            .transpose()?;

        let reference = raw
            .reference
            .as_ref()
            .map(|r| validate_reference(r, path, &mut def))
            .transpose()?;

        Ok(Portfolio {
            file: path.to_path_buf(),
            name: raw.portfolio.name.trim().to_string(),
            crs: raw.portfolio.crs,
            start,
            end,
            structures,
            datasets,
            assessment,
            report,
            criteria: raw.criteria,
            triggers: raw.triggers,
            defaults_applied: defaults,
            works,
            reference,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn fixture(extra: &str) -> (tempfile::TempDir, PathBuf, String) {
        let dir = tempfile::tempdir().unwrap();
        std::fs::write(dir.path().join("s.geojson"), "{}").unwrap();
        std::fs::write(dir.path().join("a.csv"), "").unwrap();
        let p = dir.path().join("p.toml");
        let text = format!(
            "[portfolio]\nname = \"T\"\n[structures]\npath = \"s.geojson\"\n[[datasets]]\nname = \"a\"\npath = \"a.csv\"\npass = \"ascending\"\nincidence_deg = 38.0\nheading_deg = -12.0\n{extra}"
        );
        (dir, p, text)
    }

    #[test]
    fn minimal_file_gets_documented_defaults() {
        let (_d, p, t) = fixture("");
        let pf = Portfolio::parse(&t, &p).unwrap();
        assert_eq!(pf.assessment.buffer_m, 5.0);
        assert_eq!(pf.assessment.min_points, 5);
        assert_eq!(pf.datasets[0].columns.id, "point_id");
        assert!(
            pf.defaults_applied
                .iter()
                .any(|d| d.key == "assessment.buffer_m")
        );
    }

    #[test]
    fn unknown_key_is_named() {
        let (_d, p, t) = fixture("[assessment]\nbuffer_mm = 3\n");
        let e = Portfolio::parse(&t, &p).unwrap_err();
        assert!(e.message.contains("buffer_mm"), "{e}");
        assert!(e.location.starts_with("line "), "{e}");
    }

    #[test]
    fn incidence_out_of_range_is_rejected() {
        let (_d, p, t) = fixture("");
        let t = t.replace("incidence_deg = 38.0", "incidence_deg = 95.0");
        let e = Portfolio::parse(&t, &p).unwrap_err();
        assert_eq!(e.location, "key datasets[0].incidence_deg");
    }

    #[test]
    fn window_end_before_start() {
        let (_d, p, t) = fixture("");
        let t = t.replace(
            "name = \"T\"",
            "name = \"T\"\nstart = \"2024-01-01\"\nend = \"2023-01-01\"",
        );
        let e = Portfolio::parse(&t, &p).unwrap_err();
        assert_eq!(e.location, "key portfolio.end");
    }

    /// Every minimum the status and the evidence grade depend on is range-checked, and the error
    /// names the key (the file is named by `InputError`).
    #[test]
    fn minimums_are_range_checked() {
        let cases = [
            ("min_span_years = 0.0", "min_span_years"),
            ("min_span_years = -1.0", "min_span_years"),
            ("min_span_years = nan", "min_span_years"),
            ("min_span_years = 60.0", "min_span_years"),
            ("min_epochs = 5", "min_epochs"),
            ("min_epochs = 70000", "min_epochs"),
            ("min_points = 2", "min_points"),
            ("min_points = 1001", "min_points"),
            ("min_coherence = 1.5", "min_coherence"),
            ("min_coherence = nan", "min_coherence"),
        ];
        for (line, key) in cases {
            let (_d, p, t) = fixture(&format!("[assessment]\n{line}\n"));
            let e = Portfolio::parse(&t, &p).unwrap_err();
            assert_eq!(e.location, format!("key assessment.{key}"), "{line}: {e}");
            assert!(e.to_string().contains("p.toml"), "{line}: {e}");
        }
        // The bounds themselves are accepted.
        for line in [
            "min_span_years = 50.0",
            "min_span_years = 0.5",
            "min_epochs = 6",
            "min_points = 1000",
        ] {
            let (_d, p, t) = fixture(&format!("[assessment]\n{line}\n"));
            assert!(Portfolio::parse(&t, &p).is_ok(), "{line}");
        }
    }

    #[test]
    fn wavelength_constant_matches_reference() {
        // insar-methods.md §2.7 / Appendix A WL-1: λ = 55.47 mm at 5.405 GHz (computed [C]).
        assert!((C_BAND_WAVELENGTH_MM - 55.47).abs() < 0.005);
    }
}
