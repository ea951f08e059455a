//! Structure movement metrics: from one structure's kept measurement points (period settlement
//! per point, local metric frame) and its footprint to settlement, tilt, per-axis profiles with
//! hogging/sagging zones, deflection ratio, angular distortion, horizontal strain and their
//! uncertainties.
//!
//! Owns: [`structure_metrics`] and the types it hands to the damage, grade and report stages.
//! Pure computation, no I/O. It does not select points for a structure, fit time series,
//! convert LOS to vertical (points arrive with settlement and σ), classify damage or grade the
//! evidence (`crate::grade`).
//!
//! Every metric that cannot be given is `None` with a sentence in `refusals` saying why;
//! insufficient data is never reported as zero movement.
//!
//! Pipeline of [`structure_metrics`]:
//! 1. drop points with non-finite values or negative σ (recorded in `excluded_points`);
//! 2. principal axes of the footprint (`axes.rs`);
//! 3. second-pass outlier screening on plane-fit residuals, per geometry, when n ≥ 6
//!    (`outliers.rs`, insar-methods §7.3);
//! 4. settlement statistics (`settlement.rs`), plane-fit tilt (`tilt.rs`), tilt per geometry
//!    and their consistency;
//! 5. per axis: profile fit, zones, Δ/L, β (`profile.rs`), the pairwise β cross-check
//!    (`direct.rs`), horizontal strain (`strain.rs`);
//! 6. Monte Carlo uncertainty (`uncertainty.rs`).

pub mod axes;
pub mod direct;
mod lsq;
pub mod outliers;
pub mod profile;
pub mod settlement;
pub mod strain;
pub mod tilt;
pub mod uncertainty;

use geo::MultiPolygon;
use serde::{Deserialize, Serialize};

use axes::{Axis, PrincipalAxes};
use direct::PairBeta;
use profile::{DeflectionMode, ProfileConfig, ProfileFit, ProfileSample};
use strain::AxisStrain;
use tilt::PlaneFit;
use uncertainty::Spread;

/// One kept measurement point on a structure, in the structure's local metric frame
/// (x = east, y = north, metres, origin at the footprint centroid; true north).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct MetricPoint {
    /// Easting in the local frame (m).
    pub x_m: f64,
    /// Northing in the local frame (m).
    pub y_m: f64,
    /// Period settlement over the assessment window (mm, + downward).
    pub settlement_mm: f64,
    /// 1-σ of that settlement from the point's time-series fit (mm).
    pub sigma_mm: f64,
    /// Index of the viewing geometry (dataset) it came from.
    pub geometry: usize,
    /// Period LOS displacement (mm, + towards the satellite).
    pub los_mm: f64,
    /// LOS unit vector, ground → satellite (east, north, up).
    pub unit_enu: [f64; 3],
}

impl MetricPoint {
    /// A point seen by a vertical-looking geometry (unit vector (0, 0, 1), LOS = −settlement);
    /// convenient for tests and for data that are already vertical.
    pub fn vertical(
        x_m: f64,
        y_m: f64,
        settlement_mm: f64,
        sigma_mm: f64,
        geometry: usize,
    ) -> Self {
        Self {
            x_m,
            y_m,
            settlement_mm,
            sigma_mm,
            geometry,
            los_mm: -settlement_mm,
            unit_enu: [0.0, 0.0, 1.0],
        }
    }

    fn is_valid(&self) -> bool {
        [
            self.x_m,
            self.y_m,
            self.settlement_mm,
            self.sigma_mm,
            self.los_mm,
        ]
        .iter()
        .chain(&self.unit_enu)
        .all(|v| v.is_finite())
            && self.sigma_mm >= 0.0
    }
}

/// Settings of the metrics stage; defaults follow insar-methods §7.10 [D] where it gives one.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct MetricsConfig {
    /// Minimum points for settlement statistics (§7.10: 3).
    pub min_points_settlement: usize,
    /// Minimum points for the plane tilt (§7.10: 4 non-collinear).
    pub min_points_tilt: usize,
    /// Minimum points for a profile (§7.10: 5).
    pub min_points_profile: usize,
    /// Minimum points before a cubic profile is considered (our choice: 8 = 4 parameters + 4).
    pub min_points_cubic: usize,
    /// Minimum point span along an axis as a fraction of L (§7.10: 0.5).
    pub min_axis_coverage: f64,
    /// Smallest accepted eigenvalue of the position covariance (m², §7.6: (1 m)²).
    pub collinearity_min_m2: f64,
    /// Minimum spacing of point pairs for the pairwise β (m, §7.7: 5 m).
    pub min_pair_spacing_m: f64,
    /// Shortest profile zone as a fraction of L; the effective minimum is the larger of this
    /// times L and `min_pair_spacing_m` (our choice 0.2: a zone shorter than a fifth of the
    /// building rarely holds enough points to be more than noise, damage-relations §9.2).
    pub min_zone_fraction: f64,
    /// Robust-z threshold of the residual outlier pass; `None` switches the pass off (§7.3: 3).
    pub residual_outlier_z: Option<f64>,
    /// Minimum points for the residual outlier pass (§7.3: n ≥ 6).
    pub min_points_outlier_pass: usize,
    /// Smallest |sin az| of an axis for horizontal strain (§7.8: 0.5).
    pub strain_min_abs_sin_azimuth: f64,
    /// Largest condition number of the geometry matrix for the east/up split (our choice 10;
    /// ascending/descending pairs give 1.0–1.8, §4.2).
    pub strain_max_condition: f64,
    /// Monte Carlo draws (0 switches the Monte Carlo off).
    pub monte_carlo_draws: usize,
    /// Seed of the Monte Carlo.
    pub seed: u64,
    /// Samples of each fitted profile curve for plotting.
    pub curve_samples: usize,
}

impl Default for MetricsConfig {
    fn default() -> Self {
        Self {
            min_points_settlement: 3,
            min_points_tilt: 4,
            min_points_profile: 5,
            min_points_cubic: 8,
            min_axis_coverage: 0.5,
            collinearity_min_m2: 1.0,
            min_pair_spacing_m: 5.0,
            min_zone_fraction: 0.2,
            residual_outlier_z: Some(3.0),
            min_points_outlier_pass: 6,
            strain_min_abs_sin_azimuth: 0.5,
            strain_max_condition: 10.0,
            monte_carlo_draws: 500,
            seed: 0x5EED_0F_71_17,
            curve_samples: 41,
        }
    }
}

/// A point left out of the metrics, and why.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ExcludedPoint {
    /// Index in the input slice.
    pub index: usize,
    /// Reason in words.
    pub reason: String,
}

/// Which of the two footprint axes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum AxisKind {
    /// Long side of the minimum-area rectangle.
    Principal,
    /// Short side.
    Secondary,
}

/// Metrics along one footprint axis.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AxisMetrics {
    /// Principal or secondary.
    pub kind: AxisKind,
    /// Axis azimuth (degrees clockwise from north, [0, 180)).
    pub azimuth_deg: f64,
    /// Footprint extent along the axis L (m).
    pub length_m: f64,
    /// Point span along the axis divided by L.
    pub coverage_fraction: f64,
    /// Points projected on the axis.
    pub point_count: usize,
    /// Profile fit with zones, Δ/L and β; `None` when refused (see `refusals`).
    pub profile: Option<ProfileFit>,
    /// Signed Δ/L of the governing zone (+ sagging, − hogging).
    pub deflection_ratio: Option<f64>,
    /// Signed β of largest magnitude on the fitted profile.
    pub angular_distortion: Option<f64>,
    /// Cross-check: largest pairwise β on the raw points relative to the chord tilt, pairs at
    /// least `min_pair_spacing_m` apart (damage-relations §1.2 / insar-methods §7.7 direct).
    pub pairwise_angular_distortion: Option<PairBeta>,
    /// Horizontal strain along the axis (+ extension); `None` when not measurable.
    pub horizontal_strain: Option<AxisStrain>,
    /// Monte Carlo spread of Δ/L.
    pub deflection_ratio_spread: Option<Spread>,
    /// Monte Carlo spread of β (signed).
    pub angular_distortion_spread: Option<Spread>,
}

/// Tilt from one geometry's points alone (comparison of datasets, insar-methods §7.4).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct GeometryTilt {
    /// Geometry index.
    pub geometry: usize,
    /// Points of that geometry.
    pub point_count: usize,
    /// ∂S/∂x (mm/m).
    pub gradient_east_mm_per_m: f64,
    /// ∂S/∂y (mm/m).
    pub gradient_north_mm_per_m: f64,
    /// Tilt (m/m).
    pub tilt: f64,
    /// Its SE (m/m).
    pub tilt_se: f64,
    /// Downward direction (degrees clockwise from north).
    pub tilt_azimuth_deg: f64,
}

/// Monte Carlo uncertainty of the building-level metrics.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MetricsUncertainty {
    /// Method in words.
    pub method: String,
    /// Draws requested.
    pub draws: usize,
    /// Seed used.
    pub seed: u64,
    /// Spread of the tilt magnitude (m/m).
    pub tilt: Option<Spread>,
    /// Spread of the building-level signed Δ/L.
    pub deflection_ratio: Option<Spread>,
    /// Spread of the building-level |β|.
    pub angular_distortion: Option<Spread>,
}

/// One zone in the shape the damage stage wants.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DamageZone {
    /// Axis the zone lies on.
    pub axis: AxisKind,
    /// Azimuth of that axis (degrees).
    pub axis_azimuth_deg: f64,
    /// Sagging or hogging.
    pub mode: DeflectionMode,
    /// Length of the zone (m) — the L of the deep-beam relations (damage-relations §9.2).
    pub length_m: f64,
    /// Signed Δ/L (+ sagging, − hogging).
    pub deflection_ratio: f64,
    /// Axis-average horizontal strain (+ extension); the same value for every zone of an axis
    /// (InSAR cannot resolve strain per zone); `None` when not measurable.
    pub horizontal_strain: Option<f64>,
}

/// Metrics recomputed in one Monte Carlo draw (for category probabilities downstream).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MetricsDraw {
    /// Tilt magnitude (m/m).
    pub tilt: Option<f64>,
    /// Building-level signed Δ/L.
    pub deflection_ratio: Option<f64>,
    /// Building-level |β|.
    pub angular_distortion: Option<f64>,
    /// Zones of both axes (horizontal strain copied from the unperturbed result).
    pub zones: Vec<DamageZone>,
}

/// All movement metrics of one structure.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StructureMetrics {
    /// Points handed in.
    pub input_point_count: usize,
    /// Points used after validation and outlier screening.
    pub point_count: usize,
    /// Points left out, with reasons.
    pub excluded_points: Vec<ExcludedPoint>,
    /// Geometries among the used points, ascending.
    pub geometries: Vec<usize>,
    /// Structure height used downstream (m), as given.
    pub height_m: f64,
    /// Footprint axes; `None` when the footprint is unusable.
    pub axes: Option<PrincipalAxes>,
    /// Maximum settlement (mm, + down).
    pub settlement_mm: Option<f64>,
    /// Minimum settlement (mm).
    pub min_settlement_mm: Option<f64>,
    /// Mean settlement (mm).
    pub mean_settlement_mm: Option<f64>,
    /// Median settlement (mm).
    pub median_settlement_mm: Option<f64>,
    /// Differential settlement max − min (mm).
    pub differential_settlement_mm: Option<f64>,
    /// Its 1-σ noise floor, sqrt(σ_a² + σ_b²) of the two points (mm).
    pub differential_settlement_noise_floor_mm: Option<f64>,
    /// Rigid tilt from the plane fit (m/m).
    pub tilt: Option<f64>,
    /// Least-squares SE of the tilt (m/m).
    pub tilt_se: Option<f64>,
    /// Direction in which the structure goes down (degrees clockwise from north, [0, 360)).
    pub tilt_azimuth_deg: Option<f64>,
    /// SE of that direction (degrees).
    pub tilt_azimuth_se_deg: Option<f64>,
    /// Horizontal offset of the top relative to the base implied by the tilt, ω·H (mm).
    pub tilt_top_offset_mm: Option<f64>,
    /// Full plane fit.
    pub plane_fit: Option<PlaneFit>,
    /// Tilt from each geometry alone, where it has enough points.
    pub tilt_by_geometry: Vec<GeometryTilt>,
    /// Whether the geometries' tilt gradients agree within 2σ (both components); `None` with
    /// fewer than two geometries that can be fitted alone.
    pub geometries_consistent: Option<bool>,
    /// Principal then secondary axis (empty when the footprint is unusable).
    pub axis_metrics: Vec<AxisMetrics>,
    /// Signed Δ/L of largest magnitude over both axes (+ sagging, − hogging).
    pub deflection_ratio: Option<f64>,
    /// Axis that gives it.
    pub deflection_ratio_axis: Option<AxisKind>,
    /// Largest |β| over both axes.
    pub angular_distortion: Option<f64>,
    /// Axis that gives it.
    pub angular_distortion_axis: Option<AxisKind>,
    /// Most tensile of the axes' horizontal strains (+ extension); `None` when no axis is
    /// measurable.
    pub horizontal_strain: Option<f64>,
    /// Quadratic mean of the used points' σ (mm): the noise expected from the time series.
    pub expected_noise_mm: Option<f64>,
    /// Monte Carlo uncertainty.
    pub uncertainty: Option<MetricsUncertainty>,
    /// One sentence per metric that is `None`, saying why.
    pub refusals: Vec<String>,
    /// Other facts a reader needs (choices made, points screened).
    pub notes: Vec<String>,
    /// Monte Carlo draws, for category probabilities; not serialised.
    #[serde(skip)]
    pub draws: Vec<MetricsDraw>,
}

impl StructureMetrics {
    /// Zones of both axes in the shape the damage stage wants (principal axis first, zones in
    /// axis order). Empty when no profile could be fitted.
    pub fn damage_zones(&self) -> Vec<DamageZone> {
        zones_of(&self.axis_metrics)
    }
}

fn zones_of(axes: &[AxisMetrics]) -> Vec<DamageZone> {
    axes.iter()
        .flat_map(|a| {
            let eps = a.horizontal_strain.as_ref().map(|s| s.horizontal_strain);
            a.profile.iter().flat_map(move |p| {
                p.zones.iter().map(move |z| DamageZone {
                    axis: a.kind,
                    axis_azimuth_deg: a.azimuth_deg,
                    mode: z.mode,
                    length_m: z.length_m,
                    deflection_ratio: z.deflection_ratio,
                    horizontal_strain: eps,
                })
            })
        })
        .collect()
}

/// Distinct geometry indices of the points, ascending (deterministic).
pub(crate) fn distinct_geometries(points: &[MetricPoint]) -> Vec<usize> {
    let mut g: Vec<usize> = points.iter().map(|p| p.geometry).collect();
    g.sort_unstable();
    g.dedup();
    g
}

/// Compute all movement metrics of one structure (see the module docs for the pipeline).
///
/// # Units
/// Points in the local frame (m), settlement and σ in mm (+ down); footprint in the same frame;
/// `height_m` in m (used for the tilt's top offset and passed through to the damage stage).
///
/// # References
/// insar-methods.md §7.3–§7.8, §7.10; damage-relations.md §0.2, §1.
///
/// Degenerate input never panics: every metric that cannot be computed is `None` with a reason.
pub fn structure_metrics(
    points: &[MetricPoint],
    footprint: &MultiPolygon<f64>,
    height_m: f64,
    cfg: &MetricsConfig,
) -> StructureMetrics {
    let mut refusals = Vec::new();
    let mut notes = Vec::new();
    let mut excluded = Vec::new();

    // 1. Validation.
    let mut used: Vec<(usize, MetricPoint)> = Vec::new();
    for (i, p) in points.iter().enumerate() {
        if p.is_valid() {
            used.push((i, *p));
        } else {
            excluded.push(ExcludedPoint {
                index: i,
                reason: "non-finite value or negative σ".to_string(),
            });
        }
    }

    // 2. Axes.
    let axes = match axes::principal_axes(footprint) {
        Ok(a) => Some(a),
        Err(e) => {
            refusals.push(format!(
                "profiles and strain: footprint axes unavailable: {e}"
            ));
            None
        }
    };
    if !(height_m.is_finite() && height_m > 0.0) {
        notes.push(format!(
            "height {height_m} m is not a positive number: tilt top offset not computed"
        ));
    }

    // 3. Residual outlier pass.
    if let Some(z_max) = cfg.residual_outlier_z {
        if used.len() >= cfg.min_points_outlier_pass {
            let pts: Vec<MetricPoint> = used.iter().map(|(_, p)| *p).collect();
            if let Ok(fit) = tilt::fit_plane(&pts, cfg.min_points_tilt, cfg.collinearity_min_m2) {
                let mut reject = vec![false; pts.len()];
                for g in distinct_geometries(&pts) {
                    let idx: Vec<usize> =
                        (0..pts.len()).filter(|&i| pts[i].geometry == g).collect();
                    let res: Vec<f64> = idx.iter().map(|&i| fit.residuals_mm[i]).collect();
                    let scr = outliers::mad_screen(&res, z_max, 5);
                    for r in scr.rejected {
                        reject[idx[r]] = true;
                    }
                }
                let mut kept = Vec::new();
                for (k, (i, p)) in used.into_iter().enumerate() {
                    if reject[k] {
                        excluded.push(ExcludedPoint {
                            index: i,
                            reason: format!(
                                "plane-fit residual {:.2} mm beyond {z_max} robust σ of its geometry",
                                fit.residuals_mm[k]
                            ),
                        });
                    } else {
                        kept.push((i, p));
                    }
                }
                used = kept;
            }
        }
    }
    excluded.sort_by_key(|e| e.index);
    let pts: Vec<MetricPoint> = used.iter().map(|(_, p)| *p).collect();
    let geometries = distinct_geometries(&pts);
    let n = pts.len();
    let expected_noise_mm = (n > 0)
        .then(|| (pts.iter().map(|p| p.sigma_mm * p.sigma_mm).sum::<f64>() / n as f64).sqrt());
    if geometries.len() > 1 {
        notes.push(format!(
            "{} viewing geometries: tilt and profiles fit one offset per geometry; settlement \
             statistics assume the datasets share reference point and epoch",
            geometries.len()
        ));
    }

    // 4. Settlement.
    let settlement = if n >= cfg.min_points_settlement {
        let s: Vec<f64> = pts.iter().map(|p| p.settlement_mm).collect();
        let sig: Vec<f64> = pts.iter().map(|p| p.sigma_mm).collect();
        settlement::settlement_summary(&s, &sig)
    } else {
        None
    };
    if settlement.is_none() {
        refusals.push(format!(
            "settlement statistics: {n} usable points, at least {} needed",
            cfg.min_points_settlement
        ));
    }

    // Tilt.
    let plane = match tilt::fit_plane(&pts, cfg.min_points_tilt, cfg.collinearity_min_m2) {
        Ok(f) => Some(f),
        Err(e) => {
            refusals.push(format!("tilt: {e}"));
            None
        }
    };
    let mut tilt_by_geometry = Vec::new();
    if geometries.len() > 1 {
        for &g in &geometries {
            let sub: Vec<MetricPoint> = pts.iter().filter(|p| p.geometry == g).copied().collect();
            if let Ok(f) = tilt::fit_plane(&sub, cfg.min_points_tilt, cfg.collinearity_min_m2) {
                tilt_by_geometry.push((
                    GeometryTilt {
                        geometry: g,
                        point_count: sub.len(),
                        gradient_east_mm_per_m: f.gradient_east_mm_per_m,
                        gradient_north_mm_per_m: f.gradient_north_mm_per_m,
                        tilt: f.tilt,
                        tilt_se: f.tilt_se,
                        tilt_azimuth_deg: f.tilt_azimuth_deg,
                    },
                    f,
                ));
            }
        }
    }
    let geometries_consistent = (tilt_by_geometry.len() >= 2).then(|| {
        let mut ok = true;
        for i in 0..tilt_by_geometry.len() {
            for j in i + 1..tilt_by_geometry.len() {
                let (a, b) = (&tilt_by_geometry[i].1, &tilt_by_geometry[j].1);
                let de = (a.gradient_east_mm_per_m - b.gradient_east_mm_per_m).abs();
                let dn = (a.gradient_north_mm_per_m - b.gradient_north_mm_per_m).abs();
                let se_e = a
                    .gradient_east_se_mm_per_m
                    .hypot(b.gradient_east_se_mm_per_m);
                let se_n = a
                    .gradient_north_se_mm_per_m
                    .hypot(b.gradient_north_se_mm_per_m);
                ok &= de <= 2.0 * se_e && dn <= 2.0 * se_n;
            }
        }
        ok
    });
    let tilt_by_geometry: Vec<GeometryTilt> =
        tilt_by_geometry.into_iter().map(|(g, _)| g).collect();

    // 5. Axes.
    let axis_cfg = |ax: &Axis| ProfileConfig {
        min_points: cfg.min_points_profile,
        min_axis_coverage: cfg.min_axis_coverage,
        min_points_cubic: cfg.min_points_cubic,
        min_zone_length_m: (cfg.min_zone_fraction * ax.length_m).max(cfg.min_pair_spacing_m),
        curve_samples: cfg.curve_samples,
        force_degree: None,
    };
    let mut axis_metrics = Vec::new();
    if let Some(ax) = &axes {
        for (kind, axis) in [
            (AxisKind::Principal, ax.principal),
            (AxisKind::Secondary, ax.secondary),
        ] {
            axis_metrics.push(axis_result(
                kind,
                &axis,
                &pts,
                cfg,
                &axis_cfg(&axis),
                &mut refusals,
            ));
        }
    }
    let (deflection_ratio, deflection_ratio_axis) = pick(&axis_metrics, |a| a.deflection_ratio);
    let (beta, angular_distortion_axis) = pick(&axis_metrics, |a| a.angular_distortion);
    let angular_distortion = beta.map(f64::abs);
    if deflection_ratio.is_none() {
        refusals.push("deflection ratio: no axis has a profile".to_string());
    }
    if angular_distortion.is_none() {
        refusals.push("angular distortion: no axis has a profile".to_string());
    }
    let horizontal_strain = axis_metrics
        .iter()
        .filter_map(|a| a.horizontal_strain.as_ref().map(|s| s.horizontal_strain))
        .max_by(f64::total_cmp);
    if horizontal_strain.is_none() {
        refusals.push("horizontal strain: not measurable on either axis".to_string());
    }

    // 6. Monte Carlo.
    let mut draws = Vec::new();
    let mut uncertainty = None;
    if cfg.monte_carlo_draws > 0 && (plane.is_some() || deflection_ratio.is_some()) {
        let fixed: Vec<(AxisKind, Axis, Option<usize>, Option<f64>)> = axes
            .iter()
            .flat_map(|ax| {
                [
                    (AxisKind::Principal, ax.principal),
                    (AxisKind::Secondary, ax.secondary),
                ]
            })
            .map(|(k, axis)| {
                let am = axis_metrics.iter().find(|a| a.kind == k);
                let deg = am.and_then(|a| a.profile.as_ref()).map(|p| p.degree);
                let eps = am
                    .and_then(|a| a.horizontal_strain.as_ref())
                    .map(|s| s.horizontal_strain);
                (k, axis, deg, eps)
            })
            .collect();
        let has_tilt = plane.is_some();
        // Per axis (principal, secondary): Monte Carlo Δ/L and β values.
        let mut mc_axis: [(Vec<f64>, Vec<f64>); 2] = Default::default();
        draws = uncertainty::monte_carlo(&pts, cfg.monte_carlo_draws, cfg.seed, |w| {
            let tilt = has_tilt
                .then(|| tilt::fit_plane(w, cfg.min_points_tilt, cfg.collinearity_min_m2).ok())
                .flatten()
                .map(|f| f.tilt);
            let mut zones = Vec::new();
            let mut per_axis = Vec::new();
            for (kind, axis, deg, eps) in &fixed {
                let Some(deg) = deg else { continue };
                let pc = ProfileConfig {
                    force_degree: Some(*deg),
                    curve_samples: 2,
                    ..axis_cfg(axis)
                };
                if let Ok(p) =
                    profile::fit_profile(&samples_on(axis, w), axis.s_min_m, axis.s_max_m, &pc)
                {
                    for z in &p.zones {
                        zones.push(DamageZone {
                            axis: *kind,
                            axis_azimuth_deg: axis.azimuth_deg,
                            mode: z.mode,
                            length_m: z.length_m,
                            deflection_ratio: z.deflection_ratio,
                            horizontal_strain: *eps,
                        });
                    }
                    per_axis.push((*kind, p.deflection_ratio, p.angular_distortion));
                }
            }
            let dr = per_axis
                .iter()
                .map(|a| a.1)
                .max_by(|a, b| a.abs().total_cmp(&b.abs()));
            let ad = per_axis.iter().map(|a| a.2.abs()).max_by(f64::total_cmp);
            (
                MetricsDraw {
                    tilt,
                    deflection_ratio: dr,
                    angular_distortion: ad,
                    zones,
                },
                per_axis,
            )
        })
        .into_iter()
        .map(|(d, per_axis)| {
            for (kind, dr, b) in per_axis {
                let k = usize::from(kind == AxisKind::Secondary);
                mc_axis[k].0.push(dr);
                mc_axis[k].1.push(b);
            }
            d
        })
        .collect();
        for am in &mut axis_metrics {
            let k = usize::from(am.kind == AxisKind::Secondary);
            am.deflection_ratio_spread = spread_opt(&mc_axis[k].0);
            am.angular_distortion_spread = spread_opt(&mc_axis[k].1);
        }
        let col = |f: fn(&MetricsDraw) -> Option<f64>| -> Vec<f64> {
            draws.iter().filter_map(f).collect()
        };
        uncertainty = Some(MetricsUncertainty {
            method: format!(
                "Monte Carlo, {} draws, each point's settlement perturbed by N(0, σ²) independently; \
                 polynomial degree of each profile fixed to the one chosen on the data",
                cfg.monte_carlo_draws
            ),
            draws: cfg.monte_carlo_draws,
            seed: cfg.seed,
            tilt: spread_opt(&col(|d| d.tilt)),
            deflection_ratio: spread_opt(&col(|d| d.deflection_ratio)),
            angular_distortion: spread_opt(&col(|d| d.angular_distortion)),
        });
    } else if cfg.monte_carlo_draws == 0 {
        notes.push("Monte Carlo switched off: only least-squares standard errors".to_string());
    }

    let tilt_top_offset_mm = plane
        .as_ref()
        .filter(|_| height_m.is_finite() && height_m > 0.0)
        .map(|p| p.tilt * height_m * 1e3);
    StructureMetrics {
        input_point_count: points.len(),
        point_count: n,
        excluded_points: excluded,
        geometries,
        height_m,
        axes,
        settlement_mm: settlement.as_ref().map(|s| s.max_settlement_mm),
        min_settlement_mm: settlement.as_ref().map(|s| s.min_settlement_mm),
        mean_settlement_mm: settlement.as_ref().map(|s| s.mean_settlement_mm),
        median_settlement_mm: settlement.as_ref().map(|s| s.median_settlement_mm),
        differential_settlement_mm: settlement.as_ref().map(|s| s.differential_settlement_mm),
        differential_settlement_noise_floor_mm: settlement
            .as_ref()
            .map(|s| s.differential_noise_floor_mm),
        tilt: plane.as_ref().map(|p| p.tilt),
        tilt_se: plane.as_ref().map(|p| p.tilt_se),
        tilt_azimuth_deg: plane.as_ref().map(|p| p.tilt_azimuth_deg),
        tilt_azimuth_se_deg: plane.as_ref().map(|p| p.tilt_azimuth_se_deg),
        tilt_top_offset_mm,
        plane_fit: plane,
        tilt_by_geometry,
        geometries_consistent,
        axis_metrics,
        deflection_ratio,
        deflection_ratio_axis,
        angular_distortion,
        angular_distortion_axis,
        horizontal_strain,
        expected_noise_mm,
        uncertainty,
        refusals,
        notes,
        draws,
    }
}

fn samples_on(axis: &Axis, pts: &[MetricPoint]) -> Vec<ProfileSample> {
    pts.iter()
        .map(|p| ProfileSample {
            s_m: axis.coordinate_m(p.x_m, p.y_m),
            settlement_mm: p.settlement_mm,
            geometry: p.geometry,
        })
        .collect()
}

fn axis_result(
    kind: AxisKind,
    axis: &Axis,
    pts: &[MetricPoint],
    cfg: &MetricsConfig,
    pcfg: &ProfileConfig,
    refusals: &mut Vec<String>,
) -> AxisMetrics {
    let name = match kind {
        AxisKind::Principal => "principal",
        AxisKind::Secondary => "secondary",
    };
    let samples = samples_on(axis, pts);
    let coverage = if samples.is_empty() {
        0.0
    } else {
        let lo = samples.iter().map(|p| p.s_m).fold(f64::INFINITY, f64::min);
        let hi = samples
            .iter()
            .map(|p| p.s_m)
            .fold(f64::NEG_INFINITY, f64::max);
        (hi - lo) / axis.length_m
    };
    let profile = match profile::fit_profile(&samples, axis.s_min_m, axis.s_max_m, pcfg) {
        Ok(p) => Some(p),
        Err(e) => {
            refusals.push(format!(
                "{name} axis (azimuth {:.1}°) profile: {e}",
                axis.azimuth_deg
            ));
            None
        }
    };
    let pairwise = profile.as_ref().and_then(|p| {
        let x: Vec<f64> = samples.iter().map(|s| s.s_m).collect();
        // Use geometry-aligned settlements so dataset offsets do not enter the pairs.
        let s: Vec<f64> = p.points.iter().map(|q| q.aligned_settlement_mm).collect();
        direct::pairwise_beta_max(&x, &s, p.chord_tilt, cfg.min_pair_spacing_m)
    });
    let horizontal_strain = match strain::axis_strain(
        pts,
        axis,
        cfg.strain_min_abs_sin_azimuth,
        cfg.strain_max_condition,
    ) {
        Ok(s) => Some(s),
        Err(e) => {
            refusals.push(format!(
                "{name} axis (azimuth {:.1}°) horizontal strain: {e}",
                axis.azimuth_deg
            ));
            None
        }
    };
    AxisMetrics {
        kind,
        azimuth_deg: axis.azimuth_deg,
        length_m: axis.length_m,
        coverage_fraction: coverage,
        point_count: samples.len(),
        deflection_ratio: profile.as_ref().map(|p| p.deflection_ratio),
        angular_distortion: profile.as_ref().map(|p| p.angular_distortion),
        profile,
        pairwise_angular_distortion: pairwise,
        horizontal_strain,
        deflection_ratio_spread: None,
        angular_distortion_spread: None,
    }
}

/// Signed value of largest magnitude over the axes, with its axis.
fn pick(
    axes: &[AxisMetrics],
    f: impl Fn(&AxisMetrics) -> Option<f64>,
) -> (Option<f64>, Option<AxisKind>) {
    axes.iter()
        .filter_map(|a| f(a).map(|v| (v, a.kind)))
        .max_by(|a, b| a.0.abs().total_cmp(&b.0.abs()))
        .map_or((None, None), |(v, k)| (Some(v), Some(k)))
}

fn spread_opt(v: &[f64]) -> Option<Spread> {
    uncertainty::spread(v)
}

#[cfg(test)]
pub(crate) mod test_support {
    use super::MetricPoint;
    use geo::{MultiPolygon, polygon};

    /// insar-methods.md §7.11 BLD-1: ten points, settlement S = −w (mm).
    pub fn bld1_points() -> Vec<MetricPoint> {
        [
            (-14.12, -3.54, -5.55),
            (-8.03, -8.10, -6.30),
            (-7.93, -2.27, -5.27),
            (-2.33, -5.96, -6.35),
            (-3.23, 1.60, -5.25),
            (1.87, -1.23, -6.36),
            (1.46, 5.46, -6.49),
            (7.56, 0.90, -7.64),
            (7.66, 6.73, -8.80),
            (13.26, 3.04, -10.18),
        ]
        .iter()
        .map(|&(x, y, w)| MetricPoint::vertical(x, y, -w, 1.0, 0))
        .collect()
    }

    /// insar-methods.md §7.11: 30 m × 12 m rectangle, long axis azimuth 60°.
    pub fn bld1_footprint() -> MultiPolygon<f64> {
        MultiPolygon(vec![polygon![
            (x: -9.9904, y: -12.6962), (x: 15.9904, y: 2.3038),
            (x: 9.9904, y: 12.6962), (x: -15.9904, y: -2.3038)
        ]])
    }
}
