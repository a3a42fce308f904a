"""Halving a raster for its overviews: each pixel of the next level from the 2 x 2 pixels below it,
computed from the valid pixels alone (cost in proportion to them, so a mostly empty raster halves fast).

* Values (float rasters): the mean of the valid pixels of the 2 x 2 footprint, nodata where none is
  valid. This is the rule of GDAL's ``AVERAGE`` overview resampling, which leaves nodata pixels out
  and builds each level from the one below (GDAL documentation, gdaladdo ``-r average``); applied
  level by level it is a mean of means, as in GDAL.
* Codes (class rasters): the most frequent valid code of the footprint, the smaller code on a tie,
  nodata where none is valid: GDAL's ``MODE`` rule restricted to the valid pixels. A scar smaller
  than a pixel of the level stays visible, where nearest-neighbour decimation drops most of them.

An odd last row or column halves into a footprint of 1 x 2, 2 x 1 or 1 x 1 pixels (the level's size
is the ceiling of half the size below, as GDAL's overviews).
"""

from __future__ import annotations

import numpy as np


def half_shape(shape: tuple[int, int]) -> tuple[int, int]:
    """Shape of the next level [px]: the ceiling of half of each side."""
    return (int(shape[0]) + 1) // 2, (int(shape[1]) + 1) // 2


def halve_cells(shape: tuple[int, int], cells: np.ndarray, values: np.ndarray, *, categorical: bool,
                nodata: float) -> tuple[np.ndarray, np.ndarray]:
    """The valid pixels of the next level of a window of ``shape`` holding ``values`` at the row-major
    positions ``cells`` (every other pixel is nodata): the next level's valid positions (row-major in a
    window of :func:`half_shape` (``shape``), ascending) and their values.

    The cost is in proportion to the valid pixels and the cells of the next level (two ``bincount``
    passes), with no dense array of the window: a level above can be halved from the result directly,
    so a mostly empty window halves through all its levels fast.

    Parameters
    ----------
    shape : (rows, cols) of the window [px]
    cells : int array, positions of the valid pixels in the window (row-major, ascending: the values of a
        footprint are added in that order, the order of :func:`halve_dense`, so both give the same float32)
    values : array, their values [the raster's unit]; none may equal ``nodata``
    categorical : bool
        Codes (most frequent valid code, the smaller code on a tie) instead of values (mean of the valid
        values, summed in float64 and rounded to float32).
    nodata : float
        The raster's nodata value: a mean that happens to equal it is left out, as :func:`halve_dense`
        of the level would read it.

    Returns
    -------
    (cells, values): int64 positions and their values, float32 for values, the dtype of ``values`` for
    codes.
    """
    w = int(shape[1])
    h2, w2 = half_shape(shape)
    n = h2 * w2
    cells = np.asarray(cells, dtype=np.int64)
    r, c = np.divmod(cells, w)
    parent = (r >> 1) * w2 + (c >> 1)
    if not cells.size:
        return cells, (np.empty(0, dtype=np.float32) if not categorical else np.asarray(values)[:0])
    count = np.bincount(parent, minlength=n)
    hit = np.flatnonzero(count > 0)  # a boolean's nonzero: about 4x faster than the counts' own
    if not categorical:
        total = np.bincount(parent, weights=np.asarray(values, dtype=np.float64), minlength=n)
        mean = (total[hit] / count[hit]).astype(np.float32)
        keep = mean != nodata
        return (hit, mean) if keep.all() else (hit[keep], mean[keep])
    values = np.asarray(values)
    if values.min() == values.max():  # one code: every footprint's most frequent
        return hit, np.full(hit.size, values[0], dtype=values.dtype)
    codes, which = np.unique(values, return_inverse=True)
    k = codes.size
    votes = np.bincount(parent * k + which.ravel(), minlength=n * k).reshape(n, k)[hit]
    return hit, codes[np.argmax(votes, axis=1)]  # argmax: the first (smaller) code on a tie


def halve(shape: tuple[int, int], flat_index: np.ndarray, values: np.ndarray, *, categorical: bool,
          nodata: float) -> np.ndarray:
    """The next level of a window of ``shape`` holding ``values`` at the row-major ``flat_index``
    positions (every other pixel is nodata): :func:`halve_cells` as a dense array.

    Parameters
    ----------
    shape : (rows, cols) of the window [px]
    flat_index : int array, positions of the valid pixels in the window (row-major, ascending)
    values : array, their values [the raster's unit]
    categorical : bool
        Codes (most frequent valid code) instead of values (mean of the valid values).
    nodata : float
        Value of the output where the footprint holds no valid pixel.

    Returns
    -------
    numpy.ndarray of :func:`half_shape` (``shape``), float32 for values, the dtype of ``values``
    for codes.
    """
    cells, vals = halve_cells(shape, flat_index, values, categorical=categorical, nodata=nodata)
    return scatter(half_shape(shape), cells, vals, nodata=nodata, dtype=vals.dtype)


def scatter(shape: tuple[int, int], cells: np.ndarray, values: np.ndarray, *, nodata: float, dtype) -> np.ndarray:
    """A dense array of ``shape`` holding ``values`` at the row-major positions ``cells``, nodata elsewhere."""
    out = np.full(shape, nodata, dtype=dtype)
    out.ravel()[cells] = values
    return out


def halve_dense(a: np.ndarray, *, categorical: bool, nodata: float) -> np.ndarray:
    """:func:`halve` of a whole array whose nodata pixels equal ``nodata`` (NaN counts as nodata too).

    Same result as ``halve`` on the array's valid pixels (the four pixels of a footprint are added in the
    same order), computed on the 2 x 2 footprints directly: no index arrays, which matters for the
    overview levels above the first, halved from a dense level below."""
    a = np.asarray(a)
    h, w = a.shape
    h2, w2 = half_shape(a.shape)
    valid = a != nodata
    if a.dtype.kind == "f":
        valid &= np.isfinite(a)
    if (h % 2) or (w % 2):  # an odd edge: pad with nodata (a footprint of 1 or 2 pixels)
        a = np.pad(a, ((0, h % 2), (0, w % 2)), constant_values=nodata)
        valid = np.pad(valid, ((0, h % 2), (0, w % 2)), constant_values=False)
    quads = [(a[i::2, j::2], valid[i::2, j::2]) for i in (0, 1) for j in (0, 1)]  # the order of halve's sums
    count = sum(v.astype(np.int64) for _, v in quads)
    hit = count > 0
    if not categorical:
        total = np.zeros((h2, w2))
        for q, v in quads:
            total += np.where(v, q, 0.0)
        out = np.full((h2, w2), nodata, dtype=np.float32)
        out[hit] = (total[hit] / count[hit]).astype(np.float32)
        return out
    out = np.full((h2, w2), nodata, dtype=a.dtype)
    if hit.any():
        codes = np.unique(a[valid])
        votes = np.stack([sum(((q == c) & v).astype(np.int64) for q, v in quads) for c in codes], axis=-1)
        out[hit] = codes[np.argmax(votes[hit], axis=-1)]  # argmax: the first (smaller) code on a tie
    return out
