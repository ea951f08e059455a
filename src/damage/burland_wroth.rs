//! Burland & Wroth (1974) deep-beam model: the factors Fb and Fd relating deflection ratio Δ/L to
//! the maximum bending strain ε_bmax and the maximum diagonal strain ε_dmax.
//!
//! Owns the neutral-axis choice ([`NeutralAxis`], [`NeutralAxisPolicy`]), the dimensionless
//! factors ([`deep_beam_factors`]) and the strains ([`beam_strains`]). It does not add horizontal
//! strain (that is [`super::boscardin_cording`]) and does not classify.
//!
//! Only the central point load is implemented (the standard of Burland 1995 and Mair et al. 1996,
//! damage-relations.md §2.7 \[Rec\]); the distributed-load variant is deliberately left out.

use serde::{Deserialize, Serialize};

use super::{DamageError, Mode, require_finite, require_positive};

/// Position of the neutral axis of the equivalent deep beam.
///
/// # References
/// Burland & Wroth (1974); the hogging choice I = H³/3, t = H is \[R\] (damage-relations.md §2.2).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum NeutralAxis {
    /// Mid-height: I = H³/12, t = H/2 (symmetric beam; standard for sagging).
    MidHeight,
    /// Lower edge: I = H³/3, t = H (base restrained by foundation and ground; standard for
    /// hogging).
    LowerEdge,
}

impl NeutralAxis {
    /// Second moment of area per unit thickness divided by H³ (dimensionless).
    fn inertia_over_h3(self) -> f64 {
        match self {
            NeutralAxis::MidHeight => 1.0 / 12.0,
            NeutralAxis::LowerEdge => 1.0 / 3.0,
        }
    }

    /// Distance neutral axis → extreme tensile fibre divided by H (dimensionless).
    fn fibre_distance_over_h(self) -> f64 {
        match self {
            NeutralAxis::MidHeight => 0.5,
            NeutralAxis::LowerEdge => 1.0,
        }
    }

    /// Label, `"mid-height"` or `"lower edge"`.
    pub fn label(self) -> &'static str {
        match self {
            NeutralAxis::MidHeight => "mid-height",
            NeutralAxis::LowerEdge => "lower edge",
        }
    }
}

/// Neutral-axis position per mode. The default is Burland & Wroth's: mid-height for sagging,
/// lower edge for hogging (damage-relations.md §2.2). A criteria set may override it.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NeutralAxisPolicy {
    /// Neutral axis used for sagging zones.
    pub sagging: NeutralAxis,
    /// Neutral axis used for hogging zones.
    pub hogging: NeutralAxis,
}

impl NeutralAxisPolicy {
    /// Burland & Wroth (1974): sagging mid-height, hogging lower edge.
    pub const BURLAND_WROTH: NeutralAxisPolicy = NeutralAxisPolicy {
        sagging: NeutralAxis::MidHeight,
        hogging: NeutralAxis::LowerEdge,
    };

    /// The neutral axis for `mode`.
    pub fn for_mode(&self, mode: Mode) -> NeutralAxis {
        match mode {
            Mode::Sagging => self.sagging,
            Mode::Hogging => self.hogging,
        }
    }
}

impl Default for NeutralAxisPolicy {
    fn default() -> Self {
        Self::BURLAND_WROTH
    }
}

/// The two deep-beam factors: Δ/L = Fb·ε_bmax = Fd·ε_dmax.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct BeamFactors {
    /// Fb, bending factor (dimensionless).
    pub bending: f64,
    /// Fd, diagonal (shear) factor (dimensionless).
    pub diagonal: f64,
}

/// Deep-beam factors Fb and Fd for a central point load, from L/H, E/G and the neutral axis.
///
/// With r = L/H, e = E/G, I = c_I·H³ and t = c_t·H, eqs (2.2)–(2.3) of damage-relations.md become
/// `Fb = r/(12·c_t) + 3·c_I·e/(2·c_t·r)` and `Fd = 1 + r²/(18·c_I·e)`, i.e.
/// - mid-height axis: Fb = r/6 + e/(4r), Fd = 1 + 2r²/(3e);
/// - lower-edge axis: Fb = r/12 + e/(2r), Fd = 1 + r²/(6e).
///
/// # Units
/// All inputs and outputs dimensionless. Sign: factors are positive.
///
/// # References
/// Burland, J.B. & Wroth, C.P. (1974), Settlement of buildings and associated damage, eqs for
/// Δ/L in terms of ε_bmax and ε_dmax (\[M; R; D\]); dimensionless forms derived in
/// damage-relations.md §2.3 \[D\].
///
/// # Examples
/// ```
/// use plinth::damage::burland_wroth::{deep_beam_factors, NeutralAxis};
/// // damage-relations.md §2.5: hogging, L/H = 1, E/G = 2.6 → Fb 1.38333, Fd 1.06410 \[D\].
/// let f = deep_beam_factors(1.0, 2.6, NeutralAxis::LowerEdge).unwrap();
/// assert!((f.bending - 1.38333).abs() < 1e-5);
/// assert!((f.diagonal - 1.06410).abs() < 1e-5);
/// ```
///
/// L/H or E/G non-finite or ≤ 0 → [`DamageError::InvalidInput`].
pub fn deep_beam_factors(
    l_over_h: f64,
    e_over_g: f64,
    neutral_axis: NeutralAxis,
) -> Result<BeamFactors, DamageError> {
    let r = require_positive("l_over_h", l_over_h)?;
    let e = require_positive("e_over_g", e_over_g)?;
    let c_i = neutral_axis.inertia_over_h3();
    let c_t = neutral_axis.fibre_distance_over_h();
    Ok(BeamFactors {
        bending: r / (12.0 * c_t) + 3.0 * c_i * e / (2.0 * c_t * r),
        diagonal: 1.0 + r * r / (18.0 * c_i * e),
    })
}

/// Deep-beam factors for a mode under a neutral-axis policy.
///
/// Same units, references and errors as [`deep_beam_factors`].
pub fn factors_for_mode(
    mode: Mode,
    l_over_h: f64,
    e_over_g: f64,
    policy: &NeutralAxisPolicy,
) -> Result<BeamFactors, DamageError> {
    deep_beam_factors(l_over_h, e_over_g, policy.for_mode(mode))
}

/// Maximum bending and diagonal strains of the deep beam, before any horizontal strain.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct BeamStrains {
    /// L/H used (dimensionless).
    pub l_over_h: f64,
    /// The factors used.
    pub factors: BeamFactors,
    /// ε_bmax = |Δ/L| / Fb, absolute tensile strain.
    pub bending_strain: f64,
    /// ε_dmax = |Δ/L| / Fd, absolute tensile strain.
    pub diagonal_strain: f64,
}

/// ε_bmax and ε_dmax from the deflection ratio, L, H, E/G and the neutral axis.
///
/// `ε_bmax = |Δ/L| / Fb(L/H, E/G)`, `ε_dmax = |Δ/L| / Fd(L/H, E/G)`.
///
/// # Units
/// `deflection_ratio`: Δ/L, dimensionless; its magnitude is used (the sign carries the mode,
/// which the caller expresses through `neutral_axis`). `length_m`, `height_m`: metres (only the
/// ratio enters). Strains: absolute, tension positive.
///
/// # References
/// Burland & Wroth (1974) \[M; R; D\]; damage-relations.md §2.1–2.3.
///
/// # Examples
/// ```
/// use plinth::damage::burland_wroth::{beam_strains, NeutralAxis};
/// // damage-relations.md §8.2: sag, E/G 2.6, L/H 1, Δ/L 5e-4 → ε_b 6.12245e-4, ε_d 3.97959e-4.
/// let s = beam_strains(5e-4, 10.0, 10.0, 2.6, NeutralAxis::MidHeight).unwrap();
/// assert!((s.bending_strain - 6.12245e-4).abs() < 1e-9);
/// assert!((s.diagonal_strain - 3.97959e-4).abs() < 1e-9);
/// ```
///
/// L or H ≤ 0, E/G ≤ 0 or any non-finite input → [`DamageError::InvalidInput`].
pub fn beam_strains(
    deflection_ratio: f64,
    length_m: f64,
    height_m: f64,
    e_over_g: f64,
    neutral_axis: NeutralAxis,
) -> Result<BeamStrains, DamageError> {
    let dr = require_finite("deflection_ratio", deflection_ratio)?.abs();
    let length_m = require_positive("length_m", length_m)?;
    let height_m = require_positive("height_m", height_m)?;
    let l_over_h = length_m / height_m;
    let factors = deep_beam_factors(l_over_h, e_over_g, neutral_axis)?;
    Ok(BeamStrains {
        l_over_h,
        factors,
        bending_strain: dr / factors.bending,
        diagonal_strain: dr / factors.diagonal,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// Direct Timoshenko beam (P = 1, G = 1, E = e, unit thickness): Δ = PL³/(48EI) + 3PL/(8GH),
    /// ε_b = PLt/(4EI), ε_d = 3P/(8GH) — the independent check of damage-relations.md §8.12 item 1.
    fn direct_factors(r: f64, e: f64, axis: NeutralAxis) -> (f64, f64) {
        let h = 2.0;
        let l = r * h;
        let (i, t) = match axis {
            NeutralAxis::MidHeight => (h.powi(3) / 12.0, h / 2.0),
            NeutralAxis::LowerEdge => (h.powi(3) / 3.0, h),
        };
        let delta = l.powi(3) / (48.0 * e * i) + 3.0 * l / (8.0 * h);
        let eps_b = l * t / (4.0 * e * i);
        let eps_d = 3.0 / (8.0 * h);
        ((delta / l) / eps_b, (delta / l) / eps_d)
    }

    #[test]
    fn closed_form_matches_direct_timoshenko_beam() {
        // damage-relations.md §8.12 item 1: agreement better than 1e-12.
        for r in [0.5, 1.0, 2.0, 3.0, 5.0] {
            for e in [2.6, 12.5] {
                for axis in [NeutralAxis::MidHeight, NeutralAxis::LowerEdge] {
                    let f = deep_beam_factors(r, e, axis).unwrap();
                    let (fb, fd) = direct_factors(r, e, axis);
                    assert!((f.bending - fb).abs() < 1e-12 * fb, "{r} {e} {axis:?}");
                    assert!((f.diagonal - fd).abs() < 1e-12 * fd, "{r} {e} {axis:?}");
                }
            }
        }
    }

    #[test]
    fn factor_table_section_2_5() {
        // damage-relations.md §2.5 factor table (derived check values [D]); rel. tol 1e-5 on the
        // 6 significant figures printed.
        let rows: [(NeutralAxis, f64, f64, f64, f64); 4] = [
            (NeutralAxis::MidHeight, 2.6, 0.5, 1.38333, 1.06410),
            (NeutralAxis::MidHeight, 12.5, 3.0, 1.54167, 1.48000),
            (NeutralAxis::LowerEdge, 2.6, 5.0, 0.67667, 2.60256),
            (NeutralAxis::LowerEdge, 12.5, 1.0, 6.33333, 1.01333),
        ];
        for (axis, e, r, fb, fd) in rows {
            let f = deep_beam_factors(r, e, axis).unwrap();
            assert!((f.bending - fb).abs() <= 1e-5 * fb);
            assert!((f.diagonal - fd).abs() <= 1e-5 * fd);
        }
    }

    #[test]
    fn hogging_crossover_at_half_e_over_g() {
        // damage-relations.md §2.5: hog L/H = 1.3, E/G = 2.6 → Fb = Fd = 1.108333 [D].
        let f = deep_beam_factors(1.3, 2.6, NeutralAxis::LowerEdge).unwrap();
        assert!((f.bending - 1.108333).abs() < 1e-6);
        assert!((f.diagonal - 1.108333).abs() < 1e-6);
        // Sagging crossover at (E/G)/4 = 0.65.
        let s = deep_beam_factors(0.65, 2.6, NeutralAxis::MidHeight).unwrap();
        assert!((s.bending - s.diagonal).abs() < 1e-12);
    }

    #[test]
    fn degenerate_input_is_an_error() {
        for (dr, l, h, e) in [
            (1e-4, 0.0, 5.0, 2.6),
            (1e-4, 10.0, -1.0, 2.6),
            (1e-4, 10.0, 5.0, 0.0),
            (f64::NAN, 10.0, 5.0, 2.6),
            (1e-4, f64::INFINITY, 5.0, 2.6),
        ] {
            assert!(beam_strains(dr, l, h, e, NeutralAxis::MidHeight).is_err());
        }
        // A zero deflection ratio is a valid (zero-strain) input.
        let z = beam_strains(0.0, 10.0, 5.0, 2.6, NeutralAxis::MidHeight).unwrap();
        assert_eq!(z.bending_strain, 0.0);
    }

    #[test]
    fn sign_of_deflection_ratio_does_not_change_strain_magnitude() {
        let a = beam_strains(-3e-4, 12.0, 6.0, 2.6, NeutralAxis::LowerEdge).unwrap();
        let b = beam_strains(3e-4, 12.0, 6.0, 2.6, NeutralAxis::LowerEdge).unwrap();
        assert_eq!(a, b);
    }

    proptest! {
        // damage-relations.md §2.3 identity [D]: F_hog(r) = F_sag(r/2) for Fb and Fd.
        #[test]
        fn hogging_equals_sagging_at_half_ratio(r in 0.05f64..50.0, e in 0.2f64..50.0) {
            let hog = deep_beam_factors(r, e, NeutralAxis::LowerEdge).unwrap();
            let sag = deep_beam_factors(r / 2.0, e, NeutralAxis::MidHeight).unwrap();
            prop_assert!((hog.bending - sag.bending).abs() <= 1e-12 * hog.bending);
            prop_assert!((hog.diagonal - sag.diagonal).abs() <= 1e-12 * hog.diagonal);
        }
    }
}
