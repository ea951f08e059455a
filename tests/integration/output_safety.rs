//! Plinth never replaces what it did not write: `--out` (and `merge --out`, `demo`, `init`) must be
//! new, empty, or a previous Plinth output folder, and never an input of the run. A refusal exits
//! with code 2 before anything is read or written, names the path, and leaves every byte as it was.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use sha2::{Digest, Sha256};

use crate::fixture::*;

/// A job laid out as a user would: `root/job/portfolio.toml` with its data in `root/job/data/`.
/// Two invented blocks, one ascending geometry, settling slowly.
fn job() -> (Fx, PathBuf) {
    let fx = Fx::new();
    let ds = dates("2023-01-03", 12, 30);
    let t = years(&ds);
    let u = unit(38.0, -12.0);
    let mut points = Vec::new();
    for (s, cx) in [0.0, 200.0].into_iter().enumerate() {
        for k in 0..8 {
            let values = t
                .iter()
                .enumerate()
                .map(|(i, ti)| -2.0 * u[2] * ti + 0.5 * wiggle(i, k + 10 * s))
                .collect();
            points.push(FxPoint {
                id: format!("p{s}-{k}"),
                e: cx - 6.0 + (k % 4) as f64 * 4.0,
                n: -2.0 + (k / 4) as f64 * 4.0,
                coherence: 0.9,
                values,
            });
        }
    }
    let structures: Vec<FxStructure> = ["A1", "B2"]
        .iter()
        .enumerate()
        .map(|(s, id)| FxStructure {
            id: (*id).into(),
            name: format!("Block {id}"),
            height_m: Some(8.0),
            structure: Some("masonry".into()),
            rings: vec![rect(s as f64 * 200.0, 0.0, 18.0, 9.0, 0.0)],
        })
        .collect();
    fx.write_structures("job/data/structures.geojson", &structures);
    fx.write_points(
        "job/data/points-asc.csv",
        &FxDataset {
            name: "asc".into(),
            pass: "ascending".into(),
            incidence_deg: 38.0,
            heading_deg: -12.0,
            dates: ds,
            points,
        },
    );
    fx.write(
        "job/portfolio.toml",
        "[portfolio]\nname = \"Output safety fixture\"\n\n[structures]\npath = \"data/structures.geojson\"\n\n\
         [[datasets]]\nname = \"asc\"\npath = \"data/points-asc.csv\"\npass = \"ascending\"\n\
         incidence_deg = 38.0\nheading_deg = -12.0\n",
    );
    let p = fx.path("job/portfolio.toml");
    (fx, p)
}

/// Every file under `dir` (hidden ones included) → SHA-256 of its bytes; folders are listed too,
/// so a new, removed or renamed entry anywhere shows up.
fn snapshot(dir: &Path) -> BTreeMap<PathBuf, String> {
    fn walk(base: &Path, dir: &Path, into: &mut BTreeMap<PathBuf, String>) {
        for e in std::fs::read_dir(dir).unwrap() {
            let e = e.unwrap();
            let p = e.path();
            let rel = p.strip_prefix(base).unwrap().to_path_buf();
            let ft = e.file_type().unwrap();
            if ft.is_dir() {
                into.insert(rel, "folder".into());
                walk(base, &p, into);
            } else if ft.is_symlink() {
                into.insert(rel, format!("link {:?}", std::fs::read_link(&p).unwrap()));
            } else {
                let h = Sha256::digest(std::fs::read(&p).unwrap());
                let hex: String = h.iter().map(|b| format!("{b:02x}")).collect();
                into.insert(rel, hex);
            }
        }
    }
    let mut m = BTreeMap::new();
    walk(dir, dir, &mut m);
    m
}

fn run(args: &[&Path]) -> std::process::Output {
    let v: Vec<&str> = args.iter().map(|p| p.to_str().unwrap()).collect();
    plinth(&v)
}

/// Run `args`, expect a refusal (exit 2) naming `named`, and no change under `tree`.
fn assert_refused(tree: &Path, args: &[&Path], named: &Path) -> String {
    let before = snapshot(tree);
    let o = run(args);
    let err = String::from_utf8_lossy(&o.stderr).to_string();
    assert_eq!(o.status.code(), Some(2), "expected exit 2, got: {err}");
    assert!(
        err.contains(&named.display().to_string()),
        "the message must name {}: {err}",
        named.display()
    );
    assert!(
        err.contains("hint:"),
        "the message must give the fix: {err}"
    );
    assert_eq!(
        snapshot(tree),
        before,
        "files changed after a refusal: {err}"
    );
    err
}

fn p(s: &str) -> &Path {
    Path::new(s)
}

#[test]
fn the_job_folder_itself_is_refused() {
    let (fx, pf) = job();
    let out = fx.path("job");
    let err = assert_refused(
        fx.dir.path(),
        &[p("assess"), &pf, p("--out"), &out, p("--no-reports")],
        &out,
    );
    assert!(err.contains("the portfolio file"), "{err}");
}

#[test]
fn a_parent_of_the_inputs_is_refused() {
    let (fx, pf) = job();
    // The folder above the job.
    let out = fx.dir.path().to_path_buf();
    let err = assert_refused(
        fx.dir.path(),
        &[p("assess"), &pf, p("--out"), &out, p("--no-reports")],
        &out,
    );
    assert!(err.contains("input of this run"), "{err}");
    // The data folder holds the points but not the portfolio: refused before the portfolio is
    // read, as a folder Plinth did not write.
    let data = fx.path("job/data");
    let err = assert_refused(
        fx.dir.path(),
        &[p("assess"), &pf, p("--out"), &data, p("--no-reports")],
        &data,
    );
    assert!(err.contains("no manifest.json"), "{err}");
    // Reached through `..` it is the same folder.
    let dotted = fx.path("job/data/..");
    assert_refused(
        fx.dir.path(),
        &[p("assess"), &pf, p("--out"), &dotted, p("--no-reports")],
        &dotted,
    );
}

#[test]
fn a_folder_with_foreign_files_is_refused() {
    let (fx, pf) = job();
    fx.write("reports-2024/minutes.docx", "the user's own document");
    fx.write("reports-2024/site/photo.jpg", "not ours either");
    let out = fx.path("reports-2024");
    let err = assert_refused(
        fx.dir.path(),
        &[p("assess"), &pf, p("--out"), &out, p("--no-reports")],
        &out,
    );
    assert!(err.contains("no manifest.json"), "{err}");
    assert!(
        err.contains("choose a new folder, or delete it yourself"),
        "{err}"
    );
}

#[test]
fn a_plinth_output_with_a_foreign_file_is_refused() {
    let (fx, pf) = job();
    let out = fx.path("out");
    assess(&pf, &out, &["--no-reports"]);
    fx.write(
        "out/reports/my-notes.txt",
        "written by the user into the output",
    );
    let err = assert_refused(
        fx.dir.path(),
        &[p("assess"), &pf, p("--out"), &out, p("--no-reports")],
        &out,
    );
    assert!(err.contains("reports/my-notes.txt"), "{err}");
}

#[test]
fn an_output_of_an_older_version_without_the_marker_is_refused() {
    let (fx, pf) = job();
    let out = fx.path("out");
    assess(&pf, &out, &["--no-reports"]);
    let mpath = out.join("manifest.json");
    let mut m: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&mpath).unwrap()).unwrap();
    assert_eq!(m["tool"], "plinth");
    assert_eq!(m["format"], "plinth-output-folder/1");
    m.as_object_mut().unwrap().remove("format");
    std::fs::write(&mpath, serde_json::to_string_pretty(&m).unwrap()).unwrap();
    let err = assert_refused(
        fx.dir.path(),
        &[p("assess"), &pf, p("--out"), &out, p("--no-reports")],
        &out,
    );
    assert!(err.contains("earlier Plinth version"), "{err}");
    assert!(err.contains("delete it yourself"), "{err}");
}

#[test]
fn an_existing_file_is_refused_before_any_input_is_read() {
    let (fx, pf) = job();
    fx.write("notes.txt", "my notes");
    let out = fx.path("notes.txt");
    let err = assert_refused(
        fx.dir.path(),
        &[p("assess"), &pf, p("--out"), &out, p("--no-reports")],
        &out,
    );
    assert!(err.contains("existing file"), "{err}");
    // The portfolio is not even read: a missing one does not change the answer.
    let missing = fx.path("job/missing.toml");
    let err = assert_refused(
        fx.dir.path(),
        &[p("assess"), &missing, p("--out"), &out],
        &out,
    );
    assert!(!err.contains("missing.toml"), "{err}");
}

#[test]
fn the_previous_folder_is_refused() {
    let (fx, pf) = job();
    let prev = fx.path("out-1");
    assess(&pf, &prev, &["--no-reports"]);
    // As --out, and a folder inside it.
    for out in [prev.clone(), prev.join("again")] {
        let err = assert_refused(
            fx.dir.path(),
            &[
                p("assess"),
                &pf,
                p("--out"),
                &out,
                p("--previous"),
                &prev,
                p("--no-reports"),
            ],
            &out,
        );
        assert!(err.contains("--previous folder"), "{err}");
    }
}

#[test]
fn a_merge_into_one_of_its_shards_is_refused() {
    let (fx, pf) = job();
    let (s1, s2) = (fx.path("s1"), fx.path("s2"));
    assess(&pf, &s1, &["--no-reports", "--shard", "1/2"]);
    assess(&pf, &s2, &["--no-reports", "--shard", "2/2"]);
    for out in [s1.clone(), s2.join("merged")] {
        let err = assert_refused(
            fx.dir.path(),
            &[p("merge"), &s1, &s2, p("--out"), &out],
            &out,
        );
        assert!(err.contains("shard folder"), "{err}");
    }
    // And the merge output may not hold the job's inputs either.
    let job_dir = fx.path("job");
    assert_refused(
        fx.dir.path(),
        &[p("merge"), &s1, &s2, p("--out"), &job_dir],
        &job_dir,
    );
    // Into a new folder it works, and the result is a Plinth output folder.
    let merged = fx.path("merged");
    let o = run(&[p("merge"), &s1, &s2, p("--out"), &merged]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let m: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(merged.join("manifest.json")).unwrap())
            .unwrap();
    assert_eq!(m["format"], "plinth-output-folder/1");
}

#[test]
fn demo_and_init_refuse_a_non_empty_folder() {
    let fx = Fx::new();
    fx.write("d/portfolio.toml", "# the user's own portfolio\n");
    fx.write("d/notes.txt", "mine");
    let d = fx.path("d");
    let err = assert_refused(fx.dir.path(), &[p("demo"), &d], &d);
    assert!(err.contains("not empty"), "{err}");
    assert_refused(fx.dir.path(), &[p("init"), &d], &d);
    // A file is refused too.
    let f = fx.path("d/notes.txt");
    assert_refused(fx.dir.path(), &[p("demo"), &f], &f);
}

#[test]
fn demo_writes_a_new_or_empty_folder() {
    let fx = Fx::new();
    std::fs::create_dir(fx.path("empty")).unwrap();
    for d in [fx.path("new/demo"), fx.path("empty")] {
        let o = run(&[p("demo"), &d]);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        assert!(d.join("portfolio.toml").is_file() && d.join("truth.json").is_file());
    }
}

/// No staging or set-aside folder is left beside `out`.
fn no_hidden_siblings(out: &Path) {
    let parent = out.parent().unwrap();
    let hidden: Vec<String> = std::fs::read_dir(parent)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().to_string())
        .filter(|n| n.starts_with('.'))
        .collect();
    assert!(hidden.is_empty(), "left beside the output: {hidden:?}");
}

#[test]
fn a_new_path_and_an_empty_folder_are_accepted() {
    let (fx, pf) = job();
    let new = fx.path("runs/2024/q3");
    assess(&pf, &new, &["--no-reports"]);
    no_hidden_siblings(&new);
    std::fs::create_dir(fx.path("empty")).unwrap();
    let empty = fx.path("empty");
    assess(&pf, &empty, &["--no-reports"]);
    assert!(empty.join("manifest.json").is_file());
    no_hidden_siblings(&empty);
    // A new folder inside the job folder is the usual place and is accepted.
    assess(&pf, &fx.path("job/out"), &["--no-reports"]);
}

#[test]
fn a_previous_plinth_output_is_replaced_as_a_whole() {
    let (fx, pf) = job();
    let out = fx.path("out");
    assess(&pf, &out, &["--no-reports"]);
    // A report-style file from the earlier run that the new run does not write is gone after it.
    fx.write("out/reports/OLD-1.pdf", "%PDF from an earlier run");
    let text = std::fs::read_to_string(&pf)
        .unwrap()
        .replace("Output safety fixture", "Output safety fixture, second run");
    std::fs::write(&pf, text).unwrap();
    let inputs_before = snapshot(&fx.path("job"));
    let r = assess(&pf, &out, &["--no-reports"]);
    assert_eq!(r["portfolio"]["name"], "Output safety fixture, second run");
    assert!(
        !out.join("reports").exists(),
        "the old reports folder is replaced"
    );
    no_hidden_siblings(&out);
    assert_eq!(snapshot(&fx.path("job")), inputs_before, "inputs changed");
}
