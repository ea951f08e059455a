//! One structure: its points and the run configuration in, its result record out.
//!
//! This is the only place where the computation stages meet: point screening (coherence, epochs in
//! the window, unwrapping jumps, velocity outliers), the time series and decomposition (`series`),
//! the structural metrics (`metrics`), the damage relations (`damage` with `criteria`), the
//! evidence grade (`grade`) and the trigger levels (`triggers`). It does no I/O, so it is tested
//! directly and runs in parallel over structures.

use std::collections::BTreeMap;

use chrono::NaiveDate;
use serde::Serialize;

use crate::association::Role;
use crate::ingest::{Dataset, PointRef, SeriesRef, Structure};
use crate::portfolio::Portfolio;
use crate::results::{Status, StructureResult};

/// Point rejection reasons (stable keys of `n_rejected`).
/// (A new reason also joins `run::REASONS`, the codes of the packed point verdicts.)
pub mod reason {
    /// Coherence below `min_coherence`.
    pub const LOW_COHERENCE: &str = "low_coherence";
    /// Fewer valid epochs in the window than `min_epochs`.
    pub const TOO_FEW_EPOCHS: &str = "too_few_epochs";
    /// No valid value near the window start to reference the series to.
    pub const MISSING_VALUES: &str = "missing_values";
    /// A phase-unwrapping jump was detected in the series.
    pub const UNWRAPPING_JUMP: &str = "unwrapping_jump";
    /// Robust outlier of the velocity (MAD) among the structure's points of one geometry.
    pub const OUTLIER_VELOCITY: &str = "outlier_velocity";
    /// Equidistant between two structures' buffers (counted at portfolio level).
    pub const TIE: &str = "tie";
}

/// The assessment window shared by all structures.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Window {
    /// First date included.
    pub start: NaiveDate,
    /// Last date included.
    pub end: NaiveDate,
}

impl Window {
    /// Span in years of 365.25 days.
    pub fn span_years(&self) -> f64 {
        (self.end - self.start).num_days() as f64 / 365.25
    }
}

/// A point attached to a structure for assessment.
#[derive(Debug, Clone, Copy)]
pub struct Member<'a> {
    /// Dataset index.
    pub dataset: usize,
    /// The point.
    pub point: PointRef<'a>,
    /// Role for this structure.
    pub role: Role,
    /// Index of the point in its dataset (for the per-point statistics).
    pub point_index: usize,
}

/// Per-point window statistics, computed once per point and shared by every structure the point
/// is linked to. Held compactly (20 bytes a point: `f32` values, NaN = not computable), since a
/// run keeps one per retained point; `f32` keeps 7 significant digits, far below the precision of
/// any InSAR velocity. Valid epochs saturate at 65 535.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PointStats {
    valid_epochs: u16,
    los_velocity_mm_per_yr: f32,
    los_velocity_se_mm_per_yr: f32,
    period_mm: f32,
    period_sigma_mm: f32,
    jump_candidate: bool,
}

/// True when the point's coherence is below `min_coherence` (a file without a coherence column,
/// or an empty cell, is never below): the first screening rule, and the rule by which the
/// reader drops a point's series ([`crate::ingest::Dataset::drop_series`]).
pub fn below_min_coherence(p: PointRef, has_coherence: bool, min_coherence: f64) -> bool {
    has_coherence && p.coherence().is_some_and(|c| f64::from(c) < min_coherence)
}

impl PointStats {
    /// The statistics of a point whose series was dropped: no valid epoch, nothing computable.
    pub const NO_SERIES: PointStats = PointStats {
        valid_epochs: 0,
        los_velocity_mm_per_yr: f32::NAN,
        los_velocity_se_mm_per_yr: f32::NAN,
        period_mm: f32::NAN,
        period_sigma_mm: f32::NAN,
        jump_candidate: false,
    };

    /// [`PointStats::of`] the point's series, or [`PointStats::NO_SERIES`].
    pub fn of_point(p: PointRef, idx: &[usize], times: &WindowTimes, wavelength_mm: f64) -> Self {
        p.series()
            .map_or(Self::NO_SERIES, |s| Self::of(s, idx, times, wavelength_mm))
    }

    /// Statistics of one point over the window.
    ///
    /// `idx` are the window's epoch indices and `times` the time of epoch `idx[k]` from the window
    /// start (see [`window_times`]).
    ///
    /// One pass over the series without allocating: shifted sums give the OLS velocity and the
    /// residual scatter (the same quantities as [`ols_velocity_mm_per_yr`] and
    /// [`period_displacement`], to rounding; tested against them), the first and last three valid
    /// values give the period displacement, and a step larger than λ/4 between consecutive valid
    /// epochs sends the series to the full jump scan ([`crate::series::jumps::has_jump_candidate`]).
    pub fn of(p: SeriesRef, idx: &[usize], times: &WindowTimes, wavelength_mm: f64) -> Self {
        if let SeriesRef::Codes { codes, per_mm } = p {
            if idx.len() <= 1_000_000 && times.days_in_range {
                return Self::of_codes(codes, per_mm, idx, times, wavelength_mm);
            }
        }
        let t_yr = &times.years;
        let quarter = wavelength_mm / 4.0;
        // On stored codes the sums run in code units (no per-value division) and are scaled once.
        let (codes, unit_mm) = match p {
            SeriesRef::Codes { codes, per_mm } => (Some(codes), 1.0 / f64::from(per_mm)),
            SeriesRef::Floats(_) => (None, 1.0),
        };
        let quarter = quarter / unit_mm;
        let value = |i: usize| -> Option<f64> {
            match codes {
                Some(c) => {
                    let c = c[i];
                    (c != crate::ingest::store::MISSING).then_some(f64::from(c))
                }
                None => {
                    let x = p.get(i);
                    x.is_finite().then_some(f64::from(x))
                }
            }
        };
        let (mut n, mut st, mut sv, mut stt, mut stv, mut svv) = (0usize, 0.0, 0.0, 0.0, 0.0, 0.0);
        let (mut t0, mut v0) = (0.0, 0.0);
        let mut prev = f64::NAN;
        let mut big_step = false;
        for (&i, &ti) in idx.iter().zip(t_yr.iter()) {
            let Some(v) = value(i) else {
                continue;
            };
            if n == 0 {
                t0 = ti;
                v0 = v;
                prev = v;
            }
            big_step |= (v - prev).abs() > quarter;
            prev = v;
            let (dt, dv) = (ti - t0, v - v0);
            n += 1;
            st += dt;
            sv += dv;
            stt += dt * dt;
            stv += dt * dv;
            svv += dv * dv;
        }
        // The first and last three valid values (period displacement).
        let mut first3 = [0.0f64; 3];
        let mut last3 = [0.0f64; 3];
        if n >= 6 {
            for (slot, v) in first3.iter_mut().zip(idx.iter().filter_map(|&i| value(i))) {
                *slot = v;
            }
            for (slot, v) in last3
                .iter_mut()
                .zip(idx.iter().rev().filter_map(|&i| value(i)))
            {
                *slot = v;
            }
        }
        let nf = n as f64;
        let (tm, vm) = (st / nf, sv / nf);
        let sxx = stt - nf * tm * tm;
        let sxy = stv - nf * tm * vm;
        let syy = svv - nf * vm * vm;
        let velocity = (n >= 3 && sxx > 0.0).then(|| sxy / sxx);
        // White-noise SE of the slope, s/√Sxx (insar-methods.md §5.2).
        let velocity_se = velocity.map(|slope| {
            let rss = (syy - slope * sxy).max(0.0);
            (rss / (nf - 2.0) / sxx).sqrt() * unit_mm
        });
        let period = match velocity {
            Some(slope) if n >= 6 => {
                let rss = (syy - slope * sxy).max(0.0);
                let s = (rss / (nf - 2.0)).sqrt();
                let start = first3.iter().sum::<f64>() / 3.0;
                let end = last3.iter().sum::<f64>() / 3.0;
                Some(((end - start) * unit_mm, s * (2.0f64 / 3.0).sqrt() * unit_mm))
            }
            _ => None,
        };
        let velocity = velocity.map(|v| v * unit_mm);
        let jump_candidate = big_step && {
            let v: Vec<f64> = idx
                .iter()
                .map(|&i| f64::from(p.get(i)))
                .filter(|x| x.is_finite())
                .collect();
            crate::series::jumps::has_jump_candidate(&v, wavelength_mm)
        };
        Self::from_parts(n as u64, velocity.zip(velocity_se), period, jump_candidate)
    }
    /// The compact record of `n` valid epochs, the LOS velocity and its white-noise SE (mm/yr),
    /// the period displacement and its σ (mm) and the jump flag.
    fn from_parts(
        n: u64,
        velocity: Option<(f64, f64)>,
        period: Option<(f64, f64)>,
        jump_candidate: bool,
    ) -> Self {
        PointStats {
            valid_epochs: u16::try_from(n).unwrap_or(u16::MAX),
            los_velocity_mm_per_yr: velocity.map_or(f32::NAN, |x| x.0 as f32),
            los_velocity_se_mm_per_yr: velocity.map_or(f32::NAN, |x| x.1 as f32),
            period_mm: period.map_or(f32::NAN, |x| x.0 as f32),
            period_sigma_mm: period.map_or(f32::NAN, |x| x.1 as f32),
            jump_candidate,
        }
    }

    /// [`Self::of`] on stored 16-bit codes: the same statistics with every sum in exact integer
    /// arithmetic (codes, and days from the window start), scaled to mm and years once at the end.
    /// The ordinary-least-squares slope (insar-methods.md §5.2, \[P\]) is Sxy/Sxx with
    /// Sxx = nΣt² − (Σt)², Sxy = nΣtv − ΣtΣv, Syy = nΣv² − (Σv)² (t in days, v in codes; all exact),
    /// so velocity = Sxy/Sxx · 365.25 / per_mm mm/yr (+ towards the satellite, the store's LOS sign)
    /// and the residual scatter s² = (Syy − Sxy²/Sxx) / (n(n − 2)) codes²; tested against the general
    /// path.
    fn of_codes(
        codes: &[i16],
        per_mm: f32,
        idx: &[usize],
        times: &WindowTimes,
        wavelength_mm: f64,
    ) -> Self {
        use crate::ingest::store::MISSING;
        let days = &times.days;
        let unit_mm = 1.0 / f64::from(per_mm);
        // |Δcode| > λ/4 in code units, for integer steps: |Δcode| > ⌊λ/4 / unit⌋.
        let quarter = (wavelength_mm / 4.0 / unit_mm).floor().clamp(0.0, 1e15) as i64;
        // Sums of days and codes need no shift: every term is an exact integer, and with
        // |code| ≤ 32 767, |days| ≤ 10⁶ and ≤ 10⁶ epochs (else the caller takes the general path)
        // every sum stays inside i64.
        let first_valid = idx
            .iter()
            .map(|&i| codes[i])
            .find(|&c| c != MISSING)
            .map_or(0, i64::from);
        let mut sums = CodeSums {
            prev: first_valid,
            ..CodeSums::default()
        };
        match (idx.first(), idx.last()) {
            // A contiguous window (the usual case): one slice, no index lookups.
            (Some(&a), Some(&b)) if b + 1 - a == idx.len() && b < codes.len() => {
                let w = &codes[a..=b];
                if w.contains(&MISSING) {
                    for (&c, &d) in w.iter().zip(days) {
                        sums.add(c, d, quarter);
                    }
                } else {
                    // No gap: the day sums are the window's own, the code sums vectorise.
                    sums.n = w.len() as i64;
                    sums.sd = times.sum_days;
                    sums.sdd = times.sum_days_sq;
                    sums.sv = w.iter().map(|&c| i64::from(c)).sum();
                    sums.svv = w.iter().map(|&c| i64::from(c) * i64::from(c)).sum();
                    sums.sdv = w.iter().zip(days).map(|(&c, &d)| i64::from(c) * d).sum();
                    let max_step = w
                        .iter()
                        .zip(&w[1..])
                        .map(|(&p, &c)| (i32::from(c) - i32::from(p)).unsigned_abs())
                        .max()
                        .unwrap_or(0);
                    sums.big_step = i64::from(max_step) > quarter;
                }
            }
            _ => {
                for (&i, &d) in idx.iter().zip(days) {
                    sums.add(codes[i], d, quarter);
                }
            }
        }
        let CodeSums {
            n,
            sd,
            sdd,
            sv,
            svv,
            sdv,
            big_step,
            ..
        } = sums;
        let valid = |i: &usize| codes[*i] != MISSING;
        let (nn, sd, sv) = (i128::from(n), i128::from(sd), i128::from(sv));
        let sxx = nn * i128::from(sdd) - sd * sd;
        let sxy = nn * i128::from(sdv) - sd * sv;
        let syy = nn * i128::from(svv) - sv * sv;
        let slope_per_day = (n >= 3 && sxx > 0).then(|| sxy as f64 / sxx as f64);
        let period = match slope_per_day {
            Some(_) if n >= 6 => {
                let rss_n = (syy as f64 - (sxy as f64) * (sxy as f64) / sxx as f64).max(0.0);
                let s = (rss_n / (n as f64 * (n as f64 - 2.0))).sqrt();
                let first: i64 = idx
                    .iter()
                    .filter(|i| valid(i))
                    .take(3)
                    .map(|&i| i64::from(codes[i]))
                    .sum();
                let last: i64 = idx
                    .iter()
                    .rev()
                    .filter(|i| valid(i))
                    .take(3)
                    .map(|&i| i64::from(codes[i]))
                    .sum();
                Some((
                    (last - first) as f64 / 3.0 * unit_mm,
                    s * (2.0f64 / 3.0).sqrt() * unit_mm,
                ))
            }
            _ => None,
        };
        // White-noise SE of the slope: SE² = s²/Σ(d − d̄)² = rss_n / ((n − 2)·Sxx) codes²/day².
        let velocity = slope_per_day.map(|b| {
            let rss_n = (syy as f64 - (sxy as f64) * (sxy as f64) / sxx as f64).max(0.0);
            let se_per_day = (rss_n / ((n as f64 - 2.0) * sxx as f64)).sqrt();
            (b * 365.25 * unit_mm, se_per_day * 365.25 * unit_mm)
        });
        let jump_candidate = big_step && {
            let v: Vec<f64> = idx
                .iter()
                .filter(|i| valid(i))
                .map(|&i| f64::from(codes[i]) * unit_mm)
                .collect();
            crate::series::jumps::has_jump_candidate(&v, wavelength_mm)
        };
        Self::from_parts(n as u64, velocity, period, jump_candidate)
    }

    /// Valid (finite) epochs inside the window.
    pub fn valid_epochs(&self) -> usize {
        self.valid_epochs as usize
    }
    /// OLS LOS velocity over the window, mm/yr.
    pub fn los_velocity_mm_per_yr(&self) -> Option<f64> {
        let v = self.los_velocity_mm_per_yr;
        (!v.is_nan()).then_some(f64::from(v))
    }
    /// White-noise standard error of [`Self::los_velocity_mm_per_yr`], s/√Σ(t − t̄)², mm/yr
    /// (insar-methods.md §5.2).
    pub fn los_velocity_se_mm_per_yr(&self) -> Option<f64> {
        let v = self.los_velocity_se_mm_per_yr;
        (!v.is_nan()).then_some(f64::from(v))
    }
    /// Period LOS displacement and its σ, mm (see [`period_displacement`]).
    pub fn period(&self) -> Option<(f64, f64)> {
        (!self.period_mm.is_nan())
            .then_some((f64::from(self.period_mm), f64::from(self.period_sigma_mm)))
    }
    /// The series has an unwrapping-jump candidate (series::jumps).
    pub fn jump_candidate(&self) -> bool {
        self.jump_candidate
    }
}

/// Running integer sums over one series' valid codes (see `PointStats::of_codes`).
#[derive(Default)]
struct CodeSums {
    n: i64,
    sd: i64,
    sdd: i64,
    sv: i64,
    svv: i64,
    sdv: i64,
    prev: i64,
    big_step: bool,
}

impl CodeSums {
    #[inline(always)]
    fn add(&mut self, c: i16, d: i64, quarter: i64) {
        if c == crate::ingest::store::MISSING {
            return;
        }
        let c = i64::from(c);
        self.n += 1;
        self.sd += d;
        self.sdd += d * d;
        self.sv += c;
        self.svv += c * c;
        self.sdv += d * c;
        self.big_step |= (c - self.prev).abs() > quarter;
        self.prev = c;
    }
}

/// Whether a run keeps every point's window statistics ([`PointStats`], 16 bytes a point) or
/// works each out when asked for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StatsCache {
    /// Computed once for every retained point (a run that assesses surroundings asks for the
    /// same point many times).
    EveryPoint,
    /// Computed on each request (screening alone asks once per owned point).
    OnDemand,
}

impl RunContext<'_> {
    /// The window statistics of point `point` of dataset `dataset`.
    pub fn point_stats(&self, dataset: usize, point: usize) -> PointStats {
        match &self.point_stats {
            Some(all) => all[dataset][point],
            None => PointStats::of_point(
                self.datasets[dataset].point(point),
                &self.window_idx[dataset],
                &self.window_times[dataset],
                self.portfolio.datasets[dataset].wavelength_mm,
            ),
        }
    }
}

/// Outcome of screening one member point.
#[derive(Debug, Clone, PartialEq)]
pub struct PointVerdict {
    /// Dataset index.
    pub dataset: usize,
    /// Point index in its dataset.
    pub point_index: usize,
    /// Role.
    pub role: Role,
    /// Rejection reason (None = kept).
    pub rejected: Option<&'static str>,
    /// Vertical velocity projected from LOS, mm/yr (+ up), when computed.
    pub vertical_velocity_mm_per_yr: Option<f64>,
}

/// Indices of the window epochs of a dataset.
pub fn window_indices(epochs: &[NaiveDate], w: &Window) -> Vec<usize> {
    epochs
        .iter()
        .enumerate()
        .filter(|(_, d)| **d >= w.start && **d <= w.end)
        .map(|(i, _)| i)
        .collect()
}

/// OLS slope of values (mm) against time (years) — per-point screening velocity.
///
/// # References
/// insar-methods.md §5.2 (ordinary least squares; \[P\]).
pub fn ols_velocity_mm_per_yr(t_yr: &[f64], v_mm: &[f64]) -> Option<f64> {
    let n = t_yr.len();
    if n < 3 {
        return None;
    }
    let tm = t_yr.iter().sum::<f64>() / n as f64;
    let vm = v_mm.iter().sum::<f64>() / n as f64;
    let sxx: f64 = t_yr.iter().map(|t| (t - tm).powi(2)).sum();
    if sxx <= 0.0 {
        return None;
    }
    let sxy: f64 = t_yr
        .iter()
        .zip(v_mm)
        .map(|(t, v)| (t - tm) * (v - vm))
        .sum();
    Some(sxy / sxx)
}

/// Time of each window epoch from the window start, in whole days and in years of 365.25 days.
#[derive(Debug, Clone, PartialEq)]
pub struct WindowTimes {
    /// Days from the window start, per window epoch.
    pub days: Vec<i64>,
    /// The same in years (days / 365.25).
    pub years: Vec<f64>,
    /// Every |day| ≤ 10⁶ (the integer statistics' range).
    pub days_in_range: bool,
    /// Σ days and Σ days² over the window (for gap-free series).
    pub sum_days: i64,
    /// See `sum_days`.
    pub sum_days_sq: i64,
}

impl WindowTimes {
    /// From days after the window start.
    pub fn from_days(days: Vec<i64>) -> Self {
        let years = days.iter().map(|&d| d as f64 / 365.25).collect();
        let days_in_range = days.iter().all(|d| d.unsigned_abs() <= 1_000_000);
        let (sum_days, sum_days_sq) = if days_in_range {
            (days.iter().sum(), days.iter().map(|d| d * d).sum())
        } else {
            (0, 0)
        };
        WindowTimes {
            days,
            years,
            days_in_range,
            sum_days,
            sum_days_sq,
        }
    }
}

/// Time of each window epoch `idx[k]` from the window start (see [`WindowTimes`]).
pub fn window_times(epochs: &[NaiveDate], idx: &[usize], w: &Window) -> WindowTimes {
    WindowTimes::from_days(
        idx.iter()
            .map(|&i| (epochs[i] - w.start).num_days())
            .collect(),
    )
}

/// Context shared by all structures of a run.
pub struct RunContext<'a> {
    /// The portfolio.
    pub portfolio: &'a Portfolio,
    /// The datasets.
    pub datasets: &'a [Dataset],
    /// The window.
    pub window: Window,
    /// Window epoch indices per dataset.
    pub window_idx: Vec<Vec<usize>>,
    /// LOS unit vectors per dataset at the scene angles (None when per-point columns are used).
    pub scene_unit: Vec<Option<[f64; 3]>>,
    /// Criteria sets available (built-in + user-defined).
    pub criteria: crate::criteria::CriteriaRegistry,
    /// Window epoch times per dataset.
    pub window_times: Vec<WindowTimes>,
    /// Per-point window statistics, `[dataset][point]`, when kept for every point (see
    /// [`StatsCache`]); otherwise worked out when asked for ([`RunContext::point_stats`]).
    pub point_stats: Option<Vec<Vec<PointStats>>>,
    /// The portfolio's `[works]` converted to the analysis CRS once per run (None without works).
    pub works: Option<crate::works::WorksGeometry>,
    /// The run's distinct record sentences (assumptions), each held once.
    pub sentences: crate::text::Interner,
}

/// Period displacement of one point over the window: mean of the 3 valid epochs nearest the window
/// end minus the mean of the 3 valid epochs nearest the window start (insar-methods.md §5.11 \[Rec\]:
/// "difference of local means ... never two single noisy epochs"), mm; and its 1-σ from the
/// residual scatter about a straight-line fit, σ_period = s·sqrt(2/3).
pub fn period_displacement(t_yr: &[f64], v_mm: &[f64]) -> Option<(f64, f64)> {
    let n = t_yr.len();
    if n < 6 {
        return None;
    }
    let k = 3;
    let start = v_mm[..k].iter().sum::<f64>() / k as f64;
    let end = v_mm[n - k..].iter().sum::<f64>() / k as f64;
    let vel = ols_velocity_mm_per_yr(t_yr, v_mm)?;
    let tm = t_yr.iter().sum::<f64>() / n as f64;
    let vm = v_mm.iter().sum::<f64>() / n as f64;
    let rss: f64 = t_yr
        .iter()
        .zip(v_mm)
        .map(|(t, v)| (v - (vm + vel * (t - tm))).powi(2))
        .sum();
    let s = (rss / (n - 2) as f64).sqrt();
    Some((end - start, s * (2.0f64 / 3.0).sqrt()))
}

/// Screen one structure's member points (insar-methods.md §7): coherence below
/// `min_coherence`, fewer than `min_epochs` valid epochs in the window, and — per geometry, among
/// the structure's own points — robust velocity outliers (median absolute deviation, z >
/// `outlier_z`, on the residuals of a least-squares velocity plane when there are 6 or more
/// points). Unwrapping jumps are decided later by the time-series stage. Returns one verdict per
/// member and each member's period LOS displacement (None when rejected or not computable).
pub fn screen_members(
    ctx: &RunContext,
    s: &Structure,
    members: &[Member],
) -> (Vec<PointVerdict>, Vec<Option<(f64, f64)>>) {
    let a = &ctx.portfolio.assessment;
    let mut verdicts = Vec::with_capacity(members.len());
    // Screening, per member point.
    // ds -> (verdict idx, v_los, its white-noise SE)
    let mut kept_by_ds: BTreeMap<usize, Vec<(usize, f64, f64)>> = BTreeMap::new();
    let mut period: Vec<Option<(f64, f64)>> = Vec::with_capacity(members.len());
    for m in members {
        let ds = &ctx.datasets[m.dataset];
        let idx = &ctx.window_idx[m.dataset];
        let mut rejected = None;
        if below_min_coherence(m.point, ds.has_coherence, a.min_coherence) {
            rejected = Some(reason::LOW_COHERENCE);
        }
        let st = ctx.point_stats(m.dataset, m.point_index);
        let _ = (ds, idx);
        if rejected.is_none() && st.valid_epochs() < a.min_epochs {
            rejected = Some(reason::TOO_FEW_EPOCHS);
        }
        let vel = if rejected.is_none() {
            st.los_velocity_mm_per_yr()
        } else {
            None
        };
        period.push(if rejected.is_none() {
            st.period()
        } else {
            None
        });
        let cos_inc = m.point.incidence_deg().to_radians().cos();
        let vv = vel.map(|v| v / cos_inc);
        // Points whose series shows an unwrapping-jump candidate are left out of the velocity
        // outlier screen: the time-series stage decides on them (and names the reason).
        let jump_candidate = rejected.is_none() && st.jump_candidate();
        if rejected.is_none() && m.role == Role::Structure && !jump_candidate {
            if let Some(vl) = vel {
                let se = st.los_velocity_se_mm_per_yr().unwrap_or(f64::NAN);
                kept_by_ds
                    .entry(m.dataset)
                    .or_default()
                    .push((verdicts.len(), vl, se));
            }
        }
        verdicts.push(PointVerdict {
            dataset: m.dataset,
            point_index: m.point_index,
            role: m.role,
            rejected,
            vertical_velocity_mm_per_yr: vv,
        });
    }
    // MAD outliers on LOS velocity per geometry (insar-methods.md §7.3): robust z > outlier_z; no
    // rejection with fewer than 5 points. With 6 or more points the screen runs on the
    // residuals of a least-squares plane through the velocities (the §7.3 second pass [D]): a
    // genuinely tilting or bending building spreads raw velocities, and its extreme but correct
    // points must not be rejected as outliers. The robust scale is floored at the median of the
    // points' own velocity SEs (`metrics::outliers::mad_screen_with_floor` gives the reason).
    for list in kept_by_ds.values() {
        if list.len() < 5 {
            continue;
        }
        let xy: Vec<(f64, f64)> = list
            .iter()
            .map(|(vi, _, _)| {
                s.frame
                    .to_local(members[*vi].point.x(), members[*vi].point.y())
            })
            .collect();
        let raw: Vec<f64> = list.iter().map(|x| x.1).collect();
        let resid = if list.len() >= 6 {
            plane_residuals(&xy, &raw).unwrap_or_else(|| raw.clone())
        } else {
            raw.clone()
        };
        let se: Vec<f64> = list.iter().map(|x| x.2).filter(|x| x.is_finite()).collect();
        let floor = crate::metrics::settlement::median(&se).unwrap_or(0.0);
        let screen = crate::metrics::outliers::mad_screen_with_floor(&resid, a.outlier_z, 5, floor);
        for r in screen.rejected {
            verdicts[list[r].0].rejected = Some(reason::OUTLIER_VELOCITY);
        }
    }
    (verdicts, period)
}

/// Everything one structure's assessment produced: the compact record for results.json, the
/// detail for `details/<stem>.json` and one screening verdict per member point.
pub struct Assessment<'a> {
    /// The compact per-structure record.
    pub record: StructureResult,
    /// The full detail (series, metrics, damage, grade inputs, works, per-point rows).
    pub detail: StructureDetail<'a>,
    /// One verdict per member point, in member order.
    pub verdicts: Vec<PointVerdict>,
}

/// The per-structure detail file as written (`details/<stem>.json`, docs/formats.md); the
/// reports read it back as [`crate::results::DetailRecord`]. Serialised straight from the stage
/// outputs (no intermediate JSON tree).
#[derive(Debug, Serialize)]
pub struct StructureDetail<'a> {
    /// Structure id.
    pub id: String,
    /// Time-series detail (structure series, fits, decomposition); null when no point passed
    /// screening.
    pub series: Option<crate::series::StructureSeries>,
    /// Metrics detail (axes, profiles, zones, uncertainty); null when not assessed.
    pub metrics: Option<crate::metrics::StructureMetrics>,
    /// Damage detail (per-zone strains, screening flags, category probabilities).
    pub damage: Option<DamageDetail>,
    /// Evidence grade with its reasons and inputs.
    pub grade: Option<GradeDetail>,
    /// Works screening detail; null without `[works]`.
    pub works: Option<crate::works::WorksScreening>,
    /// One row per point of the structure itself (role `structure`).
    pub points: Vec<DetailPoint<'a>>,
}

/// Damage detail: the damage assessment plus the category probabilities.
#[derive(Debug, Serialize)]
pub struct DamageDetail {
    /// The damage assessment on the supported zones.
    #[serde(flatten)]
    pub assessment: crate::damage::DamageAssessment,
    /// Probability of each category from the Monte Carlo draws; null without a category.
    pub category_probabilities: Option<crate::verdict::CategoryProbabilities>,
}

/// Evidence grade detail.
#[derive(Debug, Serialize)]
pub struct GradeDetail {
    /// Grade name.
    pub grade: String,
    /// Why the grade is what it is.
    pub reasons: Vec<String>,
    /// The inputs the grade was decided from.
    pub inputs: crate::grade::GradeInputs,
}

/// One member point of a structure in its detail file.
#[derive(Debug, Serialize)]
pub struct DetailPoint<'a> {
    /// Dataset name.
    pub dataset: &'a str,
    /// Point id.
    pub point_id: &'a str,
    /// `structure` | `surroundings`.
    pub role: &'static str,
    /// Easting in the analysis CRS, m.
    pub x: f64,
    /// Northing in the analysis CRS, m.
    pub y: f64,
    /// `kept` | `rejected`.
    pub status: &'static str,
    /// Rejection reason (null when kept).
    pub reason: Option<&'static str>,
    /// Vertical velocity projected from LOS, mm/yr (+ up), when computed.
    pub vertical_velocity_mm_per_yr: Option<f64>,
}

/// Assess one structure: a short sequence of stages, each handing the next a named struct
/// (screening → series → sufficiency → metrics → damage → grade → works → record).
pub fn assess_structure<'a>(
    ctx: &RunContext<'a>,
    s: &Structure,
    members: &[Member<'a>],
    report_file: Option<String>,
) -> Assessment<'a> {
    let mut screened = screening(ctx, s, members);
    let series = series_stage(ctx, s, members, &mut screened);
    let mut suff = sufficiency(ctx, &screened, &series);
    let mut out = Filled::default();
    let criteria_name = s
        .raw
        .criteria
        .clone()
        .unwrap_or_else(|| s.raw.structure_type.clone());
    let mut detail = StructureDetail {
        id: s.raw.id.clone(),
        series: None,
        metrics: None,
        damage: None,
        grade: None,
        works: None,
        points: detail_points(ctx, members, &screened.verdicts),
    };
    if suff.status == Status::Assessed {
        let measured = measure(ctx, s, members, &screened, &series, &mut out, &mut suff);
        detail.damage = damage_stage(
            ctx,
            s,
            &measured.metrics,
            &criteria_name,
            &mut out,
            &mut suff,
        );
        for r in &measured.metrics.refusals {
            suff.assumptions.push(format!("metric not computed: {r}"));
        }
        detail.grade = Some(grade_stage(&measured, &mut out, &mut suff));
        detail.metrics = Some(measured.metrics);
    }
    detail.series = series.series;
    let works = works_stage(ctx, s, &criteria_name, &out, &detail, &mut suff);
    let record = record(
        s,
        report_file,
        screened.n_rejected,
        suff,
        out,
        &works,
        &ctx.sentences,
    );
    detail.works = works.detail;
    Assessment {
        record,
        detail,
        verdicts: screened.verdicts,
    }
}

/// Screening stage output: one verdict per member, each member's period LOS displacement from
/// the point statistics, and the rejections of the structure's own points by reason.
struct Screened {
    verdicts: Vec<PointVerdict>,
    period: Vec<Option<(f64, f64)>>,
    n_rejected: BTreeMap<String, usize>,
}

fn screening(ctx: &RunContext, s: &Structure, members: &[Member]) -> Screened {
    let (verdicts, period) = screen_members(ctx, s, members);
    let mut n_rejected: BTreeMap<String, usize> = BTreeMap::new();
    for v in &verdicts {
        if let (Some(r), Role::Structure) = (v.rejected, v.role) {
            *n_rejected.entry(r.to_string()).or_default() += 1;
        }
    }
    Screened {
        verdicts,
        period,
        n_rejected,
    }
}

/// Series stage output: the structure's time series (None when no point passed screening) and
/// each member's period LOS displacement from the series stage.
struct SeriesStage {
    series: Option<crate::series::StructureSeries>,
    point_period: Vec<Option<(f64, f64)>>,
}

/// Time series per geometry of the points that passed screening: aggregate, decomposition,
/// fits, jumps (insar-methods.md §4–5). Points with an unwrapping jump are rejected here.
fn series_stage(
    ctx: &RunContext,
    s: &Structure,
    members: &[Member],
    screened: &mut Screened,
) -> SeriesStage {
    let a = &ctx.portfolio.assessment;
    let verdicts = &mut screened.verdicts;
    let mut point_period: Vec<Option<(f64, f64)>> = vec![None; verdicts.len()];
    let mut by_ds: BTreeMap<usize, Vec<usize>> = BTreeMap::new(); // dataset -> verdict idx
    let mut sur_by_ds: BTreeMap<usize, Vec<usize>> = BTreeMap::new();
    for (i, v) in verdicts.iter().enumerate() {
        if v.rejected.is_none() {
            match v.role {
                Role::Structure => by_ds.entry(v.dataset).or_default().push(i),
                Role::Surroundings => sur_by_ds.entry(v.dataset).or_default().push(i),
            }
        }
    }
    if by_ds.is_empty() {
        return SeriesStage {
            series: None,
            point_period,
        };
    }
    let mk = |map: &BTreeMap<usize, Vec<usize>>| -> Vec<crate::series::GeometryInput> {
        map.iter()
            .map(|(di, idxs)| crate::series::GeometryInput {
                name: &ctx.datasets[*di].name,
                pass: series_pass(ctx.portfolio.datasets[*di].pass),
                epochs: &ctx.datasets[*di].epochs,
                // Every point that passed screening has its series (only points below the
                // minimum coherence have theirs dropped, `below_min_coherence`).
                points: idxs
                    .iter()
                    .filter_map(|i| {
                        Some(crate::series::PointSeries {
                            values_mm: members[*i].point.series()?,
                            unit_enu: point_unit(ctx, &members[*i]),
                        })
                    })
                    .collect(),
            })
            .collect()
    };
    let geoms = mk(&by_ds);
    let surr = mk(&sur_by_ds);
    let mut scfg = crate::series::SeriesConfig::new(ctx.window.start, ctx.window.end);
    scfg.min_epochs = a.min_epochs;
    scfg.min_span_yr = a.min_span_years;
    scfg.wavelength_mm = ctx.portfolio.datasets[*by_ds.keys().next().unwrap_or(&0)].wavelength_mm;
    scfg.bootstrap_draws = a.bootstrap_draws;
    scfg.max_condition_number = a.max_condition_number;
    scfg.seed = a.seed ^ fnv(&s.raw.id);
    let out_s = crate::series::analyse_structure(&geoms, &surr, &scfg);
    for (g, idxs) in out_s.geometries.iter().zip(by_ds.values()) {
        for pr in &g.points {
            let Some(&vi) = idxs.get(pr.index) else {
                continue;
            };
            if !pr.jumps.is_empty() && pr.excluded_from_aggregate {
                verdicts[vi].rejected = Some(reason::UNWRAPPING_JUMP);
                *screened
                    .n_rejected
                    .entry(reason::UNWRAPPING_JUMP.to_string())
                    .or_default() += 1;
            } else if let Some(pd) = &pr.period_los {
                point_period[vi] = Some((pd.displacement_mm, pd.sigma_mm));
            }
        }
    }
    SeriesStage {
        series: Some(out_s),
        point_period,
    }
}

/// Sufficiency stage output: the status with its reasons, the assumptions so far, and the
/// counts the record and the grade need.
struct Sufficiency {
    status: Status,
    reasons: Vec<String>,
    assumptions: Vec<String>,
    n_points: usize,
    n_surroundings: usize,
    datasets: Vec<String>,
    n_window_epochs: usize,
    series_span_yr: Option<f64>,
}

/// Decide whether the structure meets the minimums (points, epochs, span, series).
fn sufficiency(ctx: &RunContext, screened: &Screened, series: &SeriesStage) -> Sufficiency {
    let a = &ctx.portfolio.assessment;
    let verdicts = &screened.verdicts;
    let kept: Vec<&PointVerdict> = verdicts
        .iter()
        .filter(|v| v.role == Role::Structure && v.rejected.is_none())
        .collect();
    let n_points = kept.len();
    let n_surroundings = verdicts
        .iter()
        .filter(|v| v.role == Role::Surroundings && v.rejected.is_none())
        .count();
    let mut datasets: Vec<String> = kept
        .iter()
        .map(|v| ctx.datasets[v.dataset].name.clone())
        .collect();
    datasets.sort();
    datasets.dedup();
    let used_ds: Vec<usize> = {
        let mut v: Vec<usize> = kept.iter().map(|v| v.dataset).collect();
        v.sort_unstable();
        v.dedup();
        v
    };
    let (n_window_epochs, series_span_yr) = series_extent(ctx, &used_ds);
    let mut reasons = Vec::new();
    if n_points == 0 {
        reasons.push("no measurement points kept on the structure".into());
    } else if n_points < a.min_points {
        reasons.push(format!(
            "{n_points} points kept, fewer than min_points = {}",
            a.min_points
        ));
    }
    if n_window_epochs < a.min_epochs {
        reasons.push(format!(
            "{n_window_epochs} acquisitions in the window, fewer than min_epochs = {}",
            a.min_epochs
        ));
    }
    if ctx.window.span_years() < a.min_span_years {
        reasons.push(format!(
            "window spans {:.2} years, less than min_span_years = {}",
            ctx.window.span_years(),
            a.min_span_years
        ));
    }
    if let Some(sr) = &series.series {
        if !sr.status.sufficient && reasons.is_empty() {
            for r in &sr.status.reasons {
                reasons.push(format!("time series insufficient: {r}"));
            }
        }
    }
    let status = if reasons.is_empty() {
        Status::Assessed
    } else {
        Status::InsufficientData
    };
    let mut assumptions = Vec::new();
    if datasets.len() == 1 {
        assumptions.push(
            "one viewing geometry: vertical movement assumes no horizontal motion (d_v = d_LOS / cos θ)"
                .into(),
        );
    }
    if status == Status::Assessed {
        reasons.push("minimums met".into());
    }
    Sufficiency {
        status,
        reasons,
        assumptions,
        n_points,
        n_surroundings,
        datasets,
        n_window_epochs,
        series_span_yr,
    }
}

/// Metrics stage output.
struct Measured {
    metrics: crate::metrics::StructureMetrics,
    /// Mean coherence of the kept structure points (None without coherence).
    coherence_mean: Option<f64>,
}

/// Velocities from the series, per-point period settlement in the structure's local frame
/// (insar-methods.md §7.4) and the structure metrics.
fn measure(
    ctx: &RunContext,
    s: &Structure,
    members: &[Member],
    screened: &Screened,
    series: &SeriesStage,
    out: &mut Filled,
    suff: &mut Sufficiency,
) -> Measured {
    let a = &ctx.portfolio.assessment;
    let sr = series.series.as_ref();
    out.mean_vertical_mm = sr.and_then(|x| x.mean_vertical_mm);
    out.mean_east_mm = sr.and_then(|x| x.mean_east_mm);
    out.vertical_velocity_mm_per_yr = sr.and_then(|x| x.vertical_velocity_mm_per_yr);
    out.vertical_velocity_se_mm_per_yr = sr.and_then(|x| x.se_vertical_velocity_mm_per_yr);
    out.east_velocity_mm_per_yr = sr.and_then(|x| x.east_velocity_mm_per_yr);
    out.east_velocity_se_mm_per_yr = sr.and_then(|x| x.se_east_velocity_mm_per_yr);
    if let Some(x) = sr {
        suff.assumptions.extend(x.assumptions.iter().cloned());
    }
    let east_mm = out.mean_east_mm;
    if east_mm.is_some() {
        suff.assumptions.push(
            "per-point vertical displacement corrected for the structure's mean east–west displacement (both geometries); north–south motion neglected".into(),
        );
    }
    let mut mpts = Vec::new();
    let mut coh_sum = 0.0;
    let mut coh_n = 0usize;
    for (i, (m, v)) in members.iter().zip(&screened.verdicts).enumerate() {
        if v.role != Role::Structure || v.rejected.is_some() {
            continue;
        }
        if let Some(c) = m.point.coherence() {
            coh_sum += c as f64;
            coh_n += 1;
        }
        let Some((d_los, sigma)) = series.point_period[i].or(screened.period[i]) else {
            continue;
        };
        let u = point_unit(ctx, m);
        let (x, y) = s.frame.to_local(m.point.x(), m.point.y());
        let d_v = (d_los - u[0] * east_mm.unwrap_or(0.0)) / u[2];
        mpts.push(crate::metrics::MetricPoint {
            x_m: x,
            y_m: y,
            settlement_mm: -d_v,
            sigma_mm: sigma / u[2],
            geometry: m.dataset,
            los_mm: d_los,
            unit_enu: u,
        });
    }
    suff.assumptions.extend(reference_note(ctx, &mpts));
    let mcfg = crate::metrics::MetricsConfig {
        monte_carlo_draws: a.monte_carlo_draws,
        seed: a.seed ^ fnv(&s.raw.id),
        strain_max_condition: a.max_condition_number,
        strain_axis_max_angle_deg: a.strain_axis_max_angle_deg,
        ..Default::default()
    };
    let met = crate::metrics::structure_metrics(&mpts, &s.footprint_local, s.raw.height_m, &mcfg);
    out.settlement_mm = met.settlement_mm;
    out.differential_settlement_mm = met.differential_settlement_mm;
    if out.mean_vertical_mm.is_none() {
        out.mean_vertical_mm = met.mean_settlement_mm.map(|x| -x);
    }
    out.tilt = met.tilt;
    out.tilt_se = met.tilt_se;
    out.deflection_ratio_se = met
        .uncertainty
        .as_ref()
        .and_then(|u| u.deflection_ratio.as_ref())
        .map(|sp| sp.se);
    out.angular_distortion_se = met
        .uncertainty
        .as_ref()
        .and_then(|u| u.angular_distortion.as_ref())
        .map(|sp| sp.se);
    out.tilt_azimuth_deg = met.tilt_azimuth_deg;
    out.horizontal_strain = met.horizontal_strain;
    out.look_directions = met
        .look_directions
        .iter()
        .map(|l| l.label().to_string())
        .collect();
    Measured {
        metrics: met,
        coherence_mean: (coh_n > 0).then(|| coh_sum / coh_n as f64),
    }
}

/// The damage verdict (`verdict::judge`) with the structure's criteria set; None when the set
/// is unknown (the reason joins the status reasons).
fn damage_stage(
    ctx: &RunContext,
    s: &Structure,
    met: &crate::metrics::StructureMetrics,
    criteria_name: &str,
    out: &mut Filled,
    suff: &mut Sufficiency,
) -> Option<DamageDetail> {
    let a = &ctx.portfolio.assessment;
    let set = match ctx.criteria.get(criteria_name) {
        Ok(set) => set,
        Err(e) => {
            suff.reasons
                .push(format!("damage category not computed: {e}"));
            return None;
        }
    };
    let v = crate::verdict::judge(&crate::verdict::VerdictInput {
        metrics: met,
        set,
        height_m: s.raw.height_m,
        seed: a.seed ^ fnv(&s.raw.id),
    });
    let dmg = v.damage;
    out.deflection_ratio = v.deflection_ratio;
    out.angular_distortion = v.angular_distortion;
    out.governing_strain = dmg.governing_strain;
    out.damage_category = dmg.category.map(|c| c.number());
    out.damage_category_name = dmg.category.map(|c| c.label().to_string());
    out.damage_route = Some(match &dmg.governing {
        Some(g) => format!("{} ({})", set.route.label(), branch_label(g.branch)),
        None => set.route.label().to_string(),
    });
    out.criteria_set = Some(set.name.clone());
    if dmg.category.is_none() {
        for r in &dmg.category_reasons {
            suff.reasons
                .push(format!("damage category not computed: {r}"));
        }
    }
    suff.assumptions.extend(dmg.assumptions.iter().cloned());
    out.horizontal_strain_status = Some(v.horizontal_strain_status.key().to_string());
    out.category_lower_bound = dmg.category.map(|_| v.category_lower_bound);
    if v.category_lower_bound {
        suff.assumptions
            .push(lower_bound_note(v.horizontal_strain_status));
    }
    out.probabilities = v.probabilities.clone();
    Some(DamageDetail {
        assessment: dmg,
        category_probabilities: v.probabilities,
    })
}

/// Evidence grade (grade.rs): the stated category's probability decides how certain it is; an
/// insufficient grade withholds the category.
fn grade_stage(measured: &Measured, out: &mut Filled, suff: &mut Sufficiency) -> GradeDetail {
    let certainty = out
        .damage_category
        .zip(out.probabilities.as_ref())
        .map(|(c, p)| crate::grade::CategoryCertainty {
            category: c,
            probability: p.of(c),
            probability_higher: p.above(c),
        });
    let gi = crate::grade::GradeInputs::from_metrics(
        &measured.metrics,
        Some(suff.n_window_epochs),
        suff.series_span_yr,
        measured.coherence_mean,
        certainty,
    );
    let (g, why) = crate::grade::grade(&gi, &crate::grade::GradeThresholds::default());
    if g == crate::grade::Grade::Insufficient && out.damage_category.is_some() {
        suff.reasons
            .push("damage category withheld: the evidence grade is insufficient".to_string());
        out.damage_category = None;
        out.damage_category_name = None;
        out.governing_strain = None;
        out.probabilities = None;
        out.category_lower_bound = None;
    }
    out.evidence_grade = Some(g.name().to_string());
    out.evidence_grade_reasons = why.clone();
    GradeDetail {
        grade: g.name().to_string(),
        reasons: why,
        inputs: gi,
    }
}

/// Values filled by the works screening (`src/works`).
#[derive(Default)]
struct WorksOut {
    predicted_settlement_mm: Option<f64>,
    predicted_category: Option<u8>,
    observed_to_predicted_settlement: Option<f64>,
    detail: Option<crate::works::WorksScreening>,
}

/// Screening near planned works: predictions never change the measured fields, they fill only
/// the works fields.
fn works_stage(
    ctx: &RunContext,
    s: &Structure,
    criteria_name: &str,
    out: &Filled,
    detail: &StructureDetail,
    suff: &mut Sufficiency,
) -> WorksOut {
    let mut works_out = WorksOut::default();
    let Some(w) = &ctx.works else {
        return works_out;
    };
    let observed = crate::works::Observed {
        settlement_mm: out.settlement_mm,
        tilt: out.tilt,
        max_slope: match (out.tilt, out.angular_distortion) {
            (Some(t), Some(b)) => Some(t + b),
            (Some(t), None) => Some(t),
            _ => None,
        },
        deflection_ratio: out.deflection_ratio,
        damage_category: out.damage_category,
        series: detail
            .series
            .as_ref()
            .and_then(|x| x.vertical.as_ref())
            .map(|v| {
                v.dates
                    .iter()
                    .zip(&v.vertical_mm)
                    .map(|(d, x)| (*d, x.map(|up| -up)))
                    .collect()
            })
            .unwrap_or_default(),
        unavailable_because: (suff.status != Status::Assessed).then(|| suff.reasons.join("; ")),
    };
    let input = crate::works::StructureInput {
        id: &s.raw.id,
        footprint: &s.footprint,
        height_m: s.raw.height_m,
        window_start: ctx.window.start,
        window_end: ctx.window.end,
        observed,
    };
    match ctx.criteria.get(criteria_name) {
        Ok(set) => match crate::works::screen_structure(w, &input, set) {
            Ok(sc) => {
                works_out.predicted_settlement_mm = Some(sc.predicted_settlement_mm);
                works_out.predicted_category = sc.predicted_category;
                works_out.observed_to_predicted_settlement =
                    sc.comparison.observed_to_predicted_settlement;
                works_out.detail = Some(sc);
            }
            Err(e) => suff
                .assumptions
                .push(format!("works screening not computed: {e}")),
        },
        Err(e) => suff
            .assumptions
            .push(format!("works screening not computed: {e}")),
    }
    works_out
}

/// The detail file's per-point rows: one per point of the structure itself (role `structure`).
/// Surroundings points are left out: each lies in the rings of many structures, so their rows
/// would repeat across detail files (points.csv has one row per point; the surroundings enter
/// the detail through `series.relative_to_surroundings`).
fn detail_points<'a>(
    ctx: &RunContext<'a>,
    members: &[Member<'a>],
    verdicts: &[PointVerdict],
) -> Vec<DetailPoint<'a>> {
    members
        .iter()
        .zip(verdicts)
        .filter(|(m, _)| m.role == Role::Structure)
        .map(|(m, v)| DetailPoint {
            dataset: ctx.datasets[m.dataset].name.as_str(),
            point_id: m.point.id(),
            role: match m.role {
                Role::Structure => "structure",
                Role::Surroundings => "surroundings",
            },
            x: m.point.x(),
            y: m.point.y(),
            status: if v.rejected.is_some() {
                "rejected"
            } else {
                "kept"
            },
            reason: v.rejected,
            vertical_velocity_mm_per_yr: v.vertical_velocity_mm_per_yr,
        })
        .collect()
}

/// The compact per-structure record (the detail goes to its own file).
fn record(
    s: &Structure,
    report_file: Option<String>,
    n_rejected: BTreeMap<String, usize>,
    suff: Sufficiency,
    out: Filled,
    works: &WorksOut,
    sentences: &crate::text::Interner,
) -> StructureResult {
    let probability = out
        .damage_category
        .zip(out.probabilities.as_ref())
        .map(|(c, p)| (p.of(c), p.above(c)));
    StructureResult {
        id: s.raw.id.clone(),
        name: s.raw.name.clone(),
        status: suff.status,
        status_reasons: suff.reasons,
        n_points: suff.n_points,
        n_rejected,
        n_surroundings: suff.n_surroundings,
        datasets: suff.datasets,
        settlement_mm: out.settlement_mm,
        differential_settlement_mm: out.differential_settlement_mm,
        mean_vertical_mm: out.mean_vertical_mm,
        mean_east_mm: out.mean_east_mm,
        vertical_velocity_mm_per_yr: out.vertical_velocity_mm_per_yr,
        east_velocity_mm_per_yr: out.east_velocity_mm_per_yr,
        tilt: out.tilt,
        tilt_azimuth_deg: out.tilt_azimuth_deg,
        angular_distortion: out.angular_distortion,
        deflection_ratio: out.deflection_ratio,
        horizontal_strain: out.horizontal_strain,
        governing_strain: out.governing_strain,
        damage_category: out.damage_category,
        damage_route: out.damage_route,
        evidence_grade: out.evidence_grade,
        evidence_grade_reasons: out.evidence_grade_reasons,
        damage_category_probabilities: out.probabilities.as_ref().map(|p| p.as_map()),
        damage_category_probability: probability.map(|p| p.0),
        damage_category_exceedance_probability: probability.map(|p| p.1),
        horizontal_strain_status: out.horizontal_strain_status,
        category_lower_bound: out.category_lower_bound,
        look_directions: out.look_directions,
        vertical_velocity_se_mm_per_yr: out.vertical_velocity_se_mm_per_yr,
        east_velocity_se_mm_per_yr: out.east_velocity_se_mm_per_yr,
        tilt_se: out.tilt_se,
        deflection_ratio_se: out.deflection_ratio_se,
        angular_distortion_se: out.angular_distortion_se,
        damage_category_name: out.damage_category_name,
        criteria_set: out.criteria_set,
        height_m: s.raw.height_m,
        structure_type: s.raw.structure_type.clone(),
        trigger_status: None,
        triggers: vec![],
        detail_file: report_file
            .as_ref()
            .map(|stem| format!("{DETAILS_DIR}/{stem}.json")),
        report_file,
        fallbacks: s.raw.fallbacks.clone(),
        assumptions: suff
            .assumptions
            .into_iter()
            .map(|a| sentences.intern(a))
            .collect(),
        change: None,
        predicted_settlement_mm: works.predicted_settlement_mm,
        predicted_category: works.predicted_category,
        observed_to_predicted_settlement: works.observed_to_predicted_settlement,
    }
}

/// Folder (inside the output folder) of the per-structure detail files.
pub const DETAILS_DIR: &str = "details";

/// Values filled by the metrics and damage stages.
#[derive(Default)]
struct Filled {
    settlement_mm: Option<f64>,
    differential_settlement_mm: Option<f64>,
    mean_vertical_mm: Option<f64>,
    tilt: Option<f64>,
    tilt_se: Option<f64>,
    deflection_ratio_se: Option<f64>,
    angular_distortion_se: Option<f64>,
    tilt_azimuth_deg: Option<f64>,
    angular_distortion: Option<f64>,
    deflection_ratio: Option<f64>,
    horizontal_strain: Option<f64>,
    governing_strain: Option<f64>,
    damage_category: Option<u8>,
    damage_category_name: Option<String>,
    damage_route: Option<String>,
    criteria_set: Option<String>,
    mean_east_mm: Option<f64>,
    vertical_velocity_mm_per_yr: Option<f64>,
    vertical_velocity_se_mm_per_yr: Option<f64>,
    east_velocity_mm_per_yr: Option<f64>,
    east_velocity_se_mm_per_yr: Option<f64>,
    evidence_grade: Option<String>,
    evidence_grade_reasons: Vec<String>,
    horizontal_strain_status: Option<String>,
    category_lower_bound: Option<bool>,
    look_directions: Vec<String>,
    probabilities: Option<crate::verdict::CategoryProbabilities>,
}

/// The assumption line on the datasets' common reference, when points of two or more datasets
/// are combined: what was done with `[reference]`, or — without it — what a reference drift in
/// one dataset does to the decomposed east–west and vertical values (from this structure's own
/// look geometry: the response of the east/up solve to 1 mm in one dataset alone).
fn reference_note(ctx: &RunContext, pts: &[crate::metrics::MetricPoint]) -> Option<String> {
    let mut by_ds: BTreeMap<usize, ([f64; 3], usize)> = BTreeMap::new();
    for p in pts {
        let e = by_ds.entry(p.geometry).or_insert(([0.0; 3], 0));
        for (a, u) in e.0.iter_mut().zip(p.unit_enu) {
            *a += u;
        }
        e.1 += 1;
    }
    if by_ds.len() < 2 {
        return None;
    }
    if let Some(r) = &ctx.portfolio.reference {
        return Some(format!(
            "datasets re-referenced epoch by epoch to the median of their coherent points within \
             {} m of ({}, {}) in {} before being combined",
            r.radius_m, r.point[0], r.point[1], r.crs
        ));
    }
    let units: Vec<(usize, [f64; 3])> = by_ds
        .iter()
        .map(|(d, (u, n))| (*d, u.map(|c| c / *n as f64)))
        .collect();
    let east = units.iter().find(|(_, u)| {
        crate::series::los::LookDirection::of(*u)
            == Some(crate::series::los::LookDirection::EastLooking)
    });
    let west = units.iter().find(|(_, u)| {
        crate::series::los::LookDirection::of(*u)
            == Some(crate::series::los::LookDirection::WestLooking)
    });
    let base = "datasets combined without a common reference ([reference] not given): each \
                keeps the reference point it was processed with";
    match (east, west) {
        (Some((da, ua)), Some((_, ub))) => {
            // Response of (d_E, d_U) to 1 mm in the first dataset: G⁻¹·(1, 0), G = [u_E u_U].
            let det = ua[0] * ub[2] - ua[2] * ub[0];
            let (de, du) = (ub[2] / det, -ub[0] / det);
            Some(format!(
                "{base}; a reference drift of 1 mm/yr in `{}` alone would appear as {:.2} mm/yr \
                 of east–west and {:.2} mm/yr of vertical velocity",
                ctx.datasets[*da].name,
                de.abs(),
                du.abs()
            ))
        }
        _ => Some(format!(
            "{base}; a reference difference between them shifts the vertical values of one \
             dataset's points against the other's"
        )),
    }
}

/// The assumption line for a category stated without a measured horizontal strain.
fn lower_bound_note(status: crate::metrics::HorizontalStrainStatus) -> String {
    use crate::metrics::HorizontalStrainStatus as H;
    let why = match status {
        H::NotObservableAxis => {
            "the building's axis lies too far from east–west for the radar, which does not see \
             north–south motion"
        }
        H::NotObservableGeometry => {
            "the data lack an east-looking and a west-looking geometry at both ends of the axis, \
             so east–west motion cannot be separated from vertical"
        }
        H::NotMeasured | H::Measured => "it could not be measured",
    };
    format!(
        "horizontal strain not observable ({why}): taken as 0 in the strain relations, so the \
         category comes from bending and shear alone and may be understated"
    )
}

/// Epochs in the window and their span (years), the smallest over the datasets `used` (those
/// of the structure's kept points), as the evidence grade defines them (`grade::GradeInputs`).
/// With no dataset used: the largest epoch count of any dataset (for the status message) and no
/// span.
pub fn series_extent(ctx: &RunContext, used: &[usize]) -> (usize, Option<f64>) {
    if used.is_empty() {
        let n = ctx.window_idx.iter().map(Vec::len).max().unwrap_or(0);
        return (n, None);
    }
    let n = used
        .iter()
        .map(|&d| ctx.window_idx[d].len())
        .min()
        .unwrap_or(0);
    let span = used
        .iter()
        .map(
            |&d| match (ctx.window_idx[d].first(), ctx.window_idx[d].last()) {
                (Some(&a), Some(&b)) => {
                    let e = &ctx.datasets[d].epochs;
                    (e[b] - e[a]).num_days() as f64 / 365.25
                }
                _ => 0.0,
            },
        )
        .min_by(f64::total_cmp);
    (n, span)
}

fn series_pass(p: crate::portfolio::Pass) -> crate::series::los::Pass {
    match p {
        crate::portfolio::Pass::Ascending => crate::series::los::Pass::Ascending,
        crate::portfolio::Pass::Descending => crate::series::los::Pass::Descending,
    }
}

/// LOS unit vector of a member point: per-point angles when mapped, else the dataset's.
///
/// Per-point angles were validated when the points were read (ranges and pass, insar-methods
/// §2.4; `ingest::points`), so the construction cannot fail here; were it to, the vector is NaN,
/// which the series stage refuses with its reason, never a vertical-only stand-in.
fn point_unit(ctx: &RunContext, m: &Member) -> [f64; 3] {
    if let Some(u) = ctx.scene_unit[m.dataset] {
        if ctx.portfolio.datasets[m.dataset]
            .columns
            .incidence
            .is_none()
            && ctx.portfolio.datasets[m.dataset].columns.heading.is_none()
        {
            return u;
        }
    }
    let look = match ctx.portfolio.datasets[m.dataset].look {
        crate::portfolio::LookSide::Right => crate::series::los::LookSide::Right,
        crate::portfolio::LookSide::Left => crate::series::los::LookSide::Left,
    };
    crate::series::los::unit_vector_from_angles(
        m.point.incidence_deg(),
        m.point.heading_deg(),
        look,
    )
    .unwrap_or([f64::NAN; 3])
}

fn branch_label(b: crate::damage::Branch) -> &'static str {
    match b {
        crate::damage::Branch::Bending => "bending strain",
        crate::damage::Branch::Diagonal => "diagonal strain",
        crate::damage::Branch::Principal => "principal strain",
    }
}

/// FNV-1a hash of text (seeds per structure, so results do not depend on processing order).
pub fn fnv(text: &str) -> u64 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for b in text.as_bytes() {
        h ^= u64::from(*b);
        h = h.wrapping_mul(0x0100_0000_01b3);
    }
    h
}

/// Residuals of the least-squares plane v = a + b·x + c·y (x, y in m); None when the points are
/// (nearly) collinear and the plane is not determined.
fn plane_residuals(xy: &[(f64, f64)], v: &[f64]) -> Option<Vec<f64>> {
    let n = v.len();
    let a = nalgebra::DMatrix::from_fn(n, 3, |i, j| match j {
        0 => 1.0,
        1 => xy[i].0,
        _ => xy[i].1,
    });
    let b = nalgebra::DVector::from_column_slice(v);
    let svd = a.clone().svd(true, true);
    let smax = svd.singular_values.max();
    let smin = svd.singular_values.min();
    if smin.is_nan() || smin <= 1e-9 * smax.max(1.0) || smin < 1.0 {
        return None; // collinear (spread along one direction below ~1 m)
    }
    let coef = svd.solve(&b, 1e-12).ok()?;
    let fit = a * coef;
    Some((0..n).map(|i| v[i] - fit[i]).collect())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The one-pass statistics equal the two-pass reference functions on gappy, trending,
    /// seasonal series, and the jump flag equals the full scan.
    #[test]
    fn one_pass_point_statistics_match_the_reference_functions() {
        let lambda = crate::series::jumps::wavelength_mm(crate::series::jumps::C_BAND_FREQUENCY_HZ);
        let n = 120;
        let times = WindowTimes::from_days((0..n as i64).map(|k| k * 12).collect());
        let t_yr = times.years.clone();
        let idx: Vec<usize> = (0..n).collect();
        for case in 0..6 {
            let v: Vec<f32> = (0..n)
                .map(|k| {
                    if (k * 7 + case) % 11 == 0 {
                        return f32::NAN;
                    }
                    let t = t_yr[k];
                    let mut x = -4.0 * t * case as f64
                        + 3.0 * (std::f64::consts::TAU * t).sin()
                        + ((k * 37 % 17) as f64 - 8.0) * 0.3;
                    if case == 5 && k >= 60 {
                        x -= lambda / 2.0;
                    }
                    x as f32
                })
                .collect();
            let st = PointStats::of(SeriesRef::floats(&v), &idx, &times, lambda);
            let (t, vv): (Vec<f64>, Vec<f64>) = idx
                .iter()
                .filter(|&&i| v[i].is_finite())
                .map(|&i| (t_yr[i], f64::from(v[i])))
                .unzip();
            assert_eq!(st.valid_epochs(), t.len());
            let vel = ols_velocity_mm_per_yr(&t, &vv).unwrap();
            assert!((st.los_velocity_mm_per_yr().unwrap() - vel).abs() < 1e-5 * vel.abs().max(1.0));
            // White-noise SE against the OLS reference (insar-methods.md §5.2).
            let se = crate::series::fit::fit_linear(&t, &vv)
                .unwrap()
                .se_velocity_mm_per_yr;
            let se1 = st.los_velocity_se_mm_per_yr().unwrap();
            assert!((se1 - se).abs() < 1e-5 * se, "case {case}: {se1} vs {se}");
            let (d, s) = period_displacement(&t, &vv).unwrap();
            let (d1, s1) = st.period().unwrap();
            assert!((d1 - d).abs() < 1e-5 * d.abs().max(1.0), "case {case}");
            assert!((s1 - s).abs() < 1e-5 * s.max(1.0), "case {case}");
            let full = !crate::series::jumps::detect_jumps(&vv, lambda)
                .flags
                .is_empty();
            assert_eq!(st.jump_candidate(), full, "case {case}");
            assert_eq!(full, case == 5);
        }
    }

    #[test]
    fn too_few_epochs_give_no_velocity_or_period() {
        let v = [0.0f32, 1.0, f32::NAN, 2.0];
        let t = WindowTimes::from_days(vec![0, 37, 73, 110]);
        let st = PointStats::of(SeriesRef::floats(&v), &[0, 1, 2, 3], &t, 55.0);
        assert_eq!(st.valid_epochs(), 3);
        assert!(st.los_velocity_mm_per_yr().is_some());
        assert!(st.period().is_none());
        let t2 = WindowTimes::from_days(vec![0, 37]);
        let st = PointStats::of(SeriesRef::floats(&v[..2]), &[0, 1], &t2, 55.0);
        assert!(st.los_velocity_mm_per_yr().is_none());
        // The integer path on stored codes draws the same lines.
        let mut codes = Vec::new();
        let q =
            crate::ingest::store::quantise(&[0.0, 1.0, f64::NAN, 2.0], Some(0), 2.0, &mut codes);
        let c = SeriesRef::new(&codes, q.per_mm);
        let st = PointStats::of(c, &[0, 1, 2, 3], &t, 55.0);
        assert_eq!(st.valid_epochs(), 3);
        assert!(st.los_velocity_mm_per_yr().is_some());
        assert!(st.period().is_none());
        let st = PointStats::of(SeriesRef::new(&codes[..2], q.per_mm), &[0, 1], &t2, 55.0);
        assert!(st.los_velocity_mm_per_yr().is_none());
    }

    /// The integer path on stored codes gives the statistics of the general path on the decoded
    /// values: decimal-exact and scaled stores, gaps, trends, a sub-window, an unwrapping jump.
    #[test]
    fn code_statistics_equal_the_general_path() {
        let lambda = crate::series::jumps::wavelength_mm(crate::series::jumps::C_BAND_FREQUENCY_HZ);
        let n = 150usize;
        let all_days: Vec<i64> = (0..n as i64).map(|k| 5 + k * 12 + (k % 3)).collect();
        for case in 0..8 {
            let mm: Vec<f64> = (0..n)
                .map(|k| {
                    if (k * 5 + case) % 13 == 0 {
                        return f64::NAN;
                    }
                    let t = all_days[k] as f64 / 365.25;
                    let mut x = -6.5 * t * case as f64
                        + 2.0 * (std::f64::consts::TAU * t).cos()
                        + ((k * 31 % 19) as f64 - 9.0) * 0.37;
                    if case == 7 {
                        // A plain seasonal series with one half-wavelength step.
                        x = 3.0 * (std::f64::consts::TAU * t).sin()
                            + ((k * 37 % 17) as f64 - 8.0) * 0.3
                            - if k >= 60 { lambda / 2.0 } else { 0.0 };
                    }
                    if case % 2 == 0 {
                        (x * 100.0).round() / 100.0
                    } else {
                        x
                    }
                })
                .collect();
            let max = mm
                .iter()
                .filter(|v| v.is_finite())
                .fold(0.0f64, |a, v| a.max(v.abs()));
            let mut codes = Vec::new();
            let decimals = (case % 2 == 0).then_some(2);
            let q = crate::ingest::store::quantise(&mm, decimals, max, &mut codes);
            let stored = SeriesRef::new(&codes, q.per_mm);
            let decoded = stored.to_vec();
            // The window: epochs 10..140, days from its start.
            let idx: Vec<usize> = (10..140).collect();
            let times = WindowTimes::from_days(idx.iter().map(|&i| all_days[i] - 100).collect());
            let a = PointStats::of(stored, &idx, &times, lambda);
            let b = PointStats::of(SeriesRef::floats(&decoded), &idx, &times, lambda);
            assert_eq!(a.valid_epochs(), b.valid_epochs(), "case {case}");
            let (va, vb) = (
                a.los_velocity_mm_per_yr().unwrap(),
                b.los_velocity_mm_per_yr().unwrap(),
            );
            assert!(
                (va - vb).abs() < 1e-5 * vb.abs().max(1.0),
                "case {case}: {va} vs {vb}"
            );
            let (ea, eb) = (
                a.los_velocity_se_mm_per_yr().unwrap(),
                b.los_velocity_se_mm_per_yr().unwrap(),
            );
            assert!((ea - eb).abs() < 1e-5 * eb, "case {case}: SE {ea} vs {eb}");
            let ((da, sa), (db, sb)) = (a.period().unwrap(), b.period().unwrap());
            assert!((da - db).abs() < 1e-5 * db.abs().max(1.0), "case {case}");
            assert!((sa - sb).abs() < 1e-5 * sb.max(1.0), "case {case}");
            assert_eq!(a.jump_candidate(), b.jump_candidate(), "case {case}");
            assert_eq!(a.jump_candidate(), case == 7, "case {case}");
        }
    }
}
