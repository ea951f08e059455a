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
//! stage can keep only points within reach). It does not screen point quality (see `assess`).

use geo::{Contains, Distance, Euclidean, MultiPolygon, Point};
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

/// The spatial index over structures.
pub struct SpatialIndex {
    tree: RTree<GeomWithData<Rectangle<[f64; 2]>, usize>>,
    footprints: Vec<MultiPolygon<f64>>,
    buffer_m: f64,
    surroundings_m: f64,
}

impl SpatialIndex {
    /// Build the index over footprints in the analysis CRS.
    pub fn new(footprints: Vec<MultiPolygon<f64>>, buffer_m: f64, surroundings_m: f64) -> Self {
        use geo::BoundingRect;
        let reach = surroundings_m.max(buffer_m);
        let items = footprints
            .iter()
            .enumerate()
            .filter_map(|(i, f)| {
                let r = f.bounding_rect()?;
                Some(GeomWithData::new(
                    Rectangle::from_corners(
                        [r.min().x - reach, r.min().y - reach],
                        [r.max().x + reach, r.max().y + reach],
                    ),
                    i,
                ))
            })
            .collect();
        SpatialIndex {
            tree: RTree::bulk_load(items),
            footprints,
            buffer_m,
            surroundings_m,
        }
    }

    /// True when (x, y) lies within the expanded envelope of some structure (cheap pre-filter).
    pub fn within_reach(&self, x: f64, y: f64) -> bool {
        self.tree
            .locate_in_envelope_intersecting(&AABB::from_point([x, y]))
            .next()
            .is_some()
    }

    /// Associate one point (analysis CRS) by the rules in the module doc.
    pub fn associate(&self, x: f64, y: f64) -> PointLinks {
        let p = Point::new(x, y);
        let mut cands: Vec<(usize, f64, bool)> = self
            .tree
            .locate_in_envelope_intersecting(&AABB::from_point([x, y]))
            .map(|g| {
                let f = &self.footprints[g.data];
                let inside = f.contains(&p);
                let d = if inside {
                    0.0
                } else {
                    Euclidean.distance(f, &p)
                };
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
        for (s, d, inside) in cands {
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
}

#[cfg(test)]
mod tests {
    use super::*;
    use geo::{LineString, Polygon};

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
