//! Spatially compact shards for `assess --shard K/N`.
//!
//! Owns which structures belong to shard K of N: every structure's footprint centroid (analysis
//! CRS) is placed on a 2¹⁶ × 2¹⁶ grid over the centroids' bounding box and given its index along
//! the Hilbert curve of that grid (Hilbert 1891; the iterative form of Warren, *Hacker's
//! Delight*, 2nd ed., 2013, chapter 16 — both in docs/methods.md, References). The structures
//! sorted by (curve index, position in the footprint file) are cut into N runs of equal count
//! (the first `m·(K−1)/N` to `m·K/N`, rounded down, of m structures). The curve keeps cells that
//! are near on it near in the plane, so each shard covers a compact area and reads only the
//! points of that area (Parquet row groups beyond its reach are skipped, see
//! `ingest::parquet_points`). Deterministic: the same footprints give the same shards on every
//! machine.
//!
//! It does not read points or decide associations.

/// Cells per side of the grid is 2^ORDER.
const ORDER: u32 = 16;

/// Index of cell (x, y) along the Hilbert curve of a 2^order × 2^order grid (x, y < 2^order);
/// the curve starts at (0, 0) and ends at (2^order − 1, 0).
pub fn hilbert_index(order: u32, x: u32, y: u32) -> u64 {
    let n = 1u64 << order;
    let (mut x, mut y) = (u64::from(x), u64::from(y));
    let mut d = 0u64;
    let mut s = n >> 1;
    while s > 0 {
        let rx = u64::from(x & s > 0);
        let ry = u64::from(y & s > 0);
        d += s * s * ((3 * rx) ^ ry);
        // Rotate the quadrant so that the sub-curve has the standard orientation.
        if ry == 0 {
            if rx == 1 {
                x = n - 1 - x;
                y = n - 1 - y;
            }
            std::mem::swap(&mut x, &mut y);
        }
        s >>= 1;
    }
    d
}

/// Which of the structures with these centroids (analysis CRS, m) belong to shard `k` of `n`
/// (1-based): one flag per structure, in input order.
pub fn members(centroids: &[(f64, f64)], k: usize, n: usize) -> Vec<bool> {
    let m = centroids.len();
    let finite = centroids
        .iter()
        .filter(|(x, y)| x.is_finite() && y.is_finite());
    let (mut x0, mut y0, mut x1, mut y1) = (f64::MAX, f64::MAX, f64::MIN, f64::MIN);
    for &(x, y) in finite {
        x0 = x0.min(x);
        y0 = y0.min(y);
        x1 = x1.max(x);
        y1 = y1.max(y);
    }
    let cells = f64::from((1u32 << ORDER) - 1);
    let cell = |v: f64, lo: f64, hi: f64| -> u32 {
        if !v.is_finite() || hi <= lo {
            return 0;
        }
        // In [0, cells] by construction; the cast saturates anyway.
        ((v - lo) / (hi - lo) * cells).round() as u32
    };
    let mut order: Vec<(u64, usize)> = centroids
        .iter()
        .enumerate()
        .map(|(i, &(x, y))| (hilbert_index(ORDER, cell(x, x0, x1), cell(y, y0, y1)), i))
        .collect();
    order.sort_unstable();
    let (from, to) = (m * (k - 1) / n, m * k / n);
    let mut flags = vec![false; m];
    for &(_, i) in &order[from..to] {
        flags[i] = true;
    }
    flags
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_order_one_curve_is_the_u_shape() {
        let d: Vec<u64> = [(0, 0), (0, 1), (1, 1), (1, 0)]
            .iter()
            .map(|&(x, y)| hilbert_index(1, x, y))
            .collect();
        assert_eq!(d, [0, 1, 2, 3]);
    }

    #[test]
    fn consecutive_curve_cells_are_neighbours_and_every_cell_is_visited_once() {
        let order = 4;
        let side = 1u32 << order;
        let mut cells: Vec<(u64, u32, u32)> = (0..side)
            .flat_map(|x| (0..side).map(move |y| (hilbert_index(order, x, y), x, y)))
            .collect();
        cells.sort_unstable();
        for (i, c) in cells.iter().enumerate() {
            assert_eq!(c.0, i as u64, "indices are 0..side² without gaps");
        }
        for w in cells.windows(2) {
            let step = w[0].1.abs_diff(w[1].1) + w[0].2.abs_diff(w[1].2);
            assert_eq!(step, 1, "{:?} -> {:?}", w[0], w[1]);
        }
    }

    #[test]
    fn shards_split_evenly_cover_everything_once_and_are_compact() {
        // A 10 × 10 grid of blocks in shuffled input order.
        let mut centroids: Vec<(f64, f64)> = (0..100)
            .map(|i| (f64::from(i % 10) * 100.0, f64::from(i / 10) * 100.0))
            .collect();
        centroids.reverse();
        centroids.swap(3, 71);
        let n = 4;
        let mut count = vec![0usize; centroids.len()];
        for k in 1..=n {
            let f = members(&centroids, k, n);
            let mine: Vec<(f64, f64)> = centroids
                .iter()
                .zip(&f)
                .filter(|(_, m)| **m)
                .map(|(c, _)| *c)
                .collect();
            assert_eq!(mine.len(), 25);
            // A quarter of the grid along the curve is one 5 × 5 quadrant.
            let w = mine.iter().map(|c| c.0).fold(f64::MIN, f64::max)
                - mine.iter().map(|c| c.0).fold(f64::MAX, f64::min);
            let h = mine.iter().map(|c| c.1).fold(f64::MIN, f64::max)
                - mine.iter().map(|c| c.1).fold(f64::MAX, f64::min);
            assert!(w <= 400.0 && h <= 400.0, "shard {k} spans {w} × {h} m");
            for (i, m) in f.iter().enumerate() {
                count[i] += usize::from(*m);
            }
        }
        assert!(count.iter().all(|&c| c == 1));
        assert_eq!(members(&centroids, 2, 3), members(&centroids, 2, 3));
    }
}
