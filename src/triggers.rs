//! Trigger levels: user-defined thresholds on result fields, evaluated per structure.
//!
//! Level names, thresholds and action texts are the user's own (portfolio `[[triggers]]`). Plinth
//! ships no default levels and no colour scheme for them: a project's trigger levels come from its
//! monitoring plan. A structure with insufficient data is `not_evaluated`, never "below triggers".

use crate::portfolio::TriggerLevel;
use crate::results::{Status, StructureResult, TriggerHit};

/// Result fields a trigger may name.
pub const FIELDS: &[&str] = &[
    "settlement_mm",
    "differential_settlement_mm",
    "mean_vertical_mm",
    "mean_east_mm",
    "vertical_velocity_mm_per_yr",
    "east_velocity_mm_per_yr",
    "tilt",
    "angular_distortion",
    "deflection_ratio",
    "horizontal_strain",
    "governing_strain",
    "damage_category",
    "predicted_settlement_mm",
    "predicted_category",
    "observed_to_predicted_settlement",
];

/// Status text when no level is exceeded.
pub const NONE_EXCEEDED: &str = "none_exceeded";
/// Status text when the structure could not be evaluated.
pub const NOT_EVALUATED: &str = "not_evaluated";

/// Evaluate every level on one structure: returns (status, hits). The status is the name of the
/// most severe exceeded level (ties: the first in the file), `none_exceeded`, or `not_evaluated`.
/// A level whose field is null for this structure is not exceeded, and the structure's
/// assumptions say so (handled by the caller through `unevaluated`).
pub fn evaluate(
    levels: &[TriggerLevel],
    r: &StructureResult,
) -> (String, Vec<TriggerHit>, Vec<String>) {
    if levels.is_empty() {
        return (NONE_EXCEEDED.into(), vec![], vec![]);
    }
    if r.status == Status::InsufficientData {
        return (NOT_EVALUATED.into(), vec![], vec![]);
    }
    let mut hits = Vec::new();
    let mut unevaluated = Vec::new();
    for (i, l) in levels.iter().enumerate() {
        let severity = l.severity.unwrap_or(i as u32 + 1);
        let Some(v) = r.numeric(&l.field) else {
            unevaluated.push(format!(
                "trigger `{}` on {} not evaluated: the value is not available",
                l.name, l.field
            ));
            continue;
        };
        let (hit, rule) = if let Some(t) = l.above {
            (v >= t, format!(">= {t}"))
        } else if let Some(t) = l.below {
            (v <= t, format!("<= {t}"))
        } else if let Some(t) = l.magnitude_above {
            (v.abs() >= t, format!("|value| >= {t}"))
        } else {
            (false, String::new())
        };
        if hit {
            hits.push(TriggerHit {
                level: l.name.clone(),
                severity,
                field: l.field.clone(),
                value: v,
                rule,
                action: l.action.clone(),
            });
        }
    }
    let status = hits
        .iter()
        .enumerate()
        .max_by(|(ia, a), (ib, b)| a.severity.cmp(&b.severity).then(ib.cmp(ia)))
        .map(|(_, h)| h.level.clone())
        .unwrap_or_else(|| NONE_EXCEEDED.into());
    (status, hits, unevaluated)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_trigger_field_is_a_numeric_result_field() {
        // A field listed here but unknown to StructureResult::numeric would never trigger.
        let r: StructureResult = serde_json::from_value(serde_json::json!({
            "id": "x", "name": "x", "status": "assessed", "status_reasons": [], "n_points": 5,
            "n_rejected": {}, "n_surroundings": 0, "datasets": [], "settlement_mm": 1.0,
            "differential_settlement_mm": 1.0, "mean_vertical_mm": 1.0, "mean_east_mm": 1.0,
            "vertical_velocity_mm_per_yr": 1.0, "east_velocity_mm_per_yr": 1.0, "tilt": 1.0,
            "tilt_azimuth_deg": 1.0, "angular_distortion": 1.0, "deflection_ratio": 1.0,
            "horizontal_strain": 1.0, "governing_strain": 1.0, "damage_category": 1,
            "damage_route": null, "evidence_grade": null, "vertical_velocity_se_mm_per_yr": null,
            "east_velocity_se_mm_per_yr": null, "tilt_se": null, "damage_category_name": null,
            "criteria_set": null, "height_m": 6.0, "structure_type": "masonry",
            "trigger_status": null, "triggers": [], "report_file": null, "fallbacks": [],
            "assumptions": [], "change": null, "predicted_settlement_mm": 1.0,
            "predicted_category": 1, "observed_to_predicted_settlement": 1.0
        }))
        .unwrap();
        for f in FIELDS {
            assert!(r.numeric(f).is_some(), "{f}");
        }
    }
}
