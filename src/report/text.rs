//! User-editable narrative and caution text blocks (`templates/text/*.j2`), rendered with
//! minijinja to PLAIN TEXT and handed to typst as data strings.
//!
//! Owns: loading the built-in blocks (embedded with `include_str!`), overriding them by file
//! name from `<template folder>/text/`, rendering with a context of plain values, and splitting
//! the result into paragraphs (blank-line separated; line breaks inside a paragraph are joined
//! with a space).
//!
//! Does not own: the typst templates. The output is never typst markup and is never pasted into
//! typst source: it travels in `/data.json`, so a user's `*`, `#` or `$` prints literally
//! (typst-embedding.md §5). minijinja here produces text only; there is no auto-escaping because
//! there is nothing to escape into, and the templates never call `eval`.
//!
//! Undefined placeholders are an error (strict mode), so a typo in a user block is reported with
//! its line instead of silently printing nothing.

use std::collections::BTreeMap;
use std::path::Path;

use minijinja::{Environment, UndefinedBehavior, Value};

use super::ReportError;

/// Built-in text blocks by file name.
const BUILTIN_BLOCKS: &[(&str, &str)] = &[
    (
        "asset_narrative.j2",
        include_str!("../../templates/text/asset_narrative.j2"),
    ),
    (
        "asset_cautions.j2",
        include_str!("../../templates/text/asset_cautions.j2"),
    ),
    (
        "portfolio_narrative.j2",
        include_str!("../../templates/text/portfolio_narrative.j2"),
    ),
    (
        "portfolio_cautions.j2",
        include_str!("../../templates/text/portfolio_cautions.j2"),
    ),
];

/// The placeholder values of one text block rendering (name → value). A `BTreeMap`, so the
/// order never depends on hashing.
#[derive(Debug, Clone, Default)]
pub struct TextContext {
    values: BTreeMap<String, Value>,
}

impl TextContext {
    /// An empty context.
    pub fn new() -> Self {
        Self::default()
    }

    /// Adds a string placeholder (e.g. `structure_name`).
    pub fn text(mut self, name: &str, value: impl Into<String>) -> Self {
        self.values
            .insert(name.to_string(), Value::from(value.into()));
        self
    }

    /// Adds a boolean placeholder (for `{% if %}` blocks).
    pub fn flag(mut self, name: &str, value: bool) -> Self {
        self.values.insert(name.to_string(), Value::from(value));
        self
    }

    /// Adds a list of strings.
    pub fn list(mut self, name: &str, values: &[String]) -> Self {
        let seq: Value = values.iter().map(|s| Value::from(s.as_str())).collect();
        self.values.insert(name.to_string(), seq);
        self
    }
}

/// The loaded text blocks.
pub struct TextBlocks {
    env: Environment<'static>,
}

impl std::fmt::Debug for TextBlocks {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("TextBlocks").finish_non_exhaustive()
    }
}

impl TextBlocks {
    /// The built-in blocks only.
    pub fn builtin() -> Result<Self, ReportError> {
        Self::load(None)
    }

    /// Built-in blocks, overridden by `<dir>/text/<name>.j2` files of the same name.
    pub fn with_template_dir(dir: &Path) -> Result<Self, ReportError> {
        Self::load(Some(dir))
    }

    fn load(dir: Option<&Path>) -> Result<Self, ReportError> {
        let mut env = Environment::new();
        env.set_undefined_behavior(UndefinedBehavior::Strict);
        let syntax = minijinja::syntax::SyntaxConfig::builder()
            .trim_blocks(true)
            .lstrip_blocks(true)
            .build()
            .map_err(|e| text_error("syntax configuration", &e))?;
        env.set_syntax(syntax);
        for (name, builtin) in BUILTIN_BLOCKS {
            let source = match dir.map(|d| d.join("text").join(name)) {
                Some(path) if path.is_file() => {
                    std::fs::read_to_string(&path).map_err(|e| ReportError::Text {
                        name: path.display().to_string(),
                        reason: e.to_string(),
                    })?
                }
                _ => builtin.to_string(),
            };
            env.add_template_owned(name.to_string(), source)
                .map_err(|e| text_error(name, &e))?;
        }
        Ok(Self { env })
    }

    /// Renders block `name` and splits it into paragraphs of plain text.
    pub fn paragraphs(
        &self,
        name: &str,
        context: &TextContext,
    ) -> Result<Vec<String>, ReportError> {
        let template = self
            .env
            .get_template(name)
            .map_err(|e| text_error(name, &e))?;
        let text = template
            .render(Value::from(context.values.clone()))
            .map_err(|e| text_error(name, &e))?;
        Ok(split_paragraphs(&text))
    }
}

fn text_error(name: &str, e: &minijinja::Error) -> ReportError {
    let mut reason = e.to_string();
    if let Some(line) = e.line() {
        reason = format!("line {line}: {reason}");
    }
    ReportError::Text {
        name: name.to_string(),
        reason,
    }
}

/// Splits text at blank lines; joins the lines of each paragraph with one space; drops empty
/// paragraphs.
fn split_paragraphs(text: &str) -> Vec<String> {
    let mut out = Vec::new();
    let mut current: Vec<&str> = Vec::new();
    for line in text.lines().map(str::trim) {
        if line.is_empty() {
            if !current.is_empty() {
                out.push(current.join(" "));
                current.clear();
            }
        } else {
            current.push(line);
        }
    }
    if !current.is_empty() {
        out.push(current.join(" "));
    }
    out
}

/// The full set of placeholders the built-in blocks use, with harmless sample values; handy for
/// checking a user's edited block.
pub fn sample_context() -> TextContext {
    TextContext::new()
        .text("structure_name", "Sample structure")
        .text("structure_id", "S-001")
        .text("portfolio_name", "Sample portfolio")
        .text("window_start", "2021-01-01")
        .text("window_end", "2024-01-01")
        .text("verdict", "Category 0 — Negligible")
        .text("evidence_grade", "medium")
        .text("reference", "the processing reference area")
        .text("velocity", "-1.0 ± 0.2 mm/yr")
        .text("n_structures", "1")
        .text("n_assessed", "1")
        .text("n_not_assessable", "0")
        .flag("assessable", true)
        .flag("single_geometry", false)
        .list("reasons", &[])
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_builtin_block_renders_with_the_sample_context() {
        let blocks = TextBlocks::builtin().unwrap();
        for (name, _) in BUILTIN_BLOCKS {
            let paras = blocks.paragraphs(name, &sample_context()).unwrap();
            assert!(!paras.is_empty(), "{name} rendered empty");
            for p in &paras {
                assert!(!p.contains("{{") && !p.contains("{%"), "{name}: {p}");
            }
        }
    }

    #[test]
    fn cautions_cover_the_required_topics() {
        let blocks = TextBlocks::builtin().unwrap();
        let text = blocks
            .paragraphs("asset_cautions.j2", &sample_context())
            .unwrap()
            .join(" ")
            .to_lowercase();
        for needle in [
            "screening",
            "relative to",
            "north–south",
            "thermal",
            "seasonal",
            "not a substitute",
            "local codes",
        ] {
            assert!(text.contains(needle), "cautions lack `{needle}`");
        }
    }

    #[test]
    fn user_values_stay_plain_text() {
        let blocks = TextBlocks::builtin().unwrap();
        let ctx = sample_context().text("structure_name", "#panic(\"x\") {{ oops }}");
        let text = blocks
            .paragraphs("asset_narrative.j2", &ctx)
            .unwrap()
            .join(" ");
        assert!(text.contains("#panic(\"x\") {{ oops }}"), "{text}");
    }

    #[test]
    fn undefined_placeholder_names_the_block_and_line() {
        let dir = tempfile::tempdir().unwrap();
        std::fs::create_dir(dir.path().join("text")).unwrap();
        std::fs::write(
            dir.path().join("text/asset_cautions.j2"),
            "ok\n{{ no_such_value }}\n",
        )
        .unwrap();
        let blocks = TextBlocks::with_template_dir(dir.path()).unwrap();
        let err = blocks
            .paragraphs("asset_cautions.j2", &sample_context())
            .unwrap_err()
            .to_string();
        assert!(
            err.contains("asset_cautions.j2") && err.contains("line 2"),
            "{err}"
        );
    }

    #[test]
    fn paragraphs_split_on_blank_lines() {
        assert_eq!(
            split_paragraphs("a\nb\n\n\nc\n"),
            vec!["a b".to_string(), "c".to_string()]
        );
    }
}
