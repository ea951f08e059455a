//! The planted truth of a scenario: period quantities per structure and the damage category they
//! imply, as Rust structs and as the content of `truth.json`.
//!
//! Owns the evaluation of the noise-free planted field over each footprint (a dense sample grid),
//! its reduction to settlement, velocity, plane-fit tilt, the quadratic profile along the long
//! axis (Δ, Δ/L, β) and the deep-beam category, plus the point bookkeeping (counts per role and
//! the expected `insufficient_data` status). It re-implements the Burland & Wroth factors on
//! purpose (independent of `crate::damage`). It does no file I/O and draws no random numbers.
//!
//! # What "truth" means here
//! Period values are differences of the planted secular field (seasonal term excluded, steps and
//! the trough included) between the default assessment window's start and end (the first and last
//! common acquisition dates, as Plinth chooses them). Tilt and profile values are least-squares
//! fits to that field sampled uniformly over the footprint: the population value of the plane fit
//! (insar-methods.md §7.6) and of the quadratic smooth-fit profile (§7.7) under uniform point
//! coverage. For a planted rigid tilt and parabola they equal the planted values exactly; for the
//! Gaussian trough they are what a uniformly sampled quadratic fit would give.

use chrono::NaiveDate;
use nalgebra::{DMatrix, DVector};
use serde::Serialize;

use super::generate::{Generated, PointRole};
use super::model::{Scenario, StructureKind, years_between};

/// Default minimum kept points per structure in Plinth (`assessment.min_points`).
pub const DEFAULT_MIN_POINTS: usize = 5;
/// Default coherence threshold (`assessment.min_coherence`).
pub const DEFAULT_MIN_COHERENCE: f64 = 0.7;
/// Poisson's ratio used with the category relations (damage-relations.md §2.4, §3.1).
pub const POISSON_RATIO: f64 = 0.3;

/// Limiting tensile strain boundaries of categories 1, 2, 3 and 4–5, absolute.
///
/// # References
/// Boscardin & Cording (1989), Burland (1995): damage-relations.md §3.2 (confirmed in a secondary
/// source \[R\]); boundary rule §3.3 (a value on a boundary goes to the more severe category).
pub const CATEGORY_BOUNDARIES: [f64; 4] = [5.0e-4, 7.5e-4, 1.5e-3, 3.0e-3];

/// Deep-beam factors (Fb, Fd) of Burland & Wroth for a zone, with ε_b = |Δ/L|/Fb, ε_d = |Δ/L|/Fd.
///
/// Sagging (neutral axis at mid-height): Fb = r/6 + e/(4r), Fd = 1 + 2r²/(3e);
/// hogging (neutral axis at the lower edge): Fb = r/12 + e/(2r), Fd = 1 + r²/(6e); r = L/H, e = E/G.
///
/// # Units
/// Dimensionless in and out. r ≤ 0 or e ≤ 0 returns NaN factors.
///
/// # References
/// Burland & Wroth (1974), central point load on a Timoshenko beam; dimensionless form of
/// damage-relations.md §2.3 (derived \[D\]; original relations from memory \[M\]).
///
/// # Examples
/// ```
/// // damage-relations.md §2.5: sagging, E/G = 2.6, L/H = 3 → Fb 0.71667, Fd 3.30769.
/// let (fb, fd) = plinth::synth::truth::deep_beam_factors(true, 3.0, 2.6);
/// assert!((fb - 0.71667).abs() < 1e-5 && (fd - 3.30769).abs() < 1e-5);
/// ```
pub fn deep_beam_factors(sagging: bool, l_over_h: f64, e_over_g: f64) -> (f64, f64) {
    if !(l_over_h > 0.0 && e_over_g > 0.0) {
        return (f64::NAN, f64::NAN);
    }
    let (r, e) = (l_over_h, e_over_g);
    if sagging {
        (r / 6.0 + e / (4.0 * r), 1.0 + 2.0 * r * r / (3.0 * e))
    } else {
        (r / 12.0 + e / (2.0 * r), 1.0 + r * r / (6.0 * e))
    }
}

/// Damage category number (0–4, where 4 stands for "4–5") of a limiting tensile strain.
///
/// # References
/// damage-relations.md §3.2 table and §3.3 rule (count of boundaries b with ε ≥ b·(1 − 1e-9)).
/// A non-finite or negative strain returns `None`.
pub fn category_of_strain(strain: f64) -> Option<u8> {
    if !(strain.is_finite() && strain >= 0.0) {
        return None;
    }
    Some(
        CATEGORY_BOUNDARIES
            .iter()
            .filter(|&&b| strain >= b * (1.0 - 1e-9))
            .count() as u8,
    )
}

/// Category label as shown to users ("0" … "3", "4-5").
pub fn category_label(category: u8) -> &'static str {
    match category {
        0 => "0",
        1 => "1",
        2 => "2",
        3 => "3",
        _ => "4-5",
    }
}

/// Expected deep-beam damage result of one structure's planted profile (one zone over the whole
/// length, horizontal strain assumed 0 because InSAR rarely resolves it, §7.8).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ExpectedDamage {
    /// `sagging` or `hogging` (sign of the planted Δ/L; 0 is reported as sagging).
    pub mode: String,
    /// E/G used (2.6 masonry, 12.5 frame).
    pub e_over_g: f64,
    /// ν used (enters only with horizontal strain).
    pub poisson_ratio: f64,
    /// Horizontal strain assumed, absolute.
    pub horizontal_strain: f64,
    /// L/H.
    pub l_over_h: f64,
    /// Fb.
    pub bending_factor: f64,
    /// Fd.
    pub diagonal_factor: f64,
    /// ε_bmax, absolute.
    pub bending_strain: f64,
    /// ε_dmax, absolute.
    pub diagonal_strain: f64,
    /// ε_max = max(ε_b, ε_d), absolute.
    pub max_strain: f64,
    /// `bending` or `diagonal`.
    pub governing: String,
    /// Category number (4 = "4-5").
    pub category: u8,
    /// Category label.
    pub category_label: String,
}

/// Expected deep-beam result for a signed deflection ratio (+ sagging) on a beam L × H.
///
/// Returns `None` for non-positive L or H or a non-finite deflection ratio.
///
/// # Examples
/// ```
/// use plinth::synth::{model::StructureKind, truth::expected_damage};
/// // damage-relations.md §8.3 row C3: sag, L/H = 1, E/G 2.6, Δ/L = 5e-4 → ε_max 6.12245e-4, cat. 1.
/// let d = expected_damage(5e-4, 10.0, 10.0, StructureKind::Masonry).unwrap();
/// assert!((d.max_strain - 6.12245e-4).abs() < 1e-9 && d.category == 1);
/// ```
pub fn expected_damage(
    deflection_ratio: f64,
    length_m: f64,
    height_m: f64,
    kind: StructureKind,
) -> Option<ExpectedDamage> {
    if !(length_m > 0.0 && height_m > 0.0 && deflection_ratio.is_finite()) {
        return None;
    }
    let sagging = deflection_ratio >= 0.0;
    let e_over_g = kind.e_over_g();
    let l_over_h = length_m / height_m;
    let (fb, fd) = deep_beam_factors(sagging, l_over_h, e_over_g);
    let dr = deflection_ratio.abs();
    let (eb, ed) = (dr / fb, dr / fd);
    let max_strain = eb.max(ed);
    let category = category_of_strain(max_strain)?;
    Some(ExpectedDamage {
        mode: if sagging { "sagging" } else { "hogging" }.into(),
        e_over_g,
        poisson_ratio: POISSON_RATIO,
        horizontal_strain: 0.0,
        l_over_h,
        bending_factor: fb,
        diagonal_factor: fd,
        bending_strain: eb,
        diagonal_strain: ed,
        max_strain,
        governing: if eb >= ed { "bending" } else { "diagonal" }.into(),
        category,
        category_label: category_label(category).into(),
    })
}

/// The assessment window the truth refers to.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct TruthWindow {
    /// First common acquisition date (latest first date of the geometries).
    pub start: NaiveDate,
    /// Last common acquisition date (earliest last date).
    pub end: NaiveDate,
    /// Span, years of 365.25 days.
    pub span_years: f64,
}

/// Point counts of one structure in one geometry.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Default)]
pub struct PointCounts {
    /// Dataset name.
    pub dataset: String,
    /// Good points inside the footprint.
    pub inside: usize,
    /// Good points in the buffer.
    pub buffer: usize,
    /// Low-coherence points (below 0.7).
    pub low_coherence: usize,
    /// Ground points placed in its surroundings ring.
    pub ground: usize,
    /// Points carrying a planted unwrapping jump.
    pub with_unwrapping_jump: usize,
}

/// Planted period quantities of one structure over the truth window.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PeriodTruth {
    /// Mean settlement over the footprint, mm, + downward.
    pub settlement_mean_mm: f64,
    /// Smallest settlement on the footprint, mm.
    pub settlement_min_mm: f64,
    /// Largest settlement on the footprint, mm.
    pub settlement_max_mm: f64,
    /// Largest minus smallest, mm.
    pub differential_settlement_mm: f64,
    /// Mean settlement divided by the window span, mm/yr, + downward.
    pub settlement_rate_mm_per_yr: f64,
    /// Mean vertical velocity over the window, mm/yr, up positive (= −settlement rate).
    pub vertical_velocity_mm_per_yr: f64,
    /// Slope of an ordinary least-squares line through the footprint-mean vertical displacement
    /// (noise-free, no seasonal term) at the first geometry's acquisitions inside the window,
    /// mm/yr, up positive. Differs from `vertical_velocity_mm_per_yr` when the motion is not
    /// linear in time (trough, breakpoint, acceleration); this is the value a linear-trend fit
    /// of clean data would return.
    pub vertical_velocity_linear_fit_mm_per_yr: f64,
    /// Mean east displacement, mm.
    pub east_displacement_mm: f64,
    /// Plane-fit tilt magnitude, dimensionless (m/m).
    pub tilt: f64,
    /// Tilt as 1/N (N = 1/tilt), or None when the tilt is 0.
    pub tilt_one_in: Option<f64>,
    /// Direction of maximum settlement, degrees clockwise from north (None when tilt is 0).
    pub tilt_azimuth_deg: Option<f64>,
    /// Quadratic-profile deflection ratio Δ/L over the long axis, signed (+ sagging).
    pub deflection_ratio: f64,
    /// Relative deflection Δ, mm, signed (+ sagging).
    pub relative_deflection_mm: f64,
    /// Largest |β| of the quadratic profile (= 4·|Δ/L|), dimensionless.
    pub angular_distortion_max: f64,
}

/// Trough context of one structure.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TroughTruth {
    /// Distance from the centroid to the alignment, m.
    pub centroid_distance_m: f64,
    /// Distance in units of the trough width i.
    pub centroid_distance_over_i: f64,
    /// Date the face passes the centroid's chainage.
    pub face_pass_date: NaiveDate,
    /// Greenfield settlement at the centroid at the window end, mm.
    pub greenfield_settlement_at_end_mm: f64,
    /// Greenfield curvature at the centroid: `sagging` (|x| < i) or `hogging` (|x| > i).
    pub greenfield_zone_at_centroid: String,
}

/// Truth of one structure.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StructureTruth {
    /// Structure id.
    pub id: String,
    /// Name.
    pub name: String,
    /// What the structure demonstrates.
    pub role: String,
    /// `masonry` or `frame`.
    pub structure: String,
    /// Height to eaves, m.
    pub height_m: f64,
    /// Footprint area, m².
    pub area_m2: f64,
    /// Number of footprint parts (2+ = MultiPolygon).
    pub parts: usize,
    /// Centroid in the town frame, m.
    pub centroid_m: [f64; 2],
    /// Long-axis azimuth, degrees clockwise from north.
    pub axis_azimuth_deg: f64,
    /// Length along the long axis L, m.
    pub length_m: f64,
    /// Width across it, m.
    pub width_m: f64,
    /// Point counts per geometry.
    pub points: Vec<PointCounts>,
    /// Good points (coherence ≥ 0.7, on the structure, no planted jump) over all geometries.
    pub good_points: usize,
    /// `assessed` or `insufficient_data` under the default minimums.
    pub expected_status: String,
    /// Why insufficient, when it is.
    pub expected_status_reason: Option<String>,
    /// Planted motion as specified.
    pub planted: super::model::Motion,
    /// Period quantities.
    pub period: PeriodTruth,
    /// Deep-beam expectation from the period profile (one zone, ε_h = 0).
    pub damage: Option<ExpectedDamage>,
    /// True when the structure was designed so that its category is predictable (its planted
    /// curvature dominates noise and the trough).
    pub damage_designed: bool,
    /// Trough context, when the scenario has a trough.
    pub trough: Option<TroughTruth>,
    /// What the radar cannot observe on this structure by design (see [`observability_of`]);
    /// null for structures not designed for it.
    pub observability: Option<String>,
}

/// The observability situation a structure was designed to show, from its role:
/// `no_east_west` (points from one look direction only, so no east–west component and no
/// horizontal strain), `strain_axis_not_observable` (long axis near north–south: the east–west
/// component says nothing along it) or `profile_unresolved` (too few points along the axis to
/// resolve the deflection ratio, so no damage category).
pub fn observability_of(role: &str) -> Option<&'static str> {
    match role {
        "one_look_direction" => Some("no_east_west"),
        "axis_north_south" => Some("strain_axis_not_observable"),
        "unresolved_profile" => Some("profile_unresolved"),
        _ => None,
    }
}

/// A planted unwrapping error as written to the truth.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct JumpTruth {
    /// Dataset name.
    pub dataset: String,
    /// Point id.
    pub point_id: String,
    /// Structure id of the point.
    pub structure_id: String,
    /// First acquisition carrying the jump.
    pub from_date: NaiveDate,
    /// Jump in LOS, mm.
    pub jump_mm: f64,
}

/// One point in the truth listing.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PointTruth {
    /// Dataset name.
    pub dataset: String,
    /// Point id.
    pub id: String,
    /// Structure id the point moves with (None for ground points).
    pub structure_id: Option<String>,
    /// Placement role.
    pub role: PointRole,
}

/// The whole truth.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Truth {
    /// Scenario name.
    pub scenario: String,
    /// Seed.
    pub seed: u64,
    /// Text of the conventions used in this file.
    pub conventions: Vec<String>,
    /// Window of the period values.
    pub window: TruthWindow,
    /// Geometries: name, pass, angles, dates and LOS vector.
    pub geometries: Vec<GeometryTruth>,
    /// Trough parameters.
    pub trough: Option<super::model::Trough>,
    /// Trough width i, m.
    pub trough_width_i_m: Option<f64>,
    /// Per structure.
    pub structures: Vec<StructureTruth>,
    /// Planted unwrapping errors.
    pub unwrapping_jumps: Vec<JumpTruth>,
    /// Every generated point.
    pub points: Vec<PointTruth>,
}

/// One geometry in the truth.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct GeometryTruth {
    /// Dataset name.
    pub name: String,
    /// Pass.
    pub pass: String,
    /// Incidence, degrees.
    pub incidence_deg: f64,
    /// Heading, degrees.
    pub heading_deg: f64,
    /// First date.
    pub first_date: NaiveDate,
    /// Last date.
    pub last_date: NaiveDate,
    /// Repeat, days.
    pub repeat_days: i64,
    /// Acquisitions.
    pub epochs: usize,
    /// Ground-to-satellite unit vector (E, N, U).
    pub los_unit_enu: [f64; 3],
    /// Points in the file.
    pub points: usize,
}

/// The default window: latest first date to earliest last date. None without geometries.
pub fn default_window(sc: &Scenario) -> Option<TruthWindow> {
    let start = sc.geometries.iter().map(|g| g.first_date).max()?;
    let end = sc
        .geometries
        .iter()
        .filter_map(|g| g.dates().last().copied())
        .min()?;
    Some(TruthWindow {
        start,
        end,
        span_years: years_between(start, end),
    })
}

/// Sample grid inside a footprint (cell centres), about `target` cells over the footprint area.
fn footprint_samples(sc: &Scenario, k: usize, target: f64) -> Vec<[f64; 2]> {
    let fp = &sc.structures[k].footprint;
    let area = fp.area_m2();
    let h = (area / target).sqrt().clamp(0.02, 1.0);
    let b = fp.bbox();
    let mut out = Vec::new();
    // Cells fill the bounding box exactly, so the grid is symmetric about its centre (no bias of
    // the mean of a tilt over a rectangle).
    let nx = (((b[2] - b[0]) / h).ceil() as usize).max(1);
    let ny = (((b[3] - b[1]) / h).ceil() as usize).max(1);
    let (hx, hy) = ((b[2] - b[0]) / nx as f64, (b[3] - b[1]) / ny as f64);
    for i in 0..nx {
        for j in 0..ny {
            let q = [b[0] + (i as f64 + 0.5) * hx, b[1] + (j as f64 + 0.5) * hy];
            if fp.contains(q) {
                out.push(q);
            }
        }
    }
    out
}

/// Least squares y ≈ X·p; None when singular.
fn lstsq(rows: &[Vec<f64>], y: &[f64]) -> Option<Vec<f64>> {
    let n = rows.len();
    let p = rows.first()?.len();
    if n < p {
        return None;
    }
    let x = DMatrix::from_fn(n, p, |i, j| rows[i][j]);
    let yv = DVector::from_column_slice(y);
    let xtx = x.transpose() * &x;
    let xty = x.transpose() * yv;
    let sol = xtx.lu().solve(&xty)?;
    Some(sol.iter().copied().collect())
}

/// Period quantities of structure `k` over `w` (see the module doc). None for a degenerate footprint.
pub fn period_truth(sc: &Scenario, k: usize, w: &TruthWindow) -> Option<PeriodTruth> {
    let ax = sc.axis(k)?;
    let samples = footprint_samples(sc, k, 4000.0);
    if samples.len() < 10 {
        return None;
    }
    let settle = |q: [f64; 2]| {
        let a = sc.displacement_enu_mm(Some(k), q, w.start, false);
        let b = sc.displacement_enu_mm(Some(k), q, w.end, false);
        (-(b[2] - a[2]), b[0] - a[0])
    };
    let vals: Vec<(f64, f64)> = samples.iter().map(|&q| settle(q)).collect();
    let s: Vec<f64> = vals.iter().map(|v| v.0).collect();
    let n = s.len() as f64;
    let mean = s.iter().sum::<f64>() / n;
    let min = s.iter().copied().fold(f64::INFINITY, f64::min);
    let max = s.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let east = vals.iter().map(|v| v.1).sum::<f64>() / n;
    let c = ax.centroid_m;
    let plane_rows: Vec<Vec<f64>> = samples
        .iter()
        .map(|q| vec![1.0, q[0] - c[0], q[1] - c[1]])
        .collect();
    let plane = lstsq(&plane_rows, &s)?;
    let (gb, gc) = (plane[1], plane[2]); // mm/m, gradient of settlement (E, N)
    // Round-off of the dense fits (~1e-15) is not a tilt or a curvature: below these floors the
    // planted value is exactly zero and is reported as 0 (with no direction).
    let mut tilt = (gb * gb + gc * gc).sqrt() * 1e-3;
    if tilt < 1e-10 {
        tilt = 0.0;
    }
    let quad_rows: Vec<Vec<f64>> = samples
        .iter()
        .map(|&q| {
            let t = ax.axial_m(q);
            vec![1.0, t, t * t]
        })
        .collect();
    let quad = lstsq(&quad_rows, &s)?;
    let p2 = if (quad[2] * ax.length_m).abs() < 1e-9 {
        0.0
    } else {
        quad[2]
    };
    let l = ax.length_m;
    let span = w.span_years;
    // Linear-fit velocity of the footprint-mean series (a coarser symmetric grid is enough).
    let sub = footprint_samples(sc, k, 400.0);
    let epochs: Vec<NaiveDate> = sc
        .geometries
        .first()
        .map(|g| {
            g.dates()
                .into_iter()
                .filter(|d| *d >= w.start && *d <= w.end)
                .collect()
        })
        .unwrap_or_default();
    let series: Vec<(f64, f64)> = epochs
        .iter()
        .map(|d| {
            let up = sub
                .iter()
                .map(|&q| sc.displacement_enu_mm(Some(k), q, *d, false)[2])
                .sum::<f64>()
                / sub.len() as f64;
            (years_between(w.start, *d), up)
        })
        .collect();
    let fit_rows: Vec<Vec<f64>> = series.iter().map(|(t, _)| vec![1.0, *t]).collect();
    let fit_y: Vec<f64> = series.iter().map(|(_, u)| *u).collect();
    let linear_fit = lstsq(&fit_rows, &fit_y).map(|c| c[1]).unwrap_or(f64::NAN);
    let rate = if span > 0.0 { mean / span } else { f64::NAN };
    Some(PeriodTruth {
        settlement_mean_mm: mean,
        settlement_min_mm: min,
        settlement_max_mm: max,
        differential_settlement_mm: max - min,
        settlement_rate_mm_per_yr: rate,
        vertical_velocity_mm_per_yr: -rate,
        vertical_velocity_linear_fit_mm_per_yr: linear_fit,
        east_displacement_mm: east,
        tilt,
        tilt_one_in: if tilt > 0.0 { Some(1.0 / tilt) } else { None },
        tilt_azimuth_deg: if tilt > 0.0 {
            Some(gb.atan2(gc).to_degrees().rem_euclid(360.0))
        } else {
            None
        },
        deflection_ratio: -p2 * l / 4.0 * 1e-3,
        relative_deflection_mm: -p2 * l * l / 4.0,
        angular_distortion_max: p2.abs() * l * 1e-3,
    })
}

/// Assemble the whole truth for a generated scenario. `designed` lists the structure ids whose
/// category is meant to be predictable.
pub fn build_truth(sc: &Scenario, generated: &Generated, designed: &[&str]) -> Option<Truth> {
    let w = default_window(sc)?;
    let mut structures = Vec::with_capacity(sc.structures.len());
    for (k, s) in sc.structures.iter().enumerate() {
        let ax = sc.axis(k)?;
        let period = period_truth(sc, k, &w)?;
        let mut counts = Vec::new();
        let mut good = 0;
        for (g, gg) in generated.geometries.iter().enumerate() {
            let mut c = PointCounts {
                dataset: sc.geometries[g].name.clone(),
                ..Default::default()
            };
            for p in gg.points.iter().filter(|p| p.placed_near == k) {
                match p.role {
                    PointRole::Inside => c.inside += 1,
                    PointRole::Buffer => c.buffer += 1,
                    PointRole::LowCoherence => c.low_coherence += 1,
                    PointRole::Ground => c.ground += 1,
                }
                if p.unwrap_jump.is_some() {
                    c.with_unwrapping_jump += 1;
                }
                if matches!(p.role, PointRole::Inside | PointRole::Buffer)
                    && p.unwrap_jump.is_none()
                {
                    good += 1;
                }
            }
            counts.push(c);
        }
        let (status, reason) = if good < DEFAULT_MIN_POINTS {
            (
                "insufficient_data",
                Some(format!(
                    "{good} good point(s) on the structure (coherence ≥ {DEFAULT_MIN_COHERENCE}, no planted jump) against the default minimum of {DEFAULT_MIN_POINTS}"
                )),
            )
        } else {
            ("assessed", None)
        };
        let trough = sc.trough.as_ref().and_then(|tr| {
            let pos = tr.position(ax.centroid_m)?;
            let i = tr.width_i_m();
            let (gf, _, _) = tr.greenfield_mm(ax.centroid_m, w.end);
            Some(TroughTruth {
                centroid_distance_m: pos.distance_m,
                centroid_distance_over_i: if i > 0.0 {
                    pos.distance_m / i
                } else {
                    f64::NAN
                },
                face_pass_date: tr.pass_date(pos.chainage_m),
                greenfield_settlement_at_end_mm: gf,
                greenfield_zone_at_centroid: if pos.distance_m < i {
                    "sagging"
                } else {
                    "hogging"
                }
                .into(),
            })
        });
        structures.push(StructureTruth {
            id: s.id.clone(),
            name: s.name.clone(),
            role: s.role.clone(),
            structure: s.kind.label().into(),
            height_m: s.height_m,
            area_m2: s.footprint.area_m2(),
            parts: s.footprint.parts.len(),
            centroid_m: ax.centroid_m,
            axis_azimuth_deg: ax.azimuth_deg,
            length_m: ax.length_m,
            width_m: ax.width_m,
            points: counts,
            good_points: good,
            expected_status: status.into(),
            expected_status_reason: reason,
            planted: s.motion.clone(),
            damage: expected_damage(period.deflection_ratio, ax.length_m, s.height_m, s.kind),
            damage_designed: designed.contains(&s.id.as_str()),
            period,
            trough,
            observability: observability_of(&s.role).map(str::to_string),
        });
    }
    let mut jumps = Vec::new();
    let mut points = Vec::new();
    for (g, gg) in generated.geometries.iter().enumerate() {
        let name = &sc.geometries[g].name;
        for p in &gg.points {
            let sid = p.structure.map(|k| sc.structures[k].id.clone());
            if let (Some((e, mm)), Some(id)) = (p.unwrap_jump, sid.clone()) {
                jumps.push(JumpTruth {
                    dataset: name.clone(),
                    point_id: p.id.clone(),
                    structure_id: id,
                    from_date: gg.dates[e],
                    jump_mm: mm,
                });
            }
            points.push(PointTruth {
                dataset: name.clone(),
                id: p.id.clone(),
                structure_id: sid,
                role: p.role,
            });
        }
    }
    Some(Truth {
        scenario: sc.name.clone(),
        seed: sc.seed,
        conventions: vec![
            "positions: town frame in metres, x = true east, y = true north; lon/lat via the local tangent plane (insar-methods.md §8.2)".into(),
            "settlement positive downward (mm); vertical velocity positive upward (mm/yr); LOS positive towards the satellite".into(),
            "period values: planted secular field (no seasonal term) between window.start and window.end".into(),
            "tilt and profile: least-squares plane and quadratic-along-the-long-axis fits to the field sampled uniformly over the footprint".into(),
            "deflection ratio signed: + sagging, − hogging; angular distortion = 4·|Δ/L| for the quadratic".into(),
            "damage: Burland & Wroth deep beam over the whole length, E/G 2.6 masonry / 12.5 frame, ν 0.3, horizontal strain assumed 0; categories by Boscardin & Cording / Burland limiting strains".into(),
        ],
        window: w,
        geometries: sc
            .geometries
            .iter()
            .zip(&generated.geometries)
            .map(|(g, gg)| GeometryTruth {
                name: g.name.clone(),
                pass: g.pass.clone(),
                incidence_deg: g.incidence_deg,
                heading_deg: g.heading_deg,
                first_date: g.first_date,
                last_date: gg.dates.last().copied().unwrap_or(g.first_date),
                repeat_days: g.repeat_days,
                epochs: g.epochs,
                los_unit_enu: gg.los_unit_enu,
                points: gg.points.len(),
            })
            .collect(),
        trough_width_i_m: sc.trough.as_ref().map(|t| t.width_i_m()),
        trough: sc.trough.clone(),
        structures,
        unwrapping_jumps: jumps,
        points,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn factors_match_table() {
        // damage-relations.md §2.5 factor table (derived [D]), tolerance 1e-5 on 5-6 digit values.
        let cases = [
            (true, 1.0, 2.6, 0.81667, 1.25641),
            (true, 2.0, 12.5, 1.89583, 1.21333),
            (false, 3.0, 2.6, 0.68333, 1.57692),
            (false, 5.0, 12.5, 1.66667, 1.33333),
        ];
        for (sag, r, e, fb, fd) in cases {
            let (b, d) = deep_beam_factors(sag, r, e);
            assert!(
                (b - fb).abs() < 1e-5 && (d - fd).abs() < 1e-5,
                "{sag} {r} {e}: {b} {d}"
            );
        }
        assert!(deep_beam_factors(true, 0.0, 2.6).0.is_nan());
    }

    #[test]
    fn categories_match_check_rows() {
        // damage-relations.md §8.3 row C1: hog, L/H 1, E/G 2.6, Δ/L 5e-4 → ε_max 4.69880e-4, cat. 0.
        let c1 = expected_damage(-5e-4, 10.0, 10.0, StructureKind::Masonry).expect("valid");
        assert!((c1.max_strain - 4.69880e-4).abs() < 1e-9);
        assert_eq!((c1.category, c1.governing.as_str()), (0, "diagonal"));
        // §8.3 boundary cases: hog L/H 1, Δ/L = 5.320513e-4 → cat 1; ×(1 − 1e-6) → cat 0.
        let on = expected_damage(-5.320513e-4, 10.0, 10.0, StructureKind::Masonry).expect("valid");
        assert_eq!(on.category, 1);
        let below = expected_damage(
            -5.320513e-4 * (1.0 - 1e-6),
            10.0,
            10.0,
            StructureKind::Masonry,
        )
        .expect("valid");
        assert_eq!(below.category, 0);
        let top = expected_damage(-3.192308e-3, 10.0, 10.0, StructureKind::Masonry).expect("valid");
        assert_eq!(category_label(top.category), "4-5");
        assert!(expected_damage(1e-3, 0.0, 8.0, StructureKind::Frame).is_none());
        assert_eq!(category_of_strain(f64::NAN), None);
    }
}
