//! Average horizontal strain along a footprint axis from the east–west motion of its two ends.
//!
//! Owns: the end-third selection, the per-end ascending/descending decomposition into east and
//! up (north neglected), the strain relation ε_h = (u_E,2 − u_E,1)·sin(az)/L·1e-3 and its
//! refusal rules. It does not fetch LOS geometry (points carry their unit vectors) and it does
//! not combine ε_h with bending strains (damage stage).
//!
//! # Choices
//! - **Ends** are the points in the first and last third of the footprint extent along the axis.
//! - **Per end and per geometry** the LOS values and unit vectors are averaged; the means of the
//!   K ≥ 2 geometries are decomposed by weighted least squares into (d_E, d_U), north
//!   neglected (insar-methods.md §4.2, §4.3). The σ of a point's LOS is taken as
//!   σ_settlement·|u_U| (the inverse of the vertical projection that produced σ_settlement),
//!   floored at 0.01 mm; the σ of a mean is sqrt(Σσ²)/n.
//! - **Gauge length**: the strain is the change of distance between the two end groups divided
//!   by that distance, so the gauge length is the distance between the mean axis coordinates of
//!   the two end groups, not the footprint length L of §7.8. Deviation from §7.8 on purpose:
//!   with end thirds the groups sit roughly 2L/3 apart, and dividing by L would understate the
//!   strain by about a third. The relation itself ([`horizontal_strain`]) takes whatever length
//!   it is given, and reproduces the §7.8 check with L.
//! - **Refusal**: an axis more than `max_axis_angle_deg` (default 20°) from east–west, an end
//!   without at least one east-looking and one west-looking geometry, or an end whose geometry
//!   matrix [u_E, u_U] has a condition number above the limit (default 3, as the series
//!   decomposition). A refusal means *unknown*, never zero strain (damage-relations.md §9.4).
//! - **Why 20°**: the radar does not see north–south motion. Along an axis at angle φ from
//!   east–west the axial strain is ε_ss = ε_EE·cos²φ + (∂u_E/∂N + ∂u_N/∂E)·sin φ·cos φ +
//!   ε_NN·sin²φ, and the east displacements measure only the terms in u_E. The unseen normal
//!   strain ε_NN weighs sin²φ of itself: 12 % at 20°, 25 % at 30°, 50 % at 45°; the unseen
//!   shear gradient ∂u_N/∂E weighs sin φ·cos φ (0.32 at 20°, 0.5 at 45°). Beyond 20° the value
//!   would be reported as a measured strain while a north–south strain of the same size (a
//!   tunnel or excavation running east–west beside the building) goes unseen; Plinth then gives
//!   no ε_h and says the category may be understated. 20° is our choice (derivation above,
//!   insar-methods.md §4.3 for why north is not observable); `[assessment] strain_axis_max_angle_deg`
//!   changes it.
//! - A constant reference offset of one dataset biases d_E at both ends almost equally and
//!   cancels in the difference; north motion leaks into d_U mostly, not d_E (§4.3).

use serde::Serialize;

use super::MetricPoint;
use super::axes::Axis;
use super::lsq;

/// Floor of a point's LOS σ in the weights (mm).
pub const MIN_LOS_SIGMA_MM: f64 = 0.01;

/// Average horizontal strain from the east displacements of the two ends of an axis.
///
/// ε_h = (u_E,end − u_E,start)·sin(az)/L·1e-3, + extension; the displacement along the axis is
/// u_E·sin(az) when north motion is neglected.
///
/// # Units
/// u_E in mm (+ east), azimuth in degrees clockwise from north (the positive axis direction),
/// length in m; ε_h dimensionless.
///
/// # References
/// insar-methods.md §7.8 \[C, derived\]; damage-relations.md §1.1 (average horizontal strain,
/// Burland & Wroth 1974 \[M\]). Check: u_E = 1.0 and 2.5 mm, az 60°, L 30 m → 4.330e-5.
///
/// # Examples
/// ```
/// use plinth::metrics::strain::horizontal_strain;
/// let e = horizontal_strain(1.0, 2.5, 60.0, 30.0).unwrap();
/// assert!((e - 4.330e-5).abs() < 1e-8);
/// ```
///
/// Degenerate input: non-positive length or non-finite values → `None`.
pub fn horizontal_strain(
    u_east_start_mm: f64,
    u_east_end_mm: f64,
    azimuth_deg: f64,
    length_m: f64,
) -> Option<f64> {
    if !(length_m > 0.0)
        || ![u_east_start_mm, u_east_end_mm, azimuth_deg]
            .iter()
            .all(|v| v.is_finite())
    {
        return None;
    }
    Some((u_east_end_mm - u_east_start_mm) * azimuth_deg.to_radians().sin() / length_m * 1e-3)
}

/// East/up decomposition of one end of an axis.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct EndDecomposition {
    /// d_E (mm, + east).
    pub east_mm: f64,
    /// d_U (mm, + up).
    pub up_mm: f64,
    /// Formal 1-σ of d_E from the points' σ (mm).
    pub east_se_mm: f64,
    /// Formal 1-σ of d_U (mm).
    pub up_se_mm: f64,
    /// Geometries used, ascending.
    pub geometries: Vec<usize>,
    /// Points used.
    pub point_count: usize,
    /// Mean axis coordinate of the points (m).
    pub mean_s_m: f64,
    /// Condition number of the [u_E, u_U] matrix of the geometries.
    pub condition_number: f64,
}

/// Horizontal strain along one axis.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AxisStrain {
    /// ε_h (+ extension, dimensionless).
    pub horizontal_strain: f64,
    /// Formal 1-σ of ε_h from the points' σ.
    pub horizontal_strain_se: f64,
    /// Distance between the two end groups (m).
    pub gauge_length_m: f64,
    /// Start end (low s).
    pub start: EndDecomposition,
    /// Far end (high s).
    pub end: EndDecomposition,
}

/// Why no strain can be given.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum StrainError {
    /// The axis is too far from east–west: the unseen north–south motion would weigh too much.
    #[error(
        "not observable along this axis: it lies {angle_deg:.0}° from east–west (limit {max_deg:.0}°) and the radar does not see north–south motion"
    )]
    AxisOffEastWest {
        /// Axis azimuth (degrees clockwise from north).
        azimuth_deg: f64,
        /// Angle between the axis and east–west (degrees, 0–90).
        angle_deg: f64,
        /// The limit applied (degrees).
        max_deg: f64,
    },
    /// An end lacks an east-looking or a west-looking geometry.
    #[error(
        "{end} third of the axis has points looking {looks}; one east-looking and one west-looking geometry are needed at both ends to separate east–west from vertical motion"
    )]
    NoOppositeLooks {
        /// "start" or "end".
        end: &'static str,
        /// The look directions present, in words.
        looks: String,
    },
    /// The geometries are too alike to separate east from up.
    #[error(
        "{end} third: viewing geometries too similar to separate east from up (condition {condition:.1} > {max:.1})"
    )]
    IllConditioned {
        /// "start" or "end".
        end: &'static str,
        /// Condition number of the [u_E, u_U] matrix.
        condition: f64,
        /// The limit applied.
        max: f64,
    },
    /// The least-squares solve failed.
    #[error("decomposition failed: {0}")]
    Solve(String),
}

/// Horizontal strain along an axis from the points of both viewing geometries at its two ends.
///
/// See the module docs for the choices. `max_axis_angle_deg` is the largest angle between the
/// axis and east–west (default 20°, module docs), `max_condition` the largest accepted
/// condition number of the geometry matrix (default 3; typical ascending/descending pairs give
/// 1.0–1.8, §4.2).
///
/// # Units
/// Points' LOS in mm (+ towards the satellite), unit vectors ground→satellite (E, N, U);
/// ε_h dimensionless, + extension.
///
/// # References
/// insar-methods.md §4.2 (WLS decomposition), §4.3 (north neglected), §7.8 \[C, Rec\].
pub fn axis_strain(
    points: &[MetricPoint],
    axis: &Axis,
    max_axis_angle_deg: f64,
    max_condition: f64,
) -> Result<AxisStrain, StrainError> {
    let (sin_az, _) = axis.direction();
    let angle_deg = angle_from_east_west_deg(axis.azimuth_deg);
    if !(angle_deg <= max_axis_angle_deg + 1e-9) {
        return Err(StrainError::AxisOffEastWest {
            azimuth_deg: axis.azimuth_deg,
            angle_deg,
            max_deg: max_axis_angle_deg,
        });
    }
    let third = axis.length_m / 3.0;
    let s_of = |p: &MetricPoint| axis.coordinate_m(p.x_m, p.y_m);
    let start_pts: Vec<&MetricPoint> = points
        .iter()
        .filter(|p| s_of(p) < axis.s_min_m + third)
        .collect();
    let end_pts: Vec<&MetricPoint> = points
        .iter()
        .filter(|p| s_of(p) > axis.s_max_m - third)
        .collect();
    let start = decompose_end(&start_pts, &s_of, "start", max_condition)?;
    let end = decompose_end(&end_pts, &s_of, "end", max_condition)?;
    let gauge = end.mean_s_m - start.mean_s_m;
    let eps = horizontal_strain(start.east_mm, end.east_mm, axis.azimuth_deg, gauge)
        .ok_or_else(|| StrainError::Solve(format!("gauge length {gauge:.3} m")))?;
    let se = start.east_se_mm.hypot(end.east_se_mm) * sin_az.abs() / gauge * 1e-3;
    Ok(AxisStrain {
        horizontal_strain: eps,
        horizontal_strain_se: se,
        gauge_length_m: gauge,
        start,
        end,
    })
}

/// Angle between an axis of the given azimuth and the east–west line (degrees, 0–90).
///
/// # Examples
/// ```
/// use plinth::metrics::strain::angle_from_east_west_deg;
/// assert!((angle_from_east_west_deg(90.0) - 0.0).abs() < 1e-12);
/// assert!((angle_from_east_west_deg(45.0) - 45.0).abs() < 1e-12);
/// assert!((angle_from_east_west_deg(250.0) - 20.0).abs() < 1e-9);
/// ```
pub fn angle_from_east_west_deg(azimuth_deg: f64) -> f64 {
    let a = azimuth_deg.rem_euclid(180.0);
    (a - 90.0).abs()
}

/// WLS (d_E, d_U) from per-geometry means of one end group (north neglected).
pub fn decompose_end(
    pts: &[&MetricPoint],
    s_of: &dyn Fn(&MetricPoint) -> f64,
    end: &'static str,
    max_condition: f64,
) -> Result<EndDecomposition, StrainError> {
    let mut geoms: Vec<usize> = pts.iter().map(|p| p.geometry).collect();
    geoms.sort_unstable();
    geoms.dedup();
    let looks = crate::series::los::look_directions(pts.iter().map(|p| p.unit_enu));
    if looks.len() < 2 {
        let words: Vec<&str> = looks.iter().map(|l| l.label()).collect();
        return Err(StrainError::NoOppositeLooks {
            end,
            looks: if words.is_empty() {
                "in no usable direction".to_string()
            } else {
                format!("{} only", words.join(", "))
            },
        });
    }
    let mut rows = Vec::new();
    let mut rhs = Vec::new();
    let mut plain = Vec::new();
    for &g in &geoms {
        let grp: Vec<&&MetricPoint> = pts.iter().filter(|p| p.geometry == g).collect();
        let m = grp.len() as f64;
        let los = grp.iter().map(|p| p.los_mm).sum::<f64>() / m;
        let ue = grp.iter().map(|p| p.unit_enu[0]).sum::<f64>() / m;
        let uu = grp.iter().map(|p| p.unit_enu[2]).sum::<f64>() / m;
        let var: f64 = grp
            .iter()
            .map(|p| {
                let s = (p.sigma_mm * p.unit_enu[2].abs()).max(MIN_LOS_SIGMA_MM);
                s * s
            })
            .sum();
        let sigma = var.sqrt() / m;
        rows.push(vec![ue / sigma, uu / sigma]);
        rhs.push(los / sigma);
        plain.push((ue, uu));
    }
    let condition = condition_number(&plain);
    if !(condition <= max_condition) {
        return Err(StrainError::IllConditioned {
            end,
            condition,
            max: max_condition,
        });
    }
    let fit = lsq::solve(&rows, &rhs, 2).map_err(|e| StrainError::Solve(e.to_string()))?;
    let cov = &fit.unscaled_covariance;
    let mean_s = pts.iter().map(|p| s_of(p)).sum::<f64>() / pts.len() as f64;
    Ok(EndDecomposition {
        east_mm: fit.coefficients[0],
        up_mm: fit.coefficients[1],
        east_se_mm: cov[(0, 0)].max(0.0).sqrt(),
        up_se_mm: cov[(1, 1)].max(0.0).sqrt(),
        geometries: geoms,
        point_count: pts.len(),
        mean_s_m: mean_s,
        condition_number: condition,
    })
}

/// Condition number (ratio of singular values) of the K×2 matrix with rows (u_E, u_U).
fn condition_number(rows: &[(f64, f64)]) -> f64 {
    let (mut a, mut b, mut c) = (0.0, 0.0, 0.0);
    for (e, u) in rows {
        a += e * e;
        b += e * u;
        c += u * u;
    }
    let tr = a + c;
    let det = a * c - b * b;
    let disc = (0.25 * tr * tr - det).max(0.0).sqrt();
    let l_max = 0.5 * tr + disc;
    let l_min = 0.5 * tr - disc;
    if l_min > 0.0 {
        (l_max / l_min).sqrt()
    } else {
        f64::INFINITY
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use geo::{MultiPolygon, polygon};

    /// Right-looking LOS unit vector from incidence θ and heading α (insar-methods.md §2.1).
    fn los_unit(theta_deg: f64, heading_deg: f64) -> [f64; 3] {
        let (t, a) = (theta_deg.to_radians(), heading_deg.to_radians());
        [-t.sin() * a.cos(), t.sin() * a.sin(), t.cos()]
    }

    fn point(x: f64, y: f64, d_e: f64, d_u: f64, u: [f64; 3], geometry: usize) -> MetricPoint {
        let los = u[0] * d_e + u[2] * d_u;
        MetricPoint {
            x_m: x,
            y_m: y,
            settlement_mm: -d_u,
            sigma_mm: 1.0 / u[2], // σ_LOS = 1 mm
            geometry,
            los_mm: los,
            unit_enu: u,
        }
    }

    #[test]
    fn relation_check_value() {
        // insar-methods.md §7.8 [C]: 1.0 and 2.5 mm, az 60°, L 30 m → 4.330e-5 (±1e-8).
        assert!((horizontal_strain(1.0, 2.5, 60.0, 30.0).unwrap() - 4.330e-5).abs() < 1e-8);
        // Limiting case §7.8: east-west axis gives Δu_E/L; 1.5 mm over 30 m = 5e-5.
        assert!((horizontal_strain(1.0, 2.5, 90.0, 30.0).unwrap() - 5e-5).abs() < 1e-15);
        assert!(horizontal_strain(1.0, 2.5, 60.0, 0.0).is_none());
    }

    #[test]
    fn dec1_decomposition() {
        // insar-methods.md Appendix A DEC-1 [C]: truth (d_E, d_U) = (3, −10) with LOS-1
        // (θ 39°, α −12°) and LOS-2 (θ 37°, α 192°), σ = 1 → σ_E = 1.174, σ_U = 0.8974,
        // cond = 1.309 (4 significant figures; tolerance ±2 in the 4th digit because the note
        // used 6-digit vectors and neglected north).
        let (u1, u2) = (los_unit(39.0, -12.0), los_unit(37.0, 192.0));
        let a = point(0.0, 0.0, 3.0, -10.0, u1, 0);
        let b = point(0.0, 0.0, 3.0, -10.0, u2, 1);
        let d = decompose_end(&[&a, &b], &|_| 0.0, "start", 3.0).unwrap();
        assert!((d.east_mm - 3.0).abs() < 1e-9 && (d.up_mm + 10.0).abs() < 1e-9);
        assert!((d.east_se_mm - 1.174).abs() < 2e-3, "{d:?}");
        assert!((d.up_se_mm - 0.8974).abs() < 2e-4);
        assert!((d.condition_number - 1.309).abs() < 2e-3);
    }

    fn rect_30x12_az60() -> MultiPolygon<f64> {
        MultiPolygon(vec![polygon![
            (x: -9.9904, y: -12.6962), (x: 15.9904, y: 2.3038),
            (x: 9.9904, y: 12.6962), (x: -15.9904, y: -2.3038)
        ]])
    }

    #[test]
    fn extension_along_an_oblique_axis() {
        // Synthetic: pure east motion growing linearly along the 60° axis, d_E = k·s with
        // k = 0.05 mm/m, north 0, up −5 mm. The axial displacement is d_E·sin az, so
        // ε_h = k·sin(az)·1e-3 for any gauge length (hand-derived).
        let ax = crate::metrics::axes::principal_axes(&rect_30x12_az60())
            .unwrap()
            .principal;
        let (ue, un) = ax.direction();
        let k_mm_per_m = 0.05;
        let (u1, u2) = (los_unit(39.0, -12.0), los_unit(37.0, 192.0));
        let mut pts = Vec::new();
        for s in [-13.0, -9.0, 9.0, 13.0] {
            let (x, y) = (s * ue, s * un);
            let d_e = k_mm_per_m * s;
            pts.push(point(x, y, d_e, -5.0, u1, 0));
            // Same axis coordinate, 0.7 m across the axis.
            pts.push(point(x + 0.7 * un, y - 0.7 * ue, d_e, -5.0, u2, 1));
        }
        // The 60° axis lies 30° from east–west: accepted only with the limit raised to 30°.
        assert!(matches!(
            axis_strain(&pts, &ax, 20.0, 3.0),
            Err(StrainError::AxisOffEastWest { .. })
        ));
        let r = axis_strain(&pts, &ax, 30.0, 3.0).unwrap();
        let want = k_mm_per_m * ue * 1e-3;
        assert!((r.horizontal_strain - want).abs() < 1e-12, "{r:?}");
        assert!((r.gauge_length_m - 22.0).abs() < 1e-6);
        assert!(r.horizontal_strain_se > 0.0);
    }

    #[test]
    fn refusals() {
        let ax = Axis {
            azimuth_deg: 10.0,
            length_m: 30.0,
            s_min_m: -15.0,
            s_max_m: 15.0,
        };
        let e = axis_strain(&[], &ax, 20.0, 3.0).unwrap_err();
        assert!(e.to_string().contains("80° from east–west"), "{e}");
        // 45° from east–west: refused at the default 20° (module docs: the unseen ε_NN would
        // weigh sin² 45° = 50 %).
        let e = axis_strain(
            &[],
            &Axis {
                azimuth_deg: 45.0,
                ..ax
            },
            20.0,
            3.0,
        )
        .unwrap_err();
        assert!(matches!(e, StrainError::AxisOffEastWest { .. }), "{e}");
        let ax = Axis {
            azimuth_deg: 90.0,
            ..ax
        };
        let u1 = los_unit(39.0, -12.0);
        let pts: Vec<MetricPoint> = [-14.0, -12.0, 12.0, 14.0]
            .iter()
            .map(|&x| point(x, 0.0, 0.0, -3.0, u1, 0))
            .collect();
        assert!(matches!(
            axis_strain(&pts, &ax, 20.0, 3.0),
            Err(StrainError::NoOppositeLooks { .. })
        ));
    }

    #[test]
    fn two_same_look_tracks_are_refused() {
        // Two ascending right-looking tracks (θ 33° and 45°, α −12°): both east-looking. Their
        // geometry matrix has condition ≈ 9.6 (insar-methods.md §4.2 check: the old limit of 10
        // accepted it), yet they cannot separate east from up.
        let ax = Axis {
            azimuth_deg: 90.0,
            length_m: 30.0,
            s_min_m: -15.0,
            s_max_m: 15.0,
        };
        let (u1, u2) = (los_unit(33.0, -12.0), los_unit(45.0, -12.0));
        let mut pts = Vec::new();
        for x in [-14.0, -12.0, 12.0, 14.0] {
            pts.push(point(x, 0.0, 0.0, -3.0, u1, 0));
            pts.push(point(x, 0.5, 0.0, -3.0, u2, 1));
        }
        let e = axis_strain(&pts, &ax, 20.0, 10.0).unwrap_err();
        assert!(e.to_string().contains("east-looking only"), "{e}");
    }
}
