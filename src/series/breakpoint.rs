//! Trend change in one displacement series: continuous single-hinge model found by grid search,
//! its sup-F statistic, a parametric AR(1) bootstrap significance test that accounts for the
//! search, and the OLS-CUSUM statistic.
//!
//! Owns the detection and the decision rule for reporting a break. It does not detect
//! discontinuities from phase unwrapping (`jumps`) and does no model selection among linear,
//! seasonal and quadratic models (`fit`).

use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use serde::Serialize;

use super::fit::{
    FitError, check_inputs, effective_sample_size, fit_linear, lag1_autocorrelation, least_squares,
};

/// Settings of the breakpoint test.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BreakpointConfig {
    /// Minimum epochs on each side of a candidate hinge, m (insar-methods.md §5.8: 5 \[Rec\]).
    pub min_points_each_side: usize,
    /// Largest number of bootstrap draws B (default 999, insar-methods.md §5.8 \[Rec\]). The draws
    /// stop earlier once the decision at `alpha` is known (see [`breakpoint_test`]).
    pub bootstrap_draws: usize,
    /// Significance level for p (report only if p < alpha; default 0.05).
    pub alpha: f64,
    /// Minimum |slope change| in units of its AR(1)-adjusted standard error (default 2).
    pub min_change_in_se: f64,
    /// Minimum physically meaningful |slope change| (mm/yr; default 1).
    pub min_slope_change_mm_per_yr: f64,
    /// Base seed; the draw seed is derived from it and from the data, so results are
    /// reproducible and differ between series.
    pub seed: u64,
}

impl Default for BreakpointConfig {
    fn default() -> Self {
        Self {
            min_points_each_side: 5,
            bootstrap_draws: 999,
            alpha: 0.05,
            min_change_in_se: 2.0,
            min_slope_change_mm_per_yr: 1.0,
            seed: 0x5EED_B4EA_C0DE_0001,
        }
    }
}

/// Best continuous single-hinge fit `d = a + b·t + c·max(t − t_b, 0)`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct HingeFit {
    /// 0-based index of the epoch used as hinge.
    pub break_index: usize,
    /// Hinge time t_b (years from the caller's origin).
    pub break_t_yr: f64,
    /// Intercept a (mm).
    pub intercept_mm: f64,
    /// Slope before the hinge, b (mm/yr).
    pub slope_before_mm_per_yr: f64,
    /// White-noise SE of b (mm/yr).
    pub se_slope_before_mm_per_yr: f64,
    /// Slope change c (mm/yr).
    pub slope_change_mm_per_yr: f64,
    /// White-noise SE of c (mm/yr).
    pub se_slope_change_mm_per_yr: f64,
    /// AR(1)-adjusted SE of c, `SE(c)·sqrt((n − 3)/(n_eff − 3))` with r1 from the hinge model's
    /// residuals (mm/yr); `None` when n_eff ≤ 3 (not estimable).
    pub se_slope_change_adjusted_mm_per_yr: Option<f64>,
    /// Lag-1 autocorrelation of the hinge model's residuals.
    pub lag1_autocorrelation: f64,
    /// Slope after the hinge, b + c (mm/yr).
    pub slope_after_mm_per_yr: f64,
    /// White-noise SE of b + c (mm/yr).
    pub se_slope_after_mm_per_yr: f64,
    /// RSS of the straight line (mm²).
    pub rss_linear_mm2: f64,
    /// RSS of the best hinge (mm²).
    pub rss_hinge_mm2: f64,
    /// `F_sup = (RSS_lin − RSS_hinge)/(RSS_hinge/(n − 3))`.
    pub f_sup: f64,
    /// Number of candidate hinges searched.
    pub candidates: usize,
}

/// Largest number of breakpoint candidates searched (evenly thinned above this).
pub const MAX_CANDIDATES: usize = 400;

/// The candidate hinges of one set of dates, with everything that depends on the dates only.
///
/// The search uses the Frisch–Waugh–Lovell identity: with `r_k` the hinge column
/// `h_k = (t − t_k)₊` residualised on `[1, t]`, the hinge model's RSS is
/// `RSS_k = RSS_lin − (r_kᵀy)²/(r_kᵀr_k)`. Since `r_k ⟂ [1, t]`, `r_kᵀy = h_kᵀe` with `e` the
/// straight-line residuals of `y`, and `h_kᵀe = Σ_{i≥k} (τ_i − τ_k)·e_i = F_k − τ_k·E_k` with the
/// suffix sums `E_k = Σ_{i≥k} e_i`, `F_k = Σ_{i≥k} τ_i·e_i` (τ = t − t̄). One pass over the series
/// and one over the candidates therefore give every candidate's RSS: O(n + K) per series instead
/// of O(n·K) for a refit (or a dot product) per candidate. The norms `r_kᵀr_k` depend on the
/// dates only and are computed once, also from suffix sums (of 1, τ and τ² over i > k).
struct HingeBasis {
    /// Centred times τ_i = t_i − t̄ (years).
    tau: Vec<f64>,
    /// Σ τ_i² (years²).
    sxx: f64,
    /// (candidate index k, τ_k, 1/r_kᵀr_k).
    candidates: Vec<(usize, f64, f64)>,
}

impl HingeBasis {
    fn new(t: &[f64], m: usize) -> Self {
        let n = t.len();
        let nf = n as f64;
        let tm = t.iter().sum::<f64>() / nf;
        let tau: Vec<f64> = t.iter().map(|x| x - tm).collect();
        let sxx: f64 = tau.iter().map(|x| x * x).sum();
        let mut candidates = Vec::new();
        if n < 2 * m + 1 || !(sxx > 0.0) {
            return Self {
                tau,
                sxx,
                candidates,
            };
        }
        // At most MAX_CANDIDATES evenly spaced candidates: 10 000 epochs with every epoch a
        // candidate would cost 10⁸ operations for the norms alone. The bootstrap p-value repeats
        // the same (thinned) search on every simulated series, so the test stays calibrated
        // (Plinth choice; stated in docs/methods.md).
        let span = n - 2 * m;
        let step = span.div_ceil(MAX_CANDIDATES).max(1);
        // The norms from suffix sums over i > k (the hinge is zero up to and including k, the
        // times being strictly increasing): with S0 = n − 1 − k, S1 = Σ τ_i, S2 = Σ τ_i²,
        // Σh = S1 − τ_k·S0, Σh² = S2 − 2τ_k·S1 + τ_k²·S0, Σhτ = S2 − τ_k·S1 (Στ = 0), and the
        // residual sum of squares of h on [1, τ] is Σh² − (Σh)²/n − (Σhτ)²/Σττ.
        let wanted: Vec<usize> = (m..=(n - m - 1)).step_by(step).collect();
        let (mut s0, mut s1, mut s2) = (0.0f64, 0.0f64, 0.0f64);
        let mut i = n;
        let mut found = Vec::with_capacity(wanted.len());
        for &k in wanted.iter().rev() {
            while i > k + 1 {
                i -= 1;
                s0 += 1.0;
                s1 += tau[i];
                s2 += tau[i] * tau[i];
            }
            let tk = tau[k];
            let sh = s1 - tk * s0;
            let shh = s2 - 2.0 * tk * s1 + tk * tk * s0;
            let sht = s2 - tk * s1;
            let ss = shh - sh * sh / nf - sht * sht / sxx;
            // Round-off can leave a tiny positive remainder where the exact value is 0 (a
            // hinge that is a straight line over the data): treat it as 0.
            if ss > 1e-12 * shh {
                found.push((k, tk, 1.0 / ss));
            }
        }
        found.reverse();
        candidates = found;
        Self {
            tau,
            sxx,
            candidates,
        }
    }

    /// (best k, RSS at best k, RSS_lin) of `y`, in two passes: one for the straight line
    /// (Σy and Στy; Στ = 0), one backward over the series forming each residual e_i on the fly
    /// with the suffix sums and RSS_lin, meeting the candidates (ascending k) in reverse.
    fn best(&self, y: &[f64]) -> Option<(usize, f64, f64)> {
        let nf = y.len() as f64;
        let (sy, sty) = y
            .iter()
            .zip(&self.tau)
            .fold((0.0, 0.0), |(a, b), (v, x)| (a + v, b + x * v));
        let (ym, slope) = (sy / nf, sty / self.sxx);
        let mut best: Option<(usize, f64)> = None;
        let (mut sum_e, mut sum_te, mut rss_lin) = (0.0, 0.0, 0.0);
        let mut i = y.len();
        let step = |i: usize, sum_e: &mut f64, sum_te: &mut f64, rss: &mut f64| {
            let e = y[i] - ym - slope * self.tau[i];
            *sum_e += e;
            *sum_te += self.tau[i] * e;
            *rss += e * e;
        };
        for &(k, tk, inv_ss) in self.candidates.iter().rev() {
            while i > k {
                i -= 1;
                step(i, &mut sum_e, &mut sum_te, &mut rss_lin);
            }
            let dot = sum_te - tk * sum_e;
            let gain = dot * dot * inv_ss; // RSS_lin − RSS_k
            // `>=` while walking backwards keeps the earliest of equal maxima, as a forward
            // search with `>` would.
            if best.is_none_or(|(_, g)| gain >= g) {
                best = Some((k, gain));
            }
        }
        while i > 0 {
            i -= 1;
            step(i, &mut sum_e, &mut sum_te, &mut rss_lin);
        }
        best.map(|(k, gain)| (k, rss_lin - gain, rss_lin))
    }
}

fn f_sup_of(rss_lin: f64, rss_hinge: f64, n: usize) -> f64 {
    if rss_hinge > 0.0 {
        (rss_lin - rss_hinge) / (rss_hinge / (n as f64 - 3.0))
    } else if rss_lin > 0.0 {
        f64::INFINITY
    } else {
        0.0
    }
}

fn check_sorted(t: &[f64]) -> Result<(), FitError> {
    if t.windows(2).any(|w| !(w[1] > w[0])) {
        return Err(FitError::Degenerate {
            model: "hinge search",
            why: "times must be strictly increasing",
        });
    }
    Ok(())
}

/// Grid search for the continuous single-hinge model over candidates `t_k`,
/// `k = m .. n − m − 1` (0-based).
///
/// The search itself runs on suffix sums (see `HingeBasis`); the chosen hinge is then refitted
/// by least squares for its coefficients and standard errors. The SE of the slope change is also
/// given AR(1)-adjusted, `SE(c)·sqrt((n − 3)/(n_eff − 3))`, `n_eff = n(1 − r1)/(1 + r1)` with r1
/// from the hinge model's own residuals (insar-methods.md §5.3, with the model's 3 parameters in
/// place of 2, as for the other fits).
///
/// # Units
/// Years, mm, mm/yr; F dimensionless.
///
/// # References
/// insar-methods.md §5.8 \[Rec\]; check values Series D (§5.12): k = 47, t_b = 1.5441 yr, slopes
/// −2.305 / −10.16, F_sup = 182.0. Related: Muggeo (2003) segmented regression \[S: cited\].
///
/// F_sup does not follow F(1, n − 3) because the hinge is searched; use [`breakpoint_test`] for
/// significance. Errors: fewer than 2m + 1 epochs, unsorted times, non-finite input.
pub fn hinge_search(t_yr: &[f64], d_mm: &[f64], m: usize) -> Result<HingeFit, FitError> {
    let basis = HingeBasis::new(t_yr, m);
    hinge_search_with(&basis, t_yr, d_mm, m)
}

fn hinge_search_with(
    basis: &HingeBasis,
    t_yr: &[f64],
    d_mm: &[f64],
    m: usize,
) -> Result<HingeFit, FitError> {
    check_inputs(t_yr, d_mm, "hinge search", (2 * m + 1).max(4))?;
    check_sorted(t_yr)?;
    let n = t_yr.len();
    let (k, _, rss_lin) = basis.best(d_mm).ok_or(FitError::Degenerate {
        model: "hinge search",
        why: "no candidate hinge",
    })?;
    let h: Vec<f64> = t_yr.iter().map(|x| (x - t_yr[k]).max(0.0)).collect();
    let ls = least_squares(&[vec![1.0; n], t_yr.to_vec(), h], d_mm, None, "hinge model")?;
    let (b, c) = (ls.coefficients[1], ls.coefficients[2]);
    let var_after = ls.cov(1, 1) + ls.cov(2, 2) + 2.0 * ls.cov(1, 2);
    let r1 = lag1_autocorrelation(&ls.residuals);
    let n_eff = effective_sample_size(n, r1);
    let se_c = ls.se(2);
    let se_c_adj = (n_eff > 3.0).then(|| se_c * ((n as f64 - 3.0) / (n_eff - 3.0)).sqrt());
    Ok(HingeFit {
        break_index: k,
        break_t_yr: t_yr[k],
        intercept_mm: ls.coefficients[0],
        slope_before_mm_per_yr: b,
        se_slope_before_mm_per_yr: ls.se(1),
        slope_change_mm_per_yr: c,
        se_slope_change_mm_per_yr: se_c,
        se_slope_change_adjusted_mm_per_yr: se_c_adj,
        lag1_autocorrelation: r1,
        slope_after_mm_per_yr: b + c,
        se_slope_after_mm_per_yr: var_after.max(0.0).sqrt(),
        rss_linear_mm2: rss_lin,
        rss_hinge_mm2: ls.rss,
        f_sup: f_sup_of(rss_lin, ls.rss, n),
        candidates: basis.candidates.len(),
    })
}

/// Outcome of the bootstrap breakpoint test.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BreakpointTest {
    /// The best hinge (always reported for transparency, significant or not).
    pub hinge: HingeFit,
    /// Bootstrap p-value: `h/L` when the draws stopped at the h-th exceedance after L draws,
    /// else `(1 + #{F_sim ≥ F_obs})/(B + 1)` (Besag & Clifford 1991).
    pub p_value: f64,
    /// AR(1) coefficient used for the null simulations (lag-1 of the linear residuals, clamped
    /// to [0, 0.95]).
    pub null_ar1_phi: f64,
    /// Bootstrap draws made (≤ `max_draws`).
    pub draws: usize,
    /// Largest number of draws B.
    pub max_draws: usize,
    /// Exceedances `#{F_sim ≥ F_obs}` at which the draws stop, h = ⌈alpha·(B + 1)⌉.
    pub stop_at_exceedances: usize,
    /// Seed actually used for the draws.
    pub seed_used: u64,
    /// All three conditions hold: p < alpha, |c| > k·SE_adj(c), |c| > minimum rate.
    pub significant: bool,
    /// Which conditions failed (empty when significant).
    pub not_significant_because: Vec<String>,
}

/// Deterministic 64-bit seed from a base seed and the data (FNV-1a over the bit patterns, then a
/// SplitMix64 finaliser).
pub fn derive_seed(base: u64, t_yr: &[f64], d_mm: &[f64]) -> u64 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for v in t_yr.iter().chain(d_mm.iter()) {
        for byte in v.to_bits().to_le_bytes() {
            h ^= byte as u64;
            h = h.wrapping_mul(0x0000_0100_0000_01b3);
        }
    }
    let mut z = h ^ base;
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

/// Exceedance count h at which the sequential bootstrap stops: `⌈alpha·(B + 1)⌉`, at least 1.
///
/// With this h the sequential test decides exactly as the full test with B draws would:
/// stopping at the h-th exceedance means the full count would be ≥ h, so the full p-value
/// `(1 + count)/(B + 1)` would be ≥ alpha; not stopping leaves the full count itself.
pub fn stop_at_exceedances(alpha: f64, draws: usize) -> usize {
    let h = (alpha * (draws + 1) as f64).ceil();
    if h.is_finite() && h >= 1.0 {
        (h as usize).min(draws + 1)
    } else {
        1
    }
}

/// Sequential Monte Carlo p-value of an observed statistic (Besag & Clifford 1991).
///
/// Draws simulated statistics one at a time until `h` of them are ≥ `observed` or `max_draws`
/// have been made. Stopped at the h-th exceedance after L draws: `p = h/L`; otherwise, with
/// `l < h` exceedances in B draws: `p = (l + 1)/(B + 1)`. Both are valid p-values
/// (P(p ≤ u) ≤ u under the null). Returns (p, draws made).
///
/// # References
/// Besag J. & Clifford P. (1991) Sequential Monte Carlo p-values. Biometrika 78(2):301–304.
pub fn sequential_p_value(
    observed: f64,
    max_draws: usize,
    h: usize,
    mut draw: impl FnMut() -> f64,
) -> (f64, usize) {
    let mut exceed = 0usize;
    for l in 1..=max_draws {
        if draw() >= observed {
            exceed += 1;
            if exceed >= h {
                return (h as f64 / l as f64, l);
            }
        }
    }
    ((exceed + 1) as f64 / (max_draws + 1) as f64, max_draws)
}

/// Single-hinge breakpoint with a parametric AR(1) bootstrap p-value.
///
/// Null model: the OLS straight line; φ = lag-1 autocorrelation of its residuals (clamped to
/// [0, 0.95]: negative values are treated as 0 as in the n_eff rule, and near-unit roots are
/// capped to keep the simulation stationary). Each draw is a stationary AR(1) series with unit
/// marginal SD on the same dates; its F_sup is computed with the same (thinned) grid. F_sup is
/// invariant to adding a straight line and to the scale of the noise, so the fitted line and σ
/// are not added (they would not change any draw's statistic). The lag-1 model assumes regular
/// sampling (§5.3).
///
/// The draws are sequential (Besag & Clifford 1991, [`sequential_p_value`]): they stop at the
/// h-th simulated F_sup ≥ the observed one, h = ⌈alpha·(B + 1)⌉ ([`stop_at_exceedances`]), which
/// gives the same decision at `alpha` as all B draws. A series without a break typically stops
/// after a few dozen draws; a clear break uses all B. Each draw costs O(n + K) (see `HingeBasis`).
///
/// A break is reported (`significant`) only if p < alpha, |c| > `min_change_in_se`·SE_adj(c)
/// (the AR(1)-adjusted SE, matching the AR(1) null) and |c| > `min_slope_change_mm_per_yr`.
///
/// # Units
/// Years, mm, mm/yr.
///
/// # References
/// insar-methods.md §5.8 recommended test \[Rec\] (B = 999); Davies (1987) on nuisance parameters
/// present only under the alternative \[S: cited\]; Besag & Clifford (1991) for the sequential
/// p-value. White-noise 95 % critical values ≈ 7.1 (n = 60-92) \[C\].
pub fn breakpoint_test(
    t_yr: &[f64],
    d_mm: &[f64],
    cfg: &BreakpointConfig,
) -> Result<BreakpointTest, FitError> {
    let basis = HingeBasis::new(t_yr, cfg.min_points_each_side);
    let hinge = hinge_search_with(&basis, t_yr, d_mm, cfg.min_points_each_side)?;
    let n = t_yr.len();
    let lin = fit_linear(t_yr, d_mm)?;
    let phi = lag1_autocorrelation(&lin.residuals_mm).clamp(0.0, 0.95);
    let innovation = (1.0 - phi * phi).sqrt();
    let seed_used = derive_seed(cfg.seed, t_yr, d_mm);
    let mut rng = ChaCha8Rng::seed_from_u64(seed_used);
    let h = stop_at_exceedances(cfg.alpha, cfg.bootstrap_draws);
    let mut y = vec![0.0; n];
    let (p_value, draws) = sequential_p_value(hinge.f_sup, cfg.bootstrap_draws, h, || {
        let mut x: f64 = StandardNormal.sample(&mut rng);
        y[0] = x;
        for yi in y.iter_mut().skip(1) {
            let z: f64 = StandardNormal.sample(&mut rng);
            x = phi * x + innovation * z;
            *yi = x;
        }
        match basis.best(&y) {
            Some((_, rss_h, rss_lin)) => f_sup_of(rss_lin, rss_h.max(0.0), n),
            None => f64::NEG_INFINITY,
        }
    });
    let mut reasons = Vec::new();
    if !(p_value < cfg.alpha) {
        reasons.push(format!(
            "bootstrap p = {p_value:.3} is not below {}",
            cfg.alpha
        ));
    }
    let c = hinge.slope_change_mm_per_yr;
    match hinge.se_slope_change_adjusted_mm_per_yr {
        Some(se_c) if c.abs() > cfg.min_change_in_se * se_c => {}
        Some(se_c) => reasons.push(format!(
            "slope change {c:.2} mm/yr is not larger than {} × its AR(1)-adjusted SE ({se_c:.2} mm/yr)",
            cfg.min_change_in_se
        )),
        None => reasons.push(
            "the SE of the slope change is not estimable (too few effectively independent epochs)"
                .to_string(),
        ),
    }
    if !(c.abs() > cfg.min_slope_change_mm_per_yr) {
        reasons.push(format!(
            "slope change {c:.2} mm/yr is not larger than {} mm/yr",
            cfg.min_slope_change_mm_per_yr
        ));
    }
    Ok(BreakpointTest {
        hinge,
        p_value,
        null_ar1_phi: phi,
        draws,
        max_draws: cfg.bootstrap_draws,
        stop_at_exceedances: h,
        seed_used,
        significant: reasons.is_empty(),
        not_significant_because: reasons,
    })
}

/// OLS-CUSUM statistic.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Cusum {
    /// `max_k |S_k| / (σ̂·√n)`, `S_k` cumulative sum of OLS residuals, `σ̂² = RSS/(n − 2)`.
    pub statistic: f64,
    /// 0-based index of the maximum of |S_k| (a rough break date).
    pub max_index: usize,
    /// Asymptotic 5 % critical value (sup of |Brownian bridge|): 1.358.
    pub critical_value_5pct: f64,
    /// `statistic > 1.358` (white-noise asymptotics; autocorrelation inflates false alarms).
    pub exceeds_5pct: bool,
}

/// OLS-CUSUM of the residuals of a straight-line fit.
///
/// # Units
/// Dimensionless.
///
/// # References
/// Ploberger & Krämer (1992) \[M\]; Page (1954) \[M\]; insar-methods.md §5.8; Series A: 0.4397,
/// Series D: 1.800 with the maximum at index 67 \[C\]. Critical values 1.224 / 1.358 / 1.628
/// (10/5/1 %) \[C\].
///
/// A perfect straight line (σ̂ = 0) returns statistic 0.
pub fn ols_cusum(t_yr: &[f64], d_mm: &[f64]) -> Result<Cusum, FitError> {
    let lin = fit_linear(t_yr, d_mm)?;
    let n = lin.n;
    let mut s = 0.0_f64;
    let mut best = (0usize, 0.0_f64);
    for (i, r) in lin.residuals_mm.iter().enumerate() {
        s += r;
        if s.abs() > best.1 {
            best = (i, s.abs());
        }
    }
    let denom = lin.residual_sd_mm * (n as f64).sqrt();
    let statistic = if denom > 0.0 { best.1 / denom } else { 0.0 };
    Ok(Cusum {
        statistic,
        max_index: best.0,
        critical_value_5pct: 1.358,
        exceeds_5pct: statistic > 1.358,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::series::fit::test_series::*;
    use rand_distr::Normal;

    /// Series D (insar-methods.md §5.12 \[C\]).
    #[test]
    fn series_d_hinge() {
        let (t, d) = series_d();
        let h = hinge_search(&t, &d, 5).unwrap();
        assert_eq!(h.candidates, 82);
        assert!((h.rss_linear_mm2 - 400.8).abs() < 0.1);
        assert_eq!(h.break_index, 47);
        assert!((h.break_t_yr - 1.5441).abs() < 1e-4);
        assert!((h.intercept_mm - 0.2519).abs() < 1e-4);
        assert!((h.slope_before_mm_per_yr + 2.305).abs() < 1e-3);
        assert!((h.slope_change_mm_per_yr + 7.853).abs() < 1e-3);
        assert!((h.se_slope_before_mm_per_yr - 0.3126).abs() < 1e-4);
        assert!((h.se_slope_change_mm_per_yr - 0.5821).abs() < 1e-4);
        assert!((h.slope_after_mm_per_yr + 10.16).abs() < 1e-2);
        assert!((h.se_slope_after_mm_per_yr - 0.3381).abs() < 1e-4);
        assert!((h.rss_hinge_mm2 - 131.6).abs() < 0.1);
        assert!((h.f_sup - 182.0).abs() < 0.1);
        let c = ols_cusum(&t, &d).unwrap();
        assert!((c.statistic - 1.800).abs() < 1e-3);
        assert_eq!(c.max_index, 67);
        assert!(c.exceeds_5pct);
        let test = breakpoint_test(&t, &d, &BreakpointConfig::default()).unwrap();
        assert!(test.significant, "{:?}", test.not_significant_because);
        assert!(test.p_value < 0.05);
    }

    /// Series A CUSUM 0.4397 (no break) \[C\].
    #[test]
    fn series_a_cusum() {
        let (t, d) = series_a();
        let c = ols_cusum(&t, &d).unwrap();
        assert!((c.statistic - 0.4397).abs() < 1e-3);
        assert!(!c.exceeds_5pct);
    }

    /// Synthetic break (seeded Gaussian noise σ = 1.5 mm): hinge time within 4 asymptotic SE
    /// (from the Jacobian of the nonlinear hinge model at the truth, J = [1, t, (t − t_b)₊,
    /// −c·H(t − t_b)], Cov = σ²(JᵀJ)⁻¹), slopes within 4 SE, reported significant; deterministic
    /// for a fixed seed.
    #[test]
    fn synthetic_break_recovered() {
        let mut rng = ChaCha8Rng::seed_from_u64(77);
        let noise = Normal::new(0.0, 1.5).unwrap();
        let t: Vec<f64> = (0..120).map(|i| 12.0 * i as f64 / 365.25).collect();
        let tb = t[70];
        let d: Vec<f64> = t
            .iter()
            .map(|x| -1.0 * x - 6.0 * (x - tb).max(0.0) + noise.sample(&mut rng))
            .collect();
        let cfg = BreakpointConfig {
            bootstrap_draws: 199,
            ..Default::default()
        };
        let r = breakpoint_test(&t, &d, &cfg).unwrap();
        assert!(r.significant);
        let (c_true, sigma) = (-6.0, 1.5);
        let j = nalgebra::DMatrix::from_fn(t.len(), 4, |i, k| match k {
            0 => 1.0,
            1 => t[i],
            2 => (t[i] - tb).max(0.0),
            _ => {
                if t[i] > tb {
                    -c_true
                } else {
                    0.0
                }
            }
        });
        let cov = (j.transpose() * &j).try_inverse().unwrap() * (sigma * sigma);
        let se_tb = cov[(3, 3)].sqrt();
        assert!(
            (r.hinge.break_t_yr - tb).abs() < 4.0 * se_tb,
            "t_b {} vs {tb}, SE {se_tb}",
            r.hinge.break_t_yr
        );
        let h = &r.hinge;
        assert!((h.slope_before_mm_per_yr + 1.0).abs() < 4.0 * h.se_slope_before_mm_per_yr);
        assert!((h.slope_after_mm_per_yr + 7.0).abs() < 4.0 * h.se_slope_after_mm_per_yr);
        let again = breakpoint_test(&t, &d, &cfg).unwrap();
        assert_eq!(again, r);
    }

    /// False-alarm rate on pure white noise (200 seeded series, n = 60, B = 199). The level of
    /// "p < 0.05" with B = 199 is 9/200 = 4.5 %; we accept counts within 3 binomial SDs of 5 %
    /// (10 ± 9.2 → 1..=19). The naive textbook F(1, n − 3) 95 % value 4.01 must alarm
    /// significantly more often than 5 % (≥ 20 of 200, beyond 3 binomial SDs; the notes' point
    /// that the searched statistic needs ≈ 7), showing that the search must be accounted for.
    #[test]
    fn false_alarm_rate_white_noise() {
        let mut rng = ChaCha8Rng::seed_from_u64(4242);
        let t: Vec<f64> = (0..60).map(|i| 12.0 * i as f64 / 365.25).collect();
        let cfg = BreakpointConfig {
            bootstrap_draws: 199,
            ..Default::default()
        };
        let (mut alarms, mut naive) = (0, 0);
        for _ in 0..200 {
            let d: Vec<f64> = t
                .iter()
                .map(|x| {
                    let z: f64 = StandardNormal.sample(&mut rng);
                    2.0 - 3.0 * x + 2.0 * z
                })
                .collect();
            let r = breakpoint_test(&t, &d, &cfg).unwrap();
            if r.p_value < 0.05 {
                alarms += 1;
            }
            if r.hinge.f_sup > 4.01 {
                naive += 1;
            }
        }
        assert!(
            (1..=19).contains(&alarms),
            "bootstrap false alarms {alarms}/200"
        );
        assert!(naive >= 20, "naive false alarms {naive}/200");
    }

    /// The plain search: refit `[1, t, (t − t_k)₊]` by least squares at every candidate (the same
    /// thinned grid) and keep the smallest RSS. Reference for the suffix-sum search.
    fn plain_search(t: &[f64], d: &[f64], m: usize) -> (usize, f64, f64) {
        let n = t.len();
        let span = n - 2 * m;
        let step = span.div_ceil(MAX_CANDIDATES).max(1);
        let lin = least_squares(&[vec![1.0; n], t.to_vec()], d, None, "line").unwrap();
        let mut best: Option<(usize, f64)> = None;
        for k in (m..=(n - m - 1)).step_by(step) {
            let h: Vec<f64> = t.iter().map(|x| (x - t[k]).max(0.0)).collect();
            let ls = least_squares(&[vec![1.0; n], t.to_vec(), h], d, None, "hinge").unwrap();
            if best.is_none_or(|(_, b)| ls.rss < b) {
                best = Some((k, ls.rss));
            }
        }
        let (k, rss) = best.unwrap();
        (k, rss, f_sup_of(lin.rss, rss, n))
    }

    /// Fast (suffix sums) against plain (a least-squares refit per candidate) on fixtures: the
    /// same hinge and F_sup to a relative 1e-9 (rounding only; the two are algebraically equal
    /// by the Frisch–Waugh–Lovell identity). Fixtures: Series A, B, D of insar-methods.md §5.12,
    /// seeded white and AR(1) noise, irregular sampling, and a long series whose grid is thinned.
    #[test]
    fn suffix_sum_search_equals_plain_refits() {
        let mut cases: Vec<(Vec<f64>, Vec<f64>)> = vec![series_a(), series_b(), series_d()];
        let mut rng = ChaCha8Rng::seed_from_u64(9);
        for (n, phi, irregular) in [
            (60, 0.0, false),
            (150, 0.6, false),
            (80, 0.3, true),
            (900, 0.2, false),
        ] {
            let mut t: Vec<f64> = Vec::with_capacity(n);
            let mut x = 0.0f64;
            for i in 0..n {
                let gap = if irregular && i % 7 == 3 { 24.0 } else { 12.0 };
                x += gap / 365.25;
                t.push(x);
            }
            let mut e = 0.0f64;
            let d: Vec<f64> = t
                .iter()
                .map(|ti| {
                    let z: f64 = StandardNormal.sample(&mut rng);
                    e = phi * e + z;
                    1.0 - 4.0 * ti - 3.0 * (ti - t[n / 3]).max(0.0) + 1.5 * e
                })
                .collect();
            cases.push((t, d));
        }
        for (i, (t, d)) in cases.iter().enumerate() {
            let fast = hinge_search(t, d, 5).unwrap();
            let (k, rss, f) = plain_search(t, d, 5);
            assert_eq!(fast.break_index, k, "case {i}");
            assert!((fast.rss_hinge_mm2 - rss).abs() <= 1e-9 * rss, "case {i}");
            assert!(
                (fast.f_sup - f).abs() <= 1e-9 * f,
                "case {i}: {} vs {f}",
                fast.f_sup
            );
            // The per-draw path (`best`) gives the same statistic as the refit.
            let basis = HingeBasis::new(t, 5);
            let (kb, rss_b, rss_lin) = basis.best(d).unwrap();
            assert_eq!(kb, k, "case {i}");
            assert!(
                (f_sup_of(rss_lin, rss_b, t.len()) - f).abs() <= 1e-9 * f,
                "case {i}"
            );
        }
    }

    /// Besag & Clifford (1991) sequential p-value on a fixed stream: stop at the h-th exceedance
    /// with p = h/L, else (l + 1)/(B + 1) (hand-computed).
    #[test]
    fn sequential_p_value_rule() {
        let stream = [1.0, 6.0, 2.0, 7.0, 9.0, 0.5];
        let mut it = stream.iter().copied();
        // observed 5: exceedances at draws 2 and 4 → h = 2 stops at L = 4, p = 2/4.
        assert_eq!(
            sequential_p_value(5.0, 6, 2, || it.next().unwrap()),
            (0.5, 4)
        );
        let mut it = stream.iter().copied();
        // observed 8: one exceedance (draw 5) in B = 6 draws, h = 2 not reached: p = 2/7.
        assert_eq!(
            sequential_p_value(8.0, 6, 2, || it.next().unwrap()),
            (2.0 / 7.0, 6)
        );
        // h = ⌈alpha·(B + 1)⌉: 50 for (0.05, 999), 10 for (0.05, 199), 1 for (0.05, 19).
        assert_eq!(stop_at_exceedances(0.05, 999), 50);
        assert_eq!(stop_at_exceedances(0.05, 199), 10);
        assert_eq!(stop_at_exceedances(0.05, 19), 1);
        assert_eq!(stop_at_exceedances(f64::NAN, 19), 1);
    }

    /// With h = ⌈alpha·(B + 1)⌉ the sequential test decides exactly as the full B-draw test:
    /// checked on 300 seeded streams of uniform statistics against observed values spread over
    /// the range where the decision changes, and the sequential runs never draw more than B.
    #[test]
    fn sequential_decision_equals_full_bootstrap() {
        use rand::Rng;
        let mut rng = ChaCha8Rng::seed_from_u64(5);
        let (b, alpha) = (999usize, 0.05);
        let h = stop_at_exceedances(alpha, b);
        let mut saved = 0usize;
        for j in 0..300 {
            let stream: Vec<f64> = (0..b).map(|_| rng.random::<f64>()).collect();
            let observed = 0.9 + 0.1 * j as f64 / 300.0; // full p from ≈ 0.1 down to ≈ 0.001
            let full =
                (1 + stream.iter().filter(|&&x| x >= observed).count()) as f64 / (b + 1) as f64;
            let mut it = stream.iter().copied();
            let (p, used) = sequential_p_value(observed, b, h, || it.next().unwrap());
            assert_eq!(p < alpha, full < alpha, "stream {j}: {p} vs {full}");
            if used < b {
                assert!(full >= alpha);
                saved += b - used;
            } else {
                assert_eq!(p, full);
            }
        }
        assert!(saved > 0);
    }

    /// The slope-change rule uses the AR(1)-adjusted SE: a threshold set between |c|/SE_adj and
    /// |c|/SE (white noise) makes the break not significant, with the adjusted SE named. Seeded
    /// AR(1) noise φ = 0.7 with a real slope change.
    #[test]
    fn slope_change_rule_uses_ar1_adjusted_se() {
        let mut rng = ChaCha8Rng::seed_from_u64(21);
        let t: Vec<f64> = (0..92).map(|i| 12.0 * i as f64 / 365.25).collect();
        let mut e = 0.0;
        let d: Vec<f64> = t
            .iter()
            .map(|x| {
                let z: f64 = StandardNormal.sample(&mut rng);
                e = 0.7 * e + z;
                -2.0 * x - 6.0 * (x - 1.5).max(0.0) + e
            })
            .collect();
        let h = hinge_search(&t, &d, 5).unwrap();
        assert!(
            h.lag1_autocorrelation > 0.3,
            "r1 {}",
            h.lag1_autocorrelation
        );
        let se_adj = h.se_slope_change_adjusted_mm_per_yr.unwrap();
        let n_eff = effective_sample_size(92, h.lag1_autocorrelation);
        assert!(
            (se_adj - h.se_slope_change_mm_per_yr * (89.0 / (n_eff - 3.0)).sqrt()).abs() < 1e-12
        );
        assert!(se_adj > 1.3 * h.se_slope_change_mm_per_yr);
        let c = h.slope_change_mm_per_yr.abs();
        let k = 0.5 * (c / se_adj + c / h.se_slope_change_mm_per_yr);
        let cfg = BreakpointConfig {
            bootstrap_draws: 99,
            min_change_in_se: k,
            ..Default::default()
        };
        let r = breakpoint_test(&t, &d, &cfg).unwrap();
        assert!(!r.significant);
        assert!(
            r.not_significant_because
                .iter()
                .any(|x| x.contains("AR(1)-adjusted SE")),
            "{:?}",
            r.not_significant_because
        );
    }

    /// Defaults follow insar-methods.md §5.8: B = 999; a clear break draws all B, a series without
    /// one stops early; the same seed gives the same result.
    #[test]
    fn defaults_and_sequential_stopping() {
        let cfg = BreakpointConfig::default();
        assert_eq!(cfg.bootstrap_draws, 999);
        let (t, d) = series_d();
        let r = breakpoint_test(&t, &d, &cfg).unwrap();
        assert_eq!(
            (r.draws, r.max_draws, r.stop_at_exceedances),
            (999, 999, 50)
        );
        assert!(r.p_value < 0.01 && r.significant, "p {}", r.p_value);
        let (t, d) = series_a();
        let r = breakpoint_test(&t, &d, &cfg).unwrap();
        assert!(
            r.draws < 999 && r.p_value >= 0.05,
            "{} draws, p {}",
            r.draws,
            r.p_value
        );
        // Stopped at the 50th exceedance: p = 50/L (Besag & Clifford).
        assert!((r.p_value - 50.0 / r.draws as f64).abs() < 1e-12);
        assert_eq!(breakpoint_test(&t, &d, &cfg).unwrap(), r);
    }

    #[test]
    fn bad_input() {
        let t = [0.0, 0.1, 0.2];
        assert!(hinge_search(&t, &[1.0, 2.0, 3.0], 5).is_err());
        let t: Vec<f64> = (0..20).map(|i| (19 - i) as f64).collect();
        let d = vec![0.0; 20];
        assert!(hinge_search(&t, &d, 5).is_err());
    }
}
