//! Boscardin & Cording (1989) superposition of horizontal strain on the deep-beam strains, the
//! compressive-strain policy, and a **reconstruction** of their β–ε_h chart boundaries.
//!
//! Owns the resultant strains ε_br, ε_dr and the governing strain ([`resultant_strains`]), the
//! policy for compressive ε_h ([`CompressivePolicy`]), and the reconstructed β–ε_h boundaries
//! ([`reconstructed_chart_strain`], [`reconstructed_chart_boundary`],
//! [`reconstructed_chart_curves`]). It does not compute ε_bmax/ε_dmax (that is
//! [`super::burland_wroth`]) and does not classify.
//!
//! The β–ε_h boundaries are NOT digitised from the published chart: they assume ε_dmax = β/2 and
//! the Poisson Mohr circle (damage-relations.md §4, §11 item 1). Every label exposed here says so
//! ([`RECONSTRUCTION_LABEL`]).

use serde::{Deserialize, Serialize};

use super::burland_wroth::BeamStrains;
use super::{
    Branch, Curve, CurveOrdinate, DamageError, StrainThresholds, require_finite, require_poisson,
    sample_curve,
};

/// Label to show with anything derived from the β–ε_h boundaries of this module.
pub const RECONSTRUCTION_LABEL: &str = "Boscardin & Cording (1989)-type β–ε_h boundaries \
     (reconstruction assuming ε_dmax = β/2; not digitised from the published chart)";

/// How a compressive (negative) horizontal strain enters the resultant strains.
///
/// # References
/// damage-relations.md §3.5 \[Rec; P\]: Burland's chart covers ε_h ≥ 0 and common practice takes no
/// credit for compression, so the default clamps ε_h to ≥ 0. Example 8.3-C7 shows the effect
/// (category 0 signed, 1 clamped).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum CompressivePolicy {
    /// Use max(ε_h, 0): no credit for compression (default, conservative).
    #[default]
    ClampToZero,
    /// Use the signed ε_h as measured (compression lowers ε_br and mostly ε_dr).
    UseSigned,
}

impl CompressivePolicy {
    /// The horizontal strain to use under this policy.
    ///
    /// # Units
    /// Absolute strain, + extension. NaN stays NaN (callers validate first).
    pub fn apply(self, horizontal_strain_signed: f64) -> f64 {
        match self {
            CompressivePolicy::ClampToZero => horizontal_strain_signed.max(0.0),
            CompressivePolicy::UseSigned => horizontal_strain_signed,
        }
    }
}

/// Resultant bending strain `ε_br = ε_bmax + ε_h` (eq. 3.1).
///
/// # Units
/// Absolute strains, tension / extension positive.
///
/// # References
/// Boscardin & Cording (1989); Burland (1995); Mair, Taylor & Burland (1996) \[M\]
/// (damage-relations.md §3.1).
///
/// # Examples
/// ```
/// // damage-relations.md §8.3 C2: 3.61446e-4 + 5e-4 = 8.61446e-4.
/// let e = plinth::damage::boscardin_cording::resultant_bending_strain(3.61446e-4, 5e-4);
/// assert!((e - 8.61446e-4).abs() < 1e-12);
/// ```
pub fn resultant_bending_strain(bending_strain_max: f64, horizontal_strain: f64) -> f64 {
    bending_strain_max + horizontal_strain
}

/// Resultant diagonal strain
/// `ε_dr = ε_h(1−ν)/2 + √[(ε_h(1+ν)/2)² + ε_dmax²]` (eq. 3.2): the largest principal strain of
/// ε_x = ε_h, ε_y = −ν·ε_h, ε_xy = ε_dmax.
///
/// # Units
/// Absolute strains, tension / extension positive; ν dimensionless.
///
/// # References
/// Boscardin & Cording (1989); Burland (1995) \[M\]; derivation in damage-relations.md §3.1 \[D\].
///
/// # Examples
/// ```
/// // damage-relations.md §8.3 C2 hand check: ε_d 4.69880e-4, ε_h 5e-4, ν 0.3 → 7.46325e-4.
/// let e = plinth::damage::boscardin_cording::resultant_diagonal_strain(4.69880e-4, 5e-4, 0.3);
/// assert!((e - 7.46325e-4).abs() < 1e-9);
/// ```
///
/// With ε_dmax = 0 and ε_h < 0 it returns ν·|ε_h| (the vertical Poisson extension).
pub fn resultant_diagonal_strain(
    diagonal_strain_max: f64,
    horizontal_strain: f64,
    poisson: f64,
) -> f64 {
    let eh = horizontal_strain;
    let radius = (eh * (1.0 + poisson) / 2.0).hypot(diagonal_strain_max);
    eh * (1.0 - poisson) / 2.0 + radius
}

/// Resultant strains of one zone and which branch governs.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ResultantStrains {
    /// ε_br, absolute.
    pub bending: f64,
    /// ε_dr, absolute.
    pub diagonal: f64,
    /// ε_max = max(ε_br, ε_dr), absolute.
    pub governing: f64,
    /// Branch of ε_max. A tie is reported as bending (choice: bending is the first-listed
    /// relation; the strain is the same either way).
    pub branch: Branch,
}

/// ε_br, ε_dr and ε_max from the deep-beam strains and the horizontal strain **already chosen by
/// the caller's [`CompressivePolicy`]**.
///
/// # Units
/// Absolute strains, tension / extension positive.
///
/// # References
/// Boscardin & Cording (1989); Burland (1995) \[M\]; damage-relations.md §3.1.
///
/// # Examples
/// ```
/// use plinth::damage::{Branch, burland_wroth::*, boscardin_cording::resultant_strains};
/// // damage-relations.md §8.3 C5: hog, L/H 2, E/G 12.5, Δ/L 4e-4, ε_h 3e-4 → ε_dr 5.31887e-4.
/// let b = beam_strains(4e-4, 20.0, 10.0, 12.5, NeutralAxis::LowerEdge).unwrap();
/// let r = resultant_strains(&b, 3e-4, 0.3).unwrap();
/// assert!((r.governing - 5.31887e-4).abs() < 1e-9);
/// assert_eq!(r.branch, Branch::Diagonal);
/// ```
///
/// Non-finite ε_h or ν outside 0 ≤ ν < 0.5 → [`DamageError::InvalidInput`].
pub fn resultant_strains(
    beam: &BeamStrains,
    horizontal_strain: f64,
    poisson: f64,
) -> Result<ResultantStrains, DamageError> {
    let eh = require_finite("horizontal_strain", horizontal_strain)?;
    let nu = require_poisson(poisson)?;
    let bending = resultant_bending_strain(beam.bending_strain, eh);
    let diagonal = resultant_diagonal_strain(beam.diagonal_strain, eh, nu);
    let (governing, branch) = if bending >= diagonal {
        (bending, Branch::Bending)
    } else {
        (diagonal, Branch::Diagonal)
    };
    Ok(ResultantStrains {
        bending,
        diagonal,
        governing,
        branch,
    })
}

/// Strain of the reconstructed β–ε_h chart:
/// `ε_BC = ε_h(1−ν)/2 + √[(ε_h(1+ν)/2)² + (β/2)²]` — eq. (3.2) with ε_dmax = |β|/2.
///
/// **Reconstruction**, see [`RECONSTRUCTION_LABEL`]: the published curves may lie up to about
/// 40 % higher on the β axis, so this overstates the category for a given β (conservative).
///
/// # Units
/// β: angular distortion, rad (dimensionless; magnitude used). ε_h absolute, + extension.
///
/// # References
/// Boscardin & Cording (1989) chart (not read); reconstruction in damage-relations.md §4 \[D + Rec\].
///
/// # Examples
/// ```
/// // damage-relations.md §8.5 point test: β 2e-3, ε_h 5e-4 → 1.22649e-3.
/// let e = plinth::damage::boscardin_cording::reconstructed_chart_strain(2e-3, 5e-4, 0.3).unwrap();
/// assert!((e - 1.22649e-3).abs() < 1e-8);
/// ```
///
/// Non-finite input or ν outside [0, 0.5) → [`DamageError::InvalidInput`].
pub fn reconstructed_chart_strain(
    angular_distortion: f64,
    horizontal_strain: f64,
    poisson: f64,
) -> Result<f64, DamageError> {
    let beta = require_finite("angular_distortion", angular_distortion)?.abs();
    let eh = require_finite("horizontal_strain", horizontal_strain)?;
    let nu = require_poisson(poisson)?;
    Ok(resultant_diagonal_strain(beta / 2.0, eh, nu))
}

/// Boundary β_k(ε_h) of the reconstructed chart for limiting strain ε_lim:
/// `β = 2·√(ε_lim² − (1−ν)·ε_lim·ε_h − ν·ε_h²)` for 0 ≤ ε_h ≤ ε_lim, 0 beyond.
///
/// The radicand is clamped at ≥ 0 (damage-relations.md §8.5: rounding leaves ~1e-11 at the end
/// point). **Reconstruction**, see [`RECONSTRUCTION_LABEL`].
///
/// # Units
/// ε_h, ε_lim absolute; β returned in rad (dimensionless).
///
/// # References
/// damage-relations.md §4 \[D + Rec\].
///
/// # Examples
/// ```
/// // damage-relations.md §8.5: ε_lim 0.15 %, ε_h 1e-3 → β 1.8974e-3.
/// let b = plinth::damage::boscardin_cording::reconstructed_chart_boundary(1e-3, 1.5e-3, 0.3);
/// assert!((b - 1.8974e-3).abs() < 1e-7);
/// ```
///
/// Negative ε_h is evaluated by the same formula (the chart itself starts at 0). NaN → NaN.
pub fn reconstructed_chart_boundary(
    horizontal_strain: f64,
    limiting_strain: f64,
    poisson: f64,
) -> f64 {
    let eh = horizontal_strain;
    let el = limiting_strain;
    if eh >= el {
        return 0.0;
    }
    let radicand = el * el - (1.0 - poisson) * el * eh - poisson * eh * eh;
    2.0 * radicand.max(0.0).sqrt()
}

/// The four reconstructed β–ε_h boundary curves, sampled for plotting (ordinate β).
///
/// **Reconstruction**, see [`RECONSTRUCTION_LABEL`]; show that label with the chart.
///
/// ν outside [0, 0.5) → [`DamageError::InvalidInput`].
pub fn reconstructed_chart_curves(
    poisson: f64,
    thresholds: &StrainThresholds,
) -> Result<Vec<Curve>, DamageError> {
    let nu = require_poisson(poisson)?;
    Ok(thresholds
        .boundaries()
        .iter()
        .enumerate()
        .map(|(k, &el)| {
            sample_curve((k + 1) as u8, el, CurveOrdinate::AngularDistortion, |eh| {
                reconstructed_chart_boundary(eh, el, nu)
            })
        })
        .collect())
}

/// Validate a signed horizontal strain and apply the policy, returning `(used, signed)`.
///
/// # Units
/// Absolute strain, + extension.
///
/// # Examples
/// ```
/// use plinth::damage::boscardin_cording::{horizontal_strain_under_policy, CompressivePolicy};
/// // damage-relations.md §8.3 C7′: ε_h = −3e-4 is clamped to 0; the signed value is kept.
/// let (used, signed) =
///     horizontal_strain_under_policy(-3e-4, CompressivePolicy::ClampToZero).unwrap();
/// assert_eq!((used, signed), (0.0, -3e-4));
/// ```
///
/// Non-finite → [`DamageError::InvalidInput`].
pub fn horizontal_strain_under_policy(
    horizontal_strain_signed: f64,
    policy: CompressivePolicy,
) -> Result<(f64, f64), DamageError> {
    let signed = require_finite("horizontal_strain", horizontal_strain_signed)?;
    Ok((policy.apply(signed), signed))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::damage::burland_wroth::{NeutralAxis, beam_strains};
    use nalgebra::Matrix2;
    use proptest::prelude::*;

    #[test]
    fn limiting_cases_of_diagonal_strain() {
        // damage-relations.md §3.1 checks [D].
        assert!((resultant_diagonal_strain(4e-4, 0.0, 0.3) - 4e-4).abs() < 1e-18);
        assert!((resultant_diagonal_strain(0.0, 6e-4, 0.3) - 6e-4).abs() < 1e-18);
        assert!((resultant_diagonal_strain(0.0, -6e-4, 0.3) - 0.3 * 6e-4).abs() < 1e-18);
    }

    #[test]
    fn compressive_clamp_c7() {
        // damage-relations.md §8.3 C7 / C7′ (derived check values [D]): sag, L/H 1, E/G 2.6,
        // Δ/L 5e-4, ε_h −3e-4. Signed → ε_br 3.12245e-4, ε_dr 3.38166e-4; clamped → as C3.
        let b = beam_strains(5e-4, 8.0, 8.0, 2.6, NeutralAxis::MidHeight).unwrap();
        let (used, signed) =
            horizontal_strain_under_policy(-3e-4, CompressivePolicy::UseSigned).unwrap();
        assert_eq!(used, signed);
        let r = resultant_strains(&b, used, 0.3).unwrap();
        assert!((r.bending - 3.12245e-4).abs() < 1e-9);
        assert!((r.diagonal - 3.38166e-4).abs() < 1e-9);
        assert_eq!(r.branch, Branch::Diagonal);
        let (used, signed) =
            horizontal_strain_under_policy(-3e-4, CompressivePolicy::ClampToZero).unwrap();
        assert_eq!((used, signed), (0.0, -3e-4));
        let r = resultant_strains(&b, used, 0.3).unwrap();
        assert!((r.governing - 6.12245e-4).abs() < 1e-9);
        assert_eq!(r.branch, Branch::Bending);
    }

    #[test]
    fn reconstructed_boundaries_section_8_5() {
        // damage-relations.md §8.5 table (reconstruction, derived check values [D]), β ×1e-3,
        // absolute tolerance half a unit in the last printed digit.
        let rows = [
            (0.0, 5e-4, 1.000e-3, 5e-7),
            (0.25e-3, 5e-4, 0.7583e-3, 5e-8),
            (0.5e-3, 7.5e-4, 0.9487e-3, 5e-8),
            (0.75e-3, 1.5e-3, 2.2749e-3, 5e-8),
            (2.0e-3, 3e-3, 3.7947e-3, 5e-8),
            (3.0e-3, 3e-3, 0.0, 1e-15),
            (0.5e-3, 5e-4, 0.0, 1e-15),
        ];
        for (eh, el, beta, tol) in rows {
            let b = reconstructed_chart_boundary(eh, el, 0.3);
            assert!((b - beta).abs() <= tol, "eh {eh} el {el}: {b} vs {beta}");
        }
        // Feeding a boundary point back gives ε = ε_lim (§8.12 item 5).
        let b = reconstructed_chart_boundary(3e-4, 1.5e-3, 0.3);
        let e = reconstructed_chart_strain(b, 3e-4, 0.3).unwrap();
        assert!((e - 1.5e-3).abs() < 1e-15);
    }

    #[test]
    fn reconstruction_is_labelled() {
        assert!(RECONSTRUCTION_LABEL.contains("reconstruction"));
        let c = reconstructed_chart_curves(0.3, &StrainThresholds::BURLAND).unwrap();
        assert_eq!(c.len(), 4);
        assert!(c.iter().all(|c| c.points.len() >= 200));
        assert!((c[0].points[0].1 - 1e-3).abs() < 1e-15);
        assert_eq!(c[3].points.last().map(|p| p.1), Some(0.0));
    }

    proptest! {
        // damage-relations.md §3.1 / §8.12 item 3: (3.2) equals the largest eigenvalue of
        // [[ε_h, ε_d], [ε_d, −ν ε_h]]; eigenvalues from nalgebra as the outside reference.
        #[test]
        fn diagonal_strain_is_largest_eigenvalue(
            eh in -5e-3f64..5e-3, ed in 0.0f64..5e-3, nu in 0.0f64..0.499
        ) {
            let m = Matrix2::new(eh, ed, ed, -nu * eh);
            let eig = m.symmetric_eigenvalues();
            let lmax = eig[0].max(eig[1]);
            let closed = resultant_diagonal_strain(ed, eh, nu);
            prop_assert!((closed - lmax).abs() <= 1e-15 + 1e-12 * lmax.abs());
        }
    }
}
