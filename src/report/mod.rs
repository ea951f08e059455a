//! Report stage: turns per-structure and portfolio results into PDF reports, rendered
//! in-process with typst.
//!
//! Owns: the report model (the JSON a template receives), the plotters SVG charts, our own
//! `typst::World`, PDF export, batch rendering on plain threads, and the user-editable
//! narrative/caution text blocks. Does NOT own: any computation of movement or damage (it
//! only formats what the pipeline computed), file writing of the finished PDFs (the caller
//! receives bytes), or the results record itself.
//!
//! Files:
//! - [`build`]: adapter from the results record to the report model.
//! - [`mod@format`]: numbers to strings with units and fixed decimals.
//! - [`model`]: `AssetReport`, `PortfolioReport` and the plain chart data structs.
//! - [`charts`]: one SVG chart per file (time series, map, profile, interaction, portfolio map).
//! - [`text`]: minijinja text blocks rendered to plain text.
//! - [`world`]: the typst `World` (fonts, templates, virtual files, file-access rules).
//! - [`render`]: `render_pdf`, `render_batch`, diagnostics with file:line:col.
//! - [`pipeline`]: from a finished analysis to the PDFs and model JSON in the output folder.
//! - [`works`]: the planned-works section and overview columns from the works screening.
//! - [`references`]: full citations for the provenance section.
//! - [`sample`]: invented sample data for tests and template previews.
//!
//! Injection safety: templates are static `.typ` files; every per-report value reaches
//! typst as data through `json("/data.json")` and is never parsed as markup.

pub mod build;
pub mod charts;
pub mod format;
pub mod model;
pub mod pipeline;
pub mod references;
pub mod render;
pub mod sample;
pub mod text;
pub mod works;
pub mod world;

pub use model::{AssetCharts, AssetReport, PortfolioCharts, PortfolioReport};
pub use render::{
    BatchOutput, BatchSummary, RenderJob, RenderedPdf, ReportJob, render_batch, render_pdf,
};
pub use world::{ChartFile, ReportShared};

/// Everything that can go wrong while building or rendering a report.
#[derive(Debug, thiserror::Error)]
pub enum ReportError {
    /// The named template exists neither in the user folder nor among the built-in ones.
    #[error("report template `{name}` not found ({searched})")]
    TemplateNotFound {
        /// Template file name, e.g. `asset.typ`.
        name: String,
        /// Where it was looked for.
        searched: String,
    },
    /// The user template folder could not be used.
    #[error("template folder `{path}`: {reason}")]
    TemplateFolder {
        /// The folder as given.
        path: String,
        /// Why it cannot be used.
        reason: String,
    },
    /// typst reported errors; `diagnostics` holds them as `file:line:col: message` plus the
    /// source line.
    #[error("report template `{template}` failed to compile:\n{diagnostics}")]
    Compile {
        /// Main template file name.
        template: String,
        /// Human-readable diagnostics, first error first.
        diagnostics: String,
    },
    /// The PDF writer rejected the laid-out document.
    #[error("PDF export of `{ident}` failed:\n{diagnostics}")]
    Pdf {
        /// Document identifier (structure id or portfolio name).
        ident: String,
        /// Human-readable diagnostics.
        diagnostics: String,
    },
    /// A chart could not be drawn from its data.
    #[error("chart `{chart}`: {reason}")]
    Chart {
        /// Chart name.
        chart: &'static str,
        /// What was wrong.
        reason: String,
    },
    /// The report model could not be built or serialised.
    #[error("report data for `{ident}`: {reason}")]
    Model {
        /// Document identifier.
        ident: String,
        /// What was wrong.
        reason: String,
    },
    /// A narrative/caution text block failed to load or render.
    #[error("text block `{name}`: {reason}")]
    Text {
        /// Text block name, e.g. `cautions.j2`.
        name: String,
        /// What was wrong (with line number where minijinja gives one).
        reason: String,
    },
    /// A batch worker thread stopped unexpectedly.
    #[error("report worker failed: {0}")]
    Worker(String),
}
