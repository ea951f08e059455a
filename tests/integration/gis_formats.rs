//! GIS formats against GDAL (Debian's gdal-bin, installed by .ci/run): results.gpkg checked by an
//! outside reader (`ogrinfo`), and footprints made by an outside writer (`ogr2ogr`) giving the
//! GeoJSON run's results. Skipped with a printed notice where GDAL is not installed.

use std::path::Path;
use std::process::Command;

use crate::fixture::*;

/// `ogrinfo ARGS` stdout, or None (with a notice) when `ogrinfo` is not installed.
fn ogrinfo(args: &[&str]) -> Option<String> {
    let o = match Command::new("ogrinfo").args(args).output() {
        Ok(o) => o,
        Err(_) => {
            eprintln!(
                "notice: `ogrinfo` is not installed (apt-get install gdal-bin); check skipped"
            );
            return None;
        }
    };
    assert!(
        o.status.success(),
        "ogrinfo {args:?} failed: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    Some(String::from_utf8(o.stdout).unwrap())
}

/// The value of `Feature Count:` in an `ogrinfo -so` layer summary.
fn feature_count(summary: &str) -> usize {
    summary
        .lines()
        .find_map(|l| l.strip_prefix("Feature Count: "))
        .unwrap_or_else(|| panic!("no feature count in:\n{summary}"))
        .parse()
        .unwrap()
}

/// `name (Type) = value` attribute lines of one feature in `ogrinfo -al` output.
fn attributes(feature: &str) -> Vec<(String, String, String)> {
    feature
        .lines()
        .filter_map(|l| {
            let l = l.trim();
            let (head, value) = l.split_once(" = ")?;
            let (name, ty) = head.split_once(" (")?;
            Some((name.into(), ty.strip_suffix(')')?.into(), value.into()))
        })
        .collect()
}

/// Compare one ogrinfo attribute with the results.json value of the same field.
fn same_value(field: &str, ty: &str, text: &str, json: &serde_json::Value) {
    let ctx = format!("{field} ({ty}) = {text} against {json}");
    match json {
        serde_json::Value::Null => assert_eq!(text, "(null)", "{ctx}"),
        serde_json::Value::Bool(b) => assert_eq!(text, if *b { "1" } else { "0" }, "{ctx}"),
        serde_json::Value::Number(n) => {
            let (got, want) = (text.parse::<f64>().expect(&ctx), n.as_f64().unwrap());
            assert!(
                (got - want).abs() <= 1e-12 * want.abs().max(1e-300),
                "{ctx}"
            );
        }
        serde_json::Value::String(s) => assert_eq!(text, s, "{ctx}"),
        other => assert_eq!(text, other.to_string(), "{ctx}"),
    }
}

fn first_ring_start(geojson_feature: &serde_json::Value) -> (f64, f64) {
    let c = &geojson_feature["geometry"]["coordinates"][0][0][0];
    (c[0].as_f64().unwrap(), c[1].as_f64().unwrap())
}

#[test]
fn results_gpkg_opens_in_gdal_with_both_layers_crs_counts_and_values() {
    let fx = Fx::new();
    let portfolio = concat!(env!("CARGO_MANIFEST_DIR"), "/demo-portfolio/portfolio.toml");
    let out = fx.path("out");
    let r = assess(Path::new(portfolio), &out, &["--no-reports"]);
    let gpkg = out.join("results.gpkg");
    let gpkg = gpkg.to_str().unwrap();
    let Some(layers) = ogrinfo(&["-ro", "-so", gpkg]) else {
        return;
    };
    assert!(layers.contains("using driver `GPKG'"), "{layers}");
    assert!(layers.contains("1: structures (Multi Polygon)"), "{layers}");
    assert!(layers.contains("2: points (Point)"), "{layers}");

    let structures = r["structures"].as_array().unwrap();
    let s_sum = ogrinfo(&["-ro", "-so", gpkg, "structures"]).unwrap();
    assert_eq!(feature_count(&s_sum), structures.len());
    let p_sum = ogrinfo(&["-ro", "-so", gpkg, "points"]).unwrap();
    let csv_rows = std::fs::read_to_string(out.join("points.csv"))
        .unwrap()
        .lines()
        .count()
        - 1;
    assert!(csv_rows > 100, "the demo has points within reach");
    assert_eq!(feature_count(&p_sum), csv_rows);
    for sum in [&s_sum, &p_sum] {
        assert!(sum.contains("ID[\"EPSG\",4326]"), "{sum}");
    }
    // A spatial index GDAL recognises, on both layers.
    let idx = ogrinfo(&[
        "-ro",
        gpkg,
        "-sql",
        "SELECT HasSpatialIndex('structures','geom') + HasSpatialIndex('points','geom') AS n",
    ])
    .unwrap();
    assert!(
        idx.lines().any(|l| l.trim().ends_with("(Integer) = 2")),
        "{idx}"
    );

    // The packed R-trees pass SQLite's own consistency check (R*Tree module `rtreecheck`), and
    // a window query through GDAL's spatial filter (which reads the index first) lists exactly
    // the points of points.csv inside the window.
    for layer in ["structures", "points"] {
        let sql = format!("SELECT rtreecheck('rtree_{layer}_geom') AS c");
        let check = ogrinfo(&["-ro", gpkg, "-sql", &sql]).unwrap();
        assert!(
            check.lines().any(|l| l.trim() == "c (String) = ok"),
            "{check}"
        );
    }
    let points_csv = std::fs::read_to_string(out.join("points.csv")).unwrap();
    let mut rows = points_csv.lines();
    let head: Vec<&str> = rows.next().unwrap().split(',').collect();
    let col = |n: &str| head.iter().position(|h| *h == n).unwrap();
    let (lon_c, lat_c) = (col("lon"), col("lat"));
    let lonlat: Vec<(f64, f64)> = rows
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            (f[lon_c].parse().unwrap(), f[lat_c].parse().unwrap())
        })
        .collect();
    let (lon0, lat0) = lonlat[lonlat.len() / 3];
    let window = [lon0 - 0.0004, lat0 - 0.0003, lon0 + 0.0007, lat0 + 0.0005];
    let inside = lonlat
        .iter()
        .filter(|(x, y)| *x >= window[0] && *x <= window[2] && *y >= window[1] && *y <= window[3])
        .count();
    assert!(
        inside > 5 && inside < csv_rows,
        "a window holding some points: {inside}"
    );
    let w: Vec<String> = window.iter().map(|v| format!("{v:.9}")).collect();
    // Features listed, not the summary's "Feature Count" (GDAL counts index entries there, whose
    // boxes are rounded outward to 32-bit floats).
    let spat = ogrinfo(&["-ro", "-spat", &w[0], &w[1], &w[2], &w[3], gpkg, "points"]).unwrap();
    let listed = spat
        .lines()
        .filter(|l| l.starts_with("OGRFeature(points):"))
        .count();
    assert_eq!(listed, inside, "{spat}");

    // Field values and footprints of a few structures against results.json / results.geojson.
    let geojson: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("results.geojson")).unwrap())
            .unwrap();
    let assessed = structures
        .iter()
        .find(|s| s["status"] == "assessed" && !s["damage_category"].is_null())
        .unwrap();
    let insufficient = structures
        .iter()
        .find(|s| s["status"] == "insufficient_data")
        .unwrap();
    let tilted = structure(&r, plinth::synth::demo::TILTED_ID);
    for s in [assessed, insufficient, tilted] {
        let id = s["id"].as_str().unwrap();
        let where_ = format!("id = '{id}'");
        let text = ogrinfo(&["-ro", "-al", "-where", &where_, gpkg, "structures"]).unwrap();
        assert!(text.contains("Feature Count: 1"), "{text}");
        let attrs = attributes(&text);
        assert_eq!(attrs.len(), 43, "every compact field: {text}");
        for (name, ty, value) in &attrs {
            same_value(name, ty, value, &s[name.as_str()]);
        }
        let feature = geojson["features"]
            .as_array()
            .unwrap()
            .iter()
            .find(|f| f["properties"]["id"] == id)
            .unwrap();
        let (x, y) = first_ring_start(feature);
        let wkt = text
            .lines()
            .find_map(|l| l.trim().strip_prefix("MULTIPOLYGON ((("))
            .unwrap_or_else(|| panic!("no footprint: {text}"));
        let mut first = wkt.split([',', ')']).next().unwrap().split(' ');
        let gx: f64 = first.next().unwrap().parse().unwrap();
        let gy: f64 = first.next().unwrap().parse().unwrap();
        assert!((gx - x).abs() < 1e-9 && (gy - y).abs() < 1e-9, "{wkt}");
    }

    // A point row: the same fields as points.csv (lon/lat as the geometry).
    let mut rd = csv::Reader::from_path(out.join("points.csv")).unwrap();
    let header = rd.headers().unwrap().clone();
    let row = rd
        .records()
        .map(Result::unwrap)
        .find(|r| r[header.iter().position(|h| h == "status").unwrap()] == *"kept")
        .unwrap();
    let get = |n: &str| &row[header.iter().position(|h| h == n).unwrap()];
    let where_ = format!(
        "dataset = '{}' AND point_id = '{}' AND structure_id = '{}'",
        get("dataset"),
        get("point_id"),
        get("structure_id")
    );
    let text = ogrinfo(&["-ro", "-al", "-where", &where_, gpkg, "points"]).unwrap();
    assert!(text.contains("Feature Count: 1"), "{text}");
    for (name, ty, value) in attributes(&text) {
        let want = get(&name);
        match ty.as_str() {
            "Real" | "Integer64" => assert!(
                (value.parse::<f64>().unwrap() - want.parse::<f64>().unwrap()).abs() < 1e-9,
                "{name}: {value} vs {want}"
            ),
            "Integer(Boolean)" => assert_eq!(value == "1", want == "true", "{name}"),
            _ => assert_eq!(value, want, "{name}"),
        }
    }
    let pt = text
        .lines()
        .find_map(|l| l.trim().strip_prefix("POINT ("))
        .unwrap_or_else(|| panic!("no point geometry: {text}"));
    let xy: Vec<f64> = pt
        .trim_end_matches(')')
        .split(' ')
        .map(|v| v.parse().unwrap())
        .collect();
    let (lon, lat): (f64, f64) = (get("lon").parse().unwrap(), get("lat").parse().unwrap());
    assert!(
        (xy[0] - lon).abs() < 1e-9 && (xy[1] - lat).abs() < 1e-9,
        "{pt}"
    );
}

/// `ogr2ogr ARGS` in `dir`; false (with a notice) when `ogr2ogr` is not installed.
fn ogr2ogr(dir: &Path, args: &[&str]) -> bool {
    match Command::new("ogr2ogr").current_dir(dir).args(args).output() {
        Ok(o) => {
            assert!(
                o.status.success(),
                "ogr2ogr {args:?} failed: {}",
                String::from_utf8_lossy(&o.stderr)
            );
            true
        }
        Err(_) => {
            eprintln!(
                "notice: `ogr2ogr` is not installed (apt-get install gdal-bin); check skipped"
            );
            false
        }
    }
}

#[test]
fn footprints_from_geopackage_shapefile_and_flatgeobuf_give_the_geojson_results() {
    let fx = Fx::new();
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-portfolio");
    let job = fx.path("job");
    std::fs::create_dir_all(&job).unwrap();
    for e in std::fs::read_dir(&demo).unwrap() {
        let e = e.unwrap();
        std::fs::copy(e.path(), job.join(e.file_name())).unwrap();
    }
    if !ogr2ogr(
        &job,
        &[
            "-f",
            "GPKG",
            "fp.gpkg",
            "structures.geojson",
            "-nln",
            "buildings",
        ],
    ) {
        return;
    }
    ogr2ogr(
        &job,
        &["-f", "ESRI Shapefile", "fp.shp", "structures.geojson"],
    );
    // An indexed FlatGeobuf stores its features in spatial order; without the index the order
    // (and so every output) is the GeoJSON file's.
    ogr2ogr(
        &job,
        &[
            "-f",
            "FlatGeobuf",
            "fp.fgb",
            "structures.geojson",
            "-lco",
            "SPATIAL_INDEX=NO",
        ],
    );
    let toml = std::fs::read_to_string(job.join("portfolio.toml")).unwrap();
    let reference = fx.path("out-geojson");
    assess(&job.join("portfolio.toml"), &reference, &["--no-reports"]);
    for file in ["fp.gpkg", "fp.shp", "fp.fgb"] {
        let p = job.join(format!("portfolio-{file}.toml"));
        let t = toml.replace(
            "path = \"structures.geojson\"",
            &format!("path = \"{file}\""),
        );
        assert_ne!(t, toml, "the demo portfolio names structures.geojson");
        std::fs::write(&p, t).unwrap();
        let out = fx.path(&format!("out-{file}"));
        let r = assess(&p, &out, &["--no-reports"]);
        assert_eq!(r["structures"].as_array().unwrap().len(), 42, "{file}");
        for f in ["results.json", "results.csv", "points.csv"] {
            let (a, b) = (
                std::fs::read_to_string(reference.join(f)).unwrap(),
                std::fs::read_to_string(out.join(f)).unwrap(),
            );
            let first = a
                .lines()
                .zip(b.lines())
                .position(|(x, y)| x != y)
                .map(|i| format!("line {}", i + 1));
            assert!(
                a == b,
                "{f} from {file} differs from the GeoJSON run at {first:?}"
            );
        }
    }
}

/// The demo's points CSV with the date headers as Shapefile-friendly `DYYYYMMDD` field names.
fn d_prefixed(csv: &str) -> String {
    let (head, body) = csv.split_once('\n').unwrap();
    let head: Vec<String> = head
        .split(',')
        .map(|h| {
            if chrono::NaiveDate::parse_from_str(h, "%Y-%m-%d").is_ok() {
                format!("D{}", h.replace('-', ""))
            } else {
                h.to_string()
            }
        })
        .collect();
    format!("{}\n{body}", head.join(","))
}

#[test]
fn points_from_geopackage_and_shapefile_layers_give_the_csv_results() {
    let fx = Fx::new();
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-portfolio");
    let job = fx.path("job");
    std::fs::create_dir_all(&job).unwrap();
    for e in std::fs::read_dir(&demo).unwrap() {
        let e = e.unwrap();
        std::fs::copy(e.path(), job.join(e.file_name())).unwrap();
    }
    let open = [
        "-oo",
        "AUTODETECT_TYPE=YES",
        "-oo",
        "X_POSSIBLE_NAMES=lon",
        "-oo",
        "Y_POSSIBLE_NAMES=lat",
        "-oo",
        "KEEP_GEOM_COLUMNS=NO",
        "-a_srs",
        "EPSG:4326",
    ];
    let toml = std::fs::read_to_string(job.join("portfolio.toml")).unwrap();
    let mut gpkg_toml = toml.clone();
    let mut shp_toml = toml.clone();
    for ds in ["asc", "desc"] {
        let csv = format!("points-{ds}.csv");
        let (gpkg, shp) = (format!("pts-{ds}.gpkg"), format!("pts-{ds}.shp"));
        let mut args = vec!["-f", "GPKG", &gpkg, &csv, "-nln", "points"];
        args.extend(open);
        if !ogr2ogr(&job, &args) {
            return;
        }
        let d_csv = format!("d-{ds}.csv");
        let text = std::fs::read_to_string(job.join(&csv)).unwrap();
        std::fs::write(job.join(&d_csv), d_prefixed(&text)).unwrap();
        let mut args = vec!["-f", "ESRI Shapefile", &shp, &d_csv];
        args.extend(open);
        ogr2ogr(&job, &args);
        let from = format!("path = \"{csv}\"\n");
        assert!(toml.contains(&from), "the demo portfolio names {csv}");
        gpkg_toml = gpkg_toml.replace(&from, &format!("path = \"{gpkg}\"\n"));
        shp_toml = shp_toml.replace(
            &from,
            &format!("path = \"{shp}\"\ncolumns = {{ date_format = \"D%Y%m%d\" }}\n"),
        );
    }
    let reference = fx.path("out-csv");
    assess(&job.join("portfolio.toml"), &reference, &["--no-reports"]);
    for (name, text) in [("gpkg", gpkg_toml), ("shp", shp_toml)] {
        let p = job.join(format!("portfolio-{name}.toml"));
        std::fs::write(&p, text).unwrap();
        let out = fx.path(&format!("out-{name}"));
        assess(&p, &out, &["--no-reports"]);
        for f in ["results.json", "results.csv", "points.csv"] {
            let (a, b) = (
                std::fs::read_to_string(reference.join(f)).unwrap(),
                std::fs::read_to_string(out.join(f)).unwrap(),
            );
            let first = a
                .lines()
                .zip(b.lines())
                .position(|(x, y)| x != y)
                .map(|i| format!("line {}", i + 1));
            assert!(
                a == b,
                "{f} from the {name} points differs from the CSV run at {first:?}"
            );
        }
    }
}

/// Parquet and GeoParquet points written by pyarrow (committed fixtures, made by
/// tests/bad_inputs/generate_parquet.py from the corpus base's points.csv) give the CSV run's
/// results.
#[test]
fn points_from_parquet_and_geoparquet_give_the_csv_results() {
    let fx = Fx::new();
    let corpus = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/bad_inputs");
    let reference = fx.path("out-csv");
    assess(
        &corpus.join("base/portfolio.toml"),
        &reference,
        &["--no-reports"],
    );
    for case in ["gis-points-parquet-valid", "gis-points-geoparquet-valid"] {
        let out = fx.path(case);
        assess(
            &corpus.join(case).join("portfolio.toml"),
            &out,
            &["--no-reports"],
        );
        for f in ["results.json", "results.csv", "points.csv"] {
            let (a, b) = (
                std::fs::read_to_string(reference.join(f)).unwrap(),
                std::fs::read_to_string(out.join(f)).unwrap(),
            );
            assert!(a.lines().count() > 1, "{f} has rows");
            assert!(a == b, "{f} from {case} differs from the CSV run");
        }
    }
}
