//! Building-damage relations: from movement measures (deflection ratio, horizontal strain, angular
//! distortion, settlement, slope) to strains, a damage category and screening flags.
//!
//! This module owns the published relations (one per file) and the shared types they use: the
//! deformation [`Mode`], the [`DamageCategory`] ladder of Burland et al. (1977), the
//! classification rule on limiting tensile strain ([`StrainThresholds`]), the governing
//! [`Branch`] and the sampled chart [`Curve`]. It does **not** derive movement measures from
//! measurement points (that is `crate::metrics`), does not choose parameter sets (that is
//! `crate::criteria`) and does no file I/O.
//!
//! All strains are **absolute** numbers (0.05 % = 5e-4), tension positive. Horizontal strain is
//! positive in extension. Deflection ratios are positive magnitudes with a [`Mode`] label, or signed
//! (+ sagging, − hogging) where a field says so.
//!
//! Files:
//! - [`burland_wroth`]: Burland & Wroth (1974) deep-beam factors Fb, Fd and ε_bmax, ε_dmax.
//! - [`boscardin_cording`]: Boscardin & Cording (1989) resultant strains with horizontal strain,
//!   the compressive-strain policy and the (reconstructed) β–ε_h chart boundaries.
//! - [`burland_1995`]: Burland (1995) Δ/L – ε_h interaction-chart boundary curves.
//! - [`son_cording`]: Son & Cording (2005) principal strain from β and ε_l, thresholds, curves.
//! - [`rankin`]: Rankin (1988) risk category from maximum settlement and slope.
//! - [`skempton_macdonald`]: Skempton & MacDonald (1956) angular-distortion limits (flag).
//! - [`bjerrum`]: Bjerrum (1963) angular-distortion ladder (flag).
//! - [`greenfield`]: Peck (1969) Gaussian tunnel trough with O'Reilly & New (1982) width, and
//!   Clough & O'Rourke (1990) excavation envelopes (screening input).
//! - [`assess`]: the per-structure assessment the pipeline calls.

pub mod assess;
pub mod bjerrum;
pub mod boscardin_cording;
pub mod burland_1995;
pub mod burland_wroth;
pub mod greenfield;
pub mod rankin;
pub mod skempton_macdonald;
pub mod son_cording;

pub use assess::{DamageAssessment, DamageInput, ZoneInput, assess_damage};

use serde::{Deserialize, Serialize};

/// Errors of the damage relations: which quantity failed and why.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum DamageError {
    /// An input value is outside the domain of the relation (non-finite, zero, negative, ...).
    #[error("invalid {quantity} = {value}: {reason}")]
    InvalidInput {
        /// Name of the input, with its unit, e.g. `"length_m"`.
        quantity: &'static str,
        /// The offending value.
        value: f64,
        /// Why it is rejected.
        reason: &'static str,
    },
    /// A threshold set is not strictly increasing, positive and finite.
    #[error("invalid strain thresholds {thresholds:?}: {reason}")]
    InvalidThresholds {
        /// The rejected thresholds (absolute strain).
        thresholds: [f64; 4],
        /// Why they are rejected.
        reason: &'static str,
    },
}

/// Check that `value` is finite; otherwise a [`DamageError::InvalidInput`].
pub(crate) fn require_finite(quantity: &'static str, value: f64) -> Result<f64, DamageError> {
    if value.is_finite() {
        Ok(value)
    } else {
        Err(DamageError::InvalidInput {
            quantity,
            value,
            reason: "must be a finite number",
        })
    }
}

/// Check that `value` is finite and strictly positive.
pub(crate) fn require_positive(quantity: &'static str, value: f64) -> Result<f64, DamageError> {
    if value.is_finite() && value > 0.0 {
        Ok(value)
    } else {
        Err(DamageError::InvalidInput {
            quantity,
            value,
            reason: "must be finite and greater than zero",
        })
    }
}

/// Check that `value` is finite and not negative.
pub(crate) fn require_non_negative(quantity: &'static str, value: f64) -> Result<f64, DamageError> {
    if value.is_finite() && value >= 0.0 {
        Ok(value)
    } else {
        Err(DamageError::InvalidInput {
            quantity,
            value,
            reason: "must be finite and not negative",
        })
    }
}

/// Check a Poisson's ratio: finite, 0 ≤ ν < 0.5.
pub(crate) fn require_poisson(nu: f64) -> Result<f64, DamageError> {
    if nu.is_finite() && (0.0..0.5).contains(&nu) {
        Ok(nu)
    } else {
        Err(DamageError::InvalidInput {
            quantity: "poisson",
            value: nu,
            reason: "Poisson's ratio must satisfy 0 <= nu < 0.5",
        })
    }
}

/// Deformation mode of a zone of a building (Burland & Wroth 1974).
///
/// # Units
/// With settlement s positive downward: **sagging** (concave upward) where d²s/dx² < 0,
/// **hogging** (concave downward) where d²s/dx² > 0 (damage-relations.md §0.2). A signed
/// deflection ratio is + for sagging and − for hogging.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Mode {
    /// Concave upward ("smile"); neutral axis by default at mid-height.
    Sagging,
    /// Concave downward; neutral axis by default at the lower edge.
    Hogging,
}

impl Mode {
    /// Mode from a signed deflection ratio (+ sagging, − hogging). Zero or non-finite → `None`.
    pub fn from_signed_deflection_ratio(deflection_ratio: f64) -> Option<Mode> {
        if deflection_ratio > 0.0 {
            Some(Mode::Sagging)
        } else if deflection_ratio < 0.0 {
            Some(Mode::Hogging)
        } else {
            None
        }
    }

    /// Lower-case label, `"sagging"` or `"hogging"`.
    pub fn label(self) -> &'static str {
        match self {
            Mode::Sagging => "sagging",
            Mode::Hogging => "hogging",
        }
    }
}

/// Which strain branch governs a result.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Branch {
    /// Bending (extreme-fibre) strain ε_br = ε_bmax + ε_h.
    Bending,
    /// Diagonal (shear) strain ε_dr of Boscardin & Cording / Burland.
    Diagonal,
    /// Son & Cording (2005) principal strain ε_p.
    Principal,
}

/// Grouping of the damage categories by what they affect (Burland 1995, as restated in
/// damage-relations.md §3.2, \[R\]).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum DamageGroup {
    /// Categories 0–2: appearance.
    Aesthetic,
    /// Categories 3–4: serviceability and function.
    Serviceability,
    /// Category 5: stability.
    Stability,
}

/// Damage category 0..=5 of Burland, Broms & de Mello (1977), classified by limiting tensile
/// strain (Boscardin & Cording 1989; Burland 1995).
///
/// Strain cannot separate categories 4 and 5 (both are "> 0.3 %"), so classification by strain
/// returns at most [`DamageCategory::Severe`], whose [`label`](Self::label) reads
/// "severe or worse (4–5)". [`DamageCategory::VerySevere`] exists for completeness (descriptions,
/// user-entered observations) but is never produced by [`StrainThresholds::classify`].
///
/// Serialised as an object `{ number, name, label, crack_width, ease_of_repair, group }`.
///
/// # References
/// - Burland, J.B., Broms, B.B. & de Mello, V.F.B. (1977), Behaviour of foundations and
///   structures, 9th ICSMFE, Tokyo — categories, crack widths, ease of repair.
/// - Boscardin & Cording (1989); Burland (1995) — limiting tensile strains.
///
/// Names and crack widths are \[R\] in damage-relations.md §3.2; ease of repair and grouping are \[M\]
/// (partly \[R\]). The typical-damage wording is our paraphrase.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum DamageCategory {
    /// 0 — negligible.
    Negligible = 0,
    /// 1 — very slight.
    VerySlight = 1,
    /// 2 — slight.
    Slight = 2,
    /// 3 — moderate.
    Moderate = 3,
    /// 4 — severe; from strain this means "4 or 5".
    Severe = 4,
    /// 5 — very severe; not separable from 4 by strain.
    VerySevere = 5,
}

impl DamageCategory {
    /// All categories in ascending order.
    pub const ALL: [DamageCategory; 6] = [
        DamageCategory::Negligible,
        DamageCategory::VerySlight,
        DamageCategory::Slight,
        DamageCategory::Moderate,
        DamageCategory::Severe,
        DamageCategory::VerySevere,
    ];

    /// Category from its number 0..=5; anything else → `None`.
    pub fn from_number(number: u8) -> Option<DamageCategory> {
        Self::ALL.get(usize::from(number)).copied()
    }

    /// The category number 0..=5.
    pub fn number(self) -> u8 {
        self as u8
    }

    /// Burland et al. (1977) "normal degree of severity".
    pub fn name(self) -> &'static str {
        match self {
            DamageCategory::Negligible => "negligible",
            DamageCategory::VerySlight => "very slight",
            DamageCategory::Slight => "slight",
            DamageCategory::Moderate => "moderate",
            DamageCategory::Severe => "severe",
            DamageCategory::VerySevere => "very severe",
        }
    }

    /// Label for a strain-based result: the name, except category 4, which is reported as
    /// "severe or worse (4–5)" because strain cannot separate 4 and 5.
    pub fn label(self) -> &'static str {
        match self {
            DamageCategory::Severe => "severe or worse (4–5)",
            other => other.name(),
        }
    }

    /// Short number label for tables: "0" … "3", "4–5" for category 4, "5" for 5.
    pub fn number_label(self) -> &'static str {
        match self {
            DamageCategory::Negligible => "0",
            DamageCategory::VerySlight => "1",
            DamageCategory::Slight => "2",
            DamageCategory::Moderate => "3",
            DamageCategory::Severe => "4–5",
            DamageCategory::VerySevere => "5",
        }
    }

    /// Approximate crack width (Burland et al. 1977, \[R\]).
    pub fn crack_width(self) -> &'static str {
        match self {
            DamageCategory::Negligible => "hairline cracks, less than about 0.1 mm",
            DamageCategory::VerySlight => "fine cracks up to about 1 mm",
            DamageCategory::Slight => "cracks up to about 5 mm",
            DamageCategory::Moderate => "cracks of 5 to 15 mm, or several greater than 3 mm",
            DamageCategory::Severe => {
                "cracks of 15 to 25 mm, also depending on the number of cracks"
            }
            DamageCategory::VerySevere => {
                "cracks usually greater than 25 mm, depending on the number of cracks"
            }
        }
    }

    /// Typical damage, paraphrased from Burland et al. (1977).
    pub fn typical_damage(self) -> &'static str {
        match self {
            DamageCategory::Negligible => "hairline cracks",
            DamageCategory::VerySlight => {
                "fine cracks treated during normal redecoration; perhaps an isolated slight \
                 fracture; cracks in external brickwork visible on close inspection"
            }
            DamageCategory::Slight => {
                "cracks easily filled, redecoration probably needed; several slight internal \
                 fractures; external cracks visible, some repointing; doors and windows may \
                 stick slightly"
            }
            DamageCategory::Moderate => {
                "cracks need opening up and patching by a mason; repointing and possibly \
                 replacement of some external brickwork; doors and windows sticking; service \
                 pipes may fracture; weather-tightness often impaired"
            }
            DamageCategory::Severe => {
                "extensive repair including breaking out and replacing wall sections; frames \
                 distorted; floors sloping noticeably; walls leaning or bulging; some loss of \
                 bearing in beams; services disrupted"
            }
            DamageCategory::VerySevere => {
                "major repair with partial or complete rebuilding; beams lose bearing; walls \
                 lean badly and need shoring; windows broken by distortion; danger of instability"
            }
        }
    }

    /// Ease of repair (Burland et al. 1977, \[M\], partly \[R\]).
    pub fn ease_of_repair(self) -> &'static str {
        match self {
            DamageCategory::Negligible => "no repair needed",
            DamageCategory::VerySlight => "normal decoration",
            DamageCategory::Slight => "easy filling, some repointing",
            DamageCategory::Moderate => "moderate building work",
            DamageCategory::Severe => "extensive repair",
            DamageCategory::VerySevere => "major repair or rebuilding",
        }
    }

    /// Aesthetic (0–2), serviceability (3–4) or stability (5) grouping.
    ///
    /// A strain-based category 4 means "4 or 5" and is grouped as serviceability here; it may
    /// reach stability, which strain cannot tell (reports should say "serviceability or worse").
    pub fn group(self) -> DamageGroup {
        match self {
            DamageCategory::Negligible | DamageCategory::VerySlight | DamageCategory::Slight => {
                DamageGroup::Aesthetic
            }
            DamageCategory::Moderate | DamageCategory::Severe => DamageGroup::Serviceability,
            DamageCategory::VerySevere => DamageGroup::Stability,
        }
    }
}

impl Serialize for DamageCategory {
    fn serialize<S: serde::Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeStruct;
        let mut s = serializer.serialize_struct("DamageCategory", 6)?;
        s.serialize_field("number", &self.number())?;
        s.serialize_field("name", self.name())?;
        s.serialize_field("label", self.label())?;
        s.serialize_field("crack_width", self.crack_width())?;
        s.serialize_field("ease_of_repair", self.ease_of_repair())?;
        s.serialize_field("group", &self.group())?;
        s.end()
    }
}

/// Relative tolerance of the boundary rule (damage-relations.md §3.3 \[Rec\]): a value within
/// 1e-9 (relative) below a boundary counts as on it, so rounding cannot move a value that was built
/// to equal a boundary into the milder category.
pub const BOUNDARY_RELATIVE_TOLERANCE: f64 = 1e-9;

/// `true` when `value` reaches `boundary` under the §3.3 rule (on the boundary → more severe).
///
/// NaN never reaches a boundary.
pub fn reaches_boundary(value: f64, boundary: f64) -> bool {
    value >= boundary * (1.0 - BOUNDARY_RELATIVE_TOLERANCE)
}

/// Four limiting-strain boundaries separating categories 0|1, 1|2, 2|3 and 3|4–5.
///
/// # Units
/// Absolute tensile strain (0.05 % = 5e-4).
///
/// # References
/// - Boscardin & Cording (1989), restated by Burland (1995): 0.05, 0.075, 0.15, 0.3 %
///   (\[R\], damage-relations.md §3.2) — [`StrainThresholds::BURLAND`].
/// - Son & Cording (2005): 0.05, 0.075, 0.167, 0.333 % — **from memory** \[M\], stored as exactly
///   1/600 and 1/300 (§5) — [`StrainThresholds::SON_CORDING`].
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct StrainThresholds {
    boundaries: [f64; 4],
}

impl StrainThresholds {
    /// Boscardin & Cording (1989) / Burland (1995) limiting tensile strains, absolute.
    pub const BURLAND: StrainThresholds = StrainThresholds {
        boundaries: [5.0e-4, 7.5e-4, 1.5e-3, 3.0e-3],
    };

    /// Son & Cording (2005) thresholds, absolute: 5e-4, 7.5e-4, 1/600, 1/300.
    /// The upper two are **from memory** \[M\] (damage-relations.md §5, §11 item 2).
    pub const SON_CORDING: StrainThresholds = StrainThresholds {
        boundaries: [5.0e-4, 7.5e-4, 1.0 / 600.0, 1.0 / 300.0],
    };

    /// Validated thresholds: finite, positive, strictly increasing.
    pub fn new(boundaries: [f64; 4]) -> Result<StrainThresholds, DamageError> {
        if boundaries.iter().any(|b| !b.is_finite() || *b <= 0.0) {
            return Err(DamageError::InvalidThresholds {
                thresholds: boundaries,
                reason: "every threshold must be finite and greater than zero",
            });
        }
        if boundaries.windows(2).any(|w| w[1] <= w[0]) {
            return Err(DamageError::InvalidThresholds {
                thresholds: boundaries,
                reason: "thresholds must be strictly increasing",
            });
        }
        Ok(StrainThresholds { boundaries })
    }

    /// The four boundaries, absolute strain.
    pub fn boundaries(&self) -> [f64; 4] {
        self.boundaries
    }

    /// Damage category of a tensile strain: the number of boundaries reached under the §3.3 rule
    /// (on a boundary → more severe; relative tolerance [`BOUNDARY_RELATIVE_TOLERANCE`]).
    ///
    /// # Units
    /// `strain` absolute, tension positive. Zero or compressive strain → category 0.
    ///
    /// # Examples
    /// ```
    /// use plinth::damage::{DamageCategory, StrainThresholds};
    /// // damage-relations.md §8.3: ε = 7.5e-4 exactly is on the 1|2 boundary → 2.
    /// let t = StrainThresholds::BURLAND;
    /// assert_eq!(t.classify(7.5e-4).unwrap(), DamageCategory::Slight);
    /// assert_eq!(t.classify(7.5e-4 * (1.0 - 1e-6)).unwrap(), DamageCategory::VerySlight);
    /// assert_eq!(t.classify(3.0e-3).unwrap().label(), "severe or worse (4–5)");
    /// ```
    ///
    /// Non-finite strain → [`DamageError::InvalidInput`].
    pub fn classify(&self, strain: f64) -> Result<DamageCategory, DamageError> {
        let strain = require_finite("strain", strain)?;
        let reached = self
            .boundaries
            .iter()
            .filter(|b| reaches_boundary(strain, **b))
            .count();
        // `reached` is 0..=4 by construction; from_number(0..=4) is always Some.
        Ok(DamageCategory::from_number(reached as u8).unwrap_or(DamageCategory::Severe))
    }
}

/// What a sampled chart curve plots on its vertical axis.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum CurveOrdinate {
    /// Deflection ratio Δ/L (absolute), Burland (1995) chart.
    DeflectionRatio,
    /// Angular distortion β (absolute), Boscardin & Cording-type or Son & Cording chart.
    AngularDistortion,
}

/// One sampled category-boundary curve of an interaction chart, for plotting.
///
/// Points below the curve have a governing strain below `limiting_strain`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Curve {
    /// The category that begins on this curve (1..=4; 4 means "4–5").
    pub category_boundary: u8,
    /// The limiting tensile strain of the curve, absolute.
    pub limiting_strain: f64,
    /// What the second coordinate of each point is.
    pub ordinate: CurveOrdinate,
    /// `(eps_h, ordinate)` pairs; `eps_h` absolute horizontal strain (+ extension) from 0 to
    /// `limiting_strain`, ordinate absolute.
    pub points: Vec<(f64, f64)>,
}

/// Number of samples per chart curve (≥ 200 asked by damage-relations.md §3.4).
pub const CURVE_SAMPLES: usize = 256;

/// Sample a boundary function `f(eps_h)` uniformly from 0 to `limiting_strain` inclusive.
pub(crate) fn sample_curve(
    category_boundary: u8,
    limiting_strain: f64,
    ordinate: CurveOrdinate,
    f: impl Fn(f64) -> f64,
) -> Curve {
    let n = CURVE_SAMPLES;
    let points = (0..n)
        .map(|k| {
            let eps_h = if k + 1 == n {
                limiting_strain
            } else {
                limiting_strain * (k as f64) / ((n - 1) as f64)
            };
            (eps_h, f(eps_h))
        })
        .collect();
    Curve {
        category_boundary,
        limiting_strain,
        ordinate,
        points,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn burland_thresholds_classify_each_band() {
        // damage-relations.md §3.2 table (limiting strains [R]); mid-band values chosen by hand.
        let t = StrainThresholds::BURLAND;
        let cases = [
            (0.0, 0),
            (4.0e-4, 0),
            (6.0e-4, 1),
            (1.0e-3, 2),
            (2.0e-3, 3),
            (5.0e-3, 4),
            (-1.0e-3, 0),
        ];
        for (strain, cat) in cases {
            assert_eq!(t.classify(strain).unwrap().number(), cat, "strain {strain}");
        }
    }

    #[test]
    fn boundaries_go_to_the_more_severe_side() {
        // damage-relations.md §3.3 [Rec] and §8.3 "horizontal strain alone" boundary tests.
        let t = StrainThresholds::BURLAND;
        for (k, b) in t.boundaries().iter().enumerate() {
            assert_eq!(t.classify(*b).unwrap().number() as usize, k + 1);
            // Inside the 1e-9 tolerance still counts as on the boundary.
            assert_eq!(
                t.classify(*b * (1.0 - 1e-10)).unwrap().number() as usize,
                k + 1
            );
            assert_eq!(t.classify(*b * (1.0 - 1e-6)).unwrap().number() as usize, k);
        }
    }

    #[test]
    fn son_cording_upper_thresholds_are_exact_fractions() {
        // damage-relations.md §5 [Rec]: store 0.167 % and 0.333 % as exactly 1/600 and 1/300.
        let b = StrainThresholds::SON_CORDING.boundaries();
        assert_eq!(b[2], 1.0 / 600.0);
        assert_eq!(b[3], 1.0 / 300.0);
    }

    #[test]
    fn invalid_thresholds_and_strain_are_errors() {
        assert!(StrainThresholds::new([5e-4, 5e-4, 1e-3, 2e-3]).is_err());
        assert!(StrainThresholds::new([0.0, 5e-4, 1e-3, 2e-3]).is_err());
        assert!(StrainThresholds::new([f64::NAN, 5e-4, 1e-3, 2e-3]).is_err());
        assert!(StrainThresholds::new([1e-4, 5e-4, 1e-3, 2e-3]).is_ok());
        assert!(StrainThresholds::BURLAND.classify(f64::NAN).is_err());
        assert!(StrainThresholds::BURLAND.classify(f64::INFINITY).is_err());
    }

    #[test]
    fn category_labels_and_groups() {
        assert_eq!(DamageCategory::Severe.label(), "severe or worse (4–5)");
        assert_eq!(DamageCategory::Moderate.label(), "moderate");
        assert_eq!(DamageCategory::Slight.group(), DamageGroup::Aesthetic);
        assert_eq!(
            DamageCategory::Moderate.group(),
            DamageGroup::Serviceability
        );
        assert_eq!(DamageCategory::VerySevere.group(), DamageGroup::Stability);
        assert_eq!(DamageCategory::from_number(6), None);
        let json = serde_json::to_value(DamageCategory::Severe).unwrap();
        assert_eq!(json["number"], 4);
        assert_eq!(json["label"], "severe or worse (4–5)");
        assert_eq!(json["group"], "serviceability");
    }

    #[test]
    fn mode_from_sign() {
        assert_eq!(
            Mode::from_signed_deflection_ratio(1e-4),
            Some(Mode::Sagging)
        );
        assert_eq!(
            Mode::from_signed_deflection_ratio(-1e-4),
            Some(Mode::Hogging)
        );
        assert_eq!(Mode::from_signed_deflection_ratio(0.0), None);
        assert_eq!(Mode::from_signed_deflection_ratio(f64::NAN), None);
    }
}
