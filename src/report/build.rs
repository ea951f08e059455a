//! Adapter from the pipeline's results record ([`crate::results::StructureResult`]) to the
//! report model ([`AssetReport`]) and the portfolio ranking input ([`RankInput`]).
//!
//! Owns: the mapping of every flat result field to a formatted metric row, the verdict and the
//! data-quality section; `None` fields become "not computed" rows with a reason, never zeros.
//! Does not own: chart data (the caller builds [`super::model::AssetCharts`] from the nested
//! series/metrics detail it holds, or passes [`super::model::AssetCharts::empty`]), the run
//! context (portfolio name, dates, people, inputs), or any computation.
//!
//! Choices recorded here:
//! - Displacements 1 decimal (mm), velocities 1 decimal (mm/yr), ratios as ×10⁻³ with 3–4
//!   decimals plus `1/n`, strains as % with 4 decimals: InSAR point precision is of order 1 mm
//!   and 1 mm/yr (insar-methods.md §6.3), so more decimals would suggest false precision.
//! - `trigger_status` absent means "no level exceeded"; `not_evaluated` is shown as such.

use chrono::NaiveDate;

use super::ReportError;
use super::format::{fixed, one_in, per_mille, percent, with_uncertainty, with_unit};
use super::model::*;
use super::text::{TextBlocks, TextContext};
use crate::results::{Change, Status, StructureResult};

/// Run-level facts the results record does not carry.
#[derive(Debug, Clone)]
pub struct ReportContext {
    /// Portfolio name.
    pub portfolio_name: String,
    /// Report date (analysis date from the data).
    pub report_date: ReportDate,
    /// Revision label.
    pub revision: String,
    /// Prepared by.
    pub prepared_by: String,
    /// Checked by.
    pub checked_by: String,
    /// Assessment window.
    pub window: (NaiveDate, NaiveDate),
    /// Reference wording for the cautions, e.g. "the processing reference area".
    pub reference: String,
    /// Input files with SHA-256.
    pub inputs: Vec<InputFile>,
    /// Run parameters.
    pub parameters: Vec<Param>,
    /// Full citations (see [`super::references::citations`]).
    pub references: Vec<String>,
}

fn status(s: Status) -> AssessmentStatus {
    match s {
        Status::Assessed => AssessmentStatus::Assessed,
        Status::InsufficientData => AssessmentStatus::InsufficientData,
    }
}

fn missing_reason(r: &StructureResult) -> &'static str {
    match r.status {
        Status::InsufficientData => "structure not assessable (see status reasons)",
        Status::Assessed => "not computable from the available points (see assumptions)",
    }
}

/// Text and colour code of the trigger state.
/// What the radar could not observe and what it does to the verdict, for the verdict box.
pub fn observability_notes(r: &StructureResult) -> Vec<String> {
    let mut notes = Vec::new();
    let stated = r.damage_category.is_some();
    match r.horizontal_strain_status.as_deref() {
        Some("not_observable_axis") => notes.push(format!(
            "Horizontal strain was not observable along this building's axis: the radar does not \
             see north–south motion.{}",
            if stated {
                " The category comes from bending and shear alone and may be understated."
            } else {
                ""
            }
        )),
        Some("not_observable_geometry") => notes.push(format!(
            "Horizontal strain was not observable: the data lack an east-looking and a \
             west-looking geometry at both ends of the building.{}",
            if stated {
                " The category comes from bending and shear alone and may be understated."
            } else {
                ""
            }
        )),
        Some("not_measured") if stated => notes.push(
            "Horizontal strain could not be measured; the category comes from bending and shear \
             alone and may be understated."
                .to_string(),
        ),
        _ => {}
    }
    if r.look_directions.len() < 2 && r.n_points > 0 {
        notes.push(
            "One look direction only: vertical values assume no east–west motion.".to_string(),
        );
    }
    notes
}

fn trigger(r: &StructureResult) -> (String, String) {
    match r.trigger_status.as_deref() {
        Some("not_evaluated") => ("not evaluated".to_string(), "not_evaluated".to_string()),
        Some(level) => {
            let rules: Vec<String> = r
                .triggers
                .iter()
                .map(|t| format!("{} ({})", t.level, t.rule))
                .collect();
            let detail = if rules.is_empty() {
                String::new()
            } else {
                format!(": {}", rules.join("; "))
            };
            (format!("{level} exceeded{detail}"), "exceeded".to_string())
        }
        None => ("no trigger level exceeded".to_string(), "none".to_string()),
    }
}

fn change_text(c: &Change) -> String {
    let mut parts = Vec::new();
    if c.kind == "new" {
        parts.push("new since the previous period".to_string());
    }
    match (
        c.category_changed,
        c.previous_damage_category
            .and_then(CategoryView::from_index),
    ) {
        (true, Some(p)) => parts.push(format!("category changed from {} — {}", p.code, p.name)),
        (true, None) => parts.push("category changed".to_string()),
        (false, Some(_)) => parts.push("no change of category".to_string()),
        (false, None) => {}
    }
    if let Some(dv) = c.velocity_change_mm_per_yr {
        let sig = match c.velocity_change_significant {
            Some(true) => " (significant)",
            Some(false) => " (not significant)",
            None => "",
        };
        parts.push(format!(
            "velocity change {}{sig}",
            with_unit(dv, 1, "mm/yr")
        ));
    }
    for e in &c.new_exceedances {
        parts.push(format!("newly exceeded: {e}"));
    }
    if parts.is_empty() {
        "no change recorded".to_string()
    } else {
        parts.join("; ")
    }
}

/// The metric rows of one structure, in a fixed order.
pub fn metric_rows(r: &StructureResult) -> Vec<MetricRow> {
    let why = missing_reason(r);
    let row = |q: &str,
               sym: &str,
               v: Option<f64>,
               f: &dyn Fn(f64) -> (String, Option<String>),
               note: &str| match v.filter(|x| x.is_finite()) {
        Some(x) => {
            let (value, unc) = f(x);
            MetricRow::computed(q, sym, value, unc, note)
        }
        None => MetricRow::not_computed(q, sym, why),
    };
    let mm = |x: f64| (with_unit(x, 1, "mm"), None);
    let vu_se = r.vertical_velocity_se_mm_per_yr;
    let ve_se = r.east_velocity_se_mm_per_yr;
    let tilt_se = r.tilt_se;
    let tilt_note = match r.tilt_azimuth_deg.filter(|a| a.is_finite()) {
        Some(az) => format!("plane fit; goes down towards azimuth {}°", fixed(az, 0)),
        None => "plane fit".to_string(),
    };
    vec![
        row(
            "Maximum settlement",
            "S_max",
            r.settlement_mm,
            &mm,
            "+ down, over the window",
        ),
        row(
            "Differential settlement",
            "δS",
            r.differential_settlement_mm,
            &mm,
            "max − min of kept points",
        ),
        row(
            "Mean vertical displacement",
            "d_U",
            r.mean_vertical_mm,
            &mm,
            "+ up, over the window",
        ),
        row(
            "Mean east displacement",
            "d_E",
            r.mean_east_mm,
            &mm,
            "+ east; needs two geometries",
        ),
        row(
            "Vertical velocity",
            "v_U",
            r.vertical_velocity_mm_per_yr,
            &|x| {
                (
                    with_uncertainty(x, vu_se, 1, "mm/yr"),
                    vu_se.map(|s| with_unit(s, 1, "mm/yr")),
                )
            },
            "+ up; uncertainty = standard error",
        ),
        row(
            "East velocity",
            "v_E",
            r.east_velocity_mm_per_yr,
            &|x| {
                (
                    with_uncertainty(x, ve_se, 1, "mm/yr"),
                    ve_se.map(|s| with_unit(s, 1, "mm/yr")),
                )
            },
            "+ east; needs two geometries",
        ),
        row(
            "Tilt",
            "ω",
            r.tilt,
            &|x| {
                (
                    format!("{} ({})", per_mille(x, 3), one_in(x)),
                    tilt_se.map(|s| per_mille(s, 3)),
                )
            },
            &tilt_note,
        ),
        row(
            "Angular distortion",
            "β",
            r.angular_distortion,
            &|x| (format!("{} ({})", per_mille(x, 3), one_in(x)), None),
            "largest magnitude",
        ),
        row(
            "Deflection ratio",
            "Δ/L",
            r.deflection_ratio,
            &|x| {
                let mode = if x < 0.0 {
                    " hogging"
                } else if x > 0.0 {
                    " sagging"
                } else {
                    ""
                };
                (format!("{}{mode}", per_mille(x, 4)), None)
            },
            "+ sagging, − hogging; largest over the axes",
        ),
        row(
            "Horizontal strain",
            "ε_h",
            r.horizontal_strain,
            &|x| (percent(x, 4), None),
            "+ extension; east–west component only",
        ),
        row(
            "Governing tensile strain",
            "ε_max",
            r.governing_strain,
            &|x| (percent(x, 4), None),
            r.damage_route.as_deref().unwrap_or("route not recorded"),
        ),
    ]
}

/// Builds the asset model from a result record, the run context and the text blocks.
/// Figures are left "not supplied" until [`super::render::ReportJob::prepare`] fills them from
/// the chart data.
pub fn asset_report(
    r: &StructureResult,
    ctx: &ReportContext,
    blocks: &TextBlocks,
) -> Result<AssetReport, ReportError> {
    let st = status(r.status);
    let mut rejected: Vec<RejectionCount> = r
        .n_rejected
        .iter()
        .map(|(reason, &count)| RejectionCount {
            reason: reason.clone(),
            count,
        })
        .collect();
    rejected.sort_by(|a, b| b.count.cmp(&a.count).then_with(|| a.reason.cmp(&b.reason)));
    let mut assumptions: Vec<String> = r.assumptions.iter().map(|a| a.to_string()).collect();
    assumptions.extend(r.fallbacks.iter().map(|f| format!("default used: {f}")));
    let mut model = AssetReport {
        model_version: MODEL_VERSION,
        meta: ReportMeta::new(
            &ctx.portfolio_name,
            ctx.report_date,
            &ctx.revision,
            &ctx.prepared_by,
            &ctx.checked_by,
        ),
        structure: StructureView {
            id: super::format::one_line(&r.id),
            name: super::format::one_line(&r.name),
            kind: r.structure_type.clone(),
            length: not_computed("footprint length not in the results record"),
            height: with_unit(r.height_m, 1, "m"),
            footprint_area: not_computed("footprint area not in the results record"),
        },
        window: WindowView::new(ctx.window.0, ctx.window.1),
        verdict: VerdictView::new(VerdictInput {
            status: st,
            status_reasons: r.status_reasons.clone(),
            category_index: r.damage_category,
            category_probability: r.damage_category_probability,
            category_distribution: r
                .damage_category_probabilities
                .as_ref()
                .map(|m| {
                    (0..crate::verdict::CATEGORY_COUNT)
                        .map(|k| m.get(&k.to_string()).copied().unwrap_or(0.0))
                        .collect()
                })
                .unwrap_or_default(),
            higher_probability: r.damage_category_exceedance_probability,
            observability_notes: observability_notes(r),
            governing_route: r.damage_route.clone(),
            evidence_grade: r
                .evidence_grade
                .clone()
                .unwrap_or_else(|| "not graded".to_string()),
            trigger: Some(trigger(r)),
            change_since_previous: r.change.as_ref().map(change_text),
        }),
        narrative: vec![],
        figures: AssetCharts::empty().figure_slots(),
        metrics: metric_rows(r),
        criteria: CriteriaView {
            name: r
                .criteria_set
                .clone()
                .unwrap_or_else(|| not_computed("no criteria set recorded")),
            source: "see the method references in the provenance section".to_string(),
            parameters: vec![
                Param::new("Height H", with_unit(r.height_m, 1, "m")),
                Param::new("Structure type", r.structure_type.clone()),
            ],
        },
        data_quality: DataQualityView {
            points_kept: r.n_points,
            points_rejected: r.n_rejected.values().sum(),
            rejected_by_reason: rejected,
            surroundings_points: r.n_surroundings,
            datasets: r
                .datasets
                .iter()
                .map(|name| DatasetView {
                    name: name.clone(),
                    geometry: "see input files".to_string(),
                    look: "see input files".to_string(),
                    unit_vector: "see input files".to_string(),
                    incidence: "see input files".to_string(),
                    epochs: "not stated".to_string(),
                    first_epoch: "not stated".to_string(),
                    last_epoch: "not stated".to_string(),
                    points_kept: "not stated".to_string(),
                })
                .collect(),
            assumptions,
        },
        cautions: vec![],
        works: None,
        provenance: Provenance {
            tool: tool_label(),
            inputs: ctx.inputs.clone(),
            parameters: ctx.parameters.clone(),
            references: ctx.references.clone(),
        },
    };
    let velocity = model
        .metrics
        .iter()
        .find(|m| m.symbol == "v_U")
        .map(|m| m.value.clone());
    let text_ctx = TextContext::new()
        .text("structure_name", model.structure.name.clone())
        .text("structure_id", model.structure.id.clone())
        .text("portfolio_name", model.meta.portfolio_name.clone())
        .text("window_start", model.window.start.clone())
        .text("window_end", model.window.end.clone())
        .text("verdict", model.verdict.headline.clone())
        .text("evidence_grade", model.verdict.evidence_grade.clone())
        .text(
            "velocity",
            velocity.unwrap_or_else(|| NOT_COMPUTED.to_string()),
        )
        .text("reference", ctx.reference.clone())
        .flag("assessable", model.verdict.assessable)
        .flag("single_geometry", r.east_velocity_mm_per_yr.is_none())
        .list("reasons", &model.verdict.status_reasons);
    model.narrative = blocks.paragraphs("asset_narrative.j2", &text_ctx)?;
    model.cautions = blocks.paragraphs("asset_cautions.j2", &text_ctx)?;
    Ok(model)
}

/// The ranking input of one structure for the portfolio table.
pub fn rank_input(r: &StructureResult) -> RankInput {
    RankInput {
        id: r.id.clone(),
        name: r.name.clone(),
        status: status(r.status),
        category_index: r.damage_category,
        governing_strain: r.governing_strain,
        velocity_mm_per_yr: r
            .vertical_velocity_mm_per_yr
            .map(|v| (v, r.vertical_velocity_se_mm_per_yr)),
        category_probability: r
            .damage_category_probability
            .zip(r.damage_category_exceedance_probability),
        evidence_grade: r
            .evidence_grade
            .clone()
            .unwrap_or_else(|| "not graded".to_string()),
        trigger_status: trigger(r).0,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn result(status: &str, category: Option<u8>) -> StructureResult {
        let v = serde_json::json!({
            "id": "T-1", "name": "Test\nblock", "status": status,
            "status_reasons": if status == "assessed" { vec![] } else { vec!["2 points kept"] },
            "n_points": 12, "n_rejected": {"coherence below 0.7": 1, "robust z above 3": 2},
            "n_surroundings": 30, "datasets": ["asc"],
            "settlement_mm": 6.81, "differential_settlement_mm": 4.93, "mean_vertical_mm": -6.819,
            "mean_east_mm": null, "vertical_velocity_mm_per_yr": -2.44, "east_velocity_mm_per_yr": null,
            "tilt": 1.857e-4, "tilt_azimuth_deg": 103.1, "angular_distortion": 3.372e-4,
            "deflection_ratio": -8.430e-5, "horizontal_strain": null, "governing_strain": 1.234e-4,
            "damage_category": category, "damage_route": "limiting tensile strain, hogging",
            "evidence_grade": "medium", "vertical_velocity_se_mm_per_yr": 0.43,
            "east_velocity_se_mm_per_yr": null, "tilt_se": 6.146e-5, "damage_category_name": null,
            "criteria_set": "burland-1995", "height_m": 10.0, "structure_type": "masonry",
            "trigger_status": null, "triggers": [], "report_file": null, "fallbacks": ["height"],
            "assumptions": ["north–south movement assumed zero"], "change": null,
            "series": null, "metrics": null, "damage": null, "grade": null
        });
        serde_json::from_value(v).expect("results record")
    }

    fn ctx() -> ReportContext {
        ReportContext {
            portfolio_name: "P".into(),
            report_date: ReportDate::new(2024, 6, 30).unwrap(),
            revision: String::new(),
            prepared_by: String::new(),
            checked_by: String::new(),
            window: (
                NaiveDate::from_ymd_opt(2021, 1, 1).unwrap(),
                NaiveDate::from_ymd_opt(2024, 1, 1).unwrap(),
            ),
            reference: "the reference area".into(),
            inputs: vec![],
            parameters: vec![],
            references: vec![],
        }
    }

    #[test]
    fn assessed_result_maps_field_by_field() {
        let m = asset_report(
            &result("assessed", Some(0)),
            &ctx(),
            &TextBlocks::builtin().unwrap(),
        )
        .unwrap();
        assert_eq!(m.structure.name, "Test block");
        assert_eq!(m.structure.height, "10.0 m");
        assert_eq!(m.meta.revision, "not stated");
        assert_eq!(m.verdict.headline, "Category 0 — Negligible");
        assert_eq!(m.verdict.trigger_status, "no trigger level exceeded");
        let by_sym = |s: &str| m.metrics.iter().find(|r| r.symbol == s).unwrap().clone();
        assert_eq!(by_sym("S_max").value, "6.8 mm");
        assert_eq!(by_sym("v_U").value, "-2.4 ± 0.4 mm/yr");
        assert_eq!(by_sym("v_U").uncertainty, "0.4 mm/yr");
        // insar-methods.md §7.11: ω = 1.857e-4 towards 103.1°
        assert_eq!(by_sym("ω").value, "0.186 ×10⁻³ (1/5385)");
        assert_eq!(
            by_sym("ω").note,
            "plane fit; goes down towards azimuth 103°"
        );
        assert_eq!(by_sym("Δ/L").value, "-0.0843 ×10⁻³ hogging");
        assert_eq!(by_sym("ε_max").value, "0.0123 %");
        // A null field is "not computed", never zero.
        assert_eq!(by_sym("ε_h").value, NOT_COMPUTED);
        assert!(!by_sym("ε_h").computed);
        assert_eq!(by_sym("v_E").value, NOT_COMPUTED);
        assert_eq!(m.data_quality.points_rejected, 3);
        assert_eq!(
            m.data_quality.rejected_by_reason[0].reason,
            "robust z above 3"
        );
        assert!(
            m.data_quality
                .assumptions
                .iter()
                .any(|a| a == "default used: height")
        );
        assert!(
            m.narrative
                .iter()
                .any(|p| p.contains("one viewing geometry"))
        );
        assert!(!m.cautions.is_empty());
    }

    #[test]
    fn insufficient_result_has_no_category() {
        let m = asset_report(
            &result("insufficient_data", Some(0)),
            &ctx(),
            &TextBlocks::builtin().unwrap(),
        )
        .unwrap();
        assert!(m.verdict.category.is_none());
        assert_eq!(m.verdict.headline, "Insufficient data — not assessable");
        let r = rank_input(&result("insufficient_data", None));
        assert_eq!(r.status, AssessmentStatus::InsufficientData);
    }
}
