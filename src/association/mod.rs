//! Point-to-structure association: spatial index, footprint + buffer rule, surroundings ring.
//!
//! Rules (stated in docs/methods.md):
//! 1. A point inside a footprint belongs to that structure (role `structure`, `inside = true`).
//!    A point inside two footprints (overlapping footprints) is a tie.
//! 2. A point outside every footprint but within `buffer_m` of one or more footprints belongs to
//!    the structure whose footprint edge is nearest. Equal distances (within 1 mm) are a tie.
//! 3. Ties are excluded from every structure and counted.
//! 4. A point within `surroundings_m` of a footprint, and not assigned to that structure by rules
//!    1–2, is one of that structure's surroundings (context for relative movement). A point may be
//!    in the surroundings of several structures, and may also belong to a neighbouring structure.
//!
//! Owns the R-tree over footprint envelopes expanded by the surroundings radius (so the ingest
//! stage can keep only points within reach), and, for a `--shard` run, the halo of the other
//! shards' structures near its own, which compete for owners and ties as in a single run but are
//! never linked or counted. It does not screen point quality (see `assess`).

use geo::MultiPolygon;
use rstar::{AABB, RTree, primitives::GeomWithData, primitives::Rectangle};

/// Two distances closer than this are a tie, m.
pub const TIE_TOLERANCE_M: f64 = 1e-3;

/// Role of an associated point.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Role {
    /// On the structure (inside its footprint or its buffer).
    Structure,
    /// In the ring around it.
    Surroundings,
}

/// One (point, structure) link.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Link {
    /// Structure index (input order).
    pub structure: usize,
    /// Role of the point for that structure.
    pub role: Role,
    /// Distance to the footprint, m (0 inside).
    pub distance_m: f64,
    /// True when the point lies inside the footprint.
    pub inside: bool,
}

/// Association outcome for one point.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct PointLinks {
    /// Every link of the point (at most one with role `Structure`).
    pub links: Vec<Link>,
    /// True when the point was a tie between structures and excluded from all of them.
    pub tie: bool,
}

/// One point's association in 12 bytes, kept for every retained point: its owning structure, or
/// — for a point only in surroundings rings — the nearest structure whose ring holds it, with the
/// distance and the number of rings that hold it (what the points outputs report).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PointAssociation {
    structure: u32,
    /// Distance to that structure's footprint, m (0 inside).
    pub distance_m: f32,
    /// Number of surroundings rings holding the point (saturates at 65 535).
    pub rings: u16,
    flags: u8,
}

const OWNED: u8 = 1;
const INSIDE: u8 = 2;
const TIE: u8 = 4;

impl Default for PointAssociation {
    /// A point within reach with no link.
    fn default() -> Self {
        PointAssociation {
            structure: u32::MAX,
            distance_m: 0.0,
            rings: 0,
            flags: 0,
        }
    }
}

impl PointAssociation {
    /// The owning structure, or the nearest structure whose ring holds the point; None when the
    /// point has no link.
    pub fn structure(&self) -> Option<usize> {
        (self.structure != u32::MAX).then_some(self.structure as usize)
    }
    /// Role for [`Self::structure`]: `Structure` when it owns the point.
    pub fn role(&self) -> Role {
        if self.flags & OWNED != 0 {
            Role::Structure
        } else {
            Role::Surroundings
        }
    }
    /// True when the point lies inside that structure's footprint.
    pub fn inside(&self) -> bool {
        self.flags & INSIDE != 0
    }
    /// True when the point was a tie and is excluded from every structure.
    pub fn tie(&self) -> bool {
        self.flags & TIE != 0
    }
}

impl PointLinks {
    /// The compact summary of these links (see [`PointAssociation`]).
    pub fn summary(&self) -> PointAssociation {
        let owner = self.links.iter().find(|k| k.role == Role::Structure);
        let nearest = self
            .links
            .iter()
            .filter(|k| k.role == Role::Surroundings)
            .min_by(|a, b| {
                a.distance_m
                    .total_cmp(&b.distance_m)
                    .then(a.structure.cmp(&b.structure))
            });
        let rings = self
            .links
            .iter()
            .filter(|k| k.role == Role::Surroundings)
            .count();
        let chosen = owner.or(nearest);
        let mut flags = 0;
        if owner.is_some() {
            flags |= OWNED;
        }
        if chosen.is_some_and(|k| k.inside) {
            flags |= INSIDE;
        }
        if self.tie {
            flags |= TIE;
        }
        PointAssociation {
            structure: chosen.map_or(u32::MAX, |k| {
                u32::try_from(k.structure).unwrap_or(u32::MAX - 1)
            }),
            distance_m: chosen.map_or(0.0, |k| k.distance_m as f32),
            rings: u16::try_from(rings).unwrap_or(u16::MAX),
            flags,
        }
    }
}

/// The points each structure owns, as one array grouped by structure: `owned(s)` lists
/// `(dataset, point)` pairs (4 bytes a point plus an offset per structure), built from the
/// per-point associations the reader stores (`Dataset::association`).
#[derive(Debug, Clone, Default)]
pub struct Owners {
    /// First global point index of each dataset (global = offset + index in the dataset).
    dataset_offsets: Vec<usize>,
    /// `owner_start[s]..owner_start[s+1]` indexes `owned_points` for structure s.
    owner_start: Vec<usize>,
    /// Global indices of owned points, grouped by structure, in point order within a group.
    owned_points: Vec<u32>,
}

impl Owners {
    /// Group every dataset's points by owning structure.
    pub fn from_datasets(datasets: &[crate::ingest::Dataset], n_structures: usize) -> Self {
        Self::from_summaries(
            datasets.iter().map(|d| d.association.as_slice()),
            n_structures,
        )
    }

    /// Group per-dataset summaries by owner.
    pub fn from_summaries<'a>(
        points: impl Iterator<Item = &'a [PointAssociation]> + Clone,
        n_structures: usize,
    ) -> Self {
        let mut dataset_offsets = Vec::new();
        let mut total = 0usize;
        for d in points.clone() {
            dataset_offsets.push(total);
            total += d.len();
        }
        let mut counts = vec![0usize; n_structures + 1];
        for a in points.clone().flatten() {
            if let (Some(s), Role::Structure) = (a.structure(), a.role()) {
                counts[s + 1] += 1;
            }
        }
        for i in 1..counts.len() {
            counts[i] += counts[i - 1];
        }
        let owner_start = counts;
        let mut fill = owner_start.clone();
        let mut owned_points = vec![0u32; *owner_start.last().unwrap_or(&0)];
        for (d, ps) in points.enumerate() {
            for (i, a) in ps.iter().enumerate() {
                if let (Some(s), Role::Structure) = (a.structure(), a.role()) {
                    owned_points[fill[s]] = (dataset_offsets[d] + i) as u32;
                    fill[s] += 1;
                }
            }
        }
        Owners {
            dataset_offsets,
            owner_start,
            owned_points,
        }
    }
}

impl Owners {
    /// `(dataset, point)` pairs owned by structure `s`, in dataset then point order.
    pub fn owned(&self, s: usize) -> impl Iterator<Item = (usize, usize)> + '_ {
        let range = self.owner_start.get(s).copied().unwrap_or(0)
            ..self.owner_start.get(s + 1).copied().unwrap_or(0);
        self.owned_points[range]
            .iter()
            .map(move |&g| split_global(&self.dataset_offsets, g))
    }
}

/// `(dataset, index in the dataset)` of a global point index (dataset offset + index), given
/// each dataset's first global index (ascending, the first 0).
pub fn split_global(dataset_offsets: &[usize], g: u32) -> (usize, usize) {
    let g = g as usize;
    let d = dataset_offsets.partition_point(|&o| o <= g) - 1;
    (d, g - dataset_offsets[d])
}

/// The spatial index over structures: the run's own structures and, in a sharded run, the
/// other shards' structures near them (the halo), which take part in deciding a point's owner
/// and ties exactly as in a single run but are never linked to a point or counted.
pub struct SpatialIndex {
    /// Expanded envelopes of the own structures (data: index in `footprints`, below `own`).
    tree: RTree<GeomWithData<Rectangle<[f64; 2]>, usize>>,
    /// Expanded envelopes of the halo structures (data: index in `footprints`, `own` or above).
    halo: RTree<GeomWithData<Rectangle<[f64; 2]>, usize>>,
    /// Footprints: the own structures (in their order), then the halo.
    footprints: Vec<MultiPolygon<f64>>,
    /// Number of own structures.
    own: usize,
    buffer_m: f64,
    surroundings_m: f64,
}

impl SpatialIndex {
    /// Build the index over footprints in the analysis CRS.
    pub fn new(footprints: Vec<MultiPolygon<f64>>, buffer_m: f64, surroundings_m: f64) -> Self {
        let reach = surroundings_m.max(buffer_m);
        let own = footprints.len();
        SpatialIndex {
            tree: RTree::bulk_load(envelope_items(&footprints, 0..own, reach)),
            halo: RTree::new(),
            footprints,
            own,
            buffer_m,
            surroundings_m,
        }
    }

    /// Build the index over the own footprints `own` and, as the halo, those of the `others`
    /// (the other shards' structures) that may compete for a point within reach of an own one:
    /// the footprints whose envelope grown by the reach (the larger of `buffer_m` and
    /// `surroundings_m`) meets an own one's grown envelope. Points are kept, linked and counted
    /// for the own structures only; the halo only decides owners and ties as a single run over
    /// all of them would.
    pub fn with_halo(
        own: Vec<MultiPolygon<f64>>,
        others: Vec<MultiPolygon<f64>>,
        buffer_m: f64,
        surroundings_m: f64,
    ) -> Self {
        let mut index = Self::new(own, buffer_m, surroundings_m);
        let reach = surroundings_m.max(buffer_m);
        let near: Vec<MultiPolygon<f64>> = others
            .into_iter()
            .filter(|f| expanded_box(f, reach).is_some_and(|[lo, hi]| index.reaches_box(lo, hi)))
            .collect();
        index.footprints.extend(near);
        let range = index.own..index.footprints.len();
        index.halo = RTree::bulk_load(envelope_items(&index.footprints, range, reach));
        index
    }

    /// Number of halo structures.
    #[cfg(test)]
    fn halo_len(&self) -> usize {
        self.footprints.len() - self.own
    }

    /// True when (x, y) lies within the expanded envelope of some structure: the reach test on its
    /// own, the tests' reference for [`Self::summarise`] (which the reader uses: it tests the reach
    /// and associates in the same query).
    #[cfg(test)]
    fn within_reach(&self, x: f64, y: f64) -> bool {
        self.tree
            .locate_in_envelope_intersecting(&AABB::from_point([x, y]))
            .next()
            .is_some()
    }

    /// True when the box `lo`–`hi` (analysis CRS, m) meets some structure's expanded envelope
    /// (its footprint's bounding box grown by the larger of the buffer and surroundings
    /// distances): only then can a point inside the box be within reach. Used to skip whole
    /// blocks of a points file (Parquet row groups) without reading them.
    pub fn reaches_box(&self, lo: [f64; 2], hi: [f64; 2]) -> bool {
        self.tree
            .locate_in_envelope_intersecting(&AABB::from_corners(lo, hi))
            .next()
            .is_some()
    }

    /// The compact association of one point (analysis CRS) — the same value as
    /// `associate(x, y).summary()` — without allocating; `None` when the point is out of reach
    /// (outside every expanded envelope, the points reader's keep test). Used by the points
    /// reader, which associates every row it keeps while parsing.
    pub fn summarise(&self, x: f64, y: f64) -> Option<PointAssociation> {
        /// Candidates kept on the stack; a point near more structures than this takes the
        /// general (allocating) route.
        const STACK: usize = 24;
        let reach = self.surroundings_m.max(self.buffer_m);
        let mut cands = [(0usize, 0.0f64, false); STACK];
        let mut n = 0usize;
        let mut any = false;
        for g in self
            .tree
            .locate_in_envelope_intersecting(&AABB::from_point([x, y]))
        {
            any = true;
            let (inside, d) = inside_and_distance(&self.footprints[g.data], x, y);
            if d <= reach {
                if n == STACK {
                    return Some(self.associate(x, y).summary());
                }
                cands[n] = (g.data, d, inside);
                n += 1;
            }
        }
        if !any {
            return None;
        }
        // The halo competes for the point (owner, ties) but is never linked or counted below.
        for g in self
            .halo
            .locate_in_envelope_intersecting(&AABB::from_point([x, y]))
        {
            let (inside, d) = inside_and_distance(&self.footprints[g.data], x, y);
            if d <= reach {
                if n == STACK {
                    return Some(self.associate(x, y).summary());
                }
                cands[n] = (g.data, d, inside);
                n += 1;
            }
        }
        let cands = &cands[..n];
        let (owner, tie) = owner_or_tie(cands, self.buffer_m);
        // Rule 4: surroundings links, the nearest of them, and how many.
        let mut rings = 0usize;
        let mut nearest: Option<&(usize, f64, bool)> = None;
        let mut owned: Option<&(usize, f64, bool)> = None;
        for c in cands.iter().filter(|c| c.0 < self.own) {
            if Some(c.0) == owner {
                owned = Some(c);
            } else if c.1 <= self.surroundings_m && !(tie && c.1 <= self.buffer_m) {
                rings += 1;
                if nearest.is_none_or(|m| nearer(c, m)) {
                    nearest = Some(c);
                }
            }
        }
        let chosen = owned.or(nearest);
        let mut flags = 0;
        if owned.is_some() {
            flags |= OWNED;
        }
        if chosen.is_some_and(|c| c.2) {
            flags |= INSIDE;
        }
        if tie {
            flags |= TIE;
        }
        Some(PointAssociation {
            structure: chosen.map_or(u32::MAX, |c| u32::try_from(c.0).unwrap_or(u32::MAX - 1)),
            distance_m: chosen.map_or(0.0, |c| c.1 as f32),
            rings: u16::try_from(rings).unwrap_or(u16::MAX),
            flags,
        })
    }

    /// Associate one point (analysis CRS) by the rules in the module doc.
    pub fn associate(&self, x: f64, y: f64) -> PointLinks {
        let here = AABB::from_point([x, y]);
        let mut cands: Vec<(usize, f64, bool)> = self
            .tree
            .locate_in_envelope_intersecting(&here)
            .chain(self.halo.locate_in_envelope_intersecting(&here))
            .map(|g| {
                let (inside, d) = inside_and_distance(&self.footprints[g.data], x, y);
                (g.data, d, inside)
            })
            .filter(|(_, d, _)| *d <= self.surroundings_m.max(self.buffer_m))
            .collect();
        cands.sort_by_key(|c| c.0);
        let mut out = PointLinks::default();
        // Rule 1/2: choose the owning structure.
        let insiders: Vec<&(usize, f64, bool)> = cands.iter().filter(|c| c.2).collect();
        let owner: Option<usize> = if insiders.len() > 1 {
            out.tie = true;
            None
        } else if insiders.len() == 1 {
            Some(insiders[0].0)
        } else {
            let mut in_buffer: Vec<&(usize, f64, bool)> =
                cands.iter().filter(|c| c.1 <= self.buffer_m).collect();
            in_buffer.sort_by(|a, b| a.1.total_cmp(&b.1));
            match in_buffer.as_slice() {
                [] => None,
                [one] => Some(one.0),
                [a, b, ..] => {
                    if (b.1 - a.1).abs() <= TIE_TOLERANCE_M {
                        out.tie = true;
                        None
                    } else {
                        Some(a.0)
                    }
                }
            }
        };
        for (s, d, inside) in cands.into_iter().filter(|c| c.0 < self.own) {
            if Some(s) == owner {
                out.links.push(Link {
                    structure: s,
                    role: Role::Structure,
                    distance_m: d,
                    inside,
                });
            } else if d <= self.surroundings_m && !(out.tie && d <= self.buffer_m) {
                out.links.push(Link {
                    structure: s,
                    role: Role::Surroundings,
                    distance_m: d,
                    inside,
                });
            }
        }
        out
    }

    /// [`Self::associate`] into `out` (cleared first) with `cands` as scratch space: the same
    /// links and tie, without allocating once the buffers have grown (the run associates every
    /// kept point this way; `associate` stays the plain statement of the rules).
    pub fn associate_into(
        &self,
        x: f64,
        y: f64,
        cands: &mut Vec<(usize, f64, bool)>,
        out: &mut PointLinks,
    ) {
        let here = AABB::from_point([x, y]);
        let reach = self.surroundings_m.max(self.buffer_m);
        cands.clear();
        cands.extend(
            self.tree
                .locate_in_envelope_intersecting(&here)
                .chain(self.halo.locate_in_envelope_intersecting(&here))
                .map(|g| {
                    let (inside, d) = inside_and_distance(&self.footprints[g.data], x, y);
                    (g.data, d, inside)
                })
                .filter(|(_, d, _)| *d <= reach),
        );
        // Structure indices are distinct: the order is that of `associate`'s sort.
        cands.sort_unstable_by_key(|c| c.0);
        out.links.clear();
        let (owner, tie) = owner_or_tie(cands, self.buffer_m);
        out.tie = tie;
        for &(s, d, inside) in cands.iter().filter(|c| c.0 < self.own) {
            let role = if Some(s) == owner {
                Role::Structure
            } else if d <= self.surroundings_m && !(out.tie && d <= self.buffer_m) {
                Role::Surroundings
            } else {
                continue;
            };
            out.links.push(Link {
                structure: s,
                role,
                distance_m: d,
                inside,
            });
        }
    }
}

/// (distance, structure) order of candidates `(structure, distance, inside)`: nearest first, the
/// lower index first among equals — the order `associate` gets from its sort by index then stable
/// sort by distance.
fn nearer(a: &(usize, f64, bool), b: &(usize, f64, bool)) -> bool {
    a.1.total_cmp(&b.1).then(a.0.cmp(&b.0)).is_lt()
}

/// Rules 1–3 (module doc) over the candidates `(structure, distance, inside)` within reach: the
/// owner, or a tie (`(None, true)`); the two nearest within `buffer_m` found in one pass in
/// [`nearer`] order. What `associate` finds with its sorts.
fn owner_or_tie(cands: &[(usize, f64, bool)], buffer_m: f64) -> (Option<usize>, bool) {
    let mut insiders = cands.iter().filter(|c| c.2);
    match (insiders.next(), insiders.next()) {
        (Some(_), Some(_)) => return (None, true),
        (Some(one), None) => return (Some(one.0), false),
        _ => {}
    }
    let mut first: Option<&(usize, f64, bool)> = None;
    let mut second: Option<&(usize, f64, bool)> = None;
    for c in cands.iter().filter(|c| c.1 <= buffer_m) {
        if first.is_none_or(|f| nearer(c, f)) {
            second = first;
            first = Some(c);
        } else if second.is_none_or(|s| nearer(c, s)) {
            second = Some(c);
        }
    }
    match (first, second) {
        (None, _) => (None, false),
        (Some(a), Some(b)) if (b.1 - a.1).abs() <= TIE_TOLERANCE_M => (None, true),
        (Some(a), _) => (Some(a.0), false),
    }
}

/// R-tree items of `footprints[range]`: each envelope grown by `reach`, with its index.
fn envelope_items(
    footprints: &[MultiPolygon<f64>],
    range: std::ops::Range<usize>,
    reach: f64,
) -> Vec<GeomWithData<Rectangle<[f64; 2]>, usize>> {
    range
        .filter_map(|i| {
            let [lo, hi] = expanded_box(&footprints[i], reach)?;
            Some(GeomWithData::new(Rectangle::from_corners(lo, hi), i))
        })
        .collect()
}

/// The bounding box of `f` grown by `reach` on every side, as `[min corner, max corner]`; None
/// for an empty footprint.
fn expanded_box(f: &MultiPolygon<f64>, reach: f64) -> Option<[[f64; 2]; 2]> {
    use geo::BoundingRect;
    let r = f.bounding_rect()?;
    Some([
        [r.min().x - reach, r.min().y - reach],
        [r.max().x + reach, r.max().y + reach],
    ])
}

/// Whether (x, y) lies in the interior of `mp`, and its Euclidean distance to `mp` (0 inside), in
/// one pass over the edges: the crossing-number test (even–odd over every ring of a polygon, so
/// holes count) and the squared distance to each segment. Same answers as `geo`'s `Contains`
/// (interior only: a point on the boundary is not inside, distance 0) and `Euclidean` distance,
/// checked against them in the tests; written out because association runs once per point and
/// those general routines spend most of their time in `hypot` and ring classification.
fn inside_and_distance(mp: &MultiPolygon<f64>, x: f64, y: f64) -> (bool, f64) {
    let mut inside_any = false;
    let mut best_sq = f64::INFINITY;
    for poly in &mp.0 {
        let mut crossings = false;
        for ring in std::iter::once(poly.exterior()).chain(poly.interiors()) {
            for seg in ring.0.windows(2) {
                let (a, b) = (seg[0], seg[1]);
                // Crossing number: a horizontal ray to +x.
                if (a.y > y) != (b.y > y) {
                    let xc = a.x + (y - a.y) * (b.x - a.x) / (b.y - a.y);
                    if x < xc {
                        crossings = !crossings;
                    }
                }
                // Squared distance to the segment.
                let (dx, dy) = (b.x - a.x, b.y - a.y);
                let len_sq = dx * dx + dy * dy;
                let u = if len_sq > 0.0 {
                    (((x - a.x) * dx + (y - a.y) * dy) / len_sq).clamp(0.0, 1.0)
                } else {
                    0.0
                };
                let (ex, ey) = (a.x + u * dx - x, a.y + u * dy - y);
                best_sq = best_sq.min(ex * ex + ey * ey);
            }
        }
        inside_any |= crossings;
    }
    if best_sq == 0.0 {
        // On the boundary: not in the interior.
        return (false, 0.0);
    }
    if inside_any {
        (true, 0.0)
    } else {
        (false, best_sq.sqrt())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use geo::{Contains, Distance, Euclidean, LineString, Point, Polygon};

    /// The one-pass kernel against `geo` (a general-purpose reference library): a rotated
    /// rectangle, an L shape with a hole, and a MultiPolygon, on a grid of points that includes
    /// vertices and edge points.
    #[test]
    fn inside_and_distance_agree_with_geo() {
        let rot = |x: f64, y: f64| {
            let (s, c) = 0.5f64.sin_cos();
            (x * c - y * s + 3.0, x * s + y * c - 2.0)
        };
        let ring = |pts: &[(f64, f64)]| LineString::from(pts.to_vec());
        let rotated = MultiPolygon::new(vec![Polygon::new(
            ring(&[
                rot(0.0, 0.0),
                rot(12.0, 0.0),
                rot(12.0, 7.0),
                rot(0.0, 7.0),
                rot(0.0, 0.0),
            ]),
            vec![],
        )]);
        let l_with_hole = MultiPolygon::new(vec![Polygon::new(
            ring(&[
                (0.0, 0.0),
                (10.0, 0.0),
                (10.0, 4.0),
                (4.0, 4.0),
                (4.0, 10.0),
                (0.0, 10.0),
                (0.0, 0.0),
            ]),
            vec![ring(&[
                (1.0, 1.0),
                (3.0, 1.0),
                (3.0, 3.0),
                (1.0, 3.0),
                (1.0, 1.0),
            ])],
        )]);
        let multi = MultiPolygon::new(vec![
            Polygon::new(
                ring(&[(0.0, 0.0), (2.0, 0.0), (2.0, 2.0), (0.0, 0.0)]),
                vec![],
            ),
            Polygon::new(
                ring(&[(5.0, 5.0), (8.0, 5.0), (8.0, 9.0), (5.0, 9.0), (5.0, 5.0)]),
                vec![],
            ),
        ]);
        for mp in [rotated, l_with_hole, multi] {
            for i in -8..=56 {
                for j in -8..=56 {
                    let (x, y) = (i as f64 * 0.25, j as f64 * 0.25);
                    let p = Point::new(x, y);
                    let want_inside = mp.contains(&p);
                    let want_d = if want_inside {
                        0.0
                    } else {
                        Euclidean.distance(&mp, &p)
                    };
                    let (inside, d) = inside_and_distance(&mp, x, y);
                    assert_eq!(inside, want_inside, "({x}, {y})");
                    assert!((d - want_d).abs() < 1e-9, "({x}, {y}): {d} vs {want_d}");
                }
            }
        }
    }

    fn rect(x0: f64, y0: f64, x1: f64, y1: f64) -> MultiPolygon<f64> {
        MultiPolygon::new(vec![Polygon::new(
            LineString::from(vec![(x0, y0), (x1, y0), (x1, y1), (x0, y1), (x0, y0)]),
            vec![],
        )])
    }

    fn index() -> SpatialIndex {
        // Two 10 m squares 6 m apart: A = [0,10]², B = [16,26]×[0,10].
        SpatialIndex::new(
            vec![rect(0.0, 0.0, 10.0, 10.0), rect(16.0, 0.0, 26.0, 10.0)],
            5.0,
            50.0,
        )
    }

    fn owner(l: &PointLinks) -> Option<usize> {
        l.links
            .iter()
            .find(|k| k.role == Role::Structure)
            .map(|k| k.structure)
    }

    #[test]
    fn inside_belongs_to_footprint() {
        let l = index().associate(5.0, 5.0);
        assert_eq!(owner(&l), Some(0));
        assert!(
            l.links
                .iter()
                .any(|k| k.structure == 1 && k.role == Role::Surroundings)
        );
    }

    #[test]
    fn buffer_goes_to_nearest_edge() {
        let l = index().associate(12.0, 5.0); // 2 m from A, 4 m from B
        assert_eq!(owner(&l), Some(0));
        let l = index().associate(14.5, 5.0); // 4.5 m from A, 1.5 m from B
        assert_eq!(owner(&l), Some(1));
    }

    #[test]
    fn equidistant_buffer_point_is_a_tie() {
        let l = index().associate(13.0, 5.0);
        assert!(l.tie);
        assert_eq!(owner(&l), None);
    }

    #[test]
    fn outside_buffer_is_surroundings_only() {
        let l = index().associate(5.0, 30.0); // 20 m north of A
        assert_eq!(owner(&l), None);
        assert!(!l.tie);
        assert!(l.links.iter().all(|k| k.role == Role::Surroundings));
        assert!(!index().within_reach(500.0, 500.0));
        assert!(index().associate(500.0, 500.0).links.is_empty());
    }

    /// Uniform draws in [0, 1) from a 64-bit linear congruential generator (Knuth's MMIX
    /// constants), reproducible from `seed`.
    fn uniform(mut seed: u64) -> impl FnMut() -> f64 {
        move || {
            seed = seed
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (seed >> 11) as f64 / (1u64 << 53) as f64
        }
    }

    /// `n` random rectangles of 3–15 m sides in a 60 × 40 m area north of y = 20 m (overlaps
    /// among them), reproducible from `seed`.
    fn cluster(n: usize, seed: u64) -> Vec<MultiPolygon<f64>> {
        let mut next = uniform(seed);
        (0..n)
            .map(|_| {
                let (x0, y0) = (next() * 60.0, 20.0 + next() * 40.0);
                rect(x0, y0, x0 + 3.0 + next() * 12.0, y0 + 3.0 + next() * 12.0)
            })
            .collect()
    }

    /// `summarise` (allocation-free, used by the reader) gives exactly `associate().summary()`
    /// (and `associate_into` exactly `associate()`),
    /// and `None` exactly when the point is out of reach: overlapping footprints (inside ties),
    /// equidistant buffer points (buffer ties), points near more structures than its stack holds.
    #[test]
    fn summarise_equals_the_summary_of_the_full_links() {
        let mut fps = Vec::new();
        // A regular row (exact buffer ties halfway between neighbours) ...
        for i in 0..6 {
            let x0 = i as f64 * 16.0;
            fps.push(rect(x0, 0.0, x0 + 10.0, 10.0));
        }
        // ... and a random cluster with overlaps, dense enough for > 24 candidates.
        fps.extend(cluster(40, 12345));
        let idx = SpatialIndex::new(fps, 5.0, 50.0);
        let (mut ties, mut owned, mut unreached, mut crowded) = (0, 0, 0, 0);
        let (mut cands, mut into) = (Vec::new(), PointLinks::default());
        for i in -240..=480 {
            for j in -240..=480 {
                let (x, y) = (i as f64 * 0.5, j as f64 * 0.5);
                let got = idx.summarise(x, y);
                if !idx.within_reach(x, y) {
                    assert_eq!(got, None, "({x}, {y})");
                    unreached += 1;
                    continue;
                }
                let want = idx.associate(x, y);
                assert_eq!(got, Some(want.summary()), "({x}, {y})");
                idx.associate_into(x, y, &mut cands, &mut into);
                assert_eq!(into, want, "associate_into ({x}, {y})");
                ties += usize::from(want.tie);
                owned += usize::from(want.links.iter().any(|k| k.role == Role::Structure));
                crowded += usize::from(want.links.len() > 24);
            }
        }
        assert!(ties > 0 && owned > 0 && unreached > 0 && crowded > 0);
    }

    /// A shard's index (its own structures plus the halo of the others near them) links, ties
    /// and keeps every point exactly as the index of all structures does, restricted to the own
    /// structures: the single run's association (the far structure is left out of the halo), and
    /// `summarise` stays `associate().summary()`.
    #[test]
    fn a_shard_with_its_halo_associates_as_the_single_run() {
        // Terraced rows (touching and 6 m apart: buffer ties and contested owners) and a random
        // cluster with overlaps; far structures that no halo needs.
        let mut fps = Vec::new();
        for i in 0..8 {
            let x0 = i as f64 * if i < 4 { 10.0 } else { 16.0 };
            fps.push(rect(x0, 0.0, x0 + 10.0, 10.0));
        }
        fps.extend(cluster(20, 99));
        fps.push(rect(2000.0, 2000.0, 2010.0, 2010.0));
        let (buffer, ring) = (5.0, 20.0);
        let full = SpatialIndex::new(fps.clone(), buffer, ring);
        // The shard: every third structure but the far one (its index in the shard = its rank).
        let mine: Vec<bool> = (0..fps.len())
            .map(|i| i % 3 == 1 && i + 1 < fps.len())
            .collect();
        let own_of: Vec<Option<usize>> = mine
            .iter()
            .scan(0, |n, &m| {
                *n += usize::from(m);
                Some(m.then(|| *n - 1))
            })
            .collect();
        let own: Vec<_> = (0..fps.len())
            .filter(|&i| mine[i])
            .map(|i| fps[i].clone())
            .collect();
        let others: Vec<_> = (0..fps.len())
            .filter(|&i| !mine[i])
            .map(|i| fps[i].clone())
            .collect();
        let n_others = others.len();
        let shard = SpatialIndex::with_halo(own.clone(), others, buffer, ring);
        assert!(
            shard.halo_len() > 0 && shard.halo_len() < n_others,
            "{} of {n_others}",
            shard.halo_len()
        );
        let own_only = SpatialIndex::new(own, buffer, ring);
        let (mut kept, mut ties, mut contested) = (0, 0, 0);
        let (mut cands, mut into) = (Vec::new(), PointLinks::default());
        for i in -60..=260 {
            for j in -60..=180 {
                let (x, y) = (i as f64 * 0.5, j as f64 * 0.5);
                let got = shard.summarise(x, y);
                assert_eq!(got.is_some(), own_only.within_reach(x, y), "({x}, {y})");
                let Some(got) = got else { continue };
                kept += 1;
                let links = shard.associate(x, y);
                assert_eq!(got, links.summary(), "({x}, {y})");
                shard.associate_into(x, y, &mut cands, &mut into);
                assert_eq!(into, links, "associate_into ({x}, {y})");
                let single = full.associate(x, y);
                let want: Vec<Link> = single
                    .links
                    .iter()
                    .filter_map(|k| own_of[k.structure].map(|s| Link { structure: s, ..*k }))
                    .collect();
                assert_eq!(links.links, want, "({x}, {y})");
                assert_eq!(links.tie, single.tie, "({x}, {y})");
                ties += usize::from(single.tie);
                contested += usize::from(
                    own_only
                        .associate(x, y)
                        .links
                        .iter()
                        .any(|k| k.role == Role::Structure)
                        && !want.iter().any(|k| k.role == Role::Structure),
                );
            }
        }
        assert!(
            kept > 0 && ties > 0 && contested > 0,
            "{kept} {ties} {contested}"
        );
    }

    #[test]
    fn rotated_footprint_and_multipolygon() {
        // A square rotated by 45° (diamond) centred at (0, 0), half-diagonal 10 m, and a
        // MultiPolygon of two separate parts belonging to one structure.
        let diamond = MultiPolygon::new(vec![Polygon::new(
            LineString::from(vec![
                (0.0, -10.0),
                (10.0, 0.0),
                (0.0, 10.0),
                (-10.0, 0.0),
                (0.0, -10.0),
            ]),
            vec![],
        )]);
        let mut parts = rect(100.0, 0.0, 110.0, 10.0);
        parts.0.extend(rect(130.0, 0.0, 140.0, 10.0).0);
        let idx = SpatialIndex::new(vec![diamond, parts], 5.0, 50.0);
        // (8, 8) is inside the diamond's bounding box but outside the diamond, 4.24 m from its edge.
        let l = idx.associate(8.0, 8.0);
        let k = l.links.iter().find(|k| k.role == Role::Structure).unwrap();
        assert!(!k.inside && (k.distance_m - 6.0 / 2f64.sqrt()).abs() < 1e-9);
        assert_eq!(owner(&idx.associate(135.0, 5.0)), Some(1));
        assert_eq!(owner(&idx.associate(120.0, 5.0)), None); // 10 m from both parts
    }
}
