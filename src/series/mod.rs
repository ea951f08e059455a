//! InSAR geometry and time-series analysis (being written).
pub mod decompose;
pub mod fit;
pub mod los;
pub mod project;
pub mod stats;
