//! `plinth init DIR`: a commented portfolio file and folder layout for a new job.

use std::path::Path;

use anyhow::{Context, Result};

/// The commented portfolio template written by `plinth init`.
pub const PORTFOLIO_TEMPLATE: &str = include_str!("../templates/init/portfolio.toml");

/// Create `dir` with `portfolio.toml`, `data/` and a README note. `dir` must not exist or be
/// empty (`output::guard`, exit code 2 otherwise).
pub fn scaffold(dir: &Path) -> Result<()> {
    crate::output::write_new_folder(dir, |d| {
        std::fs::create_dir_all(d.join("data"))
            .with_context(|| format!("cannot create {}", d.display()))?;
        std::fs::write(d.join("portfolio.toml"), PORTFOLIO_TEMPLATE)?;
        std::fs::write(
            d.join("data/README.txt"),
            "Put the footprints (structures.geojson, .gpkg or .shp with its .dbf and .prj) and one\n\
             CSV per viewing geometry here,\n\
             then edit ../portfolio.toml and run: plinth check portfolio.toml\n",
        )?;
        Ok(())
    })?;
    eprintln!(
        "created {}: edit portfolio.toml, put data in data/, then run `plinth check {}`",
        dir.display(),
        dir.join("portfolio.toml").display()
    );
    Ok(())
}
