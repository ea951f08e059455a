//! The results contract: one record per structure and one for the portfolio.
//!
//! Field names listed in docs/formats.md are fixed: other parts of the project, the documentation
//! and outside acceptance checks rely on them. Every scalar carries its unit in its name or is
//! dimensionless (m/m). `null` means "not computed" or "not computable" — the reason is in
//! `status_reasons` or in the nested detail — and never "zero".
//!
//! Owns the types only; they are filled by `assess` and written by `output`.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

/// Structure status.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Status {
    /// Enough data for the movement and damage verdict.
    Assessed,
    /// Below the minimums: no verdict (never "no movement").
    InsufficientData,
}

/// One exceeded trigger level.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TriggerHit {
    /// The user's level name.
    pub level: String,
    /// Rank (higher = more severe).
    pub severity: u32,
    /// Result field.
    pub field: String,
    /// The structure's value of that field.
    pub value: f64,
    /// Rule as text, e.g. `>= 10`.
    pub rule: String,
    /// Action text from the portfolio file.
    pub action: Option<String>,
}

/// What changed since the previous period (`--previous`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Change {
    /// `new` (not in the previous run), `continuing`.
    pub kind: String,
    /// Previous damage category.
    pub previous_damage_category: Option<u8>,
    /// True when the category differs from the previous one.
    pub category_changed: bool,
    /// Previous vertical velocity, mm/yr.
    pub previous_vertical_velocity_mm_per_yr: Option<f64>,
    /// Current minus previous vertical velocity, mm/yr.
    pub velocity_change_mm_per_yr: Option<f64>,
    /// z = Δv / sqrt(SE₁² + SE₂²) (insar-methods.md §5.8 sub-period comparison \[Rec\]).
    pub velocity_change_z: Option<f64>,
    /// |z| > 2.
    pub velocity_change_significant: Option<bool>,
    /// Trigger levels exceeded now but not before.
    pub new_exceedances: Vec<String>,
    /// Previous status.
    pub previous_status: Option<Status>,
}

/// The per-structure result record.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StructureResult {
    /// Structure id.
    pub id: String,
    /// Structure name.
    pub name: String,
    /// `assessed` | `insufficient_data`.
    pub status: Status,
    /// Why the status is what it is (always filled for insufficient data).
    pub status_reasons: Vec<String>,
    /// Points kept on the structure (all geometries).
    pub n_points: usize,
    /// Rejected points by reason.
    pub n_rejected: BTreeMap<String, usize>,
    /// Kept surroundings points.
    pub n_surroundings: usize,
    /// Dataset names contributing kept points.
    pub datasets: Vec<String>,
    /// Maximum settlement over the window, mm, + downward.
    pub settlement_mm: Option<f64>,
    /// Max − min settlement among kept points, mm.
    pub differential_settlement_mm: Option<f64>,
    /// Mean vertical displacement over the window, mm, + up.
    pub mean_vertical_mm: Option<f64>,
    /// Mean east displacement over the window, mm, + east (null with one geometry).
    pub mean_east_mm: Option<f64>,
    /// Vertical velocity, mm/yr, + up.
    pub vertical_velocity_mm_per_yr: Option<f64>,
    /// East velocity, mm/yr, + east (null with one geometry).
    pub east_velocity_mm_per_yr: Option<f64>,
    /// Tilt magnitude, m/m.
    pub tilt: Option<f64>,
    /// Direction in which the structure goes down, degrees clockwise from true north.
    pub tilt_azimuth_deg: Option<f64>,
    /// Angular distortion magnitude, m/m (rad).
    pub angular_distortion: Option<f64>,
    /// Deflection ratio Δ/L, signed (+ sagging, − hogging), largest magnitude over the axes.
    pub deflection_ratio: Option<f64>,
    /// Horizontal strain, + extension (null when not measurable).
    pub horizontal_strain: Option<f64>,
    /// Governing tensile strain, absolute (not %).
    pub governing_strain: Option<f64>,
    /// Damage category 0–5 (4 stands for "4–5"), null when not assessable.
    pub damage_category: Option<u8>,
    /// Route that gave the category.
    pub damage_route: Option<String>,
    /// Evidence grade.
    pub evidence_grade: Option<String>,
    /// Why the evidence grade is what it is (empty when not graded).
    #[serde(default)]
    pub evidence_grade_reasons: Vec<String>,
    /// Probability of each damage category, `{"0": p, …, "4": p}` ("4" stands for 4–5), from
    /// the Monte Carlo draws through the whole chain; sums to 1; null without a category.
    #[serde(default)]
    pub damage_category_probabilities: Option<BTreeMap<String, f64>>,
    /// Probability of the stated category (0–1).
    #[serde(default)]
    pub damage_category_probability: Option<f64>,
    /// Probability of a category above the stated one (0–1).
    #[serde(default)]
    pub damage_category_exceedance_probability: Option<f64>,
    /// Whether the horizontal strain was observed: `measured`, `not_observable_axis` (axis too
    /// far from east–west), `not_observable_geometry` (no east-looking + west-looking pair) or
    /// `not_measured`; null when no metrics were computed.
    #[serde(default)]
    pub horizontal_strain_status: Option<String>,
    /// True when the category was stated without a measured horizontal strain, so it may be
    /// understated; null without a category.
    #[serde(default)]
    pub category_lower_bound: Option<bool>,
    /// Look directions of the kept points (`east-looking`, `west-looking`).
    #[serde(default)]
    pub look_directions: Vec<String>,

    /// Standard error of the vertical velocity, mm/yr.
    pub vertical_velocity_se_mm_per_yr: Option<f64>,
    /// Standard error of the east velocity, mm/yr.
    pub east_velocity_se_mm_per_yr: Option<f64>,
    /// Standard error of the tilt, m/m.
    pub tilt_se: Option<f64>,
    /// Standard error of the deflection ratio (Monte Carlo over the points' noise), dimensionless.
    #[serde(default)]
    pub deflection_ratio_se: Option<f64>,
    /// Standard error of the angular distortion (Monte Carlo over the points' noise), dimensionless.
    #[serde(default)]
    pub angular_distortion_se: Option<f64>,
    /// Name of the damage category.
    pub damage_category_name: Option<String>,
    /// Criteria set used.
    pub criteria_set: Option<String>,
    /// Height used, m.
    pub height_m: f64,
    /// Structure type used.
    pub structure_type: String,
    /// Highest trigger level exceeded (null when none; `not_evaluated` when the structure is insufficient).
    pub trigger_status: Option<String>,
    /// Every exceeded trigger.
    pub triggers: Vec<TriggerHit>,
    /// Safe file stem of this structure's report.
    pub report_file: Option<String>,
    /// Path of this structure's detail file inside the output folder
    /// (`details/<report_file>.json`, see [`DetailRecord`]).
    #[serde(default)]
    pub detail_file: Option<String>,
    /// Properties that fell back to defaults.
    pub fallbacks: Vec<String>,
    /// Assumptions made for this structure.
    pub assumptions: Vec<crate::text::Shared>,
    /// Change since the previous period.
    pub change: Option<Change>,
    /// Largest predicted greenfield settlement on the footprint from the `[works]`, all works
    /// complete, mm (+ down); null without works.
    #[serde(default)]
    pub predicted_settlement_mm: Option<f64>,
    /// Predicted ("possible", upper-bound) damage category 0–5 from the stage-2 screening of the
    /// works; null without works or when not computable.
    #[serde(default)]
    pub predicted_category: Option<u8>,
    /// Observed over predicted largest settlement for the comparison period; null when either is
    /// missing or the prediction is below 0.1 mm.
    #[serde(default)]
    pub observed_to_predicted_settlement: Option<f64>,
}

/// Names of the scalar fields written to results.csv and results.geojson, in order.
pub const SCALAR_FIELDS: &[&str] = &[
    "id",
    "name",
    "status",
    "status_reasons",
    "n_points",
    "n_rejected",
    "n_surroundings",
    "datasets",
    "settlement_mm",
    "differential_settlement_mm",
    "mean_vertical_mm",
    "mean_east_mm",
    "vertical_velocity_mm_per_yr",
    "east_velocity_mm_per_yr",
    "tilt",
    "tilt_azimuth_deg",
    "angular_distortion",
    "deflection_ratio",
    "horizontal_strain",
    "governing_strain",
    "damage_category",
    "damage_route",
    "evidence_grade",
    "damage_category_probability",
    "damage_category_exceedance_probability",
    "horizontal_strain_status",
    "category_lower_bound",
    "look_directions",
    "vertical_velocity_se_mm_per_yr",
    "east_velocity_se_mm_per_yr",
    "tilt_se",
    "deflection_ratio_se",
    "angular_distortion_se",
    "damage_category_name",
    "criteria_set",
    "height_m",
    "structure_type",
    "trigger_status",
    "report_file",
    "detail_file",
    "predicted_settlement_mm",
    "predicted_category",
    "observed_to_predicted_settlement",
];

impl StructureResult {
    /// The value of a numeric field by name (used by triggers); None when null or not numeric.
    pub fn numeric(&self, field: &str) -> Option<f64> {
        match field {
            "settlement_mm" => self.settlement_mm,
            "differential_settlement_mm" => self.differential_settlement_mm,
            "mean_vertical_mm" => self.mean_vertical_mm,
            "mean_east_mm" => self.mean_east_mm,
            "vertical_velocity_mm_per_yr" => self.vertical_velocity_mm_per_yr,
            "east_velocity_mm_per_yr" => self.east_velocity_mm_per_yr,
            "tilt" => self.tilt,
            "angular_distortion" => self.angular_distortion,
            "deflection_ratio" => self.deflection_ratio,
            "horizontal_strain" => self.horizontal_strain,
            "governing_strain" => self.governing_strain,
            "damage_category" => self.damage_category.map(f64::from),
            "damage_category_probability" => self.damage_category_probability,
            "damage_category_exceedance_probability" => self.damage_category_exceedance_probability,
            "predicted_settlement_mm" => self.predicted_settlement_mm,
            "predicted_category" => self.predicted_category.map(f64::from),
            "observed_to_predicted_settlement" => self.observed_to_predicted_settlement,
            _ => None,
        }
    }

    /// Scalar fields as text cells for CSV (empty = null), in [`SCALAR_FIELDS`] order.
    pub fn csv_cells(&self) -> Vec<String> {
        let v = serde_json::to_value(self).unwrap_or_default();
        SCALAR_FIELDS
            .iter()
            .map(|f| match v.get(*f) {
                None | Some(serde_json::Value::Null) => String::new(),
                Some(serde_json::Value::String(s)) => s.clone(),
                Some(serde_json::Value::Array(a)) => a
                    .iter()
                    .map(|x| {
                        x.as_str()
                            .map(str::to_string)
                            .unwrap_or_else(|| x.to_string())
                    })
                    .collect::<Vec<_>>()
                    .join("; "),
                Some(serde_json::Value::Object(o)) => o
                    .iter()
                    .map(|(k, x)| format!("{k}={x}"))
                    .collect::<Vec<_>>()
                    .join("; "),
                Some(x) => x.to_string(),
            })
            .collect()
    }
}

/// Coverage summary of a run.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct Coverage {
    /// Structures read.
    pub structures: usize,
    /// Structures per status.
    pub by_status: BTreeMap<String, usize>,
    /// Points rows read per dataset.
    pub points_read: BTreeMap<String, u64>,
    /// Points kept on structures (all datasets).
    pub points_kept: usize,
    /// Points rejected by reason (all structures).
    pub points_rejected: BTreeMap<String, usize>,
    /// Points within reach but neither on a structure nor a tie (surroundings only).
    pub points_surroundings_only: usize,
    /// Points read that are in no structure's footprint, buffer or surroundings ring (the rows
    /// read minus the points listed in points.csv).
    pub points_out_of_reach: u64,
    /// Points excluded as ties between structures.
    pub ties: usize,
}

/// Portfolio-level record.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PortfolioResult {
    /// Job name.
    pub name: String,
    /// Analysis CRS, e.g. `EPSG:32632`.
    pub analysis_crs: String,
    /// Assessment window start (ISO date).
    pub window_start: Option<String>,
    /// Assessment window end (ISO date).
    pub window_end: Option<String>,
    /// Analysis date = the last acquisition used (from the data, not the clock).
    pub analysis_date: Option<String>,
    /// Tool version.
    pub tool_version: String,
    /// Coverage summary.
    pub coverage: Coverage,
    /// Structures per damage category (`insufficient_data` separate).
    pub by_category: BTreeMap<String, usize>,
    /// Structures per evidence grade.
    pub by_grade: BTreeMap<String, usize>,
    /// Previous run compared against, if any.
    pub previous: Option<String>,
    /// Structures in the previous run that are gone now.
    pub gone_since_previous: Vec<String>,
    /// Shard `K/N` if this run was one shard.
    pub shard: Option<String>,
    /// Every dataset's viewing geometry: pass, look direction and unit vector.
    #[serde(default)]
    pub datasets: Vec<DatasetGeometry>,
    /// The common reference area (`[reference]`); null when the datasets keep their own.
    #[serde(default)]
    pub common_reference: Option<CommonReference>,
}

/// One dataset's viewing geometry as the assessment used it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DatasetGeometry {
    /// Dataset name.
    pub name: String,
    /// `ascending` or `descending`.
    pub pass: String,
    /// `east-looking` or `west-looking` (from the sign of u_E); null when |u_E| is too small.
    pub look_direction: Option<String>,
    /// Ground→satellite unit vector (east, north, up); with per-point angles, the normalised
    /// mean over the dataset's retained points. Null when no point was retained.
    pub unit_enu: Option<[f64; 3]>,
    /// `scene angles` or `mean of per-point angles`.
    pub unit_vector_from: String,
    /// Scene incidence angle, degrees (null with per-point angles).
    pub incidence_deg: Option<f64>,
    /// Scene heading, degrees clockwise from north (null with per-point angles).
    pub heading_deg: Option<f64>,
    /// What re-referencing to the common area did; null without `[reference]`.
    pub reference: Option<crate::ingest::reference::DatasetReference>,
}

/// The `[reference]` area as used.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CommonReference {
    /// Centre, in `crs`.
    pub point: [f64; 2],
    /// CRS of the centre.
    pub crs: String,
    /// Radius, m.
    pub radius_m: f64,
    /// Fewest coherent points required per dataset.
    pub min_points: usize,
}

/// The whole results.json document.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Results {
    /// Portfolio record.
    pub portfolio: PortfolioResult,
    /// One record per structure, input order.
    pub structures: Vec<StructureResult>,
}

/// A per-structure detail file (`details/<stem>.json`) as read back: the nested detail the
/// compact record leaves out. Each part is null when it was not computed (the record's
/// `status_reasons` say why). Written by `assess::StructureDetail`.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
pub struct DetailRecord {
    /// Structure id.
    pub id: String,
    /// Time-series detail (structure series, fits, decomposition).
    #[serde(default)]
    pub series: serde_json::Value,
    /// Metrics detail (axes, profiles, zones, uncertainty).
    #[serde(default)]
    pub metrics: serde_json::Value,
    /// Damage detail (per-zone strains, screening flags, category probabilities).
    #[serde(default)]
    pub damage: serde_json::Value,
    /// Evidence grade with its reasons and inputs.
    #[serde(default)]
    pub grade: serde_json::Value,
    /// Works screening detail (stages, sections, predicted against observed, face history).
    #[serde(default)]
    pub works: serde_json::Value,
    /// One row per point of the structure itself (role `structure`).
    #[serde(default)]
    pub points: Vec<DetailPointRecord>,
}

/// One member point of a structure in its detail file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DetailPointRecord {
    /// Dataset name.
    pub dataset: String,
    /// Point id.
    pub point_id: String,
    /// `structure` | `surroundings`.
    pub role: String,
    /// Easting in the analysis CRS, m.
    pub x: f64,
    /// Northing in the analysis CRS, m.
    pub y: f64,
    /// `kept` | `rejected`.
    pub status: String,
    /// Rejection reason (null when kept).
    pub reason: Option<String>,
    /// Vertical velocity projected from LOS, mm/yr (+ up), when computed.
    pub vertical_velocity_mm_per_yr: Option<f64>,
}

impl DetailRecord {
    /// Read the detail file `rel` of the output folder `dir`.
    pub fn read(dir: &std::path::Path, rel: &str) -> anyhow::Result<DetailRecord> {
        use anyhow::Context;
        let path = dir.join(rel);
        let bytes = std::fs::read(&path)
            .with_context(|| format!("cannot read the detail file {}", path.display()))?;
        serde_json::from_slice(&bytes).map_err(|e| {
            anyhow::anyhow!(
                "{}: line {}: not a Plinth detail file ({e}); re-run `plinth assess` to rewrite it",
                path.display(),
                e.line()
            )
        })
    }
}
