//! Uncertainty of the structure metrics from the points' measurement noise.
//!
//! Owns: the seeded Monte Carlo perturbation of the points' settlements and the summary of a
//! sample of metric values (median, standard error, 5–95 % interval). It does not know which
//! metrics are computed: `mod.rs` passes a closure that recomputes them for each draw.
//!
//! # Method (choice)
//! Monte Carlo over the points' σ (insar-methods.md §7.10 \[Rec\]): each draw replaces every point's
//! settlement S_i by S_i + σ_i·z_i with z_i ~ N(0, 1) independent, and recomputes tilt, the
//! profiles and the zones; the spread of the draws is the uncertainty *from the stated
//! measurement noise*. It is used rather than (only) the least-squares covariance because Δ/L
//! and β go through a maximum over zones, a possible zone split and a sign (hog/sag) — all
//! nonlinear, so linear propagation misstates them near zero and near a split.
//!
//! The least-squares standard errors (from the residual scatter, `tilt.rs`, `profile.rs`) are
//! reported beside it. The two answer different questions: the Monte Carlo assumes the σ_i
//! are right and the model fits; the least-squares SE uses the scatter actually present. When
//! the residual RMS clearly exceeds the σ_i (understated σ, façade/roof mixtures, model misfit)
//! the Monte Carlo understates the uncertainty — the evidence grade looks at that ratio.
//!
//! Points are perturbed independently (no spatial correlation of the noise: atmospheric
//! residuals are correlated over km, so over one building they are nearly common-mode and
//! cancel in differential metrics, insar-methods.md §6.6). LOS values for the strain are not
//! perturbed; the strain carries its own formal SE (`strain.rs`).
//!
//! Determinism: `rand_chacha::ChaCha8Rng` seeded from the configuration; draws are generated
//! point by point in input order, so the same input and seed give the same numbers everywhere.

use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use serde::Serialize;

use super::MetricPoint;
use crate::series::stats::{from_key, order_key, type7_sorted};

/// Summary of a sample of one metric.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Spread {
    /// Median of the draws (same unit as the metric).
    pub median: f64,
    /// Standard deviation of the draws (n − 1 denominator): the Monte Carlo standard error.
    pub se: f64,
    /// 5 % quantile.
    pub p05: f64,
    /// 95 % quantile.
    pub p95: f64,
    /// Number of draws where the metric could be computed.
    pub draws_used: usize,
}

/// Summarise finite values: median, SE, 5 % and 95 % quantiles (linear interpolation between
/// order statistics, "type 7" of Hyndman & Fan 1996).
///
/// # Units
/// Those of the values.
///
/// # References
/// Hyndman & Fan (1996), "Sample quantiles in statistical packages" (from memory).
///
/// # Examples
/// ```
/// use plinth::metrics::uncertainty::spread;
/// let s = spread(&[1.0, 2.0, 3.0, 4.0, 5.0]).unwrap();
/// assert_eq!(s.median, 3.0);
/// assert!((s.p05 - 1.2).abs() < 1e-12 && (s.p95 - 4.8).abs() < 1e-12);
/// assert!((s.se - 2.5f64.sqrt()).abs() < 1e-12);
/// ```
///
/// Degenerate input: fewer than two finite values → `None` (non-finite values are skipped).
pub fn spread(values: &[f64]) -> Option<Spread> {
    // Sorted as `total_cmp` order keys (integers sort faster than floats through a comparator),
    // then back. Unstable sort: keys that compare equal are bit-identical floats, so the order
    // (and the sum below) is the same as a stable sort's.
    let mut keys: Vec<i64> = (values.iter().copied())
        .filter(|x| x.is_finite())
        .map(order_key)
        .collect();
    if keys.len() < 2 {
        return None;
    }
    keys.sort_unstable();
    let q = |p| type7_sorted(&keys, p);
    let (median, p05, p95) = (q(0.5)?, q(0.05)?, q(0.95)?);
    let v: Vec<f64> = keys.iter().copied().map(from_key).collect();
    let n = v.len() as f64;
    let mean = v.iter().sum::<f64>() / n;
    let var = v.iter().map(|x| (x - mean) * (x - mean)).sum::<f64>() / (n - 1.0);
    Some(Spread {
        median,
        se: var.sqrt(),
        p05,
        p95,
        draws_used: v.len(),
    })
}

/// Run `draws` Monte Carlo draws: perturb each point's settlement by N(0, σ_i²) and call
/// `evaluate` on the perturbed points; results are returned in draw order.
///
/// # Units
/// Settlement and σ in mm.
///
/// # References
/// insar-methods.md §7.10 \[Rec\].
pub fn monte_carlo<T>(
    points: &[MetricPoint],
    draws: usize,
    seed: u64,
    mut evaluate: impl FnMut(&[MetricPoint]) -> T,
) -> Vec<T> {
    let mut work = points.to_vec();
    monte_carlo_settlements(points, draws, seed, |s| {
        for (w, v) in work.iter_mut().zip(s) {
            w.settlement_mm = *v;
        }
        evaluate(&work)
    })
}

/// [`monte_carlo`] for evaluations that need only the perturbed settlements: `evaluate` gets
/// S_i + σ_i·z_i in the points' order (one buffer reused across draws). Same seed, same
/// numbers as [`monte_carlo`].
///
/// # Units
/// Settlement and σ in mm.
///
/// # References
/// insar-methods.md §7.10 \[Rec\].
pub fn monte_carlo_settlements<T>(
    points: &[MetricPoint],
    draws: usize,
    seed: u64,
    mut evaluate: impl FnMut(&[f64]) -> T,
) -> Vec<T> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut work: Vec<f64> = points.iter().map(|p| p.settlement_mm).collect();
    let mut out = Vec::with_capacity(draws);
    for _ in 0..draws {
        for (w, p) in work.iter_mut().zip(points) {
            let z: f64 = StandardNormal.sample(&mut rng);
            *w = p.settlement_mm + p.sigma_mm * z;
        }
        out.push(evaluate(&work));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn monte_carlo_is_seeded_and_has_the_right_spread() {
        // One point with σ = 2 mm: the draws' SD must be 2 mm within sampling error
        // (SE of an SD from 4000 normal draws ≈ 2/sqrt(2·4000) = 0.022 mm; tolerance 5 SE).
        let p = [MetricPoint::vertical(0.0, 0.0, 5.0, 2.0, 0)];
        let a = monte_carlo(&p, 4000, 7, |w| w[0].settlement_mm);
        let b = monte_carlo(&p, 4000, 7, |w| w[0].settlement_mm);
        assert_eq!(a, b, "same seed, same draws");
        let c = monte_carlo(&p, 10, 8, |w| w[0].settlement_mm);
        assert_ne!(a[..10], c[..], "different seed, different draws");
        let s = spread(&a).unwrap();
        assert!((s.se - 2.0).abs() < 0.11, "{s:?}");
        assert!((s.median - 5.0).abs() < 0.2);
        // 5–95 % of N(5, 2²): 5 ∓ 1.6449·2 = 1.710 / 8.290 (normal quantile, from tables).
        assert!((s.p05 - 1.710).abs() < 0.25 && (s.p95 - 8.290).abs() < 0.25);
    }

    #[test]
    fn spread_degenerate() {
        assert!(spread(&[]).is_none());
        assert!(spread(&[1.0, f64::NAN]).is_none());
        assert_eq!(spread(&[2.0, 2.0]).unwrap().se, 0.0);
    }
}
