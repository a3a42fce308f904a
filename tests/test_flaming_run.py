"""Flaming emissions in a run: kept apart from smouldering, attributed to the zone of the detections."""

import csv
import math

import pytest

import peatburn
from conftest import X0, Y0, make_scene
from peatburn.factors import load_factor_set


def _detections(path, x, y):
    with open(path, "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["x", "y", "time", "frp_mw"])
        w.writerow([x, y, "2030-09-01T06:00:00Z", 40.0])
        w.writerow([x + 50, y, "2030-09-01T18:00:00Z", 60.0])
        w.writerow([x, y, "not a time", 10.0])  # bad row: counted, not used
        w.writerow([x, y, "2030-09-02T06:00:00Z", -5])  # negative FRP: counted, not used


def test_detections_in_one_zone_add_flaming_there_only(tmp_path):
    base = make_scene(tmp_path / "a")
    r0 = peatburn.run(base.config, tmp_path / "o0")
    s = make_scene(tmp_path / "b")
    # both detections inside the West Block (x < X0 + 300 m)
    _detections(s.folder / "det.csv", X0 + 100.0, Y0 - 200.0)
    s.config.write_text(s.config.read_text() + '\n[flaming]\ndetections = "det.csv"\ncrs = "EPSG:32749"\n')
    r1 = peatburn.run(s.config, tmp_path / "o1")
    west = next(r for r in r1.zones if r["zone"] == "West Block")
    east = next(r for r in r1.zones if r["zone"] == "East Block")
    assert west["carbon_flaming_t"] > 0 and east["carbon_flaming_t"] == 0
    # Hand arithmetic with the published coefficient (Wooster et al. 2005, 0.368 kg/MJ, recalled) and the
    # FRE rule of docs/flaming.md: two looks 12 h apart, 40 and 60 MW, trapezoid 12 h x (40+60)/2 plus
    # the two 6 h end ramps (40 x 6 h / 2 and 60 x 6 h / 2): (2160000 + 432000 + 648000) MJ = 3.24e6 MJ
    fre = 12 * 3600 * 50 + 40 * 6 * 3600 / 2 + 60 * 6 * 3600 / 2
    assert west["fre_mj"] == pytest.approx(fre)
    dm_t = fre * 0.368 / 1000
    # CO2 with IPCC 2006 Table 2.5 tropical forest (Andreae & Merlet 2001) via the shipped set
    ef = load_factor_set("flaming_ipcc2006_tropical_forest").ef["co2"]
    assert west["co2_flaming_t"] == pytest.approx(dm_t * ef / 1000)
    # smouldering columns unchanged by adding flaming inputs
    for a, b in zip(r0.zones, r1.zones):
        for k in ("carbon_smouldering_t", "co2_smouldering_t", "peat_burned_t"):
            assert a[k] == b[k]
    assert any("2 rejected" in n for n in r1.totals["notes"])


def test_biomass_route(tmp_path):
    s = make_scene(tmp_path / "s", zones=False)
    s.config.write_text(s.config.read_text() + '\n[flaming]\nmethod = "biomass"\nbiomass = "200 t/ha"\n'
                        'combustion_factor = 0.36\n')
    r = peatburn.run(s.config, tmp_path / "o")
    # IPCC 2006 Eq. 2.27: A x M_B x C_f, A = the burned area in ha
    dm_t = r.total["burned_area_ha"] * 200 * 0.36
    ef = load_factor_set("flaming_ipcc2006_tropical_forest").ef["ch4"]
    assert r.total["ch4_flaming_t"] == pytest.approx(dm_t * ef / 1000, rel=1e-9)


def test_fre_dry_matter_capped_by_biomass_and_peat_conversion_column(tmp_path):
    # issue 17 items 5-6: FRE x C_e is not bounded by the fuel there is; with a biomass figure the
    # FRE dry matter of each fire is capped by biomass x its burned area
    s = make_scene(tmp_path / "b")
    _detections(s.folder / "det.csv", X0 + 100.0, Y0 - 200.0)
    s.config.write_text(s.config.read_text() + '\n[flaming]\ndetections = "det.csv"\ncrs = "EPSG:32749"\n'
                        'biomass = "1 t/ha"\npeat_coefficient = "1.5 kg/MJ"\n')
    r = peatburn.run(s.config, tmp_path / "o")
    fires = list(csv.DictReader(open(tmp_path / "o" / "fires.csv", newline="")))
    hit = [f for f in fires if float(f["n_detections"]) > 0]
    assert len(hit) == 1
    # uncapped: 3.24e6 MJ x 0.368 kg/MJ = 1192.3 t; the fire holds only its area x 1 t/ha of biomass
    dm_t = float(hit[0]["burned_area_ha"]) * 1.0
    assert dm_t < 3.24e6 * 0.368 / 1000
    # carbon = dry matter x 0.47 (IPCC 2006 Vol. 4 Table 4.3 forest carbon fraction, recalled)
    assert float(hit[0]["carbon_flaming_t"]) == pytest.approx(dm_t * 0.47, rel=1e-6)
    assert r.total["carbon_flaming_t"] == pytest.approx(dm_t * 0.47, rel=1e-9)
    assert any("capped by the above-ground biomass" in n for n in r.totals["notes"])
    # the FRP-only comparison keeps the uncapped FRE (what an FRP-only method sees)
    fre = 12 * 3600 * 50 + 40 * 6 * 3600 / 2 + 60 * 6 * 3600 / 2
    assert r.total["carbon_frp_only_t"] == pytest.approx(fre * 0.368 * 0.47 / 1000, rel=1e-9)
    # the user's peat conversion: FRE x 1.5 kg/MJ x the run's peat carbon fraction (the scene's 0.55)
    assert r.total["carbon_fre_peat_t"] == pytest.approx(fre * 1.5 * 0.55 / 1000, rel=1e-6)
    # 5.24 ha burned: far below three 1 km pixel footprints, so no ratio is claimed
    assert r.total["burned_area_ha"] < 300 and math.isnan(r.total["smouldering_to_fre_peat_ratio"])
    html = (tmp_path / "o" / "report.html").read_text()
    assert "the user&#39;s value: peatburn ships none" in html or "the user's value: peatburn ships none" in html


def test_no_peat_conversion_leaves_the_columns_empty(tmp_path):
    s = make_scene(tmp_path / "b", zones=False)
    _detections(s.folder / "det.csv", X0 + 100.0, Y0 - 200.0)
    s.config.write_text(s.config.read_text() + '\n[flaming]\ndetections = "det.csv"\ncrs = "EPSG:32749"\n')
    peatburn.run(s.config, tmp_path / "o")
    total = next(z for z in csv.DictReader(open(tmp_path / "o" / "zones.csv", newline="")) if z["layer"] == "total")
    assert total["carbon_fre_peat_t"] == "" and total["carbon_frp_only_t"] != ""
