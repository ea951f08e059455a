//! The demo portfolio: the invented town of Quillhaven and the bored tunnel of its new Lanternway
//! metro line, written as a complete Plinth input folder with its planted truth.
//!
//! Owns the demo scenario (structures, planted movement, trough, geometries, noise, defects) and
//! [`write_demo`], which writes `portfolio.toml`, `structures.geojson`, `points-asc.csv`,
//! `points-desc.csv`, `truth.json` and `README.md`. The scenario is invented: no real place,
//! company, person or data set. The origin is deliberately put offshore (North Sea, 3.45° E,
//! 55.32° N) so that the coordinates depict nothing real. It does not assess anything.

use std::path::Path;

use anyhow::{Context, Result};
use chrono::NaiveDate;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

use super::frame::TownFrame;
use super::generate::generate;
use super::model::{
    Geometry, Motion, NoiseModel, PointPlan, RateChange, Scenario, Step, StructureKind,
    StructureSpec, Trough, UnwrapJump, years_between,
};
use super::shapes::Footprint;
use super::truth::{Truth, build_truth, default_window};
use super::write::{
    PortfolioText, footprints_geojson, portfolio_toml, truth_json, write_points_file, write_text,
};

/// Seed of the demo scenario.
pub const DEMO_SEED: u64 = 20_230_103;

/// Ids of the structures whose damage category is designed to be predictable.
pub const DESIGNED_CATEGORY: [&str; 2] = ["QH-M11", "QH-M12"];

/// Id of the rigidly tilted block.
pub const TILTED_ID: &str = "QH-F07";
/// Id of the clearly sagging building.
pub const SAGGING_ID: &str = "QH-M11";
/// Id of the clearly hogging building.
pub const HOGGING_ID: &str = "QH-M12";
/// Id of the structure without points.
pub const EMPTY_ID: &str = "QH-E01";
/// Id of the sparse structure (3 points).
pub const SPARSE_ID: &str = "QH-S01";
/// Id of the structure that speeds up.
pub const SPEEDS_UP_ID: &str = "QH-F15";
/// Id of the structure carrying the unwrapping jump (one point, ascending).
pub const JUMP_ID: &str = "QH-F03";

fn date(y: i32, m: u32, d: u32) -> NaiveDate {
    // The demo uses only literal, valid dates.
    NaiveDate::from_ymd_opt(y, m, d).unwrap_or(NaiveDate::MIN)
}

/// Default per-geometry point plan from the footprint area: one good point per 30 m² (6–24),
/// a quarter as many in the buffer (≥ 2), 2 low-coherence points and 5 ground points.
///
/// Choice \[Rec\]: densities between medium-resolution C-band and high-resolution data
/// (insar-methods.md §6.9), so the demo exercises every metric while staying small.
fn plan_for(area_m2: f64) -> PointPlan {
    let inside = ((area_m2 / 30.0).round() as usize).clamp(6, 24);
    PointPlan {
        inside,
        buffer: (inside / 4).max(2),
        low_coherence: 2,
        ground: 5,
    }
}

/// An ordinary structure: id, name, centre east/north (m), type, height, length, width (m), azimuth (°).
type Slot = (
    &'static str,
    &'static str,
    f64,
    f64,
    StructureKind,
    f64,
    f64,
    f64,
    f64,
);

struct Builder {
    structures: Vec<StructureSpec>,
    rng: ChaCha8Rng,
}

impl Builder {
    #[allow(clippy::too_many_arguments)]
    fn add(
        &mut self,
        id: &str,
        name: &str,
        role: &str,
        kind: StructureKind,
        height_m: f64,
        footprint: Footprint,
        motion: Motion,
        plan: Option<PointPlan>,
    ) {
        let plan = plan.unwrap_or_else(|| plan_for(footprint.area_m2()));
        self.structures.push(StructureSpec {
            id: id.into(),
            name: name.into(),
            height_m,
            kind,
            footprint,
            motion,
            points: vec![plan, plan],
            role: role.into(),
        });
    }

    /// Small, varied background movement of an ordinary structure: settlement −0.5 to 1.5 mm/yr,
    /// thermal semi-amplitude 0.06 mm per metre of height (≈ 0.4–2 mm), peak in late July.
    ///
    /// Choice \[Rec\]: thermal amplitude growing with height follows insar-methods.md §6.7 (from memory
    /// \[M\]); the 0.06 mm/m factor is a plausible invented value, not a published one.
    fn ordinary(&mut self, height_m: f64) -> Motion {
        Motion {
            settlement_rate_mm_per_yr: self.rng.random_range(-0.5..1.5),
            seasonal_amplitude_mm: 0.06 * height_m,
            seasonal_peak_day: 205.0,
            ..Motion::default()
        }
    }
}

/// The demo scenario.
pub fn scenario() -> Scenario {
    let reference = date(2023, 1, 3);
    let geometries = vec![
        Geometry {
            name: "asc".into(),
            pass: "ascending".into(),
            incidence_deg: 38.0,
            heading_deg: -12.0,
            first_date: reference,
            repeat_days: 12,
            epochs: 61,
            file_name: "points-asc.csv".into(),
            id_prefix: "A".into(),
        },
        Geometry {
            name: "desc".into(),
            pass: "descending".into(),
            incidence_deg: 41.0,
            heading_deg: 192.0,
            first_date: date(2023, 1, 8),
            repeat_days: 12,
            epochs: 61,
            file_name: "points-desc.csv".into(),
            id_prefix: "D".into(),
        },
    ];
    // Window of the period truth: 2023-01-08 to 2024-12-23 (both geometries cover it).
    let span_years = years_between(date(2023, 1, 8), date(2024, 12, 23));
    let mut rng = ChaCha8Rng::seed_from_u64(DEMO_SEED);
    rng.set_stream(99);
    let mut b = Builder {
        structures: Vec::new(),
        rng,
    };
    use StructureKind::{Frame, Masonry};
    let rect = Footprint::rectangle;

    // --- Structures over the Lanternway tunnel (alignment near x = 0, see `trough`). ---
    let m = b.ordinary(7.5);
    b.add(
        "QH-T05",
        "Weir Street terrace",
        "trough_across_axis",
        Masonry,
        7.5,
        rect([-8.9, -100.0], 40.0, 8.5, 95.0),
        m,
        Some(PointPlan {
            inside: 20,
            buffer: 5,
            low_coherence: 2,
            ground: 6,
        }),
    );
    let m = b.ordinary(15.0);
    b.add(
        "QH-F21",
        "Sextant House",
        "trough_hogging_side",
        Frame,
        15.0,
        rect([22.0, 40.0], 24.0, 14.0, 100.0),
        m,
        None,
    );
    let m = b.ordinary(7.0);
    b.add(
        "QH-M22",
        "4 Ferrule Lane",
        "trough_near_inflection",
        Masonry,
        7.0,
        rect([16.7, 150.0], 16.0, 9.0, 100.0),
        m,
        None,
    );
    let m = b.ordinary(12.0);
    b.add(
        "QH-F23",
        "Tollgate Works",
        "trough_along_axis",
        Frame,
        12.0,
        rect([44.4, 250.0], 36.0, 12.0, 10.0),
        m,
        Some(PointPlan {
            inside: 18,
            buffer: 4,
            low_coherence: 2,
            ground: 6,
        }),
    );
    let m = b.ordinary(6.5);
    b.add(
        "QH-M24",
        "Chandler's Cottages",
        "trough_outer_hogging",
        Masonry,
        6.5,
        rect([-47.0, -250.0], 18.0, 8.0, 95.0),
        m,
        None,
    );

    // --- Designed cases away from the trough. ---
    b.add(
        TILTED_ID,
        "Beacon Court (tilting block)",
        "tilted_block",
        Frame,
        24.0,
        rect([-220.0, -50.0], 28.0, 16.0, 90.0),
        Motion {
            settlement_rate_mm_per_yr: 2.0,
            // Period tilt 1.2e-3 (1/833) over the window, downward towards azimuth 120°.
            tilt_rate_per_yr: 1.2e-3 / span_years,
            tilt_azimuth_deg: 120.0,
            seasonal_amplitude_mm: 1.4,
            seasonal_peak_day: 205.0,
            ..Motion::default()
        },
        Some(PointPlan {
            inside: 22,
            buffer: 5,
            low_coherence: 2,
            ground: 6,
        }),
    );
    b.add(
        SAGGING_ID,
        "11-15 Marrow Row (sagging)",
        "sagging_building",
        Masonry,
        8.0,
        rect([140.0, -150.0], 24.0, 10.0, 90.0),
        Motion {
            settlement_rate_mm_per_yr: 3.0,
            // Period Δ/L = +7.6e-4 over L = 24 m (Δ = 18.24 mm): ε_b = 7.6e-4/0.71667 = 1.06e-3, cat. 2.
            deflection_ratio_rate_per_yr: 7.6e-4 / span_years,
            seasonal_amplitude_mm: 0.5,
            seasonal_peak_day: 205.0,
            ..Motion::default()
        },
        Some(PointPlan {
            inside: 20,
            buffer: 4,
            low_coherence: 2,
            ground: 6,
        }),
    );
    b.add(
        HOGGING_ID,
        "2-6 Lathe Street (hogging)",
        "hogging_building",
        Masonry,
        8.0,
        rect([220.0, 150.0], 20.0, 9.0, 0.0),
        Motion {
            settlement_rate_mm_per_yr: 2.0,
            // Period Δ/L = −7.3e-4 over L = 20 m (Δ = −14.6 mm): ε_b = 7.3e-4/0.72833 = 1.00e-3, cat. 2.
            deflection_ratio_rate_per_yr: -7.3e-4 / span_years,
            seasonal_amplitude_mm: 0.5,
            seasonal_peak_day: 205.0,
            ..Motion::default()
        },
        Some(PointPlan {
            inside: 20,
            buffer: 4,
            low_coherence: 2,
            ground: 6,
        }),
    );
    b.add(
        SPEEDS_UP_ID,
        "Gannet Yard offices (speeds up)",
        "velocity_breakpoint",
        Frame,
        18.0,
        rect([300.0, -250.0], 30.0, 18.0, 90.0),
        Motion {
            settlement_rate_mm_per_yr: 1.5,
            rate_change: Some(RateChange {
                date: date(2024, 3, 1),
                extra_settlement_rate_mm_per_yr: 8.0,
            }),
            seasonal_amplitude_mm: 1.1,
            seasonal_peak_day: 205.0,
            ..Motion::default()
        },
        Some(PointPlan {
            inside: 20,
            buffer: 4,
            low_coherence: 2,
            ground: 6,
        }),
    );
    b.add(
        "QH-M20",
        "The Old Dye House (accelerating)",
        "accelerating",
        Masonry,
        9.0,
        rect([-140.0, 250.0], 22.0, 11.0, 90.0),
        Motion {
            settlement_rate_mm_per_yr: 0.5,
            settlement_acceleration_mm_per_yr2: 4.0,
            seasonal_amplitude_mm: 0.5,
            seasonal_peak_day: 205.0,
            ..Motion::default()
        },
        Some(PointPlan {
            inside: 16,
            buffer: 4,
            low_coherence: 2,
            ground: 5,
        }),
    );
    b.add(
        "QH-M21",
        "Pump Cottage (settlement step)",
        "settlement_step",
        Masonry,
        6.0,
        rect([-300.0, 150.0], 14.0, 8.0, 90.0),
        Motion {
            settlement_rate_mm_per_yr: 0.5,
            steps: vec![Step {
                date: date(2023, 9, 14),
                settlement_mm: 5.0,
            }],
            seasonal_amplitude_mm: 0.4,
            seasonal_peak_day: 205.0,
            ..Motion::default()
        },
        Some(PointPlan {
            inside: 12,
            buffer: 3,
            low_coherence: 2,
            ground: 5,
        }),
    );
    b.add(
        "QH-W01",
        "Embankment wall, Quill Walk",
        "wall_line_east_creep",
        Masonry,
        3.0,
        rect([380.0, 0.0], 140.0, 1.5, 5.0),
        Motion {
            settlement_rate_mm_per_yr: 1.0,
            east_velocity_mm_per_yr: 3.0,
            seasonal_amplitude_mm: 0.3,
            seasonal_peak_day: 205.0,
            ..Motion::default()
        },
        Some(PointPlan {
            inside: 8,
            buffer: 16,
            low_coherence: 1,
            ground: 8,
        }),
    );
    let m = b.ordinary(9.0);
    b.add(
        "QH-L01",
        "Saltings Hall (L-shaped)",
        "l_shape",
        Masonry,
        9.0,
        Footprint::l_shape([-320.0, -270.0], 32.0, 22.0, 9.0, 90.0),
        m,
        None,
    );
    let m = b.ordinary(7.0);
    b.add(
        "QH-P01",
        "Twin Pavilions, Lantern Green",
        "multipolygon",
        Frame,
        7.0,
        Footprint {
            parts: vec![
                rect([-232.0, 250.0], 14.0, 10.0, 90.0).parts.remove(0),
                rect([-210.0, 250.0], 14.0, 10.0, 90.0).parts.remove(0),
            ],
        },
        m,
        None,
    );
    let m = b.ordinary(6.0);
    b.add(
        SPARSE_ID,
        "Boathouse (sparse)",
        "sparse",
        Masonry,
        5.0,
        rect([140.0, 350.0], 12.0, 7.0, 90.0),
        m,
        None,
    );
    // Sparse: 2 points ascending, 1 descending.
    if let Some(s) = b.structures.last_mut() {
        s.points = vec![
            PointPlan {
                inside: 2,
                buffer: 0,
                low_coherence: 0,
                ground: 4,
            },
            PointPlan {
                inside: 1,
                buffer: 0,
                low_coherence: 0,
                ground: 4,
            },
        ];
    }
    b.add(
        EMPTY_ID,
        "Signal box (no points)",
        "empty",
        Masonry,
        5.0,
        rect([300.0, 350.0], 10.0, 6.0, 90.0),
        Motion::default(),
        Some(PointPlan::default()),
    );
    let m = b.ordinary(6.0);
    b.add(
        "QH-C01",
        "Orchard Lodge (mostly low coherence)",
        "mostly_low_coherence",
        Masonry,
        6.0,
        rect([220.0, -350.0], 16.0, 10.0, 90.0),
        m,
        Some(PointPlan {
            inside: 2,
            buffer: 0,
            low_coherence: 10,
            ground: 5,
        }),
    );
    let m = Motion {
        seasonal_amplitude_mm: 2.7,
        ..b.ordinary(45.0)
    };
    b.add(
        "QH-F09",
        "Heron Tower",
        "tall_seasonal",
        Frame,
        45.0,
        rect([140.0, 50.0], 26.0, 22.0, 90.0),
        m,
        None,
    );
    let m = b.ordinary(20.0);
    b.add(
        JUMP_ID,
        "Cooper's Exchange (one unwrapping error)",
        "unwrapping_jump",
        Frame,
        20.0,
        rect([-140.0, -350.0], 40.0, 18.0, 90.0),
        m,
        Some(PointPlan {
            inside: 24,
            buffer: 5,
            low_coherence: 2,
            ground: 6,
        }),
    );

    // --- Ordinary structures on a loose street grid (x = ±140, ±220, ±300; y = −350 … 350). ---
    let slots: [Slot; 20] = [
        (
            "QH-T01",
            "Tern Street terrace",
            -300.0,
            -350.0,
            Masonry,
            7.5,
            44.0,
            8.5,
            90.0,
        ),
        (
            "QH-T02",
            "Plover Street terrace",
            -300.0,
            -150.0,
            Masonry,
            7.5,
            40.0,
            8.5,
            90.0,
        ),
        (
            "QH-T03",
            "Gull Terrace",
            -300.0,
            -50.0,
            Masonry,
            8.0,
            48.0,
            9.0,
            90.0,
        ),
        (
            "QH-T04",
            "Ropewalk terrace",
            300.0,
            50.0,
            Masonry,
            7.0,
            42.0,
            8.0,
            90.0,
        ),
        (
            "QH-T06",
            "Chalk Row",
            -220.0,
            350.0,
            Masonry,
            7.5,
            36.0,
            8.5,
            90.0,
        ),
        (
            "QH-F01",
            "Harbour Lofts",
            -220.0,
            -250.0,
            Frame,
            21.0,
            32.0,
            16.0,
            90.0,
        ),
        (
            "QH-F02",
            "Quay House",
            -220.0,
            -150.0,
            Frame,
            15.0,
            24.0,
            14.0,
            0.0,
        ),
        (
            "QH-F04",
            "Netloft Studios",
            -140.0,
            -250.0,
            Frame,
            12.0,
            20.0,
            12.0,
            90.0,
        ),
        (
            "QH-F05",
            "Mariner's Clinic",
            -140.0,
            -150.0,
            Frame,
            9.0,
            28.0,
            14.0,
            90.0,
        ),
        (
            "QH-F06",
            "Lantern Green School",
            -140.0,
            50.0,
            Frame,
            10.0,
            36.0,
            16.0,
            90.0,
        ),
        (
            "QH-F08",
            "Cordage Mill flats",
            -140.0,
            150.0,
            Frame,
            27.0,
            30.0,
            15.0,
            0.0,
        ),
        (
            "QH-F10",
            "Ferry Road depot",
            140.0,
            250.0,
            Frame,
            8.0,
            34.0,
            20.0,
            90.0,
        ),
        (
            "QH-F11",
            "Wrack Street car park",
            220.0,
            -250.0,
            Frame,
            12.0,
            40.0,
            18.0,
            90.0,
        ),
        (
            "QH-F12",
            "Tidemark Hotel",
            220.0,
            50.0,
            Frame,
            30.0,
            28.0,
            18.0,
            90.0,
        ),
        (
            "QH-F13",
            "Anchor Point offices",
            300.0,
            150.0,
            Frame,
            24.0,
            26.0,
            16.0,
            90.0,
        ),
        (
            "QH-M01",
            "The Chandlery",
            -300.0,
            50.0,
            Masonry,
            9.0,
            18.0,
            10.0,
            90.0,
        ),
        (
            "QH-M02",
            "St Brine's Hall",
            -220.0,
            150.0,
            Masonry,
            11.0,
            26.0,
            12.0,
            0.0,
        ),
        (
            "QH-M03",
            "1 Skiff Lane",
            140.0,
            -250.0,
            Masonry,
            6.5,
            12.0,
            8.0,
            90.0,
        ),
        (
            "QH-M04",
            "Customs Cottage",
            140.0,
            -350.0,
            Masonry,
            6.0,
            14.0,
            8.0,
            90.0,
        ),
        (
            "QH-M05",
            "Smokehouse Row",
            300.0,
            -150.0,
            Masonry,
            7.0,
            30.0,
            8.0,
            90.0,
        ),
    ];
    for (id, name, e, n, kind, h, l, w, az) in slots {
        let m = b.ordinary(h);
        b.add(
            id,
            name,
            "ordinary",
            kind,
            h,
            rect([e, n], l, w, az),
            m,
            None,
        );
    }
    add_observability_cases(&mut b, rect);

    Scenario {
        name: "Quillhaven - Lanternway Line movement review (synthetic demo)".into(),
        seed: DEMO_SEED,
        frame: TownFrame {
            origin_lon_deg: 3.45,
            origin_lat_deg: 55.32,
        },
        reference_date: reference,
        structures: b.structures,
        geometries,
        trough: Some(Trough {
            alignment_m: vec![[-40.0, -450.0], [0.0, 0.0], [80.0, 450.0]],
            k: 0.5,
            axis_depth_m: 20.0,
            s_max_mm: 20.0,
            face_start: date(2023, 4, 3),
            face_speed_m_per_day: 4.5,
            time_constant_days: 40.0,
            horizontal: true,
        }),
        background_settlement_mm_per_yr: 0.3,
        ground_seasonal_amplitude_mm: 1.0,
        noise: NoiseModel::c_band(),
        unwrap_jumps: vec![UnwrapJump {
            geometry: 0,
            structure_id: JUMP_ID.into(),
            from_date: date(2024, 2, 15),
            cycles: -1,
        }],
        buffer_m: 5.0,
        surroundings_m: 50.0,
    }
}

/// Id of the structure seen from one look direction only (ascending points, no descending).
pub const ONE_LOOK_ID: &str = "QH-A01";
/// Id of the structure whose long axis runs north–south.
pub const AXIS_NS_ID: &str = "QH-N01";
/// Id of the structure with too few points to resolve its profile.
pub const UNRESOLVED_ID: &str = "QH-G01";

/// The three observability cases, added after every other structure and away from them, so
/// the earlier structures' points and noise draws stay what they were.
fn add_observability_cases(b: &mut Builder, rect: fn([f64; 2], f64, f64, f64) -> Footprint) {
    use StructureKind::Masonry;
    let m = b.ordinary(7.0);
    b.add(
        ONE_LOOK_ID,
        "Brine Yard annexe (ascending points only: no east-west)",
        "one_look_direction",
        Masonry,
        7.0,
        rect([460.0, -300.0], 24.0, 10.0, 90.0),
        m,
        None,
    );
    // No descending points at all (not even ground points around it).
    if let Some(s) = b.structures.last_mut() {
        s.points[1] = PointPlan::default();
    }
    let m = b.ordinary(8.0);
    b.add(
        AXIS_NS_ID,
        "North Mole stores (north-south axis: strain along it not observable)",
        "axis_north_south",
        Masonry,
        8.0,
        rect([-420.0, 120.0], 32.0, 9.0, 0.0),
        m,
        None,
    );
    let m = b.ordinary(6.5);
    b.add(
        UNRESOLVED_ID,
        "Gable Street row (few points: profile not resolved)",
        "unresolved_profile",
        Masonry,
        6.5,
        rect([460.0, 300.0], 36.0, 8.0, 90.0),
        m,
        Some(PointPlan {
            inside: 3,
            buffer: 0,
            low_coherence: 0,
            ground: 5,
        }),
    );
}

const PORTFOLIO_EXTRA: &str = r#"[assessment]
buffer_m = 5.0
surroundings_m = 50.0
min_coherence = 0.7
min_points = 5

[report]
prepared_by = "Plinth demo (synthetic data)"
client = "Quillhaven Borough (invented)"
revision = "A"
notes = "Synthetic demonstration data: an invented town and tunnel drive, not a real site. The planted truth is in truth.json."

[[triggers]]
name = "review"
field = "settlement_mm"
above = 10.0
action = "Review the time series and the movement of the surrounding ground."

[[triggers]]
name = "inspect"
field = "damage_category"
above = 2.0
action = "Arrange a visual inspection of the structure."
"#;

/// Generate the demo files in memory: (file name, content) in writing order, plus the truth.
pub fn build() -> Result<(Scenario, super::generate::Generated, Truth)> {
    let sc = scenario();
    let generated = generate(&sc).context("generating the demo points")?;
    let truth =
        build_truth(&sc, &generated, &DESIGNED_CATEGORY).context("computing the demo truth")?;
    Ok((sc, generated, truth))
}

/// Write the demo portfolio into `dir` (created if needed; existing demo files are overwritten):
/// `portfolio.toml`, `structures.geojson`, `points-asc.csv`, `points-desc.csv`, `truth.json`,
/// `README.md`. Deterministic: the same bytes on every run.
pub fn write_demo(dir: &Path) -> Result<()> {
    std::fs::create_dir_all(dir).with_context(|| format!("cannot create {}", dir.display()))?;
    let (sc, generated, truth) = build()?;
    let w = default_window(&sc).context("the demo has no geometries")?;
    let mut extra = PORTFOLIO_EXTRA.to_string();
    if let Some(tr) = &sc.trough {
        extra.push('\n');
        extra.push_str(&works_toml(&sc, tr));
    }
    let toml = portfolio_toml(
        &sc,
        &PortfolioText {
            comments: vec![
                "Plinth demo portfolio: invented town (Quillhaven) and tunnel drive (Lanternway Line).".into(),
                "Generated by `plinth demo DIR`; the planted truth is in truth.json. See README.md.".into(),
            ],
            crs: Some("EPSG:32631".into()),
            window: Some((w.start, w.end)),
            structures_file: "structures.geojson".into(),
            extra: extra.clone(),
        },
    );
    write_text(&dir.join("portfolio.toml"), &toml)?;
    write_text(&dir.join("structures.geojson"), &footprints_geojson(&sc))?;
    for (g, gg) in sc.geometries.iter().zip(&generated.geometries) {
        write_points_file(&dir.join(&g.file_name), gg, 2)?;
    }
    write_text(&dir.join("truth.json"), &truth_json(&truth))?;
    write_period_2(dir, &sc, &extra)?;
    write_text(&dir.join("README.md"), &readme(&sc, &truth))?;
    Ok(())
}

/// Acquisitions added by the second reporting period (every 12 days: about six months).
pub const PERIOD_2_EXTRA_EPOCHS: usize = 15;

/// The second reporting period beside the first: `portfolio-2.toml` reading
/// `points-asc-2.csv` and `points-desc-2.csv`, the same structures observed by a longer stack
/// ([`PERIOD_2_EXTRA_EPOCHS`] more acquisitions, reprocessed: the shared epochs carry new
/// noise, as a real reprocessing would), assessed over the whole longer window.
fn write_period_2(dir: &Path, sc: &Scenario, extra: &str) -> Result<()> {
    let mut sc2 = sc.clone();
    sc2.name = format!("{} - period 2", sc.name);
    for g in &mut sc2.geometries {
        g.epochs += PERIOD_2_EXTRA_EPOCHS;
        g.file_name = g.file_name.replace(".csv", "-2.csv");
    }
    let generated = generate(&sc2).context("generating the period-2 points")?;
    let w = default_window(&sc2).context("the demo has no geometries")?;
    let toml = portfolio_toml(
        &sc2,
        &PortfolioText {
            comments: vec![
                "Plinth demo portfolio, second reporting period: the same structures, a longer (reprocessed) stack.".into(),
                "Assess with `--previous` pointing at the period-1 output. Generated by `plinth demo DIR`; see README.md.".into(),
            ],
            crs: Some("EPSG:32631".into()),
            window: Some((w.start, w.end)),
            structures_file: "structures.geojson".into(),
            extra: extra.to_string(),
        },
    );
    write_text(&dir.join("portfolio-2.toml"), &toml)?;
    for (g, gg) in sc2.geometries.iter().zip(&generated.geometries) {
        write_points_file(&dir.join(&g.file_name), gg, 2)?;
    }
    Ok(())
}

/// The `[works]` section for the planted tunnel drive: the alignment in lon/lat, the axis depth
/// and K of the planted trough, a diameter of 6 m and the volume loss that gives the planted
/// S_max through S_max = V_L·(πD²/4) / (√(2π)·i), i = K·z0 (Peck 1969; O'Reilly & New 1982;
/// docs/methods.md §5.8, §11.2; V_L in percent in the file, S_max in mm + down), and the face
/// progress of the planted drive (launch, then the end of the alignment at the planted advance
/// rate), so predicted and observed can be compared.
fn works_toml(sc: &Scenario, tr: &Trough) -> String {
    const DIAMETER_M: f64 = 6.0;
    let i_m = tr.k * tr.axis_depth_m;
    let face_area_m2 = std::f64::consts::PI * DIAMETER_M * DIAMETER_M / 4.0;
    let volume_loss_percent =
        100.0 * (tr.s_max_mm / 1000.0) * (2.0 * std::f64::consts::PI).sqrt() * i_m / face_area_m2;
    let vertices: Vec<String> = (tr.alignment_m.iter())
        .map(|p| {
            let (lon, lat) = sc.frame.to_lon_lat(p[0], p[1]);
            format!("[{lon:.8}, {lat:.8}]")
        })
        .collect();
    let length_m: f64 = (tr.alignment_m.windows(2))
        .map(|w| (w[1][0] - w[0][0]).hypot(w[1][1] - w[0][1]))
        .sum();
    let days = (length_m / tr.face_speed_m_per_day).ceil() as i64;
    let end = tr.face_start + chrono::Duration::days(days);
    format!(
        "# The invented Lanternway Line drive, as planted in the points (truth.json `trough`).\n\
         [[works.tunnels]]\n\
         name = \"Lanternway Line (northbound drive)\"\n\
         alignment = [{}]\n\
         axis_depth_m = {:.1}\n\
         diameter_m = {DIAMETER_M:.1}\n\
         volume_loss_percent = {volume_loss_percent:.4}\n\
         trough_width_k = {:.2}\n\n\
         [[works.tunnels.progress]]\n\
         date = \"{}\"\n\
         chainage_m = 0.0\n\n\
         [[works.tunnels.progress]]\n\
         date = \"{end}\"\n\
         chainage_m = {:.1}\n",
        vertices.join(", "),
        tr.axis_depth_m,
        tr.k,
        tr.face_start,
        (length_m * 10.0).floor() / 10.0,
    )
}

fn readme(sc: &Scenario, t: &Truth) -> String {
    let mut r = String::new();
    r.push_str("# Plinth demo portfolio: Quillhaven and the Lanternway Line (invented)\n\n");
    r.push_str(
        "Everything here is synthetic. Quillhaven is an invented town and the Lanternway Line an invented bored\n\
         metro tunnel; no real place, company, person or data set is depicted. The town origin is placed offshore\n\
         (3.45° E, 55.32° N) on purpose. The files are written by Plinth's own generator with a fixed seed, so\n\
         they can be checked against the planted truth in `truth.json`.\n\n",
    );
    r.push_str(
        "Regenerate (byte-identical) into a new or empty folder:\n\n```\nplinth demo demo-copy\n```\n\n",
    );
    r.push_str(
        "Assess the first reporting period, then open `demo-out/explorer.html` in a browser (offline, one\n\
         file: the plan map with the tunnel and its trough zone, the table, each structure's detail and report):\n\n\
         ```\nplinth assess demo-portfolio/portfolio.toml --out demo-out\n```\n\n\
         Assess the second reporting period (the same structures, a longer reprocessed stack) against the first;\n\
         the results, the reports and `demo-out-2/explorer.html` then show what changed since period 1:\n\n\
         ```\nplinth assess demo-portfolio/portfolio-2.toml --previous demo-out --out demo-out-2\n```\n\n",
    );
    r.push_str("## Files\n\n");
    r.push_str("| file | content |\n|---|---|\n");
    r.push_str("| `portfolio.toml` | the job (period 1): datasets, assessment settings, report block, two trigger levels, the tunnel drive in `[works]` |\n");
    r.push_str(&format!(
        "| `portfolio-2.toml`, `points-asc-2.csv`, `points-desc-2.csv` | period 2: the same job over a longer stack ({PERIOD_2_EXTRA_EPOCHS} more acquisitions per geometry, reprocessed, so the shared dates carry new noise); no truth file of its own |\n"
    ));
    r.push_str(&format!(
        "| `structures.geojson` | {} footprints (lon/lat): terraces, framed blocks, a wall line, an L shape, a MultiPolygon |\n",
        sc.structures.len()
    ));
    for (g, gt) in sc.geometries.iter().zip(&t.geometries) {
        r.push_str(&format!(
            "| `{}` | {} pass, incidence {:.0}°, heading {:.0}°, {} acquisitions every {} days from {} to {}, {} points |\n",
            g.file_name, g.pass, g.incidence_deg, g.heading_deg, g.epochs, g.repeat_days, gt.first_date, gt.last_date, gt.points
        ));
    }
    r.push_str("| `truth.json` | planted motion, period values over the window, expected categories, point roles |\n\n");
    r.push_str("## The scenario\n\n");
    if let Some(tr) = &sc.trough {
        r.push_str(
            "- `portfolio.toml` describes the drive in `[works]` (alignment, depth, K, a 6 m diameter and the volume loss\n  \
             that gives the planted S_max, face progress at the planted rate), so the outputs show predicted against\n  \
             observed settlement for the structures near it.\n",
        );
        r.push_str(&format!(
            "- A tunnel drive runs roughly south to north through the town centre (axis depth z0 = {} m, K = {},\n  \
             trough width i = {} m, final S_max = {} mm; Peck's Gaussian trough with horizontal movement towards the\n  \
             axis). The face starts at the south end on {} and advances {} m/day; settlement grows after it passes\n  \
             with a {}-day time constant. Structures over it settle, sag (near the axis) or hog (beyond i).\n",
            tr.axis_depth_m,
            tr.k,
            tr.width_i_m(),
            tr.s_max_mm,
            tr.face_start,
            tr.face_speed_m_per_day,
            tr.time_constant_days
        ));
    }
    r.push_str(
        "- Noise: per-epoch σ from coherence (0.80–0.94 → about 1.5–2.9 mm), a small common per-epoch offset, 1 %\n  \
         missing values; low-coherence points (0.45–0.68) with extra noise on most structures; annual thermal\n  \
         signals growing with height; one phase-unwrapping error of −λ/2 = −27.73 mm on one point.\n",
    );
    r.push_str(&format!(
        "- Window of the truth values: {} to {} ({:.3} years), the first and last common acquisition dates.\n\n",
        t.window.start, t.window.end, t.window.span_years
    ));
    r.push_str("## Designed cases (truth over the window)\n\n");
    r.push_str("| id | name | what | expected |\n|---|---|---|---|\n");
    for s in &t.structures {
        if s.role == "ordinary" {
            continue;
        }
        let p = &s.period;
        let expected = match s.role.as_str() {
            "tilted_block" => format!(
                "tilt {:.2e} (1/{:.0}) towards {:.0}°",
                p.tilt,
                p.tilt_one_in.unwrap_or(f64::NAN),
                p.tilt_azimuth_deg.unwrap_or(f64::NAN)
            ),
            "sagging_building" | "hogging_building" => match &s.damage {
                Some(d) => format!(
                    "Δ/L {:+.2e}, ε_max {:.3} % ({}), category {}",
                    p.deflection_ratio,
                    d.max_strain * 100.0,
                    d.governing,
                    d.category_label
                ),
                None => "n/a".into(),
            },
            "velocity_breakpoint" => match s.planted.rate_change {
                Some(rc) => format!(
                    "settlement rate {:.1} mm/yr, {:.1} mm/yr from {}",
                    s.planted.settlement_rate_mm_per_yr,
                    s.planted.settlement_rate_mm_per_yr + rc.extra_settlement_rate_mm_per_yr,
                    rc.date
                ),
                None => "n/a".into(),
            },
            "accelerating" => format!(
                "settlement acceleration {:.1} mm/yr², settlement {:.1} mm",
                s.planted.settlement_acceleration_mm_per_yr2, p.settlement_mean_mm
            ),
            "settlement_step" => match s.planted.steps.first() {
                Some(st) => format!(
                    "{:.1} mm step on {}, settlement {:.1} mm",
                    st.settlement_mm, st.date, p.settlement_mean_mm
                ),
                None => "n/a".into(),
            },
            "wall_line_east_creep" => format!(
                "east {:.1} mm/yr ({:.1} mm), settlement {:.1} mm",
                s.planted.east_velocity_mm_per_yr, p.east_displacement_mm, p.settlement_mean_mm
            ),
            "unwrapping_jump" => match t.unwrapping_jumps.first() {
                Some(j) => format!(
                    "point {} ({}) carries {:.2} mm from {}; the structure itself is steady",
                    j.point_id, j.dataset, j.jump_mm, j.from_date
                ),
                None => "n/a".into(),
            },
            "tall_seasonal" => format!(
                "annual semi-amplitude {:.1} mm (thermal), settlement {:.1} mm",
                s.planted.seasonal_amplitude_mm, p.settlement_mean_mm
            ),
            r if r.starts_with("trough") => format!(
                "settlement {:.1} mm (max {:.1}), tilt 1/{:.0}, Δ/L {:+.1e}, {:.1}·i from the axis",
                p.settlement_mean_mm,
                p.settlement_max_mm,
                p.tilt_one_in.unwrap_or(f64::NAN),
                p.deflection_ratio,
                s.trough
                    .as_ref()
                    .map(|x| x.centroid_distance_over_i)
                    .unwrap_or(f64::NAN)
            ),
            "one_look_direction" | "axis_north_south" | "unresolved_profile" => format!(
                "{}; settlement {:.1} mm",
                match s.observability.as_deref() {
                    Some("no_east_west") =>
                        "ascending points only: no east–west component, horizontal strain not observable, category a lower bound",
                    Some("strain_axis_not_observable") =>
                        "long axis north–south: horizontal strain not observable along it, category a lower bound",
                    _ =>
                        "three points per geometry: the profile does not resolve Δ/L, no damage category",
                },
                p.settlement_mean_mm
            ),
            _ if s.expected_status == "insufficient_data" => {
                format!("insufficient data ({} good points)", s.good_points)
            }
            _ => format!(
                "settlement {:.1} mm, velocity {:+.1} mm/yr",
                p.settlement_mean_mm, p.vertical_velocity_mm_per_yr
            ),
        };
        r.push_str(&format!(
            "| {} | {} | {} | {} |\n",
            s.id,
            s.name,
            s.role.replace('_', " "),
            expected
        ));
    }
    r.push_str(
        "\nExpected categories use the Burland & Wroth deep beam over the whole length (E/G 2.6, ν 0.3,\n\
         horizontal strain 0) with the limiting tensile strain categories; see `truth.json` → `conventions`.\n",
    );
    r
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn designed_cases_have_the_intended_truth() {
        let (sc, _, t) = build().expect("demo builds");
        let by = |id: &str| {
            t.structures
                .iter()
                .find(|s| s.id == id)
                .expect("structure present")
        };
        // Planted period tilt 1.2e-3 towards 120° (rate chosen as 1.2e-3 / span), exact up to the
        // dense-grid fit.
        let tilt = by(TILTED_ID);
        assert!(
            (tilt.period.tilt - 1.2e-3).abs() < 1e-9,
            "{}",
            tilt.period.tilt
        );
        assert!((tilt.period.tilt_azimuth_deg.unwrap_or(0.0) - 120.0).abs() < 1e-6);
        // Uniform 2.0 mm/yr plus the 0.3 mm/yr background; a rigid tilt adds nothing to the mean
        // of a rectangle, and the motion is linear, so both velocity truths are −2.3 mm/yr.
        assert!((tilt.period.vertical_velocity_mm_per_yr + 2.3).abs() < 1e-6);
        assert!((tilt.period.vertical_velocity_linear_fit_mm_per_yr + 2.3).abs() < 1e-6);
        // Sagging: Δ/L = +7.6e-4 over L = 24, H = 8 (L/H 3): Fb 0.71667 (damage-relations.md §2.5)
        // → ε_b = 1.0605e-3, category 2 (0.075-0.15 %).
        let sag = by(SAGGING_ID);
        let d = sag.damage.as_ref().expect("damage");
        assert!((sag.period.deflection_ratio - 7.6e-4).abs() < 1e-9);
        assert!((d.max_strain - 7.6e-4 / 0.716_667).abs() < 1e-8);
        assert_eq!((d.category, d.mode.as_str()), (2, "sagging"));
        // Hogging: Δ/L = −7.3e-4 over L = 20, H = 8 (L/H 2.5): Fb = 2.5/12 + 2.6/5 = 0.72833 → cat. 2.
        let hog = by(HOGGING_ID);
        let d = hog.damage.as_ref().expect("damage");
        assert!((hog.period.deflection_ratio + 7.3e-4).abs() < 1e-9);
        assert_eq!((d.category, d.mode.as_str()), (2, "hogging"));
        assert_eq!(by(EMPTY_ID).expected_status, "insufficient_data");
        assert_eq!(by(SPARSE_ID).good_points, 3);
        assert_eq!(by(SPARSE_ID).expected_status, "insufficient_data");
        assert_eq!(by("QH-C01").expected_status, "insufficient_data");
        assert_eq!(t.unwrapping_jumps.len(), 1);
        assert!((t.unwrapping_jumps[0].jump_mm + 27.73).abs() < 0.01);
        assert!(sc.structures.len() >= 30 && sc.structures.len() <= 60);
        // The trough buildings over the axis settle by most of S_max by the window end.
        let over = by("QH-T05");
        assert!(
            over.period.settlement_max_mm > 15.0,
            "{}",
            over.period.settlement_max_mm
        );
    }
}
