"""The run grid: one CRS, one transform, one shape per run; block windows and pixel areas.

Every raster of a run is aligned onto this grid; every vector is reprojected into its CRS
(never the reverse). :func:`normalise_crs` is the one place a CRS input is understood.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from affine import Affine
from pyproj import Geod
from rasterio.crs import CRS
from rasterio.errors import CRSError as _RioCRSError
from rasterio.windows import Window

from .errors import CRSError

#: Largest side of a run grid [px]: GDAL holds raster sizes in a C int (2^31 - 1; common
#: practice), so no GeoTIFF output can be wider.
MAX_SIDE_PX = 2**31 - 1


def normalise_crs(value, what: str = "input") -> CRS:
    """Return a :class:`rasterio.crs.CRS` for any CRS input: EPSG code, "EPSG:…" string, WKT, PROJ
    string, pyproj or rasterio CRS.

    A missing CRS is an error that says how to fix it; it is never guessed.
    """
    if value is None or (isinstance(value, str) and not value.strip()):
        raise CRSError(
            f"{what} has no coordinate reference system; set one on the file "
            f"(e.g. `gdal_edit.py -a_srs EPSG:32749 FILE` or GeoDataFrame.set_crs) or give `crs` in the config"
        )
    if isinstance(value, CRS):
        return value
    try:
        if isinstance(value, int):
            return CRS.from_epsg(value)
        if hasattr(value, "to_wkt"):
            return CRS.from_wkt(value.to_wkt())
        return CRS.from_user_input(value)
    except (_RioCRSError, ValueError, TypeError) as exc:
        raise CRSError(f"{what}: cannot understand the CRS {value!r} ({exc}); give e.g. 'EPSG:32749'") from None


@dataclass(frozen=True)
class RunGrid:
    """The grid every raster of a run is aligned onto.

    Attributes
    ----------
    crs : rasterio.crs.CRS
    transform : affine.Affine
        North-up, pixel-corner transform.
    width, height : int
        Shape in pixels.
    """

    crs: CRS
    transform: Affine
    width: int
    height: int

    def __post_init__(self):
        if not (1 <= self.width <= MAX_SIDE_PX and 1 <= self.height <= MAX_SIDE_PX):
            from .errors import GridError

            raise GridError(f"run grid of {self.width} x {self.height} pixels: each side must be 1 to {MAX_SIDE_PX} "
                            f"pixels (the GeoTIFF outputs' limit); set a coarser run.resolution or a smaller area")

    @property
    def shape(self) -> tuple[int, int]:
        return (self.height, self.width)

    @property
    def res(self) -> tuple[float, float]:
        return (abs(self.transform.a), abs(self.transform.e))

    @property
    def bounds(self) -> tuple[float, float, float, float]:
        left, top = self.transform.c, self.transform.f
        right = left + self.transform.a * self.width
        bottom = top + self.transform.e * self.height
        return (min(left, right), min(top, bottom), max(left, right), max(top, bottom))

    @property
    def size(self) -> int:
        return self.width * self.height

    def to_dict(self) -> dict:
        return {
            "crs": self.crs.to_string(),
            "transform": list(self.transform)[:6],
            "width": self.width,
            "height": self.height,
        }

    def windows(self, block_size: int = 512, group: int = 1) -> list[Window]:
        """Block windows covering the grid; edge blocks are smaller.

        ``group`` 1 gives row-major order. ``group`` g > 1 orders the blocks in squares of g x g
        blocks (the squares row-major, the blocks of a square row-major; squares at the right and
        bottom edges are cut): g*g consecutive windows then cover a compact square, so a worker given
        them decodes each input tile they share once (see :data:`peatburn.engine.executors.BLOCK_GROUP`).
        """
        group = max(1, int(group))
        rows = range(0, self.height, block_size)
        cols = range(0, self.width, block_size)
        out = []
        for gr in range(0, len(rows), group):
            for gc in range(0, len(cols), group):
                for r in rows[gr:gr + group]:
                    for c in cols[gc:gc + group]:
                        out.append(Window(c, r, min(block_size, self.width - c), min(block_size, self.height - r)))
        return out

    def window_transform(self, window: Window) -> Affine:
        return self.transform @ Affine.translation(window.col_off, window.row_off)

    def decimated(self, factor: int) -> "RunGrid":
        """A coarser grid over the same bounds (``factor`` pixels per side become one)."""
        if factor <= 1:
            return self
        w = max(1, math.ceil(self.width / factor))
        h = max(1, math.ceil(self.height / factor))
        t = self.transform @ Affine.scale(self.width / w, self.height / h)
        return RunGrid(self.crs, t, w, h)

    def pixel_centres(self, window: Window) -> tuple[np.ndarray, np.ndarray]:
        """x and y of pixel centres of ``window`` in grid CRS units (broadcastable: (1, w) and (h, 1))."""
        t = self.window_transform(window)
        cols = np.arange(int(window.width)) + 0.5
        rows = np.arange(int(window.height)) + 0.5
        x = (t.c + cols * t.a)[None, :]
        y = (t.f + rows * t.e)[:, None]
        return x, y

    def pixel_area(self, window: Window) -> np.ndarray:
        """Area of each pixel of ``window`` [m2], broadcastable to the window's shape.

        Projected CRS: |det(transform)| times the square of the CRS linear unit in metres (map
        area on the projection plane). Geographic CRS: geodesic area of each pixel on the CRS's
        ellipsoid (pyproj.Geod, Karney 2013), which depends only on the row.
        """
        h = int(window.height)
        if not self.crs.is_geographic:
            unit = self.crs.linear_units_factor[1] if self.crs.linear_units else 1.0
            area = abs(self.transform.a * self.transform.e - self.transform.b * self.transform.d) * unit**2
            return np.full((1, 1), area)
        return geodesic_row_areas(self.crs, self.window_transform(window), h)[:, None] * np.ones((1, 1))


def geodesic_row_areas(crs: CRS, transform: Affine, height: int) -> np.ndarray:
    """Geodesic area [m2] of one pixel in each of ``height`` rows of a north-up lon/lat grid.

    Uses the ellipsoid of ``crs`` (pyproj.Geod; Karney 2013, J. Geodesy 87:43).
    """
    from pyproj import CRS as PCRS

    ell = PCRS.from_wkt(crs.to_wkt()).ellipsoid
    geod = Geod(a=ell.semi_major_metre, rf=ell.inverse_flattening) if ell else Geod(ellps="WGS84")
    dx, dy = transform.a, transform.e
    x0 = transform.c
    areas = np.empty(height)
    for r in range(height):
        y_top = transform.f + r * dy
        y_bot = y_top + dy
        lons = [x0, x0 + dx, x0 + dx, x0]
        lats = [y_top, y_top, y_bot, y_bot]
        a, _ = geod.polygon_area_perimeter(lons, lats)
        areas[r] = abs(a)
    return areas
