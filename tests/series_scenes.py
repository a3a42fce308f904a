"""Tiny two-year scenes with a known truth for the series tests (invented data, tests only).

A 40 x 50 grid of 10 m pixels off land (conftest's X0, Y0). No survey: the burn depth comes from a
stated water-table model d = a + b w on a constant water-table raster, capped by a constant peat
thickness, so every year's true depth is known by hand. Scars are boxes on pixel edges, so their
pixel counts are exact.
"""

from __future__ import annotations

import json
from pathlib import Path

import geopandas as gpd
import numpy as np
import shapely
from rasterio.transform import from_origin

from conftest import EPSG, X0, Y0, write_tif

PIXEL = 10.0
SHAPE = (40, 50)
BULK_DENSITY = 0.1  # g cm-3
CARBON_FRACTION = 0.5


def box(c0, r0, c1, r1):
    """Box covering columns c0..c1-1 and rows r0..r1-1 of the grid."""
    return shapely.box(X0 + c0 * PIXEL, Y0 - r1 * PIXEL, X0 + c1 * PIXEL, Y0 - r0 * PIXEL)


def make_year(folder: Path, year: int, scars: list, *, wt=0.6, thickness=0.5, intercept=0.1, slope=0.5,
              draws=0, seed=1, extra="", model_file: dict | None = None, gwp="AR6",
              smouldering="smouldering_akagi2011", fire_counts=None, dates=None) -> Path:
    """Write one year's inputs and config.toml into ``folder``; returns the config path."""
    folder.mkdir(parents=True, exist_ok=True)
    t = from_origin(X0, Y0, PIXEL, PIXEL)
    write_tif(folder / "water_table.tif", np.full(SHAPE, wt), t)
    write_tif(folder / "thickness.tif", np.full(SHAPE, thickness), t)
    cols = {"fire": [f"{year}-{i}" for i in range(len(scars))]}
    if fire_counts is not None:
        cols["times_burned"] = fire_counts
    if dates is not None:  # (first, last) day of burning of each scar, ISO dates
        cols["fire_start"] = [a for a, _ in dates]
        cols["fire_end"] = [b for _, b in dates]
    gpd.GeoDataFrame(cols, geometry=scars, crs=f"EPSG:{EPSG}").to_file(folder / "scars.gpkg", driver="GPKG")
    if model_file is not None:
        (folder / "model.json").write_text(json.dumps({"models": model_file}))
        model = 'model = "model.json"'
    else:
        model = f"intercept = {intercept}\nslope = {slope}"
    count = 'fire_count_field = "times_burned"\n' if fire_counts is not None else ""
    text = f"""[run]
name = "tiny {year}"
year = {year}
block_size = 32

[burned_area]
path = "scars.gpkg"
{count}
[depth.water_table]
depth = "water_table.tif"
{model}

[peat]
thickness = "thickness.tif"
bulk_density = "{BULK_DENSITY} g/cm^3"
carbon_fraction = {CARBON_FRACTION}

[emission_factors]
smouldering = "{smouldering}"
gwp = "{gwp}"

[uncertainty]
draws = {draws}
seed = {seed}
{extra}
"""
    (folder / "config.toml").write_text(text)
    return folder / "config.toml"


def carbon_t(depth_pixels: dict) -> float:
    """Carbon [t] of pixels by depth: ``{depth_m: n_pixels}`` (hand arithmetic: d A rho f)."""
    return sum(d * n * PIXEL * PIXEL * BULK_DENSITY * 1000 * CARBON_FRACTION for d, n in depth_pixels.items()) / 1000


def write_series(folder: Path, years: dict, extra: str = "") -> Path:
    """SERIES.toml listing ``{year: config path}``."""
    text = '[series]\nname = "tiny series"\n' + extra + "\n"
    for y, p in years.items():
        text += f'[[runs]]\nconfig = "{Path(p).relative_to(folder).as_posix()}"\n\n'
    (folder / "SERIES.toml").write_text(text)
    return folder / "SERIES.toml"
