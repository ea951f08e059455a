//! `plinth init DIR`: a commented portfolio file and folder layout for a new job.

use std::path::Path;

use anyhow::{Context, Result, bail};

/// The commented portfolio template written by `plinth init`.
pub const PORTFOLIO_TEMPLATE: &str = include_str!("../templates/init/portfolio.toml");

/// Create `dir` with `portfolio.toml`, `data/` and a README note.
pub fn scaffold(dir: &Path) -> Result<()> {
    if dir.exists() && std::fs::read_dir(dir)?.next().is_some() {
        bail!(
            "{} exists and is not empty; choose a new folder",
            dir.display()
        );
    }
    std::fs::create_dir_all(dir.join("data"))
        .with_context(|| format!("cannot create {}", dir.display()))?;
    std::fs::write(dir.join("portfolio.toml"), PORTFOLIO_TEMPLATE)?;
    std::fs::write(
        dir.join("data/README.txt"),
        "Put the footprints (structures.geojson) and one CSV per viewing geometry here,\n\
         then edit ../portfolio.toml and run: plinth check portfolio.toml\n",
    )?;
    eprintln!(
        "created {}: edit portfolio.toml, put data in data/, then run `plinth check {}`",
        dir.display(),
        dir.join("portfolio.toml").display()
    );
    Ok(())
}
