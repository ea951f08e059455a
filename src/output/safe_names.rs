//! Safe file names for per-structure outputs.
//!
//! A structure id is untrusted text. The file stem made from it keeps ASCII letters, digits, `-`,
//! `_` and `.`; every other character (path separators, `..`, control characters, non-ASCII
//! letters including Unicode confusables) becomes `_`; leading dots are removed so nothing is
//! hidden or relative; Windows reserved device names (CON, PRN, AUX, NUL, COM1–9, LPT1–9) get a
//! `_` prefix; the stem is cut to 80 bytes. Collisions — including ones that differ only in case,
//! for case-insensitive file systems — get `-2`, `-3`, ... in input order. The mapping id → stem
//! is kept in results (`report_file`).

use std::collections::HashSet;

/// Longest stem in bytes.
pub const MAX_STEM: usize = 80;

const RESERVED: &[&str] = &[
    "con", "prn", "aux", "nul", "com1", "com2", "com3", "com4", "com5", "com6", "com7", "com8",
    "com9", "lpt1", "lpt2", "lpt3", "lpt4", "lpt5", "lpt6", "lpt7", "lpt8", "lpt9",
];

/// Sanitise one id into a stem (without collision handling).
pub fn sanitise(id: &str) -> String {
    let mut s: String = id
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' || c == '_' || c == '.' {
                c
            } else {
                '_'
            }
        })
        .collect();
    while s.contains("..") {
        s = s.replace("..", "_");
    }
    let s2 = s.trim_start_matches('.').trim_end_matches('.');
    let mut s = s2.to_string();
    if s.is_empty() || s.chars().all(|c| c == '_') {
        s = format!("structure{}", if s.is_empty() { "" } else { "_" });
    }
    let base = s.split('.').next().unwrap_or("").to_ascii_lowercase();
    if RESERVED.contains(&base.as_str()) {
        s = format!("_{s}");
    }
    s.truncate(MAX_STEM);
    s
}

/// Stems for all ids, unique case-insensitively, in input order.
pub fn assign(ids: &[&str]) -> Vec<String> {
    let mut used: HashSet<String> = HashSet::new();
    let mut out = Vec::with_capacity(ids.len());
    for id in ids {
        let base = sanitise(id);
        let mut stem = base.clone();
        let mut k = 2;
        while used.contains(&stem.to_ascii_lowercase()) {
            let suffix = format!("-{k}");
            let mut b = base.clone();
            b.truncate(MAX_STEM - suffix.len());
            stem = format!("{b}{suffix}");
            k += 1;
        }
        used.insert(stem.to_ascii_lowercase());
        out.push(stem);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hostile_ids_stay_inside() {
        for id in [
            "../../etc/passwd",
            "/abs/path",
            "a\\b",
            "..",
            ".",
            "",
            "x\0y",
            "#panic(\"x\")",
        ] {
            let s = sanitise(id);
            assert!(
                !s.contains('/') && !s.contains('\\') && !s.contains(".."),
                "{id} -> {s}"
            );
            assert!(!s.starts_with('.') && !s.is_empty(), "{id} -> {s}");
        }
    }

    #[test]
    fn reserved_long_and_confusable() {
        assert_eq!(sanitise("CON"), "_CON");
        assert_eq!(sanitise("nul.txt"), "_nul.txt");
        assert_eq!(sanitise(&"a".repeat(300)).len(), MAX_STEM);
        // Cyrillic 'а' (U+0430) looks like Latin 'a' but is not kept.
        assert_eq!(sanitise("b\u{0430}d"), "b_d");
    }

    #[test]
    fn collisions_get_suffixes() {
        let s = assign(&["A/1", "A_1", "a_1", "B"]);
        assert_eq!(s, vec!["A_1", "A_1-2", "a_1-3", "B"]);
    }
}
