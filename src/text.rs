//! Sentences shared between many records.
//!
//! Every structure's record carries about twenty assumption sentences, and most of them are the
//! same words for thousands of structures. Held as one `String` each they are most of a record's
//! memory (≈ 3 KB of the ≈ 5 KB a structure on the bench cities); held as [`Shared`] each distinct
//! sentence is stored once per run ([`Interner`]) and a record keeps only pointers to them.

use std::collections::HashSet;
use std::fmt;
use std::ops::Deref;
use std::sync::{Arc, Mutex};

/// An immutable piece of text, cheap to clone (a reference-counted pointer). Serialised as a
/// plain JSON string.
#[derive(Clone, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct Shared(Arc<str>);

impl Deref for Shared {
    type Target = str;
    fn deref(&self) -> &str {
        &self.0
    }
}

impl fmt::Debug for Shared {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        fmt::Debug::fmt(&*self.0, f)
    }
}

impl fmt::Display for Shared {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0)
    }
}

impl From<String> for Shared {
    fn from(s: String) -> Self {
        Shared(Arc::from(s))
    }
}

impl From<&str> for Shared {
    fn from(s: &str) -> Self {
        Shared(Arc::from(s))
    }
}

impl PartialEq<str> for Shared {
    fn eq(&self, other: &str) -> bool {
        &*self.0 == other
    }
}

impl PartialEq<&str> for Shared {
    fn eq(&self, other: &&str) -> bool {
        &*self.0 == *other
    }
}

impl serde::Serialize for Shared {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(&self.0)
    }
}

impl<'de> serde::Deserialize<'de> for Shared {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        String::deserialize(d).map(Shared::from)
    }
}

/// The distinct sentences of one run: [`Interner::intern`] gives the same [`Shared`] for equal
/// text, so each sentence is held once however many records carry it. Safe to share between
/// the assessment workers (one short lock per sentence).
#[derive(Debug, Default)]
pub struct Interner {
    seen: Mutex<HashSet<Arc<str>>>,
}

impl Interner {
    /// The shared copy of `text` (stored on first sight).
    pub fn intern(&self, text: String) -> Shared {
        // A poisoned lock only means another worker panicked mid-insert; the set is still valid.
        let mut seen = self.seen.lock().unwrap_or_else(|e| e.into_inner());
        if let Some(a) = seen.get(text.as_str()) {
            return Shared(Arc::clone(a));
        }
        let a: Arc<str> = Arc::from(text);
        seen.insert(Arc::clone(&a));
        Shared(a)
    }

    /// Number of distinct sentences held.
    pub fn len(&self) -> usize {
        self.seen.lock().unwrap_or_else(|e| e.into_inner()).len()
    }

    /// True when no sentence is held.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
}

/// Serialise dates as ISO 8601 `YYYY-MM-DD` strings, the text chrono writes, formatted by hand:
/// chrono formats through `Display` (about a microsecond a date) and a structure's detail file
/// holds hundreds of dates. Years outside 0–9999 go through chrono (signed, wider years).
pub fn iso_dates<S: serde::Serializer>(
    dates: &[chrono::NaiveDate],
    s: S,
) -> Result<S::Ok, S::Error> {
    use serde::ser::SerializeSeq;
    let mut seq = s.serialize_seq(Some(dates.len()))?;
    for d in dates {
        seq.serialize_element(&IsoDate(*d))?;
    }
    seq.end()
}

/// One date serialised as by [`iso_dates`].
struct IsoDate(chrono::NaiveDate);

impl serde::Serialize for IsoDate {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        use chrono::Datelike;
        let d = self.0;
        let y = d.year();
        if !(0..=9999).contains(&y) {
            return s.collect_str(&d);
        }
        let digits = |v: u32, out: &mut [u8]| {
            let mut v = v;
            for b in out.iter_mut().rev() {
                *b = b'0' + (v % 10) as u8;
                v /= 10;
            }
        };
        let mut b = *b"0000-00-00";
        digits(y as u32, &mut b[0..4]);
        digits(d.month(), &mut b[5..7]);
        digits(d.day(), &mut b[8..10]);
        // Only ASCII digits and hyphens were written.
        let text = std::str::from_utf8(&b).map_err(serde::ser::Error::custom)?;
        s.serialize_str(text)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn equal_text_is_held_once_and_serialises_as_a_string() {
        let i = Interner::default();
        let a = i.intern("points are assumed to move with the structure".to_string());
        let b = i.intern("points are assumed to move with the structure".to_string());
        let c = i.intern("another sentence".to_string());
        assert!(Arc::ptr_eq(&a.0, &b.0), "the same allocation");
        assert!(!Arc::ptr_eq(&a.0, &c.0));
        assert_eq!(i.len(), 2);
        assert_eq!(a, "points are assumed to move with the structure");
        let json = serde_json::to_string(&vec![a.clone(), c]).unwrap();
        assert_eq!(
            json,
            r#"["points are assumed to move with the structure","another sentence"]"#
        );
        let back: Vec<Shared> = serde_json::from_str(&json).unwrap();
        assert_eq!(back[0], a);
    }

    /// The hand-formatted dates are chrono's own text, across padding cases and wide years.
    #[test]
    fn iso_dates_are_chronos_text() {
        #[derive(serde::Serialize)]
        struct Fast(#[serde(serialize_with = "iso_dates")] Vec<chrono::NaiveDate>);
        let dates: Vec<chrono::NaiveDate> = [
            (2023, 1, 5),
            (1999, 12, 31),
            (7, 3, 9),
            (0, 1, 1),
            (9999, 12, 31),
            (10000, 1, 1),
            (-44, 3, 15),
        ]
        .iter()
        .map(|&(y, m, d)| chrono::NaiveDate::from_ymd_opt(y, m, d).unwrap())
        .collect();
        assert_eq!(
            serde_json::to_string(&Fast(dates.clone())).unwrap(),
            serde_json::to_string(&dates).unwrap()
        );
    }
}
