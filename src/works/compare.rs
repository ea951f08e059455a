//! Predicted against observed movement of one structure: settlement, tilt, largest slope, Δ/L and
//! damage category side by side, the observed-to-predicted ratio and whether the observation
//! exceeds the prediction; for dated tunnel drives, the observed settlement against the face
//! position over time.
//!
//! Owns the comparison rows and the face history. The predicted values come from
//! [`super::staged`] on the prediction for the comparison period; the observed values are the
//! structure's result fields. It does no I/O and never alters either side.
//!
//! Choices (recorded in docs/methods.md):
//! - comparison period: with dated drives, the predicted movement is the change between the
//!   window start and end (face positions on those dates); without dates all works are taken as
//!   having happened inside the window and the whole prediction is compared (stated);
//! - predicted Δ/L and category include any user modification factors (they predict the
//!   building); the observation is never modified;
//! - a ratio is given only when the predicted magnitude is at least 0.1 mm (settlement) or
//!   1e-6 (tilt, slope, Δ/L); "exceeds" compares magnitudes without the measurement uncertainty
//!   (the observed standard errors are in the result record);
//! - the face history compares the structure's aggregate vertical series with the predicted
//!   settlement averaged over up to 50 footprint sample points, both referred to the series'
//!   reference epoch.

use chrono::NaiveDate;
use serde::Serialize;

use super::geometry::WorksGeometry;
use super::staged::Samples;

/// Smallest predicted settlement for which a ratio is given, mm.
pub const MIN_PREDICTED_SETTLEMENT_MM: f64 = 0.1;
/// Smallest predicted tilt, slope or |Δ/L| for which a ratio is given, dimensionless.
pub const MIN_PREDICTED_RATIO: f64 = 1e-6;

/// Observed values of a structure (from its result record).
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct Observed {
    /// Largest settlement over the window, mm (+ down).
    pub settlement_mm: Option<f64>,
    /// Rigid tilt, dimensionless.
    pub tilt: Option<f64>,
    /// Largest slope (tilt + angular distortion), dimensionless.
    pub max_slope: Option<f64>,
    /// Δ/L signed (+ sagging, − hogging).
    pub deflection_ratio: Option<f64>,
    /// Damage category 0–5.
    pub damage_category: Option<u8>,
    /// Structure settlement series (date, mm + down), referred to its first date.
    pub series: Vec<(NaiveDate, Option<f64>)>,
    /// Why there is no observation (insufficient data), if so.
    pub unavailable_because: Option<String>,
}

/// One predicted-versus-observed row.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Row {
    /// Result-field name of the quantity (`settlement_mm`, `tilt`, `max_slope`,
    /// `deflection_ratio`, `damage_category`).
    pub quantity: String,
    /// Predicted for the comparison period.
    pub predicted: Option<f64>,
    /// Observed.
    pub observed: Option<f64>,
    /// observed / predicted (signed for Δ/L: negative = opposite mode).
    pub ratio: Option<f64>,
    /// |observed| > |predicted|.
    pub observed_exceeds_predicted: Option<bool>,
    /// Why a value or the ratio is missing.
    pub note: Option<String>,
}

/// Build a row.
pub fn row(
    quantity: &str,
    predicted: Option<f64>,
    observed: Option<f64>,
    min_predicted: f64,
    unavailable: Option<&str>,
) -> Row {
    let mut note = None;
    let ratio = match (predicted, observed) {
        (Some(p), Some(o)) if p.abs() >= min_predicted => Some(o / p),
        (Some(_), Some(_)) => {
            note = Some(format!(
                "prediction below {min_predicted}: ratio not meaningful"
            ));
            None
        }
        (_, None) => {
            note = Some(
                unavailable
                    .map(|r| format!("not observed: {r}"))
                    .unwrap_or_else(|| "not observed".into()),
            );
            None
        }
        (None, Some(_)) => {
            note = Some("not predicted".into());
            None
        }
    };
    let exceeds = match (predicted, observed) {
        (Some(p), Some(o)) => Some(o.abs() > p.abs()),
        _ => None,
    };
    Row {
        quantity: quantity.into(),
        predicted,
        observed,
        ratio,
        observed_exceeds_predicted: exceeds,
        note,
    }
}

/// Observed settlement against the face of one dated drive.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FaceHistory {
    /// Tunnel name.
    pub tunnel: String,
    /// Chainage of the alignment point nearest the structure centroid, m.
    pub structure_chainage_m: f64,
    /// Distance of the centroid from the alignment, m.
    pub distance_from_alignment_m: f64,
    /// Reference date of both settlement columns.
    pub reference_date: NaiveDate,
    /// One row per epoch of the structure series.
    pub epochs: Vec<FaceEpoch>,
}

/// One epoch of a [`FaceHistory`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FaceEpoch {
    /// Date.
    pub date: NaiveDate,
    /// Face chainage on that date, m.
    pub face_chainage_m: f64,
    /// Face chainage minus the structure's chainage, m: + once the face has passed.
    pub face_past_structure_m: f64,
    /// Observed settlement since the reference date, mm (+ down); `None` at epochs without data.
    pub observed_settlement_mm: Option<f64>,
    /// Predicted settlement since the reference date (all works), mean over the footprint, mm.
    pub predicted_settlement_mm: f64,
}

/// Face histories of every dated drive, from the structure's observed series.
pub fn face_histories(
    works: &WorksGeometry,
    samples: &Samples,
    observed: &Observed,
) -> Vec<FaceHistory> {
    let Some(reference) = observed.series.first().map(|x| x.0) else {
        return vec![];
    };
    let stride = (samples.points.len() / 50).max(1);
    let pts: Vec<[f64; 2]> = samples.points.iter().step_by(stride).copied().collect();
    let mean_pred = |d: NaiveDate| -> f64 {
        if pts.is_empty() {
            return 0.0;
        }
        pts.iter()
            .map(|p| works.movement(p[0], p[1], Some(d)).settlement_m)
            .sum::<f64>()
            / pts.len() as f64
    };
    let ref_pred = mean_pred(reference);
    let c = samples.centroid;
    works
        .tunnels
        .iter()
        .filter(|t| !t.progress.is_empty())
        .filter_map(|t| {
            let (chainage, dist) = t.nearest_chainage_m(c[0], c[1])?;
            let epochs = observed
                .series
                .iter()
                .map(|(d, obs)| {
                    let face = t.face_chainage_m(*d).unwrap_or(t.length_m);
                    FaceEpoch {
                        date: *d,
                        face_chainage_m: face,
                        face_past_structure_m: face - chainage,
                        observed_settlement_mm: *obs,
                        predicted_settlement_mm: (mean_pred(*d) - ref_pred) * 1000.0,
                    }
                })
                .collect();
            Some(FaceHistory {
                tunnel: t.name.clone(),
                structure_chainage_m: chainage,
                distance_from_alignment_m: dist,
                reference_date: reference,
                epochs,
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rows_ratio_and_exceedance() {
        let r = row("settlement_mm", Some(10.0), Some(12.0), 0.1, None);
        assert_eq!(r.ratio, Some(1.2));
        assert_eq!(r.observed_exceeds_predicted, Some(true));
        let r = row("settlement_mm", Some(0.01), Some(2.0), 0.1, None);
        assert_eq!(r.ratio, None);
        assert!(r.note.unwrap().contains("not meaningful"));
        assert_eq!(r.observed_exceeds_predicted, Some(true));
        let r = row("tilt", Some(1e-3), None, 1e-6, Some("3 points kept"));
        assert_eq!(r.observed_exceeds_predicted, None);
        assert!(r.note.unwrap().contains("3 points kept"));
        // Opposite modes give a negative Δ/L ratio.
        let r = row("deflection_ratio", Some(-2e-4), Some(1e-4), 1e-6, None);
        assert_eq!(r.ratio, Some(-0.5));
        assert_eq!(r.observed_exceeds_predicted, Some(false));
    }
}
