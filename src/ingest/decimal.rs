//! Fast exact parsing of plain decimal numbers (`-12.34`), the form nearly every points file uses.
//!
//! Owns one function, [`parse_plain`], used by the points reader before the general parser
//! (`fast-float2`): it accepts only `[+-]?digits[.digits]` with at most 15 significant digits and
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
    let (neg, digits) = match b.first()? {
        b'-' => (true, &b[1..]),
        b'+' => (false, &b[1..]),
        _ => (false, b),
    };
    if digits.is_empty() || digits.len() > 16 {
        return None;
    }
    let mut m: u64 = 0;
    let mut n_digits = 0usize;
    let mut frac: Option<usize> = None;
    // Position (in `digits`) of the last non-zero digit after the point.
    let mut last_nonzero_frac = 0usize;
    for (i, &c) in digits.iter().enumerate() {
        match c {
            b'0'..=b'9' => {
                m = m * 10 + u64::from(c - b'0');
                n_digits += 1;
                if frac.is_some() && c != b'0' {
                    last_nonzero_frac = i;
                }
            }
            b'.' if frac.is_none() => frac = Some(i),
            _ => return None,
        }
    }
    if n_digits == 0 || n_digits > 15 {
        return None;
    }
    let k = frac.map_or(0, |p| digits.len() - p - 1);
    let written = frac.map_or(0, |p| last_nonzero_frac.saturating_sub(p)) as u32;
    let v = m as f64 / POW10[k];
    Some((if neg { -v } else { v }, written))
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
