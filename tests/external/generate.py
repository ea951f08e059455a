#!/usr/bin/env python3
"""Writes the reference values of Plinth's outside checks (tests/external_checks.rs).

Every expected value in the JSON files beside this script is computed here by a general-purpose
library from PyPI (pyproj, statsmodels with scipy, MintPy, shapely), never by Plinth's own notes.
Each file records the library's name and version. All inputs are invented: arbitrary coordinates,
seeded synthetic series, made-up footprints.

Regenerate (see README.md in this folder):

    python3 -m venv ~/ext-venv
    ~/ext-venv/bin/pip install -r tests/external/requirements.txt
    ~/ext-venv/bin/python tests/external/generate.py

The committed JSON is the contract; `cargo test` never runs Python.
"""

import json
import math
import sys
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent


def write(name, payload, indent=1):
    path = HERE / name
    path.write_text(json.dumps(payload, indent=indent, allow_nan=False) + "\n")
    print(f"wrote {path.name}")


# ---------------------------------------------------------------------------------------------
# pyproj: point transforms, footprint transforms, local frame factors
# ---------------------------------------------------------------------------------------------

# The PROJ strings Plinth builds its CRSs from (crate crs-definitions 0.6, read by proj4rs).
# The Rust test asserts that `Crs::definition()` still equals each of these, so a change of the
# definitions Plinth uses is caught instead of silently comparing different things.
PLINTH_DEFINITIONS = {
    4326: "+proj=longlat +datum=WGS84 +no_defs",
    4277: "+proj=longlat +datum=OSGB36 +no_defs",
    27700: "+proj=tmerc +lat_0=49 +lon_0=-2 +k=0.9996012717 +x_0=400000 +y_0=-100000 "
    "+datum=OSGB36 +units=m +no_defs",
    28992: "+proj=sterea +lat_0=52.15616055555555 +lon_0=5.38763888888889 +k=0.9999079 "
    "+x_0=155000 +y_0=463000 +ellps=bessel "
    "+towgs84=565.2369,50.0087,465.658,-0.406857,0.350733,-1.87035,4.0812 +units=m +no_defs",
    2056: "+proj=somerc +lat_0=46.95240555555556 +lon_0=7.439583333333333 +k_0=1 +x_0=2600000 "
    "+y_0=1200000 +ellps=bessel +towgs84=674.374,15.056,405.346,0,0,0,0 +units=m +no_defs",
    31467: "+proj=tmerc +lat_0=0 +lon_0=9 +k=1 +x_0=3500000 +y_0=0 +datum=potsdam +units=m "
    "+no_defs",
    3035: "+proj=laea +lat_0=52 +lon_0=10 +x_0=4321000 +y_0=3210000 +ellps=GRS80 "
    "+towgs84=0,0,0,0,0,0,0 +units=m +no_defs",
    2154: "+proj=lcc +lat_1=49 +lat_2=44 +lat_0=46.5 +lon_0=3 +x_0=700000 +y_0=6600000 "
    "+ellps=GRS80 +towgs84=0,0,0,0,0,0,0 +units=m +no_defs",
    25832: "+proj=utm +zone=32 +ellps=GRS80 +towgs84=0,0,0,0,0,0,0 +units=m +no_defs",
    32630: "+proj=utm +zone=30 +datum=WGS84 +units=m +no_defs",
    32631: "+proj=utm +zone=31 +datum=WGS84 +units=m +no_defs",
    32632: "+proj=utm +zone=32 +datum=WGS84 +units=m +no_defs",
    32633: "+proj=utm +zone=33 +datum=WGS84 +units=m +no_defs",
    32755: "+proj=utm +zone=55 +south +datum=WGS84 +units=m +no_defs",
}

# proj4rs expands a named datum (+datum=OSGB36, +datum=potsdam) with the proj4js table values;
# PROJ 9 maps the name to the EPSG datum instead and picks a transformation from its database
# ("OSGB36 to WGS 84 (6)", rotations rounded to 0.001"), about 3 mm away. To compare like with like,
# pyproj is given the expanded parameters proj4rs uses; PROJ's own choice is compared separately
# (authority_* values, tolerance = its stated accuracy).
NAMED_DATUMS = {
    "+datum=OSGB36": "+ellps=airy +towgs84=446.448,-125.157,542.060,0.1502,0.2470,0.8421,-20.4894",
    "+datum=potsdam": "+ellps=bessel +towgs84=598.1,73.7,418.2,0.202,0.045,-2.455,6.7",
}


def pyproj_definition(code):
    text = PLINTH_DEFINITIONS[code]
    for name, params in NAMED_DATUMS.items():
        text = text.replace(name, params)
    return text


# (source EPSG, target EPSG, points in the source CRS). Arbitrary coordinates, no real sites.
POINT_CASES = [
    (4326, 32630, [(-3.2718, 53.4106), (-5.9931, 50.1207), (-0.0042, 57.8833)]),
    (4326, 32633, [(14.3141, 47.0712), (17.9265, 40.2218)]),
    (4326, 32755, [(147.3311, -37.9043), (146.0207, -42.5568)]),
    (4326, 3035, [(8.4412, 49.2631), (21.7314, 38.8202)]),
    (4326, 2154, [(2.6135, 47.7722), (-1.1804, 44.0451)]),
    (4326, 25832, [(9.8162, 51.6043)]),
    # National grids whose definition carries a datum: the Helmert shift must be applied.
    (27700, 4326, [(431742.55, 287315.80), (262004.10, 655170.35)]),
    (27700, 32630, [(431742.55, 287315.80), (518230.00, 176402.00)]),
    (4326, 27700, [(-1.7342, 52.6118)]),
    (28992, 4326, [(141270.30, 455611.90), (190011.00, 372533.50)]),
    (28992, 32631, [(141270.30, 455611.90)]),
    (2056, 4326, [(2634512.70, 1177203.40)]),
    (2056, 32632, [(2634512.70, 1177203.40), (2712301.00, 1251044.00)]),
    (31467, 4326, [(3512406.00, 5561208.00)]),
    (31467, 32632, [(3512406.00, 5561208.00)]),
]

# Footprints as Plinth reads them: vertices in the structures' CRS, projected to the analysis CRS
# through WGS84 (src -> EPSG:4326 -> analysis), as `ingest::load_structures` does.
FOOTPRINT_CASES = [
    {
        "id": "grid-l-shape-with-hole",
        "source": 27700,
        "analysis": 32630,
        # Concave L with a courtyard; exterior anticlockwise, hole clockwise.
        "rings": [
            [
                (431700.0, 287300.0),
                (431760.0, 287300.0),
                (431760.0, 287318.0),
                (431722.0, 287318.0),
                (431722.0, 287345.0),
                (431700.0, 287345.0),
                (431700.0, 287300.0),
            ],
            [
                (431705.0, 287305.0),
                (431705.0, 287312.0),
                (431716.0, 287312.0),
                (431716.0, 287305.0),
                (431705.0, 287305.0),
            ],
        ],
    },
    {
        "id": "rd-rotated-terrace",
        "source": 28992,
        "analysis": 32631,
        "rings": [
            [
                (141250.0, 455600.0),
                (141301.2, 455635.8),
                (141293.2, 455647.3),
                (141242.0, 455611.5),
                (141250.0, 455600.0),
            ]
        ],
    },
    {
        "id": "lonlat-u-shape",
        "source": 4326,
        "analysis": 32633,
        "rings": [
            [
                (14.31400, 47.07100),
                (14.31480, 47.07100),
                (14.31480, 47.07150),
                (14.31460, 47.07150),
                (14.31460, 47.07115),
                (14.31420, 47.07115),
                (14.31420, 47.07150),
                (14.31400, 47.07150),
                (14.31400, 47.07100),
            ]
        ],
    },
]

# Points at which to compare Plinth's local frame (grid convergence, point scale factor) with
# PROJ's projection factors: (analysis EPSG, lon, lat).
FRAME_CASES = [
    (32631, 4.9000, 52.3700),
    (32630, -3.2718, 53.4106),
    (32633, 17.9265, 40.2218),
    (32755, 147.3311, -37.9043),
    (27700, -1.7342, 52.6118),
    (28992, 5.1012, 52.0113),
    (2154, 2.6135, 47.7722),
    (3035, 21.7314, 38.8202),
]

# Published worked examples that pyproj reproduces (the Rust test quotes the published numbers
# and this file shows PROJ agreeing with them).
PUBLISHED_PROJECTION_EXAMPLES = [
    {
        "name": "Ordnance Survey, A guide to coordinate systems in Great Britain, "
        "Transverse Mercator worked example (from memory)",
        "source_crs": 4277,
        "target_crs": 27700,
        "lon": 1.0 + 43.0 / 60.0 + 4.5177 / 3600.0,
        "lat": 52.0 + 39.0 / 60.0 + 27.2531 / 3600.0,
        "published_x": 651409.903,
        "published_y": 313177.270,
    },
]


def pyproj_values():
    import pyproj
    from pyproj import CRS, Geod, Transformer
    from pyproj.transformer import TransformerGroup

    def same_definition(src, dst):
        return Transformer.from_crs(
            CRS.from_proj4(pyproj_definition(src)),
            CRS.from_proj4(pyproj_definition(dst)),
            always_xy=True,
        )

    def authority_default(src, dst):
        # PROJ's best transformation available offline (no grid files, no network).
        group = TransformerGroup(f"EPSG:{src}", f"EPSG:{dst}", always_xy=True)
        return group.transformers[0]

    points = []
    for src, dst, pts in POINT_CASES:
        t_same = same_definition(src, dst)
        t_auth = authority_default(src, dst)
        for x, y in pts:
            sx, sy = t_same.transform(x, y)
            ax, ay = t_auth.transform(x, y)
            points.append(
                {
                    "source": f"EPSG:{src}",
                    "target": f"EPSG:{dst}",
                    "x": x,
                    "y": y,
                    "same_definition_x": sx,
                    "same_definition_y": sy,
                    "authority_x": ax,
                    "authority_y": ay,
                    "authority_operation": t_auth.description,
                    "authority_accuracy_m": t_auth.accuracy,
                }
            )

    geod = Geod(ellps="WGS84")
    footprints = []
    for case in FOOTPRINT_CASES:
        src, dst = case["source"], case["analysis"]
        to_wgs = same_definition(src, 4326)
        wgs_to_a = same_definition(4326, dst)
        rings_out = []
        for ring in case["rings"]:
            verts = []
            for x, y in ring:
                lon, lat = to_wgs.transform(x, y)
                ex, ey = wgs_to_a.transform(lon, lat)
                verts.append({"x": x, "y": y, "lon": lon, "lat": lat, "ax": ex, "ay": ey})
            # Geodesic (WGS84 ellipsoid) length and forward azimuth of each edge: what a tape and a
            # compass on the ground would give, independent of any projection.
            edges = []
            for a, b in zip(verts[:-1], verts[1:]):
                az12, az21, dist = geod.inv(a["lon"], a["lat"], b["lon"], b["lat"])
                # Direction of the edge at its midpoint: mean of the forward azimuth at the start
                # and the reversed back azimuth at the end.
                fwd_end = (az21 + 180.0 + 180.0) % 360.0 - 180.0
                mid = math.degrees(
                    math.atan2(
                        math.sin(math.radians(az12)) + math.sin(math.radians(fwd_end)),
                        math.cos(math.radians(az12)) + math.cos(math.radians(fwd_end)),
                    )
                )
                edges.append({"length_m": dist, "azimuth_start_deg": az12, "azimuth_mid_deg": mid})
            rings_out.append({"vertices": verts, "edges": edges})
        ext = rings_out[0]["vertices"]
        lons = [v["lon"] for v in ext]
        lats = [v["lat"] for v in ext]
        area, _ = geod.polygon_area_perimeter(lons, lats)
        for hole in rings_out[1:]:
            h_area, _ = geod.polygon_area_perimeter(
                [v["lon"] for v in hole["vertices"]], [v["lat"] for v in hole["vertices"]]
            )
            area -= abs(h_area)
        footprints.append(
            {
                "id": case["id"],
                "source": f"EPSG:{src}",
                "analysis": f"EPSG:{dst}",
                "rings": rings_out,
                "geodesic_area_m2": abs(area) if len(rings_out) == 1 else area,
            }
        )

    frames = []
    wgs = CRS.from_proj4(PLINTH_DEFINITIONS[4326])
    for code, lon, lat in FRAME_CASES:
        crs = CRS.from_proj4(pyproj_definition(code))
        to_a = Transformer.from_crs(wgs, crs, always_xy=True)
        x, y = to_a.transform(lon, lat)
        # PROJ's factors are for the projection on its own ellipsoid (true north of that datum);
        # the geographic coordinates are first taken to that datum.
        geo_native = Transformer.from_crs(crs, crs.geodetic_crs, always_xy=True)
        nlon, nlat = geo_native.transform(x, y)
        fac = pyproj.Proj(crs).get_factors(nlon, nlat)
        # Plinth's true north is the WGS84 meridian (LOS headings are WGS84 quantities). Its grid
        # bearing and the north/east scales, from PROJ forward transforms over 1 m geodesic steps
        # along the WGS84 meridian and parallel (Geod.fwd), relative to the origin's image.
        ln, lt, _ = geod.fwd(lon, lat, 0.0, 1.0)
        le, lte, _ = geod.fwd(lon, lat, 90.0, 1.0)
        xn, yn = to_a.transform(ln, lt)
        xe, ye = to_a.transform(le, lte)
        frames.append(
            {
                "crs": f"EPSG:{code}",
                "datum_shift": code not in (4326, 3035, 2154, 25832, 32630, 32631, 32632, 32633, 32755),
                "lon": lon,
                "lat": lat,
                "x": x,
                "y": y,
                "meridian_convergence_deg": fac.meridian_convergence,
                "meridional_scale": fac.meridional_scale,
                "parallel_scale": fac.parallel_scale,
                "wgs84_north_grid_bearing_deg": math.degrees(math.atan2(xn - x, yn - y)),
                "wgs84_north_scale": math.hypot(xn - x, yn - y),
                "wgs84_east_scale": math.hypot(xe - x, ye - y),
            }
        )

    published = []
    for ex in PUBLISHED_PROJECTION_EXAMPLES:
        t = same_definition(ex["source_crs"], ex["target_crs"])
        px, py = t.transform(ex["lon"], ex["lat"])
        published.append(dict(ex, pyproj_x=px, pyproj_y=py))

    write(
        "pyproj.json",
        {
            "library": "pyproj",
            "version": pyproj.__version__,
            "proj_version": pyproj.proj_version_str,
            "network": pyproj.network.is_network_enabled(),
            "plinth_definitions": {f"EPSG:{k}": v for k, v in PLINTH_DEFINITIONS.items()},
            "points": points,
            "footprints": footprints,
            "frames": frames,
            "published_examples": published,
        },
    )


# ---------------------------------------------------------------------------------------------
# statsmodels: OLS velocity, AR(1)-aware SE, linear + annual fit, model comparison
# ---------------------------------------------------------------------------------------------

SERIES_CASES = [
    # name, n, step days, velocity mm/yr, annual semi-amplitude mm, phase rad, AR(1) phi, sigma mm, seed
    ("ar1-moderate", 60, 12, -4.0, 0.0, 0.0, 0.5, 1.5, 101),
    ("white-noise-short", 30, 12, 1.2, 0.0, 0.0, 0.0, 1.0, 202),
    ("seasonal-ar1", 92, 12, -2.5, 3.0, 1.1, 0.3, 1.2, 303),
    ("seasonal-six-day", 150, 6, -7.0, 2.0, -2.2, 0.6, 1.0, 404),
    ("strong-ar1", 24, 12, -1.0, 0.0, 0.0, 0.9, 2.0, 505),
]


def synth_series(n, step_days, v, amp, phase, phi, sigma, seed):
    rng = np.random.default_rng(seed)
    t = np.arange(n) * step_days / 365.25 + 0.0137  # decimal years from a calendar origin
    e = rng.normal(0.0, sigma, n)
    noise = np.empty(n)
    noise[0] = e[0] / math.sqrt(1.0 - phi * phi) if phi < 1 else e[0]
    for i in range(1, n):
        noise[i] = phi * noise[i - 1] + e[i]
    d = 3.0 + v * t + amp * np.sin(2 * np.pi * t + phase) + noise
    return t, d


def santer(se, n, r1, p):
    """Plinth's documented AR(1) rule, applied to statsmodels' numbers (see README.md)."""
    r = min(max(r1, 0.0), 0.999999)
    n_eff = n * (1 - r) / (1 + r)
    if n_eff <= p:
        return n_eff, None
    return n_eff, se * math.sqrt((n - p) / (n_eff - p))


def statsmodels_values():
    import scipy
    import statsmodels
    import statsmodels.api as sm
    from scipy import stats
    from statsmodels.tsa.stattools import acf

    cases = []
    for name, n, step, v, amp, phase, phi, sigma, seed in SERIES_CASES:
        t, d = synth_series(n, step, v, amp, phase, phi, sigma, seed)
        x_lin = sm.add_constant(t)
        lin = sm.OLS(d, x_lin).fit()
        r1 = float(acf(lin.resid, nlags=1, adjusted=False, fft=False)[1])
        n_eff, se_adj = santer(float(lin.bse[1]), n, r1, 2)
        t_adj = None if se_adj is None else float(lin.params[1]) / se_adj
        p_adj = None if t_adj is None else float(2 * stats.t.sf(abs(t_adj), n_eff - 2))

        # GLSAR: feasible GLS with AR(1) errors (iterated Cochrane-Orcutt-type prewhitening).
        # A different estimator from Plinth's effective-sample-size rule; recorded to compare the
        # comparable part (see README.md).
        glsar = sm.GLSAR(d, x_lin, rho=1).iterative_fit(maxiter=50)

        two_pi_t = 2 * np.pi * t
        x_ann = np.column_stack([np.ones(n), t, np.sin(two_pi_t), np.cos(two_pi_t)])
        ann = sm.OLS(d, x_ann).fit()
        cov = ann.cov_params()
        s, c = float(ann.params[2]), float(ann.params[3])
        a = math.hypot(s, c)
        jac = np.array([s / a, c / a])
        se_a = float(math.sqrt(jac @ cov[2:4, 2:4] @ jac))
        r1_ann = float(acf(ann.resid, nlags=1, adjusted=False, fft=False)[1])
        n_eff_ann, se_adj_ann = santer(float(ann.bse[1]), n, r1_ann, 4)
        f_val, f_p, f_df = ann.compare_f_test(lin)

        cases.append(
            {
                "name": name,
                "generated_with": {
                    "n": n,
                    "step_days": step,
                    "velocity_mm_per_yr": v,
                    "annual_amplitude_mm": amp,
                    "phi": phi,
                    "sigma_mm": sigma,
                    "seed": seed,
                },
                "t_yr": t.tolist(),
                "d_mm": d.tolist(),
                "linear": {
                    "intercept_mm": float(lin.params[0]),
                    "velocity_mm_per_yr": float(lin.params[1]),
                    "se_intercept_mm": float(lin.bse[0]),
                    "se_velocity_mm_per_yr": float(lin.bse[1]),
                    "residual_sd_mm": float(math.sqrt(lin.scale)),
                    "rss_mm2": float(lin.ssr),
                    "lag1_autocorrelation": r1,
                    "effective_n": n_eff,
                    "se_velocity_adjusted_mm_per_yr": se_adj,
                    "t_statistic_adjusted": t_adj,
                    "p_value_adjusted": p_adj,
                    "aic_statsmodels": float(lin.aic),
                    "bic_statsmodels": float(lin.bic),
                },
                "glsar": {
                    "velocity_mm_per_yr": float(glsar.params[1]),
                    "se_velocity_mm_per_yr": float(glsar.bse[1]),
                    "rho": float(np.atleast_1d(glsar.model.rho)[0]),
                },
                "linear_annual": {
                    "intercept_mm": float(ann.params[0]),
                    "velocity_mm_per_yr": float(ann.params[1]),
                    "se_velocity_mm_per_yr": float(ann.bse[1]),
                    "sin_mm": s,
                    "cos_mm": c,
                    "amplitude_mm": a,
                    "se_amplitude_mm": se_a,
                    "peak_yr": float((math.atan2(s, c) / (2 * math.pi)) % 1.0),
                    "rss_mm2": float(ann.ssr),
                    "lag1_autocorrelation": r1_ann,
                    "se_velocity_adjusted_mm_per_yr": se_adj_ann,
                    "aic_statsmodels": float(ann.aic),
                    "bic_statsmodels": float(ann.bic),
                    "f_vs_linear": float(f_val),
                    "f_p_value": float(f_p),
                    "f_df": [2.0, float(n - 4)],
                },
            }
        )

    # Student t and Fisher F tails from scipy, for Plinth's incomplete-beta implementation.
    tails = {
        "t_two_sided": [
            {"t": tv, "nu": nu, "p": float(2 * stats.t.sf(abs(tv), nu))}
            for tv, nu in [(2.228, 10.0), (0.7, 3.5), (3.9, 57.3), (1.0, 1.0), (12.0, 2.2)]
        ],
        "f_upper": [
            {"f": fv, "d1": d1, "d2": d2, "p": float(stats.f.sf(fv, d1, d2))}
            for fv, d1, d2 in [(3.49, 2.0, 20.0), (0.4, 2.0, 88.0), (7.7, 3.0, 145.0), (25.0, 1.0, 9.5)]
        ],
    }
    write(
        "statsmodels.json",
        {
            "library": "statsmodels",
            "version": statsmodels.__version__,
            "scipy_version": scipy.__version__,
            "numpy_version": np.__version__,
            "series": cases,
            "distribution_tails": tails,
        },
    )


# ---------------------------------------------------------------------------------------------
# MintPy: LOS unit vectors and ENU -> LOS projection
# ---------------------------------------------------------------------------------------------

# (label, incidence deg, heading deg clockwise from north, look direction, pass)
LOS_CASES = [
    ("ascending right", 39.0, -12.0, "right", "ascending"),
    ("ascending right, heading given in [0, 360)", 33.4, 349.5, "right", "ascending"),
    ("descending right", 37.0, 192.0, "right", "descending"),
    ("descending right, heading given as negative", 44.8, -169.7, "right", "descending"),
    ("ascending left", 35.0, -10.0, "left", "ascending"),
    ("descending left", 41.5, 190.0, "left", "descending"),
]

# ENU motions (mm): east, north, up.
MOTIONS = [(3.0, 0.0, -10.0), (-4.5, 0.0, 2.0), (1.5, -2.5, -6.0), (0.0, 5.0, 0.0)]


def mintpy_values():
    import mintpy
    from mintpy.utils import utils0 as ut

    geoms = []
    for label, inc, head, look, pas in LOS_CASES:
        az = float(ut.heading2azimuth_angle(head, look_direction=look))
        unit = [float(c) for c in ut.get_unit_vector4component_of_interest(inc, az, comp="enu2los")]
        projections = []
        for e, n_, u in MOTIONS:
            # MintPy's enu2los takes the LOS azimuth angle (ISCE convention) for either look side.
            towards = float(ut.enu2los(e, n_, u, inc, az_angle=az))
            projections.append(
                {
                    "east_mm": e,
                    "north_mm": n_,
                    "up_mm": u,
                    "los_towards_satellite_mm": towards,
                    "los_away_from_satellite_mm": -towards,
                }
            )
        geoms.append(
            {
                "label": label,
                "incidence_deg": inc,
                "heading_deg": head,
                "look_direction": look,
                "pass": pas,
                "los_azimuth_deg": az,
                "heading_back_from_azimuth_deg": float(
                    ut.azimuth2heading_angle(az, look_direction=look)
                ),
                "unit_enu_ground_to_satellite": unit,
                "projections": projections,
            }
        )
    write(
        "mintpy.json",
        {
            "library": "mintpy",
            "version": mintpy.__version__,
            "functions": [
                "mintpy.utils.utils0.heading2azimuth_angle",
                "mintpy.utils.utils0.azimuth2heading_angle",
                "mintpy.utils.utils0.get_unit_vector4component_of_interest (comp='enu2los')",
                "mintpy.utils.utils0.enu2los",
            ],
            "geometries": geoms,
        },
    )


# ---------------------------------------------------------------------------------------------
# shapely: inside, distance to footprint, buffer membership, association by the documented rules
# ---------------------------------------------------------------------------------------------

X0, Y0 = 512000.0, 5210000.0  # arbitrary projected origin (metres)


def ring(pts):
    return [(X0 + x, Y0 + y) for x, y in pts]


# Awkward footprints in analysis-CRS metres. Each entry: list of polygons, each (exterior, [holes]).
SHAPES = {
    "concave-u": [
        (ring([(0, 0), (40, 0), (40, 30), (28, 30), (28, 8), (12, 8), (12, 30), (0, 30)]), []),
    ],
    "courtyard": [
        (
            ring([(60, 0), (110, 0), (110, 40), (60, 40)]),
            [ring([(70, 10), (70, 30), (100, 30), (100, 10)])],
        ),
    ],
    "two-wings": [
        (ring([(0, 60), (18, 60), (18, 75), (0, 75)]), []),
        (ring([(24, 60), (42, 60), (42, 75), (24, 75)]), []),
    ],
    "pavilion-in-courtyard": [
        (
            ring([(60, 60), (120, 60), (120, 110), (60, 110)]),
            [ring([(66, 66), (66, 104), (114, 104), (114, 66)])],
        ),
        (ring([(84, 78), (96, 78), (96, 92), (84, 92)]), []),
    ],
    "sliver-notch": [
        (
            ring([(0, 130), (50, 130), (50, 131.5), (2, 131.5), (2, 150), (0, 150)]),
            [],
        ),
    ],
    # Separate structures close together: nearest-edge ownership and ties.
    "row-house-a": [(ring([(0, 170), (15, 170), (15, 185), (0, 185)]), [])],
    "row-house-b": [(ring([(21, 170), (36, 170), (36, 185), (21, 185)]), [])],
    # Overlapping footprints (a data error Plinth tolerates): a point inside both is a tie.
    "overlap-a": [(ring([(50, 170), (70, 170), (70, 185), (50, 185)]), [])],
    "overlap-b": [(ring([(65, 175), (85, 175), (85, 190), (65, 190)]), [])],
}

BUFFER_M = 5.0
SURROUNDINGS_M = 25.0


def shapely_values():
    import shapely
    from shapely.geometry import MultiPolygon, Point, Polygon

    geoms = {}
    for name, polys in SHAPES.items():
        geoms[name] = MultiPolygon([Polygon(ext, holes) for ext, holes in polys])
        assert geoms[name].is_valid, name

    # Test points: a regular grid over the scene plus hand-placed awkward points.
    pts = []
    for gx in np.arange(-10.0, 131.0, 6.5):
        for gy in np.arange(-10.0, 201.0, 6.5):
            pts.append((X0 + float(gx), Y0 + float(gy), "grid"))
    special = [
        (20, 20, "in the notch of the U"),
        (20, 8.5, "in the notch, 0.5 m above its floor"),
        (20, 7.5, "inside the U's base, 0.5 m below the notch floor"),
        (12, 30, "on a vertex of the U"),
        (6, 0, "on an edge of the U"),
        (85, 20, "in the courtyard (hole)"),
        (85, 11, "in the courtyard, 1 m from the hole's edge"),
        (85, 5, "in the courtyard building's wall band"),
        (21, 67.5, "between the two wings of one footprint"),
        (90, 85, "inside the pavilion inside the courtyard"),
        (90, 96, "in the courtyard ring gap, between pavilion and building"),
        (75, 85, "in the courtyard gap, 9 m from both"),
        (25, 131, "inside the 1.5 m sliver"),
        (25, 132, "0.5 m outside the sliver"),
        (1, 140, "inside the sliver's upright"),
        (43.5, 33.5, "diagonally off the U's corner, 4.95 m away: inside the buffer"),
        (43.6, 33.6, "diagonally off the U's corner, 5.09 m away: outside the buffer"),
        (-4.9, -0.1, "4.9 m west of the U"),
        (18, 177, "between two houses, equidistant: a tie"),
        (18.0004, 177, "between two houses, 0.8 mm nearer the east one: still a tie"),
        (17.9, 177, "between two houses, 0.2 m nearer the west one"),
        (67, 180, "inside two overlapping footprints: a tie"),
        (63, 180, "inside one footprint, 2 m from an overlapping one"),
    ]
    for x, y, label in special:
        pts.append((X0 + x, Y0 + y, label))

    names = list(SHAPES)
    records = []
    for x, y, label in pts:
        p = Point(x, y)
        per = []
        for name in names:
            g = geoms[name]
            per.append(
                {
                    "footprint": name,
                    "contains": bool(g.contains(p)),
                    "touches_boundary": bool(g.boundary.distance(p) == 0.0),
                    "distance_m": float(g.distance(p)),
                    "within_buffer": bool(shapely.dwithin(g, p, BUFFER_M)),
                    "within_surroundings": bool(shapely.dwithin(g, p, SURROUNDINGS_M)),
                }
            )
        # Skip grid points far from everything (they test nothing).
        if label == "grid" and min(r["distance_m"] for r in per) > SURROUNDINGS_M:
            continue
        owner, tie = expected_owner(per)
        # Footprints beyond the surroundings radius are left out: Plinth must not link them.
        per = [r for r in per if r["within_surroundings"]]
        records.append({"x": x, "y": y, "label": label, "per_footprint": per,
                        "expected_owner": owner, "expected_tie": tie})

    # Buffer membership by the buffered polygon itself (shapely.buffer, 64 segments per quarter
    # circle), kept only where the point is clearly off the buffer line so the polygonal
    # approximation of the round corners cannot decide it.
    for r in records:
        p = Point(r["x"], r["y"])
        for f in r["per_footprint"]:
            d = f["distance_m"]
            if abs(d - BUFFER_M) > 0.01:
                f["in_buffer_polygon"] = bool(
                    geoms[f["footprint"]].buffer(BUFFER_M, quad_segs=64).covers(p)
                )

    write(
        "shapely.json",
        {
            "library": "shapely",
            "version": shapely.__version__,
            "geos_version": shapely.geos_version_string,
            "buffer_m": BUFFER_M,
            "surroundings_m": SURROUNDINGS_M,
            "tie_tolerance_m": 1e-3,
            "footprints": {
                name: [
                    {"exterior": list(map(list, ext)), "holes": [list(map(list, h)) for h in holes]}
                    for ext, holes in polys
                ]
                for name, polys in SHAPES.items()
            },
            "footprint_areas_m2": {name: float(geoms[name].area) for name in names},
            "points": records,
        },
        indent=None,
    )


def expected_owner(per):
    """Plinth's association rules 1-3 (docs/methods.md), evaluated on shapely's predicates."""
    inside = [i for i, r in enumerate(per) if r["contains"]]
    if len(inside) > 1:
        return None, True
    if len(inside) == 1:
        return per[inside[0]]["footprint"], False
    near = sorted(
        (r["distance_m"], i) for i, r in enumerate(per) if r["within_buffer"]
    )
    if not near:
        return None, False
    if len(near) > 1 and abs(near[1][0] - near[0][0]) <= 1e-3:
        return None, True
    return per[near[0][1]]["footprint"], False


def main():
    wanted = set(sys.argv[1:]) or {"pyproj", "statsmodels", "mintpy", "shapely"}
    if "pyproj" in wanted:
        pyproj_values()
    if "statsmodels" in wanted:
        statsmodels_values()
    if "mintpy" in wanted:
        mintpy_values()
    if "shapely" in wanted:
        shapely_values()


if __name__ == "__main__":
    main()
