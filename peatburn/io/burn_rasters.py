"""Burn scars from a burned-area raster: read the mask (and a day-of-burn raster), clean and label
it (:mod:`peatburn.science.burn_mask`), and polygonise each fire.

Each fire becomes one polygon or multipolygon in the raster's CRS (rasterio.features.shapes, the
pixel edges of its component), with an id ``F0001``, ``F0002``... in the order the fires' first
pixels appear row by row, and its first and last day of burning when a day-of-burn raster is
given. The layer then goes to the run CRS like any burn-scar polygon file, so zones, fires.csv,
the timeline and the intervals work on it unchanged.

Labelling is a whole-raster operation: the mask is read at once (11 bytes per pixel at the peak,
19 with a closing and a minimum area; measured on 4000 x 4000 px, docs/method.md 1).
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import dataclass, field

import geopandas as gpd
import numpy as np
import rasterio
import shapely
from shapely.geometry import shape
from rasterio.features import shapes

from ..errors import GridError, InputFileError
from ..grid import normalise_crs
from ..science import burn_mask as bm
from .rasters import inspect_raster
from .vectors import PolygonLayer


@dataclass
class MaskFires:
    """The fires found in a burned-area raster, in the raster's CRS, and what was done to find them."""

    path: str
    frame: gpd.GeoDataFrame
    summary: dict
    notes: list[str] = field(default_factory=list)

    def to_layer(self, grid_crs) -> PolygonLayer:
        """The fires as a burn-scar :class:`PolygonLayer` in ``grid_crs``."""
        dst = normalise_crs(grid_crs, "run grid")
        frame = self.frame.to_crs(dst.to_wkt()).reset_index(drop=True)
        return PolygonLayer(path=self.path, what="burned_area.path", frame=frame, notes=list(self.notes))

    def describe(self) -> str:
        """One line for ``peatburn check``: what was made of the mask."""
        s = self.summary
        steps = "; ".join(s["steps"]) or "no clean-up"
        dates = (f"; dates from {s['date_path']} ({s['date_encoding']}): {s['n_dated']} of {s['n_fires']} "
                 f"fire(s) dated" if s.get("date_path") else "; no dates (fires count in run.year)")
        return (f"burn mask: {s['burned_px_raw']:,} burned px of {s['pixel_m'][0]:.4g} x {s['pixel_m'][1]:.4g} m "
                f"({s['nodata_px']:,} px nodata); {steps} -> {s['burned_px']:,} px, {s['area_ha']:.4g} ha; "
                f"{s['n_fires']} fire(s) (8-connected){dates}")


def pixel_metres(crs, transform, width: int, height: int) -> tuple[float, float]:
    """Ground width and height of a pixel [m]: the CRS's linear unit for a projected CRS; on a
    lon/lat raster the geodesic lengths at the raster's centre (pyproj.Geod; an approximation that
    changes by under 1 % over 1 degree of latitude in the tropics)."""
    sx = math.hypot(transform.a, transform.d)
    sy = math.hypot(transform.b, transform.e)
    if not crs.is_geographic:
        unit = crs.linear_units_factor[1] if crs.linear_units else 1.0
        return sx * unit, sy * unit
    from pyproj import Geod

    lon, lat = transform * (width / 2, height / 2)
    geod = Geod(ellps="WGS84")
    dx = geod.inv(lon - sx / 2, lat, lon + sx / 2, lat)[2]
    dy = geod.inv(lon, lat - sy / 2, lon, lat + sy / 2)[2]
    return float(dx), float(dy)


def read_burn_mask(path, settings, year: int | None = None, start_field: str = "fire_start",
                   end_field: str = "fire_end") -> MaskFires:
    """Read a burned-area raster and return its fires.

    Parameters
    ----------
    path : path of a one-band raster: burned = non-zero, or a value in ``settings.burned_values``;
        nodata is never burned.
    settings : :class:`peatburn.config.BurnMaskConfig`
    year : the year of day-of-year codes in ``settings.date_path`` (run.year)
    start_field, end_field : names of the date columns (burned_area.start_field / end_field)
    """
    what = "burned_area.path"
    info = inspect_raster(path, what)
    path = info.path
    with rasterio.open(path) as ds:
        values = ds.read(1)
        valid = ds.read_masks(1) > 0
    dx, dy = pixel_metres(info.crs, info.transform, info.width, info.height)
    burned = bm.burned_pixels(values, valid, settings.burned_values)
    raw = int(burned.sum())
    px_m2 = dx * dy
    close = bm.footprint(settings.close_m / dx, settings.close_m / dy) if settings.close_m else None
    open_ = bm.footprint(settings.open_m / dx, settings.open_m / dy) if settings.open_m else None
    hole_ha = settings.min_area_ha if settings.min_hole_ha is None else settings.min_hole_ha
    min_obj = math.ceil(settings.min_area_ha * 1e4 / px_m2 - 1e-9) if settings.min_area_ha else 0
    min_hole = math.ceil(hole_ha * 1e4 / px_m2 - 1e-9) if hole_ha else 0
    notes, steps = [], []
    for key, m, fp in (("close_m", settings.close_m, close), ("open_m", settings.open_m, open_)):
        if m and fp is None:
            notes.append(f"{key} = {m:g} m is under half a pixel ({dx:.3g} x {dy:.3g} m): no {key[:-2]}ing done")
        elif fp is not None:
            steps.append(f"{key[:-2]}ing with a disk of {m:g} m ({fp.shape[1]} x {fp.shape[0]} px)")
    cleaned = bm.clean_mask(burned, valid, close, open_, min_obj, min_hole)
    if min_obj > 1:
        steps.append(f"burned patches under {settings.min_area_ha:g} ha ({min_obj} px) removed")
    if min_hole > 1:
        steps.append(f"holes under {hole_ha:g} ha ({min_hole} px) filled")
    labels, n = bm.label_fires(cleaned)
    if n == 0:
        raise GridError(f"{what}: {path} has no burned pixel"
                        f"{' after the clean-up' if raw else ''}; nothing burned to estimate (burned = "
                        f"{'non-zero' if settings.burned_values is None else list(settings.burned_values)})")
    starts = ends = [None] * n
    summary = {"burned_px_raw": raw, "burned_px": int(cleaned.sum()), "nodata_px": int((~valid).sum()),
               "n_fires": n, "area_ha": float(cleaned.sum()) * px_m2 / 1e4, "pixel_m": (dx, dy), "steps": steps}
    if settings.date_path is not None:
        first, last, encoding = _fire_days(settings.date_path, info, labels, n, year)
        starts = [dt.date.fromordinal(int(d)).isoformat() if d > 0 else None for d in first]
        ends = [dt.date.fromordinal(int(d)).isoformat() if d > 0 else None for d in last]
        summary.update(date_path=str(settings.date_path), date_encoding=encoding, n_dated=int((first > 0).sum()))
        if (first <= 0).any():
            notes.append(f"{int((first <= 0).sum())} fire(s) have no dated pixel in {settings.date_path}: "
                         f"they count in run.year")
    geoms = polygonise(labels, n, info.transform)
    frame = gpd.GeoDataFrame({"fire": [f"F{i:04d}" for i in range(1, n + 1)], start_field: starts, end_field: ends},
                             geometry=geoms, crs=info.crs.to_wkt())
    return MaskFires(path, frame, summary, notes)


def polygonise(labels, n: int, transform) -> np.ndarray:
    """One polygon or multipolygon per fire 1..n: the outlines of its pixels (rasterio.features.shapes,
    4-connected pieces; corner-touching pieces of one fire are parts of one multipolygon)."""
    parts: list[list] = [[] for _ in range(n)]
    for geom, value in shapes(labels, mask=labels > 0, connectivity=4, transform=transform):
        parts[int(value) - 1].append(shape(geom))
    return np.array([p[0] if len(p) == 1 else shapely.MultiPolygon(p) for p in parts], dtype=object)


def _fire_days(date_path, info, labels, n: int, year):
    what = "burned_area.date_path"
    dinfo = inspect_raster(date_path, what)
    if (dinfo.width, dinfo.height) != (info.width, info.height) or dinfo.crs != info.crs or not np.allclose(
            tuple(dinfo.transform), tuple(info.transform), rtol=0, atol=1e-9 * max(info.res)):
        raise GridError(f"{what}: {date_path} is not on the grid of the burn mask {info.path} (size, CRS and "
                        f"transform must match); write both from the same product or warp the dates onto the mask")
    with rasterio.open(dinfo.path) as ds:
        codes = ds.read(1)
        valid = ds.read_masks(1) > 0
    try:
        days, encoding = bm.date_codes_to_days(codes, valid & (labels > 0), year)
    except ValueError as exc:
        raise InputFileError(f"{what}: {date_path}: {exc}; give the day of burn as a day of the year (1-366, "
                             f"with run.year) or a date YYYYMMDD, 0 or nodata where unknown") from None
    first, last = bm.fire_day_range(labels, n, days)
    return first, last, encoding
