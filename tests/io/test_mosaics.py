"""Tiles read as one mosaic (issue 19 item 1) and the files a virtual input resolves to (issue 26 item 6).

The expected values are the single file the tiles were cut from (read with rasterio directly) and
hand-made gaps; GDAL's VRT driver does the mosaicking.
"""

from __future__ import annotations

import json
import shutil

import numpy as np
import pytest
import rasterio
from rasterio.windows import Window

from peatburn.config import load_config
from peatburn.errors import GridError, MissingInputError, PeatburnError
from peatburn.io.mosaics import RasterInput, mosaic_vrt, resolve_raster_input, resolved_files
from peatburn.io.rasters import inspect_raster
from peatburn.outputs.provenance import compare_inputs, input_records


def cut_tiles(src, folder, size=100, margin=6, skip=(), prefix="t"):
    """Cut ``src`` into ``size`` px tiles overlapping their neighbours by ``margin`` px; tiles whose
    (row, col) index is in ``skip`` are left out (a gap in the delivery). Returns the tile paths."""
    folder.mkdir(parents=True, exist_ok=True)
    out = []
    with rasterio.open(src) as ds:
        prof = ds.profile
        for i, r in enumerate(range(0, ds.height, size)):
            for j, c in enumerate(range(0, ds.width, size)):
                if (i, j) in skip:
                    continue
                r0, c0 = max(r - margin, 0), max(c - margin, 0)
                w = Window(c0, r0, min(c + size + margin, ds.width) - c0, min(r + size + margin, ds.height) - r0)
                p = folder / f"{prefix}_{i:02d}_{j:02d}.tif"
                prof.update(width=int(w.width), height=int(w.height), transform=ds.window_transform(w),
                            tiled=False)
                prof.pop("blockxsize", None), prof.pop("blockysize", None)
                with rasterio.open(p, "w", **prof) as dst:
                    dst.write(ds.read(1, window=w), 1)
                out.append(p)
    return out


def test_mosaic_of_overlapping_tiles_equals_the_file(scene, tmp_path):
    tiles = cut_tiles(scene.folder / "pre.tif", tmp_path / "pre", size=70, margin=5)
    ri = resolve_raster_input(str(tmp_path / "pre" / "*.tif"), tmp_path, "depth.survey.pre", "cfg")
    assert isinstance(ri, RasterInput) and len(ri.tiles) == len(tiles) > 4
    with rasterio.open(scene.folder / "pre.tif") as a, rasterio.open(str(ri)) as b:
        assert (a.transform, a.shape, a.crs) == (b.transform, b.shape, b.crs)
        assert np.array_equal(a.read(1), b.read(1))
    info = inspect_raster(ri, "depth.survey.pre")
    assert "(" in info.path and "tiles" in info.path  # messages show the pattern, not the VRT document


def test_gap_between_tiles_is_nodata(scene, tmp_path):
    cut_tiles(scene.folder / "pre.tif", tmp_path / "pre", size=100, margin=0, skip={(1, 1)})
    with rasterio.open(scene.folder / "pre.tif") as a, rasterio.open(mosaic_vrt(
            sorted(str(p) for p in (tmp_path / "pre").glob("*.tif")))) as b:
        want = a.read(1, masked=True)
        got = b.read(1, masked=True)
        assert got.shape == want.shape
        gap = np.zeros(want.shape, bool)
        gap[100:200, 100:200] = True  # the left-out tile, by hand
        assert got.mask[gap].all() and not got.mask[~gap].any()
        assert np.array_equal(got.data[~gap], want.data[~gap])


def _one_line(exc):
    msg = str(exc.value)
    assert "\n" not in msg and len(msg) < 400
    return msg


def test_tiles_that_do_not_fit_together(scene, tmp_path):
    base = tmp_path / "t"
    tiles = cut_tiles(scene.folder / "pre.tif", base, size=150, margin=0)
    # a tile in another CRS (same numbers, other zone), another resolution, off the pixel lattice
    with rasterio.open(tiles[1]) as ds:
        prof, arr, t = ds.profile, ds.read(1), ds.transform
    variants = {
        "crs": dict(crs="EPSG:32750"),
        "resolution": dict(transform=rasterio.Affine(t.a * 2, 0, t.c, 0, t.e * 2, t.f)),
        "lattice": dict(transform=rasterio.Affine(t.a, 0, t.c + 0.37 * t.a, 0, t.e, t.f)),
    }
    for what, change in variants.items():
        p = tmp_path / f"odd_{what}.tif"
        with rasterio.open(p, "w", **{**prof, **change}) as dst:
            dst.write(arr, 1)
        with pytest.raises(GridError) as exc:
            mosaic_vrt([str(tiles[0]), str(p)], "depth.survey.pre")
        msg = _one_line(exc)
        assert "depth.survey.pre" in msg and p.name in msg
        assert {"crs": "different CRSs", "resolution": "different resolutions", "lattice": "off the pixel grid"}[what] in msg


def test_empty_pattern_and_list(tmp_path):
    with pytest.raises(MissingInputError) as exc:
        resolve_raster_input("nothing_here/*.tif", tmp_path, "depth.survey.pre", "config.toml")
    assert "matches no file" in _one_line(exc)
    with pytest.raises(PeatburnError):
        resolve_raster_input([], tmp_path, "depth.survey.pre", "config.toml")


def test_single_file_stays_a_path(tmp_path):
    assert resolve_raster_input("a.tif", tmp_path, "k", "w") == tmp_path / "a.tif"
    assert isinstance(resolve_raster_input("https://example.invalid/a.tif", tmp_path, "k", "w"), RasterInput)


def _tiled_scene(scene, tmp_path, skip=()):
    """The scene with pre (glob), post (list) and thickness (glob) delivered as tiles."""
    folder = tmp_path / "tiled"
    shutil.copytree(scene.folder, folder)
    for name in ("pre", "post", "thickness"):
        cut_tiles(folder / f"{name}.tif", folder / f"{name}_tiles", size=64, margin=8,
                  skip=skip if name != "thickness" else ())
        (folder / f"{name}.tif").unlink()
    posts = sorted(p.name for p in (folder / "post_tiles").glob("*.tif"))
    text = scene.config.read_text()
    text = text.replace('pre = "pre.tif"', 'pre = "pre_tiles/*.tif"')
    text = text.replace('post = "post.tif"', "post = [" + ", ".join(f'"post_tiles/{p}"' for p in posts) + "]")
    text = text.replace('thickness = "thickness.tif"', 'thickness = "thickness_tiles/t_*.tif"')
    (folder / "config.toml").write_text(text)
    return folder


@pytest.mark.slow
def test_run_on_tiles_gives_the_single_file_totals(scene, scene_run, tmp_path):
    import peatburn

    folder = _tiled_scene(scene, tmp_path)
    cfg = load_config(folder / "config.toml")
    assert isinstance(cfg.survey.pre, RasterInput) and isinstance(cfg.survey.post, RasterInput)
    res = peatburn.run(cfg, tmp_path / "out", overwrite=True)
    # the same zone totals as the single-file survey within 0.1 % (issue 19)
    for want, got in zip(scene_run.zones, res.zones):
        assert (want["layer"], want["zone"]) == (got["layer"], got["zone"])
        for k in ("carbon_smouldering_t", "burned_area_ha", "co2e_smouldering_t", "area_survey_ha"):
            assert got[k] == pytest.approx(want[k], rel=1e-3, abs=1e-9), k
    # provenance hashes every tile (issue 26 item 6): a changed tile is seen
    prov = json.loads((tmp_path / "out" / "provenance.json").read_text())
    rec = prov["inputs"]["depth.survey.pre"]
    assert rec["path"] == "pre_tiles/*.tif"  # as the configuration says
    assert len(rec["files"]) == len(list((folder / "pre_tiles").glob("*.tif"))) and all(f["sha256"] for f in rec["files"])
    assert compare_inputs(prov) == []
    tile = folder / "post_tiles" / "t_01_01.tif"
    with rasterio.open(tile, "r+") as ds:
        a = ds.read(1)
        a[3, 3] += 1.0
        ds.write(a, 1)
    problems = compare_inputs(prov)
    assert len(problems) == 1 and "depth.survey.post" in problems[0] and "t_01_01.tif" in problems[0]


def test_vrt_file_provenance_lists_its_tiles(scene, tmp_path):
    tiles = cut_tiles(scene.folder / "pre.tif", tmp_path / "tiles", size=150, margin=0)
    vrt = tmp_path / "pre.vrt"
    vrt.write_text(mosaic_vrt([str(t) for t in tiles]))
    assert sorted(resolved_files(vrt)[1:]) == sorted(str(t) for t in tiles)
    rec = input_records({"depth.survey.pre": vrt})["depth.survey.pre"]
    assert rec["path"] == str(vrt) and len(rec["files"]) == len(tiles)
    prov = {"inputs": {"depth.survey.pre": rec}}
    assert compare_inputs(prov) == []
    with rasterio.open(tiles[-1], "r+") as ds:
        a = ds.read(1)
        a[0, 0] -= 2.0
        ds.write(a, 1)
    assert [tiles[-1].name in p for p in compare_inputs(prov)] == [True]


def test_cli_check_on_tiles_and_bad_tiles(scene, tmp_path):
    from click.testing import CliRunner

    from peatburn.cli.main import cli

    folder = tmp_path / "s"
    shutil.copytree(scene.folder, folder)
    cut_tiles(folder / "pre.tif", folder / "pre_tiles", size=120, margin=4)
    text = scene.config.read_text()
    (folder / "config.toml").write_text(text.replace('pre = "pre.tif"', 'pre = "pre_tiles/*.tif"'))
    r = CliRunner().invoke(cli, ["check", str(folder / "config.toml")])
    assert r.exit_code == 0, r.output
    assert "raster depth.survey.pre: pre_tiles/*.tif (6 tiles) (300 x 240" in r.output
    assert "<VRTDataset" not in r.output
    # a pattern matching nothing, and a tile in another CRS: one line, exit 2
    (folder / "config.toml").write_text(text.replace('pre = "pre.tif"', 'pre = "pre_tilez/*.tif"'))
    r = CliRunner().invoke(cli, ["check", str(folder / "config.toml")])
    assert r.exit_code == 2 and "matches no file" in r.output and len(r.output.strip().splitlines()) == 1
    with rasterio.open(folder / "pre_tiles" / "t_01_02.tif", "r+") as ds:
        ds.crs = rasterio.crs.CRS.from_epsg(32750)
    (folder / "config.toml").write_text(text.replace('pre = "pre.tif"', 'pre = "pre_tiles/*.tif"'))
    r = CliRunner().invoke(cli, ["check", str(folder / "config.toml")])
    assert r.exit_code == 2 and "different CRSs" in r.output and len(r.output.strip().splitlines()) == 1


def test_peat_extent_as_tiles(scene, tmp_path):
    """A peat-extent raster delivered as tiles is read as a raster, not as polygons."""
    folder = tmp_path / "s"
    shutil.copytree(scene.folder, folder)
    with rasterio.open(folder / "thickness.tif") as ds:
        prof = ds.profile
        arr = (ds.read(1) > 1.0).astype("float32")  # organic soil where the peat is thick
    with rasterio.open(folder / "extent.tif", "w", **prof) as dst:
        dst.write(arr, 1)
    cut_tiles(folder / "extent.tif", folder / "extent_tiles", size=100, margin=3)
    text = scene.config.read_text().replace("[peat]\n", '[peat]\nextent = "extent_tiles/*.tif"\n')
    (folder / "config.toml").write_text(text)
    cfg = load_config(folder / "config.toml")
    assert isinstance(cfg.peat.extent, RasterInput)
    from peatburn.engine.inputs import open_inputs

    inputs = open_inputs(cfg)
    assert inputs.extent is None and "peat.extent" in inputs.rasters  # opened as a raster
