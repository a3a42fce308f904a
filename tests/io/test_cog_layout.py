"""COGs assembled from tiles compressed once (peatburn.io.cog_layout, BlockRasterWriter).

References: rio-cogeo's ``cog_validate`` (an outside COG validator: layout, IFD order, tile order,
overviews), rasterio/GDAL reading the files back, numpy's ``nanmean`` over 2 x 2 footprints and
GDAL's own ``AVERAGE`` overviews for the overview levels, and Python's ``collections.Counter`` for
the class raster's most frequent code.
"""

import collections
import hashlib

import numpy as np
import pytest
import rasterio
from hypothesis import given, settings
from hypothesis import strategies as st
from rasterio.crs import CRS
from rasterio.enums import Resampling
from rasterio.transform import from_origin

from peatburn.grid import RunGrid
from peatburn.io.cog_layout import overview_shapes
from peatburn.io.writers import BlockRasterWriter

cogeo = pytest.importorskip("rio_cogeo.cogeo")


def _grid(w, h):
    return RunGrid(CRS.from_epsg(32749), from_origin(500_000, 8_650_000, 2, 2), w, h)


def _scene(grid, share, seed=1, quad=1):
    """Values at a random ``share`` of the pixels (by ``quad`` x ``quad`` squares), an empty corner."""
    rng = np.random.default_rng(seed)
    h, w = grid.shape
    keep = rng.random(((h + quad - 1) // quad, (w + quad - 1) // quad)) < share
    keep = np.kron(keep, np.ones((quad, quad), bool))[:h, :w]
    keep[:600, :700] = False  # whole tiles with nothing: sparse
    return np.where(keep, rng.uniform(0.05, 0.9, (h, w)), np.nan).astype("float32")


def _write(path, grid, full, block, **kw):
    with BlockRasterWriter(path, grid, description="burn depth", units="m", block_size=block, **kw) as w:
        for win in grid.windows(block, group=2):
            r0, c0 = int(win.row_off), int(win.col_off)
            sub = full[r0:r0 + int(win.height), c0:c0 + int(win.width)]
            ok = np.isfinite(sub) if full.dtype.kind == "f" else sub > 0
            w.write_at(win, ok, sub[ok])
    return path


@pytest.mark.parametrize("share,block", [(0.3, 512), (0.02, 300)])
def test_output_is_a_valid_cog_with_the_values_written(tmp_path, share, block):
    grid = _grid(2100, 1700)
    full = _scene(grid, share)
    p = _write(tmp_path / "d.tif", grid, full, block, expected_share=share)
    valid, errors, warnings = cogeo.cog_validate(str(p))
    assert valid and not errors and not warnings
    with rasterio.open(p) as ds:
        assert ds.tags(ns="IMAGE_STRUCTURE").get("LAYOUT") == "COG"
        assert ds.overviews(1) == [2, 4, 8] and ds.block_shapes == [(512, 512)]
        assert ds.descriptions == ("burn depth",) and ds.units == ("m",) and ds.nodata == -9999.0
        assert ds.crs.to_epsg() == 32749 and ds.transform == grid.transform
        got = ds.read(1, masked=True)
        # the empty corner (the first tile) was never written: sparse
        assert ds.get_tag_item("BLOCK_OFFSET_0_0", "TIFF", bidx=1) in (None, "", "0")
    np.testing.assert_array_equal(got.mask, ~np.isfinite(full))
    np.testing.assert_array_equal(got.filled(np.nan)[np.isfinite(full)], full[np.isfinite(full)])


def test_first_overview_is_the_mean_of_the_valid_pixels(tmp_path):
    """Reference: numpy's nanmean over each 2 x 2 footprint (odd last row and column: their 1 or 2 pixels)."""
    grid = _grid(1101, 901)
    full = _scene(grid, 0.4)
    p = _write(tmp_path / "d.tif", grid, full, 512)
    pad = np.pad(full, ((0, 1), (0, 1)), constant_values=np.nan)
    with np.errstate(all="ignore"), pytest.warns(RuntimeWarning):
        ref = np.nanmean(pad.reshape(451, 2, 551, 2), axis=(1, 3))
    with rasterio.open(p, overview_level=0) as ov:
        got = ov.read(1, masked=True)
    assert got.shape == ref.shape == overview_shapes(1101, 901)[0]
    np.testing.assert_array_equal(got.mask, np.isnan(ref))
    np.testing.assert_allclose(got.filled(np.nan), ref, rtol=1e-6)


def test_overviews_match_gdal_average_where_footprints_are_whole(tmp_path):
    """Reference: GDAL's AVERAGE overviews (rasterio build_overviews) of the same raster, nodata in
    whole 8 x 8 squares so that every footprint of the two levels is all valid or all nodata."""
    grid = _grid(2048, 1536)
    full = _scene(grid, 0.5, quad=8)
    p = _write(tmp_path / "d.tif", grid, full, 512)
    ref = tmp_path / "ref.tif"
    with rasterio.open(ref, "w", driver="GTiff", width=grid.width, height=grid.height, count=1, dtype="float32",
                       nodata=-9999.0, crs=grid.crs, transform=grid.transform) as ds:
        ds.write(np.where(np.isfinite(full), full, -9999.0), 1)
        ds.build_overviews([2, 4], Resampling.average)
    with rasterio.open(p) as ds:
        assert ds.overviews(1) == [2, 4]
    for level in range(2):
        with rasterio.open(p, overview_level=level) as a, rasterio.open(ref, overview_level=level) as b:
            x, y = a.read(1, masked=True), b.read(1, masked=True)
        np.testing.assert_array_equal(x.mask, y.mask)
        np.testing.assert_allclose(x.compressed(), y.compressed(), rtol=1e-6)


def test_class_raster_overview_keeps_the_most_frequent_valid_code(tmp_path):
    """Reference: collections.Counter over each 2 x 2 footprint's valid codes (ties: the smaller code)."""
    grid = _grid(1030, 770)
    rng = np.random.default_rng(5)
    codes = np.where(rng.random(grid.shape) < 0.3, rng.integers(1, 4, grid.shape), 0).astype("uint8")
    p = _write(tmp_path / "m.tif", grid, codes, 512, dtype="uint8", nodata=0)
    assert cogeo.cog_validate(str(p))[0]
    with rasterio.open(p) as ds:
        np.testing.assert_array_equal(ds.read(1), codes)
    with rasterio.open(p, overview_level=0) as ov:
        got = ov.read(1)
    for i in range(0, got.shape[0], 7):
        for j in range(0, got.shape[1], 5):
            c = collections.Counter(int(v) for v in codes[2 * i:2 * i + 2, 2 * j:2 * j + 2].ravel() if v)
            want = min(c, key=lambda k: (-c[k], k)) if c else 0
            assert got[i, j] == want, (i, j)


def test_same_file_twice_and_same_pixels_whatever_the_block_size(tmp_path):
    """Byte for byte the same file when written again; the same pixels on every level whether the levels
    are halved window by window (blocks of 512 or 256) or rebuilt from the level below at the end (blocks of
    300 and 96 do not halve onto every level). (The bytes of edge tiles may differ between block sizes:
    GDAL pads a tile beyond the raster's edge differently when it is written whole or in parts.)"""
    grid = _grid(1500, 1300)
    full = _scene(grid, 0.1)
    paths = {b: _write(tmp_path / f"b{b}.tif", grid, full, b) for b in (512, 256, 300, 96)}
    again = _write(tmp_path / "again.tif", grid, full, 512)
    assert hashlib.sha256(again.read_bytes()).digest() == hashlib.sha256(paths[512].read_bytes()).digest()
    for level in (None, 0, 1):
        kw = {} if level is None else {"overview_level": level}
        arrays = []
        for p in paths.values():
            with rasterio.open(p, **kw) as ds:
                arrays.append(ds.read(1))
        for x in arrays[1:]:
            np.testing.assert_array_equal(x, arrays[0])


@settings(max_examples=60, deadline=None)
@given(st.integers(1, 9), st.integers(1, 9), st.floats(0, 1), st.booleans(), st.integers(0, 2**31 - 1))
def test_dense_halving_equals_halving_the_valid_pixels(h, w, share, categorical, seed):
    """The footprint form (overview levels above the first) and the valid-pixel form (the first level,
    from a block's burned pixels) give the same level, odd edges and ties included."""
    from peatburn.numerics.pyramids import halve, halve_dense

    rng = np.random.default_rng(seed)
    keep = rng.random((h, w)) < share
    if categorical:
        a = np.where(keep, rng.integers(1, 4, (h, w)), 0).astype("uint8")
        nodata = 0
    else:
        a = np.where(keep, rng.normal(0.4, 0.2, (h, w)), -9999.0).astype("float32")
        nodata = -9999.0
    idx = np.flatnonzero(keep)
    want = halve((h, w), idx, a.ravel()[idx], categorical=categorical, nodata=nodata)
    got = halve_dense(a, categorical=categorical, nodata=nodata)
    assert got.dtype == want.dtype and got.shape == want.shape
    np.testing.assert_array_equal(got, want)


def test_tiles_past_the_classic_tiff_limit_make_a_bigtiff(tmp_path, monkeypatch):
    """GDAL's skeleton is a classic TIFF while the uncompressed raster is under 4 GiB; tiles that end past
    the 32-bit offsets (here: a limit lowered to 100 kB) make the writer redo it as a BigTIFF."""
    from peatburn.io import cog_layout

    grid = _grid(1200, 900)
    full = _scene(grid, 0.5)
    classic = _write(tmp_path / "classic.tif", grid, full, 512)
    monkeypatch.setattr(cog_layout, "CLASSIC_TIFF_MAX", 100_000)
    big = _write(tmp_path / "big.tif", grid, full, 512)
    assert classic.read_bytes()[2:4] == b"\x2a\x00" and big.read_bytes()[2:4] == b"\x2b\x00"  # 42 / 43 (BigTIFF)
    assert big.stat().st_size > 100_000 and cogeo.cog_validate(str(big))[0]
    for level in (None, 0):
        kw = {} if level is None else {"overview_level": level}
        with rasterio.open(classic, **kw) as a, rasterio.open(big, **kw) as b:
            np.testing.assert_array_equal(a.read(1), b.read(1))


@pytest.mark.parametrize("codes", [False, True])
def test_levels_held_in_memory_or_written_by_pieces_give_the_same_pixels(tmp_path, monkeypatch, codes):
    """The writer holds the small overview levels in memory (the valid pixels scattered into them) and
    writes the large ones piece by piece through GDAL; with every level one way or the other, every level
    reads back the same (values with NaN among them, written by ``write_at``; odd sizes)."""
    from peatburn.io import writers

    grid = _grid(1530, 1111)
    rng = np.random.default_rng(11)
    if codes:
        full = np.where(rng.random(grid.shape) < 0.2, rng.integers(1, 4, grid.shape), 0).astype("uint8")
        kw = dict(dtype="uint8", nodata=0)
    else:
        full = _scene(grid, 0.2, seed=4, quad=3)
        full[::7, ::5] = np.nan  # NaN values inside the mask: nodata, left out of the levels
        kw = {}
    paths = []
    for px in (0, 2**30):  # no level in memory / every level in memory
        monkeypatch.setattr(writers, "MEMORY_LEVEL_PX", px)
        p = tmp_path / f"m{px}.tif"
        with BlockRasterWriter(p, grid, block_size=512, **kw) as w:
            for win in grid.windows(512, group=2):
                r0, c0 = int(win.row_off), int(win.col_off)
                sub = full[r0:r0 + int(win.height), c0:c0 + int(win.width)]
                mask = np.ones(sub.shape, bool) if not codes else sub > 0  # values: NaN inside the mask
                w.write_at(win, mask, sub[mask])
        paths.append(p)
    with rasterio.open(paths[0]) as ds:
        levels = [None] + list(range(len(ds.overviews(1))))
        assert len(levels) == 3
    for level in levels:
        kw = {} if level is None else {"overview_level": level}
        with rasterio.open(paths[0], **kw) as a, rasterio.open(paths[1], **kw) as b:
            x, y = a.read(1), b.read(1)
        np.testing.assert_array_equal(x, y)
        if level is None:
            want = full if codes else np.where(np.isfinite(full), full, -9999.0)
            np.testing.assert_array_equal(x, want)
