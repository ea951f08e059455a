//! Staged screening of one structure against a predicted greenfield movement field (Mair, Taylor
//! & Burland 1996, from memory \[M\]; damage-relations.md §6.2, §7.3).
//!
//! Owns: sampling a footprint; stage 1 — the largest greenfield settlement and slope on the
//! footprint against Rankin (1988) ([`stage1`]); the transverse section through the structure
//! ([`section`]); stage 2 — the greenfield profile across the structure split at the trough
//! inflection points into sagging and hogging parts, Δ/L and average ε_h per part, optional
//! relative-stiffness factors, then the limiting-tensile-strain category through
//! [`crate::damage::assess_damage`] ([`stage2`]). It does not predict movements (see
//! [`super::geometry`]) and does no I/O.
//!
//! Choices where the sources are silent (recorded in docs/methods.md):
//! - stage-1 maxima are searched on a grid over the footprint (spacing the larger of 1/40 of the
//!   bounding-box diagonal and 0.5 m, plus the vertices) refined by a compass search inside it;
//!   slope is the magnitude of the settlement gradient (central differences, h = 0.05 m);
//! - the stage-2 section runs through the footprint centroid along the transverse direction of
//!   the tunnel segment contributing most settlement (or, for an excavation, away from the
//!   nearest wall); the structure is projected onto it (its extreme vertices), as §7.3 step 1;
//! - inflection points are the sign changes of the profile's curvature (bisection); where a
//!   piecewise-linear envelope has zero curvature between kinks of opposite sign, the split is
//!   at the middle of that stretch; a part's mode is the sign of its curvature;
//! - the trough-extent cap of §7.3 step 4 is not applied (the building end is used);
//! - modification factors multiply the greenfield Δ/L and ε_h before the strains
//!   (damage-relations.md §6.5 \[Rec\]); they are never applied to measured movement.

use geo::{Centroid, Intersects, MultiPolygon, Point};
use serde::Serialize;

use crate::criteria::CriteriaSet;
use crate::damage::rankin::{RankinResult, rankin_category};
use crate::damage::{DamageAssessment, DamageInput, Mode, ZoneInput, assess_damage};

use super::geometry::{Movement, WorksGeometry};
use super::model::StiffnessFactors;

/// A settlement/movement field: (x, y) in the analysis CRS → movement.
pub type Field<'a> = dyn Fn(f64, f64) -> Movement + 'a;

/// Sample points of a footprint (analysis CRS).
#[derive(Debug, Clone, PartialEq)]
pub struct Samples {
    /// Points on or inside the footprint.
    pub points: Vec<[f64; 2]>,
    /// Grid spacing used, m.
    pub spacing_m: f64,
    /// Footprint centroid.
    pub centroid: [f64; 2],
    /// Footprint vertices.
    pub vertices: Vec<[f64; 2]>,
}

/// Sample a footprint: its vertices plus a grid inside it. `None` for an empty footprint.
pub fn sample_footprint(fp: &MultiPolygon<f64>) -> Option<Samples> {
    let c = fp.centroid()?;
    let vertices: Vec<[f64; 2]> =
        fp.0.iter()
            .flat_map(|p| p.exterior().coords().map(|c| [c.x, c.y]))
            .collect();
    if vertices.is_empty() {
        return None;
    }
    let (mut x0, mut x1, mut y0, mut y1) = (f64::MAX, f64::MIN, f64::MAX, f64::MIN);
    for v in &vertices {
        x0 = x0.min(v[0]);
        x1 = x1.max(v[0]);
        y0 = y0.min(v[1]);
        y1 = y1.max(v[1]);
    }
    let diag = ((x1 - x0).powi(2) + (y1 - y0).powi(2)).sqrt();
    let spacing_m = (diag / 40.0).max(0.5);
    let mut points = vertices.clone();
    let nx = ((x1 - x0) / spacing_m).ceil() as usize + 1;
    let ny = ((y1 - y0) / spacing_m).ceil() as usize + 1;
    for i in 0..nx.min(400) {
        for j in 0..ny.min(400) {
            let p = [x0 + i as f64 * spacing_m, y0 + j as f64 * spacing_m];
            if fp.intersects(&Point::new(p[0], p[1])) {
                points.push(p);
            }
        }
    }
    Some(Samples {
        points,
        spacing_m,
        centroid: [c.x(), c.y()],
        vertices,
    })
}

/// Largest value of `f` on the footprint: best sample, then a compass search inside the
/// footprint with the step halved from the grid spacing down to 1 mm. Returns (value, point).
pub fn max_on_footprint(
    fp: &MultiPolygon<f64>,
    samples: &Samples,
    f: &dyn Fn(f64, f64) -> f64,
) -> (f64, [f64; 2]) {
    let mut best = (f64::NEG_INFINITY, samples.centroid);
    for p in &samples.points {
        let v = f(p[0], p[1]);
        if v > best.0 {
            best = (v, *p);
        }
    }
    let mut step = samples.spacing_m;
    while step > 1e-3 {
        let mut moved = false;
        for d in [[1.0, 0.0], [-1.0, 0.0], [0.0, 1.0], [0.0, -1.0]] {
            let q = [best.1[0] + d[0] * step, best.1[1] + d[1] * step];
            if !fp.intersects(&Point::new(q[0], q[1])) {
                continue;
            }
            let v = f(q[0], q[1]);
            if v > best.0 {
                best = (v, q);
                moved = true;
            }
        }
        if !moved {
            step /= 2.0;
        }
    }
    best
}

/// Magnitude of the gradient of the settlement of `field` at (x, y), dimensionless.
pub fn slope_at(field: &Field, x: f64, y: f64) -> f64 {
    const H: f64 = 0.05;
    let s = |x: f64, y: f64| field(x, y).settlement_m;
    let gx = (s(x + H, y) - s(x - H, y)) / (2.0 * H);
    let gy = (s(x, y + H) - s(x, y - H)) / (2.0 * H);
    (gx * gx + gy * gy).sqrt()
}

/// Best-fit plane slope (rigid tilt) of the settlement of `field` over the samples,
/// dimensionless; `None` when the samples do not span an area.
pub fn plane_tilt(field: &Field, samples: &Samples) -> Option<f64> {
    let n = samples.points.len() as f64;
    if n < 3.0 {
        return None;
    }
    let vals: Vec<f64> = samples
        .points
        .iter()
        .map(|p| field(p[0], p[1]).settlement_m)
        .collect();
    let mx = samples.points.iter().map(|p| p[0]).sum::<f64>() / n;
    let my = samples.points.iter().map(|p| p[1]).sum::<f64>() / n;
    let ms = vals.iter().sum::<f64>() / n;
    let (mut sxx, mut sxy, mut syy, mut sxs, mut sys) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for (p, v) in samples.points.iter().zip(&vals) {
        let (dx, dy, ds) = (p[0] - mx, p[1] - my, v - ms);
        sxx += dx * dx;
        sxy += dx * dy;
        syy += dy * dy;
        sxs += dx * ds;
        sys += dy * ds;
    }
    let det = sxx * syy - sxy * sxy;
    if det.is_nan() || det.abs() <= 1e-9 * (sxx * syy).max(1e-300) {
        return None;
    }
    let a = (sxs * syy - sys * sxy) / det;
    let b = (sys * sxx - sxs * sxy) / det;
    Some((a * a + b * b).sqrt())
}

/// Stage 1: greenfield settlement and slope on the footprint against Rankin (1988).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Stage1 {
    /// Largest greenfield settlement on the footprint, mm (+ down).
    pub max_settlement_mm: f64,
    /// Where (analysis CRS).
    pub max_settlement_at: [f64; 2],
    /// Largest greenfield slope on the footprint, dimensionless.
    pub max_slope: f64,
    /// Where (analysis CRS).
    pub max_slope_at: [f64; 2],
    /// Rankin (1988) category (worse of slope and settlement; thresholds from memory \[M\]).
    pub rankin: Option<RankinResult>,
    /// True when slope < 1/500 and settlement < 10 mm: negligible risk, dropped at stage 1.
    pub negligible: bool,
    /// True when stage 2 is required.
    pub stage2_required: bool,
}

/// Stage 1 for a footprint under `field`.
pub fn stage1(fp: &MultiPolygon<f64>, samples: &Samples, field: &Field) -> Stage1 {
    let (s, s_at) = max_on_footprint(fp, samples, &|x, y| field(x, y).settlement_m);
    let (g, g_at) = max_on_footprint(fp, samples, &|x, y| slope_at(field, x, y));
    let mm = s * 1000.0;
    let rankin = rankin_category(Some(mm), Some(g)).ok().flatten();
    let negligible = rankin.is_some_and(|r| r.category.number() == 1);
    Stage1 {
        max_settlement_mm: mm,
        max_settlement_at: s_at,
        max_slope: g,
        max_slope_at: g_at,
        rankin,
        negligible,
        stage2_required: !negligible,
    }
}

/// The line along which the structure is assessed at stage 2.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Section {
    /// What the section is transverse to, e.g. `tunnel "Drive A" segment 2`.
    pub source: String,
    /// Unit direction of increasing x (analysis CRS).
    pub direction: [f64; 2],
    /// Footprint centroid (analysis CRS).
    pub through: [f64; 2],
    /// x of the centroid on the section, m (distance from the tunnel axis or the wall).
    pub x_through_m: f64,
    /// Structure extent on the section: smallest x of its vertices, m.
    pub x_start_m: f64,
    /// Largest x, m.
    pub x_end_m: f64,
}

impl Section {
    /// Analysis-CRS point at section coordinate x.
    pub fn point(&self, x_m: f64) -> [f64; 2] {
        let d = x_m - self.x_through_m;
        [
            self.through[0] + d * self.direction[0],
            self.through[1] + d * self.direction[1],
        ]
    }
}

/// The stage-2 section of a footprint: transverse to the dominant tunnel segment at the
/// footprint's point of largest settlement, or away from the nearest wall of the dominant
/// excavation. `None` when the works predict no settlement there at all.
pub fn section(works: &WorksGeometry, samples: &Samples, at: [f64; 2]) -> Option<Section> {
    let c = samples.centroid;
    let mut best: Option<(f64, Section)> = None;
    for t in &works.tunnels {
        if let Some((k, s)) = t.dominant_segment(at[0], at[1]) {
            if best.as_ref().is_some_and(|b| b.0 >= s) || s.is_nan() || s <= 0.0 {
                continue;
            }
            let seg = &t.segments[k];
            let xs: Vec<f64> = samples
                .vertices
                .iter()
                .map(|v| seg.coords(v[0], v[1]).transverse_m)
                .collect();
            let pc = seg.coords(c[0], c[1]);
            best = Some((
                s,
                Section {
                    source: format!("tunnel \"{}\" segment {k}", t.name),
                    direction: pc.normal,
                    through: c,
                    x_through_m: pc.transverse_m,
                    x_start_m: xs.iter().copied().fold(f64::INFINITY, f64::min),
                    x_end_m: xs.iter().copied().fold(f64::NEG_INFINITY, f64::max),
                },
            ));
        }
    }
    for e in &works.excavations {
        let s = e.settlement_m(at[0], at[1]);
        if best.as_ref().is_some_and(|b| b.0 >= s) || s.is_nan() || s <= 0.0 {
            continue;
        }
        let (q, d) = e.nearest_wall(c[0], c[1]);
        let mut dir = if d > 1e-9 {
            [(c[0] - q[0]) / d, (c[1] - q[1]) / d]
        } else {
            [1.0, 0.0]
        };
        if e.contains(c[0], c[1]) {
            dir = [-dir[0], -dir[1]];
        }
        let x = |v: &[f64; 2]| (v[0] - q[0]) * dir[0] + (v[1] - q[1]) * dir[1];
        let xs: Vec<f64> = samples.vertices.iter().map(x).collect();
        best = Some((
            s,
            Section {
                source: format!("excavation \"{}\"", e.name),
                direction: dir,
                through: c,
                x_through_m: x(&c),
                x_start_m: xs.iter().copied().fold(f64::INFINITY, f64::min),
                x_end_m: xs.iter().copied().fold(f64::NEG_INFINITY, f64::max),
            },
        ));
    }
    best.map(|b| b.1)
}

/// One sagging or hogging part of the structure on the section.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Part {
    /// Part start on the section, m.
    pub start_m: f64,
    /// Part end, m.
    pub end_m: f64,
    /// Mode from the sign of the profile curvature.
    pub mode: Mode,
    /// Greenfield Δ, mm (≥ 0, in the mode's direction).
    pub delta_mm: f64,
    /// Where Δ occurs, m.
    pub delta_at_m: f64,
    /// Greenfield Δ/L (≥ 0).
    pub deflection_ratio_greenfield: f64,
    /// Greenfield average ε_h over the part, + extension; `None` when not predicted
    /// (excavation envelopes give no horizontal movement).
    pub horizontal_strain_greenfield: Option<f64>,
    /// Δ/L after the modification factor, signed (+ sagging, − hogging).
    pub deflection_ratio_used: f64,
    /// ε_h after the modification factor.
    pub horizontal_strain_used: Option<f64>,
}

/// Stage 2 result.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Stage2 {
    /// The section.
    pub section: Section,
    /// Inflection points inside the structure's extent, m on the section.
    pub inflection_points_m: Vec<f64>,
    /// Parts in section order.
    pub parts: Vec<Part>,
    /// Factors used.
    pub stiffness: StiffnessFactors,
    /// The damage assessment of the parts (limiting tensile strain route of the structure's set).
    pub damage: DamageAssessment,
    /// Predicted ("possible", upper-bound) category 0–5, `None` when not computable.
    pub category: Option<u8>,
    /// Governing predicted strain, absolute.
    pub governing_strain: Option<f64>,
    /// The part with the largest |Δ/L| used, signed (+ sagging, − hogging).
    pub deflection_ratio: Option<f64>,
}

/// Maximise a smooth function on [a, b] (see [`crate::damage::greenfield::maximise`]).
fn maximise(f: &dyn Fn(f64) -> f64, a: f64, b: f64) -> (f64, f64) {
    crate::damage::greenfield::maximise(f, a, b)
}

/// Inflection points of s on [a, b]: sign changes of the numerical curvature.
fn inflections(s: &dyn Fn(f64) -> f64, a: f64, b: f64) -> Vec<(f64, Mode)> {
    const N: usize = 4000;
    const H: f64 = 0.01;
    let kappa = |x: f64| (s(x + H) - 2.0 * s(x) + s(x - H)) / (H * H);
    let xs: Vec<f64> = (0..=N).map(|k| a + (b - a) * k as f64 / N as f64).collect();
    let ks: Vec<f64> = xs.iter().map(|x| kappa(*x)).collect();
    let scale = ks.iter().fold(0.0f64, |m, k| m.max(k.abs()));
    let tol = scale * 1e-6;
    let sign = |k: f64| {
        if k > tol {
            1
        } else if k < -tol {
            -1
        } else {
            0
        }
    };
    let mut out = Vec::new();
    let mut last: Option<(usize, i32)> = None;
    for (k, kv) in ks.iter().enumerate() {
        let sg = sign(*kv);
        if sg == 0 {
            continue;
        }
        if let Some((lk, ls)) = last
            && ls != sg
        {
            // A short gap is a smooth crossing (bisect); a long stretch of zero curvature lies
            // between the kinks of a piecewise-linear envelope (split at its middle).
            let x = if k - lk <= 3 {
                let (mut lo, mut hi) = (xs[lk], xs[k]);
                for _ in 0..60 {
                    let m = 0.5 * (lo + hi);
                    if kappa(m) * f64::from(ls) > 0.0 {
                        lo = m;
                    } else {
                        hi = m;
                    }
                }
                0.5 * (lo + hi)
            } else {
                0.5 * (xs[lk] + xs[k])
            };
            // Mode of the stretch that ends here: sagging for negative curvature.
            out.push((x, if ls < 0 { Mode::Sagging } else { Mode::Hogging }));
        }
        last = Some((k, sg));
    }
    out
}

/// Mode of [a, b] from the curvature at its middle (sagging when ≤ 0).
fn part_mode(s: &dyn Fn(f64) -> f64, a: f64, b: f64) -> Mode {
    const H: f64 = 0.01;
    let m = 0.5 * (a + b);
    if s(m + H) - 2.0 * s(m) + s(m - H) > 0.0 {
        Mode::Hogging
    } else {
        Mode::Sagging
    }
}

/// Stage 2 along `section` under `field`, for a structure of height `height_m` with the
/// criteria set `set` and the factors `factors`. Max settlement and slope of stage 1 are passed
/// on so the damage assessment carries the Rankin screen as well.
pub fn stage2(
    section: &Section,
    field: &Field,
    height_m: f64,
    set: &CriteriaSet,
    factors: &StiffnessFactors,
    stage1: &Stage1,
) -> Stage2 {
    let s = |x: f64| {
        let p = section.point(x);
        field(p[0], p[1]).settlement_m
    };
    let u = |x: f64| {
        let p = section.point(x);
        let m = field(p[0], p[1]);
        m.horizontal_m[0] * section.direction[0] + m.horizontal_m[1] * section.direction[1]
    };
    let (a, b) = (section.x_start_m, section.x_end_m);
    let mut parts = Vec::new();
    let mut splits = Vec::new();
    if b > a {
        // Horizontal movement is predicted only where no excavation contributes.
        let exc_on_section = (0..=200).any(|k| {
            let p = section.point(a + (b - a) * k as f64 / 200.0);
            field(p[0], p[1]).excavation_settlement_m > 0.0
        });
        splits = inflections(&s, a, b)
            .into_iter()
            .map(|x| x.0)
            .filter(|x| *x > a + 1e-6 && *x < b - 1e-6)
            .collect();
        let mut bounds = vec![a];
        bounds.extend(splits.iter().copied());
        bounds.push(b);
        for w in bounds.windows(2) {
            let (pa, pb) = (w[0], w[1]);
            let l = pb - pa;
            let mode = part_mode(&s, pa, pb);
            let (sa, sb) = (s(pa), s(pb));
            let offset = |x: f64| s(x) - (sa + (sb - sa) * (x - pa) / l);
            let (at, delta) = match mode {
                Mode::Sagging => maximise(&offset, pa, pb),
                Mode::Hogging => maximise(&|x| -offset(x), pa, pb),
            };
            let delta = delta.max(0.0);
            let dr = delta / l;
            let eh = (!exc_on_section).then(|| (u(pb) - u(pa)) / l);
            let m_dr = match mode {
                Mode::Sagging => factors.deflection_ratio_sagging,
                Mode::Hogging => factors.deflection_ratio_hogging,
            };
            let eh_used = eh.map(|e| {
                if e > 0.0 {
                    e * factors.horizontal_strain_tensile
                } else {
                    e * factors.horizontal_strain_compressive
                }
            });
            let signed = match mode {
                Mode::Sagging => m_dr * dr,
                Mode::Hogging => -m_dr * dr,
            };
            parts.push(Part {
                start_m: pa,
                end_m: pb,
                mode,
                delta_mm: delta * 1000.0,
                delta_at_m: at,
                deflection_ratio_greenfield: dr,
                horizontal_strain_greenfield: eh,
                deflection_ratio_used: signed,
                horizontal_strain_used: eh_used,
            });
        }
    }
    let zones: Vec<ZoneInput> = parts
        .iter()
        .map(|p| ZoneInput {
            mode: p.mode,
            length_m: p.end_m - p.start_m,
            deflection_ratio: p.deflection_ratio_used,
            horizontal_strain: p.horizontal_strain_used,
        })
        .collect();
    let mut damage = assess_damage(
        &DamageInput {
            zones,
            angular_distortion: None,
            height_m,
            max_settlement_mm: Some(stage1.max_settlement_mm),
            max_slope: Some(stage1.max_slope),
        },
        set,
    );
    damage.assumptions.push(
        "predicted category from the greenfield profile: building stiffness ignored, an \
         upper-bound (\"possible\") category (Mair, Taylor & Burland 1996, from memory)"
            .into(),
    );
    if !factors.is_greenfield() {
        damage.assumptions.push(format!(
            "relative-stiffness modification factors applied to the predicted Δ/L and ε_h \
             (sag {}, hog {}, tensile {}, compressive {}){}",
            factors.deflection_ratio_sagging,
            factors.deflection_ratio_hogging,
            factors.horizontal_strain_tensile,
            factors.horizontal_strain_compressive,
            factors
                .source
                .as_ref()
                .map(|s| format!("; source: {s}"))
                .unwrap_or_default()
        ));
    }
    let deflection_ratio = parts
        .iter()
        .map(|p| p.deflection_ratio_used)
        .max_by(|x, y| x.abs().total_cmp(&y.abs()));
    Stage2 {
        section: section.clone(),
        inflection_points_m: splits,
        parts,
        stiffness: factors.clone(),
        category: damage.category.map(|c| c.number()),
        governing_strain: damage.governing_strain,
        deflection_ratio,
        damage,
    }
}
