//! A common reference for datasets that are combined: every dataset is re-referenced, epoch by
//! epoch, to the median of its own coherent points in one stable area (`[reference]`).
//!
//! Why: InSAR values are relative to the reference point each dataset was processed with
//! (insar-methods.md §6.6). Combining an ascending and a descending dataset with different
//! references turns a reference that creeps by 1 mm/yr in one of them into about 0.8 mm/yr of
//! false east–west and 0.6 mm/yr of false vertical velocity (for the LOS-1/LOS-2 pair of
//! insar-methods.md Appendix A). Practitioners re-reference both to one stable area before
//! combining them (insar-methods.md §4.6 \[P, D\]).
//!
//! Owns: the reference area in the analysis CRS, the per-epoch median of the area's points and
//! its subtraction from every point of the dataset. Does not decide which points are read (the
//! reader keeps the area's points as well as those within reach of a structure).

use chrono::NaiveDate;
use serde::{Deserialize, Serialize};

use super::store::Dataset;
use crate::coords::{Crs, Transformer};
use crate::error::InputError;
use crate::portfolio::ReferenceSpec;

/// Fewest coherent points in the reference area of each dataset. Our choice (common practice,
/// no single source: a reference *area* of several stable points rather than one point, so that
/// the median is not one point's noise); with 5 points the median's noise is about 0.5 σ of one
/// point (1.2533·σ/√5 for a normal distribution, Kenney & Keeping 1962 \[M\]).
pub const MIN_REFERENCE_POINTS: usize = 5;

/// The reference area in the analysis CRS.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ReferenceArea {
    /// Centre easting, m.
    pub x: f64,
    /// Centre northing, m.
    pub y: f64,
    /// Radius, m.
    pub radius_m: f64,
}

impl ReferenceArea {
    /// The `[reference]` centre transformed to the analysis CRS.
    pub fn project(
        spec: &ReferenceSpec,
        analysis: &Crs,
        file: &std::path::Path,
    ) -> Result<Self, InputError> {
        let bad = |m: String| {
            InputError::new(
                file,
                "key reference.point",
                m,
                "give the centre in the crs of the [reference] section (default EPSG:4326: \
                 [longitude, latitude])",
            )
        };
        let src = Crs::parse(&spec.crs).map_err(|e| bad(e.to_string()))?;
        let (x, y) = Transformer::new(&src, analysis)
            .apply(spec.point[0], spec.point[1])
            .map_err(|e| bad(format!("cannot transform the point: {e}")))?;
        Ok(ReferenceArea {
            x,
            y,
            radius_m: spec.radius_m,
        })
    }

    /// Whether a point (analysis CRS) lies in the area.
    #[inline]
    pub fn contains(&self, x: f64, y: f64) -> bool {
        let (dx, dy) = (x - self.x, y - self.y);
        dx * dx + dy * dy <= self.radius_m * self.radius_m
    }
}

/// What re-referencing did to one dataset (results' portfolio block, manifest, report).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DatasetReference {
    /// Points of the dataset in the area.
    pub points_in_area: usize,
    /// Of those, the points used (coherence at least `min_coherence`).
    pub points_used: usize,
    /// The correction removed at the dataset's last epoch, mm (LOS, + towards the satellite).
    pub correction_last_epoch_mm: f64,
    /// Least-squares rate of the removed correction over all epochs, mm/yr (LOS): how fast the
    /// dataset's own reference moved against the common area.
    pub correction_rate_mm_per_yr: f64,
}

/// Re-reference a dataset to the area: per epoch, the median LOS value of its points in the
/// area with coherence ≥ `min_coherence` (all points when the file has no coherence) is
/// subtracted from every point.
///
/// # Units
/// LOS values in mm, + towards the satellite; the correction in mm and mm/yr.
///
/// # References
/// insar-methods.md §4.6 (same spatial reference before combining) \[P, D\], §6.6.
///
/// Errors (naming the dataset and the count): fewer than [`MIN_REFERENCE_POINTS`] usable
/// points in the area, or an epoch at which none of them has a value.
pub fn rereference(
    ds: &mut Dataset,
    area: &ReferenceArea,
    min_coherence: f64,
    file: &std::path::Path,
) -> Result<DatasetReference, InputError> {
    let mut in_area = 0usize;
    let mut used: Vec<usize> = Vec::new();
    for (i, p) in ds.iter_points().enumerate() {
        if area.contains(p.x(), p.y()) {
            in_area += 1;
            let coherent = p.coherence().is_none_or(|c| f64::from(c) >= min_coherence);
            if coherent {
                used.push(i);
            }
        }
    }
    if used.len() < MIN_REFERENCE_POINTS {
        return Err(InputError::new(
            file,
            "",
            format!(
                "dataset `{}`: {} coherent point(s) in the reference area ({in_area} in all), \
                 at least {MIN_REFERENCE_POINTS} needed",
                ds.name,
                used.len()
            ),
            "move [reference] point to a stable area the dataset covers, or enlarge radius_m",
        ));
    }
    let correction = median_series(ds, &used).map_err(|date| {
        InputError::new(
            file,
            "",
            format!(
                "dataset `{}`: no point of the reference area has a value on {date}",
                ds.name
            ),
            "choose a reference area whose points cover every acquisition",
        )
    })?;
    ds.subtract_per_epoch(&correction);
    Ok(DatasetReference {
        points_in_area: in_area,
        points_used: used.len(),
        correction_last_epoch_mm: correction.last().copied().unwrap_or(0.0),
        correction_rate_mm_per_yr: rate_mm_per_yr(&ds.epochs, &correction),
    })
}

/// Per-epoch median of the chosen points; `Err(date)` for an epoch with no value.
fn median_series(ds: &Dataset, points: &[usize]) -> Result<Vec<f64>, NaiveDate> {
    let mut column = Vec::with_capacity(points.len());
    // The reference points are coherent ones, so every one has its series.
    let series: Vec<_> = points
        .iter()
        .filter_map(|&i| ds.point(i).series())
        .collect();
    (0..ds.epochs.len())
        .map(|e| {
            column.clear();
            column.extend(
                series
                    .iter()
                    .map(|s| f64::from(s.get(e)))
                    .filter(|v| v.is_finite()),
            );
            if column.is_empty() {
                return Err(ds.epochs[e]);
            }
            column.sort_by(f64::total_cmp);
            let n = column.len();
            Ok(if n % 2 == 1 {
                column[n / 2]
            } else {
                0.5 * (column[n / 2 - 1] + column[n / 2])
            })
        })
        .collect()
}

/// Ordinary least-squares slope of the correction against time, mm/yr (365.25-day years).
fn rate_mm_per_yr(epochs: &[NaiveDate], v: &[f64]) -> f64 {
    let Some(first) = epochs.first() else {
        return 0.0;
    };
    let t: Vec<f64> = epochs
        .iter()
        .map(|d| (*d - *first).num_days() as f64 / 365.25)
        .collect();
    let n = t.len() as f64;
    let (mt, mv) = (t.iter().sum::<f64>() / n, v.iter().sum::<f64>() / n);
    let sxx: f64 = t.iter().map(|x| (x - mt) * (x - mt)).sum();
    let sxy: f64 = t.iter().zip(v).map(|(x, y)| (x - mt) * (y - mv)).sum();
    if sxx > 0.0 { sxy / sxx } else { 0.0 }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn area_contains_its_disc() {
        let a = ReferenceArea {
            x: 100.0,
            y: 200.0,
            radius_m: 50.0,
        };
        assert!(a.contains(130.0, 240.0)); // 30-40-50 triangle: on the edge
        assert!(!a.contains(131.0, 240.0));
    }

    #[test]
    fn rate_of_a_linear_correction() {
        let d0 = NaiveDate::from_ymd_opt(2021, 1, 1).unwrap();
        let epochs: Vec<NaiveDate> = (0..10)
            .map(|i| d0 + chrono::Duration::days(i * 73))
            .collect();
        let v: Vec<f64> = epochs
            .iter()
            .map(|d| 1.5 * (*d - d0).num_days() as f64 / 365.25)
            .collect();
        assert!((rate_mm_per_yr(&epochs, &v) - 1.5).abs() < 1e-12);
    }
}
