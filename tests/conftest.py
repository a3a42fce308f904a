"""Synthetic scenes with known truth, made in fixtures (invented data, for tests only).

A scene is an analytic terrain z(x, y) with texture, surveyed twice: the post-fire survey has a
datum offset, a horizontal georeferencing error, subsidence, noise and burn depth inside
rectangular or circular scars (with an unburned island and a thin-peat corner).
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path

import geopandas as gpd
import numpy as np
import pytest
import rasterio
import shapely
from rasterio.transform import from_origin

EPSG = 32749
X0, Y0 = 500_000.0, 8_650_000.0  # about 12.2 deg S, 111 deg E: open Indian Ocean, not land (test_demo.py checks)


def terrain(x, y):
    """Textured terrain [m]: a gentle dome with ripples of 20-90 m wavelength (slopes in all aspects)."""
    return (8.0 + 0.004 * (x - X0) - 0.002 * (y - Y0)
            + 0.6 * np.sin((x - X0) / 14.0) * np.cos((y - Y0) / 11.0)
            + 0.4 * np.sin((x - X0 + y - Y0) / 9.0))


@dataclass
class Scene:
    folder: Path
    config: Path
    truth: dict
    shape: tuple
    pixel: float


def write_tif(path, arr, transform, nodata=-9999.0, crs=EPSG):
    a = np.where(np.isfinite(arr), arr, nodata).astype("float32")
    with rasterio.open(path, "w", driver="GTiff", width=a.shape[1], height=a.shape[0], count=1, dtype="float32",
                       crs=f"EPSG:{crs}" if crs else None, transform=transform, nodata=nodata, tiled=True,
                       blockxsize=64, blockysize=64) as ds:
        ds.write(a, 1)


def make_scene(folder: Path, *, shape=(240, 300), pixel=2.0, noise=0.05, offset=0.35, shift=(1.3, -0.8),
               subsidence=0.03, interval=3.0, depth=0.4, seed=0, thickness_min=0.25,
               extra_config: str = "", zones=True) -> Scene:
    """Write a synthetic scene and its config.toml; return the truth.

    Scars: A (rectangle, burn ``depth`` with a 20 m unburned island), B (disc, burn 0.6*depth,
    partly on thin peat of ``thickness_min`` m where the burn is capped).
    """
    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    h, w = shape
    t = from_origin(X0, Y0, pixel, pixel)
    cols, rows = np.meshgrid(np.arange(w) + 0.5, np.arange(h) + 0.5)
    x = X0 + cols * pixel
    y = Y0 - rows * pixel
    width_m, height_m = w * pixel, h * pixel
    scar_a = shapely.box(X0 + 0.15 * width_m, Y0 - 0.55 * height_m, X0 + 0.45 * width_m, Y0 - 0.2 * height_m)
    island = shapely.Point(X0 + 0.3 * width_m, Y0 - 0.375 * height_m).buffer(10.0)
    scar_b = shapely.Point(X0 + 0.72 * width_m, Y0 - 0.6 * height_m).buffer(0.14 * width_m)
    # true burn depth per pixel centre
    pts = shapely.points(x.ravel(), y.ravel())
    in_a = shapely.contains_xy(scar_a, x, y)
    in_isl = shapely.contains_xy(island, x, y)
    in_b = shapely.contains_xy(scar_b, x, y)
    thick = np.full(shape, 4.0)
    thin = x > X0 + 0.76 * width_m  # east part of scar B on thin peat
    thick[thin] = thickness_min
    true_depth = np.zeros(shape)
    true_depth[in_a & ~in_isl] = depth
    true_depth[in_b] = 0.6 * depth
    true_depth = np.minimum(true_depth, thick)
    del pts
    z_pre_true = terrain(x, y)
    pre = z_pre_true + rng.normal(0, noise, shape)
    # post survey: its pixel (x, y) label shows the ground at (x - sx, y - sy)
    sx, sy = shift
    xs, ys = x - sx, y - sy
    cs, rs = (xs - X0) / pixel, (Y0 - ys) / pixel
    in_a_s = shapely.contains_xy(scar_a, xs, ys) & ~shapely.contains_xy(island, xs, ys)
    in_b_s = shapely.contains_xy(scar_b, xs, ys)
    thick_s = np.where(xs > X0 + 0.76 * width_m, thickness_min, 4.0)
    depth_s = np.minimum(np.where(in_a_s, depth, 0.0) + np.where(in_b_s, 0.6 * depth, 0.0), thick_s)
    post = terrain(xs, ys) - depth_s - subsidence * interval + offset + rng.normal(0, noise, shape)
    del cs, rs
    write_tif(folder / "pre.tif", pre, t)
    write_tif(folder / "post.tif", post, t)
    write_tif(folder / "thickness.tif", thick, t)
    crs = f"EPSG:{EPSG}"
    scars = gpd.GeoDataFrame({"scar_id": ["A", "B"]}, geometry=[scar_a.difference(island).union(island), scar_b],
                             crs=crs)
    # scar A polygon includes the island: the island is burned area with zero depth (an unburned patch
    # inside a mapped scar), exactly what the unbiased estimator must not inflate
    scars.to_file(folder / "scars.gpkg", layer="scars", driver="GPKG")
    left = shapely.box(X0, Y0 - height_m, X0 + 0.5 * width_m, Y0)
    right = shapely.box(X0 + 0.5 * width_m, Y0 - height_m, X0 + width_m, Y0)
    gpd.GeoDataFrame({"name": ["West Block", "East Block"]}, geometry=[left, right], crs=crs).to_file(
        folder / "zones.gpkg", layer="zones", driver="GPKG")
    bd, cf = 0.1, 0.55
    burned = in_a | in_b
    area = pixel * pixel
    vol = float((true_depth * burned).sum() * area)
    truth = {
        "volume_m3": vol,
        "carbon_t": vol * bd * 1000 * cf / 1000,
        "west_carbon_t": float((true_depth * burned * (x < X0 + 0.5 * width_m)).sum() * area * bd * 1000 * cf / 1000),
        "burned_area_ha": float(burned.sum() * area / 1e4),
        "n_burned": int(burned.sum()),
        "shift": shift, "offset": offset, "noise": noise, "bd": bd, "cf": cf,
    }
    zone_text = '[[zones]]\npath = "zones.gpkg"\nid = "name"\n' if zones else ""
    cfg = f"""[run]
name = "synthetic scene"
year = 2030
block_size = 64

[burned_area]
path = "scars.gpkg"

[depth.survey]
pre = "pre.tif"
post = "post.tif"
interval_years = {interval}
subsidence_rate = "{subsidence} m/yr"
stable_buffer_m = 10

[peat]
thickness = "thickness.tif"
bulk_density = "{bd} g/cm^3"
carbon_fraction = {cf}

[emission_factors]
smouldering = "smouldering_akagi2011"
gwp = "AR6"

{zone_text}
{extra_config}
"""
    (folder / "config.toml").write_text(cfg)
    (folder / "truth.json").write_text(json.dumps(truth))
    return Scene(folder, folder / "config.toml", truth, shape, pixel)


@pytest.fixture(scope="session")
def scene(tmp_path_factory) -> Scene:
    return make_scene(tmp_path_factory.mktemp("scene"))


@pytest.fixture(scope="session")
def scene_run(scene, tmp_path_factory):
    """The scene run once end to end (shared by several tests)."""
    import peatburn

    out = tmp_path_factory.mktemp("scene_out")
    return peatburn.run(scene.config, out, overwrite=True)


def demo_mean_slope(region) -> float:
    """Slope of the demo truth's conditional *mean* burn depth on the water table [m/m]: least
    squares (numpy.polyfit) of the true burn depth on the water-table depth over the scar pixels not
    capped by the peat thickness. The generator's core relation (slope 0.5) is clipped and thinned
    at scar margins, islands and canals, so the mean relation over burned pixels is flatter; this is
    what a mean-predicting fit must recover (independent of peatburn's own code)."""
    import rasterio.features

    folder = region.config_path.parent
    with rasterio.open(folder / "truth_burn_depth.tif") as src:
        depth, transform = src.read(1), src.transform
    with rasterio.open(folder / "water_table.tif") as src:
        wt = src.read(1)
    with rasterio.open(folder / "peat_thickness.tif") as src:
        thick = src.read(1)
    scars = gpd.read_file(folder / "scars.gpkg")
    inside = rasterio.features.rasterize(((g, 1) for g in scars.geometry), out_shape=depth.shape,
                                         transform=transform, fill=0).astype(bool)
    ok = inside & (depth < thick)
    return float(np.polyfit(wt[ok], depth[ok], 1)[0])
