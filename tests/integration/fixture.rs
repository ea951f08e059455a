//! Builds small portfolios in temporary folders and runs the real binary on them.

use std::path::{Path, PathBuf};
use std::process::Command;

/// Origin of the fixtures: an arbitrary longitude/latitude for invented test sites.
pub const ORIGIN: (f64, f64) = (9.0, 45.0);

/// Local east/north metres → lon/lat, tangent-plane radii at the origin latitude
/// (insar-methods.md §8.2; error < 2 mm over 200 m).
pub fn lonlat(e: f64, n: f64) -> (f64, f64) {
    let a = 6_378_137.0_f64;
    let f = 1.0 / 298.257_223_563;
    let e2 = f * (2.0 - f);
    let phi = ORIGIN.1.to_radians();
    let w = 1.0 - e2 * phi.sin().powi(2);
    let m = a * (1.0 - e2) / w.powf(1.5);
    let nn = a / w.sqrt();
    (
        ORIGIN.0 + (e / (nn * phi.cos())).to_degrees(),
        ORIGIN.1 + (n / m).to_degrees(),
    )
}

/// A rectangle footprint in local metres (centre, size, rotation of the long side from east, degrees).
pub fn rect(cx: f64, cy: f64, w: f64, h: f64, rot_deg: f64) -> Vec<(f64, f64)> {
    let (s, c) = rot_deg.to_radians().sin_cos();
    let corners = [
        (-w / 2.0, -h / 2.0),
        (w / 2.0, -h / 2.0),
        (w / 2.0, h / 2.0),
        (-w / 2.0, h / 2.0),
    ];
    let mut v: Vec<(f64, f64)> = corners
        .iter()
        .map(|(x, y)| (cx + x * c - y * s, cy + x * s + y * c))
        .collect();
    v.push(v[0]);
    v
}

/// One structure of a fixture.
pub struct FxStructure {
    pub id: String,
    pub name: String,
    pub height_m: Option<f64>,
    pub structure: Option<String>,
    /// Polygons (each a closed ring in local metres).
    pub rings: Vec<Vec<(f64, f64)>>,
}

/// One point of a fixture dataset.
pub struct FxPoint {
    pub id: String,
    pub e: f64,
    pub n: f64,
    pub coherence: f64,
    /// LOS values per epoch (mm, + towards satellite); NaN = missing.
    pub values: Vec<f64>,
}

/// One dataset.
pub struct FxDataset {
    pub name: String,
    pub pass: String,
    pub incidence_deg: f64,
    pub heading_deg: f64,
    pub dates: Vec<chrono::NaiveDate>,
    pub points: Vec<FxPoint>,
}

/// Dates every `step` days from `start`, `n` of them.
pub fn dates(start: &str, step: i64, n: usize) -> Vec<chrono::NaiveDate> {
    let d0 = chrono::NaiveDate::parse_from_str(start, "%Y-%m-%d").unwrap();
    (0..n)
        .map(|i| d0 + chrono::Duration::days(step * i as i64))
        .collect()
}

/// Years since the first date.
pub fn years(ds: &[chrono::NaiveDate]) -> Vec<f64> {
    ds.iter()
        .map(|d| (*d - ds[0]).num_days() as f64 / 365.25)
        .collect()
}

/// LOS unit vector (E, N, U), right-looking (insar-methods.md §2.1).
pub fn unit(inc: f64, head: f64) -> [f64; 3] {
    let (t, a) = (inc.to_radians(), head.to_radians());
    [-t.sin() * a.cos(), t.sin() * a.sin(), t.cos()]
}

/// A temporary portfolio folder.
pub struct Fx {
    pub dir: tempfile::TempDir,
}

impl Fx {
    pub fn new() -> Fx {
        Fx {
            dir: tempfile::tempdir().unwrap(),
        }
    }
    pub fn path(&self, rel: &str) -> PathBuf {
        self.dir.path().join(rel)
    }
    pub fn write(&self, rel: &str, text: &str) {
        let p = self.path(rel);
        std::fs::create_dir_all(p.parent().unwrap()).unwrap();
        std::fs::write(p, text).unwrap();
    }

    pub fn write_structures(&self, rel: &str, ss: &[FxStructure]) {
        let feats: Vec<serde_json::Value> = ss
            .iter()
            .map(|s| {
                let polys: Vec<serde_json::Value> = s
                    .rings
                    .iter()
                    .map(|r| {
                        let ring: Vec<[f64; 2]> = r
                            .iter()
                            .map(|(e, n)| {
                                let (lo, la) = lonlat(*e, *n);
                                [lo, la]
                            })
                            .collect();
                        serde_json::json!([ring])
                    })
                    .collect();
                let mut props = serde_json::json!({"id": s.id, "name": s.name});
                if let Some(h) = s.height_m {
                    props["height_m"] = h.into();
                }
                if let Some(t) = &s.structure {
                    props["structure"] = t.clone().into();
                }
                serde_json::json!({"type": "Feature", "properties": props,
                    "geometry": {"type": "MultiPolygon", "coordinates": polys}})
            })
            .collect();
        self.write(
            rel,
            &serde_json::to_string_pretty(
                &serde_json::json!({"type": "FeatureCollection", "features": feats}),
            )
            .unwrap(),
        );
    }

    pub fn write_points(&self, rel: &str, d: &FxDataset) {
        let mut s = String::from("point_id,lon,lat,coherence");
        for dt in &d.dates {
            s.push_str(&format!(",{dt}"));
        }
        s.push('\n');
        for p in &d.points {
            let (lo, la) = lonlat(p.e, p.n);
            s.push_str(&format!("{},{lo:.9},{la:.9},{}", p.id, p.coherence));
            for v in &p.values {
                if v.is_finite() {
                    s.push_str(&format!(",{v:.3}"));
                } else {
                    s.push(',');
                }
            }
            s.push('\n');
        }
        self.write(rel, &s);
    }

    /// Write portfolio.toml with the datasets (files `points-<name>.csv`) and extra TOML appended.
    pub fn write_portfolio(&self, ss: &[FxStructure], ds: &[FxDataset], extra: &str) -> PathBuf {
        self.write_structures("structures.geojson", ss);
        let mut t = String::from(
            "[portfolio]\nname = \"Fixture town — test portfolio\"\n\n[structures]\npath = \"structures.geojson\"\n\n",
        );
        for d in ds {
            self.write_points(&format!("points-{}.csv", d.name), d);
            t.push_str(&format!(
                "[[datasets]]\nname = \"{}\"\npath = \"points-{}.csv\"\npass = \"{}\"\nincidence_deg = {}\nheading_deg = {}\n\n",
                d.name, d.name, d.pass, d.incidence_deg, d.heading_deg
            ));
        }
        t.push_str(extra);
        self.write("portfolio.toml", &t);
        self.path("portfolio.toml")
    }
}

/// Run the real binary.
pub fn plinth(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_plinth"))
        .args(args)
        .output()
        .unwrap()
}

/// Run `assess` and return results.json parsed, each structure record joined with the parts of
/// its detail file (`series`, `metrics`, `damage`, `grade`, `works`, `points`); panics with
/// stderr on failure.
pub fn assess(portfolio: &Path, out: &Path, extra: &[&str]) -> serde_json::Value {
    let mut args = vec![
        "assess",
        portfolio.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--quiet",
    ];
    args.extend_from_slice(extra);
    let o = plinth(&args);
    assert!(
        o.status.success(),
        "plinth assess failed: {}\n{}",
        o.status,
        String::from_utf8_lossy(&o.stderr)
    );
    read_results(out)
}

/// results.json of an output folder, each record joined with its detail file.
pub fn read_results(out: &Path) -> serde_json::Value {
    let mut r: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("results.json")).unwrap()).unwrap();
    for s in r["structures"].as_array_mut().unwrap() {
        let rel = s["detail_file"]
            .as_str()
            .unwrap_or_else(|| panic!("{} names no detail file", s["id"]))
            .to_string();
        let d: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(out.join(&rel)).unwrap()).unwrap();
        assert_eq!(d["id"], s["id"], "{rel}");
        for k in ["series", "metrics", "damage", "grade", "works", "points"] {
            assert!(s.get(k).is_none(), "{k} is in the compact record");
            s[k] = d[k].clone();
        }
    }
    r
}

/// The structure record with this id.
pub fn structure<'a>(r: &'a serde_json::Value, id: &str) -> &'a serde_json::Value {
    r["structures"]
        .as_array()
        .unwrap()
        .iter()
        .find(|s| s["id"] == id)
        .unwrap_or_else(|| panic!("no {id}"))
}

/// Deterministic pseudo-noise in [-1, 1] (no RNG needed in fixtures).
pub fn wiggle(i: usize, k: usize) -> f64 {
    ((i as f64) * 0.7 + (k as f64) * 1.3).sin() * 0.6
        + ((i as f64) * 2.9 + (k as f64) * 0.4 + 1.0).sin() * 0.4
}
