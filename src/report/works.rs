//! The "Planned works" part of the reports: from the works screening detail of a result
//! (`works` in results.json) and the works geometry to the [`WorksView`] section model, its
//! chart data ([`WorksCharts`]), and the two overview columns (predicted category,
//! observed/predicted settlement).
//!
//! Owns: reading the works detail back through private `Deserialize` mirrors (only the fields
//! shown), the wording of the stage verdicts, the units of the comparison table, and the plan
//! geometry in the structure's local frame (inflection lines at ±i, the stage-2 section line).
//!
//! Does not own: any prediction or screening (everything was computed by `crate::works`; this
//! file only reshapes it), the drawing (see [`super::charts::works`]), or the template.
//!
//! Choices recorded here:
//! - The works geometry is rebuilt once per report run with [`WorksGeometry::project`] from the
//!   portfolio's `[works]` and the analysis CRS (it is not in results.json); the run did the same
//!   projection, so it cannot fail here unless the run failed first.
//! - The plan view is framed on the footprint, the stage-2 section line and the nearest point of
//!   every works item within [`PLAN_REACH_M`] of the footprint centroid; works farther away are
//!   named in the legend as outside the view rather than shrinking the structure to a dot.
//! - The section line is drawn from the structure's extent on the section out to the tunnel
//!   axis or the excavation wall (x = 0) when that lies within [`PLAN_REACH_M`], else 10 m
//!   beyond the structure on both sides.
//! - The history chart uses the drive with the largest predicted settlement at the structure and
//!   puts the date on the horizontal axis: against face position every epoch before the launch
//!   and after the breakthrough would stack at one abscissa. The epoch the face passes the
//!   structure is marked.
//! - Without any face history the comparison chart shows bars for settlement, largest slope and
//!   Δ/L (the rows of the comparison that have a unit scale in common with nothing else).

use geo::{Buffer, Centroid};
use serde::Deserialize;

use super::format::{fixed, one_in, one_line, per_mille, percent, with_unit};
use super::model::*;
use super::pipeline::ReportInput;
use crate::ingest::Structure;
use crate::results::StructureResult;
use crate::works::WorksGeometry;

/// Works nearer than this to the footprint centroid are framed in the plan view, m.
pub const PLAN_REACH_M: f64 = 150.0;

/// Wording of the stiffness assumption the reports always state.
pub const STIFFNESS_ASSUMPTION: &str = "relative-stiffness factors are applied to predicted \
     movement only; the observed movement is used as measured";

// ---------------------------------------------------------------------------------------------
// Mirrors of the works detail (only the fields shown)
// ---------------------------------------------------------------------------------------------

#[derive(Debug, Clone, Deserialize)]
struct WorksJson {
    #[serde(default)]
    nearby: Vec<NearbyJson>,
    stage1: Stage1Json,
    stage2: Option<Stage2Json>,
    stage2_unavailable_because: Option<String>,
    predicted_settlement_mm: f64,
    predicted_category: Option<u8>,
    comparison: ComparisonJson,
    #[serde(default)]
    face_history: Vec<FaceHistoryJson>,
    #[serde(default)]
    assumptions: Vec<String>,
}

#[derive(Debug, Clone, Deserialize)]
struct NearbyJson {
    name: String,
    kind: String,
    distance_m: f64,
    chainage_m: Option<f64>,
}

#[derive(Debug, Clone, Deserialize)]
struct Stage1Json {
    max_settlement_mm: f64,
    max_settlement_at: [f64; 2],
    max_slope: f64,
    rankin: Option<RankinJson>,
    negligible: bool,
    stage2_required: bool,
}

#[derive(Debug, Clone, Deserialize)]
struct RankinJson {
    category: String,
}

#[derive(Debug, Clone, Deserialize)]
struct Stage2Json {
    section: SectionJson,
    #[serde(default)]
    parts: Vec<PartJson>,
    stiffness: StiffnessJson,
    category: Option<u8>,
    governing_strain: Option<f64>,
    damage: Stage2DamageJson,
}

#[derive(Debug, Clone, Deserialize)]
struct SectionJson {
    source: String,
    direction: [f64; 2],
    through: [f64; 2],
    x_through_m: f64,
    x_start_m: f64,
    x_end_m: f64,
}

#[derive(Debug, Clone, Deserialize)]
struct PartJson {
    start_m: f64,
    end_m: f64,
    mode: String,
    delta_mm: f64,
    deflection_ratio_greenfield: f64,
    horizontal_strain_greenfield: Option<f64>,
}

#[derive(Debug, Clone, Deserialize)]
struct StiffnessJson {
    deflection_ratio_sagging: f64,
    deflection_ratio_hogging: f64,
    horizontal_strain_tensile: f64,
    horizontal_strain_compressive: f64,
    source: Option<String>,
}

#[derive(Debug, Clone, Deserialize)]
struct Stage2DamageJson {
    governing: Option<Stage2GoverningJson>,
}

#[derive(Debug, Clone, Deserialize)]
struct Stage2GoverningJson {
    mode: Option<String>,
    branch: Option<String>,
}

#[derive(Debug, Clone, Deserialize)]
struct ComparisonJson {
    period: String,
    #[serde(default)]
    rows: Vec<RowJson>,
    observed_to_predicted_settlement: Option<f64>,
}

#[derive(Debug, Clone, Deserialize)]
struct RowJson {
    quantity: String,
    predicted: Option<f64>,
    observed: Option<f64>,
    ratio: Option<f64>,
    observed_exceeds_predicted: Option<bool>,
    note: Option<String>,
}

#[derive(Debug, Clone, Deserialize)]
struct FaceHistoryJson {
    tunnel: String,
    reference_date: chrono::NaiveDate,
    #[serde(default)]
    epochs: Vec<FaceEpochJson>,
}

#[derive(Debug, Clone, Deserialize)]
struct FaceEpochJson {
    date: chrono::NaiveDate,
    face_past_structure_m: f64,
    observed_settlement_mm: Option<f64>,
    predicted_settlement_mm: f64,
}

fn read_works(v: &serde_json::Value) -> Result<WorksJson, String> {
    if v.is_null() {
        return Err("no works screening in the results (see the assumptions)".into());
    }
    serde_json::from_value(v.clone()).map_err(|e| format!("works detail not readable ({e})"))
}

// ---------------------------------------------------------------------------------------------
// Section model
// ---------------------------------------------------------------------------------------------

/// "1 — Very slight", or `None` above 5.
fn category_label(c: u8) -> Option<String> {
    CategoryView::from_index(c).map(|v| format!("{} — {}", v.code, v.name))
}

/// Rankin (1988) category number from its serialised name.
fn rankin_number(name: &str) -> Option<u8> {
    match name {
        "negligible" => Some(1),
        "slight" => Some(2),
        "moderate" => Some(3),
        "high" => Some(4),
        _ => None,
    }
}

/// Slope-like ratio as "1.026 ×10⁻³ (1/974)".
fn ratio_text(v: f64) -> String {
    format!("{} ({})", per_mille(v, 3), one_in(v))
}

/// Quantity wording, unit and value formatting of one comparison row.
fn row_view(r: &RowJson) -> WorksRow {
    let (quantity, unit): (&str, &str) = match r.quantity.as_str() {
        "settlement_mm" => ("Largest settlement", "mm, + down"),
        "tilt" => ("Tilt (rigid rotation)", "×10⁻³ (1/n)"),
        "max_slope" => ("Largest slope", "×10⁻³ (1/n)"),
        "deflection_ratio" => ("Deflection ratio Δ/L", "×10⁻³, + sagging, − hogging"),
        "damage_category" => ("Damage category", "category"),
        other => (other, "as recorded"),
    };
    let value = |v: Option<f64>| -> Option<String> {
        let v = v.filter(|v| v.is_finite())?;
        Some(match r.quantity.as_str() {
            "settlement_mm" => with_unit(v, 1, "mm"),
            "tilt" | "max_slope" => ratio_text(v),
            "deflection_ratio" => per_mille(v, 3),
            "damage_category" => {
                let c = v.round();
                if (0.0..=5.0).contains(&c) {
                    category_label(c as u8).unwrap_or_else(|| fixed(v, 0))
                } else {
                    fixed(v, 0)
                }
            }
            _ => fixed(v, 4),
        })
    };
    WorksRow {
        quantity: quantity.to_string(),
        unit: unit.to_string(),
        predicted: value(r.predicted).unwrap_or_else(|| NOT_COMPUTED.to_string()),
        observed: value(r.observed).unwrap_or_else(|| "not observed".to_string()),
        ratio: r
            .ratio
            .filter(|x| x.is_finite())
            .map(|x| fixed(x, 2))
            .unwrap_or_else(|| "—".to_string()),
        exceeds: match r.observed_exceeds_predicted {
            Some(true) => "yes".to_string(),
            Some(false) => "no".to_string(),
            None => "—".to_string(),
        },
        note: r
            .note
            .as_deref()
            .map(one_line)
            .unwrap_or_else(|| "—".to_string()),
    }
}

fn stage1_text(s1: &Stage1Json) -> String {
    let rankin = s1
        .rankin
        .as_ref()
        .map(|r| match rankin_number(&r.category) {
            Some(n) => format!("risk category {n} ({})", r.category),
            None => format!("risk category {}", one_line(&r.category)),
        })
        .unwrap_or_else(|| not_computed("Rankin category not available"));
    let outcome = if s1.negligible {
        "negligible risk, no further assessment needed (stage 2 shown for information)"
    } else if s1.stage2_required {
        "stage 2 required"
    } else {
        "stage 2 not required"
    };
    format!(
        "Stage 1 (Rankin 1988): largest greenfield settlement {} and slope {} on the footprint: {rankin}; {outcome}.",
        with_unit(s1.max_settlement_mm, 1, "mm"),
        one_in(s1.max_slope),
    )
}

fn stage2_text(w: &WorksJson) -> String {
    let Some(s2) = &w.stage2 else {
        return format!(
            "Stage 2: {}",
            not_computed(
                w.stage2_unavailable_because
                    .as_deref()
                    .unwrap_or("no stage-2 result")
            )
        );
    };
    let cat = s2
        .category
        .and_then(category_label)
        .map(|c| format!("predicted category {c}"))
        .unwrap_or_else(|| format!("predicted category {}", not_computed("no part assessed")));
    let strain = s2
        .governing_strain
        .filter(|g| g.is_finite())
        .map(|g| {
            let gov = s2.damage.governing.as_ref();
            let mode = gov.and_then(|g| g.mode.as_deref()).unwrap_or("governing");
            let branch = gov
                .and_then(|g| g.branch.as_deref())
                .map(|b| format!(", {b}"))
                .unwrap_or_default();
            format!(
                ", governing tensile strain {} ({mode} part{branch})",
                percent(g, 3)
            )
        })
        .unwrap_or_default();
    format!(
        "Stage 2 (limiting tensile strain on the greenfield profile, building stiffness ignored \
         unless factors are given): {cat}{strain}. This is an upper-bound (\"possible\") category."
    )
}

fn stage_facts(w: &WorksJson) -> Vec<Param> {
    let mut facts = Vec::new();
    let Some(s2) = &w.stage2 else {
        return facts;
    };
    let sec = &s2.section;
    let along = if sec.source.starts_with("excavation") {
        "x = distance behind the wall"
    } else {
        "x = offset from the tunnel axis"
    };
    facts.push(Param::new(
        "Stage-2 section",
        format!(
            "transverse to {}; structure from x = {} to {} ({along})",
            one_line(&sec.source),
            with_unit(sec.x_start_m, 1, "m"),
            with_unit(sec.x_end_m, 1, "m"),
        ),
    ));
    for (k, p) in s2.parts.iter().enumerate() {
        facts.push(Param::new(
            format!(
                "Part {} ({}, x {} to {})",
                k + 1,
                one_line(&p.mode),
                fixed(p.start_m, 1),
                with_unit(p.end_m, 1, "m")
            ),
            format!(
                "Δ {}, Δ/L {}, ε_h {}",
                with_unit(p.delta_mm, 2, "mm"),
                per_mille(p.deflection_ratio_greenfield, 3),
                p.horizontal_strain_greenfield
                    .map(|e| percent(e, 3))
                    .unwrap_or_else(|| "not predicted".to_string())
            ),
        ));
    }
    let f = &s2.stiffness;
    let all_one = [
        f.deflection_ratio_sagging,
        f.deflection_ratio_hogging,
        f.horizontal_strain_tensile,
        f.horizontal_strain_compressive,
    ]
    .iter()
    .all(|x| (*x - 1.0).abs() < 1e-12);
    facts.push(Param::new(
        "Relative-stiffness factors",
        if all_one {
            "none (1.0: greenfield movement used)".to_string()
        } else {
            format!(
                "Δ/L sagging {}, hogging {}; ε_h tensile {}, compressive {}{}",
                fixed(f.deflection_ratio_sagging, 2),
                fixed(f.deflection_ratio_hogging, 2),
                fixed(f.horizontal_strain_tensile, 2),
                fixed(f.horizontal_strain_compressive, 2),
                f.source
                    .as_deref()
                    .map(|s| format!(" (source: {})", one_line(s)))
                    .unwrap_or_default()
            )
        },
    ));
    facts
}

/// The works section model and its chart data for one structure; `None` when the portfolio
/// has no `[works]`.
pub fn works_section(
    a: &ReportInput,
    r: &StructureResult,
    s: &Structure,
    works: &serde_json::Value,
    geometry: Option<&WorksGeometry>,
) -> Option<(WorksView, WorksCharts)> {
    a.portfolio.works.as_ref()?;
    let w = match read_works(works) {
        Ok(w) => w,
        Err(reason) => {
            let charts = WorksCharts {
                plan: Err(reason.clone()),
                comparison: Err(reason.clone()),
            };
            let (plan, comparison_chart) = charts.figure_slots();
            let view = WorksView {
                predicted_settlement: not_computed(&reason),
                predicted_category: not_computed(&reason),
                observed_to_predicted: not_computed(&reason),
                stage1: format!("Stage 1: {}", not_computed(&reason)),
                stage2: format!("Stage 2: {}", not_computed(&reason)),
                facts: vec![],
                nearby: vec![],
                comparison_period: not_computed(&reason),
                comparison: vec![],
                plan,
                comparison_chart,
                assumptions: vec![STIFFNESS_ASSUMPTION.to_string()],
            };
            return Some((view, charts));
        }
    };
    let charts = WorksCharts {
        plan: match geometry {
            Some(g) => plan_chart(a, s, g, &w),
            None => Err("works geometry not available".into()),
        },
        comparison: comparison_chart(&r.id, &w),
    };
    let (plan, comparison_chart) = charts.figure_slots();
    let mut assumptions: Vec<String> = w.assumptions.iter().map(|x| one_line(x)).collect();
    assumptions.push(STIFFNESS_ASSUMPTION.to_string());
    let view = WorksView {
        predicted_settlement: with_unit(w.predicted_settlement_mm, 1, "mm"),
        predicted_category: w
            .predicted_category
            .and_then(category_label)
            .unwrap_or_else(|| {
                not_computed(
                    w.stage2_unavailable_because
                        .as_deref()
                        .unwrap_or("no stage-2 category"),
                )
            }),
        observed_to_predicted: w
            .comparison
            .observed_to_predicted_settlement
            .filter(|x| x.is_finite())
            .map(|x| fixed(x, 2))
            .unwrap_or_else(|| {
                not_computed(
                    w.comparison
                        .rows
                        .iter()
                        .find(|r| r.quantity == "settlement_mm")
                        .and_then(|r| r.note.as_deref())
                        .unwrap_or("no observed or predicted settlement"),
                )
            }),
        stage1: stage1_text(&w.stage1),
        stage2: stage2_text(&w),
        facts: stage_facts(&w),
        nearby: w
            .nearby
            .iter()
            .map(|n| {
                format!(
                    "{} ({}): {} from the footprint centroid{}",
                    one_line(&n.name),
                    one_line(&n.kind),
                    with_unit(n.distance_m, 1, "m"),
                    n.chainage_m
                        .map(|c| format!(", at chainage {}", with_unit(c, 0, "m")))
                        .unwrap_or_default()
                )
            })
            .collect(),
        comparison_period: one_line(&w.comparison.period),
        comparison: w.comparison.rows.iter().map(row_view).collect(),
        plan,
        comparison_chart,
        assumptions,
    };
    Some((view, charts))
}

// ---------------------------------------------------------------------------------------------
// Charts
// ---------------------------------------------------------------------------------------------

fn plan_chart(
    a: &ReportInput,
    s: &Structure,
    g: &WorksGeometry,
    w: &WorksJson,
) -> Result<WorksPlanChart, String> {
    let local = |p: [f64; 2]| -> [f64; 2] {
        let (x, y) = s.frame.to_local(p[0], p[1]);
        [x, y]
    };
    let footprint: Vec<Vec<[f64; 2]>> = s
        .footprint
        .0
        .iter()
        .map(|p| p.exterior().coords().map(|c| local([c.x, c.y])).collect())
        .collect();
    if footprint.iter().all(|r| r.len() < 3) {
        return Err("footprint has no polygon".into());
    }
    let centroid = s
        .footprint
        .centroid()
        .map(|c| [c.x(), c.y()])
        .ok_or_else(|| "footprint has no centroid".to_string())?;
    let dist = |p: [f64; 2]| ((p[0] - centroid[0]).powi(2) + (p[1] - centroid[1]).powi(2)).sqrt();
    let mut frame: Vec<[f64; 2]> = footprint.iter().flatten().copied().collect();
    let mut outside = Vec::new();
    let mut pad_m: f64 = 10.0;

    let mut tunnels = Vec::new();
    for t in &g.tunnels {
        let mut nearest: Option<([f64; 2], f64)> = None;
        let mut bands = Vec::new();
        let mut lines = Vec::new();
        let mut i_m = Vec::new();
        for seg in &t.segments {
            let (dx, dy) = (seg.end[0] - seg.start[0], seg.end[1] - seg.start[1]);
            let len = (dx * dx + dy * dy).sqrt();
            if !(len.is_finite() && len > 0.0) {
                continue;
            }
            let n = [-dy / len, dx / len];
            let i = seg.trough.i_m;
            let off = |p: [f64; 2], k: f64| local([p[0] + k * i * n[0], p[1] + k * i * n[1]]);
            bands.push(vec![
                off(seg.start, 1.0),
                off(seg.end, 1.0),
                off(seg.end, -1.0),
                off(seg.start, -1.0),
                off(seg.start, 1.0),
            ]);
            lines.push([off(seg.start, 1.0), off(seg.end, 1.0)]);
            lines.push([off(seg.start, -1.0), off(seg.end, -1.0)]);
            i_m.push(i);
            // Nearest point of this segment to the centroid.
            let tt = (((centroid[0] - seg.start[0]) * dx + (centroid[1] - seg.start[1]) * dy)
                / (len * len))
                .clamp(0.0, 1.0);
            let q = [seg.start[0] + tt * dx, seg.start[1] + tt * dy];
            let d = dist(q);
            if nearest.is_none_or(|(_, nd)| d < nd) {
                nearest = Some((q, d));
            }
        }
        let mut centreline: Vec<[f64; 2]> = t.segments.iter().map(|sg| local(sg.start)).collect();
        if let Some(last) = t.segments.last() {
            centreline.push(local(last.end));
        }
        match nearest {
            Some((q, d)) if d <= PLAN_REACH_M => {
                frame.push(local(q));
                pad_m = pad_m.max(i_m.iter().copied().fold(0.0, f64::max));
            }
            Some((_, d)) => outside.push(format!(
                "{} ({} away)",
                one_line(&t.name),
                with_unit(d, 0, "m")
            )),
            None => {}
        }
        let face_at_window_end = t.face_chainage_m(a.window.end).and_then(|c| {
            t.segments.iter().find_map(|sg| {
                let u = (c - sg.chainage_start_m) / sg.length_m;
                (sg.length_m > 0.0 && (0.0..=1.0 + 1e-9).contains(&u)).then(|| {
                    let u = u.min(1.0);
                    local([
                        sg.start[0] + u * (sg.end[0] - sg.start[0]),
                        sg.start[1] + u * (sg.end[1] - sg.start[1]),
                    ])
                })
            })
        });
        tunnels.push(WorksPlanTunnel {
            name: one_line(&t.name),
            centreline,
            bands,
            inflection_lines: lines,
            i_m,
            face_at_window_end,
        });
    }

    let mut excavations = Vec::new();
    for e in &g.excavations {
        let (q, d) = e.nearest_wall(centroid[0], centroid[1]);
        if d <= PLAN_REACH_M || e.contains(centroid[0], centroid[1]) {
            frame.push(local(q));
        } else {
            outside.push(format!(
                "{} ({} away)",
                one_line(&e.name),
                with_unit(d, 0, "m")
            ));
        }
        let reach = e.influence_m();
        let poly = geo::Polygon::new(
            geo::LineString::from(e.outline.iter().map(|p| (p[0], p[1])).collect::<Vec<_>>()),
            vec![],
        );
        let influence = if reach.is_finite() && reach > 0.0 {
            poly.buffer(reach)
                .0
                .iter()
                .map(|p| p.exterior().coords().map(|c| local([c.x, c.y])).collect())
                .collect()
        } else {
            vec![]
        };
        let mut outline: Vec<[f64; 2]> = e.outline.iter().map(|p| local(*p)).collect();
        if outline.first() != outline.last() {
            if let Some(f) = outline.first().copied() {
                outline.push(f);
            }
        }
        excavations.push(WorksPlanExcavation {
            name: one_line(&e.name),
            outline,
            influence,
            influence_m: reach,
        });
    }

    let (section, section_extent) = match &w.stage2 {
        Some(s2) => {
            let sec = &s2.section;
            let at = |x: f64| {
                let d = x - sec.x_through_m;
                local([
                    sec.through[0] + d * sec.direction[0],
                    sec.through[1] + d * sec.direction[1],
                ])
            };
            let (x0, x1) = (sec.x_start_m, sec.x_end_m);
            let (mut lo, mut hi) = (x0 - 10.0, x1 + 10.0);
            if x0.abs().min(x1.abs()) <= PLAN_REACH_M || (x0 <= 0.0 && x1 >= 0.0) {
                lo = lo.min(-10.0);
                hi = hi.max(10.0);
            }
            let line = [at(lo), at(hi)];
            frame.extend(line);
            (Some(line), Some([at(x0), at(x1)]))
        }
        None => (None, None),
    };
    let max_settlement = Some((
        local(w.stage1.max_settlement_at),
        format!(
            "largest predicted settlement {}",
            with_unit(w.stage1.max_settlement_mm, 1, "mm")
        ),
    ));

    let xs = frame.iter().map(|p| p[0]).filter(|v| v.is_finite());
    let ys = frame.iter().map(|p| p[1]).filter(|v| v.is_finite());
    let (x0, x1) = xs.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
        (a.min(v), b.max(v))
    });
    let (y0, y1) = ys.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
        (a.min(v), b.max(v))
    });
    if !(x0.is_finite() && x1.is_finite() && y0.is_finite() && y1.is_finite()) {
        return Err("plan view has no finite extent".into());
    }
    let pad = pad_m.max(0.08 * (x1 - x0).max(y1 - y0));
    Ok(WorksPlanChart {
        title: format!("Planned works near {}", one_line(&s.raw.id)),
        crs_label: a.analysis_crs.name(),
        origin_m: [s.frame.origin_x, s.frame.origin_y],
        footprint,
        tunnels,
        excavations,
        section,
        section_extent,
        max_settlement,
        view_m: [x0 - pad, x1 + pad, y0 - pad, y1 + pad],
        outside_view: outside,
    })
}

fn comparison_chart(id: &str, w: &WorksJson) -> Result<WorksComparisonChart, String> {
    let peak = |h: &FaceHistoryJson| {
        h.epochs
            .iter()
            .map(|e| e.predicted_settlement_mm.abs())
            .filter(|v| v.is_finite())
            .fold(0.0, f64::max)
    };
    if let Some(h) = w
        .face_history
        .iter()
        .filter(|h| !h.epochs.is_empty())
        .max_by(|a, b| peak(a).total_cmp(&peak(b)))
    {
        let mut epochs: Vec<WorksEpoch> = h
            .epochs
            .iter()
            .filter(|e| e.predicted_settlement_mm.is_finite())
            .map(|e| WorksEpoch {
                date: e.date,
                observed_mm: e.observed_settlement_mm.filter(|v| v.is_finite()),
                predicted_mm: e.predicted_settlement_mm,
            })
            .collect();
        epochs.sort_by_key(|e| e.date);
        if epochs.is_empty() {
            return Err("the face history has no finite prediction".into());
        }
        let face_passes = h
            .epochs
            .iter()
            .filter(|e| e.face_past_structure_m >= 0.0)
            .map(|e| e.date)
            .min();
        return Ok(WorksComparisonChart::History(WorksHistoryChart {
            title: format!(
                "Settlement of {} as \"{}\" passes",
                one_line(id),
                one_line(&h.tunnel)
            ),
            tunnel: one_line(&h.tunnel),
            reference_date: h.reference_date,
            epochs,
            face_passes,
        }));
    }
    let get = |q: &str| w.comparison.rows.iter().find(|r| r.quantity == q);
    let mut pairs = Vec::new();
    for (q, label, unit, scale) in [
        (
            "settlement_mm",
            "Largest settlement",
            "Settlement (mm, + down)",
            1.0,
        ),
        ("max_slope", "Largest slope", "Slope (×10⁻³)", 1e3),
        (
            "deflection_ratio",
            "Deflection ratio",
            "Δ/L (×10⁻³, + sagging)",
            1e3,
        ),
    ] {
        if let Some(r) = get(q) {
            let f = |v: Option<f64>| v.filter(|v| v.is_finite()).map(|v| v * scale);
            pairs.push(WorksBarPair {
                quantity: label.to_string(),
                unit: unit.to_string(),
                predicted: f(r.predicted),
                observed: f(r.observed),
            });
        }
    }
    if pairs
        .iter()
        .all(|p| p.predicted.is_none() && p.observed.is_none())
    {
        return Err("no predicted or observed value to compare".into());
    }
    Ok(WorksComparisonChart::Bars(WorksBarChart {
        title: format!("Predicted against observed for {}", one_line(id)),
        pairs,
    }))
}

/// Overview columns of one result: predicted category and observed/predicted settlement.
pub fn overview_columns(r: &StructureResult) -> (String, String) {
    let cat = r
        .predicted_category
        .and_then(category_label)
        .unwrap_or_else(|| NOT_COMPUTED.to_string());
    let ratio = r
        .observed_to_predicted_settlement
        .filter(|x| x.is_finite())
        .map(|x| fixed(x, 2))
        .unwrap_or_else(|| "—".to_string());
    (cat, ratio)
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    /// A works detail shaped like `works` in results.json: a drive along the section's x = 0,
    /// the structure from x = −20 to 0 m, two parts, a three-epoch face history.
    fn sample_works() -> serde_json::Value {
        json!({
            "nearby": [{"name": "Drive A", "kind": "tunnel", "distance_m": 9.996,
                        "chainage_m": 499.8, "settlement_at_centroid_mm": 10.27}],
            "stage1": {"max_settlement_mm": 16.9197, "max_settlement_at": [500000.0, 4982944.4],
                       "max_slope": 1.0262e-3, "max_slope_at": [500010.0, 4982945.0],
                       "rankin": {"category": "slight", "slope_category": "negligible",
                                  "settlement_category": "slight"},
                       "negligible": false, "stage2_required": true},
            "stage2": {
                "section": {"source": "tunnel \"Drive A\" segment 0", "direction": [-1.0, 0.0],
                            "through": [500010.0, 4982950.0], "x_through_m": -10.0,
                            "x_start_m": -20.0, "x_end_m": 0.0},
                "inflection_points_m": [-10.0],
                "parts": [
                    {"start_m": -20.0, "end_m": -10.0, "mode": "hogging", "delta_mm": 0.7867,
                     "delta_at_m": -15.4, "deflection_ratio_greenfield": 7.874e-5,
                     "horizontal_strain_greenfield": 2.841e-4,
                     "deflection_ratio_used": -7.874e-5, "horizontal_strain_used": 2.841e-4},
                    {"start_m": -10.0, "end_m": 0.0, "mode": "sagging", "delta_mm": 1.3686,
                     "delta_at_m": -4.3, "deflection_ratio_greenfield": 1.3686e-4,
                     "horizontal_strain_greenfield": -5.131e-4,
                     "deflection_ratio_used": 1.3686e-4, "horizontal_strain_used": -5.131e-4}
                ],
                "stiffness": {"structures": [], "deflection_ratio_sagging": 1.0,
                              "deflection_ratio_hogging": 1.0, "horizontal_strain_tensile": 1.0,
                              "horizontal_strain_compressive": 1.0, "source": null},
                "damage": {"governing": {"route": "limiting-tensile-strain", "zone_index": 0,
                                         "mode": "hogging", "branch": "bending"}},
                "category": 0, "governing_strain": 3.5286e-4, "deflection_ratio": 1.3686e-4
            },
            "stage2_unavailable_because": null,
            "predicted_settlement_mm": 16.9197,
            "predicted_category": 0,
            "comparison": {
                "period": "predicted change between the window start and end",
                "rows": [
                    {"quantity": "settlement_mm", "predicted": 16.9197, "observed": 17.1795,
                     "ratio": 1.01535, "observed_exceeds_predicted": true, "note": null},
                    {"quantity": "max_slope", "predicted": 1.0262e-3, "observed": 1.4412e-3,
                     "ratio": 1.4044, "observed_exceeds_predicted": true, "note": null},
                    {"quantity": "deflection_ratio", "predicted": 1.3686e-4, "observed": null,
                     "ratio": null, "observed_exceeds_predicted": null,
                     "note": "not observed: too few points"},
                    {"quantity": "damage_category", "predicted": 0.0, "observed": 1.0,
                     "ratio": null, "observed_exceeds_predicted": true,
                     "note": "categories are compared, not divided"}
                ],
                "observed_to_predicted_settlement": 1.01535,
                "observation_exceeds_prediction": true
            },
            "face_history": [{
                "tunnel": "Drive A", "structure_chainage_m": 499.8,
                "distance_from_alignment_m": 9.996, "reference_date": "2023-01-03",
                "epochs": [
                    {"date": "2023-01-03", "face_chainage_m": 0.0,
                     "face_past_structure_m": -499.8, "observed_settlement_mm": 0.0,
                     "predicted_settlement_mm": 0.0},
                    {"date": "2024-01-05", "face_chainage_m": 560.0,
                     "face_past_structure_m": 60.2, "observed_settlement_mm": null,
                     "predicted_settlement_mm": 10.2},
                    {"date": "2023-09-01", "face_chainage_m": 480.0,
                     "face_past_structure_m": -19.8, "observed_settlement_mm": 2.9,
                     "predicted_settlement_mm": 2.5}
                ]
            }],
            "assumptions": ["tunnel prediction: Peck (1969) Gaussian trough"]
        })
    }

    #[test]
    fn comparison_rows_carry_units_and_hand_checked_values() {
        let w = read_works(&sample_works()).expect("works");
        let rows: Vec<WorksRow> = w.comparison.rows.iter().map(row_view).collect();
        // 16.9197 mm → "16.9 mm"; ratio 1.01535 → "1.02" (two decimals).
        assert_eq!(rows[0].predicted, "16.9 mm");
        assert_eq!(rows[0].observed, "17.2 mm");
        assert_eq!(rows[0].ratio, "1.02");
        assert_eq!(rows[0].exceeds, "yes");
        assert_eq!(rows[0].unit, "mm, + down");
        // 1.0262e-3 = 1.026 ×10⁻³ and 1/974.5 → 1/974 (hand-checked: 1/1.0262e-3 = 974.47).
        assert_eq!(rows[1].predicted, "1.026 ×10⁻³ (1/974)");
        // A missing observation is said, not shown as zero.
        assert_eq!(rows[2].observed, "not observed");
        assert_eq!(rows[2].ratio, "—");
        assert!(rows[2].note.contains("too few points"));
        assert_eq!(rows[3].predicted, "0 — Negligible");
        assert_eq!(rows[3].observed, "1 — Very slight");
    }

    #[test]
    fn stage_texts_state_rankin_and_the_predicted_category() {
        let w = read_works(&sample_works()).expect("works");
        let t1 = stage1_text(&w.stage1);
        assert!(t1.contains("16.9 mm") && t1.contains("1/974"), "{t1}");
        assert!(t1.contains("risk category 2 (slight)") && t1.contains("stage 2 required"));
        let t2 = stage2_text(&w);
        // Governing strain 3.5286e-4 = 0.035 %.
        assert!(
            t2.contains("0 — Negligible") && t2.contains("0.035 %"),
            "{t2}"
        );
        assert!(t2.contains("hogging part, bending"), "{t2}");
        let facts = stage_facts(&w);
        assert!(
            facts[0].value.contains("-20.0 m to 0.0 m"),
            "{:?}",
            facts[0]
        );
        assert_eq!(facts[1].name, "Part 1 (hogging, x -20.0 to -10.0 m)");
        // Δ 0.7867 mm, Δ/L 7.874e-5 = 0.079 ×10⁻³, ε_h 2.841e-4 = 0.028 %.
        assert_eq!(facts[1].value, "Δ 0.79 mm, Δ/L 0.079 ×10⁻³, ε_h 0.028 %");
        assert!(facts[3].value.starts_with("none"));
    }

    #[test]
    fn history_chart_from_face_history_is_in_date_order() {
        let w = read_works(&sample_works()).expect("works");
        let Ok(WorksComparisonChart::History(h)) = comparison_chart("OVER", &w) else {
            panic!("expected a history chart");
        };
        let dates: Vec<String> = h.epochs.iter().map(|e| e.date.to_string()).collect();
        assert_eq!(dates, ["2023-01-03", "2023-09-01", "2024-01-05"]);
        // The face passes the structure's chainage at the first epoch with face_past ≥ 0.
        assert_eq!(
            h.face_passes.map(|d| d.to_string()).as_deref(),
            Some("2024-01-05")
        );
        assert_eq!(
            h.epochs[2].observed_mm, None,
            "missing observation stays missing"
        );
        assert_eq!(h.epochs[1].predicted_mm, 2.5);
        assert!(h.title.contains("Drive A"));
    }

    #[test]
    fn bars_without_face_history_scale_ratios_per_mille() {
        let mut v = sample_works();
        v["face_history"] = json!([]);
        let w = read_works(&v).expect("works");
        let Ok(WorksComparisonChart::Bars(b)) = comparison_chart("OVER", &w) else {
            panic!("expected bars");
        };
        assert_eq!(b.pairs.len(), 3);
        assert_eq!(b.pairs[0].predicted, Some(16.9197));
        // Slope 1.0262e-3 → 1.0262 ×10⁻³ on the axis (hand-checked ×1000).
        assert!((b.pairs[1].observed.expect("slope") - 1.4412).abs() < 1e-12);
        assert_eq!(b.pairs[2].observed, None);
    }

    #[test]
    fn missing_works_detail_is_a_reason() {
        assert!(read_works(&serde_json::Value::Null).is_err());
        assert!(read_works(&json!({"stage1": 3})).is_err());
    }
}
