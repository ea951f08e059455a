//! The verdict says only what the evidence supports, end to end through the binary: look
//! directions, the axis angle of horizontal strain, a common reference, resolved profiles and
//! category probabilities. Expected values come from the planted truth and the Burland & Wroth
//! (1974) relations in damage-relations.md §2.3 (E/G = 2.6, ν = 0.3, masonry), hand-computed.

use crate::fixture::*;

/// Ascending (east-looking) and descending (west-looking) geometries of insar-methods.md Appendix A
/// (LOS-1 and LOS-2).
const ASC: (f64, f64) = (39.0, -12.0);
const DESC: (f64, f64) = (37.0, 192.0);
/// A second ascending track, looking east as well (steeper incidence).
const ASC2: (f64, f64) = (33.0, -12.0);

/// Planted motion of one point at the window end (linear in time): settlement (mm, + down) and
/// east displacement (mm, + east), as functions of the local east/north position.
type Field = dyn Fn(f64, f64) -> (f64, f64);

/// One dataset of points at `pts` moving by `field`, with an extra LOS `drift` (mm/yr) common to
/// every point (a creeping processing reference) and 0.3 mm of deterministic noise.
fn dataset(
    name: &str,
    pass: &str,
    geom: (f64, f64),
    pts: &[(f64, f64)],
    field: &Field,
    drift_mm_per_yr: f64,
    seed: usize,
) -> FxDataset {
    let ds = dates("2021-01-05", 24, 61);
    let t = years(&ds);
    let span = *t.last().unwrap();
    let u = unit(geom.0, geom.1);
    let points = pts
        .iter()
        .enumerate()
        .map(|(k, &(e, n))| {
            let (s, east) = field(e, n);
            FxPoint {
                id: format!("{name}-{k}"),
                e,
                n,
                coherence: 0.95,
                values: t
                    .iter()
                    .enumerate()
                    .map(|(i, ti)| {
                        let f = ti / span;
                        u[0] * east * f
                            + u[2] * (-s * f)
                            + drift_mm_per_yr * ti
                            + 0.3 * wiggle(i, k + seed)
                    })
                    .collect(),
            }
        })
        .collect();
    FxDataset {
        name: name.into(),
        pass: pass.into(),
        incidence_deg: geom.0,
        heading_deg: geom.1,
        dates: ds,
        points,
    }
}

/// A 40 m × 10 m masonry terrace, H = 8 m, long side `rot_deg` anticlockwise from east.
fn terrace(id: &str, cx: f64, cy: f64, rot_deg: f64) -> FxStructure {
    FxStructure {
        id: id.into(),
        name: id.into(),
        height_m: Some(8.0),
        structure: Some("masonry".into()),
        rings: vec![rect(cx, cy, 40.0, 10.0, rot_deg)],
    }
}

/// Points along the long axis of a terrace: axis coordinates `s` (m from the centre), 2.5 m either
/// side of the axis, rotated with the terrace; `shift` moves them along the axis (so that two
/// datasets do not share positions).
fn along(cx: f64, cy: f64, rot_deg: f64, s: &[f64], shift: f64) -> Vec<(f64, f64)> {
    let (sn, cs) = rot_deg.to_radians().sin_cos();
    s.iter()
        .enumerate()
        .map(|(k, &a)| {
            let a = a + shift;
            let b = if k % 2 == 0 { -2.5 } else { 2.5 };
            (cx + a * cs - b * sn, cy + a * sn + b * cs)
        })
        .collect()
}

/// An ascending (east-looking) and a descending (west-looking) dataset of 20 points each along
/// a terrace rotated by `rot_deg`, moving by `f`, no reference drift.
fn both_looks(f: &Field, rot_deg: f64) -> [FxDataset; 2] {
    [
        dataset(
            "asc",
            "ascending",
            ASC,
            &along(0.0, 0.0, rot_deg, &stations(), 0.0),
            f,
            0.0,
            0,
        ),
        dataset(
            "desc",
            "descending",
            DESC,
            &along(0.0, 0.0, rot_deg, &stations(), 0.4),
            f,
            0.0,
            50,
        ),
    ]
}

fn stations() -> Vec<f64> {
    (0..20).map(|i| -19.0 + 2.0 * i as f64).collect()
}

/// Parabolic sag of `delta` mm over the 40 m terrace (ends 0, middle `delta`) plus 2 mm uniform.
fn sag(delta: f64, rot_deg: f64) -> impl Fn(f64, f64) -> (f64, f64) {
    let (sn, cs) = rot_deg.to_radians().sin_cos();
    move |e, n| {
        let s = e * cs + n * sn;
        (2.0 + delta * (1.0 - (s / 20.0).powi(2)), 0.0)
    }
}

fn run(fx: &Fx, p: &std::path::Path) -> serde_json::Value {
    assess(p, &fx.path("out"), &["--no-reports"])
}

#[test]
fn two_same_look_tracks_give_no_east_west_and_a_category_from_bending() {
    // Two ascending tracks (33° and 39°): both east-looking. 45 mm sag over 40 m: Δ/L = 1.125e-3;
    // L/H = 5 sagging: Fb = 5/6 + 2.6/20 = 0.9633 → ε_b = 1.168e-3; Fd = 1 + 2·25/7.8 = 7.41 →
    // ε_d = 1.52e-4: category 2 (7.5e-4 ≤ ε < 1.5e-3), from bending alone.
    let f = sag(45.0, 0.0);
    let a = dataset(
        "asc-a",
        "ascending",
        ASC,
        &along(0.0, 0.0, 0.0, &stations(), 0.0),
        &f,
        0.0,
        0,
    );
    let b = dataset(
        "asc-b",
        "ascending",
        ASC2,
        &along(0.0, 0.0, 0.0, &stations(), 0.4),
        &f,
        0.0,
        50,
    );
    let fx = Fx::new();
    let p = fx.write_portfolio(&[terrace("T1", 0.0, 0.0, 0.0)], &[a, b], "");
    let r = run(&fx, &p);
    let s = structure(&r, "T1");
    assert_eq!(s["status"], "assessed", "{:#}", s["status_reasons"]);
    assert!(s["east_velocity_mm_per_yr"].is_null(), "{s:#}");
    assert!(s["mean_east_mm"].is_null());
    assert!(s["horizontal_strain"].is_null());
    assert_eq!(s["horizontal_strain_status"], "not_observable_geometry");
    assert_eq!(s["look_directions"], serde_json::json!(["east-looking"]));
    assert_eq!(s["damage_category"], 2, "{:#}", s["damage"]);
    assert_eq!(s["category_lower_bound"], true);
    assert_eq!(s["grade"]["inputs"]["look_direction_count"], 1);
    // Both datasets are east-looking in the portfolio block.
    let looks: Vec<&str> = r["portfolio"]["datasets"]
        .as_array()
        .unwrap()
        .iter()
        .map(|d| d["look_direction"].as_str().unwrap())
        .collect();
    assert_eq!(looks, ["east-looking", "east-looking"]);
}

#[test]
fn building_at_45_degrees_has_no_horizontal_strain_and_says_so() {
    let rot = 45.0;
    let f = sag(45.0, rot);
    let [a, d] = both_looks(&f, rot);
    let fx = Fx::new();
    let p = fx.write_portfolio(&[terrace("D45", 0.0, 0.0, rot)], &[a, d], "");
    let r = run(&fx, &p);
    let s = structure(&r, "D45");
    assert!(s["horizontal_strain"].is_null(), "{s:#}");
    assert_eq!(s["horizontal_strain_status"], "not_observable_axis");
    assert_eq!(s["category_lower_bound"], true);
    assert!(
        s["assumptions"]
            .as_array()
            .unwrap()
            .iter()
            .any(|a| a.as_str().unwrap().contains("may be understated")),
        "{:#}",
        s["assumptions"]
    );
    // Two look directions: the east–west velocity is observable (0 planted).
    let ve = s["east_velocity_mm_per_yr"].as_f64().unwrap();
    assert!(ve.abs() < 0.3, "east velocity {ve}");
}

#[test]
fn east_west_building_recovers_a_planted_extension() {
    // East displacement growing by 0.1 mm per metre eastwards: ε_h = 1e-4 along the east–west
    // axis (hand-derived: Δu_E / Δx = 0.1 mm/m = 1e-4), no settlement beyond 2 mm uniform.
    let f = |e: f64, _n: f64| (2.0, 0.1 * e);
    let [a, d] = both_looks(&f, 0.0);
    let fx = Fx::new();
    let p = fx.write_portfolio(&[terrace("EW", 0.0, 0.0, 0.0)], &[a, d], "");
    let r = run(&fx, &p);
    let s = structure(&r, "EW");
    assert_eq!(s["horizontal_strain_status"], "measured", "{s:#}");
    let eh = s["horizontal_strain"].as_f64().unwrap();
    let ax = &s["metrics"]["axis_metrics"][0]["horizontal_strain"];
    let se = ax["horizontal_strain_se"].as_f64().unwrap();
    assert!(
        (eh - 1e-4).abs() <= 3.0 * se + 2e-6,
        "ε_h {eh} ± {se}, planted 1e-4"
    );
    assert_eq!(s["category_lower_bound"], false);
}

#[test]
fn reference_drift_is_removed_by_a_common_reference_and_warned_about_without_one() {
    // The ascending dataset's processing reference creeps: every value gains −1.5 mm/yr of LOS.
    // A stable area 400 m east holds 8 points of each dataset. True vertical velocity of the
    // structure: −5 mm over the 4-year window = −1.25 mm/yr (planted), no east motion.
    let field = |_e: f64, _n: f64| (5.0, 0.0);
    let mut pa = along(0.0, 0.0, 0.0, &stations(), 0.0);
    let mut pd = along(0.0, 0.0, 0.0, &stations(), 0.4);
    let stable: Vec<(f64, f64)> = (0..8).map(|i| (400.0 + 3.0 * i as f64, 5.0)).collect();
    pa.extend(&stable);
    pd.extend(stable.iter().map(|(e, n)| (e + 1.0, n - 2.0)));
    // Points in the reference area do not move: the field is applied only near the terrace.
    let f = move |e: f64, n: f64| if e > 200.0 { (0.0, 0.0) } else { field(e, n) };
    let both = || {
        [
            dataset("asc", "ascending", ASC, &pa, &f, -1.5, 0),
            dataset("desc", "descending", DESC, &pd, &f, 0.0, 50),
        ]
    };
    let (lon, lat) = lonlat(410.0, 4.0);
    let with = format!("[reference]\npoint = [{lon}, {lat}]\nradius_m = 30.0\n");

    let fx = Fx::new();
    let p = fx.write_portfolio(&[terrace("R", 0.0, 0.0, 0.0)], &both(), "");
    let o = plinth(&[
        "assess",
        p.to_str().unwrap(),
        "--out",
        fx.path("out").to_str().unwrap(),
        "--no-reports",
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert!(stderr.contains("no [reference] section"), "{stderr}");
    let r: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(fx.path("out/results.json")).unwrap())
            .unwrap();
    let s = structure(&r, "R");
    let biased = s["vertical_velocity_mm_per_yr"].as_f64().unwrap();
    assert!(
        (biased + 1.25).abs() > 0.5,
        "the drift must show without a reference: {biased}"
    );
    assert!(
        s["assumptions"]
            .as_array()
            .unwrap()
            .iter()
            .any(|x| x.as_str().unwrap().contains("without a common reference")),
        "{:#}",
        s["assumptions"]
    );

    let fx2 = Fx::new();
    let p2 = fx2.write_portfolio(&[terrace("R", 0.0, 0.0, 0.0)], &both(), &with);
    let r2 = run(&fx2, &p2);
    let s2 = structure(&r2, "R");
    let v = s2["vertical_velocity_mm_per_yr"].as_f64().unwrap();
    let se = s2["vertical_velocity_se_mm_per_yr"].as_f64().unwrap();
    assert!(
        (v + 1.25).abs() <= 3.0 * se + 0.1,
        "recovered {v} ± {se}, planted −1.25"
    );
    let ve = s2["east_velocity_mm_per_yr"].as_f64().unwrap();
    assert!(ve.abs() < 0.3, "east velocity {ve}");
    let ds = &r2["portfolio"]["datasets"];
    let rate = ds[0]["reference"]["correction_rate_mm_per_yr"]
        .as_f64()
        .unwrap();
    assert!((rate + 1.5).abs() < 0.1, "correction rate {rate}");
    assert_eq!(ds[0]["reference"]["points_used"], 8);
    assert!(r2["portfolio"]["common_reference"]["radius_m"].as_f64() == Some(30.0));
}

#[test]
fn too_few_reference_points_is_an_error_naming_the_dataset() {
    let f = |_e: f64, _n: f64| (0.0, 0.0);
    let mut pa = along(0.0, 0.0, 0.0, &stations(), 0.0);
    pa.extend([(400.0, 5.0), (403.0, 5.0)]);
    let a = dataset("asc", "ascending", ASC, &pa, &f, 0.0, 0);
    let (lon, lat) = lonlat(401.0, 5.0);
    let fx = Fx::new();
    let p = fx.write_portfolio(
        &[terrace("R", 0.0, 0.0, 0.0)],
        &[a],
        &format!("[reference]\npoint = [{lon}, {lat}]\nradius_m = 20.0\n"),
    );
    let o = plinth(&["check", p.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    let e = String::from_utf8_lossy(&o.stderr);
    assert!(
        e.contains("dataset `asc`: 2 coherent point(s) in the reference area"),
        "{e}"
    );
}

#[test]
fn five_points_in_part_of_a_terrace_give_no_category() {
    // Five points in the west 40 % of the terrace (x from −19 to −5 m) of a 45 mm sag.
    let f = sag(45.0, 0.0);
    let s_west = [-19.0, -15.5, -12.0, -8.5, -5.0];
    let a = dataset(
        "asc",
        "ascending",
        ASC,
        &along(0.0, 0.0, 0.0, &s_west, 0.0),
        &f,
        0.0,
        0,
    );
    let fx = Fx::new();
    let p = fx.write_portfolio(&[terrace("HALF", 0.0, 0.0, 0.0)], &[a], "");
    let r = run(&fx, &p);
    let s = structure(&r, "HALF");
    assert!(s["damage_category"].is_null(), "{s:#}");
    assert!(s["damage_category_probabilities"].is_null());
    let reasons: Vec<&str> = s["status_reasons"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_str().unwrap())
        .collect();
    assert!(
        reasons.iter().any(|x| x.contains(
            "deflection ratio not resolved: no profile along the principal axis (points cover 0.35"
        )),
        "{reasons:?}"
    );
    // The settlement screening needs no profile and is still given.
    assert!(s["settlement_mm"].as_f64().is_some());
    assert!(!s["damage"]["rankin"].is_null(), "{:#}", s["damage"]);
}

#[test]
fn category_probabilities_sum_to_one_and_concentrate_on_a_clear_category() {
    // The terrace of the first test seen from both look directions: category 2 (ε_b = 1.168e-3,
    // 0.42e-3 from the next boundary against noise of 0.3 mm on 40 points).
    let f = sag(45.0, 0.0);
    let [a, d] = both_looks(&f, 0.0);
    let fx = Fx::new();
    let p = fx.write_portfolio(&[terrace("CLEAR", 0.0, 0.0, 0.0)], &[a, d], "");
    let r = run(&fx, &p);
    let s = structure(&r, "CLEAR");
    assert_eq!(s["damage_category"], 2, "{:#}", s["damage"]);
    let probs = s["damage_category_probabilities"].as_object().unwrap();
    assert_eq!(probs.len(), 5);
    let sum: f64 = probs.values().map(|v| v.as_f64().unwrap()).sum();
    assert!((sum - 1.0).abs() < 1e-9, "{probs:?}");
    assert!(probs["2"].as_f64().unwrap() > 0.9, "{probs:?}");
    assert_eq!(s["damage_category_probability"], probs["2"]);
    // The CSV carries the probability of the stated category and of exceeding it.
    let csv = std::fs::read_to_string(fx.path("out/results.csv")).unwrap();
    let header = csv.lines().next().unwrap();
    assert!(header.contains("damage_category_probability,damage_category_exceedance_probability"));
}
