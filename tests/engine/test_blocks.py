"""The block plan: block-wise work equals whole-array work, and writing is atomic.

The scene (tests/conftest.py) is 240 x 300 pixels: no block size below is a divisor of both
sides, so every plan has smaller edge blocks.
"""

from __future__ import annotations

import subprocess
import sys
import textwrap

import geopandas as gpd
import numpy as np
import pytest
import rasterio
import rasterio.shutil
from rasterio.features import rasterize
from rasterio.windows import Window

import peatburn
import peatburn.engine.runner as runner
from peatburn.io import writers
from peatburn.io.writers import BlockRasterWriter
from peatburn.engine.sums import Sums


@pytest.fixture(scope="module")
def captured(scene, tmp_path_factory):
    """The per-block function, plan and windows a real run hands to its executor."""
    got = {}
    real = runner.map_blocks

    def spy(fn, plan, windows, *args, **kwargs):
        if getattr(fn, "__name__", "") == "process_block":
            got.update(fn=fn, plan=plan)
        return real(fn, plan, windows, *args, **kwargs)

    mp = pytest.MonkeyPatch()
    mp.setattr(runner, "map_blocks", spy)
    try:
        peatburn.run(scene.config, tmp_path_factory.mktemp("blocks_run"))
    finally:
        mp.undo()
    assert got, "the run handed no process_block to its executor"
    return got


def _mosaic(fn, plan, windows, shape):
    depth = np.full(shape, -1.0, dtype="float32")  # -1: never written
    cdens = np.full(shape, -1.0, dtype="float32")
    sums = Sums.empty(plan)
    for w in windows:
        r = fn(plan, w)
        sl = (slice(int(w.row_off), int(w.row_off + w.height)), slice(int(w.col_off), int(w.col_off + w.width)))
        depth[sl] = r.depth
        cdens[sl] = r.carbon_density
        sums.add(r)
    return depth, cdens, sums


@pytest.mark.parametrize("block", [37, 64, 100, 512])
def test_blockwise_equals_whole_array(captured, scene, block):
    fn, plan = captured["fn"], captured["plan"]
    grid = plan.grid
    assert grid.shape == scene.shape
    windows = grid.windows(block)
    # the windows tile the grid exactly: every pixel once
    cover = np.zeros(grid.shape, dtype=int)
    for w in windows:
        cover[int(w.row_off):int(w.row_off + w.height), int(w.col_off):int(w.col_off + w.width)] += 1
    assert (cover == 1).all()
    d_b, c_b, s_b = _mosaic(fn, plan, windows, grid.shape)
    d_w, c_w, s_w = _mosaic(fn, plan, [Window(0, 0, grid.width, grid.height)], grid.shape)
    assert not (d_b == -1).any()
    np.testing.assert_array_equal(np.isnan(d_b), np.isnan(d_w))
    np.testing.assert_allclose(d_b, d_w, rtol=1e-6, atol=1e-6, equal_nan=True)  # float32 outputs
    np.testing.assert_allclose(c_b, c_w, rtol=1e-6, atol=1e-9, equal_nan=True)
    for k in s_w.total:
        # sums of the same numbers in another order: equal to rounding
        assert s_b.total[k] == pytest.approx(s_w.total[k], rel=1e-9, abs=1e-6), k
    for (_, _, acc_b), (_, _, acc_w) in zip(s_b.layers, s_w.layers):
        for k in acc_w:
            np.testing.assert_allclose(acc_b[k], acc_w[k], rtol=1e-9, atol=1e-6)


def test_zone_sums_per_block_match_a_whole_grid_rasterization(captured, scene):
    """Per-block zone accumulation (rasterize + bincount by window, combined) against one
    rasterization of the zone polygons over the whole grid done here with rasterio directly."""
    fn, plan = captured["fn"], captured["plan"]
    grid = plan.grid
    _, cdens, sums = _mosaic(fn, plan, grid.windows(64), grid.shape)
    zones = gpd.read_file(scene.folder / "zones.gpkg")
    name, ids, acc = sums.layers[0]
    assert ids == zones["name"].tolist()
    zid = rasterize(((g, i + 1) for i, g in enumerate(zones.geometry)), out_shape=grid.shape,
                    transform=grid.transform, fill=0, dtype="int32")
    pixel_area = scene.pixel**2  # 2 m x 2 m = 4 m2 (hand arithmetic)
    carbon = np.where(np.isfinite(cdens), cdens, 0.0).astype("float64") * pixel_area  # kg C per pixel
    for i, zone in enumerate(ids):
        expected = carbon[zid == i + 1].sum()
        # float32 carbon density on disk vs float64 sums: 1e-6 relative
        assert acc["carbon_kg"][i + 1] == pytest.approx(expected, rel=1e-6), zone
    assert acc["carbon_kg"][1:len(ids) + 1].sum() == pytest.approx(sums.total["carbon_kg"], rel=1e-12)


# --------------------------------------------------------------------------------------------
# atomic writing


def _leftovers(folder):
    return sorted(p.name for p in folder.iterdir() if p.name.startswith(".") or p.name.endswith(".part"))


def test_writer_error_leaves_no_file(captured, tmp_path):
    grid = captured["plan"].grid
    final = tmp_path / "depth.tif"
    with pytest.raises(RuntimeError, match="disk full"):
        with BlockRasterWriter(final, grid, block_size=64) as w:
            for i, win in enumerate(grid.windows(64)):
                w.write(win, np.ones((int(win.height), int(win.width))))
                if i == 3:
                    raise RuntimeError("disk full")
    assert not final.exists()
    assert _leftovers(tmp_path) == []


def test_failed_cog_copy_leaves_no_file(captured, tmp_path, monkeypatch):
    """The COG conversion fails half-way (after writing part of its file): nothing under the final name."""
    grid = captured["plan"].grid

    def broken_copy(src, dst, **kw):
        with open(dst, "wb") as fh:
            fh.write(b"II*\x00partial")
        raise OSError("no space left on device")

    monkeypatch.setattr(rasterio.shutil, "copy", broken_copy)
    final = tmp_path / "carbon.tif"
    with pytest.raises(OSError, match="no space"):
        with BlockRasterWriter(final, grid, block_size=64) as w:
            for win in grid.windows(64):
                w.write(win, np.zeros((int(win.height), int(win.width))))
    assert not final.exists()
    assert _leftovers(tmp_path) == []


def test_interrupted_run_leaves_no_raster(scene, tmp_path):
    """Ctrl-C (KeyboardInterrupt) in the middle of the blocks: no output raster under its final name."""

    def interrupt(done, total):
        if done == 3:
            raise KeyboardInterrupt

    out = tmp_path / "out"
    with pytest.raises(KeyboardInterrupt):
        peatburn.run(scene.config, out, progress=interrupt)
    assert not (out / "burn_depth.tif").exists()
    assert not (out / "carbon_smouldering.tif").exists()
    # issue 22: the outputs were staged beside the folder, which appears only with a complete set;
    # the staging folder is removed (and no lock is left)
    assert not out.exists()
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".out.")] == []


def test_killed_writer_leaves_no_file(tmp_path):
    """A process killed (SIGKILL: no clean-up at all) while writing: the final name never appears,
    because the file only gets it by a rename once complete."""
    final = tmp_path / "depth.tif"
    script = textwrap.dedent(f"""
        import sys, time
        import numpy as np
        from affine import Affine
        from rasterio.crs import CRS
        from peatburn.grid import RunGrid
        from peatburn.io.writers import BlockRasterWriter
        grid = RunGrid(CRS.from_epsg(32749), Affine(2, 0, 500000, 0, -2, 8650000), 300, 240)
        with BlockRasterWriter({str(final)!r}, grid, block_size=64) as w:
            for i, win in enumerate(grid.windows(64)):
                w.write(win, np.ones((int(win.height), int(win.width))))
                if i == 2:
                    print("writing", flush=True)
                    time.sleep(60)
    """)
    proc = subprocess.Popen([sys.executable, "-c", script], stdout=subprocess.PIPE)
    try:
        assert proc.stdout.readline().strip() == b"writing"
        proc.kill()
    finally:
        proc.wait(timeout=30)
    assert proc.returncode != 0
    assert not final.exists()
    # issue 26 item 3: the killed run's temporary carries peatburn's marker, and --overwrite removes only
    # such files: a user's hidden files with the same suffixes, and folders so named, are left alone
    left = _leftovers(tmp_path)
    assert left and all(".depth.tif.peatburn-tmp." in n for n in left), left
    (tmp_path / ".thesis_draft.part").write_text("a user's draft\n")
    (tmp_path / ".scan.tiled.tif").write_bytes(b"a user's raster")
    (tmp_path / ".notes.peatburn-tmp.abcdefgh.part").mkdir()  # a folder named like a temporary
    with pytest.warns(UserWarning, match=r"removed 1 temporary file\(s\) of a killed run .*\.depth\.tif\.peatburn-tmp\."):
        runner.prepare_out_dir(tmp_path, overwrite=True)
    assert _leftovers(tmp_path) == [".notes.peatburn-tmp.abcdefgh.part", ".scan.tiled.tif", ".thesis_draft.part"]
    assert (tmp_path / ".thesis_draft.part").read_text() == "a user's draft\n"


def test_atomic_path_keeps_the_old_file_on_error(tmp_path):
    final = tmp_path / "zones.csv"
    final.write_text("old complete file\n")
    with pytest.raises(ValueError):
        with writers.atomic_path(final) as tmp:
            tmp.write_text("half a ne")
            raise ValueError("boom")
    assert final.read_text() == "old complete file\n"
    assert _leftovers(tmp_path) == []


@pytest.mark.parametrize("layout, pixel, epsg, expected", [
    (dict(tiled=True, blockxsize=16, blockysize=16), 2.0, 32749, 4),  # 16 px tiles fit a 4 x 8 = 32 px square
    (dict(tiled=True, blockxsize=16, blockysize=16), 4.0, 32749, 4),  # 16 coarse px = 32 grid px: still fits
    (dict(tiled=True, blockxsize=32, blockysize=32), 4.0, 32749, 1),  # 32 coarse px = 64 grid px: does not
    (dict(tiled=False, blockysize=4), 2.0, 32749, 1),  # strips of the whole 100 px width
    (dict(tiled=True, blockxsize=16, blockysize=16), 2.0, 32750, 1),  # another CRS: not measurable
])
def test_window_group_follows_the_inputs_tiling(tmp_path, layout, pixel, epsg, expected):
    """The block layout is GDAL's, as rasterio reports it for files written here (``block_shapes``)."""
    from types import SimpleNamespace

    from rasterio.crs import CRS
    from rasterio.transform import from_origin

    from peatburn.grid import RunGrid
    from peatburn.io.rasters import inspect_raster
    from peatburn.engine.inputs import window_group

    n = int(200 / pixel)
    path = tmp_path / "in.tif"
    with rasterio.open(path, "w", driver="GTiff", width=n, height=n, count=1, dtype="float32",
                       crs=CRS.from_epsg(epsg), transform=from_origin(500_000, 8_650_000, pixel, pixel),
                       **layout) as ds:
        ds.write(np.zeros((1, n, n), "float32"))
    info = inspect_raster(path)
    if not layout.get("tiled"):
        assert info.block_shapes[0] == (4, n)  # GDAL's strips span the width
    grid = RunGrid(CRS.from_epsg(32749), from_origin(500_000, 8_650_000, 2.0, 2.0), 100, 100)
    inputs = SimpleNamespace(grid=grid, rasters={"depth.survey.pre": info})
    assert window_group(inputs, 8, 4) == expected
