//! Evidence grade of a structure's movement assessment: how far the InSAR evidence supports
//! the metrics and the damage category, with the reasons in words.
//!
//! Owns: the grade names, the thresholds (one struct, documented defaults), the pure grading
//! function and a helper that collects the inputs from the metrics stage. It does not compute
//! metrics, categories or category boundaries; the caller supplies the decisive metric and its
//! nearest category boundary from the damage stage, and the epoch count and time span from the
//! time-series stage.
//!
//! # Grades (our own names, best first)
//! - `robust`: enough well-spread points over a long, dense series, both viewing geometries
//!   agreeing, scatter as expected, and the decisive metric's SE small against the category
//!   boundaries;
//! - `adequate`: a usable assessment with a wider margin of doubt;
//! - `indicative`: the minimum for an indication of movement; metrics are screening values;
//! - `insufficient`: not assessable from InSAR.
//!
//! Each grade requires all its conditions (insar-methods.md §7.10 \[Rec\] as a basis); the result is
//! the best grade whose conditions all hold. The reasons list every condition that failed for
//! each better grade, so a report can say what would have been needed.
//!
//! # Choices beyond §7.10 (ours)
//! - **Scatter ratio** = residual RMS of the best available spatial model / expected noise
//!   (quadratic mean of the points' σ). Residual scatter well above the σ means the points do
//!   not behave as their time series claim (mixed roof/façade/ground points, thermal response,
//!   understated σ), and the σ-based Monte Carlo then understates the uncertainty.
//!   Limits: ≤ 1.5 robust, ≤ 2.5 adequate.
//! - **Both geometries** are required for `robust`: with one geometry every point is a vertical
//!   projection that assumes no horizontal motion (insar-methods.md §3.1, damage-relations.md §9.4),
//!   and no consistency check between datasets is possible.
//! - **SE against the boundary** follows §7.10 literally: SE ≤ 0.25 (robust) / 0.5 (adequate)
//!   × the value of the nearest category boundary. It measures precision at the scale of the
//!   thresholds, which is what "evidence" means; the distance of the value to the boundary says
//!   how certain the *category* is, which the report states separately through category
//!   probabilities. The margin |value − boundary|/SE is still added to the reasons for reading.
//! - **Coherence** is optional: when the mean coherence is not supplied, the condition is
//!   skipped and a reason says so (not every dataset carries coherence). Every other unknown
//!   input fails the conditions that need it.

// `!(x <= limit)` on purpose: true for NaN, so a NaN never passes a condition.
#![allow(clippy::neg_cmp_op_on_partial_ord)]

use serde::{Deserialize, Serialize};

use crate::metrics::{AxisKind, StructureMetrics};

/// Evidence grade, best first.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Grade {
    /// Strong, consistent evidence.
    Robust,
    /// Usable evidence with a wider margin of doubt.
    Adequate,
    /// The minimum for an indication of movement.
    Indicative,
    /// Not assessable from InSAR.
    Insufficient,
}

impl Grade {
    /// Lower-case name as written in outputs.
    pub fn name(self) -> &'static str {
        match self {
            Grade::Robust => "robust",
            Grade::Adequate => "adequate",
            Grade::Indicative => "indicative",
            Grade::Insufficient => "insufficient",
        }
    }
}

/// The metric that decides the damage category, with its SE and nearest category boundary.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DecisiveMetric {
    /// Name, e.g. "limiting tensile strain" or "angular distortion".
    pub name: String,
    /// Its value (dimensionless).
    pub value: f64,
    /// Its standard error (same unit).
    pub se: f64,
    /// Value of the nearest category boundary (same unit, > 0).
    pub nearest_boundary: f64,
}

/// Everything the grade looks at.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct GradeInputs {
    /// Structure points used by the metrics.
    pub point_count: usize,
    /// Point span along the principal axis / L; `None` when there are no axes.
    pub principal_axis_coverage: Option<f64>,
    /// Residual RMS of the best available spatial model (mm).
    pub residual_rms_mm: Option<f64>,
    /// Expected noise, quadratic mean of the points' σ (mm).
    pub expected_noise_mm: Option<f64>,
    /// Number of epochs of the time series (the smallest over the datasets used).
    pub epoch_count: Option<usize>,
    /// Time span of the series (years; the shortest over the datasets used).
    pub time_span_yr: Option<f64>,
    /// Number of viewing geometries among the points.
    pub geometry_count: usize,
    /// Whether the geometries agree (tilt within 2σ); `None` when not checkable.
    pub geometries_consistent: Option<bool>,
    /// Mean temporal coherence of the points, when known.
    pub mean_coherence: Option<f64>,
    /// Decisive metric, when a category was computed.
    pub decisive: Option<DecisiveMetric>,
}

impl GradeInputs {
    /// Collect the inputs the metrics stage knows; the rest comes from the other stages.
    ///
    /// The residual RMS is the smaller of the plane-fit RMS and the principal-axis profile-fit
    /// RMS: a bending structure leaves its curvature in the plane residuals, which is signal,
    /// not scatter, so the model that describes the structure better is used.
    pub fn from_metrics(
        m: &StructureMetrics,
        epoch_count: Option<usize>,
        time_span_yr: Option<f64>,
        mean_coherence: Option<f64>,
        decisive: Option<DecisiveMetric>,
    ) -> Self {
        let principal = m
            .axis_metrics
            .iter()
            .find(|a| a.kind == AxisKind::Principal);
        let plane_rms = m.plane_fit.as_ref().map(|p| p.residual_rms_mm);
        let profile_rms = principal
            .and_then(|a| a.profile.as_ref())
            .map(|p| p.residual_rms_mm);
        let residual_rms_mm = match (plane_rms, profile_rms) {
            (Some(a), Some(b)) => Some(a.min(b)),
            (a, b) => a.or(b),
        };
        GradeInputs {
            point_count: m.point_count,
            principal_axis_coverage: principal.map(|a| a.coverage_fraction),
            residual_rms_mm,
            expected_noise_mm: m.expected_noise_mm,
            epoch_count,
            time_span_yr,
            geometry_count: m.geometries.len(),
            geometries_consistent: m.geometries_consistent,
            mean_coherence,
            decisive,
        }
    }
}

/// Conditions of one grade; `None` switches a condition off.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LevelThresholds {
    /// Minimum structure points.
    pub min_points: usize,
    /// Minimum principal-axis coverage (fraction of L).
    pub min_coverage: Option<f64>,
    /// Minimum time span (years).
    pub min_span_yr: f64,
    /// Minimum epochs.
    pub min_epochs: usize,
    /// Largest residual RMS / expected noise.
    pub max_scatter_ratio: Option<f64>,
    /// Largest SE of the decisive metric as a fraction of the nearest boundary.
    pub max_se_to_boundary: Option<f64>,
    /// Minimum mean coherence (skipped when the coherence is not supplied).
    pub min_mean_coherence: Option<f64>,
    /// Both (≥ 2) viewing geometries required.
    pub require_two_geometries: bool,
    /// Geometries must agree where they can be compared.
    pub require_consistent_geometries: bool,
}

/// Thresholds of all grades.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct GradeThresholds {
    /// Conditions for `robust`.
    pub robust: LevelThresholds,
    /// Conditions for `adequate`.
    pub adequate: LevelThresholds,
    /// Conditions for `indicative`.
    pub indicative: LevelThresholds,
}

impl Default for GradeThresholds {
    /// insar-methods.md §7.10 \[Rec\] ("high/medium/low" there → robust/adequate/indicative here),
    /// plus the scatter-ratio and geometry conditions explained in the module docs (ours).
    fn default() -> Self {
        Self {
            robust: LevelThresholds {
                min_points: 10,
                min_coverage: Some(0.6),
                min_span_yr: 2.0,
                min_epochs: 50,
                max_scatter_ratio: Some(1.5),
                max_se_to_boundary: Some(0.25),
                min_mean_coherence: Some(0.8),
                require_two_geometries: true,
                require_consistent_geometries: true,
            },
            adequate: LevelThresholds {
                min_points: 5,
                min_coverage: Some(0.4),
                min_span_yr: 1.5,
                min_epochs: 30,
                max_scatter_ratio: Some(2.5),
                max_se_to_boundary: Some(0.5),
                min_mean_coherence: None,
                require_two_geometries: false,
                require_consistent_geometries: false,
            },
            indicative: LevelThresholds {
                min_points: 3,
                min_coverage: None,
                min_span_yr: 1.0,
                min_epochs: 20,
                max_scatter_ratio: None,
                max_se_to_boundary: None,
                min_mean_coherence: None,
                require_two_geometries: false,
                require_consistent_geometries: false,
            },
        }
    }
}

/// Evidence grade of one structure, with the reasons.
///
/// The grade is the best of robust / adequate / indicative whose conditions all hold, else
/// insufficient. Reasons: for every grade better than the result, each failed condition
/// ("robust: 7 points < 10"); then informative lines (margin to the boundary, skipped
/// coherence). A `robust` result has only informative reasons.
///
/// # Units
/// Counts, fractions of L, years, mm; the decisive metric in its own (dimensionless) unit.
///
/// # References
/// insar-methods.md §7.10 \[Rec\] (conditions and default thresholds).
///
/// # Examples
/// ```
/// use plinth::grade::{grade, Grade, GradeInputs, GradeThresholds};
/// let inputs = GradeInputs {
///     point_count: 2, principal_axis_coverage: None, residual_rms_mm: None,
///     expected_noise_mm: None, epoch_count: Some(100), time_span_yr: Some(3.0),
///     geometry_count: 1, geometries_consistent: None, mean_coherence: None, decisive: None,
/// };
/// let (g, reasons) = grade(&inputs, &GradeThresholds::default());
/// assert_eq!(g, Grade::Insufficient);
/// assert!(reasons.iter().any(|r| r.contains("2 points < 3")));
/// ```
pub fn grade(inputs: &GradeInputs, thresholds: &GradeThresholds) -> (Grade, Vec<String>) {
    let mut reasons = Vec::new();
    let levels = [
        (Grade::Robust, &thresholds.robust),
        (Grade::Adequate, &thresholds.adequate),
        (Grade::Indicative, &thresholds.indicative),
    ];
    let mut result = Grade::Insufficient;
    for (g, t) in levels {
        let failed = failed_conditions(inputs, t);
        if failed.is_empty() {
            result = g;
            break;
        }
        reasons.extend(failed.into_iter().map(|f| format!("{}: {f}", g.name())));
    }
    if result == Grade::Insufficient {
        reasons.push("not assessable from InSAR".to_string());
    }
    if let Some(d) = &inputs.decisive {
        if d.se > 0.0 && d.se.is_finite() {
            reasons.push(format!(
                "{} is {:.1} SE from the nearest category boundary",
                d.name,
                (d.value - d.nearest_boundary).abs() / d.se
            ));
        }
    }
    if inputs.mean_coherence.is_none() && levels.iter().any(|(_, t)| t.min_mean_coherence.is_some())
    {
        reasons.push("mean coherence not supplied: coherence condition not assessed".to_string());
    }
    (result, reasons)
}

/// Failed conditions of one grade, in words (empty = all hold).
fn failed_conditions(i: &GradeInputs, t: &LevelThresholds) -> Vec<String> {
    let mut f = Vec::new();
    if i.point_count < t.min_points {
        f.push(format!("{} points < {}", i.point_count, t.min_points));
    }
    if let Some(min) = t.min_coverage {
        match i.principal_axis_coverage {
            Some(c) if c >= min => {}
            Some(c) => f.push(format!(
                "principal-axis coverage {:.0} % < {:.0} % of L",
                c * 100.0,
                min * 100.0
            )),
            None => f.push("principal-axis coverage unknown".to_string()),
        }
    }
    match i.time_span_yr {
        Some(s) if s >= t.min_span_yr => {}
        Some(s) => f.push(format!("time span {s:.2} yr < {:.1} yr", t.min_span_yr)),
        None => f.push("time span unknown".to_string()),
    }
    match i.epoch_count {
        Some(e) if e >= t.min_epochs => {}
        Some(e) => f.push(format!("{e} epochs < {}", t.min_epochs)),
        None => f.push("number of epochs unknown".to_string()),
    }
    if let Some(max) = t.max_scatter_ratio {
        match (i.residual_rms_mm, i.expected_noise_mm) {
            (Some(r), Some(e)) if e > 0.0 => {
                let ratio = r / e;
                if !(ratio <= max) {
                    f.push(format!(
                        "residual scatter {r:.2} mm is {ratio:.2} × the expected noise {e:.2} mm (limit {max:.1})"
                    ));
                }
            }
            _ => f.push("residual scatter against expected noise unknown".to_string()),
        }
    }
    if let Some(max) = t.max_se_to_boundary {
        match &i.decisive {
            Some(d) if d.nearest_boundary > 0.0 && d.se.is_finite() => {
                let r = d.se / d.nearest_boundary;
                if !(r <= max) {
                    f.push(format!(
                        "SE of the {} is {:.2} × the nearest category boundary (limit {max:.2})",
                        d.name, r
                    ));
                }
            }
            Some(d) => f.push(format!(
                "SE of the {} or its category boundary unusable",
                d.name
            )),
            None => f.push("no decisive metric (damage category not computed)".to_string()),
        }
    }
    if let (Some(min), Some(c)) = (t.min_mean_coherence, i.mean_coherence) {
        if !(c >= min) {
            f.push(format!("mean coherence {c:.2} < {min:.2}"));
        }
    }
    if t.require_two_geometries && i.geometry_count < 2 {
        f.push(format!(
            "{} viewing geometr{}; both ascending and descending needed",
            i.geometry_count,
            if i.geometry_count == 1 { "y" } else { "ies" }
        ));
    }
    if t.require_consistent_geometries && i.geometries_consistent == Some(false) {
        f.push("viewing geometries disagree on the tilt by more than 2σ".to_string());
    }
    f
}

#[cfg(test)]
mod tests {
    use super::*;

    fn strong() -> GradeInputs {
        GradeInputs {
            point_count: 24,
            principal_axis_coverage: Some(0.85),
            residual_rms_mm: Some(1.2),
            expected_noise_mm: Some(1.0),
            epoch_count: Some(120),
            time_span_yr: Some(4.0),
            geometry_count: 2,
            geometries_consistent: Some(true),
            mean_coherence: Some(0.88),
            decisive: Some(DecisiveMetric {
                name: "limiting tensile strain".into(),
                value: 2.0e-4,
                se: 0.8e-4,
                nearest_boundary: 5.0e-4,
            }),
        }
    }

    #[test]
    fn strong_evidence_is_robust() {
        let (g, r) = grade(&strong(), &GradeThresholds::default());
        assert_eq!(g, Grade::Robust, "{r:?}");
        // Margin (5e-4 − 2e-4)/0.8e-4 = 3.75 SE (hand-computed).
        assert!(r.iter().any(|x| x.contains("3.8 SE")), "{r:?}");
        assert!(r.iter().all(|x| !x.starts_with("robust:")));
    }

    #[test]
    fn each_robust_condition_downgrades() {
        // §7.10 defaults: each single failure moves a robust case to adequate.
        let t = GradeThresholds::default();
        type Tweak = Box<dyn Fn(&mut GradeInputs)>;
        let cases: Vec<(&str, Tweak)> = vec![
            ("points", Box::new(|i| i.point_count = 9)),
            (
                "coverage",
                Box::new(|i| i.principal_axis_coverage = Some(0.55)),
            ),
            ("span", Box::new(|i| i.time_span_yr = Some(1.9))),
            ("epochs", Box::new(|i| i.epoch_count = Some(49))),
            ("scatter", Box::new(|i| i.residual_rms_mm = Some(1.6))),
            ("se", Box::new(|i| i.decisive.as_mut().unwrap().se = 1.3e-4)),
            ("coherence", Box::new(|i| i.mean_coherence = Some(0.75))),
            (
                "geometries",
                Box::new(|i| {
                    i.geometry_count = 1;
                    i.geometries_consistent = None;
                }),
            ),
            (
                "consistency",
                Box::new(|i| i.geometries_consistent = Some(false)),
            ),
        ];
        for (name, f) in cases {
            let mut i = strong();
            f(&mut i);
            let (g, r) = grade(&i, &t);
            assert_eq!(g, Grade::Adequate, "{name}: {r:?}");
            assert_eq!(
                r.iter().filter(|x| x.starts_with("robust:")).count(),
                1,
                "{name}: exactly one robust reason {r:?}"
            );
        }
    }

    #[test]
    fn indicative_and_insufficient() {
        let t = GradeThresholds::default();
        // Four points, 1.2 years, 25 epochs, no category: indicative (§7.10 "low").
        let i = GradeInputs {
            point_count: 4,
            principal_axis_coverage: None,
            residual_rms_mm: None,
            expected_noise_mm: Some(1.0),
            epoch_count: Some(25),
            time_span_yr: Some(1.2),
            geometry_count: 1,
            geometries_consistent: None,
            mean_coherence: None,
            decisive: None,
        };
        let (g, r) = grade(&i, &t);
        assert_eq!(g, Grade::Indicative, "{r:?}");
        assert!(r.iter().any(|x| x == "adequate: 4 points < 5"));
        assert!(r.iter().any(|x| x.contains("coherence not supplied")));
        // Same with 0.8 years: insufficient.
        let (g, r) = grade(
            &GradeInputs {
                time_span_yr: Some(0.8),
                ..i.clone()
            },
            &t,
        );
        assert_eq!(g, Grade::Insufficient);
        assert!(r.iter().any(|x| x == "not assessable from InSAR"));
        // Unknown epochs fail every level.
        let (g, _) = grade(
            &GradeInputs {
                epoch_count: None,
                ..i
            },
            &t,
        );
        assert_eq!(g, Grade::Insufficient);
    }

    #[test]
    fn from_metrics_collects_counts_and_scatter() {
        use crate::metrics::{MetricPoint, MetricsConfig, structure_metrics};
        use geo::{MultiPolygon, polygon};
        // BLD-1 (insar-methods.md §7.11): plane RMS 0.7523 mm; the profile fit is better or equal
        // only if its RMS is smaller — the helper takes the smaller of the two.
        let pts: Vec<MetricPoint> = [
            (-14.12, -3.54, 5.55),
            (-8.03, -8.10, 6.30),
            (-7.93, -2.27, 5.27),
            (-2.33, -5.96, 6.35),
            (-3.23, 1.60, 5.25),
            (1.87, -1.23, 6.36),
            (1.46, 5.46, 6.49),
            (7.56, 0.90, 7.64),
            (7.66, 6.73, 8.80),
            (13.26, 3.04, 10.18),
        ]
        .iter()
        .map(|&(x, y, s)| MetricPoint::vertical(x, y, s, 1.0, 0))
        .collect();
        let fp = MultiPolygon(vec![polygon![
            (x: -9.9904, y: -12.6962), (x: 15.9904, y: 2.3038),
            (x: 9.9904, y: 12.6962), (x: -15.9904, y: -2.3038)
        ]]);
        let cfg = MetricsConfig {
            monte_carlo_draws: 0,
            ..Default::default()
        };
        let m = structure_metrics(&pts, &fp, 10.0, &cfg);
        let i = GradeInputs::from_metrics(&m, Some(60), Some(2.5), None, None);
        assert_eq!(i.point_count, 10);
        assert_eq!(i.geometry_count, 1);
        assert!(i.residual_rms_mm.unwrap() <= 0.7523 + 1e-4);
        assert_eq!(i.expected_noise_mm, Some(1.0));
        assert!((i.principal_axis_coverage.unwrap() - 0.90).abs() < 1e-3);
        // One geometry and no category: not robust, not adequate (no decisive metric).
        let (g, r) = grade(&i, &GradeThresholds::default());
        assert_eq!(g, Grade::Indicative, "{r:?}");
    }

    #[test]
    fn grade_names_serialise_lowercase() {
        assert_eq!(
            serde_json::to_string(&Grade::Adequate).unwrap(),
            "\"adequate\""
        );
        assert!(Grade::Robust < Grade::Insufficient);
    }
}
