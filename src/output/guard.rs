//! Which folder a command may write, decided before any input is read.
//!
//! Owns the rule (also stated in docs/formats.md, "Which folder Plinth writes"): a command that
//! writes a folder — `assess --out`, `merge --out`, `init`, `demo`, `bench --dir` — accepts it only
//! when it does not exist, is an empty folder, or (for `assess` and `merge`) is a previous Plinth
//! output folder: its `manifest.json` names the tool `plinth` and carries the format marker
//! [`FORMAT_MARKER`] under [`FORMAT_KEY`], and it holds nothing but the names Plinth writes
//! ([`OUTPUT_FILES`] and `reports/<stem>.pdf|json`). Refused whatever its content: an existing
//! file, a symbolic link, and a path that is, contains or lies inside an input of the run. Paths
//! are compared after resolving symbolic links and `..` (a path that does not exist yet is
//! resolved through its nearest existing ancestor).
//!
//! Also owns the careful removal of a replaced folder ([`remove_replaced`]): only the names Plinth
//! writes are deleted, so a file dropped into the folder while the run was working survives.
//! It does not write outputs (see [`super::Staging`]).

use std::fmt;
use std::io;
use std::path::{Component, Path, PathBuf};

/// The manifest key holding the output-folder format marker.
pub const FORMAT_KEY: &str = "format";

/// The marker written into every `manifest.json` of an output folder.
pub const FORMAT_MARKER: &str = "plinth-output-folder/1";

/// How many of [`OUTPUT_FILES`], from the first, are the data files (`merge` merges these and
/// copies the rest).
pub const DATA_FILE_COUNT: usize = 7;

/// The files Plinth writes at the top of an output folder (besides the `reports/` folder): the
/// [`DATA_FILE_COUNT`] data files first, then the portfolio overview.
pub const OUTPUT_FILES: [&str; 10] = [
    "results.json",
    "results.csv",
    "results.geojson",
    "points.csv",
    "points.geojson",
    super::gpkg::FILE,
    "manifest.json",
    "portfolio.pdf",
    "portfolio.json",
    super::explorer::FILE,
];

/// The folder of per-structure reports inside an output folder.
pub const REPORTS_DIR: &str = crate::report::pipeline::REPORTS_DIR;

/// The folder of per-structure detail files inside an output folder.
pub const DETAILS_DIR: &str = crate::assess::DETAILS_DIR;

/// The folders Plinth writes inside an output folder, each holding only per-structure files
/// named by a safe stem ([`is_report_name`]).
pub const OUTPUT_DIRS: [&str; 2] = [REPORTS_DIR, DETAILS_DIR];

/// What the folder may already be.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Policy {
    /// New, empty, or a previous Plinth output folder (`assess`, `merge`).
    ReplaceOutput,
    /// New or empty only (`init`, `demo`, `bench`).
    NewOrEmpty,
}

/// What the accepted folder is now.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Existing {
    /// Nothing is there yet.
    New,
    /// An empty folder.
    Empty,
    /// A previous Plinth output folder (replaced when the run succeeds).
    PreviousOutput,
}

/// A folder the guard accepted.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Target {
    /// The path as the user gave it (for messages).
    pub given: PathBuf,
    /// The resolved absolute path (symbolic links and `..` resolved); every write uses it.
    pub path: PathBuf,
    /// What is there now.
    pub existing: Existing,
}

/// One input of a run that the output must keep clear of.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Input {
    /// What it is, e.g. `the portfolio file`, `the points file of dataset \`asc\``.
    pub role: String,
    /// Its path.
    pub path: PathBuf,
}

impl Input {
    /// An input with its role.
    pub fn new(role: impl Into<String>, path: &Path) -> Input {
        Input {
            role: role.into(),
            path: path.to_path_buf(),
        }
    }
}

/// Why a folder is refused.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Reason {
    /// An existing file.
    IsFile,
    /// A symbolic link.
    IsSymlink,
    /// A path below an existing file.
    InsideFile(PathBuf),
    /// The output would be this input.
    IsInput(Input),
    /// The output folder would hold this input.
    ContainsInput(Input),
    /// The output folder would lie inside this input folder.
    InsideInput(Input),
    /// A folder that must be new or empty holds this entry.
    NotEmpty(String),
    /// A non-empty folder without a Plinth manifest (`detail` says what is wrong with it).
    NotOutput(String),
    /// A Plinth output folder of a version that wrote no format marker.
    OlderOutput,
    /// A Plinth output folder that also holds this entry Plinth does not write.
    Foreign(String),
    /// The folder or one of its entries could not be inspected.
    Unreadable(String),
}

/// A refused output folder: stops the command before any input is read (exit code 2).
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub struct Refused {
    /// The path as given.
    pub path: PathBuf,
    /// Why.
    pub reason: Reason,
}

impl Refused {
    /// The sentence saying why.
    pub fn why(&self) -> String {
        let input = |i: &Input| format!("{} ({})", i.role, i.path.display());
        match &self.reason {
            Reason::IsFile => "it is an existing file, not a folder".into(),
            Reason::IsSymlink => "it is a symbolic link; Plinth does not replace links".into(),
            Reason::InsideFile(f) => format!("{} is a file, not a folder", f.display()),
            Reason::IsInput(i) => format!("it is {}, an input of this run", input(i)),
            Reason::ContainsInput(i) => {
                format!("it holds {}, an input of this run", input(i))
            }
            Reason::InsideInput(i) => {
                format!("it lies inside {}, an input of this run", input(i))
            }
            Reason::NotEmpty(e) => format!("the folder is not empty (it holds `{e}`)"),
            Reason::NotOutput(d) => format!("the folder is not empty and {d}"),
            Reason::OlderOutput => format!(
                "it looks like the output of an earlier Plinth version: its manifest.json has \
                 no `{FORMAT_KEY}` marker, so Plinth cannot prove it wrote everything in it"
            ),
            Reason::Foreign(e) => format!(
                "it is a Plinth output folder but also holds `{e}`, which Plinth does not write"
            ),
            Reason::Unreadable(e) => format!("it cannot be inspected: {e}"),
        }
    }

    /// The fix.
    pub fn fix(&self) -> &'static str {
        match &self.reason {
            Reason::IsInput(_) | Reason::ContainsInput(_) | Reason::InsideInput(_) => {
                "choose a new folder that neither holds nor lies inside an input, e.g. a new `out` folder next to the portfolio file"
            }
            Reason::IsSymlink => {
                "give the folder the link points to, or choose a new folder, or delete it yourself"
            }
            Reason::IsFile | Reason::InsideFile(_) => {
                "choose a new folder, or delete the file yourself"
            }
            Reason::OlderOutput => {
                "check what it holds, then delete it yourself, or choose a new folder"
            }
            _ => "choose a new folder, or delete it yourself",
        }
    }
}

impl fmt::Display for Refused {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "{}: will not write here: {}; nothing was written\nhint: {}",
            self.path.display(),
            self.why(),
            self.fix()
        )
    }
}

/// Decide whether `out` may be written under `policy` without touching any of `inputs`.
pub fn check(out: &Path, policy: Policy, inputs: &[Input]) -> Result<Target, Refused> {
    let refuse = |reason| Refused {
        path: out.to_path_buf(),
        reason,
    };
    let resolved = resolve(out).map_err(refuse)?;
    if resolved.last_is_symlink {
        return Err(refuse(Reason::IsSymlink));
    }
    let path = resolved.path;
    for i in inputs {
        for p in input_paths(&i.path) {
            if path == p {
                return Err(refuse(Reason::IsInput(i.clone())));
            }
            if p.starts_with(&path) {
                return Err(refuse(Reason::ContainsInput(i.clone())));
            }
            if path.starts_with(&p) {
                return Err(refuse(Reason::InsideInput(i.clone())));
            }
        }
    }
    let existing = classify(&path, policy).map_err(refuse)?;
    Ok(Target {
        given: out.to_path_buf(),
        path,
        existing,
    })
}

/// What is at a resolved path, under a policy.
fn classify(path: &Path, policy: Policy) -> Result<Existing, Reason> {
    let meta = match std::fs::symlink_metadata(path) {
        Ok(m) => m,
        Err(e) if e.kind() == io::ErrorKind::NotFound => return Ok(Existing::New),
        Err(e) => return Err(Reason::Unreadable(e.to_string())),
    };
    if meta.file_type().is_symlink() {
        return Err(Reason::IsSymlink);
    }
    if !meta.is_dir() {
        return Err(Reason::IsFile);
    }
    let names = list(path)?;
    let Some(first) = names.first() else {
        return Ok(Existing::Empty);
    };
    if policy == Policy::NewOrEmpty {
        return Err(Reason::NotEmpty(first.clone()));
    }
    manifest_marker(path)?;
    if let Some(e) = foreign_entry(path)? {
        return Err(Reason::Foreign(e));
    }
    Ok(Existing::PreviousOutput)
}

/// The entry names of a folder, sorted.
fn list(dir: &Path) -> Result<Vec<String>, Reason> {
    let rd = std::fs::read_dir(dir).map_err(|e| Reason::Unreadable(e.to_string()))?;
    let mut names = Vec::new();
    for e in rd {
        let e = e.map_err(|e| Reason::Unreadable(e.to_string()))?;
        names.push(e.file_name().to_string_lossy().into_owned());
    }
    names.sort();
    Ok(names)
}

/// Check that `dir/manifest.json` names Plinth and carries the current format marker.
fn manifest_marker(dir: &Path) -> Result<(), Reason> {
    let p = dir.join("manifest.json");
    if !is_plain_file(&p) {
        return Err(Reason::NotOutput(
            "has no manifest.json, so it is not a Plinth output folder".into(),
        ));
    }
    let text = std::fs::read_to_string(&p).map_err(|e| Reason::Unreadable(e.to_string()))?;
    let v: serde_json::Value = serde_json::from_str(&text).map_err(|_| {
        Reason::NotOutput("its manifest.json is not one Plinth wrote (not valid JSON)".into())
    })?;
    if v.get("tool").and_then(|t| t.as_str()) != Some("plinth") {
        return Err(Reason::NotOutput(
            "its manifest.json does not name the tool `plinth`".into(),
        ));
    }
    match v.get(FORMAT_KEY).and_then(|t| t.as_str()) {
        Some(FORMAT_MARKER) => Ok(()),
        None => Err(Reason::OlderOutput),
        Some(other) => Err(Reason::NotOutput(format!(
            "its manifest.json has the format marker `{other}`, which this version does not write"
        ))),
    }
}

fn is_plain_file(p: &Path) -> bool {
    std::fs::symlink_metadata(p).is_ok_and(|m| m.file_type().is_file())
}

fn is_plain_dir(p: &Path) -> bool {
    std::fs::symlink_metadata(p).is_ok_and(|m| m.file_type().is_dir())
}

/// Whether `name` is a report file name Plinth writes: `<stem>.pdf` or `<stem>.json` with a safe
/// stem (ASCII letters, digits, `-`, `_`, `.`; not starting with a dot; see `safe_names`).
pub fn is_report_name(name: &str) -> bool {
    let Some(stem) = name
        .strip_suffix(".pdf")
        .or_else(|| name.strip_suffix(".json"))
    else {
        return false;
    };
    !stem.is_empty()
        && !stem.starts_with('.')
        && stem
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.'))
}

/// The first entry (relative path, sorted order) of an output folder that Plinth does not write:
/// anything but a plain file named in [`OUTPUT_FILES`], or a plain `reports/` or `details/` folder
/// holding plain per-structure files ([`is_report_name`]). None when the folder holds only
/// Plinth's names.
pub fn foreign_entry(dir: &Path) -> Result<Option<String>, Reason> {
    for name in list(dir)? {
        let p = dir.join(&name);
        if OUTPUT_FILES.contains(&name.as_str()) && is_plain_file(&p) {
            continue;
        }
        if OUTPUT_DIRS.contains(&name.as_str()) && is_plain_dir(&p) {
            for r in list(&p)? {
                if !(is_report_name(&r) && is_plain_file(&p.join(&r))) {
                    return Ok(Some(format!("{name}/{r}")));
                }
            }
            continue;
        }
        return Ok(Some(name));
    }
    Ok(None)
}

/// Delete a replaced folder (moved aside after the new one is in place): only the entries Plinth
/// writes are removed. Returns the first entry left behind, if any (then the folder stays).
pub fn remove_replaced(dir: &Path) -> io::Result<Option<String>> {
    for sub in OUTPUT_DIRS {
        let sub = dir.join(sub);
        if !is_plain_dir(&sub) {
            continue;
        }
        for e in std::fs::read_dir(&sub)? {
            let e = e?;
            let name = e.file_name().to_string_lossy().into_owned();
            if is_report_name(&name) && e.file_type()?.is_file() {
                std::fs::remove_file(e.path())?;
            }
        }
        std::fs::remove_dir(&sub).ok();
    }
    for f in OUTPUT_FILES {
        let p = dir.join(f);
        if is_plain_file(&p) {
            std::fs::remove_file(&p)?;
        }
    }
    if std::fs::remove_dir(dir).is_ok() {
        return Ok(None);
    }
    let left = list(dir).map_err(|r| {
        io::Error::other(
            Refused {
                path: dir.to_path_buf(),
                reason: r,
            }
            .why(),
        )
    })?;
    Ok(Some(left.into_iter().next().unwrap_or_default()))
}

/// A path resolved for comparison.
struct Resolved {
    /// Absolute, symbolic links and `..` resolved through the existing part.
    path: PathBuf,
    /// The path itself exists and is a symbolic link.
    last_is_symlink: bool,
}

/// Resolve `p`: the longest existing prefix is canonicalised (symbolic links followed), the rest
/// (names that do not exist yet) is appended with `.` and `..` applied lexically.
fn resolve(p: &Path) -> Result<Resolved, Reason> {
    let abs = std::path::absolute(p).map_err(|e| Reason::Unreadable(e.to_string()))?;
    let comps: Vec<Component> = abs.components().collect();
    let mut base = PathBuf::new();
    let mut tail: Vec<std::ffi::OsString> = Vec::new();
    let mut last_is_symlink = false;
    for (k, c) in comps.iter().enumerate() {
        let last = k + 1 == comps.len();
        match c {
            Component::Prefix(_) | Component::RootDir => base.push(c.as_os_str()),
            Component::CurDir => {}
            Component::ParentDir => {
                if tail.pop().is_none() {
                    base.pop();
                }
                last_is_symlink = false;
            }
            Component::Normal(name) => {
                if !tail.is_empty() {
                    tail.push(name.to_os_string());
                    continue;
                }
                let cand = base.join(name);
                match std::fs::symlink_metadata(&cand) {
                    Ok(m) => {
                        last_is_symlink = last && m.file_type().is_symlink();
                        let real = cand
                            .canonicalize()
                            .map_err(|e| Reason::Unreadable(format!("{}: {e}", cand.display())))?;
                        if !last && !real.is_dir() {
                            return Err(Reason::InsideFile(cand));
                        }
                        base = real;
                    }
                    Err(e) if e.kind() == io::ErrorKind::NotFound => {
                        tail.push(name.to_os_string());
                    }
                    Err(e) => {
                        return Err(Reason::Unreadable(format!("{}: {e}", cand.display())));
                    }
                }
            }
        }
    }
    for t in tail {
        base.push(t);
    }
    Ok(Resolved {
        path: base,
        last_is_symlink,
    })
}

/// The paths of one input to keep clear of: where it is (its folder resolved, its own name kept)
/// and, when it is a symbolic link, what it points to.
fn input_paths(p: &Path) -> Vec<PathBuf> {
    let mut v = Vec::new();
    if let (Some(parent), Some(name)) = (p.parent(), p.file_name()) {
        let parent = if parent.as_os_str().is_empty() {
            Path::new(".")
        } else {
            parent
        };
        if let Ok(r) = resolve(parent) {
            v.push(r.path.join(name));
        }
    }
    if let Ok(r) = resolve(p) {
        if !v.contains(&r.path) {
            v.push(r.path);
        }
    }
    v
}

#[cfg(test)]
mod tests {
    use super::*;

    fn write_output(dir: &Path, marker: Option<&str>) {
        std::fs::create_dir_all(dir.join("reports")).unwrap();
        let mut m = serde_json::json!({"tool": "plinth", "tool_version": "0.1.0"});
        if let Some(k) = marker {
            m[FORMAT_KEY] = k.into();
        }
        std::fs::write(dir.join("manifest.json"), m.to_string()).unwrap();
        std::fs::write(dir.join("results.json"), "{}").unwrap();
        std::fs::write(dir.join("reports/B-1.pdf"), "%PDF").unwrap();
        std::fs::write(dir.join("reports/B-1.json"), "{}").unwrap();
        std::fs::create_dir_all(dir.join("details")).unwrap();
        std::fs::write(dir.join("details/B-1.json"), "{}").unwrap();
    }

    fn reason(r: Result<Target, Refused>) -> Reason {
        r.expect_err("refused").reason
    }

    #[test]
    fn new_path_and_empty_folder_are_accepted() {
        let t = tempfile::tempdir().unwrap();
        let new = check(&t.path().join("a/b"), Policy::ReplaceOutput, &[]).unwrap();
        assert_eq!(new.existing, Existing::New);
        std::fs::create_dir(t.path().join("e")).unwrap();
        let e = check(&t.path().join("e"), Policy::NewOrEmpty, &[]).unwrap();
        assert_eq!(e.existing, Existing::Empty);
    }

    #[test]
    fn previous_output_is_accepted_only_with_marker_and_own_names() {
        let t = tempfile::tempdir().unwrap();
        let d = t.path().join("out");
        write_output(&d, Some(FORMAT_MARKER));
        let ok = check(&d, Policy::ReplaceOutput, &[]).unwrap();
        assert_eq!(ok.existing, Existing::PreviousOutput);
        // The same folder is not empty for `demo`/`init`.
        assert!(matches!(
            reason(check(&d, Policy::NewOrEmpty, &[])),
            Reason::NotEmpty(_)
        ));
        std::fs::write(d.join("details/notes.txt"), "mine").unwrap();
        assert_eq!(
            reason(check(&d, Policy::ReplaceOutput, &[])),
            Reason::Foreign("details/notes.txt".into())
        );
        std::fs::remove_file(d.join("details/notes.txt")).unwrap();
        std::fs::write(d.join("reports/notes.txt"), "mine").unwrap();
        assert_eq!(
            reason(check(&d, Policy::ReplaceOutput, &[])),
            Reason::Foreign("reports/notes.txt".into())
        );
        let old = t.path().join("old");
        write_output(&old, None);
        assert_eq!(
            reason(check(&old, Policy::ReplaceOutput, &[])),
            Reason::OlderOutput
        );
    }

    #[test]
    fn folder_without_manifest_or_with_a_foreign_manifest_is_refused() {
        let t = tempfile::tempdir().unwrap();
        std::fs::write(t.path().join("results.csv"), "id\n").unwrap();
        assert!(matches!(
            reason(check(t.path(), Policy::ReplaceOutput, &[])),
            Reason::NotOutput(_)
        ));
        std::fs::write(t.path().join("manifest.json"), r#"{"tool":"other"}"#).unwrap();
        assert!(matches!(
            reason(check(t.path(), Policy::ReplaceOutput, &[])),
            Reason::NotOutput(_)
        ));
    }

    #[test]
    fn existing_file_and_path_below_a_file_are_refused() {
        let t = tempfile::tempdir().unwrap();
        let f = t.path().join("notes.txt");
        std::fs::write(&f, "x").unwrap();
        assert_eq!(
            reason(check(&f, Policy::ReplaceOutput, &[])),
            Reason::IsFile
        );
        assert!(matches!(
            reason(check(&f.join("out"), Policy::ReplaceOutput, &[])),
            Reason::InsideFile(_)
        ));
    }

    #[test]
    fn inputs_are_compared_after_resolving_dots_and_links() {
        let t = tempfile::tempdir().unwrap();
        let job = t.path().join("job");
        std::fs::create_dir_all(job.join("data")).unwrap();
        std::fs::write(job.join("portfolio.toml"), "").unwrap();
        std::fs::write(job.join("data/p.csv"), "").unwrap();
        let inputs = [
            Input::new("the portfolio file", &job.join("portfolio.toml")),
            Input::new("the points file", &job.join("data/p.csv")),
            Input::new("the --previous folder", &t.path().join("prev")),
        ];
        // The job folder itself, reached through `..`.
        let via_dots = job.join("data/../");
        assert!(matches!(
            reason(check(&via_dots, Policy::ReplaceOutput, &inputs)),
            Reason::ContainsInput(_)
        ));
        // A parent of the inputs.
        assert!(matches!(
            reason(check(t.path(), Policy::ReplaceOutput, &inputs)),
            Reason::ContainsInput(_)
        ));
        // The input file itself.
        assert!(matches!(
            reason(check(
                &job.join("data/p.csv"),
                Policy::ReplaceOutput,
                &inputs
            )),
            Reason::IsInput(_)
        ));
        // Inside an input folder that does not exist yet is still inside it.
        assert!(matches!(
            reason(check(
                &t.path().join("prev/x"),
                Policy::ReplaceOutput,
                &inputs
            )),
            Reason::InsideInput(_)
        ));
        // A new folder inside the job folder is fine.
        assert!(check(&job.join("out"), Policy::ReplaceOutput, &inputs).is_ok());
        #[cfg(unix)]
        {
            // A link to the job folder: refused as a link, and a path through it as the input.
            let link = t.path().join("link");
            std::os::unix::fs::symlink(&job, &link).unwrap();
            assert_eq!(
                reason(check(&link, Policy::ReplaceOutput, &inputs)),
                Reason::IsSymlink
            );
            assert!(matches!(
                reason(check(&link.join("data"), Policy::ReplaceOutput, &inputs)),
                Reason::ContainsInput(_)
            ));
        }
    }

    #[test]
    fn new_path_with_parent_steps_resolves_to_the_real_folder() {
        let t = tempfile::tempdir().unwrap();
        std::fs::create_dir(t.path().join("a")).unwrap();
        let r = check(&t.path().join("a/new/../b"), Policy::ReplaceOutput, &[]).unwrap();
        assert_eq!(r.path, t.path().canonicalize().unwrap().join("a/b"));
    }

    #[test]
    fn report_names_follow_the_safe_stem_rule() {
        assert!(is_report_name("QH-M11.pdf"));
        assert!(is_report_name("B_2.v1.json"));
        assert!(!is_report_name(".hidden.pdf"));
        assert!(!is_report_name("notes.txt"));
        assert!(!is_report_name("a b.pdf"));
        assert!(!is_report_name(".pdf"));
    }

    #[test]
    fn remove_replaced_keeps_what_plinth_did_not_write() {
        let t = tempfile::tempdir().unwrap();
        let d = t.path().join("old");
        write_output(&d, Some(FORMAT_MARKER));
        assert_eq!(remove_replaced(&d).unwrap(), None);
        assert!(!d.exists());
        write_output(&d, Some(FORMAT_MARKER));
        std::fs::write(d.join("late.txt"), "arrived during the run").unwrap();
        assert_eq!(remove_replaced(&d).unwrap(), Some("late.txt".into()));
        assert_eq!(
            std::fs::read_to_string(d.join("late.txt")).unwrap(),
            "arrived during the run"
        );
        assert!(!d.join("results.json").exists());
    }

    #[test]
    fn message_names_the_path_the_reason_and_the_fix() {
        let t = tempfile::tempdir().unwrap();
        let f = t.path().join("notes.txt");
        std::fs::write(&f, "x").unwrap();
        let msg = check(&f, Policy::ReplaceOutput, &[])
            .unwrap_err()
            .to_string();
        assert!(msg.starts_with(&f.display().to_string()), "{msg}");
        assert!(msg.contains("existing file"), "{msg}");
        assert!(msg.contains("hint: choose a new folder"), "{msg}");
    }
}
