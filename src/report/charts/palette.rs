//! Colour scales of the report charts, defined in CIELAB and converted to opaque sRGB.
//!
//! Owns: the diverging velocity scale, the sequential damage-category ramp and the
//! Lab ↔ sRGB conversion they are built with. Does not own: where the colours are used.
//!
//! Design (our own palettes, not copied from any product):
//! - **Velocity (diverging, blue–white–orange).** Negative vertical velocity (subsidence) runs
//!   from near-white to a dark orange, positive (uplift) to a dark blue. Both arms are straight
//!   lines in CIELAB from L* = 97 at zero to L* = 48 at the limit, so lightness changes linearly
//!   with |v| (perceptually uniform steps) and equally on both sides. Blue and orange differ
//!   along the blue–yellow (b*) axis, which protanopes and deuteranopes still perceive, so the
//!   sign stays readable under the common colour-vision deficiencies; the lightness ramp
//!   carries the magnitude even in greyscale.
//! - **Damage categories (sequential).** Pale yellow (0) to dark red-brown (4–5), with L*
//!   falling by about 15 per category, so the order reads from lightness alone (greyscale and
//!   CVD safe). "Insufficient data" is not on this ramp: it is drawn white with grey hatching.
//!
//! Conversion: CIE L*a*b* (D65 white) → XYZ → linear sRGB (IEC 61966-2-1 matrix) → gamma;
//! out-of-gamut channels are clipped.

use plotters::style::RGBColor;

/// A CIELAB colour (D65).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Lab {
    /// Lightness L*, 0–100.
    pub l: f64,
    /// Green–red a*.
    pub a: f64,
    /// Blue–yellow b*.
    pub b: f64,
}

const WHITE_D65: [f64; 3] = [0.95047, 1.0, 1.08883];

impl Lab {
    /// Linear interpolation in Lab, `t` in [0, 1].
    pub fn mix(self, other: Lab, t: f64) -> Lab {
        let t = t.clamp(0.0, 1.0);
        Lab {
            l: self.l + (other.l - self.l) * t,
            a: self.a + (other.a - self.a) * t,
            b: self.b + (other.b - self.b) * t,
        }
    }

    /// Converts to 8-bit sRGB, clipping out-of-gamut channels.
    pub fn to_rgb(self) -> RGBColor {
        let fy = (self.l + 16.0) / 116.0;
        let fx = fy + self.a / 500.0;
        let fz = fy - self.b / 200.0;
        let finv = |t: f64| {
            const D: f64 = 6.0 / 29.0;
            if t > D {
                t * t * t
            } else {
                3.0 * D * D * (t - 4.0 / 29.0)
            }
        };
        let (x, y, z) = (
            WHITE_D65[0] * finv(fx),
            WHITE_D65[1] * finv(fy),
            WHITE_D65[2] * finv(fz),
        );
        let r = 3.240_454_2 * x - 1.537_138_5 * y - 0.498_531_4 * z;
        let g = -0.969_266_0 * x + 1.876_010_8 * y + 0.041_556_0 * z;
        let b = 0.055_643_4 * x - 0.204_025_9 * y + 1.057_225_2 * z;
        let gamma = |c: f64| {
            let c = c.clamp(0.0, 1.0);
            let v = if c <= 0.003_130_8 {
                12.92 * c
            } else {
                1.055 * c.powf(1.0 / 2.4) - 0.055
            };
            (v * 255.0).round().clamp(0.0, 255.0) as u8
        };
        RGBColor(gamma(r), gamma(g), gamma(b))
    }

    /// Converts 8-bit sRGB to Lab (used to check the palettes).
    pub fn from_rgb(c: RGBColor) -> Lab {
        let lin = |v: u8| {
            let v = f64::from(v) / 255.0;
            if v <= 0.040_45 {
                v / 12.92
            } else {
                ((v + 0.055) / 1.055).powf(2.4)
            }
        };
        let (r, g, b) = (lin(c.0), lin(c.1), lin(c.2));
        let x = 0.412_456_4 * r + 0.357_576_1 * g + 0.180_437_5 * b;
        let y = 0.212_672_9 * r + 0.715_152_2 * g + 0.072_175_0 * b;
        let z = 0.019_333_9 * r + 0.119_192_0 * g + 0.950_304_1 * b;
        let f = |t: f64| {
            const D: f64 = 6.0 / 29.0;
            if t > D * D * D {
                t.cbrt()
            } else {
                t / (3.0 * D * D) + 4.0 / 29.0
            }
        };
        let (fx, fy, fz) = (
            f(x / WHITE_D65[0]),
            f(y / WHITE_D65[1]),
            f(z / WHITE_D65[2]),
        );
        Lab {
            l: 116.0 * fy - 16.0,
            a: 500.0 * (fx - fy),
            b: 200.0 * (fy - fz),
        }
    }
}

/// Zero-velocity colour (near white).
const VEL_MID: Lab = Lab {
    l: 97.0,
    a: 0.0,
    b: 0.0,
};
/// Subsidence end (dark orange).
const VEL_DOWN: Lab = Lab {
    l: 48.0,
    a: 30.0,
    b: 56.0,
};
/// Uplift end (dark blue).
const VEL_UP: Lab = Lab {
    l: 48.0,
    a: 4.0,
    b: -46.0,
};

/// Colour of a vertical velocity on the diverging scale clipped at ±`limit_mm_per_yr`.
///
/// # Units
/// mm/yr, + up (uplift blue, subsidence orange). A non-finite velocity or a non-positive limit
/// gives mid grey, so bad data never looks like "no movement" white.
pub fn velocity_color(velocity_mm_per_yr: f64, limit_mm_per_yr: f64) -> RGBColor {
    if !(velocity_mm_per_yr.is_finite() && limit_mm_per_yr.is_finite() && limit_mm_per_yr > 0.0) {
        return super::GREY;
    }
    let t = (velocity_mm_per_yr / limit_mm_per_yr).clamp(-1.0, 1.0);
    if t < 0.0 {
        VEL_MID.mix(VEL_DOWN, -t).to_rgb()
    } else {
        VEL_MID.mix(VEL_UP, t).to_rgb()
    }
}

/// Lab anchors of the category ramp, index 0 to 4 ("4–5").
const CATEGORY_LAB: [Lab; 5] = [
    Lab {
        l: 95.0,
        a: -3.0,
        b: 30.0,
    },
    Lab {
        l: 84.0,
        a: 8.0,
        b: 45.0,
    },
    Lab {
        l: 69.0,
        a: 26.0,
        b: 55.0,
    },
    Lab {
        l: 53.0,
        a: 44.0,
        b: 44.0,
    },
    Lab {
        l: 35.0,
        a: 40.0,
        b: 14.0,
    },
];

/// Fill colour of a damage category (index 0–4; 5 is shown as 4).
pub fn category_color(index: u8) -> RGBColor {
    CATEGORY_LAB[usize::from(index.min(4))].to_rgb()
}

/// Hex text of a colour, `#rrggbb` (for the template legend).
pub fn hex(c: RGBColor) -> String {
    format!("#{:02x}{:02x}{:02x}", c.0, c.1, c.2)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lab_round_trip_of_reference_colours() {
        // sRGB white is L* = 100, black 0; mid grey 119 is L* ≈ 50 (common practice check value)
        assert!((Lab::from_rgb(RGBColor(255, 255, 255)).l - 100.0).abs() < 0.01);
        assert!(Lab::from_rgb(RGBColor(0, 0, 0)).l.abs() < 0.01);
        assert!((Lab::from_rgb(RGBColor(119, 119, 119)).l - 50.0).abs() < 0.5);
        for lab in CATEGORY_LAB
            .iter()
            .chain([VEL_MID, VEL_DOWN, VEL_UP].iter())
        {
            let back = Lab::from_rgb(lab.to_rgb());
            // 8-bit quantisation only: anchors are inside the sRGB gamut.
            assert!((back.l - lab.l).abs() < 1.0, "{lab:?} -> {back:?}");
            assert!(
                (back.a - lab.a).abs() < 2.0 && (back.b - lab.b).abs() < 2.0,
                "{lab:?} -> {back:?}"
            );
        }
    }

    #[test]
    fn velocity_scale_is_symmetric_in_lightness_and_monotonic() {
        let l = |v: f64| Lab::from_rgb(velocity_color(v, 10.0)).l;
        let mut last = l(0.0);
        for step in 1..=10 {
            let v = f64::from(step);
            let (down, up) = (l(-v), l(v));
            assert!((down - up).abs() < 1.5, "asymmetric at {v}: {down} vs {up}");
            assert!(down < last, "lightness not falling at {v}");
            last = down;
        }
        // Sign is carried by b* (blue–yellow), visible to protan/deutan observers.
        assert!(Lab::from_rgb(velocity_color(-10.0, 10.0)).b > 40.0);
        assert!(Lab::from_rgb(velocity_color(10.0, 10.0)).b < -35.0);
        assert_eq!(velocity_color(f64::NAN, 10.0), crate::report::charts::GREY);
        assert_eq!(velocity_color(50.0, 10.0), velocity_color(10.0, 10.0));
    }

    #[test]
    fn category_ramp_darkens_monotonically() {
        let ls: Vec<f64> = (0..=4)
            .map(|i| Lab::from_rgb(category_color(i)).l)
            .collect();
        for w in ls.windows(2) {
            assert!(w[0] - w[1] > 10.0, "{ls:?}");
        }
        assert_eq!(category_color(5), category_color(4));
    }
}
