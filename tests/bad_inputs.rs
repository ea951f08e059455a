//! The bad-input corpus: runs `plinth check` on every case folder under `tests/bad_inputs/`.
//!
//! Owns the one test that walks the corpus. Each case folder holds a complete mini portfolio
//! (`portfolio.toml`, `structures.geojson`, `points.csv`: the valid `base/` with ONE thing broken)
//! and an `expect.toml`:
//!
//! ```toml
//! exit = 2                                   # expected exit code of `plinth check`
//! stderr_contains = ["points.csv", "line 4"] # fragments that must all appear on stderr
//! warning_contains = ["implausible_magnitude"] # optional: each must appear on a `warning [` line
//! ```
//!
//! Adding a case = adding a folder (by hand, or in `tests/bad_inputs/generate.py`). Every case is
//! also checked for the absence of a panic (exit code 101 or "panicked" on stderr), and a case
//! that exits 2 must print the documented `error: ...` line followed by a `hint: ...` line.
//! It does not test the readers' internals (their unit tests do) nor random inputs
//! (`tests/properties.rs`).

use std::path::{Path, PathBuf};
use std::process::Command;

/// The minimum size of the corpus (the brief asks for at least 40 cases besides the base).
const MIN_CASES: usize = 40;

struct Expect {
    exit: i32,
    stderr_contains: Vec<String>,
    warning_contains: Vec<String>,
}

fn strings(t: &toml::Table, key: &str, file: &Path) -> Result<Vec<String>, String> {
    match t.get(key) {
        None => Ok(Vec::new()),
        Some(toml::Value::Array(a)) => a
            .iter()
            .map(|v| {
                v.as_str()
                    .map(str::to_string)
                    .ok_or_else(|| format!("{}: `{key}` must hold strings", file.display()))
            })
            .collect(),
        Some(_) => Err(format!("{}: `{key}` must be an array", file.display())),
    }
}

fn read_expect(file: &Path) -> Result<Expect, String> {
    let text = std::fs::read_to_string(file).map_err(|e| format!("{}: {e}", file.display()))?;
    let t: toml::Table = toml::from_str(&text).map_err(|e| format!("{}: {e}", file.display()))?;
    for k in t.keys() {
        if !["exit", "stderr_contains", "warning_contains"].contains(&k.as_str()) {
            return Err(format!("{}: unknown key `{k}`", file.display()));
        }
    }
    let exit = t
        .get("exit")
        .and_then(toml::Value::as_integer)
        .ok_or_else(|| format!("{}: `exit` (integer) is required", file.display()))?;
    Ok(Expect {
        exit: i32::try_from(exit).map_err(|e| format!("{}: exit: {e}", file.display()))?,
        stderr_contains: strings(&t, "stderr_contains", file)?,
        warning_contains: strings(&t, "warning_contains", file)?,
    })
}

/// Run one case; returns the list of failed expectations (empty = pass).
fn run_case(dir: &Path) -> Vec<String> {
    let mut problems = Vec::new();
    let expect = match read_expect(&dir.join("expect.toml")) {
        Ok(e) => e,
        Err(e) => return vec![e],
    };
    let out = match Command::new(env!("CARGO_BIN_EXE_plinth"))
        .current_dir(dir)
        .args(["check", "portfolio.toml"])
        .output()
    {
        Ok(o) => o,
        Err(e) => return vec![format!("cannot run plinth: {e}")],
    };
    let stderr = String::from_utf8_lossy(&out.stderr);
    let code = out.status.code();
    if code == Some(101) || stderr.contains("panicked") {
        problems.push("PANIC".to_string());
    }
    if code != Some(expect.exit) {
        problems.push(format!("exit code {code:?}, expected {}", expect.exit));
    }
    for frag in &expect.stderr_contains {
        if !stderr.contains(frag.as_str()) {
            problems.push(format!("stderr lacks `{frag}`"));
        }
    }
    let warning_lines: Vec<&str> = stderr
        .lines()
        .filter(|l| l.starts_with("warning ["))
        .collect();
    for frag in &expect.warning_contains {
        if !warning_lines.iter().any(|l| l.contains(frag.as_str())) {
            problems.push(format!("no warning line contains `{frag}`"));
        }
    }
    match expect.exit {
        2 => {
            let lines: Vec<&str> = stderr.lines().collect();
            let err_at = lines.iter().position(|l| l.starts_with("error: "));
            match err_at {
                None => problems.push("no `error: ` line".into()),
                Some(i) => {
                    let hint_ok = lines
                        .get(i + 1)
                        .is_some_and(|l| l.starts_with("hint: ") && l.len() > "hint: ".len());
                    if !hint_ok {
                        problems
                            .push("the `error: ` line is not followed by a `hint: ` line".into());
                    }
                }
            }
        }
        0 if !stderr.contains("check passed") => {
            problems.push("exit 0 expected but no `check passed` line".into());
        }
        _ => {}
    }
    if !problems.is_empty() {
        problems.push(format!("stderr was:\n{stderr}"));
    }
    problems
}

fn case_dirs() -> Vec<PathBuf> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/bad_inputs");
    let mut dirs: Vec<PathBuf> = std::fs::read_dir(&root)
        .unwrap_or_else(|e| panic!("cannot list {}: {e}", root.display()))
        .filter_map(Result::ok)
        .map(|e| e.path())
        .filter(|p| p.is_dir())
        .collect();
    dirs.sort();
    dirs
}

#[test]
fn every_bad_input_case_meets_its_expectation() {
    let dirs = case_dirs();
    let names: Vec<String> = dirs
        .iter()
        .filter_map(|d| d.file_name().map(|n| n.to_string_lossy().into_owned()))
        .collect();
    assert!(
        names.iter().any(|n| n == "base"),
        "the valid base case is missing"
    );
    assert!(
        names.len() > MIN_CASES,
        "only {} case folders; at least {MIN_CASES} plus base are required",
        names.len()
    );
    let mut failures = Vec::new();
    for (dir, name) in dirs.iter().zip(&names) {
        for f in ["portfolio.toml", "expect.toml"] {
            if !dir.join(f).is_file() {
                failures.push(format!("[{name}] missing {f}"));
            }
        }
        let problems = run_case(dir);
        if !problems.is_empty() {
            failures.push(format!("[{name}]\n  {}", problems.join("\n  ")));
        }
    }
    assert!(
        failures.is_empty(),
        "{} of {} cases failed:\n{}",
        failures.len(),
        names.len(),
        failures.join("\n")
    );
}
