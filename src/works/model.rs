//! The `[works]` section of the portfolio file: planned or ongoing tunnels and excavations, and the
//! optional relative-stiffness modification factors, as written by the user and as validated.
//!
//! Owns the raw TOML shapes (unknown keys are errors), the validated [`WorksSpec`] and
//! [`validate`], whose every error names the key (`works.tunnels[0].axis_depth_m`) and the fix.
//! Coordinates stay in the CRS they were written in (lon/lat EPSG:4326 by default); conversion to
//! the analysis CRS is [`super::geometry`]. It does no file I/O and computes no movements.

use chrono::NaiveDate;
use serde::{Deserialize, Serialize};
use std::path::Path;

use crate::damage::greenfield::ExcavationSoil;
use crate::error::InputError;

/// Default CRS of works coordinates: WGS84 longitude/latitude.
pub const DEFAULT_WORKS_CRS: &str = "EPSG:4326";

/// `[works]` as written. Unknown keys are errors.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawWorks {
    crs: Option<String>,
    #[serde(default)]
    tunnels: Vec<RawTunnel>,
    #[serde(default)]
    excavations: Vec<RawExcavation>,
    #[serde(default)]
    stiffness: Vec<RawStiffness>,
}

/// A number for every vertex / segment alike, or one value per vertex or per segment.
#[derive(Debug, Clone, Deserialize)]
#[serde(untagged)]
enum NumberOrList {
    One(f64),
    Many(Vec<f64>),
}

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawTunnel {
    name: String,
    crs: Option<String>,
    alignment: Vec<[f64; 2]>,
    axis_depth_m: NumberOrList,
    diameter_m: NumberOrList,
    volume_loss_percent: f64,
    trough_width_k: f64,
    #[serde(default)]
    progress: Vec<RawProgress>,
}

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawProgress {
    date: toml::Value,
    chainage_m: f64,
}

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawExcavation {
    name: String,
    crs: Option<String>,
    outline: Vec<[f64; 2]>,
    depth_m: f64,
    support: Support,
    profile: ExcavationSoil,
    max_settlement_mm: Option<f64>,
    max_settlement_percent_of_depth: Option<f64>,
}

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawStiffness {
    #[serde(default)]
    structures: Vec<String>,
    deflection_ratio_sagging: Option<f64>,
    deflection_ratio_hogging: Option<f64>,
    horizontal_strain_tensile: Option<f64>,
    horizontal_strain_compressive: Option<f64>,
    source: Option<String>,
}

/// Support of an excavation's walls. Informative: the Clough & O'Rourke (1990) envelope is chosen
/// by `profile` and scaled by the given maximum settlement; the support type is recorded so that
/// the report can state what the maximum settlement was judged for.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Support {
    /// Cantilever wall.
    Cantilever,
    /// Propped or strutted wall.
    Propped,
    /// Anchored (tied-back) wall.
    Anchored,
    /// Top-down construction with the floor slabs as props.
    TopDown,
    /// Anything else (say what in the report notes).
    Other,
}

/// One recorded face position: on `date` the tunnel face was at `chainage_m`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct FaceProgress {
    /// Date of the record.
    pub date: NaiveDate,
    /// Face chainage, m along the alignment from its first vertex.
    pub chainage_m: f64,
}

/// A validated tunnel drive.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TunnelSpec {
    /// Unique name.
    pub name: String,
    /// CRS of `alignment`.
    pub crs: String,
    /// Alignment vertices (x, y) in `crs`, in the drive direction (≥ 2, no repeated vertex).
    pub alignment: Vec<[f64; 2]>,
    /// Axis depth z0 per segment, m below ground (per-vertex input: mean of the segment's ends).
    pub axis_depth_m: Vec<f64>,
    /// Excavated diameter D per segment, m (per-vertex input: mean of the segment's ends).
    pub diameter_m: Vec<f64>,
    /// Volume loss V_L, % of the excavated face area.
    pub volume_loss_percent: f64,
    /// Trough width parameter K (i = K·z0), dimensionless.
    pub trough_width_k: f64,
    /// Face positions over time, dates strictly increasing, chainage not decreasing. Empty = no
    /// dates: the whole alignment is treated as built.
    pub progress: Vec<FaceProgress>,
}

/// A validated excavation.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ExcavationSpec {
    /// Unique name.
    pub name: String,
    /// CRS of `outline`.
    pub crs: String,
    /// Outline vertices (x, y) in `crs`, open ring (a closing vertex is dropped), ≥ 3.
    pub outline: Vec<[f64; 2]>,
    /// Excavation depth H_e, m.
    pub depth_m: f64,
    /// Wall support (informative).
    pub support: Support,
    /// Clough & O'Rourke (1990) envelope.
    pub profile: ExcavationSoil,
    /// Maximum settlement δ_vm behind the wall, mm (given, or percent of depth × depth).
    pub max_settlement_mm: f64,
    /// How δ_vm was given: `"max_settlement_mm"` or `"max_settlement_percent_of_depth"`.
    pub max_settlement_given_as: String,
}

/// Relative-stiffness modification factors M (building value over greenfield value), applied to
/// the **predicted** greenfield deflection ratio and horizontal strain only, never to measured
/// movement (damage-relations.md §6.5 \[Rec\]). Default 1 (greenfield, conservative).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StiffnessFactors {
    /// Structure ids the factors apply to; empty = every structure without a specific entry.
    pub structures: Vec<String>,
    /// M^DRsag, in (0, 1].
    pub deflection_ratio_sagging: f64,
    /// M^DRhog, in (0, 1].
    pub deflection_ratio_hogging: f64,
    /// M^εht, in (0, 1].
    pub horizontal_strain_tensile: f64,
    /// M^εhc, in (0, 1].
    pub horizontal_strain_compressive: f64,
    /// Where the factors come from (e.g. a design-curve reading); shown in reports.
    pub source: Option<String>,
}

impl StiffnessFactors {
    /// All factors 1: the greenfield prediction unchanged.
    pub fn greenfield() -> StiffnessFactors {
        StiffnessFactors {
            structures: vec![],
            deflection_ratio_sagging: 1.0,
            deflection_ratio_hogging: 1.0,
            horizontal_strain_tensile: 1.0,
            horizontal_strain_compressive: 1.0,
            source: None,
        }
    }

    /// True when every factor is 1.
    pub fn is_greenfield(&self) -> bool {
        [
            self.deflection_ratio_sagging,
            self.deflection_ratio_hogging,
            self.horizontal_strain_tensile,
            self.horizontal_strain_compressive,
        ]
        .iter()
        .all(|m| *m == 1.0)
    }
}

/// The validated `[works]` section.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct WorksSpec {
    /// Tunnel drives.
    pub tunnels: Vec<TunnelSpec>,
    /// Excavations.
    pub excavations: Vec<ExcavationSpec>,
    /// Modification-factor entries, in file order.
    pub stiffness: Vec<StiffnessFactors>,
}

impl WorksSpec {
    /// The factors for structure `id`: the first entry naming it, else the first entry naming
    /// no structure, else all 1.
    pub fn stiffness_for(&self, id: &str) -> StiffnessFactors {
        self.stiffness
            .iter()
            .find(|f| f.structures.iter().any(|s| s == id))
            .or_else(|| self.stiffness.iter().find(|f| f.structures.is_empty()))
            .cloned()
            .unwrap_or_else(StiffnessFactors::greenfield)
    }
}

fn err(file: &Path, key: &str, message: impl Into<String>, hint: impl Into<String>) -> InputError {
    InputError::new(file, format!("key {key}"), message, hint)
}

fn check_vertices(
    file: &Path,
    key: &str,
    crs: &str,
    vertices: &[[f64; 2]],
    min: usize,
) -> Result<(), InputError> {
    let geographic = crate::coords::Crs::parse(crs)
        .map(|c| c.is_geographic())
        .unwrap_or(false);
    if vertices.len() < min {
        return Err(err(
            file,
            key,
            format!(
                "{} vertices given, at least {min} are needed",
                vertices.len()
            ),
            "list the vertices as [[x, y], [x, y], ...] (longitude, latitude by default)",
        ));
    }
    for (k, v) in vertices.iter().enumerate() {
        if !v[0].is_finite() || !v[1].is_finite() {
            return Err(err(
                file,
                &format!("{key}[{k}]"),
                "vertex coordinate is not a finite number",
                "give each vertex as [x, y]",
            ));
        }
        if geographic && (v[0].abs() > 180.0 || v[1].abs() > 90.0) {
            return Err(err(
                file,
                &format!("{key}[{k}]"),
                format!(
                    "({}, {}) is not a longitude/latitude in degrees",
                    v[0], v[1]
                ),
                "works coordinates are lon/lat (EPSG:4326) unless `crs` says otherwise; set works.crs for projected metres",
            ));
        }
        if k > 0 && vertices[k - 1] == *v {
            return Err(err(
                file,
                &format!("{key}[{k}]"),
                "vertex repeats the previous one (zero-length segment)",
                "remove the duplicate vertex",
            ));
        }
    }
    Ok(())
}

/// Per-segment values from a scalar, a per-vertex list (segment = mean of its ends) or a
/// per-segment list, each within `(lo, hi]`.
fn per_segment(
    file: &Path,
    key: &str,
    v: &NumberOrList,
    n_vertices: usize,
    lo: f64,
    hi: f64,
    hint: &str,
) -> Result<Vec<f64>, InputError> {
    let n_seg = n_vertices.saturating_sub(1);
    let vals: Vec<f64> = match v {
        NumberOrList::One(x) => vec![*x],
        NumberOrList::Many(xs) => xs.clone(),
    };
    for (k, x) in vals.iter().enumerate() {
        if !(x.is_finite() && *x > lo && *x <= hi) {
            let at = match v {
                NumberOrList::One(_) => key.to_string(),
                NumberOrList::Many(_) => format!("{key}[{k}]"),
            };
            return Err(err(file, &at, format!("{x} is outside ({lo}, {hi}]"), hint));
        }
    }
    match v {
        NumberOrList::One(x) => Ok(vec![*x; n_seg]),
        NumberOrList::Many(xs) if xs.len() == n_vertices => {
            Ok(xs.windows(2).map(|w| 0.5 * (w[0] + w[1])).collect())
        }
        NumberOrList::Many(xs) if xs.len() == n_seg => Ok(xs.clone()),
        NumberOrList::Many(xs) => Err(err(
            file,
            key,
            format!(
                "{} values given for {n_vertices} vertices: give one number, one per vertex ({n_vertices}) or one per segment ({n_seg})",
                xs.len()
            ),
            hint,
        )),
    }
}

fn parse_date(v: &toml::Value, file: &Path, key: &str) -> Result<NaiveDate, InputError> {
    let text = match v {
        toml::Value::String(s) => s.clone(),
        toml::Value::Datetime(d) => d.to_string(),
        other => {
            return Err(err(
                file,
                key,
                format!("expected an ISO 8601 date, found {}", other.type_str()),
                format!("write {key} = \"2024-01-31\""),
            ));
        }
    };
    NaiveDate::parse_from_str(text.trim(), "%Y-%m-%d").map_err(|_| {
        err(
            file,
            key,
            format!("`{text}` is not an ISO 8601 date (YYYY-MM-DD)"),
            format!("write {key} = \"2024-01-31\""),
        )
    })
}

/// Validate the raw `[works]` section. `file` is the portfolio file (named in every error).
///
/// Ranges (plausibility guards, not design limits): axis depth 0–200 m and deeper than D/2;
/// diameter 0–30 m; V_L 0–10 %; K 0.1–1.0; excavation depth 0–100 m; δ_vm 0–1000 mm or 0–5 % of
/// the depth (exactly one of the two); modification factors in (0, 1].
pub fn validate(raw: &RawWorks, file: &Path) -> Result<WorksSpec, InputError> {
    let default_crs = raw
        .crs
        .clone()
        .unwrap_or_else(|| DEFAULT_WORKS_CRS.to_string());
    crate::portfolio::check_crs(&default_crs, file, "works.crs")?;
    if raw.tunnels.is_empty() && raw.excavations.is_empty() {
        return Err(err(
            file,
            "works",
            "the [works] section has no tunnels and no excavations",
            "add [[works.tunnels]] or [[works.excavations]], or remove [works]",
        ));
    }
    let mut names: Vec<String> = Vec::new();
    let mut check_name = |name: &str, key: &str| -> Result<(), InputError> {
        if name.trim().is_empty() {
            return Err(err(
                file,
                key,
                "name is empty",
                "give each tunnel and excavation a short unique name",
            ));
        }
        if names.iter().any(|n| n == name.trim()) {
            return Err(err(
                file,
                key,
                format!("name `{name}` is used twice"),
                "tunnel and excavation names must be unique",
            ));
        }
        names.push(name.trim().to_string());
        Ok(())
    };

    let mut tunnels = Vec::new();
    for (i, t) in raw.tunnels.iter().enumerate() {
        let k = |f: &str| format!("works.tunnels[{i}].{f}");
        check_name(&t.name, &k("name"))?;
        let crs = t.crs.clone().unwrap_or_else(|| default_crs.clone());
        crate::portfolio::check_crs(&crs, file, &k("crs"))?;
        check_vertices(file, &k("alignment"), &crs, &t.alignment, 2)?;
        let n = t.alignment.len();
        let z0 = per_segment(
            file,
            &k("axis_depth_m"),
            &t.axis_depth_m,
            n,
            0.0,
            200.0,
            "depth of the tunnel axis below ground, m (e.g. 20.0)",
        )?;
        let d = per_segment(
            file,
            &k("diameter_m"),
            &t.diameter_m,
            n,
            0.0,
            30.0,
            "excavated tunnel diameter, m (e.g. 6.0)",
        )?;
        for (s, (z, dd)) in z0.iter().zip(&d).enumerate() {
            if *z <= dd / 2.0 {
                return Err(err(
                    file,
                    &k("axis_depth_m"),
                    format!(
                        "segment {s}: axis depth {z} m is not below the crown (diameter {dd} m): the tunnel would break the surface"
                    ),
                    "axis_depth_m is the depth of the tunnel axis (centre line), not of the crown",
                ));
            }
        }
        let vl = t.volume_loss_percent;
        if !(vl.is_finite() && vl > 0.0 && vl <= 10.0) {
            return Err(err(
                file,
                &k("volume_loss_percent"),
                format!("volume loss {vl} % is outside (0, 10] %"),
                "V_L in percent of the face area: typically 0.5–2 % (1.0 means 1 %, not 100 %)",
            ));
        }
        let kk = t.trough_width_k;
        if !(kk.is_finite() && (0.1..=1.0).contains(&kk)) {
            return Err(err(
                file,
                &k("trough_width_k"),
                format!("trough width parameter K = {kk} is outside 0.1–1.0"),
                "K ≈ 0.5 for clays, 0.25–0.35 for granular soils (i = K·z0)",
            ));
        }
        let mut progress: Vec<FaceProgress> = Vec::new();
        for (j, p) in t.progress.iter().enumerate() {
            let pk = format!("works.tunnels[{i}].progress[{j}]");
            let date = parse_date(&p.date, file, &format!("{pk}.date"))?;
            if !(p.chainage_m.is_finite() && p.chainage_m >= 0.0) {
                return Err(err(
                    file,
                    &format!("{pk}.chainage_m"),
                    format!("chainage {} m must be finite and ≥ 0", p.chainage_m),
                    "chainage is measured in metres along the alignment from its first vertex",
                ));
            }
            if let Some(prev) = progress.last() {
                if date <= prev.date {
                    return Err(err(
                        file,
                        &format!("{pk}.date"),
                        format!("{date} is not after the previous record ({})", prev.date),
                        "list progress records in date order, one per date",
                    ));
                }
                if p.chainage_m < prev.chainage_m {
                    return Err(err(
                        file,
                        &format!("{pk}.chainage_m"),
                        format!(
                            "face chainage {} m goes back from {} m",
                            p.chainage_m, prev.chainage_m
                        ),
                        "the face only advances: list the alignment vertices in the drive direction",
                    ));
                }
            }
            progress.push(FaceProgress {
                date,
                chainage_m: p.chainage_m,
            });
        }
        tunnels.push(TunnelSpec {
            name: t.name.trim().to_string(),
            crs,
            alignment: t.alignment.clone(),
            axis_depth_m: z0,
            diameter_m: d,
            volume_loss_percent: vl,
            trough_width_k: kk,
            progress,
        });
    }

    let mut excavations = Vec::new();
    for (i, e) in raw.excavations.iter().enumerate() {
        let k = |f: &str| format!("works.excavations[{i}].{f}");
        check_name(&e.name, &k("name"))?;
        let crs = e.crs.clone().unwrap_or_else(|| default_crs.clone());
        crate::portfolio::check_crs(&crs, file, &k("crs"))?;
        let mut outline = e.outline.clone();
        if outline.len() > 1 && outline.first() == outline.last() {
            outline.pop();
        }
        check_vertices(file, &k("outline"), &crs, &outline, 3)?;
        let he = e.depth_m;
        if !(he.is_finite() && he > 0.0 && he <= 100.0) {
            return Err(err(
                file,
                &k("depth_m"),
                format!("excavation depth {he} m is outside (0, 100] m"),
                "give the final excavation depth H_e in metres",
            ));
        }
        let (dvm, given) = match (e.max_settlement_mm, e.max_settlement_percent_of_depth) {
            (Some(mm), None) => {
                if !(mm.is_finite() && mm > 0.0 && mm <= 1000.0) {
                    return Err(err(
                        file,
                        &k("max_settlement_mm"),
                        format!("{mm} mm is outside (0, 1000] mm"),
                        "δ_vm, the largest settlement behind the wall, in mm",
                    ));
                }
                (mm, "max_settlement_mm")
            }
            (None, Some(pct)) => {
                if !(pct.is_finite() && pct > 0.0 && pct <= 5.0) {
                    return Err(err(
                        file,
                        &k("max_settlement_percent_of_depth"),
                        format!("{pct} % is outside (0, 5] %"),
                        "δ_vm as % of H_e: often about 0.15 % (sands, stiff clays), up to about 2 % (soft clays) [from memory]",
                    ));
                }
                (pct / 100.0 * he * 1000.0, "max_settlement_percent_of_depth")
            }
            _ => {
                return Err(err(
                    file,
                    &k("max_settlement_mm"),
                    "give exactly one of max_settlement_mm and max_settlement_percent_of_depth",
                    "the Clough & O'Rourke envelopes are scaled by the maximum settlement δ_vm, a project input",
                ));
            }
        };
        excavations.push(ExcavationSpec {
            name: e.name.trim().to_string(),
            crs,
            outline,
            depth_m: he,
            support: e.support,
            profile: e.profile,
            max_settlement_mm: dvm,
            max_settlement_given_as: given.to_string(),
        });
    }

    let mut stiffness = Vec::new();
    for (i, s) in raw.stiffness.iter().enumerate() {
        let mut f = StiffnessFactors::greenfield();
        f.structures = s.structures.clone();
        f.source = s.source.clone();
        let entries = [
            ("deflection_ratio_sagging", s.deflection_ratio_sagging),
            ("deflection_ratio_hogging", s.deflection_ratio_hogging),
            ("horizontal_strain_tensile", s.horizontal_strain_tensile),
            (
                "horizontal_strain_compressive",
                s.horizontal_strain_compressive,
            ),
        ];
        for (name, v) in entries {
            let Some(m) = v else { continue };
            if !(m.is_finite() && m > 0.0 && m <= 1.0) {
                return Err(err(
                    file,
                    &format!("works.stiffness[{i}].{name}"),
                    format!("modification factor {m} is outside (0, 1]"),
                    "a relative-stiffness factor is building over greenfield value; 1 = greenfield (default)",
                ));
            }
            match name {
                "deflection_ratio_sagging" => f.deflection_ratio_sagging = m,
                "deflection_ratio_hogging" => f.deflection_ratio_hogging = m,
                "horizontal_strain_tensile" => f.horizontal_strain_tensile = m,
                _ => f.horizontal_strain_compressive = m,
            }
        }
        stiffness.push(f);
    }

    Ok(WorksSpec {
        tunnels,
        excavations,
        stiffness,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse(text: &str) -> Result<WorksSpec, InputError> {
        #[derive(Deserialize)]
        struct Wrap {
            works: RawWorks,
        }
        let w: Wrap = toml::from_str(text)
            .map_err(|e| InputError::new(Path::new("p.toml"), "", e.message().to_string(), ""))?;
        validate(&w.works, Path::new("p.toml"))
    }

    const TUNNEL: &str = "[[works.tunnels]]\nname = \"A\"\nalignment = [[9.0, 45.0], [9.01, 45.0], [9.02, 45.001]]\naxis_depth_m = [20, 22, 24]\ndiameter_m = 6\nvolume_loss_percent = 1.0\ntrough_width_k = 0.5\n";

    #[test]
    fn per_vertex_values_become_segment_means() {
        let w = parse(TUNNEL).unwrap();
        assert_eq!(w.tunnels[0].axis_depth_m, vec![21.0, 23.0]);
        assert_eq!(w.tunnels[0].diameter_m, vec![6.0, 6.0]);
        assert_eq!(w.tunnels[0].crs, "EPSG:4326");
        assert!(w.stiffness_for("X").is_greenfield());
    }

    #[test]
    fn bad_inputs_name_the_key() {
        let cases = [
            (
                TUNNEL.replace("volume_loss_percent = 1.0", "volume_loss_percent = 0.0"),
                "key works.tunnels[0].volume_loss_percent",
            ),
            (
                TUNNEL.replace("axis_depth_m = [20, 22, 24]", "axis_depth_m = [20, 22, 24, 26]"),
                "key works.tunnels[0].axis_depth_m",
            ),
            (
                TUNNEL.replace("axis_depth_m = [20, 22, 24]", "axis_depth_m = 2.0"),
                "key works.tunnels[0].axis_depth_m",
            ),
            (
                TUNNEL.replace("trough_width_k = 0.5", "trough_width_k = 5"),
                "key works.tunnels[0].trough_width_k",
            ),
            (
                TUNNEL.replace("[9.01, 45.0]", "[9.0, 45.0]"),
                "key works.tunnels[0].alignment[1]",
            ),
            (
                TUNNEL.replace("[9.01, 45.0]", "[500000.0, 45.0]"),
                "key works.tunnels[0].alignment[1]",
            ),
            (
                format!(
                    "{TUNNEL}[[works.tunnels.progress]]\ndate = \"2024-01-01\"\nchainage_m = 50\n[[works.tunnels.progress]]\ndate = \"2023-01-01\"\nchainage_m = 60\n"
                ),
                "key works.tunnels[0].progress[1].date",
            ),
            (
                format!(
                    "{TUNNEL}[[works.tunnels.progress]]\ndate = \"2024-01-01\"\nchainage_m = 50\n[[works.tunnels.progress]]\ndate = \"2024-02-01\"\nchainage_m = 40\n"
                ),
                "key works.tunnels[0].progress[1].chainage_m",
            ),
            (
                format!("{TUNNEL}[[works.stiffness]]\ndeflection_ratio_hogging = 1.5\n"),
                "key works.stiffness[0].deflection_ratio_hogging",
            ),
            (
                format!("{TUNNEL}{}", TUNNEL.replace("tunnels[0]", "x")),
                "key works.tunnels[1].name",
            ),
            ("[works]\ncrs = \"EPSG:4326\"\n".to_string(), "key works"),
            (
                "[[works.excavations]]\nname = \"E\"\noutline = [[9.0, 45.0], [9.001, 45.0], [9.001, 45.001]]\ndepth_m = 10\nsupport = \"propped\"\nprofile = \"stiff-clay\"\n".to_string(),
                "key works.excavations[0].max_settlement_mm",
            ),
            (
                "[[works.excavations]]\nname = \"E\"\noutline = [[9.0, 45.0], [9.001, 45.0], [9.001, 45.001]]\ndepth_m = 10\nsupport = \"propped\"\nprofile = \"stiff-clay\"\nmax_settlement_percent_of_depth = 15\n".to_string(),
                "key works.excavations[0].max_settlement_percent_of_depth",
            ),
            (
                "[[works.excavations]]\nname = \"E\"\noutline = [[9.0, 45.0], [9.001, 45.0]]\ndepth_m = 10\nsupport = \"propped\"\nprofile = \"stiff-clay\"\nmax_settlement_mm = 15\n".to_string(),
                "key works.excavations[0].outline",
            ),
        ];
        for (text, location) in cases {
            let e = parse(&text).unwrap_err();
            assert_eq!(e.location, location, "{e}");
        }
    }

    #[test]
    fn unknown_keys_and_bad_enums_are_rejected() {
        assert!(
            parse(&TUNNEL.replace("trough_width_k", "trough_k"))
                .unwrap_err()
                .message
                .contains("trough_k")
        );
        let e = parse(
            "[[works.excavations]]\nname = \"E\"\noutline = [[9.0, 45.0], [9.001, 45.0], [9.001, 45.001]]\ndepth_m = 10\nsupport = \"propped\"\nprofile = \"gravel\"\nmax_settlement_mm = 15\n",
        )
        .unwrap_err();
        assert!(e.message.contains("gravel"), "{e}");
    }

    #[test]
    fn excavation_percent_of_depth_and_stiffness_lookup() {
        let w = parse(
            "[[works.excavations]]\nname = \"E\"\noutline = [[9.0, 45.0], [9.001, 45.0], [9.001, 45.001], [9.0, 45.0]]\ndepth_m = 10\nsupport = \"anchored\"\nprofile = \"soft-clay\"\nmax_settlement_percent_of_depth = 0.15\n[[works.stiffness]]\ndeflection_ratio_hogging = 0.5\n[[works.stiffness]]\nstructures = [\"B-2\"]\ndeflection_ratio_hogging = 0.25\nsource = \"design curve reading\"\n",
        )
        .unwrap();
        let e = &w.excavations[0];
        assert_eq!(e.outline.len(), 3, "closing vertex dropped");
        // 0.15 % of 10 m = 15 mm.
        assert!((e.max_settlement_mm - 15.0).abs() < 1e-12);
        assert_eq!(w.stiffness_for("B-2").deflection_ratio_hogging, 0.25);
        assert_eq!(w.stiffness_for("B-9").deflection_ratio_hogging, 0.5);
        assert_eq!(w.stiffness_for("B-9").deflection_ratio_sagging, 1.0);
    }
}
