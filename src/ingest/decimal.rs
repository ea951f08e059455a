//! Fast exact parsing of plain decimal numbers (`-12.34`), the form nearly every points file uses.
//!
//! Owns the grammar of plain numbers, [`scan`], which the points reader's fast path reads every
//! epoch field with, and [`parse_plain`], used before the general parser (`fast-float2`): it
//! accepts only `[+-]?digits[.digits]` with at most 15 significant digits and
//! returns `None` for anything else (exponents, whitespace, `NaN`, more digits), which the caller
//! then hands to the general parser. Within that form the result is the correctly rounded `f64`:
//! the digits form an integer m < 10¹⁵ < 2⁵³ and the value is m / 10ᵏ with k ≤ 15, a quotient of
//! two exactly representable numbers, which IEEE 754 division rounds correctly (Clinger 1990, "How
//! to read floating point numbers accurately", the fast path). Tests compare it bit for bit with
//! `fast-float2` (a general-purpose reference library).

/// Powers of ten exactly representable in `f64` (10⁰ … 10¹⁵).
const POW10: [f64; 16] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15,
];

/// 10ᵏ, exact (k ≤ 15).
#[inline]
pub fn pow10(k: u32) -> f64 {
    POW10[k as usize]
}

/// Parse `[+-]?digits[.digits]` (at least one digit, at most 15 digits in all) to the correctly
/// rounded `f64`; `None` for any other text (the caller falls back to the general parser).
#[inline]
pub fn parse_plain(b: &[u8]) -> Option<f64> {
    parse_plain_decimals(b).map(|(v, _)| v)
}

/// [`parse_plain`], also returning the number of decimals written, trailing zeros not counted
/// (`-1.250` → 2), which the point store uses to keep decimal values exact.
#[inline]
pub fn parse_plain_decimals(b: &[u8]) -> Option<(f64, u32)> {
    let s = scan(b, 0).filter(|s| s.end == b.len())?;
    Some((s.value(), s.written))
}

/// One plain decimal `[+-]?digits[.digits]` (1 to 15 digits) read from a field.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Scanned {
    /// A leading `-`.
    pub negative: bool,
    /// Every digit written, as one integer (`-12.50` → 1250).
    pub mantissa: u64,
    /// Digits after the point (`-12.50` → 2).
    pub after_point: u32,
    /// Decimals written, trailing zeros not counted (`-12.50` → 1).
    pub written: u32,
    /// Index of the first byte after the number.
    pub end: usize,
}

impl Scanned {
    /// The correctly rounded value (see the module doc).
    #[inline]
    pub fn value(&self) -> f64 {
        let v = self.mantissa as f64 / POW10[self.after_point as usize];
        if self.negative { -v } else { v }
    }
}

/// Read the plain decimal that starts at `b[pos]` and ends at the first byte that cannot continue
/// it (`end`, which the caller checks is a delimiter or the end of the field); `None` when no
/// plain decimal starts there (no digit, more than 15 digits). The one grammar of plain numbers:
/// [`parse_plain_decimals`] and the points reader's fast path both read through it.
#[inline(always)]
pub fn scan(b: &[u8], pos: usize) -> Option<Scanned> {
    let first = *b.get(pos)?;
    let negative = first == b'-';
    let start = pos + usize::from(negative || first == b'+');
    scan_bytes(b, start, negative)
}

/// [`scan`] after the sign.
#[inline(always)]
fn scan_bytes(b: &[u8], start: usize, negative: bool) -> Option<Scanned> {
    let n = b.len();
    let mut pos = start;
    let mut m: u64 = 0;
    while pos < n && b[pos].is_ascii_digit() && pos - start < 16 {
        m = m * 10 + u64::from(b[pos] - b'0');
        pos += 1;
    }
    let mut digits = pos - start;
    let (mut after_point, mut written) = (0u32, 0u32);
    if pos < n && b[pos] == b'.' {
        pos += 1;
        let frac_start = pos;
        while pos < n && b[pos].is_ascii_digit() && digits + (pos - frac_start) < 16 {
            m = m * 10 + u64::from(b[pos] - b'0');
            if b[pos] != b'0' {
                written = (pos - frac_start + 1) as u32;
            }
            pos += 1;
        }
        after_point = (pos - frac_start) as u32;
        digits += pos - frac_start;
    }
    if digits == 0 || digits > 15 {
        return None;
    }
    Some(Scanned {
        negative,
        mantissa: m,
        after_point,
        written,
        end: pos,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn reference(s: &str) -> f64 {
        fast_float2::parse::<f64, _>(s).expect("reference parses")
    }

    #[test]
    fn plain_forms_match_the_reference_library() {
        for s in [
            "0",
            "-0",
            "1",
            "-1.5",
            "12.34",
            "-12.34",
            "0.1",
            ".5",
            "5.",
            "+3.25",
            "-0.01",
            "123456789012345",
            "0.0000001",
            "9999.99",
            "-327.67",
        ] {
            let v = parse_plain(s.as_bytes()).unwrap_or_else(|| panic!("{s} parses"));
            assert_eq!(v.to_bits(), reference(s).to_bits(), "{s}");
        }
    }

    #[test]
    fn decimals_written_ignore_trailing_zeros() {
        for (s, d) in [
            ("12", 0),
            ("12.", 0),
            ("-1.250", 2),
            ("0.001", 3),
            ("3.10", 1),
            ("7.000", 0),
        ] {
            assert_eq!(
                parse_plain_decimals(s.as_bytes()).map(|x| x.1),
                Some(d),
                "{s}"
            );
        }
    }

    #[test]
    fn other_forms_are_left_to_the_general_parser() {
        for s in [
            "",
            "-",
            "+",
            ".",
            "1e3",
            "1.2.3",
            " 1",
            "1 ",
            "nan",
            "NaN",
            "inf",
            "1,5",
            "--1",
            "1234567890123456",
            "0x10",
            "1_000",
        ] {
            assert!(parse_plain(s.as_bytes()).is_none(), "{s:?}");
        }
    }

    proptest! {
        /// Bit-identical to fast-float2 on every plain decimal with up to 15 digits.
        #[test]
        fn equals_fast_float(neg in any::<bool>(), int in 0u64..10_000_000, frac in proptest::option::of((0u64..100_000_000, 0usize..8))) {
            let mut s = String::new();
            if neg { s.push('-'); }
            s.push_str(&int.to_string());
            if let Some((f, w)) = frac {
                let digits = format!("{f:0>8}");
                s.push('.');
                s.push_str(&digits[..w.min(digits.len())]);
            }
            let n_digits = s.bytes().filter(u8::is_ascii_digit).count();
            match parse_plain(s.as_bytes()) {
                Some(v) => prop_assert_eq!(v.to_bits(), reference(&s).to_bits(), "{}", s),
                None => prop_assert!(n_digits > 15 || s.ends_with('.') && n_digits == 0),
            }
        }
    }
}
