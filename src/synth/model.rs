//! The synthetic scenario: structures with planted movement, the tunnel trough, viewing
//! geometries and noise, and the noise-free displacement field they define.
//!
//! Owns the data model of a scenario and [`Scenario::displacement_enu_mm`], the exact planted
//! motion of any position at any date. It does not place points, add noise or write files
//! (`generate`, `write`), and it computes no summary metrics (`truth`).
//!
//! # Conventions
//! - Positions: town frame, metres, x = true east, y = true north (see `frame`).
//! - Displacement: ENU vector in mm, up positive; settlement S = −d_U (mm, + downward), as in
//!   insar-methods.md §1.3.
//! - Time: t in years of 365.25 days since [`Scenario::reference_date`] (§1.3).

use chrono::NaiveDate;
use serde::Serialize;

use super::shapes::{Footprint, LongAxis, segment_distance};

/// Structural type written to the footprint `structure` property.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum StructureKind {
    /// Load-bearing masonry (E/G = 2.6 in the deep-beam relations).
    Masonry,
    /// Framed structure (E/G = 12.5).
    Frame,
}

impl StructureKind {
    /// Property value as written in the GeoJSON.
    pub fn label(self) -> &'static str {
        match self {
            StructureKind::Masonry => "masonry",
            StructureKind::Frame => "frame",
        }
    }

    /// E/G of the equivalent deep beam: 2.6 for isotropic masonry (ν = 0.3), 12.5 for frames.
    ///
    /// # References
    /// damage-relations.md §2.4 (Burland & Wroth 1974, from memory \[M\]).
    pub fn e_over_g(self) -> f64 {
        match self {
            StructureKind::Masonry => 2.6,
            StructureKind::Frame => 12.5,
        }
    }
}

/// A step in the settlement of a whole structure on a date (a real event, not a processing error).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Step {
    /// First date showing the step.
    pub date: NaiveDate,
    /// Size of the step, mm, + downward.
    pub settlement_mm: f64,
}

/// A change of the uniform settlement rate on a date (the structure speeds up or slows down).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct RateChange {
    /// Date of the change.
    pub date: NaiveDate,
    /// Added settlement rate after the date, mm/yr, + downward.
    pub extra_settlement_rate_mm_per_yr: f64,
}

/// Planted movement of one structure, on top of the ground field (trough, background).
///
/// Every term is linear in time from the scenario reference date unless stated, so "per year"
/// rates multiply the time since the reference date.
#[derive(Debug, Clone, PartialEq, Serialize, Default)]
pub struct Motion {
    /// Uniform settlement rate, mm/yr, + downward.
    pub settlement_rate_mm_per_yr: f64,
    /// Settlement acceleration a, mm/yr², + = settling faster: S = v·t + ½·a·t².
    pub settlement_acceleration_mm_per_yr2: f64,
    /// Optional change of the settlement rate on a date (a velocity breakpoint).
    pub rate_change: Option<RateChange>,
    /// Rigid tilt rate, dimensionless per year (m/m per year, ≥ 0).
    pub tilt_rate_per_yr: f64,
    /// Direction in which the structure goes down, degrees clockwise from north.
    pub tilt_azimuth_deg: f64,
    /// Rate of the deflection ratio Δ/L along the long axis, per year, + sagging, − hogging
    /// (damage-relations.md §0.2). Shape: parabola S = Δ·(1 − 4s²/L²) with Δ = DR·L, s measured
    /// from the centre of the footprint extent along the long axis.
    pub deflection_ratio_rate_per_yr: f64,
    /// Eastward velocity of the structure, mm/yr.
    pub east_velocity_mm_per_yr: f64,
    /// Northward velocity of the structure, mm/yr.
    pub north_velocity_mm_per_yr: f64,
    /// Semi-amplitude of the annual thermal signal, mm, vertical (up at the peak day).
    pub seasonal_amplitude_mm: f64,
    /// Day of the year (1-based) of the highest position of the thermal signal.
    pub seasonal_peak_day: f64,
    /// Settlement steps of the whole structure.
    pub steps: Vec<Step>,
}

/// How many points a structure gets in each viewing geometry.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Default)]
pub struct PointPlan {
    /// Good points placed inside the footprint.
    pub inside: usize,
    /// Good points placed outside the footprint but within the association buffer.
    pub buffer: usize,
    /// Low-coherence points (coherence below 0.7, extra noise) inside the footprint.
    pub low_coherence: usize,
    /// Ground points in the ring between the buffer and the surroundings radius.
    pub ground: usize,
}

/// One synthetic structure.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StructureSpec {
    /// Unique id (GeoJSON `id` property).
    pub id: String,
    /// Display name.
    pub name: String,
    /// Height to eaves, m.
    pub height_m: f64,
    /// Structural type.
    pub kind: StructureKind,
    /// Footprint in town-frame metres.
    pub footprint: Footprint,
    /// Planted movement.
    pub motion: Motion,
    /// Points per geometry, indexed like [`Scenario::geometries`]; missing entries mean none.
    pub points: Vec<PointPlan>,
    /// Short label of what this structure demonstrates (e.g. "tilted_block"), for the truth.
    pub role: String,
}

/// A bored tunnel drive and its greenfield settlement trough.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Trough {
    /// Alignment polyline in town-frame metres, in drive order (chainage 0 at the first vertex).
    pub alignment_m: Vec<[f64; 2]>,
    /// Trough width parameter K, dimensionless.
    pub k: f64,
    /// Depth of the tunnel axis z0, m.
    pub axis_depth_m: f64,
    /// Final maximum settlement above the axis, mm.
    pub s_max_mm: f64,
    /// Date the face is at chainage 0.
    pub face_start: NaiveDate,
    /// Face advance rate, m/day.
    pub face_speed_m_per_day: f64,
    /// Time constant of the growth of settlement after the face passes, days.
    pub time_constant_days: f64,
    /// Whether horizontal ground displacement towards the axis (O'Reilly & New) is planted.
    pub horizontal: bool,
}

/// Position of a location relative to the tunnel alignment.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct AlignmentPosition {
    /// Horizontal distance to the alignment, m (≥ 0).
    pub distance_m: f64,
    /// Chainage of the nearest alignment point, m.
    pub chainage_m: f64,
    /// Unit vector (E, N) from the location towards the nearest alignment point (0 on the axis).
    pub towards_axis: [f64; 2],
}

impl Trough {
    /// Trough width i = K·z0, m (Peck 1969; damage-relations.md §7.1 eq. 7.5 \[M\]).
    pub fn width_i_m(&self) -> f64 {
        self.k * self.axis_depth_m
    }

    /// Nearest point of the alignment to `q`.
    pub fn position(&self, q: [f64; 2]) -> Option<AlignmentPosition> {
        let mut best: Option<AlignmentPosition> = None;
        let mut chain0 = 0.0;
        for w in self.alignment_m.windows(2) {
            let (a, b) = (w[0], w[1]);
            let seg_len = ((b[0] - a[0]).powi(2) + (b[1] - a[1]).powi(2)).sqrt();
            let d = segment_distance(q, a, b);
            if best.is_none_or(|p| d < p.distance_m) {
                let t = if seg_len > 0.0 {
                    (((q[0] - a[0]) * (b[0] - a[0]) + (q[1] - a[1]) * (b[1] - a[1]))
                        / seg_len.powi(2))
                    .clamp(0.0, 1.0)
                } else {
                    0.0
                };
                let p = [a[0] + t * (b[0] - a[0]), a[1] + t * (b[1] - a[1])];
                let towards = if d > 0.0 {
                    [(p[0] - q[0]) / d, (p[1] - q[1]) / d]
                } else {
                    [0.0, 0.0]
                };
                best = Some(AlignmentPosition {
                    distance_m: d,
                    chainage_m: chain0 + t * seg_len,
                    towards_axis: towards,
                });
            }
            chain0 += seg_len;
        }
        best
    }

    /// Date at which the face passes a chainage.
    pub fn pass_date(&self, chainage_m: f64) -> NaiveDate {
        let days = (chainage_m / self.face_speed_m_per_day).round() as i64;
        self.face_start + chrono::Duration::days(days)
    }

    /// Fraction of the final transverse trough developed at `date` for a chainage:
    /// g = 1 − exp(−τ/τ_c) for τ > 0 days after the face passes, else 0.
    ///
    /// Choice \[Rec\]: the longitudinal growth is modelled as a first-order approach to the final
    /// transverse trough after the face passes, a simple stand-in for the face-loss and
    /// consolidation phases; it keeps the 12-day LOS change far below λ/4 (insar-methods.md §2.7).
    pub fn development(&self, chainage_m: f64, date: NaiveDate) -> f64 {
        // A face that does not advance (speed ≤ 0) is taken to stand at chainage 0 only.
        let delay_days = if self.face_speed_m_per_day > 0.0 {
            chainage_m / self.face_speed_m_per_day
        } else if chainage_m > 0.0 {
            f64::INFINITY
        } else {
            0.0
        };
        let tau_days = (date - self.face_start).num_days() as f64 - delay_days;
        if tau_days.is_nan() || tau_days <= 0.0 {
            0.0
        } else if self.time_constant_days <= 0.0 {
            1.0
        } else {
            1.0 - (-tau_days / self.time_constant_days).exp()
        }
    }

    /// Greenfield settlement and horizontal displacement at `q` on `date`.
    ///
    /// s(x) = S_max·exp(−x²/(2i²)) (Peck 1969), horizontal u = (|x|/z0)·s directed towards the
    /// axis (O'Reilly & New 1982), both scaled by [`Trough::development`].
    ///
    /// # Units
    /// Returns `(settlement_mm (+ down), east_mm, north_mm)`.
    ///
    /// # References
    /// damage-relations.md §7.1 eq. 7.1 and §7.2 (from memory \[M\] for the relations).
    ///
    /// # Examples
    /// ```
    /// use plinth::synth::model::Trough;
    /// let t = Trough {
    ///     alignment_m: vec![[0.0, -100.0], [0.0, 100.0]],
    ///     k: 0.5, axis_depth_m: 20.0, s_max_mm: 11.2798,
    ///     face_start: chrono::NaiveDate::from_ymd_opt(2020, 1, 1).unwrap(),
    ///     face_speed_m_per_day: 10.0, time_constant_days: 0.0, horizontal: true,
    /// };
    /// // damage-relations.md §8.8 G1 at x = 10 m: s = 6.8416 mm, |u| = 3.4208 mm.
    /// let late = chrono::NaiveDate::from_ymd_opt(2021, 1, 1).unwrap();
    /// let (s, e, n) = t.greenfield_mm([10.0, 0.0], late);
    /// assert!((s - 6.8416).abs() < 1e-4 && (e + 3.4208).abs() < 1e-4 && n.abs() < 1e-12);
    /// ```
    pub fn greenfield_mm(&self, q: [f64; 2], date: NaiveDate) -> (f64, f64, f64) {
        let Some(p) = self.position(q) else {
            return (0.0, 0.0, 0.0);
        };
        let i = self.width_i_m();
        if i <= 0.0 {
            return (0.0, 0.0, 0.0);
        }
        let g = self.development(p.chainage_m, date);
        let s = self.s_max_mm * (-p.distance_m.powi(2) / (2.0 * i * i)).exp() * g;
        if !self.horizontal || self.axis_depth_m <= 0.0 {
            return (s, 0.0, 0.0);
        }
        let u = p.distance_m / self.axis_depth_m * s;
        (s, u * p.towards_axis[0], u * p.towards_axis[1])
    }
}

/// One viewing geometry (one points file).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Geometry {
    /// Dataset name (unique).
    pub name: String,
    /// `ascending` or `descending`.
    pub pass: String,
    /// Scene incidence angle, degrees.
    pub incidence_deg: f64,
    /// Scene heading, degrees clockwise from north.
    pub heading_deg: f64,
    /// First acquisition.
    pub first_date: NaiveDate,
    /// Repeat interval, days.
    pub repeat_days: i64,
    /// Number of acquisitions.
    pub epochs: usize,
    /// File name of the points CSV.
    pub file_name: String,
    /// Prefix of the point ids (e.g. "A").
    pub id_prefix: String,
}

impl Geometry {
    /// Acquisition dates.
    pub fn dates(&self) -> Vec<NaiveDate> {
        (0..self.epochs)
            .map(|k| self.first_date + chrono::Duration::days(self.repeat_days * k as i64))
            .collect()
    }
}

/// Measurement noise and data-quality defects.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct NoiseModel {
    /// When false, no random noise at all (values are exact projections of the planted motion).
    pub enabled: bool,
    /// Coherence range of good points (σ per epoch follows from coherence, insar-methods.md §6.1).
    pub good_coherence: (f64, f64),
    /// Coherence range of low-coherence points.
    pub low_coherence: (f64, f64),
    /// Extra noise factor applied to low-coherence points on top of the coherence-derived σ.
    pub low_coherence_extra_factor: f64,
    /// Standard deviation of a per-epoch offset common to all points of one geometry
    /// (a crude atmospheric / reference residual), mm.
    pub common_epoch_sigma_mm: f64,
    /// Probability that a value (other than the first epoch) is missing.
    pub missing_probability: f64,
    /// Radar wavelength, mm (sets σ from coherence and the unwrapping jump λ/2).
    pub radar_wavelength_mm: f64,
}

impl NoiseModel {
    /// Realistic C-band defaults: coherence 0.80–0.94 (σ ≈ 1.5–2.9 mm per epoch), low-coherence
    /// 0.45–0.68 with ×1.5 extra noise, 0.8 mm common per-epoch offset, 1 % missing values.
    pub fn c_band() -> Self {
        NoiseModel {
            enabled: true,
            good_coherence: (0.80, 0.94),
            low_coherence: (0.45, 0.68),
            low_coherence_extra_factor: 1.5,
            common_epoch_sigma_mm: 0.8,
            missing_probability: 0.01,
            radar_wavelength_mm: crate::portfolio::C_BAND_WAVELENGTH_MM,
        }
    }

    /// No noise, no missing values: every value is the exact LOS projection of the planted motion
    /// (planted unwrapping jumps stay).
    pub fn none() -> Self {
        NoiseModel {
            enabled: false,
            common_epoch_sigma_mm: 0.0,
            missing_probability: 0.0,
            ..Self::c_band()
        }
    }

    /// Per-epoch LOS noise implied by a temporal coherence γ: σ_d = sqrt(−2·ln γ)·λ/(4π).
    ///
    /// # Units
    /// γ dimensionless in (0, 1]; mm out. γ outside (0, 1] returns NaN.
    ///
    /// # References
    /// insar-methods.md §6.1 (γ ≈ exp(−σ_φ²/2) for Gaussian phase, derived \[C\]).
    ///
    /// # Examples
    /// ```
    /// // insar-methods.md Appendix A, COH-1: γ = 0.7 at C-band → σ_d = 3.728 mm.
    /// let n = plinth::synth::model::NoiseModel::c_band();
    /// assert!((n.sigma_from_coherence_mm(0.7) - 3.728).abs() < 1e-3);
    /// ```
    pub fn sigma_from_coherence_mm(&self, coherence: f64) -> f64 {
        if !(coherence > 0.0 && coherence <= 1.0) {
            return f64::NAN;
        }
        (-2.0 * coherence.ln()).sqrt() * self.radar_wavelength_mm / (4.0 * std::f64::consts::PI)
    }
}

/// A phase-unwrapping error planted on one generated point.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct UnwrapJump {
    /// Geometry index.
    pub geometry: usize,
    /// Structure id whose point receives it (its inside point with the highest coherence).
    pub structure_id: String,
    /// First date carrying the jump (the nearest acquisition on or after it).
    pub from_date: NaiveDate,
    /// Number of cycles k; the jump is k·λ/2 in LOS.
    pub cycles: i32,
}

/// The whole scenario.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Scenario {
    /// Scenario / portfolio name.
    pub name: String,
    /// Seed of every random draw.
    pub seed: u64,
    /// Town origin and local tangent plane.
    pub frame: super::frame::TownFrame,
    /// t = 0 of every planted rate.
    pub reference_date: NaiveDate,
    /// Structures.
    pub structures: Vec<StructureSpec>,
    /// Viewing geometries.
    pub geometries: Vec<Geometry>,
    /// Optional tunnel trough.
    pub trough: Option<Trough>,
    /// Background settlement of the whole area, mm/yr, + downward.
    pub background_settlement_mm_per_yr: f64,
    /// Annual semi-amplitude of ground points (soil moisture), mm, vertical.
    pub ground_seasonal_amplitude_mm: f64,
    /// Noise.
    pub noise: NoiseModel,
    /// Planted unwrapping errors.
    pub unwrap_jumps: Vec<UnwrapJump>,
    /// Association buffer the points are placed for, m (buffer points lie within it).
    pub buffer_m: f64,
    /// Surroundings radius, m (ground points lie within it).
    pub surroundings_m: f64,
}

/// Years of 365.25 days from `from` to `to`.
pub fn years_between(from: NaiveDate, to: NaiveDate) -> f64 {
    (to - from).num_days() as f64 / 365.25
}

impl Scenario {
    /// Long axis of structure `k` (None for a degenerate footprint).
    pub fn axis(&self, k: usize) -> Option<LongAxis> {
        self.structures.get(k).and_then(|s| s.footprint.long_axis())
    }

    /// The planted, noise-free displacement at town-frame position `q` on `date` relative to the
    /// reference date, for a point on structure `on` (None = a ground point).
    ///
    /// Returns `(east_mm, north_mm, up_mm)`. The seasonal term is included when `seasonal` is true
    /// (the generator includes it; period truth values exclude it). Structure terms are evaluated
    /// at the point's own position, also for buffer points just outside the footprint (they stand
    /// for façade scatterers geolocated off the footprint, which move with the structure).
    pub fn displacement_enu_mm(
        &self,
        on: Option<usize>,
        q: [f64; 2],
        date: NaiveDate,
        seasonal: bool,
    ) -> [f64; 3] {
        let t = years_between(self.reference_date, date);
        let mut settle = self.background_settlement_mm_per_yr * t;
        let (mut e, mut n) = (0.0, 0.0);
        if let Some(tr) = &self.trough {
            let (s, de, dn) = tr.greenfield_mm(q, date);
            settle += s;
            e += de;
            n += dn;
        }
        let mut up_seasonal = 0.0;
        match on.and_then(|k| self.structures.get(k).map(|s| (k, s))) {
            Some((k, s)) => {
                let m = &s.motion;
                settle += self.structure_settlement_mm(k, q, date);
                e += m.east_velocity_mm_per_yr * t;
                n += m.north_velocity_mm_per_yr * t;
                if seasonal {
                    up_seasonal = annual(m.seasonal_amplitude_mm, m.seasonal_peak_day, date);
                }
            }
            None => {
                if seasonal {
                    up_seasonal = annual(self.ground_seasonal_amplitude_mm, 200.0, date);
                }
            }
        }
        [e, n, -settle + up_seasonal]
    }

    /// Settlement of structure `k` at `q` on `date` from its own planted terms (uniform, rate
    /// change, acceleration, tilt, curvature, steps), mm, + downward; no ground field, no season.
    pub fn structure_settlement_mm(&self, k: usize, q: [f64; 2], date: NaiveDate) -> f64 {
        let Some(s) = self.structures.get(k) else {
            return 0.0;
        };
        let m = &s.motion;
        let t = years_between(self.reference_date, date);
        let mut settle =
            m.settlement_rate_mm_per_yr * t + 0.5 * m.settlement_acceleration_mm_per_yr2 * t * t;
        if let Some(rc) = m.rate_change {
            let tb = years_between(self.reference_date, rc.date);
            settle += rc.extra_settlement_rate_mm_per_yr * (t - tb).max(0.0);
        }
        for st in &m.steps {
            if date >= st.date {
                settle += st.settlement_mm;
            }
        }
        if let Some(ax) = s.footprint.long_axis() {
            let c = ax.centroid_m;
            if m.tilt_rate_per_yr != 0.0 {
                let (dir, _) = super::shapes::axis_vectors(m.tilt_azimuth_deg);
                let along_m = (q[0] - c[0]) * dir[0] + (q[1] - c[1]) * dir[1];
                // tilt (m/m) × distance (m) × 1000 mm/m.
                settle += m.tilt_rate_per_yr * t * along_m * 1000.0;
            }
            if m.deflection_ratio_rate_per_yr != 0.0 && ax.length_m > 0.0 {
                let sa = ax.axial_m(q);
                let l = ax.length_m;
                let delta_mm = m.deflection_ratio_rate_per_yr * t * l * 1000.0;
                settle += delta_mm * (1.0 - 4.0 * sa * sa / (l * l));
            }
        }
        settle
    }
}

/// Annual signal A·cos(2π(doy − peak)/365.25), mm, evaluated on the calendar day of `date`.
fn annual(amplitude_mm: f64, peak_day: f64, date: NaiveDate) -> f64 {
    if amplitude_mm == 0.0 {
        return 0.0;
    }
    use chrono::Datelike;
    let doy = date.ordinal() as f64;
    amplitude_mm * (2.0 * std::f64::consts::PI * (doy - peak_day) / 365.25).cos()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn d(y: i32, m: u32, dd: u32) -> NaiveDate {
        NaiveDate::from_ymd_opt(y, m, dd).expect("valid date")
    }

    fn trough() -> Trough {
        Trough {
            alignment_m: vec![[0.0, -100.0], [0.0, 100.0]],
            k: 0.5,
            axis_depth_m: 20.0,
            s_max_mm: 11.2798,
            face_start: d(2020, 1, 1),
            face_speed_m_per_day: 10.0,
            time_constant_days: 30.0,
            horizontal: true,
        }
    }

    #[test]
    fn greenfield_matches_g1_table() {
        // damage-relations.md §8.8 G1 (D = 6, z0 = 20, K = 0.5, V_L = 1 %), derived check values [D];
        // the table row "17.321" is x = √3·i rounded.
        let mut t = trough();
        t.time_constant_days = 0.0;
        let late = d(2022, 1, 1);
        for (x, s_ref, u_ref) in [
            (0.0, 11.2798, 0.0),
            (10.0 * 3f64.sqrt(), 2.5169, 2.1797),
            (25.0, 0.4956, 0.6195),
        ] {
            let (s, e, _) = t.greenfield_mm([-x, 0.0], late);
            assert!((s - s_ref).abs() < 1e-4, "s at {x}: {s}");
            // West of the axis the displacement points east (towards the axis).
            assert!((e - u_ref).abs() < 1e-4, "u at {x}: {e}");
        }
    }

    #[test]
    fn trough_grows_after_face() {
        let t = trough();
        // The face reaches chainage 100 (y = 0) 10 days after the start.
        assert_eq!(t.development(100.0, d(2020, 1, 11)), 0.0);
        let g = t.development(100.0, d(2020, 2, 10)); // 30 days later = one time constant
        assert!((g - (1.0 - (-1.0f64).exp())).abs() < 1e-9);
        assert_eq!(t.pass_date(100.0), d(2020, 1, 11));
    }

    #[test]
    fn planted_tilt_and_curvature() {
        let s = Scenario {
            name: "t".into(),
            seed: 1,
            frame: super::super::frame::TownFrame {
                origin_lon_deg: 0.0,
                origin_lat_deg: 0.0,
            },
            reference_date: d(2023, 1, 1),
            structures: vec![StructureSpec {
                id: "a".into(),
                name: "a".into(),
                height_m: 8.0,
                kind: StructureKind::Masonry,
                footprint: Footprint::rectangle([100.0, 0.0], 20.0, 10.0, 90.0),
                motion: Motion {
                    tilt_rate_per_yr: 1e-3,
                    tilt_azimuth_deg: 90.0,
                    deflection_ratio_rate_per_yr: 5e-4,
                    ..Motion::default()
                },
                points: vec![],
                role: String::new(),
            }],
            geometries: vec![],
            trough: None,
            background_settlement_mm_per_yr: 0.0,
            ground_seasonal_amplitude_mm: 0.0,
            noise: NoiseModel::none(),
            unwrap_jumps: vec![],
            buffer_m: 5.0,
            surroundings_m: 50.0,
        };
        let date = d(2025, 1, 1); // 731 days = 2.00137 yr
        let t = years_between(s.reference_date, date);
        // East end: tilt 1e-3·t·10 m·1000 = 10·t mm; curvature zero at the ends.
        let east = s.structure_settlement_mm(0, [110.0, 0.0], date);
        assert!((east - 10.0 * t).abs() < 1e-9, "{east}");
        // Centre: no tilt contribution, Δ = 5e-4·t·20 m·1000 = 10·t mm of sagging.
        let mid = s.structure_settlement_mm(0, [100.0, 0.0], date);
        assert!((mid - 10.0 * t).abs() < 1e-9, "{mid}");
        let up = s.displacement_enu_mm(Some(0), [100.0, 0.0], date, true)[2];
        assert!((up + mid).abs() < 1e-12);
    }
}
