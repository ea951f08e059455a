//! Principal axes of a structure footprint, in the structure's local metric frame.
//!
//! Owns: the choice of the two profile directions of a footprint, their azimuths, the axis
//! length L from the footprint vertices, and the axis coordinate of a point. It also offers the
//! second-moment (area) orientation as a diagnostic. It does not fit profiles or touch points'
//! displacements.
//!
//! # Choice: minimum-area rotated rectangle, not second moments
//! The principal axis is the long side of the minimum-area bounding rectangle of the footprint
//! (all parts of a MultiPolygon together; `geo::MinimumRotatedRect`), the secondary axis is its
//! short side. Reason: one side of the minimum-area rectangle is always collinear with an edge
//! of the convex hull, so for the rectilinear footprints that dominate building stock the axes
//! run along the walls, which is what the Burland & Wroth profile quantities are defined on
//! (wall or façade lines). Second moments of area point along the walls for rectangles too, but
//! for an L-shape with equal arms they give the diagonal (45° to every wall), and for a nearly
//! square footprint their orientation is ill conditioned. The second-moment azimuth is still
//! computed (`area_moment_azimuth_deg`) so a report can flag footprints where the two disagree.
//!
//! Ties (a square rectangle, sides equal within 1e-9 relative) are broken deterministically:
//! the side with the smaller azimuth in [0°, 180°) becomes the principal axis.
//!
//! # Conventions
//! x = east, y = north (m), azimuth in degrees clockwise from (true) north, an axis is undirected
//! and its azimuth is normalised to [0°, 180°). The positive axis direction is
//! (sin az, cos az), i.e. eastwards for every axis except due north-south (then northwards).

use geo::{Area, Centroid, MinimumRotatedRect, MultiPolygon};
use serde::Serialize;

/// One profile axis of a footprint.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Axis {
    /// Azimuth of the positive axis direction, degrees clockwise from north, in [0, 180).
    pub azimuth_deg: f64,
    /// Extent of the footprint along the axis, L = s_max − s_min (m).
    pub length_m: f64,
    /// Smallest axis coordinate of any footprint vertex (m).
    pub s_min_m: f64,
    /// Largest axis coordinate of any footprint vertex (m).
    pub s_max_m: f64,
}

impl Axis {
    /// Build an axis of the given azimuth whose extent covers all vertices of `footprint`.
    ///
    /// # Units
    /// Azimuth in degrees clockwise from north; extent in metres of the footprint's frame.
    pub fn from_azimuth(azimuth_deg: f64, footprint: &MultiPolygon<f64>) -> Option<Axis> {
        let az = normalise_axis_azimuth_deg(azimuth_deg)?;
        let probe = Axis {
            azimuth_deg: az,
            length_m: 0.0,
            s_min_m: 0.0,
            s_max_m: 0.0,
        };
        let mut s_min = f64::INFINITY;
        let mut s_max = f64::NEG_INFINITY;
        for poly in footprint {
            for c in poly.exterior().coords() {
                let s = probe.coordinate_m(c.x, c.y);
                s_min = s_min.min(s);
                s_max = s_max.max(s);
            }
        }
        if !(s_min.is_finite() && s_max.is_finite()) {
            return None;
        }
        Some(Axis {
            azimuth_deg: az,
            length_m: s_max - s_min,
            s_min_m: s_min,
            s_max_m: s_max,
        })
    }

    /// Unit vector (east, north) of the positive axis direction: (sin az, cos az).
    pub fn direction(&self) -> (f64, f64) {
        let a = self.azimuth_deg.to_radians();
        (a.sin(), a.cos())
    }

    /// Axis coordinate s = (x, y)·(sin az, cos az) of a point (m), same origin as the frame.
    ///
    /// # Examples
    /// ```
    /// use plinth::metrics::axes::Axis;
    /// let a = Axis { azimuth_deg: 90.0, length_m: 10.0, s_min_m: -5.0, s_max_m: 5.0 };
    /// assert!((a.coordinate_m(3.0, 7.0) - 3.0).abs() < 1e-12); // east-west axis: s = x
    /// ```
    pub fn coordinate_m(&self, x_m: f64, y_m: f64) -> f64 {
        let (e, n) = self.direction();
        x_m * e + y_m * n
    }

    /// Across-axis coordinate r = (x, y)·(cos az, −sin az) (m): positive to the right of the
    /// positive axis direction when looking along it (towards azimuth az + 90°).
    pub fn across_m(&self, x_m: f64, y_m: f64) -> f64 {
        let (e, n) = self.direction();
        x_m * n - y_m * e
    }

    /// Midpoint of the footprint extent along the axis (m).
    pub fn centre_m(&self) -> f64 {
        0.5 * (self.s_min_m + self.s_max_m)
    }
}

/// Principal (long) and secondary (short) axes of a footprint.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PrincipalAxes {
    /// Long side of the minimum-area rectangle.
    pub principal: Axis,
    /// Perpendicular, short side of the minimum-area rectangle.
    pub secondary: Axis,
    /// Area of the minimum-area rectangle (m²).
    pub rectangle_area_m2: f64,
    /// Area of the footprint itself, holes removed (m²).
    pub footprint_area_m2: f64,
    /// Major axis of the second moments of area (diagnostic), degrees in [0, 180); `None` when
    /// the footprint is isotropic (a square or a disc) and the orientation is undefined.
    pub area_moment_azimuth_deg: Option<f64>,
}

/// Why the axes of a footprint cannot be found.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum AxesError {
    #[error("footprint has no vertices")]
    Empty,
    #[error("footprint has a non-finite coordinate")]
    NonFinite,
    #[error("footprint is degenerate: extent {length_m:.3} m along an axis")]
    Degenerate { length_m: f64 },
}

/// Smallest footprint extent along either axis that is treated as a real structure (m).
pub const MIN_AXIS_LENGTH_M: f64 = 0.5;

/// Principal axes of a footprint from its minimum-area rotated rectangle (see module docs).
///
/// # Units
/// Footprint in the local metric frame (m, x east, y north); azimuths in degrees clockwise from
/// north in [0, 180); lengths in m.
///
/// # References
/// Minimum-area rectangle: Freeman & Shapira (1975), "Determining the minimum-area encasing
/// rectangle for an arbitrary closed curve" (from memory). Axis definition: insar-methods.md §7.7 \[Rec\].
///
/// # Examples
/// ```
/// use geo::{MultiPolygon, polygon};
/// use plinth::metrics::axes::principal_axes;
/// // 30 m × 12 m rectangle, long side east-west.
/// let fp = MultiPolygon(vec![polygon![(x: -15.0, y: -6.0), (x: 15.0, y: -6.0),
///     (x: 15.0, y: 6.0), (x: -15.0, y: 6.0)]]);
/// let ax = principal_axes(&fp).unwrap();
/// assert!((ax.principal.azimuth_deg - 90.0).abs() < 1e-9);
/// assert!((ax.principal.length_m - 30.0).abs() < 1e-9);
/// assert!((ax.secondary.length_m - 12.0).abs() < 1e-9);
/// ```
///
/// Degenerate input: an empty footprint, non-finite coordinates or an extent below
/// [`MIN_AXIS_LENGTH_M`] on either axis return an error.
pub fn principal_axes(footprint: &MultiPolygon<f64>) -> Result<PrincipalAxes, AxesError> {
    let mut any = false;
    for poly in footprint {
        for c in poly
            .exterior()
            .coords()
            .chain(poly.interiors().iter().flat_map(|r| r.coords()))
        {
            any = true;
            if !(c.x.is_finite() && c.y.is_finite()) {
                return Err(AxesError::NonFinite);
            }
        }
    }
    if !any {
        return Err(AxesError::Empty);
    }
    let rect = footprint.minimum_rotated_rect().ok_or(AxesError::Empty)?;
    let rc: Vec<_> = rect.exterior().coords().cloned().collect();
    if rc.len() < 3 {
        return Err(AxesError::Degenerate { length_m: 0.0 });
    }
    let e1 = (rc[1].x - rc[0].x, rc[1].y - rc[0].y);
    let e2 = (rc[2].x - rc[1].x, rc[2].y - rc[1].y);
    let l1 = e1.0.hypot(e1.1);
    let l2 = e2.0.hypot(e2.1);
    // A degenerate rectangle (all vertices on a line) has one zero-length side; take the
    // direction of the other and its perpendicular.
    let (dir, _) = if l1 >= l2 { (e1, l1) } else { (e2, l2) };
    if !(dir.0.hypot(dir.1) > 0.0) {
        return Err(AxesError::Degenerate { length_m: 0.0 });
    }
    let az_a = azimuth_of_vector_deg(dir.0, dir.1);
    let az_b = az_a + 90.0;
    let a = Axis::from_azimuth(az_a, footprint).ok_or(AxesError::NonFinite)?;
    let b = Axis::from_azimuth(az_b, footprint).ok_or(AxesError::NonFinite)?;
    let tie = (a.length_m - b.length_m).abs() <= 1e-9 * a.length_m.max(b.length_m);
    let (principal, secondary) = if tie {
        if a.azimuth_deg <= b.azimuth_deg {
            (a, b)
        } else {
            (b, a)
        }
    } else if a.length_m > b.length_m {
        (a, b)
    } else {
        (b, a)
    };
    if secondary.length_m < MIN_AXIS_LENGTH_M {
        return Err(AxesError::Degenerate {
            length_m: secondary.length_m,
        });
    }
    Ok(PrincipalAxes {
        principal,
        secondary,
        rectangle_area_m2: principal.length_m * secondary.length_m,
        footprint_area_m2: footprint.unsigned_area(),
        area_moment_azimuth_deg: area_moment_azimuth_deg(footprint),
    })
}

/// Azimuth (degrees clockwise from north, [0, 180)) of the undirected line with direction
/// (east, north).
pub fn azimuth_of_vector_deg(east: f64, north: f64) -> f64 {
    normalise_axis_azimuth_deg(east.atan2(north).to_degrees()).unwrap_or(0.0)
}

/// Normalise an undirected axis azimuth to [0, 180); `None` for non-finite input.
pub fn normalise_axis_azimuth_deg(az_deg: f64) -> Option<f64> {
    if !az_deg.is_finite() {
        return None;
    }
    let mut a = az_deg.rem_euclid(180.0);
    if a >= 180.0 - 1e-12 {
        a = 0.0;
    }
    Some(a)
}

/// Major axis of the second moments of area of a footprint (holes subtracted).
///
/// φ = ½·atan2(2·S_xy, S_xx − S_yy) is the angle of the major axis anticlockwise from east,
/// with S the central second moments ∫(x−x̄)², ∫(y−ȳ)², ∫(x−x̄)(y−ȳ) over the area; the
/// azimuth is 90° − φ, normalised to [0, 180).
///
/// # Units
/// Degrees clockwise from north.
///
/// # References
/// insar-methods.md §7.7 \[Rec\]; check: 30 m × 12 m rectangle with long axis at azimuth 60° gives
/// φ = 30°, azimuth 60° \[C\]. Polygon moment formulas: the standard shoelace-type sums
/// (common practice, no single source).
///
/// Degenerate input: zero area or isotropic moments (relative anisotropy below 1e-9) → `None`.
pub fn area_moment_azimuth_deg(footprint: &MultiPolygon<f64>) -> Option<f64> {
    // Shift by a reference vertex to reduce round-off.
    let origin = footprint.centroid()?;
    let (ox, oy) = (origin.x(), origin.y());
    let mut area = 0.0;
    let (mut sx, mut sy) = (0.0, 0.0);
    let (mut ixx, mut iyy, mut ixy) = (0.0, 0.0, 0.0); // ∫x², ∫y², ∫xy
    for poly in footprint {
        let rings = std::iter::once(poly.exterior()).chain(poly.interiors().iter());
        for (k, ring) in rings.enumerate() {
            let pts: Vec<(f64, f64)> = ring.coords().map(|c| (c.x - ox, c.y - oy)).collect();
            let mut a = 0.0;
            let (mut rx, mut ry, mut rxx, mut ryy, mut rxy) = (0.0, 0.0, 0.0, 0.0, 0.0);
            for w in pts.windows(2) {
                let (x0, y0) = w[0];
                let (x1, y1) = w[1];
                let c = x0 * y1 - x1 * y0;
                a += c;
                rx += (x0 + x1) * c;
                ry += (y0 + y1) * c;
                rxx += (x0 * x0 + x0 * x1 + x1 * x1) * c;
                ryy += (y0 * y0 + y0 * y1 + y1 * y1) * c;
                rxy += (x0 * y1 + 2.0 * x0 * y0 + 2.0 * x1 * y1 + x1 * y0) * c;
            }
            // Orientation-independent: exterior adds, holes subtract.
            let orient = if a >= 0.0 { 1.0 } else { -1.0 };
            let sign = if k == 0 { orient } else { -orient };
            area += sign * a / 2.0;
            sx += sign * rx / 6.0;
            sy += sign * ry / 6.0;
            ixx += sign * rxx / 12.0;
            iyy += sign * ryy / 12.0;
            ixy += sign * rxy / 24.0;
        }
    }
    if !(area > 0.0) {
        return None;
    }
    let (cx, cy) = (sx / area, sy / area);
    let s_xx = ixx - area * cx * cx;
    let s_yy = iyy - area * cy * cy;
    let s_xy = ixy - area * cx * cy;
    let aniso = (s_xx - s_yy).hypot(2.0 * s_xy);
    if !(aniso > 1e-9 * (s_xx + s_yy).abs()) {
        return None;
    }
    let phi_deg = 0.5 * (2.0 * s_xy).atan2(s_xx - s_yy).to_degrees();
    normalise_axis_azimuth_deg(90.0 - phi_deg)
}

#[cfg(test)]
mod tests {
    use super::*;
    use geo::{LineString, Polygon};

    fn poly(coords: &[(f64, f64)]) -> Polygon<f64> {
        Polygon::new(LineString::from(coords.to_vec()), vec![])
    }

    /// Rectangle of `len` × `wid` centred at the origin with its long side at `az_deg`.
    fn rotated_rect(len: f64, wid: f64, az_deg: f64) -> Polygon<f64> {
        let a = az_deg.to_radians();
        let (ue, un) = (a.sin(), a.cos()); // long direction
        let (ve, vn) = (un, -ue); // perpendicular
        let c = |s: f64, t: f64| (s * ue + t * ve, s * un + t * vn);
        poly(&[
            c(-len / 2.0, -wid / 2.0),
            c(len / 2.0, -wid / 2.0),
            c(len / 2.0, wid / 2.0),
            c(-len / 2.0, wid / 2.0),
        ])
    }

    #[test]
    fn rectangle_30_by_12_at_azimuth_60() {
        // insar-methods.md §7.7 / §7.11: corners of the 30 m × 12 m rectangle, long axis
        // azimuth 60°, φ = 30° [C]. Tolerance 1e-3° / 1e-3 m (corners quoted to 4 decimals).
        let fp = MultiPolygon(vec![poly(&[
            (-9.9904, -12.6962),
            (15.9904, 2.3038),
            (9.9904, 12.6962),
            (-15.9904, -2.3038),
        ])]);
        let ax = principal_axes(&fp).unwrap();
        assert!((ax.principal.azimuth_deg - 60.0).abs() < 1e-3, "{ax:?}");
        assert!((ax.principal.length_m - 30.0).abs() < 1e-3);
        assert!((ax.secondary.azimuth_deg - 150.0).abs() < 1e-3);
        assert!((ax.secondary.length_m - 12.0).abs() < 1e-3);
        let m = ax.area_moment_azimuth_deg.unwrap();
        assert!((m - 60.0).abs() < 1e-3, "second-moment azimuth {m}");
        // Axis coordinate of point 1 of BLD-1 (§7.11): s = -13.998 m (±1e-3).
        assert!((ax.principal.coordinate_m(-14.12, -3.54) - (-13.998)).abs() < 1e-3);
    }

    #[test]
    fn rotated_footprints_at_many_azimuths() {
        for az in [0.0, 15.0, 45.0, 89.0, 91.0, 135.0, 179.0] {
            let fp = MultiPolygon(vec![rotated_rect(40.0, 10.0, az)]);
            let ax = principal_axes(&fp).unwrap();
            let d = (ax.principal.azimuth_deg - az).abs();
            assert!(d < 1e-6 || (180.0 - d) < 1e-6, "az {az}: {ax:?}");
            assert!((ax.principal.length_m - 40.0).abs() < 1e-6);
            assert!((ax.secondary.length_m - 10.0).abs() < 1e-6);
        }
    }

    #[test]
    fn l_shape_axes_follow_the_walls() {
        // L-shape: 30 m east-west arm (10 m deep) and a 20 m north arm, walls aligned with
        // east/north. Hand-checked: the axis-aligned 30 × 30 box (900 m²) beats the rectangle on
        // the diagonal hull edge (42.4 × 28.3 = 1200 m²), so the axes stay on the walls.
        let fp = MultiPolygon(vec![poly(&[
            (0.0, 0.0),
            (30.0, 0.0),
            (30.0, 10.0),
            (10.0, 10.0),
            (10.0, 30.0),
            (0.0, 30.0),
        ])]);
        let ax = principal_axes(&fp).unwrap();
        // Square bounding box: tie broken to the smaller azimuth (0°, north-south).
        assert!(ax.principal.azimuth_deg.abs() < 1e-9, "{ax:?}");
        assert!((ax.secondary.azimuth_deg - 90.0).abs() < 1e-9);
        assert!((ax.principal.length_m - 30.0).abs() < 1e-9);
        assert!((ax.secondary.length_m - 30.0).abs() < 1e-9);
        // Second moments of a symmetric L point along the diagonal (135°: NW-SE line through
        // the arms' ends), which is why they are not used for the axes.
        let m = ax.area_moment_azimuth_deg.unwrap();
        assert!((m - 135.0).abs() < 1e-6, "moment azimuth {m}");
        // Area: 30·10 + 10·20 = 500 m².
        assert!((ax.footprint_area_m2 - 500.0).abs() < 1e-9);
    }

    #[test]
    fn rotated_l_shape_with_long_arm() {
        // L with a 40 m long arm and a 15 m short arm, rotated to azimuth 30°.
        let a = 30.0_f64.to_radians();
        let (ue, un) = (a.sin(), a.cos());
        let (ve, vn) = (un, -ue);
        let c = |s: f64, t: f64| (s * ue + t * ve, s * un + t * vn);
        let fp = MultiPolygon(vec![poly(&[
            c(0.0, 0.0),
            c(40.0, 0.0),
            c(40.0, 8.0),
            c(8.0, 8.0),
            c(8.0, 15.0),
            c(0.0, 15.0),
        ])]);
        let ax = principal_axes(&fp).unwrap();
        assert!((ax.principal.azimuth_deg - 30.0).abs() < 1e-6, "{ax:?}");
        assert!((ax.principal.length_m - 40.0).abs() < 1e-6);
        assert!((ax.secondary.length_m - 15.0).abs() < 1e-6);
    }

    #[test]
    fn multipolygon_uses_all_parts() {
        // Two 10 × 8 blocks 30 m apart along a north-east line (az 45°): the pair spans 50 m.
        let b1 = rotated_rect(10.0, 8.0, 45.0);
        let shift = 20.0 / 2.0_f64.sqrt();
        let b2 = Polygon::new(
            LineString::from(
                b1.exterior()
                    .coords()
                    .map(|c| (c.x + shift * 2.0, c.y + shift * 2.0))
                    .collect::<Vec<_>>(),
            ),
            vec![],
        );
        let fp = MultiPolygon(vec![b1, b2]);
        let ax = principal_axes(&fp).unwrap();
        assert!((ax.principal.azimuth_deg - 45.0).abs() < 1e-6, "{ax:?}");
        // 10 m block + 40 m offset between centres → 50 m.
        assert!((ax.principal.length_m - 50.0).abs() < 1e-6);
        assert!((ax.secondary.length_m - 8.0).abs() < 1e-6);
    }

    #[test]
    fn degenerate_and_empty_footprints_are_errors() {
        assert_eq!(principal_axes(&MultiPolygon(vec![])), Err(AxesError::Empty));
        let line = MultiPolygon(vec![poly(&[(0.0, 0.0), (10.0, 0.0), (20.0, 0.0)])]);
        assert!(matches!(
            principal_axes(&line),
            Err(AxesError::Degenerate { .. })
        ));
        let nan = MultiPolygon(vec![poly(&[(0.0, 0.0), (f64::NAN, 0.0), (1.0, 1.0)])]);
        assert_eq!(principal_axes(&nan), Err(AxesError::NonFinite));
    }
}
