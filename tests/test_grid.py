"""The run grid: windows, pixel areas (projected and geodesic) and CRS normalisation."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from rasterio.crs import CRS
from rasterio.transform import from_origin

from peatburn.errors import CRSError
from peatburn.grid import RunGrid, normalise_crs


def _ellipsoid_zone_area(phi1, phi2, dlon, a=6378137.0, f=1 / 298.257223563):
    """Area of a lat/lon quadrilateral on the ellipsoid from the authalic function q(phi):
    A = a^2 (1 - e^2) / 2 * dlon * (q(phi2) - q(phi1)), Snyder (1987), Map Projections - A Working
    Manual, USGS Prof. Paper 1395, Eq. 3-12. Written here independently of pyproj."""
    e2 = f * (2 - f)
    e = math.sqrt(e2)

    def q(phi):
        s = math.sin(phi)
        return (1 - e2) * (s / (1 - e2 * s * s) - (1 / (2 * e)) * math.log((1 - e * s) / (1 + e * s)))

    return a * a / 2 * dlon * (q(phi2) - q(phi1))


def test_projected_pixel_area():
    g = RunGrid(CRS.from_epsg(32749), from_origin(0, 100, 2, 2), 50, 50)
    assert g.pixel_area(g.windows(16)[0]).item() == 4.0


@pytest.mark.parametrize("lat", [0.0, -3.0, 45.0])
def test_geodesic_pixel_area_matches_snyder(lat):
    res = 0.01
    g = RunGrid(CRS.from_epsg(4326), from_origin(110.0, lat + res, res, res), 3, 1)
    area = g.pixel_area(g.windows(16)[0]).ravel()[0]
    ref = _ellipsoid_zone_area(math.radians(lat), math.radians(lat + res), math.radians(res))
    assert area == pytest.approx(ref, rel=1e-6)


def test_windows_cover_grid_once():
    g = RunGrid(CRS.from_epsg(32749), from_origin(0, 100, 1, 1), 130, 77)
    cover = np.zeros((77, 130), int)
    for w in g.windows(32):
        cover[int(w.row_off):int(w.row_off + w.height), int(w.col_off):int(w.col_off + w.width)] += 1
    assert (cover == 1).all()


def test_normalise_crs_inputs():
    assert normalise_crs("EPSG:32749").to_epsg() == 32749
    assert normalise_crs(32749).to_epsg() == 32749
    with pytest.raises(CRSError, match="no coordinate reference system"):
        normalise_crs(None, "pre.tif")
    with pytest.raises(CRSError):
        normalise_crs("not a crs", "x")


@settings(max_examples=30, deadline=None)
@given(st.integers(1, 400), st.integers(1, 400), st.integers(2, 9))
def test_decimated_grid_keeps_bounds(w, h, f):
    g = RunGrid(CRS.from_epsg(32749), from_origin(1000, 5000, 2, 2), w, h)
    d = g.decimated(f)
    np.testing.assert_allclose(d.bounds, g.bounds, atol=1e-6)


def test_grouped_windows_order_by_hand():
    # a 5 x 3 grid of 10-px blocks (50 x 30 px) in squares of 2 x 2 blocks, written out by hand as
    # (col_off, row_off): squares row-major, blocks of a square row-major, edge squares cut
    g = RunGrid(CRS.from_epsg(32749), from_origin(0, 100, 1, 1), 50, 30)
    got = [(int(w.col_off), int(w.row_off)) for w in g.windows(10, group=2)]
    assert got == [(0, 0), (10, 0), (0, 10), (10, 10), (20, 0), (30, 0), (20, 10), (30, 10), (40, 0), (40, 10),
                   (0, 20), (10, 20), (20, 20), (30, 20), (40, 20)]


@given(st.integers(1, 200), st.integers(1, 200), st.integers(1, 64), st.integers(1, 6))
@settings(max_examples=80, deadline=None)
def test_grouped_windows_cover_the_grid_once(width, height, block, group):
    g = RunGrid(CRS.from_epsg(32749), from_origin(0, 1000, 1, 1), width, height)
    grouped = g.windows(block, group=group)
    key = lambda w: (int(w.row_off), int(w.col_off), int(w.height), int(w.width))  # noqa: E731
    assert sorted(map(key, grouped)) == sorted(map(key, g.windows(block)))  # the same windows
    assert len(set(map(key, grouped))) == len(grouped)
    assert sum(int(w.width) * int(w.height) for w in grouped) == width * height
