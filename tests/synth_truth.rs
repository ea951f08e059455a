//! The synthetic generator: determinism, exact LOS projection of the planted motion, and the demo
//! portfolio as Plinth reads it.

use std::collections::BTreeMap;
use std::path::Path;

use plinth::synth::frame::los_unit_enu;
use plinth::synth::generate::{PointRole, generate};
use plinth::synth::model::NoiseModel;
use plinth::synth::{demo, write};

const DEMO_FILES: [&str; 9] = [
    "portfolio.toml",
    "structures.geojson",
    "points-asc.csv",
    "points-desc.csv",
    "truth.json",
    "README.md",
    "portfolio-2.toml",
    "points-asc-2.csv",
    "points-desc-2.csv",
];

fn read_all(dir: &Path) -> BTreeMap<String, Vec<u8>> {
    DEMO_FILES
        .iter()
        .map(|f| {
            (
                f.to_string(),
                std::fs::read(dir.join(f)).expect("demo file written"),
            )
        })
        .collect()
}

#[test]
fn same_seed_gives_identical_bytes() {
    let a = tempfile::tempdir().expect("tempdir");
    let b = tempfile::tempdir().expect("tempdir");
    demo::write_demo(a.path()).expect("demo a");
    demo::write_demo(b.path()).expect("demo b");
    let (fa, fb) = (read_all(a.path()), read_all(b.path()));
    for f in DEMO_FILES {
        assert!(
            fa[f] == fb[f],
            "{f} differs between two runs with the same seed"
        );
    }
    // A different seed changes the points (so the seed is really used).
    let mut sc = demo::scenario();
    sc.seed += 1;
    let g = generate(&sc).expect("generate");
    let mut other = Vec::new();
    write::write_points_csv(&mut other, &g.geometries[0], 2).expect("csv");
    assert!(
        other != fa["points-asc.csv"],
        "a different seed gave the same ascending file"
    );
}

/// Parse the wide CSV: id → (coherence, values with None for empty cells), and the dates.
fn parse_csv(text: &str) -> (Vec<String>, BTreeMap<String, Vec<Option<f64>>>) {
    let mut lines = text.lines();
    let header: Vec<String> = lines
        .next()
        .expect("header")
        .split(',')
        .map(str::to_string)
        .collect();
    assert_eq!(&header[..4], ["point_id", "lon", "lat", "coherence"]);
    let dates = header[4..].to_vec();
    let mut rows = BTreeMap::new();
    for l in lines {
        let cells: Vec<&str> = l.split(',').collect();
        assert_eq!(cells.len(), header.len(), "row width: {l}");
        let vals = cells[4..]
            .iter()
            .map(|c| {
                if c.is_empty() {
                    None
                } else {
                    Some(c.parse::<f64>().expect("number"))
                }
            })
            .collect();
        rows.insert(cells[0].to_string(), vals);
    }
    (dates, rows)
}

#[test]
fn noise_free_values_are_the_los_projection_of_the_planted_motion() {
    let mut sc = demo::scenario();
    sc.noise = NoiseModel::none();
    let generated = generate(&sc).expect("generate");
    for (g, geom) in sc.geometries.iter().enumerate() {
        let gg = &generated.geometries[g];
        let mut bytes = Vec::new();
        write::write_points_csv(&mut bytes, gg, 3).expect("csv");
        let (dates, rows) = parse_csv(std::str::from_utf8(&bytes).expect("utf8"));
        assert_eq!(dates.len(), geom.epochs);
        assert_eq!(dates[0], geom.first_date.format("%Y-%m-%d").to_string());
        // Independent of the generator's stored vector: recompute u from the geometry.
        let u = los_unit_enu(geom.incidence_deg, geom.heading_deg);
        let mut checked = BTreeMap::new();
        for p in &gg.points {
            let vals = &rows[&p.id];
            let d0 = sc.displacement_enu_mm(p.structure, p.position_m, gg.dates[0], true);
            for (i, date) in gg.dates.iter().enumerate() {
                let d = sc.displacement_enu_mm(p.structure, p.position_m, *date, true);
                let mut expected =
                    u[0] * (d[0] - d0[0]) + u[1] * (d[1] - d0[1]) + u[2] * (d[2] - d0[2]);
                if let Some((k, jump_mm)) = p.unwrap_jump {
                    if i >= k {
                        expected += jump_mm;
                    }
                }
                let got = vals[i].expect("noise-free mode has no missing values");
                // Written with 3 decimals: rounding error ≤ 0.0005 mm.
                assert!(
                    (got - expected).abs() <= 5.0001e-4,
                    "{} epoch {i}: {got} vs {expected}",
                    p.id
                );
            }
            *checked.entry(format!("{:?}", p.role)).or_insert(0usize) += 1;
        }
        for role in [
            PointRole::Inside,
            PointRole::Buffer,
            PointRole::LowCoherence,
            PointRole::Ground,
        ] {
            assert!(
                checked.get(&format!("{role:?}")).copied().unwrap_or(0) > 0,
                "no {role:?} point checked"
            );
        }
    }
}

#[test]
fn tilted_block_los_difference_matches_hand_computation() {
    // Hand check, independent of `displacement_enu_mm`: two points of the tilted block 1 m apart
    // along the downward azimuth differ in settlement by tilt·1 m = 1.2e-3 m = 1.2 mm at the window
    // end, which shows in LOS as −u_U·1.2 mm relative to each other.
    let sc = demo::scenario();
    let k = sc
        .structures
        .iter()
        .position(|s| s.id == demo::TILTED_ID)
        .expect("tilted block");
    let ax = sc.axis(k).expect("axis");
    let az = 120f64.to_radians();
    let c = ax.centroid_m;
    let q1 = [c[0] + az.sin(), c[1] + az.cos()];
    let w = plinth::synth::truth::default_window(&sc).expect("window");
    let s = |q: [f64; 2]| {
        sc.structure_settlement_mm(k, q, w.end) - sc.structure_settlement_mm(k, q, w.start)
    };
    assert!((s(q1) - s(c) - 1.2).abs() < 1e-9, "{}", s(q1) - s(c));
    let u = los_unit_enu(38.0, -12.0);
    let los = |q: [f64; 2]| {
        let a = sc.displacement_enu_mm(Some(k), q, w.start, false);
        let b = sc.displacement_enu_mm(Some(k), q, w.end, false);
        (0..3).map(|j| u[j] * (b[j] - a[j])).sum::<f64>()
    };
    assert!((los(q1) - los(c) + u[2] * 1.2).abs() < 1e-9);
}

#[test]
fn demo_portfolio_parses_and_loads() {
    let dir = tempfile::tempdir().expect("tempdir");
    demo::write_demo(dir.path()).expect("demo");
    let pf = plinth::portfolio::Portfolio::load(&dir.path().join("portfolio.toml"))
        .expect("portfolio parses");
    assert_eq!(pf.datasets.len(), 2);
    assert_eq!(pf.datasets[0].name, "asc");
    assert_eq!(pf.datasets[1].name, "desc");
    let mut warnings = plinth::error::Warnings::default();
    let inputs = plinth::ingest::load(&pf, &mut warnings).expect("footprints and points load");
    let sc = demo::scenario();
    assert_eq!(inputs.structures.len(), sc.structures.len());
    assert!(
        inputs
            .structures
            .iter()
            .any(|s| s.footprint_wgs84.0.len() == 2),
        "the MultiPolygon structure"
    );
    for d in &inputs.datasets {
        assert_eq!(d.epochs.len(), 61);
    }
    // Each CSV stays small (≤ ~3 MB) so the demo runs in seconds.
    for f in ["points-asc.csv", "points-desc.csv"] {
        let len = std::fs::metadata(dir.path().join(f)).expect("csv").len();
        assert!(len < 3_000_000, "{f} is {len} bytes");
    }
}

#[test]
fn committed_demo_portfolio_is_current() {
    // The committed folder must be exactly what `plinth demo demo-portfolio` writes. Set
    // PLINTH_REGENERATE_DEMO=1 to rewrite it after a deliberate change to the generator.
    let committed = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-portfolio");
    if std::env::var_os("PLINTH_REGENERATE_DEMO").is_some() {
        demo::write_demo(&committed).expect("regenerate");
    }
    let fresh = tempfile::tempdir().expect("tempdir");
    demo::write_demo(fresh.path()).expect("demo");
    let now = read_all(fresh.path());
    for f in DEMO_FILES {
        let old = std::fs::read(committed.join(f)).unwrap_or_default();
        assert!(
            old == now[f],
            "demo-portfolio/{f} is stale: run PLINTH_REGENERATE_DEMO=1 cargo test --test synth_truth"
        );
    }
}
