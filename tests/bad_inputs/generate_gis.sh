#!/usr/bin/env bash
# Regenerate the GIS-format cases of the bad-input corpus (folders `gis-*`):
#   bash tests/bad_inputs/generate_gis.sh        (from the crate root; needs GDAL's ogr2ogr)
# Each case copies `base/` (points and portfolio), converts its structures.geojson with ogr2ogr
# (the outside writer) into GeoPackage or Shapefile, points the portfolio at it and breaks ONE
# thing. The folders are committed; this script records how they were made.
set -euo pipefail
cd "$(dirname "$0")"

new_case() { # name format(gpkg|shp) exit stderr_fragments... -> folder with the converted base
  local name=$1 fmt=$2
  rm -rf "$name" && mkdir "$name"
  cp base/points.csv "$name/"
  case $fmt in
    gpkg) ogr2ogr -f GPKG "$name/structures.gpkg" base/structures.geojson -nln structures ;;
    shp) ogr2ogr -f "ESRI Shapefile" "$name/structures.shp" base/structures.geojson ;;
    fgb) ogr2ogr -f FlatGeobuf "$name/structures.fgb" base/structures.geojson -nln structures ;;
  esac
  sed "s|path = \"structures.geojson\"|path = \"structures.$fmt\"|" base/portfolio.toml > "$name/portfolio.toml"
}

expect() { # name exit fragments... (the last argument may be `warn:FRAGMENT`)
  local name=$1 code=$2; shift 2
  local errs=() warns=()
  for a in "$@"; do
    case $a in warn:*) warns+=("\"${a#warn:}\"") ;; *) errs+=("\"$a\"") ;; esac
  done
  { echo "# made by generate_gis.sh"
    echo "exit = $code"
    (IFS=,; echo "stderr_contains = [${errs[*]}]")
    if [ ${#warns[@]} -gt 0 ]; then (IFS=,; echo "warning_contains = [${warns[*]}]"); fi
  } > "$name/expect.toml"
}

new_case gis-gpkg-valid gpkg
expect gis-gpkg-valid 0 "check passed" "structures.gpkg (GeoPackage)" "points kept on structures: 8"

new_case gis-shp-valid shp
expect gis-shp-valid 0 "check passed" "structures.shp (Shapefile)" "points kept on structures: 8"

new_case gis-shp-truncated shp
head -c 150 gis-shp-truncated/structures.shp > t && mv t gis-shp-truncated/structures.shp
expect gis-shp-truncated 2 "structures.shp" "truncated"

new_case gis-shp-missing-dbf shp
rm gis-shp-missing-dbf/structures.dbf
expect gis-shp-missing-dbf 2 "structures.dbf" "is missing"

new_case gis-shp-missing-prj shp
rm gis-shp-missing-prj/structures.prj
expect gis-shp-missing-prj 2 "structures.prj" "CRS of the footprints is unknown" "[structures] crs"

new_case gis-gpkg-wrong-layer gpkg
sed -i 's|path = "structures.gpkg"|path = "structures.gpkg"\nlayer = "footprints"|' gis-gpkg-wrong-layer/portfolio.toml
expect gis-gpkg-wrong-layer 2 "structures.gpkg" "no feature layer \`footprints\`" "\`structures\`"

new_case gis-gpkg-two-layers gpkg
ogr2ogr -update -f GPKG gis-gpkg-two-layers/structures.gpkg base/structures.geojson -nln copy
expect gis-gpkg-two-layers 2 "structures.gpkg" "2 feature layers" "\`copy\`, \`structures\`" "structures.layer"

new_case gis-gpkg-not-sqlite gpkg
printf 'id,name\nH-1,House\n' > gis-gpkg-not-sqlite/structures.gpkg
expect gis-gpkg-not-sqlite 2 "structures.gpkg" "not an SQLite database"

new_case gis-gpkg-empty-layer gpkg
rm gis-gpkg-empty-layer/structures.gpkg
ogr2ogr -f GPKG gis-gpkg-empty-layer/structures.gpkg base/structures.geojson -nln structures -where "1 = 0"
expect gis-gpkg-empty-layer 2 "structures.gpkg" "layer \`structures\`" "the layer has no features" "at least one structure"

new_case gis-gpkg-mixed-geometry gpkg
python3 - <<'PY'
import json
d = json.load(open("base/structures.geojson"))
x, y = d["features"][0]["geometry"]["coordinates"][0][0]
d["features"].append({"type": "Feature", "properties": {"id": "P-1"},
                      "geometry": {"type": "Point", "coordinates": [x, y]}})
json.dump(d, open("mixed.geojson", "w"))
PY
rm gis-gpkg-mixed-geometry/structures.gpkg
ogr2ogr -f GPKG gis-gpkg-mixed-geometry/structures.gpkg mixed.geojson -nln structures -nlt GEOMETRY
rm mixed.geojson
expect gis-gpkg-mixed-geometry 2 "structures.gpkg" "layer \`structures\`, feature 2 (id" "P-1" "\`Point\` is not a footprint"

new_case gis-gpkg-3d gpkg
rm gis-gpkg-3d/structures.gpkg
ogr2ogr -f GPKG gis-gpkg-3d/structures.gpkg base/structures.geojson -nln structures -dim XYZ
expect gis-gpkg-3d 0 "check passed" "warn:coordinates_3d" "warn:only x and y are used"

new_case gis-gpkg-crs-conflict gpkg
rm gis-gpkg-crs-conflict/structures.gpkg
ogr2ogr -f GPKG gis-gpkg-crs-conflict/structures.gpkg base/structures.geojson -nln structures -t_srs EPSG:32650
sed -i 's|path = "structures.gpkg"|path = "structures.gpkg"\ncrs = "EPSG:4326"|' gis-gpkg-crs-conflict/portfolio.toml
expect gis-gpkg-crs-conflict 2 "structures.gpkg" "declares EPSG:32650" "crs is EPSG:4326"

new_case gis-fgb-valid fgb
expect gis-fgb-valid 0 "check passed" "structures.fgb (FlatGeobuf)" "points kept on structures: 8"

new_case gis-fgb-truncated fgb
head -c 300 gis-fgb-truncated/structures.fgb > t && mv t gis-fgb-truncated/structures.fgb
expect gis-fgb-truncated 2 "structures.fgb" "cannot read the FlatGeobuf file"

# Points layers (the base's points.csv converted; x/y from lon/lat).
points_case() { # name -> folder with the base structures and points.gpkg made from $2 (a CSV)
  local name=$1 csv=$2 fmt=${3:-gpkg}
  rm -rf "$name" && mkdir "$name"
  cp base/structures.geojson "$name/"
  case $fmt in
    gpkg) ogr2ogr -f GPKG "$name/points.gpkg" "$csv" -nln points -oo AUTODETECT_TYPE=YES \
            -oo X_POSSIBLE_NAMES=lon -oo Y_POSSIBLE_NAMES=lat -oo KEEP_GEOM_COLUMNS=NO -a_srs EPSG:4326 ;;
    shp) ogr2ogr -f "ESRI Shapefile" "$name/points.shp" "$csv" -oo AUTODETECT_TYPE=YES \
            -oo X_POSSIBLE_NAMES=lon -oo Y_POSSIBLE_NAMES=lat -oo KEEP_GEOM_COLUMNS=NO -a_srs EPSG:4326 ;;
  esac
  sed "s|path = \"points.csv\"|path = \"points.$fmt\"|" base/portfolio.toml > "$name/portfolio.toml"
}

points_case gis-points-gpkg-valid base/points.csv
expect gis-points-gpkg-valid 0 "check passed" "points.gpkg (GeoPackage)" "points read from asc: 11" "points kept on structures: 8"

python3 - <<'PY'
rows = open("base/points.csv").read().split("\n")
cells = rows[3].split(",")
cells[6] = "abc"
rows[3] = ",".join(cells)
open("text-value.csv", "w").write("\n".join(rows))
PY
points_case gis-points-gpkg-text-value text-value.csv
rm text-value.csv
expect gis-points-gpkg-text-value 2 "points.gpkg" "layer \`points\`, feature 3, attribute" "\`abc\` is not a number"

points_case gis-points-gpkg-polygon-layer base/points.csv
rm gis-points-gpkg-polygon-layer/points.gpkg
ogr2ogr -f GPKG gis-points-gpkg-polygon-layer/points.gpkg base/structures.geojson -nln points
expect gis-points-gpkg-polygon-layer 2 "points.gpkg" "layer \`points\`, feature 1" "\`Polygon\` is not a point"

points_case gis-points-shp-missing-dbf base/points.csv shp
rm gis-points-shp-missing-dbf/points.dbf
expect gis-points-shp-missing-dbf 2 "points.dbf" "is missing"

echo "wrote the gis-* cases"
