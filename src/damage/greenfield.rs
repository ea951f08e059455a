//! Greenfield ground-movement shapes for screening near planned works: the Peck (1969) Gaussian
//! tunnel trough with the O'Reilly & New (1982) width and horizontal movements, and the
//! Clough & O'Rourke (1990) excavation settlement envelopes.
//!
//! Owns pure functions of position only: trough width i, S_max from volume loss, settlement,
//! slope, curvature, horizontal displacement and strain, their maxima, the continuous relative
//! deflection of a building part ([`GaussianTrough::relative_deflection`]), and the envelope
//! shapes ([`clough_orourke_ratio`]). It does not split buildings, apply soil–structure
//! modification factors or classify (callers feed the results to [`super::assess`]).
//!
//! Sign conventions (damage-relations.md §0.2): settlement + downward; x horizontal distance from
//! the tunnel axis; horizontal displacement u + in the +x direction (the movement is towards the
//! axis, so u < 0 for x > 0); horizontal strain + extension. Internal lengths in metres.

use serde::{Deserialize, Serialize};

use super::{DamageError, Mode, require_finite, require_non_negative, require_positive};

/// √(2π), the Gaussian area factor V_s = √(2π)·i·S_max.
const SQRT_TWO_PI: f64 = 2.506_628_274_631_000_7;

/// Trough width parameter `i = K·z0`.
///
/// # Units
/// `k` dimensionless (≈ 0.5 clays, 0.25–0.35 granular, from memory \[M\]); `z0_m` depth of the
/// tunnel axis, m; returns i in m.
///
/// # References
/// O'Reilly, M.P. & New, B.M. (1982), Settlements above tunnels in the United Kingdom \[M\]
/// (damage-relations.md §7.1, eq. 7.5).
///
/// # Examples
/// ```
/// // damage-relations.md §8.8 G2: K 0.35, z0 15 m → i 5.25 m.
/// let i = plinth::damage::greenfield::trough_width_m(0.35, 15.0).unwrap();
/// assert!((i - 5.25).abs() < 1e-12);
/// ```
///
/// K or z0 ≤ 0 or non-finite → [`DamageError::InvalidInput`].
pub fn trough_width_m(k: f64, z0_m: f64) -> Result<f64, DamageError> {
    Ok(require_positive("k", k)? * require_positive("z0_m", z0_m)?)
}

/// O'Reilly & New (1982) regression for cohesive soils: `i = 0.43·z0 + 1.1` (m), stated for
/// 3 ≤ z0 ≤ 34 m. **From memory** \[M\]. Outside that range the value is still returned; the caller
/// should flag the extrapolation.
///
/// # Examples
/// ```
/// // damage-relations.md §8.8: z0 = 20 m cohesive → i = 9.70 m.
/// let i = plinth::damage::greenfield::o_reilly_new_width_cohesive_m(20.0).unwrap();
/// assert!((i - 9.70).abs() < 1e-12);
/// ```
///
/// z0 ≤ 0 or non-finite → [`DamageError::InvalidInput`].
pub fn o_reilly_new_width_cohesive_m(z0_m: f64) -> Result<f64, DamageError> {
    Ok(0.43 * require_positive("z0_m", z0_m)? + 1.1)
}

/// O'Reilly & New (1982) regression for granular soils: `i = 0.28·z0 − 0.12` (m), stated for
/// 6 ≤ z0 ≤ 10 m. **From memory** \[M\]. z0 = 8 m gives 2.12 m (damage-relations.md §8.8).
///
/// z0 ≤ 0, non-finite, or a non-positive result → [`DamageError::InvalidInput`].
pub fn o_reilly_new_width_granular_m(z0_m: f64) -> Result<f64, DamageError> {
    let i = 0.28 * require_positive("z0_m", z0_m)? - 0.12;
    if i > 0.0 {
        Ok(i)
    } else {
        Err(DamageError::InvalidInput {
            quantity: "z0_m",
            value: z0_m,
            reason: "granular regression gives a non-positive trough width",
        })
    }
}

/// Subsurface trough width parameter of Mair, Taylor & Bracegirdle (1993):
/// `K(z) = [0.175 + 0.325·(1 − z/z0)] / (1 − z/z0)`, with i(z) = K(z)·(z0 − z). **From memory**
/// \[M\]. K(0) = 0.5.
///
/// # Units
/// z (depth below surface) and z0 in m; K dimensionless.
///
/// # Examples
/// ```
/// // damage-relations.md §8.8: z0 = 20, z = 5 → K = 0.55833.
/// let k = plinth::damage::greenfield::mair_subsurface_k(5.0, 20.0).unwrap();
/// assert!((k - 0.558333).abs() < 1e-6);
/// ```
///
/// z < 0, z ≥ z0, z0 ≤ 0 or non-finite → [`DamageError::InvalidInput`].
pub fn mair_subsurface_k(z_m: f64, z0_m: f64) -> Result<f64, DamageError> {
    let z = require_non_negative("z_m", z_m)?;
    let z0 = require_positive("z0_m", z0_m)?;
    if z >= z0 {
        return Err(DamageError::InvalidInput {
            quantity: "z_m",
            value: z,
            reason: "depth must be above the tunnel axis (z < z0)",
        });
    }
    let f = 1.0 - z / z0;
    Ok((0.175 + 0.325 * f) / f)
}

/// Maximum settlement from volume loss: `S_max = V_L·π·D² / (4·√(2π)·i) ≈ 0.31333·V_L·D²/i`.
///
/// # Units
/// `volume_loss_fraction`: V_L as a **fraction** (1 % = 0.01); `diameter_m`, `i_m` in m; returns
/// S_max in m.
///
/// # References
/// Peck (1969); O'Reilly & New (1982) \[M; R for the 0.313 coefficient\]; damage-relations.md §7.1
/// eq. (7.4) \[D\].
///
/// # Examples
/// ```
/// // damage-relations.md §8.8 G1: V_L 1 %, D 6 m, i 10 m → S_max 11.2798 mm.
/// let s = plinth::damage::greenfield::s_max_from_volume_loss_m(0.01, 6.0, 10.0).unwrap();
/// assert!((s * 1000.0 - 11.2798).abs() < 1e-4);
/// ```
///
/// V_L < 0, D or i ≤ 0, or non-finite → [`DamageError::InvalidInput`].
pub fn s_max_from_volume_loss_m(
    volume_loss_fraction: f64,
    diameter_m: f64,
    i_m: f64,
) -> Result<f64, DamageError> {
    let vl = require_non_negative("volume_loss_fraction", volume_loss_fraction)?;
    let d = require_positive("diameter_m", diameter_m)?;
    let i = require_positive("i_m", i_m)?;
    Ok(vl * std::f64::consts::PI * d * d / (4.0 * SQRT_TWO_PI * i))
}

/// Relative deflection of a part of a trough, from the continuous profile.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PartDeflection {
    /// Part start and end, m.
    pub start_m: f64,
    /// Part end, m.
    pub end_m: f64,
    /// The larger of the sagging and hogging offsets decides the mode.
    pub mode: Mode,
    /// Δ, m (≥ 0): maximum offset from the chord in the mode's direction.
    pub delta_m: f64,
    /// Where Δ occurs, m.
    pub at_x_m: f64,
    /// Δ/L (≥ 0).
    pub deflection_ratio: f64,
    /// Average horizontal strain (u(b) − u(a))/L, signed (+ extension), before any clamp.
    pub horizontal_strain: f64,
}

/// Peck (1969) Gaussian settlement trough transverse to a tunnel: `s(x) = S_max·exp(−x²/(2i²))`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct GaussianTrough {
    /// Maximum settlement S_max above the axis, m (+ down).
    pub s_max_m: f64,
    /// Trough width parameter i (distance to the inflection point), m.
    pub i_m: f64,
    /// Depth of the tunnel axis z0, m (used for horizontal movements).
    pub z0_m: f64,
}

impl GaussianTrough {
    /// A trough from S_max, i and z0.
    ///
    /// S_max < 0, i or z0 ≤ 0, or non-finite → [`DamageError::InvalidInput`].
    pub fn new(s_max_m: f64, i_m: f64, z0_m: f64) -> Result<GaussianTrough, DamageError> {
        Ok(GaussianTrough {
            s_max_m: require_non_negative("s_max_m", s_max_m)?,
            i_m: require_positive("i_m", i_m)?,
            z0_m: require_positive("z0_m", z0_m)?,
        })
    }

    /// A trough from tunnel diameter, axis depth, K and volume loss (fraction), with i = K·z0
    /// and S_max from eq. (7.4).
    ///
    /// # Examples
    /// ```
    /// use plinth::damage::greenfield::GaussianTrough;
    /// // damage-relations.md §8.8 G2: D 8, z0 15, K 0.35, V_L 0.5 % → S_max 19.0981 mm.
    /// let t = GaussianTrough::from_tunnel(8.0, 15.0, 0.35, 0.005).unwrap();
    /// assert!((t.s_max_m * 1000.0 - 19.0981).abs() < 1e-4);
    /// ```
    pub fn from_tunnel(
        diameter_m: f64,
        z0_m: f64,
        k: f64,
        volume_loss_fraction: f64,
    ) -> Result<GaussianTrough, DamageError> {
        let i = trough_width_m(k, z0_m)?;
        let s_max = s_max_from_volume_loss_m(volume_loss_fraction, diameter_m, i)?;
        GaussianTrough::new(s_max, i, z0_m)
    }

    /// Settlement s(x), m (+ down). Eq. (7.1).
    pub fn settlement_m(&self, x_m: f64) -> f64 {
        self.s_max_m * (-(x_m * x_m) / (2.0 * self.i_m * self.i_m)).exp()
    }

    /// Slope ds/dx = −(x/i²)·s(x), dimensionless (+ where settlement increases with x).
    pub fn slope(&self, x_m: f64) -> f64 {
        -(x_m / (self.i_m * self.i_m)) * self.settlement_m(x_m)
    }

    /// Curvature d²s/dx² = (s/i²)(x²/i² − 1), 1/m: < 0 sagging (|x| < i), > 0 hogging.
    pub fn curvature_per_m(&self, x_m: f64) -> f64 {
        let i2 = self.i_m * self.i_m;
        self.settlement_m(x_m) / i2 * (x_m * x_m / i2 - 1.0)
    }

    /// Horizontal displacement u(x) = −(x/z0)·s(x), m, + in +x (movement towards the axis;
    /// O'Reilly & New 1982 \[M\]).
    pub fn horizontal_displacement_m(&self, x_m: f64) -> f64 {
        -(x_m / self.z0_m) * self.settlement_m(x_m)
    }

    /// Horizontal strain ε_h(x) = du/dx = (s/z0)(x²/i² − 1), absolute, + extension.
    pub fn horizontal_strain(&self, x_m: f64) -> f64 {
        let i2 = self.i_m * self.i_m;
        self.settlement_m(x_m) / self.z0_m * (x_m * x_m / i2 - 1.0)
    }

    /// Mode of the ground at x: sagging for |x| < i, hogging otherwise (inflection counted as
    /// hogging; choice, the curvature is zero there).
    pub fn mode_at(&self, x_m: f64) -> Mode {
        if x_m.abs() < self.i_m {
            Mode::Sagging
        } else {
            Mode::Hogging
        }
    }

    /// Trough volume per metre of tunnel V_s = √(2π)·i·S_max, m³/m. Eq. (7.2).
    pub fn volume_m3_per_m(&self) -> f64 {
        SQRT_TWO_PI * self.i_m * self.s_max_m
    }

    /// Maximum |slope| = S_max·e^(−1/2)/i, at |x| = i.
    pub fn max_slope(&self) -> f64 {
        self.s_max_m * (-0.5f64).exp() / self.i_m
    }

    /// Maximum tensile horizontal strain 2e^(−3/2)·S_max/z0, at |x| = √3·i.
    pub fn max_tensile_strain(&self) -> f64 {
        2.0 * (-1.5f64).exp() * self.s_max_m / self.z0_m
    }

    /// Maximum compressive horizontal strain −S_max/z0 (signed, ≤ 0), at x = 0.
    pub fn max_compressive_strain(&self) -> f64 {
        -self.s_max_m / self.z0_m
    }

    /// Continuous relative deflection of the part \[start, end\] (damage-relations.md §1.2 step 6
    /// applied to the exact profile, §7.3 step 3): offset d(x) = s(x) − chord(x); sagging
    /// Δ = max d, hogging Δ = max(−d); the larger sets the mode. Found by dense sampling
    /// (20 001 points) refined by golden-section search around the best sample.
    ///
    /// Also returns the part's average horizontal strain (u(end) − u(start))/L, signed.
    ///
    /// # Examples
    /// ```
    /// use plinth::damage::{Mode, greenfield::GaussianTrough};
    /// // damage-relations.md §8.1-C: S_max 20 mm, i 10 m; part [0, 10] sagging, Δ 1.6178 mm at x 4.319.
    /// let t = GaussianTrough::new(0.020, 10.0, 20.0).unwrap();
    /// let p = t.relative_deflection(0.0, 10.0).unwrap();
    /// assert_eq!(p.mode, Mode::Sagging);
    /// assert!((p.delta_m * 1000.0 - 1.6178).abs() < 1e-4);
    /// ```
    ///
    /// end ≤ start or non-finite → [`DamageError::InvalidInput`].
    pub fn relative_deflection(
        &self,
        start_m: f64,
        end_m: f64,
    ) -> Result<PartDeflection, DamageError> {
        let a = require_finite("start_m", start_m)?;
        let b = require_finite("end_m", end_m)?;
        if b <= a {
            return Err(DamageError::InvalidInput {
                quantity: "end_m",
                value: b,
                reason: "part end must be greater than its start",
            });
        }
        let length = b - a;
        let (sa, sb) = (self.settlement_m(a), self.settlement_m(b));
        let offset = |x: f64| self.settlement_m(x) - (sa + (sb - sa) * (x - a) / length);
        let sag = maximise(&offset, a, b);
        let hog = maximise(&|x: f64| -offset(x), a, b);
        let (mode, (at_x, delta)) = if sag.1 >= hog.1 {
            (Mode::Sagging, sag)
        } else {
            (Mode::Hogging, hog)
        };
        let delta = delta.max(0.0);
        Ok(PartDeflection {
            start_m: a,
            end_m: b,
            mode,
            delta_m: delta,
            at_x_m: at_x,
            deflection_ratio: delta / length,
            horizontal_strain: (self.horizontal_displacement_m(b)
                - self.horizontal_displacement_m(a))
                / length,
        })
    }
}

/// Maximise a smooth function on \[a, b\]: dense sampling then golden-section refinement in the
/// bracket around the best sample. Returns (x, f(x)). Shared with the works screening.
pub(crate) fn maximise(f: &dyn Fn(f64) -> f64, a: f64, b: f64) -> (f64, f64) {
    const N: usize = 20_000;
    let step = (b - a) / N as f64;
    let mut best_k = 0usize;
    let mut best = f(a);
    for k in 1..=N {
        let v = f(a + step * k as f64);
        if v > best {
            best = v;
            best_k = k;
        }
    }
    let mut lo = a + step * best_k.saturating_sub(1) as f64;
    let mut hi = (a + step * (best_k + 1) as f64).min(b);
    let g = (5f64.sqrt() - 1.0) / 2.0;
    for _ in 0..60 {
        let x1 = hi - g * (hi - lo);
        let x2 = lo + g * (hi - lo);
        if f(x1) >= f(x2) {
            hi = x2;
        } else {
            lo = x1;
        }
    }
    let x = 0.5 * (lo + hi);
    let v = f(x);
    if v >= best {
        (x, v)
    } else {
        (a + step * best_k as f64, best)
    }
}

/// Soil class of the Clough & O'Rourke (1990) envelopes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum ExcavationSoil {
    /// Sands: triangle to 2·H_e.
    Sand,
    /// Stiff to very hard clays: triangle to 3·H_e.
    StiffClay,
    /// Soft to medium clays: trapezoid, flat to 0.75·H_e, zero at 2·H_e.
    SoftClay,
}

/// Clough & O'Rourke (1990) settlement envelope δv/δvm at distance d behind an excavation wall.
///
/// - sands: 1 − d/(2H_e) for 0 ≤ d ≤ 2H_e;
/// - stiff to very hard clays: 1 − d/(3H_e) for 0 ≤ d ≤ 3H_e;
/// - soft to medium clays: 1 for d ≤ 0.75H_e, (2H_e − d)/(1.25H_e) to 2H_e;
/// - 0 beyond.
///
/// Envelope shapes **from memory** \[M\]; δvm is a user input. No horizontal movements are given by
/// these envelopes.
///
/// # Units
/// d and H_e in m; result dimensionless (0..=1).
///
/// # References
/// Clough, G.W. & O'Rourke, T.D. (1990), Construction induced movements of in situ walls, ASCE
/// GSP 25 \[M\] (damage-relations.md §7.4).
///
/// # Examples
/// ```
/// use plinth::damage::greenfield::{clough_orourke_ratio, ExcavationSoil};
/// // damage-relations.md §8.8: H_e 10 m, soft clay at d 10 m → 0.8.
/// let r = clough_orourke_ratio(ExcavationSoil::SoftClay, 10.0, 10.0).unwrap();
/// assert!((r - 0.8).abs() < 1e-12);
/// ```
///
/// d < 0, H_e ≤ 0 or non-finite → [`DamageError::InvalidInput`].
pub fn clough_orourke_ratio(
    soil: ExcavationSoil,
    distance_m: f64,
    excavation_depth_m: f64,
) -> Result<f64, DamageError> {
    let d = require_non_negative("distance_m", distance_m)?;
    let he = require_positive("excavation_depth_m", excavation_depth_m)?;
    let r = match soil {
        ExcavationSoil::Sand => 1.0 - d / (2.0 * he),
        ExcavationSoil::StiffClay => 1.0 - d / (3.0 * he),
        ExcavationSoil::SoftClay => {
            if d <= 0.75 * he {
                1.0
            } else {
                (2.0 * he - d) / (1.25 * he)
            }
        }
    };
    Ok(r.clamp(0.0, 1.0))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn g1_trough_values() {
        // damage-relations.md §8.8 G1 (derived check values [D]), rel. tol 1e-4.
        let t = GaussianTrough::from_tunnel(6.0, 20.0, 0.5, 0.01).unwrap();
        let close = |a: f64, b: f64| (a - b).abs() <= 1e-4 * b.abs();
        assert!(close(t.i_m, 10.0));
        assert!(close(t.volume_m3_per_m(), 0.28274));
        // V_s two ways: from V_L·πD²/4 as well.
        assert!((t.volume_m3_per_m() - 0.01 * std::f64::consts::PI * 9.0).abs() < 1e-12);
        assert!(close(t.max_slope(), 6.8416e-4));
        assert!(close(t.max_tensile_strain(), 2.5169e-4));
        assert!(close(t.max_compressive_strain(), -5.6399e-4));
        assert!(close(t.settlement_m(20.0) * 1e3, 1.5266));
        assert!(close(t.horizontal_displacement_m(17.321) * 1e3, -2.1797));
        assert!(close(t.horizontal_strain(25.0), 1.3010e-4));
        assert!(close(t.curvature_per_m(0.0), -1.1280e-4));
        assert!(t.horizontal_strain(10.0).abs() < 1e-18);
        assert_eq!(t.mode_at(5.0), Mode::Sagging);
        assert_eq!(t.mode_at(15.0), Mode::Hogging);
    }

    #[test]
    fn continuous_deflection_section_8_1_c() {
        // damage-relations.md §8.1-C continuous values (derived [D]), tol 1e-4 mm.
        let t = GaussianTrough::new(0.020, 10.0, 20.0).unwrap();
        let p = t.relative_deflection(10.0, 30.0).unwrap();
        assert_eq!(p.mode, Mode::Hogging);
        assert!((p.delta_m * 1e3 - 3.4875).abs() < 1e-4);
        assert!((p.at_x_m - 19.347).abs() < 1e-3);
        let full = t.relative_deflection(-10.0, 10.0).unwrap();
        // Δ = S·(1 − e^(−1/2)) = 7.8694 mm exactly at the centre.
        assert!((full.delta_m - 0.020 * (1.0 - (-0.5f64).exp())).abs() < 1e-12);
        assert!(t.relative_deflection(5.0, 5.0).is_err());
    }

    #[test]
    fn clough_orourke_table() {
        // damage-relations.md §8.8 Clough & O'Rourke table (shapes from memory [M]), H_e 10 m.
        let d = [0.0, 5.0, 7.5, 10.0, 15.0, 20.0, 25.0, 30.0];
        let sand = [1.0, 0.75, 0.625, 0.5, 0.25, 0.0, 0.0, 0.0];
        let stiff = [1.0, 0.8333, 0.75, 0.6667, 0.5, 0.3333, 0.1667, 0.0];
        let soft = [1.0, 1.0, 1.0, 0.8, 0.4, 0.0, 0.0, 0.0];
        for k in 0..d.len() {
            let r = |s| clough_orourke_ratio(s, d[k], 10.0).unwrap();
            assert!((r(ExcavationSoil::Sand) - sand[k]).abs() < 5e-5);
            assert!((r(ExcavationSoil::StiffClay) - stiff[k]).abs() < 5e-5);
            assert!((r(ExcavationSoil::SoftClay) - soft[k]).abs() < 5e-5);
        }
        assert!(clough_orourke_ratio(ExcavationSoil::Sand, -1.0, 10.0).is_err());
    }

    #[test]
    fn regressions_and_subsurface() {
        // damage-relations.md §8.8 "other trough checks" (formulas from memory [M]).
        assert!((o_reilly_new_width_granular_m(8.0).unwrap() - 2.12).abs() < 1e-12);
        assert!((mair_subsurface_k(0.0, 20.0).unwrap() - 0.5).abs() < 1e-12);
        assert!((mair_subsurface_k(10.0, 20.0).unwrap() - 0.675).abs() < 1e-12);
        assert!(mair_subsurface_k(20.0, 20.0).is_err());
        assert!(o_reilly_new_width_granular_m(0.2).is_err());
    }
}
