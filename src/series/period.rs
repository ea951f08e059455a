//! Period quantities of one series over an assessment window [t1, t2]: the displacement over the
//! window with its σ, and the LOS velocity with its (AR(1)-adjusted) standard error.
//!
//! Owns the choice of estimator for "how much did this point move over the period"; these values
//! feed the structural metrics (tilt, deflection ratio) downstream. It does not project to the
//! vertical (`project`/`decompose`) and does not screen outliers (`aggregate`).

use std::borrow::Cow;

use serde::Serialize;

use super::fit::{FitError, LineSummary, LinearFit, fit_line_summary, fit_linear};

/// Number of epochs averaged at each end of the window by [`PeriodMethod::LocalMeans`]
/// (insar-methods.md §5.11 \[Rec\]).
pub const LOCAL_MEAN_EPOCHS: usize = 3;

/// Estimator of the period displacement.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum PeriodMethod {
    /// Mean of the 3 valid epochs nearest each end of the window (inside it), differenced.
    ///
    /// Default: model-free, so accelerating or broken movements are not forced onto a line;
    /// averaging three epochs reduces per-epoch noise by about √3 (less under AR(1) correlation,
    /// which the σ accounts for). The effective period runs between the mean dates of the two
    /// groups, slightly shorter than the window; both dates are reported.
    #[default]
    LocalMeans,
    /// Fitted straight line: `v̂·(t2 − t1)`, σ = SE_adj(v̂)·(t2 − t1). Smoother, but imposes a
    /// constant rate.
    FittedLinear,
}

/// Why a period quantity could not be computed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum PeriodError {
    /// Too few valid epochs inside the window.
    #[error("{got} valid epochs inside the window; {needed} needed")]
    TooFewEpochs {
        /// Required number.
        needed: usize,
        /// Available number.
        got: usize,
    },
    /// Window not valid (t2 ≤ t1 or non-finite).
    #[error("assessment window is empty or not finite")]
    BadWindow,
    /// Underlying fit failed.
    #[error(transparent)]
    Fit(#[from] FitError),
}

/// Displacement over the window.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PeriodDisplacement {
    /// Displacement end minus start (mm, sign as the input: LOS + towards the satellite).
    pub displacement_mm: f64,
    /// Its standard deviation (mm).
    pub sigma_mm: f64,
    /// Estimator used.
    pub method: PeriodMethod,
    /// Effective start (years from the time origin): mean time of the first group, or t1.
    pub effective_start_yr: f64,
    /// Effective end: mean time of the last group, or t2.
    pub effective_end_yr: f64,
    /// Valid epochs inside the window.
    pub epochs_in_window: usize,
}

/// Variance factor of the mean of `m` consecutive AR(1) values relative to σ²:
/// `(1/m²)·Σ_i Σ_j ρ^|i−j|`.
fn ar1_mean_variance_factor(m: usize, rho: f64) -> f64 {
    let mut s = 0.0;
    for i in 0..m {
        for j in 0..m {
            s += rho.powi((i as i32 - j as i32).abs());
        }
    }
    s / (m * m) as f64
}

fn window_values<'a>(
    t_yr: &'a [f64],
    d_mm: &'a [f64],
    t1: f64,
    t2: f64,
) -> (Cow<'a, [f64]>, Cow<'a, [f64]>) {
    let keep = |ti: f64, di: f64| ti.is_finite() && di.is_finite() && ti >= t1 && ti <= t2;
    // The common case: every epoch is valid and inside the window (the caller cut it already).
    if t_yr.len() == d_mm.len() && t_yr.iter().zip(d_mm).all(|(&ti, &di)| keep(ti, di)) {
        return (Cow::Borrowed(t_yr), Cow::Borrowed(d_mm));
    }
    let cap = t_yr.len().min(d_mm.len());
    let (mut t, mut d) = (Vec::with_capacity(cap), Vec::with_capacity(cap));
    for (&ti, &di) in t_yr.iter().zip(d_mm) {
        if keep(ti, di) {
            t.push(ti);
            d.push(di);
        }
    }
    (Cow::Owned(t), Cow::Owned(d))
}

/// Per-epoch noise level used for σ: residual SD and lag-1 autocorrelation of a straight-line
/// fit over the window (with non-linear motion this overstates the noise, i.e. is conservative).
fn noise_level(t: &[f64], d: &[f64]) -> Result<LineSummary, FitError> {
    fit_line_summary(t, d)
}

/// Displacement over the window [t1, t2] with its σ.
///
/// Local means: `D = mean(last 3) − mean(first 3)` of the valid epochs inside the window (needs
/// ≥ 6 so that the groups are disjoint); `σ² = σ_e²·f(3, ρ)·2`, where σ_e and ρ = max(r1, 0) come
/// from a straight-line fit over the window and `f` is the AR(1) variance factor of a 3-epoch
/// mean; the two groups are treated as independent (they are far apart in time).
/// Fitted linear: `D = v̂·(t2 − t1)`, `σ = SE_adj·(t2 − t1)` (white-noise SE when SE_adj is not
/// estimable; needs ≥ 3 epochs).
///
/// # Units
/// Times in decimal years from the caller's origin, values mm, result mm.
///
/// # References
/// insar-methods.md §5.11 \[Rec\] (never two single noisy epochs); §5.3 for the AR(1) model.
///
/// # Examples
/// ```
/// use plinth::series::period::{period_displacement, PeriodMethod};
/// let t: Vec<f64> = (0..10).map(|i| i as f64 * 0.1).collect();
/// let d: Vec<f64> = t.iter().map(|t| -5.0 * t).collect();
/// let p = period_displacement(&t, &d, 0.0, 0.9, PeriodMethod::LocalMeans).unwrap();
/// assert!((p.displacement_mm - (-5.0 * 0.7)).abs() < 1e-9); // group means at 0.1 and 0.8
/// ```
pub fn period_displacement(
    t_yr: &[f64],
    d_mm: &[f64],
    t1_yr: f64,
    t2_yr: f64,
    method: PeriodMethod,
) -> Result<PeriodDisplacement, PeriodError> {
    if !(t1_yr.is_finite() && t2_yr.is_finite() && t2_yr > t1_yr) {
        return Err(PeriodError::BadWindow);
    }
    let (t, d) = window_values(t_yr, d_mm, t1_yr, t2_yr);
    period_in_window(&t, &d, t1_yr, t2_yr, method, None)
}

/// [`period_displacement`] on values already cut to the window; `fit` is the straight-line fit
/// of exactly these values when the caller has it (it is then not fitted again).
fn period_in_window(
    t: &[f64],
    d: &[f64],
    t1_yr: f64,
    t2_yr: f64,
    method: PeriodMethod,
    fit: Option<&LineSummary>,
) -> Result<PeriodDisplacement, PeriodError> {
    let owned;
    let n = t.len();
    match method {
        PeriodMethod::LocalMeans => {
            let m = LOCAL_MEAN_EPOCHS;
            if n < 2 * m {
                return Err(PeriodError::TooFewEpochs {
                    needed: 2 * m,
                    got: n,
                });
            }
            // Window values come in time order; a stable sort of a sorted series changes nothing,
            // so the epochs' own order is used then (no index list).
            let idx: Vec<usize> = if t.is_sorted_by(|a, b| a.total_cmp(b).is_le()) {
                [(0..m), (n - m..n)]
                    .into_iter()
                    .flatten()
                    .collect::<Vec<_>>()
            } else {
                let mut idx: Vec<usize> = (0..n).collect();
                idx.sort_by(|a, b| t[*a].total_cmp(&t[*b]));
                idx.drain(m..n - m);
                idx
            };
            let mean = |ids: &[usize], v: &[f64]| ids.iter().map(|i| v[*i]).sum::<f64>() / m as f64;
            let (first, last) = (&idx[..m], &idx[m..]);
            let noise = match fit {
                Some(f) => f,
                None => {
                    owned = noise_level(t, d)?;
                    &owned
                }
            };
            let rho = noise.lag1_autocorrelation.clamp(0.0, 0.999);
            let var = noise.residual_sd_mm.powi(2) * ar1_mean_variance_factor(m, rho) * 2.0;
            Ok(PeriodDisplacement {
                displacement_mm: mean(last, d) - mean(first, d),
                sigma_mm: var.sqrt(),
                method,
                effective_start_yr: mean(first, t),
                effective_end_yr: mean(last, t),
                epochs_in_window: n,
            })
        }
        PeriodMethod::FittedLinear => {
            let f = match fit {
                Some(f) => f,
                None => {
                    owned = fit_line_summary(t, d)?;
                    &owned
                }
            };
            let dt = t2_yr - t1_yr;
            let se = f
                .se_velocity_adjusted_mm_per_yr
                .unwrap_or(f.se_velocity_mm_per_yr);
            Ok(PeriodDisplacement {
                displacement_mm: f.velocity_mm_per_yr * dt,
                sigma_mm: se * dt,
                method,
                effective_start_yr: t1_yr,
                effective_end_yr: t2_yr,
                epochs_in_window: n,
            })
        }
    }
}

/// [`period_displacement`] and [`window_velocity`] of one series together: the window is cut
/// once and the straight line fitted once (both use the same fit of the same values), so the
/// results are those of the two functions called separately.
///
/// # Units
/// Years, mm, mm/yr (as the two functions).
///
/// # References
/// insar-methods.md §5.2–5.3, §5.11 \[C, Rec\].
pub fn period_and_velocity(
    t_yr: &[f64],
    d_mm: &[f64],
    t1_yr: f64,
    t2_yr: f64,
    method: PeriodMethod,
) -> (
    Result<PeriodDisplacement, PeriodError>,
    Result<LineSummary, PeriodError>,
) {
    if !(t1_yr.is_finite() && t2_yr.is_finite() && t2_yr > t1_yr) {
        return (Err(PeriodError::BadWindow), Err(PeriodError::BadWindow));
    }
    let (t, d) = window_values(t_yr, d_mm, t1_yr, t2_yr);
    let velocity = if t.len() < 3 {
        Err(PeriodError::TooFewEpochs {
            needed: 3,
            got: t.len(),
        })
    } else {
        fit_line_summary(&t, &d).map_err(PeriodError::from)
    };
    // A failed fit is recomputed inside for the period's own error (rare).
    let period = period_in_window(&t, &d, t1_yr, t2_yr, method, velocity.as_ref().ok());
    (period, velocity)
}

/// LOS (or any) velocity over the window by OLS with white-noise and AR(1)-adjusted SE.
///
/// # Units
/// Years, mm, mm/yr.
///
/// # References
/// insar-methods.md §5.2-5.3 \[C, Rec\].
///
/// Needs ≥ 3 valid epochs inside the window; NaN epochs are dropped.
pub fn window_velocity(
    t_yr: &[f64],
    d_mm: &[f64],
    t1_yr: f64,
    t2_yr: f64,
) -> Result<LinearFit, PeriodError> {
    if !(t1_yr.is_finite() && t2_yr.is_finite() && t2_yr > t1_yr) {
        return Err(PeriodError::BadWindow);
    }
    let (t, d) = window_values(t_yr, d_mm, t1_yr, t2_yr);
    if t.len() < 3 {
        return Err(PeriodError::TooFewEpochs {
            needed: 3,
            got: t.len(),
        });
    }
    Ok(fit_linear(&t, &d)?)
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal};

    #[test]
    fn period_and_velocity_equal_the_separate_functions() {
        // Gappy noisy series, windows that leave 0, 2, 4 and all epochs, both methods.
        let t: Vec<f64> = (0..40).map(|i| i as f64 / 30.0).collect();
        let d: Vec<f64> = (0..40)
            .map(|i| {
                if i % 9 == 4 {
                    f64::NAN
                } else {
                    -3.0 * i as f64 / 30.0 + ((i * 37 % 11) as f64 - 5.0) * 0.3
                }
            })
            .collect();
        let windows = [
            (5.0, 6.0),
            (0.0, 0.04),
            (0.0, 0.11),
            (0.0, 2.0),
            (0.2, 0.9),
            (1.0, 0.5),
        ];
        for (t1, t2) in windows {
            for method in [PeriodMethod::LocalMeans, PeriodMethod::FittedLinear] {
                let (p, v) = period_and_velocity(&t, &d, t1, t2, method);
                assert_eq!(p, period_displacement(&t, &d, t1, t2, method), "{t1} {t2}");
                let full = window_velocity(&t, &d, t1, t2);
                assert_eq!(
                    v.map(|s| (
                        s.velocity_mm_per_yr,
                        s.se_velocity_mm_per_yr,
                        s.se_velocity_adjusted_mm_per_yr,
                        s.residual_sd_mm,
                        s.lag1_autocorrelation
                    )),
                    full.map(|f| (
                        f.velocity_mm_per_yr,
                        f.se_velocity_mm_per_yr,
                        f.se_velocity_adjusted_mm_per_yr,
                        f.residual_sd_mm,
                        f.lag1_autocorrelation
                    )),
                    "{t1} {t2}"
                );
            }
        }
    }

    #[test]
    fn ar1_factor() {
        assert!((ar1_mean_variance_factor(3, 0.0) - 1.0 / 3.0).abs() < 1e-12);
        assert!((ar1_mean_variance_factor(3, 1.0) - 1.0).abs() < 1e-12);
        // ρ = 0.5: (3 + 2·(2·0.5 + 0.25))/9 = 5.5/9
        assert!((ar1_mean_variance_factor(3, 0.5) - 5.5 / 9.0).abs() < 1e-12);
    }

    /// Known motion −6 mm/yr + white noise σ = 2 mm (seeded): both estimators within 4σ of the
    /// true displacement over their effective periods; σ of local means ≈ 2·sqrt(2/3) = 1.633.
    #[test]
    fn synthetic_period_displacement() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(99);
        let noise = Normal::new(0.0, 2.0).unwrap();
        let t: Vec<f64> = (0..61).map(|i| 12.0 * i as f64 / 365.25).collect();
        let d: Vec<f64> = t
            .iter()
            .map(|t| -6.0 * t + noise.sample(&mut rng))
            .collect();
        let (t1, t2) = (t[0], t[60]);
        let lm = period_displacement(&t, &d, t1, t2, PeriodMethod::LocalMeans).unwrap();
        let truth = -6.0 * (lm.effective_end_yr - lm.effective_start_yr);
        assert!((lm.displacement_mm - truth).abs() < 4.0 * lm.sigma_mm);
        assert!((lm.sigma_mm - 2.0 * (2.0f64 / 3.0).sqrt()).abs() < 0.5);
        let fl = period_displacement(&t, &d, t1, t2, PeriodMethod::FittedLinear).unwrap();
        assert!((fl.displacement_mm + 6.0 * (t2 - t1)).abs() < 4.0 * fl.sigma_mm);
        assert!(fl.sigma_mm < lm.sigma_mm);
        let v = window_velocity(&t, &d, t1, t2).unwrap();
        assert!((v.velocity_mm_per_yr + 6.0).abs() < 4.0 * v.se_velocity_mm_per_yr);
    }

    #[test]
    fn insufficient_and_bad_windows() {
        let t = [0.0, 0.1, 0.2, 0.3, 0.4];
        let d = [0.0, 1.0, f64::NAN, 3.0, 4.0];
        assert!(matches!(
            period_displacement(&t, &d, 0.0, 0.4, PeriodMethod::LocalMeans),
            Err(PeriodError::TooFewEpochs { needed: 6, got: 4 })
        ));
        assert!(matches!(
            period_displacement(&t, &d, 0.4, 0.0, PeriodMethod::LocalMeans),
            Err(PeriodError::BadWindow)
        ));
        assert!(period_displacement(&t, &d, 0.0, 0.4, PeriodMethod::FittedLinear).is_ok());
        assert!(window_velocity(&t, &d, 0.25, 0.4).is_err());
    }
}
