//! InSAR geometry and time-series analysis (being written).
pub mod aggregate;
pub mod breakpoint;
pub mod decompose;
pub mod fit;
pub mod jumps;
pub mod los;
pub mod period;
pub mod project;
pub mod resample;
pub mod stats;
