//! Command-line interface: clap definitions (the doc comments are the help text), resolution of
//! arguments into a [`crate::run::RunOptions`], and the messages printed to the terminal.
//!
//! Exit codes (also in README.md and the man page):
//! - 0: success.
//! - 1: the run failed after reading its inputs (e.g. an output could not be written); the
//!   output folder keeps its previous contents.
//! - 2: bad input or usage: a file, line/feature or key is named with a hint; nothing was written.
//!   Also a refused output folder (`output::guard`): an existing file, a folder Plinth cannot
//!   prove it wrote, or one that is, holds or lies inside an input.

use std::io::IsTerminal;
use std::path::PathBuf;

use clap::{Parser, Subcommand};

/// Plinth turns InSAR measurement points into a movement and damage verdict per structure.
#[derive(Debug, Parser)]
#[command(name = "plinth", version, about, long_about = None, after_help = EXIT_CODES)]
pub struct Cli {
    /// The command.
    #[command(subcommand)]
    pub command: Command,
    /// Print nothing but errors.
    #[arg(long, short, global = true)]
    pub quiet: bool,
    /// Worker threads (default: all cores).
    #[arg(long, short, global = true, value_name = "N")]
    pub jobs: Option<usize>,
}

/// Exit codes shown in `--help`.
pub const EXIT_CODES: &str = "Exit codes: 0 success; 1 run failed after reading inputs (previous outputs kept); 2 bad input or usage (nothing written).";

/// Subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Assess every structure of a portfolio and write results (and reports) to a folder.
    Assess {
        /// The portfolio file (TOML).
        portfolio: PathBuf,
        /// Output folder: a new or empty folder, or an earlier Plinth output folder (replaced as a
        /// whole only when the run succeeds). Anything else is refused.
        #[arg(long, short, value_name = "DIR")]
        out: PathBuf,
        /// Output folder of an earlier run to compare against (what changed since then).
        #[arg(long, value_name = "OLD_DIR")]
        previous: Option<PathBuf>,
        /// Skip PDF rendering (analysis only).
        #[arg(long)]
        no_reports: bool,
        /// Run only shard K of N (structures in Hilbert-curve order of their centroids, cut into
        /// N runs of equal count), e.g. 2/8.
        #[arg(long, value_name = "K/N", value_parser = parse_shard)]
        shard: Option<(usize, usize)>,
        /// Do not write points.geojson (the largest output; points.csv and results.gpkg hold the
        /// same rows).
        #[arg(long)]
        no_points_geojson: bool,
    },
    /// Validate a portfolio and its data and print a coverage summary; writes nothing.
    Check {
        /// The portfolio file (TOML).
        portfolio: PathBuf,
    },
    /// Write a commented portfolio file and folder layout for a new job.
    Init {
        /// Folder to create (must not exist or be empty).
        dir: PathBuf,
    },
    /// Write the invented demo portfolio (deterministic) into a folder.
    Demo {
        /// Folder to create (must not exist or be empty).
        dir: PathBuf,
    },
    /// Print shell completions to stdout.
    Completions {
        /// Shell.
        shell: clap_complete::Shell,
    },
    /// Print the man page (roff) to stdout.
    Man,
    /// Combine the output folders of `assess --shard K/N` runs into one portfolio result.
    Merge {
        /// The shard output folders.
        #[arg(required = true, value_name = "SHARD_DIR")]
        shards: Vec<PathBuf>,
        /// Output folder: a new or empty folder, or an earlier Plinth output folder (replaced as a
        /// whole only when the merge succeeds). Never one of the shards.
        #[arg(long, short, value_name = "DIR")]
        out: PathBuf,
        /// The portfolio the shards were run with (default: the path in the first shard's
        /// manifest.json).
        #[arg(long, value_name = "FILE")]
        portfolio: Option<PathBuf>,
    },
    /// Benchmark on synthetic data: read-once floor, ingest, analysis, hashing (writes only DIR).
    #[command(hide = true)]
    Bench {
        /// small, medium, large or custom:STRUCTURES:POINTS:EPOCHS.
        #[arg(long, default_value = "small")]
        size: String,
        /// Folder for the generated data and the analysis output (new, empty, or a folder an
        /// earlier `bench` filled).
        #[arg(long, value_name = "DIR")]
        dir: PathBuf,
        /// Runs per phase (the median is reported).
        #[arg(long, default_value_t = 3)]
        runs: usize,
        /// Run one phase in this process and print its measurement as JSON (used internally).
        #[arg(long, hide = true)]
        phase: Option<String>,
    },
}

/// Parse `K/N` with 1 ≤ K ≤ N.
pub fn parse_shard(s: &str) -> Result<(usize, usize), String> {
    let (k, n) = s.split_once('/').ok_or("expected K/N, e.g. 2/8")?;
    let k: usize = k.trim().parse().map_err(|_| "K must be a whole number")?;
    let n: usize = n.trim().parse().map_err(|_| "N must be a whole number")?;
    if n == 0 || k == 0 || k > n {
        return Err("need 1 <= K <= N".into());
    }
    Ok((k, n))
}

/// Whether progress bars may be drawn.
pub fn progress_allowed(quiet: bool) -> bool {
    !quiet && std::io::stderr().is_terminal()
}
