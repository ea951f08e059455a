//! Ingest: read the footprints and every points file into one metric analysis frame.
//!
//! Owns the order of reading (footprints first, so the points reader can keep only points within
//! reach of a structure), the choice of the analysis CRS (the portfolio's, or the UTM zone of the
//! structures' centroid), reprojection of footprints, and the per-structure local frame.
//! Submodules: [`footprints`] (GeoJSON), [`gis`] (GeoPackage, Shapefile and FlatGeobuf
//! footprints), [`gis_points`] and [`parquet_points`] (points layers streamed into the CSV
//! reader), [`points`] (CSV reader), [`store`] (the compact
//! in-memory point store), [`decimal`] (fast exact number parsing).

pub mod decimal;
pub mod footprints;
pub mod gis;
pub mod gis_points;
pub mod parquet_points;
pub mod points;
pub mod reference;
pub mod store;

use geo::{Centroid, MapCoords, MultiPolygon};

use crate::association::SpatialIndex;
use crate::coords::{Crs, LocalFrame, Transformer, utm_epsg_for};
use crate::error::{InputError, Warnings};
use crate::portfolio::Portfolio;

pub use store::{Dataset, Point, PointRef, SeriesRef};

/// One structure ready for analysis.
#[derive(Debug, Clone)]
pub struct Structure {
    /// Input-order index.
    pub index: usize,
    /// Fields read from the footprint file.
    pub raw: footprints::RawStructure,
    /// Footprint in the analysis CRS.
    pub footprint: MultiPolygon<f64>,
    /// Footprint in WGS84 lon/lat (for GeoJSON output).
    pub footprint_wgs84: MultiPolygon<f64>,
    /// The structure's local metric frame (true east/north, m, origin at the centroid).
    pub frame: LocalFrame,
    /// Footprint in the local frame.
    pub footprint_local: MultiPolygon<f64>,
}

/// Everything read for one run.
pub struct Inputs {
    /// Structures in input order.
    pub structures: Vec<Structure>,
    /// Points files in portfolio order.
    pub datasets: Vec<Dataset>,
    /// The analysis CRS.
    pub analysis_crs: Crs,
    /// The spatial index used for association.
    pub index: SpatialIndex,
}

fn reproject(
    mp: &MultiPolygon<f64>,
    t: &Transformer,
    file: &std::path::Path,
    id: &str,
) -> Result<MultiPolygon<f64>, InputError> {
    mp.try_map_coords(|c| t.apply(c.x, c.y).map(|(x, y)| geo::Coord { x, y }))
        .map_err(|e| {
            InputError::new(
                file,
                format!("feature id \"{id}\""),
                e.to_string(),
                "check [structures] crs",
            )
        })
}

fn crs_or_input_error(s: &str, file: &std::path::Path, key: &str) -> Result<Crs, InputError> {
    Crs::parse(s).map_err(|e| {
        InputError::new(
            file,
            format!("key {key}"),
            e.to_string(),
            "use an EPSG code such as \"EPSG:4326\"",
        )
    })
}

/// Read the footprints and build the spatial index; points are read by [`read_datasets`].
pub fn load_structures(
    pf: &Portfolio,
    warnings: &mut Warnings,
) -> Result<(Vec<Structure>, Crs, SpatialIndex), InputError> {
    let sfile = &pf.structures.path;
    let scrs = crs_or_input_error(&pf.structures.crs, &pf.file, "structures.crs")?;
    let defaults = footprints::FootprintDefaults {
        height_m: pf.assessment.default_height_m,
        structure_type: pf.assessment.default_structure.clone(),
    };
    let (raws, scrs) = match gis::format_of(sfile) {
        gis::Format::GeoJson => (
            footprints::read_footprints(
                sfile,
                &pf.structures.id_property,
                scrs.is_geographic(),
                &defaults,
                warnings,
            )?,
            scrs,
        ),
        other => gis::read_footprints(&pf.structures, other, &defaults, warnings)?,
    };
    let wgs = Crs::wgs84();
    let s_to_wgs = Transformer::new(&scrs, &wgs);
    let mut wgs_fps = Vec::with_capacity(raws.len());
    for r in &raws {
        wgs_fps.push(reproject(&r.footprint, &s_to_wgs, sfile, &r.id)?);
    }
    let analysis = match &pf.crs {
        Some(c) => crs_or_input_error(c, &pf.file, "portfolio.crs")?,
        None => {
            let (mut sx, mut sy, mut n) = (0.0, 0.0, 0.0);
            for f in &wgs_fps {
                if let Some(c) = f.centroid() {
                    sx += c.x();
                    sy += c.y();
                    n += 1.0;
                }
            }
            let code = utm_epsg_for(sx / n, sy / n);
            warnings.push(
                "default_applied",
                format!(
                    "analysis CRS not given: using EPSG:{code}, the UTM zone of the structures' centroid"
                ),
            );
            Crs::from_epsg(code).map_err(|e| {
                InputError::new(
                    &pf.file,
                    "key portfolio.crs",
                    e.to_string(),
                    "set portfolio.crs",
                )
            })?
        }
    };
    let wgs_to_a = Transformer::new(&wgs, &analysis);
    let a_to_wgs = Transformer::new(&analysis, &wgs);
    let mut structures = Vec::with_capacity(raws.len());
    for (i, (mut raw, fw)) in raws.into_iter().zip(wgs_fps).enumerate() {
        // Only the projected copies are used from here on.
        raw.footprint = MultiPolygon::new(Vec::new());
        let fa = reproject(&fw, &wgs_to_a, sfile, &raw.id)?;
        let c = fa.centroid().ok_or_else(|| {
            InputError::new(
                sfile,
                format!("feature id \"{}\"", raw.id),
                "footprint has no centroid",
                "check the geometry",
            )
        })?;
        let frame = LocalFrame::at(c.x(), c.y(), &a_to_wgs, &wgs_to_a).map_err(|e| {
            InputError::new(
                sfile,
                format!("feature id \"{}\"", raw.id),
                e.to_string(),
                "check [structures] crs",
            )
        })?;
        let local = fa.map_coords(|p| {
            let (x, y) = frame.to_local(p.x, p.y);
            geo::Coord { x, y }
        });
        structures.push(Structure {
            index: i,
            raw,
            footprint: fa,
            footprint_wgs84: fw,
            frame,
            footprint_local: local,
        });
    }
    let index = SpatialIndex::new(
        structures.iter().map(|s| s.footprint.clone()).collect(),
        pf.assessment.buffer_m,
        pf.assessment.surroundings_m,
    );
    Ok((structures, analysis, index))
}

/// A points file that is not CSV, opened (its CRS settled).
enum PointSource {
    Gis(gis_points::Layer),
    Parquet(parquet_points::ParquetPoints),
}

/// Read every points file, keeping only points within reach of a structure.
pub fn read_datasets(
    pf: &Portfolio,
    analysis: &Crs,
    index: &SpatialIndex,
    warnings: &mut Warnings,
) -> Result<Vec<Dataset>, InputError> {
    let mut out = Vec::with_capacity(pf.datasets.len());
    let area = pf
        .reference
        .as_ref()
        .map(|r| reference::ReferenceArea::project(r, analysis, &pf.file))
        .transpose()?;
    for (i, spec) in pf.datasets.iter().enumerate() {
        let source = if parquet_points::is_parquet(&spec.path) {
            Some(PointSource::Parquet(parquet_points::open(
                spec, i, warnings,
            )?))
        } else if gis_points::is_gis(&spec.path) {
            Some(PointSource::Gis(gis_points::open(spec, i, warnings)?))
        } else {
            None
        };
        let dcrs = match &source {
            Some(PointSource::Parquet(p)) => p.crs.clone(),
            Some(PointSource::Gis(l)) => l.crs.clone(),
            None => crs_or_input_error(&spec.crs, &pf.file, &format!("datasets[{i}].crs"))?,
        };
        let to_a = Transformer::new(&dcrs, analysis);
        // The reference area's points are kept as well (no link to any structure), however
        // far they lie from the structures.
        let reach = |x: f64, y: f64| {
            index.summarise(x, y).or_else(|| {
                area.filter(|a| a.contains(x, y))
                    .map(|_| crate::association::PointAssociation::default())
            })
        };
        // A box may hold a kept point when it meets a structure's reach or the reference area.
        let may_keep = |lo: [f64; 2], hi: [f64; 2]| {
            index.reaches_box(lo, hi)
                || area.is_some_and(|a| {
                    lo[0] <= a.x + a.radius_m
                        && hi[0] >= a.x - a.radius_m
                        && lo[1] <= a.y + a.radius_m
                        && hi[1] >= a.y - a.radius_m
                })
        };
        let skip = parquet_points::Reach {
            to_analysis: &to_a,
            may_keep: &may_keep,
        };
        let mut ds = match source {
            Some(PointSource::Parquet(p)) => {
                parquet_points::read(p, spec, &to_a, &reach, Some(&skip), warnings)?
            }
            Some(PointSource::Gis(l)) => gis_points::read(l, spec, &to_a, &reach, warnings)?,
            None => points::read_points(spec, &to_a, dcrs.is_geographic(), &reach, warnings)?,
        };
        if let Some(a) = &area {
            ds.reference = Some(reference::rereference(
                &mut ds,
                a,
                pf.assessment.min_coherence,
                &spec.path,
            )?);
        }
        // Points below the minimum coherence are rejected before any series is read: keep
        // their records (they are listed as rejected) but not their series.
        let has_coherence = ds.has_coherence;
        let min = pf.assessment.min_coherence;
        ds.drop_series(|p| !crate::assess::below_min_coherence(p, has_coherence, min));
        out.push(ds);
    }
    if area.is_none() && pf.datasets.len() >= 2 {
        warnings.push(
            "no_common_reference",
            "several datasets and no [reference] section: each dataset keeps the reference \
             point it was processed with; a reference that moves in one of them biases the \
             combined vertical and east–west values (docs/methods.md, \"A common reference\")"
                .to_string(),
        );
    }
    Ok(out)
}

/// Read everything for a run.
pub fn load(pf: &Portfolio, warnings: &mut Warnings) -> Result<Inputs, InputError> {
    let (structures, analysis_crs, index) = load_structures(pf, warnings)?;
    let datasets = read_datasets(pf, &analysis_crs, &index, warnings)?;
    Ok(Inputs {
        structures,
        datasets,
        analysis_crs,
        index,
    })
}
