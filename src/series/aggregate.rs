//! Robust per-epoch aggregate of one structure's points for one geometry (median, interquartile
//! band, point count), and the MAD outlier-screening helper the association stage applies to
//! per-point velocities.
//!
//! Owns robust central values and spreads. It does not select points (association), detect jumps
//! (`jumps`), or fit trends (`fit`).

use serde::Serialize;

use super::stats::{MAD_TO_SIGMA, median, order_key, type7_selected, type7_sorted};

/// Epochs with fewer points than this are marked sparse (insar-methods.md §4.5 route 2 uses
/// "≥ 3 points per geometry" \[Rec\]; we apply the same floor per epoch).
pub const MIN_POINTS_PER_EPOCH: usize = 3;

/// Robust per-epoch aggregate of several LOS series on the same epochs.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AggregateSeries {
    /// Median LOS displacement per epoch (mm, + towards the satellite); `None` with no valid point.
    pub median_mm: Vec<Option<f64>>,
    /// Lower edge of the band: 25th percentile (mm).
    pub band_lower_mm: Vec<Option<f64>>,
    /// Upper edge of the band: 75th percentile (mm).
    pub band_upper_mm: Vec<Option<f64>>,
    /// Description of the band.
    pub band: &'static str,
    /// Number of valid points per epoch.
    pub n_points: Vec<usize>,
    /// `n_points < MIN_POINTS_PER_EPOCH` (the median is still given, but marked).
    pub sparse: Vec<bool>,
}

/// Per-epoch median, interquartile band and count over the given point series.
///
/// Each series must have one value per epoch (NaN = missing). A series of the wrong length is
/// ignored entirely rather than misaligned (the caller validates lengths upstream).
///
/// # Units
/// mm in, mm out.
///
/// # References
/// insar-methods.md §4.5 route 1 and §5.1 (fit the structure's per-epoch median) \[P, Rec\].
/// Quantiles by linear interpolation between order statistics (type 7), our choice.
pub fn aggregate_epochs(n_epochs: usize, series: &[&[f64]]) -> AggregateSeries {
    aggregate_with(n_epochs, series, true)
}

/// [`aggregate_epochs`] without the interquartile band (`band_lower_mm`/`band_upper_mm` are
/// `None`): the median by selection instead of a sort, for callers that use only the median and
/// the counts (the surroundings' series). Same medians and counts as [`aggregate_epochs`].
pub(crate) fn aggregate_medians(n_epochs: usize, series: &[&[f64]]) -> AggregateSeries {
    aggregate_with(n_epochs, series, false)
}

fn aggregate_with(n_epochs: usize, series: &[&[f64]], band: bool) -> AggregateSeries {
    let mut out = AggregateSeries {
        median_mm: Vec::with_capacity(n_epochs),
        band_lower_mm: Vec::with_capacity(n_epochs),
        band_upper_mm: Vec::with_capacity(n_epochs),
        band: "interquartile range (25th-75th percentile) of the points at each epoch",
        n_points: Vec::with_capacity(n_epochs),
        sparse: Vec::with_capacity(n_epochs),
    };
    let usable: Vec<&&[f64]> = series.iter().filter(|s| s.len() == n_epochs).collect();
    // The finite values of an epoch as integer keys in the order of `f64::total_cmp`
    // ([`order_key`]): integers sort and select with plain comparisons, and the order statistics
    // (hence every quantile) are the same numbers as those of the floats.
    let mut keys: Vec<i64> = Vec::with_capacity(usable.len());
    for e in 0..n_epochs {
        keys.clear();
        keys.extend(
            (usable.iter().map(|s| s[e]))
                .filter(|v| v.is_finite())
                .map(order_key),
        );
        if band {
            // One sort serves the three quantiles (same numbers as `quantile` on each). Three
            // selections in the same buffer instead cost more for the usual 20–100 points
            // (docs/performance.md, session 8).
            keys.sort_unstable();
            let q = |p| type7_sorted(&keys, p);
            out.median_mm.push(q(0.5));
            out.band_lower_mm.push(q(0.25));
            out.band_upper_mm.push(q(0.75));
        } else {
            out.median_mm.push(type7_selected(&mut keys, 0.5));
            out.band_lower_mm.push(None);
            out.band_upper_mm.push(None);
        }
        out.n_points.push(keys.len());
        out.sparse.push(keys.len() < MIN_POINTS_PER_EPOCH);
    }
    out
}

/// Result of MAD outlier screening.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MadScreen {
    /// Median of the finite values.
    pub median: Option<f64>,
    /// Median absolute deviation (unscaled).
    pub mad: Option<f64>,
    /// σ̂ = 1.4826·MAD.
    pub robust_sigma: Option<f64>,
    /// Robust z per input value (`None` for non-finite values or when MAD = 0).
    pub robust_z: Vec<Option<f64>>,
    /// |z| above the threshold (would be rejected).
    pub flagged: Vec<bool>,
    /// Actually rejected (flagged and rejection allowed). Non-finite inputs are rejected.
    pub rejected: Vec<bool>,
    /// Why rejection was not applied, if it was not.
    pub rejection_suppressed_because: Option<String>,
}

/// Default robust-z threshold (insar-methods.md §7.3 \[Rec\]).
pub const MAD_Z_THRESHOLD: f64 = 3.0;
/// Below this many finite values outliers are only flagged, not rejected (insar-methods.md §7.3 \[Rec\]).
pub const MAD_MIN_POINTS_TO_REJECT: usize = 5;

/// MAD outlier screening: `z = (x − med)/(1.4826·MAD)`, reject |z| > threshold.
///
/// MAD = 0 (half or more values identical) → no rejection and no z; fewer than
/// `min_points_to_reject` finite values → flag only. Non-finite values are always rejected (they
/// cannot be used) and get no z.
///
/// # Units
/// Any (typically velocities in mm/yr); z dimensionless.
///
/// # References
/// insar-methods.md §7.3 \[C, Rec\]; MAD-1 check: list (−3.1, …, 1.5) → reject −7.9 and 1.5;
/// Iglewicz & Hoaglin (1993) for the modified z \[M\].
///
/// # Examples
/// ```
/// use plinth::series::aggregate::{mad_screen, MAD_Z_THRESHOLD, MAD_MIN_POINTS_TO_REJECT};
/// let x = [-3.1, -2.8, -3.4, -2.9, -3.0, -7.9, -3.3, -2.6, -3.2, 1.5];
/// let s = mad_screen(&x, MAD_Z_THRESHOLD, MAD_MIN_POINTS_TO_REJECT);
/// assert_eq!(s.rejected.iter().filter(|r| **r).count(), 2);
/// ```
pub fn mad_screen(values: &[f64], z_threshold: f64, min_points_to_reject: usize) -> MadScreen {
    let finite_n = values.iter().filter(|v| v.is_finite()).count();
    let med = median(values);
    let mad = super::stats::mad(values);
    let sigma = mad.map(|m| MAD_TO_SIGMA * m);
    let usable_sigma = sigma.filter(|s| *s > 0.0);
    let robust_z: Vec<Option<f64>> = values
        .iter()
        .map(|v| match (med, usable_sigma) {
            (Some(m), Some(s)) if v.is_finite() => Some((v - m) / s),
            _ => None,
        })
        .collect();
    let flagged: Vec<bool> = robust_z
        .iter()
        .map(|z| z.is_some_and(|z| z.abs() > z_threshold))
        .collect();
    let suppressed = if finite_n == 0 {
        Some("no finite values".to_string())
    } else if usable_sigma.is_none() {
        Some("MAD is zero (half or more values identical): no rejection".to_string())
    } else if finite_n < min_points_to_reject {
        Some(format!(
            "only {finite_n} values (fewer than {min_points_to_reject}): outliers flagged, not rejected"
        ))
    } else {
        None
    };
    let rejected = values
        .iter()
        .zip(flagged.iter())
        .map(|(v, f)| !v.is_finite() || (suppressed.is_none() && *f))
        .collect();
    MadScreen {
        median: med,
        mad,
        robust_sigma: sigma,
        robust_z,
        flagged,
        rejected,
        rejection_suppressed_because: suppressed,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn medians_only_equal_the_full_aggregate() {
        // Uneven point counts per epoch (NaN gaps), odd and even counts, ties.
        let rows: Vec<Vec<f64>> = (0..9)
            .map(|p| {
                (0..12)
                    .map(|e| {
                        if (p + e) % 5 == 0 {
                            f64::NAN
                        } else {
                            ((p * 7 + e * 3) % 11) as f64 * 0.5 - 2.0
                        }
                    })
                    .collect()
            })
            .collect();
        let series: Vec<&[f64]> = rows.iter().map(|r| r.as_slice()).collect();
        let full = aggregate_epochs(12, &series);
        let medians = aggregate_medians(12, &series);
        assert_eq!(full.median_mm, medians.median_mm);
        assert_eq!(full.n_points, medians.n_points);
        assert_eq!(full.sparse, medians.sparse);
        assert!(medians.band_lower_mm.iter().all(Option::is_none));
        assert!(full.band_lower_mm.iter().all(Option::is_some));
        // The aggregate's quantiles are, bit for bit, those of the sorted finite values.
        for e in 0..12 {
            let mut v: Vec<f64> = rows
                .iter()
                .map(|r| r[e])
                .filter(|x| x.is_finite())
                .collect();
            v.sort_by(f64::total_cmp);
            let q = |p| super::super::stats::quantile_sorted(&v, p).map(f64::to_bits);
            assert_eq!(full.median_mm[e].map(f64::to_bits), q(0.5), "epoch {e}");
            assert_eq!(
                full.band_lower_mm[e].map(f64::to_bits),
                q(0.25),
                "epoch {e}"
            );
            assert_eq!(
                full.band_upper_mm[e].map(f64::to_bits),
                q(0.75),
                "epoch {e}"
            );
        }
    }

    /// insar-methods.md §7.3 / Appendix A MAD-1 \[C\].
    #[test]
    fn mad1() {
        let x = [-3.1, -2.8, -3.4, -2.9, -3.0, -7.9, -3.3, -2.6, -3.2, 1.5];
        let s = mad_screen(&x, MAD_Z_THRESHOLD, MAD_MIN_POINTS_TO_REJECT);
        assert!((s.median.unwrap() + 3.05).abs() < 1e-12);
        assert!((s.mad.unwrap() - 0.25).abs() < 1e-12);
        assert!((s.robust_sigma.unwrap() - 0.3707).abs() < 1e-4);
        assert!((s.robust_z[5].unwrap() + 13.09).abs() < 0.01);
        assert!((s.robust_z[9].unwrap() - 12.28).abs() < 0.01);
        let rejected: Vec<usize> = (0..x.len()).filter(|i| s.rejected[*i]).collect();
        assert_eq!(rejected, vec![5, 9]);
        let inliers: Vec<f64> = (0..x.len())
            .filter(|i| !s.rejected[*i])
            .map(|i| x[i])
            .collect();
        let mean = inliers.iter().sum::<f64>() / inliers.len() as f64;
        assert!((mean + 3.0375).abs() < 1e-10);
        assert!((median(&inliers).unwrap() + 3.05).abs() < 1e-12);
        assert!(s.rejection_suppressed_because.is_none());
    }

    #[test]
    fn mad_edge_rules() {
        // MAD = 0 → no rejection
        let s = mad_screen(&[1.0, 1.0, 1.0, 1.0, 9.0], 3.0, 5);
        assert!(s.rejected.iter().all(|r| !r));
        assert!(s.rejection_suppressed_because.is_some());
        // n < 5 → flag only
        let s = mad_screen(&[1.0, 1.1, 0.9, 30.0], 3.0, 5);
        assert!(s.flagged[3] && !s.rejected[3]);
        // NaN rejected, not scored
        let s = mad_screen(&[1.0, f64::NAN, 1.2, 0.9, 1.1, 1.05], 3.0, 5);
        assert!(s.rejected[1] && s.robust_z[1].is_none());
    }

    #[test]
    fn aggregate_median_band_counts() {
        let a = [1.0, 2.0, f64::NAN];
        let b = [3.0, 4.0, 5.0];
        let c = [5.0, f64::NAN, 7.0];
        let d = [7.0, 0.0, f64::NAN];
        let wrong_length = [100.0];
        let agg = aggregate_epochs(3, &[&a, &b, &c, &d, &wrong_length]);
        assert_eq!(agg.n_points, vec![4, 3, 2]);
        assert_eq!(agg.median_mm[0], Some(4.0));
        assert_eq!(agg.band_lower_mm[0], Some(2.5));
        assert_eq!(agg.band_upper_mm[0], Some(5.5));
        assert_eq!(agg.median_mm[1], Some(2.0));
        assert_eq!(agg.sparse, vec![false, false, true]);
        let empty = aggregate_epochs(2, &[]);
        assert_eq!(empty.median_mm, vec![None, None]);
    }
}
