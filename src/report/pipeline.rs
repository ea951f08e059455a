//! From the results of a run ([`ReportInput`]: the portfolio, its inputs, results.json and the
//! per-structure detail files) to rendered PDF reports in a folder.
//!
//! Owns: the run-level report context (names, date, people, inputs with SHA-256, parameters,
//! references), the chart data of every structure report taken from the pipeline's own results
//! (plan map, time series, settlement profiles, interaction chart), the portfolio overview model
//! and its map, the batch rendering call, and writing `reports/<stem>.pdf`,
//! `reports/<stem>.json` and `portfolio.pdf` (+ `portfolio.json`) into the folder it is given.
//!
//! Does not own: any computation of movement or damage (everything shown here was computed by
//! the series, metrics and damage stages; this file only reshapes it), the drawing (see
//! [`super::charts`]), the typst world, or the atomic swap of the output folder (the caller
//! passes its staging folder and discards it when this returns an error).
//!
//! The nested detail of a result (`series`, `metrics`, `damage`, the points), read from its
//! detail file (`details/<stem>.json`) in the folder being written, comes back through small
//! private `Deserialize` mirrors of the fields drawn here, rather than through the stage types
//! (which serialise only). A field that is missing or renamed makes that chart "not computed"
//! with the reason, never a silent zero; the integration tests check that the demo charts are
//! present, so a rename is caught there.
//!
//! Choices recorded here:
//! - The map shows the structure's own points (role `structure`); surroundings points are not
//!   drawn, because at 50 m they would dominate the plan and they do not enter the metrics.
//! - Neighbouring footprints are drawn when their bounding box meets the structure's view box
//!   (footprint bounding box grown by the buffer plus 20 m).
//! - The time-series spread band is the interquartile range of the first geometry of the
//!   vertical series (LOS), converted to vertical by that geometry's mean up component and
//!   centred on the vertical series: the series stage keeps spread bands only per geometry, in
//!   LOS. The legend says so.
//! - The surroundings appear on the time series as a straight line at their vertical velocity
//!   from the reference epoch (the series stage keeps their velocity, not their series).
//! - The interaction chart uses the governing zone of the damage assessment: its L/H and mode,
//!   the criteria set's E/G, ν, thresholds and neutral-axis positions (the legend names the
//!   set); Δ/L with a 90 % interval of ±1.645 Monte Carlo SE and ε_h (as used, i.e. after the
//!   compressive-strain policy) with ±1.645 formal SE of the axis strain. Without a limiting-tensile-strain route or a zone the chart is "not computed".
//! - Evidence-grade counts of the overview use the pipeline's grade names (robust, adequate,
//!   indicative, insufficient, then any other label), not the generic order of the model.

use std::borrow::Cow;
use std::collections::BTreeMap;
use std::path::Path;
use std::sync::Mutex;

use anyhow::{Context, Result, anyhow};
use chrono::NaiveDate;
use geo::{BoundingRect, Buffer, Centroid};
use serde::Deserialize;

use super::build::{self, ReportContext};
use super::format::{fixed, one_line, percent, with_uncertainty, with_unit};
use super::model::*;
use super::references::{CORE_METHODS, Method, citations};
use super::render::{ReportJob, render_batch};
use super::text::{TextBlocks, TextContext};
use super::world::ReportShared;
use crate::assess::Window;
use crate::coords::Crs;
use crate::ingest::{Dataset, Structure};
use crate::portfolio::Portfolio;
use crate::results::{DetailRecord, Results, Status, StructureResult};

/// What the reports render: the portfolio, its inputs and the results. The per-structure
/// detail is read from the detail files named by the results (`detail_file`) in the folder the
/// reports are written to.
pub struct ReportInput<'a> {
    /// The portfolio.
    pub portfolio: &'a Portfolio,
    /// Structures in input order (of this shard).
    pub structures: &'a [Structure],
    /// Datasets (names and epochs).
    pub datasets: &'a [Dataset],
    /// The analysis CRS.
    pub analysis_crs: &'a Crs,
    /// The results document.
    pub results: &'a Results,
    /// The assessment window.
    pub window: Window,
    /// SHA-256 (hex) of the input files the run has already hashed, by path; a file not listed
    /// is hashed here.
    pub input_sha256: &'a [(std::path::PathBuf, String)],
}

/// Folder (inside the output folder) of the per-structure reports.
pub const REPORTS_DIR: &str = "reports";

/// Wording of the displacement reference used in the cautions.
const REFERENCE: &str = "the reference area of the radar processing";

/// What [`render_reports`] wrote.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ReportSummary {
    /// Structure reports written.
    pub asset_reports: usize,
    /// Relative paths of every file written (PDFs and model JSON), sorted.
    pub files: Vec<String>,
}

// ---------------------------------------------------------------------------------------------
// Entry point
// ---------------------------------------------------------------------------------------------

/// The portfolio cautions (`portfolio_cautions.j2`, overridden by the portfolio's template
/// folder like the reports'), one paragraph each, for the explorer page.
pub fn portfolio_cautions(portfolio: &Portfolio, window: Window) -> Result<Vec<String>> {
    let blocks = match portfolio.report.template_dir.as_deref() {
        Some(t) => TextBlocks::with_template_dir(t)?,
        None => TextBlocks::builtin()?,
    };
    let ctx = TextContext::new()
        .text("portfolio_name", one_line(&portfolio.name))
        .text("window_start", window.start.to_string())
        .text("window_end", window.end.to_string())
        .text("reference", REFERENCE);
    Ok(blocks.paragraphs("portfolio_cautions.j2", &ctx)?)
}

/// Renders one report per structure and the portfolio overview into `dir`:
/// `reports/<report_file>.pdf` with its model `reports/<report_file>.json`, and
/// `portfolio.pdf` with `portfolio.json`.
///
/// `jobs` = worker threads (None = available cores); `progress` draws a bar on stderr.
/// Any failing document fails the call with the document's id and the typst diagnostics
/// (`asset.typ:LINE:COL`); files already written stay in `dir`, which the caller discards.
pub fn render_reports(
    a: &ReportInput,
    dir: &Path,
    jobs: Option<usize>,
    progress: bool,
) -> Result<ReportSummary> {
    let template_dir = a.portfolio.report.template_dir.as_deref();
    let (shared, blocks) = match template_dir {
        Some(t) => (
            ReportShared::with_template_dir(t)?,
            TextBlocks::with_template_dir(t)?,
        ),
        None => (ReportShared::builtin(), TextBlocks::builtin()?),
    };
    let ctx = report_context(a)?;
    let criteria = crate::criteria::registry_for(a.portfolio)?;
    // The works geometry is not in results.json: rebuilt once from `[works]` (see super::works).
    let works_geometry = match &a.portfolio.works {
        Some(w) => Some(
            crate::works::WorksGeometry::project(w, a.analysis_crs, &a.portfolio.file)
                .context("planned works for the reports")?,
        ),
        None => None,
    };
    let n_threads = jobs
        .or_else(|| std::thread::available_parallelism().ok().map(|n| n.get()))
        .unwrap_or(1)
        .max(1);

    let by_id: BTreeMap<&str, &Structure> = a
        .structures
        .iter()
        .map(|s| (s.raw.id.as_str(), s))
        .collect();
    // (result, structure, file stem) in results order; the portfolio job comes last.
    let mut items: Vec<(&StructureResult, &Structure, String)> = Vec::new();
    for r in &a.results.structures {
        let s = by_id
            .get(r.id.as_str())
            .copied()
            .ok_or_else(|| anyhow!("report for `{}`: structure not among the inputs", r.id))?;
        let stem = r
            .report_file
            .clone()
            .unwrap_or_else(|| crate::output::safe_names::sanitise(&r.id));
        items.push((r, s, stem));
    }
    let stems: Vec<String> = items.iter().map(|(_, _, stem)| stem.clone()).collect();

    let build_error: Mutex<Option<anyhow::Error>> = Mutex::new(None);
    let portfolio_job = portfolio_job(a, &ctx, &blocks)?;
    let asset_jobs = items.iter().map_while(|(r, s, _)| {
        let job = read_detail(dir, r).and_then(|detail| {
            asset_job(
                a,
                r,
                s,
                &ctx,
                &blocks,
                &criteria,
                &detail,
                works_geometry.as_ref(),
            )
        });
        match job {
            Ok(job) => Some(job),
            Err(e) => {
                if let Ok(mut slot) = build_error.lock() {
                    slot.get_or_insert(e);
                }
                None
            }
        }
    });
    let all_jobs = asset_jobs.chain(std::iter::once(portfolio_job));

    let mut files: Vec<String> = Vec::new();
    let mut failures: Vec<(usize, String)> = Vec::new();
    let mut write_error: Option<anyhow::Error> = None;
    let summary = render_batch(&shared, all_jobs, n_threads, progress, |out| {
        let stem = stems.get(out.index);
        let (pdf_rel, json_rel) = match stem {
            Some(stem) => (
                format!("{REPORTS_DIR}/{stem}.pdf"),
                format!("{REPORTS_DIR}/{stem}.json"),
            ),
            None => ("portfolio.pdf".to_string(), "portfolio.json".to_string()),
        };
        match out.result {
            Ok(pdf) => {
                let mut write = || -> Result<()> {
                    crate::output::write_file(dir, &pdf_rel, &pdf.pdf)?;
                    if let Some(json) = &out.data_json {
                        crate::output::write_file(
                            dir,
                            &json_rel,
                            (json.clone() + "\n").as_bytes(),
                        )?;
                        files.push(json_rel.clone());
                    }
                    files.push(pdf_rel.clone());
                    Ok(())
                };
                if let Err(e) = write() {
                    write_error.get_or_insert(e);
                }
            }
            Err(e) => failures.push((out.index, format!("report for `{}` failed: {e}", out.ident))),
        }
    });
    if let Ok(mut slot) = build_error.lock() {
        if let Some(e) = slot.take() {
            return Err(e);
        }
    }
    if let Some(e) = write_error {
        return Err(e);
    }
    if !failures.is_empty() {
        // Every document of a broken template fails the same way: show the first (in input
        // order, so the message does not depend on thread timing) in full.
        failures.sort();
        let n = failures.len();
        let mut msg = failures.swap_remove(0).1;
        if n > 1 {
            msg.push_str(&format!("\n({} more report(s) failed)", n - 1));
        }
        return Err(anyhow!(msg));
    }
    files.sort();
    Ok(ReportSummary {
        asset_reports: summary.rendered.saturating_sub(1),
        files,
    })
}

// ---------------------------------------------------------------------------------------------
// Run context
// ---------------------------------------------------------------------------------------------

/// `path` relative to `base` when it lies inside it, else as given.
fn display_path(path: &Path, base: Option<&Path>) -> String {
    base.and_then(|b| path.strip_prefix(b).ok())
        .map(Path::to_path_buf)
        .unwrap_or_else(|| path.to_path_buf())
        .display()
        .to_string()
}

/// The methods whose references a run prints: the damage core, the point screening and the
/// time-series methods every run uses, the decomposition when two geometries were read.
fn run_methods(a: &ReportInput) -> Vec<Method> {
    let mut m = CORE_METHODS.to_vec();
    m.extend_from_slice(&[
        Method::SonCording2005,
        Method::SkemptonMacDonald1956,
        Method::Bjerrum1963,
        Method::IglewiczHoaglin1993,
        Method::TheilSen,
        Method::Huber1964,
        Method::Muggeo2003,
        Method::ZwiersVonStorch1995,
    ]);
    if a.portfolio.datasets.len() > 1 {
        m.push(Method::BrouwerHanssen2023);
    }
    m
}

/// Run-level report facts: names and people from `[report]`, the report date from the data
/// (`analysis_date`, else the window end — never the clock), inputs with SHA-256 (the run's own
/// digests, see [`ReportInput::input_sha256`]),
/// the assessment parameters and the method references.
pub fn report_context(a: &ReportInput) -> Result<ReportContext> {
    let pf = &a.portfolio;
    let date = a
        .results
        .portfolio
        .analysis_date
        .as_deref()
        .and_then(|d| NaiveDate::parse_from_str(d, "%Y-%m-%d").ok())
        .unwrap_or(a.window.end);
    let base = pf.file.parent();
    let sha256 = |path: &std::path::Path| -> Result<String> {
        match a.input_sha256.iter().find(|(p, _)| p == path) {
            Some((_, hex)) => Ok(hex.clone()),
            None => crate::output::sha256_file(path),
        }
    };
    let mut inputs = vec![InputFile {
        path: display_path(&pf.file, base),
        sha256: sha256(&pf.file)?,
    }];
    inputs.push(InputFile {
        path: display_path(&pf.structures.path, base),
        sha256: sha256(&pf.structures.path)?,
    });
    for d in &pf.datasets {
        inputs.push(InputFile {
            path: display_path(&d.path, base),
            sha256: sha256(&d.path)?,
        });
    }
    let s = &pf.assessment;
    let parameters = vec![
        Param::new("Analysis CRS", a.analysis_crs.name()),
        Param::new(
            "Assessment window",
            format!("{} to {}", a.window.start, a.window.end),
        ),
        Param::new("Buffer around footprints", with_unit(s.buffer_m, 1, "m")),
        Param::new("Surroundings ring", with_unit(s.surroundings_m, 1, "m")),
        Param::new("Minimum coherence", fixed(s.min_coherence, 2)),
        Param::new("Minimum points per structure", s.min_points.to_string()),
        Param::new("Minimum epochs in the window", s.min_epochs.to_string()),
        Param::new("Minimum span", with_unit(s.min_span_years, 1, "yr")),
        Param::new(
            "Velocity outlier rule",
            format!("robust z > {} (MAD)", fixed(s.outlier_z, 1)),
        ),
        Param::new("Monte Carlo draws", s.monte_carlo_draws.to_string()),
        Param::new("Breakpoint bootstrap draws", s.bootstrap_draws.to_string()),
        Param::new("Random seed", s.seed.to_string()),
    ];
    Ok(ReportContext {
        portfolio_name: a.results.portfolio.name.clone(),
        report_date: ReportDate::from(date),
        revision: pf.report.revision.clone().unwrap_or_default(),
        prepared_by: pf.report.prepared_by.clone().unwrap_or_default(),
        checked_by: pf.report.checked_by.clone().unwrap_or_default(),
        window: (a.window.start, a.window.end),
        reference: REFERENCE.to_string(),
        inputs,
        parameters,
        references: citations(&run_methods(a)),
    })
}

// ---------------------------------------------------------------------------------------------
// Mirrors of the nested result detail (only the fields drawn here)
// ---------------------------------------------------------------------------------------------

#[derive(Debug, Clone, Deserialize)]
struct SeriesJson {
    time_origin: NaiveDate,
    #[serde(default)]
    geometries: Vec<GeometryJson>,
    vertical: Option<VerticalJson>,
    relative_to_surroundings: Option<RelativeJson>,
}

#[derive(Debug, Clone, Deserialize)]
struct GeometryJson {
    name: String,
    mean_unit_enu: [f64; 3],
    points_aggregated: usize,
    dates: Vec<NaiveDate>,
    aggregate: AggregateJson,
}

#[derive(Debug, Clone, Deserialize)]
struct AggregateJson {
    median_mm: Vec<Option<f64>>,
    band_lower_mm: Vec<Option<f64>>,
    band_upper_mm: Vec<Option<f64>>,
}

#[derive(Debug, Clone, Deserialize)]
struct VerticalJson {
    method: VerticalMethodJson,
    dates: Vec<NaiveDate>,
    vertical_mm: Vec<Option<f64>>,
    fits: Option<FitsJson>,
}

#[derive(Debug, Clone, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
enum VerticalMethodJson {
    Decomposed { first: String },
    Projected { geometry: String },
}

#[derive(Debug, Clone, Deserialize)]
struct FitsJson {
    linear: LinearJson,
    annual: Option<AnnualJson>,
    quadratic: Option<QuadraticJson>,
    model_comparison: Option<ComparisonJson>,
    breakpoint_date: Option<NaiveDate>,
}

#[derive(Debug, Clone, Deserialize)]
struct LinearJson {
    intercept_mm: f64,
    velocity_mm_per_yr: f64,
    se_velocity_adjusted_mm_per_yr: Option<f64>,
}

#[derive(Debug, Clone, Deserialize)]
struct AnnualJson {
    intercept_mm: f64,
    velocity_mm_per_yr: f64,
    sin_mm: f64,
    cos_mm: f64,
    amplitude_mm: f64,
}

#[derive(Debug, Clone, Deserialize)]
struct QuadraticJson {
    intercept_mm: f64,
    velocity_at_origin_mm_per_yr: f64,
    quadratic_mm_per_yr2: f64,
    acceleration_mm_per_yr2: f64,
}

#[derive(Debug, Clone, Deserialize)]
struct ComparisonJson {
    selected: String,
}

#[derive(Debug, Clone, Deserialize)]
struct RelativeJson {
    surroundings_vertical_velocity_mm_per_yr: f64,
}

#[derive(Debug, Clone, Deserialize)]
struct MetricsJson {
    axes: Option<AxesJson>,
    #[serde(default)]
    axis_metrics: Vec<AxisJson>,
    horizontal_strain: Option<f64>,
    uncertainty: Option<UncertaintyJson>,
}

#[derive(Debug, Clone, Deserialize)]
struct AxesJson {
    principal: AxisGeomJson,
    footprint_area_m2: f64,
}

#[derive(Debug, Clone, Deserialize)]
struct AxisGeomJson {
    length_m: f64,
}

#[derive(Debug, Clone, Deserialize)]
struct AxisJson {
    kind: String,
    azimuth_deg: f64,
    length_m: f64,
    point_count: usize,
    profile: Option<ProfileJson>,
    horizontal_strain: Option<AxisStrainJson>,
}

#[derive(Debug, Clone, Deserialize)]
struct ProfileJson {
    s_min_m: f64,
    s_max_m: f64,
    degree: usize,
    #[serde(default)]
    zones: Vec<ZoneJson>,
    #[serde(default)]
    curve: Vec<CurveJson>,
    #[serde(default)]
    points: Vec<ProfilePointJson>,
}

#[derive(Debug, Clone, Deserialize)]
struct ZoneJson {
    mode: String,
    start_s_m: f64,
    end_s_m: f64,
    relative_deflection_mm: f64,
    max_deflection_at_s_m: f64,
    deflection_ratio: f64,
}

#[derive(Debug, Clone, Deserialize)]
struct CurveJson {
    s_m: f64,
    settlement_mm: f64,
}

#[derive(Debug, Clone, Deserialize)]
struct ProfilePointJson {
    s_m: f64,
    aligned_settlement_mm: f64,
}

#[derive(Debug, Clone, Deserialize)]
struct AxisStrainJson {
    horizontal_strain: f64,
    horizontal_strain_se: f64,
}

#[derive(Debug, Clone, Deserialize)]
struct UncertaintyJson {
    deflection_ratio: Option<SpreadJson>,
}

#[derive(Debug, Clone, Deserialize)]
struct SpreadJson {
    se: f64,
}

#[derive(Debug, Clone, Deserialize)]
struct DamageJson {
    governing: Option<GoverningJson>,
    #[serde(default)]
    zones: Vec<DamageZoneJson>,
}

#[derive(Debug, Clone, Deserialize)]
struct GoverningJson {
    route: String,
    zone_index: Option<usize>,
}

#[derive(Debug, Clone, Deserialize)]
struct DamageZoneJson {
    mode: String,
    l_over_h: f64,
    deflection_ratio: f64,
    horizontal_strain_used: f64,
    horizontal_strain_signed: Option<f64>,
    horizontal_strain_unavailable: bool,
}

/// The detail file of a result, from the folder being written.
fn read_detail(dir: &Path, r: &StructureResult) -> Result<DetailRecord> {
    let rel = r.detail_file.as_deref().ok_or_else(|| {
        anyhow!(
            "report for `{}`: the result names no detail file (results written by an older Plinth; re-run `plinth assess`)",
            r.id
        )
    })?;
    DetailRecord::read(dir, rel).with_context(|| format!("report for `{}`", r.id))
}

/// Reads a nested detail value into its mirror; `Err(reason)` when absent or not as expected.
fn mirror<T: for<'de> Deserialize<'de>>(v: &serde_json::Value, what: &str) -> Result<T, String> {
    if v.is_null() {
        return Err(format!("no {what} detail in the results"));
    }
    serde_json::from_value(v.clone()).map_err(|e| format!("{what} detail not readable ({e})"))
}

// ---------------------------------------------------------------------------------------------
// Plan map
// ---------------------------------------------------------------------------------------------

fn rings_of(
    mp: &geo::MultiPolygon<f64>,
    to_local: &dyn Fn(f64, f64) -> (f64, f64),
) -> Vec<Vec<[f64; 2]>> {
    mp.0.iter()
        .map(|p| {
            p.exterior()
                .coords()
                .map(|c| {
                    let (x, y) = to_local(c.x, c.y);
                    [x, y]
                })
                .collect()
        })
        .collect()
}

/// Plan-map data of one structure (local metres of the structure's frame).
fn map_chart(a: &ReportInput, s: &Structure, detail: &DetailRecord) -> Result<MapChart, String> {
    let to_local = |x: f64, y: f64| s.frame.to_local(x, y);
    let mut footprints = rings_of(&s.footprint, &to_local);
    if footprints.is_empty() {
        return Err("footprint has no polygon".into());
    }
    // The chart draws one footprint ring; further polygons of a multi-polygon are drawn as
    // buffer-style outlines would be confusing, so they join the neighbours (grey).
    let footprint = footprints.remove(0);
    let buffer_m = a.portfolio.assessment.buffer_m;
    let buffer = if buffer_m > 0.0 {
        rings_of(&s.footprint.buffer(buffer_m), &to_local)
    } else {
        vec![]
    };
    let mut kept = Vec::new();
    let mut rejected = Vec::new();
    for row in detail.points.iter().filter(|p| p.role == "structure") {
        let (x, y) = to_local(row.x, row.y);
        let v = row.vertical_velocity_mm_per_yr.unwrap_or(f64::NAN);
        let mp = MapPoint {
            x_m: x,
            y_m: y,
            velocity_mm_per_yr: v,
        };
        if row.status == "kept" && v.is_finite() {
            kept.push(mp);
        } else {
            rejected.push(mp);
        }
    }
    // View box: footprint bounding box grown by the buffer plus 20 m (analysis CRS).
    let mut neighbours: Vec<Vec<[f64; 2]>> = footprints;
    if let Some(bb) = s.footprint.bounding_rect() {
        let grow = buffer_m + 20.0;
        let (x0, y0, x1, y1) = (
            bb.min().x - grow,
            bb.min().y - grow,
            bb.max().x + grow,
            bb.max().y + grow,
        );
        for other in a.structures {
            if other.raw.id == s.raw.id {
                continue;
            }
            let Some(ob) = other.footprint.bounding_rect() else {
                continue;
            };
            if ob.max().x < x0 || ob.min().x > x1 || ob.max().y < y0 || ob.min().y > y1 {
                continue;
            }
            neighbours.extend(rings_of(&other.footprint, &to_local));
        }
    }
    Ok(MapChart {
        title: format!("Plan of {} and its measurement points", one_line(&s.raw.id)),
        crs_label: a.analysis_crs.name(),
        origin_m: [s.frame.origin_x, s.frame.origin_y],
        footprint,
        buffer,
        neighbours,
        kept,
        rejected,
        velocity_limit_mm_per_yr: None,
    })
}

// ---------------------------------------------------------------------------------------------
// Time series
// ---------------------------------------------------------------------------------------------

/// Decimal years of 365.25 days from `origin` (the series stage's time axis).
fn years(d: NaiveDate, origin: NaiveDate) -> f64 {
    (d - origin).num_days() as f64 / 365.25
}

/// Time-series chart data from the series detail of one structure.
fn timeseries_chart(id: &str, series: &serde_json::Value) -> Result<TimeSeriesChart, String> {
    let sj: SeriesJson = mirror(series, "time series")?;
    let v = sj
        .vertical
        .as_ref()
        .ok_or_else(|| "no vertical series (no usable geometry)".to_string())?;
    let aggregate: Vec<DatedValue> = v
        .dates
        .iter()
        .zip(&v.vertical_mm)
        .filter_map(|(d, x)| {
            x.filter(|x| x.is_finite())
                .map(|value_mm| DatedValue { date: *d, value_mm })
        })
        .collect();
    if aggregate.is_empty() {
        return Err("the vertical series has no value".into());
    }
    // Spread: IQR of the first geometry, LOS → vertical by its mean up component.
    let first = match &v.method {
        VerticalMethodJson::Decomposed { first } => first,
        VerticalMethodJson::Projected { geometry } => geometry,
    };
    let mut spread = Vec::new();
    let mut spread_label = String::new();
    if let Some(g) = sj.geometries.iter().find(|g| &g.name == first) {
        let up = g.mean_unit_enu[2];
        if up.abs() > 0.1 {
            let by_date: BTreeMap<NaiveDate, f64> =
                aggregate.iter().map(|p| (p.date, p.value_mm)).collect();
            for (i, d) in g.dates.iter().enumerate() {
                let (Some(centre), Some(Some(med)), Some(Some(lo)), Some(Some(hi))) = (
                    by_date.get(d),
                    g.aggregate.median_mm.get(i),
                    g.aggregate.band_lower_mm.get(i),
                    g.aggregate.band_upper_mm.get(i),
                ) else {
                    continue;
                };
                spread.push(DatedBand {
                    date: *d,
                    lower_mm: centre + (lo - med) / up,
                    upper_mm: centre + (hi - med) / up,
                });
            }
            spread_label = format!(
                "interquartile range of the {} {} points (line of sight, scaled to vertical)",
                g.points_aggregated,
                one_line(&g.name)
            );
        }
    }
    let dates_span = |n: usize| -> Vec<NaiveDate> {
        let (Some(a), Some(b)) = (aggregate.first(), aggregate.last()) else {
            return vec![];
        };
        let days = (b.date - a.date).num_days().max(1);
        (0..=n)
            .map(|i| a.date + chrono::Duration::days(days * i as i64 / n as i64))
            .collect()
    };
    let origin = sj.time_origin;
    let mut trend = None;
    let mut model = None;
    let mut breakpoint = None;
    if let Some(f) = &v.fits {
        let l = &f.linear;
        trend = Some(LabelledCurve {
            label: format!(
                "linear trend {}",
                with_uncertainty(
                    l.velocity_mm_per_yr,
                    l.se_velocity_adjusted_mm_per_yr,
                    1,
                    "mm/yr"
                )
            ),
            values: dates_span(1)
                .into_iter()
                .map(|d| DatedValue {
                    date: d,
                    value_mm: l.intercept_mm + l.velocity_mm_per_yr * years(d, origin),
                })
                .collect(),
        });
        let selected = f
            .model_comparison
            .as_ref()
            .map(|m| m.selected.as_str())
            .unwrap_or("linear");
        model = match (selected, &f.annual, &f.quadratic) {
            ("linear+annual", Some(an), _) => Some(LabelledCurve {
                label: format!(
                    "trend + annual term (amplitude {})",
                    with_unit(an.amplitude_mm, 1, "mm")
                ),
                values: dates_span(120)
                    .into_iter()
                    .map(|d| {
                        let t = years(d, origin);
                        let w = 2.0 * std::f64::consts::PI * t;
                        DatedValue {
                            date: d,
                            value_mm: an.intercept_mm
                                + an.velocity_mm_per_yr * t
                                + an.sin_mm * w.sin()
                                + an.cos_mm * w.cos(),
                        }
                    })
                    .collect(),
            }),
            (sel, _, Some(q)) if sel.starts_with("quadratic") => Some(LabelledCurve {
                label: format!(
                    "quadratic trend (acceleration {}){}",
                    with_unit(q.acceleration_mm_per_yr2, 2, "mm/yr²"),
                    if sel.contains("annual") {
                        "; annual term also significant, not drawn"
                    } else {
                        ""
                    }
                ),
                values: dates_span(60)
                    .into_iter()
                    .map(|d| {
                        let t = years(d, origin);
                        DatedValue {
                            date: d,
                            value_mm: q.intercept_mm
                                + q.velocity_at_origin_mm_per_yr * t
                                + q.quadratic_mm_per_yr2 * t * t,
                        }
                    })
                    .collect(),
            }),
            _ => None,
        };
        breakpoint = f.breakpoint_date;
    }
    let surroundings = sj.relative_to_surroundings.as_ref().and_then(|rel| {
        let v_s = rel.surroundings_vertical_velocity_mm_per_yr;
        let t0 = aggregate.first()?.date;
        v_s.is_finite().then(|| LabelledCurve {
            label: format!("surroundings trend {}", with_unit(v_s, 1, "mm/yr")),
            values: dates_span(1)
                .into_iter()
                .map(|d| DatedValue {
                    date: d,
                    value_mm: v_s * years(d, t0),
                })
                .collect(),
        })
    });
    let (Some(w0), Some(w1)) = (series.get("window_start"), series.get("window_end")) else {
        return Err("time series detail has no window".into());
    };
    let window = serde_json::from_value::<NaiveDate>(w0.clone())
        .ok()
        .zip(serde_json::from_value::<NaiveDate>(w1.clone()).ok());
    Ok(TimeSeriesChart {
        title: format!("Vertical displacement of {}", one_line(id)),
        aggregate,
        spread,
        spread_label,
        trend,
        model,
        breakpoint,
        window,
        surroundings,
    })
}

// ---------------------------------------------------------------------------------------------
// Profiles
// ---------------------------------------------------------------------------------------------

fn mode_of(text: &str) -> Option<BendingMode> {
    match text {
        "hogging" => Some(BendingMode::Hogging),
        "sagging" => Some(BendingMode::Sagging),
        _ => None,
    }
}

/// Linear interpolation of the fitted curve at `s` (clamped to its ends).
fn curve_at(curve: &[CurveJson], s: f64) -> Option<f64> {
    let first = curve.first()?;
    if s <= first.s_m {
        return Some(first.settlement_mm);
    }
    for w in curve.windows(2) {
        let (a, b) = (&w[0], &w[1]);
        if s <= b.s_m {
            let span = b.s_m - a.s_m;
            let t = if span > 0.0 { (s - a.s_m) / span } else { 0.0 };
            return Some(a.settlement_mm + t * (b.settlement_mm - a.settlement_mm));
        }
    }
    curve.last().map(|c| c.settlement_mm)
}

/// Profile chart of one axis; the chord and Δ belong to the zone with the largest |Δ/L|.
fn profile_chart(axis: &AxisJson) -> Result<ProfileChart, String> {
    let label = if axis.kind == "principal" {
        "long (principal) axis"
    } else {
        "short (secondary) axis"
    };
    let p = axis.profile.as_ref().ok_or_else(|| {
        format!(
            "no profile fitted along the {label} ({} points over {})",
            axis.point_count,
            with_unit(axis.length_m, 1, "m")
        )
    })?;
    let zones: Vec<ZoneSpan> = p
        .zones
        .iter()
        .filter_map(|z| {
            Some(ZoneSpan {
                start_m: z.start_s_m,
                end_m: z.end_s_m,
                mode: mode_of(&z.mode)?,
            })
        })
        .collect();
    let governing = p
        .zones
        .iter()
        .filter(|z| z.deflection_ratio.is_finite())
        .max_by(|a, b| {
            a.deflection_ratio
                .abs()
                .total_cmp(&b.deflection_ratio.abs())
        });
    let (chord, delta) = match governing.and_then(|z| {
        Some((
            z,
            curve_at(&p.curve, z.start_s_m)?,
            curve_at(&p.curve, z.end_s_m)?,
            curve_at(&p.curve, z.max_deflection_at_s_m)?,
        ))
    }) {
        Some((z, s0, s1, sm)) => {
            let span = z.end_s_m - z.start_s_m;
            let t = if span > 0.0 {
                (z.max_deflection_at_s_m - z.start_s_m) / span
            } else {
                0.5
            };
            let chord_here = s0 + t * (s1 - s0);
            (
                Some([
                    ProfilePoint {
                        chainage_m: z.start_s_m,
                        settlement_mm: s0,
                    },
                    ProfilePoint {
                        chainage_m: z.end_s_m,
                        settlement_mm: s1,
                    },
                ]),
                Some(DeltaMark {
                    chainage_m: z.max_deflection_at_s_m,
                    chord_mm: chord_here,
                    profile_mm: sm,
                    label: format!(
                        "Δ = {} ({}, Δ/L = {})",
                        with_unit(z.relative_deflection_mm.abs(), 2, "mm"),
                        z.mode,
                        super::format::per_mille(z.deflection_ratio, 3)
                    ),
                }),
            )
        }
        None => (None, None),
    };
    Ok(ProfileChart {
        title: format!(
            "Settlement along the {label} (azimuth {}°, {} fit)",
            fixed(axis.azimuth_deg.rem_euclid(180.0), 0),
            if p.degree == 3 { "cubic" } else { "quadratic" }
        ),
        points: p
            .points
            .iter()
            .map(|q| ProfilePoint {
                chainage_m: q.s_m,
                settlement_mm: q.aligned_settlement_mm,
            })
            .collect(),
        fitted: p
            .curve
            .iter()
            .map(|c| ProfilePoint {
                chainage_m: c.s_m,
                settlement_mm: c.settlement_mm,
            })
            .collect(),
        chord,
        delta,
        zones,
        extent_m: [p.s_min_m, p.s_max_m],
    })
}

/// Profiles of the principal axis first, then the secondary; a missing metrics detail gives
/// two "not computed" profiles.
fn profile_charts(metrics: &Result<MetricsJson, String>) -> Vec<Result<ProfileChart, String>> {
    match metrics {
        Ok(m) => {
            let mut axes: Vec<&AxisJson> = m.axis_metrics.iter().collect();
            axes.sort_by_key(|a| a.kind != "principal");
            let mut out: Vec<Result<ProfileChart, String>> =
                axes.iter().take(2).map(|a| profile_chart(a)).collect();
            while out.len() < 2 {
                out.push(Err(
                    "no principal axes (footprint or points insufficient)".into()
                ));
            }
            out
        }
        Err(reason) => vec![Err(reason.clone()), Err(reason.clone())],
    }
}

// ---------------------------------------------------------------------------------------------
// Interaction chart
// ---------------------------------------------------------------------------------------------

/// z of a two-sided 90 % normal interval.
const Z90: f64 = 1.645;

fn interaction_chart(
    r: &StructureResult,
    damage: &serde_json::Value,
    metrics: &Result<MetricsJson, String>,
    criteria: &crate::criteria::CriteriaRegistry,
) -> Result<InteractionChart, String> {
    let dmg: DamageJson = mirror(damage, "damage")?;
    let gov = dmg
        .governing
        .as_ref()
        .ok_or_else(|| "no governing damage zone".to_string())?;
    if gov.route != "limiting-tensile-strain" {
        return Err(format!(
            "criteria route `{}` does not use the Δ/L–ε_h chart",
            gov.route
        ));
    }
    let zone = gov
        .zone_index
        .and_then(|i| dmg.zones.get(i))
        .ok_or_else(|| "governing zone not recorded".to_string())?;
    let mode =
        mode_of(&zone.mode).ok_or_else(|| format!("unknown bending mode `{}`", zone.mode))?;
    let set_name = r
        .criteria_set
        .as_deref()
        .ok_or_else(|| "no criteria set recorded".to_string())?;
    let set = criteria.get(set_name).map_err(|e| e.to_string())?;
    let m = metrics.as_ref().map_err(Clone::clone)?;
    let dr = zone.deflection_ratio.abs();
    let dr_se = m
        .uncertainty
        .as_ref()
        .and_then(|u| u.deflection_ratio.as_ref())
        .map(|s| s.se)
        .filter(|s| s.is_finite())
        .unwrap_or(0.0);
    let eh = zone.horizontal_strain_used;
    let eh_se = m
        .horizontal_strain
        .and_then(|h| {
            m.axis_metrics
                .iter()
                .filter_map(|a| a.horizontal_strain.as_ref())
                .find(|s| (s.horizontal_strain - h).abs() <= 1e-15)
        })
        .map(|s| s.horizontal_strain_se)
        .filter(|s| s.is_finite())
        .unwrap_or(0.0);
    let clamped = zone
        .horizontal_strain_signed
        .is_some_and(|s| s < 0.0 && eh >= 0.0 && (s - eh).abs() > 0.0);
    let note = if zone.horizontal_strain_unavailable {
        "ε_h not measured: taken as 0 (see assumptions). Error bars: 90 % intervals.".to_string()
    } else if clamped {
        format!(
            "ε_h measured {} (compression), not credited: clamped at 0. Error bars: 90 % intervals.",
            percent(zone.horizontal_strain_signed.unwrap_or(0.0), 4)
        )
    } else {
        "Error bars: 90 % intervals (Δ/L Monte Carlo, ε_h formal).".to_string()
    };
    let lower_eh = if clamped || zone.horizontal_strain_unavailable {
        eh
    } else {
        eh - Z90 * eh_se
    };
    Ok(InteractionChart {
        title: format!(
            "Damage interaction for {} ({} zone, L/H = {})",
            one_line(&r.id),
            mode.label(),
            fixed(zone.l_over_h, 2)
        ),
        l_over_h: zone.l_over_h,
        e_over_g: set.e_over_g,
        poisson: set.poisson,
        mode,
        criteria_name: set.name.clone(),
        thresholds: set.thresholds,
        neutral_axis: set.neutral_axis,
        deflection_ratio: Interval {
            value: dr,
            lower: (dr - Z90 * dr_se).max(0.0),
            upper: dr + Z90 * dr_se,
        },
        horizontal_strain: Interval {
            value: eh,
            lower: lower_eh,
            upper: if zone.horizontal_strain_unavailable {
                eh
            } else {
                eh + Z90 * eh_se
            },
        },
        note,
    })
}

// ---------------------------------------------------------------------------------------------
// Asset job
// ---------------------------------------------------------------------------------------------

/// The record as the report adapter should read it: the run's "no level exceeded" status
/// (`triggers::NONE_EXCEEDED`) becomes `None`, which the adapter words as "no trigger level
/// exceeded" (it would otherwise print the status code followed by "exceeded").
fn for_display(r: &StructureResult) -> Cow<'_, StructureResult> {
    if r.trigger_status.as_deref() == Some(crate::triggers::NONE_EXCEEDED) {
        let mut c = r.clone();
        c.trigger_status = None;
        Cow::Owned(c)
    } else {
        Cow::Borrowed(r)
    }
}

/// The structure report model and its chart data.
#[allow(clippy::too_many_arguments)]
fn asset_job(
    a: &ReportInput,
    r: &StructureResult,
    s: &Structure,
    ctx: &ReportContext,
    blocks: &TextBlocks,
    criteria: &crate::criteria::CriteriaRegistry,
    detail: &DetailRecord,
    works_geometry: Option<&crate::works::WorksGeometry>,
) -> Result<ReportJob> {
    let mut model = build::asset_report(&for_display(r), ctx, blocks)
        .with_context(|| format!("report model for `{}`", r.id))?;
    let metrics: Result<MetricsJson, String> = match r.status {
        Status::Assessed => mirror(&detail.metrics, "metrics"),
        Status::InsufficientData => Err("structure not assessable (see status reasons)".into()),
    };
    enrich_model(a, r, &mut model, &metrics, criteria, detail);
    let timeseries = match r.status {
        Status::Assessed => timeseries_chart(&r.id, &detail.series),
        // The vertical series of a structure that failed the minimums is not shown: its
        // trend would read as a finding.
        Status::InsufficientData => Err("structure not assessable (see status reasons)".into()),
    };
    let mut charts = AssetCharts {
        map: map_chart(a, s, detail),
        timeseries,
        profiles: profile_charts(&metrics),
        interaction: match r.status {
            Status::Assessed => interaction_chart(r, &detail.damage, &metrics, criteria),
            Status::InsufficientData => Err("structure not assessable".into()),
        },
        works: None,
    };
    if let Some((view, works_charts)) =
        super::works::works_section(a, r, s, &detail.works, works_geometry)
    {
        model.works = Some(view);
        charts.works = Some(works_charts);
    }
    Ok(ReportJob::asset(model, charts))
}

/// Fills the model fields the results record alone cannot: footprint length and area, the
/// data sets per geometry, and the criteria parameters.
fn enrich_model(
    a: &ReportInput,
    r: &StructureResult,
    model: &mut AssetReport,
    metrics: &Result<MetricsJson, String>,
    criteria: &crate::criteria::CriteriaRegistry,
    detail: &DetailRecord,
) {
    if let Ok(Some(ax)) = metrics.as_ref().map(|m| m.axes.as_ref()) {
        model.structure.length = with_unit(ax.principal.length_m, 1, "m");
        model.structure.footprint_area = with_unit(ax.footprint_area_m2, 0, "m²");
    }
    let rows = detail.points.iter().filter(|p| p.role == "structure");
    model.data_quality.datasets = a
        .portfolio
        .datasets
        .iter()
        .zip(a.datasets)
        .map(|(spec, d)| {
            let in_window: Vec<&NaiveDate> = d
                .epochs
                .iter()
                .filter(|e| **e >= a.window.start && **e <= a.window.end)
                .collect();
            let kept = rows
                .clone()
                .filter(|row| row.dataset == d.name && row.status == "kept")
                .count();
            let g = a
                .results
                .portfolio
                .datasets
                .iter()
                .find(|g| g.name == spec.name);
            DatasetView {
                name: one_line(&spec.name),
                geometry: match spec.pass {
                    crate::portfolio::Pass::Ascending => "ascending".into(),
                    crate::portfolio::Pass::Descending => "descending".into(),
                },
                look: g
                    .and_then(|g| g.look_direction.clone())
                    .unwrap_or_else(|| "not determined".into()),
                unit_vector: g
                    .and_then(|g| g.unit_enu)
                    .map(|u| {
                        format!(
                            "({}, {}, {})",
                            fixed(u[0], 3),
                            fixed(u[1], 3),
                            fixed(u[2], 3)
                        )
                    })
                    .unwrap_or_else(|| "not determined".into()),
                incidence: spec
                    .incidence_deg
                    .map(|i| format!("{}°", fixed(i, 1)))
                    .unwrap_or_else(|| "per point".into()),
                epochs: in_window.len().to_string(),
                first_epoch: in_window
                    .first()
                    .map(|e| e.to_string())
                    .unwrap_or_else(|| "none".into()),
                last_epoch: in_window
                    .last()
                    .map(|e| e.to_string())
                    .unwrap_or_else(|| "none".into()),
                points_kept: kept.to_string(),
            }
        })
        .collect();
    if let Some(set) = r.criteria_set.as_deref().and_then(|n| criteria.get(n).ok()) {
        model.criteria.source = one_line(&set.source);
        model.criteria.parameters = vec![
            Param::new("Route", set.route.label()),
            Param::new("E/G", fixed(set.e_over_g, 2)),
            Param::new("Poisson's ratio ν", fixed(set.poisson, 2)),
            Param::new("Height H", with_unit(r.height_m, 1, "m")),
            Param::new(
                "Category boundaries ε_lim",
                set.thresholds
                    .iter()
                    .map(|t| percent(*t, 3))
                    .collect::<Vec<_>>()
                    .join(" / "),
            ),
            Param::new("Structure type", one_line(&r.structure_type)),
        ];
    }
}

// ---------------------------------------------------------------------------------------------
// Portfolio job
// ---------------------------------------------------------------------------------------------

/// Grade counts in the pipeline's order (robust, adequate, indicative, insufficient, others).
fn pipeline_grade_counts(rows: &[RankRow]) -> Vec<CountRow> {
    super::model::grade_counts(rows)
}

fn category_text(c: Option<u8>, status: Option<Status>) -> String {
    match (status, c.and_then(CategoryView::from_index)) {
        (Some(Status::InsufficientData), _) => INSUFFICIENT_LABEL.to_string(),
        (_, Some(v)) => format!("{} — {}", v.code, v.name),
        (None, None) => "not in the previous run".to_string(),
        (Some(Status::Assessed), None) => NOT_COMPUTED.to_string(),
    }
}

/// The overview model and its map.
fn portfolio_job(a: &ReportInput, ctx: &ReportContext, blocks: &TextBlocks) -> Result<ReportJob> {
    let res = &a.results;
    let mut rows = rank_rows(
        res.structures
            .iter()
            .map(|r| build::rank_input(&for_display(r)))
            .collect(),
    );
    let has_works = a.portfolio.works.is_some();
    if has_works {
        // Ranking sorts the rows; match them back by their (one-line) id, unique in the inputs.
        let by_id: BTreeMap<String, &StructureResult> = res
            .structures
            .iter()
            .map(|r| (one_line(&r.id), r))
            .collect();
        for row in &mut rows {
            if let Some(r) = by_id.get(&row.id) {
                let (cat, ratio) = super::works::overview_columns(r);
                row.predicted_category = Some(cat);
                row.observed_to_predicted = Some(ratio);
            }
        }
    }
    let n_not = rows.iter().filter(|r| r.rank.is_none()).count();
    let text_ctx = TextContext::new()
        .text("portfolio_name", one_line(&res.portfolio.name))
        .text("window_start", a.window.start.to_string())
        .text("window_end", a.window.end.to_string())
        .text("n_structures", rows.len().to_string())
        .text("n_assessed", (rows.len() - n_not).to_string())
        .text("n_not_assessable", n_not.to_string())
        .text("reference", REFERENCE);
    let mut changes = Vec::new();
    for r in &res.structures {
        let Some(c) = &r.change else { continue };
        let noteworthy = c.kind == "new"
            || c.category_changed
            || c.velocity_change_significant == Some(true)
            || !c.new_exceedances.is_empty();
        if !noteworthy {
            continue;
        }
        let mut note = Vec::new();
        if let (Some(p), Some(n)) = (
            c.previous_vertical_velocity_mm_per_yr,
            r.vertical_velocity_mm_per_yr,
        ) {
            note.push(format!(
                "velocity {} → {}{}",
                fixed(p, 1),
                with_unit(n, 1, "mm/yr"),
                if c.velocity_change_significant == Some(true) {
                    " (significant)"
                } else {
                    ""
                }
            ));
        }
        for e in &c.new_exceedances {
            note.push(format!("newly exceeded: {}", one_line(e)));
        }
        changes.push(ChangeRow {
            id: one_line(&r.id),
            previous: if c.kind == "new" {
                "new since the previous run".into()
            } else {
                category_text(c.previous_damage_category, c.previous_status)
            },
            current: category_text(r.damage_category, Some(r.status)),
            note: if note.is_empty() {
                "—".into()
            } else {
                note.join("; ")
            },
        });
    }
    let changes_note = match &res.portfolio.previous {
        None => Some("no previous run given (assess --previous)".to_string()),
        Some(_) if changes.is_empty() => {
            Some("no change of category, trigger level or significant velocity".to_string())
        }
        Some(_) => None,
    };
    let cov = &res.portfolio.coverage;
    let mut coverage: Vec<Param> = cov
        .points_read
        .iter()
        .map(|(name, n)| Param::new(format!("Points read, {}", one_line(name)), n.to_string()))
        .collect();
    coverage.push(Param::new(
        "Points kept on structures",
        cov.points_kept.to_string(),
    ));
    coverage.push(Param::new(
        "Points rejected on structures",
        cov.points_rejected.values().sum::<usize>().to_string(),
    ));
    coverage.push(Param::new(
        "Points only in surroundings",
        cov.points_surroundings_only.to_string(),
    ));
    coverage.push(Param::new(
        "Points beyond every structure's reach",
        cov.points_out_of_reach.to_string(),
    ));
    coverage.push(Param::new(
        "Points equidistant between structures (ties)",
        cov.ties.to_string(),
    ));
    coverage.push(Param::new(
        "Structures without any kept point",
        res.structures
            .iter()
            .filter(|s| s.n_points == 0)
            .count()
            .to_string(),
    ));
    let map = PortfolioCharts {
        map: portfolio_map(a),
    };
    let slot = map.figure_slot();
    let model = PortfolioReport {
        model_version: MODEL_VERSION,
        meta: ReportMeta::new(
            &ctx.portfolio_name,
            ctx.report_date,
            &ctx.revision,
            &ctx.prepared_by,
            &ctx.checked_by,
        ),
        window: WindowView::new(a.window.start, a.window.end),
        narrative: blocks.paragraphs("portfolio_narrative.j2", &text_ctx)?,
        totals: vec![
            Param::new("Structures", rows.len().to_string()),
            Param::new("Assessed", (rows.len() - n_not).to_string()),
            Param::new("Not assessable", n_not.to_string()),
        ],
        category_counts: category_counts(&rows),
        grade_counts: pipeline_grade_counts(&rows),
        has_works,
        changes,
        changes_note,
        coverage,
        map: slot,
        cautions: blocks.paragraphs("portfolio_cautions.j2", &text_ctx)?,
        provenance: Provenance {
            tool: tool_label(),
            inputs: ctx.inputs.clone(),
            parameters: ctx.parameters.clone(),
            references: ctx.references.clone(),
        },
        ranked: rows,
    };
    Ok(ReportJob::portfolio(model, map))
}

/// All footprints in a common plain frame at their mean centroid (analysis CRS axes).
fn portfolio_map(a: &ReportInput) -> Result<PortfolioMapChart, String> {
    let centroids: Vec<(f64, f64)> = a
        .structures
        .iter()
        .filter_map(|s| s.footprint.centroid().map(|c| (c.x(), c.y())))
        .collect();
    if centroids.is_empty() {
        return Err("no footprint".into());
    }
    let n = centroids.len() as f64;
    let ox = centroids.iter().map(|c| c.0).sum::<f64>() / n;
    let oy = centroids.iter().map(|c| c.1).sum::<f64>() / n;
    let by_id: BTreeMap<&str, &StructureResult> = a
        .results
        .structures
        .iter()
        .map(|r| (r.id.as_str(), r))
        .collect();
    let mut structures = Vec::new();
    for s in a.structures {
        let category_index = by_id.get(s.raw.id.as_str()).and_then(|r| match r.status {
            Status::Assessed => r.damage_category,
            Status::InsufficientData => None,
        });
        for ring in rings_of(&s.footprint, &|x, y| (x - ox, y - oy)) {
            structures.push(PortfolioMapItem {
                id: one_line(&s.raw.id),
                footprint: ring,
                category_index,
            });
        }
    }
    Ok(PortfolioMapChart {
        title: format!("{} by damage category", one_line(&a.results.portfolio.name)),
        crs_label: a.analysis_crs.name(),
        origin_m: [ox, oy],
        structures,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    /// A sagging parabola S(s) = 20 − 0.1·s² mm over s ∈ [−10, 10] m, sampled every 1 m.
    /// Hand-derived: S(0) = 20 mm, S(±10) = 10 mm, so Δ = 10 mm at s = 0 and Δ/L = 10 mm / 20 m
    /// = 5e-4.
    fn sagging_axis() -> AxisJson {
        let curve: Vec<serde_json::Value> = (-10..=10)
            .map(|i| {
                let s = f64::from(i);
                json!({"s_m": s, "settlement_mm": 20.0 - 0.1 * s * s, "chord_mm": 10.0})
            })
            .collect();
        serde_json::from_value(json!({
            "kind": "principal", "azimuth_deg": 240.0, "length_m": 20.0, "point_count": 3,
            "profile": {
                "s_min_m": -10.0, "s_max_m": 10.0, "degree": 2,
                "zones": [{"mode": "sagging", "start_s_m": -10.0, "end_s_m": 10.0,
                           "relative_deflection_mm": 10.0, "max_deflection_at_s_m": 0.0,
                           "deflection_ratio": 5e-4}],
                "curve": curve,
                "points": [{"s_m": -9.0, "aligned_settlement_mm": 11.5},
                           {"s_m": 0.5, "aligned_settlement_mm": 19.0},
                           {"s_m": 9.0, "aligned_settlement_mm": 12.0}]
            },
            "horizontal_strain": null
        }))
        .expect("axis json")
    }

    #[test]
    fn curve_interpolates_linearly_and_clamps() {
        let axis = sagging_axis();
        let curve = &axis.profile.as_ref().expect("profile").curve;
        // Between s = 2 (19.6 mm) and s = 3 (19.1 mm): halfway is 19.35 mm (hand-checked).
        assert!((curve_at(curve, 2.5).expect("value") - 19.35).abs() < 1e-12);
        assert_eq!(curve_at(curve, -50.0), Some(10.0));
        assert_eq!(curve_at(curve, 50.0), Some(10.0));
        assert_eq!(curve_at(&[], 0.0), None);
    }

    #[test]
    fn profile_chart_marks_delta_of_the_governing_zone() {
        let chart = profile_chart(&sagging_axis()).expect("chart");
        let delta = chart.delta.expect("delta");
        // Hand-derived above: chord at s = 0 is 10 mm, the profile 20 mm, Δ = 10 mm.
        assert!((delta.chord_mm - 10.0).abs() < 1e-12);
        assert!((delta.profile_mm - 20.0).abs() < 1e-12);
        assert!(delta.label.contains("10.00 mm") && delta.label.contains("sagging"));
        let chord = chart.chord.expect("chord");
        assert_eq!((chord[0].chainage_m, chord[1].chainage_m), (-10.0, 10.0));
        assert_eq!(chart.zones[0].mode, BendingMode::Sagging);
        // Points are drawn as aligned to the plotted curve; azimuth shown modulo 180°.
        assert_eq!(chart.points[1].settlement_mm, 19.0);
        assert!(chart.title.contains("azimuth 60°"), "{}", chart.title);
    }

    #[test]
    fn missing_profile_and_metrics_are_reasons_not_zeros() {
        let mut axis = sagging_axis();
        axis.profile = None;
        let e = profile_chart(&axis).expect_err("no profile");
        assert!(e.contains("3 points"), "{e}");
        let both = profile_charts(&Err("structure not assessable".into()));
        assert_eq!(both.len(), 2);
        assert!(both.iter().all(|p| p.is_err()));
    }

    fn series_json(fits: serde_json::Value) -> serde_json::Value {
        json!({
            "time_origin": "2023-01-01", "window_start": "2023-01-01", "window_end": "2024-01-01",
            "geometries": [{
                "name": "asc", "mean_unit_enu": [-0.6, 0.1, 0.8], "points_aggregated": 7,
                "dates": ["2023-01-01", "2024-01-01"],
                "aggregate": {"median_mm": [0.0, -4.0], "band_lower_mm": [-1.0, -6.0],
                              "band_upper_mm": [2.0, -3.0]}
            }],
            "vertical": {
                "method": {"kind": "projected", "geometry": "asc"},
                "dates": ["2023-01-01", "2024-01-01"],
                "vertical_mm": [0.0, null],
                "fits": fits
            },
            "relative_to_surroundings": {"surroundings_vertical_velocity_mm_per_yr": -1.0}
        })
    }

    #[test]
    fn timeseries_from_series_detail() {
        let fits = json!({
            "linear": {"intercept_mm": 0.5, "velocity_mm_per_yr": -5.0,
                       "se_velocity_adjusted_mm_per_yr": 0.4},
            "annual": null, "quadratic": null,
            "model_comparison": {"selected": "linear"}, "breakpoint_date": null
        });
        let c = timeseries_chart("T-1", &series_json(fits)).expect("chart");
        // Only the finite epoch is drawn; the null epoch is left out, not drawn as 0.
        assert_eq!(c.aggregate.len(), 1);
        // Spread at 2023-01-01: centre 0 + (−1 − 0)/0.8 = −1.25 and (2 − 0)/0.8 = 2.5 mm.
        assert_eq!(c.spread.len(), 1);
        assert!((c.spread[0].lower_mm + 1.25).abs() < 1e-12);
        assert!((c.spread[0].upper_mm - 2.5).abs() < 1e-12);
        assert!(c.spread_label.contains("7 asc points"));
        let trend = c.trend.expect("trend");
        assert!((trend.values[0].value_mm - 0.5).abs() < 1e-12);
        assert!(trend.label.contains("-5.0 ± 0.4 mm/yr"), "{}", trend.label);
        assert!(c.model.is_none(), "linear selected: no extra model curve");
        assert!(
            c.surroundings
                .expect("surroundings")
                .label
                .contains("-1.0 mm/yr")
        );
        assert_eq!(c.window.map(|w| w.0.to_string()), Some("2023-01-01".into()));
    }

    #[test]
    fn timeseries_without_vertical_series_is_not_computed() {
        let mut v = series_json(serde_json::Value::Null);
        v["vertical"] = serde_json::Value::Null;
        let e = timeseries_chart("T-1", &v).expect_err("no vertical");
        assert!(e.contains("no vertical series"), "{e}");
        let e = timeseries_chart("T-1", &serde_json::Value::Null).expect_err("no detail");
        assert!(e.contains("no time series detail"), "{e}");
    }

    #[test]
    fn interaction_uses_governing_zone_and_criteria_set() {
        let criteria =
            crate::criteria::CriteriaRegistry::with_user_sets(&BTreeMap::new()).expect("builtin");
        let masonry = criteria.get("masonry").expect("masonry set");
        let r: StructureResult = serde_json::from_str(
            r#"{
            "id": "T-1", "name": "n", "status": "assessed", "status_reasons": [],
            "n_points": 10, "n_rejected": {}, "n_surroundings": 0, "datasets": ["asc"],
            "settlement_mm": null, "differential_settlement_mm": null, "mean_vertical_mm": null,
            "mean_east_mm": null, "vertical_velocity_mm_per_yr": null,
            "east_velocity_mm_per_yr": null, "tilt": null, "tilt_azimuth_deg": null,
            "angular_distortion": null, "deflection_ratio": -2e-4, "horizontal_strain": null,
            "governing_strain": null, "damage_category": 0, "damage_route": null,
            "evidence_grade": null, "vertical_velocity_se_mm_per_yr": null,
            "east_velocity_se_mm_per_yr": null, "tilt_se": null, "damage_category_name": null,
            "criteria_set": "masonry", "height_m": 8.0, "structure_type": "masonry",
            "trigger_status": null, "triggers": [], "report_file": null, "fallbacks": [],
            "assumptions": [], "change": null
        }"#,
        )
        .expect("result");
        let mut damage = json!({"governing": {"route": "limiting-tensile-strain", "zone_index": 0},
                       "zones": [{"mode": "hogging", "l_over_h": 2.5, "deflection_ratio": -2e-4,
                                  "horizontal_strain_used": 0.0,
                                  "horizontal_strain_signed": null,
                                  "horizontal_strain_unavailable": true}]});
        let metrics: Result<MetricsJson, String> = serde_json::from_value(json!({
            "axes": null, "axis_metrics": [], "horizontal_strain": null,
            "uncertainty": {"deflection_ratio": {"se": 1e-5}}
        }))
        .map_err(|e| e.to_string());
        let c = interaction_chart(&r, &damage, &metrics, &criteria).expect("chart");
        assert_eq!(c.mode, BendingMode::Hogging);
        assert_eq!(
            (c.l_over_h, c.e_over_g, c.poisson),
            (2.5, masonry.e_over_g, masonry.poisson)
        );
        assert_eq!(c.criteria_name, "masonry");
        assert_eq!(c.thresholds, masonry.thresholds);
        assert_eq!(c.neutral_axis, masonry.neutral_axis);
        // |Δ/L| = 2e-4 with ±1.645·1e-5 (90 % normal interval).
        assert!((c.deflection_ratio.value - 2e-4).abs() < 1e-15);
        assert!((c.deflection_ratio.upper - (2e-4 + 1.645e-5)).abs() < 1e-15);
        assert_eq!(c.horizontal_strain.lower, c.horizontal_strain.upper);
        assert!(c.note.contains("not measured"));
        damage["governing"]["route"] = json!("son-cording");
        assert!(interaction_chart(&r, &damage, &metrics, &criteria).is_err());
    }
}
