//! Published and derived worked examples for the damage relations, run from data files.
//!
//! Every `tests/reference/*.toml` file names one `relation` and holds `[[case]]` rows, each with
//! `source`, `input`, `expected` and an explicit tolerance (`rel_tol` and/or `abs_tol`; a number
//! passes when |got − expected| ≤ abs_tol + rel_tol·|expected|; `key_abs_tol = { key = tol }`
//! replaces both for the keys it names, e.g. an angle printed to 3 decimals). Integers (categories) and
//! strings (modes, branches, flags) must match exactly. Adding a case is adding a row; an
//! expected key the relation does not produce is a failure, so a typo cannot pass silently.
//!
//! The runner calls only the public `plinth::damage` / `plinth::criteria` API.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use plinth::criteria::{CriteriaSet, builtin};
use plinth::damage::bjerrum::bjerrum_flag;
use plinth::damage::boscardin_cording::{
    CompressivePolicy, reconstructed_chart_boundary, reconstructed_chart_strain, resultant_strains,
};
use plinth::damage::burland_1995::boundary_deflection_ratio;
use plinth::damage::burland_wroth::{
    NeutralAxis, NeutralAxisPolicy, beam_strains, factors_for_mode,
};
use plinth::damage::greenfield::{
    ExcavationSoil, GaussianTrough, clough_orourke_ratio, mair_subsurface_k,
    o_reilly_new_width_cohesive_m, o_reilly_new_width_granular_m,
};
use plinth::damage::rankin::rankin_category;
use plinth::damage::skempton_macdonald::skempton_macdonald_flag;
use plinth::damage::son_cording::{boundary_angular_distortion, principal_strain};
use plinth::damage::{Branch, DamageInput, Mode, StrainThresholds, ZoneInput, assess_damage};
use toml::{Table, Value};

/// One produced output value.
#[derive(Debug, Clone)]
enum Out {
    Num(f64),
    Int(i64),
    Str(String),
}

type Outputs = BTreeMap<String, Out>;
type Handler = fn(&Table) -> Result<Outputs, String>;

// ---- input accessors ---------------------------------------------------------------------------

fn num(t: &Table, key: &str) -> Result<f64, String> {
    match t.get(key) {
        Some(Value::Float(f)) => Ok(*f),
        Some(Value::Integer(i)) => Ok(*i as f64),
        Some(other) => Err(format!("input `{key}` is not a number: {other}")),
        None => Err(format!("input `{key}` missing")),
    }
}

fn opt_num(t: &Table, key: &str) -> Result<Option<f64>, String> {
    if t.contains_key(key) {
        num(t, key).map(Some)
    } else {
        Ok(None)
    }
}

fn text<'a>(t: &'a Table, key: &str) -> Result<&'a str, String> {
    t.get(key)
        .and_then(Value::as_str)
        .ok_or_else(|| format!("input `{key}` missing or not a string"))
}

fn mode(t: &Table) -> Result<Mode, String> {
    match text(t, "mode")? {
        "sagging" => Ok(Mode::Sagging),
        "hogging" => Ok(Mode::Hogging),
        m => Err(format!("unknown mode `{m}`")),
    }
}

fn thresholds(t: &Table, key: &str, default: StrainThresholds) -> Result<StrainThresholds, String> {
    match t.get(key).and_then(Value::as_str) {
        None => Ok(default),
        Some("burland") => Ok(StrainThresholds::BURLAND),
        Some("son-cording") => Ok(StrainThresholds::SON_CORDING),
        Some(o) => Err(format!("unknown thresholds `{o}`")),
    }
}

fn policy(t: &Table) -> Result<CompressivePolicy, String> {
    match t.get("compressive_strain").and_then(Value::as_str) {
        None | Some("clamp-to-zero") => Ok(CompressivePolicy::ClampToZero),
        Some("use-signed") => Ok(CompressivePolicy::UseSigned),
        Some(o) => Err(format!("unknown compressive_strain `{o}`")),
    }
}

fn branch_name(b: Branch) -> String {
    match b {
        Branch::Bending => "bending",
        Branch::Diagonal => "diagonal",
        Branch::Principal => "principal",
    }
    .into()
}

fn criteria_set(t: &Table) -> Result<CriteriaSet, String> {
    let name = t.get("set").and_then(Value::as_str).unwrap_or("masonry");
    let mut set = builtin(name).ok_or_else(|| format!("unknown built-in set `{name}`"))?;
    if let Some(p) = t.get("compressive_strain").and_then(Value::as_str) {
        set.compressive_strain = match p {
            "use-signed" => CompressivePolicy::UseSigned,
            _ => CompressivePolicy::ClampToZero,
        };
    }
    Ok(set)
}

fn put(out: &mut Outputs, key: &str, v: f64) {
    out.insert(key.into(), Out::Num(v));
}

fn put_int(out: &mut Outputs, key: &str, v: u8) {
    out.insert(key.into(), Out::Int(i64::from(v)));
}

fn put_str(out: &mut Outputs, key: &str, v: impl Into<String>) {
    out.insert(key.into(), Out::Str(v.into()));
}

// ---- handlers ----------------------------------------------------------------------------------

/// Fb, Fd for mode, L/H, E/G (Burland & Wroth neutral axes).
fn deep_beam_factors(i: &Table) -> Result<Outputs, String> {
    let f = factors_for_mode(
        mode(i)?,
        num(i, "l_over_h")?,
        num(i, "e_over_g")?,
        &NeutralAxisPolicy::BURLAND_WROTH,
    )
    .map_err(|e| e.to_string())?;
    let mut o = Outputs::new();
    put(&mut o, "fb", f.bending);
    put(&mut o, "fd", f.diagonal);
    Ok(o)
}

fn axis_for(m: Mode) -> NeutralAxis {
    NeutralAxisPolicy::BURLAND_WROTH.for_mode(m)
}

/// ε_bmax, ε_dmax, ε_br, ε_dr, ε_max and category for one zone (H = 10 m, L = r·H).
fn combined_strains(i: &Table) -> Result<Outputs, String> {
    let m = mode(i)?;
    let height_m = 10.0;
    let b = beam_strains(
        num(i, "deflection_ratio")?,
        num(i, "l_over_h")? * height_m,
        height_m,
        num(i, "e_over_g")?,
        axis_for(m),
    )
    .map_err(|e| e.to_string())?;
    let eh = policy(i)?.apply(opt_num(i, "eps_h")?.unwrap_or(0.0));
    let r =
        resultant_strains(&b, eh, opt_num(i, "nu")?.unwrap_or(0.3)).map_err(|e| e.to_string())?;
    let t = thresholds(i, "thresholds", StrainThresholds::BURLAND)?;
    let mut o = Outputs::new();
    put(&mut o, "eps_bmax", b.bending_strain);
    put(&mut o, "eps_dmax", b.diagonal_strain);
    put(&mut o, "eps_br", r.bending);
    put(&mut o, "eps_dr", r.diagonal);
    put(&mut o, "eps_max", r.governing);
    put_str(&mut o, "branch", branch_name(r.branch));
    put_int(
        &mut o,
        "category",
        t.classify(r.governing).map_err(|e| e.to_string())?.number(),
    );
    Ok(o)
}

/// Boundary test: Δ/L set on the ε_max = ε_lim boundary (× `scale`), then classified.
fn boundary_category(i: &Table) -> Result<Outputs, String> {
    let m = mode(i)?;
    let r = num(i, "l_over_h")?;
    let e = num(i, "e_over_g")?;
    let nu = opt_num(i, "nu")?.unwrap_or(0.3);
    let eh = opt_num(i, "eps_h")?.unwrap_or(0.0);
    let f =
        factors_for_mode(m, r, e, &NeutralAxisPolicy::BURLAND_WROTH).map_err(|e| e.to_string())?;
    let p = boundary_deflection_ratio(eh, num(i, "eps_lim")?, &f, nu);
    let dr = p.deflection_ratio * num(i, "scale")?;
    let b = beam_strains(dr, r * 10.0, 10.0, e, axis_for(m)).map_err(|e| e.to_string())?;
    let s = resultant_strains(&b, eh, nu).map_err(|e| e.to_string())?;
    let mut o = Outputs::new();
    put(&mut o, "deflection_ratio", dr);
    put(&mut o, "eps_max", s.governing);
    put_int(
        &mut o,
        "category",
        StrainThresholds::BURLAND
            .classify(s.governing)
            .map_err(|e| e.to_string())?
            .number(),
    );
    Ok(o)
}

/// Burland (1995) chart: boundary Δ/L at ε_h for ε_lim.
fn burland_1995_boundary(i: &Table) -> Result<Outputs, String> {
    let f = factors_for_mode(
        mode(i)?,
        num(i, "l_over_h")?,
        num(i, "e_over_g")?,
        &NeutralAxisPolicy::BURLAND_WROTH,
    )
    .map_err(|e| e.to_string())?;
    let p = boundary_deflection_ratio(
        num(i, "eps_h")?,
        num(i, "eps_lim")?,
        &f,
        opt_num(i, "nu")?.unwrap_or(0.3),
    );
    let mut o = Outputs::new();
    put(&mut o, "deflection_ratio", p.deflection_ratio);
    put_str(
        &mut o,
        "branch",
        p.branch.map_or("none".into(), branch_name),
    );
    Ok(o)
}

/// Reconstructed Boscardin & Cording β–ε_h boundary and point strain.
fn boscardin_cording_reconstruction(i: &Table) -> Result<Outputs, String> {
    let nu = opt_num(i, "nu")?.unwrap_or(0.3);
    let mut o = Outputs::new();
    if let Some(el) = opt_num(i, "eps_lim")? {
        put(
            &mut o,
            "beta",
            reconstructed_chart_boundary(num(i, "eps_h")?, el, nu),
        );
    }
    if let Some(beta) = opt_num(i, "beta")? {
        let e =
            reconstructed_chart_strain(beta, num(i, "eps_h")?, nu).map_err(|e| e.to_string())?;
        put(&mut o, "strain", e);
        put_int(
            &mut o,
            "category",
            StrainThresholds::BURLAND
                .classify(e)
                .map_err(|e| e.to_string())?
                .number(),
        );
    }
    Ok(o)
}

/// Son & Cording principal strain, angle, categories; or boundary β.
fn son_cording(i: &Table) -> Result<Outputs, String> {
    let mut o = Outputs::new();
    if let Some(el) = opt_num(i, "eps_lim")? {
        put(
            &mut o,
            "beta",
            boundary_angular_distortion(num(i, "eps_l")?, el),
        );
    }
    if let Some(beta) = opt_num(i, "beta")? {
        let p = principal_strain(beta, num(i, "eps_l")?).map_err(|e| e.to_string())?;
        put(&mut o, "eps_p", p.strain);
        put(&mut o, "theta_deg", p.angle_deg());
        let sc = StrainThresholds::SON_CORDING
            .classify(p.strain)
            .map_err(|e| e.to_string())?;
        let bu = StrainThresholds::BURLAND
            .classify(p.strain)
            .map_err(|e| e.to_string())?;
        put_int(&mut o, "category_son_cording", sc.number());
        put_int(&mut o, "category_burland", bu.number());
    }
    Ok(o)
}

/// Rankin category from slope and settlement.
fn rankin(i: &Table) -> Result<Outputs, String> {
    let r = rankin_category(opt_num(i, "settlement_mm")?, opt_num(i, "slope")?)
        .map_err(|e| e.to_string())?
        .ok_or("no Rankin result")?;
    let mut o = Outputs::new();
    put_int(&mut o, "category", r.category.number());
    if let Some(c) = r.slope_category {
        put_int(&mut o, "slope_category", c.number());
    }
    if let Some(c) = r.settlement_category {
        put_int(&mut o, "settlement_category", c.number());
    }
    Ok(o)
}

/// Skempton & MacDonald and Bjerrum flags.
fn angular_distortion_flags(i: &Table) -> Result<Outputs, String> {
    let beta = num(i, "beta")?;
    let sm = skempton_macdonald_flag(beta).map_err(|e| e.to_string())?;
    let bj = bjerrum_flag(beta).map_err(|e| e.to_string())?;
    let mut o = Outputs::new();
    let sm_name = serde_json::to_value(sm).map_err(|e| e.to_string())?;
    put_str(
        &mut o,
        "skempton_macdonald",
        sm_name.as_str().unwrap_or("?"),
    );
    put_str(
        &mut o,
        "bjerrum_highest",
        bj.highest_limit_reached.map_or("none", |l| l.ratio_label),
    );
    put_str(
        &mut o,
        "bjerrum_next",
        bj.next_limit.map_or("none", |l| l.ratio_label),
    );
    Ok(o)
}

/// Gaussian trough quantities; point values when `x_m` is given.
fn greenfield_trough(i: &Table) -> Result<Outputs, String> {
    let t = match opt_num(i, "s_max_mm")? {
        Some(s) => GaussianTrough::new(s / 1000.0, num(i, "i_m")?, num(i, "z0_m")?),
        None => GaussianTrough::from_tunnel(
            num(i, "diameter_m")?,
            num(i, "z0_m")?,
            num(i, "k")?,
            num(i, "volume_loss_pct")? / 100.0,
        ),
    }
    .map_err(|e| e.to_string())?;
    let mut o = Outputs::new();
    put(&mut o, "i_m", t.i_m);
    put(&mut o, "s_max_mm", t.s_max_m * 1000.0);
    put(&mut o, "volume_m3_per_m", t.volume_m3_per_m());
    put(&mut o, "max_slope", t.max_slope());
    put(&mut o, "max_tensile_strain", t.max_tensile_strain());
    put(&mut o, "max_compressive_strain", t.max_compressive_strain());
    if let Some(x) = opt_num(i, "x_m")? {
        put(&mut o, "s_mm", t.settlement_m(x) * 1000.0);
        put(&mut o, "slope", t.slope(x));
        put(&mut o, "u_mm", t.horizontal_displacement_m(x) * 1000.0);
        put(&mut o, "eps_h", t.horizontal_strain(x));
        put(&mut o, "curvature_per_m", t.curvature_per_m(x));
    }
    Ok(o)
}

/// Trough-width regressions and Clough & O'Rourke envelopes.
fn greenfield_shapes(i: &Table) -> Result<Outputs, String> {
    let mut o = Outputs::new();
    match text(i, "shape")? {
        "o-reilly-new-cohesive" => put(
            &mut o,
            "i_m",
            o_reilly_new_width_cohesive_m(num(i, "z0_m")?).map_err(|e| e.to_string())?,
        ),
        "o-reilly-new-granular" => put(
            &mut o,
            "i_m",
            o_reilly_new_width_granular_m(num(i, "z0_m")?).map_err(|e| e.to_string())?,
        ),
        "mair-subsurface" => {
            let z0 = num(i, "z0_m")?;
            let z = num(i, "z_m")?;
            let k = mair_subsurface_k(z, z0).map_err(|e| e.to_string())?;
            put(&mut o, "k", k);
            put(&mut o, "i_m", k * (z0 - z));
        }
        soil @ ("sand" | "stiff-clay" | "soft-clay") => {
            let s = match soil {
                "sand" => ExcavationSoil::Sand,
                "stiff-clay" => ExcavationSoil::StiffClay,
                _ => ExcavationSoil::SoftClay,
            };
            let r = clough_orourke_ratio(s, num(i, "d_m")?, num(i, "excavation_depth_m")?)
                .map_err(|e| e.to_string())?;
            put(&mut o, "ratio", r);
        }
        s => return Err(format!("unknown shape `{s}`")),
    }
    Ok(o)
}

/// Stage-2 style: trough → part [a, b] → continuous Δ, ε_h → assessment (masonry set).
fn stage2_part(i: &Table) -> Result<Outputs, String> {
    let t = match opt_num(i, "s_max_mm")? {
        Some(s) => GaussianTrough::new(s / 1000.0, num(i, "i_m")?, num(i, "z0_m")?),
        None => GaussianTrough::from_tunnel(
            num(i, "diameter_m")?,
            num(i, "z0_m")?,
            num(i, "k")?,
            num(i, "volume_loss_pct")? / 100.0,
        ),
    }
    .map_err(|e| e.to_string())?;
    let p = t
        .relative_deflection(num(i, "start_m")?, num(i, "end_m")?)
        .map_err(|e| e.to_string())?;
    let mut o = Outputs::new();
    put_str(&mut o, "mode", p.mode.label());
    put(&mut o, "delta_mm", p.delta_m * 1000.0);
    put(&mut o, "at_x_m", p.at_x_m);
    put(&mut o, "deflection_ratio", p.deflection_ratio);
    put(&mut o, "eps_h_avg", p.horizontal_strain);
    if let Some(h) = opt_num(i, "height_m")? {
        let signed_dr = match p.mode {
            Mode::Sagging => p.deflection_ratio,
            Mode::Hogging => -p.deflection_ratio,
        };
        let input = DamageInput {
            zones: vec![ZoneInput {
                mode: p.mode,
                length_m: p.end_m - p.start_m,
                deflection_ratio: signed_dr,
                horizontal_strain: Some(p.horizontal_strain),
            }],
            angular_distortion: None,
            height_m: h,
            max_settlement_mm: None,
            max_slope: None,
        };
        let a = assess_damage(&input, &criteria_set(i)?);
        let z = a.zones.first().ok_or("zone not assessed")?;
        put(&mut o, "eps_h_used", z.horizontal_strain_used);
        put(&mut o, "eps_bmax", z.bending_strain_max);
        put(&mut o, "eps_dmax", z.diagonal_strain_max);
        put(&mut o, "eps_br", z.bending_strain_resultant);
        put(&mut o, "eps_dr", z.diagonal_strain_resultant);
        put(&mut o, "eps_max", z.governing_strain);
        put_int(
            &mut o,
            "category",
            a.category.ok_or("no category")?.number(),
        );
    }
    Ok(o)
}

/// The per-structure assessment with explicit zones (public pipeline entry point).
fn assess(i: &Table) -> Result<Outputs, String> {
    let zones = match i.get("zones") {
        None => Vec::new(),
        Some(Value::Array(a)) => a
            .iter()
            .map(|z| {
                let z = z.as_table().ok_or("zone is not a table")?;
                Ok(ZoneInput {
                    mode: mode(z)?,
                    length_m: num(z, "length_m")?,
                    deflection_ratio: num(z, "deflection_ratio")?,
                    horizontal_strain: opt_num(z, "eps_h")?,
                })
            })
            .collect::<Result<Vec<_>, String>>()?,
        Some(_) => return Err("`zones` must be an array of tables".into()),
    };
    let input = DamageInput {
        zones,
        angular_distortion: opt_num(i, "beta")?,
        height_m: num(i, "height_m")?,
        max_settlement_mm: opt_num(i, "max_settlement_mm")?,
        max_slope: opt_num(i, "max_slope")?,
    };
    let a = assess_damage(&input, &criteria_set(i)?);
    let mut o = Outputs::new();
    match a.category {
        Some(c) => put_int(&mut o, "category", c.number()),
        None => put_str(&mut o, "category", "none"),
    }
    if let Some(g) = a.governing_strain {
        put(&mut o, "governing_strain", g);
    }
    if let Some(g) = a.governing {
        put_str(&mut o, "governing_branch", branch_name(g.branch));
        if let Some(z) = g.zone_index {
            put_int(&mut o, "governing_zone", z as u8);
        }
    }
    for z in &a.zones {
        let k = z.index;
        put(&mut o, &format!("zone{k}_eps_bmax"), z.bending_strain_max);
        put(&mut o, &format!("zone{k}_eps_dmax"), z.diagonal_strain_max);
        put(
            &mut o,
            &format!("zone{k}_eps_br"),
            z.bending_strain_resultant,
        );
        put(
            &mut o,
            &format!("zone{k}_eps_dr"),
            z.diagonal_strain_resultant,
        );
        put(&mut o, &format!("zone{k}_eps_max"), z.governing_strain);
        put_int(&mut o, &format!("zone{k}_category"), z.category.number());
    }
    if let Some(sc) = &a.son_cording {
        put(&mut o, "son_cording_strain", sc.strain);
        put_int(&mut o, "son_cording_category", sc.category.number());
    }
    if let Some(r) = &a.rankin {
        put_int(&mut o, "rankin_category", r.category.number());
    }
    Ok(o)
}

fn handler(relation: &str) -> Option<Handler> {
    Some(match relation {
        "deep_beam_factors" => deep_beam_factors,
        "combined_strains" => combined_strains,
        "boundary_category" => boundary_category,
        "burland_1995_boundary" => burland_1995_boundary,
        "boscardin_cording_reconstruction" => boscardin_cording_reconstruction,
        "son_cording" => son_cording,
        "rankin" => rankin,
        "angular_distortion_flags" => angular_distortion_flags,
        "greenfield_trough" => greenfield_trough,
        "greenfield_shapes" => greenfield_shapes,
        "stage2_part" => stage2_part,
        "assess_damage" => assess,
        _ => return None,
    })
}

// ---- runner ------------------------------------------------------------------------------------

fn reference_files() -> Vec<PathBuf> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference");
    let mut files: Vec<PathBuf> = std::fs::read_dir(&dir)
        .unwrap_or_else(|e| panic!("cannot read {}: {e}", dir.display()))
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "toml"))
        .collect();
    files.sort();
    files
}

/// Compare one expected value; `None` when it passes, else the failure text.
fn compare(key: &str, expected: &Value, got: Option<&Out>, rel: f64, abs: f64) -> Option<String> {
    let Some(got) = got else {
        return Some(format!("`{key}`: not produced by the relation"));
    };
    match (expected, got) {
        (Value::Float(_) | Value::Integer(_), Out::Num(g)) => {
            let e = expected
                .as_float()
                .or(expected.as_integer().map(|i| i as f64))?;
            if rel == 0.0 && abs == 0.0 {
                return Some(format!(
                    "`{key}`: numeric expectation without rel_tol/abs_tol"
                ));
            }
            let tol = abs + rel * e.abs();
            ((g - e).abs() > tol || g.is_nan())
                .then(|| format!("`{key}`: got {g:e}, expected {e:e} (tolerance {tol:e})"))
        }
        (Value::Integer(e), Out::Int(g)) => {
            (e != g).then(|| format!("`{key}`: got {g}, expected {e}"))
        }
        (Value::String(e), Out::Str(g)) => {
            (e != g).then(|| format!("`{key}`: got \"{g}\", expected \"{e}\""))
        }
        (e, g) => Some(format!("`{key}`: type mismatch, got {g:?}, expected {e}")),
    }
}

#[test]
fn reference_cases_from_data_files() {
    let files = reference_files();
    assert!(
        files.len() >= 10,
        "expected the reference data files, found {files:?}"
    );
    let mut failures = Vec::new();
    let mut total = 0usize;
    for path in &files {
        let name = path
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default();
        let text = std::fs::read_to_string(path).expect("readable reference file");
        let doc: Table = match toml::from_str(&text) {
            Ok(d) => d,
            Err(e) => {
                failures.push(format!("{name}: does not parse: {e}"));
                continue;
            }
        };
        let relation = doc.get("relation").and_then(Value::as_str).unwrap_or("");
        let Some(run) = handler(relation) else {
            failures.push(format!("{name}: unknown relation `{relation}`"));
            continue;
        };
        let cases = doc
            .get("case")
            .and_then(Value::as_array)
            .cloned()
            .unwrap_or_default();
        if cases.is_empty() {
            failures.push(format!("{name}: no [[case]] rows"));
        }
        for (k, case) in cases.iter().enumerate() {
            total += 1;
            let Some(case) = case.as_table() else {
                failures.push(format!("{name} case {k}: not a table"));
                continue;
            };
            let label = format!(
                "{name} case {k} ({})",
                case.get("id").and_then(Value::as_str).unwrap_or("-")
            );
            let source = case.get("source").and_then(Value::as_str).unwrap_or("");
            if source.trim().is_empty() {
                failures.push(format!("{label}: missing `source`"));
            }
            let empty = Table::new();
            let input = case
                .get("input")
                .and_then(Value::as_table)
                .unwrap_or(&empty);
            let Some(expected) = case.get("expected").and_then(Value::as_table) else {
                failures.push(format!("{label}: missing `expected`"));
                continue;
            };
            let rel = case.get("rel_tol").and_then(Value::as_float).unwrap_or(0.0);
            let abs = case.get("abs_tol").and_then(Value::as_float).unwrap_or(0.0);
            let key_abs = case.get("key_abs_tol").and_then(Value::as_table);
            match run(input) {
                Err(e) => failures.push(format!("{label}: relation failed: {e}")),
                Ok(out) => {
                    for (key, exp) in expected {
                        let (rel, abs) =
                            match key_abs.and_then(|t| t.get(key)).and_then(Value::as_float) {
                                Some(t) => (0.0, t),
                                None => (rel, abs),
                            };
                        if let Some(f) = compare(key, exp, out.get(key), rel, abs) {
                            failures.push(format!("{label}: {f}  [source: {source}]"));
                        }
                    }
                }
            }
        }
    }
    assert!(total > 0);
    assert!(
        failures.is_empty(),
        "{} of {total} cases failed:\n{}",
        failures.len(),
        failures.join("\n")
    );
}
