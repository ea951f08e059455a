//! Son & Cording (2005): principal tensile strain of a distorting bay from its angular distortion
//! β and lateral strain ε_l, their category thresholds and boundary curves.
//!
//! Owns the closed form (5.2) and angle ([`principal_strain`]), the angle form (5.1) as a
//! cross-check ([`principal_strain_angle_form`]), the boundary β_k(ε_l)
//! ([`boundary_angular_distortion`]) and the sampled curves ([`boundary_curves`]). The thresholds
//! are [`StrainThresholds::SON_CORDING`] (upper two **from memory**). It does not estimate β from
//! points (that is `crate::metrics`).

use serde::Serialize;

use super::{Curve, CurveOrdinate, DamageError, StrainThresholds, require_finite, sample_curve};

/// Son & Cording (2005) thresholds, absolute: 5e-4, 7.5e-4, 1/600, 1/300 (0.05, 0.075, 0.167,
/// 0.333 %). The upper two are **from memory** \[M\], corroborated once; stored as exact fractions
/// because at ε_l = 0 they correspond to β = 1/300 and 1/150 (damage-relations.md §5, §11 item 2).
pub const SON_CORDING_THRESHOLDS: StrainThresholds = StrainThresholds::SON_CORDING;

/// Principal tensile strain and its direction.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PrincipalStrain {
    /// ε_p, absolute, tension positive.
    pub strain: f64,
    /// θ_max = ½·atan2(β, ε_l): angle from the horizontal to the principal tensile direction,
    /// radians (cracks form perpendicular to it).
    pub angle_rad: f64,
}

impl PrincipalStrain {
    /// θ_max in degrees.
    pub fn angle_deg(&self) -> f64 {
        self.angle_rad.to_degrees()
    }
}

/// Principal strain of a bay: `ε_p = ε_l/2 + √[(ε_l/2)² + (β/2)²]` (closed form 5.2) with
/// `θ_max = ½·atan2(β, ε_l)`.
///
/// Equivalent to eq. (3.2) with ν = 0 and ε_dmax = β/2 (plane strain, zero vertical strain,
/// engineering shear strain β).
///
/// # Units
/// β: angular distortion (tilt removed), rad = dimensionless; ε_l absolute, + extension. ε_p
/// absolute.
///
/// # References
/// Son, M. & Cording, E.J. (2005), Estimation of building damage due to excavation-induced ground
/// movements, J. Geotech. Geoenviron. Eng. 131(2) \[M; abstract R\]; closed form derived in
/// damage-relations.md §5 \[D\].
///
/// # Examples
/// ```
/// use plinth::damage::son_cording::principal_strain;
/// // damage-relations.md §8.6: β 2e-3, ε_l 5e-4 → ε_p 1.28078e-3, θ 37.982°.
/// let p = principal_strain(2e-3, 5e-4).unwrap();
/// assert!((p.strain - 1.28078e-3).abs() < 1e-8);
/// assert!((p.angle_deg() - 37.982).abs() < 1e-3);
/// ```
///
/// Non-finite input → [`DamageError::InvalidInput`]. β = ε_l = 0 gives ε_p = 0 and θ = 0.
pub fn principal_strain(
    angular_distortion: f64,
    lateral_strain: f64,
) -> Result<PrincipalStrain, DamageError> {
    let beta = require_finite("angular_distortion", angular_distortion)?;
    let el = require_finite("lateral_strain", lateral_strain)?;
    Ok(PrincipalStrain {
        strain: el / 2.0 + (el / 2.0).hypot(beta / 2.0),
        angle_rad: 0.5 * beta.atan2(el),
    })
}

/// Angle form (5.1): `ε_p = ε_l·cos²θ + β·sinθ·cosθ` at θ = ½·atan2(β, ε_l). Kept as the
/// independent cross-check of [`principal_strain`] (damage-relations.md §8.12 item 4).
///
/// Same units, references and errors as [`principal_strain`].
pub fn principal_strain_angle_form(
    angular_distortion: f64,
    lateral_strain: f64,
) -> Result<f64, DamageError> {
    let beta = require_finite("angular_distortion", angular_distortion)?;
    let el = require_finite("lateral_strain", lateral_strain)?;
    let theta = 0.5 * beta.atan2(el);
    Ok(el * theta.cos().powi(2) + beta * theta.sin() * theta.cos())
}

/// Boundary β_k(ε_l) = 2·√(ε_lim·(ε_lim − ε_l)) for ε_l ≤ ε_lim, 0 beyond: the β at which
/// ε_p = ε_lim.
///
/// # Units
/// ε_l, ε_lim absolute; β rad (dimensionless).
///
/// # References
/// damage-relations.md §5 boundary curves \[D\].
///
/// # Examples
/// ```
/// // damage-relations.md §8.6: ε_lim 1/600, ε_l 5e-4 → β 2.7889e-3.
/// let b = plinth::damage::son_cording::boundary_angular_distortion(5e-4, 1.0 / 600.0);
/// assert!((b - 2.7889e-3).abs() < 1e-7);
/// ```
///
/// NaN input gives NaN.
pub fn boundary_angular_distortion(lateral_strain: f64, limiting_strain: f64) -> f64 {
    if lateral_strain >= limiting_strain {
        return 0.0;
    }
    2.0 * (limiting_strain * (limiting_strain - lateral_strain))
        .max(0.0)
        .sqrt()
}

/// The four β–ε_l boundary curves for `thresholds` (normally [`SON_CORDING_THRESHOLDS`]),
/// sampled from ε_l = 0 to ε_lim; ordinate β.
pub fn boundary_curves(thresholds: &StrainThresholds) -> Vec<Curve> {
    thresholds
        .boundaries()
        .iter()
        .enumerate()
        .map(|(k, &el)| {
            sample_curve((k + 1) as u8, el, CurveOrdinate::AngularDistortion, |eps| {
                boundary_angular_distortion(eps, el)
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    #[test]
    fn upper_thresholds_match_skempton_macdonald_at_zero_lateral_strain() {
        // damage-relations.md §5 consistency check [D]: at ε_l = 0, β = 1/300 and 1/150 give
        // exactly the two upper thresholds; both land on the boundary → more severe category.
        let t = SON_CORDING_THRESHOLDS;
        let p = principal_strain(1.0 / 300.0, 0.0).unwrap();
        assert_eq!(t.classify(p.strain).unwrap().number(), 3);
        let p = principal_strain(1.0 / 150.0, 0.0).unwrap();
        assert_eq!(t.classify(p.strain).unwrap().number(), 4);
    }

    #[test]
    fn boundary_check_value() {
        // damage-relations.md §8.6: β 2.7889e-3, ε_l 5e-4 → ε_p = 1.66667e-3, category 3.
        let b = boundary_angular_distortion(5e-4, 1.0 / 600.0);
        let p = principal_strain(b, 5e-4).unwrap();
        assert!((p.strain - 1.0 / 600.0).abs() < 1e-15);
        assert_eq!(
            SON_CORDING_THRESHOLDS.classify(p.strain).unwrap().number(),
            3
        );
        let curves = boundary_curves(&SON_CORDING_THRESHOLDS);
        assert_eq!(curves.len(), 4);
        // §8.6 curve table: ε_lim 0.3333 %, ε_l = 0 → 6.667e-3.
        assert!((curves[3].points[0].1 - 6.667e-3).abs() < 5e-7);
    }

    #[test]
    fn compressive_lateral_strain_and_zero() {
        // damage-relations.md §8.6: β 4e-3, ε_l −5e-4 → 1.76556e-3, θ 48.563°.
        let p = principal_strain(4e-3, -5e-4).unwrap();
        assert!((p.strain - 1.76556e-3).abs() < 1e-8);
        assert!((p.angle_deg() - 48.563).abs() < 1e-3);
        let z = principal_strain(0.0, 0.0).unwrap();
        assert_eq!((z.strain, z.angle_rad), (0.0, 0.0));
        assert!(principal_strain(f64::NAN, 0.0).is_err());
    }

    proptest! {
        // damage-relations.md §8.12 item 4: closed form (5.2) equals the angle form (5.1).
        #[test]
        fn closed_form_equals_angle_form(beta in -1e-2f64..1e-2, el in -5e-3f64..5e-3) {
            let a = principal_strain(beta, el).unwrap().strain;
            let b = principal_strain_angle_form(beta, el).unwrap();
            prop_assert!((a - b).abs() <= 1e-15 + 1e-12 * a.abs());
        }
    }
}
