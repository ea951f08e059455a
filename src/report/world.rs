//! Our own `typst::World`: the environment a report template compiles in.
//!
//! Owns: the process-wide shared state ([`ReportShared`]: standard library, font book and
//! fonts, templates and their parsed sources) and the per-report world ([`ReportWorld`]:
//! virtual data/chart files at FIXED names and the report date). Also owns the file-access
//! rules: virtual files first; package imports refused; disk files only inside the user
//! template folder (canonicalised, so symlinks pointing out are refused); built-in templates
//! (embedded with `include_str!`) as the fallback; `today()` is the report date from the data.
//!
//! Does not own: compiling, PDF export, diagnostics formatting (see [`super::render`]).
//!
//! Fixed virtual names matter: typst interns every file id in a process-global table of at
//! most 65 535 entries that is never freed (typst-embedding.md §1.3), so per-report content
//! always lives at `/data.json` and `/chart-*.svg`, never at per-asset names.

use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::sync::Mutex;

use typst::diag::{FileError, FileResult, PackageError};
use typst::foundations::{Bytes, Datetime};
use typst::syntax::{FileId, RootedPath, Source, VirtualPath, VirtualRoot};
use typst::text::{Font, FontBook};
use typst::utils::LazyHash;
use typst::{Library, LibraryExt, World};

use super::ReportError;
use super::model::ReportDate;

/// Virtual path of the report model JSON.
pub const DATA_PATH: &str = "/data.json";

/// Font family of the bundled sans-serif face (body text and charts).
pub const SANS_FAMILY: &str = "DejaVu Sans";

/// Built-in template files, by file name. A user template folder overrides them by name.
const BUILTIN_FILES: &[(&str, &str)] = &[
    ("asset.typ", include_str!("../../templates/asset.typ")),
    (
        "portfolio.typ",
        include_str!("../../templates/portfolio.typ"),
    ),
    (
        "plinth-style.typ",
        include_str!("../../templates/plinth-style.typ"),
    ),
];

/// DejaVu Sans (regular and bold), bundled so no system font is needed; licence in
/// `templates/fonts/LICENSE-DejaVu.txt`.
const BUNDLED_FONTS: &[&[u8]] = &[
    include_bytes!("../../templates/fonts/DejaVuSans.ttf"),
    include_bytes!("../../templates/fonts/DejaVuSans-Bold.ttf"),
];

/// The fixed virtual files a chart can occupy.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum ChartFile {
    /// Asset plan map.
    Map,
    /// Asset time series.
    TimeSeries,
    /// Profile along the first principal axis.
    ProfileA,
    /// Profile along the second principal axis.
    ProfileB,
    /// Damage interaction chart.
    Interaction,
    /// Portfolio overview map.
    PortfolioMap,
    /// Planned works: plan view.
    WorksPlan,
    /// Planned works: predicted against observed.
    WorksComparison,
}

impl ChartFile {
    /// The fixed virtual path the template uses with `image(...)`.
    pub fn virtual_path(self) -> &'static str {
        match self {
            Self::Map => "/chart-map.svg",
            Self::TimeSeries => "/chart-ts.svg",
            Self::ProfileA => "/chart-profile-a.svg",
            Self::ProfileB => "/chart-profile-b.svg",
            Self::Interaction => "/chart-interaction.svg",
            Self::PortfolioMap => "/chart-portfolio-map.svg",
            Self::WorksPlan => "/chart-works-plan.svg",
            Self::WorksComparison => "/chart-works-comparison.svg",
        }
    }

    /// The chart's drawing without its text (see [`super::charts::labels`]).
    pub fn art_path(self) -> &'static str {
        match self {
            Self::Map => "/chart-map-art.svg",
            Self::TimeSeries => "/chart-ts-art.svg",
            Self::ProfileA => "/chart-profile-a-art.svg",
            Self::ProfileB => "/chart-profile-b-art.svg",
            Self::Interaction => "/chart-interaction-art.svg",
            Self::PortfolioMap => "/chart-portfolio-map-art.svg",
            Self::WorksPlan => "/chart-works-plan-art.svg",
            Self::WorksComparison => "/chart-works-comparison-art.svg",
        }
    }

    /// The chart's drawing without its text as a one-page PDF (see
    /// [`super::charts::pdf_art`]).
    pub fn art_pdf_path(self) -> &'static str {
        match self {
            Self::Map => "/chart-map-art.pdf",
            Self::TimeSeries => "/chart-ts-art.pdf",
            Self::ProfileA => "/chart-profile-a-art.pdf",
            Self::ProfileB => "/chart-profile-b-art.pdf",
            Self::Interaction => "/chart-interaction-art.pdf",
            Self::PortfolioMap => "/chart-portfolio-map-art.pdf",
            Self::WorksPlan => "/chart-works-plan-art.pdf",
            Self::WorksComparison => "/chart-works-comparison-art.pdf",
        }
    }

    /// The chart's text labels as JSON (see [`super::charts::labels`]).
    pub fn labels_path(self) -> &'static str {
        match self {
            Self::Map => "/chart-map-labels.json",
            Self::TimeSeries => "/chart-ts-labels.json",
            Self::ProfileA => "/chart-profile-a-labels.json",
            Self::ProfileB => "/chart-profile-b-labels.json",
            Self::Interaction => "/chart-interaction-labels.json",
            Self::PortfolioMap => "/chart-portfolio-map-labels.json",
            Self::WorksPlan => "/chart-works-plan-labels.json",
            Self::WorksComparison => "/chart-works-comparison-labels.json",
        }
    }
}

/// Process-wide state shared by every report: library, fonts, templates, parsed sources.
/// Build it once; it is `Sync`, so worker threads share one instance by reference.
pub struct ReportShared {
    library: LazyHash<Library>,
    book: LazyHash<FontBook>,
    fonts: Vec<Font>,
    /// Canonicalised user template folder, if any.
    user_dir: Option<PathBuf>,
    /// Parsed `.typ` sources, by file id (template files only; never per-report data).
    sources: Mutex<HashMap<FileId, Source>>,
}

impl std::fmt::Debug for ReportShared {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("ReportShared")
            .field("fonts", &self.fonts.len())
            .field("user_dir", &self.user_dir)
            .finish_non_exhaustive()
    }
}

impl ReportShared {
    /// Shared state with the built-in templates only.
    pub fn builtin() -> Self {
        let mut fonts: Vec<Font> = typst_kit::fonts::embedded().map(|(font, _)| font).collect();
        for data in BUNDLED_FONTS {
            fonts.extend(Font::iter(Bytes::new(*data)));
        }
        let book = FontBook::from_fonts(&fonts);
        Self {
            library: LazyHash::new(Library::builder().build()),
            book: LazyHash::new(book),
            fonts,
            user_dir: None,
            sources: Mutex::new(HashMap::new()),
        }
    }

    /// Shared state whose templates come from `dir` first (by file name), falling back to the
    /// built-in ones. The folder must exist and be a directory.
    pub fn with_template_dir(dir: &Path) -> Result<Self, ReportError> {
        let canonical = dir
            .canonicalize()
            .map_err(|e| ReportError::TemplateFolder {
                path: dir.display().to_string(),
                reason: e.to_string(),
            })?;
        if !canonical.is_dir() {
            return Err(ReportError::TemplateFolder {
                path: dir.display().to_string(),
                reason: "not a directory".to_string(),
            });
        }
        let mut shared = Self::builtin();
        shared.user_dir = Some(canonical);
        Ok(shared)
    }

    /// Names of the built-in template files.
    pub fn builtin_names() -> Vec<&'static str> {
        BUILTIN_FILES.iter().map(|(name, _)| *name).collect()
    }

    /// The text of a built-in template file (for `plinth templates export`-style commands).
    pub fn builtin_text(name: &str) -> Option<&'static str> {
        BUILTIN_FILES
            .iter()
            .find(|(n, _)| *n == name)
            .map(|(_, text)| *text)
    }

    /// Number of font faces available (embedded typst faces plus the bundled sans).
    pub fn font_count(&self) -> usize {
        self.fonts.len()
    }

    /// The file id of a template by name (`asset.typ`), if the template exists in the user
    /// folder or among the built-ins.
    pub fn template_id(&self, name: &str) -> Result<FileId, ReportError> {
        let not_found = || ReportError::TemplateNotFound {
            name: name.to_string(),
            searched: match &self.user_dir {
                Some(d) => format!("looked in {} and the built-in templates", d.display()),
                None => "looked in the built-in templates".to_string(),
            },
        };
        let vpath = VirtualPath::new(format!("/{name}")).map_err(|_| not_found())?;
        let id = RootedPath::new(VirtualRoot::Project, vpath).intern();
        match self.read_template_file(id) {
            Ok(_) => Ok(id),
            Err(_) => Err(not_found()),
        }
    }

    /// Reads a template-side file (not per-report data): user folder first, then built-ins.
    fn read_template_file(&self, id: FileId) -> FileResult<Bytes> {
        if let VirtualRoot::Package(spec) = id.root() {
            return Err(FileError::Package(PackageError::Other(Some(
                format!(
                    "package imports are disabled in Plinth reports (requested {spec}); \
                     copy the code you need into the template folder"
                )
                .into(),
            ))));
        }
        let name = id.vpath().get_without_slash();
        if let Some(dir) = &self.user_dir {
            if let Some(bytes) = read_inside(dir, id.vpath())? {
                return Ok(bytes);
            }
        }
        BUILTIN_FILES
            .iter()
            .find(|(n, _)| *n == name)
            .map(|(_, text)| Bytes::new(text.as_bytes()))
            // The virtual path, not a real one, so no folder layout leaks into messages.
            .ok_or_else(|| FileError::NotFound(PathBuf::from(id.vpath().get_with_slash())))
    }

    fn source_of(&self, id: FileId) -> FileResult<Source> {
        if let Ok(cache) = self.sources.lock() {
            if let Some(source) = cache.get(&id) {
                return Ok(source.clone());
            }
        }
        let bytes = self.read_template_file(id)?;
        let text = std::str::from_utf8(bytes.as_slice()).map_err(|_| FileError::InvalidUtf8)?;
        let source = Source::new(id, text.to_string());
        if let Ok(mut cache) = self.sources.lock() {
            cache.insert(id, source.clone());
        }
        Ok(source)
    }
}

/// Reads `vpath` inside `root` (already canonical). `Ok(None)` when the file does not exist
/// there; `AccessDenied` when the canonical path leaves `root` (symlink out); `IsDirectory`
/// for folders.
fn read_inside(root: &Path, vpath: &VirtualPath) -> FileResult<Option<Bytes>> {
    let real = vpath.realize(root).map_err(FileError::Realize)?;
    let canonical = match real.canonicalize() {
        Ok(p) => p,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(None),
        Err(e) => return Err(FileError::from_io(e, &real)),
    };
    if !canonical.starts_with(root) {
        return Err(FileError::AccessDenied);
    }
    if canonical.is_dir() {
        return Err(FileError::IsDirectory);
    }
    std::fs::read(&canonical)
        .map(|data| Some(Bytes::new(data)))
        .map_err(|e| FileError::from_io(e, Path::new(vpath.get_with_slash())))
}

/// The world of one report: shared state plus this report's virtual files and date.
pub struct ReportWorld<'a> {
    shared: &'a ReportShared,
    main: FileId,
    files: HashMap<FileId, Bytes>,
    today: Datetime,
}

impl<'a> ReportWorld<'a> {
    /// A world compiling template `template` with the model JSON and chart SVGs.
    pub fn new(
        shared: &'a ReportShared,
        template: &str,
        data_json: String,
        charts: Vec<(ChartFile, String)>,
        date: ReportDate,
    ) -> Result<Self, ReportError> {
        let main = shared.template_id(template)?;
        let mut files = HashMap::new();
        files.insert(virtual_id(DATA_PATH), Bytes::from_string(data_json));
        for (file, svg) in charts {
            insert_chart(&mut files, file, svg);
        }
        let month = u8::try_from(date.month).ok();
        let day = u8::try_from(date.day).ok();
        let today = month
            .zip(day)
            .and_then(|(m, d)| Datetime::from_ymd(date.year, m, d))
            .ok_or_else(|| ReportError::Model {
                ident: template.to_string(),
                reason: format!("invalid report date {}", date.iso()),
            })?;
        Ok(Self {
            shared,
            main,
            files,
            today,
        })
    }
}

/// Serves a chart up to four ways: the full SVG at its virtual path (for templates that place
/// it as an image), its drawing without text as a one-page PDF when the drawing has the plain
/// form plotters writes (see [`super::charts::pdf_art`]; the labels JSON then names it under
/// `art`), the drawing as SVG (`…-art.svg`; alike shapes merged, see
/// [`super::charts::compact`], unless the PDF is served), and the labels as JSON (for
/// `chart-image` in `plinth-style.typ`, which sets the text with typst; much faster, see
/// [`super::charts::labels`]). An SVG that cannot be split is served as its own drawing with
/// no labels, so `chart-image` still shows it whole.
fn insert_chart(files: &mut HashMap<FileId, Bytes>, file: ChartFile, svg: String) {
    let split = super::charts::labels::split(&svg).and_then(|(art, mut labels)| {
        let pdf = super::charts::pdf_art::to_pdf(&art, labels.width, labels.height);
        if pdf.is_some() {
            labels.art = Some(file.art_pdf_path().to_string());
        }
        let labels = serde_json::to_string(&labels).ok()?;
        let art = match pdf {
            // Only templates of their own still read the SVG drawing: served as split.
            Some(_) => art,
            None => super::charts::compact::merge_runs(&art),
        };
        Some((art, labels, pdf))
    });
    let (art, labels) = match split {
        Some((art, labels, pdf)) => {
            if let Some(pdf) = pdf {
                files.insert(virtual_id(file.art_pdf_path()), Bytes::new(pdf));
            }
            (art, labels)
        }
        None => (svg.clone(), UNSPLIT_LABELS.to_string()),
    };
    files.insert(virtual_id(file.art_path()), Bytes::from_string(art));
    files.insert(virtual_id(file.labels_path()), Bytes::from_string(labels));
    files.insert(virtual_id(file.virtual_path()), Bytes::from_string(svg));
}

/// Labels of an SVG that was not split: no text to set; width 0 tells `chart-image` to size
/// the drawing from the image itself.
const UNSPLIT_LABELS: &str = r#"{"width":0,"height":0,"labels":[]}"#;

/// The interned id of a fixed virtual path. Only called with the constant names above.
fn virtual_id(path: &str) -> FileId {
    let vpath = VirtualPath::new(path).unwrap_or_else(|_| {
        // The names are compile-time constants that are valid virtual paths.
        unreachable!("invalid built-in virtual path {path}")
    });
    RootedPath::new(VirtualRoot::Project, vpath).intern()
}

impl World for ReportWorld<'_> {
    fn library(&self) -> &LazyHash<Library> {
        &self.shared.library
    }

    fn book(&self) -> &LazyHash<FontBook> {
        &self.shared.book
    }

    fn main(&self) -> FileId {
        self.main
    }

    fn source(&self, id: FileId) -> FileResult<Source> {
        if self.files.contains_key(&id) {
            return Err(FileError::NotSource);
        }
        self.shared.source_of(id)
    }

    fn file(&self, id: FileId) -> FileResult<Bytes> {
        if let Some(bytes) = self.files.get(&id) {
            return Ok(bytes.clone());
        }
        self.shared.read_template_file(id)
    }

    fn font(&self, index: usize) -> Option<Font> {
        self.shared.fonts.get(index).cloned()
    }

    fn today(&self, _offset: Option<typst::foundations::Duration>) -> Option<Datetime> {
        Some(self.today)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn world<'a>(shared: &'a ReportShared) -> ReportWorld<'a> {
        ReportWorld::new(
            shared,
            "asset.typ",
            "{}".to_string(),
            vec![],
            ReportDate::new(2024, 6, 30).unwrap(),
        )
        .unwrap()
    }

    fn id(path: &str) -> FileId {
        RootedPath::new(VirtualRoot::Project, VirtualPath::new(path).unwrap()).intern()
    }

    #[test]
    fn fonts_include_bundled_sans() {
        let shared = ReportShared::builtin();
        assert!(shared.book.contains_family("dejavu sans"));
        assert!(shared.font_count() >= 19);
    }

    #[test]
    fn virtual_files_come_first_and_data_is_not_source() {
        let shared = ReportShared::builtin();
        let w = world(&shared);
        assert_eq!(w.file(id(DATA_PATH)).unwrap().as_slice(), b"{}");
        assert!(matches!(w.source(id(DATA_PATH)), Err(FileError::NotSource)));
        assert!(w.source(w.main()).is_ok());
    }

    #[test]
    fn package_imports_are_refused() {
        let shared = ReportShared::builtin();
        let w = world(&shared);
        let spec: typst::syntax::package::PackageSpec = "@preview/example:1.0.0".parse().unwrap();
        let pkg = RootedPath::new(
            VirtualRoot::Package(spec),
            VirtualPath::new("/typst.toml").unwrap(),
        )
        .intern();
        match w.file(pkg) {
            Err(FileError::Package(PackageError::Other(Some(msg)))) => {
                assert!(msg.contains("package imports are disabled"))
            }
            other => panic!("expected a package refusal, got {other:?}"),
        }
    }

    #[test]
    fn unknown_files_are_not_found_by_virtual_name() {
        let shared = ReportShared::builtin();
        let w = world(&shared);
        match w.file(id("/etc/passwd")) {
            Err(FileError::NotFound(p)) => assert_eq!(p, PathBuf::from("/etc/passwd")),
            other => panic!("expected not found, got {other:?}"),
        }
    }

    #[test]
    fn charts_are_served_whole_and_split() {
        let shared = ReportShared::builtin();
        let svg = concat!(
            "<svg width=\"20\" height=\"10\">\n",
            "<text x=\"1\" y=\"2\" dy=\"0.76em\" text-anchor=\"start\" font-family=\"DejaVu Sans\" ",
            "font-size=\"9\" opacity=\"1\" fill=\"#212121\">\nmm\n</text>\n</svg>\n"
        );
        let odd = "<svg viewBox=\"0 0 1 1\"><text>x</text></svg>";
        let w = ReportWorld::new(
            &shared,
            "asset.typ",
            "{}".to_string(),
            vec![
                (ChartFile::Map, svg.to_string()),
                (ChartFile::TimeSeries, odd.to_string()),
            ],
            ReportDate::new(2024, 6, 30).unwrap(),
        )
        .unwrap();
        let text = |path: &str| String::from_utf8(w.file(id(path)).unwrap().to_vec()).unwrap();
        assert_eq!(text("/chart-map.svg"), svg);
        assert_eq!(
            text("/chart-map-art.svg"),
            "<svg width=\"20\" height=\"10\">\n</svg>\n"
        );
        let labels: serde_json::Value =
            serde_json::from_str(&text("/chart-map-labels.json")).unwrap();
        assert_eq!(labels["labels"][0]["text"], "mm");
        // Not splittable: the drawing is the whole SVG and there are no labels to set.
        assert_eq!(text("/chart-ts-art.svg"), odd);
        assert_eq!(text("/chart-ts-labels.json"), UNSPLIT_LABELS);
    }

    #[test]
    fn today_is_the_report_date() {
        let shared = ReportShared::builtin();
        let w = world(&shared);
        assert_eq!(w.today(None), Datetime::from_ymd(2024, 6, 30));
    }

    #[test]
    fn missing_template_is_a_clear_error() {
        let shared = ReportShared::builtin();
        let err = shared.template_id("nope.typ").unwrap_err();
        assert!(err.to_string().contains("nope.typ"), "{err}");
    }

    #[cfg(unix)]
    #[test]
    fn user_folder_overrides_and_refuses_symlinks_out() {
        let outside = tempfile::tempdir().unwrap();
        std::fs::write(outside.path().join("secret.txt"), "s3cret").unwrap();
        let dir = tempfile::tempdir().unwrap();
        std::fs::write(dir.path().join("asset.typ"), "user template").unwrap();
        std::fs::write(dir.path().join("logo.txt"), "inside").unwrap();
        std::os::unix::fs::symlink(
            outside.path().join("secret.txt"),
            dir.path().join("link.txt"),
        )
        .unwrap();
        std::fs::create_dir(dir.path().join("sub")).unwrap();
        let shared = ReportShared::with_template_dir(dir.path()).unwrap();
        let w = world(&shared);
        assert_eq!(w.source(w.main()).unwrap().text(), "user template");
        assert_eq!(w.file(id("/logo.txt")).unwrap().as_slice(), b"inside");
        assert!(matches!(
            w.file(id("/link.txt")),
            Err(FileError::AccessDenied)
        ));
        assert!(matches!(w.file(id("/sub")), Err(FileError::IsDirectory)));
        // Built-ins not overridden remain available.
        assert!(w.file(id("/portfolio.typ")).is_ok());
    }
}
