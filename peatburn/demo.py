"""The invented demo region: a synthetic burned peat landscape whose true answer is known.

:func:`make_demo_region` writes, into a folder, every input a peatburn run needs (two elevation
surveys, a subsidence-rate raster, peat thickness and bulk density, burn scars, zone layers) plus
the water table at fire time, active-fire detections and field plots, a ``config.toml`` that
uses every one of them (the keys are described in ``docs/configuration.md``), and ``truth.json``
with the true answer computed on the noise-free, unshifted fields.

Everything here is invented: the region, its place names, the concession names, the districts,
the fires and every number. No real place, company or person is represented. The grid is in
UTM zone 49S (EPSG:32749), placed in the open Indian Ocean at about 12.2 deg S, 111.2 deg E,
some 440 km south of the nearest coast: the coordinates are plainly not land, so nothing real
is drawn over (see ``demo_region/README.md``).

What is deliberately in the data (see ``demo_region/README.md``):

* a datum offset of the post-fire survey (+0.35 m) and a horizontal misregistration
  (+1.3 m east, -0.8 m north), for co-registration (Nuth & Kääb 2011) to recover;
* peat subsidence of 2-5 cm/yr over the 3-year survey interval, larger near canals;
* unburned islands and thin-burn margins inside the scars (below a survey's level of detection);
* scars on thin peat, where the burn is capped by the peat thickness;
* one scar without post-fire survey coverage (the survey gap), for the water-table method;
* hummock-and-hollow micro-relief (the same in both surveys), so that co-registration has slopes
  to work with on an otherwise very flat dome.

The generator is deterministic: a :class:`numpy.random.Generator` seeded with ``seed`` draws
every random quantity, in a fixed order.

References
----------
Hooijer, A. et al. (2012). Subsidence and carbon loss in drained tropical peatlands.
Biogeosciences 9:1053-1071 (recalled, unchecked) -- order of magnitude of the subsidence rates.
Warren, M. W. et al. (2012). Tropical peat bulk density and carbon content (recalled, unchecked)
-- order of magnitude of the bulk densities.
Ingram, H. A. P. (1982). Size and shape in raised mire ecosystems: a geophysical model.
Nature 297:300-303 (recalled, unchecked) -- a peat dome's convex, flat-topped profile.
Nuth, C. & Kääb, A. (2011). Co-registration and bias corrections of satellite elevation data sets
for quantifying glacier thickness change. The Cryosphere 5:271-290.
"""

from __future__ import annotations

import datetime as dt
import json
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .errors import ConfigError
from .io.writers import atomic_path, write_text

__all__ = ["DemoRegion", "make_demo_region", "DEMO_FILES"]

# ------------------------------------------------------------------------------------------------
# Fixed settings of the scenario (invented; the same for every seed, so the README can state them)

CRS_EPSG = 32749                      # WGS 84 / UTM zone 49S
ORIGIN_XY = (520_000.0, 8_650_000.0)  # upper-left corner [m]: about 12.21 deg S, 111.18 deg E (pyproj),
#                                       open ocean far from any island (a test keeps it there)
NODATA = -9999.0
BLOCK = 256
MIN_SIDE_PX = 96                      # smallest grid side on which every feature (islands, margins) fits

INTERVAL_YEARS = 3.0                  # [yr] between the pre- and post-fire surveys
DATUM_OFFSET_M = 0.35                 # [m] added to every post-fire elevation (vertical datum offset)
POST_SHIFT_M = (1.3, -0.8)            # [m] (east, north): a feature at true (x, y) appears in the post
#                                       survey at (x + 1.3, y - 0.8)
NOISE_SD_M = 0.05                     # [m] standard deviation of each survey's noise
NOISE_CORR_PX = 1.0                   # [px] sigma of the gaussian filter that correlates the noise
MICRO_RELIEF_SD_M = 0.15             # [m] hummock-and-hollow micro-relief of the true surface (invented;
MICRO_RELIEF_SIGMA_PX = 2.0           #      a few decimetres is typical of peat swamp forest, recalled, unchecked)
CARBON_FRACTION = 0.55                # [-] the generator's own invented value (tropical peat is
#                                       roughly half carbon by dry mass; common practice)

THICKNESS_EDGE_M = 0.3                # [m] peat thickness at the dome's margin
THICKNESS_CENTRE_M = 7.0              # [m] peat thickness at the dome's centre (+-5 % smooth variation)
SUBSIDENCE_RANGE = (0.02, 0.05)       # [m/yr] Hooijer et al. 2012 order of magnitude (recalled, unchecked)
BULK_DENSITY_RANGE = (0.08, 0.14)     # [g/cm^3] Warren et al. 2012 order of magnitude (recalled, unchecked)
CANAL_DEPTH_RANGE = (1.5, 2.0)        # [m] depth of the canal depressions
CANAL_WIDTH_PX = 2.5                  # [px] canal width (2-3 pixels across)

WT_A, WT_B = 0.04, 0.50               # burn depth [m] = WT_A + WT_B * water-table depth [m] + noise
WT_NOISE_SD = 0.04                    # [m] sd of that noise (spatially correlated, sigma 1.5 px)
CORE_DEPTH_RANGE = (0.10, 0.60)       # [m] clip of the burn depth inside scars (before the cap)
MARGIN_PX = 3                         # [px] width of the thin-burn margin along scar edges
MARGIN_DEPTH_RANGE = (0.02, 0.06)     # [m] burn depth in the margin
GAP_X_FRACTION = 0.78                 # the post survey has no data east of this fraction of the width

SMOULDERING_SET = "smouldering_akagi2011"   # built-in set: Akagi et al. 2011, Table 1, peatland
REGION_NAME = "Vexarin"
SCAR_ID_PREFIX = "VX-"

#: Burn-scar layout: centre (fraction of width from the west, fraction of height from the south)
#: and target area as a fraction of the region's area (720 ha at the default shape: 5-40 ha each).
_SCARS = (
    dict(fx=0.28, fy=0.63, area=32 / 720, island=True),                 # deep peat, crossed by a canal
    dict(fx=0.56, fy=0.34, area=24 / 720, island=True),                 # split by the district border
    dict(fx=0.10, fy=0.14, area=12 / 720, island=False),                # thin peat at the dome's margin
    dict(fx=0.61, fy=0.80, area=16 / 720, island=False),                # outside every concession
    dict(fx=0.34, fy=0.22, area=8 / 720, island=False),                 # half in a concession
    dict(fx=0.90, fy=0.52, area=15 / 720, island=False, gap=True),      # in the post-survey gap
)

#: Canals: end points as (fx, fy) fractions; jittered a little per seed.
_CANALS = (
    ((0.00, 0.57), (0.84, 0.68)),
    ((0.49, 0.00), (0.45, 1.00)),
    ((0.00, 0.27), (0.40, 0.00)),
)

#: Concessions (id field ``name``): wholly invented words (a test keeps real place words out).
_CONCESSIONS = (
    ("Xelora Timber", ((0.02, 0.40), (0.36, 0.44), (0.33, 0.75), (0.30, 0.97), (0.04, 0.93))),
    ("Quenti Plantation", ((0.37, 0.18), (0.60, 0.08), (0.63, 0.45), (0.45, 0.56), (0.31, 0.62))),
    ("Zorava Estate", ((0.81, 0.30), (0.99, 0.26), (0.99, 0.95), (0.86, 0.90), (0.91, 0.55))),
)

#: Districts (id field ``district``): split along a wiggly north-south border.
_DISTRICT_NAMES = ("Upper Zarendi", "Lower Zarendi")
_DISTRICT_BORDER = ((0.621, 1.0), (0.603, 0.797), (0.577, 0.551), (0.561, 0.337), (0.523, 0.0))

#: Files written by :func:`make_demo_region` (relative to the folder).
DEMO_FILES = (
    "peat_thickness.tif", "survey_pre.tif", "survey_post.tif", "subsidence_rate.tif", "bulk_density.tif",
    "water_table.tif", "truth_burn_depth.tif", "scars.gpkg", "concessions.gpkg", "districts.gpkg",
    "detections.csv", "field_plots.csv", "config.toml", "truth.json",
    # the second, invented fire year and the two-year series (peatburn series)
    "scars_2032.gpkg", "water_table_2032.tif", "truth_burn_depth_2032.tif", "config_2032.toml", "series.toml",
)
#: The second fire year: a drier season [m deeper water table], no new survey (the depth comes from
#: the water-table relation stated in its configuration), three scars: the first two overlap scars of
#: 2031 (VX-03 on thin peat, VX-01 on deep peat) by shifting their centres, the third is new.
SECOND_YEAR = 2032
SECOND_YEAR_WT_OFFSET_M = 0.12
_SCARS_2032 = (
    dict(over=2, dfx=0.035, dfy=0.02, area=10 / 720),
    dict(over=0, dfx=-0.06, dfy=-0.04, area=20 / 720),
    dict(fx=0.74, fy=0.16, area=9 / 720),
)


@dataclass(frozen=True)
class DemoRegion:
    """What :func:`make_demo_region` wrote.

    Attributes
    ----------
    config_path : pathlib.Path
        The run configuration (``config.toml``) of the demo.
    truth : dict
        The content of ``truth.json``: settings and the true answer.
    folder : pathlib.Path
        The folder holding every file.
    """

    config_path: Path
    truth: dict
    folder: Path


# ------------------------------------------------------------------------------------------------
# Small generators


def _smooth_field(rng: np.random.Generator, x, y, scale: float, n: int = 6,
                  wavelengths=(0.3, 1.0)) -> np.ndarray:
    """A smooth random field scaled to [-1, 1]: a sum of ``n`` plane cosine waves.

    ``x``, ``y`` [m] broadcast to the grid; wavelengths are fractions of ``scale`` [m].
    """
    out = np.zeros(np.broadcast_shapes(np.shape(x), np.shape(y)), dtype="float64")
    for _ in range(n):
        wl = rng.uniform(*wavelengths) * scale
        ang = rng.uniform(0.0, math.pi)
        ph = rng.uniform(0.0, 2 * math.pi)
        amp = rng.uniform(0.5, 1.0)
        k = 2 * math.pi / wl
        out += amp * np.cos(k * (math.cos(ang) * x + math.sin(ang) * y) + ph)
    lo, hi = out.min(), out.max()
    return 2.0 * (out - lo) / (hi - lo) - 1.0


def _correlated_noise(rng: np.random.Generator, shape, sd: float, sigma_px: float) -> np.ndarray:
    """Gaussian-filtered white noise rescaled to standard deviation ``sd`` (float32)."""
    from scipy.ndimage import gaussian_filter

    white = rng.standard_normal(shape, dtype="float32")
    smooth = gaussian_filter(white, sigma_px, mode="reflect")
    smooth *= np.float32(sd / float(smooth.std(dtype="float64")))
    return smooth


def _blob(rng: np.random.Generator, cx: float, cy: float, area: float, n: int = 96,
          roughness: float = 1.0):
    """An irregular, smooth star-shaped polygon of ``area`` [m^2] centred on (cx, cy) [m]."""
    from shapely import affinity
    from shapely.geometry import Polygon

    theta = np.linspace(0.0, 2 * math.pi, n, endpoint=False)
    r = np.ones(n)
    for k in range(2, 7):
        r += roughness * rng.uniform(0.0, 0.22 / k ** 0.7) * np.cos(k * theta + rng.uniform(0, 2 * math.pi))
    r = np.maximum(r, 0.35)
    elong = rng.uniform(1.0, 1.45)
    poly = Polygon(np.column_stack([r * np.cos(theta) * elong, r * np.sin(theta) / elong]))
    poly = affinity.rotate(poly, rng.uniform(0.0, 180.0), origin=(0, 0))
    f = math.sqrt(area / poly.area)
    poly = affinity.scale(poly, f, f, origin=(0, 0))
    return affinity.translate(poly, cx, cy)


def _distance_to_segment(x, y, p0, p1) -> np.ndarray:
    """Distance [m] from points (x, y) to the segment p0-p1 (broadcasting)."""
    (x0, y0), (x1, y1) = p0, p1
    dx, dy = x1 - x0, y1 - y0
    t = np.clip(((x - x0) * dx + (y - y0) * dy) / (dx * dx + dy * dy), 0.0, 1.0)
    return np.hypot(x - (x0 + t * dx), y - (y0 + t * dy))


def _random_points_in(rng: np.random.Generator, poly, n: int) -> np.ndarray:
    """``n`` uniformly random points inside ``poly`` (rejection sampling) as an (n, 2) array."""
    import shapely

    minx, miny, maxx, maxy = poly.bounds
    pts = np.empty((0, 2))
    while len(pts) < n:
        cand = np.column_stack([rng.uniform(minx, maxx, 4 * n), rng.uniform(miny, maxy, 4 * n)])
        cand = cand[shapely.contains_xy(poly, cand[:, 0], cand[:, 1])]
        pts = np.vstack([pts, cand])
    return pts[:n]


def _iso(d: dt.date) -> str:
    return d.isoformat()


# ------------------------------------------------------------------------------------------------
# Writers


def _write_raster(path: Path, array: np.ndarray, transform, crs, *, units: str, description: str):
    """Tiled (256 x 256), deflate-compressed float32 GeoTIFF; NaN written as nodata -9999."""
    import rasterio

    data = np.where(np.isfinite(array), array, NODATA).astype("float32")
    height, width = data.shape
    profile = dict(driver="GTiff", dtype="float32", width=width, height=height, count=1, crs=crs,
                   transform=transform, nodata=NODATA, tiled=True, blockxsize=BLOCK, blockysize=BLOCK,
                   compress="deflate", predictor=3)
    with atomic_path(path, suffix=".tif") as tmp:  # temporaries carry peatburn's marker (io.writers)
        with rasterio.open(tmp, "w", **profile) as ds:
            ds.write(data, 1)
            ds.units = (units,)
            ds.set_band_description(1, description)
            ds.update_tags(units=units, source="peatburn demo (synthetic, invented)")


def _write_vector(path: Path, gdf, layer: str):
    with atomic_path(path, tail=".part.gpkg") as tmp:
        tmp.unlink()  # the GeoPackage driver creates its own file
        gdf.to_file(tmp, layer=layer, driver="GPKG", engine="pyogrio")


def _write_text(path: Path, text: str):
    write_text(path, text)


def _zones_and_draws(dossiers: bool) -> str:
    """The zone layers and draws of both demo years (one method across the series); the first year
    also writes a dossier per burned concession."""
    dossier = "dossiers = true                     # one hand-over page per burned concession: dossiers/<name>.html\n"
    return f'''[[zones]]
path = "concessions.gpkg"
id = "name"
{dossier if dossiers else ""}
[[zones]]
path = "districts.gpkg"
id = "district"

[uncertainty]
draws = 2000
seed = 1
'''


def _config_text() -> str:
    return f'''# Run configuration of the peatburn demo region (generated by `peatburn demo`).
# Every name and number in this region is invented; see README.md and truth.json.
# Paths are relative to this file.

[run]
name = "Demo: {REGION_NAME} peat fires (synthetic)"
year = 2031

[burned_area]
path = "scars.gpkg"
fire_count_field = "fire_count"     # 1 first fire, 2 repeat fire: separate depth models when data allow

[depth.survey]
pre = "survey_pre.tif"
post = "survey_post.tif"
interval_years = {INTERVAL_YEARS}
subsidence_rate = "subsidence_rate.tif"

[depth.water_table]                 # burn depth where the post-fire survey does not reach
depth = "water_table.tif"           # m below the surface at fire time
model = "fit"                       # fitted on the surveyed scars

[depth.plots]                       # field plots: validate every depth method
path = "field_plots.csv"
crs = "EPSG:{CRS_EPSG}"

[flaming]                           # above-ground, reported apart from the smouldering peat
detections = "detections.csv"
crs = "EPSG:{CRS_EPSG}"

[peat]
thickness = "peat_thickness.tif"
bulk_density = {{ raster = "bulk_density.tif", units = "g/cm^3" }}
carbon_fraction = {CARBON_FRACTION}        # the demo generator's own invented value (not a published constant)

[emission_factors]
smouldering = "{SMOULDERING_SET}"   # Akagi et al. (2011) peatland factors, a built-in set
gwp = "AR6"

''' + _zones_and_draws(dossiers=True)


# ------------------------------------------------------------------------------------------------
# Truth


def _sums(mask: np.ndarray, depth: np.ndarray, bd: np.ndarray, pixel_area: float) -> dict:
    """Burned area, volume, dry mass and carbon over ``mask`` (float64 accumulation)."""
    d = depth[mask].astype("float64")
    b = bd[mask].astype("float64")
    n = int(mask.sum())
    area_m2 = n * pixel_area
    volume = float(np.sum(d) * pixel_area)                 # [m^3]
    mass = float(np.sum(d * b) * pixel_area)               # [m * g/cm^3 * m^2] = [m^3 * t/m^3] = [t]
    return {
        "n_pixels": n,
        "burned_area_ha": area_m2 / 1e4,
        "burned_volume_m3": volume,
        "mean_burn_depth_m": volume / area_m2 if n else 0.0,
        "peat_burned_t": mass,
        "carbon_smouldering_t": mass * CARBON_FRACTION,
    }


# ------------------------------------------------------------------------------------------------


def make_demo_region(folder: str | Path, *, shape: tuple[int, int] = (1200, 1500), pixel_size: float = 2.0,
                     seed: int = 20310, with_gap: bool = True) -> DemoRegion:
    """Write the invented demo region into ``folder`` and return where its files are.

    Parameters
    ----------
    folder : str or pathlib.Path
        Output folder; created if missing. The demo's own files in it are overwritten.
    shape : tuple of int
        Grid size (rows, columns) [px]. The scenario scales with the region: at the default
        (1200, 1500) and 2 m pixels the region is 3.0 km x 2.4 km (720 ha) and scars are 5-40 ha.
        Small shapes such as (200, 240) give a miniature of the same scenario, for tests.
    pixel_size : float
        Pixel size [m].
    seed : int
        Seed of the :class:`numpy.random.Generator` that draws every random quantity.
    with_gap : bool
        Leave the easternmost scar without post-fire survey coverage.

    Returns
    -------
    DemoRegion
        ``config_path`` (``config.toml``), ``truth`` (the content of ``truth.json``) and ``folder``.

    Notes
    -----
    The truth is computed on the true (unshifted, noise-free) fields of the run grid, with scar and
    zone masks rasterized by the pixel-centre rule (``rasterio.features.rasterize`` default).
    Dry mass [t] = sum(depth [m] x bulk density [g/cm^3 = t/m^3] x pixel area [m^2]) with the
    burn depth capped by the peat thickness; carbon [t] = dry mass x carbon fraction (the approach
    of Page et al. 2002, Nature 420:61).
    """
    import geopandas as gpd
    import pandas as pd
    import rasterio.features
    from affine import Affine
    from rasterio.crs import CRS
    from scipy.ndimage import distance_transform_edt
    from scipy.ndimage import shift as nd_shift
    from shapely.geometry import LineString, Polygon, box
    from shapely.ops import split

    rows, cols = (int(v) for v in shape)
    if rows < MIN_SIDE_PX or cols < MIN_SIDE_PX:
        raise ConfigError(f"demo: shape {tuple(shape)} is too small for the demo region; "
                          f"use at least ({MIN_SIDE_PX}, {MIN_SIDE_PX}) pixels")
    ps = float(pixel_size)
    if not (math.isfinite(ps) and ps > 0):
        raise ConfigError(f"demo: pixel_size must be a positive number of metres, got {pixel_size!r}")
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)

    crs = CRS.from_epsg(CRS_EPSG)
    x_left, y_top = ORIGIN_XY
    transform = Affine(ps, 0.0, x_left, 0.0, -ps, y_top)   # north-up grid, origin at the upper-left corner
    width_m, height_m = cols * ps, rows * ps
    y_bottom = y_top - height_m
    scale = math.sqrt(width_m * height_m)          # length scale of the scenario [m]
    region_area = width_m * height_m
    pixel_area = ps * ps

    def at(fx, fy):  # fractions of width (from west) and height (from south) -> metres
        return x_left + fx * width_m, y_bottom + fy * height_m

    # pixel-centre coordinates, relative to the region's south-west corner [m] (float64, broadcast)
    xr = ((np.arange(cols) + 0.5) * ps)[None, :]
    yr = (height_m - (np.arange(rows) + 0.5) * ps)[:, None]

    # --- 1. mineral base and peat dome ---------------------------------------------------------
    base = 3.0 - 1.2 * xr / width_m - 0.6 * yr / height_m + 0.25 * _smooth_field(rng, xr, yr, scale)
    cx, cy, ax, ay = 0.45 * width_m, 0.52 * height_m, 0.50 * width_m, 0.56 * height_m
    dome = np.clip(1.0 - ((xr - cx) / ax) ** 2 - ((yr - cy) / ay) ** 2, 0.0, 1.0)
    vary = 1.0 + 0.05 * _smooth_field(rng, xr, yr, scale)
    thickness = (THICKNESS_EDGE_M + (THICKNESS_CENTRE_M - THICKNESS_EDGE_M) * dome * vary).astype("float32")
    del dome, vary

    # --- 2. canals -----------------------------------------------------------------------------
    canals = []
    d_canal = np.full((rows, cols), np.inf)
    canal_dep = np.zeros((rows, cols))
    half_w = 0.5 * CANAL_WIDTH_PX * ps
    for (f0, f1) in _CANALS:
        j = rng.uniform(-0.02, 0.02, 4)             # jitter of the end points (fractions of the region)
        p0 = (min(max(f0[0] + j[0], 0.0), 1.0) * width_m, min(max(f0[1] + j[1], 0.0), 1.0) * height_m)
        p1 = (min(max(f1[0] + j[2], 0.0), 1.0) * width_m, min(max(f1[1] + j[3], 0.0), 1.0) * height_m)
        depth_c = rng.uniform(*CANAL_DEPTH_RANGE)
        d = _distance_to_segment(xr, yr, p0, p1)
        canal_dep = np.where(d <= half_w, np.maximum(canal_dep, depth_c), canal_dep)
        np.minimum(d_canal, d, out=d_canal)
        canals.append({"x0": x_left + p0[0], "y0": y_bottom + p0[1], "x1": x_left + p1[0], "y1": y_bottom + p1[1],
                       "width_m": 2 * half_w, "depth_m": depth_c})
    canal = canal_dep > 0
    micro = _correlated_noise(rng, (rows, cols), MICRO_RELIEF_SD_M, MICRO_RELIEF_SIGMA_PX)
    surface = base + thickness + micro - canal_dep  # true surface [m]
    del base, canal_dep, micro

    # --- 5, 6, 8. subsidence, bulk density, water table -----------------------------------------
    subs = SUBSIDENCE_RANGE[0] + (SUBSIDENCE_RANGE[1] - SUBSIDENCE_RANGE[0]) * np.exp(-d_canal / (0.06 * scale))
    subs = np.clip(subs + 0.003 * _smooth_field(rng, xr, yr, scale), *SUBSIDENCE_RANGE).astype("float32")
    bd = (BULK_DENSITY_RANGE[0] + (BULK_DENSITY_RANGE[1] - BULK_DENSITY_RANGE[0])
          * 0.5 * (1.0 + _smooth_field(rng, xr, yr, scale, wavelengths=(0.5, 1.5)))).astype("float32")
    wt = 0.25 + 0.65 * np.exp(-d_canal / (0.08 * scale)) + 0.10 * _smooth_field(rng, xr, yr, scale)
    wt = np.clip(wt, 0.05, 1.2).astype("float32")
    del d_canal

    # --- 7. burn scars -------------------------------------------------------------------------
    gap_x = x_left + GAP_X_FRACTION * width_m
    region_inner = box(x_left + 0.02 * width_m, y_bottom + 0.02 * height_m,
                       x_left + 0.98 * width_m, y_top - 0.04 * height_m)
    spacing = 0.02 * scale
    scar_polys, island_polys = [], []
    for i, spec in enumerate(_SCARS):
        in_gap = spec.get("gap", False)
        for attempt in range(200):
            poly = _blob(rng, *at(spec["fx"], spec["fy"]), spec["area"] * region_area)
            ok = region_inner.contains(poly) and all(poly.distance(q) > spacing for q in scar_polys)
            minx, _, maxx, _ = poly.bounds
            ok = ok and ((minx > gap_x + spacing) if in_gap else (maxx < gap_x - spacing))
            if ok:
                break
        else:  # pragma: no cover - the layout leaves ample room
            raise RuntimeError(f"could not place scar {i + 1} for seed {seed}")
        scar_polys.append(poly)
        if spec["island"]:
            inner = poly.buffer(-0.25 * math.sqrt(poly.area))
            isl_area = rng.uniform(0.02, 0.035) * poly.area
            for attempt in range(200):
                c = _random_points_in(rng, inner, 1)[0] if not inner.is_empty else poly.centroid.coords[0]
                isl = _blob(rng, c[0], c[1], isl_area, n=48, roughness=0.7)
                if poly.buffer(-(MARGIN_PX + 2) * ps).contains(isl):
                    break
            else:  # pragma: no cover
                raise RuntimeError(f"could not place an island in scar {i + 1} for seed {seed}")
            island_polys.append((i, isl))
    scar_ids = [f"{SCAR_ID_PREFIX}{i + 1:02d}" for i in range(len(scar_polys))]

    start0 = dt.date(2031, 8, 1)
    fire_start, fire_end, fire_count = [], [], []
    for _ in scar_polys:
        s = start0 + dt.timedelta(days=int(rng.integers(0, 55)))
        e = min(s + dt.timedelta(days=int(rng.integers(6, 31))), dt.date(2031, 10, 31))
        fire_start.append(s)
        fire_end.append(e)
        fire_count.append(int(rng.choice([1, 2], p=[0.65, 0.35])))
    if len(set(fire_count)) == 1:  # show both values
        fire_count[-1] = 3 - fire_count[-1]

    scar_label = rasterio.features.rasterize(
        [(p, i + 1) for i, p in enumerate(scar_polys)], out_shape=(rows, cols), transform=transform,
        fill=0, dtype="uint8")
    in_scar = scar_label > 0
    island = rasterio.features.rasterize([(p, 1) for _, p in island_polys], out_shape=(rows, cols),
                                         transform=transform, fill=0, dtype="uint8").astype(bool) & in_scar
    # distance [px] to the nearest pixel outside the scar or on an island
    dist_px = distance_transform_edt(in_scar & ~island)
    margin = in_scar & ~island & (dist_px <= MARGIN_PX)
    del dist_px

    wt_noise = _correlated_noise(rng, (rows, cols), WT_NOISE_SD, 1.5)
    core = np.clip(WT_A + WT_B * wt + wt_noise, *CORE_DEPTH_RANGE).astype("float32")
    thin = rng.uniform(*MARGIN_DEPTH_RANGE, size=(rows, cols)).astype("float32")
    raw = np.where(margin, thin, core)
    raw = np.where(in_scar & ~island & ~canal, raw, np.float32(0.0)).astype("float32")
    depth = np.minimum(raw, thickness)               # true burn depth, capped by the peat [m]
    capped = in_scar & (raw > thickness)
    del core, thin, wt_noise

    # --- 3, 4. surveys -------------------------------------------------------------------------
    pre = (surface + _correlated_noise(rng, (rows, cols), NOISE_SD_M, NOISE_CORR_PX)).astype("float32")
    n_strip = max(2, int(round(0.01 * rows)))
    pre[:n_strip, :] = np.nan                        # no data along the north edge

    post_true = surface - subs * INTERVAL_YEARS - depth + DATUM_OFFSET_M
    # post(X) = post_true(X - s): content displaced by s = (east, north); rows count southwards
    shift_px = (-POST_SHIFT_M[1] / ps, POST_SHIFT_M[0] / ps)
    post = nd_shift(post_true, shift_px, order=3, mode="nearest")   # cubic spline: sub-pixel resampling
    src_r = np.arange(rows) - shift_px[0]
    src_c = np.arange(cols) - shift_px[1]
    post[(src_r < 0) | (src_r > rows - 1), :] = np.nan   # source outside the region: no data
    post[:, (src_c < 0) | (src_c > cols - 1)] = np.nan
    post = (post + _correlated_noise(rng, (rows, cols), NOISE_SD_M, NOISE_CORR_PX)).astype("float32")
    del post_true
    x_centres = x_left + (np.arange(cols) + 0.5) * ps
    gap_cols = x_centres >= gap_x
    if with_gap:
        post[:, gap_cols] = np.nan

    # --- write rasters -------------------------------------------------------------------------
    rasters = (
        ("peat_thickness.tif", thickness, "m", "peat thickness [m]"),
        ("survey_pre.tif", pre, "m", "pre-fire bare-earth elevation [m]"),
        ("survey_post.tif", post, "m", "post-fire bare-earth elevation [m], 3 years later"),
        ("subsidence_rate.tif", subs, "m/yr", "peat subsidence rate [m/yr]"),
        ("bulk_density.tif", bd, "g/cm^3", "dry bulk density of the peat [g/cm^3]"),
        ("water_table.tif", wt, "m", "water-table depth below the surface at fire time [m], positive down"),
        ("truth_burn_depth.tif", depth, "m", "TRUE burn depth [m] (for checking only, not an input)"),
    )
    for name, arr, units, desc in rasters:
        _write_raster(folder / name, arr, transform, crs, units=units, description=desc)
    del pre, post, surface

    # --- vectors -------------------------------------------------------------------------------
    scars_gdf = gpd.GeoDataFrame(
        {"scar_id": scar_ids, "fire_start": [_iso(d) for d in fire_start],
         "fire_end": [_iso(d) for d in fire_end], "fire_count": np.array(fire_count, dtype="int32")},
        geometry=scar_polys, crs=crs.to_wkt())
    _write_vector(folder / "scars.gpkg", scars_gdf, "scars")

    conc_polys = [Polygon([at(fx, fy) for fx, fy in ring]) for _, ring in _CONCESSIONS]
    conc_names = [n for n, _ in _CONCESSIONS]
    _write_vector(folder / "concessions.gpkg",
                  gpd.GeoDataFrame({"name": conc_names}, geometry=conc_polys, crs=crs.to_wkt()), "concessions")

    border = LineString([at(fx, fy) for fx, fy in _DISTRICT_BORDER])
    extended = LineString([(border.coords[0][0], border.coords[0][1] + ps)] + list(border.coords)
                          + [(border.coords[-1][0], border.coords[-1][1] - ps)])
    region_box = box(x_left, y_bottom, x_left + width_m, y_top)
    parts = sorted(split(region_box, extended).geoms, key=lambda g: g.centroid.x)
    if len(parts) != 2:  # pragma: no cover
        raise RuntimeError("district border did not split the region in two")
    _write_vector(folder / "districts.gpkg",
                  gpd.GeoDataFrame({"district": list(_DISTRICT_NAMES)}, geometry=parts, crs=crs.to_wkt()),
                  "districts")

    # --- 10. active-fire detections ------------------------------------------------------------
    det_rows = []
    total_scar_area = sum(p.area for p in scar_polys)
    for i, p in enumerate(scar_polys):
        n = max(3, int(round(48 * p.area / total_scar_area)))
        pts = _random_points_in(rng, p, n)
        t0 = dt.datetime.combine(fire_start[i], dt.time(0, 0), tzinfo=dt.timezone.utc)
        span = (fire_end[i] - fire_start[i]).days * 86400 + 86399
        secs = np.sort(rng.integers(0, span, n))
        frp = np.clip(rng.lognormal(math.log(12.0), 0.8, n), 2.0, 300.0)
        for (x, y), s, f in zip(pts, secs, frp):
            t = t0 + dt.timedelta(seconds=int(s) // 60 * 60)
            det_rows.append({"x": round(float(x), 1), "y": round(float(y), 1),
                             "time": t.strftime("%Y-%m-%dT%H:%M:%SZ"), "frp_mw": round(float(f), 1)})
    det = pd.DataFrame(det_rows, columns=["x", "y", "time", "frp_mw"]).sort_values("time", kind="stable")
    _write_text(folder / "detections.csv", det.to_csv(index=False, lineterminator="\n"))

    # --- 11. field plots -----------------------------------------------------------------------
    plot_rows, plot_truth = [], []
    k = 0
    for i, p in enumerate(scar_polys):
        n = 4 if p.area >= np.median([q.area for q in scar_polys]) else 3
        pts = _random_points_in(rng, p, n)
        for x, y in pts:
            r_i = min(rows - 1, int((y_top - y) // ps))
            c_i = min(cols - 1, int((x - x_left) // ps))
            true_d = float(depth[r_i, c_i])
            meas = max(0.0, true_d + rng.normal(0.0, 0.03))
            k += 1
            pid = f"P{k:02d}"
            date = fire_end[i] + dt.timedelta(days=int(rng.integers(14, 41)))
            plot_rows.append({"plot_id": pid, "x": round(float(x), 1), "y": round(float(y), 1),
                              "date": _iso(date), "burn_depth_m": round(meas, 3)})
            plot_truth.append({"plot_id": pid, "scar_id": scar_ids[i], "row": r_i, "col": c_i,
                               "true_burn_depth_m": true_d})
    plots = pd.DataFrame(plot_rows, columns=["plot_id", "x", "y", "date", "burn_depth_m"])
    _write_text(folder / "field_plots.csv", plots.to_csv(index=False, lineterminator="\n"))

    # --- 13. truth -----------------------------------------------------------------------------
    per_scar = {}
    for i, sid in enumerate(scar_ids):
        m = scar_label == i + 1
        rec = _sums(m, depth, bd, pixel_area)
        rec.update(fire_start=_iso(fire_start[i]), fire_end=_iso(fire_end[i]), fire_count=fire_count[i],
                   polygon_area_ha=scar_polys[i].area / 1e4, capped_pixels=int((capped & m).sum()),
                   island_pixels=int((island & m).sum()), margin_pixels=int((margin & m).sum()),
                   canal_pixels=int((canal & m).sum()),
                   covered_by_post_survey=not (with_gap and _SCARS[i].get("gap", False)))
        per_scar[sid] = rec

    zones, outside, overlaps = {}, {}, {}
    for layer, names, polys in (("concessions", conc_names, conc_polys), ("districts", list(_DISTRICT_NAMES), parts)):
        zones[layer] = {}
        n_zones = np.zeros((rows, cols), dtype="uint8")
        for name, poly in zip(names, polys):
            zm = rasterio.features.rasterize([(poly, 1)], out_shape=(rows, cols), transform=transform,
                                             fill=0, dtype="uint8").astype(bool)
            n_zones += zm
            zones[layer][name] = _sums(in_scar & zm, depth, bd, pixel_area)
        outside[layer] = _sums(in_scar & (n_zones == 0), depth, bd, pixel_area)
        overlaps[layer] = _sums(in_scar & (n_zones > 1), depth, bd, pixel_area)

    gap_scar = np.isin(scar_label, [i + 1 for i, s in enumerate(_SCARS) if s.get("gap", False)]) & with_gap
    truth = {
        "about": ("True answer of the invented peatburn demo region. Every name and number is invented; "
                  "no real place, company or person is represented. Computed on the true (unshifted, "
                  "noise-free) fields; masks by the pixel-centre rule."),
        "generator": {"function": "peatburn.demo.make_demo_region", "seed": int(seed), "shape": [rows, cols],
                      "pixel_size_m": ps, "with_gap": bool(with_gap)},
        "grid": {"crs": f"EPSG:{CRS_EPSG}", "transform": list(transform)[:6], "width": cols, "height": rows,
                 "pixel_area_m2": pixel_area, "bounds": [x_left, y_bottom, x_left + width_m, y_top]},
        "units": {"burned_area_ha": "ha", "burned_volume_m3": "m^3", "mean_burn_depth_m": "m",
                  "peat_burned_t": "t dry peat", "carbon_smouldering_t": "t C"},
        "survey": {
            "interval_years": INTERVAL_YEARS,
            "datum_offset_m": DATUM_OFFSET_M,
            "post_displacement_m": {"east": POST_SHIFT_M[0], "north": POST_SHIFT_M[1],
                                    "meaning": "a feature at true (x, y) appears in survey_post.tif at "
                                               "(x + east, y + north); survey_post.tif is on the same pixel "
                                               "grid as survey_pre.tif"},
            "post_displacement_px": {"col": POST_SHIFT_M[0] / ps, "row": -POST_SHIFT_M[1] / ps},
            "correction": {"shift_x_m": -POST_SHIFT_M[0], "shift_y_m": -POST_SHIFT_M[1],
                           "shift_z_m": -DATUM_OFFSET_M,
                           "meaning": "add shift_x/shift_y to the post survey's geotransform origin and "
                                      "shift_z to its elevations (after removing subsidence) to align it"},
            "noise_sd_m": {"pre": NOISE_SD_M, "post": NOISE_SD_M},
            "noise_correlation_sigma_px": NOISE_CORR_PX,
            "pre_nodata_rows_north": n_strip,
            "post_gap": ({"x_min_m": gap_x, "description": "no post-fire data east of x_min_m",
                          "scars": [sid for sid, s in zip(scar_ids, _SCARS) if s.get("gap", False)]}
                         if with_gap else None),
            "post_edge_nodata": "pixels whose shifted source lies outside the region are nodata",
            "subsidence_rate_m_per_yr": {"min": float(subs.min()), "max": float(subs.max()),
                                         "mean": float(subs.mean(dtype="float64"))},
            "subsidence_over_interval_m": {"min": float(subs.min()) * INTERVAL_YEARS,
                                           "max": float(subs.max()) * INTERVAL_YEARS},
            "post_model": "post = (true surface - subsidence_rate * interval - burn_depth + datum_offset) "
                          "displaced by post_displacement_m (cubic-spline resampling), + noise",
        },
        "peat": {"carbon_fraction": CARBON_FRACTION,
                 "carbon_fraction_basis": "the demo generator's own invented value",
                 "bulk_density_g_cm3": {"min": float(bd.min()), "max": float(bd.max())},
                 "thickness_m": {"min": float(thickness.min()), "max": float(thickness.max())},
                 "thickness_note": "peat_thickness.tif is the peat body as a thickness map shows it; "
                                   "canals are not cut out of it"},
        "burn": {"core_depth_clip_m": list(CORE_DEPTH_RANGE), "margin_px": MARGIN_PX,
                 "margin_depth_m": list(MARGIN_DEPTH_RANGE), "canal_pixels_burn": 0.0,
                 "islands": [{"scar_id": scar_ids[i], "area_ha": p.area / 1e4} for i, p in island_polys],
                 "capped_pixels": int(capped.sum()),
                 "max_depth_m": float(depth.max()),
                 "fire_count_note": "a second fire in the season does not change the burn depth here"},
        "water_table": {"relation": "burn_depth_m = a + b * water_table_m + e, e ~ N(0, noise_sd_m) "
                                    "(spatially correlated, gaussian sigma 1.5 px)",
                        "a": WT_A, "b": WT_B, "noise_sd_m": WT_NOISE_SD,
                        "applies_to": "scar pixels outside margins, islands and canals, before the clip "
                                      "to core_depth_clip_m and the cap by the peat thickness",
                        "water_table_m": {"min": float(wt.min()), "max": float(wt.max())}},
        "canals": canals,
        "totals": _sums(in_scar, depth, bd, pixel_area),
        "by_coverage": {"surveyed": _sums(in_scar & ~gap_scar, depth, bd, pixel_area),
                        "survey_gap": _sums(gap_scar, depth, bd, pixel_area)},
        "scars": per_scar,
        "zones": zones,
        "zone_id_fields": {"concessions": "name", "districts": "district"},
        "outside_zones": outside,
        "zone_overlaps": overlaps,
        "zone_note": ("zones of one layer may overlap (each zone counts its own pixels), so a layer's zones "
                      "sum to totals - outside_zones + the double-counted zone_overlaps (exact when no "
                      "pixel lies in more than two zones)"),
        "field_plots": plot_truth,
        "detections": {"count": len(det_rows)},
    }
    truth["second_year"] = _second_year(folder, seed, transform, crs, scar_polys, region_inner, spacing, at,
                                        region_area, thickness, depth, wt, bd, canal, pixel_area)
    _write_text(folder / "truth.json", json.dumps(truth, indent=2, allow_nan=False) + "\n")
    config_path = folder / "config.toml"
    _write_text(config_path, _config_text())
    _write_text(folder / f"config_{SECOND_YEAR}.toml", _second_config_text())
    _write_text(folder / "series.toml", _series_text())
    return DemoRegion(config_path=config_path, truth=truth, folder=folder)


def _second_year(folder, seed, transform, crs, scars_2031, region_inner, spacing, at, region_area, thickness,
                 depth_2031, wt, bd, canal, pixel_area) -> dict:
    """Write the invented second fire year (scars, water table, true depth) and return its truth.

    Its own random generator (``seed + 1``), so the first year's files do not change. The true depth
    is ``clip(WT_A + WT_B w + noise, CORE_DEPTH_RANGE)`` on the year's water table, capped by the peat
    the 2031 fires left (thickness - 2031 burn depth): the fire history a series applies.
    """
    import geopandas as gpd
    import rasterio.features

    rng = np.random.default_rng(int(seed) + 1)
    rows, cols = depth_2031.shape
    polys = []
    for spec in _SCARS_2032:
        if "over" in spec:
            c = scars_2031[spec["over"]].centroid
            x_left, y_bottom = at(0.0, 0.0)
            x1, y1 = at(1.0, 1.0)
            cx, cy = c.x + spec["dfx"] * (x1 - x_left), c.y + spec["dfy"] * (y1 - y_bottom)
        else:
            cx, cy = at(spec["fx"], spec["fy"])
        for _ in range(200):
            poly = _blob(rng, cx, cy, spec["area"] * region_area)
            if region_inner.contains(poly) and all(poly.distance(q) > spacing for q in polys):
                break
        else:  # pragma: no cover - the layout leaves ample room
            raise RuntimeError(f"could not place a {SECOND_YEAR} scar for seed {seed}")
        polys.append(poly)
    ids = [f"{SCAR_ID_PREFIX}{SECOND_YEAR}-{i + 1:02d}" for i in range(len(polys))]
    start0 = dt.date(SECOND_YEAR, 8, 10)
    starts = [start0 + dt.timedelta(days=int(rng.integers(0, 40))) for _ in polys]
    ends = [min(s + dt.timedelta(days=int(rng.integers(6, 25))), dt.date(SECOND_YEAR, 10, 31)) for s in starts]
    _write_vector(folder / f"scars_{SECOND_YEAR}.gpkg", gpd.GeoDataFrame(
        {"scar_id": ids, "fire_start": [_iso(d) for d in starts], "fire_end": [_iso(d) for d in ends]},
        geometry=polys, crs=crs.to_wkt()), "scars")
    wt2 = np.clip(wt + SECOND_YEAR_WT_OFFSET_M + _correlated_noise(rng, (rows, cols), 0.03, 3.0), 0.05, 1.3)
    wt2 = wt2.astype("float32")
    label = rasterio.features.rasterize([(p, i + 1) for i, p in enumerate(polys)], out_shape=(rows, cols),
                                        transform=transform, fill=0, dtype="uint8")
    in_scar = label > 0
    core = np.clip(WT_A + WT_B * wt2 + _correlated_noise(rng, (rows, cols), WT_NOISE_SD, 1.5), *CORE_DEPTH_RANGE)
    left = np.maximum(thickness.astype("float64") - depth_2031, 0.0)   # peat left after the 2031 fires
    depth = np.where(in_scar & ~canal, np.minimum(core, left), 0.0).astype("float32")
    _write_raster(folder / f"water_table_{SECOND_YEAR}.tif", wt2, transform, crs, units="m",
                  description=f"water-table depth below the surface at the {SECOND_YEAR} fires [m], positive down")
    _write_raster(folder / f"truth_burn_depth_{SECOND_YEAR}.tif", depth, transform, crs, units="m",
                  description=f"TRUE burn depth of {SECOND_YEAR} [m] (for checking only, not an input)")
    burned_before = in_scar & (depth_2031 > 0)
    return {
        "year": SECOND_YEAR,
        "relation": "burn_depth_m = clip(a + b * water_table_m + e, core_depth_clip_m), capped by the peat left "
                    "after the 2031 fires (thickness - 2031 burn depth); no margins",
        "scars": {sid: {"fire_start": _iso(s), "fire_end": _iso(e), **_sums(label == i + 1, depth, bd, pixel_area)}
                  for i, (sid, s, e) in enumerate(zip(ids, starts, ends))},
        "overlap_with_2031": {"n_pixels": int(burned_before.sum()),
                              "pixels_with_no_peat_left": int((burned_before & (left <= 0)).sum()),
                              "carbon_smouldering_t": _sums(burned_before, depth, bd, pixel_area)["carbon_smouldering_t"],
                              "carbon_without_history_t": _sums(burned_before, np.where(
                                  in_scar & ~canal, np.minimum(core, thickness), 0.0), bd, pixel_area)[
                                  "carbon_smouldering_t"]},
        "totals": _sums(in_scar, depth, bd, pixel_area),
    }


def _second_config_text() -> str:
    return f'''# Second fire year of the peatburn demo region (generated by `peatburn demo`); invented throughout.
# No new survey: the burn depth comes from the water table at the {SECOND_YEAR} fires with the relation
# stated below (the demo generator's own invented relation, standing in for one calibrated on an
# earlier year's surveys). Run it with the first year as a series: series.toml.

[run]
name = "Demo: {REGION_NAME} peat fires {SECOND_YEAR} (synthetic)"
year = {SECOND_YEAR}

[burned_area]
path = "scars_{SECOND_YEAR}.gpkg"   # no fire count: the series gives the repeat-fire status

[depth.water_table]
depth = "water_table_{SECOND_YEAR}.tif"
intercept = {WT_A}
slope = {WT_B}

[peat]
thickness = "peat_thickness.tif"    # before the first year of the series: the series subtracts earlier burns
bulk_density = {{ raster = "bulk_density.tif", units = "g/cm^3" }}
carbon_fraction = {CARBON_FRACTION}

[emission_factors]
smouldering = "{SMOULDERING_SET}"
gwp = "AR6"

''' + _zones_and_draws(dossiers=False)


def _series_text() -> str:
    return f'''# The demo's two fire years as one series (`peatburn series series.toml --out DIR`); invented throughout.

[series]
name = "Demo: {REGION_NAME} peat fires 2031-{SECOND_YEAR} (synthetic)"

[shared]
emission_factors = {{ smouldering = "{SMOULDERING_SET}", gwp = "AR6" }}

[[runs]]
config = "config.toml"

[[runs]]
config = "config_{SECOND_YEAR}.toml"
'''
