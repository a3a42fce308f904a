"""Tests of peatburn.science.tier1: the IPCC Tier 1 equation for fires on tropical organic soil.

The equation is L = A x M_B x C_f x G_ef x 10^-3 (IPCC 2006 Vol. 4 Ch. 2 Eq. 2.27, checked against
the 2006 AFOLU worksheets; applied to organic soils as Eq. 2.8 of the 2013 Wetlands Supplement
Ch. 2, equation number recalled, unchecked). Expected numbers are hand arithmetic written out
beside each check, or unit conversions done by pint (the project's registry, an independent
implementation of the units). The default values themselves (353 t/ha; 464, 210, 21 g/kg) are
recalled, unchecked: these tests check the arithmetic and the agreement with the shipped factor
set, not the publication.
"""

from __future__ import annotations

import numpy as np
import pytest

from peatburn.errors import PeatburnError, PhysicalRangeError
from peatburn.factors import load_factor_set
from peatburn.science import tier1
from peatburn.units import ureg


def test_default_values_carry_their_source_and_status():
    row = tier1.WETLANDS_2013_FUEL_CONSUMPTION_T_HA["tropical_wildfire"]
    assert row["value"] == 353.0
    assert "Table 2.6" in row["row"] and "Wetlands Supplement" in row["row"]
    assert row["status"] == "recalled, unchecked"
    assert tier1.DEFAULT_FUEL_CONSUMPTION_T_HA == 353.0
    assert tier1.WETLANDS_2013_EF_G_KG == {"co2_c": 464.0, "co": 210.0, "ch4": 21.0}
    assert "recalled" in tier1.WETLANDS_2013_EF_STATUS and "Table 2.7" in tier1.WETLANDS_2013_EF_STATUS


def test_emission_factors_agree_with_the_shipped_factor_set():
    # peatburn/factors/smouldering_ipcc2013_wetlands.csv holds the same Table 2.7 row; its loader turns
    # CO2-C into CO2 with 44.009 / 12.011 (IUPAC conventional atomic weights): 464 x 44.009 / 12.011.
    fs = load_factor_set("smouldering_ipcc2013_wetlands")
    assert fs.ef["co2"] == pytest.approx(464.0 * 44.009 / 12.011, rel=1e-12)
    assert fs.ef["co"] == tier1.WETLANDS_2013_EF_G_KG["co"]
    assert fs.ef["ch4"] == tier1.WETLANDS_2013_EF_G_KG["ch4"]
    assert set(fs.status.values()) == {"recalled"}


def test_fuel_consumed_hand_arithmetic():
    # A = 1000 ha, M_B x C_f = 353 t/ha (C_f = 1 with the Table 2.6 product) -> 353 000 t dry matter
    assert float(tier1.tier1_fuel_consumed(1000.0)) == pytest.approx(353_000.0, rel=1e-15)
    # with an explicit M_B = 400 t/ha and C_f = 0.5: 1000 x 400 x 0.5 = 200 000 t
    assert float(tier1.tier1_fuel_consumed(1000.0, 400.0, 0.5)) == pytest.approx(200_000.0, rel=1e-15)
    np.testing.assert_allclose(tier1.tier1_fuel_consumed(np.array([0.0, 2.5])), [0.0, 882.5])


def test_emissions_hand_arithmetic_ipcc_equation():
    # L = A x M_B x C_f x G_ef x 10^-3, A = 1000 ha, 353 t/ha:
    # CO2-C: 353 000 x 464 x 10^-3 = 163 792 t C
    # CO:    353 000 x 210 x 10^-3 =  74 130 t
    # CH4:   353 000 x  21 x 10^-3 =   7 413 t
    got = tier1.tier1_emissions(1000.0, tier1.WETLANDS_2013_EF_G_KG)
    assert float(got["co2_c"]) == pytest.approx(163_792.0, rel=1e-12)
    assert float(got["co"]) == pytest.approx(74_130.0, rel=1e-12)
    assert float(got["ch4"]) == pytest.approx(7_413.0, rel=1e-12)


def test_emissions_with_the_loaded_set_give_co2_as_co2():
    # 353 000 t x (464 x 44.009 / 12.011) g/kg x 10^-3 = 163 792 x 44.009 / 12.011 t CO2
    fs = load_factor_set("smouldering_ipcc2013_wetlands")
    got = tier1.tier1_emissions(1000.0, fs.ef)
    assert float(got["co2"]) == pytest.approx(163_792.0 * 44.009 / 12.011, rel=1e-12)


def test_the_ten_to_the_minus_three_factor_by_pint():
    # 1 ha x 1 t/ha x 1 (C_f) x 1 g/kg = 1 t x 1 g/kg = 1 kg = 10^-3 t (pint does the conversion)
    mass = (1 * ureg.ha * (1 * ureg.t / ureg.ha) * (1 * ureg.g / ureg.kg)).to("t").magnitude
    assert mass == pytest.approx(1e-3, rel=1e-12)
    assert float(tier1.tier1_emissions(1.0, {"x": 1.0}, 1.0)["x"]) == pytest.approx(mass, rel=1e-12)


def test_equivalent_depth_hand_arithmetic_and_pint():
    # 353 t/ha = 35.3 kg/m^2; at 0.1 g/cm^3 = 100 kg/m^3 -> 0.353 m
    assert float(tier1.tier1_equivalent_depth(353.0, 0.1)) == pytest.approx(0.353, rel=1e-12)
    ref = ((353 * ureg.t / ureg.ha) / (0.1 * ureg.g / ureg.cm**3)).to("m").magnitude
    assert float(tier1.tier1_equivalent_depth(353.0, 0.1)) == pytest.approx(ref, rel=1e-12)
    with pytest.raises(PhysicalRangeError, match="greater than 0"):
        tier1.tier1_equivalent_depth(353.0, 0.0)


def test_bad_inputs_are_refused_with_the_name():
    with pytest.raises(PhysicalRangeError, match="area_ha"):
        tier1.tier1_fuel_consumed(-1.0)
    with pytest.raises(PhysicalRangeError, match="combustion_factor"):
        tier1.tier1_fuel_consumed(1.0, 353.0, 1.5)
    with pytest.raises(PhysicalRangeError, match="'co'"):
        tier1.tier1_emissions(1.0, {"co": -210.0})
    with pytest.raises(PhysicalRangeError, match="fuel_consumption_t_ha"):
        tier1.tier1_fuel_consumed(1.0, "a lot")
    assert issubclass(PhysicalRangeError, PeatburnError)


def test_tier1_relative_sd_from_the_recalled_interval():
    """IPCC 2013 Wetlands Supplement Table 2.6, tropical wildfire 353 +/- 170 t d.m./ha (recalled,
    unchecked) read as a 95 % half-width: sd = 170 / 1.96 (hand arithmetic: 86.73 t/ha, 0.2457)."""
    row = tier1.WETLANDS_2013_FUEL_CONSUMPTION_T_HA["tropical_wildfire"]
    assert row["half_width_95"] == 170.0 and "recalled" in row["status"]
    assert tier1.TIER1_FUEL_RELATIVE_SD == pytest.approx(0.2457, abs=1e-4)
