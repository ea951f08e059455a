//! The verdict of one structure: which damage category its data support, and how probable each
//! category is.
//!
//! Owns: the rules that withhold a category the evidence cannot support (a profile that does not
//! resolve the deflection ratio), the category probabilities from the Monte Carlo draws of the
//! metrics stage carried through the whole chain, and the statement of what the radar could not
//! observe (horizontal strain) and what that does to the category. It does not compute the
//! metrics (`metrics`), the published relations (`damage`) or the evidence grade (`grade`); the
//! grade's "insufficient" withholds the category in `assess`, after grading.
//!
//! # Rules (docs/methods.md, "The verdict")
//! - A category needs the principal axis's profile to be resolved
//!   ([`crate::metrics::ProfileSupport`]: residual degrees of freedom and points near both ends).
//!   The secondary axis's zones join only when its profile is resolved as well. Otherwise no
//!   category; the screening relations that need no profile (Rankin's settlement and slope limits
//!   with the slope from the plane tilt) are still computed and reported as screening.
//! - β enters (Son & Cording, the flags, the slope for Rankin) only from a resolved profile.
//! - Where ε_h was not observable, the strain relations take 0 and the category is a lower bound
//!   (`category_lower_bound`): a horizontal strain the radar cannot see would only add to it.

use rand::SeedableRng;
use rand_distr::{Distribution, StandardNormal};
use serde::Serialize;

use crate::criteria::CriteriaSet;
use crate::damage::assess::{
    DamageAssessment, DamageInput, ZoneInput, assess_damage, route_category,
};
use crate::metrics::profile::DeflectionMode;
use crate::metrics::{AxisKind, DamageZone, HorizontalStrainStatus, StructureMetrics};

/// Number of categories reported (0, 1, 2, 3 and "4–5").
pub const CATEGORY_COUNT: usize = 5;

/// What the verdict stage needs of one structure.
#[derive(Debug, Clone, Copy)]
pub struct VerdictInput<'a> {
    /// Metrics of the structure, with their Monte Carlo draws.
    pub metrics: &'a StructureMetrics,
    /// Criteria set of the structure.
    pub set: &'a CriteriaSet,
    /// Height H of the equivalent beam (m).
    pub height_m: f64,
    /// Seed of the horizontal-strain draws (combined with the structure id by the caller).
    pub seed: u64,
}

/// Probability of each damage category under the Monte Carlo draws.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CategoryProbabilities {
    /// Probability of category 0, 1, 2, 3 and 4–5 (sums to 1).
    pub by_category: [f64; CATEGORY_COUNT],
    /// Draws that gave a category (the denominator).
    pub draws_used: usize,
    /// Draws made.
    pub draws: usize,
    /// How the draws were made, in words.
    pub method: String,
}

impl CategoryProbabilities {
    /// Probability of category `c` (0–4).
    pub fn of(&self, c: u8) -> f64 {
        self.by_category.get(usize::from(c)).copied().unwrap_or(0.0)
    }

    /// Probability of a category above `c`.
    pub fn above(&self, c: u8) -> f64 {
        self.by_category.iter().skip(usize::from(c) + 1).sum()
    }

    /// The object written to results: `{"0": p0, …, "4": p4}`.
    pub fn as_map(&self) -> std::collections::BTreeMap<String, f64> {
        (0..CATEGORY_COUNT)
            .map(|k| (k.to_string(), self.by_category[k]))
            .collect()
    }
}

/// The verdict of one structure.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Verdict {
    /// The damage assessment on the supported zones (category `None` when withheld).
    pub damage: DamageAssessment,
    /// Why the category was withheld by the rules of this module (empty otherwise).
    pub withheld: Vec<String>,
    /// Category probabilities; `None` without a category or without draws.
    pub probabilities: Option<CategoryProbabilities>,
    /// Whether ε_h was measured for the zones that count, and if not why.
    pub horizontal_strain_status: HorizontalStrainStatus,
    /// A category is stated without a measured ε_h: it may be understated.
    pub category_lower_bound: bool,
    /// Δ/L of the building when its profile is resolved (signed, + sagging).
    pub deflection_ratio: Option<f64>,
    /// |β| of the building when its profile is resolved.
    pub angular_distortion: Option<f64>,
}

/// Judge one structure: supported zones → damage → probabilities.
pub fn judge(input: &VerdictInput) -> Verdict {
    let m = input.metrics;
    let support = Support::of(m);
    let damage_input = damage_input(m, &support, input.height_m, m.damage_zones());
    let mut damage = assess_damage(&damage_input, input.set);
    let mut withheld = Vec::new();
    if let Some(why) = &support.principal_unresolved {
        withheld.push(format!("deflection ratio not resolved: {why}"));
        damage.category = None;
        damage.governing_strain = None;
        damage.governing = None;
        damage.category_reasons = withheld.clone();
        damage.assumptions.push(
            "no damage category: the profile does not resolve the deflection ratio; the \
             settlement and slope screening (Rankin 1988, slope from the plane tilt) is \
             reported as screening only"
                .into(),
        );
    }
    let probabilities = damage
        .category
        .and_then(|_| probabilities(m, &support, input));
    let status = m.horizontal_strain_status;
    let category_lower_bound =
        damage.category.is_some() && status != HorizontalStrainStatus::Measured;
    Verdict {
        deflection_ratio: m.deflection_ratio.filter(|_| support.deflection_axis_ok),
        angular_distortion: m.angular_distortion.filter(|_| support.beta_axis_ok),
        damage,
        withheld,
        probabilities,
        horizontal_strain_status: status,
        category_lower_bound,
    }
}

/// Which axes' profiles resolve Δ/L and β.
struct Support {
    /// Why the principal profile does not resolve Δ/L (or was not fitted); `None` when it does,
    /// or when the footprint has no axes (the damage stage then says there is no zone).
    principal_unresolved: Option<String>,
    /// Axes whose zones may enter the damage relations.
    axes_ok: Vec<AxisKind>,
    /// The axis giving β has a resolved profile.
    beta_axis_ok: bool,
    /// The axis giving the building's Δ/L has a resolved profile.
    deflection_axis_ok: bool,
}

impl Support {
    fn of(m: &StructureMetrics) -> Support {
        let resolved = |k: AxisKind| {
            m.axis_metrics
                .iter()
                .find(|a| a.kind == k)
                .and_then(|a| a.profile_support.as_ref())
                .is_some_and(|s| s.resolved)
        };
        let principal = m
            .axis_metrics
            .iter()
            .find(|a| a.kind == AxisKind::Principal);
        let principal_unresolved = principal.and_then(|a| match &a.profile_support {
            Some(s) => s.reason.clone().filter(|_| !s.resolved),
            None => Some(format!(
                "no profile along the principal axis ({})",
                a.profile_unavailable_because
                    .as_deref()
                    .unwrap_or("not fitted")
            )),
        });
        let axes_ok = if principal_unresolved.is_some() {
            Vec::new()
        } else {
            [AxisKind::Principal, AxisKind::Secondary]
                .into_iter()
                .filter(|k| resolved(*k))
                .collect()
        };
        let beta_axis_ok = m
            .angular_distortion_axis
            .is_some_and(|k| axes_ok.contains(&k));
        let deflection_axis_ok = m
            .deflection_ratio_axis
            .is_some_and(|k| axes_ok.contains(&k));
        Support {
            principal_unresolved,
            axes_ok,
            beta_axis_ok,
            deflection_axis_ok,
        }
    }
}

fn zone_input(z: &DamageZone) -> ZoneInput {
    ZoneInput {
        mode: match z.mode {
            DeflectionMode::Sagging => crate::damage::Mode::Sagging,
            DeflectionMode::Hogging => crate::damage::Mode::Hogging,
        },
        length_m: z.length_m,
        deflection_ratio: z.deflection_ratio,
        horizontal_strain: z.horizontal_strain,
    }
}

/// The damage stage's input from the supported zones (`zones` = the metrics' damage zones).
fn damage_input(
    m: &StructureMetrics,
    support: &Support,
    height_m: f64,
    zones: Vec<DamageZone>,
) -> DamageInput {
    let beta = m.angular_distortion.filter(|_| support.beta_axis_ok);
    DamageInput {
        zones: zones
            .iter()
            .filter(|z| support.axes_ok.contains(&z.axis))
            .map(zone_input)
            .collect(),
        angular_distortion: beta,
        height_m,
        max_settlement_mm: m.settlement_mm,
        max_slope: m.tilt.map(|t| t + beta.unwrap_or(0.0)),
    }
}

/// Category probabilities from the metrics' Monte Carlo draws.
///
/// Each draw already holds the profiles refitted on the points' settlements perturbed by
/// N(0, σ²) (`metrics::uncertainty`); here each draw also perturbs every axis's ε_h by
/// N(0, SE²) with its own formal SE (`metrics::strain`), independently of the settlements (the
/// two come from partly the same LOS values; treating them as independent widens the spread
/// slightly). Each draw then goes through the same relations as the stated category
/// ([`route_category`]). The draws are centred on the observed values: they give the spread of
/// the category if the observed values were true. For a |Δ/L| small against its SE the
/// observed magnitude is itself biased upward by noise, so the probability of the higher
/// categories is then overstated (conservative); no correction is applied.
fn probabilities(
    m: &StructureMetrics,
    support: &Support,
    input: &VerdictInput,
) -> Option<CategoryProbabilities> {
    if m.draws.is_empty() {
        return None;
    }
    let thresholds = input.set.strain_thresholds().ok()?;
    let se_of = |k: AxisKind| {
        m.axis_metrics
            .iter()
            .find(|a| a.kind == k)
            .and_then(|a| a.horizontal_strain.as_ref())
            .map(|s| s.horizontal_strain_se)
            .filter(|s| s.is_finite())
            .unwrap_or(0.0)
    };
    let se = [se_of(AxisKind::Principal), se_of(AxisKind::Secondary)];
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(input.seed ^ 0xCA7E_6011);
    let mut counts = [0usize; CATEGORY_COUNT];
    let mut used = 0usize;
    for d in &m.draws {
        let z: [f64; 2] = [
            StandardNormal.sample(&mut rng),
            StandardNormal.sample(&mut rng),
        ];
        let zones: Vec<DamageZone> = d
            .zones
            .iter()
            .map(|zone| {
                let i = usize::from(zone.axis == AxisKind::Secondary);
                let mut zone = zone.clone();
                zone.horizontal_strain = zone.horizontal_strain.map(|e| e + se[i] * z[i]);
                zone
            })
            .collect();
        let mut di = damage_input(m, support, input.height_m, zones);
        di.angular_distortion = d.angular_distortion.filter(|_| support.beta_axis_ok);
        if let Some((c, _)) = route_category(&di, input.set, &thresholds) {
            counts[usize::from(c.number()).min(CATEGORY_COUNT - 1)] += 1;
            used += 1;
        }
    }
    (used > 0).then(|| CategoryProbabilities {
        by_category: counts.map(|c| c as f64 / used as f64),
        draws_used: used,
        draws: m.draws.len(),
        method: format!(
            "{} Monte Carlo draws: point settlements perturbed by their σ and the profiles \
             refitted; horizontal strain perturbed by its SE; each draw classified by the same \
             relations; centred on the observed values (conservative for small deflection \
             ratios)",
            m.draws.len()
        ),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::metrics::{MetricPoint, MetricsConfig, structure_metrics};
    use geo::{MultiPolygon, polygon};

    fn terrace() -> MultiPolygon<f64> {
        // 40 m × 8 m terrace along east–west, centred on the origin.
        MultiPolygon(vec![polygon![
            (x: -20.0, y: -4.0), (x: 20.0, y: -4.0), (x: 20.0, y: 4.0), (x: -20.0, y: 4.0)
        ]])
    }

    /// Points on a sagging parabola s(x) = a·(1 − (x/20)²) + noise-free, vertical geometry.
    fn sag_points(xs: &[f64], amplitude_mm: f64) -> Vec<MetricPoint> {
        xs.iter()
            .enumerate()
            .map(|(i, &x)| {
                let y = if i % 2 == 0 { -2.0 } else { 2.0 };
                let s = amplitude_mm * (1.0 - (x / 20.0f64).powi(2));
                MetricPoint::vertical(x, y, s, 0.5, 0)
            })
            .collect()
    }

    fn judge_points(pts: &[MetricPoint]) -> Verdict {
        let cfg = MetricsConfig {
            monte_carlo_draws: 400,
            ..Default::default()
        };
        let m = structure_metrics(pts, &terrace(), 8.0, &cfg);
        let set = crate::criteria::builtin("masonry").unwrap();
        judge(&VerdictInput {
            metrics: &m,
            set: &set,
            height_m: 8.0,
            seed: 1,
        })
    }

    #[test]
    fn points_in_part_of_the_building_give_no_category() {
        // Five points in the west 40 % of the terrace (x from −20 to −4 m).
        let v = judge_points(&sag_points(&[-19.0, -15.0, -11.0, -8.0, -5.0], 30.0));
        assert!(v.damage.category.is_none(), "{:?}", v.damage.category);
        assert!(
            v.withheld[0].starts_with("deflection ratio not resolved"),
            "{:?}",
            v.withheld
        );
        assert!(v.probabilities.is_none());
        assert!(v.deflection_ratio.is_none());
    }

    #[test]
    fn a_profile_that_stops_short_of_one_end_gives_no_category() {
        // Points from x = −19 to +3 m: 55 % of the length, enough for a profile (≥ 50 %), but
        // the east end lies 17 m = 42 % of L beyond the last point (limit 20 %).
        let xs: Vec<f64> = (0..12).map(|i| -19.0 + 2.0 * i as f64).collect();
        let v = judge_points(&sag_points(&xs, 45.0));
        assert!(v.damage.category.is_none());
        assert!(
            v.withheld[0]
                .starts_with("deflection ratio not resolved: points cover 55 % of the length"),
            "{:?}",
            v.withheld
        );
        // Rankin's settlement screen is still there.
        assert!(v.damage.rankin.is_some());
    }

    #[test]
    fn clear_case_concentrates_on_its_category() {
        // 45 mm of sag over 40 m: Δ/L = 45/40 000 = 1.125e-3 (parabola through the ends).
        // Masonry sagging, L/H = 5, E/G = 2.6 (damage-relations summary item 3):
        // Fb = 5/6 + 2.6/20 = 0.9633 → ε_b = 1.168e-3; Fd = 1 + 50/7.8 = 7.41 → ε_d = 1.5e-4;
        // ε_max = 1.168e-3, category 2 (7.5e-4 to 1.5e-3), far from both boundaries against
        // noise of σ = 0.5 mm on 21 points (hand-computed).
        let xs: Vec<f64> = (0..21).map(|i| -19.5 + 39.0 * i as f64 / 20.0).collect();
        let v = judge_points(&sag_points(&xs, 45.0));
        let c = v.damage.category.expect("category").number();
        assert_eq!(c, 2);
        let p = v.probabilities.expect("probabilities");
        let sum: f64 = p.by_category.iter().sum();
        assert!((sum - 1.0).abs() < 1e-12);
        assert!(p.of(c) > 0.95, "{p:?}");
        // Vertical-only points: no ε_h, the category is a lower bound.
        assert!(v.category_lower_bound);
        assert_eq!(
            v.horizontal_strain_status,
            HorizontalStrainStatus::NotObservableGeometry
        );
    }
}
