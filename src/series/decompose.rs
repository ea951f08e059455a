//! East + up from K ≥ 2 viewing geometries by weighted least squares (north neglected), and the
//! ascending/descending consistency test of vertical projections.
//!
//! Owns the per-epoch or per-velocity combination of LOS values that already share a spatial
//! reference and a reference epoch (see `resample`). It does not choose which points or geometries
//! to combine, and it never solves for north except in the diagnostic [`solve_enu_3d`], which
//! exists only to show why north is neglected.

use nalgebra::{DMatrix, DVector};
use serde::Serialize;

use super::project::vertical_from_los;

/// Largest accepted condition number of the (unweighted) geometry matrix (insar-methods.md §4.2 \[Rec\]).
pub const MAX_CONDITION_NUMBER: f64 = 3.0;

/// One geometry's contribution: an LOS value (displacement or velocity) with its σ.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct LosObservation {
    /// LOS value, mm (or mm/yr), positive towards the satellite.
    pub los_mm: f64,
    /// Its standard deviation (same unit), > 0.
    pub sigma_mm: f64,
    /// Ground→satellite unit vector (ENU).
    pub unit_enu: [f64; 3],
}

/// Why a decomposition was refused.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum DecomposeError {
    /// Fewer observations than unknowns.
    #[error("need at least {needed} geometries, got {got}")]
    TooFewGeometries {
        /// Required number.
        needed: usize,
        /// Given number.
        got: usize,
    },
    /// Value, σ or vector not finite, or σ not positive.
    #[error("observation {index} is invalid: {why}")]
    InvalidObservation {
        /// Index of the observation.
        index: usize,
        /// Reason.
        why: &'static str,
    },
    /// No east-looking or no west-looking geometry.
    #[error(
        "geometry too weak: need at least one east-looking (u_E < 0) and one west-looking \
         (u_E > 0) geometry"
    )]
    NoOppositeLooks,
    /// Condition number above the limit.
    #[error("geometry too weak: condition number {condition_number:.3} exceeds {limit}")]
    IllConditioned {
        /// Ratio of largest to smallest singular value of the geometry matrix.
        condition_number: f64,
        /// The limit applied.
        limit: f64,
    },
}

/// Result of the north-neglected east/up solve.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct EastUp {
    /// East component (mm or mm/yr), positive east.
    pub east_mm: f64,
    /// Up component (mm or mm/yr), positive up; assumes no north-south motion.
    pub up_mm: f64,
    /// Standard deviation of east.
    pub sigma_east_mm: f64,
    /// Standard deviation of up.
    pub sigma_up_mm: f64,
    /// Covariance of east and up (mm²).
    pub cov_east_up_mm2: f64,
    /// Condition number of the unweighted K×2 geometry matrix (rows `(u_E, u_U)`).
    pub condition_number: f64,
    /// Residuals `y − G·x̂` per geometry (mm).
    pub residuals_mm: Vec<f64>,
    /// Weighted residual sum `rᵀWr` with K − 2 degrees of freedom; `None` for K = 2.
    pub chi_squared: Option<f64>,
    /// Degrees of freedom K − 2.
    pub degrees_of_freedom: usize,
    /// Bias of `up` per mm of true northward motion (from the geometry; insar-methods.md §4.3).
    pub up_bias_mm_per_mm_north: f64,
}

fn validate(obs: &[LosObservation]) -> Result<(), DecomposeError> {
    for (index, o) in obs.iter().enumerate() {
        if !o.los_mm.is_finite() {
            return Err(DecomposeError::InvalidObservation {
                index,
                why: "LOS value not finite",
            });
        }
        if !(o.sigma_mm.is_finite() && o.sigma_mm > 0.0) {
            return Err(DecomposeError::InvalidObservation {
                index,
                why: "sigma not finite and positive",
            });
        }
        if o.unit_enu.iter().any(|c| !c.is_finite()) || !(o.unit_enu[2] > 0.0) {
            return Err(DecomposeError::InvalidObservation {
                index,
                why: "unit vector not finite or not ground→satellite",
            });
        }
    }
    Ok(())
}

/// Ratio of largest to smallest singular value; `f64::INFINITY` for a rank-deficient matrix.
fn condition_number(m: &DMatrix<f64>) -> f64 {
    let sv = m.singular_values();
    let max = sv.iter().cloned().fold(0.0_f64, f64::max);
    let min = sv.iter().cloned().fold(f64::INFINITY, f64::min);
    if min > 0.0 { max / min } else { f64::INFINITY }
}

/// Weighted least squares by SVD of the row-scaled design: returns (x̂, Cov(x̂)).
fn wls_svd(
    design: &DMatrix<f64>,
    y: &DVector<f64>,
    sigma: &[f64],
) -> Option<(DVector<f64>, DMatrix<f64>)> {
    let mut gw = design.clone();
    let mut yw = y.clone();
    for (r, s) in sigma.iter().enumerate() {
        gw.row_mut(r).scale_mut(1.0 / s);
        yw[r] /= s;
    }
    let svd = gw.svd(true, true);
    let u = svd.u.as_ref()?;
    let vt = svd.v_t.as_ref()?;
    let p = design.ncols();
    if svd.singular_values.iter().any(|s| !(*s > 0.0)) {
        return None;
    }
    let uty = u.transpose() * &yw;
    let mut x = DVector::zeros(p);
    let mut cov = DMatrix::zeros(p, p);
    for k in 0..p {
        let s = svd.singular_values[k];
        let vk = vt.row(k).transpose();
        x += &vk * (uty[k] / s);
        cov += &vk * vk.transpose() / (s * s);
    }
    Some((x, cov))
}

/// East and up from K ≥ 2 geometries by weighted least squares, north neglected.
///
/// `G` (K×2) rows `(u_E,k, u_U,k)`, `W = diag(1/σ_k²)`, `x̂ = (GᵀWG)⁻¹GᵀWy`, `Cov = (GᵀWG)⁻¹`,
/// `χ² = rᵀWr` (K − 2 dof). Solved by SVD of `W^½G` (not the normal equations).
///
/// Refused ("geometry too weak") without one east-looking and one west-looking geometry, or when
/// the condition number of the unweighted `G` exceeds [`MAX_CONDITION_NUMBER`]. The unweighted
/// matrix is used for the check because it measures the viewing geometry itself, independently of
/// the noise levels (the notes quote cond(G) of unit vectors, §4.2/§4.4).
///
/// # Units
/// LOS in mm (or mm/yr), positive towards the satellite; results in the same unit, east positive
/// east, up positive up.
///
/// # References
/// insar-methods.md §4.1-4.4 \[C, Rec\]; Wright, Parsons & Lu (2004) \[S: cited\]; north-neglect bias
/// §4.3 (Brouwer & Hanssen 2023 \[S: abstract\]).
///
/// # Examples
/// ```
/// use plinth::series::decompose::{decompose_east_up, LosObservation};
/// // insar-methods.md Appendix A DEC-1
/// let a = LosObservation { los_mm: -9.618164, sigma_mm: 1.0, unit_enu: [-0.615568, -0.130843, 0.777146] };
/// let d = LosObservation { los_mm: -6.220363, sigma_mm: 1.0, unit_enu: [0.588664, -0.125124, 0.798636] };
/// let x = decompose_east_up(&[a, d]).unwrap();
/// assert!((x.east_mm - 3.0).abs() < 1e-3 && (x.up_mm + 10.0).abs() < 1e-3);
/// assert!((x.condition_number - 1.309).abs() < 1e-3);
/// ```
pub fn decompose_east_up(obs: &[LosObservation]) -> Result<EastUp, DecomposeError> {
    decompose_east_up_within(obs, MAX_CONDITION_NUMBER)
}

/// [`decompose_east_up`] with a chosen condition-number limit (`[assessment]
/// max_condition_number`); the opposite-look requirement holds whatever the limit.
pub fn decompose_east_up_within(
    obs: &[LosObservation],
    max_condition: f64,
) -> Result<EastUp, DecomposeError> {
    if obs.len() < 2 {
        return Err(DecomposeError::TooFewGeometries {
            needed: 2,
            got: obs.len(),
        });
    }
    validate(obs)?;
    if !(obs.iter().any(|o| o.unit_enu[0] < 0.0) && obs.iter().any(|o| o.unit_enu[0] > 0.0)) {
        return Err(DecomposeError::NoOppositeLooks);
    }
    let k = obs.len();
    let g = DMatrix::from_fn(k, 2, |r, c| {
        if c == 0 {
            obs[r].unit_enu[0]
        } else {
            obs[r].unit_enu[2]
        }
    });
    let cond = condition_number(&g);
    if !(cond <= max_condition) {
        return Err(DecomposeError::IllConditioned {
            condition_number: cond,
            limit: max_condition,
        });
    }
    let y = DVector::from_iterator(k, obs.iter().map(|o| o.los_mm));
    let sigma: Vec<f64> = obs.iter().map(|o| o.sigma_mm).collect();
    let (x, cov) = wls_svd(&g, &y, &sigma).ok_or(DecomposeError::IllConditioned {
        condition_number: f64::INFINITY,
        limit: max_condition,
    })?;
    let r = &y - &g * &x;
    let residuals_mm: Vec<f64> = r.iter().cloned().collect();
    let chi2: f64 = residuals_mm
        .iter()
        .zip(sigma.iter())
        .map(|(ri, s)| (ri / s).powi(2))
        .sum();
    // North bias: solve with y = u_N (response to 1 mm of north motion), take the up part.
    let yn = DVector::from_iterator(k, obs.iter().map(|o| o.unit_enu[1]));
    let bias = wls_svd(&g, &yn, &sigma)
        .map(|(b, _)| b[1])
        .unwrap_or(f64::NAN);
    Ok(EastUp {
        east_mm: x[0],
        up_mm: x[1],
        sigma_east_mm: cov[(0, 0)].sqrt(),
        sigma_up_mm: cov[(1, 1)].sqrt(),
        cov_east_up_mm2: cov[(0, 1)],
        condition_number: cond,
        residuals_mm,
        chi_squared: if k >= 3 { Some(chi2) } else { None },
        degrees_of_freedom: k - 2,
        up_bias_mm_per_mm_north: bias,
    })
}

/// Diagnostic full 3-D solve (east, north, up) used to show that north is unresolvable.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Enu3d {
    /// Solution (E, N, U), mm.
    pub enu_mm: [f64; 3],
    /// Standard deviations (E, N, U), mm.
    pub sigma_enu_mm: [f64; 3],
    /// Condition number of the unweighted K×3 matrix.
    pub condition_number: f64,
}

/// Full 3-D weighted least squares (K ≥ 3). Diagnostic only: not used for outputs.
///
/// # Units
/// As [`decompose_east_up`].
///
/// # References
/// insar-methods.md §4.3 (four-geometry example, DEC-3: σ = (1.320, 35.69, 6.097), cond 57.49) \[C\].
///
/// No conditioning limit is applied (that is the point of the diagnostic); a rank-deficient
/// system returns `IllConditioned` with an infinite condition number.
pub fn solve_enu_3d(obs: &[LosObservation]) -> Result<Enu3d, DecomposeError> {
    if obs.len() < 3 {
        return Err(DecomposeError::TooFewGeometries {
            needed: 3,
            got: obs.len(),
        });
    }
    validate(obs)?;
    let k = obs.len();
    let g = DMatrix::from_fn(k, 3, |r, c| obs[r].unit_enu[c]);
    let cond = condition_number(&g);
    let y = DVector::from_iterator(k, obs.iter().map(|o| o.los_mm));
    let sigma: Vec<f64> = obs.iter().map(|o| o.sigma_mm).collect();
    let (x, cov) = wls_svd(&g, &y, &sigma).ok_or(DecomposeError::IllConditioned {
        condition_number: f64::INFINITY,
        limit: f64::INFINITY,
    })?;
    Ok(Enu3d {
        enu_mm: [x[0], x[1], x[2]],
        sigma_enu_mm: [cov[(0, 0)].sqrt(), cov[(1, 1)].sqrt(), cov[(2, 2)].sqrt()],
        condition_number: cond,
    })
}

/// Outcome of comparing the vertical projections of an ascending and a descending value.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AscDescConsistency {
    /// Ascending vertical projection (mm or mm/yr).
    pub vertical_ascending_mm: f64,
    /// Its σ.
    pub sigma_ascending_mm: f64,
    /// Descending vertical projection.
    pub vertical_descending_mm: f64,
    /// Its σ.
    pub sigma_descending_mm: f64,
    /// Ascending minus descending.
    pub difference_mm: f64,
    /// `2·sqrt(σ_a² + σ_d²)`.
    pub tolerance_mm: f64,
    /// `|difference| ≤ tolerance`.
    pub consistent: bool,
}

/// Asc/desc consistency: the two vertical projections disagree when they differ by more than
/// `2·sqrt(σ_a² + σ_d²)`.
///
/// A disagreement indicates horizontal (mainly east-west) motion or differential movement between
/// the facades seen by each geometry (insar-methods.md §6.8), not necessarily an error.
///
/// # Units
/// LOS values and σ in mm (or mm/yr); σ are LOS standard deviations, projected here.
///
/// # References
/// insar-methods.md §3.1 "Use in the tool" \[Rec\]; pure-east limiting case of §3.1 (5 mm east →
/// −3.960 asc / +3.685 desc) \[C\].
///
/// # Examples
/// ```
/// use plinth::series::decompose::asc_desc_consistency;
/// let ua = [-0.615568, -0.130843, 0.777146];
/// let ud = [0.588664, -0.125124, 0.798636];
/// // 5 mm of pure east motion, σ_LOS = 0.5 mm: projections −3.960 and +3.685 disagree
/// let c = asc_desc_consistency(-3.077840, 0.5, ua, 2.943320, 0.5, ud).unwrap();
/// assert!(!c.consistent);
/// ```
pub fn asc_desc_consistency(
    asc_los_mm: f64,
    asc_sigma_mm: f64,
    asc_unit_enu: [f64; 3],
    desc_los_mm: f64,
    desc_sigma_mm: f64,
    desc_unit_enu: [f64; 3],
) -> Result<AscDescConsistency, super::project::ProjectError> {
    let a = vertical_from_los(asc_los_mm, Some(asc_sigma_mm), asc_unit_enu)?;
    let d = vertical_from_los(desc_los_mm, Some(desc_sigma_mm), desc_unit_enu)?;
    let sa = a.sigma_mm.unwrap_or(0.0);
    let sd = d.sigma_mm.unwrap_or(0.0);
    let difference_mm = a.vertical_mm - d.vertical_mm;
    let tolerance_mm = 2.0 * (sa * sa + sd * sd).sqrt();
    Ok(AscDescConsistency {
        vertical_ascending_mm: a.vertical_mm,
        sigma_ascending_mm: sa,
        vertical_descending_mm: d.vertical_mm,
        sigma_descending_mm: sd,
        difference_mm,
        tolerance_mm,
        consistent: difference_mm.abs() <= tolerance_mm,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::series::los::{LookSide, unit_vector_from_angles};

    const UA: [f64; 3] = [-0.615568, -0.130843, 0.777146];
    const UD: [f64; 3] = [0.588664, -0.125124, 0.798636];

    fn obs(los_mm: f64, sigma_mm: f64, unit_enu: [f64; 3]) -> LosObservation {
        LosObservation {
            los_mm,
            sigma_mm,
            unit_enu,
        }
    }

    fn dot(a: [f64; 3], b: [f64; 3]) -> f64 {
        a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
    }

    /// Appendix A DEC-1 and §4.4 covariance values \[C\].
    #[test]
    fn dec1_and_covariance() {
        let x = decompose_east_up(&[obs(-9.618164, 1.0, UA), obs(-6.220363, 1.0, UD)]).unwrap();
        assert!((x.east_mm - 3.000).abs() < 1e-3);
        assert!((x.up_mm + 10.00).abs() < 1e-3);
        assert!((x.sigma_east_mm - 1.174).abs() < 1e-3);
        assert!((x.sigma_up_mm - 0.8974).abs() < 1e-4);
        assert!((x.sigma_east_mm.powi(2) - 1.379).abs() < 1e-3);
        assert!((x.sigma_up_mm.powi(2) - 0.8054).abs() < 1e-4);
        assert!((x.cov_east_up_mm2 - 0.009168).abs() < 1e-6);
        assert!((x.condition_number - 1.309).abs() < 1e-3);
        assert!(x.chi_squared.is_none());
        // §4.3: bias per mm north Δd_U = −0.1623
        assert!((x.up_bias_mm_per_mm_north + 0.1623).abs() < 1e-4);
        // σ_a = 1, σ_d = 1.5 → σ_E = 1.489, σ_U = 1.154
        let y = decompose_east_up(&[obs(-9.618164, 1.0, UA), obs(-6.220363, 1.5, UD)]).unwrap();
        assert!((y.sigma_east_mm - 1.489).abs() < 1e-3);
        assert!((y.sigma_up_mm - 1.154).abs() < 1e-3);
    }

    /// Appendix A DEC-2 \[C\]: north motion leaks into up.
    #[test]
    fn dec2_north_bias() {
        let truth = [3.0, 2.0, -10.0];
        let (la, ld) = (dot(UA, truth), dot(UD, truth));
        assert!((la + 9.880).abs() < 1e-3 && (ld + 6.471).abs() < 1e-3);
        let x = decompose_east_up(&[obs(la, 1.0, UA), obs(ld, 1.0, UD)]).unwrap();
        assert!((x.east_mm - 3.015).abs() < 1e-3);
        assert!((x.up_mm + 10.32).abs() < 1e-2);
    }

    /// §4.4 three-geometry example with χ² \[C\].
    #[test]
    fn three_geometries_chi_squared() {
        let u3 = unit_vector_from_angles(45.0, -13.0, LookSide::Right).unwrap();
        let x = decompose_east_up(&[
            obs(-9.618164, 1.0, UA),
            obs(-6.220363, 1.0, UD),
            obs(-9.138019, 1.0, u3),
        ])
        .unwrap();
        assert!((x.east_mm - 3.0).abs() < 1e-3 && (x.up_mm + 10.0).abs() < 1e-3);
        assert!((x.sigma_east_mm - 0.9716).abs() < 1e-4);
        assert!((x.sigma_up_mm - 0.8065).abs() < 1e-4);
        assert!((x.condition_number - 1.499).abs() < 1e-3);
        let p = decompose_east_up(&[
            obs(-9.118164, 1.0, UA),
            obs(-6.520363, 1.0, UD),
            obs(-8.938019, 1.0, u3),
        ])
        .unwrap();
        assert!((p.east_mm - 2.4906).abs() < 1e-4);
        assert!((p.up_mm + 9.9782).abs() < 1e-4);
        for (r, e) in p.residuals_mm.iter().zip([0.1695, -0.01756, -0.1664]) {
            assert!((r - e).abs() < 1e-4, "{r} vs {e}");
        }
        assert!((p.chi_squared.unwrap() - 0.05672).abs() < 1e-5);
        assert_eq!(p.degrees_of_freedom, 1);
    }

    /// Appendix A DEC-3 \[C\]: 3-D solve shows north unresolvable.
    #[test]
    fn dec3_three_d_diagnostic() {
        let geoms = [(39.0, -12.0), (37.0, 192.0), (45.0, -13.0), (33.0, 193.0)];
        let o: Vec<LosObservation> = geoms
            .iter()
            .map(|(t, a)| {
                obs(
                    0.0,
                    1.0,
                    unit_vector_from_angles(*t, *a, LookSide::Right).unwrap(),
                )
            })
            .collect();
        let s = solve_enu_3d(&o).unwrap();
        assert!((s.sigma_enu_mm[0] - 1.320).abs() < 1e-3);
        assert!((s.sigma_enu_mm[1] - 35.69).abs() < 1e-2);
        assert!((s.sigma_enu_mm[2] - 6.097).abs() < 1e-3);
        assert!((s.condition_number - 57.49).abs() < 1e-2);
    }

    /// insar-methods.md §4.2 [C, Rec]: same-side pair refused; cond 9.56 for θ = 33°/45° both α = −12°.
    #[test]
    fn weak_geometry_refused() {
        let u33 = unit_vector_from_angles(33.0, -12.0, LookSide::Right).unwrap();
        let u45 = unit_vector_from_angles(45.0, -12.0, LookSide::Right).unwrap();
        let g = DMatrix::from_row_slice(2, 2, &[u33[0], u33[2], u45[0], u45[2]]);
        assert!((condition_number(&g) - 9.56).abs() < 1e-2);
        assert_eq!(
            decompose_east_up(&[obs(1.0, 1.0, u33), obs(1.0, 1.0, u45)]),
            Err(DecomposeError::NoOppositeLooks)
        );
        assert!(matches!(
            decompose_east_up(&[obs(1.0, 1.0, UA)]),
            Err(DecomposeError::TooFewGeometries { .. })
        ));
        assert!(matches!(
            decompose_east_up(&[obs(f64::NAN, 1.0, UA), obs(1.0, 1.0, UD)]),
            Err(DecomposeError::InvalidObservation { index: 0, .. })
        ));
    }

    /// §4.4 symmetric-geometry table \[C\].
    #[test]
    fn symmetric_table() {
        for (theta, cond, se, su) in [
            (30.0, 1.771, 1.446, 0.8165),
            (35.0, 1.460, 1.260, 0.8632),
            (39.0, 1.263, 1.149, 0.9099),
            (42.0, 1.135, 1.080, 0.9515),
            (45.0, 1.022, 1.022, 1.000),
        ] {
            let ua = unit_vector_from_angles(theta, -12.0, LookSide::Right).unwrap();
            let ud = unit_vector_from_angles(theta, 192.0, LookSide::Right).unwrap();
            let x = decompose_east_up(&[obs(0.0, 1.0, ua), obs(0.0, 1.0, ud)]).unwrap();
            assert!((x.condition_number - cond).abs() < 1e-3, "θ={theta}");
            assert!((x.sigma_east_mm - se).abs() < 1e-3, "θ={theta}");
            assert!((x.sigma_up_mm - su).abs() < 1e-3, "θ={theta}");
        }
    }

    #[test]
    fn consistency_test() {
        // pure vertical motion: both projections equal → consistent
        let truth = [0.0, 0.0, -10.0];
        let c = asc_desc_consistency(dot(UA, truth), 1.0, UA, dot(UD, truth), 1.0, UD).unwrap();
        assert!(c.consistent && c.difference_mm.abs() < 1e-9);
        // 5 mm east: −3.960 vs +3.685 [C §3.1]
        let e = [5.0, 0.0, 0.0];
        let c = asc_desc_consistency(dot(UA, e), 0.5, UA, dot(UD, e), 0.5, UD).unwrap();
        assert!((c.vertical_ascending_mm + 3.960).abs() < 1e-3);
        assert!((c.vertical_descending_mm - 3.685).abs() < 1e-3);
        assert!(!c.consistent);
        let tol = 2.0 * ((0.5 / UA[2]).powi(2) + (0.5 / UD[2]).powi(2)).sqrt();
        assert!((c.tolerance_mm - tol).abs() < 1e-12);
    }
}
