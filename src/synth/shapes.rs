//! Plane polygon helpers for synthetic footprints in town-frame metres.
//!
//! Owns footprint construction (rotated rectangles, L shapes), point-in-polygon, distance to the
//! footprint edge, area, centroid, second moments of area and the principal (long) axis with its
//! extent. These are small, self-contained routines so the generator does not depend on the code
//! it is meant to test. It does not convert to longitude/latitude (see `frame`) or place points.

use serde::Serialize;

/// A footprint: one or more simple polygons, each an exterior ring of `(east_m, north_m)`
/// vertices in town-frame metres, not closed (the last vertex is not repeated), no holes.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Footprint {
    /// Exterior rings (one per part; several for a MultiPolygon structure).
    pub parts: Vec<Vec<[f64; 2]>>,
}

/// Principal axis of a footprint and its extent along that axis.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct LongAxis {
    /// Area centroid, town-frame metres.
    pub centroid_m: [f64; 2],
    /// Azimuth of the long axis, degrees clockwise from north, in [0°, 180°).
    pub azimuth_deg: f64,
    /// Extent of the vertices along the axis, m (the beam length L).
    pub length_m: f64,
    /// Extent of the vertices across the axis, m.
    pub width_m: f64,
    /// Axis coordinate of the extent centre, measured from the centroid, m.
    pub centre_offset_m: f64,
}

impl Footprint {
    /// A rectangle `length_m` × `width_m` centred at `centre_m` whose long side points along
    /// `azimuth_deg` (degrees clockwise from north). Vertices are anticlockwise.
    pub fn rectangle(centre_m: [f64; 2], length_m: f64, width_m: f64, azimuth_deg: f64) -> Self {
        Footprint {
            parts: vec![rectangle_ring(centre_m, length_m, width_m, azimuth_deg)],
        }
    }

    /// An L shape: a `length_m` × `width_m` leg along the axis plus a second leg of
    /// `leg_m` × `width_m` at the start end, turned 90° anticlockwise from the axis.
    /// `corner_m` is the outer corner where the legs meet.
    pub fn l_shape(
        corner_m: [f64; 2],
        length_m: f64,
        leg_m: f64,
        width_m: f64,
        az_deg: f64,
    ) -> Self {
        // Local frame: a along the axis, b 90° anticlockwise (to the left of the axis).
        let (a, b) = axis_vectors(az_deg);
        let p = |s: f64, t: f64| {
            [
                corner_m[0] + s * a[0] + t * b[0],
                corner_m[1] + s * a[1] + t * b[1],
            ]
        };
        Footprint {
            parts: vec![vec![
                p(0.0, 0.0),
                p(length_m, 0.0),
                p(length_m, width_m),
                p(width_m, width_m),
                p(width_m, leg_m),
                p(0.0, leg_m),
            ]],
        }
    }

    /// Axis-aligned bounding box `(min_e, min_n, max_e, max_n)`, m.
    pub fn bbox(&self) -> [f64; 4] {
        let mut b = [
            f64::INFINITY,
            f64::INFINITY,
            f64::NEG_INFINITY,
            f64::NEG_INFINITY,
        ];
        for v in self.parts.iter().flatten() {
            b[0] = b[0].min(v[0]);
            b[1] = b[1].min(v[1]);
            b[2] = b[2].max(v[0]);
            b[3] = b[3].max(v[1]);
        }
        b
    }

    /// True when `q` lies inside any part (even-odd rule; boundary points may go either way).
    pub fn contains(&self, q: [f64; 2]) -> bool {
        self.parts.iter().any(|r| ring_contains(r, q))
    }

    /// Distance from `q` to the nearest footprint edge, m (also for points inside).
    pub fn edge_distance_m(&self, q: [f64; 2]) -> f64 {
        let mut d = f64::INFINITY;
        for r in &self.parts {
            for k in 0..r.len() {
                let a = r[k];
                let b = r[(k + 1) % r.len()];
                d = d.min(segment_distance(q, a, b));
            }
        }
        d
    }

    /// Distance from `q` to the footprint: 0 inside, the edge distance outside, m.
    pub fn distance_m(&self, q: [f64; 2]) -> f64 {
        if self.contains(q) {
            0.0
        } else {
            self.edge_distance_m(q)
        }
    }

    /// Total area, m² (shoelace formula; parts are assumed not to overlap).
    pub fn area_m2(&self) -> f64 {
        self.parts.iter().map(|r| ring_moments(r).0.abs()).sum()
    }

    /// Principal axis from the second moments of area about the centroid:
    /// angle from east φ = ½·atan2(2S_xy, S_xx − S_yy), azimuth = 90° − φ
    /// (insar-methods.md §7.7 \[Rec\]); extent from the vertices projected on it.
    ///
    /// Degenerate input (zero area) returns `None`.
    pub fn long_axis(&self) -> Option<LongAxis> {
        let (mut area, mut sx, mut sy) = (0.0, 0.0, 0.0);
        let (mut ixx, mut iyy, mut ixy) = (0.0, 0.0, 0.0);
        for r in &self.parts {
            // Orientation-independent: take each ring's moments with the sign of its area.
            let (a, mx, my, jxx, jyy, jxy) = ring_moments(r);
            let sgn = if a < 0.0 { -1.0 } else { 1.0 };
            area += sgn * a;
            sx += sgn * mx;
            sy += sgn * my;
            ixx += sgn * jxx;
            iyy += sgn * jyy;
            ixy += sgn * jxy;
        }
        if area.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater) {
            return None;
        }
        let (cx, cy) = (sx / area, sy / area);
        // Central second moments: S_xx = ∫(x − cx)², etc.
        let sxx = ixx - area * cx * cx;
        let syy = iyy - area * cy * cy;
        let sxy = ixy - area * cx * cy;
        let phi = 0.5 * (2.0 * sxy).atan2(sxx - syy);
        let mut az = 90.0 - phi.to_degrees();
        az = az.rem_euclid(180.0);
        let (a, b) = axis_vectors(az);
        let (mut smin, mut smax) = (f64::INFINITY, f64::NEG_INFINITY);
        let (mut tmin, mut tmax) = (f64::INFINITY, f64::NEG_INFINITY);
        for v in self.parts.iter().flatten() {
            let d = [v[0] - cx, v[1] - cy];
            let s = d[0] * a[0] + d[1] * a[1];
            let t = d[0] * b[0] + d[1] * b[1];
            smin = smin.min(s);
            smax = smax.max(s);
            tmin = tmin.min(t);
            tmax = tmax.max(t);
        }
        Some(LongAxis {
            centroid_m: [cx, cy],
            azimuth_deg: az,
            length_m: smax - smin,
            width_m: tmax - tmin,
            centre_offset_m: 0.5 * (smin + smax),
        })
    }
}

impl LongAxis {
    /// Axis coordinate of `q` measured from the extent centre, m (+ towards the azimuth).
    pub fn axial_m(&self, q: [f64; 2]) -> f64 {
        let (a, _) = axis_vectors(self.azimuth_deg);
        (q[0] - self.centroid_m[0]) * a[0] + (q[1] - self.centroid_m[1]) * a[1]
            - self.centre_offset_m
    }
}

/// Unit vectors along an azimuth (clockwise from north) and 90° anticlockwise from it, in (E, N).
pub fn axis_vectors(azimuth_deg: f64) -> ([f64; 2], [f64; 2]) {
    let z = azimuth_deg.to_radians();
    let a = [z.sin(), z.cos()];
    let b = [-a[1], a[0]];
    (a, b)
}

fn rectangle_ring(c: [f64; 2], length_m: f64, width_m: f64, az_deg: f64) -> Vec<[f64; 2]> {
    let (a, b) = axis_vectors(az_deg);
    let (hl, hw) = (0.5 * length_m, 0.5 * width_m);
    let p = |s: f64, t: f64| [c[0] + s * a[0] + t * b[0], c[1] + s * a[1] + t * b[1]];
    vec![p(-hl, -hw), p(hl, -hw), p(hl, hw), p(-hl, hw)]
}

/// Signed area and first/second moments (∫x, ∫y, ∫x², ∫y², ∫xy) of a simple polygon.
fn ring_moments(r: &[[f64; 2]]) -> (f64, f64, f64, f64, f64, f64) {
    let (mut a, mut mx, mut my, mut ixx, mut iyy, mut ixy) = (0.0, 0.0, 0.0, 0.0, 0.0, 0.0);
    for k in 0..r.len() {
        let [x0, y0] = r[k];
        let [x1, y1] = r[(k + 1) % r.len()];
        let c = x0 * y1 - x1 * y0;
        a += c;
        mx += (x0 + x1) * c;
        my += (y0 + y1) * c;
        ixx += (x0 * x0 + x0 * x1 + x1 * x1) * c;
        iyy += (y0 * y0 + y0 * y1 + y1 * y1) * c;
        ixy += (x0 * y1 + 2.0 * x0 * y0 + 2.0 * x1 * y1 + x1 * y0) * c;
    }
    (
        a / 2.0,
        mx / 6.0,
        my / 6.0,
        ixx / 12.0,
        iyy / 12.0,
        ixy / 24.0,
    )
}

fn ring_contains(r: &[[f64; 2]], q: [f64; 2]) -> bool {
    let mut inside = false;
    let n = r.len();
    let mut j = n - 1;
    for i in 0..n {
        let (pi, pj) = (r[i], r[j]);
        if (pi[1] > q[1]) != (pj[1] > q[1]) {
            let x_cross = pj[0] + (q[1] - pj[1]) * (pi[0] - pj[0]) / (pi[1] - pj[1]);
            if q[0] < x_cross {
                inside = !inside;
            }
        }
        j = i;
    }
    inside
}

/// Distance from `q` to the segment `a`–`b`, m.
pub fn segment_distance(q: [f64; 2], a: [f64; 2], b: [f64; 2]) -> f64 {
    let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
    let len2 = dx * dx + dy * dy;
    let t = if len2 > 0.0 {
        (((q[0] - a[0]) * dx + (q[1] - a[1]) * dy) / len2).clamp(0.0, 1.0)
    } else {
        0.0
    };
    let (px, py) = (a[0] + t * dx, a[1] + t * dy);
    ((q[0] - px).powi(2) + (q[1] - py).powi(2)).sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rectangle_axis_matches_worked_example() {
        // insar-methods.md §7.7: rectangle 30 m × 12 m with long axis azimuth 60° → azimuth 60° [C].
        let f = Footprint::rectangle([5.0, -3.0], 30.0, 12.0, 60.0);
        let ax = f.long_axis().expect("non-degenerate");
        assert!((ax.azimuth_deg - 60.0).abs() < 1e-9);
        assert!((ax.length_m - 30.0).abs() < 1e-9);
        assert!((ax.width_m - 12.0).abs() < 1e-9);
        assert!((ax.centroid_m[0] - 5.0).abs() < 1e-9 && (ax.centroid_m[1] + 3.0).abs() < 1e-9);
        assert!((f.area_m2() - 360.0).abs() < 1e-9);
        // The corner (−9.9904, −12.6962) of §7.11 for the same rectangle centred at the origin.
        let g = Footprint::rectangle([0.0, 0.0], 30.0, 12.0, 60.0);
        let has = g.parts[0]
            .iter()
            .any(|v| (v[0] + 9.9904).abs() < 1e-4 && (v[1] + 12.6962).abs() < 1e-4);
        assert!(has, "{:?}", g.parts[0]);
    }

    #[test]
    fn contains_and_distance() {
        let f = Footprint::rectangle([0.0, 0.0], 20.0, 10.0, 90.0); // long side east-west
        assert!(f.contains([9.0, 4.0]));
        assert!(!f.contains([11.0, 0.0]));
        assert!((f.distance_m([13.0, 0.0]) - 3.0).abs() < 1e-12);
        assert_eq!(f.distance_m([0.0, 0.0]), 0.0);
        assert!((f.edge_distance_m([0.0, 0.0]) - 5.0).abs() < 1e-12);
    }

    #[test]
    fn l_shape_area_and_membership() {
        let f = Footprint::l_shape([0.0, 0.0], 30.0, 20.0, 8.0, 90.0);
        // 30×8 + (20 − 8)×8 = 336 m².
        assert!((f.area_m2() - 336.0).abs() < 1e-9);
        assert!(f.contains([25.0, 4.0]));
        assert!(f.contains([4.0, 15.0]));
        assert!(!f.contains([20.0, 15.0]));
    }

    #[test]
    fn multipolygon_area_sums() {
        let f = Footprint {
            parts: vec![
                rectangle_ring([0.0, 0.0], 10.0, 10.0, 0.0),
                rectangle_ring([30.0, 0.0], 10.0, 10.0, 0.0),
            ],
        };
        assert!((f.area_m2() - 200.0).abs() < 1e-9);
        let ax = f.long_axis().expect("axis");
        assert!((ax.centroid_m[0] - 15.0).abs() < 1e-9);
        assert!((ax.azimuth_deg - 90.0).abs() < 1e-9);
        assert!((ax.length_m - 40.0).abs() < 1e-9);
    }
}
