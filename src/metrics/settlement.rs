//! Settlement statistics of a structure: maximum, minimum, mean, median and the differential
//! settlement max − min with its noise floor.
//!
//! Owns: these order statistics over the points handed in (already the inliers). It does not
//! reject outliers (`outliers.rs`) and does not convert LOS to vertical.

use serde::Serialize;

/// Settlement statistics over one structure's inlier points.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SettlementSummary {
    /// Number of points.
    pub point_count: usize,
    /// Largest settlement (mm, + down).
    pub max_settlement_mm: f64,
    /// Smallest settlement (mm, + down; negative = heave).
    pub min_settlement_mm: f64,
    /// Arithmetic mean settlement (mm).
    pub mean_settlement_mm: f64,
    /// Median settlement (mm).
    pub median_settlement_mm: f64,
    /// δS = max − min (mm).
    pub differential_settlement_mm: f64,
    /// 1-σ noise of δS: sqrt(σ_max² + σ_min²) of the two points involved (mm); equals σ·√2
    /// for equal σ (insar-methods.md §7.5).
    pub differential_noise_floor_mm: f64,
}

/// Settlement statistics of a set of points.
///
/// δS = max S − min S among the points handed in; its noise floor is sqrt(σ_a² + σ_b²) of the
/// two points that give the max and the min (σ·√2 of §7.5 when the σ are equal). Note that the
/// range of n noisy points grows with n even without movement (about 3σ for n = 10); the floor
/// is the two-point value the notes ask for, not a range test.
///
/// # Units
/// mm, settlement positive downwards; all values relative to the dataset's reference point and
/// epoch (insar-methods.md §6.6).
///
/// # References
/// insar-methods.md §7.5 \[Rec\]; check BLD-1 (§7.11 \[C\]): δS = 4.93 mm, mean 6.819 mm, median
/// 6.355 mm.
///
/// # Examples
/// ```
/// use plinth::metrics::settlement::settlement_summary;
/// let s = settlement_summary(&[1.0, 4.0, 2.0], &[1.0, 1.0, 1.0]).unwrap();
/// assert_eq!(s.differential_settlement_mm, 3.0);
/// assert!((s.differential_noise_floor_mm - 2f64.sqrt()).abs() < 1e-12);
/// ```
///
/// Degenerate input: empty input, mismatched lengths or any non-finite value → `None`.
pub fn settlement_summary(settlement_mm: &[f64], sigma_mm: &[f64]) -> Option<SettlementSummary> {
    let n = settlement_mm.len();
    if n == 0 || sigma_mm.len() != n || settlement_mm.iter().chain(sigma_mm).any(|v| !v.is_finite())
    {
        return None;
    }
    let mut i_max = 0;
    let mut i_min = 0;
    for (i, &s) in settlement_mm.iter().enumerate() {
        if s > settlement_mm[i_max] {
            i_max = i;
        }
        if s < settlement_mm[i_min] {
            i_min = i;
        }
    }
    let mean = settlement_mm.iter().sum::<f64>() / n as f64;
    let median = median(settlement_mm)?;
    let floor = if i_max == i_min {
        0.0
    } else {
        sigma_mm[i_max].hypot(sigma_mm[i_min])
    };
    Some(SettlementSummary {
        point_count: n,
        max_settlement_mm: settlement_mm[i_max],
        min_settlement_mm: settlement_mm[i_min],
        mean_settlement_mm: mean,
        median_settlement_mm: median,
        differential_settlement_mm: settlement_mm[i_max] - settlement_mm[i_min],
        differential_noise_floor_mm: floor,
    })
}

/// Median of finite values (mean of the two middle values for even n); `None` when empty or
/// any value is NaN.
pub fn median(values: &[f64]) -> Option<f64> {
    if values.is_empty() || values.iter().any(|v| v.is_nan()) {
        return None;
    }
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    let m = v.len() / 2;
    Some(if v.len() % 2 == 1 {
        v[m]
    } else {
        0.5 * (v[m - 1] + v[m])
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::metrics::test_support::bld1_points;

    #[test]
    fn bld1_settlement_statistics() {
        // insar-methods.md §7.11 [C]: δS = 4.93 mm, mean 6.819 mm, median 6.355 mm
        // (inputs to 2 decimals, so tolerance 5e-4 mm).
        let pts = bld1_points();
        let s: Vec<f64> = pts.iter().map(|p| p.settlement_mm).collect();
        let sig = vec![1.5; s.len()];
        let r = settlement_summary(&s, &sig).unwrap();
        assert!((r.differential_settlement_mm - 4.93).abs() < 5e-4);
        assert!((r.mean_settlement_mm - 6.819).abs() < 5e-4);
        assert!((r.median_settlement_mm - 6.355).abs() < 5e-4);
        assert!((r.max_settlement_mm - 10.18).abs() < 1e-12);
        // σ·√2 with σ = 1.5 mm (§7.5).
        assert!((r.differential_noise_floor_mm - 1.5 * 2f64.sqrt()).abs() < 1e-12);
    }

    #[test]
    fn degenerate_inputs() {
        assert!(settlement_summary(&[], &[]).is_none());
        assert!(settlement_summary(&[1.0, f64::NAN], &[1.0, 1.0]).is_none());
        assert!(settlement_summary(&[1.0], &[1.0, 1.0]).is_none());
        let one = settlement_summary(&[2.0], &[0.5]).unwrap();
        assert_eq!(one.differential_settlement_mm, 0.0);
        assert_eq!(one.differential_noise_floor_mm, 0.0);
    }
}
