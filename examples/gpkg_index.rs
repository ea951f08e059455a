//! Benchmark (not a test) of the spatial index of results.gpkg's points layer: the same
//! synthetic point rows written with the index grown by one R*Tree insertion per row, or packed
//! in one pass by `output::rtree_pack` (docs/performance.md, "GeoPackage writer").
//!
//! ```sh
//! cargo run --release --example gpkg_index -- packed 1200000 /dev/shm/idx.sqlite
//! cargo run --release --example gpkg_index -- inserted 1200000 /dev/shm/idx.sqlite
//! ```
//!
//! Points are laid out like the bench city's: 100 per structure, structures on a grid, rows in
//! structure order. Prints the seconds for the rows and for the index.

use std::time::Instant;

use plinth::output::gpkg::point_blob;
use plinth::output::rtree_pack;

fn main() -> anyhow::Result<()> {
    let args: Vec<String> = std::env::args().collect();
    let (mode, n, path) = match args.as_slice() {
        [_, m, n, p] if m == "packed" || m == "inserted" => (m.clone(), n.parse::<usize>()?, p),
        _ => anyhow::bail!("usage: gpkg_index packed|inserted N FILE (FILE must not exist)"),
    };
    if std::path::Path::new(path).exists() {
        anyhow::bail!("{path} exists: give a new file");
    }
    let conn = rusqlite::Connection::open(path)?;
    conn.execute_batch(
        "PRAGMA journal_mode = OFF; PRAGMA synchronous = OFF; BEGIN;
         CREATE TABLE p (fid INTEGER PRIMARY KEY, geom BLOB, point_id TEXT, structure_id TEXT);
         CREATE VIRTUAL TABLE r USING rtree(id, minx, maxx, miny, maxy);",
    )?;
    let t = Instant::now();
    let mut rows = conn.prepare("INSERT INTO p VALUES (?1, ?2, ?3, ?4)")?;
    let mut boxes = Vec::with_capacity(n);
    for i in 0..n {
        let s = i / 100;
        let j = (i % 100) as f64;
        let x = 3.0 + (s % 100) as f64 * 1e-3 + (j * 7.3 % 10.0) * 1e-5;
        let y = 55.0 + (s / 100) as f64 * 1e-3 + (j * 3.1 % 10.0) * 1e-5;
        let f = point_blob(x, y);
        let fid = i as i64 + 1;
        rows.execute(rusqlite::params![
            fid,
            f.geom,
            format!("P{i}"),
            format!("S{s}")
        ])?;
        boxes.push((fid, [x, x, y, y]));
    }
    drop(rows);
    let rows_s = t.elapsed().as_secs_f64();
    let t = Instant::now();
    if mode == "packed" {
        let entries = boxes
            .iter()
            .map(|&(fid, b)| rtree_pack::Entry::new(fid, b))
            .collect();
        rtree_pack::write(&conn, "r", entries)?;
    } else {
        let mut ins = conn.prepare("INSERT INTO r VALUES (?1, ?2, ?3, ?4, ?5)")?;
        for (fid, b) in &boxes {
            ins.execute(rusqlite::params![fid, b[0], b[1], b[2], b[3]])?;
        }
    }
    let index_s = t.elapsed().as_secs_f64();
    conn.execute_batch("COMMIT")?;
    let check: String = conn.query_row("SELECT rtreecheck('r')", [], |r| r.get(0))?;
    println!("{mode}: {n} rows {rows_s:.2} s, index {index_s:.2} s, rtreecheck {check}");
    Ok(())
}
