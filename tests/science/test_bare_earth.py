"""Gap filling of the bare-earth grid (peatburn.science.bare_earth).

References of the checks: a plane z = a + b x + c y is reproduced exactly by any linear interpolation on
triangles whose vertices lie on it (analytic truth); a weighted mean of a constant is the constant (IDW,
Shepard 1968); the convex hull is scipy.spatial.ConvexHull's (Qhull) over the cells holding a value; the
distance to the nearest value is a brute-force minimum over all cell pairs (numpy), not the distance
transform the module uses.
"""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.spatial import ConvexHull

from peatburn.science.bare_earth import fill_gaps, gap_distance, idw_values, tin_values


def _plane_grid(rows, cols, share, seed, a=31.5, b=0.37, c=-0.81):
    """A plane at the cell centres (col, row), holding a value in a random ``share`` of the cells."""
    rng = np.random.default_rng(seed)
    cc, rr = np.meshgrid(np.arange(cols, dtype=float), np.arange(rows, dtype=float))
    truth = a + b * cc + c * rr
    z = np.where(rng.random((rows, cols)) < share, truth, np.nan)
    return z, truth


def _inside_hull(z):
    """Cells whose centre lies inside (or on) the convex hull of the cells holding a value (Qhull)."""
    vr, vc = np.nonzero(np.isfinite(z))
    eq = ConvexHull(np.column_stack([vc, vr]).astype(float)).equations
    rr, cc = np.mgrid[0:z.shape[0], 0:z.shape[1]]
    p = np.column_stack([cc.ravel(), rr.ravel()]).astype(float)
    return (p @ eq[:, :2].T + eq[:, 2] <= 1e-9).all(axis=1).reshape(z.shape)


def _brute_distance(has, res):
    vr, vc = np.nonzero(has)
    rr, cc = np.mgrid[0:has.shape[0], 0:has.shape[1]]
    d2 = (rr.ravel()[:, None] - vr[None, :]) ** 2 + (cc.ravel()[:, None] - vc[None, :]) ** 2
    return res * np.sqrt(d2.min(axis=1)).reshape(has.shape)


@pytest.mark.parametrize("block", [1024, 9])  # one block, and many blocks with margins
@pytest.mark.parametrize("share", [0.6, 0.08])
def test_tin_reproduces_a_plane_inside_the_hull_and_nothing_outside(block, share):
    z, truth = _plane_grid(40, 57, share, seed=int(share * 100) + block)
    filled, was = fill_gaps(z, res=2.0, method="tin", max_gap=1e6, block=block)
    had = np.isfinite(z)
    np.testing.assert_array_equal(filled[had], z[had])  # values with returns untouched
    np.testing.assert_allclose(filled[was], truth[was], rtol=0, atol=1e-9)  # analytic: the plane itself
    hull = _inside_hull(z)
    assert not (was & ~hull).any()  # never extrapolated beyond the values' outline
    assert np.isnan(filled[~had & ~was]).all()
    if block == 1024:  # one triangulation over the whole grid: every empty cell of the hull is filled
        assert (was == (hull & ~had)).all()


def test_idw_of_a_constant_is_the_constant_and_stays_within_the_values():
    rng = np.random.default_rng(3)
    z = np.where(rng.random((30, 30)) < 0.2, 7.25, np.nan)
    filled, was = fill_gaps(z, res=1.0, method="idw", max_gap=50.0, block=8)
    assert was.sum() == np.isnan(z).sum()
    np.testing.assert_allclose(filled, 7.25, rtol=0, atol=1e-12)


@settings(max_examples=25, deadline=None)
@given(st.integers(0, 2**31 - 1), st.sampled_from(["tin", "idw"]), st.floats(0.5, 6.0))
def test_fills_stay_within_the_values_and_within_max_gap(seed, method, max_gap):
    """Invariants: a filled value lies between the smallest and largest value (both methods are convex
    combinations); a cell farther than max_gap from every value (brute force) stays empty."""
    rng = np.random.default_rng(seed)
    z = np.where(rng.random((14, 17)) < 0.25, rng.normal(20.0, 3.0, (14, 17)), np.nan)
    if np.isfinite(z).sum() < 3:
        return
    res = 1.5
    filled, was = fill_gaps(z, res=res, method=method, max_gap=max_gap, block=6)
    v = z[np.isfinite(z)]
    assert (filled[was] >= v.min() - 1e-9).all() and (filled[was] <= v.max() + 1e-9).all()
    d = _brute_distance(np.isfinite(z), res)
    assert not (was & (d > max_gap)).any()
    if method == "idw":  # no hull for IDW: every cell within reach is filled
        assert (was == (np.isnan(z) & (d <= max_gap))).all()


def test_max_gap_leaves_a_wide_hole_empty():
    z, truth = _plane_grid(50, 50, 1.0, seed=0)
    rr, cc = np.mgrid[0:50, 0:50]
    hole = (rr - 25) ** 2 + (cc - 25) ** 2 <= 10**2  # a hole 21 cells across
    z[hole] = np.nan
    filled, was = fill_gaps(z, res=0.5, method="tin", max_gap=2.0)  # 4 cells
    d = _brute_distance(~hole, 0.5)
    np.testing.assert_array_equal(was, hole & (d <= 2.0))
    assert np.isnan(filled[hole & (d > 2.0)]).all() and np.isnan(filled[25, 25])
    np.testing.assert_allclose(filled[was], truth[was], rtol=0, atol=1e-9)


def test_gap_distance_is_the_brute_force_distance():
    rng = np.random.default_rng(8)
    has = rng.random((23, 31)) < 0.05
    np.testing.assert_allclose(gap_distance(has, 2.5), _brute_distance(has, 2.5), rtol=1e-12)
    assert np.isinf(gap_distance(np.zeros((3, 3), bool), 1.0)).all()


def test_none_degenerate_and_bad_arguments():
    z, _ = _plane_grid(10, 12, 0.5, seed=1)
    filled, was = fill_gaps(z, res=1.0, method="none")
    np.testing.assert_array_equal(filled, z)
    assert not was.any()
    line = np.full((5, 5), np.nan)
    line[2, :] = 3.0  # collinear values: no triangle, nothing filled by TIN
    assert np.isnan(tin_values(line, np.isnan(line))).all()
    assert np.isnan(idw_values(np.full((3, 3), np.nan), np.ones((3, 3), bool))).all()
    with pytest.raises(ValueError, match="fill method"):
        fill_gaps(z, res=1.0, method="kriging")
    with pytest.raises(ValueError, match="zero or more"):
        fill_gaps(z, res=1.0, max_gap=-1.0)


def test_cell_sums_added_chunk_by_chunk_equal_scipy_binned_statistic():
    """Points added in chunks (add_cell_sums, each chunk over the span of cells it reaches) give the
    per-cell sums and counts of scipy.stats.binned_statistic_2d over all points at once (the reference);
    points outside the grid are left out."""
    from affine import Affine
    from scipy.stats import binned_statistic_2d

    from peatburn.science.bare_earth import add_cell_sums

    rng = np.random.default_rng(5)
    rows, cols, res = 30, 41, 2.0
    t = Affine(res, 0.0, 1000.0, 0.0, -res, 5000.0)
    x = rng.uniform(990.0, 1000.0 + cols * res + 10.0, 5000)  # some points beyond the grid's sides
    y = rng.uniform(5000.0 - rows * res - 10.0, 5010.0, 5000)
    x = np.sort(x)  # chunks that reach only part of the grid, as strips of a flight line do
    z = rng.normal(20.0, 3.0, x.size)
    sums, counts = np.zeros((rows, cols)), np.zeros((rows, cols), np.int64)
    for part in np.array_split(np.arange(x.size), 7):
        add_cell_sums(sums, counts, x[part], y[part], z[part], t)
    col_edges = 1000.0 + res * np.arange(cols + 1)
    row_edges = 5000.0 - res * np.arange(rows + 1)[::-1]  # ascending y; row 0 is the top
    ref_sum = binned_statistic_2d(y, x, z, "sum", bins=[row_edges, col_edges]).statistic[::-1]
    ref_n = binned_statistic_2d(y, x, z, "count", bins=[row_edges, col_edges]).statistic[::-1]
    np.testing.assert_array_equal(counts, ref_n)
    np.testing.assert_allclose(sums, ref_sum, rtol=1e-12, atol=1e-9)
    assert 0 < counts.sum() < x.size
