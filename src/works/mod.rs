//! Screening near planned works: greenfield predictions from tunnels and excavations, the staged
//! assessment of each structure against them, and predicted against observed movement.
//!
//! Files:
//! - [`model`]: the `[works]` section of the portfolio file and its validation;
//! - [`geometry`]: the works in the analysis CRS and the superposed movement field;
//! - [`tunnel`]: Peck (1969) troughs per alignment segment, the face position, Φ;
//! - [`excavation`]: Clough & O'Rourke (1990) envelopes behind an excavation outline;
//! - [`staged`]: stage 1 (Rankin 1988) and stage 2 (limiting tensile strain on the greenfield
//!   profile, Mair, Taylor & Burland 1996) for one structure;
//! - [`compare`]: predicted against observed, and the face history of dated drives.
//!
//! The one entry point of the pipeline is [`screen_structure`]. This module does no file I/O:
//! the portfolio reader calls [`model::validate`], the run converts the works once with
//! [`WorksGeometry::project`]. It never changes the measured result of a structure.

pub mod compare;
pub mod excavation;
pub mod geometry;
pub mod model;
pub mod staged;
pub mod tunnel;

pub use compare::Observed;
pub use geometry::WorksGeometry;
pub use model::{RawWorks, WorksSpec};

use chrono::NaiveDate;
use geo::MultiPolygon;
use serde::Serialize;

use crate::criteria::CriteriaSet;
#[cfg(test)]
use crate::damage::Mode;

use compare::{FaceHistory, MIN_PREDICTED_RATIO, MIN_PREDICTED_SETTLEMENT_MM, Row, row};
use geometry::Movement;
use staged::{Stage1, Stage2};

/// What [`screen_structure`] needs about one structure.
#[derive(Debug, Clone)]
pub struct StructureInput<'a> {
    /// Structure id (selects the modification factors).
    pub id: &'a str,
    /// Footprint in the analysis CRS.
    pub footprint: &'a MultiPolygon<f64>,
    /// Height to eaves, m.
    pub height_m: f64,
    /// Assessment window start.
    pub window_start: NaiveDate,
    /// Assessment window end.
    pub window_end: NaiveDate,
    /// The observation.
    pub observed: Observed,
}

/// Distance from a structure to one of the works (for the plan view and the text).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NearbyWorks {
    /// Name.
    pub name: String,
    /// `tunnel` or `excavation`.
    pub kind: String,
    /// Distance from the footprint centroid to the alignment or the outline, m.
    pub distance_m: f64,
    /// Chainage of the nearest alignment point, m (tunnels).
    pub chainage_m: Option<f64>,
    /// Predicted settlement at the centroid from this item alone, all works complete, mm.
    pub settlement_at_centroid_mm: f64,
}

/// Predicted against observed for the comparison period.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Comparison {
    /// What the predicted side covers.
    pub period: String,
    /// Rows: settlement_mm, tilt, max_slope, deflection_ratio, damage_category.
    pub rows: Vec<Row>,
    /// Observed / predicted largest settlement, when both exist and the prediction is ≥ 0.1 mm.
    pub observed_to_predicted_settlement: Option<f64>,
    /// True when the observed settlement exceeds the predicted one.
    pub observation_exceeds_prediction: Option<bool>,
}

/// Everything the works screening reports for one structure (`works` in results.json).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct WorksScreening {
    /// Works near the structure, nearest first.
    pub nearby: Vec<NearbyWorks>,
    /// Stage 1 on the complete prediction.
    pub stage1: Stage1,
    /// Stage 2 on the complete prediction (computed even when stage 1 drops the structure, for
    /// the comparison; see `stage1.stage2_required`).
    pub stage2: Option<Stage2>,
    /// Why there is no stage 2.
    pub stage2_unavailable_because: Option<String>,
    /// Largest predicted settlement on the footprint, all works complete, mm.
    pub predicted_settlement_mm: f64,
    /// Predicted ("possible") damage category 0–5 from stage 2.
    pub predicted_category: Option<u8>,
    /// Predicted against observed.
    pub comparison: Comparison,
    /// Observed settlement against the face of each dated drive.
    pub face_history: Vec<FaceHistory>,
    /// Assumptions, in plain words.
    pub assumptions: Vec<String>,
}

/// A structure's footprint has no area or no vertices.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("structure {id}: footprint has no vertices, nothing to screen")]
pub struct EmptyFootprint {
    /// Structure id.
    pub id: String,
}

/// Screen one structure against the works: stage 1, stage 2, predicted against observed.
///
/// Never panics on data; an empty footprint is an [`EmptyFootprint`] error.
pub fn screen_structure(
    works: &WorksGeometry,
    input: &StructureInput,
    set: &CriteriaSet,
) -> Result<WorksScreening, EmptyFootprint> {
    let samples = staged::sample_footprint(input.footprint).ok_or_else(|| EmptyFootprint {
        id: input.id.to_string(),
    })?;
    let mut assumptions = base_assumptions(works);
    let full = |x: f64, y: f64| works.movement(x, y, None);
    let s1 = staged::stage1(input.footprint, &samples, &full);
    let factors = works.stiffness_for(input.id);
    let sec = staged::section(works, &samples, s1.max_settlement_at);
    let (s2, s2_none) = match &sec {
        Some(sec) if sec.x_end_m > sec.x_start_m => (
            Some(staged::stage2(
                sec,
                &full,
                input.height_m,
                set,
                &factors,
                &s1,
            )),
            None,
        ),
        Some(_) => (
            None,
            Some("the structure has no extent across the section".to_string()),
        ),
        None => (
            None,
            Some("the works predict no settlement on the structure".to_string()),
        ),
    };
    if s1.negligible {
        assumptions.push(
            "stage 1: greenfield slope below 1/500 and settlement below 10 mm, negligible risk; \
             stage 2 shown for information only"
                .into(),
        );
    }

    // Comparison period.
    let dated = works.has_dates();
    let (start, end) = (input.window_start, input.window_end);
    let window_field = |x: f64, y: f64| -> Movement {
        let a = works.movement(x, y, Some(start));
        let b = works.movement(x, y, Some(end));
        Movement {
            settlement_m: b.settlement_m - a.settlement_m,
            horizontal_m: [
                b.horizontal_m[0] - a.horizontal_m[0],
                b.horizontal_m[1] - a.horizontal_m[1],
            ],
            excavation_settlement_m: b.excavation_settlement_m - a.excavation_settlement_m,
        }
    };
    let (period, cmp_s1, cmp_s2, cmp_tilt) = if dated {
        let c1 = staged::stage1(input.footprint, &samples, &window_field);
        let c2 = sec
            .as_ref()
            .filter(|s| s.x_end_m > s.x_start_m)
            .map(|sec| staged::stage2(sec, &window_field, input.height_m, set, &factors, &c1));
        let tilt = staged::plane_tilt(&window_field, &samples);
        (
            format!(
                "predicted change between the window start {start} and end {end} (face positions \
                 on those dates; undated works counted in full at both dates, so they cancel)"
            ),
            c1,
            c2,
            tilt,
        )
    } else {
        assumptions.push(
            "no construction dates: all works are taken as having happened inside the assessment \
             window, and the whole prediction is compared with the observation"
                .into(),
        );
        (
            "whole predicted movement (no construction dates)".to_string(),
            s1.clone(),
            s2.clone(),
            staged::plane_tilt(&full, &samples),
        )
    };
    let o = &input.observed;
    let why = o.unavailable_because.as_deref();
    let settlement = row(
        "settlement_mm",
        Some(cmp_s1.max_settlement_mm),
        o.settlement_mm,
        MIN_PREDICTED_SETTLEMENT_MM,
        why,
    );
    let rows = vec![
        settlement.clone(),
        row("tilt", cmp_tilt, o.tilt, MIN_PREDICTED_RATIO, why),
        row(
            "max_slope",
            Some(cmp_s1.max_slope),
            o.max_slope,
            MIN_PREDICTED_RATIO,
            why,
        ),
        row(
            "deflection_ratio",
            cmp_s2.as_ref().and_then(|s| s.deflection_ratio),
            o.deflection_ratio,
            MIN_PREDICTED_RATIO,
            why,
        ),
        {
            let mut r = row(
                "damage_category",
                cmp_s2.as_ref().and_then(|s| s.category).map(f64::from),
                o.damage_category.map(f64::from),
                f64::INFINITY,
                why,
            );
            r.ratio = None;
            if r.predicted.is_some() && r.observed.is_some() {
                r.note = Some("categories are compared, not divided".into());
            }
            r
        },
    ];
    let comparison = Comparison {
        period,
        observed_to_predicted_settlement: settlement.ratio,
        observation_exceeds_prediction: settlement.observed_exceeds_predicted,
        rows,
    };

    let c = samples.centroid;
    let mut nearby: Vec<NearbyWorks> = works
        .tunnels
        .iter()
        .filter_map(|t| {
            let (ch, d) = t.nearest_chainage_m(c[0], c[1])?;
            Some(NearbyWorks {
                name: t.name.clone(),
                kind: "tunnel".into(),
                distance_m: d,
                chainage_m: Some(ch),
                settlement_at_centroid_mm: t.movement(c[0], c[1], None).0 * 1000.0,
            })
        })
        .chain(works.excavations.iter().map(|e| NearbyWorks {
            name: e.name.clone(),
            kind: "excavation".into(),
            distance_m: e.distance_behind_wall_m(c[0], c[1]),
            chainage_m: None,
            settlement_at_centroid_mm: e.settlement_m(c[0], c[1]) * 1000.0,
        }))
        .collect();
    nearby.sort_by(|a, b| a.distance_m.total_cmp(&b.distance_m));
    for e in &works.excavations {
        if samples.points.iter().any(|p| e.contains(p[0], p[1])) {
            assumptions.push(format!(
                "part of the structure lies inside excavation \"{}\": distance 0 (full δ_vm) used \
                 there",
                e.name
            ));
        }
    }

    Ok(WorksScreening {
        nearby,
        predicted_settlement_mm: s1.max_settlement_mm,
        predicted_category: s2.as_ref().and_then(|s| s.category),
        stage1: s1,
        stage2: s2,
        stage2_unavailable_because: s2_none,
        comparison,
        face_history: compare::face_histories(works, &samples, o),
        assumptions,
    })
}

fn base_assumptions(works: &WorksGeometry) -> Vec<String> {
    let mut a = Vec::new();
    if !works.tunnels.is_empty() {
        a.push(
            "tunnel prediction: Peck (1969) Gaussian trough, i = K·z0 and horizontal movement \
             towards the axis (O'Reilly & New 1982), S_max from volume loss and diameter; K \
             guidance values and the horizontal-movement relation are from memory"
                .into(),
        );
        a.push(
            "longitudinal extent: cumulative-probability profile Φ at the first vertex and the \
             face (Attewell & Woodman 1982, from memory); segments superposed, so bends are \
             approximate"
                .into(),
        );
    }
    if !works.excavations.is_empty() {
        a.push(
            "excavation prediction: Clough & O'Rourke (1990) settlement envelope scaled by the \
             given maximum settlement (shapes from memory); no horizontal movement predicted, so \
             horizontal strain is taken as 0 where an excavation contributes"
                .into(),
        );
    }
    a.push(
        "Rankin (1988) stage-1 thresholds (1/500, 10 mm ...) are from memory; distances in the \
         analysis CRS grid (scale factor neglected)"
            .into(),
    );
    a
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::coords::Crs;
    use crate::criteria::builtin;
    use crate::portfolio::Portfolio;
    use geo::{LineString, Polygon};

    const E0: f64 = 500_000.0;
    const N0: f64 = 4_980_000.0;

    /// Parse a portfolio whose `[works]` is `works` (analysis CRS and works CRS both UTM 32N, so
    /// the section coordinates are exact) and project the works.
    fn works_from_portfolio(works: &str) -> WorksGeometry {
        let dir = tempfile::tempdir().unwrap();
        std::fs::write(dir.path().join("s.geojson"), "{}").unwrap();
        std::fs::write(dir.path().join("a.csv"), "").unwrap();
        let p = dir.path().join("p.toml");
        let text = format!(
            "[portfolio]\nname = \"T\"\ncrs = \"EPSG:32632\"\n[structures]\npath = \"s.geojson\"\n\
             [[datasets]]\nname = \"a\"\npath = \"a.csv\"\npass = \"ascending\"\n\
             incidence_deg = 38.0\nheading_deg = -12.0\n[works]\ncrs = \"EPSG:32632\"\n{works}"
        );
        let pf = Portfolio::parse(&text, &p).unwrap();
        WorksGeometry::project(
            pf.works.as_ref().unwrap(),
            &Crs::parse("EPSG:32632").unwrap(),
            &p,
        )
        .unwrap()
    }

    /// A 1 km drive due north through (E0, N0 + 500); ends far enough (> 40 i) that Φ = 1.
    fn tunnel(d: f64, z0: f64, k: f64, vl_pct: f64, extra: &str) -> String {
        format!(
            "[[works.tunnels]]\nname = \"Drive\"\nalignment = [[{E0}, {N0}], [{E0}, {}], [{E0}, {}]]\n\
             axis_depth_m = {z0}\ndiameter_m = {d}\nvolume_loss_percent = {vl_pct}\n\
             trough_width_k = {k}\n{extra}",
            N0 + 400.0,
            N0 + 1000.0
        )
    }

    /// Footprint spanning trough coordinates x ∈ [xa, xb] (x = transverse offset, + to the left
    /// of the northward drive, i.e. west), 20 m along the drive at mid-length.
    fn footprint(xa: f64, xb: f64) -> MultiPolygon<f64> {
        let (e1, e2) = (E0 - xb, E0 - xa);
        let ring = LineString::from(vec![
            (e1, N0 + 490.0),
            (e2, N0 + 490.0),
            (e2, N0 + 510.0),
            (e1, N0 + 510.0),
            (e1, N0 + 490.0),
        ]);
        MultiPolygon(vec![Polygon::new(ring, vec![])])
    }

    fn screen(w: &WorksGeometry, fp: &MultiPolygon<f64>, id: &str, h: f64) -> WorksScreening {
        let d = |s: &str| NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap();
        let input = StructureInput {
            id,
            footprint: fp,
            height_m: h,
            window_start: d("2023-01-01"),
            window_end: d("2025-01-01"),
            observed: Observed {
                unavailable_because: Some("no observation in this test".into()),
                ..Default::default()
            },
        };
        screen_structure(w, &input, &builtin("masonry").unwrap()).unwrap()
    }

    fn rel(a: f64, b: f64) -> f64 {
        (a - b).abs() / b.abs()
    }

    #[test]
    fn stage_2_example_8_9_a_through_the_portfolio() {
        // damage-relations.md §8.9-A (derived check values [D]); G3 trough D 6, z0 20, K 0.5,
        // V_L 1.5 %; building x ∈ [−6, 24], H 8 m; E/G 2.6, ν 0.3, ε_h clamped (masonry set).
        let w = works_from_portfolio(&tunnel(6.0, 20.0, 0.5, 1.5, ""));
        let sc = screen(&w, &footprint(-6.0, 24.0), "A", 8.0);
        assert!((sc.stage1.max_settlement_mm - 16.920).abs() < 1e-3);
        assert!(
            rel(sc.stage1.max_slope, 1.0262e-3) < 1e-4,
            "{}",
            sc.stage1.max_slope
        );
        assert_eq!(sc.stage1.rankin.unwrap().category.number(), 2);
        assert!(sc.stage1.stage2_required);
        let s2 = sc.stage2.as_ref().unwrap();
        assert_eq!(s2.parts.len(), 2, "{:#?}", s2.parts);
        let (sag, hog) = (&s2.parts[0], &s2.parts[1]);
        assert_eq!((sag.mode, hog.mode), (Mode::Sagging, Mode::Hogging));
        assert!((sag.end_m - 10.0).abs() < 1e-5, "{:#?}", s2.parts);
        assert!((sag.start_m + 6.0).abs() < 1e-6, "{:#?}", s2.parts);
        assert!((sag.delta_mm - 4.4123).abs() < 1e-4 && (sag.delta_at_m - 1.445).abs() < 1e-3);
        assert!(rel(sag.deflection_ratio_greenfield, 2.7577e-4) < 1e-4);
        assert!(rel(sag.horizontal_strain_greenfield.unwrap(), -5.8568e-4) < 1e-4);
        assert!((hog.delta_mm - 1.6184).abs() < 1e-4 && (hog.delta_at_m - 17.171).abs() < 1e-3);
        assert!(rel(hog.deflection_ratio_greenfield, 1.1560e-4) < 1e-4);
        assert!(rel(hog.horizontal_strain_greenfield.unwrap(), 2.8510e-4) < 1e-4);
        let z = &s2.damage.zones;
        assert!(rel(z[0].governing_strain, 4.18891e-4) < 1e-4);
        assert!(rel(z[1].bending_strain_resultant, 4.15181e-4) < 1e-4);
        assert_eq!(sc.predicted_category, Some(0));
        assert!(
            sc.comparison.rows[0]
                .note
                .as_ref()
                .unwrap()
                .contains("no observation")
        );
        assert!(
            sc.assumptions
                .iter()
                .any(|a| a.contains("no construction dates"))
        );
    }

    #[test]
    fn stage_2_examples_8_9_b_and_d_with_modification_factors() {
        // damage-relations.md §8.9-B (derived [D]): D 6, z0 12, K 0.5, V_L 3 %; building [0, 18],
        // H 9 m: Rankin 3; sag ε_max 7.00053e-4 (cat 1); hog ε_br 2.10157e-3 (cat 3).
        // §8.9-D: hog factors 0.5/0.5 → ε_br 1.05079e-3 (cat 2); 0.25/0.1 → 3.23342e-4 (cat 0).
        let stiff = "[[works.stiffness]]\nstructures = [\"D1\"]\ndeflection_ratio_hogging = 0.5\n\
                     horizontal_strain_tensile = 0.5\n[[works.stiffness]]\nstructures = [\"D2\"]\n\
                     deflection_ratio_hogging = 0.25\nhorizontal_strain_tensile = 0.1\n\
                     source = \"illustrative\"\n";
        let w = works_from_portfolio(&tunnel(6.0, 12.0, 0.5, 3.0, stiff));
        let fp = footprint(0.0, 18.0);
        let b = screen(&w, &fp, "B", 9.0);
        assert!((b.stage1.max_settlement_mm - 56.3991).abs() < 1e-3);
        assert!(rel(b.stage1.max_slope, 5.7013e-3) < 1e-4);
        assert_eq!(b.stage1.rankin.unwrap().category.number(), 3);
        let s2 = b.stage2.as_ref().unwrap();
        assert!((s2.parts[0].delta_mm - 4.5620).abs() < 1e-4);
        assert!((s2.parts[1].delta_mm - 9.8345).abs() < 1e-4);
        assert!(rel(s2.damage.zones[0].governing_strain, 7.00053e-4) < 1e-4);
        assert!(rel(s2.damage.zones[1].bending_strain_resultant, 2.10157e-3) < 1e-4);
        assert_eq!(b.predicted_category, Some(3));
        assert!((s2.deflection_ratio.unwrap() + 8.1954e-4).abs() < 1e-7);

        let d1 = screen(&w, &fp, "D1", 9.0);
        let z = &d1.stage2.as_ref().unwrap().damage.zones[1];
        assert!(rel(z.bending_strain_resultant, 1.05079e-3) < 1e-4);
        assert_eq!(z.category.number(), 2);
        let d2 = screen(&w, &fp, "D2", 9.0);
        let z = &d2.stage2.as_ref().unwrap().damage.zones[1];
        assert!(rel(z.bending_strain_resultant, 3.23342e-4) < 1e-4);
        assert_eq!(z.category.number(), 0);
        assert!(
            d2.stage2
                .as_ref()
                .unwrap()
                .damage
                .assumptions
                .iter()
                .any(|a| a.contains("illustrative"))
        );
    }

    #[test]
    fn far_structure_is_negligible_and_two_tunnels_superpose() {
        // Two identical G1 drives (damage-relations.md §8.8: S_max 11.2798 mm, s(20) 1.5266 mm)
        // 40 m apart: midway each contributes s(20), so the total is 2 × 1.5266 mm.
        let twin = format!(
            "{}[[works.tunnels]]\nname = \"Twin\"\nalignment = [[{}, {N0}], [{}, {}]]\n\
             axis_depth_m = 20\ndiameter_m = 6\nvolume_loss_percent = 1.0\ntrough_width_k = 0.5\n",
            tunnel(6.0, 20.0, 0.5, 1.0, ""),
            E0 + 40.0,
            E0 + 40.0,
            N0 + 1000.0
        );
        let w = works_from_portfolio(&twin);
        let m = w.movement(E0 + 20.0, N0 + 500.0, None);
        assert!((m.settlement_m * 1e3 - 2.0 * 1.5266).abs() < 1e-4);
        // Horizontal movements towards each axis cancel midway.
        assert!(m.horizontal_m[0].abs() < 1e-12);
        let far = screen(&w, &footprint(-300.0, -280.0), "F", 6.0);
        assert!(far.stage1.negligible && far.stage1.max_settlement_mm < 1e-3);
        assert_eq!(far.predicted_category, Some(0));
        assert_eq!(far.nearby.len(), 2);
        assert!(far.nearby[0].distance_m < far.nearby[1].distance_m);
    }

    #[test]
    fn excavation_section_has_no_horizontal_strain() {
        // Stiff clay, H_e 10 m, δ_vm 15 mm (damage-relations.md §8.8 envelope table [M]): a
        // building from d = 5 to 25 m behind the east wall settles 12.5 mm at its near end.
        let w = works_from_portfolio(&format!(
            "[[works.excavations]]\nname = \"Pit\"\noutline = [[{}, {}], [{E0}, {}], [{E0}, {}], [{}, {}]]\n\
             depth_m = 10\nsupport = \"propped\"\nprofile = \"stiff-clay\"\nmax_settlement_mm = 15\n",
            E0 - 40.0,
            N0 + 480.0,
            N0 + 480.0,
            N0 + 520.0,
            E0 - 40.0,
            N0 + 520.0
        ));
        // footprint(xa, xb) spans east offsets [−xb, −xa]: d ∈ [5, 25] east of the wall at E0.
        let sc = screen(&w, &footprint(-25.0, -5.0), "X", 8.0);
        assert!((sc.stage1.max_settlement_mm - 12.5).abs() < 1e-6);
        let s2 = sc.stage2.as_ref().unwrap();
        assert!(s2.section.source.contains("Pit"));
        assert!(
            s2.parts
                .iter()
                .all(|p| p.horizontal_strain_greenfield.is_none())
        );
        assert!(
            sc.assumptions
                .iter()
                .any(|a| a.contains("no horizontal movement"))
        );
        assert!(sc.predicted_category.is_some());
    }
}
