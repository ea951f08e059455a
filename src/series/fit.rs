//! Temporal models fitted to one displacement series: OLS linear velocity with its standard error
//! and the AR(1) effective-sample-size correction, optional annual term, quadratic (acceleration)
//! term, nested-F / AIC / BIC model comparison, and the robust Theil–Sen and Huber fits.
//!
//! Time is in decimal years of 365.25 days from an origin the caller states ([`decimal_years`]);
//! values in mm. The module fits what it is given: epochs with NaN values are the caller's to
//! drop (every function here refuses non-finite input rather than guessing). It does not search
//! for breakpoints (`breakpoint`) or jumps (`jumps`).

use chrono::NaiveDate;
use nalgebra::{DMatrix, DVector};
use serde::Serialize;

use super::stats::{MAD_TO_SIGMA, f_upper_tail, median, order_key, type7_selected};

/// Days per decimal year (insar-methods.md §1.3).
pub const DAYS_PER_YEAR: f64 = 365.25;

/// Decimal years from `origin` to `date` (negative before the origin).
///
/// # Units
/// Years of 365.25 days.
///
/// # References
/// insar-methods.md §1.3, §5.1 \[Rec\].
///
/// # Examples
/// ```
/// use chrono::NaiveDate;
/// use plinth::series::fit::decimal_years;
/// let o = NaiveDate::from_ymd_opt(2020, 1, 1).unwrap();
/// let d = NaiveDate::from_ymd_opt(2021, 1, 1).unwrap();
/// assert!((decimal_years(d, o) - 366.0 / 365.25).abs() < 1e-12);
/// ```
pub fn decimal_years(date: NaiveDate, origin: NaiveDate) -> f64 {
    (date - origin).num_days() as f64 / DAYS_PER_YEAR
}

/// Why a fit could not be made.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum FitError {
    /// Times and values differ in length.
    #[error("{times} times but {values} values")]
    LengthMismatch {
        /// Number of times.
        times: usize,
        /// Number of values.
        values: usize,
    },
    /// Not enough epochs for the model.
    #[error("{model} needs at least {needed} epochs, got {got}")]
    TooFewEpochs {
        /// Model name.
        model: &'static str,
        /// Required number.
        needed: usize,
        /// Given number.
        got: usize,
    },
    /// A time or value is NaN or infinite.
    #[error("epoch {index} has a non-finite time or value")]
    NotFinite {
        /// Index of the offending epoch.
        index: usize,
    },
    /// The design matrix is rank-deficient (e.g. all times equal).
    #[error("{model}: design matrix is rank-deficient ({why})")]
    Degenerate {
        /// Model name.
        model: &'static str,
        /// Reason.
        why: &'static str,
    },
}

pub(crate) fn check_inputs(
    t: &[f64],
    d: &[f64],
    model: &'static str,
    needed: usize,
) -> Result<(), FitError> {
    if t.len() != d.len() {
        return Err(FitError::LengthMismatch {
            times: t.len(),
            values: d.len(),
        });
    }
    if let Some(index) = t
        .iter()
        .zip(d.iter())
        .position(|(a, b)| !a.is_finite() || !b.is_finite())
    {
        return Err(FitError::NotFinite { index });
    }
    if t.len() < needed {
        return Err(FitError::TooFewEpochs {
            model,
            needed,
            got: t.len(),
        });
    }
    Ok(())
}

/// Generic least-squares solution (coefficients, covariance, residuals).
#[derive(Debug, Clone, PartialEq)]
pub struct LeastSquares {
    /// Coefficients in design-column order.
    pub coefficients: Vec<f64>,
    /// Covariance `s²·(XᵀWX)⁻¹`, row-major p×p.
    pub covariance: Vec<f64>,
    /// Residuals `y − Xβ` (unweighted).
    pub residuals: Vec<f64>,
    /// Residual sum of squares (weighted when weights were given).
    pub rss: f64,
    /// Number of observations.
    pub n: usize,
    /// Number of parameters.
    pub p: usize,
}

impl LeastSquares {
    /// Standard error of coefficient `i`.
    pub fn se(&self, i: usize) -> f64 {
        self.covariance[i * self.p + i].max(0.0).sqrt()
    }
    /// Covariance of coefficients `i` and `j`.
    pub fn cov(&self, i: usize, j: usize) -> f64 {
        self.covariance[i * self.p + j]
    }
    /// Residual standard deviation `s = sqrt(RSS/(n − p))`.
    pub fn residual_sd(&self) -> f64 {
        (self.rss / (self.n - self.p) as f64).sqrt()
    }
}

/// (Weighted) least squares by Householder QR of `W^½X` (never the normal equations).
///
/// `columns` are the design columns (each of length n); `weights` optional, > 0. Requires
/// n > p. Covariance uses `s² = RSS/(n − p)`.
pub fn least_squares(
    columns: &[Vec<f64>],
    y: &[f64],
    weights: Option<&[f64]>,
    model: &'static str,
) -> Result<LeastSquares, FitError> {
    let n = y.len();
    let p = columns.len();
    if n <= p {
        return Err(FitError::TooFewEpochs {
            model,
            needed: p + 1,
            got: n,
        });
    }
    let sw: Vec<f64> = match weights {
        Some(w) => w.iter().map(|v| v.max(0.0).sqrt()).collect(),
        None => vec![1.0; n],
    };
    let x = DMatrix::from_fn(n, p, |r, c| columns[c][r] * sw[r]);
    let yw = DVector::from_fn(n, |r, _| y[r] * sw[r]);
    let qr = x.qr();
    let rmat = qr.r();
    let diag: Vec<f64> = (0..p).map(|i| rmat[(i, i)].abs()).collect();
    let dmax = diag.iter().cloned().fold(0.0, f64::max);
    let dmin = diag.iter().cloned().fold(f64::INFINITY, f64::min);
    if !(dmax > 0.0) || dmin <= dmax * 1e-12 {
        return Err(FitError::Degenerate {
            model,
            why: "columns linearly dependent",
        });
    }
    let qty = qr.q().transpose() * &yw;
    let beta = rmat
        .solve_upper_triangular(&qty)
        .ok_or(FitError::Degenerate {
            model,
            why: "triangular solve failed",
        })?;
    let rinv = rmat
        .solve_upper_triangular(&DMatrix::identity(p, p))
        .ok_or(FitError::Degenerate {
            model,
            why: "triangular inverse failed",
        })?;
    let mut residuals = Vec::with_capacity(n);
    let mut rss = 0.0;
    for r in 0..n {
        let fitted: f64 = (0..p).map(|c| columns[c][r] * beta[c]).sum();
        let res = y[r] - fitted;
        rss += (res * sw[r]).powi(2);
        residuals.push(res);
    }
    let s2 = rss / (n - p) as f64;
    let cov = (&rinv * rinv.transpose()) * s2;
    let mut covariance = Vec::with_capacity(p * p);
    for i in 0..p {
        for j in 0..p {
            covariance.push(cov[(i, j)]);
        }
    }
    Ok(LeastSquares {
        coefficients: beta.iter().cloned().collect(),
        covariance,
        residuals,
        rss,
        n,
        p,
    })
}

/// Lag-1 autocorrelation of residuals `r1 = Σ r_i·r_{i+1} / Σ r_i²`; 0 for fewer than 2 values
/// or an all-zero series.
///
/// # References
/// insar-methods.md §5.3 \[C\]. Assumes regular sampling (as the notes state).
pub fn lag1_autocorrelation(residuals: &[f64]) -> f64 {
    let den: f64 = residuals.iter().map(|r| r * r).sum();
    if residuals.len() < 2 || !(den > 0.0) {
        return 0.0;
    }
    let num: f64 = residuals.windows(2).map(|w| w[0] * w[1]).sum();
    num / den
}

/// AR(1) effective sample size `n_eff = n·(1 − r1)/(1 + r1)`, with `r1 < 0` treated as 0.
///
/// # Units
/// Dimensionless count.
///
/// # References
/// insar-methods.md §5.3 (Santer et al. 2000 \[M\]; Zwiers & von Storch 1995 \[S: cited\]).
///
/// # Examples
/// ```
/// use plinth::series::fit::effective_sample_size;
/// // Series A (insar-methods.md §5.12): n = 60, r1 = 0.4026 → n_eff ≈ 25.55
/// assert!((effective_sample_size(60, 0.4026) - 25.55).abs() < 0.01);
/// assert_eq!(effective_sample_size(60, -0.2), 60.0);
/// ```
pub fn effective_sample_size(n: usize, r1: f64) -> f64 {
    let r = r1.clamp(0.0, 0.999_999);
    n as f64 * (1.0 - r) / (1.0 + r)
}

/// AR(1)-adjusted standard error `SE·sqrt((n − 2)/(n_eff − 2))`; `None` ("not estimable") if
/// `n_eff ≤ 2`.
///
/// # References
/// insar-methods.md §5.3 \[Rec\].
pub fn adjusted_se(se: f64, n: usize, n_eff: f64) -> Option<f64> {
    if n_eff <= 2.0 || n < 3 {
        return None;
    }
    Some(se * ((n as f64 - 2.0) / (n_eff - 2.0)).sqrt())
}

/// OLS linear velocity with its standard error and the AR(1) adjustment: the [`LineSummary`]
/// (its fields are read through `Deref` and serialised in place, first), the significance test
/// and the residuals.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LinearFit {
    /// Line, standard errors, residual SD, r1, n_eff and adjusted SE.
    #[serde(flatten)]
    pub line: LineSummary,
    /// `v / SE_adj`.
    pub t_statistic_adjusted: Option<f64>,
    /// Two-sided p of `t_statistic_adjusted` with n_eff − 2 degrees of freedom.
    pub p_value_adjusted: Option<f64>,
    /// `|v| > 2·SE_adj` (insar-methods.md §5.3 default rule \[Rec\]); false when not estimable.
    pub distinguishable_from_zero: bool,
    /// Residuals (mm), in input order.
    #[serde(skip)]
    pub residuals_mm: Vec<f64>,
}

/// OLS straight line `d = a + v·t` with SE, AR(1) r1, n_eff and adjusted SE.
///
/// # Units
/// `t_yr` decimal years, `d_mm` mm; velocity mm/yr.
///
/// # References
/// insar-methods.md §5.2 and §5.3 \[C, Rec\]; check values Series A (§5.12).
///
/// # Examples
/// ```
/// use plinth::series::fit::fit_linear;
/// let t = [0.0, 1.0, 2.0, 3.0];
/// let d = [1.0, -1.0, -3.0, -5.0];
/// let f = fit_linear(&t, &d).unwrap();
/// assert!((f.velocity_mm_per_yr + 2.0).abs() < 1e-12 && (f.intercept_mm - 1.0).abs() < 1e-12);
/// ```
///
/// Errors: fewer than 3 epochs (no residual degree of freedom), non-finite input, all times equal.
pub fn fit_linear(t_yr: &[f64], d_mm: &[f64]) -> Result<LinearFit, FitError> {
    let l = fit_line_summary(t_yr, d_mm)?;
    let residuals_mm: Vec<f64> = t_yr
        .iter()
        .zip(d_mm.iter())
        .map(|(t, d)| d - l.intercept_mm - l.velocity_mm_per_yr * t)
        .collect();
    let v = l.velocity_mm_per_yr;
    let se_adj = l.se_velocity_adjusted_mm_per_yr;
    let t_adj = se_adj.and_then(|se| if se > 0.0 { Some(v / se) } else { None });
    let p_adj = t_adj.map(|t| super::stats::t_two_sided(t, l.effective_n - 2.0));
    Ok(LinearFit {
        line: l,
        t_statistic_adjusted: t_adj,
        p_value_adjusted: p_adj,
        distinguishable_from_zero: se_adj.is_some_and(|se| v.abs() > 2.0 * se),
        residuals_mm,
    })
}

/// The numbers of [`fit_linear`] without the residual series and the significance test: what a
/// per-point velocity and period need, computed without allocating (the residuals are formed on
/// the fly by the same expression, so every number equals [`fit_linear`]'s bit for bit).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct LineSummary {
    /// Number of epochs.
    pub n: usize,
    /// Intercept at t = 0 (mm).
    pub intercept_mm: f64,
    /// Standard error of the intercept (mm).
    pub se_intercept_mm: f64,
    /// Velocity (mm/yr).
    pub velocity_mm_per_yr: f64,
    /// White-noise standard error of the velocity (mm/yr).
    pub se_velocity_mm_per_yr: f64,
    /// Residual standard deviation `s` (mm).
    pub residual_sd_mm: f64,
    /// Residual sum of squares (mm²).
    pub rss_mm2: f64,
    /// Lag-1 autocorrelation of the residuals.
    pub lag1_autocorrelation: f64,
    /// AR(1) effective sample size.
    pub effective_n: f64,
    /// AR(1)-adjusted SE of the velocity (mm/yr); `None` when n_eff ≤ 2 (not estimable).
    pub se_velocity_adjusted_mm_per_yr: Option<f64>,
}

impl std::ops::Deref for LinearFit {
    type Target = LineSummary;
    fn deref(&self) -> &LineSummary {
        &self.line
    }
}

/// OLS straight line `d = a + v·t` with SE, AR(1) r1, n_eff and adjusted SE (as [`fit_linear`],
/// same sources and units), without the residual vector and the p-value.
pub fn fit_line_summary(t_yr: &[f64], d_mm: &[f64]) -> Result<LineSummary, FitError> {
    check_inputs(t_yr, d_mm, "linear fit", 3)?;
    let n = t_yr.len();
    let nf = n as f64;
    let tm = t_yr.iter().sum::<f64>() / nf;
    let dm = d_mm.iter().sum::<f64>() / nf;
    let sxx: f64 = t_yr.iter().map(|t| (t - tm).powi(2)).sum();
    if !(sxx > 0.0) {
        return Err(FitError::Degenerate {
            model: "linear fit",
            why: "all epochs at the same time",
        });
    }
    let sxy: f64 = t_yr
        .iter()
        .zip(d_mm.iter())
        .map(|(t, d)| (t - tm) * (d - dm))
        .sum();
    let v = sxy / sxx;
    let a = dm - v * tm;
    let residual = |i: usize| d_mm[i] - a - v * t_yr[i];
    let rss: f64 = (0..n).map(|i| residual(i) * residual(i)).sum();
    let s = (rss / (nf - 2.0)).sqrt();
    let se_v = s / sxx.sqrt();
    let se_a = s * (1.0 / nf + tm * tm / sxx).sqrt();
    // lag1_autocorrelation of the residuals (its denominator is the RSS).
    let r1 = if n < 2 || !(rss > 0.0) {
        0.0
    } else {
        (0..n - 1)
            .map(|i| residual(i) * residual(i + 1))
            .sum::<f64>()
            / rss
    };
    let n_eff = effective_sample_size(n, r1);
    Ok(LineSummary {
        n,
        intercept_mm: a,
        se_intercept_mm: se_a,
        velocity_mm_per_yr: v,
        se_velocity_mm_per_yr: se_v,
        residual_sd_mm: s,
        rss_mm2: rss,
        lag1_autocorrelation: r1,
        effective_n: n_eff,
        se_velocity_adjusted_mm_per_yr: adjusted_se(se_v, n, n_eff),
    })
}

/// Linear + annual fit `d = a + v·t + s·sin(2πt) + c·cos(2πt)`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AnnualFit {
    /// Number of epochs.
    pub n: usize,
    /// Intercept (mm).
    pub intercept_mm: f64,
    /// Velocity (mm/yr).
    pub velocity_mm_per_yr: f64,
    /// White-noise SE of the velocity (mm/yr).
    pub se_velocity_mm_per_yr: f64,
    /// AR(1)-adjusted SE of the velocity (mm/yr); `None` when not estimable.
    pub se_velocity_adjusted_mm_per_yr: Option<f64>,
    /// Sine coefficient (mm).
    pub sin_mm: f64,
    /// Cosine coefficient (mm).
    pub cos_mm: f64,
    /// Semi-amplitude `A = sqrt(s² + c²)` (mm); peak-to-peak is 2A.
    pub amplitude_mm: f64,
    /// SE of A by the delta method (mm); unreliable when A < 2·SE.
    pub se_amplitude_mm: f64,
    /// `A ≥ 2·SE(A)`.
    pub amplitude_resolved: bool,
    /// Time of the annual maximum, years after the time origin, in [0, 1).
    pub peak_yr: f64,
    /// Same in days (× 365.25).
    pub peak_day: f64,
    /// Residual sum of squares (mm²).
    pub rss_mm2: f64,
    /// Lag-1 autocorrelation of the residuals.
    pub lag1_autocorrelation: f64,
}

/// Linear + annual least-squares fit with amplitude, peak time and SE(A) by the delta method.
///
/// `A = sqrt(s² + c²)`, `t_pk = atan2(s, c)/(2π) mod 1`, `SE(A) = sqrt(J Σ_sc Jᵀ)`,
/// `J = (s/A, c/A)`.
///
/// # Units
/// `t_yr` decimal years from a **calendar** origin (the phase is relative to it); mm; mm/yr.
///
/// # References
/// insar-methods.md §5.4 \[C, Rec\]; check values Series B (§5.12).
///
/// The "fit only when span ≥ 2 yr" rule is applied by the caller ([`AnnualPolicy`]); this function
/// fits whatever it is given. Needs at least 5 epochs. With A = 0 the SE is taken as
/// `sqrt((var s + var c)/2)` (the delta method is undefined there).
pub fn fit_linear_annual(t_yr: &[f64], d_mm: &[f64]) -> Result<AnnualFit, FitError> {
    check_inputs(t_yr, d_mm, "linear + annual fit", 5)?;
    let two_pi = 2.0 * std::f64::consts::PI;
    let cols = vec![
        vec![1.0; t_yr.len()],
        t_yr.to_vec(),
        t_yr.iter().map(|t| (two_pi * t).sin()).collect(),
        t_yr.iter().map(|t| (two_pi * t).cos()).collect(),
    ];
    let ls = least_squares(&cols, d_mm, None, "linear + annual fit")?;
    let (s, c) = (ls.coefficients[2], ls.coefficients[3]);
    let amp = (s * s + c * c).sqrt();
    let se_amp = if amp > 0.0 {
        let (js, jc) = (s / amp, c / amp);
        (js * js * ls.cov(2, 2) + 2.0 * js * jc * ls.cov(2, 3) + jc * jc * ls.cov(3, 3))
            .max(0.0)
            .sqrt()
    } else {
        ((ls.cov(2, 2) + ls.cov(3, 3)) / 2.0).max(0.0).sqrt()
    };
    let peak_yr = (s.atan2(c) / two_pi).rem_euclid(1.0);
    let r1 = lag1_autocorrelation(&ls.residuals);
    let n = ls.n;
    let se_v = ls.se(1);
    // AR(1) adjustment with the model's own parameter count (n − p instead of n − 2).
    let n_eff = effective_sample_size(n, r1);
    let se_adj = if n_eff > 4.0 {
        Some(se_v * ((n as f64 - 4.0) / (n_eff - 4.0)).sqrt())
    } else {
        None
    };
    Ok(AnnualFit {
        n,
        intercept_mm: ls.coefficients[0],
        velocity_mm_per_yr: ls.coefficients[1],
        se_velocity_mm_per_yr: se_v,
        se_velocity_adjusted_mm_per_yr: se_adj,
        sin_mm: s,
        cos_mm: c,
        amplitude_mm: amp,
        se_amplitude_mm: se_amp,
        amplitude_resolved: amp >= 2.0 * se_amp,
        peak_yr,
        peak_day: peak_yr * DAYS_PER_YEAR,
        rss_mm2: ls.rss,
        lag1_autocorrelation: r1,
    })
}

/// When to fit the annual term.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum AnnualPolicy {
    /// Fit only when the span is at least [`ANNUAL_MIN_SPAN_YR`] (insar-methods.md §5.4, §6.4 \[Rec\]).
    #[default]
    Auto,
    /// Always fit (span permitting the parameter count).
    On,
    /// Never fit.
    Off,
}

/// Minimum span for the automatic annual term (years).
pub const ANNUAL_MIN_SPAN_YR: f64 = 2.0;

impl AnnualPolicy {
    /// Whether to fit for a series spanning `span_yr` years.
    pub fn applies(self, span_yr: f64) -> bool {
        match self {
            AnnualPolicy::Auto => span_yr >= ANNUAL_MIN_SPAN_YR,
            AnnualPolicy::On => true,
            AnnualPolicy::Off => false,
        }
    }
}

/// Quadratic fit `d = a + v0·t + c2·t²`; acceleration `a_c = 2·c2`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct QuadraticFit {
    /// Number of epochs.
    pub n: usize,
    /// Intercept at t = 0 (mm).
    pub intercept_mm: f64,
    /// Velocity at t = 0 (mm/yr); the origin is the caller's time origin.
    pub velocity_at_origin_mm_per_yr: f64,
    /// Velocity at the mean epoch `v0 + 2·c2·t̄` (mm/yr).
    pub velocity_at_mean_epoch_mm_per_yr: f64,
    /// Mean epoch t̄ (years from the origin).
    pub mean_epoch_yr: f64,
    /// Quadratic coefficient c2 (mm/yr²).
    pub quadratic_mm_per_yr2: f64,
    /// Acceleration `2·c2` (mm/yr²).
    pub acceleration_mm_per_yr2: f64,
    /// White-noise SE of the acceleration (mm/yr²).
    pub se_acceleration_mm_per_yr2: f64,
    /// AR(1)-adjusted SE of the acceleration (mm/yr²), with n − 3 in place of n − 2.
    pub se_acceleration_adjusted_mm_per_yr2: Option<f64>,
    /// Residual sum of squares (mm²).
    pub rss_mm2: f64,
    /// Lag-1 autocorrelation of the residuals.
    pub lag1_autocorrelation: f64,
}

/// Quadratic least squares; acceleration = 2·c2 (design column t², not ½t²).
///
/// # Units
/// Years, mm, mm/yr, mm/yr².
///
/// # References
/// insar-methods.md §5.5 \[C\]; check values Series C (§5.12): a_c = −2.851 mm/yr², SE 0.3730.
///
/// Needs at least 4 epochs. Solved by QR, so the time origin need not be centred for stability.
pub fn fit_quadratic(t_yr: &[f64], d_mm: &[f64]) -> Result<QuadraticFit, FitError> {
    check_inputs(t_yr, d_mm, "quadratic fit", 4)?;
    let cols = vec![
        vec![1.0; t_yr.len()],
        t_yr.to_vec(),
        t_yr.iter().map(|t| t * t).collect(),
    ];
    let ls = least_squares(&cols, d_mm, None, "quadratic fit")?;
    let tm = t_yr.iter().sum::<f64>() / t_yr.len() as f64;
    let r1 = lag1_autocorrelation(&ls.residuals);
    let n = ls.n;
    let n_eff = effective_sample_size(n, r1);
    let se_acc = 2.0 * ls.se(2);
    let se_adj = if n_eff > 3.0 {
        Some(se_acc * ((n as f64 - 3.0) / (n_eff - 3.0)).sqrt())
    } else {
        None
    };
    Ok(QuadraticFit {
        n,
        intercept_mm: ls.coefficients[0],
        velocity_at_origin_mm_per_yr: ls.coefficients[1],
        velocity_at_mean_epoch_mm_per_yr: ls.coefficients[1] + 2.0 * ls.coefficients[2] * tm,
        mean_epoch_yr: tm,
        quadratic_mm_per_yr2: ls.coefficients[2],
        acceleration_mm_per_yr2: 2.0 * ls.coefficients[2],
        se_acceleration_mm_per_yr2: se_acc,
        se_acceleration_adjusted_mm_per_yr2: se_adj,
        rss_mm2: ls.rss,
        lag1_autocorrelation: r1,
    })
}

/// Nested F statistic `((RSS_s − RSS_b)/(p_b − p_s)) / (RSS_b/(n − p_b))`; `None` when undefined.
///
/// # References
/// insar-methods.md §5.6 \[C\]; Series B: F(seasonal vs linear) = 104.9 (2, 88 dof).
pub fn nested_f(
    rss_small: f64,
    p_small: usize,
    rss_big: f64,
    p_big: usize,
    n: usize,
) -> Option<f64> {
    if p_big <= p_small || n <= p_big || !(rss_big > 0.0) || !rss_small.is_finite() {
        return None;
    }
    Some(((rss_small - rss_big) / (p_big - p_small) as f64) / (rss_big / (n - p_big) as f64))
}

/// AR(1)-adjusted F: `F / ((1 + r1)/(1 − r1))`, with `r1 < 0` treated as 0 (r1 from the larger
/// model's residuals).
///
/// # References
/// insar-methods.md §5.6 and §5.8 \[Rec\].
pub fn ar1_adjusted_f(f: f64, r1: f64) -> f64 {
    let r = r1.clamp(0.0, 0.999_999);
    f / ((1.0 + r) / (1.0 - r))
}

/// Akaike information criterion `n·ln(RSS/n) + 2p`; `None` when RSS ≤ 0.
///
/// # References
/// insar-methods.md §5.6; Series B: linear 149.5, linear + annual 41.31.
pub fn aic(rss: f64, n: usize, p: usize) -> Option<f64> {
    if !(rss > 0.0) || n == 0 {
        return None;
    }
    Some(n as f64 * (rss / n as f64).ln() + 2.0 * p as f64)
}

/// Bayesian information criterion `n·ln(RSS/n) + p·ln(n)`; `None` when RSS ≤ 0.
///
/// # References
/// insar-methods.md §5.6; Series B: linear 154.5, linear + annual 51.39.
pub fn bic(rss: f64, n: usize, p: usize) -> Option<f64> {
    if !(rss > 0.0) || n == 0 {
        return None;
    }
    Some(n as f64 * (rss / n as f64).ln() + p as f64 * (n as f64).ln())
}

/// One candidate model in a comparison.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModelScore {
    /// Model label ("linear", "linear+annual", "quadratic", "quadratic+annual").
    pub model: &'static str,
    /// Number of parameters.
    pub parameters: usize,
    /// Residual sum of squares (mm²).
    pub rss_mm2: f64,
    /// AIC.
    pub aic: Option<f64>,
    /// BIC.
    pub bic: Option<f64>,
    /// Nested F against the linear model (None for linear itself).
    pub f_vs_linear: Option<f64>,
    /// Same divided by the AR(1) factor of this model's residuals.
    pub f_vs_linear_ar1_adjusted: Option<f64>,
    /// Upper-tail p of the adjusted F (F distribution with (p − 2, n − p) dof).
    pub p_value_ar1_adjusted: Option<f64>,
}

/// Comparison of linear / annual / quadratic models on one series.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModelComparison {
    /// All candidates fitted.
    pub candidates: Vec<ModelScore>,
    /// Selected model: lowest BIC among the linear model and those whose AR(1)-adjusted F test
    /// against the linear model is significant at 5 %.
    pub selected: &'static str,
}

/// Fit linear, quadratic and (when `with_annual`) linear+annual and quadratic+annual models and
/// select one by BIC, adding terms only when their AR(1)-adjusted nested F against the linear
/// model is significant at 5 %.
///
/// # References
/// insar-methods.md §5.6 \[Rec\]; Series B check: linear 149.5/154.5, linear+annual 41.31/51.39,
/// quadratic+annual 43.16/55.77 → linear+annual.
///
/// Choice: every richer model is tested against the linear one (not step by step), which is the
/// simplest rule consistent with §5.6; documented here as our reading of it.
pub fn compare_models(
    t_yr: &[f64],
    d_mm: &[f64],
    with_annual: bool,
) -> Result<ModelComparison, FitError> {
    check_inputs(t_yr, d_mm, "model comparison", 6)?;
    let n = t_yr.len();
    let two_pi = 2.0 * std::f64::consts::PI;
    let one = vec![1.0; n];
    let lin = t_yr.to_vec();
    let sq: Vec<f64> = t_yr.iter().map(|t| t * t).collect();
    let sn: Vec<f64> = t_yr.iter().map(|t| (two_pi * t).sin()).collect();
    let cs: Vec<f64> = t_yr.iter().map(|t| (two_pi * t).cos()).collect();
    let mut specs: Vec<(&'static str, Vec<Vec<f64>>)> = vec![
        ("linear", vec![one.clone(), lin.clone()]),
        ("quadratic", vec![one.clone(), lin.clone(), sq.clone()]),
    ];
    if with_annual {
        specs.push((
            "linear+annual",
            vec![one.clone(), lin.clone(), sn.clone(), cs.clone()],
        ));
        specs.push(("quadratic+annual", vec![one, lin, sq, sn, cs]));
    }
    let mut candidates = Vec::new();
    let mut rss_lin = f64::NAN;
    for (model, cols) in specs {
        let ls = match least_squares(&cols, d_mm, None, "model comparison") {
            Ok(ls) => ls,
            Err(_) => continue,
        };
        let p = cols.len();
        if model == "linear" {
            rss_lin = ls.rss;
        }
        let f = if model == "linear" {
            None
        } else {
            nested_f(rss_lin, 2, ls.rss, p, n)
        };
        let r1 = lag1_autocorrelation(&ls.residuals);
        let f_adj = f.map(|f| ar1_adjusted_f(f, r1));
        let p_adj = f_adj.map(|f| f_upper_tail(f, (p - 2) as f64, (n - p) as f64));
        candidates.push(ModelScore {
            model,
            parameters: p,
            rss_mm2: ls.rss,
            aic: aic(ls.rss, n, p),
            bic: bic(ls.rss, n, p),
            f_vs_linear: f,
            f_vs_linear_ar1_adjusted: f_adj,
            p_value_ar1_adjusted: p_adj,
        });
    }
    let selected = candidates
        .iter()
        .filter(|c| c.model == "linear" || c.p_value_ar1_adjusted.is_some_and(|p| p < 0.05))
        .filter(|c| c.bic.is_some())
        .min_by(|a, b| {
            a.bic
                .unwrap_or(f64::INFINITY)
                .total_cmp(&b.bic.unwrap_or(f64::INFINITY))
        })
        .map(|c| c.model)
        .unwrap_or("linear");
    Ok(ModelComparison {
        candidates,
        selected,
    })
}

/// Theil–Sen line: slope = median of pairwise slopes, intercept = median of `d − b·t`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct TheilSen {
    /// Median pairwise slope (mm/yr).
    pub velocity_mm_per_yr: f64,
    /// Median of `d_i − b·t_i` (mm).
    pub intercept_mm: f64,
    /// Number of pairs with distinct times.
    pub pairs: usize,
}

/// Largest series length for which Theil–Sen uses every pair of epochs.
pub const THEIL_SEN_MAX_EPOCHS: usize = 1000;

/// Theil–Sen robust slope (breakdown point ≈ 29 %).
///
/// # Units
/// Years, mm, mm/yr.
///
/// # References
/// Theil (1950); Sen (1968) \[M\]; insar-methods.md §5.7; Series F: slope −8.522, intercept 2.331
/// (435 pairs).
///
/// Pairs with equal times are skipped. O(n²): intended for n up to a few hundred.
pub fn theil_sen(t_yr: &[f64], d_mm: &[f64]) -> Result<TheilSen, FitError> {
    check_inputs(t_yr, d_mm, "Theil-Sen", 2)?;
    let n = t_yr.len();
    // All n(n−1)/2 pairs up to THEIL_SEN_MAX_EPOCHS epochs; above that, all pairs of every
    // stride-th epoch (deterministic thinning of the series), so memory stays bounded
    // (10 000 epochs would otherwise need 50 million slopes, 400 MB). Plinth choice.
    let stride = if n > THEIL_SEN_MAX_EPOCHS {
        (n / THEIL_SEN_MAX_EPOCHS).max(1)
    } else {
        1
    };
    // The slopes as `total_cmp` order keys (`stats::order_key`): the median is selected among
    // integers, the same order statistic as among the floats.
    let mut slopes = Vec::with_capacity((n * (n - 1) / 2 / (stride * stride)).min(1 << 22));
    let mut pairs = 0;
    for i in (0..n).step_by(stride) {
        for j in ((i + stride)..n).step_by(stride) {
            let dt = t_yr[j] - t_yr[i];
            if dt != 0.0 {
                pairs += 1;
                let slope = (d_mm[j] - d_mm[i]) / dt;
                if slope.is_finite() {
                    slopes.push(order_key(slope));
                }
            }
        }
    }
    let b = type7_selected(&mut slopes, 0.5).ok_or(FitError::Degenerate {
        model: "Theil-Sen",
        why: "all epochs at the same time",
    })?;
    let mut offsets: Vec<i64> = t_yr
        .iter()
        .zip(d_mm.iter())
        .map(|(t, d)| d - b * t)
        .filter(|v| v.is_finite())
        .map(order_key)
        .collect();
    let a = type7_selected(&mut offsets, 0.5).ok_or(FitError::Degenerate {
        model: "Theil-Sen",
        why: "no offsets",
    })?;
    Ok(TheilSen {
        velocity_mm_per_yr: b,
        intercept_mm: a,
        pairs,
    })
}

/// Huber M-estimate of a straight line.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct HuberFit {
    /// Intercept (mm).
    pub intercept_mm: f64,
    /// Velocity (mm/yr).
    pub velocity_mm_per_yr: f64,
    /// Final robust scale σ̂ = 1.4826·MAD of the residuals (mm).
    pub robust_scale_mm: f64,
    /// Number of reweighting iterations performed.
    pub iterations: usize,
    /// Whether the coefficient change fell below 1e-10.
    pub converged: bool,
    /// Epoch indices with |r| > 3σ̂ (flagged for the report, not deleted).
    pub outlier_indices: Vec<usize>,
}

/// Tuning constant k of the Huber weights (95 % Gaussian efficiency).
pub const HUBER_K: f64 = 1.345;

/// Huber IRLS line fit: start from OLS; σ̂ = 1.4826·median(|r − median r|) re-estimated each
/// iteration; `w = 1` if `|r/σ̂| ≤ k`, else `k/|r/σ̂|`; weighted LS; stop when both coefficients
/// change by < 1e-10 (at most 200 iterations).
///
/// # Units
/// Years, mm, mm/yr.
///
/// # References
/// Huber (1964) \[M\]; insar-methods.md §5.7; Series F: (2.261, −8.428).
///
/// If σ̂ becomes 0 (more than half the residuals identical) the current fit is returned as
/// converged: the weights are undefined and the majority already fits exactly.
pub fn huber_line(t_yr: &[f64], d_mm: &[f64], k: f64) -> Result<HuberFit, FitError> {
    check_inputs(t_yr, d_mm, "Huber fit", 3)?;
    let ols = fit_linear(t_yr, d_mm)?;
    let (mut a, mut b) = (ols.intercept_mm, ols.velocity_mm_per_yr);
    let cols = vec![vec![1.0; t_yr.len()], t_yr.to_vec()];
    let resid = |a: f64, b: f64| -> Vec<f64> {
        t_yr.iter()
            .zip(d_mm.iter())
            .map(|(t, d)| d - a - b * t)
            .collect()
    };
    let scale_of = |r: &[f64]| -> f64 {
        let m = median(r).unwrap_or(0.0);
        let dev: Vec<f64> = r.iter().map(|x| (x - m).abs()).collect();
        MAD_TO_SIGMA * median(&dev).unwrap_or(0.0)
    };
    let mut iterations = 0;
    let mut converged = false;
    let mut scale = scale_of(&resid(a, b));
    while iterations < 200 {
        let r = resid(a, b);
        scale = scale_of(&r);
        if !(scale > 0.0) {
            converged = true;
            break;
        }
        let w: Vec<f64> = r
            .iter()
            .map(|ri| {
                let u = (ri / scale).abs();
                if u <= k { 1.0 } else { k / u }
            })
            .collect();
        let ls = least_squares(&cols, d_mm, Some(&w), "Huber fit")?;
        iterations += 1;
        let (na, nb) = (ls.coefficients[0], ls.coefficients[1]);
        let change = (na - a).abs().max((nb - b).abs());
        a = na;
        b = nb;
        if change < 1e-10 {
            converged = true;
            break;
        }
    }
    let r = resid(a, b);
    let outlier_indices = r
        .iter()
        .enumerate()
        .filter(|(_, ri)| scale > 0.0 && ri.abs() > 3.0 * scale)
        .map(|(i, _)| i)
        .collect();
    Ok(HuberFit {
        intercept_mm: a,
        velocity_mm_per_yr: b,
        robust_scale_mm: scale,
        iterations,
        converged,
        outlier_indices,
    })
}

#[cfg(test)]
pub(crate) mod test_series {
    //! Deterministic test series of insar-methods.md §5.12 \[C\].

    /// e_i = 1.5·sin(0.7·i) + 0.8·sin(2.9·i + 1.0)
    pub fn noise(i: usize) -> f64 {
        let x = i as f64;
        1.5 * (0.7 * x).sin() + 0.8 * (2.9 * x + 1.0).sin()
    }
    /// t_i = 12·i/365.25
    pub fn t(i: usize) -> f64 {
        12.0 * i as f64 / 365.25
    }
    pub fn times(n: usize) -> Vec<f64> {
        (0..n).map(t).collect()
    }
    pub fn series_a() -> (Vec<f64>, Vec<f64>) {
        let t = times(60);
        let d = (0..60).map(|i| 1.0 - 6.0 * t[i] + noise(i)).collect();
        (t, d)
    }
    pub fn series_b() -> (Vec<f64>, Vec<f64>) {
        let t = times(92);
        let tp = 2.0 * std::f64::consts::PI;
        let d = (0..92)
            .map(|i| -4.0 * t[i] + 2.5 * (tp * t[i]).sin() + 1.0 * (tp * t[i]).cos() + noise(i))
            .collect();
        (t, d)
    }
    pub fn series_c() -> (Vec<f64>, Vec<f64>) {
        let t = times(92);
        let d = (0..92)
            .map(|i| -3.0 * t[i] - 1.5 * t[i] * t[i] + noise(i))
            .collect();
        (t, d)
    }
    pub fn series_d() -> (Vec<f64>, Vec<f64>) {
        let t = times(92);
        let d = (0..92)
            .map(|i| -2.0 * t[i] - 8.0 * (t[i] - 1.5).max(0.0) + noise(i))
            .collect();
        (t, d)
    }
    pub fn series_f() -> (Vec<f64>, Vec<f64>) {
        let t = times(30);
        let mut d: Vec<f64> = (0..30).map(|i| 2.0 - 8.0 * t[i] + 0.5 * noise(i)).collect();
        d[7] += 15.0;
        d[19] -= 12.0;
        (t, d)
    }
}

#[cfg(test)]
mod tests {
    use super::test_series::*;
    use super::*;

    /// The allocation-free summary gives fit_linear's numbers bit for bit (same expressions in
    /// the same order), on a trend with noise, a flat series and a short one.
    #[test]
    fn line_summary_equals_the_full_fit() {
        let t: Vec<f64> = (0..150).map(|i| i as f64 * 12.0 / 365.25).collect();
        let noisy: Vec<f64> = t
            .iter()
            .enumerate()
            .map(|(i, t)| -4.2 * t + ((i * 37 % 11) as f64 - 5.0) * 0.7)
            .collect();
        let flat = vec![1.5; 150];
        for (t, d) in [
            (&t[..], &noisy[..]),
            (&t[..], &flat[..]),
            (&t[..3], &noisy[..3]),
        ] {
            let f = fit_linear(t, d).unwrap();
            let s = fit_line_summary(t, d).unwrap();
            assert_eq!(
                s,
                LineSummary {
                    n: f.n,
                    intercept_mm: f.intercept_mm,
                    se_intercept_mm: f.se_intercept_mm,
                    velocity_mm_per_yr: f.velocity_mm_per_yr,
                    se_velocity_mm_per_yr: f.se_velocity_mm_per_yr,
                    residual_sd_mm: f.residual_sd_mm,
                    rss_mm2: f.rss_mm2,
                    lag1_autocorrelation: f.lag1_autocorrelation,
                    effective_n: f.effective_n,
                    se_velocity_adjusted_mm_per_yr: f.se_velocity_adjusted_mm_per_yr,
                }
            );
            assert_eq!(
                f.lag1_autocorrelation,
                lag1_autocorrelation(&f.residuals_mm)
            );
        }
    }
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal};

    /// Series A (insar-methods.md §5.12, \[C\]); 4-significant-figure tolerance.
    #[test]
    fn series_a_linear_and_ar1() {
        let (t, d) = series_a();
        assert!((d[0] - 1.673177).abs() < 1e-6 && (d[59] + 10.787620).abs() < 1e-6);
        let f = fit_linear(&t, &d).unwrap();
        assert!((f.intercept_mm - 1.1025).abs() < 1e-4);
        assert!((f.velocity_mm_per_yr + 6.033).abs() < 1e-3);
        assert!((f.se_velocity_mm_per_yr - 0.2710).abs() < 1e-4);
        assert!((f.residual_sd_mm - 1.194).abs() < 1e-3);
        assert!((f.lag1_autocorrelation - 0.4026).abs() < 1e-4);
        assert!((f.effective_n - 25.55).abs() < 0.01);
        let se_adj = f.se_velocity_adjusted_mm_per_yr.unwrap();
        assert!((se_adj - 0.4253).abs() < 1e-4);
        assert!((se_adj / f.se_velocity_mm_per_yr - 1.569).abs() < 1e-3);
        assert!((f.t_statistic_adjusted.unwrap() + 14.19).abs() < 0.01);
        assert!(f.distinguishable_from_zero);
        // noise-free input returns (1, −6) exactly
        let clean: Vec<f64> = t.iter().map(|t| 1.0 - 6.0 * t).collect();
        let g = fit_linear(&t, &clean).unwrap();
        assert!((g.intercept_mm - 1.0).abs() < 1e-12 && (g.velocity_mm_per_yr + 6.0).abs() < 1e-12);
    }

    /// Series B (§5.12 \[C\]): annual amplitude, peak day, SEs; biased linear-only velocity.
    #[test]
    fn series_b_annual() {
        let (t, d) = series_b();
        let f = fit_linear_annual(&t, &d).unwrap();
        assert!((f.intercept_mm - 0.1123).abs() < 1e-4);
        assert!((f.velocity_mm_per_yr + 4.061).abs() < 1e-3);
        assert!((f.se_velocity_mm_per_yr - 0.1515).abs() < 1e-4);
        assert!((f.sin_mm - 2.493).abs() < 1e-3 && (f.cos_mm - 1.044).abs() < 1e-3);
        assert!((f.amplitude_mm - 2.703).abs() < 1e-3);
        assert!((f.se_amplitude_mm - 0.1867).abs() < 1e-4);
        assert!((f.peak_yr - 0.1869).abs() < 1e-4);
        assert!((f.peak_day - 68.26).abs() < 0.01);
        assert!(f.amplitude_resolved);
        let lin = fit_linear(&t, &d).unwrap();
        assert!((lin.velocity_mm_per_yr + 4.585).abs() < 1e-3);
        assert!((lin.se_velocity_mm_per_yr - 0.2664).abs() < 1e-4);
        // noise-free: A = 2.693, t_pk = 69.19 d
        let tp = 2.0 * std::f64::consts::PI;
        let clean: Vec<f64> = t
            .iter()
            .map(|t| -4.0 * t + 2.5 * (tp * t).sin() + (tp * t).cos())
            .collect();
        let g = fit_linear_annual(&t, &clean).unwrap();
        assert!((g.amplitude_mm - 2.693).abs() < 1e-3 && (g.peak_day - 69.19).abs() < 0.01);
    }

    /// Series B model comparison (§5.12 \[C\]).
    #[test]
    fn series_b_model_comparison() {
        let (t, d) = series_b();
        let m = compare_models(&t, &d, true).unwrap();
        let get = |name| m.candidates.iter().find(|c| c.model == name).unwrap();
        let lin = get("linear");
        assert!((lin.aic.unwrap() - 149.5).abs() < 0.1 && (lin.bic.unwrap() - 154.5).abs() < 0.1);
        let ann = get("linear+annual");
        assert!((ann.aic.unwrap() - 41.31).abs() < 0.01 && (ann.bic.unwrap() - 51.39).abs() < 0.01);
        assert!((ann.f_vs_linear.unwrap() - 104.9).abs() < 0.1);
        let qa = get("quadratic+annual");
        assert!((qa.aic.unwrap() - 43.16).abs() < 0.01 && (qa.bic.unwrap() - 55.77).abs() < 0.01);
        assert_eq!(m.selected, "linear+annual");
        // Series A has no seasonal signal worth BIC: stays linear
        let (ta, da) = series_a();
        assert_eq!(compare_models(&ta, &da, false).unwrap().selected, "linear");
    }

    /// Series C (§5.12 \[C\]): acceleration.
    #[test]
    fn series_c_acceleration() {
        let (t, d) = series_c();
        let q = fit_quadratic(&t, &d).unwrap();
        assert!((q.intercept_mm - 0.2208).abs() < 1e-4);
        assert!((q.velocity_at_origin_mm_per_yr + 3.283).abs() < 1e-3);
        assert!((q.quadratic_mm_per_yr2 + 1.425).abs() < 1e-3);
        assert!((q.acceleration_mm_per_yr2 + 2.851).abs() < 1e-3);
        assert!((q.se_acceleration_mm_per_yr2 - 0.3730).abs() < 1e-4);
        let v_end = q.velocity_at_origin_mm_per_yr + q.acceleration_mm_per_yr2 * t[91];
        assert!((t[91] - 2.9897).abs() < 1e-4 && (v_end + 11.81).abs() < 0.01);
        let clean: Vec<f64> = t.iter().map(|t| -3.0 * t - 1.5 * t * t).collect();
        let g = fit_quadratic(&t, &clean).unwrap();
        assert!((g.quadratic_mm_per_yr2 + 1.5).abs() < 1e-10);
    }

    /// Series F (§5.12 \[C\]): Theil–Sen and Huber against OLS.
    #[test]
    fn series_f_robust() {
        let (t, d) = series_f();
        let ols = fit_linear(&t, &d).unwrap();
        assert!(
            (ols.intercept_mm - 3.305).abs() < 1e-3
                && (ols.velocity_mm_per_yr + 10.43).abs() < 1e-2
        );
        let ts = theil_sen(&t, &d).unwrap();
        assert_eq!(ts.pairs, 435);
        assert!((ts.velocity_mm_per_yr + 8.522).abs() < 1e-3);
        assert!((ts.intercept_mm - 2.331).abs() < 1e-3);
        let h = huber_line(&t, &d, HUBER_K).unwrap();
        assert!(h.converged);
        assert!((h.intercept_mm - 2.261).abs() < 1e-3, "{}", h.intercept_mm);
        assert!(
            (h.velocity_mm_per_yr + 8.428).abs() < 1e-3,
            "{}",
            h.velocity_mm_per_yr
        );
        assert!(h.outlier_indices.contains(&7) && h.outlier_indices.contains(&19));
    }

    /// Theil–Sen by integer-key selection equals, bit for bit, the plain computation: every
    /// pairwise slope, `stats::median` (a copy, sorted), then the median offset. Series F, an even
    /// pair count with ties (repeated values) and a series with a repeated time (skipped pairs).
    #[test]
    fn theil_sen_equals_the_plain_medians() {
        let plain = |t: &[f64], d: &[f64]| {
            let mut slopes = Vec::new();
            for i in 0..t.len() {
                for j in i + 1..t.len() {
                    if t[j] != t[i] {
                        slopes.push((d[j] - d[i]) / (t[j] - t[i]));
                    }
                }
            }
            let b = median(&slopes).unwrap();
            let off: Vec<f64> = t.iter().zip(d).map(|(t, d)| d - b * t).collect();
            (b, median(&off).unwrap(), slopes.len())
        };
        let (tf, df) = series_f();
        let t_ties: Vec<f64> = (0..9).map(|i| i as f64 * 0.1).collect();
        let d_ties = vec![1.0, 1.0, -0.0, 0.0, 2.0, 2.0, 2.0, -1.5, 1.0];
        let t_rep = vec![0.0, 0.1, 0.1, 0.3, 0.4];
        let d_rep = vec![0.5, -0.25, 1.0, 3.0, -2.0];
        for (t, d) in [(tf, df), (t_ties, d_ties), (t_rep, d_rep)] {
            let ts = theil_sen(&t, &d).unwrap();
            let (b, a, pairs) = plain(&t, &d);
            assert_eq!(ts.velocity_mm_per_yr.to_bits(), b.to_bits());
            assert_eq!(ts.intercept_mm.to_bits(), a.to_bits());
            assert_eq!(ts.pairs, pairs);
        }
    }

    /// Synthetic series with known velocity, seasonal amplitude and acceleration, Gaussian noise
    /// σ = 2 mm (seeded). Tolerances are 4× the theoretical standard errors of each estimate
    /// (computed from the fit's own SE), so the test can fail on a biased estimator.
    #[test]
    fn synthetic_recovery() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(20240611);
        let noise = Normal::new(0.0, 2.0).unwrap();
        let t: Vec<f64> = (0..183).map(|i| 6.0 * i as f64 / DAYS_PER_YEAR).collect(); // 3 yr
        let tp = 2.0 * std::f64::consts::PI;
        let (v, amp, peak_yr, acc) = (-5.0, 3.0, 0.6, -1.2);
        let d: Vec<f64> = t
            .iter()
            .map(|t| {
                v * t
                    + 0.5 * acc * t * t
                    + amp * (tp * (t - peak_yr)).cos()
                    + noise.sample(&mut rng)
            })
            .collect();
        // seasonal part recovered by an annual model with a quadratic pre-removed
        let q = fit_quadratic(&t, &d).unwrap();
        assert!(
            (q.acceleration_mm_per_yr2 - acc).abs() < 4.0 * q.se_acceleration_mm_per_yr2,
            "acc {}",
            q.acceleration_mm_per_yr2
        );
        let detr: Vec<f64> = t
            .iter()
            .zip(d.iter())
            .map(|(t, d)| d - 0.5 * acc * t * t)
            .collect();
        let a = fit_linear_annual(&t, &detr).unwrap();
        assert!((a.velocity_mm_per_yr - v).abs() < 4.0 * a.se_velocity_mm_per_yr);
        assert!((a.amplitude_mm - amp).abs() < 4.0 * a.se_amplitude_mm);
        assert!(
            (a.peak_yr - peak_yr).abs() * 365.25 < 10.0,
            "peak {}",
            a.peak_day
        );
    }

    #[test]
    fn degenerate_inputs() {
        assert!(matches!(
            fit_linear(&[1.0, 1.0, 1.0], &[1.0, 2.0, 3.0]),
            Err(FitError::Degenerate { .. })
        ));
        assert!(matches!(
            fit_linear(&[1.0, 2.0], &[1.0, 2.0]),
            Err(FitError::TooFewEpochs { .. })
        ));
        assert!(matches!(
            fit_linear(&[1.0, 2.0, 3.0], &[1.0, f64::NAN, 3.0]),
            Err(FitError::NotFinite { index: 1 })
        ));
        assert!(fit_linear(&[1.0, 2.0], &[1.0]).is_err());
        assert_eq!(adjusted_se(1.0, 10, 2.0), None);
        assert_eq!(nested_f(1.0, 2, 0.0, 3, 10), None);
        assert!(AnnualPolicy::Auto.applies(2.0) && !AnnualPolicy::Auto.applies(1.9));
    }
}
