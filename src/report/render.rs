//! Compiling a template with typst and exporting the PDF; batches on plain threads.
//!
//! Owns: [`render_pdf`] (one document: compile, export with a fixed identity, evict the cache),
//! the preparation of a report job (draw charts, fill figure slots, serialise the model),
//! [`render_batch`] (N plain `std::thread` workers fed by a bounded channel, optional progress
//! bar) and the human-readable diagnostics (`file:line:col: message`, the source line, hints).
//!
//! Does not own: writing files (the batch hands each PDF to the caller's sink as soon as it is
//! done, so memory stays flat), building the models (see [`super::model`]).
//!
//! Choices (typst-embedding.md §3–§6):
//! - PDF identity: `ident` = the asset id (stable document ID), creator "Plinth `<version>`",
//!   timestamp = the report date from the data (never the clock), so two renders of the same
//!   model are byte-identical.
//! - `comemo::evict(CACHE_AGE)` after every document: typst's cache keeps what the last few
//!   documents used and drops the rest, so the layout of what repeats from report to report
//!   (static text, table headers, cautions, references; the templates keep per-report data out
//!   of set rules for this) is reused while memory stays bounded. Without any eviction memory
//!   grows by megabytes per report (docs/performance.md, "Report rendering").
//! - Threads, not rayon: typst already uses the global rayon pool inside one compile; running
//!   reports inside rayon tasks nests them and multiplies memory.

use std::sync::mpsc;
use std::sync::{Arc, Mutex};

use typst::diag::{Severity, SourceDiagnostic};
use typst::foundations::{Datetime, Smart};
use typst::syntax::{DiagSpan, DiagSpanKind, FileId, Lines};
use typst::{World, WorldExt};
use typst_layout::PagedDocument;
use typst_pdf::{PdfOptions, Timestamp};

use super::ReportError;
use super::charts;
use super::model::{
    AssetCharts, AssetReport, FigureSlot, PortfolioCharts, PortfolioReport, ReportDate, tool_label,
};
use super::world::{ChartFile, ReportShared, ReportWorld};

/// Everything one document needs, ready for typst.
#[derive(Debug, Clone)]
pub struct RenderJob {
    /// Template file name, e.g. `asset.typ`.
    pub template: String,
    /// Stable document identifier (structure id, or portfolio name for the overview).
    pub ident: String,
    /// Report date (from the data).
    pub date: ReportDate,
    /// The model JSON served as `/data.json`.
    pub data_json: String,
    /// Chart SVGs at their fixed virtual names.
    pub charts: Vec<(ChartFile, String)>,
}

/// A finished PDF and any typst warnings (tests treat warnings as errors).
#[derive(Debug, Clone)]
pub struct RenderedPdf {
    /// The PDF bytes.
    pub pdf: Vec<u8>,
    /// Warnings, formatted like errors.
    pub warnings: Vec<String>,
}

/// Compiles `job.template` with the job's data and charts and exports the PDF.
///
/// A broken template yields [`ReportError::Compile`] with `file:line:col`, the source line and
/// hints; no PDF is produced and nothing panics.
pub fn render_pdf(shared: &ReportShared, job: &RenderJob) -> Result<RenderedPdf, ReportError> {
    let world = ReportWorld::new(
        shared,
        &job.template,
        job.data_json.clone(),
        job.charts.clone(),
        job.date,
    )?;
    let result = compile_and_export(&world, job);
    // Evict even on failure, so a failing batch does not accumulate cache either.
    typst::comemo::evict(CACHE_AGE);
    result
}

/// Cache entries not used during the last `CACHE_AGE` documents are evicted after each one.
/// The eviction clock is process-wide, so with N worker threads an entry survives about
/// `CACHE_AGE / N` documents per thread. 4 measured best of 0, 1, 4 and 10 on the small
/// benchmark city with little memory cost (docs/performance.md, "Report rendering").
const CACHE_AGE: usize = 4;

fn compile_and_export(
    world: &ReportWorld<'_>,
    job: &RenderJob,
) -> Result<RenderedPdf, ReportError> {
    let warned = typst::compile::<PagedDocument>(world);
    let warnings: Vec<String> = warned
        .warnings
        .iter()
        .map(|d| format_diagnostic(world, d))
        .collect();
    let document = warned.output.map_err(|errors| ReportError::Compile {
        template: job.template.clone(),
        diagnostics: format_all(world, &errors),
    })?;
    let timestamp = u8::try_from(job.date.month)
        .ok()
        .zip(u8::try_from(job.date.day).ok())
        .and_then(|(m, d)| Datetime::from_ymd(job.date.year, m, d))
        .map(Timestamp::new_utc);
    let options = PdfOptions {
        ident: Smart::Custom(job.ident.clone()),
        creator: Smart::Custom(Some(tool_label())),
        timestamp,
        ..PdfOptions::default()
    };
    let pdf = typst_pdf::pdf(&document, &options).map_err(|errors| ReportError::Pdf {
        ident: job.ident.clone(),
        diagnostics: format_all(world, &errors),
    })?;
    Ok(RenderedPdf { pdf, warnings })
}

fn format_all(world: &ReportWorld<'_>, diags: &[SourceDiagnostic]) -> String {
    diags
        .iter()
        .map(|d| format_diagnostic(world, d))
        .collect::<Vec<_>>()
        .join("\n")
}

/// `/asset.typ:12:5` plus the source line, for a span that points into a file.
fn locate(world: &ReportWorld<'_>, span: DiagSpan) -> Option<(String, String)> {
    let id: FileId = match span.get() {
        DiagSpanKind::Detached => return None,
        DiagSpanKind::Number { id, .. } | DiagSpanKind::Range { id, .. } => id,
    };
    let range = world.range(span)?;
    let text: String = match world.source(id) {
        Ok(source) => source.text().to_string(),
        Err(_) => {
            let bytes = world.file(id).ok()?;
            String::from_utf8_lossy(bytes.as_slice()).into_owned()
        }
    };
    let lines = Lines::new(text);
    let (line, col) = lines.byte_to_line_column(range.start)?;
    let line_text = lines
        .line_to_range(line)
        .and_then(|r| lines.text().get(r))
        .unwrap_or("")
        .trim_end()
        .to_string();
    Some((
        format!("{}:{}:{}", id.vpath().get_with_slash(), line + 1, col + 1),
        line_text,
    ))
}

/// One diagnostic as text: `error: /asset.typ:3:10: unclosed delimiter`, the source line with
/// a caret line, hints (typst CLI-specific ones dropped) and the call trace.
pub(crate) fn format_diagnostic(world: &ReportWorld<'_>, diag: &SourceDiagnostic) -> String {
    let severity = match diag.severity {
        Severity::Error => "error",
        Severity::Warning => "warning",
    };
    let mut out = match locate(world, diag.span) {
        Some((loc, line)) => format!("{severity}: {loc}: {}\n    | {line}", diag.message),
        None => format!("{severity}: {}", diag.message),
    };
    for hint in &diag.hints {
        // Hints written for typst's own command line do not apply to Plinth.
        if hint.v.contains("--root") || hint.v.contains("--package") {
            continue;
        }
        out.push_str(&format!("\n    = hint: {}", hint.v));
    }
    for point in &diag.trace {
        match locate(world, DiagSpan::from(point.span)) {
            Some((loc, _)) => out.push_str(&format!("\n    = {} at {loc}", point.v)),
            None => out.push_str(&format!("\n    = {}", point.v)),
        }
    }
    out
}

// ---------------------------------------------------------------------------------------------
// Report jobs: model + chart data → RenderJob
// ---------------------------------------------------------------------------------------------

/// A report to produce: the model, its chart data and the template to use.
#[derive(Debug, Clone)]
pub enum ReportJob {
    /// One structure.
    Asset {
        /// Template file name (normally `asset.typ`).
        template: String,
        /// The model.
        model: Box<AssetReport>,
        /// Chart data.
        charts: Box<AssetCharts>,
    },
    /// The portfolio overview.
    Portfolio {
        /// Template file name (normally `portfolio.typ`).
        template: String,
        /// The model.
        model: Box<PortfolioReport>,
        /// Chart data.
        charts: Box<PortfolioCharts>,
    },
    /// Already prepared.
    Prepared(Box<RenderJob>),
}

impl ReportJob {
    /// A structure report with the built-in template name.
    pub fn asset(model: AssetReport, charts: AssetCharts) -> Self {
        Self::Asset {
            template: "asset.typ".to_string(),
            model: Box::new(model),
            charts: Box::new(charts),
        }
    }

    /// A portfolio overview with the built-in template name.
    pub fn portfolio(model: PortfolioReport, charts: PortfolioCharts) -> Self {
        Self::Portfolio {
            template: "portfolio.typ".to_string(),
            model: Box::new(model),
            charts: Box::new(charts),
        }
    }

    /// The document identifier.
    pub fn ident(&self) -> String {
        match self {
            Self::Asset { model, .. } => model.structure.id.clone(),
            Self::Portfolio { model, .. } => model.meta.portfolio_name.clone(),
            Self::Prepared(job) => job.ident.clone(),
        }
    }

    /// Draws the charts, fills the figure slots from what was drawn, and serialises the model.
    /// A chart that cannot be drawn becomes a "not computed" figure; the report still renders.
    /// Returns the prepared job and the final model JSON (for writing beside the PDF).
    pub fn prepare(self) -> Result<RenderJob, ReportError> {
        match self {
            Self::Prepared(job) => Ok(*job),
            Self::Asset {
                template,
                mut model,
                charts,
            } => {
                let mut figures = charts.figure_slots();
                let mut svgs = Vec::new();
                if let Ok(c) = &charts.map {
                    take(
                        &mut svgs,
                        &mut figures.map,
                        ChartFile::Map,
                        charts::map::draw(c),
                    );
                }
                if let Ok(c) = &charts.timeseries {
                    take(
                        &mut svgs,
                        &mut figures.timeseries,
                        ChartFile::TimeSeries,
                        charts::timeseries::draw(c),
                    );
                }
                let files = [ChartFile::ProfileA, ChartFile::ProfileB];
                for (i, file) in files.iter().enumerate() {
                    if let (Some(Ok(c)), Some(slot)) =
                        (charts.profiles.get(i), figures.profiles.get_mut(i))
                    {
                        take(&mut svgs, slot, *file, charts::profile::draw(c));
                    }
                }
                if let Ok(c) = &charts.interaction {
                    take(
                        &mut svgs,
                        &mut figures.interaction,
                        ChartFile::Interaction,
                        charts::interaction::draw(c),
                    );
                }
                model.figures = figures;
                if let (Some(view), Some(w)) = (model.works.as_mut(), &charts.works) {
                    if let Ok(c) = &w.plan {
                        take(
                            &mut svgs,
                            &mut view.plan,
                            ChartFile::WorksPlan,
                            charts::works::draw_plan(c),
                        );
                    }
                    if let Ok(c) = &w.comparison {
                        take(
                            &mut svgs,
                            &mut view.comparison_chart,
                            ChartFile::WorksComparison,
                            charts::works::draw_comparison(c),
                        );
                    }
                }
                Ok(RenderJob {
                    template,
                    ident: model.structure.id.clone(),
                    date: model.meta.report_date_parts,
                    data_json: model.to_json()?,
                    charts: svgs,
                })
            }
            Self::Portfolio {
                template,
                mut model,
                charts,
            } => {
                let mut slot = charts.figure_slot();
                let mut svgs = Vec::new();
                if let Ok(c) = &charts.map {
                    take(
                        &mut svgs,
                        &mut slot,
                        ChartFile::PortfolioMap,
                        charts::portfolio_map::draw(c),
                    );
                }
                model.map = slot;
                Ok(RenderJob {
                    template,
                    ident: model.meta.portfolio_name.clone(),
                    date: model.meta.report_date_parts,
                    data_json: model.to_json()?,
                    charts: svgs,
                })
            }
        }
    }
}

fn take(
    svgs: &mut Vec<(ChartFile, String)>,
    slot: &mut FigureSlot,
    file: ChartFile,
    drawn: Result<String, ReportError>,
) {
    match drawn {
        Ok(svg) => svgs.push((file, svg)),
        Err(e) => *slot = FigureSlot::missing(file, &format!("chart could not be drawn ({e})")),
    }
}

// ---------------------------------------------------------------------------------------------
// Batches
// ---------------------------------------------------------------------------------------------

/// One finished (or failed) document of a batch, handed to the sink.
#[derive(Debug)]
pub struct BatchOutput {
    /// Position of the job in the input order.
    pub index: usize,
    /// Document identifier.
    pub ident: String,
    /// The prepared job's model JSON (when preparation succeeded), for writing beside the PDF.
    pub data_json: Option<String>,
    /// The PDF or the error.
    pub result: Result<RenderedPdf, ReportError>,
}

/// What a batch did.
#[derive(Debug, Default, Clone, PartialEq, Eq)]
pub struct BatchSummary {
    /// Documents rendered.
    pub rendered: usize,
    /// Documents that failed (index, ident), in input order.
    pub failed: Vec<(usize, String)>,
}

/// Renders `jobs` on `n_threads` plain OS threads (at least 1) and hands every result to
/// `sink` on the calling thread, in completion order, as soon as it is ready.
///
/// Jobs are pulled lazily through a bounded channel, so only a few models and PDFs are in
/// memory at once. One failing document does not stop the batch. A progress bar is drawn on
/// stderr only when `progress` is true (the caller decides, e.g. only on a terminal).
pub fn render_batch<I, F>(
    shared: &ReportShared,
    jobs: I,
    n_threads: usize,
    progress: bool,
    mut sink: F,
) -> BatchSummary
where
    I: IntoIterator<Item = ReportJob>,
    I::IntoIter: Send,
    F: FnMut(BatchOutput),
{
    let n_threads = n_threads.max(1);
    let jobs = jobs.into_iter();
    let bar = progress.then(|| {
        let bar = match jobs.size_hint() {
            (lo, Some(hi)) if lo == hi => indicatif::ProgressBar::new(lo as u64),
            _ => indicatif::ProgressBar::new_spinner(),
        };
        bar.set_draw_target(indicatif::ProgressDrawTarget::stderr());
        if let Ok(style) =
            indicatif::ProgressStyle::with_template("{prefix} [{bar:30}] {pos}/{len} {msg}")
        {
            bar.set_style(style.progress_chars("=> "));
        }
        bar.set_prefix("reports");
        bar
    });
    let mut summary = BatchSummary::default();
    std::thread::scope(|scope| {
        let (job_tx, job_rx) = mpsc::sync_channel::<(usize, ReportJob)>(n_threads * 2);
        let (out_tx, out_rx) = mpsc::sync_channel::<BatchOutput>(n_threads * 2);
        let job_rx = Arc::new(Mutex::new(job_rx));
        scope.spawn(move || {
            for (index, job) in jobs.enumerate() {
                if job_tx.send((index, job)).is_err() {
                    break;
                }
            }
        });
        for _ in 0..n_threads {
            let job_rx = Arc::clone(&job_rx);
            let out_tx = out_tx.clone();
            scope.spawn(move || {
                loop {
                    let next = match job_rx.lock() {
                        Ok(rx) => rx.recv(),
                        Err(_) => break,
                    };
                    let Ok((index, job)) = next else { break };
                    let ident = job.ident();
                    let output = match job.prepare() {
                        Ok(prepared) => BatchOutput {
                            index,
                            ident,
                            result: render_pdf(shared, &prepared),
                            data_json: Some(prepared.data_json),
                        },
                        Err(e) => BatchOutput {
                            index,
                            ident,
                            data_json: None,
                            result: Err(e),
                        },
                    };
                    if out_tx.send(output).is_err() {
                        break;
                    }
                }
            });
        }
        drop(out_tx);
        for output in out_rx {
            match &output.result {
                Ok(_) => summary.rendered += 1,
                Err(_) => summary.failed.push((output.index, output.ident.clone())),
            }
            if let Some(bar) = &bar {
                bar.set_message(output.ident.clone());
                bar.inc(1);
            }
            sink(output);
        }
    });
    if let Some(bar) = bar {
        bar.finish_and_clear();
    }
    summary.failed.sort();
    summary
}
