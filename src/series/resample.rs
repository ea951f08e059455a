//! Putting two geometries' series on common epochs and a common reference epoch.
//!
//! Option 2 of insar-methods.md §4.7: the epochs of the first geometry inside the overlap of both
//! valid date ranges, linear interpolation of the second between its neighbouring valid
//! acquisitions, never extrapolating and never bridging gaps longer than a limit; then both series
//! are re-referenced to the same epoch t0 (§4.6). Owns only this temporal alignment; the spatial
//! re-referencing to a stable area is the caller's, and decomposition is `decompose`'s.

use chrono::NaiveDate;
use serde::Serialize;

/// Default longest gap between the two acquisitions used for an interpolation (days):
/// 36 = 3 nominal 12-day revisits (insar-methods.md §4.7 \[Rec\]).
pub const DEFAULT_MAX_GAP_DAYS: i64 = 36;

/// Why two series could not be aligned.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ResampleError {
    /// Dates and values differ in length.
    #[error("{which} series: {dates} dates but {values} values")]
    LengthMismatch {
        /// "first" or "second".
        which: &'static str,
        /// Number of dates.
        dates: usize,
        /// Number of values.
        values: usize,
    },
    /// Dates not strictly increasing.
    #[error("{which} series: dates are not strictly increasing")]
    Unsorted {
        /// "first" or "second".
        which: &'static str,
    },
    /// No valid value in a series, or the valid ranges do not overlap.
    #[error("the two series have no overlapping valid date range")]
    NoOverlap,
    /// No common epoch where both values exist.
    #[error("no common epoch with values in both series (gaps longer than {max_gap_days} days?)")]
    NoCommonEpoch {
        /// The gap limit applied.
        max_gap_days: i64,
    },
}

/// Two series on common epochs, both re-referenced to `reference_date`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CommonSeries {
    /// Common epochs (first geometry's dates inside the overlap).
    #[serde(serialize_with = "crate::text::iso_dates")]
    pub dates: Vec<NaiveDate>,
    /// Common reference epoch t0: the first common epoch where both values exist.
    pub reference_date: NaiveDate,
    /// First series at its own dates minus its value at t0 (mm); `None` where missing.
    pub first_mm: Vec<Option<f64>>,
    /// Second series interpolated to the common dates minus its value at t0 (mm); `None` where
    /// it would need extrapolation or bridging a gap longer than the limit.
    pub second_mm: Vec<Option<f64>>,
}

fn check(which: &'static str, dates: &[NaiveDate], values: &[f64]) -> Result<(), ResampleError> {
    if dates.len() != values.len() {
        return Err(ResampleError::LengthMismatch {
            which,
            dates: dates.len(),
            values: values.len(),
        });
    }
    if dates.windows(2).any(|w| w[1] <= w[0]) {
        return Err(ResampleError::Unsorted { which });
    }
    Ok(())
}

/// Linear interpolation of a dated series at `target`, between the nearest valid (finite)
/// acquisitions on each side.
///
/// Returns the value itself when `target` is a valid acquisition date; `None` when `target` lies
/// outside the valid range (no extrapolation) or when the bracketing acquisitions are more than
/// `max_gap_days` apart.
///
/// # Units
/// Values in mm (any unit is carried through); dates as calendar days.
///
/// # References
/// insar-methods.md §4.7 option 2 \[P, Rec\].
///
/// Dates must be strictly increasing (not checked here; [`align_two`] checks).
pub fn interpolate_at(
    dates: &[NaiveDate],
    values: &[f64],
    target: NaiveDate,
    max_gap_days: i64,
) -> Option<f64> {
    let idx = dates.partition_point(|d| *d < target);
    if idx < dates.len() && dates[idx] == target && values.get(idx).is_some_and(|v| v.is_finite()) {
        return Some(values[idx]);
    }
    let before = (0..idx).rev().find(|&i| values[i].is_finite())?;
    let after = (idx..dates.len()).find(|&i| values[i].is_finite() && dates[i] > target)?;
    let span = (dates[after] - dates[before]).num_days();
    if span > max_gap_days || span <= 0 {
        return None;
    }
    let w = (target - dates[before]).num_days() as f64 / span as f64;
    Some(values[before] + w * (values[after] - values[before]))
}

fn valid_range(dates: &[NaiveDate], values: &[f64]) -> Option<(NaiveDate, NaiveDate)> {
    let first = values.iter().position(|v| v.is_finite())?;
    let last = values.iter().rposition(|v| v.is_finite())?;
    Some((dates[first], dates[last]))
}

/// Align two series: common epochs = first series' dates inside the overlap of both valid
/// ranges; second series interpolated; both re-referenced to the first common epoch where both
/// have values.
///
/// # Units
/// mm; dates.
///
/// # References
/// insar-methods.md §4.6 (same reference epoch) and §4.7 option 2 \[P, Rec\]; check value RES-1
/// (day 372: asc −7.341, desc −5.137 → (d_E, d_U) = (1.971, −7.885)).
///
/// Interpolated values are correlated and smoothed: downstream significance tests on a series
/// built from them are optimistic (the notes warn of this; the caller states it).
pub fn align_two(
    first_dates: &[NaiveDate],
    first_values: &[f64],
    second_dates: &[NaiveDate],
    second_values: &[f64],
    max_gap_days: i64,
) -> Result<CommonSeries, ResampleError> {
    check("first", first_dates, first_values)?;
    check("second", second_dates, second_values)?;
    let (f0, f1) = valid_range(first_dates, first_values).ok_or(ResampleError::NoOverlap)?;
    let (s0, s1) = valid_range(second_dates, second_values).ok_or(ResampleError::NoOverlap)?;
    let (start, end) = (f0.max(s0), f1.min(s1));
    if start > end {
        return Err(ResampleError::NoOverlap);
    }
    let mut dates = Vec::new();
    let mut first = Vec::new();
    let mut second = Vec::new();
    for (d, v) in first_dates.iter().zip(first_values.iter()) {
        if *d < start || *d > end {
            continue;
        }
        dates.push(*d);
        first.push(v.is_finite().then_some(*v));
        second.push(interpolate_at(
            second_dates,
            second_values,
            *d,
            max_gap_days,
        ));
    }
    let r = (0..dates.len())
        .find(|&i| first[i].is_some() && second[i].is_some())
        .ok_or(ResampleError::NoCommonEpoch { max_gap_days })?;
    let (a0, b0) = (first[r].unwrap_or(0.0), second[r].unwrap_or(0.0));
    Ok(CommonSeries {
        reference_date: dates[r],
        dates,
        first_mm: first.into_iter().map(|v| v.map(|x| x - a0)).collect(),
        second_mm: second.into_iter().map(|v| v.map(|x| x - b0)).collect(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::series::decompose::{LosObservation, decompose_east_up};

    const UA: [f64; 3] = [-0.615568, -0.130843, 0.777146];
    const UD: [f64; 3] = [0.588664, -0.125124, 0.798636];

    fn day(n: i64) -> NaiveDate {
        NaiveDate::from_ymd_opt(2020, 1, 1).unwrap() + chrono::Duration::days(n)
    }

    /// insar-methods.md §4.7 worked example / Appendix A RES-1 \[C\].
    #[test]
    fn res1_day_372() {
        let (ve, vu) = (2.0, -8.0);
        let asc_days: Vec<i64> = (0..50).map(|i| 12 * i).collect(); // 0..588
        let desc_days: Vec<i64> = (0..50).map(|i| 5 + 12 * i).collect(); // 5..593
        // each series zero on its own first date
        let los = |u: [f64; 3], days: &[i64]| -> Vec<f64> {
            days.iter()
                .map(|d| (u[0] * ve + u[2] * vu) * (d - days[0]) as f64 / 365.25)
                .collect()
        };
        let a = los(UA, &asc_days);
        let d = los(UD, &desc_days);
        let ad: Vec<NaiveDate> = asc_days.iter().map(|n| day(*n)).collect();
        let dd: Vec<NaiveDate> = desc_days.iter().map(|n| day(*n)).collect();
        let c = align_two(&ad, &a, &dd, &d, DEFAULT_MAX_GAP_DAYS).unwrap();
        assert_eq!(c.dates.len(), 49);
        assert_eq!(c.dates[0], day(12));
        assert_eq!(c.reference_date, day(12));
        let i = c.dates.iter().position(|x| *x == day(372)).unwrap();
        let (la, ld) = (c.first_mm[i].unwrap(), c.second_mm[i].unwrap());
        assert!((la + 7.341).abs() < 1e-3 && (ld + 5.137).abs() < 1e-3);
        let x = decompose_east_up(&[
            LosObservation {
                los_mm: la,
                sigma_mm: 1.0,
                unit_enu: UA,
            },
            LosObservation {
                los_mm: ld,
                sigma_mm: 1.0,
                unit_enu: UD,
            },
        ])
        .unwrap();
        assert!((x.east_mm - 1.971).abs() < 1e-3 && (x.up_mm + 7.885).abs() < 1e-3);
        // without re-referencing: (2.095, −8.102)
        let raw_a = a[asc_days.iter().position(|d| *d == 372).unwrap()];
        let raw_d = interpolate_at(&dd, &d, day(372), DEFAULT_MAX_GAP_DAYS).unwrap();
        let y = decompose_east_up(&[
            LosObservation {
                los_mm: raw_a,
                sigma_mm: 1.0,
                unit_enu: UA,
            },
            LosObservation {
                los_mm: raw_d,
                sigma_mm: 1.0,
                unit_enu: UD,
            },
        ])
        .unwrap();
        assert!((y.east_mm - 2.095).abs() < 1e-3 && (y.up_mm + 8.102).abs() < 1e-3);
    }

    #[test]
    fn no_extrapolation_and_gap_limit() {
        let dates = [day(0), day(12), day(60), day(72)];
        let vals = [0.0, 12.0, 60.0, f64::NAN];
        assert_eq!(interpolate_at(&dates, &vals, day(6), 36), Some(6.0));
        assert_eq!(interpolate_at(&dates, &vals, day(12), 36), Some(12.0));
        assert_eq!(interpolate_at(&dates, &vals, day(30), 36), None); // 48-day gap
        assert_eq!(interpolate_at(&dates, &vals, day(30), 48), Some(30.0));
        assert_eq!(interpolate_at(&dates, &vals, day(66), 36), None); // beyond last valid
        assert_eq!(interpolate_at(&dates, &vals, day(-1), 36), None);
        assert!(matches!(
            align_two(&dates, &vals, &[day(100), day(112)], &[0.0, 1.0], 36),
            Err(ResampleError::NoOverlap)
        ));
        assert!(matches!(
            align_two(&[day(1), day(0)], &[0.0, 1.0], &dates, &vals, 36),
            Err(ResampleError::Unsorted { which: "first" })
        ));
    }
}
