//! `plinth bench`: measures Plinth on the synthetic benchmark portfolio (`synth::bench`).
//!
//! Owns the benchmark phases, running each phase in a child process of the same binary (so every
//! phase has its own peak resident memory, read from `/proc/self/status` `VmHWM`), the medians
//! over runs, and the printed table. Phases, all on the same files in the same invocation:
//! - `floor`: a bare read-once floor — every field of every CSV row parsed to a number (the id
//!   field is only split off), on all cores, nothing kept;
//! - `ingest`: Plinth's reading of footprints and points (reach filter included) plus point-to-
//!   structure association;
//! - `analysis`: `run::assess_into` with `no_reports` (outputs go to `DIR/bench-out`);
//! - `hash`: SHA-256 of every input, as `run::manifest` does (a second full read of each file);
//! - `reports`: measured only when a [`ReportHook`] is supplied (the report renderer's own hook).
//!
//! Nothing is written outside DIR. Wall times come from `std::time::Instant`; they are
//! measurements printed to the terminal and never enter a results file. It does not generate data
//! itself (see `synth::bench`) and makes no pass/fail judgement.

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;

use anyhow::{Context, Result, bail};
use rayon::prelude::*;

use crate::synth::bench::{BenchSize, write_bench};

/// Renders the reports of an analysis into a folder (supplied by the report renderer).
pub type ReportHook = fn(&crate::run::Analysis, &Path) -> Result<()>;

/// The phases a child process can run.
pub const PHASES: [&str; 4] = ["floor", "ingest", "analysis", "hash"];

/// One measured phase run.
#[derive(Debug, Clone, Copy, Default, serde::Serialize, serde::Deserialize)]
pub struct PhaseRun {
    /// Wall time of the phase, s.
    pub seconds: f64,
    /// Bytes of input the phase covered.
    pub bytes: u64,
    /// Peak resident set of the process running the phase, MiB (2²⁰ bytes; VmHWM; None where
    /// unavailable).
    pub peak_rss_mib: Option<f64>,
    /// Where the `ingest` phase spent its time (None for the other phases).
    #[serde(default)]
    pub stages: Option<IngestStages>,
}

/// Wall time of each stage of the `ingest` phase, s.
#[derive(Debug, Clone, Copy, Default, serde::Serialize, serde::Deserialize)]
pub struct IngestStages {
    /// Portfolio file, footprints, projection and spatial index.
    pub structures_s: f64,
    /// Both points files read, reach-filtered and associated, owners grouped.
    pub points_s: f64,
    /// Window and run context (criteria, window times).
    pub statistics_s: f64,
    /// Per-structure screening of the owned points, their window statistics included.
    pub screening_s: f64,
}

/// Summary of one phase over the runs.
#[derive(Debug, Clone)]
pub struct PhaseSummary {
    /// Phase name.
    pub phase: String,
    /// Median wall time, s.
    pub median_s: f64,
    /// Input bytes.
    pub bytes: u64,
    /// Largest peak resident set over the runs, MiB.
    pub peak_rss_mib: Option<f64>,
}

impl PhaseSummary {
    /// Throughput, MB/s (10⁶ bytes per second); None for a zero time.
    pub fn mb_per_s(&self) -> Option<f64> {
        (self.median_s > 0.0).then(|| self.bytes as f64 / 1e6 / self.median_s)
    }
}

/// Median of a list of seconds; None when empty. NaN-aware (NaN sorts last).
pub fn median(values: &[f64]) -> Option<f64> {
    if values.is_empty() {
        return None;
    }
    let mut v = values.to_vec();
    v.sort_by(|a, b| a.total_cmp(b));
    let n = v.len();
    Some(if n % 2 == 1 {
        v[n / 2]
    } else {
        (v[n / 2 - 1] + v[n / 2]) / 2.0
    })
}

/// Parse a size: `small`, `medium`, `large` or `custom:STRUCTURES:POINTS:EPOCHS`.
pub fn parse_size(s: &str) -> Option<BenchSize> {
    if let Some(b) = BenchSize::parse(s) {
        return Some(b);
    }
    let rest = s.trim().strip_prefix("custom:")?;
    let v: Vec<usize> = rest
        .split(':')
        .map(|x| x.trim().parse().ok())
        .collect::<Option<_>>()?;
    match v.as_slice() {
        [structures, points, epochs] => Some(BenchSize::Custom {
            structures: *structures,
            points: *points,
            epochs: *epochs,
        }),
        _ => None,
    }
}

/// The points files of the benchmark portfolio in `dir`.
fn points_files(dir: &Path) -> [PathBuf; 2] {
    [dir.join("points-asc.csv"), dir.join("points-desc.csv")]
}

fn file_len(p: &Path) -> Result<u64> {
    Ok(std::fs::metadata(p)
        .with_context(|| format!("cannot read {}", p.display()))?
        .len())
}

/// Generate the benchmark data in `dir` unless it is already there. Data is generated only into a
/// new or empty folder (`output::guard`); a folder holding some other content is refused.
pub fn ensure_data(dir: &Path, size: BenchSize) -> Result<()> {
    let have = dir.join("portfolio.toml").is_file()
        && dir.join("structures.geojson").is_file()
        && points_files(dir).iter().all(|p| p.is_file());
    if !have {
        eprintln!("generating benchmark data in {} ...", dir.display());
        crate::output::write_new_folder(dir, |d| write_bench(d, size))?;
    }
    Ok(())
}

/// Peak resident set of this process, MiB (2²⁰ bytes), from `/proc/self/status` (Linux); None
/// elsewhere.
pub fn peak_rss_mib() -> Option<f64> {
    let s = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = s.lines().find(|l| l.starts_with("VmHWM:"))?;
    let kb: f64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kb / 1024.0)
}

/// Counts from the read-once floor (kept so the parse cannot be optimised away).
#[derive(Debug, Default, Clone, Copy)]
pub struct FloorCount {
    /// Data rows.
    pub rows: u64,
    /// Numeric fields parsed.
    pub numbers: u64,
    /// Sum of every parsed number (a checksum).
    pub sum: f64,
}

fn floor_lines(bytes: &[u8]) -> FloorCount {
    let mut c = FloorCount::default();
    for line in bytes.split(|b| *b == b'\n') {
        let line = line.strip_suffix(b"\r").unwrap_or(line);
        if line.is_empty() {
            continue;
        }
        c.rows += 1;
        let mut s = 0usize;
        let mut first = true;
        let mut field = |f: &[u8]| {
            if !std::mem::take(&mut first) {
                if let Ok(v) = fast_float2::parse::<f64, _>(f) {
                    c.numbers += 1;
                    c.sum += v;
                }
            }
        };
        for p in memchr::memchr_iter(b',', line) {
            field(&line[s..p]);
            s = p + 1;
        }
        field(&line[s..]);
    }
    c
}

/// The read-once floor over one file: blocks of 8 MiB cut at line ends, each split into pieces
/// parsed on all cores. The header line is skipped.
pub fn floor_file(path: &Path) -> Result<FloorCount> {
    use std::io::Read;
    let mut f =
        std::fs::File::open(path).with_context(|| format!("cannot open {}", path.display()))?;
    let block_bytes = crate::ingest::points::BLOCK_BYTES;
    let mut block: Vec<u8> = Vec::with_capacity(block_bytes + (1 << 16));
    let mut total = FloorCount::default();
    let mut header_done = false;
    let mut eof = false;
    while !eof {
        let start = block.len();
        block.resize(start.max(block_bytes / 2) + block_bytes / 2, 0);
        let mut filled = start;
        while filled < block.len() {
            let n = f.read(&mut block[filled..])?;
            if n == 0 {
                eof = true;
                break;
            }
            filled += n;
        }
        block.truncate(filled);
        let mut lo = 0;
        if !header_done {
            match memchr::memchr(b'\n', &block) {
                Some(p) => {
                    lo = p + 1;
                    header_done = true;
                }
                None if eof => break,
                None => continue,
            }
        }
        let cut = if eof {
            block.len()
        } else {
            match memchr::memrchr(b'\n', &block) {
                Some(p) if p + 1 > lo => p + 1,
                _ => continue,
            }
        };
        let region = &block[lo..cut];
        let n_pieces = rayon::current_num_threads() * 4;
        let target = (region.len() / n_pieces.max(1)).max(64 << 10);
        let mut bounds = Vec::new();
        let mut a = 0;
        while a < region.len() {
            let want = (a + target).min(region.len());
            let b = memchr::memchr(b'\n', &region[want..]).map_or(region.len(), |p| want + p + 1);
            bounds.push((a, b));
            a = b;
        }
        let parts: Vec<FloorCount> = bounds
            .par_iter()
            .map(|&(a, b)| floor_lines(&region[a..b]))
            .collect();
        for p in parts {
            total.rows += p.rows;
            total.numbers += p.numbers;
            total.sum += p.sum;
        }
        block.drain(..cut);
    }
    Ok(total)
}

/// The `ingest` phase: read footprints and points (reach filter, every kept point associated as
/// it is read), group the owned points by structure and screen every structure's own points (their
/// window statistics, coherence, epochs, velocity outliers) with the same functions `run::analyse`
/// uses. Returns the kept and rejected
/// structure-point counts and the wall time of each stage.
fn read_associate_screen(portfolio: &Path) -> Result<(usize, usize, IngestStages)> {
    let t = Instant::now();
    let pf = crate::portfolio::Portfolio::load(portfolio)?;
    let mut w = crate::error::Warnings::default();
    let (structures, crs, index) = crate::ingest::load_structures(&pf, &mut w)?;
    let structures_s = t.elapsed().as_secs_f64();
    // Every kept point is associated while it is read.
    let ds = crate::ingest::read_datasets(&pf, &crs, &index, &mut w)?;
    let assoc = crate::association::Owners::from_datasets(&ds, structures.len());
    let points_s = t.elapsed().as_secs_f64();
    let window = crate::run::window_for(&pf, &ds, &mut w)?;
    // Screening asks for each owned point's statistics once: worked out on request.
    let ctx = crate::run::run_context(&pf, &ds, window, &crs, crate::assess::StatsCache::OnDemand)?;
    let statistics_s = t.elapsed().as_secs_f64();
    let counts = crate::run::screen_owned(&ctx, &structures, &assoc)
        .iter()
        .fold((0, 0), |a, o| {
            (a.0 + o.kept, a.1 + o.rejected.values().sum::<usize>())
        });
    let stages = IngestStages {
        structures_s,
        points_s: points_s - structures_s,
        statistics_s: statistics_s - points_s,
        screening_s: t.elapsed().as_secs_f64() - statistics_s,
    };
    Ok((counts.0, counts.1, stages))
}

/// Run one phase in this process and return its measurement.
pub fn run_phase(phase: &str, dir: &Path, hook: Option<ReportHook>) -> Result<PhaseRun> {
    let portfolio = dir.join("portfolio.toml");
    let csv_bytes: u64 = points_files(dir)
        .iter()
        .map(|p| file_len(p))
        .sum::<Result<u64>>()?;
    let all_bytes = csv_bytes + file_len(&dir.join("structures.geojson"))?;
    let mut stages = None;
    let t0 = Instant::now();
    let bytes = match phase {
        "floor" => {
            let mut rows = 0;
            for p in points_files(dir) {
                let c = floor_file(&p)?;
                rows += c.rows;
                if !c.sum.is_finite() {
                    bail!("floor checksum is not finite");
                }
            }
            if rows == 0 {
                bail!("the benchmark points files have no rows");
            }
            csv_bytes
        }
        "ingest" => {
            let (kept, rejected, st) = read_associate_screen(&portfolio)?;
            stages = Some(st);
            if kept + rejected == 0 {
                bail!("no point was associated with a structure");
            }
            all_bytes
        }
        "analysis" | "reports" => {
            let opts = crate::run::RunOptions {
                no_reports: phase == "analysis",
                ..Default::default()
            };
            let out = dir.join("bench-out");
            let a = crate::run::assess_into(&portfolio, &opts, &out)?;
            if phase == "reports" {
                let hook = hook.context("no report hook is installed")?;
                hook(&a, &out)?;
            }
            all_bytes
        }
        "hash" => {
            let mut n = 0;
            for p in [
                portfolio.clone(),
                dir.join("structures.geojson"),
                dir.join("points-asc.csv"),
                dir.join("points-desc.csv"),
            ] {
                crate::output::sha256_file(&p)?;
                n += file_len(&p)?;
            }
            n
        }
        other => bail!("unknown benchmark phase `{other}`"),
    };
    Ok(PhaseRun {
        seconds: t0.elapsed().as_secs_f64(),
        bytes,
        peak_rss_mib: peak_rss_mib(),
        stages,
    })
}

/// Run every phase `runs` times, each in a child process `exe bench --phase P --dir DIR`
/// (phases interleaved run by run so that a slow spell of the machine hits every phase alike).
pub fn run_children(
    exe: &Path,
    dir: &Path,
    size: &str,
    runs: usize,
    jobs: Option<usize>,
    with_reports: bool,
) -> Result<Vec<PhaseSummary>> {
    let mut phases: Vec<&str> = PHASES.to_vec();
    if with_reports {
        phases.push("reports");
    }
    let mut all: Vec<Vec<PhaseRun>> = vec![Vec::new(); phases.len()];
    for r in 0..runs.max(1) {
        for (i, ph) in phases.iter().enumerate() {
            let mut cmd = Command::new(exe);
            if let Some(j) = jobs {
                cmd.arg("--jobs").arg(j.to_string());
            }
            cmd.args(["bench", "--size", size, "--phase", ph, "--dir"])
                .arg(dir);
            let out = cmd
                .output()
                .with_context(|| format!("cannot run {}", exe.display()))?;
            if !out.status.success() {
                bail!(
                    "benchmark phase `{ph}` failed: {}",
                    String::from_utf8_lossy(&out.stderr).trim()
                );
            }
            let text = String::from_utf8_lossy(&out.stdout);
            let line = text
                .lines()
                .rev()
                .find(|l| l.starts_with('{'))
                .context("benchmark phase printed no result")?;
            let run: PhaseRun = serde_json::from_str(line)?;
            eprintln!("run {}/{} {ph}: {:.3} s", r + 1, runs.max(1), run.seconds);
            all[i].push(run);
        }
    }
    Ok(phases
        .iter()
        .zip(all)
        .map(|(ph, runs)| {
            let secs: Vec<f64> = runs.iter().map(|r| r.seconds).collect();
            PhaseSummary {
                phase: ph.to_string(),
                median_s: median(&secs).unwrap_or(f64::NAN),
                bytes: runs.first().map_or(0, |r| r.bytes),
                peak_rss_mib: runs
                    .iter()
                    .filter_map(|r| r.peak_rss_mib)
                    .max_by(|a, b| a.total_cmp(b)),
            }
        })
        .collect())
}

/// The printed table: phase, median s, MB/s, ratio to the floor, peak RSS.
pub fn table(summaries: &[PhaseSummary], runs: usize) -> String {
    let floor = summaries
        .iter()
        .find(|s| s.phase == "floor")
        .map(|s| s.median_s);
    let mut t = format!(
        "{:<10} {:>10} {:>10} {:>12} {:>10} {:>14}\n",
        "phase", "median s", "MB", "MB/s", "÷ floor", "peak RSS MiB"
    );
    for s in summaries {
        let ratio = match floor {
            Some(f) if f > 0.0 => format!("{:.2}", s.median_s / f),
            _ => "-".into(),
        };
        t.push_str(&format!(
            "{:<10} {:>10.3} {:>10.1} {:>12} {:>10} {:>14}\n",
            s.phase,
            s.median_s,
            s.bytes as f64 / 1e6,
            s.mb_per_s().map_or("-".into(), |v| format!("{v:.0}")),
            ratio,
            s.peak_rss_mib.map_or("-".into(), |v| format!("{v:.0}")),
        ));
    }
    t.push_str(&format!(
        "medians of {runs} run(s); MB = 10^6 bytes of input (floor: points CSVs; ingest/analysis: + footprints; hash: every input); threads = {}\n",
        rayon::current_num_threads()
    ));
    t
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn median_odd_even_and_empty() {
        assert_eq!(median(&[3.0, 1.0, 2.0]), Some(2.0));
        assert_eq!(median(&[4.0, 1.0, 2.0, 3.0]), Some(2.5));
        assert_eq!(median(&[]), None);
    }

    #[test]
    fn sizes_parse() {
        assert_eq!(parse_size("Medium"), Some(BenchSize::Medium));
        assert_eq!(
            parse_size("custom:10:200:5"),
            Some(BenchSize::Custom {
                structures: 10,
                points: 200,
                epochs: 5
            })
        );
        assert_eq!(parse_size("custom:10:200"), None);
        assert_eq!(parse_size("huge"), None);
    }

    #[test]
    fn floor_parses_every_numeric_field_and_skips_the_header() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("p.csv");
        // 3 rows × 3 numbers after the id; sum = (1+2+3)+(4+5+6)+(7+8+9) = 45 (hand-checked).
        std::fs::write(&p, "id,a,b,c\nx,1,2,3\r\ny,4,5,6\n\nz,7,8,9").unwrap();
        let c = floor_file(&p).unwrap();
        assert_eq!((c.rows, c.numbers), (3, 9));
        assert!((c.sum - 45.0).abs() < 1e-12);
    }

    #[test]
    fn phases_run_on_a_tiny_portfolio() {
        let dir = tempfile::tempdir().unwrap();
        let size = BenchSize::Custom {
            structures: 4,
            points: 400,
            epochs: 12,
        };
        ensure_data(dir.path(), size).unwrap();
        for ph in PHASES {
            let r = run_phase(ph, dir.path(), None).unwrap();
            assert!(r.bytes > 0, "{ph}");
        }
        assert!(run_phase("reports", dir.path(), None).is_err());
        assert!(dir.path().join("bench-out/results.json").is_file());
    }
}
