//! Small numerical helpers shared by the series modules: NaN-aware median and quantiles, the
//! median absolute deviation, and the Student-t / Fisher-F tail probabilities (via the regularised
//! incomplete beta function).
//!
//! Owns no published relation of its own; the distribution functions follow the standard
//! definitions (Abramowitz & Stegun 1964, 26.5 and 26.6 \[M\]) evaluated with the Lanczos
//! log-gamma and a modified Lentz continued fraction (Press et al., Numerical Recipes, §6.4 \[M\]).

/// Median of the finite values of `x`; `None` if there are none.
///
/// # Examples
/// ```
/// use plinth::series::stats::median;
/// assert_eq!(median(&[3.0, f64::NAN, 1.0, 2.0]), Some(2.0));
/// assert_eq!(median(&[1.0, 2.0, 3.0, 4.0]), Some(2.5));
/// assert_eq!(median(&[f64::NAN]), None);
/// ```
pub fn median(x: &[f64]) -> Option<f64> {
    quantile(x, 0.5)
}

/// Quantile `q ∈ [0, 1]` of the finite values by linear interpolation between order statistics
/// (position `q·(n−1)`, "type 7"); `None` for no finite values or `q` outside [0, 1].
pub fn quantile(x: &[f64], q: f64) -> Option<f64> {
    if !(0.0..=1.0).contains(&q) {
        return None;
    }
    // Selected among the `total_cmp` order keys of the finite values ([`type7_selected`]).
    let mut keys: Vec<i64> = (x.iter().copied())
        .filter(|v| v.is_finite())
        .map(order_key)
        .collect();
    type7_selected(&mut keys, q)
}

/// [`quantile`] of values already sorted ascending (all finite): type 7, position q·(n−1).
/// `None` for no values or `q` outside [0, 1]. The tests' plain reference.
#[cfg(test)]
pub(crate) fn quantile_sorted(v: &[f64], q: f64) -> Option<f64> {
    let (lo, hi, frac) = type7_position(v.len(), q)?;
    Some(v[lo] + (v[hi] - v[lo]) * frac)
}

/// The type-7 quantile position q·(n−1) of `n` sorted values: the order statistics below and
/// above it (0-based) and the fraction between them. `None` for n = 0 or `q` outside [0, 1].
fn type7_position(n: usize, q: f64) -> Option<(usize, usize, f64)> {
    if n == 0 || !(0.0..=1.0).contains(&q) {
        return None;
    }
    let pos = q * (n - 1) as f64;
    let lo = pos.floor() as usize;
    Some((lo, pos.ceil() as usize, pos - lo as f64))
}

/// The integer whose order is `f64::total_cmp`'s order of the float (the same transform as
/// `total_cmp`; its own inverse).
#[inline]
pub(crate) fn order_key(v: f64) -> i64 {
    let b = v.to_bits() as i64;
    b ^ (((b >> 63) as u64) >> 1) as i64
}

/// The float of an [`order_key`].
#[inline]
pub(crate) fn from_key(k: i64) -> f64 {
    f64::from_bits((k ^ (((k >> 63) as u64) >> 1) as i64) as u64)
}

/// The type-7 quantile of sorted keys (as [`quantile`] of the floats).
pub(crate) fn type7_sorted(keys: &[i64], q: f64) -> Option<f64> {
    let (lo, hi, frac) = type7_position(keys.len(), q)?;
    let (a, b) = (from_key(keys[lo]), from_key(keys[hi]));
    Some(a + (b - a) * frac)
}

/// The type-7 quantile of keys by selection, reordering them: the order statistics at
/// ⌊q·(n−1)⌋ and the next one are found in O(n), not by a full sort, and are the same numbers
/// as after a sort. `None` for no keys or `q` outside [0, 1].
pub(crate) fn type7_selected(keys: &mut [i64], q: f64) -> Option<f64> {
    let (lo, hi, frac) = type7_position(keys.len(), q)?;
    let (_, lo_key, above) = keys.select_nth_unstable(lo);
    let a = from_key(*lo_key);
    let b = if hi > lo {
        above.iter().copied().min().map_or(a, from_key)
    } else {
        a
    };
    Some(a + (b - a) * frac)
}

/// Median absolute deviation `median(|x − median(x)|)` of the finite values (unscaled).
pub fn mad(x: &[f64]) -> Option<f64> {
    let m = median(x)?;
    let dev: Vec<f64> = x
        .iter()
        .filter(|v| v.is_finite())
        .map(|v| (v - m).abs())
        .collect();
    median(&dev)
}

/// Scale factor making the MAD a consistent estimator of σ for Gaussian data.
pub const MAD_TO_SIGMA: f64 = 1.4826;

/// Natural log of the gamma function for `x > 0` (Lanczos, g = 7, 9 terms).
pub fn ln_gamma(x: f64) -> f64 {
    const G: f64 = 7.0;
    const COEF: [f64; 9] = [
        0.999_999_999_999_809_9,
        676.520_368_121_885_1,
        -1_259.139_216_722_402_8,
        771.323_428_777_653_1,
        -176.615_029_162_140_6,
        12.507_343_278_686_905,
        -0.138_571_095_265_720_12,
        9.984_369_578_019_572e-6,
        1.505_632_735_149_311_6e-7,
    ];
    if x < 0.5 {
        // reflection
        let pi = std::f64::consts::PI;
        return (pi / (pi * x).sin()).ln() - ln_gamma(1.0 - x);
    }
    let x = x - 1.0;
    let mut a = COEF[0];
    let t = x + G + 0.5;
    for (i, c) in COEF.iter().enumerate().skip(1) {
        a += c / (x + i as f64);
    }
    0.5 * (2.0 * std::f64::consts::PI).ln() + (x + 0.5) * t.ln() - t + a.ln()
}

/// Continued fraction for the incomplete beta (modified Lentz).
fn beta_cf(a: f64, b: f64, x: f64) -> f64 {
    const TINY: f64 = 1e-300;
    let qab = a + b;
    let qap = a + 1.0;
    let qam = a - 1.0;
    let mut c = 1.0;
    let mut d = 1.0 - qab * x / qap;
    if d.abs() < TINY {
        d = TINY;
    }
    d = 1.0 / d;
    let mut h = d;
    for m in 1..=300 {
        let m = m as f64;
        let m2 = 2.0 * m;
        let aa = m * (b - m) * x / ((qam + m2) * (a + m2));
        d = 1.0 + aa * d;
        if d.abs() < TINY {
            d = TINY;
        }
        c = 1.0 + aa / c;
        if c.abs() < TINY {
            c = TINY;
        }
        d = 1.0 / d;
        h *= d * c;
        let aa = -(a + m) * (qab + m) * x / ((a + m2) * (qap + m2));
        d = 1.0 + aa * d;
        if d.abs() < TINY {
            d = TINY;
        }
        c = 1.0 + aa / c;
        if c.abs() < TINY {
            c = TINY;
        }
        d = 1.0 / d;
        let del = d * c;
        h *= del;
        if (del - 1.0).abs() < 1e-14 {
            break;
        }
    }
    h
}

/// Regularised incomplete beta `I_x(a, b)` for `a, b > 0`, `x ∈ [0, 1]`; NaN otherwise.
pub fn incomplete_beta(a: f64, b: f64, x: f64) -> f64 {
    if !(a > 0.0 && b > 0.0 && (0.0..=1.0).contains(&x)) {
        return f64::NAN;
    }
    if x == 0.0 || x == 1.0 {
        return x;
    }
    let ln_front = ln_gamma(a + b) - ln_gamma(a) - ln_gamma(b) + a * x.ln() + b * (1.0 - x).ln();
    let front = ln_front.exp();
    if x < (a + 1.0) / (a + b + 2.0) {
        front * beta_cf(a, b, x) / a
    } else {
        1.0 - front * beta_cf(b, a, 1.0 - x) / b
    }
}

/// Upper tail `P(F > f)` of Fisher's F with (d1, d2) degrees of freedom; NaN for invalid input.
pub fn f_upper_tail(f: f64, d1: f64, d2: f64) -> f64 {
    if !(f.is_finite() && d1 > 0.0 && d2 > 0.0) {
        return f64::NAN;
    }
    if f <= 0.0 {
        return 1.0;
    }
    incomplete_beta(d2 / 2.0, d1 / 2.0, d2 / (d2 + d1 * f))
}

/// Two-sided `P(|T| > |t|)` of Student's t with ν degrees of freedom; NaN for invalid input.
pub fn t_two_sided(t: f64, nu: f64) -> f64 {
    if !(t.is_finite() && nu > 0.0) {
        return f64::NAN;
    }
    incomplete_beta(nu / 2.0, 0.5, nu / (nu + t * t))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn selected_quantiles_equal_the_sorted_ones() {
        // Plain reference: sort a copy, interpolate between order statistics (type 7).
        let plain = |x: &[f64], q: f64| {
            let mut v = x.to_vec();
            v.sort_by(f64::total_cmp);
            let pos = q * (v.len() - 1) as f64;
            let (lo, hi) = (pos.floor() as usize, pos.ceil() as usize);
            v[lo] + (v[hi] - v[lo]) * (pos - lo as f64)
        };
        let mut state = 12345u64;
        for n in [1usize, 2, 3, 7, 50, 151, 11175] {
            let x: Vec<f64> = (0..n)
                .map(|i| {
                    state = state
                        .wrapping_mul(6364136223846793005)
                        .wrapping_add(1442695040888963407);
                    // Duplicates, signed zeros and a wide range.
                    match i % 7 {
                        0 => 0.0,
                        1 => -0.0,
                        2 => 3.5,
                        _ => ((state >> 11) as f64 / (1u64 << 53) as f64 - 0.5) * 100.0,
                    }
                })
                .collect();
            let keys: Vec<i64> = x.iter().copied().map(order_key).collect();
            let mut sorted = keys.clone();
            sorted.sort_unstable();
            for q in [0.0, 0.05, 0.25, 0.5, 0.75, 0.95, 1.0, 1.0 / 3.0] {
                let mut k = keys.clone();
                let fast = type7_selected(&mut k, q).unwrap();
                assert_eq!(fast.to_bits(), plain(&x, q).to_bits(), "n {n} q {q}");
                assert_eq!(type7_sorted(&sorted, q).unwrap().to_bits(), fast.to_bits());
                assert_eq!(quantile(&x, q).unwrap().to_bits(), fast.to_bits());
            }
        }
        assert_eq!(type7_selected(&mut [], 0.5), None);
        assert_eq!(type7_selected(&mut [order_key(1.0)], 1.5), None);
    }

    /// The integer keys order finite floats as `total_cmp` does (−0 before +0, subnormals,
    /// extremes) and give the floats back bit for bit.
    #[test]
    fn order_keys_follow_total_cmp() {
        let v = [
            -f64::MAX,
            -1.5,
            -f64::MIN_POSITIVE / 4.0,
            -0.0,
            0.0,
            f64::MIN_POSITIVE / 4.0,
            1e-300,
            2.5,
            f64::MAX,
        ];
        for a in v {
            assert_eq!(from_key(order_key(a)).to_bits(), a.to_bits());
            for b in v {
                assert_eq!(order_key(a).cmp(&order_key(b)), a.total_cmp(&b), "{a} {b}");
            }
        }
    }

    #[test]
    fn quantiles_and_mad() {
        let x = [1.0, 2.0, 3.0, 4.0, 5.0];
        assert_eq!(quantile(&x, 0.25), Some(2.0));
        assert_eq!(quantile(&x, 0.75), Some(4.0));
        assert_eq!(quantile(&[], 0.5), None);
        // insar-methods.md §7.3 list [C]: med = −3.05, MAD = 0.25
        let l = [-3.1, -2.8, -3.4, -2.9, -3.0, -7.9, -3.3, -2.6, -3.2, 1.5];
        assert!((median(&l).unwrap() + 3.05).abs() < 1e-12);
        assert!((mad(&l).unwrap() - 0.25).abs() < 1e-12);
    }

    /// Standard statistical table values (common knowledge; tolerance 2e-3 on p).
    #[test]
    fn distribution_tails() {
        assert!((ln_gamma(5.0) - 24f64.ln()).abs() < 1e-12);
        assert!((ln_gamma(0.5) - std::f64::consts::PI.sqrt().ln()).abs() < 1e-12);
        // t(10) two-sided 5 % critical value 2.228
        assert!((t_two_sided(2.228, 10.0) - 0.05).abs() < 1e-3);
        // F(1, ∞≈1e6) 5 % critical value 3.841
        assert!((f_upper_tail(3.841, 1.0, 1e6) - 0.05).abs() < 1e-3);
        // F(2, 20) 5 % critical value 3.49
        assert!((f_upper_tail(3.49, 2.0, 20.0) - 0.05).abs() < 2e-3);
        // t(1) is Cauchy: P(|T| > 1) = 0.5 exactly
        assert!((t_two_sided(1.0, 1.0) - 0.5).abs() < 1e-10);
        assert!(f_upper_tail(f64::NAN, 1.0, 2.0).is_nan());
    }
}
