//! Sharding: `assess --shard K/N` runs merged with `plinth merge` equal a single run byte for byte.

use crate::fixture::*;

/// Ten invented blocks on a 300 m grid (far beyond the surroundings distance, so no point is
/// within reach of two structures), two geometries, settling at different rates.
fn portfolio() -> (Fx, std::path::PathBuf) {
    // Input order deliberately not sorted by id, so the merge must use the footprint order.
    let ids = ["K7", "B2", "Z1", "A9", "M4", "C3", "Q8", "D5", "X6", "E0"];
    let blocks: Vec<(&str, f64, f64)> = ids
        .iter()
        .enumerate()
        .map(|(s, id)| (*id, (s % 4) as f64 * 300.0, (s / 4) as f64 * 300.0))
        .collect();
    blocks_portfolio(&blocks)
}

/// Blocks (id, centre east, centre north; 20 × 10 m footprints), each with 12 points inside,
/// 2 in the buffer and 1 ground point 25 m north, in two geometries; block s settles at
/// 1 + 0.7·s mm/yr.
fn blocks_portfolio(blocks: &[(&str, f64, f64)]) -> (Fx, std::path::PathBuf) {
    let geoms = [
        ("asc", "ascending", 38.0, -12.0),
        ("desc", "descending", 41.0, 192.0),
    ];
    let ds = dates("2023-01-03", 12, 40);
    let t = years(&ds);
    let mut structures = Vec::new();
    let mut datasets = Vec::new();
    for (g, (name, pass, inc, head)) in geoms.iter().enumerate() {
        let u = unit(*inc, *head);
        let mut points = Vec::new();
        for (s, &(id, cx, cy)) in blocks.iter().enumerate() {
            let v_up = -1.0 - s as f64 * 0.7;
            // 12 points inside, 2 in the buffer, 1 ground point in the surroundings.
            let mut spots: Vec<(f64, f64)> = (0..12)
                .map(|k| (-8.0 + (k % 4) as f64 * 5.3, -3.5 + (k / 4) as f64 * 3.4))
                .collect();
            spots.push((12.0, 0.0));
            spots.push((-12.5, 1.0));
            spots.push((0.0, 25.0));
            for (k, (e, n)) in spots.into_iter().enumerate() {
                let values = t
                    .iter()
                    .enumerate()
                    .map(|(i, ti)| u[2] * v_up * ti + 0.8 * wiggle(i + 7 * g, k + 20 * s))
                    .collect();
                points.push(FxPoint {
                    id: format!("{name}-{id}-{k}"),
                    e: cx + e,
                    n: cy + n,
                    coherence: 0.8 + 0.01 * k as f64,
                    values,
                });
            }
        }
        datasets.push(FxDataset {
            name: (*name).into(),
            pass: (*pass).into(),
            incidence_deg: *inc,
            heading_deg: *head,
            dates: ds.clone(),
            points,
        });
        if g == 0 {
            for &(id, cx, cy) in blocks {
                structures.push(FxStructure {
                    id: id.into(),
                    name: format!("Block {id}"),
                    height_m: Some(9.0),
                    structure: Some("masonry".into()),
                    rings: vec![rect(cx, cy, 20.0, 10.0, 0.0)],
                });
            }
        }
    }
    let fx = Fx::new();
    let p = fx.write_portfolio(&structures, &datasets, "");
    (fx, p)
}

#[test]
fn merged_shards_equal_a_single_run() {
    let (fx, pf) = portfolio();
    let (single, merged) = single_and_merged(&fx, &pf, &[]);
    // The manifest lists the shards; apart from that it is the single run's.
    let m: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(merged.join("manifest.json")).unwrap())
            .unwrap();
    let shards = m["shards"].as_array().unwrap();
    assert_eq!(shards.len(), 3);
    assert_eq!(shards[1]["shard"], "2/3");
    let mut s: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(single.join("manifest.json")).unwrap())
            .unwrap();
    let mut m = m;
    m.as_object_mut().unwrap().remove("shards");
    // Warnings name per-shard counts (points outside every buffer), so they are not compared.
    s.as_object_mut().unwrap().remove("warnings");
    m.as_object_mut().unwrap().remove("warnings");
    assert_eq!(m, s);
}

#[test]
fn shards_without_points_geojson_merge_to_the_single_run_without_it() {
    let (fx, pf) = portfolio();
    let (single, merged) = single_and_merged(&fx, &pf, &["--no-points-geojson"]);
    assert!(!single.join("points.geojson").exists());
    assert!(!merged.join("points.geojson").exists());
    assert!(merged.join("points.csv").is_file());
}

/// A single run and the merge of its 3 shards, both with the options `extra`, after checking that
/// every data file is byte-identical in the two (a file the single run did not write must not be
/// in the merge either).
fn single_and_merged(
    fx: &Fx,
    pf: &std::path::Path,
    extra: &[&str],
) -> (std::path::PathBuf, std::path::PathBuf) {
    let single = fx.path("single");
    let mut opts = vec!["--no-reports"];
    opts.extend(extra);
    assess(pf, &single, &opts);
    let mut shard_dirs = Vec::new();
    let mut nonempty = 0;
    for k in 1..=3 {
        let d = fx.path(&format!("shard-{k}"));
        let shard = format!("{k}/3");
        let mut args = opts.clone();
        args.extend(["--shard", shard.as_str()]);
        let r = assess(pf, &d, &args);
        if !r["structures"].as_array().unwrap().is_empty() {
            nonempty += 1;
        }
        shard_dirs.push(d);
    }
    assert!(nonempty >= 2, "the fixture must spread over several shards");
    let merged = fx.path("merged");
    let mut args = vec!["merge".to_string()];
    args.extend(shard_dirs.iter().map(|d| d.display().to_string()));
    args.extend(["--out".to_string(), merged.display().to_string()]);
    let argv: Vec<&str> = args.iter().map(String::as_str).collect();
    let o = plinth(&argv);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    for f in [
        "results.json",
        "results.csv",
        "results.geojson",
        "points.csv",
        "points.geojson",
        "results.gpkg",
        // The merge writes the whole portfolio's page (a shard's page is not copied).
        "explorer.html",
    ] {
        if !single.join(f).exists() {
            assert!(!merged.join(f).exists(), "{f} is in the merge only");
            continue;
        }
        let a = std::fs::read(single.join(f)).unwrap();
        let b = std::fs::read(merged.join(f)).unwrap();
        if a != b {
            let (ta, tb) = (String::from_utf8_lossy(&a), String::from_utf8_lossy(&b));
            let first = ta
                .lines()
                .zip(tb.lines())
                .enumerate()
                .find(|(_, (x, y))| x != y)
                .map(|(i, (x, y))| format!("line {}: single `{x}` merged `{y}`", i + 1));
            panic!("{f} differs between the single run and the merged shards: {first:?}");
        }
    }
    (single, merged)
}

/// The fixture's points as Parquet files (`points-<name>.parquet`, one row group per structure's
/// 15 points: the file is in spatial order) named by a second portfolio, which is returned.
fn parquet_portfolio(fx: &Fx) -> std::path::PathBuf {
    let mut toml = std::fs::read_to_string(fx.path("portfolio.toml")).unwrap();
    for name in ["asc", "desc"] {
        let csv = format!("points-{name}.csv");
        let pq = format!("points-{name}.parquet");
        write_parquet(&fx.path(&csv), &fx.path(&pq), 15);
        toml = toml.replace(&format!("\"{csv}\""), &format!("\"{pq}\""));
    }
    let p = fx.path("portfolio-parquet.toml");
    std::fs::write(&p, toml).unwrap();
    p
}

/// Write a points CSV (text id, then numbers; empty = null) as Parquet with row groups of
/// `group` rows and the writer's default min/max statistics.
fn write_parquet(csv_path: &std::path::Path, out: &std::path::Path, group: usize) {
    use parquet::basic::{LogicalType, Repetition, Type as Physical};
    use parquet::data_type::{ByteArray, ByteArrayType, DoubleType};
    use parquet::schema::types::Type;
    use std::sync::Arc;
    let mut r = csv::Reader::from_path(csv_path).unwrap();
    let header: Vec<String> = r.headers().unwrap().iter().map(String::from).collect();
    let rows: Vec<csv::StringRecord> = r.records().map(Result::unwrap).collect();
    let mut fields = vec![Arc::new(
        Type::primitive_type_builder(&header[0], Physical::BYTE_ARRAY)
            .with_repetition(Repetition::REQUIRED)
            .with_logical_type(Some(LogicalType::String))
            .build()
            .unwrap(),
    )];
    for h in &header[1..] {
        fields.push(Arc::new(
            Type::primitive_type_builder(h, Physical::DOUBLE)
                .with_repetition(Repetition::OPTIONAL)
                .build()
                .unwrap(),
        ));
    }
    let schema = Arc::new(
        Type::group_type_builder("points")
            .with_fields(fields)
            .build()
            .unwrap(),
    );
    let file = std::fs::File::create(out).unwrap();
    let props = Arc::new(parquet::file::properties::WriterProperties::builder().build());
    let mut w = parquet::file::writer::SerializedFileWriter::new(file, schema, props).unwrap();
    for chunk in rows.chunks(group) {
        let mut rg = w.next_row_group().unwrap();
        let mut k = 0;
        while let Some(mut col) = rg.next_column().unwrap() {
            if k == 0 {
                let ids: Vec<ByteArray> = chunk.iter().map(|r| ByteArray::from(&r[0])).collect();
                col.typed::<ByteArrayType>()
                    .write_batch(&ids, None, None)
                    .unwrap();
            } else {
                let cells: Vec<Option<f64>> = chunk.iter().map(|r| r[k].parse().ok()).collect();
                let values: Vec<f64> = cells.iter().flatten().copied().collect();
                let defs: Vec<i16> = cells.iter().map(|c| i16::from(c.is_some())).collect();
                col.typed::<DoubleType>()
                    .write_batch(&values, Some(&defs), None)
                    .unwrap();
            }
            col.close().unwrap();
            k += 1;
        }
        rg.close().unwrap();
    }
    w.close().unwrap();
}

/// `(read, total)` of the row-group line `assess` prints for dataset `name`.
fn row_groups_read(stderr: &str, name: &str) -> (usize, usize) {
    let prefix = format!("points {name}: read ");
    let line = stderr
        .lines()
        .find_map(|l| l.strip_prefix(&prefix))
        .unwrap_or_else(|| panic!("no row-group line for {name} in:\n{stderr}"));
    let words: Vec<&str> = line.split_whitespace().collect();
    (words[0].parse().unwrap(), words[2].parse().unwrap())
}

#[test]
fn shards_of_a_spatially_ordered_parquet_file_skip_row_groups_and_merge_to_the_single_run() {
    let (fx, _) = portfolio();
    let pf = parquet_portfolio(&fx);
    // The Parquet runs equal the CSV run, and their shards merge to it.
    let csv_run = fx.path("csv-run");
    assess(&fx.path("portfolio.toml"), &csv_run, &["--no-reports"]);
    let (single, _) = single_and_merged(&fx, &pf, &[]);
    for f in ["results.json", "points.csv"] {
        let a = std::fs::read(csv_run.join(f)).unwrap();
        assert!(a == std::fs::read(single.join(f)).unwrap(), "{f}");
    }
    let run = |args: &[&str], out: &str| {
        let out = fx.path(out);
        let mut argv = vec![
            "assess",
            pf.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
        ];
        argv.extend(args);
        let o = plinth(&argv);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        String::from_utf8_lossy(&o.stderr).into_owned()
    };
    let all = run(&["--no-reports"], "single-logged");
    for name in ["asc", "desc"] {
        assert_eq!(
            row_groups_read(&all, name),
            (10, 10),
            "every block has a structure"
        );
    }
    let mut read = 0;
    for k in 1..=3 {
        let log = run(
            &["--no-reports", "--shard", &format!("{k}/3")],
            &format!("s{k}"),
        );
        let (r, t) = row_groups_read(&log, "asc");
        assert_eq!(t, 10);
        assert!(r < t, "shard {k} read {r} of {t} row groups");
        read += r;
    }
    assert_eq!(
        read, 10,
        "each block's group is read by the one shard holding its structure"
    );
}

#[test]
fn merge_refuses_overlapping_shards() {
    let (fx, pf) = portfolio();
    let d = fx.path("one");
    assess(&pf, &d, &["--no-reports", "--shard", "1/2"]);
    let out = fx.path("merged");
    let o = plinth(&[
        "merge",
        d.to_str().unwrap(),
        d.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ]);
    assert!(!o.status.success());
    assert!(!out.exists(), "a failed merge writes nothing");
}

/// A bad row of a Parquet file gets the error its CSV export gets, naming the row (its CSV line
/// − 2) and the attribute instead of the line and the column.
#[test]
fn parquet_rows_get_the_errors_of_their_csv_export() {
    let (fx, pf_csv) = portfolio();
    let original = std::fs::read_to_string(fx.path("points-asc.csv")).unwrap();
    // Data row 6 is CSV line 8; column 1 is `lon`, column 6 an epoch.
    for (col, value, what) in [
        (1, "", "x coordinate is missing"),
        (6, "20000", "implausible"),
    ] {
        let mut lines: Vec<String> = original.lines().map(String::from).collect();
        let mut cells: Vec<&str> = lines[7].split(',').collect();
        cells[col] = value;
        lines[7] = cells.join(",");
        std::fs::write(fx.path("points-asc.csv"), lines.join("\n") + "\n").unwrap();
        let pf_pq = parquet_portfolio(&fx);
        let err = |pf: &std::path::Path| {
            let o = plinth(&["check", pf.to_str().unwrap()]);
            assert!(!o.status.success(), "{what}: the check passed");
            let e = String::from_utf8_lossy(&o.stderr).into_owned();
            e.lines()
                .find(|l| l.starts_with("error:"))
                .unwrap_or_else(|| panic!("no error line in {e}"))
                .to_string()
        };
        let from_csv = err(&pf_csv);
        let from_pq = err(&pf_pq);
        assert!(from_csv.contains(what), "{from_csv}");
        assert!(from_pq.contains("row 6, attribute"), "{from_pq}");
        let expected = from_csv
            .replace("points-asc.csv", "points-asc.parquet")
            .replace("line 8, column", "row 6, attribute");
        assert_eq!(from_pq, expected);
    }
}

/// Shards of which only some wrote points.geojson are not from one run: the merge refuses them.
#[test]
fn merge_refuses_shards_with_and_without_points_geojson() {
    let (fx, pf) = portfolio();
    let (a, b) = (fx.path("a"), fx.path("b"));
    assess(&pf, &a, &["--no-reports", "--shard", "1/2"]);
    assess(
        &pf,
        &b,
        &["--no-reports", "--shard", "2/2", "--no-points-geojson"],
    );
    let out = fx.path("merged");
    let o = plinth(&[
        "merge",
        a.to_str().unwrap(),
        b.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ]);
    assert!(!o.status.success());
    let e = String::from_utf8_lossy(&o.stderr);
    assert!(
        e.contains("has no points.geojson while other shards do"),
        "{e}"
    );
    assert!(!out.exists(), "a failed merge writes nothing");
}

/// Two blocks 40 m apart (20 m between the footprints), one per shard: every point of one block
/// lies in the other's surroundings ring, and each ground point (25 m north of its block) is only
/// in rings, both blocks'. Each shard lists those points with its own structure; the merge lists
/// them as the single run does.
#[test]
fn points_near_the_border_between_shards_are_listed_as_by_a_single_run() {
    let (fx, pf) = blocks_portfolio(&[("W1", 0.0, 0.0), ("E2", 40.0, 0.0)]);
    let (single, merged) = single_and_merged(&fx, &pf, &[]);
    let text = std::fs::read_to_string(merged.join("points.csv")).unwrap();
    // E2's ground point: in both rings, listed once with the nearer structure (E2, 20 m).
    let rows: Vec<&str> = text.lines().filter(|l| l.contains("-E2-14,")).collect();
    assert_eq!(rows.len(), 2, "one row per dataset: {rows:?}");
    for r in rows {
        assert!(r.contains(",E2,surroundings,") && r.ends_with(",2"), "{r}");
    }
    // A point inside W1: its owner's row, in one more ring (E2's).
    let rows: Vec<&str> = text.lines().filter(|l| l.contains("-W1-0,")).collect();
    assert_eq!(rows.len(), 2, "{rows:?}");
    assert!(
        rows.iter()
            .all(|r| r.contains(",W1,structure,") && r.ends_with(",1"))
    );
    let r: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(single.join("results.json")).unwrap())
            .unwrap();
    assert_eq!(r["portfolio"]["coverage"]["points_surroundings_only"], 4);
}

/// Two blocks 4 m apart (buffers of 5 m overlap), in different shards: a point 2 m from each is
/// a tie, and a point 1.5 m from W1 and 2.5 m from E2 is W1's — as in a single run, although
/// E2's shard alone would have taken it (each shard decides with its neighbours' structures).
#[test]
fn owners_and_ties_between_touching_shards_are_the_single_runs() {
    let (fx, pf) = blocks_portfolio(&[("W1", 0.0, 0.0), ("E2", 24.0, 0.0)]);
    let (_, merged) = single_and_merged(&fx, &pf, &[]);
    let text = std::fs::read_to_string(merged.join("points.csv")).unwrap();
    let rows = |id: &str| -> Vec<String> {
        text.lines()
            .filter(|l| l.contains(&format!("-{id},")))
            .map(str::to_string)
            .collect()
    };
    // W1's buffer spot at (12, 0): a tie row, then its nearest ring (W1 and E2 both at 2 m:
    // W1, first in input order, is tied, so no ring row is left), per dataset.
    let tie = rows("W1-12");
    assert!(tie.iter().any(|r| r.contains(",tie,")), "{tie:?}");
    assert!(!tie.iter().any(|r| r.contains(",structure,")), "{tie:?}");
    // E2's buffer spot at (11.5, 1): W1's, 1.5 m away, in E2's ring.
    let contested = rows("E2-13");
    assert_eq!(contested.len(), 2, "one row per dataset: {contested:?}");
    assert!(
        contested.iter().all(|r| r.contains(",W1,structure,")),
        "{contested:?}"
    );
}
