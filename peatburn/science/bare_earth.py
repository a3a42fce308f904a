"""A bare-earth elevation grid from ground-classified lidar points: the mean elevation of the ground
returns falling in each cell.

The per-cell mean of the ground points is the simplest of the usual gridding rules for a terrain model
from classified returns (common practice; it is, for example, the ``mean`` output of PDAL's
``writers.gdal``). It needs a point density of at least about one ground return per cell: a cell with no
ground return stays empty (no value), it is not interpolated. On a sloping cell the mean stands for the
elevation at the mean position of its points, not at the cell centre; with points spread evenly over the
cell the two agree to within the surface's curvature.

References
----------
ASPRS (2019). LAS Specification 1.4 - R15, Table 17 (ASPRS standard point classes): class 2 = Ground.
"""

from __future__ import annotations

import numpy as np

#: ASPRS standard point class of ground returns (LAS 1.4 R15, Table 17).
GROUND_CLASS = 2  # ASPRS LAS 1.4 R15, Table 17: class 2 = ground


def cell_sums(x, y, z, transform, shape) -> tuple[np.ndarray, np.ndarray]:
    """Sum of the elevations and count of the points in each cell of a north-up grid.

    Parameters
    ----------
    x, y : array [m, the grid's CRS]
        Point coordinates.
    z : array [m]
        Point elevations.
    transform : affine.Affine
        North-up cell-corner transform of the grid (``a`` > 0, ``e`` < 0, no rotation).
    shape : (rows, cols)

    Returns
    -------
    sums : float64 array of ``shape`` [m]
    counts : int64 array of ``shape`` [-]
        Points outside the grid are left out.
    """
    rows, cols = int(shape[0]), int(shape[1])
    x, y, z = (np.asarray(v, dtype=np.float64).ravel() for v in (x, y, z))
    c = np.floor((x - transform.c) / transform.a).astype(np.int64)
    r = np.floor((y - transform.f) / transform.e).astype(np.int64)
    inside = (c >= 0) & (c < cols) & (r >= 0) & (r < rows)
    idx = r[inside] * cols + c[inside]
    n = rows * cols
    sums = np.bincount(idx, weights=z[inside], minlength=n).reshape(rows, cols)
    counts = np.bincount(idx, minlength=n).reshape(rows, cols)
    return sums, counts


def cell_mean(sums, counts) -> np.ndarray:
    """Mean elevation per cell [m] from :func:`cell_sums` (added over chunks of points); NaN where a
    cell holds no point."""
    sums = np.asarray(sums, dtype=np.float64)
    counts = np.asarray(counts)
    out = np.full(sums.shape, np.nan)
    hit = counts > 0
    out[hit] = sums[hit] / counts[hit]
    return out
