//! Foundation: association, screening, insufficient data, outputs, atomic writes, errors.

use crate::fixture::*;

const INC: f64 = 38.0;
const HEAD: f64 = -12.0;

fn pt(id: &str, e: f64, n: f64, coh: f64, values: Vec<f64>) -> FxPoint {
    FxPoint {
        id: id.into(),
        e,
        n,
        coherence: coh,
        values,
    }
}

fn st(id: &str, rings: Vec<Vec<(f64, f64)>>) -> FxStructure {
    FxStructure {
        id: id.into(),
        name: format!("Building {id}"),
        height_m: Some(8.0),
        structure: Some("masonry".into()),
        rings,
    }
}

/// A settling block (−6 mm/yr vertical), an empty and a sparse structure, screening cases and a tie.
fn scenario() -> (Fx, std::path::PathBuf) {
    let ds = dates("2023-01-03", 12, 61);
    let t = years(&ds);
    let u = unit(INC, HEAD);
    let los = |v_up: f64, k: usize| -> Vec<f64> {
        t.iter()
            .enumerate()
            .map(|(i, ti)| u[2] * v_up * ti + 0.8 * wiggle(i, k))
            .collect()
    };
    let mut points = Vec::new();
    for k in 0..12 {
        let e = -8.0 + (k % 4) as f64 * 5.3;
        let n = -3.5 + (k / 4) as f64 * 3.4;
        points.push(pt(&format!("a{k}"), e, n, 0.9, los(-6.0, k)));
    }
    points.push(pt("a-lowcoh", 1.0, 1.0, 0.4, los(-6.0, 20)));
    let mut gappy = los(-6.0, 21);
    for v in gappy.iter_mut().skip(5) {
        *v = f64::NAN;
    }
    points.push(pt("a-gappy", 2.0, 1.0, 0.9, gappy));
    points.push(pt("a-outlier", 3.0, -1.0, 0.9, los(40.0, 22)));
    // Sparse structure: 3 points.
    for k in 0..3 {
        points.push(pt(
            &format!("s{k}"),
            200.0 + k as f64,
            0.0,
            0.9,
            los(-2.0, 30 + k),
        ));
    }
    // Tie: T1 spans x in [-5, 5], T2 in [11, 21] at y = 300; x = 8 is 3 m from both.
    points.push(pt("tie", 8.0, 300.0, 0.9, los(0.0, 40)));
    // Buffer point 2 m outside A's east edge (A spans x in [-10, 10]).
    points.push(pt("a-buffer", 12.0, 0.0, 0.9, los(-6.0, 41)));
    // Ground point 20 m north of A: surroundings.
    points.push(pt("g1", 0.0, 25.0, 0.9, los(-1.0, 42)));
    let d = FxDataset {
        name: "asc".into(),
        pass: "ascending".into(),
        incidence_deg: INC,
        heading_deg: HEAD,
        dates: ds,
        points,
    };
    let ss = vec![
        st("A", vec![rect(0.0, 0.0, 20.0, 10.0, 0.0)]),
        st("EMPTY", vec![rect(100.0, 0.0, 12.0, 8.0, 0.0)]),
        st("SPARSE", vec![rect(200.0, 0.0, 12.0, 8.0, 0.0)]),
        st("T1", vec![rect(0.0, 300.0, 10.0, 10.0, 0.0)]),
        st("T2", vec![rect(16.0, 300.0, 10.0, 10.0, 0.0)]),
    ];
    let fx = Fx::new();
    let p = fx.write_portfolio(&ss, &[d], "");
    (fx, p)
}

#[test]
fn settling_block_velocity_and_screening() {
    let (fx, p) = scenario();
    let out = fx.path("out");
    let r = assess(&p, &out, &["--no-reports"]);
    let a = structure(&r, "A");
    assert_eq!(a["status"], "assessed", "{a:#}");
    // 12 inside + 1 buffer point kept; low-coherence, gappy and outlier rejected with reasons.
    assert_eq!(a["n_points"], 13, "{a:#}");
    assert_eq!(a["n_rejected"]["low_coherence"], 1);
    assert_eq!(a["n_rejected"]["too_few_epochs"], 1);
    assert_eq!(a["n_rejected"]["outlier_velocity"], 1);
    assert!(a["n_surroundings"].as_u64().unwrap() >= 1);
    let v = a["vertical_velocity_mm_per_yr"].as_f64().unwrap();
    assert!((v + 6.0).abs() < 0.5, "planted -6 mm/yr, got {v}");
    assert_eq!(r["portfolio"]["coverage"]["ties"], 1);
}

#[test]
fn empty_and_sparse_structures_are_insufficient_never_zero() {
    let (fx, p) = scenario();
    let out = fx.path("out");
    let r = assess(&p, &out, &["--no-reports"]);
    for id in ["EMPTY", "SPARSE"] {
        let s = structure(&r, id);
        assert_eq!(s["status"], "insufficient_data", "{s:#}");
        assert!(s["damage_category"].is_null());
        assert!(s["settlement_mm"].is_null());
        assert!(s["vertical_velocity_mm_per_yr"].is_null());
        assert!(!s["status_reasons"].as_array().unwrap().is_empty());
    }
    assert_eq!(structure(&r, "SPARSE")["n_points"], 3);
}

#[test]
fn all_outputs_written_with_manifest_hashes() {
    let (fx, p) = scenario();
    let out = fx.path("out");
    assess(&p, &out, &["--no-reports"]);
    for f in [
        "results.json",
        "results.csv",
        "results.geojson",
        "points.csv",
        "points.geojson",
        "results.gpkg",
        "manifest.json",
    ] {
        assert!(out.join(f).is_file(), "{f} missing");
    }
    let m: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("manifest.json")).unwrap()).unwrap();
    let inputs = m["inputs"].as_array().unwrap();
    assert_eq!(inputs.len(), 3);
    assert!(
        inputs
            .iter()
            .all(|i| i["sha256"].as_str().unwrap().len() == 64)
    );
    assert_eq!(m["analysis_date"], "2024-12-23"); // 2023-01-03 + 60 × 12 days
    let pts = std::fs::read_to_string(out.join("points.csv")).unwrap();
    assert!(
        pts.lines()
            .next()
            .unwrap()
            .starts_with("dataset,point_id,line")
    );
    assert!(pts.contains("a-lowcoh") && pts.contains("low_coherence"));
    assert!(pts.contains(",tie,"));
    let csv = std::fs::read_to_string(out.join("results.csv")).unwrap();
    assert!(csv.starts_with("id,name,status,"));
    assert_eq!(csv.lines().count(), 6);
}

#[test]
fn failed_run_leaves_previous_outputs_untouched() {
    let (fx, p) = scenario();
    let out = fx.path("out");
    assess(&p, &out, &["--no-reports"]);
    let before = std::fs::read(out.join("results.json")).unwrap();
    // Break the points file: a non-numeric value.
    let csv = fx.path("points-asc.csv");
    let text = std::fs::read_to_string(&csv).unwrap();
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    let mut cells: Vec<String> = lines[3].split(',').map(str::to_string).collect();
    cells[6] = "oops".into();
    lines[3] = cells.join(",");
    std::fs::write(&csv, lines.join("\n") + "\n").unwrap();
    let o = plinth(&[
        "assess",
        p.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--no-reports",
    ]);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("points-asc.csv")
            && err.contains("line 4")
            && err.contains("oops")
            && err.contains("hint:"),
        "{err}"
    );
    assert_eq!(std::fs::read(out.join("results.json")).unwrap(), before);
    // No staging folder left beside the output.
    let leftovers: Vec<_> = std::fs::read_dir(fx.dir.path())
        .unwrap()
        .filter_map(|e| e.ok())
        .filter(|e| e.file_name().to_string_lossy().contains("partial"))
        .collect();
    assert!(leftovers.is_empty());
}

#[test]
fn rerun_is_byte_identical() {
    let (fx, p) = scenario();
    let (o1, o2) = (fx.path("o1"), fx.path("o2"));
    assess(&p, &o1, &["--no-reports"]);
    assess(&p, &o2, &["--no-reports"]);
    for f in [
        "results.json",
        "results.csv",
        "results.geojson",
        "points.csv",
        "results.gpkg",
    ] {
        assert_eq!(
            std::fs::read(o1.join(f)).unwrap(),
            std::fs::read(o2.join(f)).unwrap(),
            "{f} differs"
        );
    }
}

#[test]
fn projected_footprints_work() {
    // Same footprints written in UTM 32N (EPSG:32632): association must not change.
    let (fx, p) = scenario();
    let gj: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(fx.path("structures.geojson")).unwrap())
            .unwrap();
    let mut gj2 = gj.clone();
    let wgs = plinth::coords::Crs::wgs84();
    let utm = plinth::coords::Crs::from_epsg(32632).unwrap();
    let t = plinth::coords::Transformer::new(&wgs, &utm);
    for f in gj2["features"].as_array_mut().unwrap() {
        for poly in f["geometry"]["coordinates"].as_array_mut().unwrap() {
            for ring in poly.as_array_mut().unwrap() {
                for pos in ring.as_array_mut().unwrap() {
                    let (x, y) = t
                        .apply(pos[0].as_f64().unwrap(), pos[1].as_f64().unwrap())
                        .unwrap();
                    *pos = serde_json::json!([x, y]);
                }
            }
        }
    }
    fx.write("structures-utm.geojson", &gj2.to_string());
    let text = std::fs::read_to_string(&p).unwrap().replace(
        "path = \"structures.geojson\"",
        "path = \"structures-utm.geojson\"\ncrs = \"EPSG:32632\"",
    );
    fx.write("portfolio.toml", &text);
    let r = assess(&p, &fx.path("out"), &["--no-reports"]);
    assert_eq!(structure(&r, "A")["n_points"], 13);
    assert_eq!(r["portfolio"]["analysis_crs"], "EPSG:32632");
}

#[test]
fn check_prints_coverage_and_writes_nothing() {
    let (fx, p) = scenario();
    let o = plinth(&["check", p.to_str().unwrap()]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(!fx.path("out").exists());
    // The point screens of `check` are those of `assess`: the same structure count and the same
    // coherence and epoch rejections; `assess` may find more structures insufficient (its
    // time-series stage runs after the point screens).
    let r = assess(&p, &fx.path("full"), &["--no-reports"]);
    let cov = &r["portfolio"]["coverage"];
    assert!(
        err.contains(&format!("structures: {}", cov["structures"])),
        "{err}"
    );
    for reason in ["low_coherence", "too_few_epochs"] {
        let n = cov["points_rejected"][reason].as_u64().unwrap_or(0);
        if n > 0 {
            assert!(err.contains(&format!("{reason}: {n}")), "{reason}: {err}");
        }
    }
    assert!(err.contains("low_coherence: 1"), "{err}");
    let line = err
        .lines()
        .find(|l| l.contains("meeting the minimums:"))
        .expect("a minimums line");
    let meeting: u64 = line.rsplit(' ').next().unwrap().parse().unwrap();
    assert!(
        meeting >= cov["by_status"]["assessed"].as_u64().unwrap(),
        "{err}"
    );
    assert!(err.contains("not checked here"), "{err}");
}

#[test]
fn unknown_portfolio_key_is_named() {
    let (fx, p) = scenario();
    let text = std::fs::read_to_string(&p).unwrap() + "\n[assessment]\nbufer_m = 3.0\n";
    fx.write("portfolio.toml", &text);
    let o = plinth(&["check", p.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("portfolio.toml") && err.contains("bufer_m"),
        "{err}"
    );
}

#[test]
fn init_output_passes_check_once_data_is_filled() {
    let fx = Fx::new();
    let dir = fx.path("job");
    let o = plinth(&["init", dir.to_str().unwrap()]);
    assert!(o.status.success());
    // Fill the data paths the template names with the scenario's files.
    let (src, _) = scenario();
    std::fs::copy(
        src.path("structures.geojson"),
        dir.join("data/structures.geojson"),
    )
    .unwrap();
    std::fs::copy(src.path("points-asc.csv"), dir.join("data/points-asc.csv")).unwrap();
    let o = plinth(&["check", dir.join("portfolio.toml").to_str().unwrap()]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
}

#[test]
fn killed_run_leaves_previous_outputs_untouched() {
    // A run killed while it writes (during PDF rendering) must leave DIR exactly as it was: all
    // new files go to a hidden staging folder beside DIR, swapped in only on success.
    let fx = Fx::new();
    let src = std::path::Path::new(concat!(env!("CARGO_MANIFEST_DIR"), "/demo-portfolio"));
    let demo = fx.path("demo");
    std::fs::create_dir_all(&demo).unwrap();
    for e in std::fs::read_dir(src).unwrap() {
        let e = e.unwrap();
        std::fs::copy(e.path(), demo.join(e.file_name())).unwrap();
    }
    let p = demo.join("portfolio.toml");
    let out = fx.path("out");
    assess(&p, &out, &["--no-reports"]);
    let snapshot = |d: &std::path::Path| -> Vec<(String, Vec<u8>)> {
        let mut v: Vec<(String, Vec<u8>)> = std::fs::read_dir(d)
            .unwrap()
            .map(|e| {
                let e = e.unwrap();
                (
                    e.file_name().to_string_lossy().to_string(),
                    std::fs::read(e.path()).unwrap_or_default(),
                )
            })
            .collect();
        v.sort();
        v
    };
    let before = snapshot(&out);
    let mut child = std::process::Command::new(env!("CARGO_BIN_EXE_plinth"))
        .args([
            "assess",
            p.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--quiet",
        ])
        .spawn()
        .unwrap();
    let staging = fx.path(&format!(".out.partial-{}", child.id()));
    // Wait until the run has started writing into its staging folder (reports are being rendered).
    let t0 = std::time::Instant::now();
    while !staging.join("results.json").exists() {
        assert!(
            t0.elapsed().as_secs() < 300,
            "the run never reached the writing stage"
        );
        assert!(
            child.try_wait().unwrap().is_none(),
            "the run finished before it could be killed"
        );
        std::thread::sleep(std::time::Duration::from_millis(20));
    }
    child.kill().unwrap();
    child.wait().unwrap();
    assert_eq!(snapshot(&out), before, "DIR changed after a killed run");
    assert!(
        !out.join("reports").exists(),
        "no report folder may appear inside DIR"
    );
}
