//! `plinth merge`: combine the output folders of `--shard K/N` runs into one portfolio result.
//!
//! Owns the order of the merged records (structures in the footprint file's feature order; point
//! rows by dataset in portfolio order, then line in the points file, a tie row before the point's
//! links, links by structure input order — the order a single run writes), the recomputation of
//! the portfolio-level counts, results.gpkg rebuilt from the shards' layers in that order, the
//! merged manifest (the first shard's, with the list of shards)
//! and copying every other file of the shard folders (reports) across.
//!
//! The record files are merged at the level of their parsed values and written with the same
//! serialisers as a single run, so a merge of shards equals a single run byte for byte when every
//! structure's result is independent of the other shards' structures. A point listed by several
//! shards (near the border between their areas) is reduced to the row a single run writes (see
//! `one_row_per_point`). Each shard associates its points with the other shards' structures near
//! its own taken into account (association::SpatialIndex::with_halo), so the owner of such a
//! point, or its tie, is the one a single run finds.
//!
//! It does not analyse anything and never reads the points files.

use std::collections::{BTreeMap, BTreeSet, HashMap};
use std::path::{Path, PathBuf};

use anyhow::{Context, Result, bail};
use serde_json::Value;

use crate::error::InputError;
use crate::output::{self, gpkg, guard};

/// The files of an output folder that are merged rather than copied.
pub const MERGED_FILES: &[&str] = guard::OUTPUT_FILES.split_at(guard::DATA_FILE_COUNT).0;

fn read_json(path: &Path) -> Result<Value> {
    let text =
        std::fs::read_to_string(path).with_context(|| format!("cannot read {}", path.display()))?;
    serde_json::from_str(&text).with_context(|| format!("{} is not valid JSON", path.display()))
}

/// Structure ids in footprint-file order, from the portfolio the shards were run with.
fn input_order(portfolio: &Path) -> Result<HashMap<String, usize>> {
    let pf = crate::portfolio::Portfolio::load(portfolio)?;
    let mut w = crate::error::Warnings::default();
    let (structures, _, _) = crate::ingest::load_structures(&pf, &mut w)?;
    Ok(structures
        .into_iter()
        .enumerate()
        .map(|(i, s)| (s.raw.id, i))
        .collect())
}

/// The portfolio path recorded in a shard's manifest.
fn manifest_portfolio(manifest: &Value) -> Option<PathBuf> {
    manifest
        .get("inputs")?
        .as_array()?
        .iter()
        .find(|i| i.get("role").and_then(Value::as_str) == Some("portfolio"))?
        .get("path")?
        .as_str()
        .map(PathBuf::from)
}

fn as_map(v: Option<&Value>) -> BTreeMap<String, u64> {
    v.and_then(Value::as_object)
        .map(|m| {
            m.iter()
                .map(|(k, v)| (k.clone(), v.as_u64().unwrap_or(0)))
                .collect()
        })
        .unwrap_or_default()
}

fn map_value(m: &BTreeMap<String, u64>) -> Value {
    Value::Object(
        m.iter()
            .map(|(k, v)| (k.clone(), Value::from(*v)))
            .collect(),
    )
}

fn add_maps(into: &mut BTreeMap<String, u64>, from: &BTreeMap<String, u64>) {
    for (k, v) in from {
        *into.entry(k.clone()).or_default() += v;
    }
}

/// A CSV file as header + records.
fn read_csv(path: &Path) -> Result<(csv::StringRecord, Vec<csv::StringRecord>)> {
    let mut r = csv::ReaderBuilder::new()
        .has_headers(true)
        .from_path(path)
        .with_context(|| format!("cannot read {}", path.display()))?;
    let header = r.headers()?.clone();
    let rows = r
        .records()
        .collect::<Result<Vec<_>, _>>()
        .with_context(|| format!("cannot parse {}", path.display()))?;
    Ok((header, rows))
}

fn write_csv(header: &csv::StringRecord, rows: &[csv::StringRecord]) -> Result<Vec<u8>> {
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(header)?;
    for r in rows {
        w.write_record(r)?;
    }
    Ok(w.into_inner()?)
}

/// Sort key of a point row: (dataset order, line, tie first, structure input order).
type PointKey = (usize, u64, u8, usize);

/// Merge shard output folders into `out` (written atomically). `portfolio` overrides the portfolio
/// path recorded in the first shard's manifest (needed when the merge runs from another folder).
pub fn merge(shards: &[PathBuf], out: &Path, portfolio: Option<&Path>) -> Result<()> {
    if shards.is_empty() {
        bail!("merge needs at least one shard folder");
    }
    // The output folder is checked before anything is read, and again once the portfolio is known.
    check_out(out, shards, portfolio, None)?;
    for d in shards {
        check_shard(d)?;
    }
    let manifests: Vec<Value> = shards
        .iter()
        .map(|d| read_json(&d.join("manifest.json")))
        .collect::<Result<_>>()?;
    let pf_path = match portfolio {
        Some(p) => p.to_path_buf(),
        None => manifest_portfolio(&manifests[0])
            .context("the first shard's manifest.json names no portfolio; pass --portfolio")?,
    };
    let pf = crate::portfolio::Portfolio::load(&pf_path)?;
    check_out(out, shards, portfolio, Some(&pf))?;
    let order = input_order(&pf_path)?;
    let dataset_order: HashMap<String, usize> = pf
        .datasets
        .iter()
        .enumerate()
        .map(|(i, d)| (d.name.clone(), i))
        .collect();
    let idx = |id: &str| -> Result<usize> {
        order
            .get(id)
            .copied()
            .with_context(|| format!("structure `{id}` is not in the portfolio's footprints"))
    };
    let mut shard_labels = Vec::new();
    for (d, m) in shards.iter().zip(&manifests) {
        shard_labels.push(serde_json::json!({
            "dir": d.display().to_string(),
            "shard": m.pointer("/options/shard").cloned().unwrap_or(Value::Null),
        }));
    }

    // Points rows (needed for the coverage counts too).
    let mut p_header = None;
    let mut p_rows: Vec<(PointKey, csv::StringRecord)> = Vec::new();
    let mut p_feats: Vec<(PointKey, Value)> = Vec::new();
    let with_geojson = all_or_none(shards, "points.geojson")?;
    for d in shards {
        let (h, rows) = read_csv(&d.join("points.csv"))?;
        let col = |name: &str| {
            h.iter()
                .position(|c| c == name)
                .with_context(|| format!("points.csv of {} has no `{name}` column", d.display()))
        };
        let (c_ds, c_line, c_sid, c_role) = (
            col("dataset")?,
            col("line")?,
            col("structure_id")?,
            col("role")?,
        );
        for r in rows {
            let key = point_key(
                &dataset_order,
                &idx,
                &r[c_ds],
                r[c_line].parse().unwrap_or(0),
                &r[c_role],
                &r[c_sid],
            )?;
            p_rows.push((key, r));
        }
        p_header.get_or_insert(h);
        if !with_geojson {
            continue;
        }
        let g = read_json(&d.join("points.geojson"))?;
        for f in g["features"].as_array().into_iter().flatten() {
            let pr = &f["properties"];
            let key = point_key(
                &dataset_order,
                &idx,
                pr["dataset"].as_str().unwrap_or(""),
                pr["line"].as_u64().unwrap_or(0),
                pr["role"].as_str().unwrap_or(""),
                pr["structure_id"].as_str().unwrap_or(""),
            )?;
            p_feats.push((key, f.clone()));
        }
    }
    p_rows.sort_by_key(|(k, _)| *k);
    p_feats.sort_by_key(|(k, _)| *k);
    let p_header = p_header.context("no points.csv")?;
    let csv_col = |n: &str| p_header.iter().position(|c| c == n);
    let (Some(c_role), Some(c_dist), Some(c_rings)) = (
        csv_col("role"),
        csv_col("distance_m"),
        csv_col("surroundings_of"),
    ) else {
        bail!("points.csv lacks role, distance_m or surroundings_of: merge shards of this version");
    };
    let p_rows = one_row_per_point(
        p_rows,
        |r| RowView {
            role: r[c_role].to_string(),
            distance_m: r[c_dist].parse().unwrap_or(f64::INFINITY),
            rings: r[c_rings].parse().unwrap_or(0),
        },
        |r, n| {
            let mut fields: Vec<String> = r.iter().map(String::from).collect();
            fields[c_rings] = n.to_string();
            *r = csv::StringRecord::from(fields);
        },
    );
    let p_feats = one_row_per_point(
        p_feats,
        |f| {
            let pr = &f["properties"];
            RowView {
                role: pr["role"].as_str().unwrap_or("").to_string(),
                distance_m: pr["distance_m"].as_f64().unwrap_or(f64::INFINITY),
                rings: pr["surroundings_of"].as_u64().unwrap_or(0),
            }
        },
        |f, n| f["properties"]["surroundings_of"] = Value::from(n),
    );

    // results.json.
    let mut structures: Vec<(usize, Value)> = Vec::new();
    let mut first_portfolio = None;
    let mut by_status = BTreeMap::new();
    let mut by_category = BTreeMap::new();
    let mut by_grade = BTreeMap::new();
    let mut rejected = BTreeMap::new();
    let mut points_read = BTreeMap::new();
    let mut kept = 0u64;
    let mut gone: Option<Vec<Value>> = None;
    for d in shards {
        let r = read_json(&d.join("results.json"))?;
        let p = r
            .get("portfolio")
            .context("results.json has no portfolio")?;
        let c = &p["coverage"];
        add_maps(&mut by_status, &as_map(c.get("by_status")));
        add_maps(&mut by_category, &as_map(p.get("by_category")));
        add_maps(&mut by_grade, &as_map(p.get("by_grade")));
        let mut rej = as_map(c.get("points_rejected"));
        rej.remove(crate::assess::reason::TIE);
        add_maps(&mut rejected, &rej);
        points_read = as_map(c.get("points_read"));
        kept += c["points_kept"].as_u64().unwrap_or(0);
        // A structure is gone since the previous run only if no shard has it.
        let g: Vec<Value> = p["gone_since_previous"]
            .as_array()
            .cloned()
            .unwrap_or_default();
        gone = Some(match gone {
            None => g,
            Some(prev) => prev.into_iter().filter(|x| g.contains(x)).collect(),
        });
        for s in r["structures"].as_array().into_iter().flatten() {
            let id = s["id"].as_str().context("a structure without id")?;
            structures.push((idx(id)?, s.clone()));
        }
        first_portfolio.get_or_insert(p.clone());
    }
    structures.sort_by_key(|(i, _)| *i);
    if structures.windows(2).any(|w| w[0].0 == w[1].0) {
        bail!("a structure appears in more than one shard: merge the shards of one run only");
    }
    // Point-level counts from the merged rows (a point may appear in several shards).
    let (c_ds, c_pid, c_role) = {
        let col = |n: &str| p_header.iter().position(|c| c == n).unwrap_or(0);
        (col("dataset"), col("point_id"), col("role"))
    };
    let mut roles: BTreeMap<(String, String), Vec<String>> = BTreeMap::new();
    for (_, r) in &p_rows {
        roles
            .entry((r[c_ds].to_string(), r[c_pid].to_string()))
            .or_default()
            .push(r[c_role].to_string());
    }
    let ties = roles
        .values()
        .filter(|v| v.iter().any(|r| r == "tie"))
        .count() as u64;
    let surroundings_only = roles
        .values()
        .filter(|v| v.iter().all(|r| r == "surroundings"))
        .count() as u64;
    let read_total: u64 = points_read.values().sum();
    let out_of_reach = read_total.saturating_sub(roles.len() as u64);
    if ties > 0 {
        rejected.insert(crate::assess::reason::TIE.to_string(), ties);
    }
    let mut portfolio_v = first_portfolio.context("no results.json")?;
    // Overwrite the counts in the first shard's coverage object, keeping its key order.
    let cov = &mut portfolio_v["coverage"];
    cov["structures"] = Value::from(structures.len());
    cov["by_status"] = map_value(&by_status);
    cov["points_read"] = map_value(&points_read);
    cov["points_kept"] = Value::from(kept);
    cov["points_rejected"] = map_value(&rejected);
    cov["points_surroundings_only"] = Value::from(surroundings_only);
    cov["points_out_of_reach"] = Value::from(out_of_reach);
    cov["ties"] = Value::from(ties);
    portfolio_v["by_category"] = map_value(&by_category);
    portfolio_v["by_grade"] = map_value(&by_grade);
    portfolio_v["gone_since_previous"] = Value::Array(gone.unwrap_or_default());
    portfolio_v["shard"] = Value::Null;
    let records: Vec<Value> = structures.into_iter().map(|(_, s)| s).collect();

    // results.csv and results.geojson.
    let mut r_header = None;
    let mut r_rows = Vec::new();
    let mut r_feats = Vec::new();
    for d in shards {
        let (h, rows) = read_csv(&d.join("results.csv"))?;
        let c_id = h
            .iter()
            .position(|c| c == "id")
            .context("results.csv has no id")?;
        for r in rows {
            r_rows.push((idx(&r[c_id])?, r));
        }
        r_header.get_or_insert(h);
        let g = read_json(&d.join("results.geojson"))?;
        for f in g["features"].as_array().into_iter().flatten() {
            let id = f["properties"]["id"].as_str().unwrap_or("");
            r_feats.push((idx(id)?, f.clone()));
        }
    }
    r_rows.sort_by_key(|(i, _)| *i);
    r_feats.sort_by_key(|(i, _)| *i);

    let mut manifest = manifests[0].clone();
    if let Some(o) = manifest.get_mut("options") {
        o["shard"] = Value::Null;
    }
    // The merged folder holds only the names this version writes (shards are checked above).
    manifest[guard::FORMAT_KEY] = Value::from(guard::FORMAT_MARKER);
    manifest["shards"] = Value::Array(shard_labels);

    let gpkg_layers = merge_gpkg(shards, &idx, &dataset_order)?;
    let collection =
        |feats: Vec<Value>| serde_json::json!({"type": "FeatureCollection", "features": feats});
    let target = check_out(out, shards, portfolio, Some(&pf))?;
    let staging = output::Staging::new(&target)?;
    let res = (|| -> Result<()> {
        let d = &staging.dir;
        output::write_with(d, "results.json", |w| {
            output::results_layout_to(&portfolio_v, &records, w)
        })?;
        let rh = r_header.context("no results.csv")?;
        let rr: Vec<csv::StringRecord> = r_rows.into_iter().map(|(_, r)| r).collect();
        output::write_file(d, "results.csv", &write_csv(&rh, &rr)?)?;
        let rf = collection(r_feats.into_iter().map(|(_, f)| f).collect());
        output::write_file(
            d,
            "results.geojson",
            (serde_json::to_string(&rf)? + "\n").as_bytes(),
        )?;
        let pr: Vec<csv::StringRecord> = p_rows.into_iter().map(|(_, r)| r).collect();
        output::write_file(d, "points.csv", &write_csv(&p_header, &pr)?)?;
        if with_geojson {
            let pfc = collection(p_feats.into_iter().map(|(_, f)| f).collect());
            output::write_file(
                d,
                "points.geojson",
                (serde_json::to_string(&pfc)? + "\n").as_bytes(),
            )?;
        }
        if let Some((structures, points)) = gpkg_layers {
            let date = portfolio_v["analysis_date"].as_str();
            let path = d.join(gpkg::FILE);
            let mut g = gpkg::Gpkg::create(&path, &gpkg::last_change(date))?;
            g.write_layer(&gpkg::STRUCTURES_LAYER, structures.into_iter().map(Ok))?;
            g.write_layer(&gpkg::POINTS_LAYER, points.into_iter().map(Ok))?;
            g.finish()
                .with_context(|| format!("cannot write {}", path.display()))?;
        }
        output::write_file(
            d,
            "manifest.json",
            (serde_json::to_string_pretty(&manifest)? + "\n").as_bytes(),
        )?;
        let mut copied = BTreeSet::new();
        for s in shards {
            copy_extra(s, d, Path::new(""), &mut copied)?;
        }
        // Last: the page reads the merged detail files back.
        write_explorer(d, &pf, &manifest, &portfolio_v, &records)
    })();
    match res {
        Ok(()) => staging.commit(),
        Err(e) => {
            staging.abandon();
            Err(e)
        }
    }
}

/// explorer.html of the whole portfolio (output::explorer), from the merged results and detail
/// files, the portfolio's footprints and works, and the first shard's window and inputs: the
/// page a single run would write.
fn write_explorer(
    d: &Path,
    pf: &crate::portfolio::Portfolio,
    manifest: &Value,
    portfolio_v: &Value,
    records: &[Value],
) -> Result<()> {
    let results: crate::results::Results = serde_json::from_value(
        serde_json::json!({"portfolio": portfolio_v, "structures": records}),
    )
    .context("the merged results do not read back as results.json")?;
    let date = |key: &str| -> Result<chrono::NaiveDate> {
        let text = manifest["window"][key].as_str().unwrap_or("");
        chrono::NaiveDate::parse_from_str(text, "%Y-%m-%d")
            .with_context(|| format!("the first shard's manifest.json has no window {key} date"))
    };
    let window = crate::assess::Window {
        start: date("start")?,
        end: date("end")?,
    };
    let mut warnings = crate::error::Warnings::default();
    let (structures, crs, _) = crate::ingest::load_structures(pf, &mut warnings)?;
    let no_reports = manifest
        .pointer("/options/no_reports")
        .and_then(Value::as_bool)
        .unwrap_or(true);
    let page = crate::run::ExplorerPage {
        portfolio: pf,
        results: &results,
        structures: &structures,
        analysis_crs: &crs,
        window,
        inputs: &manifest["inputs"],
        reports: !no_reports,
        held: None,
    };
    page.write(d)
}

/// Check the merge's output folder: never a shard, never the portfolio or (once it is read) any
/// input it names.
fn check_out(
    out: &Path,
    shards: &[PathBuf],
    portfolio: Option<&Path>,
    pf: Option<&crate::portfolio::Portfolio>,
) -> Result<guard::Target, guard::Refused> {
    let mut inputs: Vec<guard::Input> = shards
        .iter()
        .map(|d| guard::Input::new("a shard folder being merged", d))
        .collect();
    match (pf, portfolio) {
        (Some(pf), _) => inputs.extend(crate::run::portfolio_inputs(pf)),
        (None, Some(p)) => inputs.push(guard::Input::new("the portfolio file", p)),
        (None, None) => {}
    }
    guard::check(out, guard::Policy::ReplaceOutput, &inputs)
}

/// A shard folder must hold only what Plinth writes: everything but the merged files is copied
/// into the merged folder, which must stay a Plinth output folder.
fn check_shard(dir: &Path) -> Result<()> {
    let entry = guard::foreign_entry(dir).map_err(|r| {
        InputError::new(
            dir,
            "",
            match r {
                guard::Reason::Unreadable(e) => format!("cannot read the shard folder: {e}"),
                other => guard::Refused {
                    path: dir.to_path_buf(),
                    reason: other,
                }
                .why(),
            },
            "pass the output folders of `plinth assess --shard K/N`",
        )
    })?;
    if let Some(e) = entry {
        return Err(InputError::new(
            dir,
            "",
            format!("the shard folder holds `{e}`, which Plinth does not write"),
            "move it out of the shard folder (merge copies every report file of the shards)",
        )
        .into());
    }
    Ok(())
}

/// Whether every shard holds the output file `name` (true) or none does (false: shards written
/// before the file existed, or, for points.geojson, with `--no-points-geojson`); an error when
/// only some do.
fn all_or_none(shards: &[PathBuf], name: &str) -> Result<bool> {
    let with: Vec<&PathBuf> = shards.iter().filter(|d| d.join(name).is_file()).collect();
    if with.is_empty() {
        return Ok(false);
    }
    if let Some(d) = shards.iter().find(|d| !with.contains(d)) {
        bail!(
            "{} has no {name} while other shards do: merge the shards of one run only",
            d.display()
        );
    }
    Ok(true)
}

/// The features of the structures and points layers of results.gpkg.
type GpkgLayers = (Vec<gpkg::Feature>, Vec<gpkg::Feature>);

/// The two layers of the shards' results.gpkg files, each in the single run's order; None when no
/// shard has the file (shards written before it existed), an error when only some have it.
fn merge_gpkg(
    shards: &[PathBuf],
    idx: &dyn Fn(&str) -> Result<usize>,
    dataset_order: &HashMap<String, usize>,
) -> Result<Option<GpkgLayers>> {
    if !all_or_none(shards, gpkg::FILE)? {
        return Ok(None);
    }
    let text = |f: &gpkg::Feature, i: usize| match &f.values[i] {
        rusqlite::types::Value::Text(s) => s.clone(),
        _ => String::new(),
    };
    let col = |name: &str| {
        gpkg::POINT_FIELDS
            .iter()
            .position(|(n, _)| *n == name)
            .unwrap_or(0)
    };
    let (c_ds, c_line, c_sid, c_role) = (
        col("dataset"),
        col("line"),
        col("structure_id"),
        col("role"),
    );
    let mut structures = Vec::new();
    let mut points = Vec::new();
    for d in shards {
        let path = d.join(gpkg::FILE);
        for f in gpkg::read_layer(&path, &gpkg::STRUCTURES_LAYER)? {
            structures.push((idx(&text(&f, 0))?, f));
        }
        for f in gpkg::read_layer(&path, &gpkg::POINTS_LAYER)? {
            let line = match f.values[c_line] {
                rusqlite::types::Value::Integer(l) => l as u64,
                _ => 0,
            };
            let key = point_key(
                dataset_order,
                idx,
                &text(&f, c_ds),
                line,
                &text(&f, c_role),
                &text(&f, c_sid),
            )?;
            points.push((key, f));
        }
    }
    structures.sort_by_key(|(i, _)| *i);
    points.sort_by_key(|(k, _)| *k);
    let (c_dist, c_rings) = (col("distance_m"), col("surroundings_of"));
    let points = one_row_per_point(
        points,
        |f| RowView {
            role: text(f, c_role),
            distance_m: match f.values[c_dist] {
                rusqlite::types::Value::Real(d) => d,
                _ => f64::INFINITY,
            },
            rings: match f.values[c_rings] {
                rusqlite::types::Value::Integer(n) => u64::try_from(n).unwrap_or(0),
                _ => 0,
            },
        },
        |f, n| f.values[c_rings] = rusqlite::types::Value::Integer(n as i64),
    );
    Ok(Some((
        structures.into_iter().map(|(_, f)| f).collect(),
        points.into_iter().map(|(_, f)| f).collect(),
    )))
}

/// What [`one_row_per_point`] reads of a point row.
struct RowView {
    role: String,
    distance_m: f64,
    rings: u64,
}

/// A point near the border between shards is listed by every shard holding a structure whose
/// footprint, buffer or ring holds it; each shard links and counts only its own structures (but
/// decides owners and ties with its neighbours' structures too, as a single run does). A single
/// run lists it once: with its owner when it has one, else with the nearest structure whose ring
/// holds it (the lower input order among equal distances), `surroundings_of` counting the rings
/// of all structures; a tie is listed as one tie row, followed by that nearest ring's row when
/// one holds it. The rows of one point (same dataset and line, consecutive in `rows`) are reduced
/// to those rows. Every shard that lists a tied point saw the tie and wrote one tie row carrying
/// its own ring count, so the rings are the sum over the tie rows. Rows that contradict each
/// other (two owners) are kept as they are.
fn one_row_per_point<T>(
    rows: Vec<(PointKey, T)>,
    view: impl Fn(&T) -> RowView,
    set_rings: impl Fn(&mut T, u64),
) -> Vec<(PointKey, T)> {
    let mut out = Vec::with_capacity(rows.len());
    let mut group: Vec<(PointKey, T)> = Vec::new();
    for row in rows {
        if group
            .last()
            .is_some_and(|g| (g.0.0, g.0.1) != (row.0.0, row.0.1))
        {
            out.extend(reduce_point(std::mem::take(&mut group), &view, &set_rings));
        }
        group.push(row);
    }
    out.extend(reduce_point(group, &view, &set_rings));
    out
}

/// The rows of one point reduced as [`one_row_per_point`] says.
fn reduce_point<T>(
    mut group: Vec<(PointKey, T)>,
    view: &impl Fn(&T) -> RowView,
    set_rings: &impl Fn(&mut T, u64),
) -> Vec<(PointKey, T)> {
    if group.len() < 2 {
        return group;
    }
    let views: Vec<RowView> = group.iter().map(|(_, t)| view(t)).collect();
    let nearest = |candidates: &mut dyn Iterator<Item = usize>| {
        candidates.min_by(|&a, &b| {
            views[a]
                .distance_m
                .total_cmp(&views[b].distance_m)
                .then(group[a].0.3.cmp(&group[b].0.3))
        })
    };
    let ties: Vec<usize> = (0..views.len())
        .filter(|&i| views[i].role == "tie")
        .collect();
    if let Some(&first_tie) = ties.first() {
        if views.iter().any(|v| v.role == "structure") {
            return group;
        }
        let rings = ties.iter().map(|&i| views[i].rings).sum();
        let ring = nearest(&mut (0..views.len()).filter(|&i| views[i].role != "tie"));
        // Kept in key order: the tie row, then the ring's row.
        return group
            .into_iter()
            .enumerate()
            .filter(|(i, _)| *i == first_tie || Some(*i) == ring)
            .map(|(_, mut row)| {
                set_rings(&mut row.1, rings);
                row
            })
            .collect();
    }
    let owners: Vec<usize> = (0..views.len())
        .filter(|&i| views[i].role == "structure")
        .collect();
    let chosen = match owners.as_slice() {
        [one] => *one,
        [] => nearest(&mut (0..views.len())).unwrap_or(0),
        _ => return group,
    };
    let rings = views.iter().map(|v| v.rings).sum();
    let mut row = group.swap_remove(chosen);
    set_rings(&mut row.1, rings);
    vec![row]
}

fn point_key(
    dataset_order: &HashMap<String, usize>,
    idx: &dyn Fn(&str) -> Result<usize>,
    dataset: &str,
    line: u64,
    role: &str,
    structure_id: &str,
) -> Result<PointKey> {
    let ds = *dataset_order
        .get(dataset)
        .with_context(|| format!("dataset `{dataset}` is not in the portfolio"))?;
    Ok(if role == "tie" {
        (ds, line, 0, 0)
    } else {
        (ds, line, 1, idx(structure_id)?)
    })
}

/// Copy every file of `src/rel` except the merged ones into `dst/rel` (reports and the like).
/// The same relative file in two shards is an error (shards never share a structure).
fn copy_extra(src: &Path, dst: &Path, rel: &Path, copied: &mut BTreeSet<PathBuf>) -> Result<()> {
    let dir = src.join(rel);
    let mut entries: Vec<_> = std::fs::read_dir(&dir)
        .with_context(|| format!("cannot list {}", dir.display()))?
        .collect::<Result<_, _>>()?;
    entries.sort_by_key(|e| e.file_name());
    for e in entries {
        let name = e.file_name();
        let r = rel.join(&name);
        // A shard's explorer page shows that shard only: not copied (the merge writes its own).
        if rel.as_os_str().is_empty()
            && (MERGED_FILES.iter().any(|m| name == *m) || name == crate::output::explorer::FILE)
        {
            continue;
        }
        if e.file_type()?.is_dir() {
            std::fs::create_dir_all(dst.join(&r))?;
            copy_extra(src, dst, &r, copied)?;
        } else {
            if !copied.insert(r.clone()) {
                bail!("{} exists in more than one shard folder", r.display());
            }
            std::fs::copy(e.path(), dst.join(&r))
                .with_context(|| format!("cannot copy {}", e.path().display()))?;
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Rows as (key, (role, distance, rings)).
    fn rows(r: &[(u64, usize, &str, f64, u64)]) -> Vec<(PointKey, (String, f64, u64))> {
        r.iter()
            .map(|&(line, s, role, d, n)| {
                let tie = u8::from(role != "tie");
                ((0, line, tie, s), (role.to_string(), d, n))
            })
            .collect()
    }

    fn reduce(r: &[(u64, usize, &str, f64, u64)]) -> Vec<(u64, usize, u64)> {
        one_row_per_point(
            rows(r),
            |t| RowView {
                role: t.0.clone(),
                distance_m: t.1,
                rings: t.2,
            },
            |t, n| t.2 = n,
        )
        .into_iter()
        .map(|(k, t)| (k.1, k.3, t.2))
        .collect()
    }

    #[test]
    fn border_points_keep_the_owner_or_the_nearest_ring_with_every_ring_counted() {
        // Line 2: owned in one shard, in a ring in another: the owner's row, rings summed.
        // Line 3: rings in two shards: the nearer structure (7 at 26 m), 1 + 2 rings.
        // Line 4: equal distances: the structure first in input order.
        // Line 5: one row: unchanged. Line 6: owned in two shards: both rows kept.
        let got = reduce(&[
            (2, 3, "surroundings", 46.5, 1),
            (2, 9, "structure", 0.0, 0),
            (3, 1, "surroundings", 49.1, 1),
            (3, 7, "surroundings", 26.2, 2),
            (4, 2, "surroundings", 30.0, 1),
            (4, 5, "surroundings", 30.0, 1),
            (5, 4, "surroundings", 12.0, 3),
            (6, 1, "structure", 1.0, 0),
            (6, 8, "structure", 1.2, 0),
        ]);
        assert_eq!(
            got,
            [
                (2, 9, 1),
                (3, 7, 3),
                (4, 2, 2),
                (5, 4, 3),
                (6, 1, 0),
                (6, 8, 0)
            ]
        );
    }

    #[test]
    fn a_tie_seen_by_two_shards_is_one_tie_row_and_the_nearest_ring() {
        // Line 2, one shard: its tie row and its ring row, unchanged (2 rings).
        // Line 3, two shards (each wrote a tie row with its own ring count, 1 and 2, and the
        // second its nearest ring): one tie row and the nearest ring (structure 6 at 31 m),
        // both with 1 + 2 rings.
        // Line 4, two shards, no ring anywhere: one tie row, no ring row.
        let got = reduce(&[
            (2, 0, "tie", 0.0, 2),
            (2, 4, "surroundings", 40.0, 2),
            (3, 0, "tie", 0.0, 1),
            (3, 0, "tie", 0.0, 2),
            (3, 2, "surroundings", 44.0, 1),
            (3, 6, "surroundings", 31.0, 2),
            (4, 0, "tie", 0.0, 0),
            (4, 0, "tie", 0.0, 0),
        ]);
        assert_eq!(got, [(2, 0, 2), (2, 4, 2), (3, 0, 3), (3, 6, 3), (4, 0, 0)]);
    }
}
