//! Per-structure damage assessment: the one function the pipeline calls ([`assess_damage`]).
//!
//! Owns the orchestration of the relations for one structure under one criteria set: per-zone
//! deep-beam strains with horizontal strain, the governing zone / branch, the Son & Cording and
//! (reconstructed) Boscardin & Cording results from angular distortion, the Rankin screen, the
//! Skempton & MacDonald and Bjerrum flags, and the list of assumptions made. It does not derive the
//! movement measures (zones, β, slope) from points — `crate::metrics` does — and does no I/O.
//!
//! Insufficient data is reported as such: the category is `None` with reasons, never category 0.
//! A missing horizontal strain is assumed 0, and that assumption is stated.

use serde::{Deserialize, Serialize};

use super::bjerrum::{BjerrumFlag, bjerrum_flag};
use super::boscardin_cording::{
    CompressivePolicy, RECONSTRUCTION_LABEL, reconstructed_chart_strain, resultant_strains,
};
use super::burland_wroth::{NeutralAxis, beam_strains};
use super::rankin::{RankinResult, rankin_category};
use super::skempton_macdonald::{SkemptonMacDonaldFlag, skempton_macdonald_flag};
use super::son_cording::principal_strain;
use super::{Branch, DamageCategory, Mode, StrainThresholds};
use crate::criteria::{CriteriaSet, Route};

/// One sagging or hogging zone of a structure.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct ZoneInput {
    /// Deformation mode of the zone (decides the neutral axis).
    pub mode: Mode,
    /// Zone length L, m (> 0).
    pub length_m: f64,
    /// Deflection ratio Δ/L, signed: + sagging, − hogging. Its magnitude enters the beam; if the
    /// sign disagrees with `mode`, `mode` is used and a warning is given.
    pub deflection_ratio: f64,
    /// Average horizontal strain over the zone, absolute, + extension; `None` = not measured
    /// (then assumed 0, stated as an assumption).
    pub horizontal_strain: Option<f64>,
}

/// Movement measures of one structure.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DamageInput {
    /// Sagging / hogging zones (may be empty when no profile could be formed).
    pub zones: Vec<ZoneInput>,
    /// Angular distortion β (tilt removed), dimensionless; magnitude used. `None` = not available.
    pub angular_distortion: Option<f64>,
    /// Height H of the equivalent beam (foundation to eaves), m (> 0).
    pub height_m: f64,
    /// Largest settlement, mm, + downward. `None` = not available.
    pub max_settlement_mm: Option<f64>,
    /// Largest |slope| on the structure, dimensionless. `None` = not available.
    pub max_slope: Option<f64>,
}

/// Strains and category of one zone.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ZoneAssessment {
    /// Index of the zone in [`DamageInput::zones`].
    pub index: usize,
    /// Mode used.
    pub mode: Mode,
    /// Neutral axis used (from the criteria set's policy).
    pub neutral_axis: NeutralAxis,
    /// Zone length, m.
    pub length_m: f64,
    /// L/H, dimensionless.
    pub l_over_h: f64,
    /// |Δ/L| used, dimensionless.
    pub deflection_ratio: f64,
    /// Fb, dimensionless.
    pub bending_factor: f64,
    /// Fd, dimensionless.
    pub diagonal_factor: f64,
    /// ε_bmax, absolute.
    pub bending_strain_max: f64,
    /// ε_dmax, absolute.
    pub diagonal_strain_max: f64,
    /// ε_br = ε_bmax + ε_h, absolute.
    pub bending_strain_resultant: f64,
    /// ε_dr, absolute.
    pub diagonal_strain_resultant: f64,
    /// ε_max = max(ε_br, ε_dr), absolute.
    pub governing_strain: f64,
    /// Branch of ε_max (bending or diagonal).
    pub branch: Branch,
    /// ε_h used in the strains (after the compressive policy; 0 if unavailable), absolute.
    pub horizontal_strain_used: f64,
    /// ε_h as given, signed; `None` when not measured.
    pub horizontal_strain_signed: Option<f64>,
    /// `true` when ε_h was not measured and 0 was assumed.
    pub horizontal_strain_unavailable: bool,
    /// Category of this zone under the set's thresholds.
    pub category: DamageCategory,
}

/// A zone that could not be assessed, and why.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SkippedZone {
    /// Index of the zone in [`DamageInput::zones`].
    pub index: usize,
    /// Why it was skipped.
    pub reason: String,
}

/// What governs the category.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Governing {
    /// Route used.
    pub route: Route,
    /// Zone index for the limiting-tensile-strain route; `None` for Son & Cording.
    pub zone_index: Option<usize>,
    /// Mode of that zone; `None` for Son & Cording.
    pub mode: Option<Mode>,
    /// Branch: bending / diagonal (deep beam) or principal (Son & Cording).
    pub branch: Branch,
}

/// Result of a β-based relation (Son & Cording, or the reconstructed Boscardin & Cording chart).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AngularDistortionAssessment {
    /// Relation label (for the reconstruction it says so).
    pub relation: String,
    /// |β| used, dimensionless.
    pub angular_distortion: f64,
    /// Lateral strain used (after the compressive policy; 0 if unavailable), absolute.
    pub lateral_strain_used: f64,
    /// Lateral strain as given, signed; `None` when no zone had a measured ε_h.
    pub lateral_strain_signed: Option<f64>,
    /// `true` when no horizontal strain was measured and 0 was assumed.
    pub lateral_strain_unavailable: bool,
    /// The strain of the relation (ε_p or ε_BC), absolute.
    pub strain: f64,
    /// Angle of the principal tensile direction from horizontal, degrees (Son & Cording only).
    pub principal_angle_deg: Option<f64>,
    /// Thresholds the category was read from, absolute.
    pub thresholds: [f64; 4],
    /// Category from `strain` and `thresholds`.
    pub category: DamageCategory,
}

/// Everything the damage stage reports for one structure.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DamageAssessment {
    /// Criteria set name.
    pub criteria_set: String,
    /// Route of the set.
    pub route: Route,
    /// Thresholds of the set, absolute strain.
    pub thresholds: [f64; 4],
    /// Damage category by the set's route; `None` when it could not be computed (see
    /// `category_reasons`).
    pub category: Option<DamageCategory>,
    /// Why `category` is `None` (empty when it is `Some`).
    pub category_reasons: Vec<String>,
    /// Governing strain of the route, absolute (not %).
    pub governing_strain: Option<f64>,
    /// Which route / zone / mode / branch governs.
    pub governing: Option<Governing>,
    /// Per-zone strains (computable zones only).
    pub zones: Vec<ZoneAssessment>,
    /// Zones that could not be computed.
    pub skipped_zones: Vec<SkippedZone>,
    /// Son & Cording (2005) result when β is given.
    pub son_cording: Option<AngularDistortionAssessment>,
    /// Reconstructed Boscardin & Cording (1989)-type β–ε_h result when β is given (informative;
    /// a reconstruction, see its `relation` label).
    pub boscardin_cording_reconstructed: Option<AngularDistortionAssessment>,
    /// Rankin (1988) screen when settlement or slope is given.
    pub rankin: Option<RankinResult>,
    /// Skempton & MacDonald (1956) flag when β is given.
    pub skempton_macdonald: Option<SkemptonMacDonaldFlag>,
    /// Bjerrum (1963) flag when β is given.
    pub bjerrum: Option<BjerrumFlag>,
    /// Assumptions made, in plain words, in a fixed order.
    pub assumptions: Vec<String>,
    /// Problems with the input that did not stop the assessment.
    pub warnings: Vec<String>,
}

fn pct(strain: f64) -> String {
    format!("{:.4} %", strain * 100.0)
}

/// Assess one structure under one criteria set.
///
/// - **Limiting tensile strain route**: for each zone, ε_bmax and ε_dmax from |Δ/L|, L/H and E/G
///   with the set's neutral axis for the zone's mode (Burland & Wroth 1974); ε_h after the set's
///   compressive policy (0 if unmeasured); ε_br, ε_dr, ε_max (Boscardin & Cording 1989; Burland
///   1995). The category is the worst over zones; the governing zone is the one with the largest
///   ε_max (first on a tie).
/// - **Son & Cording route**: ε_p from |β| and a lateral strain; the category from the set's
///   thresholds. Choice (the sources are silent on which bay's strain pairs with β_max): the
///   lateral strain is the largest measured zone ε_h after the compressive policy, which is the
///   conservative pairing; 0 if none was measured.
///
/// Whatever the route, the Son & Cording result is also given when β is (on the set's thresholds
/// if the route is Son & Cording, otherwise on the published Son & Cording thresholds), as are the
/// reconstructed Boscardin & Cording strain (Burland thresholds), the Rankin screen and the
/// Skempton & MacDonald / Bjerrum flags.
///
/// # Units
/// See [`ZoneInput`] and [`DamageInput`]; strains absolute, tension / extension positive.
///
/// # References
/// Burland & Wroth (1974); Boscardin & Cording (1989); Burland (1995); Mair, Taylor & Burland
/// (1996); Son & Cording (2005); Rankin (1988); Skempton & MacDonald (1956); Bjerrum (1963) — see
/// the relation files.
///
/// # Examples
/// ```
/// use plinth::criteria::builtin;
/// use plinth::damage::{assess_damage, DamageInput, Mode, ZoneInput};
/// // damage-relations.md §8.3 C2: hog, L/H 1, E/G 2.6, Δ/L 5e-4, ε_h 5e-4 → ε_max 8.61446e-4, cat 2.
/// let input = DamageInput {
///     zones: vec![ZoneInput { mode: Mode::Hogging, length_m: 10.0, deflection_ratio: -5e-4,
///                             horizontal_strain: Some(5e-4) }],
///     angular_distortion: None, height_m: 10.0, max_settlement_mm: None, max_slope: None,
/// };
/// let a = assess_damage(&input, &builtin("masonry").unwrap());
/// assert_eq!(a.category.unwrap().number(), 2);
/// assert!((a.governing_strain.unwrap() - 8.61446e-4).abs() < 1e-9);
/// ```
///
/// Never panics: invalid values become skipped zones, warnings or a `None` category with reasons.
pub fn assess_damage(input: &DamageInput, set: &CriteriaSet) -> DamageAssessment {
    let mut assumptions: Vec<String> = Vec::new();
    let mut warnings: Vec<String> = Vec::new();
    let mut reasons: Vec<String> = Vec::new();

    let thresholds = match set.strain_thresholds() {
        Ok(t) => Some(t),
        Err(e) => {
            reasons.push(format!("criteria set is invalid: {e}"));
            None
        }
    };
    if let Err(e) = set.validate() {
        warnings.push(format!("criteria set is invalid: {e}"));
    }

    assumptions.push(format!(
        "criteria set `{}`: route {}; E/G = {}, Poisson's ratio = {}; neutral axis {} for sagging, \
         {} for hogging; thresholds {} / {} / {} / {}; compressive horizontal strain: {}",
        set.name,
        set.route.label(),
        set.e_over_g,
        set.poisson,
        set.neutral_axis.sagging.label(),
        set.neutral_axis.hogging.label(),
        pct(set.thresholds[0]),
        pct(set.thresholds[1]),
        pct(set.thresholds[2]),
        pct(set.thresholds[3]),
        match set.compressive_strain {
            CompressivePolicy::ClampToZero => "clamped to 0 (no credit for compression)",
            CompressivePolicy::UseSigned => "used as signed",
        }
    ));
    assumptions.push(
        "deep beam of Burland & Wroth (1974): weightless, linear-elastic, simply supported, \
         central point load; L is the length of each sagging or hogging zone, H the height to \
         the eaves"
            .into(),
    );

    // ---- zones: limiting tensile strain -------------------------------------------------
    let mut zones = Vec::new();
    let mut skipped = Vec::new();
    for (index, z) in input.zones.iter().enumerate() {
        match assess_zone(index, z, input.height_m, set, thresholds.as_ref()) {
            Ok((za, notes, warns)) => {
                assumptions.extend(notes);
                warnings.extend(warns);
                zones.push(za);
            }
            Err(reason) => skipped.push(SkippedZone { index, reason }),
        }
    }
    for s in &skipped {
        warnings.push(format!("zone {} skipped: {}", s.index, s.reason));
    }
    if !skipped.is_empty() && !zones.is_empty() {
        warnings.push(
            "the limiting-tensile-strain result covers only the zones that could be computed"
                .into(),
        );
    }
    let worst_zone = zones
        .iter()
        .fold(None::<&ZoneAssessment>, |best, z| match best {
            Some(b) if b.governing_strain >= z.governing_strain => Some(b),
            _ => Some(z),
        });

    // ---- angular distortion ---------------------------------------------------------------
    let beta = match input.angular_distortion {
        Some(b) if b.is_finite() => Some(b.abs()),
        Some(b) => {
            warnings.push(format!("angular distortion {b} is not finite; ignored"));
            None
        }
        None => None,
    };
    // Lateral strain paired with β: the largest measured zone ε_h (signed), policy applied.
    let measured_eh = input
        .zones
        .iter()
        .filter_map(|z| z.horizontal_strain)
        .filter(|v| v.is_finite())
        .fold(None::<f64>, |m, v| Some(m.map_or(v, |m| m.max(v))));
    let lateral_used = set.compressive_strain.apply(measured_eh.unwrap_or(0.0));
    let son_thresholds = if set.route == Route::SonCording {
        thresholds
    } else {
        Some(StrainThresholds::SON_CORDING)
    };
    let mut son_cording = None;
    let mut boscardin = None;
    let mut skempton = None;
    let mut bjerrum = None;
    if let Some(beta) = beta {
        if let (Ok(p), Some(t)) = (principal_strain(beta, lateral_used), son_thresholds)
            && let Ok(cat) = t.classify(p.strain)
        {
            son_cording = Some(AngularDistortionAssessment {
                relation: "Son & Cording (2005) principal strain".into(),
                angular_distortion: beta,
                lateral_strain_used: lateral_used,
                lateral_strain_signed: measured_eh,
                lateral_strain_unavailable: measured_eh.is_none(),
                strain: p.strain,
                principal_angle_deg: Some(p.angle_deg()),
                thresholds: t.boundaries(),
                category: cat,
            });
        }
        if let Ok(e) = reconstructed_chart_strain(beta, lateral_used, set.poisson)
            && let Ok(cat) = StrainThresholds::BURLAND.classify(e)
        {
            boscardin = Some(AngularDistortionAssessment {
                relation: RECONSTRUCTION_LABEL.into(),
                angular_distortion: beta,
                lateral_strain_used: lateral_used,
                lateral_strain_signed: measured_eh,
                lateral_strain_unavailable: measured_eh.is_none(),
                strain: e,
                principal_angle_deg: None,
                thresholds: StrainThresholds::BURLAND.boundaries(),
                category: cat,
            });
        }
        skempton = skempton_macdonald_flag(beta).ok();
        bjerrum = bjerrum_flag(beta).ok();
        assumptions.push(
            "lateral strain paired with the angular distortion is the largest zone horizontal \
             strain (conservative pairing; the bay of the largest angular distortion is not \
             identified)"
                .into(),
        );
        if measured_eh.is_none() {
            assumptions.push(
                "no horizontal strain measured: lateral strain assumed 0 for the angular \
                 distortion relations"
                    .into(),
            );
        }
        assumptions.push(
            "Son & Cording (2005) thresholds 0.167 % and 0.333 % are from memory (stored as \
             1/600 and 1/300)"
                .into(),
        );
        assumptions.push(
            "Boscardin & Cording β–ε_h boundaries are a reconstruction (ε_dmax = β/2), not \
             digitised from the published chart; they may overstate the category"
                .into(),
        );
        assumptions.push(
            "Skempton & MacDonald (1956) and Bjerrum (1963) limits are from memory and are \
             informative flags, not damage categories; they define angular distortion as δ/l of \
             adjacent points, compared here with β (tilt removed)"
                .into(),
        );
    }

    // ---- route → category ---------------------------------------------------------------------
    let (category, governing_strain, governing) = match set.route {
        Route::LimitingTensileStrain => match worst_zone {
            Some(z) => (
                Some(z.category),
                Some(z.governing_strain),
                Some(Governing {
                    route: set.route,
                    zone_index: Some(z.index),
                    mode: Some(z.mode),
                    branch: z.branch,
                }),
            ),
            None => {
                if input.zones.is_empty() {
                    reasons.push(
                        "no sagging or hogging zone was available, so the deflection ratio \
                         could not be assessed"
                            .into(),
                    );
                } else {
                    reasons.push("none of the zones could be computed".into());
                }
                (None, None, None)
            }
        },
        Route::SonCording => match &son_cording {
            Some(sc) => (
                Some(sc.category),
                Some(sc.strain),
                Some(Governing {
                    route: set.route,
                    zone_index: None,
                    mode: None,
                    branch: Branch::Principal,
                }),
            ),
            None => {
                reasons.push(
                    "the Son & Cording route needs the angular distortion, which was not \
                     available"
                        .into(),
                );
                (None, None, None)
            }
        },
    };
    if category.is_some() {
        reasons.clear();
    }
    if category == Some(DamageCategory::Severe) {
        assumptions.push(
            "category 4 is reported as \"4–5\": strain cannot separate categories 4 and 5".into(),
        );
    }

    // ---- Rankin ---------------------------------------------------------------------------------
    let rankin = match rankin_category(input.max_settlement_mm, input.max_slope) {
        Ok(r) => r,
        Err(e) => {
            warnings.push(format!("Rankin screen not computed: {e}"));
            None
        }
    };
    if let Some(r) = &rankin {
        assumptions.push("Rankin (1988) slope and settlement thresholds are from memory".into());
        if r.slope_category.is_none() {
            assumptions.push("Rankin category from settlement only: slope not available".into());
        }
        if r.settlement_category.is_none() {
            assumptions.push("Rankin category from slope only: settlement not available".into());
        }
    }

    DamageAssessment {
        criteria_set: set.name.clone(),
        route: set.route,
        thresholds: set.thresholds,
        category,
        category_reasons: reasons,
        governing_strain,
        governing,
        zones,
        skipped_zones: skipped,
        son_cording,
        boscardin_cording_reconstructed: boscardin,
        rankin,
        skempton_macdonald: skempton,
        bjerrum,
        assumptions,
        warnings,
    }
}

/// The route's category and governing strain alone, without the report texts of
/// [`assess_damage`]: the same relations and rules (worst zone for the limiting-tensile-strain
/// route; ε_p from |β| and the largest measured zone ε_h for Son & Cording), for the Monte Carlo
/// draws of the category probabilities. Tested equal to `assess_damage` on random inputs.
///
/// # Units
/// As [`assess_damage`]: strains absolute, + tension / extension.
///
/// # References
/// As [`assess_damage`].
///
/// `None` when the route cannot give a category (no computable zone, no β, invalid set).
pub fn route_category(
    input: &DamageInput,
    set: &CriteriaSet,
    thresholds: &StrainThresholds,
) -> Option<(DamageCategory, f64)> {
    match set.route {
        Route::LimitingTensileStrain => {
            let mut worst: Option<f64> = None;
            for z in &input.zones {
                let axis = set.neutral_axis.for_mode(z.mode);
                let Ok(beam) = beam_strains(
                    z.deflection_ratio,
                    z.length_m,
                    input.height_m,
                    set.e_over_g,
                    axis,
                ) else {
                    continue;
                };
                let used = match z.horizontal_strain {
                    Some(v) if v.is_finite() => set.compressive_strain.apply(v),
                    Some(_) => continue,
                    None => 0.0,
                };
                let Ok(r) = resultant_strains(&beam, used, set.poisson) else {
                    continue;
                };
                if thresholds.classify(r.governing).is_err() {
                    continue;
                }
                worst = Some(worst.map_or(r.governing, |w: f64| w.max(r.governing)));
            }
            let g = worst?;
            Some((thresholds.classify(g).ok()?, g))
        }
        Route::SonCording => {
            let beta = input.angular_distortion.filter(|b| b.is_finite())?.abs();
            let eh = input
                .zones
                .iter()
                .filter_map(|z| z.horizontal_strain)
                .filter(|v| v.is_finite())
                .fold(None::<f64>, |m, v| Some(m.map_or(v, |m| m.max(v))));
            let lateral = set.compressive_strain.apply(eh.unwrap_or(0.0));
            let p = principal_strain(beta, lateral).ok()?;
            Some((thresholds.classify(p.strain).ok()?, p.strain))
        }
    }
}

type ZoneOutcome = (ZoneAssessment, Vec<String>, Vec<String>);

/// One zone: strains and category, plus assumption and warning strings.
fn assess_zone(
    index: usize,
    z: &ZoneInput,
    height_m: f64,
    set: &CriteriaSet,
    thresholds: Option<&StrainThresholds>,
) -> Result<ZoneOutcome, String> {
    let mut notes = Vec::new();
    let mut warns = Vec::new();
    let thresholds = thresholds.ok_or("the criteria set's thresholds are invalid")?;
    if let Some(sign_mode) = Mode::from_signed_deflection_ratio(z.deflection_ratio)
        && sign_mode != z.mode
    {
        warns.push(format!(
            "zone {index}: deflection ratio {} has the sign of {} but the zone is labelled {}; \
             the label is used",
            z.deflection_ratio,
            sign_mode.label(),
            z.mode.label()
        ));
    }
    let axis = set.neutral_axis.for_mode(z.mode);
    let beam = beam_strains(z.deflection_ratio, z.length_m, height_m, set.e_over_g, axis)
        .map_err(|e| e.to_string())?;
    let (used, signed, unavailable) = match z.horizontal_strain {
        Some(v) if v.is_finite() => (set.compressive_strain.apply(v), Some(v), false),
        Some(v) => return Err(format!("horizontal strain {v} is not finite")),
        None => (0.0, None, true),
    };
    if unavailable {
        notes.push(format!(
            "zone {index} ({}): horizontal strain not measured, assumed 0",
            z.mode.label()
        ));
    } else if let Some(s) = signed
        && s < 0.0
        && set.compressive_strain == CompressivePolicy::ClampToZero
    {
        notes.push(format!(
            "zone {index} ({}): compressive horizontal strain {:.3} ×10⁻³ clamped to 0",
            z.mode.label(),
            s * 1e3
        ));
    }
    let r = resultant_strains(&beam, used, set.poisson).map_err(|e| e.to_string())?;
    let category = thresholds
        .classify(r.governing)
        .map_err(|e| e.to_string())?;
    Ok((
        ZoneAssessment {
            index,
            mode: z.mode,
            neutral_axis: axis,
            length_m: z.length_m,
            l_over_h: beam.l_over_h,
            deflection_ratio: z.deflection_ratio.abs(),
            bending_factor: beam.factors.bending,
            diagonal_factor: beam.factors.diagonal,
            bending_strain_max: beam.bending_strain,
            diagonal_strain_max: beam.diagonal_strain,
            bending_strain_resultant: r.bending,
            diagonal_strain_resultant: r.diagonal,
            governing_strain: r.governing,
            branch: r.branch,
            horizontal_strain_used: used,
            horizontal_strain_signed: signed,
            horizontal_strain_unavailable: unavailable,
            category,
        },
        notes,
        warns,
    ))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::criteria::builtin;

    #[test]
    fn route_category_equals_assess_damage() {
        // The lean path of the Monte Carlo against the full assessment, on seeded random
        // zones, β and ε_h (both routes, both modes, ε_h missing, compressive and tensile).
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
        let mut son = builtin("masonry").unwrap();
        son.route = Route::SonCording;
        for set in [builtin("masonry").unwrap(), builtin("frame").unwrap(), son] {
            let t = set.strain_thresholds().unwrap();
            for _ in 0..2000 {
                let n = rng.random_range(0..4);
                let zones = (0..n)
                    .map(|_| {
                        let d: f64 = rng.random_range(-3e-3..3e-3);
                        ZoneInput {
                            mode: if d >= 0.0 {
                                Mode::Sagging
                            } else {
                                Mode::Hogging
                            },
                            length_m: rng.random_range(3.0..40.0),
                            deflection_ratio: d,
                            horizontal_strain: rng
                                .random_bool(0.7)
                                .then(|| rng.random_range(-2e-3..2e-3)),
                        }
                    })
                    .collect();
                let input = DamageInput {
                    zones,
                    angular_distortion: rng.random_bool(0.8).then(|| rng.random_range(0.0..8e-3)),
                    height_m: rng.random_range(3.0..20.0),
                    max_settlement_mm: None,
                    max_slope: None,
                };
                let full = assess_damage(&input, &set);
                let lean = route_category(&input, &set, &t);
                assert_eq!(full.category, lean.map(|x| x.0), "{input:?}");
                if let (Some(a), Some((_, b))) = (full.governing_strain, lean) {
                    assert!((a - b).abs() <= 1e-15 * a.abs().max(1.0));
                }
            }
        }
    }

    fn zone(mode: Mode, length_m: f64, dr: f64, eh: Option<f64>) -> ZoneInput {
        ZoneInput {
            mode,
            length_m,
            deflection_ratio: dr,
            horizontal_strain: eh,
        }
    }

    fn input(zones: Vec<ZoneInput>, height_m: f64) -> DamageInput {
        DamageInput {
            zones,
            angular_distortion: None,
            height_m,
            max_settlement_mm: None,
            max_slope: None,
        }
    }

    #[test]
    fn stage_2_example_8_9_b_worst_over_zones() {
        // damage-relations.md §8.9-B (derived check values [D]): sag [0,6] cat 1 with ε_h
        // clamped; hog [6,18] ε_br 2.10157e-3 → cat 3 governs (bending).
        let a = assess_damage(
            &input(
                vec![
                    zone(Mode::Sagging, 6.0, 7.6034e-4, Some(-2.8507e-3)),
                    zone(Mode::Hogging, 12.0, -8.1954e-4, Some(1.3470e-3)),
                ],
                9.0,
            ),
            &builtin("masonry").unwrap(),
        );
        assert_eq!(a.category, Some(DamageCategory::Moderate));
        let g = a.governing.unwrap();
        assert_eq!(
            (g.zone_index, g.mode, g.branch),
            (Some(1), Some(Mode::Hogging), Branch::Bending)
        );
        assert!((a.governing_strain.unwrap() - 2.10157e-3).abs() < 2e-8);
        assert_eq!(a.zones[0].category, DamageCategory::VerySlight);
        assert!((a.zones[0].governing_strain - 7.00053e-4).abs() < 1e-8);
        assert_eq!(a.zones[0].horizontal_strain_used, 0.0);
        assert_eq!(a.zones[0].horizontal_strain_signed, Some(-2.8507e-3));
        assert!(a.assumptions.iter().any(|s| s.contains("clamped to 0")));
    }

    #[test]
    fn missing_horizontal_strain_is_an_assumption_not_silence() {
        let a = assess_damage(
            &input(vec![zone(Mode::Sagging, 8.0, 5e-4, None)], 8.0),
            &builtin("masonry").unwrap(),
        );
        // damage-relations.md §8.3 C3: sag L/H 1 → ε_max 6.12245e-4, cat 1.
        assert_eq!(a.category, Some(DamageCategory::VerySlight));
        assert!(a.zones[0].horizontal_strain_unavailable);
        assert!(
            a.assumptions
                .iter()
                .any(|s| s.contains("horizontal strain not measured, assumed 0"))
        );
    }

    #[test]
    fn nothing_computable_gives_none_with_reasons() {
        let set = builtin("masonry").unwrap();
        let a = assess_damage(&input(vec![], 8.0), &set);
        assert_eq!(a.category, None);
        assert!(!a.category_reasons.is_empty());
        assert_eq!(a.governing_strain, None);

        let bad_h = assess_damage(
            &input(vec![zone(Mode::Hogging, 8.0, -1e-4, None)], 0.0),
            &set,
        );
        assert_eq!(bad_h.category, None);
        assert_eq!(bad_h.skipped_zones.len(), 1);
        assert!(bad_h.skipped_zones[0].reason.contains("height_m"));

        let sc = assess_damage(
            &input(vec![zone(Mode::Hogging, 8.0, -1e-4, None)], 8.0),
            &builtin("masonry-son-cording").unwrap(),
        );
        assert_eq!(sc.category, None);
        assert!(sc.category_reasons[0].contains("angular distortion"));
        // The zones are still reported for information.
        assert_eq!(sc.zones.len(), 1);
    }

    #[test]
    fn son_cording_route_and_flags() {
        // damage-relations.md §8.6: β 3e-3, ε_l 2e-4 → ε_p 1.60333e-3: cat 2 on Son & Cording
        // thresholds, 3 on Burland thresholds.
        let mut inp = input(vec![zone(Mode::Hogging, 10.0, -1e-4, Some(2e-4))], 10.0);
        inp.angular_distortion = Some(-3e-3);
        inp.max_settlement_mm = Some(12.0);
        let sc = assess_damage(&inp, &builtin("masonry-son-cording").unwrap());
        assert_eq!(sc.category, Some(DamageCategory::Slight));
        assert_eq!(sc.governing.unwrap().branch, Branch::Principal);
        assert!((sc.governing_strain.unwrap() - 1.60333e-3).abs() < 1e-8);
        let ltsm = assess_damage(&inp, &builtin("masonry").unwrap());
        // Under the LTS route the category comes from the zone; S&C still reported on its own
        // published thresholds.
        assert_eq!(
            ltsm.son_cording.as_ref().unwrap().category,
            DamageCategory::Slight
        );
        // β = 3e-3 lies between 1/500 and 1/300 (§6.3 limits, from memory [M]).
        assert_eq!(
            ltsm.skempton_macdonald,
            Some(SkemptonMacDonaldFlag::ExceedsDesignLimit)
        );
        assert_eq!(
            ltsm.bjerrum
                .unwrap()
                .highest_limit_reached
                .unwrap()
                .ratio_label,
            "1/500"
        );
        let r = ltsm.rankin.unwrap();
        assert_eq!(r.category.number(), 2);
        assert!(
            ltsm.assumptions
                .iter()
                .any(|s| s.contains("slope not available"))
        );
        assert!(
            ltsm.boscardin_cording_reconstructed
                .unwrap()
                .relation
                .contains("reconstruction")
        );
    }

    #[test]
    fn sign_mode_mismatch_warns_and_uses_label() {
        let a = assess_damage(
            &input(vec![zone(Mode::Hogging, 10.0, 5e-4, Some(0.0))], 10.0),
            &builtin("masonry").unwrap(),
        );
        // Hogging label used: §8.3 C1 → ε_max 4.69880e-4, cat 0.
        assert!((a.governing_strain.unwrap() - 4.69880e-4).abs() < 1e-9);
        assert!(a.warnings.iter().any(|w| w.contains("labelled hogging")));
    }

    #[test]
    fn severe_category_is_labelled_4_to_5() {
        let a = assess_damage(
            &input(vec![zone(Mode::Sagging, 10.0, 0.0, Some(3e-3))], 10.0),
            &builtin("masonry").unwrap(),
        );
        assert_eq!(a.category.unwrap().label(), "severe or worse (4–5)");
        assert!(a.assumptions.iter().any(|s| s.contains("4–5")));
        let json = serde_json::to_value(&a).unwrap();
        assert_eq!(json["category"]["number"], 4);
        assert_eq!(json["route"], "limiting-tensile-strain");
    }
}
