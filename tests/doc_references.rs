//! Every citation in the repository resolves inside the repository.
//!
//! Walks README.md, DEVELOPERS.md, CHANGELOG.md and every text file under src/, tests/, docs/ and
//! templates/, and fails — naming file and line — when
//!
//! 1. a citation names a document (`name.md`, `docs/name.md`, `../name.md`) that does not exist:
//!    a bare name is looked up beside the citing file, at the repository root and in docs/;
//! 2. a section cited after it on the same line (`§8.3`, `§8.2–8.4`, `§5–§6`, `§8.9-A`,
//!    `Appendix A`) has no heading with that number in the document (`## 8. …`, `### 8.3 …`,
//!    `## Appendix A. …`);
//! 3. a note is cited without its `.md` (`insar-methods §7.3`, `… App. A`): the form is
//!    `insar-methods.md §7.3`, `insar-methods.md Appendix A`;
//! 4. in docs/*.md, a bare `§N` before any document name on the line has no heading in that same
//!    document (a bare § in a docs file means its own section);
//! 5. a relative markdown link in docs/*.md, README.md or DEVELOPERS.md points to a missing file or
//!    to a missing heading anchor.
//!
//! The citation form is documented in DEVELOPERS.md ("Citing the reference notes"). The check is
//! by pattern, so new citations are covered without editing this file.

use std::collections::BTreeSet;
use std::fs;
use std::path::{Path, PathBuf};

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// The files the check reads, as paths relative to the repository root.
fn files_to_check(root: &Path) -> Vec<PathBuf> {
    let mut out: Vec<PathBuf> = ["README.md", "DEVELOPERS.md", "CHANGELOG.md"]
        .iter()
        .map(PathBuf::from)
        .filter(|p| root.join(p).is_file())
        .collect();
    for dir in ["src", "tests", "docs", "templates"] {
        walk(root, Path::new(dir), &mut out);
    }
    // This file holds deliberately broken citations as test data.
    out.retain(|p| p != Path::new("tests/doc_references.rs"));
    out.sort();
    out
}

fn walk(root: &Path, rel: &Path, out: &mut Vec<PathBuf>) {
    let Ok(entries) = fs::read_dir(root.join(rel)) else {
        return;
    };
    for entry in entries.flatten() {
        let name = entry.file_name();
        if name.to_string_lossy().starts_with('.') {
            continue;
        }
        let path = rel.join(&name);
        match entry.file_type() {
            Ok(t) if t.is_dir() => walk(root, &path, out),
            Ok(t) if t.is_file() => out.push(path),
            _ => {}
        }
    }
}

/// Section numbers (`8`, `8.3`) and appendix names (`Appendix A`) that head a markdown file,
/// plus the GitHub anchors of all its headings.
#[derive(Default)]
struct Headings {
    sections: BTreeSet<String>,
    anchors: BTreeSet<String>,
}

fn headings(text: &str) -> Headings {
    let mut h = Headings::default();
    let mut in_code = false;
    for line in text.lines() {
        if line.trim_start().starts_with("```") {
            in_code = !in_code;
            continue;
        }
        if in_code {
            continue;
        }
        let hashes = line.chars().take_while(|&c| c == '#').count();
        if hashes == 0 || !line[hashes..].starts_with(' ') {
            continue;
        }
        let title = line[hashes..].trim();
        h.anchors.insert(anchor(title));
        if let Some(rest) = title.strip_prefix("Appendix ") {
            if let Some(letter) = rest.chars().next().filter(char::is_ascii_uppercase) {
                h.sections.insert(format!("Appendix {letter}"));
            }
        } else if let Some((number, _)) = section_number(title) {
            h.sections.insert(number);
        }
    }
    h
}

/// GitHub's heading anchor: lower case, spaces to hyphens, punctuation other than `-`/`_` dropped.
fn anchor(title: &str) -> String {
    let mut a = String::new();
    for c in title.chars() {
        if c.is_alphanumeric() || c == '-' || c == '_' {
            a.extend(c.to_lowercase());
        } else if c == ' ' {
            a.push('-');
        }
    }
    a
}

/// A leading section number `8`, `8.3`, `11.4.2` (a trailing dot is not part of it) and the
/// length in bytes it took.
fn section_number(s: &str) -> Option<(String, usize)> {
    let b = s.as_bytes();
    let mut end = 0;
    loop {
        let start = end;
        while end < b.len() && b[end].is_ascii_digit() {
            end += 1;
        }
        if end == start {
            // No digits after a dot: give the dot back.
            end = start.saturating_sub(1);
            break;
        }
        if end + 1 < b.len() && b[end] == b'.' && b[end + 1].is_ascii_digit() {
            end += 1;
        } else {
            break;
        }
    }
    (end > 0).then(|| (s[..end].to_string(), end))
}

/// One `name.md` token on a line: byte range and text.
struct DocToken {
    start: usize,
    end: usize,
    name: String,
}

fn is_path_char(c: char) -> bool {
    c.is_ascii_alphanumeric() || matches!(c, '_' | '-' | '.' | '/')
}

fn doc_tokens(line: &str) -> Vec<DocToken> {
    let mut out = Vec::new();
    let mut from = 0;
    while let Some(pos) = line[from..].find(".md") {
        let dot = from + pos;
        let end = dot + 3;
        from = end;
        if line[end..]
            .chars()
            .next()
            .is_some_and(|c| c.is_ascii_alphanumeric() || c == '_')
        {
            continue; // `.mdx`, `.md_`: not a markdown file name
        }
        let start = line[..dot]
            .char_indices()
            .rev()
            .take_while(|&(_, c)| is_path_char(c))
            .last()
            .map_or(dot, |(i, _)| i);
        let name = &line[start..end];
        let stem = name
            .trim_end_matches(".md")
            .rsplit('/')
            .next()
            .unwrap_or("");
        if stem.is_empty() || !stem.starts_with(|c: char| c.is_ascii_alphanumeric() || c == '_') {
            continue; // `.md`, `*.md`, `docs/*.md`
        }
        let word_start = line[..start]
            .rfind(char::is_whitespace)
            .map_or(0, |i| i + 1);
        if line[word_start..end].contains("://") {
            continue; // part of a URL
        }
        out.push(DocToken {
            start,
            end,
            name: name.to_string(),
        });
    }
    out
}

/// Where a cited document lives, or None.
fn resolve(root: &Path, citing: &Path, name: &str) -> Option<PathBuf> {
    let dir = citing.parent().unwrap_or(Path::new(""));
    let candidates: Vec<PathBuf> = if name.contains('/') {
        vec![dir.join(name), PathBuf::from(name)]
    } else {
        vec![
            dir.join(name),
            PathBuf::from(name),
            Path::new("docs").join(name),
        ]
    };
    candidates
        .into_iter()
        .map(|p| normalise(&p))
        .find(|p| root.join(p).is_file())
}

/// Lexical `.`/`..` removal (no file-system access, no symlinks followed).
fn normalise(p: &Path) -> PathBuf {
    let mut out = PathBuf::new();
    for c in p.components() {
        match c {
            std::path::Component::ParentDir => {
                out.pop();
            }
            std::path::Component::CurDir => {}
            other => out.push(other),
        }
    }
    out
}

/// Sections cited in `seg`: every `§N` (and the upper end of `§N–M` / `§N-M`), and every
/// `Appendix X`.
fn cited_sections(seg: &str) -> Vec<String> {
    let mut out = Vec::new();
    for (i, _) in seg.match_indices('§') {
        let rest = seg[i + '§'.len_utf8()..].trim_start_matches(' ');
        let Some((n, len)) = section_number(rest) else {
            continue;
        };
        out.push(n);
        let after = &rest[len..];
        for dash in ["–", "-"] {
            if let Some(tail) = after.strip_prefix(dash)
                && let Some((m, _)) = section_number(tail)
            {
                out.push(m);
            }
        }
    }
    for (i, _) in seg.match_indices("Appendix ") {
        if let Some(letter) = seg[i + 9..]
            .chars()
            .next()
            .filter(char::is_ascii_uppercase)
            .filter(|_| {
                !seg[i + 10..]
                    .chars()
                    .next()
                    .is_some_and(|c| c.is_ascii_alphanumeric())
            })
        {
            out.push(format!("Appendix {letter}"));
        }
    }
    out
}

/// `insar-methods §7.3` / `insar-methods App. A` where `insar-methods.md` exists: the `.md` is
/// missing.
fn short_forms(root: &Path, citing: &Path, line: &str) -> Vec<String> {
    let mut out = Vec::new();
    for marker in [" §", " App. ", " Appendix "] {
        for (i, _) in line.match_indices(marker) {
            let word_start = line[..i]
                .char_indices()
                .rev()
                .take_while(|&(_, c)| c.is_ascii_alphanumeric() || c == '-' || c == '_')
                .last()
                .map_or(i, |(j, _)| j);
            let word = &line[word_start..i];
            if word.is_empty() {
                continue;
            }
            let name = format!("{word}.md");
            if resolve(root, citing, &name).is_some() {
                let form = if marker == " App. " {
                    " Appendix"
                } else {
                    marker.trim_end()
                };
                out.push(format!(
                    "`{word}{}…` cites a document without `.md`: write `{name}{form} …`",
                    marker.trim_end()
                ));
            }
        }
    }
    out
}

/// Relative markdown links `[text](target#anchor)` on a line.
fn links(line: &str) -> Vec<&str> {
    let mut out = Vec::new();
    for (i, _) in line.match_indices("](") {
        let rest = &line[i + 2..];
        if let Some(close) = rest.find(')') {
            let target = &rest[..close];
            if !target.is_empty() && !target.contains(char::is_whitespace) {
                out.push(target);
            }
        }
    }
    out
}

struct Checker {
    root: PathBuf,
    cache: std::collections::HashMap<PathBuf, Headings>,
    errors: Vec<String>,
}

impl Checker {
    fn headings_of(&mut self, rel: &Path) -> &Headings {
        let root = self.root.clone();
        self.cache
            .entry(rel.to_path_buf())
            .or_insert_with(|| headings(&fs::read_to_string(root.join(rel)).unwrap_or_default()))
    }

    fn error(&mut self, file: &Path, line: usize, msg: String) {
        self.errors
            .push(format!("{}:{line}: {msg}", file.to_string_lossy()));
    }

    fn check_file(&mut self, rel: &Path) {
        let Ok(text) = fs::read_to_string(self.root.join(rel)) else {
            return; // binary (fonts, images)
        };
        let is_md = rel.extension().is_some_and(|e| e == "md");
        let own_sections = is_md && rel.starts_with("docs");
        for (i, line) in text.lines().enumerate() {
            self.check_line(rel, i + 1, line, is_md, own_sections);
        }
    }

    fn check_line(&mut self, rel: &Path, n: usize, line: &str, is_md: bool, own: bool) {
        let tokens = doc_tokens(line);
        for (k, t) in tokens.iter().enumerate() {
            let Some(target) = resolve(&self.root, rel, &t.name) else {
                self.error(
                    rel,
                    n,
                    format!("`{}` is not a file in the repository", t.name),
                );
                continue;
            };
            let seg_end = tokens.get(k + 1).map_or(line.len(), |next| next.start);
            let seg = &line[t.end..seg_end];
            if target.extension().is_some_and(|e| e == "md") {
                for s in cited_sections(seg) {
                    if !self.headings_of(&target).sections.contains(&s) {
                        let shown = if s.starts_with("Appendix") {
                            s.clone()
                        } else {
                            format!("§{s}")
                        };
                        self.error(rel, n, format!("{} has no heading for {shown}", t.name));
                    }
                }
            }
        }
        for msg in short_forms(&self.root, rel, line) {
            self.error(rel, n, msg);
        }
        if own {
            let before = tokens.first().map_or(line, |t| &line[..t.start]);
            for s in cited_sections(before) {
                if !s.starts_with("Appendix") && !self.headings_of(rel).sections.contains(&s) {
                    self.error(
                        rel,
                        n,
                        format!(
                            "§{s} has no heading in this document (name the document cited: \
                             `damage-relations.md §{s}`, `insar-methods.md §{s}`, …)"
                        ),
                    );
                }
            }
        }
        if is_md {
            for target in links(line) {
                self.check_link(rel, n, target);
            }
        }
    }

    fn check_link(&mut self, rel: &Path, n: usize, target: &str) {
        if target.contains(':') && !target.starts_with('#') {
            return; // https:, mailto:
        }
        let (path, anchor) = match target.split_once('#') {
            Some((p, a)) => (p, Some(a)),
            None => (target, None),
        };
        let file = if path.is_empty() {
            rel.to_path_buf()
        } else {
            normalise(&rel.parent().unwrap_or(Path::new("")).join(path))
        };
        if !self.root.join(&file).exists() {
            self.error(rel, n, format!("link `{target}`: no such file"));
            return;
        }
        if let Some(a) = anchor
            && file.extension().is_some_and(|e| e == "md")
            && !self.headings_of(&file).anchors.contains(a)
        {
            self.error(
                rel,
                n,
                format!("link `{target}`: no heading with that anchor"),
            );
        }
    }
}

#[test]
fn every_citation_resolves_inside_the_repository() {
    let root = root();
    let mut checker = Checker {
        root: root.clone(),
        cache: Default::default(),
        errors: Vec::new(),
    };
    let files = files_to_check(&root);
    assert!(
        files.iter().any(|f| f.starts_with("src")),
        "no source files found under {}",
        root.display()
    );
    for f in &files {
        checker.check_file(f);
    }
    assert!(
        checker.errors.is_empty(),
        "{} unresolved citation(s) (form: DEVELOPERS.md, \"Citing the reference notes\"):\n{}",
        checker.errors.len(),
        checker.errors.join("\n")
    );
}

#[test]
fn the_checker_catches_what_it_should() {
    let root = root();
    let mut c = Checker {
        root: root.clone(),
        cache: Default::default(),
        errors: Vec::new(),
    };
    let here = Path::new("src/lib.rs");
    let doc = Path::new("docs/methods.md");
    // Resolving citations pass.
    c.check_line(
        here,
        1,
        "damage-relations.md §8.3 C2 and §8.9-A; §2.3–2.5",
        false,
        false,
    );
    c.check_line(
        here,
        2,
        "insar-methods.md Appendix A LOS-1, §4.1-4.4 and §5–§6",
        false,
        false,
    );
    c.check_line(
        here,
        3,
        "see docs/formats.md and https://example.org/x.md",
        false,
        false,
    );
    c.check_line(
        doc,
        4,
        "own §5.3; [formats](formats.md) [m](#0-conventions-and-provenance-marks)",
        true,
        true,
    );
    assert!(c.errors.is_empty(), "{:?}", c.errors);
    // Each kind of defect is reported once, with file and line.
    c.check_line(here, 10, "no-such-note.md §1", false, false);
    c.check_line(here, 11, "damage-relations.md §99.1", false, false);
    c.check_line(here, 12, "damage-relations.md §8.3, §12.7", false, false);
    c.check_line(here, 13, "insar-methods.md §8.2–8.9", false, false);
    c.check_line(here, 14, "insar-methods.md Appendix Z", false, false);
    c.check_line(here, 15, "(insar-methods §7.3)", false, false);
    c.check_line(here, 16, "insar-methods App. A", false, false);
    c.check_line(doc, 17, "bare §77.1 here", true, true);
    c.check_line(doc, 18, "[x](no-such-file.md)", true, true);
    c.check_line(doc, 19, "[x](formats.md#no-such-heading)", true, true);
    let lines: Vec<&str> = c
        .errors
        .iter()
        .map(|e| e.split(": ").next().unwrap())
        .collect();
    assert_eq!(
        lines,
        [
            "src/lib.rs:10",
            "src/lib.rs:11",
            "src/lib.rs:12",
            "src/lib.rs:13",
            "src/lib.rs:14",
            "src/lib.rs:15",
            "src/lib.rs:16",
            "docs/methods.md:17",
            "docs/methods.md:18", // not a file: the citation …
            "docs/methods.md:18", // … and the link
            "docs/methods.md:19",
        ],
        "{:#?}",
        c.errors
    );
}

#[test]
fn section_numbers_parse() {
    assert_eq!(section_number("8.3 C2"), Some(("8.3".into(), 3)));
    assert_eq!(section_number("1.2. Next"), Some(("1.2".into(), 3)));
    assert_eq!(section_number("11 item 7"), Some(("11".into(), 2)));
    assert_eq!(section_number("8.9-A"), Some(("8.9".into(), 3)));
    assert_eq!(section_number("x"), None);
    assert_eq!(
        anchor("0. Conventions and provenance marks"),
        "0-conventions-and-provenance-marks"
    );
}
