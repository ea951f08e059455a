//! Ordinary least squares on a small dense design matrix (internal helper).
//!
//! Owns: the linear-algebra kernel shared by the plane fit (`tilt.rs`), the profile fit
//! (`profile.rs`) and the east/up decomposition (`strain.rs`). It does not know what the
//! columns mean; callers build the design matrix and interpret the coefficients.
//!
//! The solve uses the singular value decomposition of the design matrix rather than the normal
//! equations, so a rank-deficient design (for example points on a line) is detected from the
//! ratio of the smallest to the largest singular value instead of producing a huge, silently
//! wrong covariance.

use nalgebra::{DMatrix, DVector};

/// Smallest accepted ratio of the smallest to the largest singular value of the design matrix.
/// Below it the design is treated as rank deficient. Chosen well above f64 round-off
/// (~1e-16) and well below any physically meaningful conditioning of centred metre coordinates.
pub(crate) const MIN_SINGULAR_RATIO: f64 = 1e-10;

/// Result of an ordinary least-squares fit `y = X·p + e`.
#[derive(Debug, Clone)]
pub(crate) struct LsFit {
    /// Estimated coefficients p.
    pub coefficients: Vec<f64>,
    /// (XᵀX)⁻¹, to be multiplied by s² (or by 1 for weighted rows scaled by 1/σ).
    pub unscaled_covariance: DMatrix<f64>,
    /// Residuals y − X·p, one per row.
    pub residuals: Vec<f64>,
    /// Residual sum of squares.
    pub rss: f64,
    /// Degrees of freedom n − k.
    pub dof: usize,
}

impl LsFit {
    /// s² = RSS/(n − k); `None` when there is no redundancy (n = k).
    pub fn residual_variance(&self) -> Option<f64> {
        if self.dof == 0 {
            None
        } else {
            Some(self.rss / self.dof as f64)
        }
    }
}

/// Reasons an OLS solve cannot be done.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub(crate) enum LsError {
    #[error("fewer observations ({rows}) than unknowns ({cols})")]
    Underdetermined { rows: usize, cols: usize },
    #[error("design matrix is rank deficient (singular value ratio {ratio:.3e})")]
    RankDeficient { ratio: f64 },
    #[error("non-finite value in the least-squares input")]
    NonFinite,
}

/// Singular value decomposition of a checked design matrix (shared by [`solve`] and
/// [`pseudo_inverse`]).
struct Factored {
    x: DMatrix<f64>,
    u: DMatrix<f64>,
    v: DMatrix<f64>,
    sv: Vec<f64>,
}

/// Check the design (shape, finiteness, rank) and decompose it.
fn factor(rows: &[Vec<f64>], cols: usize) -> Result<Factored, LsError> {
    let n = rows.len();
    if n < cols || cols == 0 {
        return Err(LsError::Underdetermined { rows: n, cols });
    }
    if rows
        .iter()
        .any(|r| r.len() != cols || r.iter().any(|v| !v.is_finite()))
    {
        return Err(LsError::NonFinite);
    }
    let x = DMatrix::from_fn(n, cols, |i, j| rows[i][j]);
    let svd = x.clone().svd(true, true);
    let sv = &svd.singular_values;
    let max_sv = sv.iter().cloned().fold(0.0_f64, f64::max);
    let min_sv = sv.iter().cloned().fold(f64::INFINITY, f64::min);
    let ratio = if max_sv > 0.0 { min_sv / max_sv } else { 0.0 };
    if !(ratio >= MIN_SINGULAR_RATIO) {
        return Err(LsError::RankDeficient { ratio });
    }
    let (Some(u), Some(v_t)) = (svd.u, svd.v_t) else {
        return Err(LsError::RankDeficient { ratio });
    };
    Ok(Factored {
        x,
        u,
        v: v_t.transpose(),
        sv: svd.singular_values.iter().copied().collect(),
    })
}

/// Solve `y = X·p` in the least-squares sense.
///
/// `rows` holds the design matrix row by row (all rows must have `cols` entries).
pub(crate) fn solve(rows: &[Vec<f64>], y: &[f64], cols: usize) -> Result<LsFit, LsError> {
    let n = rows.len();
    if n < cols || cols == 0 || y.len() != n {
        return Err(LsError::Underdetermined { rows: n, cols });
    }
    if y.iter().any(|v| !v.is_finite()) {
        return Err(LsError::NonFinite);
    }
    let f = factor(rows, cols)?;
    let yv = DVector::from_column_slice(y);
    // p = V Σ⁻¹ Uᵀ y ; (XᵀX)⁻¹ = V Σ⁻² Vᵀ
    let uty = f.u.transpose() * &yv;
    let k = f.sv.len();
    let mut scaled = DVector::zeros(k);
    for i in 0..k {
        scaled[i] = uty[i] / f.sv[i];
    }
    let p = &f.v * scaled;
    let mut inv_s2 = DMatrix::zeros(k, k);
    for i in 0..k {
        inv_s2[(i, i)] = 1.0 / (f.sv[i] * f.sv[i]);
    }
    let cov = &f.v * inv_s2 * f.v.transpose();
    let fitted = &f.x * &p;
    let residuals: Vec<f64> = (0..n).map(|i| y[i] - fitted[i]).collect();
    let rss = residuals.iter().map(|r| r * r).sum();
    Ok(LsFit {
        coefficients: p.iter().cloned().collect(),
        unscaled_covariance: cov,
        residuals,
        rss,
        dof: n - cols,
    })
}

/// Rows of the pseudo-inverse X⁺ = V Σ⁻¹ Uᵀ of the design matrix (k rows of n entries).
///
/// For a design that stays fixed while only the observations change (Monte Carlo draws), the
/// least-squares coefficients are p_j = Σ_i X⁺\[j, i\]·y_i: one dot product per coefficient
/// instead of a decomposition per draw. Same rank check and errors as [`solve`]; the result
/// equals [`solve`]'s coefficients up to round-off (the products are only associated
/// differently).
pub(crate) fn pseudo_inverse(rows: &[Vec<f64>], cols: usize) -> Result<Vec<Vec<f64>>, LsError> {
    let f = factor(rows, cols)?;
    let n = rows.len();
    Ok((0..cols)
        .map(|j| {
            (0..n)
                .map(|i| (0..cols).map(|l| f.v[(j, l)] / f.sv[l] * f.u[(i, l)]).sum())
                .collect()
        })
        .collect())
}

/// Σ a_i·b_i.
pub(crate) fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exact_line_is_recovered() {
        // y = 2 + 3x, hand-checked.
        let rows: Vec<Vec<f64>> = (0..5).map(|i| vec![1.0, i as f64]).collect();
        let y: Vec<f64> = (0..5).map(|i| 2.0 + 3.0 * i as f64).collect();
        let fit = solve(&rows, &y, 2).expect("solvable");
        assert!((fit.coefficients[0] - 2.0).abs() < 1e-12);
        assert!((fit.coefficients[1] - 3.0).abs() < 1e-12);
        assert!(fit.rss < 1e-20);
        // (XᵀX)⁻¹ for x = 0..4: XᵀX = [[5,10],[10,30]], inverse = [[0.6,-0.2],[-0.2,0.1]].
        assert!((fit.unscaled_covariance[(0, 0)] - 0.6).abs() < 1e-12);
        assert!((fit.unscaled_covariance[(1, 1)] - 0.1).abs() < 1e-12);
    }

    #[test]
    fn rank_deficiency_is_reported() {
        let rows: Vec<Vec<f64>> = (0..4)
            .map(|i| vec![1.0, i as f64, 2.0 * i as f64])
            .collect();
        let y = vec![1.0, 2.0, 3.0, 4.0];
        assert!(matches!(
            solve(&rows, &y, 3),
            Err(LsError::RankDeficient { .. })
        ));
    }

    #[test]
    fn pseudo_inverse_gives_the_solve_coefficients() {
        // A plane with two intercepts on an irregular layout: X⁺·y must equal the SVD solve.
        let rows: Vec<Vec<f64>> = (0..9)
            .map(|i| {
                let x = (i * 7 % 5) as f64 - 1.3;
                let y = (i * 3 % 4) as f64 * 1.7;
                vec![f64::from(i % 2 == 0), f64::from(i % 2 == 1), x, y]
            })
            .collect();
        let y: Vec<f64> = (0..9).map(|i| ((i * i) % 7) as f64 - 2.5).collect();
        let fit = solve(&rows, &y, 4).unwrap();
        let pinv = pseudo_inverse(&rows, 4).unwrap();
        for (row, c) in pinv.iter().zip(&fit.coefficients) {
            assert!((dot(row, &y) - c).abs() < 1e-12 * (1.0 + c.abs()), "{c}");
        }
        let line: Vec<Vec<f64>> = (0..4)
            .map(|i| vec![1.0, i as f64, 2.0 * i as f64])
            .collect();
        assert!(matches!(
            pseudo_inverse(&line, 3),
            Err(LsError::RankDeficient { .. })
        ));
    }
}
