//! Skempton & MacDonald (1956) limits on angular distortion, reported as an informative flag
//! (not a damage category).
//!
//! Owns the three limits (1/500 design, 1/300 cracking, 1/150 structural damage) and the flag
//! ([`skempton_macdonald_flag`]). **Values from memory** \[M\] (damage-relations.md §6.3, §11 item 7).
//! Skempton & MacDonald's "angular distortion" is δ/l between adjacent points, which equals
//! Burland & Wroth's β only when tilt is negligible (§1.1); the caller says which it passes.

use serde::Serialize;

use super::{DamageError, reaches_boundary, require_finite};

/// Recommended design limit on angular distortion, 1/500 (dimensionless). From memory \[M\].
pub const DESIGN_LIMIT: f64 = 1.0 / 500.0;
/// Angular distortion at which cracking of panel and load-bearing walls is expected, 1/300.
/// From memory \[M\].
pub const CRACKING_LIMIT: f64 = 1.0 / 300.0;
/// Angular distortion at which structural damage is expected, 1/150. From memory \[M\].
pub const STRUCTURAL_DAMAGE_LIMIT: f64 = 1.0 / 150.0;

/// Where an angular distortion sits against the Skempton & MacDonald limits.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum SkemptonMacDonaldFlag {
    /// Below 1/500.
    WithinDesignLimit,
    /// At or above 1/500, below 1/300: exceeds the design limit, cracking not yet expected.
    ExceedsDesignLimit,
    /// At or above 1/300, below 1/150: cracking of panel and load-bearing walls expected.
    CrackingExpected,
    /// At or above 1/150: structural damage expected.
    StructuralDamageExpected,
}

impl SkemptonMacDonaldFlag {
    /// Plain-language description.
    pub fn label(self) -> &'static str {
        match self {
            SkemptonMacDonaldFlag::WithinDesignLimit => "within the 1/500 design limit",
            SkemptonMacDonaldFlag::ExceedsDesignLimit => {
                "exceeds the 1/500 design limit; below the 1/300 cracking limit"
            }
            SkemptonMacDonaldFlag::CrackingExpected => {
                "at or beyond 1/300: cracking of panel and load-bearing walls expected"
            }
            SkemptonMacDonaldFlag::StructuralDamageExpected => {
                "at or beyond 1/150: structural damage expected"
            }
        }
    }
}

/// Skempton & MacDonald (1956) flag for an angular distortion.
///
/// # Units
/// `angular_distortion`: dimensionless (rad); magnitude used. A value on a limit counts as
/// reaching it (same boundary rule as the damage categories, §3.3).
///
/// # References
/// Skempton, A.W. & MacDonald, D.H. (1956), The allowable settlements of buildings, Proc. ICE
/// Part III, 5 — 98 buildings \[R\]; limits **from memory** \[M\].
///
/// # Examples
/// ```
/// use plinth::damage::skempton_macdonald::{skempton_macdonald_flag, SkemptonMacDonaldFlag};
/// // damage-relations.md §8.7: β = 1/400 exceeds 1/500 but not 1/300; β = 1/200 reaches 1/300.
/// assert_eq!(skempton_macdonald_flag(1.0 / 400.0).unwrap(), SkemptonMacDonaldFlag::ExceedsDesignLimit);
/// assert_eq!(skempton_macdonald_flag(1.0 / 200.0).unwrap(), SkemptonMacDonaldFlag::CrackingExpected);
/// ```
///
/// Non-finite → [`DamageError::InvalidInput`].
pub fn skempton_macdonald_flag(
    angular_distortion: f64,
) -> Result<SkemptonMacDonaldFlag, DamageError> {
    let b = require_finite("angular_distortion", angular_distortion)?.abs();
    Ok(if reaches_boundary(b, STRUCTURAL_DAMAGE_LIMIT) {
        SkemptonMacDonaldFlag::StructuralDamageExpected
    } else if reaches_boundary(b, CRACKING_LIMIT) {
        SkemptonMacDonaldFlag::CrackingExpected
    } else if reaches_boundary(b, DESIGN_LIMIT) {
        SkemptonMacDonaldFlag::ExceedsDesignLimit
    } else {
        SkemptonMacDonaldFlag::WithinDesignLimit
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn limits_and_boundaries() {
        // damage-relations.md §6.3 limits (from memory [M]); boundary → reached.
        assert_eq!(
            skempton_macdonald_flag(1e-3).unwrap(),
            SkemptonMacDonaldFlag::WithinDesignLimit
        );
        assert_eq!(
            skempton_macdonald_flag(1.0 / 300.0).unwrap(),
            SkemptonMacDonaldFlag::CrackingExpected
        );
        assert_eq!(
            skempton_macdonald_flag(-1.0 / 150.0).unwrap(),
            SkemptonMacDonaldFlag::StructuralDamageExpected
        );
        assert!(skempton_macdonald_flag(f64::NAN).is_err());
    }
}
