//! Single-geometry vertical projection `d_v = d_LOS / cosθ` and the error it carries when the
//! ground also moves horizontally.
//!
//! Owns only the projection of one LOS value (or velocity) onto the vertical under the explicit
//! assumption of no horizontal motion. It does not combine geometries (`decompose`) and does not
//! decide whether the assumption is acceptable; it states it in [`VerticalProjection::assumption`].

use serde::Serialize;

/// Why a projection could not be made.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ProjectError {
    /// LOS value, its σ or the unit vector is not finite.
    #[error("vertical projection input is not finite: {what}")]
    NotFinite {
        /// Which input.
        what: &'static str,
    },
    /// `u_U` is not positive (vector not oriented ground→satellite or horizontal).
    #[error("LOS up component {up} is not positive; projection undefined")]
    NonPositiveUp {
        /// The offending up component.
        up: f64,
    },
}

/// Vertical value from one geometry, with the stated assumption and its error coefficients.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct VerticalProjection {
    /// `d_v = d_LOS / u_U` (mm, or mm/yr when a velocity is projected), positive up.
    pub vertical_mm: f64,
    /// `σ_v = σ_LOS / u_U` (same unit), when σ_LOS was given.
    pub sigma_mm: Option<f64>,
    /// Error of `d_v` per mm of true eastward motion: `u_E / u_U` (= −tanθ·cosα right-looking).
    pub error_mm_per_mm_east: f64,
    /// Error of `d_v` per mm of true northward motion: `u_N / u_U` (= tanθ·sinα right-looking).
    pub error_mm_per_mm_north: f64,
    /// Human-readable statement of the assumption and the east error coefficient.
    pub assumption: String,
}

/// Project one LOS value onto the vertical assuming no horizontal motion.
///
/// `d_v = d_LOS / cosθ`, with `cosθ = u_U`; error `e_v = d_v − d_U = (u_E·d_E + u_N·d_N)/u_U`;
/// `σ_v = σ_LOS / u_U`.
///
/// # Units
/// `los_mm` in mm (or mm/yr; the result has the same unit), positive towards the satellite;
/// result positive up. `unit_enu` ground→satellite.
///
/// # References
/// insar-methods.md §3.1 \[C\]; Fuhrmann & Garthwaite (2019) on the size of this error \[S: abstract\].
///
/// # Examples
/// ```
/// use plinth::series::project::vertical_from_los;
/// // insar-methods.md Appendix A VP-1: truth (3, 0, −10) mm, LOS-1 geometry → d_LOS = −9.618, d_v = −12.38
/// let u = [-0.615568, -0.130843, 0.777146];
/// let p = vertical_from_los(-9.618164, None, u).unwrap();
/// assert!((p.vertical_mm + 12.38).abs() < 0.01);
/// assert!((p.error_mm_per_mm_east + 0.7921).abs() < 1e-4);
/// ```
///
/// Errors: non-finite input or `u_U ≤ 0`. A zero LOS value projects to zero (that is a
/// measurement, not missing data).
pub fn vertical_from_los(
    los_mm: f64,
    sigma_los_mm: Option<f64>,
    unit_enu: [f64; 3],
) -> Result<VerticalProjection, ProjectError> {
    if !los_mm.is_finite() {
        return Err(ProjectError::NotFinite { what: "LOS value" });
    }
    if unit_enu.iter().any(|c| !c.is_finite()) {
        return Err(ProjectError::NotFinite {
            what: "unit vector",
        });
    }
    if let Some(s) = sigma_los_mm {
        if !s.is_finite() || s < 0.0 {
            return Err(ProjectError::NotFinite {
                what: "LOS standard deviation",
            });
        }
    }
    let up = unit_enu[2];
    if up <= 0.0 {
        return Err(ProjectError::NonPositiveUp { up });
    }
    let east_coeff = unit_enu[0] / up;
    let north_coeff = unit_enu[1] / up;
    Ok(VerticalProjection {
        vertical_mm: los_mm / up,
        sigma_mm: sigma_los_mm.map(|s| s / up),
        error_mm_per_mm_east: east_coeff,
        error_mm_per_mm_north: north_coeff,
        assumption: assumption_text(unit_enu),
    })
}

/// Assumption string for a vertical projection with this geometry, e.g. "vertical assuming no
/// horizontal motion (one geometry); error −0.79 mm per mm of eastward motion, −0.17 mm per mm of
/// northward motion". Returns a generic sentence when `u_U ≤ 0` or non-finite.
pub fn assumption_text(unit_enu: [f64; 3]) -> String {
    let up = unit_enu[2];
    if !(up > 0.0) || unit_enu.iter().any(|c| !c.is_finite()) {
        return "vertical assuming no horizontal motion (one geometry)".to_string();
    }
    format!(
        "vertical assuming no horizontal motion (one geometry); error {:+.2} mm per mm of \
         eastward motion, {:+.2} mm per mm of northward motion",
        unit_enu[0] / up,
        unit_enu[1] / up
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::series::los::{LookSide, unit_vector_from_angles};

    fn dot(a: [f64; 3], b: [f64; 3]) -> f64 {
        a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
    }

    /// Appendix A VP-1 and the descending half of the §3.1 worked example \[C\].
    #[test]
    fn vp1_worked_example() {
        let ua = unit_vector_from_angles(39.0, -12.0, LookSide::Right).unwrap();
        let ud = unit_vector_from_angles(37.0, 192.0, LookSide::Right).unwrap();
        let truth = [3.0, 0.0, -10.0];
        let los_a = dot(ua, truth);
        assert!((los_a + 9.618).abs() < 1e-3);
        let pa = vertical_from_los(los_a, Some(1.0), ua).unwrap();
        assert!((pa.vertical_mm + 12.38).abs() < 0.01);
        assert!((pa.sigma_mm.unwrap() - 1.0 / 0.777146).abs() < 1e-5);
        let pd = vertical_from_los(dot(ud, truth), None, ud).unwrap();
        assert!((pd.vertical_mm + 7.789).abs() < 1e-3);
        // error term reproduces the difference to the truth
        let err = pa.vertical_mm - truth[2];
        assert!((err - 3.0 * pa.error_mm_per_mm_east).abs() < 1e-9);
    }

    /// §3.1 error coefficients \[C\] and pure-east limiting case (5 mm east → −3.960 / +3.685).
    #[test]
    fn error_coefficients() {
        for (theta, east, north) in [
            (30.0, -0.5647, -0.1200),
            (39.0, -0.7921, -0.1684),
            (45.0, -0.9781, -0.2079),
        ] {
            let ua = unit_vector_from_angles(theta, -12.0, LookSide::Right).unwrap();
            let p = vertical_from_los(0.0, None, ua).unwrap();
            assert!((p.error_mm_per_mm_east - east).abs() < 1e-4);
            assert!((p.error_mm_per_mm_north - north).abs() < 1e-4);
            let ud = unit_vector_from_angles(theta, 192.0, LookSide::Right).unwrap();
            let q = vertical_from_los(0.0, None, ud).unwrap();
            assert!((q.error_mm_per_mm_east + east).abs() < 1e-4);
            assert!((q.error_mm_per_mm_north - north).abs() < 1e-4);
        }
        let ua = unit_vector_from_angles(39.0, -12.0, LookSide::Right).unwrap();
        let ud = unit_vector_from_angles(37.0, 192.0, LookSide::Right).unwrap();
        let e5 = [5.0, 0.0, 0.0];
        assert!(
            (vertical_from_los(dot(ua, e5), None, ua)
                .unwrap()
                .vertical_mm
                + 3.960)
                .abs()
                < 1e-3
        );
        assert!(
            (vertical_from_los(dot(ud, e5), None, ud)
                .unwrap()
                .vertical_mm
                - 3.685)
                .abs()
                < 1e-3
        );
        assert!(assumption_text(ua).contains("-0.79 mm per mm of eastward"));
    }

    #[test]
    fn bad_input() {
        assert!(vertical_from_los(f64::NAN, None, [0.0, 0.0, 1.0]).is_err());
        assert!(matches!(
            vertical_from_los(1.0, None, [0.6, 0.0, -0.8]),
            Err(ProjectError::NonPositiveUp { .. })
        ));
    }
}
