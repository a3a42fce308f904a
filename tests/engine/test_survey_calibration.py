"""The user's calibration check of the survey error model (issue 16 item 2): stable-ground patches of
a zone's size against the model's sd, in totals.json, the QA table and the report."""

import math
from types import SimpleNamespace

import numpy as np
import pytest

from peatburn.engine.survey_calibration import patch_check
from peatburn.science import zone_error
from tests.conftest import make_scene


def _white_sample(n=400, pix=2.0, sd=0.1, keep=0.25, seed=0):
    rng = np.random.default_rng(seed)
    field = rng.normal(0.0, sd, (n, n))
    yy, xx = np.mgrid[0:n, 0:n] * pix
    idx = rng.choice(n * n, int(keep * n * n), replace=False)
    return SimpleNamespace(stable_sample=(xx.ravel()[idx], yy.ravel()[idx], field.ravel()[idx]), n_stable_sample=n * n)


def test_ratio_near_one_for_a_true_model_and_flags_a_narrow_one():
    """White noise of sd 0.1 m on 2 m pixels: a 20 x 20 pixel patch mean has sd 0.1 / 20 = 0.005 m
    (textbook sigma / sqrt(n)). The true model gives a ratio near 1; a model 3 times too narrow gives
    about 3 and says so."""
    al = _white_sample()
    area = (20 * 2.0) ** 2
    true = {"nugget_m2": 0.01, "components": [], "trend_sd_m": 0.0, "stable_area_m2": 400 * 400 * 4.0}
    assert float(zone_error.zone_mean_sd(area, 0.01, [], 4.0)) == pytest.approx(0.005)
    row = patch_check(al, true, 4.0, {"zones": area})[0]
    assert row["ratio"] == pytest.approx(1.0, abs=3 * row["ratio_se"] + 0.05)
    assert "calibrated" in row["sentence"]
    narrow = dict(true, nugget_m2=0.01 / 9)
    row = patch_check(al, narrow, 4.0, {"zones": area})[0]
    assert row["ratio"] > 2.2 and "too narrow" in row["sentence"]
    # a patch larger than the stable ground: no check, said plainly
    row = patch_check(al, true, 4.0, {"zones": (1000 * 2.0) ** 2})[0]
    assert row["patches"] == 0 and math.isnan(row["ratio"]) and "could not be checked" in row["sentence"]


def test_run_records_the_check_in_totals_qa_and_report(tmp_path):
    import json

    import peatburn

    sc = make_scene(tmp_path / "s", extra_config='[uncertainty]\ndraws = 500\nsurface_change_sd = "2 cm"\n')
    res = peatburn.run(sc.config, tmp_path / "o", overwrite=True)
    rows = json.loads((tmp_path / "o" / "totals.json").read_text())["uncertainty"]["survey_calibration"]
    assert rows and rows == res.totals["qa"]["survey_error_calibration"]
    zone = [r for r in rows if r["scope"].startswith("zone layer")][0]
    assert zone["patches"] > 20
    # the scene's survey error is white (tests/conftest.py): the model is near the patches' spread
    assert 0.5 < zone["ratio"] < 2.0
    html = (tmp_path / "o" / "report.html").read_text()
    assert "survey error check" in html and "patch RMS / model sd" in html
    # IPCC 2006 Vol. 1 Ch. 3: Approach 1 (first-order propagation) beside Approach 2 (Monte Carlo) for the total;
    # for a sum of near-normal terms the two agree to first order (JCGM 101:2008 validates the GUM this way)
    ipcc = res.totals["uncertainty"]["ipcc_total_uncertainty_pct"]
    a1 = ipcc["carbon_smouldering_t_approach1_pct"]
    a2 = (ipcc["carbon_smouldering_t_approach2_minus_pct"] + ipcc["carbon_smouldering_t_approach2_plus_pct"]) / 2
    assert 0 < a1 and a2 == pytest.approx(a1, rel=0.15)
    assert "Approach 1" in html
    # issue 16 item 4: the user's non-fire surface change (2 cm, given in cm) is drawn as its own source
    src = {x["name"]: x for x in res.totals["uncertainty"]["sources"]}
    assert src["surface_change"]["parameters"]["sd_m"] == pytest.approx(0.02)
    assert res.totals["uncertainty"]["contributions"]["surface_change"] > 0


def test_zone_sd_widened_only_where_the_patches_show_the_model_too_narrow():
    """zone_sd_scale: k^2 zone_sd^2 + bias_sd^2 = patch RMS^2 when the ratio exceeds 1 by more than twice its
    standard error (hand arithmetic: sqrt(0.03^2 - 0.01^2) / 0.01 = sqrt(8)); else 1, and never below 1."""
    from peatburn.engine.survey_calibration import zone_sd_scale

    model = math.hypot(0.01, 0.01)
    assert zone_sd_scale(0.03, 0.01, 0.01, 0.03 / model, 0.1) == pytest.approx(math.sqrt(8.0))
    assert zone_sd_scale(0.03, 0.01, 0.01, 0.03 / model, 1.0) == 1.0  # within the check's scatter
    assert zone_sd_scale(0.005, 0.01, 0.01, 0.005 / model, 0.01) == 1.0  # too wide: left as it is
