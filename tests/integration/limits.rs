//! Scale limits (docs/formats.md "Limits"): a structure with 100 000 points, a footprint with
//! 10 000 vertices, and 10 000 epochs are assessed correctly (or refused with a clear error),
//! never crash. Monte Carlo and bootstrap draws are reduced here to keep the debug test quick;
//! the sizes are the point of the test.

use crate::fixture::*;

const INC: f64 = 38.0;
const HEAD: f64 = -12.0;
const FAST: &str = "[assessment]\nmonte_carlo_draws = 20\nbootstrap_draws = 19\n";

fn settling_points(
    n_points: usize,
    ds: &[chrono::NaiveDate],
    half_w: f64,
    half_h: f64,
    v_up: f64,
) -> Vec<FxPoint> {
    let t = years(ds);
    let u = unit(INC, HEAD);
    (0..n_points)
        .map(|k| {
            let fx = ((k as f64 * 0.618_033_988_7) % 1.0) * 2.0 - 1.0;
            let fy = ((k as f64 * 0.754_877_666_2) % 1.0) * 2.0 - 1.0;
            FxPoint {
                id: format!("p{k}"),
                e: fx * half_w * 0.95,
                n: fy * half_h * 0.95,
                coherence: 0.9,
                values: t
                    .iter()
                    .enumerate()
                    .map(|(i, ti)| u[2] * v_up * ti + 0.5 * wiggle(i, k))
                    .collect(),
            }
        })
        .collect()
}

fn one_structure(
    rings: Vec<Vec<(f64, f64)>>,
    points: Vec<FxPoint>,
    ds: Vec<chrono::NaiveDate>,
) -> (Fx, std::path::PathBuf) {
    let d = FxDataset {
        name: "asc".into(),
        pass: "ascending".into(),
        incidence_deg: INC,
        heading_deg: HEAD,
        dates: ds,
        points,
    };
    let s = FxStructure {
        id: "BIG".into(),
        name: "Large case".into(),
        height_m: Some(20.0),
        structure: Some("frame".into()),
        rings,
    };
    let fx = Fx::new();
    let p = fx.write_portfolio(&[s], &[d], FAST);
    (fx, p)
}

#[test]
fn structure_with_100k_points() {
    let ds = dates("2023-01-03", 24, 31);
    let (fx, p) = one_structure(
        vec![rect(0.0, 0.0, 200.0, 100.0, 0.0)],
        settling_points(100_000, &ds, 100.0, 50.0, -4.0),
        ds,
    );
    let r = assess(&p, &fx.path("out"), &["--no-reports"]);
    let s = structure(&r, "BIG");
    assert_eq!(s["status"], "assessed");
    assert_eq!(s["n_points"], 100_000);
    let v = s["vertical_velocity_mm_per_yr"].as_f64().unwrap();
    assert!((v + 4.0).abs() < 0.3, "{v}");
}

#[test]
fn footprint_with_10k_vertices() {
    // A circle of radius 30 m drawn with 10 000 vertices.
    let n = 10_000;
    let mut ring: Vec<(f64, f64)> = (0..n)
        .map(|i| {
            let a = i as f64 / n as f64 * std::f64::consts::TAU;
            (30.0 * a.cos(), 30.0 * a.sin())
        })
        .collect();
    ring.push(ring[0]);
    let ds = dates("2023-01-03", 12, 61);
    let (fx, p) = one_structure(vec![ring], settling_points(40, &ds, 20.0, 20.0, -3.0), ds);
    let r = assess(&p, &fx.path("out"), &["--no-reports"]);
    let s = structure(&r, "BIG");
    assert_eq!(s["status"], "assessed", "{s:#}");
    assert_eq!(s["n_points"], 40);
}

#[test]
fn ten_thousand_epochs() {
    let ds = dates("1990-01-01", 1, 10_000);
    let (fx, p) = one_structure(
        vec![rect(0.0, 0.0, 20.0, 10.0, 0.0)],
        settling_points(8, &ds, 10.0, 5.0, -2.0),
        ds,
    );
    let r = assess(&p, &fx.path("out"), &["--no-reports"]);
    let s = structure(&r, "BIG");
    assert_eq!(s["status"], "assessed", "{s:#}");
    let v = s["vertical_velocity_mm_per_yr"].as_f64().unwrap();
    assert!((v + 2.0).abs() < 0.1, "{v}");
}
