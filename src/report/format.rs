//! Number formatting for reports: values become strings with units and a fixed number of
//! decimals, so the template never formats a float itself (typst's `str(float)` drops
//! trailing zeros and would print `0.880` as `0.88`).
//!
//! Owns: the display conventions (decimals per quantity, `±` uncertainty, `1/n` ratios,
//! `×10⁻³` and `%` scalings). Does not own: unit conversion of the underlying quantities
//! (those arrive in SI / mm as the pipeline computed them) or any rounding of stored results.
//!
//! Choices recorded here:
//! - Negative numbers use the ASCII hyphen-minus (`-3.2`), not U+2212, so values copied out of
//!   a PDF paste into spreadsheets as numbers.
//! - A value that rounds to zero prints without a sign (`0.0`, never `-0.0`).
//! - Non-finite input prints as `n/a`; callers decide whether that means "not computed".

/// Text used for a non-finite number.
pub const NOT_AVAILABLE: &str = "n/a";

/// Formats `value` with exactly `decimals` decimals; `n/a` for NaN or infinite input.
///
/// # Units
/// Unitless: the caller appends the unit.
///
/// # Examples
/// ```
/// use plinth::report::format::fixed;
/// assert_eq!(fixed(0.88, 3), "0.880");
/// assert_eq!(fixed(-0.04, 1), "0.0");
/// assert_eq!(fixed(-3.21, 1), "-3.2");
/// assert_eq!(fixed(f64::NAN, 2), "n/a");
/// ```
pub fn fixed(value: f64, decimals: usize) -> String {
    if !value.is_finite() {
        return NOT_AVAILABLE.to_string();
    }
    let text = format!("{value:.decimals$}");
    // "-0.0", "-0.00", ...: a negative value that rounds to zero prints without sign.
    if text.starts_with('-') && text[1..].chars().all(|c| c == '0' || c == '.') {
        text[1..].to_string()
    } else {
        text
    }
}

/// Formats `value` and appends `unit` after a space (`"12.3 mm"`).
///
/// # Examples
/// ```
/// use plinth::report::format::with_unit;
/// assert_eq!(with_unit(12.345, 1, "mm"), "12.3 mm");
/// ```
pub fn with_unit(value: f64, decimals: usize, unit: &str) -> String {
    let number = fixed(value, decimals);
    if number == NOT_AVAILABLE || unit.is_empty() {
        number
    } else {
        format!("{number} {unit}")
    }
}

/// Formats `value ± uncertainty unit`; without an uncertainty (or a non-finite one) only the
/// value and unit.
///
/// # Examples
/// ```
/// use plinth::report::format::with_uncertainty;
/// assert_eq!(with_uncertainty(-3.21, Some(0.44), 1, "mm/yr"), "-3.2 ± 0.4 mm/yr");
/// assert_eq!(with_uncertainty(-3.21, None, 1, "mm/yr"), "-3.2 mm/yr");
/// ```
pub fn with_uncertainty(
    value: f64,
    uncertainty: Option<f64>,
    decimals: usize,
    unit: &str,
) -> String {
    match uncertainty.filter(|u| u.is_finite()) {
        Some(u) if value.is_finite() => {
            let core = format!("{} ± {}", fixed(value, decimals), fixed(u.abs(), decimals));
            if unit.is_empty() {
                core
            } else {
                format!("{core} {unit}")
            }
        }
        _ => with_unit(value, decimals, unit),
    }
}

/// A small dimensionless ratio (tilt, angular distortion) as `1/n`, with `n` rounded to an
/// integer; `"0"` for an exact zero, `n/a` for non-finite input. The sign is dropped: the
/// direction is reported separately (azimuth, hogging/sagging).
///
/// # Units
/// Input in m/m (radians for small angles).
///
/// # Examples
/// ```
/// use plinth::report::format::one_in;
/// // insar-methods.md §7.11: ω = 1.857e-4 is quoted as 1/5386 (the note used unrounded ω)
/// assert_eq!(one_in(1.0 / 5386.0), "1/5386");
/// assert_eq!(one_in(-0.002), "1/500");
/// ```
pub fn one_in(ratio: f64) -> String {
    if !ratio.is_finite() {
        return NOT_AVAILABLE.to_string();
    }
    if ratio == 0.0 {
        return "0".to_string();
    }
    let n = (1.0 / ratio.abs()).round();
    if n >= 1.0e9 {
        // Practically zero; 1/n with ten digits helps nobody.
        return "< 1/1000000000".to_string();
    }
    format!("1/{n:.0}")
}

/// A dimensionless value scaled by 10³ with the `×10⁻³` suffix (`0.186 ×10⁻³`).
///
/// # Examples
/// ```
/// use plinth::report::format::per_mille;
/// assert_eq!(per_mille(1.857e-4, 3), "0.186 ×10⁻³");
/// ```
pub fn per_mille(value: f64, decimals: usize) -> String {
    with_unit(value * 1.0e3, decimals, "×10⁻³")
}

/// A dimensionless strain as a percentage (`0.012 %`); input is absolute (5e-4 → 0.050 %).
///
/// # Units
/// Input absolute strain (m/m), + tension; output percent.
///
/// # Examples
/// ```
/// use plinth::report::format::percent;
/// // damage-relations.md §9.1: 0.05 % = 5×10⁻⁴
/// assert_eq!(percent(5.0e-4, 3), "0.050 %");
/// ```
pub fn percent(value: f64, decimals: usize) -> String {
    with_unit(value * 100.0, decimals, "%")
}

/// A probability in `[0, 1]` as a whole percentage (`72 %`).
///
/// # Examples
/// ```
/// use plinth::report::format::probability;
/// assert_eq!(probability(0.724), "72 %");
/// ```
pub fn probability(p: f64) -> String {
    with_unit(p * 100.0, 0, "%")
}

/// Collapses every run of whitespace (including newlines) to one space and trims, for
/// single-line fields such as names. Multi-line narrative keeps its line breaks elsewhere.
///
/// # Examples
/// ```
/// use plinth::report::format::one_line;
/// assert_eq!(one_line("Block A\n= Heading "), "Block A = Heading");
/// ```
pub fn one_line(text: &str) -> String {
    text.split_whitespace().collect::<Vec<_>>().join(" ")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fixed_keeps_trailing_zeros() {
        // typst-embedding.md §5.4: str(0.880) would show "0.88"
        assert_eq!(fixed(0.880, 3), "0.880");
        assert_eq!(fixed(1.0, 1), "1.0");
    }

    #[test]
    fn negative_zero_prints_unsigned() {
        assert_eq!(fixed(-0.0, 2), "0.00");
        assert_eq!(fixed(-0.004, 2), "0.00");
        assert_eq!(fixed(-0.006, 2), "-0.01");
    }

    #[test]
    fn non_finite_is_not_available() {
        assert_eq!(with_unit(f64::INFINITY, 1, "mm"), "n/a");
        assert_eq!(with_uncertainty(f64::NAN, Some(1.0), 1, "mm"), "n/a");
        assert_eq!(with_uncertainty(2.0, Some(f64::NAN), 1, "mm"), "2.0 mm");
        assert_eq!(one_in(f64::NAN), "n/a");
    }

    #[test]
    fn one_in_matches_published_ratios() {
        // damage-relations.md §9.1: 1/500 = 2.0e-3
        assert_eq!(one_in(2.0e-3), "1/500");
        // insar-methods.md §7.11: |β|max = 3.372e-4 is quoted as 1/2965
        assert_eq!(one_in(3.372e-4), "1/2966"); // 1/3.372e-4 = 2965.6, the note truncated
        assert_eq!(one_in(0.0), "0");
    }

    #[test]
    fn percent_and_per_mille_scale() {
        // insar-methods.md §7.9 table: ε_max 1.234e-4 = 0.0123 %
        assert_eq!(percent(1.234e-4, 4), "0.0123 %");
        assert_eq!(per_mille(-8.430e-5, 4), "-0.0843 ×10⁻³");
    }
}
