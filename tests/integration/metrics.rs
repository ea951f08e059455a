//! Synthetic structures with known truth, end to end through the binary: tilt, sagging, hogging,
//! sparse. Expected categories are computed from the Burland & Wroth (1974) deep-beam relations
//! in damage-relations.md §2.3/§3.3 (E/G = 2.6, ν = 0.3, masonry), independent of Plinth's code.

use crate::fixture::*;

const INC: f64 = 38.0;
const HEAD: f64 = -12.0;

/// One ascending dataset whose points settle by `settle(e, n)` mm over the 2-year window, linearly in time.
fn portfolio(
    ss: Vec<FxStructure>,
    pts: Vec<(f64, f64)>,
    settle: impl Fn(f64, f64) -> f64,
) -> (Fx, std::path::PathBuf) {
    let ds = dates("2023-01-03", 12, 61);
    let t = years(&ds);
    let span = *t.last().unwrap();
    let u = unit(INC, HEAD);
    let points = pts
        .iter()
        .enumerate()
        .map(|(k, (e, n))| FxPoint {
            id: format!("p{k}"),
            e: *e,
            n: *n,
            coherence: 0.95,
            values: t
                .iter()
                .enumerate()
                .map(|(i, ti)| u[2] * (-settle(*e, *n) * ti / span) + 0.3 * wiggle(i, k))
                .collect(),
        })
        .collect();
    let d = FxDataset {
        name: "asc".into(),
        pass: "ascending".into(),
        incidence_deg: INC,
        heading_deg: HEAD,
        dates: ds,
        points,
    };
    let fx = Fx::new();
    let p = fx.write_portfolio(&ss, &[d], "");
    (fx, p)
}

fn grid(x0: f64, x1: f64, nx: usize, y0: f64, y1: f64, ny: usize) -> Vec<(f64, f64)> {
    let mut v = Vec::new();
    for i in 0..nx {
        for j in 0..ny {
            let fx = if nx > 1 {
                i as f64 / (nx - 1) as f64
            } else {
                0.5
            };
            let fy = if ny > 1 {
                j as f64 / (ny - 1) as f64
            } else {
                0.5
            };
            v.push((x0 + fx * (x1 - x0), y0 + fy * (y1 - y0)));
        }
    }
    v
}

fn building(id: &str, w: f64, h: f64, height: f64) -> FxStructure {
    FxStructure {
        id: id.into(),
        name: id.into(),
        height_m: Some(height),
        structure: Some("masonry".into()),
        rings: vec![rect(0.0, 0.0, w, h, 0.0)],
    }
}

#[test]
fn rigidly_tilted_block_recovers_tilt_and_azimuth() {
    // 1/1000 tilt going down towards azimuth 120° (ESE), plus 5 mm uniform settlement.
    let (tilt, az) = (1e-3, 120f64.to_radians());
    let (fx, p) = portfolio(
        vec![building("TILT", 24.0, 12.0, 10.0)],
        grid(-11.0, 11.0, 6, -5.0, 5.0, 4),
        move |e, n| 5.0 + tilt * 1000.0 * (e * az.sin() + n * az.cos()),
    );
    let r = assess(&p, &fx.path("out"), &["--no-reports"]);
    let s = structure(&r, "TILT");
    assert_eq!(s["status"], "assessed", "{s:#}");
    let t = s["tilt"].as_f64().unwrap();
    assert!((t - 1e-3).abs() < 0.05e-3, "tilt {t}");
    let a = s["tilt_azimuth_deg"].as_f64().unwrap();
    assert!((a - 120.0).abs() < 2.0, "azimuth {a}");
    let dr = s["deflection_ratio"].as_f64().unwrap_or(0.0);
    assert!(dr.abs() < 2e-5, "a rigid tilt has no deflection: {dr}");
    assert_eq!(s["damage_category"], 0);
}

#[test]
fn sagging_wall_line_recovers_deflection_ratio_and_category() {
    // 40 m × 4 m wall, H = 8 m; parabolic sag with Δ = 40 mm → Δ/L = 1.0e-3 (sagging).
    // L/H = 5: Fb = 5/6 + 2.6/20 = 0.96333 (damage-relations.md §2.5 table), ε_b = 1.038e-3 → category 2
    // (7.5e-4 ≤ ε < 1.5e-3, Boscardin & Cording 1989 / Burland 1995 thresholds).
    let (l, delta) = (40.0, 40.0);
    let (fx, p) = portfolio(
        vec![building("SAG", l, 4.0, 8.0)],
        grid(-19.5, 19.5, 14, -1.5, 1.5, 2),
        move |e, _| 3.0 + delta * (1.0 - (2.0 * e / l).powi(2)),
    );
    let r = assess(&p, &fx.path("out"), &["--no-reports"]);
    let s = structure(&r, "SAG");
    let dr = s["deflection_ratio"].as_f64().unwrap();
    assert!((dr - 1.0e-3).abs() < 0.1e-3, "Δ/L {dr}");
    assert_eq!(s["damage_category"], 2, "{:#}", s["damage"]);
    let g = s["governing_strain"].as_f64().unwrap();
    assert!((g - 1.038e-3).abs() < 0.12e-3, "governing strain {g}");
}

#[test]
fn hogging_building_is_negative_and_categorised() {
    // 30 m × 10 m, H = 10 m; ends settle 18 mm more than the middle → Δ/L = −6e-4 (hogging).
    // L/H = 3, hogging: Fb = 3/12 + 2.6/6 = 0.68333 (damage-relations.md §2.5), ε_b = 8.78e-4 → category 2.
    let (l, delta) = (30.0, 18.0);
    let (fx, p) = portfolio(
        vec![building("HOG", l, 10.0, 10.0)],
        grid(-14.5, 14.5, 10, -4.0, 4.0, 3),
        move |e, _| 20.0 - delta * (1.0 - (2.0 * e / l).powi(2)),
    );
    let r = assess(&p, &fx.path("out"), &["--no-reports"]);
    let s = structure(&r, "HOG");
    if std::env::var("PLINTH_DEBUG").is_ok() {
        eprintln!(
            "{}",
            serde_json::to_string_pretty(&s["metrics"]["axis_metrics"]).unwrap()
        );
    }
    let dr = s["deflection_ratio"].as_f64().unwrap();
    assert!((dr + 6e-4).abs() < 0.6e-4, "Δ/L {dr}");
    assert_eq!(s["damage_category"], 2, "{:#}", s["damage"]);
}

#[test]
fn sparse_structure_is_insufficient() {
    let (fx, p) = portfolio(
        vec![building("FEW", 20.0, 10.0, 8.0)],
        grid(-5.0, 5.0, 2, 0.0, 0.0, 1),
        |_, _| 10.0,
    );
    let r = assess(&p, &fx.path("out"), &["--no-reports"]);
    let s = structure(&r, "FEW");
    assert_eq!(s["status"], "insufficient_data");
    assert!(s["damage_category"].is_null() && s["tilt"].is_null());
}
