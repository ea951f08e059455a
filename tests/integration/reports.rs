//! Reports: `plinth assess` writes one PDF (and its model JSON) per structure plus the portfolio
//! overview; content, page counts, determinism, hostile names, broken user templates and
//! `--no-reports`. Text checks use `pdftotext`/`pdfinfo` (poppler) and are skipped with a note
//! when those tools are missing.

use std::path::{Path, PathBuf};
use std::process::Command;

use crate::fixture::*;

const INC: f64 = 38.0;
const HEAD: f64 = -12.0;

/// Category names as printed (damage-relations.md §3.2; "4–5" combined).
const CATEGORY_NAMES: [&str; 6] = [
    "Negligible",
    "Very slight",
    "Slight",
    "Moderate",
    "Severe to very severe",
    "Severe to very severe",
];

/// Hostile id/name pairs: typst markup, maths, a function call and a path escape.
const HOSTILE: [(&str, &str); 2] = [
    ("#panic(\"x\")", "*bold* $x$"),
    ("../../etc", "#panic(\"y\")"),
];

/// A settling block `A` (−6 mm/yr, sagging shape), a hostile-named assessed block, and a
/// hostile-id structure without points (insufficient data).
fn scenario(extra: &str) -> (Fx, PathBuf) {
    let ds = dates("2023-01-03", 12, 61);
    let t = years(&ds);
    let u = unit(INC, HEAD);
    let mut points = Vec::new();
    for (block, cx) in [("a", 0.0), ("h", 120.0)] {
        for k in 0..15 {
            let e = -8.0 + (k % 5) as f64 * 4.0;
            let n = -3.0 + (k / 5) as f64 * 3.0;
            // Sagging: the middle settles 4 mm/yr more than the ends.
            let v_up = -6.0 - 4.0 * (1.0 - (e / 8.0).powi(2));
            let values = t
                .iter()
                .enumerate()
                .map(|(i, ti)| u[2] * v_up * ti + 0.6 * wiggle(i, k))
                .collect();
            points.push(FxPoint {
                id: format!("{block}{k}"),
                e: cx + e,
                n,
                coherence: 0.9,
                values,
            });
        }
    }
    let d = FxDataset {
        name: "asc".into(),
        pass: "ascending".into(),
        incidence_deg: INC,
        heading_deg: HEAD,
        dates: ds,
        points,
    };
    let st = |id: &str, name: &str, cx: f64| FxStructure {
        id: id.into(),
        name: name.into(),
        height_m: Some(8.0),
        structure: Some("masonry".into()),
        rings: vec![rect(cx, 0.0, 20.0, 10.0, 0.0)],
    };
    let ss = vec![
        st("A", "Block A (test)", 0.0),
        st(HOSTILE[0].0, HOSTILE[0].1, 120.0),
        st(HOSTILE[1].0, HOSTILE[1].1, 240.0),
    ];
    let fx = Fx::new();
    let p = fx.write_portfolio(&ss, &[d], extra);
    (fx, p)
}

fn have(tool: &str) -> bool {
    let ok = Command::new(tool)
        .arg("-v")
        .output()
        .map(|o| o.status.success() || !o.stderr.is_empty())
        .unwrap_or(false);
    if !ok {
        println!("note: `{tool}` not found; PDF text checks skipped (install poppler-utils)");
    }
    ok
}

fn pdf_text(pdf: &Path) -> String {
    let o = Command::new("pdftotext")
        .args([pdf.to_str().unwrap(), "-"])
        .output()
        .unwrap();
    assert!(o.status.success(), "pdftotext failed on {}", pdf.display());
    String::from_utf8_lossy(&o.stdout).into_owned()
}

fn pdf_pages(pdf: &Path) -> usize {
    let o = Command::new("pdfinfo").arg(pdf).output().unwrap();
    let info = String::from_utf8_lossy(&o.stdout).into_owned();
    info.lines()
        .find_map(|l| l.strip_prefix("Pages:"))
        .and_then(|v| v.trim().parse().ok())
        .unwrap_or_else(|| panic!("no page count for {}: {info}", pdf.display()))
}

/// Every file under `dir`, relative, sorted.
fn files_under(dir: &Path) -> Vec<PathBuf> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            } else {
                out.push(p.strip_prefix(dir).unwrap().to_path_buf());
            }
        }
    }
    out.sort();
    out
}

/// Checks every structure's report and the overview of one finished run.
fn check_reports(out: &Path, r: &serde_json::Value) {
    let structures = r["structures"].as_array().unwrap();
    assert!(out.join("portfolio.pdf").is_file());
    assert!(out.join("portfolio.json").is_file());
    let text_tools = have("pdftotext") && have("pdfinfo");
    // The reports print the inputs' SHA-256 the run computed once for the manifest.
    let manifest: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("manifest.json")).unwrap()).unwrap();
    let hashed: Vec<&str> = manifest["inputs"]
        .as_array()
        .unwrap()
        .iter()
        .map(|i| i["sha256"].as_str().unwrap())
        .collect();
    for s in structures {
        let stem = s["report_file"].as_str().unwrap();
        let pdf = out.join("reports").join(format!("{stem}.pdf"));
        let json = out.join("reports").join(format!("{stem}.json"));
        assert!(pdf.is_file(), "missing {}", pdf.display());
        let model: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
        assert_eq!(model["structure"]["id"], s["id"]);
        assert_eq!(model["structure"]["name"], s["name"]);
        let printed = model["provenance"]["inputs"].as_array().unwrap();
        assert!(!printed.is_empty());
        for i in printed {
            let sha = i["sha256"].as_str().unwrap();
            assert!(
                hashed.contains(&sha),
                "{stem}: {sha} is not in the manifest"
            );
        }
        // The plan map is always drawn from the pipeline's own footprint and points.
        assert_eq!(model["figures"]["map"]["available"], true, "{stem}");
        if !text_tools {
            continue;
        }
        let text = pdf_text(&pdf);
        let id = s["id"].as_str().unwrap();
        let name = s["name"].as_str().unwrap();
        assert!(text.contains(id), "{stem}: id `{id}` not in the PDF text");
        assert!(
            text.contains(name),
            "{stem}: name `{name}` not in the PDF text"
        );
        match s["damage_category"].as_u64() {
            Some(c) if s["status"] == "assessed" => {
                let cat = CATEGORY_NAMES[c as usize];
                assert!(text.contains(cat), "{stem}: category `{cat}` missing");
            }
            _ if s["status"] == "assessed" => assert!(
                text.contains("Category not computed"),
                "{stem}: an assessed structure without a category must say so"
            ),
            _ => assert!(
                text.contains("Insufficient data"),
                "{stem}: no 'Insufficient data'"
            ),
        }
        assert!(
            text.contains("not a substitute for inspection"),
            "{stem}: cautions missing"
        );
        assert!(text.contains("Burland"), "{stem}: no citation");
        assert!(pdf_pages(&pdf) >= 2, "{stem}: fewer than 2 pages");
    }
    if text_tools {
        let text = pdf_text(&out.join("portfolio.pdf"));
        assert!(text.contains("not a substitute for inspection"));
        assert!(text.contains("Burland"));
        assert!(pdf_pages(&out.join("portfolio.pdf")) >= 2);
        for s in structures {
            assert!(text.contains(s["id"].as_str().unwrap()), "{}", s["id"]);
        }
    }
}

#[test]
fn fixture_reports_are_complete_literal_and_contained() {
    let (fx, p) = scenario("");
    let out = fx.path("out");
    let r = assess(&p, &out, &[]);
    check_reports(&out, &r);
    // The assessed block has all four charts from the pipeline data.
    let model: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("reports/A.json")).unwrap())
            .unwrap();
    assert_eq!(structure(&r, "A")["status"], "assessed");
    for fig in ["timeseries", "interaction"] {
        assert_eq!(model["figures"][fig]["available"], true, "{fig}: {model:#}");
    }
    assert_eq!(model["figures"]["profiles"][0]["available"], true);
    // Hostile ids stay inside the output folder: every file written is under `out`, the
    // reports only in `out/reports`, and nothing was created beside the fixture.
    let all = files_under(fx.dir.path());
    for f in &all {
        let s = f.to_string_lossy();
        if s.ends_with(".pdf") {
            assert!(
                s.starts_with("out/reports/") || s == "out/portfolio.pdf",
                "PDF outside the output folder: {s}"
            );
        }
    }
    assert!(!fx.path("etc").exists() && !fx.dir.path().join("../etc.pdf").exists());
    let stems: Vec<&str> = r["structures"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s["report_file"].as_str().unwrap())
        .collect();
    for stem in &stems {
        assert!(!stem.contains('/') && !stem.contains(".."), "{stem}");
    }
    if have("pdftotext") {
        // Hostile names render literally (not as markup, maths or a call).
        let text = pdf_text(&out.join("portfolio.pdf"));
        for (id, name) in HOSTILE {
            assert!(text.contains(id), "id `{id}` not literal in the overview");
            assert!(
                text.contains(name),
                "name `{name}` not literal in the overview"
            );
        }
    }
}

#[test]
fn reports_are_byte_identical_across_runs() {
    let (fx, p) = scenario("");
    let (o1, o2) = (fx.path("o1"), fx.path("o2"));
    assess(&p, &o1, &["--jobs", "2"]);
    assess(&p, &o2, &["--jobs", "1"]);
    let f1 = files_under(&o1);
    assert_eq!(f1, files_under(&o2));
    let pdfs: Vec<&PathBuf> = f1
        .iter()
        .filter(|f| f.extension().is_some_and(|e| e == "pdf" || e == "json"))
        .collect();
    assert!(pdfs.len() >= 8, "{pdfs:?}");
    for f in pdfs {
        assert_eq!(
            std::fs::read(o1.join(f)).unwrap(),
            std::fs::read(o2.join(f)).unwrap(),
            "{} differs between runs",
            f.display()
        );
    }
}

#[test]
fn broken_user_template_fails_with_location_and_keeps_previous_output() {
    let (fx, p) = scenario("");
    let out = fx.path("out");
    assess(&p, &out, &[]);
    let before: Vec<(PathBuf, Vec<u8>)> = files_under(&out)
        .into_iter()
        .map(|f| {
            let b = std::fs::read(out.join(&f)).unwrap();
            (f, b)
        })
        .collect();
    // Same portfolio, now with a user template folder whose asset.typ breaks on line 3.
    let (fx2, p2) = scenario("[report]\ntemplate_dir = \"tpl\"\n");
    fx2.write(
        "tpl/asset.typ",
        "// broken on purpose\n#let d = json(\"/data.json\")\n#let x = (1, 2\n= Title\n",
    );
    let o = plinth(&[
        "assess",
        p2.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--quiet",
    ]);
    assert_eq!(o.status.code(), Some(1));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("asset.typ:3"), "{err}");
    let after: Vec<(PathBuf, Vec<u8>)> = files_under(&out)
        .into_iter()
        .map(|f| {
            let b = std::fs::read(out.join(&f)).unwrap();
            (f, b)
        })
        .collect();
    assert!(
        before == after,
        "previous output folder changed by a failed run"
    );
}

#[test]
fn no_reports_writes_no_pdf() {
    let (fx, p) = scenario("");
    let out = fx.path("out");
    assess(&p, &out, &["--no-reports"]);
    let files = files_under(&out);
    assert!(out.join("results.json").is_file());
    assert!(
        files
            .iter()
            .all(|f| f.extension().is_none_or(|e| e != "pdf")),
        "{files:?}"
    );
    assert!(!out.join("reports").exists());
}

fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for e in std::fs::read_dir(from).unwrap() {
        let e = e.unwrap();
        if e.path().is_file() {
            std::fs::copy(e.path(), to.join(e.file_name())).unwrap();
        }
    }
}

#[test]
fn demo_portfolio_reports() {
    let tmp = tempfile::tempdir().unwrap();
    let demo = tmp.path().join("demo");
    copy_dir(
        &Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-portfolio"),
        &demo,
    );
    let out = tmp.path().join("out");
    let r = assess(&demo.join("portfolio.toml"), &out, &[]);
    assert_eq!(r["structures"].as_array().unwrap().len(), 42);
    check_reports(&out, &r);
    // A sagging structure of the demo: every chart comes from the pipeline.
    let model: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("reports/QH-M11.json")).unwrap())
            .unwrap();
    let f = &model["figures"];
    for slot in [
        &f["map"],
        &f["timeseries"],
        &f["profiles"][0],
        &f["interaction"],
    ] {
        assert_eq!(slot["available"], true, "{slot:#}");
    }
    assert_ne!(model["structure"]["length"], "not computed");
    assert!(
        !model["structure"]["length"]
            .as_str()
            .unwrap()
            .starts_with("not computed")
    );
}
