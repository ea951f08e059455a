//! The whole job: portfolio → inputs → association → per-structure assessment → outputs.
//!
//! Owns the order of the stages, the assessment window, the coverage summary, the comparison with
//! a previous run, and writing the output folder atomically (via `output::Staging`). The command
//! line (`cli`) resolves its arguments into [`RunOptions`] and calls [`assess_into`] (or
//! [`check`]). Stages, each handing the next a named struct: [`prepare`] ([`Prepared`]: inputs
//! read, window) → [`associate`] ([`Association`]) → [`assess_all`] ([`Assessed`]: compact
//! records, packed point verdicts; each structure's detail file written as it is assessed) →
//! [`summarise`] (`Results`: triggers, `--previous`, coverage) → the portfolio outputs and the
//! reports.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU8, AtomicU64, Ordering};

use anyhow::{Context, Result};
use rayon::prelude::*;

use crate::assess::{self, Member, RunContext, Window};
use crate::association::Role;
use crate::error::{InputError, Warnings};
use crate::ingest::{self, Inputs};
use crate::output::{self, PointRow, guard};
use crate::portfolio::{LookSide, Pass, Portfolio};
use crate::results::{Change, Coverage, PortfolioResult, Results, Status, StructureResult};

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
    /// Leave points.geojson out (points.csv and results.gpkg hold the same rows).
    pub no_points_geojson: bool,
}

/// Everything a run produced in memory (the per-structure detail is in the output folder).
pub struct Analysis {
    /// The portfolio.
    pub portfolio: Portfolio,
    /// The inputs.
    pub inputs: Inputs,
    /// The results document.
    pub results: Results,
    /// Every point's screening verdict (for points.csv and points.geojson).
    pub points: PointVerdicts,
    /// Warnings.
    pub warnings: Warnings,
    /// The window.
    pub window: Window,
}

impl Analysis {
    /// What the reports render, with the inputs' SHA-256 the run already computed
    /// (`(path, hex)`).
    pub fn report_input<'a>(
        &'a self,
        input_sha256: &'a [(PathBuf, String)],
    ) -> crate::report::pipeline::ReportInput<'a> {
        crate::report::pipeline::ReportInput {
            input_sha256,
            portfolio: &self.portfolio,
            structures: &self.inputs.structures,
            datasets: &self.inputs.datasets,
            analysis_crs: &self.inputs.analysis_crs,
            results: &self.results,
            window: self.window,
        }
    }

    fn new(p: Prepared, results: Results, points: PointVerdicts) -> Self {
        Self {
            portfolio: p.portfolio,
            inputs: p.inputs,
            results,
            points,
            warnings: p.warnings,
            window: p.window,
        }
    }

    /// The rows of points.csv for the points `range` of dataset `di`, built on the fly: one per
    /// point within reach — its owning structure, or for a point only in surroundings rings the
    /// nearest structure whose ring holds it (rows per (point, structure) link would grow with the
    /// ring size times the point count) — plus one `tie` row per point equidistant between two
    /// structures' buffers.
    pub fn point_rows_of<'a>(
        &'a self,
        di: usize,
        range: std::ops::Range<usize>,
        to_wgs: &'a crate::coords::Transformer,
    ) -> impl Iterator<Item = PointRow<'a>> + 'a {
        let structures = &self.inputs.structures;
        let d = &self.inputs.datasets[di];
        range.flat_map(move |pi| {
            let l = d.association[pi];
            let p = d.point(pi);
            let (lon, lat) = to_wgs.apply(p.x(), p.y()).unwrap_or((f64::NAN, f64::NAN));
            let base = PointRow {
                dataset: d.name.as_str(),
                point_id: p.id(),
                line: p.line(),
                lon,
                lat,
                structure_id: "",
                role: "tie",
                inside: false,
                distance_m: 0.0,
                status: "rejected",
                reason: assess::reason::TIE,
                vertical_velocity_mm_per_yr: None,
                surroundings_of: usize::from(l.rings),
            };
            let owned = l.structure().map(|k| {
                let (rej, vv) = self.points.get(di, pi).unwrap_or((None, None));
                PointRow {
                    structure_id: structures[k].raw.id.as_str(),
                    role: match l.role() {
                        Role::Structure => "structure",
                        Role::Surroundings => "surroundings",
                    },
                    inside: l.inside(),
                    distance_m: (f64::from(l.distance_m) * 1000.0).round() / 1000.0,
                    status: if rej.is_some() { "rejected" } else { "kept" },
                    reason: rej.unwrap_or(""),
                    vertical_velocity_mm_per_yr: vv.map(|v| (v * 1000.0).round() / 1000.0),
                    ..base.clone()
                }
            });
            l.tie().then_some(base).into_iter().chain(owned)
        })
    }
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

/// Points of dataset `d` out of reach of every structure: the rows read minus the points listed
/// in points.csv (with an owner, a surroundings ring or as a tie). The reader's own count
/// (`rows_out_of_reach`) leaves out the points it kept because they lie inside a structure's
/// envelope but beyond its reach, and reference-area points; counting them here gives the figure
/// a merge of shards recomputes from the listed points.
fn out_of_reach(d: &ingest::Dataset) -> u64 {
    let listed = d
        .association
        .iter()
        .filter(|l| l.tie() || l.structure().is_some())
        .count();
    d.rows_read.saturating_sub(listed as u64)
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
    let criteria = crate::criteria::registry_for(pf)?;
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
                            assess::PointStats::of_point(d.point(i), idx, times, spec.wavelength_mm)
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
        sentences: crate::text::Interner::default(),
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

/// The first stages of a run: the portfolio and its inputs read, the window decided and every
/// point associated with the structures. All that `plinth check` needs.
pub struct Prepared {
    /// The portfolio.
    pub portfolio: Portfolio,
    /// The inputs (structures of this shard, datasets, CRS, spatial index).
    pub inputs: Inputs,
    /// The assessment window.
    pub window: Window,
    /// Warnings so far.
    pub warnings: Warnings,
}

/// Every structure's linked points (footprint, buffer and surroundings ring) and the portfolio
/// counts of the association. Held as one array of 4-byte global point indices grouped by
/// structure (sized exactly, counted in a first pass): a city's ring links are several per point,
/// and one growing list per structure would hold up to twice their size.
#[derive(Debug, Clone, Default)]
pub struct Association {
    /// `starts[s]..starts[s + 1]` indexes `points` for structure s.
    starts: Vec<usize>,
    /// Global point index (dataset offset + index in the dataset) of every link, grouped by
    /// structure, in dataset then point order within a group.
    points: Vec<u32>,
    /// First global point index of each dataset.
    dataset_offsets: Vec<usize>,
    /// Points excluded as ties between structures.
    pub ties: usize,
    /// Points only in surroundings rings.
    pub surroundings_only: usize,
}

impl Association {
    /// `(dataset, point index)` of every point linked to structure `s`, in dataset then point
    /// order. The role follows from the point's stored association: `Structure` for its owner,
    /// `Surroundings` for every other structure whose ring holds it.
    pub fn members(&self, s: usize) -> impl Iterator<Item = (usize, usize)> + '_ {
        let range =
            self.starts.get(s).copied().unwrap_or(0)..self.starts.get(s + 1).copied().unwrap_or(0);
        self.points[range]
            .iter()
            .map(move |&g| crate::association::split_global(&self.dataset_offsets, g))
    }
}

/// Read the portfolio and its inputs (every kept point's owner is decided as it is read) and
/// decide the window: the stages before the structures are assessed. With `opts.out`, the output folder is checked before any
/// input is read and again against every input the portfolio names.
pub fn prepare(portfolio_path: &Path, opts: &RunOptions) -> Result<Prepared> {
    let mut warnings = Warnings::default();
    if let Some(out) = &opts.out {
        check_out(out, portfolio_path, None, opts)?;
    }
    let pf = Portfolio::load(portfolio_path)?;
    if let Some(out) = &opts.out {
        check_out(out, portfolio_path, Some(&pf), opts)?;
    }
    if pf.datasets.len() > usize::from(u16::MAX) {
        return Err(InputError::new(
            &pf.file,
            "key datasets",
            format!(
                "{} datasets; at most {} are supported",
                pf.datasets.len(),
                u16::MAX
            ),
            "split the portfolio",
        )
        .into());
    }
    let (structures, analysis_crs, index) = load_shard(&pf, opts.shard, &mut warnings)?;
    check_geometries(&pf, &mut warnings)?;
    let datasets = ingest::read_datasets(&pf, &analysis_crs, &index, &mut warnings)?;
    let window = window_for(&pf, &datasets, &mut warnings)?;
    Ok(Prepared {
        portfolio: pf,
        inputs: Inputs {
            structures,
            datasets,
            analysis_crs,
            index,
        },
        window,
        warnings,
    })
}

/// The structures (of one shard when sharding) with their spatial index.
fn load_shard(
    pf: &Portfolio,
    shard: Option<(usize, usize)>,
    warnings: &mut Warnings,
) -> Result<(
    Vec<ingest::Structure>,
    crate::coords::Crs,
    crate::association::SpatialIndex,
)> {
    let (structures, analysis_crs, index) = ingest::load_structures(pf, warnings)?;
    let Some((k, n)) = shard else {
        return Ok((structures, analysis_crs, index));
    };
    let centroids: Vec<(f64, f64)> = structures
        .iter()
        .map(|s| {
            use geo::Centroid;
            s.footprint
                .centroid()
                .map_or((f64::NAN, f64::NAN), |c| (c.x(), c.y()))
        })
        .collect();
    let mine = crate::shard::members(&centroids, k, n);
    let (own, others): (Vec<_>, Vec<_>) = structures.into_iter().zip(&mine).partition(|(_, m)| **m);
    let mut structures: Vec<ingest::Structure> = own.into_iter().map(|(s, _)| s).collect();
    // Re-index after sharding so that each shard reads only points near its own structures.
    for (i, s) in structures.iter_mut().enumerate() {
        s.index = i;
    }
    // The other shards' structures near this shard's decide owners and ties of the points
    // between them exactly as a single run does (association::SpatialIndex::with_halo).
    let (buffer, ring) = (pf.assessment.buffer_m, pf.assessment.surroundings_m);
    let own_fps: Vec<_> = structures.iter().map(|s| s.footprint.clone()).collect();
    let other_fps: Vec<_> = others.into_iter().map(|(s, _)| s.footprint).collect();
    let index = crate::association::SpatialIndex::with_halo(own_fps, other_fps, buffer, ring);
    Ok((structures, analysis_crs, index))
}

/// Every dataset's scene line-of-sight geometry is valid (insar-methods.md §2).
fn check_geometries(pf: &Portfolio, warnings: &mut Warnings) -> Result<(), InputError> {
    for (i, d) in pf.datasets.iter().enumerate() {
        let (Some(inc), Some(head)) = (d.incidence_deg, d.heading_deg) else {
            continue;
        };
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
    Ok(())
}

/// Link every point with the structures whose footprint, buffer or surroundings ring holds it:
/// one spatial pass gathers the (structure, point) links in point order (8 bytes a link: about
/// 2 million links, 16 MB, on the medium bench city), then a counting sort by structure fills the
/// exactly sized array, each structure's points staying in point order.
pub fn associate(p: &Prepared) -> Result<Association> {
    let datasets = &p.inputs.datasets;
    let index = &p.inputs.index;
    let n_structures = p.inputs.structures.len();
    let mut dataset_offsets = Vec::with_capacity(datasets.len());
    let mut total = 0usize;
    for d in datasets {
        dataset_offsets.push(total);
        total += d.len();
    }
    if total > u32::MAX as usize {
        anyhow::bail!(
            "{total} points within reach of the structures: at most {} are supported in one run; split the portfolio with --shard",
            u32::MAX
        );
    }
    if n_structures >= u32::MAX as usize {
        anyhow::bail!(
            "{n_structures} structures: at most {} are supported in one run; split the portfolio with --shard",
            u32::MAX - 1
        );
    }
    let (links, ties, surroundings_only) = link_pairs(datasets, index);
    let mut starts = vec![0usize; n_structures + 1];
    for &(s, _) in &links {
        starts[s as usize + 1] += 1;
    }
    for i in 1..starts.len() {
        starts[i] += starts[i - 1];
    }
    let mut fill = starts.clone();
    let mut points = vec![0u32; links.len()];
    for (s, g) in links {
        points[fill[s as usize]] = g;
        fill[s as usize] += 1;
    }
    Ok(Association {
        starts,
        points,
        dataset_offsets,
        ties,
        surroundings_only,
    })
}

/// (structure, global point index) link pairs, the number of tied points and of points only in
/// surroundings rings (of a piece, or of the whole run).
type PieceLinks = (Vec<(u32, u32)>, usize, usize);

/// Every kept point's links as (structure, global point index) pairs, in dataset then point
/// order, with the counts of tied points and of points only in surroundings rings: worked out in
/// parallel in pieces, each with its own scratch buffers, so that nothing is allocated per point.
fn link_pairs(
    datasets: &[ingest::Dataset],
    index: &crate::association::SpatialIndex,
) -> PieceLinks {
    const PIECE: usize = 1 << 12;
    let mut pieces = Vec::new();
    let mut g = 0usize;
    for d in datasets {
        for (k, chunk) in d.points.chunks(PIECE).enumerate() {
            pieces.push((g + k * PIECE, chunk));
        }
        g += d.len();
    }
    let one_piece = |&(first, chunk): &(usize, &[ingest::Point])| {
        let (mut cands, mut l) = (Vec::new(), crate::association::PointLinks::default());
        let (mut pairs, mut ties, mut surroundings_only) = (Vec::new(), 0, 0);
        for (k, p) in chunk.iter().enumerate() {
            index.associate_into(p.x, p.y, &mut cands, &mut l);
            if l.tie {
                ties += 1;
            } else if !l.links.is_empty() && l.links.iter().all(|k| k.role == Role::Surroundings) {
                surroundings_only += 1;
            }
            // Both fit in 32 bits (checked by the caller).
            let g = (first + k) as u32;
            pairs.extend(l.links.iter().map(|k| (k.structure as u32, g)));
        }
        (pairs, ties, surroundings_only)
    };
    let (mut links, mut ties, mut surroundings_only) = (Vec::new(), 0, 0);
    // A few pieces per worker at a time: the pieces' pairs are held only until appended.
    for wave in pieces.chunks(8 * rayon::current_num_threads().max(1)) {
        let parts: Vec<PieceLinks> = wave.par_iter().map(one_piece).collect();
        for (pairs, t, s) in parts {
            links.extend(pairs);
            ties += t;
            surroundings_only += s;
        }
    }
    (links, ties, surroundings_only)
}

/// Everything the assessment stage produced, in structure order.
pub struct Assessed {
    /// Compact records (triggers and change not yet filled).
    pub records: Vec<StructureResult>,
    /// The screening verdict of every point for the points outputs.
    pub points: PointVerdicts,
    /// What explorer.html shows of each detail file, kept so the page need not read the files
    /// back (a few KB per structure).
    pub page_parts: output::explorer::HeldParts,
}

/// Each point's screening verdict by its owning structure — or, for a point only in surroundings
/// rings, by the nearest structure whose ring holds it — packed per dataset (9 bytes a point).
/// Filled by the assessment workers as they go: each point has exactly one such structure, so
/// every slot is written once, by one worker (relaxed atomics only make the sharing safe).
#[derive(Debug, Default)]
pub struct PointVerdicts {
    /// Per dataset, per point: 0 = kept, 1 + index in [`REASONS`] = rejected, [`NO_VERDICT`] =
    /// no structure assessed the point.
    code: Vec<Vec<AtomicU8>>,
    /// Per dataset, per point: vertical velocity, mm/yr (+ up), as `f64` bits; NaN when not
    /// computed.
    velocity: Vec<Vec<AtomicU64>>,
}

/// Rejection reasons in the order of their codes in [`PointVerdicts`].
pub const REASONS: [&str; 6] = [
    assess::reason::LOW_COHERENCE,
    assess::reason::TOO_FEW_EPOCHS,
    assess::reason::MISSING_VALUES,
    assess::reason::UNWRAPPING_JUMP,
    assess::reason::OUTLIER_VELOCITY,
    assess::reason::TIE,
];

/// Code of a point no structure assessed.
pub const NO_VERDICT: u8 = u8::MAX;

impl PointVerdicts {
    /// No verdict for any point of datasets of these sizes.
    fn with_sizes(sizes: impl Iterator<Item = usize> + Clone) -> Self {
        Self {
            code: sizes
                .clone()
                .map(|n| (0..n).map(|_| AtomicU8::new(NO_VERDICT)).collect())
                .collect(),
            velocity: sizes
                .map(|n| (0..n).map(|_| AtomicU64::new(f64::NAN.to_bits())).collect())
                .collect(),
        }
    }

    /// Record a point's verdict.
    fn set(&self, dataset: usize, point: usize, rejected: Option<&'static str>, v: Option<f64>) {
        self.code[dataset][point].store(reason_code(rejected), Ordering::Relaxed);
        self.velocity[dataset][point].store(v.unwrap_or(f64::NAN).to_bits(), Ordering::Relaxed);
    }

    /// `(rejection reason, vertical velocity)` of a point; None when no structure assessed it.
    pub fn get(&self, dataset: usize, point: usize) -> Option<(Option<&'static str>, Option<f64>)> {
        let code = self.code[dataset][point].load(Ordering::Relaxed);
        if code == NO_VERDICT {
            return None;
        }
        let reason = code.checked_sub(1).map(|c| REASONS[usize::from(c)]);
        let v = f64::from_bits(self.velocity[dataset][point].load(Ordering::Relaxed));
        Some((reason, v.is_finite().then_some(v)))
    }
}

fn reason_code(r: Option<&'static str>) -> u8 {
    match r {
        None => 0,
        Some(r) => REASONS
            .iter()
            .position(|x| *x == r)
            .map_or(NO_VERDICT, |i| i as u8 + 1),
    }
}

/// Assess every structure in parallel. Each structure's detail is written to
/// `details_dir/<stem>.json` as soon as it is assessed and then dropped, so memory
/// holds only the compact records whatever the number of structures.
pub fn assess_all(
    p: &Prepared,
    association: &Association,
    details_dir: &Path,
    progress: bool,
) -> Result<Assessed> {
    let Prepared {
        portfolio: pf,
        inputs,
        window,
        ..
    } = p;
    let datasets = &inputs.datasets;
    // A point is in the surroundings of many structures: its statistics are worked out once.
    let ctx = run_context(
        pf,
        datasets,
        *window,
        &inputs.analysis_crs,
        assess::StatsCache::EveryPoint,
    )?;
    let ids: Vec<&str> = inputs
        .structures
        .iter()
        .map(|s| s.raw.id.as_str())
        .collect();
    let stems = output::safe_names::assign(&ids);
    std::fs::create_dir_all(details_dir)
        .with_context(|| format!("cannot create {}", details_dir.display()))?;
    let bar = progress_bar(progress, inputs.structures.len());
    let points = PointVerdicts::with_sizes(datasets.iter().map(ingest::Dataset::len));
    // Collected by index into an exactly sized vector (a fallible collect would gather pieces
    // and copy them together, holding the records twice at the end).
    let records: Vec<Result<(StructureResult, output::explorer::PagePart)>> = inputs
        .structures
        .par_iter()
        .zip(stems.par_iter())
        .map(|(s, stem)| {
            let members: Vec<Member> = association
                .members(s.index)
                .map(|(d, i)| {
                    let l = datasets[d].association[i];
                    let owned = l.structure() == Some(s.index) && l.role() == Role::Structure;
                    Member {
                        dataset: d,
                        point: datasets[d].point(i),
                        role: if owned {
                            Role::Structure
                        } else {
                            Role::Surroundings
                        },
                        point_index: i,
                    }
                })
                .collect();
            let a = assess::assess_structure(&ctx, s, &members, Some(stem.clone()));
            write_detail(details_dir, stem, &a.detail)?;
            let part = output::explorer::PagePart::of_detail(&a.detail)?;
            for v in &a.verdicts {
                if datasets[v.dataset].association[v.point_index].structure() == Some(s.index) {
                    points.set(
                        v.dataset,
                        v.point_index,
                        v.rejected,
                        v.vertical_velocity_mm_per_yr,
                    );
                }
            }
            bar.inc(1);
            Ok((a.record, part))
        })
        .collect();
    bar.finish_and_clear();
    let mut page_parts = output::explorer::HeldParts::with_capacity(records.len());
    let records = (records.into_iter())
        .map(|r| {
            let (record, part) = r?;
            if let Some(rel) = &record.detail_file {
                page_parts.insert(rel.clone(), part);
            }
            Ok(record)
        })
        .collect::<Result<_>>()?;
    Ok(Assessed {
        records,
        points,
        page_parts,
    })
}

fn progress_bar(progress: bool, n: usize) -> indicatif::ProgressBar {
    if !progress {
        return indicatif::ProgressBar::hidden();
    }
    indicatif::ProgressBar::new(n as u64).with_style(
        indicatif::ProgressStyle::with_template(
            "assessing {bar:30} {pos}/{len} structures ({eta})",
        )
        .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
    )
}

/// Write one structure's detail file (compact JSON, one line).
fn write_detail(dir: &Path, stem: &str, detail: &assess::StructureDetail) -> Result<()> {
    let path = dir.join(format!("{stem}.json"));
    // Formatted in memory first (cheaper per write than a file buffer), then written at once.
    let mut text = Vec::with_capacity(128 * 1024);
    serde_json::to_writer(&mut text, detail)?;
    text.push(b'\n');
    std::fs::write(&path, text).with_context(|| format!("cannot write {}", path.display()))
}

/// Triggers, the comparison with `--previous`, the coverage and the portfolio block.
pub fn summarise(
    p: &Prepared,
    association: &Association,
    mut records: Vec<StructureResult>,
    opts: &RunOptions,
) -> Result<Results> {
    let pf = &p.portfolio;
    for r in &mut records {
        let (status, hits, unevaluated) = crate::triggers::evaluate(&pf.triggers, r);
        r.trigger_status = if pf.triggers.is_empty() {
            None
        } else {
            Some(status)
        };
        r.triggers = hits;
        r.assumptions
            .extend(unevaluated.into_iter().map(crate::text::Shared::from));
    }
    let gone = match &opts.previous {
        Some(prev) => compare_previous(prev, &mut records)?,
        None => Vec::new(),
    };
    let (coverage, by_category, by_grade) = tally(p, association, &records);
    let datasets = &p.inputs.datasets;
    let window = p.window;
    let analysis_date = datasets
        .iter()
        .filter_map(|d| d.epochs.iter().filter(|e| **e <= window.end).max())
        .max()
        .map(|d| d.to_string());
    let portfolio = PortfolioResult {
        name: pf.name.clone(),
        analysis_crs: p.inputs.analysis_crs.name(),
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
        datasets: dataset_geometries(pf, datasets),
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
    Ok(Results {
        portfolio,
        structures: records,
    })
}

/// Structures per damage category (`insufficient_data` separate).
type ByCategory = BTreeMap<String, usize>;
/// Structures per evidence grade.
type ByGrade = BTreeMap<String, usize>;

/// The coverage summary and the counts per category and per grade.
fn tally(
    p: &Prepared,
    association: &Association,
    records: &[StructureResult],
) -> (Coverage, ByCategory, ByGrade) {
    let mut coverage = Coverage {
        structures: records.len(),
        ties: association.ties,
        points_surroundings_only: association.surroundings_only,
        ..Default::default()
    };
    for d in &p.inputs.datasets {
        coverage.points_read.insert(d.name.clone(), d.rows_read);
        coverage.points_out_of_reach += out_of_reach(d);
    }
    if association.ties > 0 {
        coverage
            .points_rejected
            .insert(assess::reason::TIE.into(), association.ties);
    }
    let mut by_category = BTreeMap::new();
    let mut by_grade = BTreeMap::new();
    for r in records {
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
    (coverage, by_category, by_grade)
}

/// One structure's own points after the point screens.
pub struct OwnScreen {
    /// Points passing the screens.
    pub kept: usize,
    /// Rejected points by reason.
    pub rejected: BTreeMap<&'static str, usize>,
    /// Datasets of the kept points, ascending.
    pub datasets: Vec<usize>,
}

/// Screen every structure's own points (coherence, epochs, velocity outliers —
/// `assess::screen_members`), in parallel; `plinth check` and the benchmark's ingest phase.
pub fn screen_owned(
    ctx: &RunContext,
    structures: &[ingest::Structure],
    owners: &crate::association::Owners,
) -> Vec<OwnScreen> {
    let datasets = ctx.datasets;
    structures
        .par_iter()
        .enumerate()
        .map(|(si, s)| {
            let members: Vec<Member> = owners
                .owned(si)
                .map(|(d, i)| Member {
                    dataset: d,
                    point: datasets[d].point(i),
                    role: Role::Structure,
                    point_index: i,
                })
                .collect();
            let (verdicts, _) = assess::screen_members(ctx, s, &members);
            let mut rejected: BTreeMap<&'static str, usize> = BTreeMap::new();
            let mut used: Vec<usize> = Vec::new();
            for v in &verdicts {
                match v.rejected {
                    Some(r) => *rejected.entry(r).or_default() += 1,
                    None => used.push(v.dataset),
                }
            }
            let kept = used.len();
            used.dedup();
            OwnScreen {
                kept,
                rejected,
                datasets: used,
            }
        })
        .collect()
}

/// What `plinth check` found after reading, association and point screening.
pub struct CheckSummary {
    /// The inputs read.
    pub prepared: Prepared,
    /// Coverage: points read, out of reach, ties, kept and rejected by the point screens.
    pub coverage: Coverage,
    /// Structures meeting the point, epoch and span minimums after the point screens.
    pub meeting_minimums: usize,
    /// Structures below a minimum, by the first minimum missed (`min_points`, `min_epochs`,
    /// `min_span_years`).
    pub below_minimum: BTreeMap<&'static str, usize>,
}

/// `plinth check`: read the inputs, associate the points with their owners and screen every
/// structure's own points (coherence, epochs, velocity outliers — `assess::screen_members`),
/// without the time-series, metrics or damage stages and without writing anything.
pub fn check(portfolio_path: &Path) -> Result<CheckSummary> {
    let p = prepare(portfolio_path, &RunOptions::default())?;
    let datasets = &p.inputs.datasets;
    let structures = &p.inputs.structures;
    let ctx = run_context(
        &p.portfolio,
        datasets,
        p.window,
        &p.inputs.analysis_crs,
        assess::StatsCache::OnDemand,
    )?;
    let owners = crate::association::Owners::from_datasets(datasets, structures.len());
    let a = &p.portfolio.assessment;
    let screened: Vec<(usize, BTreeMap<&'static str, usize>, Option<&'static str>)> =
        screen_owned(&ctx, structures, &owners)
            .into_iter()
            .map(|o| {
                // The same minimums, in the same order, as `assess::assess_structure`.
                let (epochs, _) = assess::series_extent(&ctx, &o.datasets);
                let below = if o.kept < a.min_points.max(1) {
                    Some("min_points")
                } else if epochs < a.min_epochs {
                    Some("min_epochs")
                } else if p.window.span_years() < a.min_span_years {
                    Some("min_span_years")
                } else {
                    None
                };
                (o.kept, o.rejected, below)
            })
            .collect();
    let mut coverage = Coverage {
        structures: structures.len(),
        ..Default::default()
    };
    for d in datasets {
        coverage.points_read.insert(d.name.clone(), d.rows_read);
        coverage.points_out_of_reach += out_of_reach(d);
        for l in &d.association {
            if l.tie() {
                coverage.ties += 1;
            } else if l.structure().is_some() && l.role() == Role::Surroundings {
                coverage.points_surroundings_only += 1;
            }
        }
    }
    if coverage.ties > 0 {
        coverage
            .points_rejected
            .insert(assess::reason::TIE.into(), coverage.ties);
    }
    let mut meeting_minimums = 0;
    let mut below_minimum: BTreeMap<&'static str, usize> = BTreeMap::new();
    for (kept, rejected, below) in &screened {
        coverage.points_kept += kept;
        match below {
            Some(m) => *below_minimum.entry(m).or_default() += 1,
            None => meeting_minimums += 1,
        }
        for (k, v) in rejected {
            *coverage
                .points_rejected
                .entry((*k).to_string())
                .or_default() += v;
        }
    }
    drop(ctx);
    Ok(CheckSummary {
        prepared: p,
        coverage,
        meeting_minimums,
        below_minimum,
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

/// One input file named by the portfolio with its SHA-256, for the manifest.
#[derive(Debug, Clone)]
pub struct InputDigest {
    /// `portfolio`, `structures` or `dataset`.
    pub role: &'static str,
    /// The dataset's name (datasets only).
    pub name: Option<String>,
    /// The file.
    pub path: PathBuf,
    /// SHA-256, hex.
    pub sha256: String,
}

/// Hash every input the portfolio names on a thread of its own (the manifest needs the digests
/// only at the end, so the hashing overlaps the assessment instead of lengthening the run).
pub fn hash_inputs_in_background(
    pf: &Portfolio,
) -> std::thread::JoinHandle<Result<Vec<InputDigest>>> {
    let mut files = vec![
        ("portfolio", None, pf.file.clone()),
        ("structures", None, pf.structures.path.clone()),
    ];
    for side in crate::ingest::gis::sidecars(&pf.structures.path) {
        files.push(("structures", None, side));
    }
    for d in &pf.datasets {
        files.push(("dataset", Some(d.name.clone()), d.path.clone()));
        for side in crate::ingest::gis::sidecars(&d.path) {
            files.push(("dataset", Some(d.name.clone()), side));
        }
    }
    std::thread::spawn(move || {
        files
            .into_iter()
            .map(|(role, name, path)| {
                let sha256 = output::sha256_file(&path)?;
                Ok(InputDigest {
                    role,
                    name,
                    path,
                    sha256,
                })
            })
            .collect()
    })
}

/// The manifest document.
pub fn manifest(
    a: &Analysis,
    opts: &RunOptions,
    digests: &[InputDigest],
) -> Result<serde_json::Value> {
    let pf = &a.portfolio;
    let inputs: Vec<serde_json::Value> = digests
        .iter()
        .map(|d| {
            let mut v = serde_json::json!({"role": d.role});
            if let Some(name) = &d.name {
                v["name"] = serde_json::json!(name);
            }
            v["path"] = serde_json::json!(d.path.display().to_string());
            v["sha256"] = serde_json::json!(d.sha256);
            v
        })
        .collect();
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
            "no_points_geojson": opts.no_points_geojson,
        },
        "warnings": a.warnings.items,
    }))
}

/// The whole `assess` job: prepare, then assess into a staging folder next to `out` (each
/// structure's detail file written as soon as it is assessed), write the portfolio outputs and
/// the reports, and swap the folder in atomically. Any failure abandons the staging folder.
pub fn assess_into(portfolio_path: &Path, opts: &RunOptions, out: &Path) -> Result<Analysis> {
    let p = prepare(portfolio_path, opts)?;
    let target = check_out(out, portfolio_path, Some(&p.portfolio), opts)?;
    let staging = output::Staging::new(&target)?;
    let digests = hash_inputs_in_background(&p.portfolio);
    let res = (|| -> Result<Analysis> {
        let details = staging.dir.join(assess::DETAILS_DIR);
        let association = associate(&p)?;
        let assessed = assess_all(&p, &association, &details, opts.progress)?;
        let results = summarise(&p, &association, assessed.records, opts)?;
        drop(association);
        let a = Analysis::new(p, results, assessed.points);
        write_outputs(&a, opts, &staging.dir, digests, &assessed.page_parts)?;
        Ok(a)
    })();
    match res {
        Ok(a) => {
            staging.commit()?;
            Ok(a)
        }
        Err(e) => {
            staging.abandon();
            Err(e)
        }
    }
}

/// Write the portfolio outputs and the reports into the staging folder `d` (the detail files
/// are already there). Two branches run at the same time: the points, results and GeoPackage
/// files (the GeoPackage is one SQLite writer, the longest of them), and the manifest (once the
/// inputs' digests are ready) followed by explorer.html, built from the page parts the
/// assessment kept. The reports come last, on every worker; they read the detail files back.
fn write_outputs(
    a: &Analysis,
    opts: &RunOptions,
    d: &Path,
    digests: std::thread::JoinHandle<Result<Vec<InputDigest>>>,
    page_parts: &output::explorer::HeldParts,
) -> Result<()> {
    let (tables, page) = rayon::join(
        || write_tables(a, opts, d),
        || -> Result<Vec<InputDigest>> {
            let digests = digests
                .join()
                .map_err(|_| anyhow::anyhow!("hashing the inputs failed (the thread stopped)"))??;
            let m = manifest(a, opts, &digests)?;
            output::write_file(
                d,
                "manifest.json",
                (serde_json::to_string_pretty(&m)? + "\n").as_bytes(),
            )?;
            write_explorer(a, opts, d, &m["inputs"], page_parts)?;
            Ok(digests)
        },
    );
    tables?;
    let digests = page?;
    // PDF reports (report::pipeline) read the detail files back from `d`.
    if !opts.no_reports {
        let sha256: Vec<(PathBuf, String)> = digests
            .iter()
            .map(|g| (g.path.clone(), g.sha256.clone()))
            .collect();
        crate::report::pipeline::render_reports(
            &a.report_input(&sha256),
            d,
            opts.jobs,
            opts.progress,
        )?;
    }
    Ok(())
}

/// The points files, the results files and results.gpkg, written at the same time.
fn write_tables(a: &Analysis, opts: &RunOptions, d: &Path) -> Result<()> {
    let (points, (results, gpkg)) = rayon::join(
        || write_points(a, d, !opts.no_points_geojson),
        || rayon::join(|| write_results(a, d), || write_gpkg(a, d)),
    );
    points?;
    results?;
    gpkg
}

/// explorer.html (output::explorer) of this run, from the page parts kept while assessing
/// (`page_parts`; a structure missing there is read from its detail file in `d`).
fn write_explorer(
    a: &Analysis,
    opts: &RunOptions,
    d: &Path,
    inputs: &serde_json::Value,
    page_parts: &output::explorer::HeldParts,
) -> Result<()> {
    let page = ExplorerPage {
        portfolio: &a.portfolio,
        results: &a.results,
        structures: &a.inputs.structures,
        analysis_crs: &a.inputs.analysis_crs,
        window: a.window,
        inputs,
        reports: !opts.no_reports,
        held: Some(page_parts),
    };
    page.write(d)
}

/// What explorer.html is built from, for a run and for `merge` alike.
pub struct ExplorerPage<'a> {
    /// The portfolio (works, report text, template folder).
    pub portfolio: &'a Portfolio,
    /// The results document.
    pub results: &'a Results,
    /// The structures with their footprints in the analysis CRS (any order).
    pub structures: &'a [ingest::Structure],
    /// The analysis CRS.
    pub analysis_crs: &'a crate::coords::Crs,
    /// The assessment window.
    pub window: Window,
    /// The manifest's `inputs` list.
    pub inputs: &'a serde_json::Value,
    /// True when the folder holds the PDF reports.
    pub reports: bool,
    /// The detail files' parts the run kept (`None`: read them all back, as `merge` does).
    pub held: Option<&'a output::explorer::HeldParts>,
}

impl ExplorerPage<'_> {
    /// Write explorer.html into `d` (whose detail files are written): the footprints in results
    /// order, the works projected into the analysis CRS, the cautions for the window.
    pub fn write(&self, d: &Path) -> Result<()> {
        let pf = self.portfolio;
        let works = match &pf.works {
            Some(w) => Some(
                crate::works::WorksGeometry::project(w, self.analysis_crs, &pf.file)
                    .context("planned works for the explorer")?,
            ),
            None => None,
        };
        let by_id: std::collections::HashMap<&str, &geo::MultiPolygon<f64>> = (self.structures)
            .iter()
            .map(|s| (s.raw.id.as_str(), &s.footprint))
            .collect();
        let empty = geo::MultiPolygon::<f64>(vec![]);
        let input = output::explorer::ExplorerInput {
            results: self.results,
            footprints: (self.results.structures.iter())
                .map(|r| by_id.get(r.id.as_str()).copied().unwrap_or(&empty))
                .collect(),
            works: works.as_ref(),
            inputs: self.inputs.clone(),
            cautions: crate::report::pipeline::portfolio_cautions(pf, self.window)?,
            reports: self.reports,
            held: self.held,
        };
        output::explorer::write(d, &input)
    }
}

/// The structures' WGS84 footprints in input (= results) order, for the GIS outputs.
fn footprints_wgs84(a: &Analysis) -> Vec<&geo::MultiPolygon<f64>> {
    (a.inputs.structures.iter())
        .map(|s| &s.footprint_wgs84)
        .collect()
}

/// results.gpkg: the structures and points layers (output::gpkg).
fn write_gpkg(a: &Analysis, d: &Path) -> Result<()> {
    let to_wgs =
        crate::coords::Transformer::new(&a.inputs.analysis_crs, &crate::coords::Crs::wgs84());
    let fps = footprints_wgs84(a);
    output::gpkg::write_results(
        d,
        &a.results.structures,
        &fps,
        (
            &point_pieces(a),
            |(di, range): &(usize, std::ops::Range<usize>)| {
                a.point_rows_of(*di, range.clone(), &to_wgs)
            },
        ),
        a.results.portfolio.analysis_date.as_deref(),
    )
}

/// The points of every dataset in pieces of [`POINT_PIECE`] (dataset index, point range), in
/// the order of points.csv: the unit the points outputs are formatted in parallel by.
fn point_pieces(a: &Analysis) -> Vec<(usize, std::ops::Range<usize>)> {
    a.inputs
        .datasets
        .iter()
        .enumerate()
        .flat_map(|(di, ds)| {
            (0..ds.len())
                .step_by(POINT_PIECE)
                .map(move |s| (di, s..(s + POINT_PIECE).min(ds.len())))
        })
        .collect()
}

/// Points in a piece of the points outputs.
const POINT_PIECE: usize = 1 << 14;

/// results.json, results.csv and results.geojson.
fn write_results(a: &Analysis, d: &Path) -> Result<()> {
    output::write_with(d, "results.json", |w| {
        output::results_json_to(&a.results, w)
    })?;
    output::write_with(d, "results.csv", |w| output::results_csv_to(&a.results, w))?;
    let fps = footprints_wgs84(a);
    output::write_with(d, "results.geojson", |w| {
        output::results_geojson_to(&a.results, &fps, w)
    })
}

/// points.csv and points.geojson (unless `geojson` is false), written together: pieces of a few
/// thousand points are formatted in parallel, a few per worker at a time (bounded memory), and
/// written in order.
fn write_points(a: &Analysis, d: &Path, geojson: bool) -> Result<()> {
    use std::io::Write;
    let to_wgs =
        crate::coords::Transformer::new(&a.inputs.analysis_crs, &crate::coords::Crs::wgs84());
    let pieces = point_pieces(a);
    let write_both = |csv: &mut dyn Write, mut geo: Option<&mut dyn Write>| -> Result<()> {
        let mut head = Vec::new();
        output::points_csv_header(&mut head)?;
        csv.write_all(&head)?;
        if let Some(g) = geo.as_mut() {
            g.write_all(output::POINTS_GEOJSON_HEAD)?;
        }
        let mut first = true;
        for wave in pieces.chunks(4 * rayon::current_num_threads()) {
            let texts: Vec<Result<(Vec<u8>, Vec<u8>)>> = wave
                .par_iter()
                .map(|(di, range)| {
                    let (mut c, mut g) = (Vec::new(), Vec::new());
                    output::points_csv_rows(a.point_rows_of(*di, range.clone(), &to_wgs), &mut c)?;
                    if geojson {
                        output::points_geojson_features(
                            a.point_rows_of(*di, range.clone(), &to_wgs),
                            &mut g,
                        )?;
                    }
                    Ok((c, g))
                })
                .collect();
            for t in texts {
                let (c, g) = t?;
                csv.write_all(&c)?;
                let Some(geo) = geo.as_mut() else { continue };
                // Each feature comes with a leading comma; the file's first one goes without.
                let g = if first && !g.is_empty() {
                    first = false;
                    &g[1..]
                } else {
                    &g[..]
                };
                geo.write_all(g)?;
            }
        }
        if let Some(g) = geo.as_mut() {
            g.write_all(output::POINTS_GEOJSON_TAIL)?;
        }
        Ok(())
    };
    output::write_with(d, "points.csv", |csv| {
        if geojson {
            output::write_with(d, "points.geojson", |g| write_both(csv, Some(g)))
        } else {
            write_both(csv, None)
        }
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn point_verdict_codes_round_trip_every_reason() {
        let v = PointVerdicts::with_sizes([REASONS.len() + 2].into_iter());
        assert_eq!(v.get(0, 0), None, "no structure assessed the point");
        v.set(0, 0, None, Some(-1.25));
        assert_eq!(v.get(0, 0), Some((None, Some(-1.25))));
        for (i, r) in REASONS.iter().enumerate() {
            v.set(0, i + 1, Some(r), None);
            assert_eq!(v.get(0, i + 1), Some((Some(*r), None)), "{r}");
        }
        assert_eq!(reason_code(Some("not a reason")), NO_VERDICT);
    }
}
