"""Open and check rasters, and read them aligned onto the run grid, one window at a time.

A :class:`RasterSource` is a small picklable description (path, unit scale, optional corrected
georeferencing); :func:`open_reader` turns it into a :class:`GridReader` inside whichever process
reads. Reads return float64 arrays with NaN for nodata (the one in-memory nodata convention).
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass

import numpy as np
import rasterio
from affine import Affine
from rasterio.enums import MaskFlags, Resampling
from rasterio.errors import RasterioIOError
from rasterio.vrt import WarpedVRT
from rasterio.windows import Window

from ..errors import CRSError, GridError, InputFileError, MissingInputError
from ..grid import RunGrid, normalise_crs
from .mosaics import RasterInput, remote_reason


@dataclass(frozen=True)
class RasterInfo:
    """What :func:`inspect_raster` found in a raster file."""

    path: str
    crs: object
    transform: Affine
    width: int
    height: int
    count: int
    dtype: str
    nodata: float | None
    block_shapes: tuple
    units: str | None

    @property
    def res(self):
        return (abs(self.transform.a), abs(self.transform.e))


def inspect_raster(path, what: str = "raster") -> RasterInfo:
    """Open ``path`` and check it can serve as a peatburn input.

    Raises
    ------
    MissingInputError
        The file does not exist.
    InputFileError
        The file cannot be read as a raster (truncated, corrupt, not a raster).
    CRSError
        The raster has no CRS.
    """
    label = f"{path}"  # what the user wrote (a mosaic or URL formats as such, see io.mosaics)
    virtual = isinstance(path, RasterInput)
    name = os.fspath(path)  # a mosaic's tiles are opened and checked to fit here
    if not virtual and not os.path.exists(name):
        raise MissingInputError(f"{what}: file not found: {name}; check the path (paths are relative to the config file)")
    path = label
    try:
        with rasterio.open(name) as ds:
            if ds.crs is None:
                raise CRSError(
                    f"{what}: {path} has no CRS; set it (e.g. `gdal_edit.py -a_srs EPSG:32749 {path}`) and re-run"
                )
            if ds.transform.b != 0 or ds.transform.d != 0:
                pass  # rotated grids are warped like any other
            info = RasterInfo(
                path=path,
                crs=normalise_crs(ds.crs, f"{what} ({path})"),
                transform=ds.transform,
                width=ds.width,
                height=ds.height,
                count=ds.count,
                dtype=ds.dtypes[0],
                nodata=ds.nodata,
                block_shapes=tuple(ds.block_shapes),
                units=(ds.units[0] or None) if ds.units else None,
            )
            # touch one pixel so that a truncated file fails here, not half-way through a run
            ds.read(1, window=Window(0, 0, 1, 1))
            ds.read(1, window=Window(ds.width - 1, ds.height - 1, 1, 1))
    except (CRSError, MissingInputError):
        raise
    except (RasterioIOError, rasterio.errors.RasterioError, OSError) as exc:
        if virtual:
            raise InputFileError(f"{what}: cannot read {label} ({remote_reason(exc, name)})") from None
        raise InputFileError(f"{what}: cannot read {path} as a raster ({str(exc).splitlines()[0]}); "
                             f"check the file is a complete GeoTIFF (re-export or re-download it)") from None
    if info.nodata is None and np.dtype(info.dtype).kind != "f":
        # integer rasters without nodata: every value is data; that is allowed but noted by callers
        pass
    return info


def grid_from_raster(info: RasterInfo, crs=None) -> RunGrid:
    """The run grid of a raster: its own grid, or the same extent and resolution in ``crs``."""
    if crs is None or normalise_crs(crs, "run crs") == info.crs:
        return RunGrid(info.crs, info.transform, info.width, info.height)
    from rasterio.warp import calculate_default_transform

    dst = normalise_crs(crs, "run crs")
    left = info.transform.c
    top = info.transform.f
    right = left + info.transform.a * info.width
    bottom = top + info.transform.e * info.height
    t, w, h = calculate_default_transform(info.crs, dst, info.width, info.height, left, bottom, right, top)
    return RunGrid(dst, t, w, h)


@dataclass(frozen=True)
class RasterSource:
    """A picklable description of one raster input as the run reads it.

    Attributes
    ----------
    path : str
    what : str
        The config key, used in messages.
    scale : float
        Multiplier from the file's unit to the documented unit.
    src_transform : Affine or None
        Corrected georeferencing (co-registration); None keeps the file's own.
    resampling : str or None
        Rasterio resampling name; None chooses bilinear, or average when the source is finer than
        the grid.
    """

    path: str
    what: str
    scale: float = 1.0
    src_transform: Affine | None = None
    resampling: str | None = None
    band: int = 1


def _same_grid_offset(ds, grid: RunGrid, src_transform) -> tuple[int, int] | None:
    """Integer pixel offset of the grid in ``ds`` when both share CRS and pixel lattice, else None."""
    t = src_transform or ds.transform
    g = grid.transform
    if ds.crs != grid.crs or t.b != 0 or t.d != 0 or g.b != 0 or g.d != 0:
        return None
    if not (math.isclose(t.a, g.a, rel_tol=1e-9) and math.isclose(t.e, g.e, rel_tol=1e-9)):
        return None
    col = (g.c - t.c) / t.a
    row = (g.f - t.f) / t.e
    if abs(col - round(col)) > 1e-6 or abs(row - round(row)) > 1e-6:
        return None
    return int(round(row)), int(round(col))


#: Least total weight of the valid neighbours for a bilinear value (GDAL's bilinear kernel has such
#: a threshold, recalled, unchecked; with the nearest neighbour valid the weight is >= 0.25 anyway).
BILINEAR_MIN_WEIGHT = 1e-5


def _translated_lattice(ds, grid: RunGrid, source: RasterSource):
    """((row, col) of the source pixel up-left of grid pixel (0, 0)'s centre, (fy, fx) fractions)
    when the source lattice is the grid's moved by a translation and bilinear resampling applies;
    else None (the general warper is used)."""
    t = source.src_transform or ds.transform
    g = grid.transform
    if source.resampling not in (None, "bilinear") or ds.crs != grid.crs:
        return None
    if t.b != 0 or t.d != 0 or g.b != 0 or g.d != 0:
        return None
    if not (math.isclose(t.a, g.a, rel_tol=1e-9) and math.isclose(t.e, g.e, rel_tol=1e-9)):
        return None
    # continuous source pixel index of the centre of grid pixel (0, 0), minus 0.5: integer part is
    # the up-left neighbour, fraction the bilinear weight
    u = (g.c + 0.5 * g.a - t.c) / t.a - 0.5
    v = (g.f + 0.5 * g.e - t.f) / t.e - 0.5
    c0, r0 = math.floor(u), math.floor(v)
    return (r0, c0), (v - r0, u - c0)


class GridReader:
    """Read one band of a raster onto the run grid, window by window.

    Aligned inputs (same CRS and pixel lattice) are read directly; others through a
    :class:`rasterio.vrt.WarpedVRT` (GDAL's warper, windowed), so no read needs the whole raster.
    """

    def __init__(self, source: RasterSource, grid: RunGrid):
        self.source = source
        self.grid = grid
        try:
            self._ds = rasterio.open(source.path)
        except RasterioIOError as exc:
            shown = source.path if not source.path.startswith("<") else "its tile mosaic"
            raise InputFileError(f"{source.what}: cannot read {shown} ({remote_reason(exc, shown)})") from None
        self._nodata = self._ds.nodata
        self._offset = _same_grid_offset(self._ds, grid, source.src_transform)
        flags = self._ds.mask_flag_enums[source.band - 1]
        # an internal mask or alpha band (not nodata, not "all valid") must be read as such
        self._mask_band = not ({MaskFlags.nodata, MaskFlags.all_valid} & set(flags))
        self._vrt = None
        self._translation = None
        if self._offset is None:
            self._translation = _translated_lattice(self._ds, grid, source)
        if self._offset is None and self._translation is None:
            res_src = abs((source.src_transform or self._ds.transform).a)
            if source.resampling:
                resampling = Resampling[source.resampling]
            elif self._ds.crs == grid.crs and res_src < 0.75 * grid.res[0]:
                resampling = Resampling.average
            else:
                resampling = Resampling.bilinear
            kwargs = dict(crs=grid.crs, transform=grid.transform, width=grid.width, height=grid.height,
                          resampling=resampling, dtype="float64", nodata=np.nan)
            if source.src_transform is not None:
                kwargs["src_transform"] = source.src_transform
            if self._nodata is not None:
                kwargs["src_nodata"] = self._nodata
            self._vrt = WarpedVRT(self._ds, **kwargs)

    def read(self, window: Window) -> np.ndarray:
        """Values of ``window`` of the run grid [documented unit], NaN where no data."""
        if self._translation is not None:
            out = self._read_translated(window)
        elif self._vrt is None:
            out = self._read_direct(window)
        else:
            # the warped view's nodata is NaN and the warper honours the source's nodata and masks, so
            # a plain read is already NaN where there is no data (a masked read would run the warper
            # a second time to build the mask)
            out = self._vrt.read(self.source.band, window=window)
        if self.source.scale != 1.0:
            out *= self.source.scale
        return out

    def read_at(self, window: Window, where: np.ndarray) -> np.ndarray:
        """:meth:`read` of ``window`` at the pixels of the boolean mask ``where`` only (1-D) [documented unit].

        A read on the file's own lattice, inside the file, converts and checks for nodata only the
        pixels asked for (a national run asks for the few burned pixels of each block); any other read
        is :meth:`read` then the selection (the same values either way).
        """
        if self._translation is None and self._vrt is None and not self._mask_band:
            r0, c0 = self._offset
            row, col = int(window.row_off) + r0, int(window.col_off) + c0
            h, w = int(window.height), int(window.width)
            if row >= 0 and col >= 0 and row + h <= self._ds.height and col + w <= self._ds.width:
                arr = self._ds.read(self.source.band, window=Window(col, row, w, h))[where]
                out = arr.astype("float64")
                if self._nodata is not None and not math.isnan(self._nodata):
                    nd = np.asarray(self._nodata).astype(arr.dtype)
                    if float(nd) == float(self._nodata):  # as _read_direct
                        out[arr == nd] = np.nan
                if self.source.scale != 1.0:
                    out *= self.source.scale
                return out
        return self.read(window)[where]

    def _read_translated(self, window: Window) -> np.ndarray:
        """Bilinear resampling of a source whose lattice is the grid's moved by a fraction of a pixel
        (a co-registered survey): the window and one more row and column read directly, then four
        weighted neighbours. As GDAL's warper does, a pixel whose centre falls in a missing source
        pixel is missing, and elsewhere missing neighbours are left out and the weights of the
        others renormalised. Equals GDAL's warped read (tests/io/test_rasters.py compares them,
        holes and file edges included) at a quarter of its cost (docs/performance.md).
        """
        (r0, c0), (fy, fx) = self._translation
        h, w = int(window.height), int(window.width)
        a = self._read_direct(Window(window.col_off, window.row_off, w + 1, h + 1), (r0, c0))
        w00, w01, w10, w11 = (1 - fy) * (1 - fx), (1 - fy) * fx, fy * (1 - fx), fy * fx
        quads = (a[:-1, :-1], a[:-1, 1:], a[1:, :-1], a[1:, 1:])
        out = w00 * quads[0]
        out += w01 * quads[1]
        out += w10 * quads[2]
        out += w11 * quads[3]
        bad = np.isnan(out)
        if bad.any():  # some neighbour missing
            # GDAL skips a pixel whose centre falls in a missing source pixel (the nearest
            # neighbour), and renormalises the weights of the valid neighbours otherwise
            nearest = quads[(2 if fy >= 0.5 else 0) + (1 if fx >= 0.5 else 0)][bad]
            num = np.zeros(nearest.size)
            den = np.zeros_like(num)
            for wt, q in zip((w00, w01, w10, w11), quads):
                v = q[bad]
                ok = ~np.isnan(v)
                num[ok] += wt * v[ok]
                den[ok] += wt
            with np.errstate(invalid="ignore", divide="ignore"):
                out[bad] = np.where(np.isfinite(nearest) & (den > BILINEAR_MIN_WEIGHT), num / den, np.nan)
        return out

    def _read_direct(self, window: Window, offset: tuple[int, int] | None = None) -> np.ndarray:
        """A read on the file's own lattice: the part of the window inside the file, NaN around it.

        Avoids rasterio's boundless read (an extra VRT per call) and its masked read (a second pass
        over the data for the mask): nodata values are compared directly, and only a file with an
        internal mask or alpha band has its mask read.
        """
        ds, b = self._ds, self.source.band
        r0, c0 = self._offset if offset is None else offset
        row, col = int(window.row_off) + r0, int(window.col_off) + c0
        h, w = int(window.height), int(window.width)
        out = np.full((h, w), np.nan)
        rs, re_ = max(row, 0), min(row + h, ds.height)
        cs, ce = max(col, 0), min(col + w, ds.width)
        if rs >= re_ or cs >= ce:
            return out
        src_win = Window(cs, rs, ce - cs, re_ - rs)
        arr = ds.read(b, window=src_win)
        part = arr.astype("float64")
        if self._mask_band:
            part[ds.read_masks(b, window=src_win) == 0] = np.nan
        elif self._nodata is not None and not math.isnan(self._nodata):
            nd = np.asarray(self._nodata).astype(arr.dtype)
            if float(nd) == float(self._nodata):  # a nodata the data type cannot hold marks nothing
                part[arr == nd] = np.nan
        out[rs - row:re_ - row, cs - col:ce - col] = part
        return out

    def close(self):
        if self._vrt is not None:
            self._vrt.close()
        self._ds.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()


def read_on_grid(source: RasterSource, grid: RunGrid) -> np.ndarray:
    """Read a whole (small, e.g. decimated) grid at once. For sampling passes only."""
    with GridReader(source, grid) as r:
        return r.read(Window(0, 0, grid.width, grid.height))


def check_overlap(info: RasterInfo, grid: RunGrid, what: str) -> None:
    """Raise GridError when the raster's footprint does not meet the run grid."""
    from rasterio.warp import transform_bounds

    left = info.transform.c
    top = info.transform.f
    right = left + info.transform.a * info.width
    bottom = top + info.transform.e * info.height
    b = transform_bounds(info.crs, grid.crs, min(left, right), min(top, bottom), max(left, right), max(top, bottom))
    g = grid.bounds
    if b[0] >= g[2] or b[2] <= g[0] or b[1] >= g[3] or b[3] <= g[1]:
        raise GridError(f"{what}: {info.path} does not overlap the run grid (bounds {tuple(round(v) for v in b)} "
                        f"vs grid {tuple(round(v) for v in g)}); check its CRS and extent")
