"""Issue 16 items 5-7 in a run: the burned-area accuracy term, the FRE integration term, and the IPCC
percentages of each inventory line.

References used by the checks: hand arithmetic (the error-adjusted ratio scales every area integral);
the definitions of the area ratio (Olofsson et al. 2014, recalled, unchecked).
"""

import csv
import json
import math

import pytest

import peatburn
from conftest import X0, Y0, make_scene
from peatburn.config import load_config
from peatburn.errors import ConfigError, PhysicalRangeError
from test_config import _cfg
from test_flaming_run import _detections

DRAWS = '[uncertainty]\ndraws = 400\nseed = 3\n'


@pytest.fixture(scope="module")
def base_run(tmp_path_factory):
    t = tmp_path_factory.mktemp("area")
    s = make_scene(t / "s", extra_config=DRAWS)
    return s, peatburn.run(s.config, t / "o")


def _with(tmp_path, extra):
    s = make_scene(tmp_path / "s", extra_config=DRAWS + extra)
    return peatburn.run(s.config, tmp_path / "o")


def _width(row, col):
    return row[f"{col}_hi"] - row[f"{col}_lo"]


def test_area_term_widens_only_when_not_adjusted(base_run, tmp_path):
    _, r0 = base_run
    r = _with(tmp_path, "\n[burned_area.accuracy]\narea_ratio = 0.8\narea_ratio_se = 0.04\n")
    for a, b in zip(r0.zones, r.zones):  # the estimates follow the mapped area
        assert a["carbon_smouldering_t"] == b["carbon_smouldering_t"]
        assert a["burned_area_ha"] == b["burned_area_ha"]
    assert _width(r.total, "carbon_smouldering_t") > 1.5 * _width(r0.total, "carbon_smouldering_t")
    # the interval reaches the error-adjusted value (the bias left in is counted as uncertainty)
    assert r.total["carbon_smouldering_t_lo"] < 0.8 * r.total["carbon_smouldering_t"]
    src = {s["name"]: s for s in r.totals["uncertainty"]["sources"]}
    assert src["burned_area"]["parameters"]["cv"] == pytest.approx(math.hypot(0.04, 0.2))
    assert "adjust = false" in r.totals["qa"]["burned_area_accuracy"]
    assert "no area term" in r0.totals["qa"]["burned_area_accuracy"]  # the default, stated
    assert "burned_area" not in {s["name"] for s in r0.totals["uncertainty"]["sources"]}


def test_adjusted_area_scales_every_area_integral(base_run, tmp_path):
    _, r0 = base_run
    # omission 0.2 +/- 0.03, commission 0.1 +/- 0.02: R = 0.9 / 0.8 = 1.125 (arithmetic)
    r = _with(tmp_path, "\n[burned_area.accuracy]\nomission = 0.2\ncommission = 0.1\nomission_se = 0.03\n"
                        "commission_se = 0.02\nadjust = true\n")
    for a, b in zip(r0.zones, r.zones):
        for k in ("burned_area_ha", "carbon_smouldering_t", "co2_smouldering_t", "peat_burned_t"):
            assert b[k] == pytest.approx(1.125 * a[k], rel=1e-9)
        if a["mean_burn_depth_m"] == a["mean_burn_depth_m"]:
            assert b["mean_burn_depth_m"] == pytest.approx(a["mean_burn_depth_m"], rel=1e-9)
    src = {s["name"]: s for s in r.totals["uncertainty"]["sources"]}
    rel = math.hypot(0.02 / 0.9, 0.03 / 0.8)  # SE(R)/R, first order
    assert src["burned_area"]["parameters"]["cv"] == pytest.approx(rel, rel=1e-9)
    assert any("error-adjusted area ratio 1.125" in n for n in r.totals["notes"])


def test_inventory_lines_carry_approach_1_and_2(base_run):
    s, r0 = base_run
    ipcc = r0.totals["uncertainty"]["ipcc_total_uncertainty_pct"]
    rows = list(csv.DictReader(open(r0.out_dir / "inventory.csv", newline="")))
    co2 = [row for row in rows if row["phase"] == "smouldering" and row["gas"] == "CO2"]
    assert co2
    for row in co2:
        assert float(row["approach1_pct"]) == pytest.approx(ipcc["co2_smouldering_t_approach1_pct"], rel=1e-9)
        assert float(row["approach2_minus_pct"]) == pytest.approx(ipcc["co2_smouldering_t_approach2_minus_pct"],
                                                                  rel=1e-9)
        assert float(row["approach2_plus_pct"]) > 0
    inv = json.loads((r0.out_dir / "inventory.json").read_text())["rows"]
    assert "approach2_plus_pct" in inv[0]
    html = (r0.out_dir / "report.html").read_text()
    assert "Approach 1" in html and "Approach 2" in html


def test_fre_integration_term_widens_the_flaming_interval(tmp_path):
    widths = {}
    for name, extra in (("off", "fre_integration_cv = 0\n"), ("default", ""), ("doubled", "fre_integration_cv = 2.0\n")):
        s = make_scene(tmp_path / name, extra_config=DRAWS + extra)
        _detections(s.folder / "det.csv", X0 + 100.0, Y0 - 200.0)
        s.config.write_text(s.config.read_text() + '\n[flaming]\ndetections = "det.csv"\ncrs = "EPSG:32749"\n')
        r = peatburn.run(s.config, tmp_path / f"o_{name}")
        widths[name] = _width(r.total, "carbon_flaming_t") / r.total["carbon_flaming_t"]
        names = {x["name"] for x in r.totals["uncertainty"]["sources"]}
        assert ("fre_integration" in names) == (name != "off")
    # off: only the combustion coefficient (+-0.015/0.368, about +-8 % at 95 %); the default adds one
    # event seen twice: cv 1/sqrt(2) = 0.71 -> a far wider interval; doubling cv_1 widens it further
    assert widths["off"] < 0.2
    assert widths["default"] > 5 * widths["off"]
    assert widths["doubled"] > widths["default"]


@pytest.mark.parametrize("acc, err, words", [
    ("area_ratio = 0.9\n", ConfigError, "area_ratio_se"),
    ("area_ratio = 0.9\narea_ratio_se = 0.1\nomission = 0.1\n", ConfigError, "not both"),
    ("omission = 0.1\ncommission = 0.1\n", ConfigError, "omission_se"),
    ("omission = 0.1\ncommission = 0.1\nomission_se = 0.01\ncommission_n = 1\n", PhysicalRangeError, ">= 2"),
    ("omission = 1.0\ncommission = 0.1\nomission_se = 0.01\ncommission_se = 0.01\n", PhysicalRangeError, "outside"),
    ("area_ratio = 0.9\narea_ratio_se = 0.1\nadjust = \"yes\"\n", ConfigError, "true or false"),
    ("area_rate = 0.9\n", ConfigError, "did you mean 'area_ratio'"),
])
def test_accuracy_keys_are_checked(tmp_path, acc, err, words):
    with pytest.raises(err, match=words):
        load_config(_cfg(tmp_path, extra="[burned_area.accuracy]\n" + acc))


def test_accuracy_from_sample_sizes(tmp_path):
    cfg = load_config(_cfg(tmp_path, extra="[burned_area.accuracy]\nomission = 0.1\ncommission = 0.1\n"
                                           "omission_n = 101\ncommission_n = 101\n[uncertainty]\nfre_integration_cv = 0.5\n"))
    # R = 0.9 / 0.9 = 1; SE(R)/R = sqrt(2) x 0.03 / 0.9 (each rate's SE sqrt(0.09/100) = 0.03)
    assert cfg.area_accuracy.ratio == pytest.approx(1.0)
    assert cfg.area_accuracy.ratio_se == pytest.approx(math.sqrt(2) * 0.03 / 0.9)
    assert cfg.area_accuracy.adjust is False
    assert cfg.uncertainty.fre_integration_cv == 0.5


def test_check_refuses_a_bad_accuracy_key_in_one_line(tmp_path):
    from click.testing import CliRunner

    from peatburn.cli.main import cli

    s = make_scene(tmp_path / "s", extra_config="[burned_area.accuracy]\narea_ratio = 0.9\n")
    res = CliRunner().invoke(cli, ["check", str(s.config)])
    assert res.exit_code == 2
    assert "area_ratio_se" in res.output and "Traceback" not in res.output
    assert len(res.output.strip().splitlines()) == 1
