//! Rigid tilt of a structure from a least-squares plane through its points' settlements.
//!
//! Owns: the plane fit S = a_g + b·x + c·y (one intercept a_g per viewing geometry), the tilt
//! magnitude ω = |∇S| with its standard error, the direction of going down, and the refusal
//! rules (too few points, points nearly on a line). It does not select or reject points and
//! does not project LOS to vertical.
//!
//! # Choices
//! - **Settlement, not uplift, is fitted** (S = −w, + down). The gradient of S points where the
//!   structure goes down, so `tilt_azimuth_deg = atan2(b, c)`; this equals atan2(−b_w, −c_w) of
//!   insar-methods.md §7.6 written for w.
//! - **One intercept per viewing geometry.** Each dataset is relative to its own reference point
//!   (insar-methods.md §6.6); a common offset cancels in differential quantities only *within* one
//!   dataset. With a shared intercept, an offset between datasets would leak into the gradient
//!   whenever the two geometries sample different parts of the footprint. With a single
//!   geometry this is exactly the §7.6 fit.
//! - **Unweighted (OLS), covariance from the residuals**, s² = RSS/(n − p): as in §7.6. The
//!   points' own σ from their time-series fits describe only temporal noise and are often
//!   optimistic for the spatial scatter (façade vs. roof points, thermal response); the
//!   residual-based covariance captures the scatter actually present. The σ-based view is
//!   covered by the Monte Carlo in `uncertainty.rs`.
//! - **Refusal**: fewer than `min_points` points after discounting one point per extra
//!   geometry (each extra intercept uses one), or the smaller eigenvalue of the pooled
//!   within-geometry position covariance below `collinearity_min_m2` (§7.6, default (1 m)²).

use serde::Serialize;

use super::MetricPoint;
use super::lsq;

/// Result of the plane fit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PlaneFit {
    /// Number of points used.
    pub point_count: usize,
    /// Degrees of freedom n − p.
    pub dof: usize,
    /// Geometries with their own intercept, ascending.
    pub geometries: Vec<usize>,
    /// Intercept (settlement at the frame origin, mm) of each geometry, same order.
    pub intercepts_mm: Vec<f64>,
    /// ∂S/∂x (mm/m), + where settlement increases eastwards.
    pub gradient_east_mm_per_m: f64,
    /// ∂S/∂y (mm/m), + where settlement increases northwards.
    pub gradient_north_mm_per_m: f64,
    /// Standard error of ∂S/∂x (mm/m).
    pub gradient_east_se_mm_per_m: f64,
    /// Standard error of ∂S/∂y (mm/m).
    pub gradient_north_se_mm_per_m: f64,
    /// Covariance of the two gradient components ((mm/m)²).
    pub gradient_covariance_mm2_per_m2: f64,
    /// s = sqrt(RSS/(n − p)) (mm).
    pub residual_std_mm: f64,
    /// sqrt(RSS/n) (mm).
    pub residual_rms_mm: f64,
    /// Tilt magnitude ω = |∇S|·1e-3 (m/m, dimensionless).
    pub tilt: f64,
    /// Standard error of ω by the delta method (m/m).
    pub tilt_se: f64,
    /// Direction in which the structure goes down, degrees clockwise from north, [0, 360).
    pub tilt_azimuth_deg: f64,
    /// Standard error of that direction (degrees, delta method); large when ω ≈ SE.
    pub tilt_azimuth_se_deg: f64,
    /// Smaller eigenvalue of the pooled within-geometry position covariance (m²).
    pub min_position_eigenvalue_m2: f64,
    /// Residual S_i − fitted, in input order (mm).
    #[serde(skip)]
    pub residuals_mm: Vec<f64>,
}

impl PlaneFit {
    /// Slope of the fitted plane along an azimuth, ∇S·(sin az, cos az)·1e-3 (m/m).
    pub fn slope_along(&self, azimuth_deg: f64) -> f64 {
        let a = azimuth_deg.to_radians();
        (self.gradient_east_mm_per_m * a.sin() + self.gradient_north_mm_per_m * a.cos()) * 1e-3
    }
}

/// Why no tilt can be given.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum TiltError {
    #[error("tilt needs {needed} points with redundancy, {got} usable")]
    TooFewPoints { needed: usize, got: usize },
    #[error(
        "points nearly collinear: smaller position-covariance eigenvalue {eigenvalue_m2:.3} m² < {min_m2:.3} m²"
    )]
    Collinear { eigenvalue_m2: f64, min_m2: f64 },
    #[error("plane fit failed: {0}")]
    Solve(String),
}

/// Fit a plane S = a_g + b·x + c·y to the points' settlements and derive the rigid tilt.
///
/// ω = sqrt(b² + c²)·1e-3; downward azimuth atan2(b, c); SE(ω) = sqrt(J Cov_bc Jᵀ)·1e-3 with
/// J = (b, c)/|(b, c)|. When |(b, c)| = 0 exactly the Jacobian is undefined and SE(ω) is taken as
/// sqrt of the larger eigenvalue of Cov_bc (the spread of the gradient in its worst direction).
///
/// # Units
/// x east, y north in m; settlement mm, + down; ω dimensionless (m/m); azimuth degrees
/// clockwise from north, direction of going down.
///
/// # References
/// insar-methods.md §7.6 \[Rec\]; check BLD-1 (§7.11 \[C\]); damage-relations.md §1.2 step 2 and
/// §8.1-D (plane fit of s = 5 + 0.4x + 0.1y).
///
/// # Examples
/// ```
/// use plinth::metrics::{MetricPoint, tilt::fit_plane};
/// // damage-relations.md §8.1-D: s = 5 + 0.4x + 0.1y (mm, x/y in m) at five points.
/// let pts: Vec<MetricPoint> = [(0.0, 0.0), (20.0, 0.0), (20.0, 10.0), (0.0, 10.0), (10.0, 5.0)]
///     .iter().map(|&(x, y)| MetricPoint::vertical(x, y, 5.0 + 0.4 * x + 0.1 * y, 1.0, 0)).collect();
/// let fit = fit_plane(&pts, 4, 1.0).unwrap();
/// assert!((fit.tilt - 0.41231e-3).abs() < 1e-8);
/// ```
///
/// Degenerate input: see [`TiltError`]; non-finite values must be removed by the caller.
pub fn fit_plane(
    points: &[MetricPoint],
    min_points: usize,
    collinearity_min_m2: f64,
) -> Result<PlaneFit, TiltError> {
    let PlaneDesign {
        geometries,
        rows,
        needed,
        effective,
        eig,
    } = plane_design(points, min_points, collinearity_min_m2)?;
    let g = geometries.len();
    let n = points.len();
    let cols = g + 2;
    let y: Vec<f64> = points.iter().map(|p| p.settlement_mm).collect();
    let fit = lsq::solve(&rows, &y, cols).map_err(|e| TiltError::Solve(e.to_string()))?;
    let s2 = fit.residual_variance().ok_or(TiltError::TooFewPoints {
        needed,
        got: effective,
    })?;
    let b = fit.coefficients[g];
    let c = fit.coefficients[g + 1];
    let cov = &fit.unscaled_covariance;
    let vbb = s2 * cov[(g, g)];
    let vcc = s2 * cov[(g + 1, g + 1)];
    let vbc = s2 * cov[(g, g + 1)];
    let mag = b.hypot(c);
    let (tilt_se_mm, az_se_deg) = if mag > 0.0 {
        let (jb, jc) = (b / mag, c / mag);
        let var = jb * jb * vbb + 2.0 * jb * jc * vbc + jc * jc * vcc;
        // azimuth = atan2(b, c): ∂/∂b = c/|g|², ∂/∂c = −b/|g|².
        let (ab, ac) = (c / (mag * mag), -b / (mag * mag));
        let var_az = ab * ab * vbb + 2.0 * ab * ac * vbc + ac * ac * vcc;
        (var.max(0.0).sqrt(), var_az.max(0.0).sqrt().to_degrees())
    } else {
        let tr = vbb + vcc;
        let det = vbb * vcc - vbc * vbc;
        let l_max = 0.5 * tr + (0.25 * tr * tr - det).max(0.0).sqrt();
        (l_max.max(0.0).sqrt(), 180.0)
    };
    let az = b.atan2(c).to_degrees().rem_euclid(360.0);
    Ok(PlaneFit {
        point_count: n,
        dof: fit.dof,
        intercepts_mm: fit.coefficients[..g].to_vec(),
        geometries,
        gradient_east_mm_per_m: b,
        gradient_north_mm_per_m: c,
        gradient_east_se_mm_per_m: vbb.max(0.0).sqrt(),
        gradient_north_se_mm_per_m: vcc.max(0.0).sqrt(),
        gradient_covariance_mm2_per_m2: vbc,
        residual_std_mm: s2.sqrt(),
        residual_rms_mm: (fit.rss / n as f64).sqrt(),
        tilt: mag * 1e-3,
        tilt_se: tilt_se_mm * 1e-3,
        tilt_azimuth_deg: if az >= 360.0 { 0.0 } else { az },
        tilt_azimuth_se_deg: az_se_deg,
        min_position_eigenvalue_m2: eig,
        residuals_mm: fit.residuals,
    })
}

/// The checked design of the plane fit: one intercept column per geometry, then x and y.
struct PlaneDesign {
    geometries: Vec<usize>,
    rows: Vec<Vec<f64>>,
    needed: usize,
    effective: usize,
    eig: f64,
}

/// Refusal checks of [`fit_plane`] and its design matrix; depends on the positions only.
fn plane_design(
    points: &[MetricPoint],
    min_points: usize,
    collinearity_min_m2: f64,
) -> Result<PlaneDesign, TiltError> {
    let geometries = super::distinct_geometries(points);
    let g = geometries.len();
    let n = points.len();
    let effective = n.saturating_sub(g.saturating_sub(1));
    let needed = min_points.max(4);
    if g == 0 || effective < needed {
        return Err(TiltError::TooFewPoints {
            needed,
            got: effective,
        });
    }
    let eig = pooled_min_eigenvalue_m2(points, &geometries);
    if !(eig >= collinearity_min_m2) {
        return Err(TiltError::Collinear {
            eigenvalue_m2: eig,
            min_m2: collinearity_min_m2,
        });
    }
    let rows: Vec<Vec<f64>> = points
        .iter()
        .map(|p| {
            let mut r = vec![0.0; g + 2];
            if let Ok(k) = geometries.binary_search(&p.geometry) {
                r[k] = 1.0;
            }
            r[g] = p.x_m;
            r[g + 1] = p.y_m;
            r
        })
        .collect();
    Ok(PlaneDesign {
        geometries,
        rows,
        needed,
        effective,
        eig,
    })
}

/// The plane fit of [`fit_plane`] with its design factorised once, for settlements that change
/// while the points stay put (the Monte Carlo draws of `uncertainty.rs`).
///
/// [`FixedPlane::tilt`] gives ω = |(b, c)|·1e-3 with b and c from the pseudo-inverse rows of
/// the same design (`lsq::pseudo_inverse`), so it equals `fit_plane(..).tilt` on the same
/// settlements up to round-off (tested).
///
/// # Units
/// As [`fit_plane`]: settlement mm (+ down), ω dimensionless (m/m).
///
/// # References
/// insar-methods.md §7.6 \[Rec\] (the plane fit), §7.10 \[Rec\] (the Monte Carlo it serves).
#[derive(Debug, Clone)]
pub(crate) struct FixedPlane {
    /// Pseudo-inverse row giving ∂S/∂x (mm/m).
    east: Vec<f64>,
    /// Pseudo-inverse row giving ∂S/∂y (mm/m).
    north: Vec<f64>,
}

impl FixedPlane {
    /// Factorise the plane design of `points`; the error is the one [`fit_plane`] would give.
    pub(crate) fn new(
        points: &[MetricPoint],
        min_points: usize,
        collinearity_min_m2: f64,
    ) -> Result<Self, TiltError> {
        let d = plane_design(points, min_points, collinearity_min_m2)?;
        let g = d.geometries.len();
        if d.rows.len() <= g + 2 {
            // `fit_plane` needs redundancy for its residual variance.
            return Err(TiltError::TooFewPoints {
                needed: d.needed,
                got: d.effective,
            });
        }
        let mut pinv =
            lsq::pseudo_inverse(&d.rows, g + 2).map_err(|e| TiltError::Solve(e.to_string()))?;
        let north = pinv.pop().unwrap_or_default();
        let east = pinv.pop().unwrap_or_default();
        Ok(Self { east, north })
    }

    /// Tilt magnitude ω (m/m) for settlements given in the points' order (mm).
    pub(crate) fn tilt(&self, settlement_mm: &[f64]) -> f64 {
        let b = lsq::dot(&self.east, settlement_mm);
        let c = lsq::dot(&self.north, settlement_mm);
        b.hypot(c) * 1e-3
    }
}

/// Smaller eigenvalue of the pooled within-geometry 2×2 position covariance (m²), divided by n.
///
/// With one geometry this is the ordinary (population) position covariance of §7.6.
pub fn pooled_min_eigenvalue_m2(points: &[MetricPoint], geometries: &[usize]) -> f64 {
    let n = points.len();
    if n == 0 {
        return 0.0;
    }
    let (mut sxx, mut syy, mut sxy) = (0.0, 0.0, 0.0);
    for &g in geometries {
        let grp: Vec<&MetricPoint> = points.iter().filter(|p| p.geometry == g).collect();
        let m = grp.len() as f64;
        if m == 0.0 {
            continue;
        }
        let mx = grp.iter().map(|p| p.x_m).sum::<f64>() / m;
        let my = grp.iter().map(|p| p.y_m).sum::<f64>() / m;
        for p in grp {
            let (dx, dy) = (p.x_m - mx, p.y_m - my);
            sxx += dx * dx;
            syy += dy * dy;
            sxy += dx * dy;
        }
    }
    let (sxx, syy, sxy) = (sxx / n as f64, syy / n as f64, sxy / n as f64);
    let tr = sxx + syy;
    let det = sxx * syy - sxy * sxy;
    0.5 * tr - (0.25 * tr * tr - det).max(0.0).sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::metrics::test_support::bld1_points;

    #[test]
    fn bld1_plane_fit() {
        // insar-methods.md §7.11 BLD-1 [C], quoted to 4 significant figures: tolerance ±1 in
        // the 4th digit (Appendix A). Fitted on S = −w, so b and c change sign.
        let fit = fit_plane(&bld1_points(), 4, 1.0).unwrap();
        assert!((fit.intercepts_mm[0] - 6.874).abs() < 1e-3);
        assert!((fit.gradient_east_mm_per_m - 0.1808).abs() < 1e-4);
        assert!((fit.gradient_north_mm_per_m - (-0.04211)).abs() < 1e-5);
        assert!((fit.gradient_east_se_mm_per_m - 0.04814).abs() < 1e-5);
        assert!((fit.gradient_north_se_mm_per_m - 0.08457).abs() < 1e-5);
        assert!((fit.residual_std_mm - 0.8991).abs() < 1e-4);
        assert!((fit.residual_rms_mm - 0.7523).abs() < 1e-4);
        assert!((fit.tilt - 1.857e-4).abs() < 1e-7);
        assert!((fit.tilt_se - 6.146e-5).abs() < 1e-8);
        assert!((fit.tilt_azimuth_deg - 103.1).abs() < 0.1);
        // Gradient of w along the axis −0.1356 mm/m → S slope +0.1356e-3.
        assert!((fit.slope_along(60.0) - 0.1356e-3).abs() < 1e-7);
    }

    #[test]
    fn damage_relations_8_1_d() {
        // damage-relations.md §8.1-D [D]: b = 0.4e-3, c = 0.1e-3, |ω| = 0.41231e-3, direction
        // 14.036° from +x towards +y = azimuth 90 − 14.036 = 75.964°. Exact data: tol 1e-9.
        let mut pts: Vec<MetricPoint> = [
            (0.0, 0.0),
            (20.0, 0.0),
            (20.0, 10.0),
            (0.0, 10.0),
            (10.0, 5.0),
        ]
        .iter()
        .map(|&(x, y)| MetricPoint::vertical(x, y, 5.0 + 0.4 * x + 0.1 * y, 1.0, 0))
        .collect();
        let fit = fit_plane(&pts, 4, 1.0).unwrap();
        assert!((fit.intercepts_mm[0] - 5.0).abs() < 1e-9);
        assert!((fit.tilt - 0.41231e-3).abs() < 1e-8);
        assert!((fit.tilt_azimuth_deg - 75.964).abs() < 1e-3);
        // Raising only the centre point by 1 mm (settlement −1 mm): a = 5.2 in the §8.1-D
        // wording (there s is raised); here s_centre += 1 → a = 5.2, b and c unchanged.
        pts[4].settlement_mm += 1.0;
        let fit2 = fit_plane(&pts, 4, 1.0).unwrap();
        assert!((fit2.intercepts_mm[0] - 5.2).abs() < 1e-9);
        assert!((fit2.gradient_east_mm_per_m - 0.4).abs() < 1e-9);
        assert!((fit2.gradient_north_mm_per_m - 0.1).abs() < 1e-9);
    }

    #[test]
    fn refusals() {
        let three: Vec<MetricPoint> = bld1_points().into_iter().take(3).collect();
        assert!(matches!(
            fit_plane(&three, 4, 1.0),
            Err(TiltError::TooFewPoints { needed: 4, got: 3 })
        ));
        // Points along a line with 0.5 m scatter across it: eigenvalue ≈ 0.0625·(…) < 1 m².
        let line: Vec<MetricPoint> = (0..8)
            .map(|i| {
                let off = if i % 2 == 0 { 0.25 } else { -0.25 };
                MetricPoint::vertical(i as f64 * 4.0, off, i as f64, 1.0, 0)
            })
            .collect();
        assert!(matches!(
            fit_plane(&line, 4, 1.0),
            Err(TiltError::Collinear { .. })
        ));
    }

    #[test]
    fn per_geometry_offset_does_not_bias_tilt() {
        // Rigid tilt 0.3 mm/m east; geometry 1 sits on the east half and carries a +4 mm
        // reference offset. A shared intercept would see an extra eastward gradient.
        let mut pts = Vec::new();
        for i in 0..6 {
            for j in 0..3 {
                let x = -15.0 + 6.0 * i as f64;
                let y = -5.0 + 5.0 * j as f64;
                let geom = usize::from(x > 0.0);
                let offset = if geom == 1 { 4.0 } else { 0.0 };
                pts.push(MetricPoint::vertical(
                    x,
                    y,
                    3.0 + 0.3 * x + offset,
                    1.0,
                    geom,
                ));
            }
        }
        let fit = fit_plane(&pts, 4, 1.0).unwrap();
        assert!((fit.gradient_east_mm_per_m - 0.3).abs() < 1e-9);
        assert!(fit.gradient_north_mm_per_m.abs() < 1e-9);
        assert!((fit.tilt_azimuth_deg - 90.0).abs() < 1e-6);
        assert!((fit.intercepts_mm[1] - fit.intercepts_mm[0] - 4.0).abs() < 1e-9);
    }
}
