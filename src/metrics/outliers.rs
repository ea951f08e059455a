//! Outlier screening with the median absolute deviation (MAD).
//!
//! Owns: the robust z-score rule of insar-methods.md §7.3 applied to a list of values. In the
//! metrics stage it is the *second pass* on plane-fit residuals (§7.3: a tilting or bending
//! structure spreads raw values, so residuals are screened instead when n ≥ 6). It does not
//! decide which values to screen; `mod.rs` does.

use serde::Serialize;

use super::settlement::median;

/// Consistency constant turning a MAD into a normal-distribution σ: 1/Φ⁻¹(3/4) = 1.4826.
pub const MAD_TO_SIGMA: f64 = 1.4826;

/// Outcome of a MAD screening.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MadScreen {
    /// Median of the values.
    pub median: f64,
    /// Median absolute deviation from the median (same unit as the values).
    pub mad: f64,
    /// Robust σ̂ = 1.4826·MAD.
    pub sigma_hat: f64,
    /// Robust z-score of every value, (x − med)/σ̂; `None` when σ̂ = 0.
    pub z: Vec<Option<f64>>,
    /// Indices of rejected values, ascending.
    pub rejected: Vec<usize>,
    /// Why nothing was rejected although values might be extreme (MAD = 0 or too few values).
    pub not_screened_reason: Option<String>,
}

/// Screen values with the robust z-score: reject |x − med|/(1.4826·MAD) > `z_max`.
///
/// With fewer than `min_count` values (default use: 5) or MAD = 0 nothing is rejected and the
/// reason is recorded (§7.3).
///
/// # Units
/// Any; z is dimensionless.
///
/// # References
/// insar-methods.md §7.3 \[Rec\] (threshold 3); MAD consistency constant: common practice (Hampel
/// 1974, from memory). Check MAD-1: x = (−3.1, −2.8, −3.4, −2.9, −3.0, −7.9, −3.3, −2.6, −3.2,
/// 1.5) → med −3.05, MAD 0.25, σ̂ 0.3707, z(−7.9) = −13.09, z(1.5) = 12.28, both rejected.
///
/// # Examples
/// ```
/// use plinth::metrics::outliers::mad_screen;
/// let x = [-3.1, -2.8, -3.4, -2.9, -3.0, -7.9, -3.3, -2.6, -3.2, 1.5];
/// assert_eq!(mad_screen(&x, 3.0, 5).rejected, vec![5, 9]);
/// ```
pub fn mad_screen(values: &[f64], z_max: f64, min_count: usize) -> MadScreen {
    let med = median(values).unwrap_or(f64::NAN);
    let dev: Vec<f64> = values.iter().map(|v| (v - med).abs()).collect();
    let mad = median(&dev).unwrap_or(f64::NAN);
    let sigma_hat = MAD_TO_SIGMA * mad;
    let z: Vec<Option<f64>> = values
        .iter()
        .map(|v| (sigma_hat > 0.0).then(|| (v - med) / sigma_hat))
        .collect();
    let mut rejected = Vec::new();
    let mut reason = None;
    if values.len() < min_count {
        reason = Some(format!(
            "{} values, fewer than {min_count}: flagged only, not rejected",
            values.len()
        ));
    } else if !(sigma_hat > 0.0) {
        reason = Some("MAD is zero (half or more values identical): not screened".to_string());
    } else {
        rejected = z
            .iter()
            .enumerate()
            .filter(|(_, z)| z.is_some_and(|z| z.abs() > z_max))
            .map(|(i, _)| i)
            .collect();
    }
    MadScreen {
        median: med,
        mad,
        sigma_hat,
        z,
        rejected,
        not_screened_reason: reason,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn mad1_check_values() {
        // insar-methods.md §7.3 / Appendix A MAD-1 [C], 4 significant figures.
        let x = [-3.1, -2.8, -3.4, -2.9, -3.0, -7.9, -3.3, -2.6, -3.2, 1.5];
        let r = mad_screen(&x, 3.0, 5);
        assert!((r.median - (-3.05)).abs() < 1e-12);
        assert!((r.mad - 0.25).abs() < 1e-12);
        assert!((r.sigma_hat - 0.3707).abs() < 1e-4);
        assert!((r.z[5].unwrap() - (-13.09)).abs() < 0.01);
        assert!((r.z[9].unwrap() - 12.28).abs() < 0.01);
        assert_eq!(r.rejected, vec![5, 9]);
        // Inliers: mean −3.0375, median −3.05 (§7.3).
        let inl: Vec<f64> = x
            .iter()
            .enumerate()
            .filter(|(i, _)| !r.rejected.contains(i))
            .map(|(_, v)| *v)
            .collect();
        assert!((inl.iter().sum::<f64>() / inl.len() as f64 - (-3.0375)).abs() < 1e-12);
    }

    #[test]
    fn zero_mad_and_small_sets_are_not_screened() {
        let r = mad_screen(&[1.0, 1.0, 1.0, 1.0, 9.0], 3.0, 5);
        assert!(r.rejected.is_empty());
        assert!(r.not_screened_reason.is_some());
        let r = mad_screen(&[1.0, 2.0, 100.0], 3.0, 5);
        assert!(r.rejected.is_empty());
        assert!(r.not_screened_reason.is_some());
    }
}
