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
    /// Robust scale used for z: max(1.4826·MAD, floor) (see [`mad_screen_with_floor`]).
    pub sigma_hat: f64,
    /// The floor given (same unit as the values; 0 = none).
    pub scale_floor: f64,
    /// Whether the floor, not the MAD, set the scale.
    pub floor_applied: bool,
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
    mad_screen_with_floor(values, z_max, min_count, 0.0)
}

/// [`mad_screen`] with a floor on the robust scale: σ̂ = max(1.4826·MAD, `scale_floor`).
///
/// Why a floor: with few values the MAD can be far smaller than the precision of the values
/// themselves (six points of a still building measured with 0.4 mm noise have velocities that
/// agree to hundredths of a mm/yr, and their MAD by chance to thousandths), so a value a
/// fraction of its own standard error away from the others gets a robust z above 3 and is
/// rejected. A difference smaller than a few standard errors of the values is not evidence of
/// an outlier, so the scale is never taken below the values' own typical precision (callers
/// pass the median of the values' standard errors). With a positive floor the scale is defined
/// even when MAD = 0, so such a set is screened against the floor rather than skipped (the
/// §7.3 "MAD = 0: do not reject" rule guards an undefined z, which the floor removes).
///
/// # Units
/// `scale_floor` in the unit of the values; z dimensionless.
///
/// # References
/// insar-methods.md §7.3 \[Rec\] (robust z, threshold 3); the floor is a Plinth choice (reason
/// above), in the spirit of the precision-weighted tests of geodetic outlier screening.
///
/// # Examples
/// ```
/// use plinth::metrics::outliers::mad_screen_with_floor;
/// // MAD 0.0015 but each value known to ±0.05: nothing here is an outlier.
/// let x = [0.000, 0.001, -0.001, 0.002, -0.002, 0.02];
/// assert!(mad_screen_with_floor(&x, 3.0, 5, 0.0).rejected == vec![5]);
/// assert!(mad_screen_with_floor(&x, 3.0, 5, 0.05).rejected.is_empty());
/// ```
pub fn mad_screen_with_floor(
    values: &[f64],
    z_max: f64,
    min_count: usize,
    scale_floor: f64,
) -> MadScreen {
    let med = median(values).unwrap_or(f64::NAN);
    let dev: Vec<f64> = values.iter().map(|v| (v - med).abs()).collect();
    let mad = median(&dev).unwrap_or(f64::NAN);
    let floor = if scale_floor.is_finite() && scale_floor > 0.0 {
        scale_floor
    } else {
        0.0
    };
    let from_mad = MAD_TO_SIGMA * mad;
    let floor_applied = floor > 0.0 && !(from_mad >= floor);
    let sigma_hat = if floor_applied { floor } else { from_mad };
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
        scale_floor: floor,
        floor_applied,
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

    /// Six still points, 0.4 mm noise per epoch, 92 epochs over 3 years (seeded): their
    /// velocities scatter with SD ≈ SE ≈ 0.4·√12/(3·√92) ≈ 0.048 mm/yr (insar-methods.md §5.2
    /// white-noise rule), so none is an outlier. Over 400 seeded sets the plain MAD screen
    /// rejects good points in many sets; with the floor (median SE) almost none (a true
    /// 3-SE deviation occurs in about 0.3 % of values).
    #[test]
    fn floor_keeps_still_points_and_still_rejects_real_outliers() {
        use rand::SeedableRng;
        use rand_distr::{Distribution, Normal};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(31);
        let noise = Normal::new(0.0, 0.4).unwrap();
        let t: Vec<f64> = (0..92).map(|i| 12.0 * i as f64 / 365.25).collect();
        let tm = t.iter().sum::<f64>() / t.len() as f64;
        let sxx: f64 = t.iter().map(|x| (x - tm).powi(2)).sum();
        let (mut plain_sets, mut floored_sets) = (0, 0);
        for _ in 0..400 {
            let mut vel = Vec::new();
            let mut se = Vec::new();
            for _ in 0..6 {
                let d: Vec<f64> = t.iter().map(|_| noise.sample(&mut rng)).collect();
                let dm = d.iter().sum::<f64>() / d.len() as f64;
                let v = t
                    .iter()
                    .zip(&d)
                    .map(|(x, y)| (x - tm) * (y - dm))
                    .sum::<f64>()
                    / sxx;
                let rss: f64 = t
                    .iter()
                    .zip(&d)
                    .map(|(x, y)| (y - dm - v * (x - tm)).powi(2))
                    .sum();
                vel.push(v);
                se.push((rss / 90.0 / sxx).sqrt());
            }
            let floor = median(&se).unwrap();
            assert!((floor - 0.048).abs() < 0.01, "SE {floor}");
            if !mad_screen(&vel, 3.0, 5).rejected.is_empty() {
                plain_sets += 1;
            }
            let r = mad_screen_with_floor(&vel, 3.0, 5, floor);
            if !r.rejected.is_empty() {
                floored_sets += 1;
            }
            // A real outlier 1 mm/yr (≈ 20 SE) away is still rejected with the floor.
            let mut bad = vel.clone();
            bad[2] += 1.0;
            assert_eq!(mad_screen_with_floor(&bad, 3.0, 5, floor).rejected, vec![2]);
        }
        // Expected: plain screen rejects in a sizeable share of sets (small-sample MAD);
        // floored: ≤ 6·400·0.0027 ≈ 6.5 sets expected at most, allow 3× that.
        assert!(plain_sets >= 40, "plain {plain_sets}/400");
        assert!(floored_sets <= 20, "floored {floored_sets}/400");
    }

    #[test]
    fn floor_reported_and_ignored_when_mad_is_larger() {
        // MAD-1 values: σ̂ = 0.3707 > floor 0.1 → the MAD sets the scale, same decisions.
        let x = [-3.1, -2.8, -3.4, -2.9, -3.0, -7.9, -3.3, -2.6, -3.2, 1.5];
        let r = mad_screen_with_floor(&x, 3.0, 5, 0.1);
        assert!(!r.floor_applied);
        assert_eq!(r.rejected, vec![5, 9]);
        // Floor 1.0 > 0.3707: z(−7.9) = −4.85, z(1.5) = 4.55 — still rejected, scale = floor.
        let r = mad_screen_with_floor(&x, 3.0, 5, 1.0);
        assert!(r.floor_applied && r.sigma_hat == 1.0);
        assert_eq!(r.rejected, vec![5, 9]);
        // MAD = 0 with a floor: screened against the floor.
        let r = mad_screen_with_floor(&[1.0, 1.0, 1.0, 1.0, 9.0], 3.0, 5, 0.5);
        assert_eq!(r.rejected, vec![4]);
        // NaN or negative floors are ignored.
        assert!(!mad_screen_with_floor(&x, 3.0, 5, f64::NAN).floor_applied);
        assert!(!mad_screen_with_floor(&x, 3.0, 5, -1.0).floor_applied);
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
