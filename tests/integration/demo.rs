//! The bundled demo portfolio runs end to end and its headline results match the truth the
//! generator planted (demo-portfolio/truth.json, written by `plinth demo`).

use crate::fixture::*;

fn truth() -> serde_json::Value {
    let p = concat!(env!("CARGO_MANIFEST_DIR"), "/demo-portfolio/truth.json");
    serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap()
}

fn truth_of<'a>(t: &'a serde_json::Value, id: &str) -> &'a serde_json::Value {
    t["structures"]
        .as_array()
        .unwrap()
        .iter()
        .find(|s| s["id"] == id)
        .unwrap()
}

/// The bundled demo assessed without reports into `out` of a new fixture folder.
fn assess_demo() -> (Fx, serde_json::Value) {
    let fx = Fx::new();
    let portfolio = concat!(env!("CARGO_MANIFEST_DIR"), "/demo-portfolio/portfolio.toml");
    let r = assess(
        std::path::Path::new(portfolio),
        &fx.path("out"),
        &["--no-reports"],
    );
    (fx, r)
}

#[test]
fn demo_headline_results_match_planted_truth() {
    let (fx, r) = assess_demo();
    let t = truth();
    // The results layout: one compact record per line of results.json, at most 5 KB each (the
    // detail is in details/<stem>.json, joined in by `assess` above).
    let text = std::fs::read_to_string(fx.path("out/results.json")).unwrap();
    let records: Vec<&str> = text.lines().filter(|l| l.starts_with("{\"id\":")).collect();
    assert_eq!(records.len(), r["structures"].as_array().unwrap().len());
    for l in &records {
        assert!(l.len() <= 5 * 1024, "{} bytes: {}", l.len(), &l[..80]);
    }
    // Every structure's status is the planted one (empty, sparse and mostly low-coherence ones
    // are insufficient, never category 0).
    for s in r["structures"].as_array().unwrap() {
        let tr = truth_of(&t, s["id"].as_str().unwrap());
        assert_eq!(s["status"], tr["expected_status"], "{}", s["id"]);
        if s["status"] == "insufficient_data" {
            assert!(s["damage_category"].is_null() && s["vertical_velocity_mm_per_yr"].is_null());
        }
    }
    // Rigidly tilted block: 1.2e-3 towards 120° planted.
    let f07 = structure(&r, plinth::synth::demo::TILTED_ID);
    let tt = truth_of(&t, plinth::synth::demo::TILTED_ID);
    let (tilt, az) = (
        f07["tilt"].as_f64().unwrap(),
        f07["tilt_azimuth_deg"].as_f64().unwrap(),
    );
    let tilt_truth = tt["period"]["tilt"].as_f64().unwrap();
    assert!(
        (tilt - tilt_truth).abs() < 0.15 * tilt_truth,
        "tilt {tilt} vs {tilt_truth}"
    );
    assert!(
        (az - tt["period"]["tilt_azimuth_deg"].as_f64().unwrap()).abs() < 5.0,
        "azimuth {az}"
    );
    assert_eq!(f07["damage_category"], 0);
    // Sagging and hogging buildings: sign of Δ/L and the designed category (Burland & Wroth
    // deep beam with E/G 2.6, ν 0.3, computed by the generator independently of the pipeline).
    for (id, sign) in [
        (plinth::synth::demo::SAGGING_ID, 1.0),
        (plinth::synth::demo::HOGGING_ID, -1.0),
    ] {
        let s = structure(&r, id);
        let tr = truth_of(&t, id);
        let dr = s["deflection_ratio"].as_f64().unwrap();
        let dr_t = tr["period"]["deflection_ratio"].as_f64().unwrap();
        assert!(
            dr * sign > 0.0 && (dr - dr_t).abs() < 0.2 * dr_t.abs(),
            "{id}: Δ/L {dr} vs {dr_t}"
        );
        assert_eq!(s["damage_category"], tr["damage"]["category"], "{id}");
    }
    // The planted unwrapping jump is flagged with its own reason.
    let jump = structure(&r, plinth::synth::demo::JUMP_ID);
    assert_eq!(
        jump["n_rejected"]["unwrapping_jump"], 1,
        "{:#}",
        jump["n_rejected"]
    );
    // The structure that speeds up after 2024-03-01 gets a significant breakpoint near that date.
    let f15 = structure(&r, plinth::synth::demo::SPEEDS_UP_ID);
    let bp = f15["series"]["vertical"]["fits"]["breakpoint_date"]
        .as_str()
        .expect("breakpoint detected");
    let d = chrono::NaiveDate::parse_from_str(bp, "%Y-%m-%d").unwrap();
    let planted = chrono::NaiveDate::from_ymd_opt(2024, 3, 1).unwrap();
    assert!((d - planted).num_days().abs() <= 150, "breakpoint {d}");
}

/// Each observability situation the demo was designed for (truth.json `observability`) is what
/// the assessment reports for that structure, and the tunnel's `[works]` gives the structures
/// near it a prediction to compare with.
#[test]
fn demo_reports_each_designed_observability_situation_and_the_works() {
    let (_fx, r) = assess_demo(); // the folder lives to the end of the test
    let t = truth();
    let designed: Vec<(&str, &str)> = t["structures"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|s| Some((s["id"].as_str()?, s["observability"].as_str()?)))
        .collect();
    let situations: Vec<&str> = designed.iter().map(|(_, o)| *o).collect();
    for want in [
        "no_east_west",
        "strain_axis_not_observable",
        "profile_unresolved",
    ] {
        assert!(situations.contains(&want), "no demo structure for {want}");
    }
    for (id, situation) in designed {
        let s = structure(&r, id);
        assert_eq!(s["status"], "assessed", "{id}");
        match situation {
            "no_east_west" => {
                assert_eq!(
                    s["look_directions"],
                    serde_json::json!(["east-looking"]),
                    "{id}"
                );
                assert_eq!(
                    s["horizontal_strain_status"], "not_observable_geometry",
                    "{id}"
                );
                assert!(s["east_velocity_mm_per_yr"].is_null(), "{id}");
                assert_eq!(s["category_lower_bound"], true, "{id}");
            }
            "strain_axis_not_observable" => {
                assert_eq!(s["horizontal_strain_status"], "not_observable_axis", "{id}");
                assert_eq!(s["category_lower_bound"], true, "{id}");
            }
            "profile_unresolved" => {
                assert!(s["damage_category"].is_null(), "{id}");
                let why = s["status_reasons"].to_string();
                assert!(why.contains("deflection ratio not resolved"), "{id}: {why}");
            }
            other => panic!("{id}: unknown situation {other}"),
        }
    }
    // Predicted against observed near the tunnel: the structures over the trough have a
    // prediction of the planted order (S_max 20 mm) and an observed/predicted ratio.
    let near: Vec<&serde_json::Value> = r["structures"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|s| {
            s["predicted_settlement_mm"]
                .as_f64()
                .is_some_and(|p| p > 5.0)
        })
        .collect();
    assert!(
        near.len() >= 4,
        "{} structures with a prediction",
        near.len()
    );
    for s in near {
        let p = s["predicted_settlement_mm"].as_f64().unwrap();
        assert!(
            p <= 20.5,
            "{}: predicted {p} mm above the planted S_max",
            s["id"]
        );
        let ratio = s["observed_to_predicted_settlement"].as_f64().unwrap();
        assert!(
            (0.5..2.5).contains(&ratio),
            "{}: observed/predicted {ratio}",
            s["id"]
        );
    }
}
