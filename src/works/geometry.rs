//! The works converted to the analysis CRS once per run, and the combined greenfield movement
//! field they predict.
//!
//! Owns [`WorksGeometry`]: [`WorksGeometry::project`] (from the validated [`WorksSpec`] in lon/lat
//! or any EPSG CRS to the metric analysis CRS, building the per-segment troughs) and
//! [`WorksGeometry::movement`] (superposition of every tunnel segment and every excavation at a
//! point and date). Superposition of greenfield movements from several sources is linear
//! (common practice, no single source \[P\]). It does no file I/O.
//!
//! Distances and chainages are measured in the analysis CRS grid: its scale factor (within 0.04 %
//! in a UTM zone) is neglected, and that is stated in the screening assumptions.

use std::path::Path;

use chrono::NaiveDate;
use serde::Serialize;

use crate::coords::{Crs, Transformer};
use crate::damage::greenfield::GaussianTrough;
use crate::error::InputError;

use super::excavation::ExcavationGeometry;
use super::model::{StiffnessFactors, WorksSpec};
use super::tunnel::{Segment, TunnelGeometry};

/// Every tunnel and excavation in the analysis CRS.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct WorksGeometry {
    /// Analysis CRS, e.g. `EPSG:32632`.
    pub analysis_crs: String,
    /// Tunnel drives.
    pub tunnels: Vec<TunnelGeometry>,
    /// Excavations.
    pub excavations: Vec<ExcavationGeometry>,
    /// Modification-factor entries (from [`WorksSpec::stiffness`]).
    #[serde(skip)]
    pub spec: WorksSpec,
}

/// Predicted greenfield movement at one point.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Movement {
    /// Settlement, m (+ down).
    pub settlement_m: f64,
    /// Horizontal displacement (x, y) in the analysis CRS, m (tunnels only).
    pub horizontal_m: [f64; 2],
    /// Settlement from excavations alone, m (they predict no horizontal movement).
    pub excavation_settlement_m: f64,
}

fn transform_all(
    t: &Transformer,
    vs: &[[f64; 2]],
    file: &Path,
    key: &str,
) -> Result<Vec<[f64; 2]>, InputError> {
    vs.iter()
        .enumerate()
        .map(|(k, v)| {
            t.apply(v[0], v[1]).map(|(x, y)| [x, y]).map_err(|e| {
                InputError::new(
                    file,
                    format!("key {key}[{k}]"),
                    format!("cannot convert the vertex to the analysis CRS: {e}"),
                    "check the works coordinates and their `crs`",
                )
            })
        })
        .collect()
}

impl WorksGeometry {
    /// Convert the works to the analysis CRS and build the per-segment troughs
    /// (i = K·z0, S_max from V_L and D, [`GaussianTrough::from_tunnel`]).
    ///
    /// Fails with an error naming the key when a vertex cannot be converted, a segment collapses
    /// in the analysis CRS, or a face chainage lies beyond the end of the alignment (+1 m
    /// tolerance for the CRS scale).
    pub fn project(
        spec: &WorksSpec,
        analysis: &Crs,
        file: &Path,
    ) -> Result<WorksGeometry, InputError> {
        let mut tunnels = Vec::new();
        for (ti, t) in spec.tunnels.iter().enumerate() {
            let key = format!("works.tunnels[{ti}]");
            let src = Crs::parse(&t.crs)
                .map_err(|e| InputError::new(file, format!("key {key}.crs"), e.to_string(), ""))?;
            let tr = Transformer::new(&src, analysis);
            let v = transform_all(&tr, &t.alignment, file, &format!("{key}.alignment"))?;
            let mut segments = Vec::new();
            let mut chainage = 0.0;
            for (k, w) in v.windows(2).enumerate() {
                let length_m = ((w[1][0] - w[0][0]).powi(2) + (w[1][1] - w[0][1]).powi(2)).sqrt();
                if length_m.is_nan() || length_m <= 1e-3 {
                    return Err(InputError::new(
                        file,
                        format!("key {key}.alignment[{}]", k + 1),
                        "segment is shorter than 1 mm in the analysis CRS",
                        "remove the repeated vertex",
                    ));
                }
                let trough = GaussianTrough::from_tunnel(
                    t.diameter_m[k],
                    t.axis_depth_m[k],
                    t.trough_width_k,
                    t.volume_loss_percent / 100.0,
                )
                .map_err(|e| {
                    InputError::new(
                        file,
                        format!("key {key}"),
                        format!("segment {k}: {e}"),
                        "check axis_depth_m, diameter_m, volume_loss_percent and trough_width_k",
                    )
                })?;
                segments.push(Segment {
                    start: w[0],
                    end: w[1],
                    chainage_start_m: chainage,
                    length_m,
                    diameter_m: t.diameter_m[k],
                    trough,
                });
                chainage += length_m;
            }
            for (j, p) in t.progress.iter().enumerate() {
                if p.chainage_m > chainage + 1.0 {
                    return Err(InputError::new(
                        file,
                        format!("key {key}.progress[{j}].chainage_m"),
                        format!(
                            "face chainage {} m is beyond the end of the alignment ({chainage:.1} m in the analysis CRS)",
                            p.chainage_m
                        ),
                        "chainage is measured along the alignment from its first vertex",
                    ));
                }
            }
            tunnels.push(TunnelGeometry {
                name: t.name.clone(),
                segments,
                length_m: chainage,
                volume_loss_percent: t.volume_loss_percent,
                trough_width_k: t.trough_width_k,
                progress: t.progress.clone(),
            });
        }
        let mut excavations = Vec::new();
        for (ei, e) in spec.excavations.iter().enumerate() {
            let key = format!("works.excavations[{ei}]");
            let src = Crs::parse(&e.crs).map_err(|er| {
                InputError::new(file, format!("key {key}.crs"), er.to_string(), "")
            })?;
            let tr = Transformer::new(&src, analysis);
            let outline = transform_all(&tr, &e.outline, file, &format!("{key}.outline"))?;
            excavations.push(ExcavationGeometry {
                name: e.name.clone(),
                outline,
                depth_m: e.depth_m,
                profile: e.profile,
                support: e.support,
                max_settlement_m: e.max_settlement_mm / 1000.0,
            });
        }
        Ok(WorksGeometry {
            analysis_crs: analysis.name(),
            tunnels,
            excavations,
            spec: spec.clone(),
        })
    }

    /// Predicted greenfield movement at (x, y) on `date` (None = all works complete). Tunnels with
    /// progress records use the face position on that date; tunnels without records and all
    /// excavations are complete whatever the date.
    pub fn movement(&self, x: f64, y: f64, date: Option<NaiveDate>) -> Movement {
        let mut m = Movement {
            settlement_m: 0.0,
            horizontal_m: [0.0, 0.0],
            excavation_settlement_m: 0.0,
        };
        for t in &self.tunnels {
            let face = date.and_then(|d| t.face_chainage_m(d));
            let (s, u) = t.movement(x, y, face);
            m.settlement_m += s;
            m.horizontal_m[0] += u[0];
            m.horizontal_m[1] += u[1];
        }
        for e in &self.excavations {
            let s = e.settlement_m(x, y);
            m.settlement_m += s;
            m.excavation_settlement_m += s;
        }
        m
    }

    /// True when any tunnel has face records (predictions then depend on the date).
    pub fn has_dates(&self) -> bool {
        self.tunnels.iter().any(|t| !t.progress.is_empty())
    }

    /// Modification factors for a structure (see [`WorksSpec::stiffness_for`]).
    pub fn stiffness_for(&self, id: &str) -> StiffnessFactors {
        self.spec.stiffness_for(id)
    }
}
