//! Points CSV reader ("wide" layout): one row per measurement point, one column per acquisition.
//!
//! Owns: delimiter detection (comma, semicolon, tab), UTF-8 BOM and CRLF handling, the column map,
//! epoch headers parsed with the dataset's `date_format`, unit conversion to mm and the LOS sign
//! convention (values are stored positive towards the satellite), per-row validation with the file
//! and line in every error, and streaming: rows are parsed one at a time and only points within
//! reach of some structure (a caller-supplied test on analysis-CRS coordinates) are kept, so memory
//! grows with the retained points, not with the file.
//!
//! It does not associate points with structures or screen them (see `association`).

use std::collections::HashMap;
use std::hash::{Hash, Hasher};
use std::path::Path;

use chrono::NaiveDate;

use crate::coords::{GeographicCheck, Transformer, check_geographic};
use crate::error::{InputError, Warnings};
use crate::portfolio::{DatasetSpec, LosSign};

/// Largest plausible |LOS displacement| relative to the first epoch, mm. Larger values are errors.
pub const MAX_ABS_DISPLACEMENT_MM: f64 = 10_000.0;

/// One retained measurement point.
#[derive(Debug, Clone)]
pub struct Point {
    /// Point id as written in the file.
    pub id: String,
    /// 1-based line number in the file (for messages and the points output).
    pub line: u64,
    /// Easting in the analysis CRS, m.
    pub x: f64,
    /// Northing in the analysis CRS, m.
    pub y: f64,
    /// Longitude, degrees (WGS84), for GeoJSON output.
    pub lon: f64,
    /// Latitude, degrees (WGS84), for GeoJSON output.
    pub lat: f64,
    /// Temporal coherence 0–1, when the file has a coherence column.
    pub coherence: Option<f32>,
    /// Incidence angle, degrees (per point or the dataset value).
    pub incidence_deg: f64,
    /// Heading, degrees clockwise from north (per point or the dataset value).
    pub heading_deg: f64,
    /// Height, m, when mapped.
    pub height_m: Option<f32>,
    /// LOS displacement per epoch, mm, positive towards the satellite; NaN = missing epoch.
    pub values_mm: Box<[f32]>,
}

/// One points file after reading.
#[derive(Debug, Clone)]
pub struct Dataset {
    /// Dataset name from the portfolio.
    pub name: String,
    /// Acquisition dates, strictly increasing.
    pub epochs: Vec<NaiveDate>,
    /// Retained points (within reach of a structure).
    pub points: Vec<Point>,
    /// Data rows read.
    pub rows_read: u64,
    /// Rows not within reach of any structure (not kept).
    pub rows_out_of_reach: u64,
    /// True when the file has a coherence column (coherence screening applies).
    pub has_coherence: bool,
    /// Header columns that were neither mapped nor epochs (ignored).
    pub ignored_columns: Vec<String>,
}

fn detect_delimiter(header: &[u8]) -> u8 {
    let count = |d: u8| header.iter().filter(|&&b| b == d).count();
    let (c, s, t) = (count(b','), count(b';'), count(b'\t'));
    if t > c && t > s {
        b'\t'
    } else if s > c {
        b';'
    } else {
        b','
    }
}

/// Parse a number cell. Empty, `NaN`, `NA` and `null` are missing (None). Errors on anything else
/// that is not a finite number.
fn parse_cell(raw: &[u8]) -> Result<Option<f64>, String> {
    let t = trim(raw);
    if t.is_empty()
        || t.eq_ignore_ascii_case(b"nan")
        || t.eq_ignore_ascii_case(b"na")
        || t.eq_ignore_ascii_case(b"null")
    {
        return Ok(None);
    }
    match fast_float2::parse::<f64, _>(t) {
        Ok(v) if v.is_finite() => Ok(Some(v)),
        Ok(_) => Err(format!(
            "`{}` is not a finite number",
            String::from_utf8_lossy(t)
        )),
        Err(_) => Err(format!("`{}` is not a number", String::from_utf8_lossy(t))),
    }
}

fn trim(b: &[u8]) -> &[u8] {
    let s = b
        .iter()
        .position(|c| !c.is_ascii_whitespace())
        .unwrap_or(b.len());
    let e = b
        .iter()
        .rposition(|c| !c.is_ascii_whitespace())
        .map_or(s, |p| p + 1);
    &b[s..e.max(s)]
}

fn id_hash(id: &[u8]) -> u64 {
    let mut h = std::collections::hash_map::DefaultHasher::new();
    id.hash(&mut h);
    h.finish()
}

/// Read a points file.
///
/// `to_analysis` maps the file's coordinates to the analysis CRS, `to_wgs84` to lon/lat;
/// `within_reach(x, y)` (analysis CRS) decides whether a row is kept.
pub fn read_points(
    spec: &DatasetSpec,
    to_analysis: &Transformer,
    to_wgs84: &Transformer,
    geographic: bool,
    within_reach: &dyn Fn(f64, f64) -> bool,
    warnings: &mut Warnings,
) -> Result<Dataset, InputError> {
    let file = spec.path.as_path();
    let f = std::fs::File::open(file).map_err(|e| {
        InputError::new(
            file,
            "",
            format!("cannot open the points file: {e}"),
            "check the dataset path in the portfolio file",
        )
    })?;
    read_points_from(
        std::io::BufReader::with_capacity(1 << 20, f),
        file,
        spec,
        to_analysis,
        to_wgs84,
        geographic,
        within_reach,
        warnings,
    )
}

/// Read points from any reader (see [`read_points`]); `file` is used in messages.
#[allow(clippy::too_many_arguments)]
pub fn read_points_from<R: std::io::BufRead>(
    mut reader: R,
    file: &Path,
    spec: &DatasetSpec,
    to_analysis: &Transformer,
    to_wgs84: &Transformer,
    geographic: bool,
    within_reach: &dyn Fn(f64, f64) -> bool,
    warnings: &mut Warnings,
) -> Result<Dataset, InputError> {
    // Peek the header line for delimiter detection.
    let buf = reader
        .fill_buf()
        .map_err(|e| InputError::new(file, "", format!("cannot read: {e}"), "check the file"))?;
    if buf.is_empty() {
        return Err(InputError::new(
            file,
            "line 1",
            "the points file is empty",
            "export the points with a header row: point id, x, y, optional coherence, then one column per date",
        ));
    }
    let first_line_end = memchr::memchr(b'\n', buf).unwrap_or(buf.len());
    let delimiter = spec
        .delimiter
        .unwrap_or_else(|| detect_delimiter(&buf[..first_line_end]));

    let mut rdr = csv::ReaderBuilder::new()
        .delimiter(delimiter)
        .has_headers(false)
        .flexible(true)
        .from_reader(reader);
    let mut rec = csv::ByteRecord::new();
    let has_header = rdr.read_byte_record(&mut rec).map_err(|e| {
        InputError::new(
            file,
            "line 1",
            format!("cannot read the header: {e}"),
            "the file must be UTF-8 text",
        )
    })?;
    if !has_header {
        return Err(InputError::new(
            file,
            "line 1",
            "the points file is empty",
            "export the points with a header row",
        ));
    }
    let headers: Vec<String> = rec
        .iter()
        .enumerate()
        .map(|(i, h)| {
            let mut s = String::from_utf8_lossy(h).trim().to_string();
            if i == 0 {
                s = s.trim_start_matches('\u{feff}').to_string();
            }
            s
        })
        .collect();
    let find = |name: &str| headers.iter().position(|h| h == name);
    let require = |name: &str, key: &str| {
        find(name).ok_or_else(|| {
            InputError::new(
                file,
                "line 1 (header)",
                format!("column `{name}` (columns.{key}) not found"),
                format!(
                    "the header has: {}; map the right column with [datasets.columns] {key} = \"...\"",
                    headers.join(", ")
                ),
            )
        })
    };
    let c = &spec.columns;
    let id_col = require(&c.id, "id")?;
    let x_col = require(&c.x, "x")?;
    let y_col = require(&c.y, "y")?;
    let coh_col = match find(&c.coherence) {
        Some(i) => Some(i),
        None if c.coherence_explicit => {
            return Err(require(&c.coherence, "coherence").unwrap_err());
        }
        None => None,
    };
    let inc_col = c
        .incidence
        .as_deref()
        .map(|n| require(n, "incidence"))
        .transpose()?;
    let head_col = c
        .heading
        .as_deref()
        .map(|n| require(n, "heading"))
        .transpose()?;
    let h_col = c
        .height
        .as_deref()
        .map(|n| require(n, "height"))
        .transpose()?;
    let mapped: Vec<usize> = [
        Some(id_col),
        Some(x_col),
        Some(y_col),
        coh_col,
        inc_col,
        head_col,
        h_col,
    ]
    .into_iter()
    .flatten()
    .collect();

    let mut epoch_cols: Vec<(usize, NaiveDate)> = Vec::new();
    let mut ignored = Vec::new();
    for (i, h) in headers.iter().enumerate() {
        if mapped.contains(&i) {
            continue;
        }
        match NaiveDate::parse_from_str(h, &c.date_format) {
            Ok(d) => {
                if let Some((j, _)) = epoch_cols.iter().find(|(_, e)| *e == d) {
                    return Err(InputError::new(
                        file,
                        "line 1 (header)",
                        format!("date {d} appears twice (columns {} and {})", j + 1, i + 1),
                        "each acquisition date must have exactly one column",
                    ));
                }
                if let Some((_, prev)) = epoch_cols.last() {
                    if d < *prev {
                        return Err(InputError::new(
                            file,
                            "line 1 (header)",
                            format!(
                                "epoch columns are out of date order: column {} ({d}) follows {prev}",
                                i + 1
                            ),
                            "sort the epoch columns by date",
                        ));
                    }
                }
                epoch_cols.push((i, d));
            }
            Err(_) => ignored.push(h.clone()),
        }
    }
    if epoch_cols.is_empty() {
        return Err(InputError::new(
            file,
            "line 1 (header)",
            format!(
                "no epoch columns: no header parses as a date with date_format `{}`",
                c.date_format
            ),
            "set [datasets.columns] date_format to match the headers, e.g. \"%Y%m%d\" for 20230115",
        ));
    }
    if !ignored.is_empty() {
        warnings.push(
            "ignored_columns",
            format!(
                "{}: columns ignored (neither mapped nor dates in format `{}`): {}",
                file.display(),
                c.date_format,
                ignored.join(", ")
            ),
        );
    }
    if coh_col.is_none() {
        warnings.push(
            "no_coherence",
            format!(
                "{}: no `{}` column: points are not screened by coherence",
                file.display(),
                c.coherence
            ),
        );
    }
    let n_cols = headers.len();
    let n_epochs = epoch_cols.len();
    let factor = spec.unit.to_mm()
        * match spec.positive {
            LosSign::Towards => 1.0,
            LosSign::Away => -1.0,
        };

    let mut points = Vec::new();
    let mut seen: HashMap<u64, u64> = HashMap::new();
    let mut rows = 0u64;
    let mut out_of_reach = 0u64;
    let mut swapped_in_reach = 0u64;
    let mut max_abs_mm = 0.0f64;
    let mut n_values = 0u64;
    let mut values = vec![0f32; n_epochs];
    let mut line = 1u64;
    loop {
        match rdr.read_byte_record(&mut rec) {
            Ok(true) => {}
            Ok(false) => break,
            Err(e) => {
                return Err(InputError::new(
                    file,
                    format!("line {}", line + 1),
                    format!("cannot read the row: {e}"),
                    "the file must be UTF-8 CSV with the declared delimiter",
                ));
            }
        }
        // One record per line: quoted fields spanning lines are not used by point exports.
        line += 1;
        if rec.len() == 1 && trim(&rec[0]).is_empty() {
            continue; // blank line
        }
        rows += 1;
        let loc = || format!("line {line}");
        if rec.len() != n_cols {
            return Err(InputError::new(
                file,
                loc(),
                format!(
                    "the row has {} fields but the header has {n_cols}",
                    rec.len()
                ),
                if rec.len() < n_cols {
                    "the row is short: the file may be truncated, or a delimiter is missing"
                } else {
                    "the row is long: a value may contain the delimiter (quote it) or a column is extra"
                },
            ));
        }
        let id_raw = trim(&rec[id_col]);
        if id_raw.is_empty() {
            return Err(InputError::new(
                file,
                loc(),
                "empty point id",
                "every point needs an id",
            ));
        }
        let h = id_hash(id_raw);
        if let Some(first) = seen.insert(h, line) {
            return Err(InputError::new(
                file,
                loc(),
                format!(
                    "duplicate point id `{}` (first on line {first})",
                    String::from_utf8_lossy(id_raw)
                ),
                "point ids must be unique within a file",
            ));
        }
        let num = |col: usize, what: &str| -> Result<Option<f64>, InputError> {
            parse_cell(&rec[col]).map_err(|m| {
                InputError::new(
                    file,
                    format!("{}, column `{}`", loc(), headers[col]),
                    m,
                    format!("{what} must be a number (decimal point `.`)"),
                )
            })
        };
        let req = |col: usize, what: &str| -> Result<f64, InputError> {
            num(col, what)?.ok_or_else(|| {
                InputError::new(
                    file,
                    format!("{}, column `{}`", loc(), headers[col]),
                    format!("{what} is missing"),
                    format!("every point needs its {what}"),
                )
            })
        };
        let x = req(x_col, "x coordinate")?;
        let y = req(y_col, "y coordinate")?;
        if geographic {
            match check_geographic(x, y) {
                GeographicCheck::Plausible => {}
                GeographicCheck::LooksSwapped => {
                    return Err(InputError::new(
                        file,
                        loc(),
                        format!("({x}, {y}) is not a longitude/latitude: latitude beyond ±90°"),
                        "the x and y columns look swapped: map columns.x to longitude and columns.y to latitude",
                    ));
                }
                GeographicCheck::LooksProjected => {
                    return Err(InputError::new(
                        file,
                        loc(),
                        format!("({x}, {y}) is out of range for longitude/latitude degrees"),
                        "these look like projected metres: set the dataset's crs = \"EPSG:<code>\"",
                    ));
                }
            }
        }
        let coherence = match coh_col {
            Some(col) => {
                let v = num(col, "coherence")?;
                if let Some(v) = v {
                    if !(0.0..=1.0).contains(&v) {
                        return Err(InputError::new(
                            file,
                            format!("{}, column `{}`", loc(), headers[col]),
                            format!("coherence {v} is outside 0–1"),
                            "temporal coherence is between 0 and 1; check the column mapping",
                        ));
                    }
                }
                v.map(|v| v as f32)
            }
            None => None,
        };
        let incidence_deg = match inc_col {
            Some(col) => {
                let v = req(col, "incidence angle")?;
                if !(v > 0.0 && v < 90.0) {
                    return Err(InputError::new(
                        file,
                        format!("{}, column `{}`", loc(), headers[col]),
                        format!("incidence {v}° is outside (0°, 90°)"),
                        "the incidence is the angle between the line of sight and the vertical, in degrees",
                    ));
                }
                v
            }
            None => spec.incidence_deg.unwrap_or(f64::NAN),
        };
        let heading_deg = match head_col {
            Some(col) => req(col, "heading")?,
            None => spec.heading_deg.unwrap_or(f64::NAN),
        };
        let height_m = match h_col {
            Some(col) => num(col, "height")?.map(|v| v as f32),
            None => None,
        };
        for (k, (col, _)) in epoch_cols.iter().enumerate() {
            let v = num(*col, "a displacement")?;
            values[k] = match v {
                Some(v) => {
                    let mm = v * factor;
                    if mm.abs() > MAX_ABS_DISPLACEMENT_MM {
                        return Err(InputError::new(
                            file,
                            format!("{}, column `{}`", loc(), headers[*col]),
                            format!(
                                "displacement {v} {} = {mm:.0} mm is implausible (more than {MAX_ABS_DISPLACEMENT_MM} mm)",
                                if spec.unit == crate::portfolio::Unit::M {
                                    "m"
                                } else {
                                    "mm"
                                }
                            ),
                            "check the dataset's unit (\"mm\" or \"m\") and the column mapping",
                        ));
                    }
                    max_abs_mm = max_abs_mm.max(mm.abs());
                    n_values += 1;
                    mm as f32
                }
                None => f32::NAN,
            };
        }
        let (ax, ay) = to_analysis.apply(x, y).map_err(|e| {
            InputError::new(
                file,
                loc(),
                e.to_string(),
                "check the dataset's crs and the x/y column mapping",
            )
        })?;
        if !within_reach(ax, ay) {
            out_of_reach += 1;
            if geographic {
                if let Ok((sx, sy)) = to_analysis.apply(y, x) {
                    if within_reach(sx, sy) {
                        swapped_in_reach += 1;
                    }
                }
            }
            continue;
        }
        let (lon, lat) = to_wgs84.apply(x, y).unwrap_or((f64::NAN, f64::NAN));
        points.push(Point {
            id: String::from_utf8_lossy(id_raw).into_owned(),
            line,
            x: ax,
            y: ay,
            lon,
            lat,
            coherence,
            incidence_deg,
            heading_deg,
            height_m,
            values_mm: values.clone().into_boxed_slice(),
        });
    }
    if rows == 0 {
        return Err(InputError::new(
            file,
            "line 2",
            "the points file has a header but no data rows",
            "export the points, one row per point",
        ));
    }
    if points.is_empty() && swapped_in_reach > 0 {
        return Err(InputError::new(
            file,
            "",
            format!(
                "no point lies near any structure, but {swapped_in_reach} would if x and y were swapped"
            ),
            "the x/y (longitude/latitude) columns look swapped: map columns.x to longitude and columns.y to latitude",
        ));
    }
    if points.is_empty() {
        warnings.push(
            "no_points_near_structures",
            format!(
                "{}: none of the {rows} points lies within reach of a structure; check the dataset's crs and the structures' crs",
                file.display()
            ),
        );
    } else if out_of_reach > 0 {
        warnings.push(
            "outside_every_buffer",
            format!(
                "{}: {out_of_reach} of {rows} points lie outside every structure's surroundings and were not kept",
                file.display()
            ),
        );
    }
    if n_values > 20 {
        if spec.unit == crate::portfolio::Unit::Mm && max_abs_mm < 0.5 && max_abs_mm > 0.0 {
            warnings.push(
                "implausible_magnitude",
                format!(
                    "{}: the largest |displacement| is {max_abs_mm:.4} mm: values look like metres declared as mm",
                    file.display()
                ),
            );
        }
        if spec.unit == crate::portfolio::Unit::M && max_abs_mm > 2000.0 {
            warnings.push(
                "implausible_magnitude",
                format!(
                    "{}: the largest |displacement| is {:.1} m: values look like millimetres declared as m",
                    file.display(),
                    max_abs_mm / 1000.0
                ),
            );
        }
        if max_abs_mm == 0.0 {
            warnings.push(
                "all_zero",
                format!(
                    "{}: every displacement is exactly zero; check the export",
                    file.display()
                ),
            );
        }
    }
    Ok(Dataset {
        name: spec.name.clone(),
        epochs: epoch_cols.into_iter().map(|(_, d)| d).collect(),
        points,
        rows_read: rows,
        rows_out_of_reach: out_of_reach,
        has_coherence: coh_col.is_some(),
        ignored_columns: ignored,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::coords::Crs;
    use crate::portfolio::{Columns, LookSide, Pass, Unit};

    fn spec() -> DatasetSpec {
        DatasetSpec {
            name: "a".into(),
            path: "a.csv".into(),
            pass: Pass::Ascending,
            incidence_deg: Some(38.0),
            heading_deg: Some(-12.0),
            crs: "EPSG:4326".into(),
            unit: Unit::Mm,
            positive: LosSign::Towards,
            look: LookSide::Right,
            wavelength_mm: 55.47,
            delimiter: None,
            columns: Columns {
                id: "point_id".into(),
                x: "lon".into(),
                y: "lat".into(),
                coherence: "coherence".into(),
                coherence_explicit: false,
                incidence: None,
                heading: None,
                height: None,
                date_format: "%Y-%m-%d".into(),
            },
        }
    }

    fn read(text: &str, spec: &DatasetSpec) -> Result<Dataset, InputError> {
        let w = Crs::wgs84();
        let t = Transformer::new(&w, &w);
        read_points_from(
            std::io::Cursor::new(text.as_bytes().to_vec()),
            Path::new("a.csv"),
            spec,
            &t,
            &t,
            true,
            &|_, _| true,
            &mut Warnings::default(),
        )
    }

    #[test]
    fn reads_semicolon_bom_crlf_and_gaps() {
        let text = "\u{feff}point_id;lon;lat;coherence;2023-01-01;2023-01-13\r\np1;9.0;45.0;0.9;0;-1.5\r\np2;9.0;45.0;0.8;0;\r\n";
        let d = read(text, &spec()).unwrap();
        assert_eq!(d.points.len(), 2);
        assert_eq!(d.epochs.len(), 2);
        assert_eq!(d.points[0].values_mm[1], -1.5);
        assert!(d.points[1].values_mm[1].is_nan());
        assert_eq!(d.points[1].line, 3);
    }

    #[test]
    fn away_sign_and_metres_are_converted() {
        let mut s = spec();
        s.positive = LosSign::Away;
        s.unit = Unit::M;
        let d = read("point_id,lon,lat,2023-01-01\np,9,45,0.002\n", &s).unwrap();
        assert_eq!(d.points[0].values_mm[0], -2.0);
    }

    #[test]
    fn errors_name_line_and_column() {
        let e = read(
            "point_id,lon,lat,2023-01-01,2023-01-13\np,9,45,0,abc\n",
            &spec(),
        )
        .unwrap_err();
        assert_eq!(e.location, "line 2, column `2023-01-13`");
        let e = read("point_id,lon,lat,2023-01-01\np,9,45,0\nq,9,45\n", &spec()).unwrap_err();
        assert!(e.message.contains("fields"), "{e}");
        let e = read("point_id,lon,lat,2023-01-01\np,9,45,0\np,9,45,1\n", &spec()).unwrap_err();
        assert!(e.message.contains("duplicate point id"), "{e}");
        let e = read(
            "point_id,lon,lat,coherence,2023-01-01\np,9,45,1.5,0\n",
            &spec(),
        )
        .unwrap_err();
        assert!(e.message.contains("outside 0–1"), "{e}");
        let e = read(
            "point_id,lon,lat,2023-01-13,2023-01-01\np,9,45,0,0\n",
            &spec(),
        )
        .unwrap_err();
        assert!(e.message.contains("out of date order"), "{e}");
        let e = read(
            "point_id,lon,lat,2023-01-01,2023-01-01\np,9,45,0,0\n",
            &spec(),
        )
        .unwrap_err();
        assert!(e.message.contains("twice"), "{e}");
        let e = read("point_id,lon,lat,2023-01-01\n", &spec()).unwrap_err();
        assert!(e.message.contains("no data rows"), "{e}");
        let e = read("", &spec()).unwrap_err();
        assert!(e.message.contains("empty"), "{e}");
        let e = read("id,lon,lat,2023-01-01\np,9,45,0\n", &spec()).unwrap_err();
        assert!(e.message.contains("point_id"), "{e}");
        let e = read("point_id,lon,lat,2023-01-01\np,9,45,inf\n", &spec()).unwrap_err();
        assert!(e.message.contains("finite"), "{e}");
    }
}
