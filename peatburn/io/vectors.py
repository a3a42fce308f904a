"""Read polygon layers, check them, reproject them to the run CRS and rasterize them by window.

Vectors are reprojected to the raster grid's CRS, never the reverse. Rasterization uses the
pixel-centre rule of GDAL (rasterio.features.rasterize with all_touched=False).
"""

from __future__ import annotations

import os
import warnings
from dataclasses import dataclass, field

import geopandas as gpd
import numpy as np
import shapely
from rasterio.features import rasterize
from rasterio.windows import Window

from ..errors import CRSError, InputFileError, MissingInputError, ZoneError
from ..grid import RunGrid, normalise_crs
from ..names import check_zone_id, printable


@dataclass
class PolygonLayer:
    """Polygons in the run CRS, with what was repaired or dropped while reading."""

    path: str
    what: str
    frame: gpd.GeoDataFrame
    notes: list[str] = field(default_factory=list)

    @property
    def geometries(self) -> np.ndarray:
        return self.frame.geometry.values


def read_polygons(path, grid_crs, what: str = "polygons", layer: str | None = None) -> PolygonLayer:
    """Read a polygon layer, repair what is safe to repair, and reproject it to ``grid_crs``.

    Invalid geometries are repaired with :func:`shapely.make_valid` (keeping the polygonal part)
    and reported; empty or non-polygonal ones are dropped and reported.
    """
    path = os.fspath(path)
    if not os.path.exists(path):
        raise MissingInputError(f"{what}: file not found: {path}; check the path (paths are relative to the config file)")
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            frame = gpd.read_file(path, layer=layer) if layer else gpd.read_file(path)
    except Exception as exc:  # pyogrio raises its own error kinds
        raise InputFileError(f"{what}: cannot read {path} as a vector layer ({str(exc).splitlines()[0]}); "
                             f"check it is a GeoPackage, shapefile or GeoJSON") from None
    if frame.crs is None:
        raise CRSError(f"{what}: {path} has no CRS; set one (e.g. GeoDataFrame.set_crs('EPSG:32749') "
                       f"or `ogr2ogr -a_srs EPSG:32749`) and re-run")
    notes: list[str] = []
    geoms = frame.geometry.values
    invalid = ~shapely.is_valid(geoms) & ~shapely.is_empty(geoms) & ~gpd.pd.isna(geoms)
    if invalid.any():
        fixed = shapely.make_valid(geoms[invalid])
        fixed = np.array([_polygonal_part(g) for g in fixed], dtype=object)
        frame.loc[invalid, frame.geometry.name] = fixed
        notes.append(f"{int(invalid.sum())} invalid geometr{'y' if invalid.sum() == 1 else 'ies'} repaired")
    geoms = frame.geometry.values
    bad = gpd.pd.isna(geoms) | shapely.is_empty(geoms) | ~np.isin(
        shapely.get_type_id(geoms), [3, 6, 7])  # Polygon, MultiPolygon, GeometryCollection
    if bad.any():
        notes.append(f"{int(bad.sum())} empty or non-polygon feature(s) dropped")
        frame = frame.loc[~bad].copy()
    dst = normalise_crs(grid_crs, "run grid")
    frame = frame.to_crs(dst.to_wkt())
    return PolygonLayer(path=path, what=what, frame=frame.reset_index(drop=True), notes=notes)


def _polygonal_part(geom):
    if geom is None or geom.is_empty:
        return geom
    if geom.geom_type in ("Polygon", "MultiPolygon"):
        return geom
    parts = [g for g in getattr(geom, "geoms", []) if g.geom_type in ("Polygon", "MultiPolygon")]
    return shapely.union_all(parts) if parts else shapely.Polygon()


def window_bounds_polygon(grid: RunGrid, window: Window):
    t = grid.window_transform(window)
    x0, y0 = t.c, t.f
    x1 = x0 + t.a * int(window.width)
    y1 = y0 + t.e * int(window.height)
    return shapely.box(min(x0, x1), min(y0, y1), max(x0, x1), max(y0, y1))


class WindowRasterizer:
    """Rasterize a set of polygons onto any window of the run grid, touching only the polygons
    that meet the window (an STR-tree query), so the cost of a block does not grow with the
    number of polygons elsewhere.
    """

    def __init__(self, geometries, values=None):
        self.geometries = np.asarray(geometries, dtype=object)
        self.values = np.arange(1, len(self.geometries) + 1) if values is None else np.asarray(values)
        self.tree = shapely.STRtree(self.geometries)

    def rasterize(self, grid: RunGrid, window: Window, fill: int = 0, dtype="int32") -> np.ndarray:
        out = self.rasterize_or_none(grid, window, fill, dtype)
        return np.full((int(window.height), int(window.width)), fill, dtype=dtype) if out is None else out

    def rasterize_or_none(self, grid: RunGrid, window: Window, fill: int = 0, dtype="int32") -> np.ndarray | None:
        """:meth:`rasterize`, or None when no polygon meets the window (nothing to allocate or scan)."""
        shape = (int(window.height), int(window.width))
        idx = self.tree.query(window_bounds_polygon(grid, window))
        if len(idx) == 0:
            return None
        idx = np.sort(idx)
        shapes = ((self.geometries[i], int(self.values[i])) for i in idx)
        return rasterize(shapes, out_shape=shape, transform=grid.window_transform(window), fill=fill,
                         dtype=dtype, all_touched=False)

    def mask(self, grid: RunGrid, window: Window) -> np.ndarray:
        shape = (int(window.height), int(window.width))
        idx = self.tree.query(window_bounds_polygon(grid, window))
        if len(idx) == 0:
            return np.zeros(shape, dtype=bool)
        return rasterize(((self.geometries[i], 1) for i in idx), out_shape=shape,
                         transform=grid.window_transform(window), fill=0, dtype="uint8").astype(bool)


def zone_ids(layer: PolygonLayer, id_field: str) -> list[str]:
    """The zone ids of ``layer`` as strings without control characters (:func:`peatburn.names.printable`);
    errors name the fields that exist, duplicates and an id reserved for the tool's own rows."""
    fields = [c for c in layer.frame.columns if c != layer.frame.geometry.name]
    if id_field not in layer.frame.columns:
        raise ZoneError(f"{layer.what}: {layer.path} has no field {id_field!r}; fields are: {', '.join(fields)}; "
                        f"set `id` to one of them")
    ids = [printable(i) for i in layer.frame[id_field].astype(str).tolist()]
    for i in ids:
        check_zone_id(i, layer.what, layer.path, id_field)
    seen, dup = set(), []
    for i in ids:
        if i in seen:
            dup.append(i)
        seen.add(i)
    if dup:
        raise ZoneError(f"{layer.what}: {layer.path} has duplicate ids in {id_field!r}: {', '.join(sorted(set(dup))[:5])}; "
                        f"make the ids unique or dissolve the polygons by id")
    return ids
