//! Unit-level render tests of the report stage: sample asset and portfolio PDFs, determinism,
//! no typst warnings, literal rendering of hostile names, template diagnostics, and the World's
//! file-access refusals. (End-to-end CLI tests live elsewhere.)
//!
//! Set `PLINTH_REPORT_PREVIEW=<dir>` to keep the rendered sample PDFs for a visual check.

use std::path::Path;
use std::process::Command;

use plinth::report::model::{AssessmentStatus, INSUFFICIENT_LABEL};
use plinth::report::render::{ReportJob, render_batch, render_pdf};
use plinth::report::sample;
use plinth::report::{ReportError, ReportShared};

fn render_job(shared: &ReportShared, job: ReportJob) -> Vec<u8> {
    let prepared = job.prepare().expect("prepare");
    let out = render_pdf(shared, &prepared).unwrap_or_else(|e| panic!("render failed: {e}"));
    assert!(
        out.warnings.is_empty(),
        "typst warnings (treated as errors): {:#?}",
        out.warnings
    );
    assert!(out.pdf.starts_with(b"%PDF"), "not a PDF");
    out.pdf
}

fn asset_job(name: &str) -> ReportJob {
    let (model, charts) = sample::assessed_asset(name).expect("sample");
    ReportJob::asset(model, charts)
}

fn preview(name: &str, pdf: &[u8]) {
    if let Ok(dir) = std::env::var("PLINTH_REPORT_PREVIEW") {
        std::fs::write(Path::new(&dir).join(name), pdf).expect("write preview");
    }
}

/// Text of a PDF via `pdftotext`, or `None` (with a printed note) when the tool is absent.
fn pdf_text(pdf: &[u8]) -> Option<String> {
    if Command::new("pdftotext").arg("-v").output().is_err() {
        eprintln!("note: pdftotext not installed; skipping the text extraction check");
        return None;
    }
    let dir = tempfile::tempdir().expect("tempdir");
    let path = dir.path().join("x.pdf");
    std::fs::write(&path, pdf).expect("write pdf");
    let out = Command::new("pdftotext")
        .args(["-enc", "UTF-8", "-raw"])
        .arg(&path)
        .arg("-")
        .output()
        .expect("run pdftotext");
    assert!(out.status.success(), "pdftotext failed");
    // Rotated axis titles come out one word per line: compare with whitespace collapsed.
    let text = String::from_utf8_lossy(&out.stdout);
    Some(text.split_whitespace().collect::<Vec<_>>().join(" "))
}

#[test]
fn sample_asset_renders_deterministically_without_warnings() {
    let shared = ReportShared::builtin();
    let a = render_job(&shared, asset_job("Kestrel Row 1–7"));
    let b = render_job(&shared, asset_job("Kestrel Row 1–7"));
    assert!(a == b, "two renders of the same model differ");
    preview("asset.pdf", &a);
    // A fresh shared state (new fonts, library, sources) gives the same bytes too.
    let c = render_job(&ReportShared::builtin(), asset_job("Kestrel Row 1–7"));
    assert!(a == c, "render differs across shared states");
    let text = String::from_utf8_lossy(&a);
    assert!(text.contains("Plinth "), "creator missing");
    if let Some(t) = pdf_text(&a) {
        for needle in [
            "Kestrel Row 1–7",
            "NF-0042",
            "Category 0 — Negligible",
            "Page 1 of",
            "Vertical displacement (mm, + up)",
            "Settlement (mm, + down, plotted downward)",
            "Deflection ratio |Δ/L| (%)",
            "not computed: the short axis",
            "screening assessment based on remote sensing",
            "Burland, J.B. (1995)",
            // Section numbers come from the heading show rule in plinth-style.typ.
            "1. Verdict summary",
            "6.1. Criteria set",
        ] {
            assert!(t.contains(needle), "PDF text lacks {needle:?}");
        }
    }
}

#[test]
fn insufficient_structure_reads_as_not_assessable() {
    let shared = ReportShared::builtin();
    let (model, charts) = sample::insufficient_asset().expect("sample");
    assert_eq!(model.verdict.status_code, "insufficient_data");
    let pdf = render_job(&shared, ReportJob::asset(model, charts));
    preview("asset-insufficient.pdf", &pdf);
    if let Some(t) = pdf_text(&pdf) {
        assert!(t.contains("Insufficient data — not assessable"), "{t}");
        assert!(t.contains(INSUFFICIENT_LABEL));
        assert!(
            !t.contains("Negligible"),
            "an insufficient structure must not read as category 0"
        );
        assert!(!t.contains("Category 0"));
    }
}

#[test]
fn sample_portfolio_renders_deterministically() {
    let shared = ReportShared::builtin();
    let job = || {
        let (model, charts) = sample::portfolio().expect("sample");
        ReportJob::portfolio(model, charts)
    };
    let a = render_job(&shared, job());
    let b = render_job(&shared, job());
    assert!(a == b, "two renders differ");
    preview("portfolio.pdf", &a);
    if let Some(t) = pdf_text(&a) {
        for needle in [
            "Ranked structures (worst first)",
            "Old Granary",
            "not assessable (insufficient data)",
            "2 — Slight",
        ] {
            assert!(t.contains(needle), "PDF text lacks {needle:?}");
        }
    }
}

#[test]
fn asset_model_fields_from_sample_data() {
    let (model, charts) = sample::assessed_asset("Kestrel Row 1–7").expect("sample");
    let job = ReportJob::asset(model, charts).prepare().expect("prepare");
    let v: serde_json::Value = serde_json::from_str(&job.data_json).expect("json");
    assert_eq!(v["structure"]["id"], "NF-0042");
    assert_eq!(v["structure"]["length"], "30.0 m");
    assert_eq!(v["window"]["start"], "2021-01-04");
    assert_eq!(v["window"]["span"], "3.0 yr");
    assert_eq!(v["meta"]["report_date"], "2024-06-30");
    assert_eq!(
        v["meta"]["tool"],
        format!("Plinth {}", env!("CARGO_PKG_VERSION"))
    );
    assert_eq!(v["verdict"]["headline"], "Category 0 — Negligible");
    assert_eq!(v["verdict"]["category"]["strain_band"], "0 – 0.050 %");
    assert_eq!(v["verdict"]["category_probability"], "94 %");
    assert_eq!(v["verdict"]["assessable"], true);
    // insar-methods.md §7.11: ω = 1.857e-4 (1/5386 in the note; 1/1.857e-4 rounds to 1/5385)
    assert_eq!(v["metrics"][4]["value"], "0.186 ×10⁻³ (1/5385)");
    assert_eq!(v["metrics"][6]["value"], "-0.0843 ×10⁻³ hogging");
    assert_eq!(v["metrics"][2]["value"], "-2.4 ± 0.4 mm/yr");
    assert_eq!(v["metrics"][9]["value"], "not computed");
    assert_eq!(v["metrics"][9]["computed"], false);
    // Figure slots follow the drawn charts: 1 profile drawn, 1 not computed with its reason.
    assert_eq!(v["figures"]["map"]["available"], true);
    assert_eq!(v["figures"]["map"]["file"], "/chart-map.svg");
    assert_eq!(v["figures"]["profiles"][0]["available"], true);
    assert_eq!(v["figures"]["profiles"][1]["available"], false);
    assert!(
        v["figures"]["profiles"][1]["caption"]
            .as_str()
            .unwrap_or("")
            .starts_with("not computed: ")
    );
    assert_eq!(job.charts.len(), 4);
    // Field order is declaration order (deterministic JSON).
    let keys: Vec<&str> = v
        .as_object()
        .map(|o| o.keys().map(String::as_str).collect())
        .unwrap_or_default();
    assert_eq!(
        keys,
        [
            "model_version",
            "meta",
            "structure",
            "window",
            "verdict",
            "narrative",
            "figures",
            "metrics",
            "criteria",
            "data_quality",
            "cautions",
            "works",
            "provenance"
        ]
    );
}

#[test]
fn hostile_names_render_literally() {
    let hostile = [
        "#panic(\"x\")",
        "*bold*",
        "$x$",
        "_it_",
        "@ref",
        "<lbl>",
        "back\\slash",
        "../../etc",
        "#read(\"/asset.typ\")",
    ];
    let name = hostile.join(" ") + "\n= Heading";
    let shared = ReportShared::builtin();
    let (mut model, charts) = sample::assessed_asset(&name).expect("sample");
    model.meta.portfolio_name = "Port*folio* #emph[x]".into();
    model
        .data_quality
        .assumptions
        .push(format!("user note: {name}"));
    let pdf = render_job(&shared, ReportJob::asset(model, charts));
    preview("asset-hostile.pdf", &pdf);
    if let Some(t) = pdf_text(&pdf) {
        for h in hostile {
            assert!(t.contains(h), "{h:?} not rendered literally");
        }
        // The name is one line in the title (newline collapsed), and the raw newline in the
        // assumption stays text: "= Heading" is never a heading.
        assert!(t.contains("= Heading"));
        assert!(t.contains("Port*folio* #emph[x]"));
    }
}

#[test]
fn syntax_error_names_file_line_and_column() {
    let dir = tempfile::tempdir().expect("tempdir");
    std::fs::write(
        dir.path().join("asset.typ"),
        "#let d = json(\"/data.json\")\n= Fine\n#let x = (1, 2\nmore text\n",
    )
    .expect("write");
    let shared = ReportShared::with_template_dir(dir.path()).expect("shared");
    let job = asset_job("Kestrel Row 1–7").prepare().expect("prepare");
    match render_pdf(&shared, &job) {
        Err(ReportError::Compile {
            template,
            diagnostics,
        }) => {
            assert_eq!(template, "asset.typ");
            assert!(diagnostics.contains("/asset.typ:3:"), "{diagnostics}");
            assert!(
                diagnostics.contains("#let x = (1, 2"),
                "source line missing: {diagnostics}"
            );
        }
        Ok(_) => panic!("a broken template produced a PDF"),
        Err(e) => panic!("unexpected error {e}"),
    }
}

#[test]
fn runtime_error_in_user_template_is_located() {
    let dir = tempfile::tempdir().expect("tempdir");
    std::fs::write(
        dir.path().join("asset.typ"),
        "#let d = json(\"/data.json\")\n\n#d.no_such_key\n",
    )
    .expect("write");
    let shared = ReportShared::with_template_dir(dir.path()).expect("shared");
    let job = asset_job("A").prepare().expect("prepare");
    let err = render_pdf(&shared, &job)
        .expect_err("must fail")
        .to_string();
    assert!(
        err.contains("/asset.typ:3:") && err.contains("no_such_key"),
        "{err}"
    );
}

#[test]
fn world_refuses_package_imports() {
    let dir = tempfile::tempdir().expect("tempdir");
    std::fs::write(
        dir.path().join("asset.typ"),
        "#import \"@preview/example:1.0.0\": *\nHello\n",
    )
    .expect("write");
    let shared = ReportShared::with_template_dir(dir.path()).expect("shared");
    let job = asset_job("A").prepare().expect("prepare");
    let err = render_pdf(&shared, &job)
        .expect_err("must fail")
        .to_string();
    assert!(err.contains("package imports are disabled"), "{err}");
    assert!(err.contains("/asset.typ:1:"), "{err}");
}

#[test]
fn world_refuses_paths_outside_the_template_folder() {
    let outside = tempfile::tempdir().expect("tempdir");
    std::fs::write(outside.path().join("secret.txt"), "TOP-SECRET-VALUE").expect("write");
    let dir = tempfile::tempdir().expect("tempdir");
    let secret = outside.path().join("secret.txt");
    // 1. `..` climbing out of the root: rejected before the World is asked.
    std::fs::write(
        dir.path().join("asset.typ"),
        "#read(\"../../../../../../etc/hostname\")\n",
    )
    .expect("write");
    let shared = ReportShared::with_template_dir(dir.path()).expect("shared");
    let job = asset_job("A").prepare().expect("prepare");
    assert!(
        render_pdf(&shared, &job).is_err(),
        "`..` escape was allowed"
    );
    // 2. An absolute path is looked up inside the template folder, not on the system.
    std::fs::write(
        dir.path().join("asset.typ"),
        format!("#read(\"{}\")\n", secret.display()),
    )
    .expect("write");
    let shared = ReportShared::with_template_dir(dir.path()).expect("shared");
    let err = render_pdf(&shared, &job)
        .expect_err("absolute path must not resolve")
        .to_string();
    assert!(err.contains("not found"), "{err}");
    // 3. A symlink inside the folder pointing out of it is refused.
    #[cfg(unix)]
    {
        std::os::unix::fs::symlink(&secret, dir.path().join("link.txt")).expect("symlink");
        std::fs::write(dir.path().join("asset.typ"), "#read(\"/link.txt\")\n").expect("write");
        let shared = ReportShared::with_template_dir(dir.path()).expect("shared");
        let err = render_pdf(&shared, &job)
            .expect_err("symlink must be refused")
            .to_string();
        assert!(err.contains("access denied"), "{err}");
        assert!(!err.contains("TOP-SECRET-VALUE"));
    }
}

#[test]
fn batch_on_threads_matches_sequential_and_reports_failures() {
    let shared = ReportShared::builtin();
    let names = ["Alpha", "Beta", "Gamma", "Delta"];
    let sequential: Vec<Vec<u8>> = names
        .iter()
        .map(|n| render_job(&shared, asset_job(n)))
        .collect();
    let mut jobs: Vec<ReportJob> = names.iter().map(|n| asset_job(n)).collect();
    // One job with a missing template fails alone.
    jobs.push(match asset_job("Broken") {
        ReportJob::Asset { model, charts, .. } => ReportJob::Asset {
            template: "no-such-template.typ".into(),
            model,
            charts,
        },
        other => other,
    });
    let mut got: Vec<Option<Vec<u8>>> = vec![None; names.len()];
    let summary = render_batch(&shared, jobs, 2, false, |out| {
        if let Ok(pdf) = out.result {
            assert!(out.data_json.is_some());
            got[out.index] = Some(pdf.pdf);
        }
    });
    assert_eq!(summary.rendered, 4);
    assert_eq!(summary.failed, vec![(4, "NF-0042".to_string())]);
    for (i, pdf) in got.into_iter().enumerate() {
        assert!(
            pdf.as_deref() == Some(sequential[i].as_slice()),
            "batch output {i} differs"
        );
    }
}

#[test]
fn status_codes_are_stable() {
    assert_eq!(
        AssessmentStatus::InsufficientData.code(),
        "insufficient_data"
    );
    assert_eq!(
        AssessmentStatus::InsufficientData.label(),
        INSUFFICIENT_LABEL
    );
}
