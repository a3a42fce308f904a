"""Classified lidar point clouds (LAS/LAZ) to a bare-earth GeoTIFF for the survey route.

The points are read with laspy (LAZ through its lazrs backend: ``pip install 'peatburn[lidar]'``) in
chunks, so the memory used is the grid's (about 25 bytes a cell), not the cloud's. Only ground returns
(ASPRS class 2) count; the cell value is their mean elevation (:mod:`peatburn.science.bare_earth`), and
the cells with none within ``max_gap`` of one are filled (TIN or IDW, block by block) unless
``fill="none"``; an optional uint8 GeoTIFF (``origin``) tells the measured cells (1) from the filled
ones (2). The grid
covers the files' header extent, snapped outward to multiples of the cell size, in the files' CRS (or
the one given). The result is a cloud-optimised GeoTIFF that a configuration names as ``pre`` or
``post`` of ``[depth.survey]`` like any other elevation raster; a survey delivered as many tiles can be
gridded tile by tile (one GeoTIFF per LAS file, same cell size and CRS) and read as one mosaic
(``pre = "ground_tiles/*.tif"``).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from ..errors import GridError, InputFileError, MissingInputError
from ..science.bare_earth import GROUND_CLASS, add_cell_sums, cell_mean, fill_gaps

#: Largest grid gridded at once [cells] (2.5 GB of sums, counts and elevations): beyond, grid the tiles one by one.
MAX_CELLS = 100_000_000
CHUNK_POINTS = 2_000_000


def _laspy():
    try:
        import laspy
    except ImportError:
        raise InputFileError("reading LAS/LAZ point clouds needs laspy: pip install 'peatburn[lidar]'") from None
    return laspy


def _headers(paths):
    laspy = _laspy()
    out = []
    for p in paths:
        p = Path(p)
        if not p.is_file():
            raise MissingInputError(f"point cloud {p} does not exist; give LAS or LAZ files")
        try:
            with laspy.open(p) as fh:
                h = fh.header
                out.append((p, np.asarray(h.mins, float), np.asarray(h.maxs, float), h.parse_crs(), h.point_count))
        except Exception as exc:  # noqa: BLE001 - laspy raises several kinds for a bad file
            if isinstance(exc, InputFileError):
                raise
            raise InputFileError(f"point cloud {p}: cannot read it as LAS/LAZ ({str(exc).splitlines()[0]}); "
                                 f"for LAZ install peatburn[lidar] (laspy with lazrs)") from None
    return out


def ground_grid(paths, res: float, crs=None):
    """The grid of :func:`ground_raster`: (crs, transform, height, width)."""
    from affine import Affine

    from ..grid import normalise_crs

    heads = _headers(paths)
    if not res or res <= 0 or not math.isfinite(res):
        raise GridError(f"cell size {res!r}: give a positive cell size in metres (e.g. --res 1)")
    crss = {str(h[3].to_wkt()) if h[3] is not None else None for h in heads}
    if crs is None:
        if None in crss or len(crss) != 1:
            raise GridError("the point clouds carry no CRS, or different ones: give the CRS of their coordinates "
                            "(e.g. --crs EPSG:32749) and reproject files that differ")
        crs = heads[0][3]
    crs = normalise_crs(crs if not hasattr(crs, "to_wkt") else crs.to_wkt(), "point clouds")
    mins = np.min([h[1] for h in heads], axis=0)
    maxs = np.max([h[2] for h in heads], axis=0)
    x0, y1 = math.floor(mins[0] / res) * res, math.ceil(maxs[1] / res) * res
    width = int(math.floor((maxs[0] - x0) / res)) + 1
    height = int(math.floor((y1 - mins[1]) / res)) + 1
    if width * height > MAX_CELLS:
        raise GridError(f"point clouds span {width} x {height} cells of {res:g} m, more than {MAX_CELLS:,} at once; "
                        f"grid each delivery tile on its own (the survey route reads the GeoTIFFs as one mosaic)")
    return crs, Affine(res, 0.0, x0, 0.0, -res, y1), height, width


#: Codes of the ``origin`` raster of :func:`ground_raster` (0: no value, the raster's nodata).
ORIGIN_RETURNS, ORIGIN_FILLED = 1, 2


def ground_raster(paths, out, *, res: float, crs=None, fill: str = "tin", max_gap: float | None = None,
                  origin=None) -> dict:
    """Grid the ground returns (class 2) of the LAS/LAZ ``paths`` at ``res`` metres into the GeoTIFF
    ``out``: their mean elevation per cell; a cell without ground return within ``max_gap`` metres of
    one (default :data:`~peatburn.science.bare_earth.MAX_GAP_CELLS` cells) is filled by ``fill``
    ("tin", "idw" or "none", :func:`~peatburn.science.bare_earth.fill_gaps`); other cells have no value.
    ``origin``: also write a uint8 GeoTIFF there, :data:`ORIGIN_RETURNS` where the cell holds ground
    returns, :data:`ORIGIN_FILLED` where it was filled, 0 (nodata) where it has no value.

    Returns a summary: points read, ground points, cells with ground returns, cells filled, cells with a
    value, grid shape.
    """
    from ..grid import RunGrid
    from .writers import BlockRasterWriter

    laspy = _laspy()
    crs, transform, height, width = ground_grid(paths, res, crs)
    sums = np.zeros((height, width))
    counts = np.zeros((height, width), dtype=np.int64)
    total = ground = 0
    for p in paths:
        with laspy.open(p) as fh:
            for pts in fh.chunk_iterator(CHUNK_POINTS):
                total += len(pts)
                keep = np.asarray(pts.classification) == GROUND_CLASS
                ground += int(keep.sum())
                add_cell_sums(sums, counts, np.asarray(pts.x)[keep], np.asarray(pts.y)[keep],
                              np.asarray(pts.z)[keep], transform)
    if ground == 0:
        raise InputFileError(f"no point of {', '.join(str(p) for p in paths)} is classified as ground (ASPRS "
                             f"class {GROUND_CLASS}); classify the ground returns first")
    z = cell_mean(sums, counts)
    measured = counts > 0
    del sums, counts
    try:
        z, filled = fill_gaps(z, res, fill, max_gap)
    except ValueError as exc:
        raise GridError(f"{exc} (--fill, --max-gap)") from None
    grid = RunGrid(crs, transform, width, height)
    what = "mean of ground returns" + ("" if fill == "none" else f", gaps filled by {fill.upper()}")
    with BlockRasterWriter(out, grid, description=f"bare-earth elevation ({what})", units="m") as w:
        for win in grid.windows(512):
            w.write(win, z[win.toslices()])
    if origin is not None:
        code = np.where(measured, ORIGIN_RETURNS, np.where(filled, ORIGIN_FILLED, 0)).astype(np.uint8)
        with BlockRasterWriter(origin, grid, description=f"origin of {Path(out).name}: 1 ground returns, 2 filled",
                               dtype="uint8", nodata=0) as w:
            for win in grid.windows(512):
                w.write(win, code[win.toslices()])
    n_measured, n_filled = int(measured.sum()), int(filled.sum())
    return {"points": total, "ground_points": ground, "cells_with_returns": n_measured, "cells_filled": n_filled,
            "cells_with_value": n_measured + n_filled, "width": width, "height": height}
