//! Time series through the binary: ascending + descending decomposition on offset dates,
//! `--previous` with a changed category and a new trigger exceedance.

use crate::fixture::*;

/// Two geometries with dates 5 days apart; truth v_U = −8 mm/yr, v_E = +2 mm/yr on one block.
/// Check: insar-methods.md §4.7 worked example uses the same set-up (u_a = u(39°, −12°),
/// u_d = u(37°, 192°), offset dates) and recovers the truth.
fn two_geometry_block(v_up: f64, v_east: f64) -> (Fx, std::path::PathBuf) {
    let mk = |name: &str, pass: &str, inc: f64, head: f64, start: &str, k0: usize| {
        let ds = dates(start, 12, 61);
        let t = years(&ds);
        let u = unit(inc, head);
        let points = (0..12)
            .map(|k| FxPoint {
                id: format!("{name}{k}"),
                e: -9.0 + (k % 4) as f64 * 6.0,
                n: -3.0 + (k / 4) as f64 * 3.0,
                coherence: 0.9,
                values: t
                    .iter()
                    .enumerate()
                    .map(|(i, ti)| (u[0] * v_east + u[2] * v_up) * ti + 0.5 * wiggle(i, k + k0))
                    .collect(),
            })
            .collect();
        FxDataset {
            name: name.into(),
            pass: pass.into(),
            incidence_deg: inc,
            heading_deg: head,
            dates: ds,
            points,
        }
    };
    let asc = mk("asc", "ascending", 39.0, -12.0, "2023-01-03", 0);
    let desc = mk("desc", "descending", 37.0, 192.0, "2023-01-08", 50);
    let ss = vec![FxStructure {
        id: "B1".into(),
        name: "Block one".into(),
        height_m: Some(9.0),
        structure: Some("frame".into()),
        rings: vec![rect(0.0, 0.0, 24.0, 10.0, 0.0)],
    }];
    let fx = Fx::new();
    let p = fx.write_portfolio(
        &ss,
        &[asc, desc],
        "[[triggers]]\nname = \"watch\"\nfield = \"vertical_velocity_mm_per_yr\"\nbelow = -5.0\naction = \"Review at next period\"\n",
    );
    (fx, p)
}

#[test]
fn ascending_descending_recover_vertical_and_east() {
    let (fx, p) = two_geometry_block(-8.0, 2.0);
    let r = assess(&p, &fx.path("out"), &["--no-reports"]);
    let s = structure(&r, "B1");
    let vu = s["vertical_velocity_mm_per_yr"].as_f64().unwrap();
    let ve = s["east_velocity_mm_per_yr"].as_f64().unwrap();
    assert!((vu + 8.0).abs() < 0.4, "v_U {vu}");
    assert!((ve - 2.0).abs() < 0.6, "v_E {ve}");
    assert!(s["mean_east_mm"].is_number());
    assert_eq!(s["datasets"], serde_json::json!(["asc", "desc"]));
    assert_eq!(s["trigger_status"], "watch");
}

#[test]
fn previous_run_reports_changed_category_and_new_exceedance() {
    // Period 1: slow settlement, no exceedance. Period 2: the same structure with fast
    // settlement and a bending profile → trigger exceeded and category changed.
    let (fx1, p1) = two_geometry_block(-1.0, 0.0);
    let old = fx1.path("old");
    let r1 = assess(&p1, &old, &["--no-reports"]);
    assert_eq!(structure(&r1, "B1")["trigger_status"], "none_exceeded");
    // Period 2: same ids, strong sagging added on both geometries.
    let (fx2, _) = two_geometry_block(-8.0, 0.0);
    let ds = dates("2023-01-03", 12, 61);
    let t = years(&ds);
    let span = *t.last().unwrap();
    for (name, inc, head, start) in [
        ("asc", 39.0, -12.0, "2023-01-03"),
        ("desc", 37.0, 192.0, "2023-01-08"),
    ] {
        let d = dates(start, 12, 61);
        let u = unit(inc, head);
        let points = (0..12)
            .map(|k| {
                let e = -9.0 + (k % 4) as f64 * 6.0;
                let sag = 60.0 * (1.0 - (2.0 * e / 24.0f64).powi(2)); // mm over the window, middle down
                FxPoint {
                    id: format!("{name}{k}"),
                    e,
                    n: -3.0 + (k / 4) as f64 * 3.0,
                    coherence: 0.9,
                    values: t
                        .iter()
                        .enumerate()
                        .map(|(i, ti)| u[2] * (-8.0 * ti - sag * ti / span) + 0.3 * wiggle(i, k))
                        .collect(),
                }
            })
            .collect();
        fx2.write_points(
            &format!("points-{name}.csv"),
            &FxDataset {
                name: name.into(),
                pass: "x".into(),
                incidence_deg: inc,
                heading_deg: head,
                dates: d,
                points,
            },
        );
    }
    let p2 = fx2.path("portfolio.toml");
    let r2 = assess(
        &p2,
        &fx2.path("new"),
        &["--no-reports", "--previous", old.to_str().unwrap()],
    );
    let s = structure(&r2, "B1");
    let c = &s["change"];
    assert_eq!(c["kind"], "continuing");
    assert_eq!(
        c["previous_damage_category"],
        structure(&r1, "B1")["damage_category"]
    );
    assert_eq!(c["category_changed"], true, "{s:#}");
    assert_eq!(c["new_exceedances"], serde_json::json!(["watch"]));
    assert_eq!(c["velocity_change_significant"], true);
}
