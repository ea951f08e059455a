//! Evidence grade of a structure's movement assessment: how far the InSAR evidence supports
//! the metrics and the damage category, with the reasons in words.
//!
//! Owns: the grade names, the thresholds (one struct, documented defaults), the pure grading
//! function and a helper that collects the inputs from the metrics stage. It does not compute
//! metrics, categories or probabilities; the caller supplies the stated category with its
//! probability from the verdict stage, and the epoch count and time span from the
//! time-series stage.
//!
//! # Grades (our own names, best first)
//! - `robust`: enough well-spread points over a long, dense series, both look directions
//!   agreeing, scatter as expected, and the stated damage category clearly the most probable;
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
//! - **Both look directions** (one east-looking and one west-looking geometry) are required for
//!   `robust`: with one look direction every point is a vertical projection that assumes no
//!   horizontal motion (insar-methods.md §3.1, damage-relations.md §9.4). Two tracks looking the same
//!   way (two ascending passes) count once: they cannot separate east–west from vertical.
//! - **Certainty of the category** replaces §7.10's "SE ≤ 0.25 × the nearest boundary": the
//!   condition is on the Monte Carlo probability of the stated category (≥ 0.8 robust, ≥ 0.5
//!   adequate), which accounts for the distance to the boundary, the bending and the
//!   horizontal-strain uncertainty together. The old rule scaled SE(Δ/L) as if the governing
//!   strain were proportional to Δ/L, which it is not once ε_h enters.
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

/// The stated damage category and how probable it is under the Monte Carlo draws.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CategoryCertainty {
    /// The stated category (0–4, 4 standing for 4–5).
    pub category: u8,
    /// Probability of that category (0–1).
    pub probability: f64,
    /// Probability of a higher category (0–1).
    pub probability_higher: f64,
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
    /// Number of look directions among the points (1 or 2; see [`crate::series::los::LookDirection`]).
    pub look_direction_count: usize,
    /// Whether the geometries agree (tilt within 2σ); `None` when not checkable.
    pub geometries_consistent: Option<bool>,
    /// Mean temporal coherence of the points, when known.
    pub mean_coherence: Option<f64>,
    /// The stated category's probability, when a category was stated.
    pub category: Option<CategoryCertainty>,
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
        category: Option<CategoryCertainty>,
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
            look_direction_count: m.look_directions.len(),
            geometries_consistent: m.geometries_consistent,
            mean_coherence,
            category,
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
    /// Smallest Monte Carlo probability of the stated damage category.
    pub min_category_probability: Option<f64>,
    /// Minimum mean coherence (skipped when the coherence is not supplied).
    pub min_mean_coherence: Option<f64>,
    /// Both look directions (east-looking and west-looking) required.
    pub require_both_look_directions: bool,
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
    /// plus the scatter-ratio, look-direction and category-probability conditions explained in
    /// the module docs (ours; 0.8 and 0.5 are our choices: "clearly the most probable" and
    /// "at least as likely as not").
    fn default() -> Self {
        Self {
            robust: LevelThresholds {
                min_points: 10,
                min_coverage: Some(0.6),
                min_span_yr: 2.0,
                min_epochs: 50,
                max_scatter_ratio: Some(1.5),
                min_category_probability: Some(0.8),
                min_mean_coherence: Some(0.8),
                require_both_look_directions: true,
                require_consistent_geometries: true,
            },
            adequate: LevelThresholds {
                min_points: 5,
                min_coverage: Some(0.4),
                min_span_yr: 1.5,
                min_epochs: 30,
                max_scatter_ratio: Some(2.5),
                min_category_probability: Some(0.5),
                min_mean_coherence: None,
                require_both_look_directions: false,
                require_consistent_geometries: false,
            },
            indicative: LevelThresholds {
                min_points: 3,
                min_coverage: None,
                min_span_yr: 1.0,
                min_epochs: 20,
                max_scatter_ratio: None,
                min_category_probability: None,
                min_mean_coherence: None,
                require_both_look_directions: false,
                require_consistent_geometries: false,
            },
        }
    }
}

/// Evidence grade of one structure, with the reasons.
///
/// The grade is the best of robust / adequate / indicative whose conditions all hold, else
/// insufficient. Reasons: for every grade better than the result, each failed condition
/// ("robust: 7 points < 10"); then informative lines (probability of the stated and of a
/// higher category, skipped coherence). A `robust` result has only informative reasons.
///
/// # Units
/// Counts, fractions of L, years, mm; probabilities 0–1.
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
///     look_direction_count: 1, geometries_consistent: None, mean_coherence: None, category: None,
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
    if let Some(c) = &inputs.category {
        reasons.push(format!(
            "category {} has probability {:.0} %; a higher category {:.0} %",
            c.category,
            c.probability * 100.0,
            c.probability_higher * 100.0
        ));
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
    if let Some(min) = t.min_category_probability {
        match &i.category {
            Some(c) if c.probability >= min => {}
            Some(c) => f.push(format!(
                "probability of category {} is {:.0} % < {:.0} %",
                c.category,
                c.probability * 100.0,
                min * 100.0
            )),
            None => f.push("no damage category stated".to_string()),
        }
    }
    if let (Some(min), Some(c)) = (t.min_mean_coherence, i.mean_coherence) {
        if !(c >= min) {
            f.push(format!("mean coherence {c:.2} < {min:.2}"));
        }
    }
    if t.require_both_look_directions && i.look_direction_count < 2 {
        f.push(format!(
            "{} look direction(s); one east-looking and one west-looking geometry needed",
            i.look_direction_count
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
            look_direction_count: 2,
            geometries_consistent: Some(true),
            mean_coherence: Some(0.88),
            category: Some(CategoryCertainty {
                category: 1,
                probability: 0.9,
                probability_higher: 0.04,
            }),
        }
    }

    #[test]
    fn strong_evidence_is_robust() {
        let (g, r) = grade(&strong(), &GradeThresholds::default());
        assert_eq!(g, Grade::Robust, "{r:?}");
        assert!(
            r.iter()
                .any(|x| x == "category 1 has probability 90 %; a higher category 4 %"),
            "{r:?}"
        );
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
            (
                "probability",
                Box::new(|i| i.category.as_mut().unwrap().probability = 0.7),
            ),
            ("coherence", Box::new(|i| i.mean_coherence = Some(0.75))),
            (
                "geometries",
                Box::new(|i| {
                    i.look_direction_count = 1;
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
            look_direction_count: 1,
            geometries_consistent: None,
            mean_coherence: None,
            category: None,
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
        assert_eq!(i.look_direction_count, 0); // vertical test points look nowhere
        assert!(i.residual_rms_mm.unwrap() <= 0.7523 + 1e-4);
        assert_eq!(i.expected_noise_mm, Some(1.0));
        assert!((i.principal_axis_coverage.unwrap() - 0.90).abs() < 1e-3);
        // One geometry and no category: not robust, not adequate (no category stated).
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
