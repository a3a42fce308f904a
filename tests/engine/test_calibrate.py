"""``peatburn calibrate``'s library function (peatburn.engine.calibrate): the surveys are sampled once
(issue 25 item 7), and the pairs it reports are the pairs the fit used. Consistency checks on a
synthetic scene (tests/conftest.py); the fit itself is checked in tests/science/test_water_table*.py."""

import csv

import numpy as np
import pytest

from conftest import make_scene
from peatburn.config import load_config
from peatburn.engine import calibrate as cal
from peatburn.engine import depth_models


def _scene(tmp_path, extra=""):
    s = make_scene(tmp_path / "s", zones=False)
    x0, y0 = 500_000.0, 9_800_000.0  # the scene's corner (tests/conftest.py X0, Y0)
    with open(s.folder / "stations.csv", "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["x", "y", "water_table_m"])
        for i, (dx, dy) in enumerate([(100, -100), (500, -100), (100, -400), (500, -400)]):
            w.writerow([x0 + dx, y0 + dy, 0.2 + 0.2 * i])
    s.config.write_text(s.config.read_text() + f'\n[depth.water_table]\ndepth = "stations.csv"\ncrs = "EPSG:32749"\n{extra}')
    return s


def _count_sampling(monkeypatch):
    calls = []
    original = depth_models.depth_sample_table

    def counted(*args, **kwargs):
        calls.append(1)
        return original(*args, **kwargs)

    monkeypatch.setattr(depth_models, "depth_sample_table", counted)
    return calls


@pytest.mark.parametrize("extra, fitted", [("", True), ("model = \"user\"\nintercept = 0.1\nslope = 0.2\n", False)],
                         ids=["fitted", "user-coefficients"])
def test_the_surveys_are_sampled_once(tmp_path, monkeypatch, extra, fitted):
    s = _scene(tmp_path, extra)
    calls = _count_sampling(monkeypatch)
    c = cal.calibrate(load_config(s.config))
    assert len(calls) == 1
    assert c.source == "surveyed scars" and c.water_table.size == c.depth.size > depth_models.MIN_FIT_SAMPLES
    assert np.all(np.isfinite(c.water_table)) and np.all(np.isfinite(c.depth))
    assert (c.models.all.confidence == "user") is not fitted
    if fitted:
        # the pairs shown are the pairs fitted (n counts those the fit did not censor)
        assert c.models.all.n + c.models.all.n_censored == c.water_table.size


def test_a_model_with_a_thin_peat_factor_is_written_drawn_and_read_back(tmp_path):
    # a fixed thickness_taper on a scene whose thickness raster varies (4 m, and 0.25 m in a corner): the
    # fitted model carries it, the scatter plot draws its line (no thickness there: factor 1), and the JSON
    # that `run` reuses gives the same model back
    s = _scene(tmp_path, "thickness_taper = 0.5\n")
    c = cal.calibrate(load_config(s.config))
    assert c.models.all.thickness_taper_m == 0.5 and "thin-peat factor" in c.models.all.estimator
    png = cal.write_scatter(tmp_path / "fit.png", c)
    assert png.stat().st_size > 0
    cal.write_fit(tmp_path / "fit.json", c)
    assert depth_models.load_models(tmp_path / "fit.json").all == c.models.all
