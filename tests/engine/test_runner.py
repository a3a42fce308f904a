"""End-to-end recovery of known truth on synthetic scenes (tests/conftest.py)."""

import json

import numpy as np
import pytest
import rasterio

import peatburn
from conftest import make_scene

# Tolerance for totals (3 %), justified:
#  * survey noise: sigma_dh ~ 0.07 m over ~13,000 burned pixels -> sd of the carbon sum ~ 0.2 % (negligible);
#  * resampling the co-registered post survey (bilinear) smears the burn-scar step across one pixel ring:
#    at most perimeter x pixel/2 x depth of volume moves outside the mapped scar; for scar A (perimeter
#    759 m incl. the island, 2 m pixels, 0.4 m) that is 2.5 % of its carbon;
#  * the thickness cap biases low by at most sigma/sqrt(2 pi) = 0.028 m over the thin-peat pixels (5 % of the area).
TOL = 0.03


def test_recovers_shift_offset_and_total(scene, scene_run):
    qa = scene_run.qa
    sx, sy = scene.truth["shift"]
    # Nuth & Kääb recovers the georeferencing error: the correction is minus the applied shift
    assert qa["shift_x_m"] == pytest.approx(-sx, abs=0.1)
    assert qa["shift_y_m"] == pytest.approx(-sy, abs=0.1)
    assert qa["vertical_offset_m"] == pytest.approx(-scene.truth["offset"], abs=0.01)
    assert qa["stable_nmad_after_m"] < qa["stable_nmad_before_m"]
    # two surveys with 0.05 m noise each: NMAD of the difference ~ 0.05*sqrt(2) = 0.071 m, less after bilinear
    # resampling of one survey (averaging 4 neighbours of independent noise reduces its sd)
    assert 0.04 < qa["stable_nmad_after_m"] < 0.08
    total = scene_run.total
    assert total["carbon_smouldering_t"] == pytest.approx(scene.truth["carbon_t"], rel=TOL)
    assert total["burned_area_ha"] == pytest.approx(scene.truth["burned_area_ha"], rel=1e-9)
    west = next(r for r in scene_run.zones if r["zone"] == "West Block")
    assert west["carbon_smouldering_t"] == pytest.approx(scene.truth["west_carbon_t"], rel=TOL)


def test_zone_sums_equal_total(scene_run):
    zr = [r for r in scene_run.zones if r["layer"] == "zones"]
    for k in ("carbon_smouldering_t", "peat_burned_t", "burned_area_ha", "co2_smouldering_t"):
        assert sum(r[k] for r in zr) == pytest.approx(scene_run.total[k], rel=1e-9)


def test_gases_follow_factor_set(scene_run):
    # Akagi et al. 2011 peatland CO2 factor from the shipped set: gas = dry matter x EF (IPCC 2006 Eq. 2.27 form)
    from peatburn.factors import load_factor_set

    fs = load_factor_set("smouldering_akagi2011")
    t = scene_run.total
    assert t["co2_smouldering_t"] == pytest.approx(t["peat_burned_t"] * fs.ef["co2"] / 1000, rel=1e-12)
    assert t["ch4_smouldering_t"] == pytest.approx(t["peat_burned_t"] * fs.ef["ch4"] / 1000, rel=1e-12)


def test_rasters_match_tables(scene, scene_run):
    out = scene_run.out_dir
    with rasterio.open(out / "carbon_smouldering.tif") as ds:
        c = ds.read(1, masked=True)
        assert ds.tags(ns="IMAGE_STRUCTURE").get("LAYOUT") == "COG"
        area = abs(ds.transform.a * ds.transform.e)
    # the carbon raster [kg C m-2] times pixel area sums to the table's total (traceability)
    assert float(c.sum()) * area / 1000 == pytest.approx(scene_run.total["carbon_smouldering_t"], rel=1e-5)
    with rasterio.open(out / "burn_depth.tif") as ds:
        d = ds.read(1, masked=True)
    thick = rasterio.open(scene.folder / "thickness.tif").read(1)
    # depth never exceeds the peat thickness by more than the level of detection: within it the noisy
    # measured depth is kept, beyond it capped (peat.cap_depth; docs/method.md 2.4)
    lod = scene_run.qa["level_of_detection_m"]
    assert np.all(d.filled(-1) <= thick + lod + 1e-6)
    assert np.any(d.filled(-1) > thick + 1e-6)  # the thin-peat corner: noise above the cap is kept
    files = {p.name for p in out.iterdir()}
    assert {"zones.csv", "totals.json", "inventory.csv", "burn_depth.tif", "carbon_smouldering.tif",
            "provenance.json", "report.html"} <= files
    assert not any(n.endswith(".part") or n.startswith(".") for n in files)


def test_provenance_records_inputs(scene, scene_run):
    import hashlib

    prov = json.loads((scene_run.out_dir / "provenance.json").read_text())
    rec = prov["inputs"]["depth.survey.pre"]
    assert rec["sha256"] == hashlib.sha256((scene.folder / "pre.tif").read_bytes()).hexdigest()
    assert prov["emission_factors"]["smouldering"]["citation"]
    assert prov["gwp"]["name"] == "AR6"


def test_clipping_free_estimator_unbiased_without_burn(tmp_path):
    """A scene whose scars did not burn at all (depth 0): the estimate is zero within the noise of the
    sum, where clipping negatives to zero would add sigma/sqrt(2 pi) ~ 0.028 m everywhere."""
    s = make_scene(tmp_path / "s", depth=0.0, zones=False)
    r = peatburn.run(s.config, tmp_path / "o")
    mean_depth = r.total["mean_burn_depth_m"]
    # sd of a mean of ~13,000 pixels of sd 0.07 m is 0.0006 m; allow 0.005 m for co-registration residuals
    assert abs(mean_depth) < 0.005


def test_serial_and_two_workers_agree(scene, scene_run, tmp_path):
    r2 = peatburn.run(scene.config, tmp_path / "w2", workers=2)
    for a, b in zip(scene_run.zones, r2.zones):
        assert a["carbon_smouldering_t"] == b["carbon_smouldering_t"]


def test_intervals_per_zone_and_reproducible(tmp_path):
    s = make_scene(tmp_path / "s", extra_config="[uncertainty]\ndraws = 500\nseed = 3\n")
    a = peatburn.run(s.config, tmp_path / "a")
    peatburn.run(s.config, tmp_path / "b")
    for r in a.zones:
        if r["carbon_smouldering_t"] > 1:
            assert r["carbon_smouldering_t_lo"] < r["carbon_smouldering_t"] < r["carbon_smouldering_t_hi"]
    # the truth lies in the run's interval (one scene; the coverage statistics are in
    # tests/science/test_uncertainty.py)
    t = a.total
    assert t["carbon_smouldering_t_lo"] <= s.truth["carbon_t"] <= t["carbon_smouldering_t_hi"]
    assert (tmp_path / "a" / "zones.csv").read_bytes() == (tmp_path / "b" / "zones.csv").read_bytes()
    shares = a.totals["uncertainty"]["contributions"]
    assert sum(v for v in shares.values() if v is not None) == pytest.approx(1.0, abs=1e-6)
    inv = (tmp_path / "a" / "inventory.csv").read_text().splitlines()
    assert inv[0] == ("year,phase,gas,emissions_gg,emissions_gg_lo,emissions_gg_hi,"
                      "approach1_pct,approach2_minus_pct,approach2_plus_pct")  # issue 16 item 7
