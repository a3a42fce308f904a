"""Overview halving from the valid pixels alone (peatburn.numerics.pyramids.halve_cells).

References: plain numpy built here (the 2 x 2 footprints as a ``reshape``, the mean of the valid pixels
in float64 rounded to float32, as GDAL's AVERAGE overviews, each level from the one below; the most
frequent valid code by counting each code, the smaller on a tie, as GDAL's MODE restricted to the valid
pixels), and the footprint form :func:`halve_dense`, which :func:`halve_cells` must equal bit for bit
(the same float32 on every level, since the writer's in-memory and GDAL-written levels come from it).
"""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from peatburn.numerics.pyramids import half_shape, halve, halve_cells, halve_dense, scatter

NODATA = {False: -9999.0, True: 0}


def _pad_even(a, fill):
    h, w = a.shape
    return np.pad(a, ((0, h % 2), (0, w % 2)), constant_values=fill)


def _mean_reference(a: np.ndarray) -> np.ndarray:
    """Next level of a float array with NaN for nodata: mean of the valid pixels of each 2 x 2 footprint."""
    p = _pad_even(a.astype(np.float64), np.nan)
    q = p.reshape(p.shape[0] // 2, 2, p.shape[1] // 2, 2)
    valid = np.isfinite(q)
    count = valid.sum(axis=(1, 3))
    total = np.where(valid, q, 0.0).sum(axis=(1, 3))
    with np.errstate(all="ignore"):
        return np.where(count > 0, total / count, np.nan).astype(np.float32)


def _mode_reference(a: np.ndarray, nodata) -> np.ndarray:
    """Next level of a code array: the most frequent valid code of each footprint, the smaller on a tie."""
    p = _pad_even(a, nodata)
    q = p.reshape(p.shape[0] // 2, 2, p.shape[1] // 2, 2)
    out = np.full((q.shape[0], q.shape[2]), nodata, dtype=a.dtype)
    best = np.zeros(out.shape, dtype=np.int64)
    for code in sorted(set(np.unique(a).tolist()) - {nodata}):  # ascending: a tie keeps the smaller code
        n = (q == code).sum(axis=(1, 3))
        out = np.where(n > best, code, out).astype(a.dtype)
        best = np.maximum(best, n)
    return out


def _levels_from_cells(a: np.ndarray, categorical: bool):
    """Every level above ``a`` through halve_cells, each from the valid pixels of the one below, as dense arrays."""
    nodata = NODATA[categorical]
    valid = a != nodata
    if not categorical:
        valid &= np.isfinite(a)
    cells = np.flatnonzero(valid)
    vals = a.ravel()[cells]
    shape, out = a.shape, []
    while shape != (1, 1):
        cells, vals = halve_cells(shape, cells, vals, categorical=categorical, nodata=nodata)
        shape = half_shape(shape)
        out.append(scatter(shape, cells, vals, nodata=nodata, dtype=a.dtype if categorical else np.float32))
    return out


@st.composite
def rasters(draw, categorical):
    h, w = draw(st.integers(1, 23)), draw(st.integers(1, 23))
    seed = draw(st.integers(0, 2**31 - 1))
    share = draw(st.sampled_from([0.02, 0.3, 0.7, 1.0]))
    rng = np.random.default_rng(seed)
    keep = rng.random((h, w)) < share
    if categorical:
        return np.where(keep, rng.integers(1, 4, (h, w)), 0).astype(np.uint8)  # three codes: many ties
    # values of every scale, signed zeros, and NaN as well as the nodata value where nothing is
    pool = np.array([0.0, -0.0, 1e-8, 0.3, 0.7, 2.5, 1e6, -4.0], dtype=np.float32)
    v = np.where(rng.random((h, w)) < 0.5, rng.choice(pool, (h, w)), rng.normal(0.4, 0.3, (h, w)))
    hole = np.where(rng.random((h, w)) < 0.5, np.nan, NODATA[False])
    return np.where(keep, v, hole).astype(np.float32)


@settings(max_examples=120, deadline=None)
@given(st.data())
def test_sparse_levels_equal_the_footprint_form_bit_for_bit(data):
    categorical = data.draw(st.booleans())
    a = data.draw(rasters(categorical))
    nodata = NODATA[categorical]
    dense = np.where(np.isnan(a), nodata, a).astype(a.dtype) if not categorical else a
    for got in _levels_from_cells(a, categorical):
        dense = halve_dense(dense, categorical=categorical, nodata=nodata)
        assert got.dtype == dense.dtype and got.shape == dense.shape
        np.testing.assert_array_equal(got.view(np.uint8), dense.view(np.uint8))  # bits: -0.0 is not 0.0


@settings(max_examples=120, deadline=None)
@given(rasters(categorical=False))
def test_sparse_levels_are_means_of_the_valid_pixels(a):
    """Reference: the reshape mean of the valid pixels, each level from the one below (a mean of means)."""
    ref = np.where(a == NODATA[False], np.nan, a)
    for got in _levels_from_cells(a, False):
        ref = _mean_reference(ref)
        np.testing.assert_array_equal(got == NODATA[False], np.isnan(ref))
        np.testing.assert_allclose(got[np.isfinite(ref)], ref[np.isfinite(ref)], rtol=1e-6, atol=0)


@settings(max_examples=120, deadline=None)
@given(rasters(categorical=True))
def test_sparse_levels_keep_the_most_frequent_code(a):
    """Reference: counts of each code per footprint, the smaller code on a tie."""
    ref = a
    for got in _levels_from_cells(a, True):
        ref = _mode_reference(ref, 0)
        np.testing.assert_array_equal(got, ref)


def test_ties_and_odd_edges_by_hand():
    """Worked by hand: footprint (1, 2 / 2, 1) -> 1 (tie, the smaller); (3, 2 / -, 3) -> 3; the odd last
    column's footprints of 2 pixels: (2 / -) -> 2, (- / -) -> nodata."""
    a = np.array([[1, 2, 3, 2, 2],
                  [2, 1, 0, 3, 0]], dtype=np.uint8)
    cells = np.flatnonzero(a)
    got_cells, got = halve_cells(a.shape, cells, a.ravel()[cells], categorical=True, nodata=0)
    np.testing.assert_array_equal(got_cells, [0, 1, 2])
    np.testing.assert_array_equal(got, [1, 3, 2])
    np.testing.assert_array_equal(halve(a.shape, cells, a.ravel()[cells], categorical=True, nodata=0), [[1, 3, 2]])


def test_a_mean_equal_to_nodata_is_left_out_as_the_level_reads_it():
    """(-9998 + -10000) / 2 is the nodata value: the footprint form reads it as nodata on the next level,
    and the sparse form leaves it out, so the two stay equal."""
    a = np.array([[-9998.0, -10000.0, 0.5, -9999.0]], dtype=np.float32)
    cells = np.flatnonzero(a != -9999.0)
    got_cells, got = halve_cells(a.shape, cells, a.ravel()[cells], categorical=False, nodata=-9999.0)
    np.testing.assert_array_equal(got_cells, [1])
    np.testing.assert_array_equal(got, np.float32([0.5]))


@pytest.mark.parametrize("categorical", [False, True])
def test_empty_window_has_no_valid_pixel_above(categorical):
    cells, vals = halve_cells((5, 7), np.array([], dtype=np.int64),
                              np.array([], dtype=np.uint8 if categorical else np.float32),
                              categorical=categorical, nodata=NODATA[categorical])
    assert cells.size == 0 and vals.size == 0
