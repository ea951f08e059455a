//! A packed R-tree written straight into the tables of SQLite's R*Tree module, so that a layer's
//! spatial index costs one sort instead of one R*-tree insertion per feature.
//!
//! Owns the packing (Sort-Tile-Recursive, Leutenegger, Lopez & Edgington 1997; see
//! docs/formats.md "The spatial index of results.gpkg") and the node encoding of SQLite's R*Tree
//! module for a 2-D `rtree(id, minx, maxx, miny, maxy)` table: each node is one row of
//! `<table>_node(nodeno, data)`, `data` a blob of [`NODE_BYTES`] bytes — a big-endian `u16` tree
//! depth (root only, 0 elsewhere), a big-endian `u16` cell count, then the cells, each a
//! big-endian `i64` (feature id in a leaf, child node number above) and four big-endian `f32`
//! (min x, max x, min y, max y); `<table>_rowid(rowid, nodeno)` names each feature's leaf and
//! `<table>_parent(nodeno, parentnode)` each non-root node's parent. The root is node 1.
//! Coordinates are rounded outward to `f32` exactly as the module rounds an inserted row, so the
//! boxes are the ones an insertion would store. The result is checked with SQLite's own
//! `rtreecheck()` in the tests. It does not decide what is indexed.

use anyhow::{Context, Result};
use rusqlite::Connection;

/// Bytes of one cell: an `i64` id and four `f32` coordinates.
const CELL_BYTES: usize = 8 + 4 * 4;

/// Cells per node: the R*Tree module's maximum (`RTREE_MAXCELLS`, 51), which is what it uses for
/// a 2-D table on pages of 4 096 bytes.
pub const MAX_CELLS: usize = 51;

/// Bytes of a node blob: 4 header bytes and [`MAX_CELLS`] cells. The module takes the node size
/// of an existing table from the length of its root blob.
pub const NODE_BYTES: usize = 4 + CELL_BYTES * MAX_CELLS;

/// One index entry: a feature id (or a child node number) and its box rounded outward to `f32`,
/// `[min x, max x, min y, max y]`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Entry {
    /// Feature id (leaf level) or child node number (above).
    pub id: i64,
    /// Box, rounded outward to `f32`.
    pub bbox: [f32; 4],
}

impl Entry {
    /// The entry of feature `id` with box `[min x, max x, min y, max y]` (f64), rounded outward
    /// as SQLite's R*Tree module rounds an inserted row (`rtreeValueDown` / `rtreeValueUp`).
    pub fn new(id: i64, b: [f64; 4]) -> Entry {
        Entry {
            id,
            bbox: [down(b[0]), up(b[1]), down(b[2]), up(b[3])],
        }
    }

    fn centre(&self, axis: usize) -> f64 {
        (f64::from(self.bbox[2 * axis]) + f64::from(self.bbox[2 * axis + 1])) / 2.0
    }
}

/// The largest `f32` not above `d` (the module's `rtreeValueDown`: one step toward zero or away
/// from it by a relative 2⁻²³ when the nearest `f32` lies above).
fn down(d: f64) -> f32 {
    let f = d as f32;
    if f64::from(f) > d {
        (d * if d < 0.0 { RND_AWAY } else { RND_TOWARDS }) as f32
    } else {
        f
    }
}

/// The smallest `f32` not below `d` (the module's `rtreeValueUp`).
fn up(d: f64) -> f32 {
    let f = d as f32;
    if f64::from(f) < d {
        (d * if d < 0.0 { RND_TOWARDS } else { RND_AWAY }) as f32
    } else {
        f
    }
}

const RND_TOWARDS: f64 = 1.0 - 1.0 / 8_388_608.0;
const RND_AWAY: f64 = 1.0 + 1.0 / 8_388_608.0;

/// One node of the packed tree: its children (features at the leaf level).
#[derive(Debug, Clone, PartialEq)]
pub struct Node {
    /// Node number (1 is the root).
    pub number: i64,
    /// Height above the leaves (0 = leaf).
    pub height: u16,
    /// Cells in order.
    pub cells: Vec<Entry>,
}

impl Node {
    fn bbox(&self) -> [f32; 4] {
        let mut b = [
            f32::INFINITY,
            f32::NEG_INFINITY,
            f32::INFINITY,
            f32::NEG_INFINITY,
        ];
        for c in &self.cells {
            b = [
                b[0].min(c.bbox[0]),
                b[1].max(c.bbox[1]),
                b[2].min(c.bbox[2]),
                b[3].max(c.bbox[3]),
            ];
        }
        b
    }

    /// The node blob (see the module documentation); `depth` is written only on the root.
    fn blob(&self, depth: u16) -> Vec<u8> {
        let mut b = Vec::with_capacity(NODE_BYTES);
        b.extend_from_slice(&depth.to_be_bytes());
        b.extend_from_slice(&(self.cells.len() as u16).to_be_bytes());
        for c in &self.cells {
            b.extend_from_slice(&c.id.to_be_bytes());
            for v in c.bbox {
                b.extend_from_slice(&v.to_be_bytes());
            }
        }
        b.resize(NODE_BYTES, 0);
        b
    }
}

/// Sort-Tile-Recursive packing of one level (Leutenegger, Lopez & Edgington 1997): with `P`
/// nodes of at most `max` cells needed, sort by x centre, cut into `ceil(sqrt(P))` vertical
/// slices of equal count, sort each slice by y centre and fill nodes in turn. Ties keep the
/// input order (stable sorts), so the packing is deterministic.
fn str_groups(mut entries: Vec<Entry>, max: usize) -> Vec<Vec<Entry>> {
    let nodes = entries.len().div_ceil(max);
    let slices = (nodes as f64).sqrt().ceil() as usize;
    let per_slice = slices.max(1) * max;
    entries.sort_by(|a, b| a.centre(0).total_cmp(&b.centre(0)));
    let mut out = Vec::with_capacity(nodes);
    for slice in entries.chunks_mut(per_slice) {
        slice.sort_by(|a, b| a.centre(1).total_cmp(&b.centre(1)));
        out.extend(slice.chunks(max).map(<[Entry]>::to_vec));
    }
    out
}

/// The packed tree of `entries` (feature ids with boxes), root first (node 1), then the levels
/// below it, top-down. An empty input gives an empty leaf root.
pub fn pack(entries: Vec<Entry>, max: usize) -> Vec<Node> {
    // Build bottom-up; number afterwards so that the root is 1.
    let mut levels: Vec<Vec<Vec<Entry>>> = Vec::new();
    let mut current = entries;
    loop {
        let groups = if current.len() <= max {
            vec![current]
        } else {
            str_groups(current, max)
        };
        let done = groups.len() == 1;
        // Placeholder child numbers, replaced once every level is known.
        current = groups
            .iter()
            .enumerate()
            .map(|(i, g)| Entry {
                id: i as i64,
                bbox: Node {
                    number: 0,
                    height: 0,
                    cells: g.clone(),
                }
                .bbox(),
            })
            .collect();
        levels.push(groups);
        if done {
            break;
        }
    }
    number_top_down(levels)
}

/// Give the nodes their numbers (root 1, then level by level downwards) and point each internal
/// cell at its child's number.
fn number_top_down(levels: Vec<Vec<Vec<Entry>>>) -> Vec<Node> {
    let height = levels.len() - 1;
    // First number of each level, top-down.
    let mut first = vec![0i64; levels.len()];
    let mut next = 1i64;
    for h in (0..=height).rev() {
        first[h] = next;
        next += levels[h].len() as i64;
    }
    let mut nodes = Vec::with_capacity((next - 1) as usize);
    for h in (0..=height).rev() {
        for (i, cells) in levels[h].iter().enumerate() {
            let mut cells = cells.clone();
            if h > 0 {
                for c in &mut cells {
                    c.id += first[h - 1];
                }
            }
            nodes.push(Node {
                number: first[h] + i as i64,
                height: h as u16,
                cells,
            });
        }
    }
    nodes
}

/// Replace the content of the R*Tree table `rtree` (created empty by `CREATE VIRTUAL TABLE …
/// USING rtree(id, minx, maxx, miny, maxy)` on this connection) by the packed tree of `entries`.
pub fn write(conn: &Connection, rtree: &str, entries: Vec<Entry>) -> Result<()> {
    let nodes = pack(entries, MAX_CELLS);
    let depth = nodes.first().map_or(0, |n| n.height);
    let q = |suffix: &str| format!("\"{}_{suffix}\"", rtree.replace('"', "\"\""));
    let (node_t, rowid_t, parent_t) = (q("node"), q("rowid"), q("parent"));
    conn.execute_batch(&format!(
        "DELETE FROM {node_t}; DELETE FROM {rowid_t}; DELETE FROM {parent_t};"
    ))
    .with_context(|| format!("cannot clear the spatial index {rtree}"))?;
    let mut node = conn.prepare(&format!("INSERT INTO {node_t} VALUES (?1, ?2)"))?;
    // (id, node) pairs of the leaves and of the inner nodes, inserted in ascending key order:
    // appending to a table's B-tree is far cheaper than inserting at random places.
    let (mut leaf_of, mut parent_of) = (Vec::new(), Vec::new());
    for n in &nodes {
        let root = n.number == 1;
        node.execute(rusqlite::params![
            n.number,
            n.blob(if root { depth } else { 0 })
        ])?;
        let pairs = if n.height == 0 {
            &mut leaf_of
        } else {
            &mut parent_of
        };
        pairs.extend(n.cells.iter().map(|c| (c.id, n.number)));
    }
    for (pairs, table) in [(&mut leaf_of, &rowid_t), (&mut parent_of, &parent_t)] {
        pairs.sort_unstable();
        insert_pairs(conn, table, pairs)?;
    }
    Ok(())
}

/// `INSERT INTO table VALUES (?, …), …`: `rows` rows of `columns` parameters each (`table`
/// quoted by the caller). One statement for many rows runs SQLite's per-statement work once.
pub fn insert_sql(table: &str, columns: usize, rows: usize) -> String {
    let row = format!("({})", vec!["?"; columns].join(","));
    format!("INSERT INTO {table} VALUES {}", vec![row; rows].join(","))
}

/// Pairs an `INSERT` of [`insert_pairs`] takes at once (SQLite's per-statement work once per
/// this many rows; 1 000 bound values, far below SQLite's limit of 32 766).
const PAIRS_PER_INSERT: usize = 500;

/// Insert `(a, b)` rows into the two-column table `table` (quoted), in the given order.
fn insert_pairs(conn: &Connection, table: &str, pairs: &[(i64, i64)]) -> Result<()> {
    let sql = |rows: usize| insert_sql(table, 2, rows);
    let values = |c: &[(i64, i64)]| {
        rusqlite::params_from_iter(c.iter().flat_map(|&(a, b)| [a, b]).collect::<Vec<i64>>())
    };
    let mut chunks = pairs.chunks_exact(PAIRS_PER_INSERT);
    if chunks.len() > 0 {
        let mut full = conn.prepare(&sql(PAIRS_PER_INSERT))?;
        for c in &mut chunks {
            full.execute(values(c))?;
        }
    }
    let rest = chunks.remainder();
    if !rest.is_empty() {
        conn.execute(&sql(rest.len()), values(rest))?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    fn boxes(n: usize, seed: u64) -> Vec<[f64; 4]> {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        (0..n)
            .map(|_| {
                let (x, y) = (rng.random_range(3.0..3.2), rng.random_range(55.0..55.1));
                let (w, h) = if rng.random_bool(0.5) {
                    (0.0, 0.0)
                } else {
                    (rng.random_range(0.0..1e-3), rng.random_range(0.0..1e-3))
                };
                [x, x + w, y, y + h]
            })
            .collect()
    }

    fn table(conn: &Connection, name: &str) {
        conn.execute_batch(&format!(
            "CREATE VIRTUAL TABLE {name} USING rtree(id, minx, maxx, miny, maxy);"
        ))
        .unwrap();
    }

    fn hits(conn: &Connection, name: &str, q: [f64; 4]) -> Vec<i64> {
        let mut s = conn
            .prepare(&format!(
                "SELECT id FROM {name} WHERE maxx >= ?1 AND minx <= ?2 AND maxy >= ?3 AND miny <= ?4 ORDER BY id"
            ))
            .unwrap();
        s.query_map(rusqlite::params![q[0], q[1], q[2], q[3]], |r| r.get(0))
            .unwrap()
            .collect::<rusqlite::Result<Vec<i64>>>()
            .unwrap()
    }

    /// The outward rounding matches what SQLite's R*Tree module stores for an inserted row
    /// (the module itself is the reference: the same boxes read back from both tables).
    #[test]
    fn rounding_matches_what_sqlite_stores_on_insert() {
        let conn = Connection::open_in_memory().unwrap();
        table(&conn, "r");
        let bs = boxes(2_000, 7);
        for (i, b) in bs.iter().enumerate() {
            conn.execute(
                "INSERT INTO r VALUES (?1, ?2, ?3, ?4, ?5)",
                rusqlite::params![i as i64, b[0], b[1], b[2], b[3]],
            )
            .unwrap();
        }
        let mut s = conn
            .prepare("SELECT id, minx, maxx, miny, maxy FROM r")
            .unwrap();
        let stored: Vec<(i64, [f64; 4])> = s
            .query_map([], |r| {
                Ok((r.get(0)?, [r.get(1)?, r.get(2)?, r.get(3)?, r.get(4)?]))
            })
            .unwrap()
            .map(Result::unwrap)
            .collect();
        assert_eq!(stored.len(), bs.len());
        for (id, got) in stored {
            let e = Entry::new(id, bs[id as usize]);
            assert_eq!(got, e.bbox.map(f64::from), "box of {id}");
        }
    }

    /// SQLite's own consistency check (`rtreecheck`, R*Tree module) accepts the packed tree, and
    /// every window query gives the same ids as a tree SQLite built by inserting row by row and
    /// as a brute-force scan.
    #[test]
    fn packed_tree_passes_rtreecheck_and_answers_like_an_inserted_one() {
        for n in [0usize, 1, 50, 51, 52, 2_601, 2_602, 10_000] {
            let conn = Connection::open_in_memory().unwrap();
            table(&conn, "packed");
            table(&conn, "inserted");
            let bs = boxes(n, n as u64);
            let entries = bs
                .iter()
                .enumerate()
                .map(|(i, b)| Entry::new(i as i64 + 1, *b))
                .collect();
            write(&conn, "packed", entries).unwrap();
            for (i, b) in bs.iter().enumerate() {
                conn.execute(
                    "INSERT INTO inserted VALUES (?1, ?2, ?3, ?4, ?5)",
                    rusqlite::params![i as i64 + 1, b[0], b[1], b[2], b[3]],
                )
                .unwrap();
            }
            let check: String = conn
                .query_row("SELECT rtreecheck('packed')", [], |r| r.get(0))
                .unwrap();
            assert_eq!(check, "ok", "n = {n}");
            let count: i64 = conn
                .query_row("SELECT count(*) FROM packed", [], |r| r.get(0))
                .unwrap();
            assert_eq!(count as usize, n);
            for q in boxes(40, 99 + n as u64) {
                let q = [q[0] - 0.01, q[1] + 0.01, q[2] - 0.005, q[3] + 0.005];
                let brute: Vec<i64> = bs
                    .iter()
                    .enumerate()
                    .filter(|(_, b)| b[1] >= q[0] && b[0] <= q[1] && b[3] >= q[2] && b[2] <= q[3])
                    .map(|(i, _)| i as i64 + 1)
                    .collect();
                let packed = hits(&conn, "packed", q);
                assert_eq!(packed, hits(&conn, "inserted", q), "n = {n}, window {q:?}");
                // The f32 boxes are rounded outward: never fewer hits than the exact boxes.
                assert!(brute.iter().all(|id| packed.contains(id)), "n = {n}");
            }
        }
    }

    #[test]
    fn a_packed_tree_can_be_edited_afterwards() {
        // A GIS editing the layer inserts and deletes through the module: the tree stays valid.
        let conn = Connection::open_in_memory().unwrap();
        table(&conn, "r");
        let entries = boxes(3_000, 3)
            .iter()
            .enumerate()
            .map(|(i, b)| Entry::new(i as i64 + 1, *b))
            .collect();
        write(&conn, "r", entries).unwrap();
        conn.execute_batch(
            "DELETE FROM r WHERE id % 3 = 0;
             INSERT INTO r VALUES (5000, 3.1, 3.1, 55.05, 55.05);",
        )
        .unwrap();
        let check: String = conn
            .query_row("SELECT rtreecheck('r')", [], |r| r.get(0))
            .unwrap();
        assert_eq!(check, "ok");
        let count: i64 = conn
            .query_row("SELECT count(*) FROM r", [], |r| r.get(0))
            .unwrap();
        assert_eq!(count, 2_001);
    }

    #[test]
    fn levels_are_full_except_the_last_node_of_each_slice() {
        let entries: Vec<Entry> = (0..(MAX_CELLS * MAX_CELLS + 1))
            .map(|i| Entry::new(i as i64 + 1, [i as f64, i as f64, 0.0, 0.0]))
            .collect();
        let nodes = pack(entries, MAX_CELLS);
        assert_eq!(nodes[0].number, 1);
        assert_eq!(nodes[0].height, 2);
        let leaves: Vec<&Node> = nodes.iter().filter(|n| n.height == 0).collect();
        assert_eq!(leaves.len(), MAX_CELLS + 1);
        assert_eq!(
            leaves.iter().map(|n| n.cells.len()).sum::<usize>(),
            MAX_CELLS * MAX_CELLS + 1
        );
        let numbers: Vec<i64> = nodes.iter().map(|n| n.number).collect();
        assert_eq!(numbers, (1..=nodes.len() as i64).collect::<Vec<_>>());
    }
}
