#!/usr/bin/env python3
"""Regenerate the bad-input corpus: `python3 tests/bad_inputs/generate.py` from the crate root.

Every case is a folder holding a complete mini portfolio copied from `base/` with ONE thing
broken, plus `expect.toml` (exit code and stderr fragments). The folders are committed; this
script only exists so that the base can be changed in one place. The scenario is invented: one
rectangular two-storey building, 8 points on it and 3 in its surroundings, one ascending dataset
of 30 acquisitions 24 days apart. The location is an arbitrary inland spot with a longitude
above 90 degrees, so that swapped longitude/latitude axes are out of range and detectable.

`tests/bad_inputs.rs` runs `plinth check` on every folder; adding a case = adding a folder
(by hand or here).
"""

import datetime
import json
import math
import os
import shutil

HERE = os.path.dirname(os.path.abspath(__file__))

LON0, LAT0 = 118.4, 31.6  # invented site
N_EPOCHS = 30
STEP_DAYS = 24
DATE0 = datetime.date(2022, 1, 5)


def lonlat(e, n):
    """Local east/north metres -> lon/lat (spherical tangent plane; ample for test data)."""
    r = 6_371_000.0
    return (LON0 + math.degrees(e / (r * math.cos(math.radians(LAT0)))), LAT0 + math.degrees(n / r))


def dates():
    return [DATE0 + datetime.timedelta(days=STEP_DAYS * i) for i in range(N_EPOCHS)]


def footprint_ring(w=20.0, h=10.0):
    pts = [(-w / 2, -h / 2), (w / 2, -h / 2), (w / 2, h / 2), (-w / 2, h / 2), (-w / 2, -h / 2)]
    return [[round(x, 7) for x in lonlat(e, n)] for e, n in pts]


def geojson(features):
    return json.dumps({"type": "FeatureCollection", "features": features}, indent=1) + "\n"


def feature(fid, ring, **props):
    p = {"id": fid, "name": "Test house " + str(fid), "height_m": 6.5, "structure": "masonry"}
    p.update(props)
    return {"type": "Feature", "properties": p, "geometry": {"type": "Polygon", "coordinates": [ring]}}


POINT_OFFSETS = [  # local metres: 8 on the structure, 3 in the surroundings
    (-8, -3), (-4, 3), (0, -2), (4, 2), (8, -3), (-6, 0), (6, 0), (2, 4),
    (-25, 15), (20, -18), (30, 5),
]


def series(i, scale=1.0):
    """LOS mm, + towards the satellite: a slow subsidence plus a deterministic wiggle; 0 at epoch 0."""
    out = []
    for k, d in enumerate(dates()):
        yrs = (d - DATE0).days / 365.25
        rate = -2.0 - 0.15 * i  # mm/yr
        v = rate * yrs + (0.4 * math.sin(1.3 * k + 0.7 * i) if k > 0 else 0.0)
        out.append(v * scale)
    return out


def fmt(v):
    if isinstance(v, str):
        return v
    return f"{v:.2f}" if abs(v) >= 0.01 or v == 0 else f"{v:.6f}"


def points_rows(scale=1.0, dfmt="%Y-%m-%d"):
    header = ["point_id", "lon", "lat", "coherence"] + [d.strftime(dfmt) for d in dates()]
    rows = [header]
    for i, (e, n) in enumerate(POINT_OFFSETS):
        lon, lat = lonlat(e, n)
        rows.append([f"P{i + 1:03d}", f"{lon:.7f}", f"{lat:.7f}", f"{0.90 - 0.01 * i:.2f}"]
                    + [fmt(v) for v in series(i, scale)])
    return rows


def csv_text(rows, sep=",", eol="\n"):
    return "".join(sep.join(r) + eol for r in rows)


BASE_TOML = """\
# Bad-input corpus base: an invented single-building portfolio that must pass `plinth check`.
[portfolio]
name = "Corpus base (invented)"
crs = "EPSG:32650"

[structures]
path = "structures.geojson"

[[datasets]]
name = "asc"
path = "points.csv"
pass = "ascending"
incidence_deg = 38.0
heading_deg = -12.0

[assessment]
monte_carlo_draws = 20
bootstrap_draws = 19
"""


def base_files():
    return {
        "portfolio.toml": BASE_TOML,
        "structures.geojson": geojson([feature("H-1", footprint_ring())]),
        "points.csv": csv_text(points_rows()),
    }


CASES = []


def case(name, exit_code, stderr_contains, warning_contains=(), note=""):
    def deco(fn):
        CASES.append((name, exit_code, list(stderr_contains), list(warning_contains), note, fn))
        return fn
    return deco


def replace_once(text, old, new):
    assert text.count(old) >= 1, (old, text[:200])
    return text.replace(old, new, 1)


def csv_lines(files):
    return files["points.csv"].split("\n")


def set_cell(files, row, col, value):
    rows = points_rows()
    rows[row][col] = value
    files["points.csv"] = csv_text(rows)


# ---------------------------------------------------------------- CSV
@case("csv-non-numeric-value", 2, ["points.csv", "line 4", "column `2022-01-29`", "not a number"])
def _(f):
    set_cell(f, 3, 5, "abc")


@case("csv-decimal-comma", 2, ["points.csv", "line 2", "not a number", "decimal point"],
      note="semicolon file with decimal commas in one value")
def _(f):
    rows = points_rows()
    rows[1][6] = rows[1][6].replace(".", ",")
    f["points.csv"] = csv_text(rows, sep=";")


@case("csv-row-too-long", 2, ["points.csv", "line 5", "fields", "header has"])
def _(f):
    rows = points_rows()
    rows[4].append("1.0")
    f["points.csv"] = csv_text(rows)


@case("csv-row-too-short", 2, ["points.csv", "line 6", "fields", "short"])
def _(f):
    rows = points_rows()
    del rows[5][10]
    f["points.csv"] = csv_text(rows)


@case("csv-truncated-last-line", 2, ["points.csv", "line 12", "fields", "truncated"])
def _(f):
    t = f["points.csv"].rstrip("\n")
    f["points.csv"] = t[: t.rfind(",", 0, len(t) - 60)]


@case("csv-missing-mapped-column", 2, ["points.csv", "line 1", "column `lon`", "not found"])
def _(f):
    f["points.csv"] = replace_once(f["points.csv"], "point_id,lon,", "point_id,longitude,")


@case("csv-explicit-coherence-column-missing", 2, ["points.csv", "line 1", "column `temporal_coherence`", "not found"],
      note="the portfolio maps columns.coherence explicitly, so it must exist")
def _(f):
    f["portfolio.toml"] = replace_once(f["portfolio.toml"], 'heading_deg = -12.0\n',
                                       'heading_deg = -12.0\ncolumns.coherence = "temporal_coherence"\n')


@case("csv-no-coherence-column", 0, ["meeting the minimums: 1", "points read from asc: 11"], ["no_coherence"], note="accepted; screening by coherence is off and said so")
def _(f):
    rows = [r[:3] + r[4:] for r in points_rows()]
    f["points.csv"] = csv_text(rows)


@case("csv-duplicate-point-id", 2, ["points.csv", "line 5", "duplicate point id `P001`", "line 2"])
def _(f):
    set_cell(f, 4, 0, "P001")


@case("csv-empty-point-id", 2, ["points.csv", "line 3", "empty point id"])
def _(f):
    set_cell(f, 2, 0, "")


@case("csv-missing-coordinate", 2, ["points.csv", "line 3", "column `lat`", "missing"])
def _(f):
    set_cell(f, 2, 2, "")


@case("csv-empty-file", 2, ["points.csv", "line 1", "empty"])
def _(f):
    f["points.csv"] = ""


@case("csv-header-only", 2, ["points.csv", "line 2", "no data rows"])
def _(f):
    f["points.csv"] = csv_text(points_rows()[:1])


@case("csv-no-epoch-columns", 2, ["points.csv", "line 1", "no epoch columns", "date_format"],
      note="dates written dd/mm/YYYY while date_format is the default %Y-%m-%d")
def _(f):
    f["points.csv"] = csv_text(points_rows(dfmt="%d/%m/%Y"))


@case("csv-impossible-date-header", 2, ["points.csv", "line 1", "column 9 `2022-13-11`", "not a valid date"],
      note="a header shaped like a date but not one (month 13): an error, not a silently ignored epoch")
def _(f):
    rows = points_rows()
    rows[0][8] = "2022-13-11"
    f["points.csv"] = csv_text(rows)


@case("csv-heading-column-contradicts-pass", 2, ["points.csv", "line 6", "column `heading`", "192", "ascending"],
      note="a per-point heading column gets the pass check of the dataset-level heading")
def _(f):
    rows = points_rows()
    for i, r in enumerate(rows):
        r.insert(4, "heading" if i == 0 else ("192.0" if i == 5 else "-12.0"))
    f["points.csv"] = csv_text(rows)
    f["portfolio.toml"] = replace_once(f["portfolio.toml"], 'heading_deg = -12.0\n', 'columns.heading = "heading"\n')


@case("csv-duplicate-date-header", 2, ["points.csv", "line 1", "2022-01-05", "twice"])
def _(f):
    rows = points_rows()
    rows[0][5] = rows[0][4]
    f["points.csv"] = csv_text(rows)


@case("csv-dates-out-of-order", 2, ["points.csv", "line 1", "out of date order"])
def _(f):
    rows = points_rows()
    for r in rows:
        r[8], r[9] = r[9], r[8]
    f["points.csv"] = csv_text(rows)


@case("csv-metres-declared-mm", 0, ["meeting the minimums: 1", "points read from asc: 11"], ["implausible_magnitude", "points.csv", "metres"])
def _(f):
    f["points.csv"] = csv_text(points_rows(scale=0.001))


@case("csv-millimetres-declared-m", 2, ["points.csv", "line 2", "1016.03 m = 1016030 mm", "implausible", "unit"],
      note="mm values with unit = \"m\": the largest is > 10 000 mm after conversion")
def _(f):
    f["portfolio.toml"] = replace_once(f["portfolio.toml"], 'heading_deg = -12.0\n', 'heading_deg = -12.0\nunit = "m"\n')
    f["points.csv"] = csv_text(points_rows(scale=4000.0))


@case("csv-coherence-above-one", 2, ["points.csv", "line 4", "column `coherence`", "outside 0–1"])
def _(f):
    set_cell(f, 3, 3, "1.7")


@case("csv-coherence-negative", 2, ["points.csv", "line 2", "column `coherence`", "outside 0–1"])
def _(f):
    set_cell(f, 1, 3, "-0.2")


@case("csv-nan-gaps", 0, ["meeting the minimums: 1", "points read from asc: 11"], note="NaN, NA, null and empty cells are missing epochs (gaps), not zeros")
def _(f):
    rows = points_rows()
    rows[2][8] = "NaN"
    rows[3][9] = "NA"
    rows[4][10] = "null"
    rows[5][11] = ""
    f["points.csv"] = csv_text(rows)


@case("csv-inf-value", 2, ["points.csv", "line 3", "column `2022-03-18`", "not a finite number"])
def _(f):
    set_cell(f, 2, 7, "inf")


@case("csv-huge-value", 2, ["points.csv", "line 7", "column `2022-07-16`", "displacement -12500 mm", "implausible"])
def _(f):
    set_cell(f, 6, 12, "-12500")


@case("csv-bom", 0, ["meeting the minimums: 1", "points read from asc: 11"], note="UTF-8 byte-order mark before the header")
def _(f):
    f["points.csv"] = "\ufeff" + f["points.csv"]


@case("csv-crlf", 0, ["meeting the minimums: 1", "points read from asc: 11"], note="Windows line ends")
def _(f):
    f["points.csv"] = csv_text(points_rows(), eol="\r\n")


@case("csv-semicolon-delimited", 0, ["meeting the minimums: 1", "points read from asc: 11"], note="delimiter detected from the header")
def _(f):
    f["points.csv"] = csv_text(points_rows(), sep=";")


@case("csv-tab-delimited-declared-comma", 2, ["points.csv", "line 1", "column `point_id`", "not found"],
      note="a tab-separated file with delimiter = \",\" forced in the portfolio")
def _(f):
    f["portfolio.toml"] = replace_once(f["portfolio.toml"], 'heading_deg = -12.0\n', 'heading_deg = -12.0\ndelimiter = ","\n')
    f["points.csv"] = csv_text(points_rows(), sep="\t")


@case("csv-blank-lines", 0, ["meeting the minimums: 1", "points read from asc: 11"], note="blank lines between rows are skipped")
def _(f):
    f["points.csv"] = f["points.csv"].replace("\nP003", "\n\nP003").replace("\nP007", "\n\n\nP007")


@case("csv-unterminated-quote", 2, ["points.csv", "line 4", "quoted field is never closed"],
      note="an opening quote that never closes swallows the rest of the file; the error names the line where the quoted field starts and says the quote is not closed")
def _(f):
    set_cell(f, 3, 0, '"P003')


@case("csv-lonlat-columns-swapped", 2, ["points.csv", "line 2", "latitude beyond ±90", "swapped"])
def _(f):
    f["points.csv"] = replace_once(f["points.csv"], "point_id,lon,lat,", "point_id,lat,lon,")


@case("csv-projected-metres-as-degrees", 2, ["points.csv", "line 2", "out of range", "crs"])
def _(f):
    rows = points_rows()
    rows[1][1], rows[1][2] = "512345.2", "3496120.8"
    f["points.csv"] = csv_text(rows)


@case("csv-all-zero", 0, [], ["all_zero", "points.csv"])
def _(f):
    f["points.csv"] = csv_text(points_rows(scale=0.0))


@case("csv-single-epoch", 0, ["insufficient_data: 1"],
      note="one acquisition: min_epochs is not met, the structure is insufficient (not an error); "
           "the window is given explicitly because a one-date window cannot default")
def _(f):
    rows = [r[:5] for r in points_rows()]
    f["points.csv"] = csv_text(rows)
    f["portfolio.toml"] = replace_once(f["portfolio.toml"], 'crs = "EPSG:32650"\n',
                                       'crs = "EPSG:32650"\nstart = "2022-01-01"\nend = "2022-02-01"\n')


@case("csv-single-epoch-default-window", 2, ["portfolio.toml", "key datasets", "only one acquisition"],
      note="one acquisition and no explicit window: no assessment window can be formed; the error says the datasets share only one date")
def _(f):
    rows = [r[:5] for r in points_rows()]
    f["points.csv"] = csv_text(rows)


@case("csv-too-few-epochs", 0, ["insufficient_data: 1"], note="10 acquisitions < min_epochs 20")
def _(f):
    rows = [r[:14] for r in points_rows()]
    f["points.csv"] = csv_text(rows)


@case("csv-no-point-near-structure", 0, ["points out of reach of every structure: 11"],
      ["no_points_near_structures"])
def _(f):
    rows = points_rows()
    for r in rows[1:]:
        r[2] = f"{float(r[2]) + 0.05:.7f}"
    f["points.csv"] = csv_text(rows)


@case("csv-invalid-utf8", 2, ["points.csv", "line 3", "not a number"], note="a Latin-1 byte in a value")
def _(f):
    set_cell(f, 2, 6, "1\udcb05")  # lone byte 0xB0 written via surrogateescape


# ---------------------------------------------------------------- GeoJSON
@case("geo-not-json", 2, ["structures.geojson", "line 1", "not valid JSON"])
def _(f):
    f["structures.geojson"] = "id,wkt\nH-1,POLYGON((0 0,1 0,1 1,0 0))\n"


@case("geo-truncated-json", 2, ["structures.geojson", "not valid JSON"])
def _(f):
    f["structures.geojson"] = f["structures.geojson"][:120]


@case("geo-not-featurecollection", 2, ["structures.geojson", "top level", "FeatureCollection"],
      note="a single Feature instead of a FeatureCollection")
def _(f):
    fc = json.loads(f["structures.geojson"])
    f["structures.geojson"] = json.dumps(fc["features"][0], indent=1)


@case("geo-no-features", 2, ["structures.geojson", "top level", "no features"])
def _(f):
    f["structures.geojson"] = geojson([])


@case("geo-missing-id", 2, ["structures.geojson", "feature 1", "`id`", "missing"])
def _(f):
    ring2 = [[x + 0.001, y] for x, y in footprint_ring()]
    b = feature("H-2", ring2)
    del b["properties"]["id"]
    f["structures.geojson"] = geojson([feature("H-1", footprint_ring()), b])


@case("geo-numeric-id", 0, ["meeting the minimums: 1", "points read from asc: 11"], note="numeric ids are accepted and written as text")
def _(f):
    f["structures.geojson"] = geojson([feature(17, footprint_ring())])


@case("geo-duplicate-ids", 2, ["structures.geojson", "feature 1", "duplicate id \"H-1\""])
def _(f):
    ring2 = [[x + 0.001, y] for x, y in footprint_ring()]
    f["structures.geojson"] = geojson([feature("H-1", footprint_ring()), feature("H-1", ring2)])


@case("geo-empty-ring", 2, ["structures.geojson", "feature 0", "0 positions", "at least 4"])
def _(f):
    f["structures.geojson"] = geojson([feature("H-1", [])])


@case("geo-empty-polygon", 2, ["structures.geojson", "feature 0", "no rings"])
def _(f):
    fc = json.loads(f["structures.geojson"])
    fc["features"][0]["geometry"]["coordinates"] = []
    f["structures.geojson"] = json.dumps(fc, indent=1)


@case("geo-null-geometry", 2, ["structures.geojson", "feature 0", "no geometry"])
def _(f):
    fc = json.loads(f["structures.geojson"])
    fc["features"][0]["geometry"] = None
    f["structures.geojson"] = json.dumps(fc, indent=1)


@case("geo-point-geometry", 2, ["structures.geojson", "feature 0", "`Point`", "Polygon"])
def _(f):
    fc = json.loads(f["structures.geojson"])
    fc["features"][0]["geometry"] = {"type": "Point", "coordinates": [LON0, LAT0]}
    f["structures.geojson"] = json.dumps(fc, indent=1)


@case("geo-unclosed-ring", 2, ["structures.geojson", "feature 0", "not closed"])
def _(f):
    r = footprint_ring()
    r[-1] = [r[-1][0] + 0.00001, r[-1][1]]
    f["structures.geojson"] = geojson([feature("H-1", r)])


@case("geo-triangle-too-few-positions", 2, ["structures.geojson", "feature 0", "3 positions", "at least 4"],
      note="a ring of 3 positions (an unclosed triangle)")
def _(f):
    r = footprint_ring()
    f["structures.geojson"] = geojson([feature("H-1", r[:3])])


@case("geo-self-intersecting", 2, ["structures.geojson", "feature 0", "not a valid polygon", "self-intersection"],
      note="an asymmetric bow-tie (the two lobes differ in area)")
def _(f):
    pts = [(-10, -5), (10, 5), (10, -8), (-10, 5), (-10, -5)]
    r = [[round(x, 7) for x in lonlat(e, n)] for e, n in pts]
    f["structures.geojson"] = geojson([feature("H-1", r)])


@case("geo-self-intersecting-symmetric", 2, ["structures.geojson", "feature 0", "not a valid polygon"],
      note="a symmetric bow-tie (two corners of the rectangle swapped): the lobes' signed areas cancel, "
           "but it is reported as self-intersecting, not as zero area")
def _(f):
    r = footprint_ring()
    r[1], r[2] = r[2], r[1]
    f["structures.geojson"] = geojson([feature("H-1", r)])


@case("geo-zero-area", 2, ["structures.geojson", "feature 0", "zero area"], note="all positions collinear")
def _(f):
    a = lonlat(-10, 0)
    b = lonlat(10, 0)
    c = lonlat(0, 0)
    r = [[round(x, 7) for x in p] for p in (a, c, b, a)]
    f["structures.geojson"] = geojson([feature("H-1", r)])


@case("geo-coordinates-out-of-range", 2, ["structures.geojson", "feature 0", "out of range", "crs"],
      note="projected metres in a file declared (by default) as EPSG:4326")
def _(f):
    r = [[512000.0, 3496000.0], [512020.0, 3496000.0], [512020.0, 3496010.0], [512000.0, 3496010.0],
         [512000.0, 3496000.0]]
    f["structures.geojson"] = geojson([feature("H-1", r)])


@case("geo-lonlat-swapped", 2, ["structures.geojson", "feature 0", "latitude beyond ±90", "swapped"])
def _(f):
    r = [[y, x] for x, y in footprint_ring()]
    f["structures.geojson"] = geojson([feature("H-1", r)])


@case("geo-3d-coordinates", 0, ["meeting the minimums: 1", "points read from asc: 11"], ["coordinates_3d", "structures.geojson", "ignored"])
def _(f):
    r = [[x, y, 12.5] for x, y in footprint_ring()]
    f["structures.geojson"] = geojson([feature("H-1", r)])


@case("geo-non-numeric-coordinate", 2, ["structures.geojson", "feature 0", "non-numeric"])
def _(f):
    r = footprint_ring()
    r[2] = [str(r[2][0]), r[2][1]]
    f["structures.geojson"] = geojson([feature("H-1", r)])


@case("geo-height-not-number", 2, ["structures.geojson", "feature 0", "height_m"])
def _(f):
    f["structures.geojson"] = geojson([feature("H-1", footprint_ring(), height_m="two storeys")])


@case("geo-id-property-missing-everywhere", 2, ["structures.geojson", "feature 0", "`building_ref`"],
      note="[structures] id_property names a property no feature has")
def _(f):
    f["portfolio.toml"] = replace_once(f["portfolio.toml"], 'path = "structures.geojson"\n',
                                       'path = "structures.geojson"\nid_property = "building_ref"\n')


# ---------------------------------------------------------------- TOML
@case("toml-syntax-error", 2, ["portfolio.toml", "line 7", "invalid basic string"])
def _(f):
    f["portfolio.toml"] = replace_once(f["portfolio.toml"], 'path = "structures.geojson"', 'path = "structures.geojson')


@case("toml-unknown-key", 2, ["portfolio.toml", "line 19", "unknown field `bufer_m`"], note="a typo in [assessment]")
def _(f):
    f["portfolio.toml"] = f["portfolio.toml"] + "bufer_m = 5.0\n"


@case("toml-unknown-section", 2, ["portfolio.toml", "line 20", "unknown field `outputs`"])
def _(f):
    f["portfolio.toml"] = f["portfolio.toml"] + "\n[outputs]\nfolder = \"out\"\n"


@case("toml-wrong-type", 2, ["portfolio.toml", "line 13", "invalid type", "f64"], note="incidence_deg given as a string")
def _(f):
    f["portfolio.toml"] = replace_once(f["portfolio.toml"], "incidence_deg = 38.0", 'incidence_deg = "38"')


@case("toml-missing-required-key", 2, ["portfolio.toml", "line 9", "missing field `pass`"], note="[[datasets]] without pass")
def _(f):
    f["portfolio.toml"] = replace_once(f["portfolio.toml"], 'pass = "ascending"\n', "")


@case("toml-missing-name", 2, ["portfolio.toml", "line 2", "missing field `name`"], note="[portfolio] without name")
def _(f):
    f["portfolio.toml"] = replace_once(f["portfolio.toml"], 'name = "Corpus base (invented)"\n', "")


@case("toml-missing-points-file", 2, ["portfolio.toml", "key datasets[0].path", "file not found", "points-asc.csv"])
def _(f):
    f["portfolio.toml"] = replace_once(f["portfolio.toml"], 'path = "points.csv"', 'path = "points-asc.csv"')


@case("toml-missing-structures-file", 2, ["portfolio.toml", "key structures.path", "file not found"])
def _(f):
    f["portfolio.toml"] = replace_once(f["portfolio.toml"], 'path = "structures.geojson"', 'path = "buildings.geojson"')


@case("toml-no-datasets", 2, ["portfolio.toml", "key datasets", "at least one"])
def _(f):
    t = f["portfolio.toml"]
    start = t.index("[[datasets]]")
    end = t.index("[assessment]")
    f["portfolio.toml"] = t[:start] + t[end:]


@case("toml-pass-invalid", 2, ["portfolio.toml", "line 12", "unknown variant `northbound`"])
def _(f):
    f["portfolio.toml"] = replace_once(f["portfolio.toml"], 'pass = "ascending"', 'pass = "northbound"')


@case("toml-pass-contradicts-heading", 2, ["portfolio.toml", "key datasets[0]", "contradicts the declared descending pass"],
      note="pass = descending with an ascending heading: the LOS vector looks east")
def _(f):
    f["portfolio.toml"] = replace_once(f["portfolio.toml"], 'pass = "ascending"', 'pass = "descending"')


@case("toml-incidence-zero", 2, ["portfolio.toml", "key datasets[0].incidence_deg", "outside (0°, 90°)"])
def _(f):
    f["portfolio.toml"] = replace_once(f["portfolio.toml"], "incidence_deg = 38.0", "incidence_deg = 0.0")


@case("toml-incidence-ninety", 2, ["portfolio.toml", "key datasets[0].incidence_deg", "outside (0°, 90°)"])
def _(f):
    f["portfolio.toml"] = replace_once(f["portfolio.toml"], "incidence_deg = 38.0", "incidence_deg = 90.0")


@case("toml-incidence-missing", 2, ["portfolio.toml", "key datasets[0].incidence_deg", "missing"])
def _(f):
    f["portfolio.toml"] = replace_once(f["portfolio.toml"], "incidence_deg = 38.0\n", "")


@case("toml-min-span-years-zero", 2, ["portfolio.toml", "key assessment.min_span_years", "outside (0, 50]"])
def _(f):
    f["portfolio.toml"] = f["portfolio.toml"] + "min_span_years = 0.0\n"


@case("toml-min-epochs-below-six", 2, ["portfolio.toml", "key assessment.min_epochs", "outside 6–65535"])
def _(f):
    f["portfolio.toml"] = f["portfolio.toml"] + "min_epochs = 4\n"


@case("toml-heading-out-of-range", 2, ["portfolio.toml", "key datasets[0].heading_deg", "[-360°, 360°]"])
def _(f):
    f["portfolio.toml"] = replace_once(f["portfolio.toml"], "heading_deg = -12.0", "heading_deg = 3480.0")


@case("toml-window-end-before-start", 2, ["portfolio.toml", "key portfolio.end", "not after"])
def _(f):
    f["portfolio.toml"] = replace_once(f["portfolio.toml"], 'crs = "EPSG:32650"\n',
                                       'crs = "EPSG:32650"\nstart = "2023-06-01"\nend = "2022-06-01"\n')


@case("toml-window-outside-data", 2, ["portfolio.toml", "key portfolio.start", "no acquisition", "`asc`"])
def _(f):
    f["portfolio.toml"] = replace_once(f["portfolio.toml"], 'crs = "EPSG:32650"\n',
                                       'crs = "EPSG:32650"\nstart = "2030-01-01"\nend = "2031-01-01"\n')


@case("toml-bad-date", 2, ["portfolio.toml", "portfolio.start"], note="an impossible date")
def _(f):
    f["portfolio.toml"] = replace_once(f["portfolio.toml"], 'crs = "EPSG:32650"\n',
                                       'crs = "EPSG:32650"\nstart = "2022-02-30"\n')


@case("toml-geographic-analysis-crs", 2, ["portfolio.toml", "key portfolio.crs", "geographic"])
def _(f):
    f["portfolio.toml"] = replace_once(f["portfolio.toml"], 'crs = "EPSG:32650"', 'crs = "EPSG:4326"')


@case("toml-crs-not-epsg", 2, ["portfolio.toml", "key portfolio.crs", "EPSG"])
def _(f):
    f["portfolio.toml"] = replace_once(f["portfolio.toml"], 'crs = "EPSG:32650"', 'crs = "WGS 84 / UTM 50N"')


@case("toml-duplicate-dataset-name", 2, ["portfolio.toml", "key datasets[1].name", "twice"])
def _(f):
    t = f["portfolio.toml"]
    ds = t[t.index("[[datasets]]"):t.index("[assessment]")]
    f["portfolio.toml"] = t.replace("[assessment]", ds + "[assessment]", 1)


@case("toml-min-points-below-three", 2, ["portfolio.toml", "key assessment.min_points", "below 3"])
def _(f):
    f["portfolio.toml"] = f["portfolio.toml"] + "min_points = 1\n"


@case("toml-unknown-unit", 2, ["portfolio.toml", "line 15", "unknown variant `cm`"])
def _(f):
    f["portfolio.toml"] = replace_once(f["portfolio.toml"], 'heading_deg = -12.0\n', 'heading_deg = -12.0\nunit = "cm"\n')


@case("toml-empty-file", 2, ["portfolio.toml", "missing field `portfolio`"])
def _(f):
    f["portfolio.toml"] = ""


def expect_toml(exit_code, stderr_contains, warning_contains, note):
    q = lambda s: json.dumps(s, ensure_ascii=False)  # a JSON string is a valid TOML basic string
    out = []
    if note:
        out.append("# " + note)
    out.append(f"exit = {exit_code}")
    out.append("stderr_contains = [" + ", ".join(q(s) for s in stderr_contains) + "]")
    if warning_contains:
        out.append("warning_contains = [" + ", ".join(q(s) for s in warning_contains) + "]")
    return "\n".join(out) + "\n"


def write_case(name, files, expect):
    d = os.path.join(HERE, name)
    if os.path.isdir(d):
        shutil.rmtree(d)
    os.makedirs(d)
    for fname, text in files.items():
        with open(os.path.join(d, fname), "w", encoding="utf-8", errors="surrogateescape", newline="") as fh:
            fh.write(text)
    with open(os.path.join(d, "expect.toml"), "w", encoding="utf-8", newline="\n") as fh:
        fh.write(expect)


def main():
    write_case("base", base_files(), expect_toml(0, ["check passed", "meeting the minimums: 1", "points read from asc: 11", "points kept on structures: 8"], [],
                                           "the valid base every case starts from"))
    names = set()
    for name, exit_code, err, warn, note, fn in CASES:
        assert name not in names, name
        names.add(name)
        files = base_files()
        fn(files)
        write_case(name, files, expect_toml(exit_code, err, warn, note))
    print(f"wrote base + {len(CASES)} cases")


if __name__ == "__main__":
    main()
