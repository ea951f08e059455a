//! Plinth: from InSAR measurement points to a movement and damage verdict per structure.
//!
//! Data flows one way; each stage hands the next a named struct:
//! ingest → coords → association → series → metrics → damage (+ criteria) → report.
pub mod criteria;
pub mod damage;
pub mod grade;
pub mod metrics;
pub mod report;
pub mod series;
