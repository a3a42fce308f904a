"""Atomic writers and the block-wise COG writer."""

import json
import os

import numpy as np
import pytest
import rasterio
from rasterio.crs import CRS
from rasterio.transform import from_origin

from peatburn.grid import RunGrid
from peatburn.io.writers import BlockRasterWriter, atomic_path, sha256_of, write_json


def test_interrupted_write_leaves_no_file(tmp_path):
    final = tmp_path / "zones.csv"
    with pytest.raises(RuntimeError):
        with atomic_path(final) as tmp:
            tmp.write_text("half")
            raise RuntimeError("killed")
    assert not final.exists()
    assert list(tmp_path.iterdir()) == []


def test_interrupted_raster_leaves_no_file(tmp_path):
    grid = RunGrid(CRS.from_epsg(32749), from_origin(0, 100, 1, 1), 100, 100)
    with pytest.raises(RuntimeError):
        with BlockRasterWriter(tmp_path / "burn_depth.tif", grid) as w:
            w.write(grid.windows(50)[0], np.ones((50, 50)))
            raise RuntimeError("killed")
    assert list(tmp_path.iterdir()) == []


def test_block_writer_makes_a_cog_with_nodata(tmp_path):
    grid = RunGrid(CRS.from_epsg(32749), from_origin(0, 700, 1, 1), 700, 600)
    full = np.random.default_rng(0).random(grid.shape)
    full[:10, :10] = np.nan
    with BlockRasterWriter(tmp_path / "c.tif", grid, units="m") as w:
        for win in grid.windows(256):
            r0, c0 = int(win.row_off), int(win.col_off)
            w.write(win, full[r0:r0 + int(win.height), c0:c0 + int(win.width)])
    with rasterio.open(tmp_path / "c.tif") as ds:
        assert ds.tags(ns="IMAGE_STRUCTURE").get("LAYOUT") == "COG"
        assert ds.crs.to_epsg() == 32749 and ds.transform == grid.transform
        got = ds.read(1, masked=True)
    assert got.mask[:10, :10].all()
    np.testing.assert_allclose(got.filled(np.nan)[10:], full[10:].astype("float32"))


def test_sha256_against_hashlib_reference(tmp_path):
    # reference digest of b"abc" from FIPS 180-2, Appendix B.1
    p = tmp_path / "abc"
    p.write_bytes(b"abc")
    assert sha256_of(p) == "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"


def test_json_has_no_nan(tmp_path):
    write_json(tmp_path / "t.json", {"a": float("nan"), "b": np.float32(1.5)})
    assert json.loads((tmp_path / "t.json").read_text()) == {"a": None, "b": 1.5}


def test_outputs_get_the_permissions_of_a_plain_new_file(tmp_path):
    """Outputs are written through mkstemp (mode 0600); they must end with the mode a plain
    open() gives a new file under the same umask (the reference: the operating system itself)."""
    import stat

    from peatburn.io.writers import write_text

    old = os.umask(0o022)
    try:
        write_text(tmp_path / "out.txt", "x")
        (tmp_path / "plain022.txt").write_text("x")
    finally:
        os.umask(old)
    mode = stat.S_IMODE((tmp_path / "out.txt").stat().st_mode)
    assert mode == stat.S_IMODE((tmp_path / "plain022.txt").stat().st_mode) == 0o644
