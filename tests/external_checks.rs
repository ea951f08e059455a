//! Outside checks: Plinth against general-purpose reference libraries and published worked examples.
//!
//! The expected values come from `tests/external/*.json`, written by `tests/external/generate.py`
//! with pyproj, statsmodels (+ scipy), MintPy and shapely; each file records the library and its
//! version. Nothing here comes from the project's own notes. How to regenerate:
//! `tests/external/README.md`. Every tolerance is stated beside its assertion with its reason.

use plinth::association::{Role, SpatialIndex};
use plinth::coords::{Crs, LocalFrame, Transformer};
use plinth::series::decompose::{LosObservation, decompose_east_up};
use plinth::series::fit::{aic, bic, compare_models, fit_linear, fit_linear_annual};
use plinth::series::los::{LookSide, Pass, los_from_angles, los_from_enu, unit_vector_from_angles};
use plinth::series::project::vertical_from_los;
use plinth::series::stats::{f_upper_tail, t_two_sided};
use serde_json::Value;

fn data(text: &str) -> Value {
    serde_json::from_str(text).expect("committed reference data is valid JSON")
}

fn pyproj() -> Value {
    data(include_str!("external/pyproj.json"))
}
fn statsmodels() -> Value {
    data(include_str!("external/statsmodels.json"))
}
fn mintpy() -> Value {
    data(include_str!("external/mintpy.json"))
}
fn shapely() -> Value {
    data(include_str!("external/shapely.json"))
}

fn f(v: &Value) -> f64 {
    v.as_f64()
        .unwrap_or_else(|| panic!("expected a number, got {v}"))
}
fn fv(v: &Value) -> Vec<f64> {
    v.as_array().expect("array").iter().map(f).collect()
}
fn s(v: &Value) -> &str {
    v.as_str().expect("string")
}

/// Relative difference, guarded for values near zero.
fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs().max(1e-300)
}

/// Every file names the library that produced it and its version.
#[test]
fn every_data_file_names_its_library_and_version() {
    for (d, lib) in [
        (pyproj(), "pyproj"),
        (statsmodels(), "statsmodels"),
        (mintpy(), "mintpy"),
        (shapely(), "shapely"),
    ] {
        assert_eq!(s(&d["library"]), lib);
        assert!(!s(&d["version"]).is_empty(), "{lib} version missing");
    }
}

mod pyproj_checks {
    use super::*;

    /// The comparisons below assume pyproj was given the very PROJ strings Plinth builds its CRSs
    /// from; if the definitions Plinth uses change, regenerate the data.
    #[test]
    fn plinth_uses_the_definitions_the_data_was_made_with() {
        let d = pyproj();
        for (name, def) in d["plinth_definitions"].as_object().unwrap() {
            let crs = Crs::parse(name).unwrap();
            assert_eq!(crs.definition(), s(def), "{name}");
        }
    }

    /// Point transforms, datum shifts included (OSGB36 and Potsdam via the PROJ datum table,
    /// Amersfoort 7-parameter and CH1903+ 3-parameter Helmert shifts).
    ///
    /// Tolerance 1 mm against PROJ with the same definition: both evaluate the same closed-form
    /// projection and Helmert formulas in double precision; 1 mm is far below anything structural
    /// and far above rounding. Against PROJ's own choice of transformation from the EPSG database
    /// (offline, no grid files) the tolerance is the accuracy PROJ states for the operation it
    /// chose (recorded in the data, 0 for an exact conversion, then 1 mm).
    #[test]
    fn point_transforms_match_proj() {
        let d = pyproj();
        let mut worst_same: f64 = 0.0;
        for p in d["points"].as_array().unwrap() {
            let src = Crs::parse(s(&p["source"])).unwrap();
            let dst = Crs::parse(s(&p["target"])).unwrap();
            let (x, y) = Transformer::new(&src, &dst)
                .apply(f(&p["x"]), f(&p["y"]))
                .unwrap();
            let geographic = dst.is_geographic();
            // Degrees → metres for geographic targets (1° of latitude ≈ 111 km; longitude scaled
            // by cos φ), so every tolerance is in metres.
            let (kx, ky) = if geographic {
                (111_320.0 * y.to_radians().cos(), 110_574.0)
            } else {
                (1.0, 1.0)
            };
            let miss = |ex: f64, ey: f64| ((x - ex) * kx).hypot((y - ey) * ky);
            let same = miss(f(&p["same_definition_x"]), f(&p["same_definition_y"]));
            worst_same = worst_same.max(same);
            assert!(
                same < 1e-3,
                "{} -> {} ({}, {}): {same} m from PROJ with the same definition",
                s(&p["source"]),
                s(&p["target"]),
                p["x"],
                p["y"]
            );
            let accuracy = f(&p["authority_accuracy_m"]).max(1e-3);
            let auth = miss(f(&p["authority_x"]), f(&p["authority_y"]));
            assert!(
                auth <= accuracy,
                "{} -> {}: {auth} m from PROJ's `{}` (stated accuracy {accuracy} m)",
                s(&p["source"]),
                s(&p["target"]),
                s(&p["authority_operation"])
            );
        }
        eprintln!("largest difference from PROJ (same definitions): {worst_same:.2e} m");
    }

    /// A datum shift that is skipped moves points by about a hundred metres; the same-definition
    /// reference must therefore differ from a shift-free projection by far more than the tolerance
    /// above (this guards the test itself: it could not pass with the shift ignored).
    #[test]
    fn datum_shift_cases_are_sensitive_to_the_shift() {
        let d = pyproj();
        let p = d["points"]
            .as_array()
            .unwrap()
            .iter()
            .find(|p| s(&p["source"]) == "EPSG:4326" && s(&p["target"]) == "EPSG:27700")
            .unwrap();
        // The same projection on the Airy ellipsoid with no shift: EPSG:4277 (OSGB36 geographic)
        // taken as if it were WGS84 coordinates.
        let osgb_geo = Crs::from_epsg(4277).unwrap();
        let bng = Crs::from_epsg(27700).unwrap();
        let (x, y) = Transformer::new(&osgb_geo, &bng)
            .apply(f(&p["x"]), f(&p["y"]))
            .unwrap();
        let off = (x - f(&p["same_definition_x"])).hypot(y - f(&p["same_definition_y"]));
        assert!(off > 50.0, "no-shift projection only {off} m away");
    }

    /// Footprints as Plinth reads them: a GeoJSON file in a national grid, projected through
    /// WGS84 to the analysis CRS by `ingest::load_structures`. Vertices within 1 mm of PROJ (same
    /// reason as above). Then the structure's local frame against the WGS84 ellipsoid (geodesics
    /// by pyproj.Geod, Karney's algorithm): edge lengths within 1e-5 relative and edge directions
    /// within 0.002°. Reason: the frame is measured once at the centroid; over ±40 m the point
    /// scale factor of these projections changes by < 1e-6 and the grid convergence by < 0.0005°,
    /// while an unapplied scale factor (4e-4) or convergence (≥ 0.2° here) would fail clearly.
    #[test]
    fn footprints_and_local_frames_match_proj_and_geodesics() {
        let d = pyproj();
        for fp in d["footprints"].as_array().unwrap() {
            let dir = tempfile::tempdir().unwrap();
            let rings: Vec<Vec<[f64; 2]>> = fp["rings"]
                .as_array()
                .unwrap()
                .iter()
                .map(|r| {
                    r["vertices"]
                        .as_array()
                        .unwrap()
                        .iter()
                        .map(|v| [f(&v["x"]), f(&v["y"])])
                        .collect()
                })
                .collect();
            let gj = serde_json::json!({"type": "FeatureCollection", "features": [{
                "type": "Feature", "properties": {"id": s(&fp["id"])},
                "geometry": {"type": "Polygon", "coordinates": rings}}]});
            std::fs::write(dir.path().join("structures.geojson"), gj.to_string()).unwrap();
            let toml = format!(
                "[portfolio]\nname = \"outside check\"\ncrs = \"{}\"\n\n[structures]\npath = \"structures.geojson\"\ncrs = \"{}\"\n\n\
                 [[datasets]]\nname = \"a\"\npath = \"points.csv\"\npass = \"ascending\"\nincidence_deg = 39.0\nheading_deg = -12.0\n",
                s(&fp["analysis"]),
                s(&fp["source"])
            );
            std::fs::write(dir.path().join("points.csv"), "point_id,lon,lat\n").unwrap();
            let pf_path = dir.path().join("portfolio.toml");
            std::fs::write(&pf_path, &toml).unwrap();
            let pf = plinth::portfolio::Portfolio::parse(&toml, &pf_path).unwrap();
            let mut warnings = plinth::error::Warnings::default();
            let (structures, _, _) = plinth::ingest::load_structures(&pf, &mut warnings).unwrap();
            let st = &structures[0];
            let poly = &st.footprint.0[0];
            let got_rings: Vec<&geo::LineString<f64>> = std::iter::once(poly.exterior())
                .chain(poly.interiors())
                .collect();
            for (ri, r) in fp["rings"].as_array().unwrap().iter().enumerate() {
                let verts = r["vertices"].as_array().unwrap();
                let got = &got_rings[ri].0;
                assert_eq!(got.len(), verts.len(), "{} ring {ri}", s(&fp["id"]));
                for (c, v) in got.iter().zip(verts) {
                    let miss = (c.x - f(&v["ax"])).hypot(c.y - f(&v["ay"]));
                    assert!(miss < 1e-3, "{} vertex off by {miss} m", s(&fp["id"]));
                }
                // Local frame: true east (x), true north (y), metres.
                let local = &st.footprint_local.0[0];
                let local_ring = std::iter::once(local.exterior())
                    .chain(local.interiors())
                    .nth(ri)
                    .unwrap();
                for (e, w) in r["edges"]
                    .as_array()
                    .unwrap()
                    .iter()
                    .zip(local_ring.0.windows(2))
                {
                    let (dx, dy) = (w[1].x - w[0].x, w[1].y - w[0].y);
                    let len = dx.hypot(dy);
                    let geodesic = f(&e["length_m"]);
                    assert!(
                        rel(len, geodesic) < 1e-5,
                        "{}: local edge {len} m vs geodesic {geodesic} m",
                        s(&fp["id"])
                    );
                    let az = dx.atan2(dy).to_degrees();
                    let mut daz = az - f(&e["azimuth_mid_deg"]);
                    daz -= 360.0 * (daz / 360.0).round();
                    assert!(
                        daz.abs() < 0.002,
                        "{}: local edge bearing {az}° vs geodesic {}°",
                        s(&fp["id"]),
                        e["azimuth_mid_deg"]
                    );
                }
            }
        }
    }

    /// Plinth's local frame (grid bearing of true north, point scale factor) against PROJ.
    /// Plinth's true north is the WGS84 meridian, so the reference is the grid bearing of a 1 m
    /// geodesic step due north on WGS84 and the mean north/east scale, from PROJ forward
    /// transforms (`wgs84_*` in the data). Where the CRS has no datum shift this is also PROJ's
    /// projection factors: `meridian_convergence` γ (true north to grid north; Plinth stores
    /// −γ) and the point scale. Tolerances 2e-4° and 2e-6: Plinth's 10 m finite-difference step
    /// against PROJ's analytic factors or 1 m step; truncation is of order (10 m / R)·tan φ.
    ///
    /// With a datum shift the two "true norths" differ (the OSGB36 and WGS84 meridians through a
    /// point are a few arc seconds apart; scales differ by the Helmert scale, ≈ 2.8e-5 for OSGB36):
    /// only the WGS84 reference applies there. Only conformal projections are compared: for the
    /// equal-area EPSG:3035 see `non_conformal_analysis_crs_has_direction_dependent_scale`.
    ///
    /// This check found a defect, fixed: the frame took its 10 m steps relative to the given grid
    /// point instead of the forward image of its geographic coordinates, so the ~1 mm round-trip
    /// error of the OSGB36 shift turned the frame by 0.0049° and scaled it by 4e-5.
    #[test]
    fn local_frame_matches_proj() {
        let d = pyproj();
        let wgs = Crs::wgs84();
        let mut compared = 0;
        for fr in d["frames"].as_array().unwrap() {
            let (ns, es) = (f(&fr["wgs84_north_scale"]), f(&fr["wgs84_east_scale"]));
            if rel(ns, es) > 1e-6 {
                continue;
            }
            compared += 1;
            let name = s(&fr["crs"]);
            let crs = Crs::parse(name).unwrap();
            let to_geo = Transformer::new(&crs, &wgs);
            let from_geo = Transformer::new(&wgs, &crs);
            let frame = LocalFrame::at(f(&fr["x"]), f(&fr["y"]), &to_geo, &from_geo).unwrap();
            let bearing = f(&fr["wgs84_north_grid_bearing_deg"]);
            assert!(
                (frame.north_bearing_deg - bearing).abs() < 2e-4,
                "{name}: north bearing {} vs PROJ {bearing}",
                frame.north_bearing_deg
            );
            let k = (ns + es) / 2.0;
            assert!(
                (frame.scale - k).abs() < 2e-6,
                "{name}: scale {} vs PROJ {k}",
                frame.scale
            );
            if !fr["datum_shift"].as_bool().unwrap() {
                let gamma = f(&fr["meridian_convergence_deg"]);
                assert!(
                    (frame.north_bearing_deg + gamma).abs() < 2e-4,
                    "{name}: γ {gamma}"
                );
                let ms = f(&fr["meridional_scale"]);
                assert!((frame.scale - ms).abs() < 2e-6, "{name}: k {ms}");
            }
        }
        assert_eq!(compared, 7, "conformal cases");
    }

    /// The non-conformal case, documented rather than hidden: in EPSG:3035 at the data's point the
    /// north and east scales differ by about 1 %, so Plinth's single scale (their mean) is off by
    /// about ±0.5 % along each axis. The test pins that Plinth's scale is the mean of PROJ's two
    /// directional scales (within 1e-5, the finite-difference error of a 1 % anisotropy over 10 m),
    /// so any change of behaviour is seen; docs/methods.md
    /// (Outside checks) says to use a conformal analysis CRS.
    #[test]
    fn non_conformal_analysis_crs_has_direction_dependent_scale() {
        let d = pyproj();
        let wgs = Crs::wgs84();
        let fr = d["frames"]
            .as_array()
            .unwrap()
            .iter()
            .find(|fr| s(&fr["crs"]) == "EPSG:3035")
            .unwrap();
        let crs = Crs::parse("EPSG:3035").unwrap();
        let frame = LocalFrame::at(
            f(&fr["x"]),
            f(&fr["y"]),
            &Transformer::new(&crs, &wgs),
            &Transformer::new(&wgs, &crs),
        )
        .unwrap();
        let (ns, es) = (f(&fr["wgs84_north_scale"]), f(&fr["wgs84_east_scale"]));
        assert!(rel(ns, es) > 5e-3, "the case should be clearly anisotropic");
        assert!(
            (frame.scale - (ns + es) / 2.0).abs() < 1e-5,
            "{}",
            frame.scale
        );
    }
}

mod statsmodels_checks {
    use super::*;

    /// OLS velocity, intercept, their standard errors, residual SD and RSS: tolerance 1e-9
    /// relative (both are exact least squares in double precision; Plinth uses centred sums,
    /// statsmodels a pseudo-inverse, so agreement is to rounding, ~1e-12).
    /// Lag-1 autocorrelation against statsmodels' `acf(resid, adjusted=False)` (which demeans; OLS
    /// residuals have zero mean, so it is Plinth's definition Σrᵢrᵢ₊₁/Σrᵢ²): 1e-9 absolute.
    /// AR(1)-adjusted SE: statsmodels has no effective-sample-size SE, so the generator applies
    /// Plinth's documented rule (Santer et al. 2000: n_eff = n(1−r₁)/(1+r₁), r₁ < 0 → 0,
    /// SE·√((n−2)/(n_eff−2)), none when n_eff ≤ 2) to statsmodels' SE and r₁; the check is then
    /// of Plinth's arithmetic and inputs, 1e-9 relative. The p-value uses scipy's Student t with
    /// n_eff − 2 degrees of freedom: 1e-7 absolute (Plinth's incomplete beta converges to 1e-14 in
    /// its continued fraction; the Lanczos log-gamma is good to ~1e-15 relative).
    #[test]
    fn linear_fit_and_ar1_standard_error_match_statsmodels() {
        let d = statsmodels();
        for c in d["series"].as_array().unwrap() {
            let name = s(&c["name"]);
            let (t, y) = (fv(&c["t_yr"]), fv(&c["d_mm"]));
            let l = &c["linear"];
            let fit = fit_linear(&t, &y).unwrap();
            for (got, key) in [
                (fit.velocity_mm_per_yr, "velocity_mm_per_yr"),
                (fit.intercept_mm, "intercept_mm"),
                (fit.se_velocity_mm_per_yr, "se_velocity_mm_per_yr"),
                (fit.se_intercept_mm, "se_intercept_mm"),
                (fit.residual_sd_mm, "residual_sd_mm"),
                (fit.rss_mm2, "rss_mm2"),
                (fit.effective_n, "effective_n"),
            ] {
                assert!(
                    rel(got, f(&l[key])) < 1e-9,
                    "{name} {key}: {got} vs {}",
                    l[key]
                );
            }
            assert!(
                (fit.lag1_autocorrelation - f(&l["lag1_autocorrelation"])).abs() < 1e-9,
                "{name} r1"
            );
            match (
                fit.se_velocity_adjusted_mm_per_yr,
                l["se_velocity_adjusted_mm_per_yr"].as_f64(),
            ) {
                (Some(a), Some(b)) => assert!(rel(a, b) < 1e-9, "{name} SE_adj {a} vs {b}"),
                (None, None) => {}
                (a, b) => panic!("{name}: SE_adj {a:?} vs reference {b:?}"),
            }
            if let (Some(p), Some(pr)) = (fit.p_value_adjusted, l["p_value_adjusted"].as_f64()) {
                assert!((p - pr).abs() < 1e-7, "{name} p {p} vs scipy {pr}");
            }
        }
    }

    /// GLSAR (feasible GLS with AR(1) errors, iterated prewhitening) is a different estimator:
    /// it re-weights the epochs, where Plinth keeps the OLS slope and inflates its SE by the
    /// effective sample size. What is comparable is the size of the AR(1)-aware uncertainty and
    /// the slope within it. For series with n ≥ 30 and r₁ < 0.85 (all but `strong-ar1`), Plinth's
    /// adjusted SE lies within 25 % of GLSAR's SE (each SE is itself estimated from n_eff ≈ 11–30
    /// effective values, a relative sampling spread of roughly 1/√(2 n_eff) ≈ 13–21 %), and the
    /// two slopes differ by less than that SE. `strong-ar1` (n = 24, ρ̂ ≈ 0.9) is recorded but
    /// not compared: GLSAR's iterated ρ approaches 1 and its prewhitened trend is nearly
    /// unidentified (slope +27 ± 18 mm/yr against OLS −6.5), a legitimate divergence of methods.
    #[test]
    fn ar1_uncertainty_is_comparable_with_glsar() {
        let d = statsmodels();
        let mut compared = 0;
        for c in d["series"].as_array().unwrap() {
            let name = s(&c["name"]);
            let (t, y) = (fv(&c["t_yr"]), fv(&c["d_mm"]));
            let fit = fit_linear(&t, &y).unwrap();
            if t.len() < 30 || fit.lag1_autocorrelation >= 0.85 {
                continue;
            }
            compared += 1;
            let g = &c["glsar"];
            let se = fit.se_velocity_adjusted_mm_per_yr.unwrap();
            let se_g = f(&g["se_velocity_mm_per_yr"]);
            assert!(
                rel(se, se_g) < 0.25,
                "{name}: Plinth SE_adj {se} vs GLSAR SE {se_g}"
            );
            let dv = (fit.velocity_mm_per_yr - f(&g["velocity_mm_per_yr"])).abs();
            assert!(dv < se, "{name}: slopes differ by {dv} mm/yr, SE {se}");
        }
        assert_eq!(compared, 4, "the comparable series");
    }

    /// Linear + annual fit: coefficients and SEs 1e-9 relative (exact least squares; Plinth uses
    /// Householder QR); amplitude and peak time 1e-9; SE(A) by the delta method from
    /// statsmodels' coefficient covariance, 1e-9 relative; AR(1)-adjusted velocity SE with the
    /// model's own parameter count (n − 4)/(n_eff − 4), Plinth's rule applied to statsmodels'
    /// numbers, 1e-9 relative.
    #[test]
    fn linear_annual_fit_matches_statsmodels() {
        let d = statsmodels();
        for c in d["series"].as_array().unwrap() {
            let name = s(&c["name"]);
            let (t, y) = (fv(&c["t_yr"]), fv(&c["d_mm"]));
            let a = &c["linear_annual"];
            let fit = fit_linear_annual(&t, &y).unwrap();
            for (got, key) in [
                (fit.intercept_mm, "intercept_mm"),
                (fit.velocity_mm_per_yr, "velocity_mm_per_yr"),
                (fit.se_velocity_mm_per_yr, "se_velocity_mm_per_yr"),
                (fit.sin_mm, "sin_mm"),
                (fit.cos_mm, "cos_mm"),
                (fit.amplitude_mm, "amplitude_mm"),
                (fit.se_amplitude_mm, "se_amplitude_mm"),
                (fit.peak_yr, "peak_yr"),
                (fit.rss_mm2, "rss_mm2"),
            ] {
                assert!(
                    rel(got, f(&a[key])) < 1e-9,
                    "{name} {key}: {got} vs {}",
                    a[key]
                );
            }
            assert!((fit.lag1_autocorrelation - f(&a["lag1_autocorrelation"])).abs() < 1e-9);
            match (
                fit.se_velocity_adjusted_mm_per_yr,
                a["se_velocity_adjusted_mm_per_yr"].as_f64(),
            ) {
                (Some(x), Some(r)) => assert!(rel(x, r) < 1e-9, "{name} SE_adj {x} vs {r}"),
                (None, None) => {}
                (x, r) => panic!("{name}: SE_adj {x:?} vs reference {r:?}"),
            }
        }
    }

    /// Model comparison. statsmodels' AIC/BIC include the Gaussian log-likelihood constants
    /// n(1 + ln 2π) that Plinth's n·ln(RSS/n) + k·p omits; the constant cancels in differences,
    /// which is all model selection uses, so the comparable part is ΔAIC and ΔBIC between linear and
    /// linear + annual: 1e-8 absolute. The nested F statistic (before Plinth's AR(1) adjustment)
    /// and its p-value from `compare_f_test`: F 1e-9 relative, p 1e-7 absolute (through Plinth's
    /// F tail).
    #[test]
    fn model_comparison_matches_statsmodels() {
        let d = statsmodels();
        for c in d["series"].as_array().unwrap() {
            let name = s(&c["name"]);
            let (t, y) = (fv(&c["t_yr"]), fv(&c["d_mm"]));
            let n = t.len();
            let (l, a) = (&c["linear"], &c["linear_annual"]);
            let cmp = compare_models(&t, &y, true).unwrap();
            let score = |m: &str| cmp.candidates.iter().find(|x| x.model == m).unwrap();
            let (lin, ann) = (score("linear"), score("linear+annual"));
            let d_aic = ann.aic.unwrap() - lin.aic.unwrap();
            let d_bic = ann.bic.unwrap() - lin.bic.unwrap();
            let ref_aic = f(&a["aic_statsmodels"]) - f(&l["aic_statsmodels"]);
            let ref_bic = f(&a["bic_statsmodels"]) - f(&l["bic_statsmodels"]);
            assert!(
                (d_aic - ref_aic).abs() < 1e-8,
                "{name} ΔAIC {d_aic} vs {ref_aic}"
            );
            assert!(
                (d_bic - ref_bic).abs() < 1e-8,
                "{name} ΔBIC {d_bic} vs {ref_bic}"
            );
            // The same through the public helpers.
            assert!(
                (aic(ann.rss_mm2, n, 4).unwrap() - aic(lin.rss_mm2, n, 2).unwrap() - ref_aic).abs()
                    < 1e-8
            );
            assert!(
                (bic(ann.rss_mm2, n, 4).unwrap() - bic(lin.rss_mm2, n, 2).unwrap() - ref_bic).abs()
                    < 1e-8
            );
            let fstat = ann.f_vs_linear.unwrap();
            assert!(rel(fstat, f(&a["f_vs_linear"])) < 1e-9, "{name} F");
            let df = fv(&a["f_df"]);
            let p = f_upper_tail(fstat, df[0], df[1]);
            assert!((p - f(&a["f_p_value"])).abs() < 1e-7, "{name} F p {p}");
        }
    }

    /// Student t and Fisher F tails against scipy.stats: 1e-9 absolute (see the p-value reason
    /// above; these are direct calls, without a regression in between).
    #[test]
    fn distribution_tails_match_scipy() {
        let d = statsmodels();
        for r in d["distribution_tails"]["t_two_sided"].as_array().unwrap() {
            let p = t_two_sided(f(&r["t"]), f(&r["nu"]));
            assert!((p - f(&r["p"])).abs() < 1e-9, "t {r}: {p}");
        }
        for r in d["distribution_tails"]["f_upper"].as_array().unwrap() {
            let p = f_upper_tail(f(&r["f"]), f(&r["d1"]), f(&r["d2"]));
            assert!((p - f(&r["p"])).abs() < 1e-9, "F {r}: {p}");
        }
    }
}

mod mintpy_checks {
    use super::*;

    fn side(g: &Value) -> LookSide {
        match s(&g["look_direction"]) {
            "right" => LookSide::Right,
            _ => LookSide::Left,
        }
    }
    fn pass(g: &Value) -> Pass {
        match s(&g["pass"]) {
            "ascending" => Pass::Ascending,
            _ => Pass::Descending,
        }
    }
    fn dot(a: [f64; 3], b: [f64; 3]) -> f64 {
        a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
    }

    /// Unit vectors from incidence and heading, right- and left-looking, ascending and
    /// descending, headings in (−180, 180] and [0, 360): 1e-12 (the same trigonometry; MintPy
    /// goes through its LOS azimuth angle, ISCE convention, Plinth directly from the heading).
    #[test]
    fn unit_vectors_match_mintpy() {
        for g in mintpy()["geometries"].as_array().unwrap() {
            let want = fv(&g["unit_enu_ground_to_satellite"]);
            let (inc, head) = (f(&g["incidence_deg"]), f(&g["heading_deg"]));
            let u = unit_vector_from_angles(inc, head, side(g)).unwrap();
            let checked = los_from_angles(inc, head, side(g), pass(g)).unwrap();
            for k in 0..3 {
                assert!(
                    (u[k] - want[k]).abs() < 1e-12,
                    "{}: {u:?} vs {want:?}",
                    g["label"]
                );
                assert!((checked.unit_enu[k] - want[k]).abs() < 1e-12);
            }
            // MintPy's heading round trip through its LOS azimuth angle returns the heading
            // Plinth would normalise to.
            let back = f(&g["heading_back_from_azimuth_deg"]);
            let norm = plinth::series::los::normalise_heading_deg(head);
            let mut dh = back - norm;
            dh -= 360.0 * (dh / 360.0).round();
            assert!(
                dh.abs() < 1e-9,
                "{}: heading {norm} vs MintPy {back}",
                g["label"]
            );
        }
    }

    /// Both vector orientations: MintPy's ground→satellite vector, and the same vector negated
    /// (satellite→ground, as some processors write it), given to `los_from_enu`, yield MintPy's
    /// vector (1e-12) and pass Plinth's pass-label check.
    #[test]
    fn enu_vectors_in_either_orientation_are_accepted() {
        for g in mintpy()["geometries"].as_array().unwrap() {
            let w = fv(&g["unit_enu_ground_to_satellite"]);
            let want = [w[0], w[1], w[2]];
            for given in [want, want.map(|c| -c)] {
                let got = los_from_enu(given, side(g), pass(g)).unwrap();
                for (a, b) in got.unit_enu.iter().zip(want) {
                    assert!((a - b).abs() < 1e-12, "{}", g["label"]);
                }
            }
        }
    }

    /// ENU motion → LOS value: Plinth's convention d_LOS = u·d (positive towards the satellite)
    /// equals MintPy's `enu2los` (1e-12 mm); a value in the "positive away" convention is its
    /// negative, and Plinth's vertical projection and east/up decomposition recover the motion from
    /// MintPy's values (1e-9 mm: a 2×2 solve).
    #[test]
    fn enu_to_los_and_back_match_mintpy() {
        let d = mintpy();
        let geoms = d["geometries"].as_array().unwrap();
        for g in geoms {
            let u = fv(&g["unit_enu_ground_to_satellite"]);
            let u = [u[0], u[1], u[2]];
            for p in g["projections"].as_array().unwrap() {
                let m = [f(&p["east_mm"]), f(&p["north_mm"]), f(&p["up_mm"])];
                let towards = f(&p["los_towards_satellite_mm"]);
                assert!((dot(u, m) - towards).abs() < 1e-12, "{}", g["label"]);
                assert!((f(&p["los_away_from_satellite_mm"]) + towards).abs() < 1e-12);
                if m[0] == 0.0 && m[1] == 0.0 {
                    let v = vertical_from_los(towards, None, u).unwrap();
                    assert!((v.vertical_mm - m[2]).abs() < 1e-9);
                }
            }
        }
        // East + up from an ascending and a descending right-looking geometry.
        let asc = &geoms[0];
        let desc = &geoms[2];
        for (k, p) in asc["projections"].as_array().unwrap().iter().enumerate() {
            let obs = |g: &Value| {
                let u = fv(&g["unit_enu_ground_to_satellite"]);
                LosObservation {
                    los_mm: f(&g["projections"][k]["los_towards_satellite_mm"]),
                    sigma_mm: 1.0,
                    unit_enu: [u[0], u[1], u[2]],
                }
            };
            let x = decompose_east_up(&[obs(asc), obs(desc)]).unwrap();
            let (e, n, up) = (f(&p["east_mm"]), f(&p["north_mm"]), f(&p["up_mm"]));
            // North is neglected: the up error is exactly Plinth's stated bias per mm of north.
            assert!(
                (x.up_mm - (up + x.up_bias_mm_per_mm_north * n)).abs() < 1e-9,
                "up {} for truth {up} with north {n}",
                x.up_mm
            );
            if n == 0.0 {
                assert!((x.east_mm - e).abs() < 1e-9 && (x.up_mm - up).abs() < 1e-9);
            }
        }
    }

    /// The "positive away" sign convention as Plinth reads it: a points file declared
    /// `positive = "away"` holding MintPy's values negated, and one declared `"towards"` holding
    /// them as they are, read by `ingest::load`, give the same internal values (towards the
    /// satellite). Values are written with 4 decimals (rounding ≤ 5e-5 mm) and stored as 16-bit
    /// codes with the bound docs/methods.md §1.1 states, max|value|/65 534 mm; tolerance is their
    /// sum plus 1e-6 mm for single precision.
    #[test]
    fn away_convention_is_read_as_towards() {
        let d = mintpy();
        let g = &d["geometries"][0];
        let proj = g["projections"].as_array().unwrap();
        let dir = tempfile::tempdir().unwrap();
        let ring = [
            [0.0, 0.0],
            [0.0002, 0.0],
            [0.0002, 0.0002],
            [0.0, 0.0002],
            [0.0, 0.0],
        ];
        let coords: Vec<[f64; 2]> = ring.iter().map(|c| [9.0 + c[0], 45.0 + c[1]]).collect();
        let gj = serde_json::json!({"type": "FeatureCollection", "features": [{
            "type": "Feature", "properties": {"id": "b"},
            "geometry": {"type": "Polygon", "coordinates": [coords]}}]});
        std::fs::write(dir.path().join("structures.geojson"), gj.to_string()).unwrap();
        let dates: Vec<String> = (0..proj.len())
            .map(|i| format!("2023-{:02}-01", 1 + 2 * i))
            .collect();
        for (file, sign) in [("towards.csv", 1.0), ("away.csv", -1.0)] {
            let mut text = format!("point_id,lon,lat,coherence,{}\n", dates.join(","));
            text.push_str("p1,9.0001,45.0001,0.9");
            for p in proj {
                text.push_str(&format!(",{:.4}", sign * f(&p["los_towards_satellite_mm"])));
            }
            text.push('\n');
            std::fs::write(dir.path().join(file), text).unwrap();
        }
        let toml = "[portfolio]\nname = \"outside check\"\ncrs = \"EPSG:32632\"\n\n\
            [structures]\npath = \"structures.geojson\"\n\n\
            [[datasets]]\nname = \"towards\"\npath = \"towards.csv\"\npass = \"ascending\"\nincidence_deg = 39.0\nheading_deg = -12.0\n\n\
            [[datasets]]\nname = \"away\"\npath = \"away.csv\"\npass = \"ascending\"\nincidence_deg = 39.0\nheading_deg = -12.0\npositive = \"away\"\n";
        let pf_path = dir.path().join("portfolio.toml");
        std::fs::write(&pf_path, toml).unwrap();
        let pf = plinth::portfolio::Portfolio::parse(toml, &pf_path).unwrap();
        let mut warnings = plinth::error::Warnings::default();
        let inputs = plinth::ingest::load(&pf, &mut warnings).unwrap();
        assert_eq!(inputs.datasets.len(), 2);
        let max_abs = proj
            .iter()
            .map(|p| f(&p["los_towards_satellite_mm"]).abs())
            .fold(0.0, f64::max);
        let tol = 5e-5 + max_abs / 65_534.0 + 1e-6;
        for ds in &inputs.datasets {
            assert_eq!(ds.len(), 1);
            let series = ds
                .point(0)
                .series()
                .expect("a coherent point keeps its series")
                .to_vec();
            assert_eq!(series.len(), proj.len());
            for (v, p) in series.iter().zip(proj) {
                let want = f(&p["los_towards_satellite_mm"]);
                assert!(
                    (*v as f64 - want).abs() <= tol,
                    "{v} vs MintPy {want} (tol {tol})"
                );
            }
        }
    }
}

mod shapely_checks {
    use super::*;
    use geo::{LineString, MultiPolygon, Polygon};

    fn footprints(d: &Value) -> (Vec<String>, Vec<MultiPolygon<f64>>) {
        let mut names = Vec::new();
        let mut mps = Vec::new();
        for (name, polys) in d["footprints"].as_object().unwrap() {
            let ring = |r: &Value| -> LineString<f64> {
                let mut pts: Vec<(f64, f64)> = r
                    .as_array()
                    .unwrap()
                    .iter()
                    .map(|c| (f(&c[0]), f(&c[1])))
                    .collect();
                pts.push(pts[0]);
                LineString::from(pts)
            };
            let mp = MultiPolygon::new(
                polys
                    .as_array()
                    .unwrap()
                    .iter()
                    .map(|p| {
                        Polygon::new(
                            ring(&p["exterior"]),
                            p["holes"].as_array().unwrap().iter().map(ring).collect(),
                        )
                    })
                    .collect(),
            );
            names.push(name.clone());
            mps.push(mp);
        }
        (names, mps)
    }

    /// Inside, distance to the footprint and buffer/surroundings membership on concave
    /// footprints, courtyards (holes), multipolygons, a pavilion inside a courtyard and a 1.5 m
    /// sliver, against shapely/GEOS: `contains` (interior only; a boundary point is not inside,
    /// as Plinth's rule states), `distance` 1e-9 m (both are exact point-segment distances) and
    /// `dwithin`. Each footprint is indexed alone, so Plinth's link gives its own inside/distance.
    #[test]
    fn inside_and_distance_match_shapely() {
        let d = shapely();
        let (buffer, ring) = (f(&d["buffer_m"]), f(&d["surroundings_m"]));
        let (names, mps) = footprints(&d);
        let singles: Vec<SpatialIndex> = mps
            .iter()
            .map(|m| SpatialIndex::new(vec![m.clone()], buffer, ring))
            .collect();
        let mut checked = 0;
        for p in d["points"].as_array().unwrap() {
            let (x, y) = (f(&p["x"]), f(&p["y"]));
            for (i, name) in names.iter().enumerate() {
                let links = singles[i].associate(x, y);
                let r = p["per_footprint"]
                    .as_array()
                    .unwrap()
                    .iter()
                    .find(|r| s(&r["footprint"]) == name);
                match (links.links.first(), r) {
                    (None, None) => {}
                    (Some(l), Some(r)) => {
                        checked += 1;
                        let ctx = format!("{} {name} ({x}, {y})", p["label"]);
                        assert_eq!(l.inside, r["contains"].as_bool().unwrap(), "inside: {ctx}");
                        assert!(
                            (l.distance_m - f(&r["distance_m"])).abs() < 1e-9,
                            "distance {} vs {}: {ctx}",
                            l.distance_m,
                            r["distance_m"]
                        );
                        let in_buffer = r["within_buffer"].as_bool().unwrap();
                        assert_eq!(l.role == Role::Structure, in_buffer, "buffer: {ctx}");
                        if let Some(b) = r.get("in_buffer_polygon") {
                            assert_eq!(b.as_bool().unwrap(), in_buffer, "buffer polygon: {ctx}");
                        }
                    }
                    (l, r) => panic!("{} {name}: Plinth {l:?}, shapely {r:?}", p["label"]),
                }
            }
        }
        assert!(checked > 300, "only {checked} comparisons");
    }

    /// Association over the whole scene (several structures, overlaps, near-equal distances):
    /// owner and ties by Plinth's rules 1–3 evaluated on shapely's predicates (the generator's
    /// `expected_owner`), against `SpatialIndex::associate` and `summarise`.
    #[test]
    fn association_matches_rules_on_shapely_geometry() {
        let d = shapely();
        let (names, mps) = footprints(&d);
        let index = SpatialIndex::new(mps, f(&d["buffer_m"]), f(&d["surroundings_m"]));
        for p in d["points"].as_array().unwrap() {
            let (x, y) = (f(&p["x"]), f(&p["y"]));
            let links = index.associate(x, y);
            let owner = links
                .links
                .iter()
                .find(|l| l.role == Role::Structure)
                .map(|l| names[l.structure].as_str());
            let ctx = format!("{} ({x}, {y})", p["label"]);
            assert_eq!(owner, p["expected_owner"].as_str(), "owner: {ctx}");
            assert_eq!(
                links.tie,
                p["expected_tie"].as_bool().unwrap(),
                "tie: {ctx}"
            );
            let summary = index.summarise(x, y).unwrap_or_default();
            assert_eq!(summary, links.summary(), "summarise: {ctx}");
        }
    }
}

mod published_examples {
    use super::*;

    /// Ordnance Survey, "A guide to coordinate systems in Great Britain", worked example of the
    /// Transverse Mercator projection on the Airy 1830 ellipsoid: φ = 52°39′27.2531″N,
    /// λ = 1°43′4.5177″E → E = 651 409.903 m, N = 313 177.270 m. From memory (the guide was not
    /// at hand); pyproj reproduces the recalled numbers to 0.1 mm (tests/external/pyproj.json),
    /// which corroborates them. Tolerance 1 mm: the published values are given to the millimetre.
    #[test]
    fn ordnance_survey_transverse_mercator_example() {
        let d = pyproj();
        let ex = &d["published_examples"][0];
        assert!((f(&ex["pyproj_x"]) - 651_409.903).abs() < 1e-3);
        assert!((f(&ex["pyproj_y"]) - 313_177.270).abs() < 1e-3);
        let t = Transformer::new(
            &Crs::from_epsg(4277).unwrap(),
            &Crs::from_epsg(27700).unwrap(),
        );
        let lon = 1.0 + 43.0 / 60.0 + 4.5177 / 3600.0;
        let lat = 52.0 + 39.0 / 60.0 + 27.2531 / 3600.0;
        let (x, y) = t.apply(lon, lat).unwrap();
        assert!((x - 651_409.903).abs() < 1e-3, "E {x}");
        assert!((y - 313_177.270).abs() < 1e-3, "N {y}");
    }

    /// Snyder (1987), Map Projections — A Working Manual, USGS Professional Paper 1395,
    /// Transverse Mercator (ellipsoidal) numerical example: Clarke 1866, λ₀ = 75°W, k₀ = 0.9996,
    /// φ = 40°30′N, λ = 73°30′W → x = 127 106.5 m, y = 4 484 124.4 m, k = 0.9997989. From memory
    /// (the manual was not at hand); pyproj gives 127 106.47, 4 484 124.43, k = 0.99979887.
    /// Through Plinth: EPSG:2030 is UTM zone 18N on Clarke 1866 (false easting 500 000 m) and
    /// EPSG:4008 geographic coordinates on Clarke 1866, neither with a datum shift (the NAD27
    /// codes need grid files Plinth does not ship).
    /// Tolerance 0.1 m: the published values are given to the decimetre. (The scale factor k is
    /// not checked here: Plinth's frame measures it through WGS84 radii, not Clarke 1866 ones.)
    #[test]
    fn snyder_transverse_mercator_example() {
        let geo = Crs::from_epsg(4008).unwrap();
        let utm = Crs::from_epsg(2030).unwrap();
        assert!(utm.definition().contains("+zone=18 +ellps=clrk66"));
        let (x, y) = Transformer::new(&geo, &utm).apply(-73.5, 40.5).unwrap();
        assert!((x - 500_000.0 - 127_106.5).abs() < 0.1, "x {x}");
        assert!((y - 4_484_124.4).abs() < 0.1, "y {y}");
    }
}
