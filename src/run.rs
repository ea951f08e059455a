//! The whole job: portfolio → inputs → association → per-structure assessment → outputs.
//!
//! Owns the order of the stages, the assessment window, the coverage summary, the comparison with
//! a previous run, and writing the output folder atomically (via `output::Staging`). The command
//! line (`cli`) resolves its arguments into [`RunOptions`] and calls [`analyse`] and [`write()`].

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use anyhow::{Context, Result};
use rayon::prelude::*;

use crate::assess::{self, Member, RunContext, Window};
use crate::association::Role;
use crate::error::{InputError, Warnings};
use crate::ingest::{self, Inputs};
use crate::output::{self, PointRow, guard};
use crate::portfolio::{LookSide, Pass, Portfolio};
use crate::results::{Change, Coverage, PortfolioResult, Results, Status, StructureResult};

/// (structure, dataset, point id) of a screening verdict.
type VerdictKey<'a> = (usize, usize, &'a str);
/// (rejection reason, vertical velocity mm/yr) of a screening verdict.
type VerdictValue = (Option<&'static str>, Option<f64>);

/// Options of one run, resolved from the command line.
#[derive(Debug, Clone, Default)]
pub struct RunOptions {
    /// Output folder (None for `check`).
    pub out: Option<PathBuf>,
    /// Previous run's output folder to compare against.
    pub previous: Option<PathBuf>,
    /// Skip PDF rendering.
    pub no_reports: bool,
    /// Worker threads (None = all cores).
    pub jobs: Option<usize>,
    /// Show progress bars (only when stderr is a terminal).
    pub progress: bool,
    /// `(k, n)`: run only shard k of n (1-based).
    pub shard: Option<(usize, usize)>,
}

/// Everything a run produced in memory.
pub struct Analysis {
    /// The portfolio.
    pub portfolio: Portfolio,
    /// The inputs.
    pub inputs: Inputs,
    /// The results document.
    pub results: Results,
    /// points.csv rows.
    pub point_rows: Vec<PointRow>,
    /// Warnings.
    pub warnings: Warnings,
    /// The window.
    pub window: Window,
}

fn to_series_pass(p: Pass) -> crate::series::los::Pass {
    match p {
        Pass::Ascending => crate::series::los::Pass::Ascending,
        Pass::Descending => crate::series::los::Pass::Descending,
    }
}

fn to_series_look(l: LookSide) -> crate::series::los::LookSide {
    match l {
        LookSide::Right => crate::series::los::LookSide::Right,
        LookSide::Left => crate::series::los::LookSide::Left,
    }
}

/// Decide the assessment window from the portfolio and the data.
///
/// Default start = the first common epoch (the latest first date among datasets); default end =
/// the last common epoch (the earliest last date). A window that contains no acquisition of some
/// dataset is an error naming the key.
pub fn window_for(
    pf: &Portfolio,
    datasets: &[ingest::Dataset],
    w: &mut Warnings,
) -> Result<Window, InputError> {
    let first = datasets
        .iter()
        .filter_map(|d| d.epochs.first())
        .max()
        .copied();
    let last = datasets
        .iter()
        .filter_map(|d| d.epochs.last())
        .min()
        .copied();
    let (Some(first), Some(last)) = (first, last) else {
        return Err(InputError::new(
            &pf.file,
            "key datasets",
            "no epochs in any dataset",
            "check the points files",
        ));
    };
    if last < first {
        return Err(InputError::new(
            &pf.file,
            "key datasets",
            format!("the datasets do not overlap in time (common span would be {first} to {last})"),
            "use datasets covering a common period",
        ));
    }
    let start = pf.start.unwrap_or_else(|| {
        w.push(
            "default_applied",
            format!("portfolio.start not given: window starts at the first common epoch {first}"),
        );
        first
    });
    let end = pf.end.unwrap_or_else(|| {
        w.push(
            "default_applied",
            format!("portfolio.end not given: window ends at the last common epoch {last}"),
        );
        last
    });
    if end <= start {
        let (key, hint) = match (pf.start, pf.end) {
            (None, None) => (
                "key datasets",
                "the datasets share only one acquisition date: at least two (normally 20 or more over a year) are needed",
            ),
            (Some(_), _) => (
                "key portfolio.start",
                "set start before end, inside the data's common span",
            ),
            (None, Some(_)) => (
                "key portfolio.end",
                "set end after the first common acquisition",
            ),
        };
        return Err(InputError::new(
            &pf.file,
            key,
            format!("the window {start} to {end} is empty"),
            hint,
        ));
    }
    for (d, spec) in datasets.iter().zip(&pf.datasets) {
        let n = d
            .epochs
            .iter()
            .filter(|e| **e >= start && **e <= end)
            .count();
        if n == 0 {
            return Err(InputError::new(
                &pf.file,
                if pf.start.is_some() {
                    "key portfolio.start"
                } else {
                    "key portfolio.end"
                },
                format!(
                    "the window {start} to {end} contains no acquisition of dataset `{}` (its data run from {} to {})",
                    spec.name,
                    d.epochs.first().map(|x| x.to_string()).unwrap_or_default(),
                    d.epochs.last().map(|x| x.to_string()).unwrap_or_default()
                ),
                "choose a window inside the data",
            ));
        }
    }
    if start < first || end > last {
        w.push(
            "window_beyond_common_span",
            format!("the window {start} to {end} reaches beyond the common span of the datasets ({first} to {last})"),
        );
    }
    Ok(Window { start, end })
}

/// Stable assignment of a structure id to shard k of n (1-based): FNV-1a hash of the id.
pub fn shard_of(id: &str, n: usize) -> usize {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for b in id.as_bytes() {
        h ^= u64::from(*b);
        h = h.wrapping_mul(0x0100_0000_01b3);
    }
    (h % n as u64) as usize + 1
}

/// The context every structure's assessment shares: window epochs, scene LOS vectors, criteria,
/// works, and the per-point window statistics of every retained point (computed here, in
/// parallel, once per point).
pub fn run_context<'a>(
    pf: &'a Portfolio,
    datasets: &'a [ingest::Dataset],
    window: Window,
    analysis_crs: &crate::coords::Crs,
    stats: assess::StatsCache,
) -> Result<RunContext<'a>, InputError> {
    let window_idx: Vec<Vec<usize>> = datasets
        .iter()
        .map(|d| assess::window_indices(&d.epochs, &window))
        .collect();
    let scene_unit = pf
        .datasets
        .iter()
        .map(|d| match (d.incidence_deg, d.heading_deg) {
            (Some(i), Some(h)) => {
                crate::series::los::unit_vector_from_angles(i, h, to_series_look(d.look)).ok()
            }
            _ => None,
        })
        .collect();
    let criteria = build_criteria(pf)?;
    let works = pf
        .works
        .as_ref()
        .map(|w| crate::works::WorksGeometry::project(w, analysis_crs, &pf.file))
        .transpose()?;
    let window_times: Vec<assess::WindowTimes> = datasets
        .iter()
        .zip(&window_idx)
        .map(|(d, idx)| assess::window_times(&d.epochs, idx, &window))
        .collect();
    let point_stats = match stats {
        assess::StatsCache::OnDemand => None,
        assess::StatsCache::EveryPoint => Some(
            datasets
                .iter()
                .zip(&window_idx)
                .zip(&window_times)
                .zip(&pf.datasets)
                .map(|(((d, idx), times), spec)| {
                    (0..d.len())
                        .into_par_iter()
                        .map(|i| {
                            assess::PointStats::of(
                                d.point(i).series(),
                                idx,
                                times,
                                spec.wavelength_mm,
                            )
                        })
                        .collect()
                })
                .collect(),
        ),
    };
    Ok(RunContext {
        portfolio: pf,
        datasets,
        window,
        window_idx,
        scene_unit,
        criteria,
        works,
        window_times,
        point_stats,
    })
}

/// Every dataset's viewing geometry for the results' portfolio block and the report.
pub fn dataset_geometries(
    pf: &Portfolio,
    datasets: &[ingest::Dataset],
) -> Vec<crate::results::DatasetGeometry> {
    use crate::series::los::{LookDirection, unit_vector_from_angles};
    pf.datasets
        .iter()
        .zip(datasets)
        .map(|(spec, d)| {
            let look = to_series_look(spec.look);
            let per_point = spec.columns.incidence.is_some() || spec.columns.heading.is_some();
            let unit = if per_point {
                let mut sum = [0.0f64; 3];
                for p in d.iter_points() {
                    let inc = p.incidence_deg();
                    let head = p.heading_deg();
                    if let Ok(u) = unit_vector_from_angles(inc, head, look) {
                        for (a, c) in sum.iter_mut().zip(u) {
                            *a += c;
                        }
                    }
                }
                let norm = sum.iter().map(|c| c * c).sum::<f64>().sqrt();
                (norm > 0.0).then(|| sum.map(|c| c / norm))
            } else {
                spec.incidence_deg
                    .zip(spec.heading_deg)
                    .and_then(|(i, h)| unit_vector_from_angles(i, h, look).ok())
            };
            crate::results::DatasetGeometry {
                name: spec.name.clone(),
                pass: to_series_pass(spec.pass).label().to_string(),
                look_direction: unit
                    .and_then(LookDirection::of)
                    .map(|l| l.label().to_string()),
                unit_enu: unit.map(|u| u.map(|c| (c * 1e6).round() / 1e6)),
                unit_vector_from: if per_point {
                    "mean of per-point angles".into()
                } else {
                    "scene angles".into()
                },
                incidence_deg: spec.incidence_deg.filter(|_| !per_point),
                heading_deg: spec.heading_deg.filter(|_| !per_point),
                reference: d.reference.clone(),
            }
        })
        .collect()
}

/// Read, associate and assess. Nothing is written.
pub fn analyse(portfolio_path: &Path, opts: &RunOptions) -> Result<Analysis> {
    let mut warnings = Warnings::default();
    // The output folder is checked before any input is read, and again against every input the
    // portfolio names before the data files are opened.
    if let Some(out) = &opts.out {
        check_out(out, portfolio_path, None, opts)?;
    }
    let pf = Portfolio::load(portfolio_path)?;
    if let Some(out) = &opts.out {
        check_out(out, portfolio_path, Some(&pf), opts)?;
    }
    let (mut structures, analysis_crs, index) = ingest::load_structures(&pf, &mut warnings)?;
    if let Some((k, n)) = opts.shard {
        structures.retain(|s| shard_of(&s.raw.id, n) == k);
    }
    // Re-index after sharding so that each shard reads only points near its own structures.
    let index = if opts.shard.is_some() {
        for (i, s) in structures.iter_mut().enumerate() {
            s.index = i;
        }
        crate::association::SpatialIndex::new(
            structures.iter().map(|s| s.footprint.clone()).collect(),
            pf.assessment.buffer_m,
            pf.assessment.surroundings_m,
        )
    } else {
        index
    };
    for (i, d) in pf.datasets.iter().enumerate() {
        if let (Some(inc), Some(head)) = (d.incidence_deg, d.heading_deg) {
            let geo = crate::series::los::los_from_angles(
                inc,
                head,
                to_series_look(d.look),
                to_series_pass(d.pass),
            )
            .map_err(|e| {
                InputError::new(
                    &pf.file,
                    format!("key datasets[{i}]"),
                    format!("line-of-sight geometry of `{}` is not valid: {e}", d.name),
                    "check pass, heading_deg (flight azimuth, clockwise from north) and look side",
                )
            })?;
            for m in geo.warnings {
                warnings.push("los_geometry", format!("dataset `{}`: {m}", d.name));
            }
        }
    }
    let datasets = ingest::read_datasets(&pf, &analysis_crs, &index, &mut warnings)?;
    let window = window_for(&pf, &datasets, &mut warnings)?;

    // Association.
    let n_s = structures.len();
    let mut members: Vec<Vec<Member>> = vec![Vec::new(); n_s];
    let mut ties = 0usize;
    let mut surroundings_only = 0usize;
    let mut link_rows: Vec<(usize, usize, crate::association::PointAssociation)> = Vec::new();
    for (di, d) in datasets.iter().enumerate() {
        let links: Vec<crate::association::PointLinks> = d
            .points
            .par_iter()
            .map(|p| index.associate(p.x, p.y))
            .collect();
        for (pi, l) in links.into_iter().enumerate() {
            if l.tie {
                ties += 1;
            } else if l.links.iter().all(|k| k.role == Role::Surroundings) && !l.links.is_empty() {
                surroundings_only += 1;
            }
            for k in &l.links {
                members[k.structure].push(Member {
                    point_index: pi,
                    dataset: di,
                    point: d.point(pi),
                    role: k.role,
                });
            }
            // The summary the reader stored (the same value as `l.summary()`, tested).
            link_rows.push((di, pi, d.association[pi]));
        }
    }

    // A point is in the surroundings of many structures: its statistics are worked out once.
    let ctx = run_context(
        &pf,
        &datasets,
        window,
        &analysis_crs,
        assess::StatsCache::EveryPoint,
    )?;
    let ids: Vec<&str> = structures.iter().map(|s| s.raw.id.as_str()).collect();
    let stems = output::safe_names::assign(&ids);
    let bar = if opts.progress {
        indicatif::ProgressBar::new(structures.len() as u64).with_style(
            indicatif::ProgressStyle::with_template(
                "assessing {bar:30} {pos}/{len} structures ({eta})",
            )
            .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
        )
    } else {
        indicatif::ProgressBar::hidden()
    };
    let assessed: Vec<(StructureResult, Vec<assess::PointVerdict>)> = structures
        .par_iter()
        .zip(members.par_iter())
        .zip(stems.par_iter())
        .map(|((s, m), stem)| {
            let r = assess::assess_structure(&ctx, s, m, Some(stem.clone()));
            bar.inc(1);
            r
        })
        .collect();
    bar.finish_and_clear();

    // points.csv rows: one per point within reach (see below), ties included.
    let mut verdict_map: BTreeMap<VerdictKey, VerdictValue> = BTreeMap::new();
    for (si, (_, vs)) in assessed.iter().enumerate() {
        for v in vs {
            verdict_map.insert(
                (si, v.dataset, v.point_id.as_str()),
                (v.rejected, v.vertical_velocity_mm_per_yr),
            );
        }
    }
    let mut point_rows = Vec::new();
    // Longitude/latitude for the points outputs, from the analysis CRS (the store keeps only the
    // analysis position).
    let to_wgs = crate::coords::Transformer::new(&analysis_crs, &crate::coords::Crs::wgs84());
    for (di, pi, l) in &link_rows {
        let p = datasets[*di].point(*pi);
        let (lon, lat) = to_wgs.apply(p.x(), p.y()).unwrap_or((f64::NAN, f64::NAN));
        if l.tie() {
            point_rows.push(PointRow {
                dataset: datasets[*di].name.clone(),
                point_id: p.id().to_string(),
                line: p.line(),
                lon,
                lat,
                structure_id: String::new(),
                role: "tie".into(),
                inside: false,
                distance_m: 0.0,
                status: "rejected".into(),
                reason: assess::reason::TIE.into(),
                vertical_velocity_mm_per_yr: None,
                surroundings_of: usize::from(l.rings),
            });
        }
        // One row per point: its owning structure, or — for a point only in surroundings rings —
        // the nearest structure whose ring holds it (and how many rings hold it). Rows per
        // (point, structure) link would grow with the ring size times the point count.
        if let Some(k) = l.structure() {
            let (rej, vv) = verdict_map
                .get(&(k, *di, p.id()))
                .copied()
                .unwrap_or((None, None));
            point_rows.push(PointRow {
                dataset: datasets[*di].name.clone(),
                point_id: p.id().to_string(),
                line: p.line(),
                lon,
                lat,
                structure_id: structures[k].raw.id.clone(),
                role: match l.role() {
                    Role::Structure => "structure".into(),
                    Role::Surroundings => "surroundings".into(),
                },
                inside: l.inside(),
                distance_m: (f64::from(l.distance_m) * 1000.0).round() / 1000.0,
                status: if rej.is_some() {
                    "rejected".into()
                } else {
                    "kept".into()
                },
                reason: rej.unwrap_or("").into(),
                vertical_velocity_mm_per_yr: vv.map(|v| (v * 1000.0).round() / 1000.0),
                surroundings_of: usize::from(l.rings),
            });
        }
    }

    let mut results_list: Vec<StructureResult> = assessed.into_iter().map(|(r, _)| r).collect();
    for r in &mut results_list {
        let (status, hits, unevaluated) = crate::triggers::evaluate(&pf.triggers, r);
        r.trigger_status = if pf.triggers.is_empty() {
            None
        } else {
            Some(status)
        };
        r.triggers = hits;
        r.assumptions.extend(unevaluated);
    }

    let mut gone = Vec::new();
    if let Some(prev) = &opts.previous {
        gone = compare_previous(prev, &mut results_list)?;
    }

    let mut coverage = Coverage {
        structures: n_s,
        ties,
        points_surroundings_only: surroundings_only,
        ..Default::default()
    };
    for d in &datasets {
        coverage.points_read.insert(d.name.clone(), d.rows_read);
        coverage.points_out_of_reach += d.rows_out_of_reach;
    }
    if ties > 0 {
        coverage
            .points_rejected
            .insert(assess::reason::TIE.into(), ties);
    }
    let mut by_category = BTreeMap::new();
    let mut by_grade = BTreeMap::new();
    for r in &results_list {
        let st = match r.status {
            Status::Assessed => "assessed",
            Status::InsufficientData => "insufficient_data",
        };
        *coverage.by_status.entry(st.into()).or_default() += 1;
        coverage.points_kept += r.n_points;
        for (k, v) in &r.n_rejected {
            *coverage.points_rejected.entry(k.clone()).or_default() += v;
        }
        let cat = match (r.status, r.damage_category) {
            (Status::InsufficientData, _) => "insufficient_data".to_string(),
            (_, Some(c)) => format!("category_{c}"),
            (_, None) => "not_computed".to_string(),
        };
        *by_category.entry(cat).or_default() += 1;
        *by_grade
            .entry(
                r.evidence_grade
                    .clone()
                    .unwrap_or_else(|| "not_graded".into()),
            )
            .or_default() += 1;
    }
    let analysis_date = datasets
        .iter()
        .filter_map(|d| d.epochs.iter().filter(|e| **e <= window.end).max())
        .max()
        .map(|d| d.to_string());
    let portfolio = PortfolioResult {
        name: pf.name.clone(),
        analysis_crs: analysis_crs.name(),
        window_start: Some(window.start.to_string()),
        window_end: Some(window.end.to_string()),
        analysis_date,
        tool_version: env!("CARGO_PKG_VERSION").to_string(),
        coverage,
        by_category,
        by_grade,
        previous: opts.previous.as_ref().map(|p| p.display().to_string()),
        gone_since_previous: gone,
        shard: opts.shard.map(|(k, n)| format!("{k}/{n}")),
        datasets: dataset_geometries(&pf, &datasets),
        common_reference: pf
            .reference
            .as_ref()
            .map(|r| crate::results::CommonReference {
                point: r.point,
                crs: r.crs.clone(),
                radius_m: r.radius_m,
                min_points: crate::ingest::reference::MIN_REFERENCE_POINTS,
            }),
    };
    let results = Results {
        portfolio,
        structures: results_list,
    };
    drop(ctx);
    Ok(Analysis {
        portfolio: pf,
        inputs: Inputs {
            structures,
            datasets,
            analysis_crs,
            index,
        },
        results,
        point_rows,
        warnings,
        window,
    })
}

/// Built-in criteria sets plus the portfolio's `[criteria.NAME]` sets, validated.
pub fn build_criteria(pf: &Portfolio) -> Result<crate::criteria::CriteriaRegistry, InputError> {
    let mut user = BTreeMap::new();
    for (name, table) in &pf.criteria {
        let o: crate::criteria::CriteriaOverride = toml::Value::Table(table.clone()).try_into().map_err(|e: toml::de::Error| {
            InputError::new(
                &pf.file,
                format!("key criteria.{name}"),
                e.message().trim().to_string(),
                "keys of a criteria set: base, route, e_over_g, poisson, neutral_axis, thresholds, compressive_strain, source (docs/formats.md)",
            )
        })?;
        user.insert(name.clone(), o);
    }
    crate::criteria::CriteriaRegistry::with_user_sets(&user).map_err(|e| {
        InputError::new(
            &pf.file,
            "key criteria",
            e.to_string(),
            "see docs/formats.md for criteria sets",
        )
    })
}

/// Compare with a previous run's results.json; returns the ids gone since then.
pub fn compare_previous(prev_dir: &Path, current: &mut [StructureResult]) -> Result<Vec<String>> {
    let path = prev_dir.join("results.json");
    let text = std::fs::read_to_string(&path)
        .with_context(|| format!("--previous: cannot read {}", path.display()))?;
    let prev: Results = serde_json::from_str(&text).map_err(|e| {
        InputError::new(
            &path,
            format!("line {}", e.line()),
            format!("not a Plinth results.json: {e}"),
            "--previous takes the output folder of an earlier `plinth assess` run",
        )
    })?;
    let by_id: BTreeMap<&str, &StructureResult> =
        prev.structures.iter().map(|s| (s.id.as_str(), s)).collect();
    for r in current.iter_mut() {
        let change = match by_id.get(r.id.as_str()) {
            None => Change {
                kind: "new".into(),
                previous_damage_category: None,
                category_changed: false,
                previous_vertical_velocity_mm_per_yr: None,
                velocity_change_mm_per_yr: None,
                velocity_change_z: None,
                velocity_change_significant: None,
                new_exceedances: r.triggers.iter().map(|h| h.level.clone()).collect(),
                previous_status: None,
            },
            Some(p) => {
                let dv = match (r.vertical_velocity_mm_per_yr, p.vertical_velocity_mm_per_yr) {
                    (Some(a), Some(b)) => Some(a - b),
                    _ => None,
                };
                let z = match (
                    dv,
                    r.vertical_velocity_se_mm_per_yr,
                    p.vertical_velocity_se_mm_per_yr,
                ) {
                    (Some(d), Some(s1), Some(s2)) if s1 > 0.0 || s2 > 0.0 => {
                        Some(d / (s1 * s1 + s2 * s2).sqrt())
                    }
                    _ => None,
                };
                let before: Vec<&str> = p.triggers.iter().map(|h| h.level.as_str()).collect();
                Change {
                    kind: "continuing".into(),
                    previous_damage_category: p.damage_category,
                    category_changed: p.damage_category != r.damage_category,
                    previous_vertical_velocity_mm_per_yr: p.vertical_velocity_mm_per_yr,
                    velocity_change_mm_per_yr: dv,
                    velocity_change_z: z,
                    velocity_change_significant: z.map(|z| z.abs() > 2.0),
                    new_exceedances: r
                        .triggers
                        .iter()
                        .filter(|h| !before.contains(&h.level.as_str()))
                        .map(|h| h.level.clone())
                        .collect(),
                    previous_status: Some(p.status),
                }
            }
        };
        r.change = Some(change);
    }
    let now: std::collections::BTreeSet<&str> = current.iter().map(|s| s.id.as_str()).collect();
    Ok(prev
        .structures
        .iter()
        .filter(|s| !now.contains(s.id.as_str()))
        .map(|s| s.id.clone())
        .collect())
}

/// Every file and folder a portfolio names as an input: the portfolio file, the footprints, each
/// points file and the report template folder.
pub fn portfolio_inputs(pf: &Portfolio) -> Vec<guard::Input> {
    let mut v = vec![
        guard::Input::new("the portfolio file", &pf.file),
        guard::Input::new("the footprints file", &pf.structures.path),
    ];
    for d in &pf.datasets {
        v.push(guard::Input::new(
            format!("the points file of dataset `{}`", d.name),
            &d.path,
        ));
    }
    if let Some(t) = &pf.report.template_dir {
        v.push(guard::Input::new("the report template folder", t));
    }
    v
}

/// Check the output folder of an `assess` run against the rule of [`guard`]: before the portfolio
/// is read (`pf` None) against the portfolio file and `--previous`; after, against every input.
pub fn check_out(
    out: &Path,
    portfolio_path: &Path,
    pf: Option<&Portfolio>,
    opts: &RunOptions,
) -> Result<guard::Target, guard::Refused> {
    let mut inputs = match pf {
        Some(pf) => portfolio_inputs(pf),
        None => vec![guard::Input::new("the portfolio file", portfolio_path)],
    };
    if let Some(p) = &opts.previous {
        inputs.push(guard::Input::new("the --previous folder", p));
    }
    guard::check(out, guard::Policy::ReplaceOutput, &inputs)
}

/// The manifest document.
pub fn manifest(a: &Analysis, opts: &RunOptions) -> Result<serde_json::Value> {
    let pf = &a.portfolio;
    let mut inputs = vec![serde_json::json!({
        "role": "portfolio",
        "path": pf.file.display().to_string(),
        "sha256": output::sha256_file(&pf.file)?,
    })];
    inputs.push(serde_json::json!({
        "role": "structures",
        "path": pf.structures.path.display().to_string(),
        "sha256": output::sha256_file(&pf.structures.path)?,
    }));
    for d in &pf.datasets {
        inputs.push(serde_json::json!({
            "role": "dataset",
            "name": d.name,
            "path": d.path.display().to_string(),
            "sha256": output::sha256_file(&d.path)?,
        }));
    }
    Ok(serde_json::json!({
        "tool": "plinth",
        (guard::FORMAT_KEY): guard::FORMAT_MARKER,
        "tool_version": env!("CARGO_PKG_VERSION"),
        "analysis_date": a.results.portfolio.analysis_date,
        "analysis_date_source": "last acquisition in the assessment window (never the clock)",
        "inputs": inputs,
        "analysis_crs": {"name": a.inputs.analysis_crs.name(), "definition": a.inputs.analysis_crs.definition()},
        "window": {"start": a.window.start.to_string(), "end": a.window.end.to_string()},
        "parameters": {
            "portfolio": pf,
        },
        "defaults_applied": pf.defaults_applied,
        "common_reference": {
            "area": pf.reference,
            "datasets": a.results.portfolio.datasets.iter()
                .map(|d| serde_json::json!({"name": d.name, "reference": d.reference}))
                .collect::<Vec<_>>(),
        },
        "options": {
            "previous": opts.previous.as_ref().map(|p| p.display().to_string()),
            "no_reports": opts.no_reports,
            "shard": opts.shard.map(|(k, n)| format!("{k}/{n}")),
        },
        "warnings": a.warnings.items,
    }))
}

/// Write every output into `out` atomically (the folder is checked by [`check_out`] first).
pub fn write(a: &Analysis, opts: &RunOptions, out: &Path) -> Result<()> {
    let target = check_out(out, &a.portfolio.file, Some(&a.portfolio), opts)?;
    let staging = output::Staging::new(&target)?;
    let res = (|| -> Result<()> {
        let d = &staging.dir;
        output::write_with(d, "results.json", |w| {
            output::results_json_to(&a.results, w)
        })?;
        output::write_with(d, "results.csv", |w| output::results_csv_to(&a.results, w))?;
        let fps: Vec<&geo::MultiPolygon<f64>> = a
            .inputs
            .structures
            .iter()
            .map(|s| &s.footprint_wgs84)
            .collect();
        output::write_with(d, "results.geojson", |w| {
            output::results_geojson_to(&a.results, &fps, w)
        })?;
        output::write_with(d, "points.csv", |w| output::points_csv_to(&a.point_rows, w))?;
        output::write_with(d, "points.geojson", |w| {
            output::points_geojson_to(&a.point_rows, w)
        })?;
        let m = manifest(a, opts)?;
        output::write_file(
            d,
            "manifest.json",
            (serde_json::to_string_pretty(&m)? + "\n").as_bytes(),
        )?;
        // PDF reports (report::pipeline); a failure abandons the staging folder below.
        if !opts.no_reports {
            crate::report::pipeline::render_reports(a, &staging.dir, opts.jobs, opts.progress)?;
        }
        Ok(())
    })();
    match res {
        Ok(()) => staging.commit(),
        Err(e) => {
            staging.abandon();
            Err(e)
        }
    }
}
