//! Burland (1995) interaction chart of deflection ratio Δ/L against horizontal strain ε_h:
//! category-boundary curves for any L/H, E/G, ν and mode.
//!
//! Owns the inverse of eqs (3.1)/(3.2) at ε_max = ε_lim ([`boundary_deflection_ratio`]) and the
//! sampled curves for plotting ([`interaction_curves`]). It does not classify: damage-relations.md
//! §3.4 \[Rec\] classifies by computing ε_max directly (identical result); the curves are only
//! drawn.

use serde::Serialize;

use super::burland_wroth::{BeamFactors, NeutralAxisPolicy, factors_for_mode};
use super::{
    Branch, Curve, CurveOrdinate, DamageError, Mode, StrainThresholds, require_poisson,
    sample_curve,
};

/// The boundary deflection ratio at one ε_h and which branch sets it.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct BoundaryPoint {
    /// Δ/L on the boundary, absolute (≥ 0).
    pub deflection_ratio: f64,
    /// Branch giving the smaller (governing) Δ/L. `None` once ε_h ≥ ε_lim (both are zero).
    pub branch: Option<Branch>,
}

/// Δ/L on the ε_max = ε_lim boundary at a given ε_h:
/// - bending: `Fb·(ε_lim − ε_h)`;
/// - diagonal: `Fd·√(ε_lim² − (1−ν)·ε_lim·ε_h − ν·ε_h²)`;
/// - boundary: the smaller of the two for 0 ≤ ε_h < ε_lim, 0 for ε_h ≥ ε_lim.
///
/// The radicand is clamped at ≥ 0 against rounding at the end point.
///
/// # Units
/// ε_h, ε_lim absolute (+ extension); Δ/L absolute, dimensionless. ν dimensionless.
///
/// # References
/// Burland, J.B. (1995), Assessment of risk of damage to buildings due to tunnelling and
/// excavation \[M\]; inversion derived in damage-relations.md §3.4 \[D\].
///
/// # Examples
/// ```
/// use plinth::damage::{Branch, burland_wroth::*, burland_1995::boundary_deflection_ratio};
/// // damage-relations.md §8.3: hog L/H 1, E/G 2.6, ε_h 3e-4, ε_lim 1.5e-3 → Δ/L 1.469849e-3, diagonal.
/// let f = deep_beam_factors(1.0, 2.6, NeutralAxis::LowerEdge).unwrap();
/// let p = boundary_deflection_ratio(3e-4, 1.5e-3, &f, 0.3);
/// assert!((p.deflection_ratio - 1.469849e-3).abs() < 1e-9);
/// assert_eq!(p.branch, Some(Branch::Diagonal));
/// ```
///
/// Negative ε_h is evaluated by the same formulas (the published chart starts at 0).
pub fn boundary_deflection_ratio(
    horizontal_strain: f64,
    limiting_strain: f64,
    factors: &BeamFactors,
    poisson: f64,
) -> BoundaryPoint {
    let eh = horizontal_strain;
    let el = limiting_strain;
    if eh >= el || eh.is_nan() {
        return BoundaryPoint {
            deflection_ratio: 0.0,
            branch: None,
        };
    }
    let bending = factors.bending * (el - eh);
    let radicand = el * el - (1.0 - poisson) * el * eh - poisson * eh * eh;
    let diagonal = factors.diagonal * radicand.max(0.0).sqrt();
    if bending <= diagonal {
        BoundaryPoint {
            deflection_ratio: bending,
            branch: Some(Branch::Bending),
        }
    } else {
        BoundaryPoint {
            deflection_ratio: diagonal,
            branch: Some(Branch::Diagonal),
        }
    }
}

/// The four category-boundary curves of the Burland (1995) Δ/L – ε_h chart, each sampled at
/// [`super::CURVE_SAMPLES`] points from ε_h = 0 to ε_lim, with the Burland & Wroth neutral-axis
/// policy (sagging mid-height, hogging lower edge).
///
/// # Units
/// `l_over_h`, `e_over_g`, `nu` dimensionless; points `(ε_h, Δ/L)`, both absolute.
///
/// # References
/// Burland (1995) chart (published for hogging, L/H = 1, E/G = 2.6, ν = 0.3 \[M\]); generalised
/// per damage-relations.md §3.4 \[D\].
///
/// # Examples
/// ```
/// use plinth::damage::{Mode, StrainThresholds, burland_1995::interaction_curves};
/// // damage-relations.md §8.4: hogging L/H 1 → 0.05 % curve starts at Δ/L 0.5321e-3.
/// let c = interaction_curves(1.0, 2.6, 0.3, Mode::Hogging, &StrainThresholds::BURLAND).unwrap();
/// assert_eq!(c.len(), 4);
/// assert!((c[0].points[0].1 - 0.5321e-3).abs() < 1e-7);
/// ```
///
/// L/H or E/G ≤ 0 or non-finite, ν outside [0, 0.5) → [`DamageError::InvalidInput`].
pub fn interaction_curves(
    l_over_h: f64,
    e_over_g: f64,
    nu: f64,
    mode: Mode,
    thresholds: &StrainThresholds,
) -> Result<Vec<Curve>, DamageError> {
    interaction_curves_with_policy(
        l_over_h,
        e_over_g,
        nu,
        mode,
        thresholds,
        &NeutralAxisPolicy::BURLAND_WROTH,
    )
}

/// [`interaction_curves`] with an explicit neutral-axis policy (for criteria sets that override
/// it). Same units, references and errors.
pub fn interaction_curves_with_policy(
    l_over_h: f64,
    e_over_g: f64,
    nu: f64,
    mode: Mode,
    thresholds: &StrainThresholds,
    policy: &NeutralAxisPolicy,
) -> Result<Vec<Curve>, DamageError> {
    let factors = factors_for_mode(mode, l_over_h, e_over_g, policy)?;
    let nu = require_poisson(nu)?;
    Ok(thresholds
        .boundaries()
        .iter()
        .enumerate()
        .map(|(k, &el)| {
            sample_curve((k + 1) as u8, el, CurveOrdinate::DeflectionRatio, |eh| {
                boundary_deflection_ratio(eh, el, &factors, nu).deflection_ratio
            })
        })
        .collect())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::damage::boscardin_cording::resultant_strains;
    use crate::damage::burland_wroth::{NeutralAxis, beam_strains, deep_beam_factors};

    #[test]
    fn branch_switch_along_hogging_curve() {
        // damage-relations.md §3.4 / §8.4: hogging L/H 1, 0.05 % curve is diagonal at ε_h = 0
        // and bending at ε_h = 2.5e-4 (0.3458e-3).
        let f = deep_beam_factors(1.0, 2.6, NeutralAxis::LowerEdge).unwrap();
        let p0 = boundary_deflection_ratio(0.0, 5e-4, &f, 0.3);
        assert_eq!(p0.branch, Some(Branch::Diagonal));
        let p1 = boundary_deflection_ratio(2.5e-4, 5e-4, &f, 0.3);
        assert_eq!(p1.branch, Some(Branch::Bending));
        assert!((p1.deflection_ratio - 0.3458e-3).abs() < 5e-8);
    }

    #[test]
    fn boundary_points_round_trip_to_limiting_strain() {
        // damage-relations.md §8.12 item 5: every boundary point fed back gives ε_max = ε_lim.
        for (mode, axis) in [
            (Mode::Sagging, NeutralAxis::MidHeight),
            (Mode::Hogging, NeutralAxis::LowerEdge),
        ] {
            for r in [0.5, 1.0, 2.0] {
                let curves =
                    interaction_curves(r, 2.6, 0.3, mode, &StrainThresholds::BURLAND).unwrap();
                for c in &curves {
                    assert!(c.points.len() >= 200);
                    for &(eh, dr) in c.points.iter().step_by(17) {
                        if eh >= c.limiting_strain {
                            assert_eq!(dr, 0.0);
                            continue;
                        }
                        let b = beam_strains(dr, r * 10.0, 10.0, 2.6, axis).unwrap();
                        let s = resultant_strains(&b, eh, 0.3).unwrap();
                        assert!(
                            (s.governing - c.limiting_strain).abs() < 1e-12,
                            "{mode:?} r {r} eh {eh}"
                        );
                    }
                }
            }
        }
    }

    #[test]
    fn invalid_parameters_are_errors() {
        let t = StrainThresholds::BURLAND;
        assert!(interaction_curves(0.0, 2.6, 0.3, Mode::Hogging, &t).is_err());
        assert!(interaction_curves(1.0, 2.6, 0.5, Mode::Hogging, &t).is_err());
        assert!(interaction_curves(1.0, f64::NAN, 0.3, Mode::Hogging, &t).is_err());
    }
}
