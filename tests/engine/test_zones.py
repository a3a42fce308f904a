"""Zone sums by rasterize + bincount, with overlapping polygons."""

import numpy as np
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st
from rasterio.crs import CRS
from rasterio.features import rasterize
from rasterio.transform import from_origin

from peatburn.grid import RunGrid
from peatburn.engine.zones import ZoneLayerIndex, accumulate, overlap_passes

GRID = RunGrid(CRS.from_epsg(32749), from_origin(0, 100, 1, 1), 100, 100)


def test_overlap_passes_separate_overlaps_only():
    a = shapely.box(0, 0, 10, 10)
    b = shapely.box(5, 5, 15, 15)  # overlaps a
    c = shapely.box(10, 0, 20, 5)  # touches a along an edge: not an overlap
    passes = overlap_passes([a, b, c])
    assert len(passes) == 2
    assert {0, 2} <= set(passes[0].tolist()) and passes[1].tolist() == [1]


def _sum_blocks(layer, values, block):
    total = np.zeros(layer.n_bins)
    for w in GRID.windows(block):
        r0, c0 = int(w.row_off), int(w.col_off)
        v = values[r0:r0 + int(w.height), c0:c0 + int(w.width)]
        total += accumulate(layer.bin_rasters(GRID, w), {"v": v}, layer.n_bins)["v"]
    return total


def test_overlapping_zones_each_get_their_full_sum():
    a = shapely.box(10, 10, 60, 60)
    b = shapely.box(40, 40, 90, 90)
    layer = ZoneLayerIndex.from_geometries("c", ["A", "B"], [a, b])
    values = np.ones(GRID.shape)
    sums = _sum_blocks(layer, values, 32)
    # reference: rasterio.features.rasterize of each polygon alone (pixel-centre rule), counted by hand
    for k, g in enumerate([a, b], start=1):
        ref = rasterize([(g, 1)], out_shape=GRID.shape, transform=GRID.transform).sum()
        assert sums[k] == ref == 2500
    union = rasterize([(a, 1), (b, 1)], out_shape=GRID.shape, transform=GRID.transform).sum()
    assert sums[3] == GRID.size - union  # the "outside every zone" bin


@settings(max_examples=25, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 90), st.integers(0, 90), st.integers(3, 40), st.integers(3, 40)),
                min_size=1, max_size=8), st.integers(7, 64), st.integers(0, 10_000))
def test_partition_zone_sums_equal_total(boxes, block, seed):
    """Invariant: for a layer that partitions its area (no overlaps), zone sums plus the outside bin
    equal the total over the same pixels, whatever the block size."""
    geoms = []
    for x, y, w, h in boxes:
        g = shapely.box(x, y, min(x + w, 100), min(y + h, 100))
        for prev in geoms:
            g = g.difference(prev)
        if not g.is_empty and g.area > 0:
            geoms.append(g)
    if not geoms:
        return
    layer = ZoneLayerIndex.from_geometries("z", [str(i) for i in range(len(geoms))], geoms)
    values = np.random.default_rng(seed).random(GRID.shape)
    sums = _sum_blocks(layer, values, block)
    assert np.isclose(sums[1:].sum(), values.sum())


def test_nan_values_contribute_nothing():
    layer = ZoneLayerIndex.from_geometries("z", ["A"], [shapely.box(0, 0, 100, 100)])
    v = np.ones(GRID.shape)
    v[0, :] = np.nan
    s = _sum_blocks(layer, v, 50)
    assert s[1] == GRID.size - 100


def test_coverage_count_of_overlapping_polygons():
    """Two squares overlapping on one column of pixels (hand-drawn 1 x 3 grid): cover counts 1, 2, 1."""
    from peatburn.engine.zones import coverage_count

    passes = [np.array([1, 1, 0]), np.array([0, 2, 2])]
    outside = np.array([0, 0, 0])
    assert coverage_count(passes + [outside]).tolist() == [1, 2, 1]


@settings(max_examples=60, deadline=None)
@given(st.integers(1, 4), st.integers(0, 300), st.integers(1, 50_000), st.integers(0, 2**31 - 1))
def test_compact_bins_sum_like_a_dense_bincount(passes, n, n_bins, seed):
    """Sums over the bins a block touches (compact_bins) equal numpy's bincount over every bin of the
    layer, for any bins per pass, zeros ("no zone") included."""
    from peatburn.engine.zones import accumulate_stacked, compact_bins

    rng = np.random.default_rng(seed)
    bins = [np.where(rng.random(n) < 0.3, 0, rng.integers(1, n_bins + 1, n)) for _ in range(passes)]
    w = rng.normal(size=(3, n))
    present, local = compact_bins(bins)
    got = np.zeros((3, n_bins + 1))
    got[:, present] = accumulate_stacked(local, w, present.size + 1)[:, 1:]
    want = np.zeros((3, n_bins + 1))
    for b in bins:
        for i in range(3):
            want[i] += np.bincount(b, weights=w[i], minlength=n_bins + 1)
    want[:, 0] = 0.0  # bin 0 collects nothing
    np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-12)
    every = np.concatenate(bins)
    assert np.array_equal(present, np.unique(every[every > 0]))
