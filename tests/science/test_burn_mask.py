"""Burned-area masks: which pixels burned, clean-up, fires as 8-connected components, fire dates.

Expected values are counted by hand on the small arrays drawn in each test, and component counts
are checked against scipy.ndimage.label (an outside reference with its own connectivity rules).
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays
from scipy import ndimage

from peatburn.science import burn_mask as bm

EIGHT = np.ones((3, 3), dtype=bool)  # scipy's structure for 8-connectivity


def grid(text: str) -> np.ndarray:
    return np.array([[c == "#" for c in row] for row in text.split()], dtype=bool)


def test_two_blobs_touching_at_a_corner_are_one_fire():
    """Hand-drawn: two 2 x 2 blobs meeting only at a corner, and a single pixel apart.
    8-connectivity: the corner-touching blobs are one fire (8 px), the lone pixel another -> 2 fires."""
    m = grid("""
        ##......
        ##......
        ..##....
        ..##...#
    """)
    labels, n = bm.label_fires(m)
    assert n == 2
    assert labels[0, 0] == labels[3, 3] == 1  # numbered by first pixel row by row
    assert labels[3, 7] == 2
    assert (labels == 1).sum() == 8
    # 4-connectivity (scipy's default structure) would split the blobs: the difference is the rule
    assert ndimage.label(m)[1] == 3
    assert ndimage.label(m, structure=EIGHT)[1] == n


def test_burned_values_nodata_and_nan():
    v = np.array([[0, 1, 2, 3], [2, 0, 255, np.nan]])
    valid = np.array([[True, True, True, True], [True, True, False, True]])
    assert bm.burned_pixels(v, valid).tolist() == [[False, True, True, True], [True, False, False, False]]
    assert bm.burned_pixels(v, valid, [2, 3]).tolist() == [[False, False, True, True], [True, False, False, False]]


def test_speckle_removed_by_min_area_and_hole_filled():
    """A 3 x 3 speckle (9 px) is removed below 10 px and kept at 9 px; a 2 px hole inside a
    5 x 6 block is filled below 3 px and kept at 2 px (hand-counted)."""
    m = grid("""
        .........###
        .######..###
        .#....#..###
        .######.....
        .######.....
        .######.....
    """)
    # the hole: row 2, columns 2-5 is 4 px unburned inside the block
    out = bm.clean_mask(m, min_object_px=10)
    assert not out[0:3, 9:12].any() and out[1:6, 1:7].sum() == m[1:6, 1:7].sum()
    assert bm.clean_mask(m, min_object_px=9)[0:3, 9:12].all()
    filled = bm.clean_mask(m, min_hole_px=5)
    assert filled[2, 2:6].all() and filled.sum() == m.sum() + 4
    assert (bm.clean_mask(m, min_hole_px=4) == m).all()
    # an unburned notch open to the raster's edge is not a hole: a 2 px notch stays at any size
    notch = np.ones((4, 4), bool)
    notch[0, 1:3] = False
    assert (bm.clean_mask(notch, min_hole_px=100) == notch).all()
    # a hole that is nodata stays unburned: filling never spreads a fire onto a pixel without data
    valid = np.ones_like(m)
    valid[2, 3] = False
    assert bm.clean_mask(m, valid, min_hole_px=5).sum() == m.sum() + 3


def test_closing_bridges_a_one_pixel_gap_and_opening_removes_a_line():
    """Two 5 x 5 squares 1 px apart: a closing with a disk of radius 1 joins them into one fire;
    a 1 px wide line is removed by an opening with the same disk while a 5 x 5 square stays."""
    m = np.zeros((9, 15), bool)
    m[2:7, 1:6] = True
    m[2:7, 7:12] = True
    assert bm.label_fires(m)[1] == 2
    closed = bm.clean_mask(m, close=bm.footprint(1, 1))
    assert bm.label_fires(closed)[1] == 1
    # hand count: the dilation by the 5-px cross reaches column 6 on rows 2-6 but not rows 1 and 7, so
    # the erosion keeps the gap filled on rows 3-5 only (the squares' corners stay notched)
    assert closed[3:6, 6].all() and not closed[2, 6] and not closed[6, 6]
    assert closed.sum() == m.sum() + 3
    # the outside of the raster is unburned: the 1 px strip between the west square and the edge
    # (column 0) stays unburned, and an opening keeps a 5 x 5 square that touches the edge whole
    assert not closed[:, 0].any()
    edge = np.zeros((9, 15), bool)
    edge[0:5, 0:5] = True
    assert (bm.clean_mask(edge, open_=bm.footprint(1, 1)) == edge).sum() == edge.size - 4  # its 4 corners go
    line = np.zeros((9, 15), bool)
    line[4, :] = True
    line[0:5, 10:15] = True
    opened = bm.clean_mask(line, open_=bm.footprint(1, 1))
    assert not opened[4, :8].any() and opened[1:4, 11:14].all()


def test_footprint_is_a_disk_on_square_pixels_and_an_ellipse_otherwise():
    assert bm.footprint(0.4, 0.4) is None
    d = bm.footprint(2, 2)
    assert d.shape == (5, 5) and d.sum() == 13  # the digital disk of radius 2: 13 px (hand count)
    e = bm.footprint(3, 1)
    assert e.shape == (3, 7)


def test_date_codes_day_of_year_and_yyyymmdd():
    valid = np.ones((1, 4), bool)
    days, enc = bm.date_codes_to_days(np.array([[0, 32, 60, 366]]), valid, 2028)
    assert enc == "day of year"
    # 2028 is a leap year: day 60 is 29 February, 366 is 31 December (calendar)
    assert [dt.date.fromordinal(d) if d > 0 else None for d in days[0]] == [
        None, dt.date(2028, 2, 1), dt.date(2028, 2, 29), dt.date(2028, 12, 31)]
    days, enc = bm.date_codes_to_days(np.array([[20280915, 20281003, 0, 20280915]]), valid)
    assert enc == "YYYYMMDD" and days[0, 0] == dt.date(2028, 9, 15).toordinal() and days[0, 2] == -1
    with pytest.raises(ValueError, match="run.year"):
        bm.date_codes_to_days(np.array([[5]]), np.ones((1, 1), bool))
    with pytest.raises(ValueError, match="does not exist"):
        bm.date_codes_to_days(np.array([[366]]), np.ones((1, 1), bool), 2027)
    with pytest.raises(ValueError, match="neither"):
        bm.date_codes_to_days(np.array([[5, 20280101]]), np.ones((1, 2), bool), 2028)
    with pytest.raises(ValueError, match="calendar"):
        bm.date_codes_to_days(np.array([[20280231]]), np.ones((1, 1), bool))


def test_fire_day_range_is_the_earliest_and_latest_dated_pixel():
    labels = np.array([[1, 1, 0, 2], [1, 0, 0, 2], [3, 0, 0, 0]])
    days = np.array([[10, 12, 99, -1], [11, -1, 5, -1], [-1, -1, -1, -1]])
    first, last = bm.fire_day_range(labels, 3, days)
    assert first.tolist() == [10, -1, -1] and last.tolist() == [12, -1, -1]


@settings(max_examples=40, deadline=None)
@given(arrays(bool, st.tuples(st.integers(1, 24), st.integers(1, 24))))
def test_fire_count_matches_scipy_under_8_connectivity(mask):
    """Any mask: the fires are scipy.ndimage.label's components with the 3 x 3 structure, pixel for pixel."""
    labels, n = bm.label_fires(mask)
    ref, n_ref = ndimage.label(mask, structure=EIGHT)
    assert n == n_ref
    assert ((labels > 0) == mask).all()
    # same partition: each of our fires is exactly one of scipy's
    if n:
        pairs = np.unique(np.stack([labels[mask], ref[mask]]), axis=1)
        assert pairs.shape[1] == n


@settings(max_examples=40, deadline=None)
@given(arrays(bool, st.tuples(st.integers(1, 20), st.integers(1, 20))))
def test_filling_every_hole_matches_scipy_fill_holes(mask):
    """With a hole size above the raster's, every enclosed unburned patch is filled: exactly
    scipy.ndimage.binary_fill_holes (4-connected background, the edge open), an outside reference."""
    assert (bm.clean_mask(mask, min_hole_px=mask.size + 1) == ndimage.binary_fill_holes(mask)).all()


@settings(max_examples=40, deadline=None)
@given(arrays(bool, st.tuples(st.integers(1, 20), st.integers(1, 20))), st.integers(2, 6))
def test_minimum_area_keeps_the_components_scipy_counts_large_enough(mask, k):
    """Burned patches of fewer than k px go: scipy.ndimage.label (3 x 3 structure) sizes as the reference."""
    ref, _ = ndimage.label(mask, structure=EIGHT)
    keep = np.bincount(ref.ravel()) >= k
    keep[0] = False
    assert (bm.clean_mask(mask, min_object_px=k) == keep[ref]).all()
