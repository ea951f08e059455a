//! Greenfield ground movement of a tunnel drive in the analysis CRS: Peck (1969) Gaussian troughs
//! per alignment segment, superposed, with a cumulative-probability longitudinal profile at the
//! segment ends and at the face.
//!
//! Owns the segment geometry (transverse and along-segment coordinates of a point), the face
//! position on a date (linear between progress records), the standard normal distribution
//! function Φ and the superposition. The trough relations themselves are
//! [`crate::damage::greenfield`]. It does no I/O and does not assess buildings.
//!
//! Longitudinal extent (choice, documented in docs/methods.md): every segment contributes
//! `S_max·exp(−x²/(2i²))·[Φ((c − c₀)/i) − Φ((c − c₁)/i)]`, where x is the transverse distance
//! from the segment's axis, c the chainage of the point projected on the segment line, and
//! [c₀, c₁] the built part of the segment (c₁ capped at the face). For a straight alignment the
//! Φ terms of consecutive segments telescope, so a structure beside a built segment gets the full
//! transverse trough; at the first vertex and at the face the settlement is half the transverse
//! value, the cumulative-probability longitudinal profile of Attewell & Woodman (1982) (**from
//! memory** \[M\]). At a bend the two segments' windows overlap on the inside and leave a gap on the
//! outside, of the order of the deflection angle times i: keep vertices close enough that
//! deflections are small, or accept that error near bends.
//!
//! Horizontal displacement: transverse only, `u = −(x/z0)·s` towards the segment axis (O'Reilly &
//! New 1982 \[M\]); the longitudinal horizontal movement near the face is not modelled.

use chrono::NaiveDate;
use serde::Serialize;

use crate::damage::greenfield::GaussianTrough;

use super::model::FaceProgress;

/// Standard normal cumulative distribution Φ(z) = ½·erfc(−z/√2).
///
/// # Units
/// z dimensionless; result in \[0, 1\].
///
/// # References
/// erfc by the Chebyshev-fitted approximation of Press, Teukolsky, Vetterling & Flannery (1992),
/// *Numerical Recipes in C*, 2nd ed., §6.2 `erfcc` (fractional error < 1.2e-7 everywhere)
/// — from memory \[M\]; checked here against tabulated Φ values.
///
/// # Examples
/// ```
/// use plinth::works::tunnel::normal_cdf;
/// // Φ(0) = 0.5; Φ(1) = 0.841345; Φ(−1.96) = 0.024998 (standard normal table).
/// assert!((normal_cdf(0.0) - 0.5).abs() < 1e-7);
/// assert!((normal_cdf(1.0) - 0.841345).abs() < 1e-6);
/// assert!((normal_cdf(-1.96) - 0.024998).abs() < 1e-6);
/// ```
///
/// Non-finite z: +∞ → 1, −∞ → 0, NaN → NaN.
pub fn normal_cdf(z: f64) -> f64 {
    if z.is_nan() {
        return f64::NAN;
    }
    0.5 * erfc(-z / std::f64::consts::SQRT_2)
}

fn erfc(x: f64) -> f64 {
    let z = x.abs();
    let t = 1.0 / (1.0 + 0.5 * z);
    let poly = -z * z - 1.265_512_23
        + t * (1.000_023_68
            + t * (0.374_091_96
                + t * (0.096_784_18
                    + t * (-0.186_288_06
                        + t * (0.278_868_07
                            + t * (-1.135_203_98
                                + t * (1.488_515_87 + t * (-0.822_152_23 + t * 0.170_872_77))))))));
    let ans = t * poly.exp();
    if x >= 0.0 { ans } else { 2.0 - ans }
}

/// One straight segment of a tunnel alignment in the analysis CRS.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Segment {
    /// Start vertex (x, y), m in the analysis CRS.
    pub start: [f64; 2],
    /// End vertex (x, y), m.
    pub end: [f64; 2],
    /// Chainage of the start vertex along the alignment, m.
    pub chainage_start_m: f64,
    /// Segment length, m (> 0).
    pub length_m: f64,
    /// Excavated diameter D, m.
    pub diameter_m: f64,
    /// Transverse trough of this segment (S_max, i = K·z0, z0).
    pub trough: GaussianTrough,
}

/// Where a point lies relative to a segment.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SegmentCoords {
    /// Signed transverse offset from the segment axis, m (+ to the left of the drive direction).
    pub transverse_m: f64,
    /// Chainage of the point's projection on the (infinite) segment line, m.
    pub chainage_m: f64,
    /// Unit normal (x, y) pointing to the left of the drive direction.
    pub normal: [f64; 2],
}

impl Segment {
    /// Transverse and along-line coordinates of (x, y).
    pub fn coords(&self, x: f64, y: f64) -> SegmentCoords {
        let tx = (self.end[0] - self.start[0]) / self.length_m;
        let ty = (self.end[1] - self.start[1]) / self.length_m;
        let (ax, ay) = (x - self.start[0], y - self.start[1]);
        let along = ax * tx + ay * ty;
        let normal = [-ty, tx];
        SegmentCoords {
            transverse_m: ax * normal[0] + ay * normal[1],
            chainage_m: self.chainage_start_m + along,
            normal,
        }
    }

    /// Settlement (m, + down) and horizontal displacement (x, y components, m) of this segment at
    /// (x, y) with the built chainage range capped at `face_chainage_m` (None = fully built).
    pub fn movement(&self, x: f64, y: f64, face_chainage_m: Option<f64>) -> (f64, [f64; 2]) {
        let c0 = self.chainage_start_m;
        let c1 = match face_chainage_m {
            Some(f) => f.min(c0 + self.length_m),
            None => c0 + self.length_m,
        };
        if c1 <= c0 {
            return (0.0, [0.0, 0.0]);
        }
        let p = self.coords(x, y);
        let i = self.trough.i_m;
        let window = normal_cdf((p.chainage_m - c0) / i) - normal_cdf((p.chainage_m - c1) / i);
        let s = self.trough.settlement_m(p.transverse_m) * window;
        let u = -(p.transverse_m / self.trough.z0_m) * s;
        (s, [u * p.normal[0], u * p.normal[1]])
    }
}

/// A tunnel drive in the analysis CRS.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TunnelGeometry {
    /// Name from the portfolio file.
    pub name: String,
    /// Segments in drive order.
    pub segments: Vec<Segment>,
    /// Total alignment length, m.
    pub length_m: f64,
    /// Volume loss, %.
    pub volume_loss_percent: f64,
    /// K.
    pub trough_width_k: f64,
    /// Face records (empty = whole alignment built).
    pub progress: Vec<FaceProgress>,
}

impl TunnelGeometry {
    /// Face chainage on `date`, m: linear between records, the first record's chainage before it,
    /// the last record's after it. `None` when the drive has no records (treated as fully built).
    /// A date before the first record still has the first record's face: record the launch
    /// (chainage 0) as the first row.
    pub fn face_chainage_m(&self, date: NaiveDate) -> Option<f64> {
        let first = self.progress.first()?;
        let last = self.progress.last()?;
        if date <= first.date {
            return Some(first.chainage_m);
        }
        if date >= last.date {
            return Some(last.chainage_m);
        }
        for w in self.progress.windows(2) {
            if date >= w[0].date && date <= w[1].date {
                let span = (w[1].date - w[0].date).num_days() as f64;
                let f = (date - w[0].date).num_days() as f64 / span;
                return Some(w[0].chainage_m + f * (w[1].chainage_m - w[0].chainage_m));
            }
        }
        Some(last.chainage_m)
    }

    /// Superposed settlement (m, + down) and horizontal displacement (m) at (x, y) with the face
    /// at `face_chainage_m` (None = fully built).
    pub fn movement(&self, x: f64, y: f64, face_chainage_m: Option<f64>) -> (f64, [f64; 2]) {
        let mut s = 0.0;
        let mut u = [0.0, 0.0];
        for seg in &self.segments {
            let (ss, uu) = seg.movement(x, y, face_chainage_m);
            s += ss;
            u[0] += uu[0];
            u[1] += uu[1];
        }
        (s, u)
    }

    /// The segment contributing most settlement at (x, y) when fully built, with its share.
    pub fn dominant_segment(&self, x: f64, y: f64) -> Option<(usize, f64)> {
        self.segments
            .iter()
            .enumerate()
            .map(|(k, seg)| (k, seg.movement(x, y, None).0))
            .max_by(|a, b| a.1.total_cmp(&b.1))
    }

    /// Chainage of the point of the alignment nearest to (x, y), m, and the distance to it, m.
    pub fn nearest_chainage_m(&self, x: f64, y: f64) -> Option<(f64, f64)> {
        self.segments
            .iter()
            .map(|seg| {
                let p = seg.coords(x, y);
                let along = (p.chainage_m - seg.chainage_start_m).clamp(0.0, seg.length_m);
                let tx = (seg.end[0] - seg.start[0]) / seg.length_m;
                let ty = (seg.end[1] - seg.start[1]) / seg.length_m;
                let (qx, qy) = (seg.start[0] + along * tx, seg.start[1] + along * ty);
                (
                    seg.chainage_start_m + along,
                    ((x - qx).powi(2) + (y - qy).powi(2)).sqrt(),
                )
            })
            .min_by(|a, b| a.1.total_cmp(&b.1))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn straight(length_m: f64, n_seg: usize, progress: Vec<FaceProgress>) -> TunnelGeometry {
        // G1 trough (damage-relations.md §8.8): D 6, z0 20, K 0.5, V_L 1 %, along +y from (0, −L/2).
        let t = GaussianTrough::from_tunnel(6.0, 20.0, 0.5, 0.01).unwrap();
        let seg_len = length_m / n_seg as f64;
        let segments = (0..n_seg)
            .map(|k| {
                let y0 = -length_m / 2.0 + k as f64 * seg_len;
                Segment {
                    start: [0.0, y0],
                    end: [0.0, y0 + seg_len],
                    chainage_start_m: k as f64 * seg_len,
                    length_m: seg_len,
                    diameter_m: 6.0,
                    trough: t,
                }
            })
            .collect();
        TunnelGeometry {
            name: "T".into(),
            segments,
            length_m,
            volume_loss_percent: 1.0,
            trough_width_k: 0.5,
            progress,
        }
    }

    #[test]
    fn normal_cdf_table() {
        // Standard normal table values (any statistics text), tol 2e-7.
        for (z, p) in [
            (0.5, 0.691_462_5),
            (2.0, 0.977_249_9),
            (-3.0, 0.001_349_9),
            (1.5, 0.933_192_8),
        ] {
            assert!((normal_cdf(z) - p).abs() < 2e-7, "Φ({z})");
        }
        assert_eq!(normal_cdf(f64::INFINITY), 1.0);
        assert_eq!(normal_cdf(f64::NEG_INFINITY), 0.0);
    }

    #[test]
    fn segments_telescope_to_the_full_g1_trough() {
        // damage-relations.md §8.8 G1 (derived [D]): s(0) 11.2798 mm, s(20) 1.5266 mm,
        // u(√3·i) −2.1797 mm; a 1 km drive in 7 segments, structure at mid-drive.
        let t = straight(1000.0, 7, vec![]);
        let (s0, _) = t.movement(0.0, 3.0, None);
        assert!((s0 * 1e3 - 11.2798).abs() < 1e-4, "{}", s0 * 1e3);
        let (s20, _) = t.movement(20.0, -40.0, None);
        assert!((s20 * 1e3 - 1.5266).abs() < 1e-4);
        // Point at x = +17.321 (to the right of a +y drive): u points to −x (towards the axis).
        let (_, u) = t.movement(10.0 * 3f64.sqrt(), 10.0, None);
        assert!((u[0] * 1e3 + 2.1797).abs() < 1e-4, "{}", u[0] * 1e3);
        assert!(u[1].abs() < 1e-12);
    }

    #[test]
    fn half_trough_at_the_face_and_progress_interpolation() {
        let d = |s: &str| NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap();
        let t = straight(
            1000.0,
            4,
            vec![
                FaceProgress {
                    date: d("2024-01-01"),
                    chainage_m: 0.0,
                },
                FaceProgress {
                    date: d("2024-01-11"),
                    chainage_m: 500.0,
                },
            ],
        );
        assert_eq!(t.face_chainage_m(d("2023-06-01")), Some(0.0));
        assert_eq!(t.face_chainage_m(d("2024-01-06")), Some(250.0));
        assert_eq!(t.face_chainage_m(d("2025-01-01")), Some(500.0));
        // Face at chainage 500 = y 0: above the face Φ(0) = ½ of the transverse value
        // (Attewell & Woodman 1982 cumulative-probability profile, from memory [M]).
        let (s_face, _) = t.movement(0.0, 0.0, Some(500.0));
        assert!((s_face * 1e3 - 0.5 * 11.2798).abs() < 1e-4);
        // Far ahead of the face: nothing; far behind: the full trough.
        assert!(t.movement(0.0, 200.0, Some(500.0)).0 < 1e-9);
        assert!((t.movement(0.0, -200.0, Some(500.0)).0 * 1e3 - 11.2798).abs() < 1e-4);
        // Before the launch: nothing built.
        assert_eq!(t.movement(0.0, -200.0, Some(0.0)).0, 0.0);
        assert_eq!(t.nearest_chainage_m(3.0, 10.0).map(|c| c.0), Some(510.0));
        assert_eq!(t.dominant_segment(0.0, 10.0).map(|d| d.0), Some(2));
    }
}
