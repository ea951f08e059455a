//! Invented sample report data, for tests, template development and `--demo`-style previews.
//!
//! Owns: a complete assessed structure, an insufficient-data structure and a small portfolio,
//! all invented (no real place, company, person or data set). The geometry and numbers follow
//! the worked building of insar-methods.md §7.11 (30 m × 12 m, long axis azimuth 60°, hogging
//! DR = −8.430e-5) so the figures look like a real screening case.
//!
//! Does not own: anything the pipeline uses; production reports are built by the adapter from
//! the results record.

use chrono::{Days, NaiveDate};

use super::ReportError;
use super::format::{fixed, one_in, per_mille, percent, with_uncertainty, with_unit};
use super::model::*;
use super::references::{CORE_METHODS, Method, citations};
use super::text::{TextBlocks, TextContext};

fn date(y: i32, m: u32, d: u32) -> NaiveDate {
    NaiveDate::from_ymd_opt(y, m, d).unwrap_or_default()
}

/// The sample report date (2024-06-30).
pub fn sample_date() -> ReportDate {
    ReportDate::from(date(2024, 6, 30))
}

fn meta(portfolio: &str) -> ReportMeta {
    ReportMeta::new(
        portfolio,
        sample_date(),
        "A",
        "A. Engineer (invented)",
        "B. Checker (invented)",
    )
}

fn provenance(extra: &[Method]) -> Provenance {
    let mut methods = CORE_METHODS.to_vec();
    methods.extend_from_slice(extra);
    Provenance {
        tool: tool_label(),
        inputs: vec![
            InputFile {
                path: "points-asc.csv".into(),
                sha256: "3f1c9a0b7e2d4c6a8b0e1f2a3b4c5d6e7f8091a2b3c4d5e6f708192a3b4c5d6e".into(),
            },
            InputFile {
                path: "footprints.geojson".into(),
                sha256: "a9b8c7d6e5f40312233445566778899aabbccddeeff00112233445566778899a".into(),
            },
        ],
        parameters: vec![
            Param::new("buffer", "10.0 m"),
            Param::new("coherence threshold", "0.70"),
            Param::new("outlier rule", "robust z > 3 (MAD)"),
            Param::new("E/G", "2.6"),
            Param::new("Poisson's ratio ν", "0.30"),
        ],
        references: citations(&methods),
    }
}

/// The rectangle of insar-methods.md §7.11 (30 m × 12 m, long axis azimuth 60°).
fn footprint() -> Vec<[f64; 2]> {
    vec![
        [-9.9904, -12.6962],
        [15.9904, 2.3038],
        [9.9904, 12.6962],
        [-15.9904, -2.3038],
    ]
}

fn offset(ring: &[[f64; 2]], dx: f64, dy: f64) -> Vec<[f64; 2]> {
    ring.iter().map(|p| [p[0] + dx, p[1] + dy]).collect()
}

/// The text-block context of an asset model (placeholders of `asset_*.j2`).
pub fn asset_text_context(
    model: &AssetReport,
    reference: &str,
    single_geometry: bool,
) -> TextContext {
    let velocity = model
        .metrics
        .iter()
        .find(|m| m.symbol == "v_U")
        .map(|m| m.value.clone())
        .unwrap_or_else(|| NOT_COMPUTED.to_string());
    TextContext::new()
        .text("structure_name", model.structure.name.clone())
        .text("structure_id", model.structure.id.clone())
        .text("portfolio_name", model.meta.portfolio_name.clone())
        .text("window_start", model.window.start.clone())
        .text("window_end", model.window.end.clone())
        .text("verdict", model.verdict.headline.clone())
        .text("evidence_grade", model.verdict.evidence_grade.clone())
        .text("velocity", velocity)
        .text("reference", reference)
        .flag("assessable", model.verdict.assessable)
        .flag("single_geometry", single_geometry)
        .list("reasons", &model.verdict.status_reasons)
}

/// A complete assessed structure (category 0, hogging), with all charts.
pub fn assessed_asset(name: &str) -> Result<(AssetReport, AssetCharts), ReportError> {
    let start = date(2021, 1, 4);
    let end = date(2024, 1, 1);
    let blocks = TextBlocks::builtin()?;
    let mut model = AssetReport {
        model_version: MODEL_VERSION,
        meta: meta("Northfield demonstration portfolio"),
        structure: StructureView {
            id: "NF-0042".into(),
            name: super::format::one_line(name),
            kind: "masonry, load-bearing walls".into(),
            length: with_unit(30.0, 1, "m"),
            height: with_unit(10.0, 1, "m"),
            footprint_area: with_unit(360.0, 0, "m²"),
        },
        window: WindowView::new(start, end),
        verdict: VerdictView::new(VerdictInput {
            status: AssessmentStatus::Assessed,
            status_reasons: vec![],
            category_index: Some(0),
            category_probability: Some(0.94),
            category_distribution: vec![0.94, 0.05, 0.01, 0.0, 0.0],
            higher_probability: Some(0.06),
            observability_notes: vec![],
            governing_route: Some("limiting tensile strain (Burland 1995), hogging zone, bending".into()),
            evidence_grade: "adequate".into(),
            trigger: Some(("below alert level (alert at 5.0 mm/yr)".into(), "none".into())),
            change_since_previous: Some("no change of category; velocity -2.1 → -2.4 mm/yr".into()),
        }),
        narrative: vec![],
        figures: AssetCharts::empty().figure_slots(),
        metrics: vec![
            MetricRow::computed("Mean settlement", "S", with_unit(6.8, 1, "mm"), Some(with_unit(0.3, 1, "mm")), "+ down, over the window"),
            MetricRow::computed("Differential settlement", "δS", with_unit(4.9, 1, "mm"), Some(with_unit(1.3, 1, "mm")), "max − min of kept points"),
            MetricRow::computed("Vertical velocity", "v_U", with_uncertainty(-2.4, Some(0.4), 1, "mm/yr"), Some(with_unit(0.4, 1, "mm/yr")), "+ up; AR(1)-adjusted standard error"),
            MetricRow::computed("East velocity", "v_E", with_uncertainty(0.3, Some(0.5), 1, "mm/yr"), Some(with_unit(0.5, 1, "mm/yr")), "+ east; two geometries"),
            MetricRow::computed("Tilt", "ω", format!("{} ({})", per_mille(1.857e-4, 3), one_in(1.857e-4)), Some(per_mille(6.1e-5, 3)), "plane fit; down towards azimuth 103°"),
            MetricRow::computed("Angular distortion", "β", format!("{} ({})", per_mille(3.372e-4, 3), one_in(3.372e-4)), Some(per_mille(1.2e-4, 3)), "largest |β|, quadratic profile"),
            MetricRow::computed("Deflection ratio", "Δ/L", format!("{} hogging", per_mille(-8.430e-5, 4)), Some(per_mille(3.0e-5, 4)), "− hogging, + sagging"),
            MetricRow::computed("Horizontal strain", "ε_h", percent(4.33e-6, 4), Some(percent(4.0e-6, 4)), "+ tension; east–west component only"),
            MetricRow::computed("Governing tensile strain", "ε_max", percent(1.234e-4, 4), Some(percent(4.0e-5, 4)), "ε_br, hogging, L/H = 3.0"),
            MetricRow::not_computed("Acceleration", "a", "not significant at 5 % (F-test)"),
        ],
        criteria: CriteriaView {
            name: "Burland (1995) limiting tensile strain".into(),
            source: "Category boundaries 0.05 / 0.075 / 0.15 / 0.3 % (Boscardin & Cording 1989; Burland 1995)".into(),
            parameters: vec![
                Param::new("E/G", "2.6 (masonry)"),
                Param::new("Poisson's ratio ν", "0.30"),
                Param::new("Height H", "10.0 m"),
                Param::new("Compressive ε_h", "not credited (clamped at 0)"),
            ],
        },
        data_quality: DataQualityView {
            points_kept: 10,
            points_rejected: 3,
            rejected_by_reason: vec![
                RejectionCount { reason: "robust z-score above 3".into(), count: 2 },
                RejectionCount { reason: "coherence below 0.70".into(), count: 1 },
            ],
            surroundings_points: 41,
            datasets: vec![
                DatasetView {
                    name: "asc-track-A".into(),
                    geometry: "ascending".into(),
                    look: "east-looking".into(),
                    unit_vector: "(−0.616, −0.131, 0.777)".into(),
                    incidence: "39.0°".into(),
                    epochs: "92".into(),
                    first_epoch: start.to_string(),
                    last_epoch: end.to_string(),
                    points_kept: "6".into(),
                },
                DatasetView {
                    name: "desc-track-B".into(),
                    geometry: "descending".into(),
                    look: "west-looking".into(),
                    unit_vector: "(0.589, −0.125, 0.799)".into(),
                    incidence: "37.0°".into(),
                    epochs: "90".into(),
                    first_epoch: start.to_string(),
                    last_epoch: end.to_string(),
                    points_kept: "4".into(),
                },
            ],
            assumptions: vec![
                "North–south movement assumed zero in the decomposition.".into(),
                "Building height taken from the footprint attributes.".into(),
            ],
        },
        cautions: vec![],
        works: None,
        provenance: provenance(&[Method::BrouwerHanssen2023, Method::Muggeo2003]),
    };
    let ctx = asset_text_context(&model, "the processing reference area", false);
    model.narrative = blocks.paragraphs("asset_narrative.j2", &ctx)?;
    model.cautions = blocks.paragraphs("asset_cautions.j2", &ctx)?;

    let epochs: Vec<NaiveDate> = (0..92).map(|i| start + Days::new(12 * i)).collect();
    let years = |d: NaiveDate| (d - start).num_days() as f64 / 365.25;
    let signal =
        |d: NaiveDate| -2.4 * years(d) + 1.1 * (2.0 * std::f64::consts::PI * years(d)).sin();
    let wobble = |i: usize| ((i * 37 % 11) as f64 - 5.0) * 0.18;
    let aggregate: Vec<DatedValue> = epochs
        .iter()
        .enumerate()
        .map(|(i, &d)| DatedValue {
            date: d,
            value_mm: signal(d) + wobble(i),
        })
        .collect();
    let charts = AssetCharts {
        map: Ok(MapChart {
            title: "Plan of NF-0042 and its measurement points".into(),
            crs_label: "EPSG:32631".into(),
            origin_m: [629_351.9, 5_803_890.8],
            footprint: footprint(),
            buffer: vec![vec![
                [-13.0, -21.4],
                [24.7, 0.4],
                [13.0, 21.4],
                [-24.7, -0.4],
            ]],
            neighbours: vec![
                offset(&footprint(), 32.0, -14.0),
                offset(&footprint(), -30.0, 16.0),
            ],
            kept: [
                (-14.12, -3.54, -1.6),
                (-8.03, -8.10, -1.9),
                (-7.93, -2.27, -2.0),
                (-2.33, -5.96, -2.2),
                (-3.23, 1.60, -2.1),
                (1.87, -1.23, -2.4),
                (1.46, 5.46, -2.5),
                (7.56, 0.90, -2.9),
                (7.66, 6.73, -3.3),
                (13.26, 3.04, -3.8),
            ]
            .iter()
            .map(|&(x, y, v)| MapPoint {
                x_m: x,
                y_m: y,
                velocity_mm_per_yr: v,
            })
            .collect(),
            rejected: vec![
                MapPoint {
                    x_m: 18.0,
                    y_m: 9.0,
                    velocity_mm_per_yr: f64::NAN,
                },
                MapPoint {
                    x_m: -19.0,
                    y_m: -7.5,
                    velocity_mm_per_yr: f64::NAN,
                },
                MapPoint {
                    x_m: 4.0,
                    y_m: -14.0,
                    velocity_mm_per_yr: f64::NAN,
                },
            ],
            velocity_limit_mm_per_yr: None,
        }),
        timeseries: Ok(TimeSeriesChart {
            title: "Vertical displacement of NF-0042".into(),
            spread: aggregate
                .iter()
                .map(|p| DatedBand {
                    date: p.date,
                    lower_mm: p.value_mm - 1.2,
                    upper_mm: p.value_mm + 1.2,
                })
                .collect(),
            spread_label: "interquartile range of kept points".into(),
            trend: Some(LabelledCurve {
                label: format!(
                    "linear trend {}",
                    with_uncertainty(-2.4, Some(0.4), 1, "mm/yr")
                ),
                values: [start, end]
                    .iter()
                    .map(|&d| DatedValue {
                        date: d,
                        value_mm: -2.4 * years(d),
                    })
                    .collect(),
            }),
            model: Some(LabelledCurve {
                label: "trend + annual term (amplitude 1.1 mm)".into(),
                values: epochs
                    .iter()
                    .map(|&d| DatedValue {
                        date: d,
                        value_mm: signal(d),
                    })
                    .collect(),
            }),
            breakpoint: None,
            window: Some((start, end)),
            surroundings: Some(LabelledCurve {
                label: "surroundings (41 points, median)".into(),
                values: epochs
                    .iter()
                    .map(|&d| DatedValue {
                        date: d,
                        value_mm: -0.9 * years(d),
                    })
                    .collect(),
            }),
            aggregate,
        }),
        profiles: vec![
            Ok(sample_profile()),
            Err("the short axis (12 m) has fewer than 5 points with coverage ≥ 0.5·L".into()),
        ],
        interaction: Ok(InteractionChart {
            title: "Damage interaction for NF-0042 (hogging zone)".into(),
            l_over_h: 3.0,
            e_over_g: 2.6,
            poisson: 0.3,
            mode: BendingMode::Hogging,
            criteria_name: "masonry".into(),
            thresholds: [5.0e-4, 7.5e-4, 1.5e-3, 3.0e-3],
            neutral_axis: crate::damage::burland_wroth::NeutralAxisPolicy::BURLAND_WROTH,
            deflection_ratio: Interval {
                value: 8.43e-5,
                lower: 3.5e-5,
                upper: 1.35e-4,
            },
            horizontal_strain: Interval {
                value: 4.33e-6,
                lower: 0.0,
                upper: 1.1e-5,
            },
            note: "ε_h clamped at 0 (compression not credited)".into(),
        }),
        works: None,
    };
    Ok((model, charts))
}

fn sample_profile() -> ProfileChart {
    // insar-methods.md §7.11: S = 6.060 + 0.1578 s + 0.01124 s² (mm), L = 30 m.
    let s = |x: f64| 6.060 + 0.1578 * x + 0.01124 * x * x;
    let chainages = [
        -13.998, -11.004, -8.0026, -4.9978, -1.9973, 1.0045, 3.9944, 6.9972, 9.9988, 13.003,
    ];
    let measured = [5.55, 6.30, 5.27, 6.35, 5.25, 6.36, 6.49, 7.64, 8.80, 10.18];
    let delta = s(0.0) - (s(-15.0) + s(15.0)) / 2.0;
    ProfileChart {
        title: "Settlement along the long axis (azimuth 60°)".into(),
        points: chainages
            .iter()
            .zip(measured)
            .map(|(&x, m)| ProfilePoint {
                chainage_m: x,
                settlement_mm: m,
            })
            .collect(),
        fitted: (0..=60)
            .map(|i| {
                let x = -15.0 + 0.5 * f64::from(i);
                ProfilePoint {
                    chainage_m: x,
                    settlement_mm: s(x),
                }
            })
            .collect(),
        chord: Some([
            ProfilePoint {
                chainage_m: -15.0,
                settlement_mm: s(-15.0),
            },
            ProfilePoint {
                chainage_m: 15.0,
                settlement_mm: s(15.0),
            },
        ]),
        delta: Some(DeltaMark {
            chainage_m: 0.0,
            chord_mm: (s(-15.0) + s(15.0)) / 2.0,
            profile_mm: s(0.0),
            label: format!("Δ = {} mm (hogging)", fixed(delta.abs(), 2)),
        }),
        zones: vec![ZoneSpan {
            start_m: -15.0,
            end_m: 15.0,
            mode: BendingMode::Hogging,
        }],
        extent_m: [-15.0, 15.0],
    }
}

/// A structure with too few points: no category, all charts but the map not computed.
pub fn insufficient_asset() -> Result<(AssetReport, AssetCharts), ReportError> {
    let (mut model, mut charts) = assessed_asset("Mill Cottage (annexe)")?;
    model.structure.id = "NF-0107".into();
    model.verdict = VerdictView::new(VerdictInput {
        status: AssessmentStatus::InsufficientData,
        status_reasons: vec![
            "2 points kept; at least 3 are needed for a mean velocity".into(),
            "no point in the northern half of the footprint".into(),
        ],
        category_index: None,
        category_probability: None,
        category_distribution: vec![],
        higher_probability: None,
        observability_notes: vec![],
        governing_route: None,
        evidence_grade: "insufficient".into(),
        trigger: None,
        change_since_previous: None,
    });
    model.metrics = vec![
        MetricRow::not_computed("Mean settlement", "S", "fewer than 3 kept points"),
        MetricRow::not_computed("Tilt", "ω", "fewer than 4 non-collinear points"),
        MetricRow::not_computed(
            "Deflection ratio",
            "Δ/L",
            "fewer than 5 points along the axis",
        ),
        MetricRow::not_computed(
            "Governing tensile strain",
            "ε_max",
            "no deformation metric available",
        ),
    ];
    model.data_quality.points_kept = 2;
    model.data_quality.points_rejected = 1;
    let blocks = TextBlocks::builtin()?;
    let ctx = asset_text_context(&model, "the processing reference area", true);
    model.narrative = blocks.paragraphs("asset_narrative.j2", &ctx)?;
    if let Ok(map) = &mut charts.map {
        map.kept.truncate(2);
        map.title = "Plan of NF-0107 and its measurement points".into();
    }
    charts.timeseries = Err("fewer than 3 kept points".into());
    charts.profiles = vec![
        Err("fewer than 5 points along the axis".into()),
        Err("fewer than 5 points along the axis".into()),
    ];
    charts.interaction = Err("no deflection ratio".into());
    Ok((model, charts))
}

/// A small invented portfolio of five structures, one of them not assessable.
pub fn portfolio() -> Result<(PortfolioReport, PortfolioCharts), ReportError> {
    let blocks = TextBlocks::builtin()?;
    let inputs = [
        (
            "NF-0042",
            "Kestrel Row 1–7",
            AssessmentStatus::Assessed,
            Some(0),
            Some(1.234e-4),
            Some((-2.4, Some(0.4))),
            "adequate",
        ),
        (
            "NF-0051",
            "Old Granary",
            AssessmentStatus::Assessed,
            Some(2),
            Some(9.1e-4),
            Some((-6.8, Some(0.6))),
            "robust",
        ),
        (
            "NF-0063",
            "Weir House",
            AssessmentStatus::Assessed,
            Some(1),
            Some(6.2e-4),
            Some((-4.1, Some(0.5))),
            "adequate",
        ),
        (
            "NF-0107",
            "Mill Cottage (annexe)",
            AssessmentStatus::InsufficientData,
            None,
            None,
            None,
            "insufficient",
        ),
        (
            "NF-0110",
            "Lock-keeper's Store",
            AssessmentStatus::Assessed,
            Some(0),
            Some(2.0e-5),
            Some((-0.4, Some(0.3))),
            "indicative",
        ),
    ];
    let rows = rank_rows(
        inputs
            .iter()
            .map(|&(id, name, status, cat, strain, vel, grade)| RankInput {
                id: id.into(),
                name: name.into(),
                status,
                category_index: cat,
                governing_strain: strain,
                velocity_mm_per_yr: vel,
                category_probability: cat.map(|_| (0.9, 0.04)),
                evidence_grade: grade.into(),
                trigger_status: if cat.is_none() {
                    "not evaluated".into()
                } else if cat == Some(2) {
                    "alert level exceeded".into()
                } else {
                    "below alert level".into()
                },
            })
            .collect(),
    );
    let start = date(2021, 1, 4);
    let end = date(2024, 1, 1);
    let n_not = rows.iter().filter(|r| r.rank.is_none()).count();
    let ctx = TextContext::new()
        .text("portfolio_name", "Northfield demonstration portfolio")
        .text("window_start", start.to_string())
        .text("window_end", end.to_string())
        .text("n_structures", rows.len().to_string())
        .text("n_assessed", (rows.len() - n_not).to_string())
        .text("n_not_assessable", n_not.to_string())
        .text("reference", "the processing reference area");
    let model = PortfolioReport {
        model_version: MODEL_VERSION,
        meta: meta("Northfield demonstration portfolio"),
        window: WindowView::new(start, end),
        narrative: blocks.paragraphs("portfolio_narrative.j2", &ctx)?,
        totals: vec![
            Param::new("Structures", rows.len().to_string()),
            Param::new("Assessed", (rows.len() - n_not).to_string()),
            Param::new("Not assessable", n_not.to_string()),
        ],
        category_counts: category_counts(&rows),
        grade_counts: grade_counts(&rows),
        has_works: false,
        changes: vec![ChangeRow {
            id: "NF-0051".into(),
            previous: "1 — Very slight".into(),
            current: "2 — Slight".into(),
            note: "velocity -4.9 → -6.8 mm/yr".into(),
        }],
        changes_note: None,
        coverage: vec![
            Param::new("Measurement points read", "1 284"),
            Param::new("Points associated with structures", "212"),
            Param::new("Structures without any point", "0"),
            Param::new("Geometries", "ascending, descending"),
        ],
        map: PortfolioCharts {
            map: Err(String::new()),
        }
        .figure_slot(),
        cautions: blocks.paragraphs("portfolio_cautions.j2", &ctx)?,
        provenance: provenance(&[]),
        ranked: rows,
    };
    let fp = footprint();
    let charts = PortfolioCharts {
        map: Ok(PortfolioMapChart {
            title: "Northfield demonstration portfolio by damage category".into(),
            crs_label: "EPSG:32631".into(),
            origin_m: [629_351.9, 5_803_890.8],
            structures: inputs
                .iter()
                .enumerate()
                .map(|(i, &(id, _, _, cat, _, _, _))| PortfolioMapItem {
                    id: id.into(),
                    footprint: offset(&fp, 60.0 * (i % 3) as f64, -45.0 * (i / 3) as f64),
                    category_index: cat,
                })
                .collect(),
        }),
    };
    Ok((model, charts))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn samples_build() {
        let (m, c) = assessed_asset("Kestrel Row 1–7").unwrap();
        assert_eq!(m.figures.map.caption, "not computed: not supplied");
        assert!(c.map.is_ok());
        let (i, _) = insufficient_asset().unwrap();
        assert!(!i.verdict.assessable);
        let (p, _) = portfolio().unwrap();
        assert_eq!(p.ranked.len(), 5);
    }
}
