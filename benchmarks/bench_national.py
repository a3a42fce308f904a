"""Benchmark of a national-scale water-table run (issue 19 item 6): time and peak memory of the run
against one decode of its water-table raster.

The scene (invented; open ocean coordinates): a water-table raster of 20,000 x 20,000 px at 30 m
(400 Mpx, float32, deflate, 512 px tiles; smooth field plus texture, nodata outside an irregular
"peat" outline), 20,000 burn scars (irregular polygons of 3-150 ha, dated), 1,000 Voronoi zones,
200 Monte Carlo draws, no survey; depth = intercept + slope x water table (user coefficients); the
tool's default block size (``--block-size`` sets another).
``--scale`` shrinks the side (0.5: 100 Mpx, 5,000 scars, 250 zones) for a quicker look.

    python benchmarks/bench_national.py [--scale 1.0] [--repeat 1]

Prints: run time, decode time, their RATIO (target <= 4), peak memory (target < 1 GiB) and the time
of each phase of the run. No timed assertion anywhere (docs/performance.md).
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

import _common as c  # noqa: E402

RES = 30.0
SIDE = 20_000
SCARS = 20_000
ZONES = 1_000
DRAWS = 200


def _write_water_table(path: Path, n: int) -> None:
    import rasterio
    from rasterio.crs import CRS
    from rasterio.transform import from_origin
    from rasterio.windows import Window

    rng = np.random.default_rng(3)
    prof = dict(driver="GTiff", width=n, height=n, count=1, dtype="float32", crs=CRS.from_epsg(c.EPSG),
                transform=from_origin(c.X0, c.Y0, RES, RES), nodata=-9999.0, tiled=True, blockxsize=512,
                blockysize=512, compress="deflate", predictor=3, BIGTIFF="IF_SAFER")
    tmp = path.with_suffix(".part")
    b = 512
    with rasterio.open(tmp, "w", **prof) as ds:
        for r in range(0, n, b):
            for col in range(0, n, b):
                h, w = min(b, n - r), min(b, n - col)
                u = (col + np.arange(w) + 0.5)[None, :] / n
                v = (r + np.arange(h) + 0.5)[:, None] / n
                wt = (0.45 + 0.25 * np.sin(6.1 * u) * np.cos(4.3 * v) + 0.1 * np.sin(37 * u + 23 * v)
                      + rng.normal(0, 0.03, (h, w)))
                # peat outline: an irregular disc covering about two thirds of the square
                rad = np.hypot(u - 0.5, v - 0.5)
                edge = 0.46 + 0.04 * np.sin(9 * np.arctan2(v - 0.5, u - 0.5))
                wt = np.where(rad < edge, wt, -9999.0)
                ds.write(wt.astype("float32"), 1, window=Window(col, r, w, h))
    os.replace(tmp, path)


def _write_scars(path: Path, n: int, count: int) -> None:
    import geopandas as gpd
    import pandas as pd
    import shapely

    rng = np.random.default_rng(4)
    size = n * RES
    # scars cluster in fire-prone districts: 60 % in 40 clusters, the rest scattered
    k = int(count * 0.6)
    centres = rng.uniform(0.15, 0.85, (40, 2)) * size
    pick = centres[rng.integers(0, 40, k)] + rng.normal(0, 0.03 * size, (k, 2))
    xy = np.vstack([pick, rng.uniform(0.05, 0.95, (count - k, 2)) * size])
    xy = np.clip(xy, 0.02 * size, 0.98 * size)
    area_ha = np.exp(rng.uniform(np.log(3), np.log(150), count))
    radius = np.sqrt(area_ha * 1e4 / np.pi)
    ang = np.linspace(0, 2 * np.pi, 17)[:-1]
    geoms = []
    for (x, y), rad in zip(xy, radius):
        rr = rad * (1 + 0.25 * rng.uniform(-1, 1, ang.size))
        pts = np.c_[c.X0 + x + rr * np.cos(ang), c.Y0 - y + rr * np.sin(ang)]
        geoms.append(shapely.Polygon(pts))
    start = pd.Timestamp("2031-07-01") + pd.to_timedelta(rng.integers(0, 120, count), unit="D")
    gpd.GeoDataFrame({"scar": [f"S{i:06d}" for i in range(count)], "fire_start": start.strftime("%Y-%m-%d"),
                      "fire_end": (start + pd.Timedelta(days=10)).strftime("%Y-%m-%d")},
                     geometry=geoms, crs=f"EPSG:{c.EPSG}").to_file(path, layer="scars", driver="GPKG")


def scene(scale: float = 1.0, block_size: int | None = None) -> Path:
    n = int(round(SIDE * scale))
    scars = int(round(SCARS * scale * scale))
    zones = max(4, int(round(ZONES * scale * scale)))
    folder = c.CACHE / f"national_{n}"
    folder.mkdir(parents=True, exist_ok=True)
    t = time.perf_counter()
    if not (folder / "water_table.tif").exists():
        _write_water_table(folder / "water_table.tif", n)
    if not (folder / "scars.gpkg").exists():
        _write_scars(folder / "scars.gpkg", n, scars)
    if not (folder / "zones.gpkg").exists():
        saved = c.PIXEL
        c.PIXEL = RES  # _write_zones tiles n x PIXEL metres
        try:
            c._write_zones(folder / "zones.gpkg", n, zones)
        finally:
            c.PIXEL = saved
    if time.perf_counter() - t > 1:
        print(f"  made the national scene ({n} x {n} px, {scars} scars, {zones} zones) in "
              f"{time.perf_counter() - t:.0f} s", file=sys.stderr)
    cfg = folder / ("config.toml" if block_size is None else f"config_b{block_size}.toml")
    block = "" if block_size is None else f"block_size = {block_size}\n"
    cfg.write_text(f"""[run]
name = "national benchmark"
year = 2031
{block}
[burned_area]
path = "scars.gpkg"

[depth.water_table]
depth = "water_table.tif"
intercept = 0.05
slope = 0.5

[peat]
thickness = 3.0
bulk_density = "0.1 g/cm^3"
carbon_fraction = 0.55

[emission_factors]
smouldering = "smouldering_akagi2011"
gwp = "AR6"

[[zones]]
path = "zones.gpkg"
id = "name"
name = "districts"

[uncertainty]
draws = {DRAWS}
""")
    return cfg


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--scale", type=float, default=1.0, help="side of the scene as a fraction of 20,000 px")
    ap.add_argument("--repeat", type=int, default=1)
    ap.add_argument("--block-size", type=int, default=None, help="run.block_size (default: the tool's default)")
    a = ap.parse_args(argv)
    print(f"[national] water-table run at scale {a.scale:g}, block size "
          f"{a.block_size if a.block_size else 'default'}")
    cfg = scene(a.scale, a.block_size)
    c.warm(cfg)
    dec = c.best_of(a.repeat, "decode", path=str(cfg.parent / "water_table.tif"))
    run = c.best_of(a.repeat, "run", config=str(cfg), out=c.out_dir("national"))
    ratio = run["wall_s"] / dec["wall_s"]
    print(f"  decode of the water-table raster ({dec['pixels'] / 1e6:.0f} Mpx): {dec['wall_s']:.1f} s "
          f"({c.load_note(dec)})")
    c.print_phases("run", run)
    print(f"  RATIO run / decode {ratio:.1f} (<= 4: {c.verdict(ratio, 4.0)}); peak {run['peak_mib']:.0f} MiB "
          f"(< 1024: {c.verdict(run['peak_mib'], 1024)})")
    return {"scale": a.scale, "decode_s": dec["wall_s"], "run_s": run["wall_s"], "ratio": ratio,
            "peak_mib": run["peak_mib"], "phases": run.get("phases")}


if __name__ == "__main__":
    c.print_machine()
    main()
