//! Local tangent plane of the synthetic town and the LOS unit vector the generator plants with.
//!
//! Owns the conversion of town-frame metres (x = true east, y = true north, origin at the town
//! origin) to WGS84 longitude/latitude, and the ground-to-satellite unit vector used to project
//! planted motion into LOS. Both are re-implemented here on purpose, independently of
//! `crate::coords` and `crate::series::los`, so that a data set generated with them is a test of
//! those modules rather than a copy of them. It does not parse or write files.

/// WGS84 semi-major axis, m.
const WGS84_A_M: f64 = 6_378_137.0;
/// WGS84 flattening, dimensionless.
const WGS84_F: f64 = 1.0 / 298.257_223_563;

/// Meridian and prime-vertical radii of curvature of the WGS84 ellipsoid at a latitude.
///
/// M(φ) = a(1 − e²)/(1 − e² sin²φ)^(3/2), N(φ) = a/(1 − e² sin²φ)^(1/2), e² = f(2 − f).
///
/// # Units
/// Latitude in degrees; both radii in metres, returned as `(meridian_m, prime_vertical_m)`.
///
/// # References
/// insar-methods.md §8.2 (local tangent plane, computed check values \[C\], check GEO-2).
///
/// # Examples
/// ```
/// // insar-methods.md Appendix A, GEO-2: radii at 52.37°.
/// let (m, n) = plinth::synth::frame::radii_m(52.37);
/// assert!((m - 6_375_551.898).abs() < 1e-3);
/// assert!((n - 6_391_569.660).abs() < 1e-3);
/// ```
pub fn radii_m(lat_deg: f64) -> (f64, f64) {
    let e2 = WGS84_F * (2.0 - WGS84_F);
    let s = lat_deg.to_radians().sin();
    let w = 1.0 - e2 * s * s;
    let meridian_m = WGS84_A_M * (1.0 - e2) / w.powf(1.5);
    let prime_vertical_m = WGS84_A_M / w.sqrt();
    (meridian_m, prime_vertical_m)
}

/// Town-frame origin and the local tangent-plane conversion to longitude/latitude.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct TownFrame {
    /// Longitude of the origin, degrees (WGS84).
    pub origin_lon_deg: f64,
    /// Latitude of the origin, degrees (WGS84).
    pub origin_lat_deg: f64,
}

impl TownFrame {
    /// Longitude/latitude (degrees) of a town-frame position `(east_m, north_m)`.
    ///
    /// λ = λ0 + x/(N(φ0)·cos φ0), φ = φ0 + y/M(φ0) (radians), with the radii at the origin latitude.
    ///
    /// # Units
    /// Metres in, degrees out (`(lon_deg, lat_deg)`).
    ///
    /// # References
    /// insar-methods.md §8.2: radii at the origin latitude err by at most 1.4 mm over 200 m at 52°
    /// and 35 mm over 1 km \[C\]; the synthetic town spans under 1 km, so positions are exact to a few
    /// centimetres, far below the metre-level geolocation of real points (§6.5).
    ///
    /// # Examples
    /// ```
    /// use plinth::synth::frame::TownFrame;
    /// // insar-methods.md §8.2: 111 274.372 m per degree of latitude at 52.37°.
    /// let f = TownFrame { origin_lon_deg: 4.9, origin_lat_deg: 52.37 };
    /// let (lon, lat) = f.to_lon_lat(0.0, 111_274.372);
    /// // (the check values are quoted to 1 mm, i.e. 1e-8°)
    /// assert!((lat - 53.37).abs() < 1e-7 && (lon - 4.9).abs() < 1e-12);
    /// // 68 110.362 m per degree of longitude.
    /// let (lon, _) = f.to_lon_lat(68_110.362, 0.0);
    /// assert!((lon - 5.9).abs() < 1e-7);
    /// ```
    pub fn to_lon_lat(&self, east_m: f64, north_m: f64) -> (f64, f64) {
        let (m, n) = radii_m(self.origin_lat_deg);
        let phi0 = self.origin_lat_deg.to_radians();
        let dlon_rad = east_m / (n * phi0.cos());
        let dlat_rad = north_m / m;
        (
            self.origin_lon_deg + dlon_rad.to_degrees(),
            self.origin_lat_deg + dlat_rad.to_degrees(),
        )
    }
}

/// Ground-to-satellite LOS unit vector `(u_E, u_N, u_U)` of a right-looking sensor.
///
/// u = (−sinθ·cosα, sinθ·sinα, cosθ), θ = incidence, α = heading (flight azimuth clockwise from
/// true north). d_LOS = u·d is positive towards the satellite.
///
/// # Units
/// Degrees in; dimensionless unit vector out.
///
/// # References
/// insar-methods.md §2.1 (derivation \[C\]) and §2.5 / Appendix A LOS-1, LOS-2.
///
/// # Examples
/// ```
/// // insar-methods.md Appendix A, LOS-1: θ = 39°, α = −12° → (−0.6156, −0.1308, 0.7771).
/// let u = plinth::synth::frame::los_unit_enu(39.0, -12.0);
/// assert!((u[0] + 0.6156).abs() < 1e-4 && (u[1] + 0.1308).abs() < 1e-4 && (u[2] - 0.7771).abs() < 1e-4);
/// ```
pub fn los_unit_enu(incidence_deg: f64, heading_deg: f64) -> [f64; 3] {
    let th = incidence_deg.to_radians();
    let al = heading_deg.to_radians();
    [-th.sin() * al.cos(), th.sin() * al.sin(), th.cos()]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn los_descending_check_value() {
        // insar-methods.md Appendix A, LOS-2: θ = 37°, α = 192° → (0.5887, −0.1251, 0.7986).
        let u = los_unit_enu(37.0, 192.0);
        assert!((u[0] - 0.5887).abs() < 1e-4);
        assert!((u[1] + 0.1251).abs() < 1e-4);
        assert!((u[2] - 0.7986).abs() < 1e-4);
    }

    #[test]
    fn radii_reproduce_degree_lengths() {
        // insar-methods.md §8.2: 68 110.362 m per degree of longitude at 52.37° [C].
        let (_, n) = radii_m(52.37);
        let per_deg_lon = n * 52.37_f64.to_radians().cos() * std::f64::consts::PI / 180.0;
        assert!((per_deg_lon - 68_110.362).abs() < 1e-3);
    }
}
