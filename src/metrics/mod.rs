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
//!    (`outliers.rs`, insar-methods.md §7.3);
//! 4. settlement statistics (`settlement.rs`), plane-fit tilt (`tilt.rs`), tilt per geometry
//!    and their consistency;
//! 5. per axis: profile fit, zones, Δ/L, β (`profile.rs`), the pairwise β cross-check
//!    (`direct.rs`), horizontal strain (`strain.rs`);
//! 6. Monte Carlo uncertainty (`uncertainty.rs`);
//! 7. building-level Δ/L and β from the governing axis (principal unless the secondary's value
//!    is larger and resolved from noise).

// `!(x > limit)` is used on purpose throughout: it is true for NaN as well, so a NaN never
// passes a check. Clippy's suggested `partial_cmp` form hides that intent.
#![allow(clippy::neg_cmp_op_on_partial_ord)]

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

/// Settings of the metrics stage; defaults follow insar-methods.md §7.10 \[Rec\] where it gives one.
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
    /// Fit a linear across-axis term in the profiles so that rigid tilt across an axis cannot
    /// create deflection (`profile.rs`); `false` gives the insar-methods.md §7.7 estimator.
    pub profile_across_axis_term: bool,
    /// Smallest standard deviation of the points' across-axis coordinates for that term (m).
    pub min_across_spread_m: f64,
    /// Shortest profile zone as a fraction of L; the effective minimum is the larger of this
    /// times L and `min_pair_spacing_m` (our choice 0.2: a zone shorter than a fifth of the
    /// building rarely holds enough points to be more than noise, damage-relations.md §9.2).
    pub min_zone_fraction: f64,
    /// Robust-z threshold of the residual outlier pass; `None` switches the pass off (§7.3: 3).
    pub residual_outlier_z: Option<f64>,
    /// Minimum points for the residual outlier pass (§7.3: n ≥ 6).
    pub min_points_outlier_pass: usize,
    /// Largest angle between an axis and east–west for horizontal strain (degrees; our choice
    /// 20°, see `strain.rs` for the arithmetic: the unseen north–south normal strain then
    /// weighs at most sin² 20° ≈ 12 %). Replaces the |sin az| ≥ 0.5 rule of §7.8, which let the
    /// unseen component weigh up to 75 %.
    pub strain_axis_max_angle_deg: f64,
    /// Largest condition number of the geometry matrix for the east/up split (default 3, as
    /// the series decomposition, insar-methods.md §4.2 \[Rec\]; ascending/descending pairs give
    /// 1.0–1.8). Both an east-looking and a west-looking geometry are required as well.
    pub strain_max_condition: f64,
    /// Fewest residual degrees of freedom of a profile fit for its Δ/L to support a damage
    /// category (our choice 2: with one, the scatter that sets the SE is a single number).
    pub min_profile_residual_dof: usize,
    /// Largest distance, as a fraction of L, from each end of the axis to the nearest point for
    /// the profile to support a damage category (our choice 0.2, see [`ProfileSupport`]).
    pub max_end_gap_fraction: f64,
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
            profile_across_axis_term: true,
            min_across_spread_m: 1.0,
            residual_outlier_z: Some(3.0),
            min_points_outlier_pass: 6,
            strain_axis_max_angle_deg: 20.0,
            strain_max_condition: 3.0,
            min_profile_residual_dof: 2,
            max_end_gap_fraction: 0.2,
            monte_carlo_draws: 500,
            seed: 0x5EED_0F71_17A5,
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
    /// least `min_pair_spacing_m` apart (damage-relations.md §1.2 / insar-methods.md §7.7 direct).
    pub pairwise_angular_distortion: Option<PairBeta>,
    /// Horizontal strain along the axis (+ extension); `None` when not measurable.
    pub horizontal_strain: Option<AxisStrain>,
    /// Why there is no horizontal strain along this axis; `None` when it was measured.
    pub horizontal_strain_status: HorizontalStrainStatus,
    /// Whether the profile's Δ/L can support a damage category; `None` without a profile.
    pub profile_support: Option<ProfileSupport>,
    /// Why no profile was fitted; `None` when one was.
    pub profile_unavailable_because: Option<String>,
    /// Monte Carlo spread of Δ/L.
    pub deflection_ratio_spread: Option<Spread>,
    /// Whether |Δ/L| ≥ 2·SE (Monte Carlo SE, else the least-squares SE of the quadratic):
    /// the deflection is resolved from noise. `None` without a profile or without an SE.
    pub deflection_ratio_resolved: Option<bool>,
    /// Monte Carlo spread of β (signed).
    pub angular_distortion_spread: Option<Spread>,
}

/// Whether the horizontal strain along an axis was measured, and if not, why.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum HorizontalStrainStatus {
    /// Measured from east–west displacements at both ends.
    Measured,
    /// The axis lies too far from east–west: the radar does not see the north–south part.
    NotObservableAxis,
    /// The data lack an east-looking and a west-looking geometry (or they are too alike) at an
    /// end of the axis: east–west cannot be separated from vertical motion.
    NotObservableGeometry,
    /// Not measured for another reason (no footprint axes, a failed solve).
    NotMeasured,
}

impl HorizontalStrainStatus {
    /// Stable key as written in results.
    pub fn key(self) -> &'static str {
        match self {
            HorizontalStrainStatus::Measured => "measured",
            HorizontalStrainStatus::NotObservableAxis => "not_observable_axis",
            HorizontalStrainStatus::NotObservableGeometry => "not_observable_geometry",
            HorizontalStrainStatus::NotMeasured => "not_measured",
        }
    }

    fn of(r: &Result<AxisStrain, strain::StrainError>) -> Self {
        use strain::StrainError as E;
        match r {
            Ok(_) => HorizontalStrainStatus::Measured,
            Err(E::AxisOffEastWest { .. }) => HorizontalStrainStatus::NotObservableAxis,
            Err(E::NoOppositeLooks { .. } | E::IllConditioned { .. }) => {
                HorizontalStrainStatus::NotObservableGeometry
            }
            Err(E::Solve(_)) => HorizontalStrainStatus::NotMeasured,
        }
    }
}

/// Whether a profile's deflection ratio is resolved well enough to give a damage category.
///
/// Rule (ours; insar-methods.md §7.7 and §7.10 \[Rec\] as a basis): at least
/// [`MetricsConfig::min_profile_residual_dof`] residual degrees of freedom after the profile
/// model (polynomial terms, one intercept per geometry, the across-axis term), and a point
/// within [`MetricsConfig::max_end_gap_fraction`]·L of **each** end of the axis. Reason: Δ/L is
/// the largest departure of the profile from the chord between the ends of a zone; where no
/// point lies near an end, that end of the chord is an extrapolated polynomial value, and the
/// extrapolation error grows with the cube of the gap for a cubic. A profile from five points
/// in the west 40 % of a terrace can then produce any category.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ProfileSupport {
    /// Points minus fitted parameters.
    pub residual_dof: usize,
    /// Gap from the start of the extent to the first point, fraction of L.
    pub start_gap_fraction: f64,
    /// Gap from the last point to the end of the extent, fraction of L.
    pub end_gap_fraction: f64,
    /// Both conditions hold.
    pub resolved: bool,
    /// Why not, in words ("points cover 40 % of the length; …"); `None` when resolved.
    pub reason: Option<String>,
}

impl ProfileSupport {
    /// Judge a fitted profile against the rule above.
    pub fn of(p: &ProfileFit, cfg: &MetricsConfig) -> Self {
        let k = p.degree + p.geometries.len() + usize::from(p.across_slope_mm_per_m.is_some());
        let residual_dof = p.point_count.saturating_sub(k);
        let (lo, hi) = p
            .points
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), q| {
                (a.min(q.s_m), b.max(q.s_m))
            });
        let start_gap_fraction = ((lo - p.s_min_m) / p.length_m).max(0.0);
        let end_gap_fraction = ((p.s_max_m - hi) / p.length_m).max(0.0);
        let mut why = Vec::new();
        if start_gap_fraction > cfg.max_end_gap_fraction
            || end_gap_fraction > cfg.max_end_gap_fraction
        {
            why.push(format!(
                "points cover {:.0} % of the length (gaps of {:.0} % and {:.0} % at the ends; at \
                 most {:.0} % allowed)",
                (p.coverage_fraction * 100.0).round(),
                start_gap_fraction * 100.0,
                end_gap_fraction * 100.0,
                cfg.max_end_gap_fraction * 100.0
            ));
        }
        if residual_dof < cfg.min_profile_residual_dof {
            why.push(format!(
                "{residual_dof} residual degree(s) of freedom after the profile model ({} points, \
                 {k} parameters; at least {} needed)",
                p.point_count, cfg.min_profile_residual_dof
            ));
        }
        ProfileSupport {
            residual_dof,
            start_gap_fraction,
            end_gap_fraction,
            resolved: why.is_empty(),
            reason: (!why.is_empty()).then(|| why.join("; ")),
        }
    }
}

/// Tilt from one geometry's points alone (comparison of datasets, insar-methods.md §7.4).
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
    /// Length of the zone (m) — the L of the deep-beam relations (damage-relations.md §9.2).
    pub length_m: f64,
    /// Signed Δ/L (+ sagging, − hogging).
    pub deflection_ratio: f64,
    /// Axis-average horizontal strain (+ extension); the same value for every zone of an axis
    /// (InSAR cannot resolve strain per zone); `None` when not measurable.
    pub horizontal_strain: Option<f64>,
    /// True for the zones of the axis that governs the building-level Δ/L.
    pub governing: bool,
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
    /// Look directions among the used points (east-looking first): what the evidence grade
    /// counts, since two tracks looking the same way cannot separate east–west from vertical.
    pub look_directions: Vec<crate::series::los::LookDirection>,
    /// Building-level horizontal-strain status: `measured` when every axis whose zones go to
    /// the damage stage has a measured ε_h, else the status of the first that has not
    /// (principal first).
    pub horizontal_strain_status: HorizontalStrainStatus,
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
    /// Signed Δ/L (+ sagging, − hogging) of the governing axis: the principal axis, or the
    /// secondary when its value is larger and resolved from noise (see `governing_axis`).
    pub deflection_ratio: Option<f64>,
    /// Axis that gives it.
    pub deflection_ratio_axis: Option<AxisKind>,
    /// |β| of the governing axis (same rule as `deflection_ratio`).
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
    /// Zones in the shape the damage stage wants, principal axis first, zones in axis order:
    /// the principal axis's zones, plus the secondary axis's when its Δ/L is resolved from
    /// noise or it governs (principal refused). Empty when no profile could be fitted.
    ///
    /// The secondary (short) axis is left out when unresolved because its noise-driven Δ/L over
    /// a short L would otherwise drive the deep-beam strains by chance (see `governing_axis`).
    pub fn damage_zones(&self) -> Vec<DamageZone> {
        zones_of(&self.axis_metrics, self.deflection_ratio_axis, false)
    }

    /// Zones of both axes regardless of resolution (for plots and diagnostics).
    pub fn all_damage_zones(&self) -> Vec<DamageZone> {
        zones_of(&self.axis_metrics, self.deflection_ratio_axis, true)
    }
}

/// Whether an axis's zones go to the damage stage (see [`StructureMetrics::damage_zones`]).
fn axis_counts_for_damage(a: &AxisMetrics, governing: Option<AxisKind>) -> bool {
    a.kind == AxisKind::Principal
        || a.deflection_ratio_resolved == Some(true)
        || Some(a.kind) == governing
}

fn zones_of(axes: &[AxisMetrics], governing: Option<AxisKind>, all: bool) -> Vec<DamageZone> {
    axes.iter()
        .filter(|a| all || axis_counts_for_damage(a, governing))
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
                    governing: Some(a.kind) == governing,
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

/// Largest point count for the O(n²) pairwise angular-distortion search (thinned above).
pub const PAIRWISE_MAX_POINTS: usize = 2000;

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
    if let Some(ax) = &axes {
        if let Some(m) = ax.area_moment_azimuth_deg {
            let d = (m - ax.principal.azimuth_deg).rem_euclid(180.0);
            let off = d.min(180.0 - d).min((d - 90.0).abs());
            if off > 15.0 {
                notes.push(format!(
                    "footprint is not rectangle-like: its second-moment axis ({m:.0}°) is {off:.0}° \
                     off the wall-aligned axes used for the profiles"
                ));
            }
        }
    }
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
                    // Scale floor: the points' own precision (median σ), see
                    // `outliers::mad_screen_with_floor`.
                    let sig: Vec<f64> = idx.iter().map(|&i| pts[i].sigma_mm).collect();
                    let floor = settlement::median(&sig).unwrap_or(0.0);
                    let scr = outliers::mad_screen_with_floor(&res, z_max, 5, floor);
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
    let axis_cfg = |ax: &Axis| profile_config(ax, cfg);
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
    let look_directions = crate::series::los::look_directions(pts.iter().map(|p| p.unit_enu));
    let horizontal_strain = axis_metrics
        .iter()
        .filter_map(|a| a.horizontal_strain.as_ref().map(|s| s.horizontal_strain))
        .max_by(f64::total_cmp);
    if horizontal_strain.is_none() {
        refusals.push("horizontal strain: not measurable on either axis".to_string());
    }

    // 6. Monte Carlo: per draw the tilt and every axis's profile, degree fixed to the one
    //    chosen on the data.
    let mut raw_draws: Vec<(Option<f64>, Vec<AxisDraw>)> = Vec::new();
    let any_metric = plane.is_some() || axis_metrics.iter().any(|a| a.profile.is_some());
    if cfg.monte_carlo_draws > 0 && any_metric {
        let fixed = draw_axes(axes.as_ref(), &axis_metrics, cfg);
        raw_draws = draws_fast(&pts, plane.is_some(), &fixed, &axis_metrics, cfg);
        for am in &mut axis_metrics {
            let of = |f: fn(&AxisDraw) -> f64| -> Vec<f64> {
                raw_draws
                    .iter()
                    .flat_map(|(_, v)| v.iter().filter(|x| x.kind == am.kind).map(f))
                    .collect()
            };
            am.deflection_ratio_spread = spread_opt(&of(|x| x.deflection_ratio));
            am.angular_distortion_spread = spread_opt(&of(|x| x.angular_distortion));
        }
    } else if cfg.monte_carlo_draws == 0 {
        notes.push("Monte Carlo switched off: only least-squares standard errors".to_string());
    }

    for am in &mut axis_metrics {
        let se = am
            .deflection_ratio_spread
            .map(|s| s.se)
            .or(am.profile.as_ref().and_then(|p| p.deflection_ratio_ls_se));
        am.deflection_ratio_resolved = match (am.deflection_ratio, se) {
            (Some(v), Some(e)) if e.is_finite() => Some(v.abs() >= 2.0 * e),
            _ => None,
        };
    }

    // 7. Building-level Δ/L and β: the governing axis of each (see `governing_axis`).
    let deflection_ratio_axis = governing_axis(
        &axis_metrics,
        |a| a.deflection_ratio,
        |a| {
            a.deflection_ratio_spread
                .map(|s| s.se)
                .or(a.profile.as_ref().and_then(|p| p.deflection_ratio_ls_se))
        },
    );
    let angular_distortion_axis = governing_axis(
        &axis_metrics,
        |a| a.angular_distortion,
        |a| {
            a.angular_distortion_spread
                .map(|s| s.se)
                .or(a.profile.as_ref().and_then(|p| p.angular_distortion_ls_se))
        },
    );
    let on_axis = |k: Option<AxisKind>, f: fn(&AxisMetrics) -> Option<f64>| {
        k.and_then(|k| axis_metrics.iter().find(|a| a.kind == k))
            .and_then(f)
    };
    let deflection_ratio = on_axis(deflection_ratio_axis, |a| a.deflection_ratio);
    let angular_distortion =
        on_axis(angular_distortion_axis, |a| a.angular_distortion).map(f64::abs);
    if deflection_ratio.is_none() {
        refusals.push("deflection ratio: no axis has a profile".to_string());
    }
    if angular_distortion.is_none() {
        refusals.push("angular distortion: no axis has a profile".to_string());
    }
    if deflection_ratio_axis == Some(AxisKind::Secondary)
        || angular_distortion_axis == Some(AxisKind::Secondary)
    {
        notes
            .push("the secondary (short) axis governs a building-level profile metric".to_string());
    }

    let draws: Vec<MetricsDraw> = raw_draws
        .into_iter()
        .map(|(tilt, per_axis)| {
            let find = |k: Option<AxisKind>| k.and_then(|k| per_axis.iter().find(|a| a.kind == k));
            MetricsDraw {
                tilt,
                deflection_ratio: find(deflection_ratio_axis).map(|a| a.deflection_ratio),
                angular_distortion: find(angular_distortion_axis)
                    .map(|a| a.angular_distortion.abs()),
                zones: per_axis
                    .iter()
                    .filter(|a| {
                        axis_metrics
                            .iter()
                            .find(|m| m.kind == a.kind)
                            .is_some_and(|m| axis_counts_for_damage(m, deflection_ratio_axis))
                    })
                    .flat_map(|a| a.zones.iter().cloned())
                    .map(|mut z| {
                        z.governing = Some(z.axis) == deflection_ratio_axis;
                        z
                    })
                    .collect(),
            }
        })
        .collect();
    let uncertainty = (!draws.is_empty()).then(|| {
        let col = |f: fn(&MetricsDraw) -> Option<f64>| -> Vec<f64> {
            draws.iter().filter_map(f).collect()
        };
        MetricsUncertainty {
            method: format!(
                "Monte Carlo, {} draws, each point's settlement perturbed by N(0, σ²) \
                 independently; polynomial degree and across-axis term of each profile fixed to \
                 those chosen on the data; building-level values taken on the governing axis",
                cfg.monte_carlo_draws
            ),
            draws: cfg.monte_carlo_draws,
            seed: cfg.seed,
            tilt: spread_opt(&col(|d| d.tilt)),
            deflection_ratio: spread_opt(&col(|d| d.deflection_ratio)),
            angular_distortion: spread_opt(&col(|d| d.angular_distortion)),
        }
    });

    let horizontal_strain_status = axis_metrics
        .iter()
        .filter(|a| axis_counts_for_damage(a, deflection_ratio_axis))
        .map(|a| a.horizontal_strain_status)
        .find(|s| *s != HorizontalStrainStatus::Measured)
        .unwrap_or(if axis_metrics.is_empty() {
            HorizontalStrainStatus::NotMeasured
        } else {
            HorizontalStrainStatus::Measured
        });
    let tilt_top_offset_mm = plane
        .as_ref()
        .filter(|_| height_m.is_finite() && height_m > 0.0)
        .map(|p| p.tilt * height_m * 1e3);
    StructureMetrics {
        input_point_count: points.len(),
        point_count: n,
        excluded_points: excluded,
        geometries,
        look_directions,
        horizontal_strain_status,
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
            across_m: axis.across_m(p.x_m, p.y_m),
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
    let mut profile_unavailable_because = None;
    let profile = match profile::fit_profile(&samples, axis.s_min_m, axis.s_max_m, pcfg) {
        Ok(p) => Some(p),
        Err(e) => {
            profile_unavailable_because = Some(e.to_string());
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
        // The pairwise search is O(n²): above PAIRWISE_MAX_POINTS points it runs on every k-th
        // point in axis order (deterministic thinning; Plinth choice, keeps 100 000-point
        // structures tractable). The smooth-fit β above is unaffected.
        if x.len() > PAIRWISE_MAX_POINTS {
            let mut order: Vec<usize> = (0..x.len()).collect();
            order.sort_by(|a, b| x[*a].total_cmp(&x[*b]));
            let k = x.len().div_ceil(PAIRWISE_MAX_POINTS);
            let xs: Vec<f64> = order.iter().step_by(k).map(|i| x[*i]).collect();
            let ss: Vec<f64> = order.iter().step_by(k).map(|i| s[*i]).collect();
            return direct::pairwise_beta_max(&xs, &ss, p.chord_tilt, cfg.min_pair_spacing_m);
        }
        direct::pairwise_beta_max(&x, &s, p.chord_tilt, cfg.min_pair_spacing_m)
    });
    let strain_result = strain::axis_strain(
        pts,
        axis,
        cfg.strain_axis_max_angle_deg,
        cfg.strain_max_condition,
    );
    let horizontal_strain_status = HorizontalStrainStatus::of(&strain_result);
    let horizontal_strain = match strain_result {
        Ok(s) => Some(s),
        Err(e) => {
            refusals.push(format!(
                "{name} axis (azimuth {:.1}°) horizontal strain: {e}",
                axis.azimuth_deg
            ));
            None
        }
    };
    let profile_support = profile.as_ref().map(|p| ProfileSupport::of(p, cfg));
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
        horizontal_strain_status,
        profile_support,
        profile_unavailable_because,
        deflection_ratio_spread: None,
        deflection_ratio_resolved: None,
        angular_distortion_spread: None,
    }
}

/// Profile settings of an axis (the data fit's; the Monte Carlo forces the model on top).
fn profile_config(ax: &Axis, cfg: &MetricsConfig) -> ProfileConfig {
    ProfileConfig {
        min_points: cfg.min_points_profile,
        min_axis_coverage: cfg.min_axis_coverage,
        min_points_cubic: cfg.min_points_cubic,
        min_zone_length_m: (cfg.min_zone_fraction * ax.length_m).max(cfg.min_pair_spacing_m),
        curve_samples: cfg.curve_samples,
        force_degree: None,
        across_axis_term: cfg.profile_across_axis_term,
        min_across_spread_m: cfg.min_across_spread_m,
        force_across_term: None,
    }
}

/// The axes with a fitted profile, principal first, with the model chosen on the data.
fn draw_axes(
    axes: Option<&PrincipalAxes>,
    axis_metrics: &[AxisMetrics],
    cfg: &MetricsConfig,
) -> Vec<DrawAxis> {
    axes.iter()
        .flat_map(|ax| {
            [
                (AxisKind::Principal, ax.principal),
                (AxisKind::Secondary, ax.secondary),
            ]
        })
        .filter_map(|(kind, axis)| {
            let am = axis_metrics.iter().find(|a| a.kind == kind)?;
            am.profile.as_ref()?;
            Some(DrawAxis {
                kind,
                axis,
                eps: am.horizontal_strain.as_ref().map(|s| s.horizontal_strain),
                cfg: profile_config(&axis, cfg),
            })
        })
        .collect()
}

/// An axis whose profile the Monte Carlo redraws, with the model chosen on the data.
struct DrawAxis {
    kind: AxisKind,
    axis: Axis,
    /// The axis's horizontal strain, copied into every draw's zones.
    eps: Option<f64>,
    /// Profile settings of the data fit.
    cfg: ProfileConfig,
}

/// The Monte Carlo draws of tilt and per-axis profiles (insar-methods.md §7.10 \[Rec\]), with
/// each design factorised once (`tilt::FixedPlane`, `profile::FixedProfile`): only the
/// settlements change between draws. Equal to [`draws_plain`] up to round-off (tested).
fn draws_fast(
    pts: &[MetricPoint],
    has_tilt: bool,
    fixed: &[DrawAxis],
    axis_metrics: &[AxisMetrics],
    cfg: &MetricsConfig,
) -> Vec<(Option<f64>, Vec<AxisDraw>)> {
    let plane = has_tilt
        .then(|| tilt::FixedPlane::new(pts, cfg.min_points_tilt, cfg.collinearity_min_m2).ok())
        .flatten();
    let profiles: Vec<(&DrawAxis, profile::FixedProfile)> = fixed
        .iter()
        .filter_map(|d| {
            let fit = axis_metrics
                .iter()
                .find(|a| a.kind == d.kind)?
                .profile
                .as_ref()?;
            Some((
                d,
                profile::FixedProfile::new(&samples_on(&d.axis, pts), fit, &d.cfg)?,
            ))
        })
        .collect();
    uncertainty::monte_carlo_settlements(pts, cfg.monte_carlo_draws, cfg.seed, |s| {
        let tilt = plane.as_ref().map(|p| p.tilt(s));
        let per_axis = profiles
            .iter()
            .map(|(d, fp)| {
                let p = fp.evaluate(s);
                axis_draw(d, p.deflection_ratio, p.angular_distortion, &p.zones)
            })
            .collect();
        (tilt, per_axis)
    })
}

/// One axis's draw in the shape the damage stage wants.
fn axis_draw(
    d: &DrawAxis,
    deflection_ratio: f64,
    angular_distortion: f64,
    zones: &[profile::ProfileZone],
) -> AxisDraw {
    AxisDraw {
        kind: d.kind,
        deflection_ratio,
        angular_distortion,
        zones: zones
            .iter()
            .map(|z| DamageZone {
                axis: d.kind,
                axis_azimuth_deg: d.axis.azimuth_deg,
                mode: z.mode,
                length_m: z.length_m,
                deflection_ratio: z.deflection_ratio,
                horizontal_strain: d.eps,
                governing: false,
            })
            .collect(),
    }
}

/// The plain computation of [`draws_fast`]: every draw refits the plane and the profiles from
/// scratch (`fit_plane`, `fit_profile` with the degree and across-axis term forced). Kept as
/// the tests' reference.
#[cfg(test)]
fn draws_plain(
    pts: &[MetricPoint],
    has_tilt: bool,
    fixed: &[DrawAxis],
    axis_metrics: &[AxisMetrics],
    cfg: &MetricsConfig,
) -> Vec<(Option<f64>, Vec<AxisDraw>)> {
    let model = |d: &DrawAxis| {
        let fit = axis_metrics
            .iter()
            .find(|a| a.kind == d.kind)
            .and_then(|a| a.profile.as_ref());
        (
            fit.map(|f| f.degree),
            fit.map(|f| f.across_slope_mm_per_m.is_some()),
        )
    };
    uncertainty::monte_carlo(pts, cfg.monte_carlo_draws, cfg.seed, |w| {
        let tilt = has_tilt
            .then(|| tilt::fit_plane(w, cfg.min_points_tilt, cfg.collinearity_min_m2).ok())
            .flatten()
            .map(|f| f.tilt);
        let mut per_axis = Vec::new();
        for d in fixed {
            let (degree, across) = model(d);
            let pc = ProfileConfig {
                force_degree: degree,
                force_across_term: across,
                curve_samples: 2,
                ..d.cfg.clone()
            };
            if let Ok(p) =
                profile::fit_profile(&samples_on(&d.axis, w), d.axis.s_min_m, d.axis.s_max_m, &pc)
            {
                per_axis.push(axis_draw(
                    d,
                    p.deflection_ratio,
                    p.angular_distortion,
                    &p.zones,
                ));
            }
        }
        (tilt, per_axis)
    })
}

/// One axis's metrics in one Monte Carlo draw.
struct AxisDraw {
    kind: AxisKind,
    deflection_ratio: f64,
    angular_distortion: f64,
    zones: Vec<DamageZone>,
}

/// Axis that gives a building-level profile metric.
///
/// The principal axis governs (it is the profile of insar-methods.md §7.7, and the BLD-1 check
/// values are its values). The secondary (short) axis takes over only when its value is larger
/// in magnitude **and** resolved from noise, |value| ≥ 2·SE (Monte Carlo SE, else the
/// least-squares SE; without either it cannot take over); and it is used alone when the
/// principal profile is refused. Deviation from "largest magnitude over the axes", on purpose:
/// the short axis has fewer points over a shorter L, and the same noise gives a larger Δ/L and
/// β there (σ_β ∝ 1/L); in BLD-1 its Δ/L is −8.7e-5 ± 3.1e-4, pure noise, but larger than the
/// principal axis's −8.43e-5, and a plain maximum would let it govern by chance.
fn governing_axis(
    axes: &[AxisMetrics],
    value: impl Fn(&AxisMetrics) -> Option<f64>,
    se: impl Fn(&AxisMetrics) -> Option<f64>,
) -> Option<AxisKind> {
    let get = |k: AxisKind| axes.iter().find(|a| a.kind == k);
    let p = get(AxisKind::Principal).and_then(&value);
    let sec = get(AxisKind::Secondary);
    let s = sec.and_then(&value);
    match (p, s) {
        (None, None) => None,
        (None, Some(_)) => Some(AxisKind::Secondary),
        (Some(_), None) => Some(AxisKind::Principal),
        (Some(p), Some(s)) => {
            let resolved = sec
                .and_then(&se)
                .is_some_and(|e| e.is_finite() && s.abs() >= 2.0 * e);
            if s.abs() > p.abs() && resolved {
                Some(AxisKind::Secondary)
            } else {
                Some(AxisKind::Principal)
            }
        }
    }
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

#[cfg(test)]
mod tests {
    use super::test_support::{bld1_footprint, bld1_points};
    use super::*;
    use geo::{LineString, Polygon};

    fn rect(len: f64, wid: f64, az_deg: f64) -> MultiPolygon<f64> {
        let a = az_deg.to_radians();
        let (ue, un) = (a.sin(), a.cos());
        let (ve, vn) = (un, -ue);
        let c = |s: f64, t: f64| (s * ue + t * ve, s * un + t * vn);
        MultiPolygon(vec![Polygon::new(
            LineString::from(vec![
                c(-len / 2.0, -wid / 2.0),
                c(len / 2.0, -wid / 2.0),
                c(len / 2.0, wid / 2.0),
                c(-len / 2.0, wid / 2.0),
            ]),
            vec![],
        )])
    }

    /// Grid of points on a rotated rectangle, settlement from `f(s, t)` (axis coordinates).
    fn grid(
        len: f64,
        wid: f64,
        az_deg: f64,
        ns: usize,
        nt: usize,
        mut f: impl FnMut(f64, f64) -> f64,
    ) -> Vec<MetricPoint> {
        let a = az_deg.to_radians();
        let (ue, un) = (a.sin(), a.cos());
        let (ve, vn) = (un, -ue);
        let mut v = Vec::new();
        for i in 0..ns {
            for j in 0..nt {
                let s = -0.45 * len + 0.9 * len * i as f64 / (ns - 1) as f64;
                let t = -0.35 * wid + 0.7 * wid * j as f64 / (nt - 1) as f64;
                v.push(MetricPoint::vertical(
                    s * ue + t * ve,
                    s * un + t * vn,
                    f(s, t),
                    1.0,
                    0,
                ));
            }
        }
        v
    }

    #[test]
    fn bld1_end_to_end() {
        // insar-methods.md §7.11 / Appendix A BLD-1 [C]: ω = 1.857e-4 at 103.1°, SE 6.146e-5,
        // DR = −8.430e-5 (hogging), |β|max = 3.372e-4, δS = 4.93 mm, mean 6.819 mm.
        // 4 significant figures: ±1 in the 4th digit.
        // The §7.7 estimator projects the settlements as they are: no across-axis term.
        let reference = MetricsConfig {
            profile_across_axis_term: false,
            ..MetricsConfig::default()
        };
        let m = structure_metrics(&bld1_points(), &bld1_footprint(), 10.0, &reference);
        assert_eq!(
            m.point_count, 10,
            "no point of BLD-1 is an outlier: {:?}",
            m.excluded_points
        );
        assert!((m.tilt.unwrap() - 1.857e-4).abs() < 1e-7);
        assert!((m.tilt_se.unwrap() - 6.146e-5).abs() < 1e-8);
        assert!((m.tilt_azimuth_deg.unwrap() - 103.1).abs() < 0.1);
        assert!((m.differential_settlement_mm.unwrap() - 4.93).abs() < 5e-4);
        assert!((m.mean_settlement_mm.unwrap() - 6.819).abs() < 5e-4);
        assert_eq!(m.deflection_ratio_axis, Some(AxisKind::Principal));
        assert!((m.deflection_ratio.unwrap() - (-8.430e-5)).abs() < 1e-8);
        assert!((m.angular_distortion.unwrap() - 3.372e-4).abs() < 1e-7);
        // ω·H = 1.857e-4 · 10 m = 1.857 mm.
        assert!((m.tilt_top_offset_mm.unwrap() - 1.857).abs() < 1e-3);
        // One geometry, all vertical: no strain, with the reason recorded.
        assert!(m.horizontal_strain.is_none());
        assert!(m.refusals.iter().any(|r| r.contains("horizontal strain")));
        let zones = m.damage_zones();
        // Secondary-axis Δ/L (−8.7e-5, Monte Carlo SE ≈ 2e-4) is noise: only the principal
        // zone goes to the damage stage; the principal one is resolved (≈ 2.2 SE).
        assert_eq!(m.axis_metrics[1].deflection_ratio_resolved, Some(false));
        assert_eq!(m.axis_metrics[0].deflection_ratio_resolved, Some(true));
        assert_eq!(zones.len(), 1);
        assert!(zones[0].governing && zones[0].axis == AxisKind::Principal);
        assert_eq!(m.all_damage_zones().len(), 2);
        assert!(m.draws.iter().all(|d| d.zones.len() == 1));
        assert_eq!(zones[0].mode, DeflectionMode::Hogging);
        assert!((zones[0].length_m - 30.0).abs() < 1e-3);
        assert!(zones[0].horizontal_strain.is_none());
        // The principal-axis pairwise cross-check is computed on the points.
        assert!(m.axis_metrics[0].pairwise_angular_distortion.is_some());
        assert_eq!(m.draws.len(), 500);
    }

    /// The fast Monte Carlo (designs factorised once) against the plain one (every draw
    /// refitted): same draws up to round-off, on BLD-1 and on a two-geometry block whose
    /// principal profile is a cubic with two zones and an across-axis term.
    #[test]
    fn fast_monte_carlo_draws_equal_the_plain_refits() {
        let close = |a: f64, b: f64| (a - b).abs() <= 1e-9 * a.abs().max(b.abs()) + 1e-15;
        let mut k = 0u32;
        let block: Vec<MetricPoint> = grid(40.0, 16.0, 30.0, 9, 4, |s, t| {
            k += 1;
            let wobble = f64::from(k * 7919 % 13) / 13.0 - 0.5;
            2e-3 * s * s * s + 0.05 * t + 0.4 * wobble
        })
        .into_iter()
        .enumerate()
        .map(|(i, mut p)| {
            p.geometry = i % 2;
            p.settlement_mm += 3.0 * (i % 2) as f64;
            p.sigma_mm = 0.5 + (i % 5) as f64 * 0.6;
            p
        })
        .collect();
        let cases = [
            (bld1_points(), bld1_footprint()),
            (block, rect(40.0, 16.0, 30.0)),
        ];
        for (case, (pts, fp)) in cases.iter().enumerate() {
            let cfg = MetricsConfig {
                monte_carlo_draws: 200,
                residual_outlier_z: None,
                ..MetricsConfig::default()
            };
            let m = structure_metrics(pts, fp, 10.0, &cfg);
            if case == 1 {
                let p = m.axis_metrics[0].profile.as_ref().unwrap();
                assert_eq!((p.degree, p.zones.len()), (3, 2), "{}", p.degree_reason);
                assert!(p.across_slope_mm_per_m.is_some() && p.geometries.len() == 2);
            }
            let fixed = draw_axes(m.axes.as_ref(), &m.axis_metrics, &cfg);
            assert_eq!(fixed.len(), 2, "case {case}: both axes have a profile");
            let fast = draws_fast(pts, true, &fixed, &m.axis_metrics, &cfg);
            let plain = draws_plain(pts, true, &fixed, &m.axis_metrics, &cfg);
            assert_eq!(fast.len(), plain.len());
            for ((ft, fa), (pt, pa)) in fast.iter().zip(&plain) {
                assert!(
                    close(ft.unwrap(), pt.unwrap()),
                    "case {case}: tilt {ft:?} {pt:?}"
                );
                assert_eq!(fa.len(), pa.len());
                for (f, p) in fa.iter().zip(pa) {
                    assert_eq!(f.kind, p.kind);
                    assert!(close(f.deflection_ratio, p.deflection_ratio), "case {case}");
                    assert!(
                        close(f.angular_distortion, p.angular_distortion),
                        "case {case}"
                    );
                    assert_eq!(f.zones.len(), p.zones.len());
                    for (zf, zp) in f.zones.iter().zip(&p.zones) {
                        assert_eq!(zf.mode, zp.mode);
                        assert!(close(zf.length_m, zp.length_m));
                        assert!(close(zf.deflection_ratio, zp.deflection_ratio));
                    }
                }
            }
        }
    }

    #[test]
    fn monte_carlo_matches_linear_propagation_for_bld1() {
        // Independent check of the Monte Carlo: with σ = 1 mm per point, the SE of ω and of
        // Δ/L must match the least-squares formulas evaluated with σ = 1 (the notes' SEs use
        // s = 0.8991 mm, so divide by the fitted residual σ). ω/SE ≈ 2.7 makes |g| slightly
        // non-normal; tolerance 10 %. Sampling error of an SD from 500 draws ≈ 3 %.
        let m = structure_metrics(
            &bld1_points(),
            &bld1_footprint(),
            10.0,
            &MetricsConfig::default(),
        );
        let pf = m.plane_fit.as_ref().unwrap();
        let tilt_se_sigma1 = pf.tilt_se / pf.residual_std_mm;
        let mc = m.uncertainty.as_ref().unwrap();
        let t = mc.tilt.unwrap();
        assert!(
            (t.se - tilt_se_sigma1).abs() < 0.10 * tilt_se_sigma1,
            "{t:?} vs {tilt_se_sigma1}"
        );
        let p = m.axis_metrics[0].profile.as_ref().unwrap();
        let dr_se_sigma1 = p.deflection_ratio_ls_se.unwrap() / p.residual_std_mm;
        let d = m.axis_metrics[0].deflection_ratio_spread.unwrap();
        assert!(
            (d.se - dr_se_sigma1).abs() < 0.10 * dr_se_sigma1,
            "{d:?} vs {dr_se_sigma1}"
        );
        assert!(d.p05 < m.deflection_ratio.unwrap() && m.deflection_ratio.unwrap() < d.p95);
        // Determinism: same seed, same numbers.
        let m2 = structure_metrics(
            &bld1_points(),
            &bld1_footprint(),
            10.0,
            &MetricsConfig::default(),
        );
        assert_eq!(m.uncertainty, m2.uncertainty);
    }

    #[test]
    fn rigidly_tilted_block() {
        // Synthetic: 40 m × 16 m block at azimuth 30°, rigid tilt 0.2 mm/m (2e-4) going down
        // towards azimuth 120°, plus 5 mm uniform settlement. Truth: ω = 2e-4 at 120°,
        // Δ/L = 0, β = 0 (exact data; tolerance 1e-12).
        let g = 0.2_f64;
        let (be, bn) = (g * 120f64.to_radians().sin(), g * 120f64.to_radians().cos());
        let fp = rect(40.0, 16.0, 30.0);
        let pts: Vec<MetricPoint> = grid(40.0, 16.0, 30.0, 5, 3, |_, _| 0.0)
            .into_iter()
            .map(|p| MetricPoint::vertical(p.x_m, p.y_m, 5.0 + be * p.x_m + bn * p.y_m, 1.0, 0))
            .collect();
        let m = structure_metrics(&pts, &fp, 8.0, &MetricsConfig::default());
        assert!((m.tilt.unwrap() - 2e-4).abs() < 1e-12);
        assert!((m.tilt_azimuth_deg.unwrap() - 120.0).abs() < 1e-6);
        assert!(m.deflection_ratio.unwrap().abs() < 1e-12);
        assert!(m.angular_distortion.unwrap() < 1e-12);
        assert!((m.axis_metrics[0].azimuth_deg - 30.0).abs() < 1e-6);
        // Chord tilt along the principal axis = ∇S·(sin 30°, cos 30°) = 0.2·cos(90°) = 0.
        let p = m.axis_metrics[0].profile.as_ref().unwrap();
        assert!(p.chord_tilt.abs() < 1e-12);
        // Along the secondary axis (120°) the whole tilt shows: 2e-4.
        let q = m.axis_metrics[1].profile.as_ref().unwrap();
        assert!((q.chord_tilt - 2e-4).abs() < 1e-12);
    }

    #[test]
    fn sagging_wall_line_recovers_deflection_ratio() {
        // Synthetic wall line: 30 m × 10 m, long axis east-west; S = 10 − 0.04·s² (mm), two
        // rows of 8 points. Truth: Δ = 0.04·30²/4 = 9 mm sagging, Δ/L = 9/30·1e-3 = 3e-4,
        // |β|max = 0.04·30·1e-3 = 1.2e-3 (hand-derived; exact data, tolerance 1e-10).
        let fp = rect(30.0, 10.0, 90.0);
        let pts = grid(30.0, 10.0, 90.0, 8, 2, |s, _| 10.0 - 0.04 * s * s);
        let m = structure_metrics(&pts, &fp, 6.0, &MetricsConfig::default());
        assert_eq!(m.deflection_ratio_axis, Some(AxisKind::Principal));
        assert!((m.deflection_ratio.unwrap() - 3e-4).abs() < 1e-10);
        assert!((m.angular_distortion.unwrap() - 1.2e-3).abs() < 1e-10);
        let z = &m.damage_zones()[0];
        assert_eq!(z.mode, DeflectionMode::Sagging);
        assert!((z.length_m - 30.0).abs() < 1e-9);
    }

    #[test]
    fn hogging_case_with_noise() {
        // Synthetic hogging: 36 m × 12 m at azimuth 135°, S = 2 + 0.1·s + 0.02·s² (mm) plus a
        // deterministic ±0.3 mm pattern, 3 rows of 9 points. Truth: Δ = −0.02·36²/4 = −6.48 mm
        // (hogging), Δ/L = −1.8e-4 (hand-derived). Tolerance 5 % for the noise pattern.
        let fp = rect(36.0, 12.0, 135.0);
        let mut k = 0;
        let pts = grid(36.0, 12.0, 135.0, 9, 3, |s, _| {
            k += 1;
            2.0 + 0.1 * s + 0.02 * s * s + if k % 3 == 0 { 0.3 } else { -0.15 }
        });
        let m = structure_metrics(&pts, &fp, 9.0, &MetricsConfig::default());
        let dr = m.deflection_ratio.unwrap();
        assert!((dr - (-1.8e-4)).abs() < 0.05 * 1.8e-4, "{dr}");
        assert_eq!(m.damage_zones()[0].mode, DeflectionMode::Hogging);
        let sp = m.axis_metrics[0].deflection_ratio_spread.unwrap();
        assert!(sp.p95 < 0.0, "clearly hogging: {sp:?}");
    }

    #[test]
    fn sparse_structure_is_refused_not_zero() {
        let pts: Vec<MetricPoint> = bld1_points().into_iter().take(3).collect();
        let m = structure_metrics(&pts, &bld1_footprint(), 10.0, &MetricsConfig::default());
        assert!(
            m.settlement_mm.is_some(),
            "3 points suffice for settlement statistics"
        );
        assert!(m.tilt.is_none() && m.deflection_ratio.is_none() && m.angular_distortion.is_none());
        assert!(m.refusals.iter().any(|r| r.starts_with("tilt:")));
        assert!(
            m.refusals
                .iter()
                .any(|r| r.contains("principal axis") && r.contains("profile"))
        );
        assert!(m.damage_zones().is_empty());
        assert!(m.uncertainty.is_none());
        let none = structure_metrics(&[], &bld1_footprint(), 10.0, &MetricsConfig::default());
        assert!(none.settlement_mm.is_none());
        assert!(none.refusals.iter().any(|r| r.starts_with("settlement")));
    }

    #[test]
    fn gross_outlier_is_screened_and_invalid_points_dropped() {
        let mut pts = bld1_points();
        pts.push(MetricPoint::vertical(0.5, 0.5, 30.0, 1.0, 0)); // ~23 mm off the plane
        pts.push(MetricPoint::vertical(f64::NAN, 0.0, 1.0, 1.0, 0));
        let m = structure_metrics(&pts, &bld1_footprint(), 10.0, &MetricsConfig::default());
        assert_eq!(m.point_count, 10);
        let idx: Vec<usize> = m.excluded_points.iter().map(|e| e.index).collect();
        assert_eq!(idx, vec![10, 11]);
        assert!((m.tilt.unwrap() - 1.857e-4).abs() < 1e-7);
    }

    #[test]
    fn two_geometries_give_strain_on_the_east_west_axis_only() {
        // 30 m × 12 m east-west block; east motion d_E = 0.05·x mm (ε_h = 0.05e-3 = 5e-5 along
        // the axis, hand-derived), settlement 0.02·x; ascending (θ 39°, α −12°) and descending
        // (θ 37°, α 192°) points at both ends with a +3 mm reference offset on the descending set.
        let los = |t: f64, a: f64| {
            let (t, a) = (t.to_radians(), a.to_radians());
            [-t.sin() * a.cos(), t.sin() * a.sin(), t.cos()]
        };
        let fp = rect(30.0, 12.0, 90.0);
        let mut pts = Vec::new();
        for (k, x) in [-14.0, -11.0, -8.0, -3.0, 2.0, 8.0, 11.0, 14.0]
            .iter()
            .enumerate()
        {
            for (g, u, off) in [(0, los(39.0, -12.0), 0.0), (1, los(37.0, 192.0), 3.0)] {
                let y = if (k + g) % 2 == 0 { -3.0 } else { 3.0 };
                let d_e = 0.05 * x;
                let s = 0.02 * x;
                pts.push(MetricPoint {
                    x_m: *x,
                    y_m: y,
                    settlement_mm: s - off,
                    sigma_mm: 1.0,
                    geometry: g,
                    los_mm: u[0] * d_e + u[2] * (-s) + u[2] * off,
                    unit_enu: u,
                });
            }
        }
        let m = structure_metrics(&pts, &fp, 10.0, &MetricsConfig::default());
        let e = m.axis_metrics[0].horizontal_strain.as_ref().unwrap();
        assert!((e.horizontal_strain - 5e-5).abs() < 1e-12, "{e:?}");
        assert_eq!(m.horizontal_strain, Some(e.horizontal_strain));
        assert!(m.refusals.iter().any(|r| r.contains("90° from east–west")));
        // The 3 mm dataset offset does not bias the tilt (0.02 mm/m eastwards → 2e-5 at 90°).
        assert!((m.tilt.unwrap() - 2e-5).abs() < 1e-12);
        assert!((m.tilt_azimuth_deg.unwrap() - 90.0).abs() < 1e-6);
        assert_eq!(m.geometries_consistent, Some(true));
        assert!(
            m.damage_zones()
                .iter()
                .all(|z| z.axis != AxisKind::Principal
                    || z.horizontal_strain == Some(e.horizontal_strain))
        );
    }

    #[test]
    fn unusable_footprint_refuses_profiles_but_keeps_tilt() {
        let m = structure_metrics(
            &bld1_points(),
            &MultiPolygon(vec![]),
            10.0,
            &MetricsConfig::default(),
        );
        assert!(m.tilt.is_some());
        assert!(m.axis_metrics.is_empty() && m.deflection_ratio.is_none());
        assert!(
            m.refusals
                .iter()
                .any(|r| r.contains("footprint axes unavailable"))
        );
    }

    #[test]
    fn across_axis_tilt_does_not_create_deflection() {
        // Synthetic: a rigid tilt purely across the long axis (0.5 mm/m towards azimuth 0°, the
        // block's long axis runs east-west) on an irregular layout where the points at the two
        // ends sit near the north façade and those in the middle near the south façade. Truth:
        // Δ/L = 0. The §7.7 estimator (no across term) turns the layout into a spurious
        // sagging/hogging; the default does not (exact data, tolerance 1e-12).
        let fp = rect(30.0, 12.0, 90.0);
        let pts: Vec<MetricPoint> = [
            (-14.0, 4.5),
            (-10.0, 3.0),
            (-6.0, -1.0),
            (-2.0, -4.5),
            (2.0, -4.0),
            (6.0, -1.5),
            (10.0, 2.5),
            (14.0, 5.0),
        ]
        .iter()
        .map(|&(x, y)| MetricPoint::vertical(x, y, 3.0 + 0.5 * y, 1.0, 0))
        .collect();
        let cfg = MetricsConfig {
            monte_carlo_draws: 0,
            ..MetricsConfig::default()
        };
        let m = structure_metrics(&pts, &fp, 6.0, &cfg);
        assert!(m.deflection_ratio.unwrap().abs() < 1e-12);
        assert!(m.angular_distortion.unwrap() < 1e-12);
        assert!((m.tilt.unwrap() - 0.5e-3).abs() < 1e-12);
        let plain = structure_metrics(
            &pts,
            &fp,
            6.0,
            &MetricsConfig {
                profile_across_axis_term: false,
                ..cfg
            },
        );
        let dr = plain.axis_metrics[0].deflection_ratio.unwrap();
        assert!(
            dr.abs() > 1e-5,
            "the §7.7 estimator sees a spurious Δ/L: {dr}"
        );
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(32))]
        /// Structure level: any rigid plane (uniform settlement + tilt in any direction) added
        /// to any settlements on an irregular layout leaves every axis's Δ/L and β unchanged
        /// (Burland & Wroth: tilt is rigid-body motion; damage-relations.md §1.2 step 6 \[D\]).
        #[test]
        fn rigid_plane_invariance(
            settle in proptest::collection::vec(-15.0f64..15.0, 14),
            xs in proptest::collection::vec(-14.5f64..14.5, 14),
            ys in proptest::collection::vec(-5.5f64..5.5, 14),
            a in -20.0f64..20.0, b in -1.0f64..1.0, c in -1.0f64..1.0,
        ) {
            let fp = rect(30.0, 12.0, 70.0);
            let rot = 70f64.to_radians();
            let base: Vec<MetricPoint> = (0..14).map(|i| {
                // Layout in axis coordinates, rotated into the frame.
                let (s, t) = (xs[i], ys[i]);
                let (x, y) = (s * rot.sin() + t * rot.cos(), s * rot.cos() - t * rot.sin());
                MetricPoint::vertical(x, y, settle[i], 1.0, 0)
            }).collect();
            let moved: Vec<MetricPoint> = base.iter().map(|p| MetricPoint::vertical(
                p.x_m, p.y_m, p.settlement_mm + a + b * p.x_m + c * p.y_m, 1.0, 0)).collect();
            let cfg = MetricsConfig { monte_carlo_draws: 0, residual_outlier_z: None, ..MetricsConfig::default() };
            let m0 = structure_metrics(&base, &fp, 8.0, &cfg);
            let m1 = structure_metrics(&moved, &fp, 8.0, &cfg);
            for (u, v) in m0.axis_metrics.iter().zip(&m1.axis_metrics) {
                match (u.deflection_ratio, v.deflection_ratio) {
                    (Some(p), Some(q)) => proptest::prop_assert!((p - q).abs() < 1e-9, "{} vs {}", p, q),
                    (p, q) => proptest::prop_assert_eq!(p.is_some(), q.is_some()),
                }
                match (u.angular_distortion, v.angular_distortion) {
                    (Some(p), Some(q)) => proptest::prop_assert!((p - q).abs() < 1e-9),
                    (p, q) => proptest::prop_assert_eq!(p.is_some(), q.is_some()),
                }
            }
        }
    }
}
