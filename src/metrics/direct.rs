//! Direct (discrete) Burland & Wroth profile quantities on measured points: the reference
//! algorithm of damage-relations.md §1.2.
//!
//! Owns: segment slopes, the chord and least-squares tilt, pairwise angular distortion with a
//! minimum spacing, angular strain α at interior points, zone splitting where α changes sign,
//! and per-zone Δ and Δ/L from the measured values. It is the cross-check for the smooth-fit
//! estimator of `profile.rs` (which the structure metrics report); it is exact on dense,
//! low-noise profiles (wall-line surveys, greenfield predictions) and noisy on sparse InSAR.
//! It does not project points on an axis.

use serde::Serialize;

use super::profile::DeflectionMode;

/// Which rigid tilt β is measured from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum TiltEstimator {
    /// Chord through the first and last points.
    Chord,
    /// Slope of the least-squares line through all points (§1.2 default).
    LeastSquares,
}

/// Angular distortion of one pair of points.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PairBeta {
    /// Chainage of the first point (m).
    pub from_x_m: f64,
    /// Chainage of the second point (m).
    pub to_x_m: f64,
    /// β = θ − ω (dimensionless), signed.
    pub beta: f64,
}

/// One zone of the discrete profile.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DirectZone {
    /// Sagging or hogging (the larger of Δ_sag, Δ_hog; sagging on a tie).
    pub mode: DeflectionMode,
    /// Zone start chainage (m).
    pub start_x_m: f64,
    /// Zone end chainage (m).
    pub end_x_m: f64,
    /// L = end − start (m).
    pub length_m: f64,
    /// Δ of the governing mode (mm, ≥ 0).
    pub relative_deflection_mm: f64,
    /// Chainage of that offset (m); the zone start when Δ = 0.
    pub at_x_m: f64,
    /// Δ/L, signed: + sagging, − hogging.
    pub deflection_ratio: f64,
}

/// All §1.2 outputs for one profile.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DirectProfile {
    /// Adjacent segment slopes θ_k (dimensionless).
    pub segment_slopes: Vec<f64>,
    /// Chord tilt ω_c (dimensionless).
    pub tilt_chord: f64,
    /// Least-squares tilt ω_ls (dimensionless).
    pub tilt_least_squares: f64,
    /// Estimator used for β.
    pub tilt_estimator: TiltEstimator,
    /// β for the chain of pairs at least `d_min` apart.
    pub betas: Vec<PairBeta>,
    /// The β of largest magnitude (signed); `None` when no pair is `d_min` apart.
    pub beta_max: Option<PairBeta>,
    /// (chainage m, α) at interior points; α + sagging (dimensionless).
    pub angular_strains: Vec<(f64, f64)>,
    /// Zones in chainage order.
    pub zones: Vec<DirectZone>,
    /// Largest settlement (mm).
    pub max_settlement_mm: f64,
    /// Smallest settlement (mm).
    pub min_settlement_mm: f64,
    /// Largest |s_{k+1} − s_k| between adjacent points (mm).
    pub max_adjacent_differential_mm: f64,
}

/// Why the direct algorithm cannot run.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum DirectError {
    #[error("direct profile needs at least 3 points, got {0}")]
    TooFewPoints(usize),
    #[error("chainage and settlement lists differ in length")]
    LengthMismatch,
    #[error("non-finite chainage or settlement")]
    NonFinite,
    #[error("two points share chainage {x_m} m")]
    DuplicateChainage { x_m: f64 },
}

/// Burland & Wroth quantities of a discrete settlement profile (damage-relations.md §1.2).
///
/// Steps: θ_k = (s_{k+1} − s_k)/(x_{k+1} − x_k); ω chord or least squares; β = θ − ω on a chain
/// of pairs, each starting where the previous ended and reaching the first point at least
/// `d_min_m` further on; α_k = (s_k − s_{k−1})/(x_k − x_{k−1}) + (s_k − s_{k+1})/(x_{k+1} − x_k);
/// |α| < `alpha_noise` is treated as 0; where the sign of α changes between successive
/// non-zero values the boundary is the point of smallest |α| between them; per zone the chord
/// through its end points gives d_k = s_k − c(x_k), Δ_sag = max(d_k, 0), Δ_hog = max(−d_k, 0).
///
/// Points are sorted by chainage first. Tiny zones are not merged here: `alpha_noise` is the
/// noise control (§1.2 step 5 \[Rec\]).
///
/// # Units
/// x in m, s in mm (+ down); θ, ω, β, α dimensionless (mm/m·1e-3); Δ in mm.
///
/// # References
/// damage-relations.md §1.2 \[Rec; P\] and §1.1 (Burland & Wroth 1974 definitions \[M\]); checks
/// §8.1-A, B, C \[D\].
///
/// # Examples
/// ```
/// use plinth::metrics::direct::{direct_profile, TiltEstimator};
/// // damage-relations.md §8.1-A: symmetric sagging, Δ = 10 mm, DR = 5e-4.
/// let p = direct_profile(&[0.0, 5.0, 10.0, 15.0, 20.0], &[0.0, 6.0, 10.0, 6.0, 0.0],
///                        5.0, TiltEstimator::LeastSquares, 0.0).unwrap();
/// assert!((p.zones[0].deflection_ratio - 5.0e-4).abs() < 1e-12);
/// ```
pub fn direct_profile(
    x_m: &[f64],
    s_mm: &[f64],
    d_min_m: f64,
    estimator: TiltEstimator,
    alpha_noise: f64,
) -> Result<DirectProfile, DirectError> {
    if x_m.len() != s_mm.len() {
        return Err(DirectError::LengthMismatch);
    }
    let n = x_m.len();
    if n < 3 {
        return Err(DirectError::TooFewPoints(n));
    }
    if x_m.iter().chain(s_mm).any(|v| !v.is_finite()) {
        return Err(DirectError::NonFinite);
    }
    let mut idx: Vec<usize> = (0..n).collect();
    idx.sort_by(|&a, &b| x_m[a].total_cmp(&x_m[b]));
    let x: Vec<f64> = idx.iter().map(|&i| x_m[i]).collect();
    let s: Vec<f64> = idx.iter().map(|&i| s_mm[i]).collect();
    for w in x.windows(2) {
        if w[1] - w[0] <= 0.0 {
            return Err(DirectError::DuplicateChainage { x_m: w[0] });
        }
    }
    let slope = |i: usize, j: usize| (s[j] - s[i]) / (x[j] - x[i]) * 1e-3;
    let segment_slopes: Vec<f64> = (0..n - 1).map(|k| slope(k, k + 1)).collect();
    let tilt_chord = slope(0, n - 1);
    let tilt_ls = ls_slope(&x, &s) * 1e-3;
    let omega = match estimator {
        TiltEstimator::Chord => tilt_chord,
        TiltEstimator::LeastSquares => tilt_ls,
    };

    let mut betas = Vec::new();
    let mut k = 0;
    while k < n - 1 {
        let Some(j) = (k + 1..n).find(|&j| x[j] - x[k] >= d_min_m) else {
            break;
        };
        betas.push(PairBeta {
            from_x_m: x[k],
            to_x_m: x[j],
            beta: slope(k, j) - omega,
        });
        k = j;
    }
    let beta_max = betas
        .iter()
        .copied()
        .max_by(|a, b| a.beta.abs().total_cmp(&b.beta.abs()));

    let alpha: Vec<f64> = (1..n - 1)
        .map(|k| {
            ((s[k] - s[k - 1]) / (x[k] - x[k - 1]) + (s[k] - s[k + 1]) / (x[k + 1] - x[k])) * 1e-3
        })
        .collect();
    let angular_strains: Vec<(f64, f64)> = (1..n - 1).map(|k| (x[k], alpha[k - 1])).collect();

    // Zone boundaries (indices into x).
    let sign = |a: f64| {
        if a.abs() < alpha_noise || a == 0.0 {
            0
        } else if a > 0.0 {
            1
        } else {
            -1
        }
    };
    let mut bounds = vec![0usize];
    let mut last_nonzero: Option<usize> = None; // index into alpha
    for (ai, &a) in alpha.iter().enumerate() {
        let sg = sign(a);
        if sg == 0 {
            continue;
        }
        if let Some(prev) = last_nonzero {
            if sign(alpha[prev]) != sg {
                // Point of smallest |α| between prev and ai (inclusive).
                let best = (prev..=ai)
                    .min_by(|&p, &q| alpha[p].abs().total_cmp(&alpha[q].abs()))
                    .unwrap_or(prev);
                let point = best + 1;
                if point > *bounds.last().unwrap_or(&0) && point < n - 1 {
                    bounds.push(point);
                }
            }
        }
        last_nonzero = Some(ai);
    }
    bounds.push(n - 1);
    let zones = bounds
        .windows(2)
        .map(|w| discrete_zone(&x, &s, w[0], w[1]))
        .collect();

    let max_adjacent_differential_mm = s
        .windows(2)
        .map(|w| (w[1] - w[0]).abs())
        .fold(0.0, f64::max);
    Ok(DirectProfile {
        segment_slopes,
        tilt_chord,
        tilt_least_squares: tilt_ls,
        tilt_estimator: estimator,
        betas,
        beta_max,
        angular_strains,
        zones,
        max_settlement_mm: s.iter().copied().fold(f64::NEG_INFINITY, f64::max),
        min_settlement_mm: s.iter().copied().fold(f64::INFINITY, f64::min),
        max_adjacent_differential_mm,
    })
}

/// Largest |β_ij| = |(s_j − s_i)/(x_j − x_i) − ω| over **all** pairs at least `min_spacing_m`
/// apart (insar-methods.md §7.7 direct estimator).
///
/// # Units
/// x in m, s in mm, ω and β dimensionless.
///
/// # References
/// insar-methods.md §7.7 \[Rec\]; check BLD-1 (§7.11 \[C\]): with ω = p1 = 0.1578e-3 and Δs ≥ 5 m
/// the largest is β = −2.744e-4 between points 2 and 5 (9.007 m apart).
///
/// Degenerate input: no pair far enough apart, mismatched lengths or non-finite values → `None`.
pub fn pairwise_beta_max(
    x_m: &[f64],
    s_mm: &[f64],
    omega: f64,
    min_spacing_m: f64,
) -> Option<PairBeta> {
    if x_m.len() != s_mm.len() || x_m.iter().chain(s_mm).any(|v| !v.is_finite()) {
        return None;
    }
    let mut best: Option<PairBeta> = None;
    for i in 0..x_m.len() {
        for j in 0..x_m.len() {
            let dx = x_m[j] - x_m[i];
            if dx < min_spacing_m || dx <= 0.0 {
                continue;
            }
            let beta = (s_mm[j] - s_mm[i]) / dx * 1e-3 - omega;
            if best.is_none_or(|b| beta.abs() > b.beta.abs()) {
                best = Some(PairBeta {
                    from_x_m: x_m[i],
                    to_x_m: x_m[j],
                    beta,
                });
            }
        }
    }
    best
}

fn ls_slope(x: &[f64], s: &[f64]) -> f64 {
    let n = x.len() as f64;
    let mx = x.iter().sum::<f64>() / n;
    let ms = s.iter().sum::<f64>() / n;
    let sxx: f64 = x.iter().map(|v| (v - mx) * (v - mx)).sum();
    let sxs: f64 = x.iter().zip(s).map(|(a, b)| (a - mx) * (b - ms)).sum();
    if sxx > 0.0 { sxs / sxx } else { 0.0 }
}

fn discrete_zone(x: &[f64], s: &[f64], a: usize, b: usize) -> DirectZone {
    let len = x[b] - x[a];
    let chord = |k: usize| s[a] + (s[b] - s[a]) * (x[k] - x[a]) / len;
    let (mut sag, mut sag_x) = (0.0_f64, x[a]);
    let (mut hog, mut hog_x) = (0.0_f64, x[a]);
    for k in a + 1..b {
        let d = s[k] - chord(k);
        if d > sag {
            sag = d;
            sag_x = x[k];
        }
        if -d > hog {
            hog = -d;
            hog_x = x[k];
        }
    }
    let (mode, delta, at, sign) = if hog > sag {
        (DeflectionMode::Hogging, hog, hog_x, -1.0)
    } else {
        (DeflectionMode::Sagging, sag, sag_x, 1.0)
    };
    DirectZone {
        mode,
        start_x_m: x[a],
        end_x_m: x[b],
        length_m: len,
        relative_deflection_mm: delta,
        at_x_m: at,
        deflection_ratio: sign * delta / len * 1e-3,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::metrics::axes::principal_axes;
    use crate::metrics::test_support::{bld1_footprint, bld1_points};

    /// damage-relations.md §8 tolerance: relative 1e-4 on the figures given.
    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() <= 1e-4 * b.abs().max(1e-12)
    }

    const X: [f64; 5] = [0.0, 5.0, 10.0, 15.0, 20.0];

    #[test]
    fn case_8_1_a_symmetric_sagging() {
        // damage-relations.md §8.1-A [D].
        let p = direct_profile(
            &X,
            &[0.0, 6.0, 10.0, 6.0, 0.0],
            5.0,
            TiltEstimator::LeastSquares,
            0.0,
        )
        .unwrap();
        for (got, want) in p
            .segment_slopes
            .iter()
            .zip([1.2e-3, 0.8e-3, -0.8e-3, -1.2e-3])
        {
            assert!(close(*got, want));
        }
        assert!(p.tilt_chord.abs() < 1e-15 && p.tilt_least_squares.abs() < 1e-15);
        assert!(close(p.beta_max.unwrap().beta.abs(), 1.2e-3));
        for ((_, a), want) in p.angular_strains.iter().zip([0.4e-3, 1.6e-3, 0.4e-3]) {
            assert!(close(*a, want));
        }
        assert_eq!(p.zones.len(), 1);
        assert_eq!(p.zones[0].mode, DeflectionMode::Sagging);
        assert!(close(p.zones[0].relative_deflection_mm, 10.0));
        assert!(close(p.zones[0].deflection_ratio, 5.0e-4));
        assert_eq!(p.max_settlement_mm, 10.0);
        assert_eq!(p.max_adjacent_differential_mm, 6.0);
    }

    #[test]
    fn case_8_1_b_tilt_invariance() {
        // damage-relations.md §8.1-B [D]: same profile plus rigid tilt 0.5e-3.
        for est in [TiltEstimator::Chord, TiltEstimator::LeastSquares] {
            let p = direct_profile(&X, &[0.0, 8.5, 15.0, 13.5, 10.0], 5.0, est, 0.0).unwrap();
            assert!(close(p.tilt_chord, 0.5e-3) && close(p.tilt_least_squares, 0.5e-3));
            for (b, want) in p.betas.iter().zip([1.2e-3, 0.8e-3, -0.8e-3, -1.2e-3]) {
                assert!(close(b.beta, want), "{b:?}");
            }
            assert!(close(p.zones[0].relative_deflection_mm, 10.0));
            assert!(close(p.zones[0].deflection_ratio, 5.0e-4));
        }
    }

    #[test]
    fn case_8_1_c_half_gaussian() {
        // damage-relations.md §8.1-C [D]: s = 20·exp(−x²/200) at x = 0, 5, …, 30.
        let x: Vec<f64> = (0..7).map(|i| 5.0 * i as f64).collect();
        let s: Vec<f64> = x.iter().map(|x| 20.0 * (-x * x / 200.0).exp()).collect();
        let c = direct_profile(&x, &s, 5.0, TiltEstimator::Chord, 0.0).unwrap();
        assert!(close(c.tilt_chord, -0.65926e-3));
        assert!(close(c.tilt_least_squares, -0.73071e-3));
        let want_chord = [0.18925, -0.44460, -0.46825, -0.09801, 0.29367, 0.52795];
        for (b, w) in c.betas.iter().zip(want_chord) {
            assert!(close(b.beta, w * 1e-3), "{b:?} vs {w}");
        }
        assert!(close(c.beta_max.unwrap().beta, 0.52795e-3));
        let l = direct_profile(&x, &s, 5.0, TiltEstimator::LeastSquares, 0.0).unwrap();
        assert!(close(l.beta_max.unwrap().beta, 0.59940e-3));
        let want_alpha = [0.63385, 0.02365, -0.37024, -0.39168, -0.23428];
        for ((_, a), w) in c.angular_strains.iter().zip(want_alpha) {
            assert!(close(*a, w * 1e-3), "{a} vs {w}");
        }
        // Boundary at x = 10 (smaller |α| of the pair 10/15).
        assert_eq!(c.zones.len(), 2);
        let (z0, z1) = (&c.zones[0], &c.zones[1]);
        assert_eq!((z0.start_x_m, z0.end_x_m), (0.0, 10.0));
        assert_eq!(z0.mode, DeflectionMode::Sagging);
        assert!(close(z0.relative_deflection_mm, 1.5846));
        assert_eq!(z0.at_x_m, 5.0);
        assert!(close(z0.deflection_ratio, 1.5846e-4));
        assert_eq!((z1.start_x_m, z1.end_x_m), (10.0, 30.0));
        assert_eq!(z1.mode, DeflectionMode::Hogging);
        assert!(close(z1.relative_deflection_mm, 3.4697));
        assert_eq!(z1.at_x_m, 20.0);
        assert!(close(z1.deflection_ratio, -1.7349e-4));
    }

    #[test]
    fn bld1_pairwise_beta() {
        // insar-methods.md §7.11 [C]: with ω = p1 = 0.1578e-3 and Δs ≥ 5 m the largest |β| is
        // −2.744e-4 between points 2 and 5 (9.007 m apart). Tolerance ±1 in the 4th digit.
        let ax = principal_axes(&bld1_footprint()).unwrap().principal;
        let pts = bld1_points();
        let x: Vec<f64> = pts.iter().map(|p| ax.coordinate_m(p.x_m, p.y_m)).collect();
        let s: Vec<f64> = pts.iter().map(|p| p.settlement_mm).collect();
        let b = pairwise_beta_max(&x, &s, 0.1578e-3, 5.0).unwrap();
        assert!((b.beta - (-2.744e-4)).abs() < 1e-7, "{b:?}");
        assert!((b.to_x_m - b.from_x_m - 9.007).abs() < 1e-3);
    }

    #[test]
    fn degenerate_inputs() {
        assert_eq!(
            direct_profile(&[0.0, 1.0], &[0.0, 1.0], 1.0, TiltEstimator::Chord, 0.0),
            Err(DirectError::TooFewPoints(2))
        );
        assert!(matches!(
            direct_profile(
                &[0.0, 1.0, 1.0],
                &[0.0, 1.0, 2.0],
                1.0,
                TiltEstimator::Chord,
                0.0
            ),
            Err(DirectError::DuplicateChainage { .. })
        ));
        assert!(pairwise_beta_max(&[0.0, 1.0], &[0.0, 1.0], 0.0, 5.0).is_none());
    }
}
