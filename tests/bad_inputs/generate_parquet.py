#!/usr/bin/env python3
"""Regenerate the Parquet cases of the bad-input corpus (folders `gis-points-parquet-*`):
    python3 tests/bad_inputs/generate_parquet.py      (from the crate root; needs pyarrow)
Each case copies `base/` and converts its points.csv with pyarrow (the outside writer) into
Parquet: float64 date columns, snappy compression; one thing broken per case. The folders are
committed; this script records how they were made.
"""
import json
import os
import shutil
import struct

import pyarrow as pa
import pyarrow.csv as pc
import pyarrow.parquet as pq

HERE = os.path.dirname(os.path.abspath(__file__))
BASE = os.path.join(HERE, "base")


def base_table():
    t = pc.read_csv(os.path.join(BASE, "points.csv"),
                    convert_options=pc.ConvertOptions(column_types={"point_id": pa.string()}))
    return pa.table({n: (t[n].cast(pa.float64()) if pa.types.is_integer(t[n].type) else t[n])
                     for n in t.column_names})


def case(name, table, expect, metadata=None):
    d = os.path.join(HERE, name)
    if os.path.isdir(d):
        shutil.rmtree(d)
    os.makedirs(d)
    shutil.copy(os.path.join(BASE, "structures.geojson"), d)
    toml = open(os.path.join(BASE, "portfolio.toml")).read()
    toml = toml.replace('path = "points.csv"', 'path = "points.parquet"', 1)
    open(os.path.join(d, "portfolio.toml"), "w").write(toml)
    if metadata:
        table = table.replace_schema_metadata({**(table.schema.metadata or {}), **metadata})
    pq.write_table(table, os.path.join(d, "points.parquet"), compression="snappy")
    open(os.path.join(d, "expect.toml"), "w").write("# made by generate_parquet.py\n" + expect)


t = base_table()
case("gis-points-parquet-valid", t,
     'exit = 0\nstderr_contains = ["check passed", "points.parquet (Parquet)", "points read from asc: 11", "points kept on structures: 8"]\n')

date = [n for n in t.column_names if n[:2] == "20"][2]
s = t.set_column(t.column_names.index(date), date, t[date].cast(pa.string()))
case("gis-points-parquet-string-date", s,
     'exit = 2\nstderr_contains = ["points.parquet", "column `%s`", "not numbers"]\n' % date)

# GeoParquet: a WKB point column instead of lon/lat, the CRS left to the default (OGC:CRS84).
wkb = [struct.pack("<BIdd", 1, 1, x, y) for x, y in zip(t["lon"].to_pylist(), t["lat"].to_pylist())]
g = t.drop_columns(["lon", "lat"]).append_column("geometry", pa.array(wkb, pa.binary()))
geo = {"version": "1.0.0", "primary_column": "geometry",
       "columns": {"geometry": {"encoding": "WKB", "geometry_types": ["Point"]}}}
case("gis-points-geoparquet-valid", g,
     'exit = 0\nstderr_contains = ["check passed", "points.parquet (Parquet)", "points read from asc: 11", "points kept on structures: 8"]\n',
     {b"geo": json.dumps(geo).encode()})
print("wrote the Parquet cases")
