"""inventory.csv: the lines an inventory adds, consistent with zones.csv."""

import csv

import pytest

from peatburn.units import Q_


def test_inventory_equals_zone_totals_in_gg(scene_run):
    rows = list(csv.DictReader(open(scene_run.out_dir / "inventory.csv")))
    total = next(r for r in csv.DictReader(open(scene_run.out_dir / "zones.csv")) if r["layer"] == "total")
    gg_per_t = Q_(1, "t").to("Gg").magnitude  # pint: 1 t = 1e-3 Gg
    for phase in ("smouldering", "flaming"):
        for gas in ("CO2", "CH4", "CO"):
            got = sum(float(r["emissions_gg"]) for r in rows if r["phase"] == phase and r["gas"] == gas)
            assert got == pytest.approx(float(total[f"{gas.lower()}_{phase}_t"]) * gg_per_t, rel=1e-6)
    co2c = sum(float(r["emissions_gg"]) for r in rows if r["phase"] == "smouldering" and r["gas"] == "CO2-C")
    co2 = sum(float(r["emissions_gg"]) for r in rows if r["phase"] == "smouldering" and r["gas"] == "CO2")
    # CO2-C = CO2 x 12.011 / 44.009 (IUPAC atomic weights)
    assert co2c == pytest.approx(co2 * 12.011 / 44.009, rel=1e-9)
    assert {r["year"] for r in rows} == {"2030"}
