//! Rankin (1988) risk categories from maximum building slope and maximum settlement, the screen
//! used in the preliminary stage of Mair, Taylor & Burland (1996).
//!
//! Owns the two ladders and the combination "classify separately, take the worse"
//! ([`rankin_category`]). **All threshold values are from memory** \[M\] (damage-relations.md §6.1,
//! §11 item 6); only the structure of the screen (slope plus settlement) was corroborated \[R\].
//! It does not compute slope or settlement from points.

use serde::Serialize;

use super::{DamageError, reaches_boundary, require_finite};

/// Rankin (1988) risk category 1..=4.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum RankinCategory {
    /// 1 — negligible: superficial damage unlikely.
    Negligible = 1,
    /// 2 — slight: possible superficial damage, unlikely to be structurally significant.
    Slight = 2,
    /// 3 — moderate: superficial and possible structural damage expected; possible damage to
    /// relatively rigid pipelines.
    Moderate = 3,
    /// 4 — high: structural damage to buildings and to rigid pipelines expected; possible damage
    /// to other pipelines.
    High = 4,
}

impl RankinCategory {
    const LADDER: [RankinCategory; 4] = [
        RankinCategory::Negligible,
        RankinCategory::Slight,
        RankinCategory::Moderate,
        RankinCategory::High,
    ];

    /// The category number 1..=4.
    pub fn number(self) -> u8 {
        self as u8
    }

    /// Risk description.
    pub fn label(self) -> &'static str {
        match self {
            RankinCategory::Negligible => "negligible",
            RankinCategory::Slight => "slight",
            RankinCategory::Moderate => "moderate",
            RankinCategory::High => "high",
        }
    }

    /// Expected effects (our paraphrase).
    pub fn expected_effects(self) -> &'static str {
        match self {
            RankinCategory::Negligible => "superficial damage unlikely",
            RankinCategory::Slight => {
                "possible superficial damage, unlikely to be structurally significant"
            }
            RankinCategory::Moderate => {
                "superficial and possible structural damage expected; possible damage to \
                 relatively rigid pipelines"
            }
            RankinCategory::High => {
                "structural damage to buildings and damage to rigid pipelines expected; possible \
                 damage to other pipelines"
            }
        }
    }

    fn from_boundaries(value: f64, boundaries: &[f64; 3]) -> RankinCategory {
        let reached = boundaries
            .iter()
            .filter(|b| reaches_boundary(value, **b))
            .count();
        Self::LADDER[reached.min(3)]
    }
}

/// Slope boundaries 1/500, 1/200, 1/50 between categories 1|2, 2|3, 3|4 (dimensionless).
/// **From memory** \[M\] (Rankin 1988, via damage-relations.md §6.1).
pub const RANKIN_SLOPE_BOUNDARIES: [f64; 3] = [1.0 / 500.0, 1.0 / 200.0, 1.0 / 50.0];

/// Settlement boundaries 10, 50, 75 mm between categories 1|2, 2|3, 3|4.
/// **From memory** \[M\] (Rankin 1988, via damage-relations.md §6.1).
pub const RANKIN_SETTLEMENT_BOUNDARIES_MM: [f64; 3] = [10.0, 50.0, 75.0];

/// Rankin category from the maximum slope alone.
///
/// # Units
/// `max_slope`: dimensionless (rad); the magnitude is used. A value on a boundary goes to the
/// more severe category (damage-relations.md §6.1 \[Rec\], matching "< 1/500" for category 1),
/// with the relative tolerance of [`super::BOUNDARY_RELATIVE_TOLERANCE`].
///
/// # References
/// Rankin, W.J. (1988), Ground movements resulting from urban tunnelling: predictions and effects
/// — values **from memory** \[M\].
///
/// # Examples
/// ```
/// use plinth::damage::rankin::{rankin_from_slope, RankinCategory};
/// // damage-relations.md §8.7: 1/400 → 2; 1/500 exactly → 2.
/// assert_eq!(rankin_from_slope(1.0 / 400.0).unwrap(), RankinCategory::Slight);
/// assert_eq!(rankin_from_slope(1.0 / 500.0).unwrap(), RankinCategory::Slight);
/// ```
///
/// Non-finite → [`DamageError::InvalidInput`].
pub fn rankin_from_slope(max_slope: f64) -> Result<RankinCategory, DamageError> {
    let s = require_finite("max_slope", max_slope)?.abs();
    Ok(RankinCategory::from_boundaries(s, &RANKIN_SLOPE_BOUNDARIES))
}

/// Rankin category from the maximum settlement alone.
///
/// # Units
/// `max_settlement_mm`: millimetres, + downward. Choice: the magnitude is used, so a net heave of
/// the same size screens the same (Rankin's table speaks of settlement only; heave also distorts).
/// Boundary rule as [`rankin_from_slope`].
///
/// # References
/// Rankin (1988) — values **from memory** \[M\].
///
/// # Examples
/// ```
/// use plinth::damage::rankin::{rankin_from_settlement, RankinCategory};
/// // damage-relations.md §8.7: 12 mm → 2; 75 mm exactly → 4.
/// assert_eq!(rankin_from_settlement(12.0).unwrap(), RankinCategory::Slight);
/// assert_eq!(rankin_from_settlement(75.0).unwrap(), RankinCategory::High);
/// ```
///
/// Non-finite → [`DamageError::InvalidInput`].
pub fn rankin_from_settlement(max_settlement_mm: f64) -> Result<RankinCategory, DamageError> {
    let s = require_finite("max_settlement_mm", max_settlement_mm)?.abs();
    Ok(RankinCategory::from_boundaries(
        s,
        &RANKIN_SETTLEMENT_BOUNDARIES_MM,
    ))
}

/// Rankin result: the category of each measure and the worse of the two.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct RankinResult {
    /// The worse of the available measures.
    pub category: RankinCategory,
    /// Category from slope, if slope was given.
    pub slope_category: Option<RankinCategory>,
    /// Category from settlement, if settlement was given.
    pub settlement_category: Option<RankinCategory>,
}

/// Rankin (1988) category: classify slope and settlement separately and take the worse
/// (damage-relations.md §6.1 \[Rec\]).
///
/// # Units
/// `max_settlement_mm` in mm (+ down, magnitude used); `max_slope` dimensionless (magnitude).
///
/// # References
/// Rankin (1988) — values **from memory** \[M\]; combination rule \[Rec\].
///
/// # Examples
/// ```
/// use plinth::damage::rankin::{rankin_category, RankinCategory};
/// // damage-relations.md §8.7: slope 1/600 (cat 1) with 12 mm (cat 2) → 2.
/// let r = rankin_category(Some(12.0), Some(1.0 / 600.0)).unwrap().unwrap();
/// assert_eq!(r.category, RankinCategory::Slight);
/// ```
///
/// Returns `Ok(None)` when neither measure is given (insufficient data, not "negligible"); a
/// non-finite value → [`DamageError::InvalidInput`]. With only one measure, the result rests on
/// that one alone (the caller should say so).
pub fn rankin_category(
    max_settlement_mm: Option<f64>,
    max_slope: Option<f64>,
) -> Result<Option<RankinResult>, DamageError> {
    let slope_category = max_slope.map(rankin_from_slope).transpose()?;
    let settlement_category = max_settlement_mm.map(rankin_from_settlement).transpose()?;
    let category = match (slope_category, settlement_category) {
        (Some(a), Some(b)) => a.max(b),
        (Some(a), None) | (None, Some(a)) => a,
        (None, None) => return Ok(None),
    };
    Ok(Some(RankinResult {
        category,
        slope_category,
        settlement_category,
    }))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn section_8_7_rows() {
        // damage-relations.md §8.7 Rankin rows (values from memory [M], derived classification).
        let rows = [
            (1.0 / 600.0, 8.0, 1),
            (1.0 / 400.0, 8.0, 2),
            (1.0 / 600.0, 12.0, 2),
            (1.0 / 100.0, 60.0, 3),
            (1.0 / 40.0, 80.0, 4),
            (1.0 / 500.0, 10.0, 2),
            (1.0 / 200.0, 50.0, 3),
            (1.0 / 50.0, 75.0, 4),
            (0.000999, 9.99, 1),
        ];
        for (slope, s_mm, cat) in rows {
            let r = rankin_category(Some(s_mm), Some(slope)).unwrap().unwrap();
            assert_eq!(r.category.number(), cat, "slope {slope} s {s_mm}");
        }
    }

    #[test]
    fn missing_data_is_not_negligible() {
        assert_eq!(rankin_category(None, None).unwrap(), None);
        let r = rankin_category(None, Some(0.003)).unwrap().unwrap();
        assert_eq!(r.category, RankinCategory::Slight);
        assert_eq!(r.settlement_category, None);
        assert!(rankin_category(Some(f64::NAN), None).is_err());
    }

    #[test]
    fn sign_is_ignored() {
        assert_eq!(rankin_from_slope(-0.004).unwrap(), RankinCategory::Slight);
        assert_eq!(
            rankin_from_settlement(-60.0).unwrap(),
            RankinCategory::Moderate
        );
    }
}
