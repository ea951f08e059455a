//! Deterministic point placement and LOS time series for a [`Scenario`].
//!
//! Owns where points go (inside footprints, in the association buffer, low-coherence points,
//! ground points in the surroundings ring), their coherence and noise level, and their LOS values
//! per acquisition: the exact projection u·d of the planted motion relative to the first epoch,
//! plus noise, a common per-epoch offset, missing values and planted unwrapping jumps.
//! It writes nothing (see `write`) and computes no summary truth (see `truth`).
//!
//! Determinism: two `ChaCha8Rng` streams per geometry, both from the scenario seed — one for
//! placement and coherence, one for noise — so the noise-free and the noisy run of a scenario
//! place exactly the same points. No clock, no hash-map iteration.

use chrono::NaiveDate;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use serde::Serialize;

use super::SynthError;
use super::frame::los_unit_enu;
use super::model::Scenario;

/// Why a point was placed where it is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum PointRole {
    /// Good point inside its structure's footprint.
    Inside,
    /// Good point outside the footprint, within the association buffer of its structure.
    Buffer,
    /// Low-coherence point inside the footprint (below the 0.7 default threshold).
    LowCoherence,
    /// Ground point in the surroundings ring of a structure, outside every buffer.
    Ground,
}

/// One generated measurement point.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct GeneratedPoint {
    /// Point id, unique within its file.
    pub id: String,
    /// Structure index the point moves with (None for ground points).
    pub structure: Option<usize>,
    /// Structure index whose surroundings ring a ground point was placed in.
    pub placed_near: usize,
    /// Placement role.
    pub role: PointRole,
    /// Town-frame position, m.
    pub position_m: [f64; 2],
    /// Longitude, degrees.
    pub lon_deg: f64,
    /// Latitude, degrees.
    pub lat_deg: f64,
    /// Temporal coherence written to the file.
    pub coherence: f64,
    /// Per-epoch noise σ, mm (0 in noise-free mode).
    pub sigma_mm: f64,
    /// Planted unwrapping jump: (first epoch index carrying it, jump in mm).
    pub unwrap_jump: Option<(usize, f64)>,
    /// LOS displacement per epoch relative to the first, mm, + towards the satellite; None = missing.
    pub values_mm: Vec<Option<f64>>,
}

/// The points of one viewing geometry.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct GeneratedGeometry {
    /// Acquisition dates.
    pub dates: Vec<NaiveDate>,
    /// Ground-to-satellite unit vector (E, N, U).
    pub los_unit_enu: [f64; 3],
    /// Points in file order.
    pub points: Vec<GeneratedPoint>,
}

/// Everything generated for a scenario.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Generated {
    /// One entry per scenario geometry.
    pub geometries: Vec<GeneratedGeometry>,
}

/// Attempts per point before placement is declared impossible.
const MAX_TRIES: usize = 20_000;
/// Clearance from the buffer edge and from the footprint edge for buffer points, m: keeps the
/// intended association unambiguous.
const EDGE_MARGIN_M: f64 = 0.3;
/// Ground points stay this far outside every buffer, m.
const GROUND_MARGIN_M: f64 = 1.0;

/// Place the points and generate their series.
///
/// Errors when a structure has no usable footprint or a point cannot be placed under the rules
/// (e.g. buffer points requested where neighbouring footprints leave no room).
pub fn generate(sc: &Scenario) -> Result<Generated, SynthError> {
    let mut out = Vec::with_capacity(sc.geometries.len());
    for (g, geom) in sc.geometries.iter().enumerate() {
        let mut place_rng = ChaCha8Rng::seed_from_u64(sc.seed);
        place_rng.set_stream(2 * g as u64 + 1);
        let mut noise_rng = ChaCha8Rng::seed_from_u64(sc.seed);
        noise_rng.set_stream(2 * g as u64 + 2);

        let points = place_points(sc, g, &mut place_rng)?;
        let dates = geom.dates();
        let u = los_unit_enu(geom.incidence_deg, geom.heading_deg);
        let mut points = points;
        assign_jumps(sc, g, &dates, &mut points)?;

        // Common per-epoch offset (zero at the reference epoch).
        let common: Vec<f64> = dates
            .iter()
            .enumerate()
            .map(|(i, _)| {
                if i == 0 || !sc.noise.enabled {
                    0.0
                } else {
                    sc.noise.common_epoch_sigma_mm * normal(&mut noise_rng)
                }
            })
            .collect();

        for p in &mut points {
            let d0 = sc.displacement_enu_mm(p.structure, p.position_m, dates[0], true);
            let los0 = dot(u, d0);
            p.values_mm = Vec::with_capacity(dates.len());
            for (i, date) in dates.iter().enumerate() {
                if i == 0 {
                    p.values_mm.push(Some(0.0));
                    continue;
                }
                let d = sc.displacement_enu_mm(p.structure, p.position_m, *date, true);
                let mut v = dot(u, d) - los0;
                if sc.noise.enabled {
                    v += p.sigma_mm * normal(&mut noise_rng) + common[i];
                }
                if let Some((k, jump_mm)) = p.unwrap_jump {
                    if i >= k {
                        v += jump_mm;
                    }
                }
                let missing = sc.noise.missing_probability > 0.0
                    && noise_rng.random::<f64>() < sc.noise.missing_probability;
                p.values_mm.push(if missing { None } else { Some(v) });
            }
        }
        out.push(GeneratedGeometry {
            dates,
            los_unit_enu: u,
            points,
        });
    }
    Ok(Generated { geometries: out })
}

fn dot(u: [f64; 3], d: [f64; 3]) -> f64 {
    u[0] * d[0] + u[1] * d[1] + u[2] * d[2]
}

fn normal(rng: &mut ChaCha8Rng) -> f64 {
    StandardNormal.sample(rng)
}

fn assign_jumps(
    sc: &Scenario,
    g: usize,
    dates: &[NaiveDate],
    points: &mut [GeneratedPoint],
) -> Result<(), SynthError> {
    for j in sc.unwrap_jumps.iter().filter(|j| j.geometry == g) {
        let k = sc
            .structures
            .iter()
            .position(|s| s.id == j.structure_id)
            .ok_or_else(|| {
                SynthError::Scenario(format!(
                    "unwrapping jump on unknown structure `{}`",
                    j.structure_id
                ))
            })?;
        let epoch = dates
            .iter()
            .position(|d| *d >= j.from_date)
            .filter(|&e| e > 0)
            .ok_or_else(|| {
                SynthError::Scenario(format!(
                    "unwrapping jump date {} is not after the first acquisition of geometry {g}",
                    j.from_date
                ))
            })?;
        // The inside point with the highest coherence (first on ties): its noise is lowest, so the
        // planted error stands out as clearly as in insar-methods.md §5.12 Series E.
        let p = points
            .iter_mut()
            .filter(|p| p.structure == Some(k) && p.role == PointRole::Inside)
            .reduce(|best, p| {
                if p.coherence > best.coherence {
                    p
                } else {
                    best
                }
            })
            .ok_or_else(|| {
                SynthError::Scenario(format!(
                    "unwrapping jump on `{}` but it has no inside point in geometry {g}",
                    j.structure_id
                ))
            })?;
        p.unwrap_jump = Some((epoch, j.cycles as f64 * sc.noise.radar_wavelength_mm / 2.0));
    }
    Ok(())
}

fn place_points(
    sc: &Scenario,
    g: usize,
    rng: &mut ChaCha8Rng,
) -> Result<Vec<GeneratedPoint>, SynthError> {
    let geom = &sc.geometries[g];
    let reach = sc.surroundings_m + sc.buffer_m;
    let boxes: Vec<[f64; 4]> = sc.structures.iter().map(|s| s.footprint.bbox()).collect();
    let mut points = Vec::new();
    let mut counter = 0usize;
    for (k, s) in sc.structures.iter().enumerate() {
        let plan = s.points.get(g).copied().unwrap_or_default();
        if plan == Default::default() {
            continue;
        }
        if s.footprint.long_axis().is_none() {
            return Err(SynthError::Scenario(format!(
                "structure `{}` has a degenerate footprint",
                s.id
            )));
        }
        let b = boxes[k];
        // Structures near enough to matter for the association of points of this one.
        let neighbours: Vec<usize> = (0..sc.structures.len())
            .filter(|&j| {
                j != k
                    && boxes[j][0] <= b[2] + 2.0 * reach
                    && boxes[j][2] >= b[0] - 2.0 * reach
                    && boxes[j][1] <= b[3] + 2.0 * reach
                    && boxes[j][3] >= b[1] - 2.0 * reach
            })
            .collect();
        let fp = &s.footprint;
        let inside_ok = |q: [f64; 2]| {
            fp.contains(q)
                && neighbours
                    .iter()
                    .all(|&j| !sc.structures[j].footprint.contains(q))
        };
        let buffer_ok = |q: [f64; 2]| {
            if fp.contains(q) {
                return false;
            }
            let d = fp.edge_distance_m(q);
            d > EDGE_MARGIN_M
                && d < sc.buffer_m - EDGE_MARGIN_M
                && neighbours.iter().all(|&j| {
                    let o = &sc.structures[j].footprint;
                    !o.contains(q) && o.edge_distance_m(q) > sc.buffer_m + EDGE_MARGIN_M
                })
        };
        let ground_ok = |q: [f64; 2]| {
            let d = fp.distance_m(q);
            d > sc.buffer_m + GROUND_MARGIN_M
                && d < sc.surroundings_m - GROUND_MARGIN_M
                && neighbours.iter().all(|&j| {
                    sc.structures[j].footprint.distance_m(q) > sc.buffer_m + GROUND_MARGIN_M
                })
        };
        let kinds = [
            (PointRole::Inside, plan.inside),
            (PointRole::Buffer, plan.buffer),
            (PointRole::LowCoherence, plan.low_coherence),
            (PointRole::Ground, plan.ground),
        ];
        for (role, count) in kinds {
            let pad = match role {
                PointRole::Inside | PointRole::LowCoherence => 0.0,
                PointRole::Buffer => sc.buffer_m,
                PointRole::Ground => sc.surroundings_m,
            };
            for _ in 0..count {
                let mut found = None;
                for _ in 0..MAX_TRIES {
                    let q = [
                        rng.random_range(b[0] - pad..=b[2] + pad),
                        rng.random_range(b[1] - pad..=b[3] + pad),
                    ];
                    let ok = match role {
                        PointRole::Inside | PointRole::LowCoherence => inside_ok(q),
                        PointRole::Buffer => buffer_ok(q),
                        PointRole::Ground => ground_ok(q),
                    };
                    if ok {
                        found = Some(q);
                        break;
                    }
                }
                let q = found.ok_or_else(|| SynthError::Placement {
                    structure: s.id.clone(),
                    role: format!("{role:?}"),
                })?;
                let (lo, hi) = if role == PointRole::LowCoherence {
                    sc.noise.low_coherence
                } else {
                    sc.noise.good_coherence
                };
                let coherence = if hi > lo {
                    rng.random_range(lo..hi)
                } else {
                    lo
                };
                let mut sigma_mm = if sc.noise.enabled {
                    sc.noise.sigma_from_coherence_mm(coherence)
                } else {
                    0.0
                };
                if role == PointRole::LowCoherence {
                    sigma_mm *= sc.noise.low_coherence_extra_factor;
                }
                counter += 1;
                let (lon_deg, lat_deg) = sc.frame.to_lon_lat(q[0], q[1]);
                points.push(GeneratedPoint {
                    id: format!("{}{:06}", geom.id_prefix, counter),
                    structure: if role == PointRole::Ground {
                        None
                    } else {
                        Some(k)
                    },
                    placed_near: k,
                    role,
                    position_m: q,
                    lon_deg,
                    lat_deg,
                    coherence,
                    sigma_mm,
                    unwrap_jump: None,
                    values_mm: Vec::new(),
                });
            }
        }
    }
    Ok(points)
}
