//! Screening near works, end to end through the binary: a structure over a dated tunnel drive
//! whose measured settlement follows the greenfield prediction (observed/predicted ≈ 1, face
//! history), a distant structure (negligible), and bad `[works]` input refused with the key named.
//!
//! Truth: Peck (1969) trough with i = K·z0 and S_max = V_L·π·D²/(4·√(2π)·i) (damage-relations.md
//! §7.1 eq. 7.4), longitudinally Φ((face − chainage)/i) (Attewell & Woodman 1982, from memory).
//! D 6 m, z0 20 m, K 0.5, V_L 1.5 % → i 10 m, S_max 16.9197 mm (§8.8 G3).

use crate::fixture::*;

const INC: f64 = 38.0;
const HEAD: f64 = -12.0;
const S_MAX_MM: f64 = 16.9197;
const I_M: f64 = 10.0;

/// Face chainage on day `d` after 2023-01-03: launch at chainage 0 on day 150, 1000 m on day 515.
fn face_m(day: f64) -> f64 {
    ((day - 150.0) / 365.0 * 1000.0).clamp(0.0, 1000.0)
}

/// Settlement (mm) at local (e, n) on day `d`; the drive runs north along e = 0 from n = −500.
fn truth_mm(e: f64, n: f64, day: f64) -> f64 {
    let chainage = n + 500.0;
    S_MAX_MM
        * (-(e * e) / (2.0 * I_M * I_M)).exp()
        * plinth::works::tunnel::normal_cdf((face_m(day) - chainage) / I_M)
}

fn works_toml(extra_tunnel_keys: &str) -> String {
    let (a0, a1) = (lonlat(0.0, -500.0), lonlat(0.0, 500.0));
    format!(
        "[works]\n[[works.tunnels]]\nname = \"Drive A\"\nalignment = [[{:.9}, {:.9}], [{:.9}, {:.9}]]\n\
         axis_depth_m = 20.0\ndiameter_m = 6.0\nvolume_loss_percent = 1.5\ntrough_width_k = 0.5\n\
         {extra_tunnel_keys}\
         [[works.tunnels.progress]]\ndate = \"2023-06-02\"\nchainage_m = 0.0\n\
         [[works.tunnels.progress]]\ndate = \"2024-06-01\"\nchainage_m = 1000.0\n",
        a0.0, a0.1, a1.0, a1.1
    )
}

fn portfolio(works: &str) -> (Fx, std::path::PathBuf) {
    let ds = dates("2023-01-03", 12, 61);
    let days: Vec<f64> = ds.iter().map(|d| (*d - ds[0]).num_days() as f64).collect();
    let u = unit(INC, HEAD);
    // OVER: 20 m × 12 m beside the axis, e ∈ [0, 20]; FAR: 300 m east.
    let ss = vec![
        FxStructure {
            id: "OVER".into(),
            name: "Over the drive".into(),
            height_m: Some(8.0),
            structure: Some("masonry".into()),
            rings: vec![rect(10.0, 0.0, 20.0, 12.0, 0.0)],
        },
        FxStructure {
            id: "FAR".into(),
            name: "Far away".into(),
            height_m: Some(8.0),
            structure: Some("masonry".into()),
            rings: vec![rect(300.0, 0.0, 20.0, 12.0, 0.0)],
        },
    ];
    let mut pts = Vec::new();
    for cx in [10.0, 300.0] {
        for i in 0..8 {
            for j in 0..3 {
                pts.push((cx - 9.5 + i as f64 * 19.0 / 7.0, -4.5 + j as f64 * 4.5));
            }
        }
    }
    let points = pts
        .iter()
        .enumerate()
        .map(|(k, (e, n))| FxPoint {
            id: format!("p{k}"),
            e: *e,
            n: *n,
            coherence: 0.95,
            values: days
                .iter()
                .enumerate()
                .map(|(i, d)| -u[2] * truth_mm(*e, *n, *d) + 0.2 * wiggle(i, k))
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
    let p = fx.write_portfolio(&ss, &[d], works);
    (fx, p)
}

#[test]
fn observed_movement_following_the_prediction_gives_ratio_near_one() {
    let (fx, p) = portfolio(&works_toml(""));
    let r = assess(&p, &fx.path("out"), &["--no-reports"]);
    let s = structure(&r, "OVER");
    assert_eq!(s["status"], "assessed", "{s:#}");
    let w = &s["works"];
    // Predicted: the largest settlement on the footprint is at its edge over the axis (e = 0):
    // S_max 16.9197 mm (§8.8 G3), within 0.05 mm (lon/lat round trip, footprint search).
    let pred = s["predicted_settlement_mm"].as_f64().unwrap();
    assert!((pred - S_MAX_MM).abs() < 0.05, "predicted {pred}");
    // Observed over the window follows the prediction: nearest points lie 0.5 m inside the
    // edge (s 16.90 mm) and carry 0.2 mm noise, so the ratio is 1 within 5 %.
    let ratio = s["observed_to_predicted_settlement"].as_f64().unwrap();
    assert!(
        (ratio - 1.0).abs() < 0.05,
        "ratio {ratio}\n{:#}",
        w["comparison"]
    );
    assert!(
        w["comparison"]["period"]
            .as_str()
            .unwrap()
            .contains("window start")
    );
    // Rankin (§6.1, from memory): 16.9 mm → category 2, so stage 2 is required.
    assert_eq!(w["stage1"]["rankin"]["category"], "slight");
    assert_eq!(w["stage1"]["stage2_required"], true);
    assert!(s["predicted_category"].as_u64().is_some());
    // Face history: before the face arrives (3 i short) nothing, after it has passed (3 i) the
    // full trough; observed within 1 mm of predicted at every epoch.
    let fh = &w["face_history"][0];
    assert_eq!(fh["tunnel"], "Drive A");
    assert!((fh["structure_chainage_m"].as_f64().unwrap() - 500.0).abs() < 0.5);
    let epochs = fh["epochs"].as_array().unwrap();
    assert_eq!(epochs.len(), 61);
    let mut before = 0;
    let mut after = 0;
    for e in epochs {
        let past = e["face_past_structure_m"].as_f64().unwrap();
        let pr = e["predicted_settlement_mm"].as_f64().unwrap();
        if let Some(ob) = e["observed_settlement_mm"].as_f64() {
            assert!((ob - pr).abs() < 1.0, "{e}");
        }
        if past < -30.0 {
            before += 1;
            assert!(pr.abs() < 0.05, "{e}");
        } else if past > 30.0 {
            after += 1;
            assert!(pr > 8.0, "{e}");
        }
    }
    assert!(before > 5 && after > 5, "{before} {after}");

    let far = structure(&r, "FAR");
    assert!(far["predicted_settlement_mm"].as_f64().unwrap() < 1e-3);
    assert!(far["observed_to_predicted_settlement"].is_null());
    assert_eq!(far["works"]["stage1"]["negligible"], true);
    // The measured verdict is untouched by the screening.
    assert_eq!(far["damage_category"], 0);
}

#[test]
fn bad_works_input_names_the_key() {
    for (bad, key) in [
        (
            works_toml("").replace("volume_loss_percent = 1.5", "volume_loss_percent = 150"),
            "works.tunnels[0].volume_loss_percent",
        ),
        (
            works_toml("").replace("axis_depth_m = 20.0", "axis_depth_m = [20.0, 21.0, 22.0]"),
            "works.tunnels[0].axis_depth_m",
        ),
        (
            works_toml("").replace("chainage_m = 1000.0", "chainage_m = 5000.0"),
            "works.tunnels[0].progress[1].chainage_m",
        ),
        (works_toml("shield = true\n"), "shield"),
    ] {
        let (fx, p) = portfolio(&bad);
        let out = fx.path("out");
        let o = plinth(&[
            "assess",
            p.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--no-reports",
        ]);
        assert_eq!(o.status.code(), Some(2), "{key}");
        let err = String::from_utf8_lossy(&o.stderr);
        assert!(err.contains(key) && err.contains("hint:"), "{key}: {err}");
    }
}

/// `pdftotext` is available (the PDF text checks are skipped with a note otherwise).
fn have_pdftotext() -> bool {
    let ok = tool_ok("pdftotext");
    if !ok {
        println!(
            "note: `pdftotext` not found; works report text checks skipped (install poppler-utils)"
        );
    }
    ok
}

fn tool_ok(tool: &str) -> bool {
    std::process::Command::new(tool)
        .arg("-v")
        .output()
        .map(|o| o.status.success() || !o.stderr.is_empty())
        .unwrap_or(false)
}

fn pdf_text(pdf: &std::path::Path) -> String {
    let o = std::process::Command::new("pdftotext")
        .args([pdf.to_str().unwrap(), "-"])
        .output()
        .unwrap();
    assert!(o.status.success(), "pdftotext failed on {}", pdf.display());
    String::from_utf8_lossy(&o.stdout).into_owned()
}

#[test]
fn reports_show_the_planned_works_section_and_overview_column() {
    let (fx, p) = portfolio(&works_toml(""));
    let out = fx.path("out");
    let r = assess(&p, &out, &[]);
    let s = structure(&r, "OVER");
    // The model JSON carries the section; the values are those of results.json, formatted.
    let model: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("reports/OVER.json")).unwrap())
            .unwrap();
    let w = &model["works"];
    let pred = s["predicted_settlement_mm"].as_f64().unwrap();
    let ratio = s["observed_to_predicted_settlement"].as_f64().unwrap();
    let pred_text = format!("{pred:.1} mm");
    let ratio_text = format!("{ratio:.2}");
    assert_eq!(w["predicted_settlement"], pred_text.as_str());
    assert_eq!(w["observed_to_predicted"], ratio_text.as_str());
    assert_eq!(w["plan"]["available"], true, "{:#}", w["plan"]);
    assert_eq!(w["comparison_chart"]["available"], true);
    assert!(w["assumptions"].as_array().unwrap().iter().any(|a| {
        a.as_str()
            .unwrap()
            .contains("applied to predicted movement only")
    }));
    let pf: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("portfolio.json")).unwrap())
            .unwrap();
    assert_eq!(pf["has_works"], true);
    if !have_pdftotext() {
        return;
    }
    // pdftotext may break a table cell across lines; compare without line breaks.
    let text = pdf_text(&out.join("reports/OVER.pdf")).replace('\n', " ");
    assert!(text.contains("Planned works"), "no works section");
    assert!(
        text.contains(&pred_text),
        "predicted settlement {pred_text} missing"
    );
    assert!(text.contains(&ratio_text), "ratio {ratio_text} missing");
    assert!(text.contains("Predicted against observed"));
    let overview = pdf_text(&out.join("portfolio.pdf")).replace('\n', " ");
    assert!(
        overview.contains("Predicted category (works)"),
        "no predicted-category column in the overview"
    );
}

#[test]
fn reports_without_works_omit_the_section() {
    let (fx, p) = portfolio("");
    let out = fx.path("out");
    assess(&p, &out, &[]);
    let model: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("reports/OVER.json")).unwrap())
            .unwrap();
    assert!(model["works"].is_null());
    let pf: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("portfolio.json")).unwrap())
            .unwrap();
    assert_eq!(pf["has_works"], false);
    assert!(pf["ranked"][0]["predicted_category"].is_null());
    if have_pdftotext() {
        let text = pdf_text(&out.join("reports/OVER.pdf"));
        assert!(!text.contains("Planned works"));
        assert!(!pdf_text(&out.join("portfolio.pdf")).contains("Predicted category"));
    }
}
