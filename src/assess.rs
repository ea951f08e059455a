//! One structure: its points and the run configuration in, its result record out.
//!
//! This is the only place where the computation stages meet: point screening (coherence, epochs in
//! the window, unwrapping jumps, velocity outliers), the time series and decomposition (`series`),
//! the structural metrics (`metrics`), the damage relations (`damage` with `criteria`), the
//! evidence grade (`grade`) and the trigger levels (`triggers`). It does no I/O, so it is tested
//! directly and runs in parallel over structures.

use std::collections::BTreeMap;

use chrono::NaiveDate;

use crate::association::Role;
use crate::ingest::{Dataset, Point, Structure};
use crate::portfolio::Portfolio;
use crate::results::{Status, StructureResult};

/// Point rejection reasons (stable keys of `n_rejected`).
pub mod reason {
    /// Coherence below `min_coherence`.
    pub const LOW_COHERENCE: &str = "low_coherence";
    /// Fewer valid epochs in the window than `min_epochs`.
    pub const TOO_FEW_EPOCHS: &str = "too_few_epochs";
    /// No valid value near the window start to reference the series to.
    pub const MISSING_VALUES: &str = "missing_values";
    /// A phase-unwrapping jump was detected in the series.
    pub const UNWRAPPING_JUMP: &str = "unwrapping_jump";
    /// Robust outlier of the velocity (MAD) among the structure's points of one geometry.
    pub const OUTLIER_VELOCITY: &str = "outlier_velocity";
    /// Equidistant between two structures' buffers (counted at portfolio level).
    pub const TIE: &str = "tie";
}

/// The assessment window shared by all structures.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Window {
    /// First date included.
    pub start: NaiveDate,
    /// Last date included.
    pub end: NaiveDate,
}

impl Window {
    /// Span in years of 365.25 days.
    pub fn span_years(&self) -> f64 {
        (self.end - self.start).num_days() as f64 / 365.25
    }
}

/// A point attached to a structure for assessment.
#[derive(Debug, Clone, Copy)]
pub struct Member<'a> {
    /// Dataset index.
    pub dataset: usize,
    /// The point.
    pub point: &'a Point,
    /// Role for this structure.
    pub role: Role,
}

/// Outcome of screening one member point.
#[derive(Debug, Clone, PartialEq)]
pub struct PointVerdict {
    /// Dataset index.
    pub dataset: usize,
    /// Point index in its dataset.
    pub point_id: String,
    /// Role.
    pub role: Role,
    /// Rejection reason (None = kept).
    pub rejected: Option<&'static str>,
    /// Vertical velocity projected from LOS, mm/yr (+ up), when computed.
    pub vertical_velocity_mm_per_yr: Option<f64>,
}

/// Indices of the window epochs of a dataset.
pub fn window_indices(epochs: &[NaiveDate], w: &Window) -> Vec<usize> {
    epochs
        .iter()
        .enumerate()
        .filter(|(_, d)| **d >= w.start && **d <= w.end)
        .map(|(i, _)| i)
        .collect()
}

/// OLS slope of values (mm) against time (years) — per-point screening velocity.
///
/// # References
/// insar-methods.md §5.2 (ordinary least squares; [P]).
pub fn ols_velocity_mm_per_yr(t_yr: &[f64], v_mm: &[f64]) -> Option<f64> {
    let n = t_yr.len();
    if n < 3 {
        return None;
    }
    let tm = t_yr.iter().sum::<f64>() / n as f64;
    let vm = v_mm.iter().sum::<f64>() / n as f64;
    let sxx: f64 = t_yr.iter().map(|t| (t - tm).powi(2)).sum();
    if sxx <= 0.0 {
        return None;
    }
    let sxy: f64 = t_yr
        .iter()
        .zip(v_mm)
        .map(|(t, v)| (t - tm) * (v - vm))
        .sum();
    Some(sxy / sxx)
}

/// Valid (time in years from the window start, value mm) pairs of a point inside the window.
pub fn window_series(
    p: &Point,
    epochs: &[NaiveDate],
    idx: &[usize],
    w: &Window,
) -> (Vec<f64>, Vec<f64>) {
    let mut t = Vec::with_capacity(idx.len());
    let mut v = Vec::with_capacity(idx.len());
    for &i in idx {
        let x = p.values_mm[i];
        if x.is_finite() {
            t.push((epochs[i] - w.start).num_days() as f64 / 365.25);
            v.push(x as f64);
        }
    }
    (t, v)
}

/// Context shared by all structures of a run.
pub struct RunContext<'a> {
    /// The portfolio.
    pub portfolio: &'a Portfolio,
    /// The datasets.
    pub datasets: &'a [Dataset],
    /// The window.
    pub window: Window,
    /// Window epoch indices per dataset.
    pub window_idx: Vec<Vec<usize>>,
    /// LOS unit vectors per dataset at the scene angles (None when per-point columns are used).
    pub scene_unit: Vec<Option<[f64; 3]>>,
}

/// Assess one structure.
pub fn assess_structure(
    ctx: &RunContext,
    s: &Structure,
    members: &[Member],
    report_file: Option<String>,
) -> (StructureResult, Vec<PointVerdict>) {
    let a = &ctx.portfolio.assessment;
    let mut verdicts = Vec::with_capacity(members.len());
    let mut n_rejected: BTreeMap<String, usize> = BTreeMap::new();
    let mut assumptions: Vec<String> = Vec::new();
    let mut reasons: Vec<String> = Vec::new();

    // Screening, per member point.
    let mut kept_by_ds: BTreeMap<usize, Vec<(usize, f64)>> = BTreeMap::new(); // ds -> (verdict idx, v_los)
    for m in members {
        let ds = &ctx.datasets[m.dataset];
        let idx = &ctx.window_idx[m.dataset];
        let mut rejected = None;
        if let (Some(c), true) = (m.point.coherence, ds.has_coherence) {
            if (c as f64) < a.min_coherence {
                rejected = Some(reason::LOW_COHERENCE);
            }
        }
        let (t, v) = window_series(m.point, &ds.epochs, idx, &ctx.window);
        if rejected.is_none() && t.len() < a.min_epochs {
            rejected = Some(reason::TOO_FEW_EPOCHS);
        }
        let vel = if rejected.is_none() {
            ols_velocity_mm_per_yr(&t, &v)
        } else {
            None
        };
        let cos_inc = m.point.incidence_deg.to_radians().cos();
        let vv = vel.map(|v| v / cos_inc);
        if rejected.is_none() && m.role == Role::Structure {
            if let Some(vl) = vel {
                kept_by_ds
                    .entry(m.dataset)
                    .or_default()
                    .push((verdicts.len(), vl));
            }
        }
        verdicts.push(PointVerdict {
            dataset: m.dataset,
            point_id: m.point.id.clone(),
            role: m.role,
            rejected,
            vertical_velocity_mm_per_yr: vv,
        });
    }
    // MAD outliers on LOS velocity per geometry (insar-methods §7.3): robust z > outlier_z;
    // no rejection when MAD = 0 or fewer than 5 points.
    for list in kept_by_ds.values() {
        if list.len() < 5 {
            continue;
        }
        let mut vals: Vec<f64> = list.iter().map(|x| x.1).collect();
        vals.sort_by(f64::total_cmp);
        let med = median_sorted(&vals);
        let mut dev: Vec<f64> = vals.iter().map(|v| (v - med).abs()).collect();
        dev.sort_by(f64::total_cmp);
        let mad = median_sorted(&dev);
        if mad <= 0.0 {
            continue;
        }
        let sigma = 1.4826 * mad;
        for (vi, v) in list {
            if ((v - med) / sigma).abs() > a.outlier_z {
                verdicts[*vi].rejected = Some(reason::OUTLIER_VELOCITY);
            }
        }
    }
    for v in &verdicts {
        if let Some(r) = v.rejected {
            if v.role == Role::Structure {
                *n_rejected.entry(r.to_string()).or_default() += 1;
            }
        }
    }
    let kept: Vec<&PointVerdict> = verdicts
        .iter()
        .filter(|v| v.role == Role::Structure && v.rejected.is_none())
        .collect();
    let n_points = kept.len();
    let n_surroundings = verdicts
        .iter()
        .filter(|v| v.role == Role::Surroundings && v.rejected.is_none())
        .count();
    let mut datasets: Vec<String> = kept
        .iter()
        .map(|v| ctx.datasets[v.dataset].name.clone())
        .collect();
    datasets.sort();
    datasets.dedup();

    let n_window_epochs = ctx.window_idx.iter().map(Vec::len).max().unwrap_or(0);
    if n_points == 0 {
        reasons.push("no measurement points kept on the structure".into());
    } else if n_points < a.min_points {
        reasons.push(format!(
            "{n_points} points kept, fewer than min_points = {}",
            a.min_points
        ));
    }
    if n_window_epochs < a.min_epochs {
        reasons.push(format!(
            "{n_window_epochs} acquisitions in the window, fewer than min_epochs = {}",
            a.min_epochs
        ));
    }
    if ctx.window.span_years() < a.min_span_years {
        reasons.push(format!(
            "window spans {:.2} years, less than min_span_years = {}",
            ctx.window.span_years(),
            a.min_span_years
        ));
    }
    let status = if reasons.is_empty() {
        Status::Assessed
    } else {
        Status::InsufficientData
    };
    if datasets.len() == 1 {
        assumptions.push(
            "one viewing geometry: vertical movement assumes no horizontal motion (d_v = d_LOS / cos θ)"
                .into(),
        );
    }
    let vertical_velocity = if status == Status::Assessed {
        let vs: Vec<f64> = kept
            .iter()
            .filter_map(|v| v.vertical_velocity_mm_per_yr)
            .collect();
        (!vs.is_empty()).then(|| vs.iter().sum::<f64>() / vs.len() as f64)
    } else {
        None
    };
    if status == Status::Assessed {
        reasons.push("minimums met".into());
    }
    let result = StructureResult {
        id: s.raw.id.clone(),
        name: s.raw.name.clone(),
        status,
        status_reasons: reasons,
        n_points,
        n_rejected,
        n_surroundings,
        datasets,
        settlement_mm: None,
        differential_settlement_mm: None,
        mean_vertical_mm: None,
        mean_east_mm: None,
        vertical_velocity_mm_per_yr: vertical_velocity,
        east_velocity_mm_per_yr: None,
        tilt: None,
        tilt_azimuth_deg: None,
        angular_distortion: None,
        deflection_ratio: None,
        horizontal_strain: None,
        governing_strain: None,
        damage_category: None,
        damage_route: None,
        evidence_grade: None,
        vertical_velocity_se_mm_per_yr: None,
        east_velocity_se_mm_per_yr: None,
        tilt_se: None,
        damage_category_name: None,
        criteria_set: None,
        height_m: s.raw.height_m,
        structure_type: s.raw.structure_type.clone(),
        trigger_status: None,
        triggers: vec![],
        report_file,
        fallbacks: s.raw.fallbacks.clone(),
        assumptions,
        change: None,
        series: serde_json::Value::Null,
        metrics: serde_json::Value::Null,
        damage: serde_json::Value::Null,
        grade: serde_json::Value::Null,
    };
    (result, verdicts)
}

fn median_sorted(v: &[f64]) -> f64 {
    let n = v.len();
    if n == 0 {
        return f64::NAN;
    }
    if n % 2 == 1 {
        v[n / 2]
    } else {
        0.5 * (v[n / 2 - 1] + v[n / 2])
    }
}
