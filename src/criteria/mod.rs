//! Criteria sets: the named parameter sets a damage assessment runs with (route, E/G, ν, neutral
//! axis, limiting-strain thresholds, compressive-strain policy), the built-in sets and the resolver
//! for user-defined sets.
//!
//! Owns [`CriteriaSet`], the built-ins ([`builtin`], [`for_structure_type`]), the user-facing
//! override form ([`CriteriaOverride`], TOML table `[criteria.NAME]`) and its resolution and
//! validation ([`resolve_user_sets`], [`CriteriaRegistry`]). It does not read files (the caller
//! passes the parsed table or the TOML text) and does not compute strains (that is
//! `crate::damage`).
//!
//! User-facing TOML form (every key is optional; missing keys come from `base`, which
//! defaults to `"masonry"`):
//!
//! ```toml
//! [criteria.lime-mortar-terrace]
//! base = "masonry"
//! e_over_g = 2.6
//! poisson = 0.3
//! thresholds = [5.0e-4, 7.5e-4, 1.5e-3, 3.0e-3]   # absolute strain, not percent
//! compressive_strain = "clamp-to-zero"             # or "use-signed"
//! route = "limiting-tensile-strain"                 # or "son-cording"
//! neutral_axis = { sagging = "mid-height", hogging = "lower-edge" }
//! source = "project brief, section 4"
//! ```

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use crate::damage::StrainThresholds;
use crate::damage::boscardin_cording::CompressivePolicy;
use crate::damage::burland_wroth::{NeutralAxis, NeutralAxisPolicy};

/// Which relation decides the damage category.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Route {
    /// Limiting tensile strain: Burland & Wroth (1974) deep beam per sagging/hogging zone with
    /// horizontal strain superposed (Boscardin & Cording 1989; Burland 1995). Needs zones.
    LimitingTensileStrain,
    /// Son & Cording (2005) principal strain from angular distortion β and lateral strain.
    /// Needs β.
    SonCording,
}

impl Route {
    /// Plain label.
    pub fn label(self) -> &'static str {
        match self {
            Route::LimitingTensileStrain => "limiting tensile strain (deep beam)",
            Route::SonCording => "Son & Cording principal strain",
        }
    }
}

/// A complete, validated parameter set for [`crate::damage::assess_damage`].
///
/// In TOML every key is required in this form; users normally write a [`CriteriaOverride`]
/// instead, which falls back to a base set.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CriteriaSet {
    /// Set name (the key of `[criteria.NAME]` or the built-in name).
    pub name: String,
    /// Relation that decides the category.
    pub route: Route,
    /// E/G of the equivalent deep beam, dimensionless (> 0). Burland & Wroth (1974): 2.6 for
    /// isotropic masonry (= 2(1 + ν), ν = 0.3) \[M\]; 12.5 for frames \[M\].
    pub e_over_g: f64,
    /// Poisson's ratio ν in the resultant diagonal strain (3.2), dimensionless, 0 ≤ ν < 0.5.
    /// Default 0.3 (damage-relations.md §2.4 \[Rec\]; the value itself from memory \[M\]).
    pub poisson: f64,
    /// Neutral-axis position per mode (Burland & Wroth 1974: sagging mid-height, hogging lower
    /// edge).
    pub neutral_axis: NeutralAxisPolicy,
    /// Category boundaries 0|1, 1|2, 2|3, 3|4–5 as absolute tensile strain, strictly
    /// increasing, positive and below 1e-2 (a guard against percentages entered as 0.05).
    pub thresholds: [f64; 4],
    /// How a compressive horizontal strain enters (damage-relations.md §3.5: default clamp to 0).
    pub compressive_strain: CompressivePolicy,
    /// Where the parameters come from (shown in reports).
    pub source: String,
}

impl CriteriaSet {
    /// The thresholds as a validated [`StrainThresholds`].
    ///
    /// Fails only for a set that bypassed [`CriteriaSet::validate`].
    pub fn strain_thresholds(&self) -> Result<StrainThresholds, CriteriaError> {
        StrainThresholds::new(self.thresholds).map_err(|e| CriteriaError::InvalidValue {
            set: self.name.clone(),
            key: "thresholds",
            reason: e.to_string(),
        })
    }

    /// Check every parameter; the error names the set and the key.
    pub fn validate(&self) -> Result<(), CriteriaError> {
        let bad = |key: &'static str, reason: String| CriteriaError::InvalidValue {
            set: self.name.clone(),
            key,
            reason,
        };
        if self.name.trim().is_empty() {
            return Err(bad("name", "set name must not be empty".into()));
        }
        if !(self.e_over_g.is_finite() && self.e_over_g > 0.0) {
            return Err(bad(
                "e_over_g",
                format!("E/G must be finite and > 0, got {}", self.e_over_g),
            ));
        }
        if !(self.poisson.is_finite() && (0.0..0.5).contains(&self.poisson)) {
            return Err(bad(
                "poisson",
                format!(
                    "Poisson's ratio must satisfy 0 <= nu < 0.5, got {}",
                    self.poisson
                ),
            ));
        }
        let t = self.thresholds;
        if t.iter().any(|v| !v.is_finite() || *v <= 0.0) {
            return Err(bad(
                "thresholds",
                format!("every threshold must be finite and > 0, got {t:?}"),
            ));
        }
        if t.windows(2).any(|w| w[1] <= w[0]) {
            return Err(bad(
                "thresholds",
                format!("thresholds must be strictly increasing, got {t:?}"),
            ));
        }
        if t.iter().any(|v| *v >= MAX_THRESHOLD_STRAIN) {
            return Err(bad(
                "thresholds",
                format!(
                    "thresholds are absolute strains (0.05 % = 5e-4), every value must be below \
                     {MAX_THRESHOLD_STRAIN}; got {t:?} — were percentages entered?"
                ),
            ));
        }
        if self.source.trim().is_empty() {
            return Err(bad("source", "a source must be stated".into()));
        }
        Ok(())
    }
}

/// Upper guard on a threshold, absolute strain (1 %). Plinth choice: published building-damage
/// thresholds are at most 0.3–0.33 %; a value of 1 % or more almost certainly is a percentage
/// typed as a fraction.
pub const MAX_THRESHOLD_STRAIN: f64 = 1e-2;

const BURLAND_THRESHOLD_SOURCE: &str = "limiting tensile strains 0.05/0.075/0.15/0.3 % of \
     Boscardin & Cording (1989) as restated by Burland (1995), categories of Burland, Broms & \
     de Mello (1977)";

/// Names of the built-in sets, in a fixed order.
pub const BUILTIN_NAMES: [&str; 3] = ["masonry", "frame", "masonry-son-cording"];

/// A built-in criteria set by name.
///
/// - `masonry`: E/G 2.6, ν 0.3 (Burland & Wroth 1974, isotropic masonry \[M\]), Burland thresholds,
///   Burland & Wroth neutral axes, compressive ε_h clamped to 0.
/// - `frame`: E/G 12.5 (Burland & Wroth 1974, **from memory** \[M\]), ν 0.3 (kept as its own input;
///   12.5 is not isotropic), Burland thresholds (calibrated for masonry; noted in the source).
/// - `masonry-son-cording`: Son & Cording (2005) route with thresholds 0.05/0.075/0.167/0.333 %
///   (upper two **from memory** \[M\]); E/G, ν and neutral axes as masonry for the zone strains.
///
/// Unknown name → `None`.
pub fn builtin(name: &str) -> Option<CriteriaSet> {
    match name {
        "masonry" => Some(CriteriaSet {
            name: "masonry".into(),
            route: Route::LimitingTensileStrain,
            e_over_g: 2.6,
            poisson: 0.3,
            neutral_axis: NeutralAxisPolicy::BURLAND_WROTH,
            thresholds: StrainThresholds::BURLAND.boundaries(),
            compressive_strain: CompressivePolicy::ClampToZero,
            source: format!(
                "load-bearing masonry: E/G = 2.6 with nu = 0.3 (isotropic, Burland & Wroth 1974, \
                 from memory); neutral axis mid-height (sagging) / lower edge (hogging); \
                 {BURLAND_THRESHOLD_SOURCE}; compressive horizontal strain clamped to 0 (common \
                 practice)"
            ),
        }),
        "frame" => Some(CriteriaSet {
            name: "frame".into(),
            route: Route::LimitingTensileStrain,
            e_over_g: 12.5,
            poisson: 0.3,
            neutral_axis: NeutralAxisPolicy::BURLAND_WROTH,
            thresholds: StrainThresholds::BURLAND.boundaries(),
            compressive_strain: CompressivePolicy::ClampToZero,
            source: format!(
                "framed building: E/G = 12.5 (Burland & Wroth 1974, from memory), nu = 0.3 \
                 (assumed, separate input); neutral axis mid-height (sagging) / lower edge \
                 (hogging); {BURLAND_THRESHOLD_SOURCE} (calibrated for brick and block masonry); \
                 compressive horizontal strain clamped to 0 (common practice)"
            ),
        }),
        "masonry-son-cording" => Some(CriteriaSet {
            name: "masonry-son-cording".into(),
            route: Route::SonCording,
            e_over_g: 2.6,
            poisson: 0.3,
            neutral_axis: NeutralAxisPolicy::BURLAND_WROTH,
            thresholds: StrainThresholds::SON_CORDING.boundaries(),
            compressive_strain: CompressivePolicy::ClampToZero,
            source: "Son & Cording (2005) principal strain from angular distortion and lateral \
                     strain; thresholds 0.05/0.075/0.167/0.333 % with the upper two from memory \
                     (stored as 1/600 and 1/300); zone strains with masonry E/G = 2.6, nu = 0.3; \
                     compressive lateral strain clamped to 0 (common practice)"
                .into(),
        }),
        _ => None,
    }
}

/// The default built-in set for a structure type: `"masonry"` → masonry, `"frame"` → frame
/// (case-insensitive, surrounding blanks ignored). Anything else → `None`.
pub fn for_structure_type(structure_type: &str) -> Option<CriteriaSet> {
    match structure_type.trim().to_ascii_lowercase().as_str() {
        "masonry" => builtin("masonry"),
        "frame" => builtin("frame"),
        _ => None,
    }
}

/// Partial neutral-axis override.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NeutralAxisOverride {
    /// Neutral axis for sagging zones; missing → from the base set.
    pub sagging: Option<NeutralAxis>,
    /// Neutral axis for hogging zones; missing → from the base set.
    pub hogging: Option<NeutralAxis>,
}

/// A user-defined set as written in `[criteria.NAME]`: every key optional, falling back to
/// `base` (a built-in or another user set; default `"masonry"`).
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CriteriaOverride {
    /// Set to inherit missing keys from; default `"masonry"` (Plinth choice: the most common
    /// case and the published calibration of the thresholds).
    pub base: Option<String>,
    /// See [`CriteriaSet::route`].
    pub route: Option<Route>,
    /// See [`CriteriaSet::e_over_g`].
    pub e_over_g: Option<f64>,
    /// See [`CriteriaSet::poisson`].
    pub poisson: Option<f64>,
    /// See [`CriteriaSet::neutral_axis`].
    pub neutral_axis: Option<NeutralAxisOverride>,
    /// See [`CriteriaSet::thresholds`].
    pub thresholds: Option<[f64; 4]>,
    /// See [`CriteriaSet::compressive_strain`].
    pub compressive_strain: Option<CompressivePolicy>,
    /// See [`CriteriaSet::source`]. Missing → "user-defined set NAME based on BASE" plus the
    /// base's source.
    pub source: Option<String>,
}

/// Errors of criteria resolution; each names the set (and key where there is one).
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum CriteriaError {
    /// A parameter value is invalid.
    #[error("criteria set `{set}`: invalid `{key}`: {reason}")]
    InvalidValue {
        /// Set name.
        set: String,
        /// TOML key.
        key: &'static str,
        /// Why it is invalid.
        reason: String,
    },
    /// `base` names no built-in or user set.
    #[error(
        "criteria set `{set}`: unknown `base` = \"{base}\" (built-in sets: masonry, frame, \
         masonry-son-cording, or another [criteria.*] set)"
    )]
    UnknownBase {
        /// Set name.
        set: String,
        /// The unknown base.
        base: String,
    },
    /// The `base` chain loops.
    #[error("criteria set `{set}`: `base` chain loops: {chain}")]
    BaseCycle {
        /// Set name.
        set: String,
        /// The chain, e.g. "a -> b -> a".
        chain: String,
    },
    /// A user set reuses a built-in name.
    #[error(
        "criteria set `{set}`: the name is a built-in set; choose another name and use \
         `base = \"{set}\"` to derive from it"
    )]
    ShadowsBuiltin {
        /// Set name.
        set: String,
    },
    /// No set of that name.
    #[error("unknown criteria set `{name}`")]
    UnknownSet {
        /// The requested name.
        name: String,
    },
    /// The TOML text could not be parsed into `[criteria.NAME]` tables.
    #[error("criteria TOML: {message}")]
    Parse {
        /// Parser message (includes the key / line).
        message: String,
    },
}

/// Resolve one user-defined set against the built-ins and the other user sets.
fn resolve_one(
    name: &str,
    user: &BTreeMap<String, CriteriaOverride>,
    chain: &mut Vec<String>,
) -> Result<CriteriaSet, CriteriaError> {
    let Some(ov) = user.get(name) else {
        return builtin(name).ok_or_else(|| CriteriaError::UnknownSet { name: name.into() });
    };
    if BUILTIN_NAMES.contains(&name) {
        return Err(CriteriaError::ShadowsBuiltin { set: name.into() });
    }
    if chain.iter().any(|c| c == name) {
        chain.push(name.into());
        return Err(CriteriaError::BaseCycle {
            set: chain[0].clone(),
            chain: chain.join(" -> "),
        });
    }
    chain.push(name.into());
    let base_name = ov.base.clone().unwrap_or_else(|| "masonry".into());
    let base = if user.contains_key(&base_name) {
        resolve_one(&base_name, user, chain)?
    } else {
        builtin(&base_name).ok_or_else(|| CriteriaError::UnknownBase {
            set: name.into(),
            base: base_name.clone(),
        })?
    };
    chain.pop();
    let na = ov.neutral_axis.unwrap_or_default();
    let set = CriteriaSet {
        name: name.into(),
        route: ov.route.unwrap_or(base.route),
        e_over_g: ov.e_over_g.unwrap_or(base.e_over_g),
        poisson: ov.poisson.unwrap_or(base.poisson),
        neutral_axis: NeutralAxisPolicy {
            sagging: na.sagging.unwrap_or(base.neutral_axis.sagging),
            hogging: na.hogging.unwrap_or(base.neutral_axis.hogging),
        },
        thresholds: ov.thresholds.unwrap_or(base.thresholds),
        compressive_strain: ov.compressive_strain.unwrap_or(base.compressive_strain),
        source: match &ov.source {
            Some(s) => s.clone(),
            None => format!(
                "user-defined set `{name}` based on `{base_name}`; base: {}",
                base.source
            ),
        },
    };
    set.validate()?;
    Ok(set)
}

/// Resolve and validate every user-defined set (the parsed `[criteria.*]` tables), in name order.
///
/// Errors name the set and key: invalid values, unknown base, loops in the base chain, or a user
/// set that reuses a built-in name.
pub fn resolve_user_sets(
    user: &BTreeMap<String, CriteriaOverride>,
) -> Result<BTreeMap<String, CriteriaSet>, CriteriaError> {
    user.keys()
        .map(|name| Ok((name.clone(), resolve_one(name, user, &mut Vec::new())?)))
        .collect()
}

/// Parse TOML text holding a `[criteria.NAME]` table per set (other top-level keys are not
/// allowed here) into overrides. For callers that keep criteria in their own file.
pub fn parse_criteria_toml(
    text: &str,
) -> Result<BTreeMap<String, CriteriaOverride>, CriteriaError> {
    #[derive(Deserialize)]
    #[serde(deny_unknown_fields)]
    struct Doc {
        #[serde(default)]
        criteria: BTreeMap<String, CriteriaOverride>,
    }
    toml::from_str::<Doc>(text)
        .map(|d| d.criteria)
        .map_err(|e| CriteriaError::Parse {
            message: e.to_string(),
        })
}

/// All sets available to a run: built-ins plus resolved user sets.
#[derive(Debug, Clone, PartialEq)]
pub struct CriteriaRegistry {
    sets: BTreeMap<String, CriteriaSet>,
}

impl CriteriaRegistry {
    /// Built-ins only.
    pub fn builtins() -> CriteriaRegistry {
        let sets = BUILTIN_NAMES
            .iter()
            .filter_map(|n| builtin(n).map(|s| (s.name.clone(), s)))
            .collect();
        CriteriaRegistry { sets }
    }

    /// Built-ins plus the user-defined sets (resolved and validated).
    pub fn with_user_sets(
        user: &BTreeMap<String, CriteriaOverride>,
    ) -> Result<CriteriaRegistry, CriteriaError> {
        let mut reg = CriteriaRegistry::builtins();
        reg.sets.extend(resolve_user_sets(user)?);
        Ok(reg)
    }

    /// A set by name.
    pub fn get(&self, name: &str) -> Result<&CriteriaSet, CriteriaError> {
        self.sets
            .get(name)
            .ok_or_else(|| CriteriaError::UnknownSet { name: name.into() })
    }

    /// Set names in sorted order.
    pub fn names(&self) -> impl Iterator<Item = &str> {
        self.sets.keys().map(String::as_str)
    }
}

/// Built-in criteria sets plus the portfolio's `[criteria.NAME]` sets, validated.
pub fn registry_for(
    pf: &crate::portfolio::Portfolio,
) -> Result<CriteriaRegistry, crate::error::InputError> {
    let mut user = BTreeMap::new();
    for (name, table) in &pf.criteria {
        let o: CriteriaOverride = toml::Value::Table(table.clone()).try_into().map_err(|e: toml::de::Error| {
            crate::error::InputError::new(
                &pf.file,
                format!("key criteria.{name}"),
                e.message().trim().to_string(),
                "keys of a criteria set: base, route, e_over_g, poisson, neutral_axis, thresholds, compressive_strain, source (docs/formats.md)",
            )
        })?;
        user.insert(name.clone(), o);
    }
    CriteriaRegistry::with_user_sets(&user).map_err(|e| {
        crate::error::InputError::new(
            &pf.file,
            "key criteria",
            e.to_string(),
            "see docs/formats.md for criteria sets",
        )
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn builtins_are_valid_and_documented() {
        for name in BUILTIN_NAMES {
            let s = builtin(name).unwrap();
            assert_eq!(s.name, name);
            s.validate().unwrap();
            assert!(!s.source.is_empty());
        }
        assert_eq!(builtin("masonry").unwrap().e_over_g, 2.6);
        assert_eq!(builtin("frame").unwrap().e_over_g, 12.5);
        assert!(builtin("frame").unwrap().source.contains("from memory"));
        assert_eq!(
            builtin("masonry-son-cording").unwrap().route,
            Route::SonCording
        );
        assert!(builtin("steel").is_none());
        assert_eq!(for_structure_type(" Frame ").unwrap().name, "frame");
        assert!(for_structure_type("timber").is_none());
    }

    #[test]
    fn user_set_falls_back_to_base() {
        let user = parse_criteria_toml(
            r#"
            [criteria.soft-walls]
            e_over_g = 1.5
            neutral_axis = { hogging = "mid-height" }

            [criteria.soft-walls-signed]
            base = "soft-walls"
            compressive_strain = "use-signed"
            source = "site note 3"
            "#,
        )
        .unwrap();
        let reg = CriteriaRegistry::with_user_sets(&user).unwrap();
        let a = reg.get("soft-walls").unwrap();
        assert_eq!(a.e_over_g, 1.5);
        assert_eq!(a.poisson, 0.3);
        assert_eq!(a.neutral_axis.hogging, NeutralAxis::MidHeight);
        assert_eq!(a.neutral_axis.sagging, NeutralAxis::MidHeight);
        assert!(a.source.contains("based on `masonry`"));
        let b = reg.get("soft-walls-signed").unwrap();
        assert_eq!(b.e_over_g, 1.5);
        assert_eq!(b.compressive_strain, CompressivePolicy::UseSigned);
        assert_eq!(b.source, "site note 3");
        assert!(reg.get("masonry").is_ok());
        assert!(matches!(
            reg.get("nope"),
            Err(CriteriaError::UnknownSet { .. })
        ));
    }

    #[test]
    fn validation_names_set_and_key() {
        let cases = [
            ("e_over_g = 0.0", "e_over_g"),
            ("poisson = 0.5", "poisson"),
            ("poisson = -0.1", "poisson"),
            ("thresholds = [5e-4, 5e-4, 1e-3, 2e-3]", "thresholds"),
            ("thresholds = [0.05, 0.075, 0.15, 0.3]", "thresholds"),
            ("thresholds = [-1e-4, 5e-4, 1e-3, 2e-3]", "thresholds"),
        ];
        for (line, key) in cases {
            let user = parse_criteria_toml(&format!("[criteria.bad]\n{line}\n")).unwrap();
            match resolve_user_sets(&user) {
                Err(CriteriaError::InvalidValue { set, key: k, .. }) => {
                    assert_eq!(set, "bad");
                    assert_eq!(k, key, "{line}");
                }
                other => panic!("{line}: expected InvalidValue, got {other:?}"),
            }
        }
    }

    #[test]
    fn structural_errors() {
        let unknown_key = parse_criteria_toml("[criteria.x]\nyoungs = 3.0\n");
        match unknown_key {
            Err(CriteriaError::Parse { message }) => assert!(message.contains("youngs")),
            other => panic!("expected parse error, got {other:?}"),
        }
        let user = parse_criteria_toml("[criteria.x]\nbase = \"granite\"\n").unwrap();
        assert!(matches!(
            resolve_user_sets(&user),
            Err(CriteriaError::UnknownBase { .. })
        ));
        let user = parse_criteria_toml("[criteria.a]\nbase = \"b\"\n[criteria.b]\nbase = \"a\"\n")
            .unwrap();
        assert!(matches!(
            resolve_user_sets(&user),
            Err(CriteriaError::BaseCycle { .. })
        ));
        let user = parse_criteria_toml("[criteria.masonry]\npoisson = 0.2\n").unwrap();
        assert!(matches!(
            resolve_user_sets(&user),
            Err(CriteriaError::ShadowsBuiltin { .. })
        ));
    }

    #[test]
    fn full_set_round_trips_through_toml() {
        let s = builtin("frame").unwrap();
        let text = toml::to_string(&s).unwrap();
        let back: CriteriaSet = toml::from_str(&text).unwrap();
        assert_eq!(back, s);
        let with_extra = format!("{text}\nextra = 1\n");
        assert!(toml::from_str::<CriteriaSet>(&with_extra).is_err());
    }
}
