//! Line-of-sight (LOS) unit vectors: construction from incidence and heading, acceptance of
//! given ENU vectors, and the validation rules that catch wrong pass labels and sign errors.
//!
//! # Sign convention (binding for the whole `series` module)
//! The LOS unit vector `u = (u_E, u_N, u_U)` is expressed in the local east-north-up frame at the
//! target and points **from the ground to the satellite**, so `u_U > 0` always. An LOS
//! displacement is `d_LOS = u · d` in millimetres and is **positive towards the satellite**
//! (range shortening): pure uplift gives a positive LOS value, pure subsidence a negative one.
//! Incidence θ is the angle between the LOS and the local vertical (0° = looking straight down);
//! heading α is the azimuth of the ground-track velocity, degrees clockwise from true north.
//!
//! This module owns only the geometry of one viewing direction. It does not convert LOS values
//! whose dataset declares "positive away from the satellite" (that is a load-time sign flip of the
//! values, not of the vector) and it does no projection or decomposition (see `project` and
//! `decompose`).

use serde::Serialize;

/// Orbit direction of a viewing geometry.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Pass {
    /// Flying roughly north (heading ≈ −8° to −15°).
    Ascending,
    /// Flying roughly south (heading ≈ 188° to 195°).
    Descending,
}

impl Pass {
    /// Lower-case label used in messages and outputs.
    pub fn label(self) -> &'static str {
        match self {
            Pass::Ascending => "ascending",
            Pass::Descending => "descending",
        }
    }
}

/// Side towards which the radar looks, relative to the flight direction.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum LookSide {
    /// The usual case; assumed unless the dataset declares otherwise.
    #[default]
    Right,
    /// Only when explicitly declared by the dataset.
    Left,
}

/// Which way a geometry looks across the ground, from the sign of the east component of its
/// ground→satellite unit vector: `u_E < 0` means the satellite is west of the target, so the
/// radar looks towards the east.
///
/// Only geometries that look in opposite directions can separate east–west from vertical
/// motion: two east-looking tracks (two ascending right-looking passes at 33° and 45°, say)
/// both see east motion with the same sign as uplift, and their geometry matrix is nearly
/// singular (insar-methods.md §4.2, §4.3).
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum LookDirection {
    /// The radar looks eastwards (`u_E < 0`; ascending right-looking passes).
    EastLooking,
    /// The radar looks westwards (`u_E > 0`; descending right-looking passes).
    WestLooking,
}

impl LookDirection {
    /// Smallest |u_E| for a look direction to count (a geometry looking due north or south
    /// sees no east–west motion at all). Plinth choice: 0.05 ≈ sin 3°, far below any
    /// side-looking SAR (|u_E| ≈ 0.3–0.8, insar-methods.md §2.5).
    pub const MIN_ABS_EAST: f64 = 0.05;

    /// Look direction of a ground→satellite unit vector; `None` when |u_E| is below
    /// [`Self::MIN_ABS_EAST`] or the vector is not finite.
    ///
    /// # Examples
    /// ```
    /// use plinth::series::los::LookDirection;
    /// // insar-methods.md Appendix A LOS-1 (ascending, right-looking): u_E = −0.6156.
    /// assert_eq!(LookDirection::of([-0.6156, -0.1308, 0.7771]), Some(LookDirection::EastLooking));
    /// assert_eq!(LookDirection::of([0.5887, -0.1251, 0.7986]), Some(LookDirection::WestLooking));
    /// ```
    pub fn of(unit_enu: [f64; 3]) -> Option<LookDirection> {
        let e = unit_enu[0];
        if !e.is_finite() || e.abs() < Self::MIN_ABS_EAST {
            None
        } else if e < 0.0 {
            Some(LookDirection::EastLooking)
        } else {
            Some(LookDirection::WestLooking)
        }
    }

    /// Label as written in outputs (`east-looking` / `west-looking`).
    pub fn label(self) -> &'static str {
        match self {
            LookDirection::EastLooking => "east-looking",
            LookDirection::WestLooking => "west-looking",
        }
    }
}

/// Distinct look directions among unit vectors, east-looking first.
pub fn look_directions(units: impl IntoIterator<Item = [f64; 3]>) -> Vec<LookDirection> {
    let mut v: Vec<LookDirection> = units.into_iter().filter_map(LookDirection::of).collect();
    v.sort_unstable();
    v.dedup();
    v
}

/// Why a LOS geometry was refused.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum LosError {
    /// An angle or a vector component is NaN or infinite.
    #[error("LOS input is not finite: {what}")]
    NotFinite {
        /// Which input was not finite.
        what: &'static str,
    },
    /// Incidence outside the open interval (0°, 90°).
    #[error("incidence {incidence_deg}° is outside (0°, 90°): not a valid side-looking geometry")]
    IncidenceOutOfRange {
        /// The offending incidence angle, degrees.
        incidence_deg: f64,
    },
    /// Vector length too far from 1 to be a unit vector.
    #[error("LOS vector length {norm:.4} differs from 1 by more than 0.05: not a unit vector")]
    NotUnitVector {
        /// Euclidean length of the given vector.
        norm: f64,
    },
    /// The east component contradicts the declared pass and look side.
    #[error(
        "LOS east component {east:.4} contradicts the declared {pass} pass ({side} looking expects \
         u_E {expected}): wrong pass label, undeclared left-looking sensor, or a sign error"
    )]
    PassMismatch {
        /// Declared pass label.
        pass: &'static str,
        /// Declared look side label.
        side: &'static str,
        /// East component after orientation to ground→satellite.
        east: f64,
        /// Expected sign, as text ("< 0" or "> 0").
        expected: &'static str,
    },
}

/// A validated LOS geometry in the internal convention.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LosGeometry {
    /// Ground→satellite unit vector (east, north, up), dimensionless, `u_U > 0`.
    pub unit_enu: [f64; 3],
    /// Incidence angle θ = acos(u_U), degrees.
    pub incidence_deg: f64,
    /// Declared orbit direction (validated against `u_E`).
    pub pass: Pass,
    /// Declared look side.
    pub look_side: LookSide,
    /// Non-fatal findings (incidence outside [15°, 60°], vector renormalised or negated).
    pub warnings: Vec<String>,
}

/// Normalise a heading to the interval (−180°, 180°].
///
/// # Units
/// Degrees clockwise from true north, in and out.
///
/// # References
/// insar-methods.md §1.3 (accept (−180, 180] or [0, 360) and normalise) \[Rec\].
///
/// # Examples
/// ```
/// use plinth::series::los::normalise_heading_deg;
/// assert!((normalise_heading_deg(348.0) - (-12.0)).abs() < 1e-12);
/// assert!((normalise_heading_deg(-180.0) - 180.0).abs() < 1e-12);
/// ```
/// A non-finite heading is returned unchanged (NaN stays NaN).
pub fn normalise_heading_deg(heading_deg: f64) -> f64 {
    if !heading_deg.is_finite() {
        return heading_deg;
    }
    let mut h = heading_deg.rem_euclid(360.0); // [0, 360)
    if h > 180.0 {
        h -= 360.0;
    }
    if h <= -180.0 {
        h += 360.0;
    }
    h
}

/// Ground→satellite LOS unit vector from incidence and heading, without pass validation.
///
/// Right-looking: `u = (−sinθ·cosα, sinθ·sinα, cosθ)`; left-looking: `u = (sinθ·cosα,
/// −sinθ·sinα, cosθ)`.
///
/// # Units
/// θ, α in degrees (α clockwise from true north, any range); result dimensionless, ENU,
/// positive towards the satellite.
///
/// # References
/// insar-methods.md §2.1 (derivation, \[C\]); same convention as the MintPy library
/// (Yunjun, Fattahi & Amelung 2019) \[S\].
///
/// # Examples
/// ```
/// use plinth::series::los::{unit_vector_from_angles, LookSide};
/// // insar-methods.md Appendix A LOS-1: θ = 39°, α = −12° → (−0.6156, −0.1308, 0.7771)
/// let u = unit_vector_from_angles(39.0, -12.0, LookSide::Right).unwrap();
/// assert!((u[0] + 0.6156).abs() < 1e-4 && (u[1] + 0.1308).abs() < 1e-4);
/// ```
///
/// Errors: non-finite angles, or incidence outside (0°, 90°).
pub fn unit_vector_from_angles(
    incidence_deg: f64,
    heading_deg: f64,
    side: LookSide,
) -> Result<[f64; 3], LosError> {
    if !incidence_deg.is_finite() {
        return Err(LosError::NotFinite { what: "incidence" });
    }
    if !heading_deg.is_finite() {
        return Err(LosError::NotFinite { what: "heading" });
    }
    if incidence_deg <= 0.0 || incidence_deg >= 90.0 {
        return Err(LosError::IncidenceOutOfRange { incidence_deg });
    }
    let theta = incidence_deg.to_radians();
    let alpha = normalise_heading_deg(heading_deg).to_radians();
    let horizontal = theta.sin();
    let (east, north) = match side {
        LookSide::Right => (-horizontal * alpha.cos(), horizontal * alpha.sin()),
        LookSide::Left => (horizontal * alpha.cos(), -horizontal * alpha.sin()),
    };
    Ok([east, north, theta.cos()])
}

/// Validated LOS geometry from incidence and heading, checking the pass label.
///
/// # Units
/// Degrees in; unit vector out (ENU, ground→satellite).
///
/// # References
/// insar-methods.md §2.1 (formula) and §2.4 (validation rules 3 and 4) \[Rec\].
///
/// Rule 3 of §2.4 is stated for right-looking sensors (ascending ⇒ `u_E < 0`, descending ⇒
/// `u_E > 0`). For a declared left-looking sensor the expected signs are reversed (an ascending
/// left-looking sensor looks west); this is our extension of the rule, derived from §2.1.
/// An east component of exactly 0 (heading due east or west) fails both checks.
///
/// # Examples
/// ```
/// use plinth::series::los::{los_from_angles, LookSide, Pass};
/// // insar-methods.md Appendix A LOS-2: θ = 37°, α = 192° → (0.5887, −0.1251, 0.7986)
/// let g = los_from_angles(37.0, 192.0, LookSide::Right, Pass::Descending).unwrap();
/// assert!((g.unit_enu[0] - 0.5887).abs() < 1e-4);
/// assert!(los_from_angles(37.0, 192.0, LookSide::Right, Pass::Ascending).is_err());
/// ```
pub fn los_from_angles(
    incidence_deg: f64,
    heading_deg: f64,
    side: LookSide,
    pass: Pass,
) -> Result<LosGeometry, LosError> {
    let unit_enu = unit_vector_from_angles(incidence_deg, heading_deg, side)?;
    let mut warnings = Vec::new();
    incidence_warning(incidence_deg, &mut warnings);
    check_pass(unit_enu[0], pass, side)?;
    Ok(LosGeometry {
        unit_enu,
        incidence_deg,
        pass,
        look_side: side,
        warnings,
    })
}

/// Validated LOS geometry from a given ENU vector (either orientation).
///
/// Steps (insar-methods.md §2.4): length within 0.01 of 1 accepted; within 0.05 renormalised with
/// a warning; otherwise rejected. If `u_U < 0` the vector is satellite→ground and is negated
/// (warning). Then the pass check of [`los_from_angles`] and the incidence rules on θ = acos(u_U).
///
/// # Units
/// Dimensionless ENU components.
///
/// # References
/// insar-methods.md §2.3 (last rows) and §2.4 \[Rec\]; check value LOS-4 (Appendix A).
///
/// # Examples
/// ```
/// use plinth::series::los::{los_from_enu, LookSide, Pass};
/// // LOS-4: satellite→ground (−0.634, 0.170, −0.755) labelled descending → negated, accepted
/// let g = los_from_enu([-0.634, 0.170, -0.755], LookSide::Right, Pass::Descending).unwrap();
/// assert!(g.unit_enu[0] > 0.0 && g.unit_enu[2] > 0.0);
/// ```
///
/// A vector with `u_U = 0` (horizontal line of sight) is refused as incidence 90°.
pub fn los_from_enu(
    vector_enu: [f64; 3],
    side: LookSide,
    pass: Pass,
) -> Result<LosGeometry, LosError> {
    if vector_enu.iter().any(|c| !c.is_finite()) {
        return Err(LosError::NotFinite {
            what: "LOS vector component",
        });
    }
    let norm = vector_enu.iter().map(|c| c * c).sum::<f64>().sqrt();
    let mut warnings = Vec::new();
    if (norm - 1.0).abs() > 0.05 {
        return Err(LosError::NotUnitVector { norm });
    }
    let mut u = vector_enu.map(|c| c / norm);
    if (norm - 1.0).abs() > 0.01 {
        warnings.push(format!(
            "LOS vector length {norm:.4} differs from 1 by more than 0.01; renormalised"
        ));
    }
    if u[2] < 0.0 {
        u = u.map(|c| -c);
        warnings.push(
            "LOS vector pointed from satellite to ground (u_U < 0); negated to ground→satellite"
                .to_string(),
        );
    }
    let incidence_deg = u[2].clamp(-1.0, 1.0).acos().to_degrees();
    if incidence_deg <= 0.0 || incidence_deg >= 90.0 {
        return Err(LosError::IncidenceOutOfRange { incidence_deg });
    }
    incidence_warning(incidence_deg, &mut warnings);
    check_pass(u[0], pass, side)?;
    Ok(LosGeometry {
        unit_enu: u,
        incidence_deg,
        pass,
        look_side: side,
        warnings,
    })
}

/// §2.4 rule 4: warn outside [15°, 60°].
fn incidence_warning(incidence_deg: f64, warnings: &mut Vec<String>) {
    if !(15.0..=60.0).contains(&incidence_deg) {
        warnings.push(format!(
            "incidence {incidence_deg:.2}° is outside the usual range [15°, 60°]"
        ));
    }
}

/// §2.4 rule 3, with the left-looking reversal documented at [`los_from_angles`].
fn check_pass(east: f64, pass: Pass, side: LookSide) -> Result<(), LosError> {
    let expect_negative = matches!(
        (pass, side),
        (Pass::Ascending, LookSide::Right) | (Pass::Descending, LookSide::Left)
    );
    let ok = if expect_negative {
        east < 0.0
    } else {
        east > 0.0
    };
    if ok {
        Ok(())
    } else {
        Err(LosError::PassMismatch {
            pass: pass.label(),
            side: match side {
                LookSide::Right => "right",
                LookSide::Left => "left",
            },
            east,
            expected: if expect_negative { "< 0" } else { "> 0" },
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close3(a: [f64; 3], b: [f64; 3], tol: f64) -> bool {
        a.iter().zip(b.iter()).all(|(x, y)| (x - y).abs() <= tol)
    }

    /// insar-methods.md §2.5 table \[C\], 4-significant-figure values, tolerance ±1 in the 4th digit.
    #[test]
    #[allow(clippy::approx_constant)] // 0.7071 is the table's cos 45°, kept as printed
    fn table_2_5_vectors() {
        let headings = [-10.0, -12.0, -15.0, 190.0, 192.0, 195.0];
        let rows: [(f64, [[f64; 3]; 3]); 5] = [
            (
                30.0,
                [
                    [-0.4924, -0.0868, 0.8660],
                    [-0.4891, -0.1040, 0.8660],
                    [-0.4830, -0.1294, 0.8660],
                ],
            ),
            (
                35.0,
                [
                    [-0.5649, -0.0996, 0.8192],
                    [-0.5610, -0.1193, 0.8192],
                    [-0.5540, -0.1485, 0.8192],
                ],
            ),
            (
                39.0,
                [
                    [-0.6198, -0.1093, 0.7771],
                    [-0.6156, -0.1308, 0.7771],
                    [-0.6079, -0.1629, 0.7771],
                ],
            ),
            (
                42.0,
                [
                    [-0.6590, -0.1162, 0.7431],
                    [-0.6545, -0.1391, 0.7431],
                    [-0.6463, -0.1732, 0.7431],
                ],
            ),
            (
                45.0,
                [
                    [-0.6964, -0.1228, 0.7071],
                    [-0.6917, -0.1470, 0.7071],
                    [-0.6830, -0.1830, 0.7071],
                ],
            ),
        ];
        for (theta, asc) in rows {
            for (j, heading) in headings.iter().enumerate() {
                let pass = if j < 3 {
                    Pass::Ascending
                } else {
                    Pass::Descending
                };
                let mut expected = asc[j % 3];
                if j >= 3 {
                    expected[0] = -expected[0]; // table: descending = ascending with u_E negated
                }
                let g = los_from_angles(theta, *heading, LookSide::Right, pass).unwrap();
                assert!(
                    close3(g.unit_enu, expected, 1.0e-4),
                    "θ={theta} α={heading}: {:?} vs {:?}",
                    g.unit_enu,
                    expected
                );
            }
        }
    }

    /// Appendix A LOS-1..3 and the six-digit vectors of §2.5 \[C\].
    #[test]
    fn appendix_a_los_1_to_3() {
        let u1 = unit_vector_from_angles(39.0, -12.0, LookSide::Right).unwrap();
        assert!(close3(u1, [-0.6156, -0.1308, 0.7771], 1e-4));
        assert!(close3(u1, [-0.615568, -0.130843, 0.777146], 1e-6));
        let u2 = unit_vector_from_angles(37.0, 192.0, LookSide::Right).unwrap();
        assert!(close3(u2, [0.5887, -0.1251, 0.7986], 1e-4));
        assert!(close3(u2, [0.588664, -0.125124, 0.798636], 1e-6));
        let u3 = unit_vector_from_angles(41.0, 195.0, LookSide::Right).unwrap();
        assert!(close3(u3, [0.6337, -0.1698, 0.7547], 1e-4));
        // heading given in [0, 360) gives the same vector: 348° == −12°
        let u1b = unit_vector_from_angles(39.0, 348.0, LookSide::Right).unwrap();
        assert!(close3(u1, u1b, 1e-12));
    }

    /// Appendix A LOS-4 \[C\]: negate a satellite→ground vector; reject an east-looking "descending".
    #[test]
    fn appendix_a_los_4() {
        let g = los_from_enu([-0.634, 0.170, -0.755], LookSide::Right, Pass::Descending).unwrap();
        let norm = (0.634f64.powi(2) + 0.170f64.powi(2) + 0.755f64.powi(2)).sqrt();
        assert!(close3(
            g.unit_enu,
            [0.634 / norm, -0.170 / norm, 0.755 / norm],
            1e-12
        ));
        assert!(close3(g.unit_enu, [0.634, -0.170, 0.755], 1e-3));
        assert!(g.warnings.iter().any(|w| w.contains("negated")));
        let err = los_from_enu([-0.634, 0.170, 0.755], LookSide::Right, Pass::Descending);
        assert!(matches!(err, Err(LosError::PassMismatch { .. })));
    }

    /// §2.1 limiting cases \[C\].
    #[test]
    fn limiting_cases_and_left_looking() {
        let north = unit_vector_from_angles(30.0, 0.0, LookSide::Right).unwrap();
        assert!(close3(north, [-0.5, 0.0, 30f64.to_radians().cos()], 1e-12));
        let east_flight = unit_vector_from_angles(30.0, 90.0, LookSide::Right).unwrap();
        assert!(close3(
            east_flight,
            [0.0, 0.5, 30f64.to_radians().cos()],
            1e-12
        ));
        // left-looking ascending looks west: u_E > 0, accepted only as left-looking
        let left = los_from_angles(39.0, -12.0, LookSide::Left, Pass::Ascending).unwrap();
        assert!(close3(left.unit_enu, [0.615568, 0.130843, 0.777146], 1e-6));
        assert!(los_from_enu(left.unit_enu, LookSide::Right, Pass::Ascending).is_err());
    }

    #[test]
    fn validation_rules() {
        assert!(matches!(
            unit_vector_from_angles(0.0, 10.0, LookSide::Right),
            Err(LosError::IncidenceOutOfRange { .. })
        ));
        assert!(matches!(
            unit_vector_from_angles(90.0, 10.0, LookSide::Right),
            Err(LosError::IncidenceOutOfRange { .. })
        ));
        assert!(unit_vector_from_angles(f64::NAN, 10.0, LookSide::Right).is_err());
        let shallow = los_from_angles(10.0, -12.0, LookSide::Right, Pass::Ascending).unwrap();
        assert_eq!(shallow.warnings.len(), 1);
        let fine = los_from_angles(39.0, -12.0, LookSide::Right, Pass::Ascending).unwrap();
        assert!(fine.warnings.is_empty());
        // length 1.03 → renormalised with warning; 1.2 → rejected
        let g = los_from_enu(
            [-0.6156 * 1.03, -0.1308 * 1.03, 0.7771 * 1.03],
            LookSide::Right,
            Pass::Ascending,
        )
        .unwrap();
        assert!(g.warnings.iter().any(|w| w.contains("renormalised")));
        assert!(matches!(
            los_from_enu(
                [-0.6156 * 1.2, -0.1308 * 1.2, 0.7771 * 1.2],
                LookSide::Right,
                Pass::Ascending
            ),
            Err(LosError::NotUnitVector { .. })
        ));
        assert!((normalise_heading_deg(540.0) - 180.0).abs() < 1e-12);
        assert!((normalise_heading_deg(-190.0) - 170.0).abs() < 1e-12);
    }
}
