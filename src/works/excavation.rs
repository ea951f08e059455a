//! Greenfield settlement behind an excavation in the analysis CRS: the Clough & O'Rourke (1990)
//! envelope of the chosen soil class, scaled by the user's maximum settlement δ_vm, as a function
//! of the distance from the nearest wall.
//!
//! Owns the excavation outline geometry (distance of a point to the wall line, inside/outside) and
//! the settlement field. The envelope shapes are [`crate::damage::greenfield::clough_orourke_ratio`]
//! (**shapes from memory** \[M\]). It predicts no horizontal movement (the envelopes give none) and
//! does no I/O.
//!
//! Choices: the distance d is the shortest distance to the outline (walls of a polygonal pit are
//! not treated as separate, so corners are rounded, which is conservative at re-entrant corners
//! and unconservative at salient ones by at most the corner geometry); a point inside the outline
//! is given d = 0 (full δ_vm) and flagged, since a structure inside the pit is not a screening
//! case. The whole excavation is treated as complete (no construction dates).

use serde::Serialize;

use crate::damage::greenfield::{ExcavationSoil, clough_orourke_ratio};

use super::model::Support;

/// An excavation in the analysis CRS.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ExcavationGeometry {
    /// Name from the portfolio file.
    pub name: String,
    /// Outline vertices (x, y), m in the analysis CRS, open ring.
    pub outline: Vec<[f64; 2]>,
    /// Excavation depth H_e, m.
    pub depth_m: f64,
    /// Envelope.
    pub profile: ExcavationSoil,
    /// Wall support (informative).
    pub support: Support,
    /// Maximum settlement δ_vm, m (+ down).
    pub max_settlement_m: f64,
}

/// Nearest point of segment [a, b] to p and the distance to it.
fn nearest_on_segment(p: [f64; 2], a: [f64; 2], b: [f64; 2]) -> ([f64; 2], f64) {
    let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
    let l2 = dx * dx + dy * dy;
    let t = if l2 > 0.0 {
        (((p[0] - a[0]) * dx + (p[1] - a[1]) * dy) / l2).clamp(0.0, 1.0)
    } else {
        0.0
    };
    let q = [a[0] + t * dx, a[1] + t * dy];
    (q, ((p[0] - q[0]).powi(2) + (p[1] - q[1]).powi(2)).sqrt())
}

impl ExcavationGeometry {
    /// True when (x, y) lies inside the outline (even–odd rule).
    pub fn contains(&self, x: f64, y: f64) -> bool {
        let n = self.outline.len();
        let mut inside = false;
        for k in 0..n {
            let a = self.outline[k];
            let b = self.outline[(k + 1) % n];
            if (a[1] > y) != (b[1] > y) {
                let xc = a[0] + (y - a[1]) / (b[1] - a[1]) * (b[0] - a[0]);
                if x < xc {
                    inside = !inside;
                }
            }
        }
        inside
    }

    /// Nearest wall point and the distance to it, m.
    pub fn nearest_wall(&self, x: f64, y: f64) -> ([f64; 2], f64) {
        let n = self.outline.len();
        let mut best = (
            self.outline.first().copied().unwrap_or([x, y]),
            f64::INFINITY,
        );
        for k in 0..n {
            let r = nearest_on_segment([x, y], self.outline[k], self.outline[(k + 1) % n]);
            if r.1 < best.1 {
                best = r;
            }
        }
        best
    }

    /// Distance behind the wall used by the envelope, m: 0 inside the outline.
    pub fn distance_behind_wall_m(&self, x: f64, y: f64) -> f64 {
        if self.contains(x, y) {
            0.0
        } else {
            self.nearest_wall(x, y).1
        }
    }

    /// Settlement at (x, y), m (+ down): δ_vm · δv/δvm(d).
    pub fn settlement_m(&self, x: f64, y: f64) -> f64 {
        let d = self.distance_behind_wall_m(x, y);
        clough_orourke_ratio(self.profile, d, self.depth_m)
            .map(|r| r * self.max_settlement_m)
            .unwrap_or(0.0)
    }

    /// Distance beyond which the envelope is zero, m (2H_e sands and soft clays, 3H_e stiff clays).
    pub fn influence_m(&self) -> f64 {
        match self.profile {
            ExcavationSoil::StiffClay => 3.0 * self.depth_m,
            ExcavationSoil::Sand | ExcavationSoil::SoftClay => 2.0 * self.depth_m,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pit(profile: ExcavationSoil) -> ExcavationGeometry {
        ExcavationGeometry {
            name: "E".into(),
            outline: vec![[0.0, 0.0], [40.0, 0.0], [40.0, 20.0], [0.0, 20.0]],
            depth_m: 10.0,
            profile,
            support: Support::Propped,
            max_settlement_m: 0.015,
        }
    }

    #[test]
    fn envelope_behind_a_straight_wall() {
        // damage-relations.md §8.8 Clough & O'Rourke table, H_e 10 m (shapes from memory [M]):
        // stiff clay d 15 → 0.5, soft clay d 10 → 0.8, sand d 25 → 0; δ_vm 15 mm.
        let e = pit(ExcavationSoil::StiffClay);
        assert!((e.settlement_m(20.0, -15.0) * 1e3 - 7.5).abs() < 1e-9);
        let e = pit(ExcavationSoil::SoftClay);
        assert!((e.settlement_m(50.0, 10.0) * 1e3 - 12.0).abs() < 1e-9);
        let e = pit(ExcavationSoil::Sand);
        assert_eq!(e.settlement_m(20.0, 45.0), 0.0);
        assert_eq!(e.influence_m(), 20.0);
    }

    #[test]
    fn inside_the_outline_is_distance_zero() {
        let e = pit(ExcavationSoil::Sand);
        assert!(e.contains(10.0, 10.0));
        assert!(!e.contains(-1.0, 10.0));
        assert_eq!(e.distance_behind_wall_m(10.0, 10.0), 0.0);
        assert!((e.settlement_m(10.0, 10.0) - 0.015).abs() < 1e-15);
        // Corner: distance to the vertex.
        assert!((e.distance_behind_wall_m(43.0, 24.0) - 5.0).abs() < 1e-12);
    }
}
