"""Classified point clouds to a bare-earth GeoTIFF (peatburn.io.point_clouds, `peatburn ground`).

Synthetic LAS/LAZ files written with laspy (truth built here): a plane sampled symmetrically in each
cell (the cell mean is the plane at the centre), vegetation and noise classes above and below it, a gap;
random positions with noise checked against scipy's ``binned_statistic_2d`` (an outside per-cell mean);
and the test scene's pre-fire survey as points, gridded and run through the survey route.
References: ASPRS LAS 1.4 R15 Table 17 (class 2 = ground).
"""

import shutil

import numpy as np
import pytest
import rasterio
from click.testing import CliRunner

from peatburn.cli.main import cli

laspy = pytest.importorskip("laspy")

X0, Y0 = 500_000.0, 8_650_000.0  # the tests' invented UTM 49S origin (open ocean)


def _write_las(path, x, y, z, cls, epsg=32749):
    import pyproj

    header = laspy.LasHeader(point_format=6, version="1.4")
    header.scales = np.array([0.001, 0.001, 0.001])
    header.offsets = np.array([X0, Y0 - 10_000.0, 0.0])
    if epsg:
        header.add_crs(pyproj.CRS.from_epsg(epsg))
    las = laspy.LasData(header)
    las.x, las.y, las.z = x, y, z
    las.classification = np.asarray(cls, dtype=np.uint8)
    las.write(str(path))
    return path


def _plane(x, y):
    return 12.0 + 0.02 * (x - X0) - 0.01 * (Y0 - y)


def _symmetric_points(cols, rows, res, skip=()):
    """Four ground points per cell at the centre +- res/4, none in the cells of ``skip``."""
    xs, ys = [], []
    for r in range(rows):
        for c in range(cols):
            if (r, c) in skip:
                continue
            xc, yc = X0 + (c + 0.5) * res, Y0 - (r + 0.5) * res
            for dx, dy in ((-1, -1), (-1, 1), (1, -1), (1, 1)):
                xs.append(xc + dx * res / 4)
                ys.append(yc + dy * res / 4)
    return np.array(xs), np.array(ys)


@pytest.mark.parametrize("suffix", [".las", ".laz"])
def test_cell_mean_of_ground_returns_on_a_plane(tmp_path, suffix):
    res, cols, rows = 2.0, 20, 16
    gx, gy = _symmetric_points(cols, rows, res, skip={(3, 4), (10, 17)})
    rng = np.random.default_rng(0)
    vx, vy = X0 + rng.uniform(0, cols * res, 800), Y0 - rng.uniform(0, rows * res, 800)
    x = np.r_[gx, vx, vx]
    y = np.r_[gy, vy, vy]
    z = np.r_[_plane(gx, gy), _plane(vx, vy) + rng.uniform(2, 25, 800), _plane(vx, vy) - 3.0]
    cls = np.r_[np.full(gx.size, 2), np.full(800, 5), np.full(800, 7)]  # ground, high vegetation, noise
    src = _write_las(tmp_path / f"cloud{suffix}", x, y, z, cls)
    out = tmp_path / "ground.tif"
    r = CliRunner().invoke(cli, ["ground", str(src), "--res", "2", "--out", str(out), "--fill", "none"])
    assert r.exit_code == 0, r.output
    assert f"{gx.size:,} ground return(s)" in r.output and "filled" not in r.output
    with rasterio.open(out) as ds:
        assert ds.crs.to_epsg() == 32749 and ds.res == (2.0, 2.0)
        assert (ds.transform.c, ds.transform.f) == (X0, Y0) and ds.shape == (rows, cols)
        assert ds.units == ("m",)
        got = ds.read(1, masked=True)
    cc, rr = np.meshgrid(np.arange(cols) + 0.5, np.arange(rows) + 0.5)
    want = _plane(X0 + cc * res, Y0 - rr * res)
    assert got.mask[3, 4] and got.mask[10, 17] and got.mask.sum() == 2  # cells with no ground return: empty
    np.testing.assert_allclose(got.filled(np.nan)[~got.mask], want[~got.mask], atol=1e-3)  # 1 mm storage
    # the default fill (TIN): the two lone gaps take the plane at their centres (analytic: linear
    # interpolation between cell centres lying on a plane), and are the only cells filled
    r = CliRunner().invoke(cli, ["ground", str(src), "--res", "2", "--out", str(out), "--overwrite"])
    assert r.exit_code == 0, r.output
    assert f"{rows * cols - 2:,} with ground returns and 2 filled by TIN, {rows * cols:,} with a value" in r.output
    with rasterio.open(out) as ds:
        np.testing.assert_allclose(ds.read(1), want, atol=1e-3)


def test_random_points_match_scipy_binned_mean(tmp_path):
    """Reference: scipy.stats.binned_statistic_2d(..., 'mean') over the same cell edges."""
    from scipy.stats import binned_statistic_2d

    rng = np.random.default_rng(4)
    n, res = 20_000, 1.0  # coordinates stored to 1 mm: many points lie exactly on cell edges
    x = X0 + rng.uniform(0, 60, n)
    y = Y0 - rng.uniform(0, 40, n)
    z = _plane(x, y) + 0.3 * np.sin(x / 3.0) + rng.normal(0, 0.05, n)
    cls = np.where(rng.random(n) < 0.7, 2, 1)
    src = _write_las(tmp_path / "c.las", x, y, z, cls)
    with laspy.open(src) as fh:  # the stored (quantised) coordinates
        p = fh.read()
    from peatburn.io.point_clouds import ground_raster

    out = tmp_path / "g.tif"
    summary = ground_raster([src], out, res=res, fill="none")
    with rasterio.open(out) as ds:
        got = ds.read(1, masked=True).filled(np.nan)
        t, (h, w) = ds.transform, ds.shape
    g = np.asarray(p.classification) == 2
    # in pixel space (row down from the top edge, column right from the left edge), cells [k, k + 1): a point
    # on a cell's top or left edge belongs to that cell, as GDAL's pixel indexing has it
    u, v = (np.asarray(p.x)[g] - t.c) / res, (t.f - np.asarray(p.y)[g]) / res
    ref = binned_statistic_2d(v, u, np.asarray(p.z)[g], "mean", bins=[np.arange(h + 1), np.arange(w + 1)]).statistic
    np.testing.assert_array_equal(np.isnan(got), np.isnan(ref))
    np.testing.assert_allclose(got[~np.isnan(ref)], ref[~np.isnan(ref)], rtol=0, atol=1e-5)  # float32 storage
    assert summary["ground_points"] == int(g.sum()) and summary["points"] == n


def test_gaps_filled_within_max_gap_and_marked_in_the_origin_raster(tmp_path):
    """A plane with a wide hole (no ground under a stand of trees, 12 cells across) and lone empty cells,
    gridded with TIN and IDW: the lone cells and the hole's rim within --max-gap are filled, TIN with
    the plane at the cell centre (analytic), the hole's middle stays empty; the origin raster and the
    summary line count the same filled cells. Distances are brute force here (numpy)."""
    res, cols, rows = 1.0, 40, 30
    rng = np.random.default_rng(11)
    hole = {(r, c) for r in range(rows) for c in range(cols) if (r - 15) ** 2 + (c - 20) ** 2 <= 6**2}
    lone = {(int(r), int(c)) for r, c in zip(rng.integers(1, rows - 1, 25), rng.integers(1, cols - 1, 25))} - hole
    gx, gy = _symmetric_points(cols, rows, res, skip=hole | lone)
    vx, vy = X0 + rng.uniform(0, cols, 500), Y0 - rng.uniform(0, rows, 500)
    src = _write_las(tmp_path / "c.laz", np.r_[gx, vx], np.r_[gy, vy],
                     np.r_[_plane(gx, gy), _plane(vx, vy) + 15.0], np.r_[np.full(gx.size, 2), np.full(500, 5)])
    cc, rr = np.meshgrid(np.arange(cols) + 0.5, np.arange(rows) + 0.5)
    want = _plane(X0 + cc * res, Y0 - rr * res)
    empty = np.zeros((rows, cols), bool)
    empty[tuple(np.array(sorted(hole | lone)).T)] = True
    vr, vc = np.nonzero(~empty)
    dist = np.sqrt(((rr.ravel() - 0.5)[:, None] - vr) ** 2 + ((cc.ravel() - 0.5)[:, None] - vc) ** 2) * res
    reach = empty & (dist.min(axis=1).reshape(rows, cols) <= 2.5)
    d8 = np.sort(dist, axis=1)[:, 7].reshape(rows, cols)  # distance of the 8th nearest cell with a value
    assert reach.sum() > len(lone) and (empty & ~reach).sum() > 0  # the test has both kinds of cell
    for fill in ("tin", "idw"):
        out, origin = tmp_path / f"{fill}.tif", tmp_path / f"{fill}_origin.tif"
        r = CliRunner().invoke(cli, ["ground", str(src), "--res", "1", "--out", str(out), "--fill", fill,
                                     "--max-gap", "2.5", "--origin", str(origin)])
        assert r.exit_code == 0, r.output
        assert f"{int(reach.sum()):,} filled by {fill.upper()}" in r.output
        with rasterio.open(out) as ds, rasterio.open(origin) as og:
            got = ds.read(1, masked=True)
            code = og.read(1)
            assert og.nodata == 0 and og.dtypes[0] == "uint8" and og.transform == ds.transform
        np.testing.assert_array_equal(got.mask, empty & ~reach)  # beyond --max-gap: no value
        np.testing.assert_array_equal(code, np.where(~empty, 1, np.where(reach, 2, 0)))
        if fill == "tin":
            np.testing.assert_allclose(got.filled(np.nan)[reach], want[reach], atol=1e-3)
        else:  # IDW: a weighted mean of the plane within d8 of the centre, so off by at most |grad| d8
            grad = np.hypot(0.02, 0.01)
            assert (np.abs(got.filled(np.nan) - want)[reach] <= grad * d8[reach] + 1e-3).all()


def test_ground_fill_options_refused_in_one_line(tmp_path):
    x, y = X0 + np.array([1.0, 3.0, 2.0]), Y0 - np.array([1.0, 2.0, 4.0])
    src = _write_las(tmp_path / "g.las", x, y, np.array([5.0, 6.0, 7.0]), [2, 2, 2])
    runner = CliRunner()
    out = tmp_path / "o.tif"
    r = runner.invoke(cli, ["ground", str(src), "--res", "1", "--out", str(out), "--max-gap", "-1"])
    assert r.exit_code == 64 and "--max-gap" in r.output  # a bad option value: usage (docs/cli.md)
    r = runner.invoke(cli, ["ground", str(src), "--res", "1", "--out", str(out), "--origin", str(out)])
    assert r.exit_code == 2 and "--origin" in r.output and len(r.output.strip().splitlines()) == 1
    (tmp_path / "taken.tif").write_bytes(b"")
    r = runner.invoke(cli, ["ground", str(src), "--res", "1", "--out", str(out), "--origin", str(tmp_path / "taken.tif")])
    assert r.exit_code == 2 and "--overwrite" in r.output and not out.exists()


def test_bad_point_clouds_are_one_line(tmp_path):
    runner = CliRunner()
    r = runner.invoke(cli, ["ground", str(tmp_path / "none.las"), "--res", "1", "--out", str(tmp_path / "o.tif")])
    assert r.exit_code == 2 and "none.las does not exist" in r.output and len(r.output.strip().splitlines()) == 1
    x, y = np.array([X0 + 1.0, X0 + 3.0]), np.array([Y0 - 1.0, Y0 - 2.0])
    veg = _write_las(tmp_path / "veg.las", x, y, np.array([5.0, 6.0]), [5, 5])
    r = runner.invoke(cli, ["ground", str(veg), "--res", "1", "--out", str(tmp_path / "o.tif")])
    assert r.exit_code == 2 and "class 2" in r.output and len(r.output.strip().splitlines()) == 1
    nocrs = _write_las(tmp_path / "nocrs.las", x, y, np.array([5.0, 6.0]), [2, 2], epsg=None)
    r = runner.invoke(cli, ["ground", str(nocrs), "--res", "1", "--out", str(tmp_path / "o.tif")])
    assert r.exit_code == 2 and "--crs" in r.output
    r = runner.invoke(cli, ["ground", str(nocrs), "--res", "1", "--out", str(tmp_path / "o.tif"), "--crs", "EPSG:32749"])
    assert r.exit_code == 0, r.output
    r = runner.invoke(cli, ["ground", str(nocrs), "--res", "1", "--out", str(tmp_path / "o.tif"), "--crs", "EPSG:32749"])
    assert r.exit_code == 2 and "--overwrite" in r.output


def _survey_as_cloud(scene, tmp_path, skip=()):
    """The scene's pre-fire survey as a LAZ cloud (four ground points per pixel at +- a quarter pixel,
    each at the pixel's elevation, none in the pixels of ``skip``, plus vegetation returns) and a
    configuration folder holding the scene's other inputs."""
    with rasterio.open(scene.folder / "pre.tif") as ds:
        pre, t = ds.read(1), ds.transform
    res = t.a
    rows, cols = pre.shape
    gx, gy = _symmetric_points(cols, rows, res, skip=skip)
    gx, gy = gx + (t.c - X0), gy + (t.f - Y0)
    keep = np.ones(pre.shape, bool)
    keep[tuple(np.array(sorted(skip), dtype=int).reshape(-1, 2).T)] = False
    z = np.repeat(pre[keep].astype(float), 4)
    x = np.r_[gx, gx[::7]]
    y = np.r_[gy, gy[::7]]
    cls = np.r_[np.full(gx.size, 2), np.full(gx[::7].size, 4)]
    src = _write_las(tmp_path / "pre.laz", x, y, np.r_[z, z[::7] + 8.0], cls)
    folder = tmp_path / "cfg"
    folder.mkdir()
    for f in ("post.tif", "thickness.tif", "scars.gpkg", "zones.gpkg"):
        shutil.copy(scene.folder / f, folder / f)
    return src, folder, pre, t


def _run_with_pre(scene, folder, name, out):
    import peatburn

    (folder / f"{name}.toml").write_text(scene.config.read_text().replace('"pre.tif"', f'"{name}.tif"'))
    return peatburn.run(folder / f"{name}.toml", out)


@pytest.mark.slow
def test_gridded_cloud_feeds_the_survey_route(scene, scene_run, tmp_path):
    """The scene's pre-fire survey as a point cloud, gridded back at the scene's pixel: the run with
    that GeoTIFF as `pre` gives the local run's zone totals (to the cloud's 1 mm storage)."""
    src, folder, pre, t = _survey_as_cloud(scene, tmp_path)
    r = CliRunner().invoke(cli, ["ground", str(src), "--res", str(t.a), "--out", str(folder / "pre_ground.tif")])
    assert r.exit_code == 0, r.output
    assert " 0 filled by TIN" in r.output  # every pixel holds ground returns: nothing to fill
    with rasterio.open(folder / "pre_ground.tif") as ds:
        assert ds.transform == t and ds.shape == pre.shape
        np.testing.assert_allclose(ds.read(1), pre, atol=6e-4)
    res_run = _run_with_pre(scene, folder, "pre_ground", tmp_path / "out")
    for want, got in zip(scene_run.zones, res_run.zones):
        assert (want["layer"], want["zone"]) == (got["layer"], got["zone"])
        assert got["carbon_smouldering_t"] == pytest.approx(want["carbon_smouldering_t"], rel=2e-3, abs=1e-6)


@pytest.mark.slow
def test_filled_cloud_grid_feeds_the_survey_route(scene, tmp_path):
    """The same survey with one pixel in 40 holding no ground return (inside the grid, each with its 8
    neighbours measured), gridded with the default TIN fill: every such pixel is filled, with a value
    between the smallest and largest of its 8 neighbours (a linear interpolation on triangles of
    neighbour centres), and the run's zone carbon lies between the runs with those pixels set to the
    neighbours' minimum and maximum (the estimate grows with the pre-fire elevation, all else equal).
    The bracketing rasters are built here with numpy from the scene's own survey."""
    from scipy.ndimage import maximum_filter, minimum_filter

    with rasterio.open(scene.folder / "pre.tif") as ds:
        pre, profile = ds.read(1), ds.profile
    rows, cols = pre.shape
    rng = np.random.default_rng(19)
    cand = rng.permutation([(r, c) for r in range(2, rows - 2, 3) for c in range(2, cols - 2, 3)])
    skip = {(int(r), int(c)) for r, c in cand[: rows * cols // 40]}
    src, folder, pre, t = _survey_as_cloud(scene, tmp_path, skip)
    r = CliRunner().invoke(cli, ["ground", str(src), "--res", str(t.a), "--out", str(folder / "pre_ground.tif")])
    assert r.exit_code == 0, r.output
    assert f" {len(skip):,} filled by TIN, {rows * cols:,} with a value" in r.output
    holes = np.zeros(pre.shape, bool)
    holes[tuple(np.array(sorted(skip)).T)] = True
    ring = np.ones((3, 3), bool)
    ring[1, 1] = False
    lo = np.where(holes, minimum_filter(pre, footprint=ring), pre)
    hi = np.where(holes, maximum_filter(pre, footprint=ring), pre)
    with rasterio.open(folder / "pre_ground.tif") as ds:
        got = ds.read(1)
    assert ((got >= lo - 6e-4) & (got <= hi + 6e-4)).all()
    for name, a in (("pre_lo", lo), ("pre_hi", hi)):
        with rasterio.open(folder / f"{name}.tif", "w", **profile) as ds:
            ds.write(a.astype(profile["dtype"]), 1)
    runs = [_run_with_pre(scene, folder, n, tmp_path / n) for n in ("pre_lo", "pre_ground", "pre_hi")]
    moved = 0
    for z_lo, z_got, z_hi in zip(*(run.zones for run in runs)):
        c = [z["carbon_smouldering_t"] for z in (z_lo, z_got, z_hi)]
        assert c[0] - 1e-3 * abs(c[0]) - 1e-6 <= c[1] <= c[2] + 1e-3 * abs(c[2]) + 1e-6
        moved += c[2] > c[0] * (1 + 1e-3) + 1e-6
    assert moved  # the holes touch the scars: the bracket is not trivially flat
