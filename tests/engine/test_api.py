"""The in-memory API (issue 25 item 3): ``peatburn.run(cfg)`` computes without writing, returns the
tables as pandas objects, and writes the same files as a run into a folder when asked;
``peatburn.check`` returns what ``peatburn check`` prints.

The reference is the run of the same scene written to a folder (scene_run), read back with pandas
and compared byte for byte where the files do not hold a time stamp.
"""

from __future__ import annotations

import gc
import os

import pandas as pd
import pytest

import peatburn


@pytest.mark.slow
def test_run_in_memory_then_write(scene, scene_run, tmp_path):
    before = set(os.listdir(scene.folder))
    res = peatburn.run(scene.config)
    assert res.out_dir is None and res.files == {}
    assert set(os.listdir(scene.folder)) == before  # nothing written beside the inputs
    f = res.frames
    want = pd.read_csv(scene_run.out_dir / "zones.csv", keep_default_na=False, na_values=[""])
    assert list(f.zones.columns) == list(want.columns)
    assert isinstance(f.total, pd.Series)
    assert f.total["carbon_smouldering_t"] == pytest.approx(want.iloc[-1]["carbon_smouldering_t"], rel=1e-9)
    assert f.zones["carbon_smouldering_t"].tolist() == pytest.approx(want["carbon_smouldering_t"].tolist(), rel=1e-9)
    fires = pd.read_csv(scene_run.out_dir / "fires.csv", keep_default_na=False, na_values=[""])
    assert list(f.fires.columns) == list(fires.columns) and len(f.fires) == len(fires) == 2
    assert isinstance(f.daily, pd.DataFrame) and isinstance(f.inventory, pd.DataFrame)

    raster_dir = res.raster_dir
    assert raster_dir.exists()
    files = res.write(tmp_path / "out")
    for name in ("zones.csv", "fires.csv", "daily.csv", "inventory.csv", "results.gpkg", "burn_depth.tif",
                 "carbon_smouldering.tif", "depth_method.tif"):
        assert (tmp_path / "out" / name).read_bytes() == (scene_run.out_dir / name).read_bytes(), name
    assert files["report"].exists() and files["provenance"].exists()
    with pytest.raises(peatburn.errors.OutputExistsError):
        res.write(tmp_path / "out")
    del res, f
    gc.collect()
    assert not raster_dir.exists()  # the private raster folder goes with the result


def test_check_as_a_function(scene):
    report = peatburn.check(scene.config)
    assert report.ok and report.lines[-1] == "ok: the configuration is valid"
    assert report.grid.width == scene.shape[1] and "depth.survey.pre" in report.rasters
    assert any(line.startswith("grid: 300 x 240 px") for line in report.lines)
