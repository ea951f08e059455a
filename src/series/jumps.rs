//! Phase-unwrapping jump detection in one point's LOS series: steps between consecutive valid
//! epochs that are close to a whole number k of half wavelengths.
//!
//! Owns the per-point heuristic and the wavelength arithmetic. It never changes a series:
//! [`corrected_series`] offers a separately labelled corrected copy, and the decision to exclude a
//! flagged point (or to treat a jump shared by all points of a structure as a real event) belongs
//! to the caller.

use serde::Serialize;

use super::stats::{MAD_TO_SIGMA, median};

/// Speed of light in vacuum (m/s), exact by definition of the metre.
pub const SPEED_OF_LIGHT_M_PER_S: f64 = 299_792_458.0;

/// Typical C-band centre frequency (Hz) \[M: typical value, insar-methods.md §2.7\].
pub const C_BAND_FREQUENCY_HZ: f64 = 5.405e9;

/// Radar wavelength `λ = c/f` in millimetres.
///
/// # Units
/// Hz in, mm out.
///
/// # References
/// insar-methods.md §2.7 and Appendix A WL-1 \[C\]: 5.405 GHz → λ = 55.47 mm, λ/2 = 27.73 mm.
///
/// # Examples
/// ```
/// use plinth::series::jumps::{wavelength_mm, C_BAND_FREQUENCY_HZ};
/// assert!((wavelength_mm(C_BAND_FREQUENCY_HZ) - 55.47).abs() < 0.01);
/// ```
/// Non-positive or non-finite frequency gives NaN.
pub fn wavelength_mm(frequency_hz: f64) -> f64 {
    if !(frequency_hz.is_finite() && frequency_hz > 0.0) {
        return f64::NAN;
    }
    SPEED_OF_LIGHT_M_PER_S / frequency_hz * 1000.0
}

/// One suspected unwrapping error.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct JumpFlag {
    /// Index (into the given series) of the last valid epoch before the step.
    pub before_index: usize,
    /// Index of the first valid epoch after the step.
    pub after_index: usize,
    /// Observed step `d_after − d_before` (mm LOS).
    pub step_mm: f64,
    /// Number of half-wavelength cycles k = round(step/(λ/2)) (non-zero).
    pub cycles: i32,
    /// Jump size `k·λ/2` (mm LOS).
    pub cycle_jump_mm: f64,
    /// `|step − k·λ/2|` (mm).
    pub misfit_mm: f64,
}

/// Result of scanning one series.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct JumpScan {
    /// Robust SD of consecutive steps σ_Δ = 1.4826·MAD (mm); `None` with fewer than 2 steps.
    pub robust_sigma_step_mm: Option<f64>,
    /// Candidate jumps in time order.
    pub flags: Vec<JumpFlag>,
}

/// Detect candidate unwrapping jumps.
///
/// 1. Steps Δd between consecutive **valid** epochs (NaN epochs are skipped, so a step may span a
///    gap); σ_Δ = 1.4826·median(|Δd − median Δd|).
/// 2. Candidate where |Δd| > λ/4 and, with k = round(Δd/(λ/2)) ≠ 0,
///    |Δd − k·λ/2| < max(3σ_Δ, 0.15·λ/2).
///
/// 3. Persistence (the step model of §5.8, reduced): the level change between the median of up
///    to 3 valid epochs after the step and the median of up to 3 before it must also lie within
///    the tolerance of k·λ/2. A single-epoch noise spike (up, then back down) is not a jump.
///
/// The notes' confirmation by neighbouring points is done per structure by the caller.
///
/// # Units
/// mm LOS (positive towards the satellite); `wavelength_mm` in mm.
///
/// # References
/// insar-methods.md §5.10 \[Rec\] (heuristic); Series E (§5.12 \[C\]): one jump between epochs 39 and
/// 40, Δd = −28.52, k = −1, misfit 0.7825, σ_Δ = 0.3843.
///
/// # Examples
/// ```
/// use plinth::series::jumps::{detect_jumps, wavelength_mm, C_BAND_FREQUENCY_HZ};
/// let lambda = wavelength_mm(C_BAND_FREQUENCY_HZ);
/// let mut d: Vec<f64> = (0..20).map(|i| -0.2 * i as f64).collect();
/// for v in d.iter_mut().skip(10) { *v -= lambda / 2.0; }
/// let scan = detect_jumps(&d, lambda);
/// assert_eq!(scan.flags.len(), 1);
/// assert_eq!((scan.flags[0].before_index, scan.flags[0].after_index, scan.flags[0].cycles), (9, 10, -1));
/// ```
///
/// Fewer than 2 valid epochs, or an invalid wavelength, give an empty scan.
pub fn detect_jumps(values_mm: &[f64], wavelength_mm: f64) -> JumpScan {
    let valid: Vec<(usize, f64)> = values_mm
        .iter()
        .copied()
        .enumerate()
        .filter(|(_, v)| v.is_finite())
        .collect();
    if valid.len() < 2 || !(wavelength_mm.is_finite() && wavelength_mm > 0.0) {
        return JumpScan {
            robust_sigma_step_mm: None,
            flags: Vec::new(),
        };
    }
    let steps: Vec<(usize, usize, f64)> = valid
        .windows(2)
        .map(|w| (w[0].0, w[1].0, w[1].1 - w[0].1))
        .collect();
    let deltas: Vec<f64> = steps.iter().map(|s| s.2).collect();
    let sigma = if deltas.len() >= 2 {
        let m = median(&deltas).unwrap_or(0.0);
        let dev: Vec<f64> = deltas.iter().map(|x| (x - m).abs()).collect();
        median(&dev).map(|v| MAD_TO_SIGMA * v)
    } else {
        None
    };
    let half = wavelength_mm / 2.0;
    let quarter = wavelength_mm / 4.0;
    let tolerance = (3.0 * sigma.unwrap_or(0.0)).max(0.15 * half);
    let flags = steps
        .iter()
        .filter_map(|&(before_index, after_index, step_mm)| {
            if step_mm.abs() <= quarter {
                return None;
            }
            let k = (step_mm / half).round();
            if k == 0.0 {
                return None;
            }
            let cycle_jump_mm = k * half;
            let misfit_mm = (step_mm - cycle_jump_mm).abs();
            let pos = valid.iter().position(|v| v.0 == after_index)?;
            let before: Vec<f64> = valid[pos.saturating_sub(3)..pos]
                .iter()
                .map(|v| v.1)
                .collect();
            let after: Vec<f64> = valid[pos..(pos + 3).min(valid.len())]
                .iter()
                .map(|v| v.1)
                .collect();
            let level_change =
                median(&after).unwrap_or(f64::NAN) - median(&before).unwrap_or(f64::NAN);
            let persists = (level_change - cycle_jump_mm).abs() < tolerance;
            (misfit_mm < tolerance && persists).then_some(JumpFlag {
                before_index,
                after_index,
                step_mm,
                cycles: k as i32,
                cycle_jump_mm,
                misfit_mm,
            })
        })
        .collect();
    JumpScan {
        robust_sigma_step_mm: sigma,
        flags,
    }
}

/// True when [`detect_jumps`] would flag at least one candidate. Same result, but a series
/// without any step larger than λ/4 between consecutive valid epochs (the first condition of
/// step 2) is answered without the robust-σ medians, which is nearly every series.
pub fn has_jump_candidate(values_mm: &[f64], wavelength_mm: f64) -> bool {
    !jump_flags(values_mm, wavelength_mm).is_empty()
}

/// The flags of [`detect_jumps`] (the same list), without its robust σ when no step between
/// consecutive valid epochs exceeds λ/4: no step can then be flagged (first condition of step
/// 2), so the two medians are skipped — the case of nearly every series.
pub fn jump_flags(values_mm: &[f64], wavelength_mm: f64) -> Vec<JumpFlag> {
    let quarter = wavelength_mm / 4.0;
    let mut prev: Option<f64> = None;
    let mut big_step = false;
    for v in values_mm.iter().copied().filter(|v| v.is_finite()) {
        if let Some(p) = prev {
            if (v - p).abs() > quarter {
                big_step = true;
                break;
            }
        }
        prev = Some(v);
    }
    if big_step {
        detect_jumps(values_mm, wavelength_mm).flags
    } else {
        Vec::new()
    }
}

/// A copy of the series with `k·λ/2` removed from every epoch at or after each flagged jump.
///
/// Offered as an explicitly labelled alternative (insar-methods.md §5.10 step 4); the pipeline's
/// default is to flag and exclude the point, never to use this silently. NaN stays NaN.
pub fn corrected_series(values_mm: &[f64], flags: &[JumpFlag]) -> Vec<f64> {
    let mut out = values_mm.to_vec();
    for f in flags {
        for v in out.iter_mut().skip(f.after_index) {
            *v -= f.cycle_jump_mm;
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::series::fit::test_series::{noise, t};

    /// Appendix A WL-1 \[C\].
    #[test]
    fn wl1_wavelength() {
        let l = wavelength_mm(C_BAND_FREQUENCY_HZ);
        assert!((l - 55.47).abs() < 0.01);
        assert!((l / 2.0 - 27.73).abs() < 0.01);
        assert!((l / 2.0 - 27.73288).abs() < 1e-5);
        assert!((l / 4.0 - 13.87).abs() < 0.01);
        // λ/(4·12 d) = 422.1 mm/yr
        assert!((l / 4.0 / (12.0 / 365.25) - 422.1).abs() < 0.1);
        assert!(wavelength_mm(0.0).is_nan());
    }

    /// Series E (insar-methods.md §5.12 \[C\]).
    #[test]
    fn series_e_jump() {
        let lambda = wavelength_mm(C_BAND_FREQUENCY_HZ);
        let d: Vec<f64> = (0..60)
            .map(|i| {
                let v = -5.0 * t(i) + 0.3 * noise(i);
                if i >= 40 { v - lambda / 2.0 } else { v }
            })
            .collect();
        let expected = [-0.4955, 0.1901, -28.52, -0.1873, -0.5696];
        for (j, e) in expected.iter().enumerate() {
            let i = 38 + j;
            assert!((d[i] - d[i - 1] - e).abs() < 1e-2, "Δd at {i}");
        }
        let scan = detect_jumps(&d, lambda);
        assert_eq!(has_jump_candidate(&d, lambda), !scan.flags.is_empty());
        assert!((scan.robust_sigma_step_mm.unwrap() - 0.3843).abs() < 1e-4);
        assert_eq!(scan.flags.len(), 1);
        let f = &scan.flags[0];
        assert_eq!((f.before_index, f.after_index, f.cycles), (39, 40, -1));
        assert!((f.step_mm + 28.52).abs() < 1e-2);
        assert!((f.misfit_mm - 0.7825).abs() < 1e-4);
        let fixed = corrected_series(&d, &scan.flags);
        assert!(detect_jumps(&fixed, lambda).flags.is_empty());
        assert!((fixed[59] - d[59] - lambda / 2.0).abs() < 1e-12);
    }

    /// Gaps are skipped: a jump across a NaN epoch is reported between the valid neighbours;
    /// a fast but smooth motion (steps of 10 mm < λ/4) is not flagged.
    #[test]
    fn gaps_and_smooth_motion() {
        let lambda = wavelength_mm(C_BAND_FREQUENCY_HZ);
        let mut d: Vec<f64> = (0..30).map(|i| 0.1 * i as f64).collect();
        for v in d.iter_mut().skip(15) {
            *v += lambda / 2.0;
        }
        d[15] = f64::NAN;
        let scan = detect_jumps(&d, lambda);
        assert_eq!(has_jump_candidate(&d, lambda), !scan.flags.is_empty());
        assert_eq!(scan.flags.len(), 1);
        assert_eq!(
            (
                scan.flags[0].before_index,
                scan.flags[0].after_index,
                scan.flags[0].cycles
            ),
            (14, 16, 1)
        );
        let smooth: Vec<f64> = (0..30).map(|i| -10.0 * i as f64).collect();
        assert!(detect_jumps(&smooth, lambda).flags.is_empty());
        assert!(detect_jumps(&[1.0], lambda).flags.is_empty());
        assert!(!has_jump_candidate(&smooth, lambda));
        assert!(!has_jump_candidate(&[1.0], lambda));
    }
}

#[cfg(test)]
mod persistence_tests {
    use super::*;

    #[test]
    fn single_epoch_spike_is_not_a_jump() {
        // A +15 mm spike at one epoch that returns to the trend is noise, not a λ/2 step
        // (persistence rule, insar-methods.md §5.10 step 3 / §5.8 step model).
        let lambda = wavelength_mm(C_BAND_FREQUENCY_HZ);
        let mut d: Vec<f64> = (0..30).map(|i| -0.1 * i as f64).collect();
        d[15] += 15.0;
        assert!(detect_jumps(&d, lambda).flags.is_empty());
        // The same series with a real step of λ/2 at epoch 15 is flagged once.
        let mut e: Vec<f64> = (0..30).map(|i| -0.1 * i as f64).collect();
        for v in e.iter_mut().skip(15) {
            *v -= lambda / 2.0;
        }
        assert_eq!(detect_jumps(&e, lambda).flags.len(), 1);
    }
}
