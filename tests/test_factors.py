"""Tests of the emission-factor and GWP loader (peatburn.factors).

Published values are written in the tests with their source; "checked" means compared with the
publication, "recalled" means the value in the shipped file is as written from memory (docs/sources.md) and is
still to be compared with the publication (the test then only guards the file against edits).
"""

from __future__ import annotations

import csv
import math
from pathlib import Path

import pytest

from peatburn.errors import FactorSetError, MissingInputError, PeatburnError
from peatburn.factors import (
    DEFAULT_FLAMING,
    DEFAULT_GWP,
    DEFAULT_SMOULDERING,
    FactorSet,
    GWPSet,
    list_factor_sets,
    list_gwp_sets,
    load_factor_set,
    load_gwp_set,
)

BUILTIN = [s.name for s in list_factor_sets()]


# --------------------------------------------------------------------------- built-in sets


def test_shipped_sets_present():
    smoulder = {s.name for s in list_factor_sets("smouldering")}
    flaming = {s.name for s in list_factor_sets("flaming")}
    assert len(smoulder) >= 3 and len(flaming) >= 1
    assert smoulder.isdisjoint(flaming)
    assert {"smouldering_akagi2011", "smouldering_sumatra_shipboard2017", "smouldering_ipcc2013_wetlands"} <= smoulder
    assert "flaming_ipcc2006_tropical_forest" in flaming


@pytest.mark.parametrize("name", BUILTIN)
def test_every_builtin_set_is_complete(name):
    fs = load_factor_set(name)
    assert isinstance(fs, FactorSet)
    assert fs.name == name and fs.source_path is None
    assert fs.phase in ("smouldering", "flaming")
    assert {"co2", "co", "ch4"} <= set(fs.ef)
    assert len(fs.citation) > 20
    assert set(fs.sd) == set(fs.ef) == set(fs.status) == set(fs.citations)
    for gas in fs.ef:
        assert fs.ef[gas] >= 0 and math.isfinite(fs.ef[gas])
        assert math.isnan(fs.sd[gas]) or fs.sd[gas] >= 0
        assert fs.status[gas] in ("checked", "recalled")
        assert fs.citations[gas]


def test_defaults_load_with_their_phase():
    assert load_factor_set(DEFAULT_SMOULDERING, phase="smouldering").phase == "smouldering"
    assert load_factor_set(DEFAULT_FLAMING, phase="flaming").phase == "flaming"
    assert load_gwp_set(DEFAULT_GWP).name == "AR6"


def test_shipboard_set_matches_the_paper():
    # Tellus B 69:1399047 (2017), abstract (checked): 1663 +/- 54, 205 +/- 23, 7.6 +/- 1.6 g/kg
    fs = load_factor_set("smouldering_sumatra_shipboard2017")
    assert fs.ef == {"co2": 1663.0, "co": 205.0, "ch4": 7.6}
    assert fs.sd == {"co2": 54.0, "co": 23.0, "ch4": 1.6}
    assert set(fs.status.values()) == {"checked"}
    assert fs.doi == "10.1080/16000889.2017.1399047"


def test_akagi_set_matches_design_values():
    # Akagi et al. 2011 Table 1 peatland (recalled, unchecked): CO2 1703, CO 210, CH4 20.8 g/kg
    fs = load_factor_set("smouldering_akagi2011")
    assert fs.ef == {"co2": 1703.0, "co": 210.0, "ch4": 20.8}
    assert set(fs.status.values()) == {"recalled"}
    assert fs.doi == "10.5194/acp-11-4039-2011"


def test_ipcc2013_set_converts_co2_c_to_co2():
    # Wetlands Supplement Table 2.7 tropical (recalled): CO2-C 464 -> 464 x 44.009 / 12.011 = 1700.1229
    fs = load_factor_set("smouldering_ipcc2013_wetlands")
    assert fs.ef["co2"] == pytest.approx(1700.1229, abs=1e-4)
    assert fs.ef["co"] == 210.0 and fs.ef["ch4"] == 21.0
    assert "co2_c" not in fs.ef
    assert "44.009/12.011" in fs.notes and "44.009/12.011" in fs.citations["co2"]
    assert all(math.isnan(v) for v in fs.sd.values())


def test_flaming_set_matches_design_values():
    # IPCC 2006 Vol. 4 Ch. 2 Table 2.5 tropical forest (recalled): 1580, 104, 6.8, 0.20, 1.6 g/kg
    fs = load_factor_set("flaming_ipcc2006_tropical_forest")
    assert fs.ef == {"co2": 1580.0, "co": 104.0, "ch4": 6.8, "n2o": 0.20, "nox": 1.6}
    assert math.isnan(fs.sd["n2o"])


# --------------------------------------------------------------------------- GWP sets


def test_gwp_sets_match_ipcc_tables():
    sets = {s.name: s for s in list_gwp_sets()}
    assert all(isinstance(s, GWPSet) for s in sets.values())
    # AR5 WG1 Table 8.7: CH4 28, N2O 265; with climate-carbon feedbacks CH4 34, N2O 298
    assert sets["AR5"].gwp == {"co2": 1.0, "ch4": 28.0, "n2o": 265.0}
    assert sets["AR5-CCF"].gwp == {"co2": 1.0, "ch4": 34.0, "n2o": 298.0}
    # AR6 WG1 Table 7.15: CH4-non fossil 27.0, CH4-fossil 29.8, N2O 273
    assert sets["AR6"].gwp == {"co2": 1.0, "ch4": 27.0, "n2o": 273.0}
    assert sets["AR6-fossil"].gwp["ch4"] == 29.8
    for s in sets.values():
        assert "co" not in s.gwp  # no IPCC GWP for CO in these tables; never invented
        assert s.status in ("checked", "recalled") and s.citation


def test_gwp_lookup_case_insensitive_and_unknown():
    assert load_gwp_set("ar6").gwp["ch4"] == 27.0
    with pytest.raises(FactorSetError) as info:
        load_gwp_set("AR4")
    assert "AR5" in str(info.value) and "AR6" in str(info.value)


# --------------------------------------------------------------------------- errors


def test_unknown_name_lists_known_sets():
    with pytest.raises(FactorSetError) as info:
        load_factor_set("peat_akagi")
    msg = str(info.value)
    assert "peat_akagi" in msg
    for name in BUILTIN:
        assert name in msg
    assert isinstance(info.value, ValueError) and isinstance(info.value, PeatburnError)


def test_phase_mismatch_refused():
    with pytest.raises(FactorSetError, match="flaming"):
        load_factor_set("smouldering_akagi2011", phase="flaming")
    with pytest.raises(FactorSetError):
        list_factor_sets("burning")


def test_missing_user_file(tmp_path):
    with pytest.raises(MissingInputError) as info:
        load_factor_set(str(tmp_path / "absent.csv"))
    assert "absent.csv" in str(info.value)
    assert isinstance(info.value, FileNotFoundError)


def _write(tmp_path: Path, text: str, name: str = "mine.csv") -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


@pytest.mark.parametrize(
    "body, line, column",
    [
        # header is line 2 (after one comment line); the bad row is line 4
        ("gas,ef_g_per_kg,sd_g_per_kg\nco2,1600,\nco,abc,\n", 4, "ef_g_per_kg"),
        ("gas,ef_g_per_kg,sd_g_per_kg\nco2,1600,\nco,-3,\n", 4, "ef_g_per_kg"),
        ("gas,ef_g_per_kg,sd_g_per_kg\nco2,1600,\nco,200,lots\n", 4, "sd_g_per_kg"),
        ("gas,ef_g_per_kg,sd_g_per_kg\nco2,1600,\nco2,200,\n", 4, "gas"),
        ("gas,ef_g_per_kg,sd_g_per_kg\nco2,1600,\nCarbon Monoxide,200,\n", 4, "gas"),
        ("gas,ef_g_per_kg,status\nco2,1600,checked\nco,200,guessed\n", 4, "status"),
        ("gas,ef_g_per_kg,sd_g_per_kg\nco2,1600,\nco,200\n", 4, None),
        ("gas,ef_g_kg\nco2,1600\n", 2, "ef_g_kg"),
        ("gas,sd_g_per_kg\nco2,16\n", 2, "ef_g_per_kg"),
        ("gas,ef_g_per_kg,sd_g_per_kg\nco2,,\n", 3, "ef_g_per_kg"),
    ],
)
def test_malformed_user_csv_names_file_line_and_column(tmp_path, body, line, column):
    path = _write(tmp_path, "# phase: smouldering\n" + body)
    with pytest.raises(FactorSetError) as info:
        load_factor_set(str(path))
    msg = str(info.value)
    assert "mine.csv" in msg
    assert f"line {line}" in msg
    if column is not None:
        assert column in msg


def test_empty_and_headerless_files(tmp_path):
    with pytest.raises(FactorSetError, match="header"):
        load_factor_set(str(_write(tmp_path, "# only comments\n")))
    with pytest.raises(FactorSetError, match="no emission-factor rows"):
        load_factor_set(str(_write(tmp_path, "gas,ef_g_per_kg\n")))
    with pytest.raises(FactorSetError, match="phase"):
        load_factor_set(str(_write(tmp_path, "# phase: glowing\ngas,ef_g_per_kg\nco2,1\n")))


# --------------------------------------------------------------------------- user CSV round trip


def test_user_csv_round_trip(tmp_path):
    ship = load_factor_set("smouldering_sumatra_shipboard2017")
    path = tmp_path / "my_set.csv"
    with path.open("w", newline="", encoding="utf-8") as fh:
        fh.write("# phase: smouldering\n# citation: A field campaign, Table 3, \"peat\" column\n# doi: 10.0000/example\n")
        writer = csv.writer(fh)
        writer.writerow(["gas", "ef_g_per_kg", "sd_g_per_kg", "citation", "status"])
        for gas in ship.ef:
            writer.writerow([gas, ship.ef[gas], ship.sd[gas], "campaign, Table 3, peat, mean and SD", "checked"])
        writer.writerow(["n2o", 0.3, "", "campaign, Table 3", ""])
    fs = load_factor_set(path, phase="smouldering")  # a pathlib.Path works too
    assert fs.name == "my_set" and fs.phase == "smouldering"
    assert fs.source_path == str(path.resolve())
    assert fs.citation == 'A field campaign, Table 3, "peat" column' and fs.doi == "10.0000/example"
    for gas in ship.ef:
        assert fs.ef[gas] == ship.ef[gas] and fs.sd[gas] == ship.sd[gas] and fs.status[gas] == "checked"
    assert fs.ef["n2o"] == 0.3 and math.isnan(fs.sd["n2o"]) and fs.status["n2o"] == "user-supplied"
    # the same file asked for as a flaming set is refused
    with pytest.raises(FactorSetError, match="smouldering"):
        load_factor_set(str(path), phase="flaming")


def test_minimal_user_csv_takes_phase_from_argument_and_converts_co2_c(tmp_path):
    path = _write(tmp_path, "gas,ef_g_per_kg\nco2_c,12.011\nCO,100\n", name="minimal.csv")
    fs = load_factor_set(str(path), phase="flaming")
    assert fs.phase == "flaming" and fs.name == "minimal"
    # 12.011 g C/kg x 44.009/12.011 = 44.009 g CO2/kg
    assert fs.ef["co2"] == pytest.approx(44.009, abs=1e-9)
    assert fs.ef["co"] == 100.0 and fs.status["co"] == "user-supplied"
    assert "minimal.csv" in fs.citation
    assert load_factor_set(str(path)).phase == "unspecified"


def test_unfccc_preset_is_ar5():
    # IPCC AR5 WG1 Table 8.7, GWP-100 without climate-carbon feedbacks: CH4 28, N2O 265
    from peatburn.factors import load_gwp_set as _load

    s = _load("UNFCCC")
    assert s.name == "AR5" and s.gwp["ch4"] == 28 and s.gwp["n2o"] == 265


def test_require_gases_names_the_file_and_the_gas(tmp_path):
    from peatburn.factors import load_factor_set as _load
    from peatburn.factors import require_gases

    p = tmp_path / "mine.csv"
    p.write_text("gas,ef_g_per_kg\nco,200\nch4,10\n")
    with pytest.raises(FactorSetError, match=r"mine\.csv: the flaming set has no row for co2"):
        require_gases(_load(p, "flaming"), "flaming")
    ok = _load("smouldering_akagi2011")
    assert require_gases(ok, "smouldering") is ok
