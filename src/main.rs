//! The `plinth` binary: parse arguments, dispatch, print errors once, set the exit code.

use std::process::ExitCode;

use clap::{CommandFactory, Parser};
use plinth::cli::{Cli, Command};
use plinth::error::InputError;
use plinth::output::guard::Refused;

fn main() -> ExitCode {
    let cli = Cli::parse();
    if let Some(n) = cli.jobs {
        rayon::ThreadPoolBuilder::new()
            .num_threads(n.max(1))
            .build_global()
            .ok();
    }
    match dispatch(&cli) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            if let Some(ie) = e.downcast_ref::<InputError>() {
                eprintln!("error: {ie}");
                ExitCode::from(2)
            } else if let Some(r) = e.downcast_ref::<Refused>() {
                eprintln!("error: {r}");
                ExitCode::from(2)
            } else {
                eprintln!("error: {e:#}");
                ExitCode::from(1)
            }
        }
    }
}

fn dispatch(cli: &Cli) -> anyhow::Result<()> {
    match &cli.command {
        Command::Assess {
            portfolio,
            out,
            previous,
            no_reports,
            shard,
            no_points_geojson,
        } => {
            let opts = plinth::run::RunOptions {
                out: Some(out.clone()),
                previous: previous.clone(),
                no_reports: *no_reports,
                jobs: cli.jobs,
                progress: plinth::cli::progress_allowed(cli.quiet),
                shard: *shard,
                no_points_geojson: *no_points_geojson,
            };
            let a = plinth::run::assess_into(portfolio, &opts, out)?;
            if !cli.quiet {
                print_summary(&a.results.portfolio, &a.warnings);
                print_row_groups(&a.inputs.datasets);
                eprintln!("results written to {}", out.display());
            }
            Ok(())
        }
        Command::Check { portfolio } => {
            let c = plinth::run::check(portfolio)?;
            if !cli.quiet {
                print_check(&c);
                eprintln!("check passed: nothing was written");
            }
            Ok(())
        }
        Command::Init { dir } => plinth::init::scaffold(dir),
        Command::Demo { dir } => {
            plinth::output::write_new_folder(dir, plinth::synth::demo::write_demo)
        }
        Command::Completions { shell } => {
            let mut cmd = Cli::command();
            clap_complete::generate(*shell, &mut cmd, "plinth", &mut std::io::stdout());
            Ok(())
        }
        Command::Merge {
            shards,
            out,
            portfolio,
        } => {
            plinth::merge::merge(shards, out, portfolio.as_deref())?;
            if !cli.quiet {
                eprintln!("{} shard(s) merged into {}", shards.len(), out.display());
            }
            Ok(())
        }
        Command::Bench {
            size,
            dir,
            runs,
            phase,
        } => {
            let Some(bs) = plinth::bench::parse_size(size) else {
                anyhow::bail!("unknown --size `{size}`: small, medium, large or custom:S:P:E");
            };
            if let Some(ph) = phase {
                let r = plinth::bench::run_phase(ph, dir, None)?;
                println!("{}", serde_json::to_string(&r)?);
                return Ok(());
            }
            plinth::bench::ensure_data(dir, bs)?;
            let exe = std::env::current_exe()?;
            let s = plinth::bench::run_children(&exe, dir, size, *runs, cli.jobs, false)?;
            print!("{}", plinth::bench::table(&s, *runs));
            Ok(())
        }
        Command::Man => {
            let man = clap_mangen::Man::new(Cli::command());
            man.render(&mut std::io::stdout())?;
            Ok(())
        }
    }
}

fn print_summary(p: &plinth::results::PortfolioResult, warnings: &plinth::error::Warnings) {
    let c = &p.coverage;
    eprintln!("portfolio: {}", p.name);
    eprintln!(
        "window: {} to {}   analysis CRS: {}",
        p.window_start.as_deref().unwrap_or("?"),
        p.window_end.as_deref().unwrap_or("?"),
        p.analysis_crs
    );
    eprintln!("structures: {}", c.structures);
    for (k, v) in &c.by_status {
        eprintln!("  {k}: {v}");
    }
    print_points(c);
    for line in warnings.summary(3) {
        eprintln!("{line}");
    }
}

fn print_check(c: &plinth::run::CheckSummary) {
    let p = &c.prepared;
    let cov = &c.coverage;
    eprintln!("portfolio: {}", p.portfolio.name);
    eprintln!(
        "window: {} to {}   analysis CRS: {}",
        p.window.start,
        p.window.end,
        p.inputs.analysis_crs.name()
    );
    let pf = &p.portfolio;
    eprintln!(
        "footprints: {} ({})",
        pf.structures.path.display(),
        plinth::ingest::gis::format_name(&pf.structures.path, false)
    );
    for d in &pf.datasets {
        eprintln!(
            "points {}: {} ({})",
            d.name,
            d.path.display(),
            plinth::ingest::gis::format_name(&d.path, true)
        );
    }
    eprintln!("structures: {}", cov.structures);
    eprintln!("  meeting the minimums: {}", c.meeting_minimums);
    let below: usize = c.below_minimum.values().sum();
    let by: Vec<String> = c
        .below_minimum
        .iter()
        .map(|(k, v)| format!("{k} {v}"))
        .collect();
    if below > 0 {
        eprintln!(
            "  insufficient_data: {below} (below a minimum after the point screens: {})",
            by.join(", ")
        );
    } else {
        eprintln!("  insufficient_data: 0");
    }
    print_points(cov);
    print_row_groups(&p.inputs.datasets);
    eprintln!(
        "not checked here: unwrapping jumps, the time-series checks, metrics and damage (`plinth assess` decides them; it can find more structures insufficient)"
    );
    for line in p.warnings.summary(3) {
        eprintln!("{line}");
    }
}

/// One line per Parquet points file: the row groups and bytes read (the others lie beyond the
/// structures' reach).
fn print_row_groups(datasets: &[plinth::ingest::Dataset]) {
    for d in datasets {
        let Some(g) = d.row_groups else { continue };
        let pct = if g.bytes_total > 0 {
            100.0 * g.bytes_read as f64 / g.bytes_total as f64
        } else {
            100.0
        };
        eprintln!(
            "points {}: read {} of {} Parquet row groups, {:.1} of {:.1} MB ({pct:.0} % of the point bytes)",
            d.name,
            g.read,
            g.total,
            g.bytes_read as f64 / 1e6,
            g.bytes_total as f64 / 1e6
        );
    }
}

fn print_points(c: &plinth::results::Coverage) {
    for (k, v) in &c.points_read {
        eprintln!("points read from {k}: {v}");
    }
    eprintln!("points kept on structures: {}", c.points_kept);
    eprintln!(
        "points out of reach of every structure: {}",
        c.points_out_of_reach
    );
    if !c.points_rejected.is_empty() {
        eprintln!("points rejected:");
        for (k, v) in &c.points_rejected {
            eprintln!("  {k}: {v}");
        }
    }
}
