//! Plinth: from InSAR measurement points to a movement and damage verdict per structure.
//!
//! Data flows one way; each stage hands the next a named struct:
//! `portfolio` → `ingest` → `coords` → `association` → `series` → `metrics` → `damage`
//! (+ `criteria`) → `verdict` → `grade`/`triggers` → `results` → `output`/`report`.
//! `assess` joins the computation stages for one structure; `run` drives a whole job; `cli` is the
//! command line.
pub mod assess;
pub mod association;
pub mod bench;
pub mod cli;
pub mod coords;
pub mod criteria;
pub mod damage;
pub mod error;
pub mod grade;
pub mod ingest;
pub mod init;
pub mod merge;
pub mod metrics;
pub mod output;
pub mod portfolio;
pub mod report;
pub mod results;
pub mod run;
pub mod series;
pub mod shard;
pub mod synth;
pub mod text;
pub mod triggers;
pub mod verdict;
pub mod works;
