"""Per-block accumulation of zone sums: rasterize + bincount, with overlapping polygons allowed.

Polygons of one layer are split into *passes* of mutually non-overlapping polygons (a greedy
colouring of the overlap graph); each pass is rasterized once per block and reduced with
:func:`numpy.bincount`. Usually a layer needs one pass; overlapping concessions need two or
three. A further index marks pixels outside every polygon of the layer (the "outside" row).
The data are read once per block whatever the number of zones.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import shapely

from ..grid import RunGrid
from ..io.vectors import WindowRasterizer


def overlap_passes(geometries) -> list[np.ndarray]:
    """Split polygons into groups whose members do not overlap (their interiors do not meet).

    Greedy colouring in input order; touching edges do not count as overlap.
    """
    geoms = np.asarray(geometries, dtype=object)
    n = len(geoms)
    if n == 0:
        return []
    tree = shapely.STRtree(geoms)
    left, right = tree.query(geoms, predicate="intersects")
    keep = left < right
    left, right = left[keep], right[keep]
    if len(left):
        overl = shapely.overlaps(geoms[left], geoms[right]) | shapely.contains(geoms[left], geoms[right]) | \
            shapely.within(geoms[left], geoms[right])
        left, right = left[overl], right[overl]
    neighbours: dict[int, set[int]] = {}
    for a, b in zip(left.tolist(), right.tolist()):
        neighbours.setdefault(a, set()).add(b)
        neighbours.setdefault(b, set()).add(a)
    colour = np.full(n, -1)
    for i in range(n):
        used = {colour[j] for j in neighbours.get(i, ()) if colour[j] >= 0}
        c = 0
        while c in used:
            c += 1
        colour[i] = c
    return [np.flatnonzero(colour == c) for c in range(colour.max() + 1)]


@dataclass
class ZoneLayerIndex:
    """A zone layer ready to rasterize block by block.

    Zone k (0-based, in ``ids`` order) is bin k+1; bin 0 collects nothing. Bin ``n + 1`` is the
    pseudo-zone "outside every zone of this layer".
    """

    name: str
    ids: list[str]
    passes: list[WindowRasterizer]

    @classmethod
    def from_geometries(cls, name: str, ids: list[str], geometries) -> "ZoneLayerIndex":
        geoms = np.asarray(geometries, dtype=object)
        passes = [WindowRasterizer(geoms[idx], values=idx + 1) for idx in overlap_passes(geoms)]
        return cls(name=name, ids=list(ids), passes=passes)

    @property
    def n_bins(self) -> int:
        return len(self.ids) + 2

    def pass_rasters(self, grid: RunGrid, window) -> list[np.ndarray | None]:
        """One int32 raster of the window per pass: the bin of the pass's zone at each pixel, 0 where none;
        None for a pass none of whose polygons meets the window (most passes of overlapping scars)."""
        return [p.rasterize_or_none(grid, window) for p in self.passes]

    def bins_at(self, rasters: list[np.ndarray], shape: tuple[int, int],
                where: np.ndarray | None = None) -> list[np.ndarray]:
        """The bins of :meth:`pass_rasters` output for a window of ``shape`` (at the pixels ``where`` only,
        1-D, when given; a pass without polygons in the window left out), plus
        one array giving ``n + 1`` where no pass has a zone.

        "Outside" is defined by the passes themselves, not by a rasterization of the union of the
        polygons: every pixel then falls in a zone or in the outside bin, so a layer's sums add up
        to the run's whatever GDAL decides for pixel centres on shared edges.
        """
        out = [r if where is None else r[where] for r in rasters if r is not None]  # an empty pass adds nothing
        inside = np.zeros(shape if where is None else (int(np.count_nonzero(where)),), bool)
        for b in out:
            inside |= b > 0
        out.append(np.where(inside, 0, len(self.ids) + 1).astype("int32"))
        return out

    def bin_rasters(self, grid: RunGrid, window, where: np.ndarray | None = None) -> list[np.ndarray]:
        """One int32 bin raster per pass, plus one giving ``n + 1`` where no pass has a zone; with
        ``where`` (a boolean mask of the window) 1-D arrays at those pixels only (:meth:`bins_at`)."""
        return self.bins_at(self.pass_rasters(grid, window), (int(window.height), int(window.width)), where)


def coverage_count(bins: list[np.ndarray]) -> np.ndarray:
    """How many polygons of a layer cover each pixel, from :meth:`ZoneLayerIndex.bin_rasters`
    output (one bin array per pass, then the "outside" array, which is left out): the polygons of
    one pass do not overlap, so a pixel is in at most one polygon per pass."""
    passes = bins[:-1]
    if not passes:
        return np.zeros(np.shape(bins[0]) if bins else (0,), "int32")
    k = np.zeros(np.shape(passes[0]), "int32")
    for b in passes:
        k += b > 0
    return k


def accumulate(bins: list[np.ndarray], values: dict[str, np.ndarray], n_bins: int,
               valid: np.ndarray | None = None) -> dict[str, np.ndarray]:
    """Sum each array of ``values`` per bin over all pass rasters in ``bins``.

    Only pixels where ``valid`` is true are visited (pass the burned-area mask when every value is
    zero outside it: the cost then scales with the burned pixels, not the block). NaN values
    contribute nothing. Returns arrays of length ``n_bins``.
    """
    keys = list(values)
    shape = np.shape(bins[0]) if bins else ()
    if valid is not None:
        bins = [b[valid] for b in bins]
    rows = [np.broadcast_to(values[k], shape) for k in keys]
    stack = np.stack([r[valid] if valid is not None else r.ravel() for r in rows]) if keys else np.zeros((0, 0))
    if np.isnan(stack).any():
        stack = np.where(np.isnan(stack), 0.0, stack)
    sums = accumulate_stacked([np.ravel(b) for b in bins], stack, n_bins)
    return dict(zip(keys, sums))


def compact_bins(bins: list[np.ndarray]) -> tuple[np.ndarray, list[np.ndarray]]:
    """The bins that occur in one block, and each pass's bins renumbered to them.

    ``bins`` holds, per pass, the 1-D bin index (0 = no zone) of the same pixels. Returns ``present``,
    the sorted distinct non-zero bins of all passes, and per pass the index into ``present`` plus one
    (0 stays 0). Summing with :func:`accumulate_stacked` over ``len(present) + 1`` bins then costs in
    proportion to the zones a block touches, not to the layer's size (the scars' own layer holds a
    bin per scar: tens of thousands on a national run, a dozen per block).
    """
    nonzero = [b[b > 0] for b in bins]
    present = np.unique(np.concatenate(nonzero)) if nonzero else np.zeros(0, np.int64)
    if present.size == 0:
        return present, [np.zeros(np.shape(b), np.intp) for b in bins]
    lookup = np.zeros(int(present[-1]) + 1, np.intp)  # bin -> its place in ``present`` + 1; 0 -> 0
    lookup[present] = np.arange(1, present.size + 1)
    return present, [lookup[b] for b in bins]


def accumulate_stacked(bins: list[np.ndarray], weights: np.ndarray, n_bins: int,
                       rows=None) -> np.ndarray:
    """Per-bin sums of the rows of ``weights`` (k quantities x n pixels).

    ``bins`` holds, per pass, the 1-D bin index (0 = no zone) of the same n pixels. Row ``i`` of
    the result (k x n_bins) is ``bincount(bin, weights[i])`` summed over the passes. ``rows``
    lists the rows worth reducing (the others are known to be zero and stay zero). The bin index
    of a pass is selected once for all rows, and not at all when every pixel has a zone.
    """
    k = weights.shape[0]
    sums = np.zeros((k, n_bins))
    rows = range(k) if rows is None else rows
    for b in bins:
        sel = b > 0
        if sel.all():
            idx, pick = b, None
        elif sel.any():
            idx, pick = b[sel], sel
        else:
            continue
        idx = idx.astype(np.intp, copy=False)  # once, not in every bincount
        for i in rows:
            w = weights[i] if pick is None else weights[i][pick]
            sums[i] += np.bincount(idx, weights=w, minlength=n_bins)[:n_bins]
    return sums
