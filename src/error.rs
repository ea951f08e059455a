//! Input errors and warnings shared by every I/O boundary.
//!
//! Owns [`InputError`] (a bad input file: stops the run before anything is written) and
//! [`Warnings`] (collected during a run and summarised once at the end). It does not own the
//! typed errors of the computation modules; those live beside their code.

use std::fmt;
use std::path::{Path, PathBuf};

/// A problem with one input file, located as precisely as the format allows.
///
/// Printed as `error: FILE: LOCATION: MESSAGE` followed by a `hint:` line with the fix.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub struct InputError {
    /// The file the problem is in.
    pub file: PathBuf,
    /// `line 12`, `line 12, column "2023-01-15"`, `feature 3 (id "B-07")`, `key datasets[0].pass`, ...
    pub location: String,
    /// What is wrong, including what was expected.
    pub message: String,
    /// How to fix it.
    pub hint: String,
}

impl InputError {
    /// Build an error for `file` at `location`.
    pub fn new(
        file: &Path,
        location: impl Into<String>,
        message: impl Into<String>,
        hint: impl Into<String>,
    ) -> Self {
        Self {
            file: file.to_path_buf(),
            location: location.into(),
            message: message.into(),
            hint: hint.into(),
        }
    }
}

impl fmt::Display for InputError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.location.is_empty() {
            write!(f, "{}: {}", self.file.display(), self.message)?;
        } else {
            write!(
                f,
                "{}: {}: {}",
                self.file.display(),
                self.location,
                self.message
            )?;
        }
        if !self.hint.is_empty() {
            write!(f, "\nhint: {}", self.hint)?;
        }
        Ok(())
    }
}

/// One warning: something was accepted but the user should know (defaults applied, suspicious values).
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
pub struct Warning {
    /// Short stable category, e.g. `default_applied`, `implausible_magnitude`, `outside_every_buffer`.
    pub kind: String,
    /// Full sentence naming the file/feature/key concerned.
    pub message: String,
}

/// Warnings collected during a run, in the order they were raised.
#[derive(Debug, Clone, Default, serde::Serialize)]
pub struct Warnings {
    /// The warnings.
    pub items: Vec<Warning>,
}

impl Warnings {
    /// Record a warning.
    pub fn push(&mut self, kind: &str, message: impl Into<String>) {
        self.items.push(Warning {
            kind: kind.to_string(),
            message: message.into(),
        });
    }

    /// Append all warnings of `other`.
    pub fn extend(&mut self, other: Warnings) {
        self.items.extend(other.items);
    }

    /// True when no warning was raised.
    pub fn is_empty(&self) -> bool {
        self.items.is_empty()
    }

    /// A summary grouped by kind: at most `per_kind` messages each, then a count of the rest.
    pub fn summary(&self, per_kind: usize) -> Vec<String> {
        let mut kinds: Vec<&str> = Vec::new();
        for w in &self.items {
            if !kinds.contains(&w.kind.as_str()) {
                kinds.push(&w.kind);
            }
        }
        let mut out = Vec::new();
        for k in kinds {
            let of_kind: Vec<&Warning> = self.items.iter().filter(|w| w.kind == k).collect();
            for w in of_kind.iter().take(per_kind) {
                out.push(format!("warning [{}]: {}", k, w.message));
            }
            if of_kind.len() > per_kind {
                out.push(format!(
                    "warning [{}]: ... and {} more of this kind (all are listed in manifest.json)",
                    k,
                    of_kind.len() - per_kind
                ));
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn display_names_file_location_and_hint() {
        let e = InputError::new(Path::new("a.csv"), "line 3", "bad value", "fix it");
        assert_eq!(e.to_string(), "a.csv: line 3: bad value\nhint: fix it");
    }

    #[test]
    fn summary_groups_and_truncates() {
        let mut w = Warnings::default();
        for i in 0..5 {
            w.push("a", format!("m{i}"));
        }
        w.push("b", "x");
        let s = w.summary(2);
        assert_eq!(s.len(), 4);
        assert!(s[2].contains("3 more"));
        assert!(s[3].contains("[b]"));
    }
}
