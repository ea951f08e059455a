//! Bjerrum (1963) ladder of limiting angular distortions, reported as an informative flag (not a
//! damage category).
//!
//! Owns the ladder [`BJERRUM_LADDER`] (1/750 … 1/150) and the flag ([`bjerrum_flag`]: highest
//! limit reached, next limit). **Values from memory** \[M\] (damage-relations.md §6.4, §11 item 7).
//! Like Skempton & MacDonald, Bjerrum's angular distortion is δ/l of adjacent points.

use serde::Serialize;

use super::{DamageError, reaches_boundary, require_finite};

/// One rung of the Bjerrum ladder.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct BjerrumLimit {
    /// Limiting angular distortion, dimensionless (e.g. 1/500).
    pub angular_distortion: f64,
    /// The limit written as "1/n".
    pub ratio_label: &'static str,
    /// What the limit marks (our paraphrase).
    pub description: &'static str,
}

/// Bjerrum (1963) ladder, ascending. **From memory** \[M\].
pub const BJERRUM_LADDER: [BjerrumLimit; 6] = [
    BjerrumLimit {
        angular_distortion: 1.0 / 750.0,
        ratio_label: "1/750",
        description: "difficulties with machinery sensitive to settlement",
    },
    BjerrumLimit {
        angular_distortion: 1.0 / 600.0,
        ratio_label: "1/600",
        description: "danger to frames with diagonals",
    },
    BjerrumLimit {
        angular_distortion: 1.0 / 500.0,
        ratio_label: "1/500",
        description: "safe limit for buildings where cracking is not permissible",
    },
    BjerrumLimit {
        angular_distortion: 1.0 / 300.0,
        ratio_label: "1/300",
        description: "first cracking of panel walls expected; difficulties with overhead cranes",
    },
    BjerrumLimit {
        angular_distortion: 1.0 / 250.0,
        ratio_label: "1/250",
        description: "tilting of tall rigid buildings may become visible",
    },
    BjerrumLimit {
        angular_distortion: 1.0 / 150.0,
        ratio_label: "1/150",
        description: "considerable cracking of panel and brick walls; safe limit for flexible \
                      brick walls with height/length below 1/4; structural damage of general \
                      buildings feared",
    },
];

/// Where an angular distortion sits on the Bjerrum ladder.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct BjerrumFlag {
    /// The magnitude assessed, dimensionless.
    pub angular_distortion: f64,
    /// Highest limit reached (on the limit counts as reached); `None` below 1/750.
    pub highest_limit_reached: Option<BjerrumLimit>,
    /// The next limit above; `None` at or beyond 1/150.
    pub next_limit: Option<BjerrumLimit>,
}

/// Bjerrum (1963) flag for an angular distortion: the highest limit reached and the next one.
///
/// # Units
/// `angular_distortion`: dimensionless (rad); magnitude used. Boundary rule as §3.3.
///
/// # References
/// Bjerrum, L. (1963), Allowable settlement of structures, Proc. 3rd ECSMFE, Wiesbaden, Vol. 2 —
/// ladder **from memory** \[M\].
///
/// # Examples
/// ```
/// use plinth::damage::bjerrum::bjerrum_flag;
/// // damage-relations.md §8.7: β = 1/200 is past 1/250 and short of 1/150.
/// let f = bjerrum_flag(1.0 / 200.0).unwrap();
/// assert_eq!(f.highest_limit_reached.unwrap().ratio_label, "1/250");
/// assert_eq!(f.next_limit.unwrap().ratio_label, "1/150");
/// ```
///
/// Non-finite → [`DamageError::InvalidInput`].
pub fn bjerrum_flag(angular_distortion: f64) -> Result<BjerrumFlag, DamageError> {
    let b = require_finite("angular_distortion", angular_distortion)?.abs();
    let reached = BJERRUM_LADDER
        .iter()
        .filter(|l| reaches_boundary(b, l.angular_distortion))
        .count();
    Ok(BjerrumFlag {
        angular_distortion: b,
        highest_limit_reached: reached.checked_sub(1).map(|k| BJERRUM_LADDER[k]),
        next_limit: BJERRUM_LADDER.get(reached).copied(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn section_8_7_flags() {
        // damage-relations.md §8.7: β = 1/400 exceeds Bjerrum's 1/500 "cracking not
        // permissible" limit (ladder from memory [M]).
        let f = bjerrum_flag(1.0 / 400.0).unwrap();
        assert_eq!(f.highest_limit_reached.unwrap().ratio_label, "1/500");
        assert_eq!(f.next_limit.unwrap().ratio_label, "1/300");
        let below = bjerrum_flag(1e-3).unwrap();
        assert!(below.highest_limit_reached.is_none());
        assert_eq!(below.next_limit.unwrap().ratio_label, "1/750");
        let top = bjerrum_flag(1.0 / 150.0).unwrap();
        assert_eq!(top.highest_limit_reached.unwrap().ratio_label, "1/150");
        assert!(top.next_limit.is_none());
        assert!(bjerrum_flag(f64::INFINITY).is_err());
    }
}
