//! explorer.html: the page's data in the file, and the page itself in a real browser (headless
//! Chromium driven by tests/explorer/explorer.test.mjs through playwright-core).
//!
//! The browser part needs `node`, `chromium` and `npm ci` in tests/explorer (`.ci/run` installs
//! them). Without them it is skipped with a message, unless `PLINTH_REQUIRE_BROWSER=1` (set by
//! `.ci/run`), which turns a missing tool into a failure.

use std::path::{Path, PathBuf};
use std::process::Command;

use crate::fixture::*;

const HOSTILE_ID: &str = "QH-F01";
const HOSTILE_NAME: &str = "<img src=x onerror=alert(1)>";

fn demo_portfolio() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-portfolio")
}

/// A copy of the demo in `dir` whose structure HOSTILE_ID is named HOSTILE_NAME.
fn hostile_demo(dir: &Path) -> PathBuf {
    std::fs::create_dir_all(dir).unwrap();
    for e in std::fs::read_dir(demo_portfolio()).unwrap() {
        let e = e.unwrap();
        std::fs::copy(e.path(), dir.join(e.file_name())).unwrap();
    }
    let p = dir.join("structures.geojson");
    let mut g: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&p).unwrap()).unwrap();
    let f = g["features"]
        .as_array_mut()
        .unwrap()
        .iter_mut()
        .find(|f| f["properties"]["id"] == HOSTILE_ID)
        .unwrap();
    f["properties"]["name"] = HOSTILE_NAME.into();
    std::fs::write(&p, g.to_string()).unwrap();
    dir.join("portfolio.toml")
}

/// The JSON document embedded in the page.
fn embedded_data(html: &str) -> serde_json::Value {
    let start = html
        .find(r#"<script type="application/json" id="plinth-data">"#)
        .expect("data element");
    let rest = &html[start..];
    let open = rest.find('>').unwrap() + 1;
    let close = rest.find("</script>").unwrap();
    serde_json::from_str(&rest[open..close]).unwrap()
}

#[test]
fn explorer_data_is_inert_json_with_every_structure() {
    let fx = Fx::new();
    let portfolio = hostile_demo(&fx.path("job"));
    let r = assess(&portfolio, &fx.path("out"), &["--no-reports"]);
    let html = std::fs::read_to_string(fx.path("out/explorer.html")).unwrap();
    // The name never appears as markup; only its escaped JSON form does.
    assert!(!html.contains(HOSTILE_NAME));
    assert!(html.contains(r"\u003cimg src=x onerror=alert(1)\u003e"));
    assert!(
        no_fetch(&html),
        "the page names a URL other than the SVG namespace"
    );
    let d = embedded_data(&html);
    let fields = d["structures"]["fields"].as_array().unwrap();
    let ss: Vec<serde_json::Map<String, serde_json::Value>> = (d["structures"]["rows"].as_array())
        .unwrap()
        .iter()
        .map(|row| {
            let row = row.as_array().unwrap();
            fields
                .iter()
                .zip(row)
                .map(|(f, v)| (f.as_str().unwrap().to_string(), v.clone()))
                .collect()
        })
        .collect();
    let rs = r["structures"].as_array().unwrap();
    assert_eq!(ss.len(), rs.len());
    for (s, rr) in ss.iter().zip(rs) {
        assert_eq!(s["id"], rr["id"]);
        assert_eq!(s["damage_category"], rr["damage_category"]);
        assert!(
            !s["footprint"].as_array().unwrap().is_empty(),
            "{}",
            s["id"]
        );
        // Without reports there is no PDF to link to.
        assert!(s["report_pdf"].is_null());
    }
    let hostile = ss.iter().find(|s| s["id"] == HOSTILE_ID).unwrap();
    assert_eq!(hostile["name"], HOSTILE_NAME);
    let manifest: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(fx.path("out/manifest.json")).unwrap())
            .unwrap();
    assert_eq!(d["provenance"]["inputs"], manifest["inputs"]);
}

/// The only URLs in the page are in text (the SVG namespace), never fetched.
fn no_fetch(html: &str) -> bool {
    !html.contains("https://")
        && html.matches("http://").count() == html.matches("http://www.w3.org/2000/svg").count()
}

fn tool(name: &str, args: &[&str]) -> bool {
    Command::new(name)
        .args(args)
        .output()
        .is_ok_and(|o| o.status.success())
}

/// Why the browser test cannot run here, if it cannot.
fn browser_missing(tests_dir: &Path) -> Option<String> {
    if !tool("node", &["--version"]) {
        return Some("node is not installed".into());
    }
    let chromium = std::env::var("CHROMIUM").unwrap_or_else(|_| "/usr/bin/chromium".into());
    if !Path::new(&chromium).exists() {
        return Some(format!(
            "{chromium} does not exist (`apt-get install chromium`)"
        ));
    }
    if !tests_dir.join("node_modules/playwright-core").is_dir() {
        return Some(format!("run `npm ci` in {}", tests_dir.display()));
    }
    None
}

#[test]
fn explorer_works_in_headless_chromium() {
    let tests_dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/explorer");
    if let Some(why) = browser_missing(&tests_dir) {
        let required = std::env::var("PLINTH_REQUIRE_BROWSER").is_ok_and(|v| v == "1");
        assert!(!required, "browser test required but {why}");
        eprintln!("SKIPPED explorer_works_in_headless_chromium: {why}");
        return;
    }
    let fx = Fx::new();
    assess(
        &demo_portfolio().join("portfolio.toml"),
        &fx.path("demo-out"),
        &[],
    );
    let hostile = hostile_demo(&fx.path("job"));
    assess(&hostile, &fx.path("hostile-out"), &["--no-reports"]);
    let o = Command::new("node")
        .current_dir(&tests_dir)
        .arg("explorer.test.mjs")
        .arg(fx.path("demo-out"))
        .arg(fx.path("hostile-out"))
        .arg(HOSTILE_ID)
        .output()
        .unwrap();
    let log = String::from_utf8_lossy(&o.stdout);
    assert!(
        o.status.success(),
        "browser checks failed:\n{log}\n{}",
        String::from_utf8_lossy(&o.stderr)
    );
    assert!(log.contains("all explorer checks passed"), "{log}");
}
