//! Synthetic InSAR scenarios with a known truth: the generator behind tests, the demo portfolio
//! and the benchmark data.
//!
//! Owns an invented scenario model (structures with planted movement, a tunnel trough, two viewing
//! geometries, noise and data defects), deterministic point placement and series generation from a
//! seed (`rand_chacha`, no clock), writers for the exact input formats Plinth reads (portfolio
//! TOML, footprints GeoJSON, wide points CSV) and the planted truth (`truth.json` and Rust
//! structs). It re-implements the few relations it needs (tangent plane, LOS vector, deep-beam
//! factors) instead of calling the modules it is meant to test.
//!
//! It does not read portfolios or assess anything; it is used by `plinth demo` and by tests.
//!
//! - [`model`]: the scenario and its noise-free displacement field;
//! - [`generate`]: point placement and LOS series;
//! - [`truth`]: planted period quantities and the expected damage category;
//! - [`mod@write`]: file writers;
//! - [`demo`]: the demo portfolio; [`mod@bench`]: large benchmark inputs, streamed.

pub mod bench;
pub mod demo;
pub mod frame;
pub mod generate;
pub mod model;
pub mod shapes;
pub mod truth;
pub mod write;

/// What went wrong while building or writing a synthetic scenario.
#[derive(Debug, thiserror::Error)]
pub enum SynthError {
    /// The scenario definition is inconsistent.
    #[error("synthetic scenario: {0}")]
    Scenario(String),
    /// A point could not be placed under the association rules.
    #[error(
        "synthetic scenario: cannot place a {role} point for structure `{structure}` (no room under the buffer rules)"
    )]
    Placement {
        /// Structure id.
        structure: String,
        /// Point role.
        role: String,
    },
    /// Writing a file failed.
    #[error("cannot write {path}: {source}")]
    Io {
        /// File being written.
        path: std::path::PathBuf,
        /// Underlying error.
        source: std::io::Error,
    },
}
