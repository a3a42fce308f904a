"""IPCC Tier 1 for fires on tropical organic soil: default fuel consumption times burned area.

The 2013 Wetlands Supplement (IPCC 2014) estimates emissions from organic-soil fires with the
equation of the 2006 Guidelines applied to the soil:

    L_fire = A x M_B x C_f x G_ef x 10^-3

(2013 Wetlands Supplement, Ch. 2, Eq. 2.8: equation number recalled, unchecked; the same form as
IPCC 2006 Vol. 4 Ch. 2 Eq. 2.27, checked against the 2006 AFOLU worksheets, see docs/sources.md),
with ``A`` the burned area [ha], ``M_B x C_f`` the fuel consumed [t dry matter / ha] (the
Supplement tabulates the product, so ``C_f = 1`` when its default is used), ``G_ef`` the
emission factor [g / kg dry matter] and ``L_fire`` the emission [t]. The factor 10^-3 turns
t x g/kg into t: 1 t dry matter x 1 g/kg = 1000 g = 10^-3 t.

peatburn uses Tier 1 where neither a survey nor a water-table model gives a burn depth, and
reports it beside the other methods everywhere, so a reader sees how far a measured depth departs
from the default.

All values below are **recalled, unchecked**: the Supplement's tables could not be consulted
while writing this module. Check them before relying on the numbers.

References
----------
IPCC (2014). 2013 Supplement to the 2006 IPCC Guidelines for National Greenhouse Gas Inventories:
Wetlands. Hiraishi, T., Krug, T., Tanabe, K., Srivastava, N., Baasansuren, J., Fukuda, M. &
Troxler, T. G. (eds). IPCC, Switzerland. Chapter 2, Drained Inland Organic Soils: Eq. 2.8,
Table 2.6 (fuel consumption), Table 2.7 (emission factors). (Editors, equation and table numbers
recalled, unchecked.)
IPCC (2006). 2006 IPCC Guidelines for National Greenhouse Gas Inventories, Vol. 4, Ch. 2,
Eq. 2.27.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np

from ..errors import PhysicalRangeError

__all__ = [
    "WETLANDS_2013_FUEL_CONSUMPTION_T_HA",
    "WETLANDS_2013_EF_G_KG",
    "DEFAULT_FUEL_CONSUMPTION_T_HA",
    "tier1_fuel_consumed",
    "tier1_emissions",
    "tier1_equivalent_depth",
    "TIER1_FUEL_RELATIVE_SD",
]

#: Default fuel consumption (M_B x C_f) of organic-soil fires [t dry matter / ha], IPCC 2013
#: Wetlands Supplement Ch. 2 Table 2.6. Only the tropical wildfire row is given: the table's other
#: categories (boreal and temperate fires, prescribed fires) could not be recalled with confidence
#: and are left out rather than guessed.
WETLANDS_2013_FUEL_CONSUMPTION_T_HA = {
    "tropical_wildfire": {
        "value": 353.0,
        "unit": "t d.m./ha",
        "row": "IPCC 2013 Wetlands Supplement, Ch. 2, Table 2.6, tropical organic soil, wildfire",
        "status": "recalled, unchecked",
    },
}

#: Stated uncertainty of the tropical wildfire default of Table 2.6: 353 +/- 170 t d.m./ha
#: (**recalled, unchecked**, like the value itself; whether the +/- is a 95 % interval or one
#: standard deviation could not be checked). peatburn reads it as the half-width of a 95 % interval,
#: the IPCC's usual convention for default uncertainties (IPCC 2006 Vol. 1 Ch. 3, section 3.1.5:
#: recalled), so the relative standard deviation is 170 / 1.96 / 353 = 0.246
#: (:data:`TIER1_FUEL_RELATIVE_SD`). Reading it as one sd would give 0.48: the run states which.
WETLANDS_2013_FUEL_CONSUMPTION_T_HA["tropical_wildfire"]["half_width_95"] = 170.0

#: Relative standard deviation of the Tier 1 fuel consumption [-]: the half-width of the
#: recalled 95 % interval / 1.96 / the default (see above; recalled, unchecked).
TIER1_FUEL_RELATIVE_SD = 170.0 / 1.96 / 353.0

#: The default used by :func:`tier1_fuel_consumed` [t d.m./ha] (tropical wildfire, recalled).
DEFAULT_FUEL_CONSUMPTION_T_HA = WETLANDS_2013_FUEL_CONSUMPTION_T_HA["tropical_wildfire"]["value"]

#: Emission factors for tropical organic-soil fires [g / kg dry matter burned], IPCC 2013
#: Wetlands Supplement Ch. 2 Table 2.7 (recalled, unchecked). ``co2_c`` is CO2 given as grams of
#: carbon, as the Supplement gives it (464 g C/kg = 1700.1 g CO2/kg with 44.009/12.011). The same
#: numbers ship as the factor set ``smouldering_ipcc2013_wetlands``
#: (``peatburn/factors/smouldering_ipcc2013_wetlands.csv``), whose loader converts ``co2_c`` to
#: ``co2``; a test keeps the two in agreement. They are repeated here so this module stays free of
#: file reading.
WETLANDS_2013_EF_G_KG = {
    "co2_c": 464.0,
    "co": 210.0,
    "ch4": 21.0,
}
#: Status of :data:`WETLANDS_2013_EF_G_KG`.
WETLANDS_2013_EF_STATUS = "recalled, unchecked (IPCC 2013 Wetlands Supplement, Ch. 2, Table 2.7, tropical)"


def _array(value, name: str, unit: str) -> np.ndarray:
    try:
        arr = np.asarray(value, dtype="float64")
    except (TypeError, ValueError):
        raise PhysicalRangeError(f"{name}: expected a number or an array of numbers [{unit}], got {value!r}") from None
    if np.any(arr < 0):
        raise PhysicalRangeError(f"{name} must not be negative [{unit}]; "
                                 f"the smallest value given is {np.nanmin(arr):g}")
    return arr


def tier1_fuel_consumed(area_ha, fuel_consumption_t_ha=DEFAULT_FUEL_CONSUMPTION_T_HA, combustion_factor=1.0):
    """Dry matter burned by organic-soil fires at Tier 1: ``A x M_B x C_f``.

    Parameters
    ----------
    area_ha : float or array_like
        Burned area of organic soil [ha].
    fuel_consumption_t_ha : float or array_like
        Fuel available or consumed [t dry matter / ha]; default 353, the tropical wildfire value
        of the 2013 Wetlands Supplement Ch. 2 Table 2.6 (recalled, unchecked), which is already
        ``M_B x C_f``.
    combustion_factor : float or array_like
        ``C_f`` [-], in [0, 1]; 1 with the Table 2.6 default (the table gives the product).

    Returns
    -------
    numpy.ndarray or numpy.float64
        Dry matter burned [t].

    Raises
    ------
    PhysicalRangeError
        A negative area or fuel consumption, or a combustion factor outside [0, 1].

    References
    ----------
    IPCC 2013 Wetlands Supplement, Ch. 2, Eq. 2.8 and Table 2.6 (numbers recalled, unchecked);
    IPCC 2006 Vol. 4 Ch. 2 Eq. 2.27.
    """
    a = _array(area_ha, "area_ha", "ha")
    fc = _array(fuel_consumption_t_ha, "fuel_consumption_t_ha", "t/ha")
    cf = _array(combustion_factor, "combustion_factor", "-")
    if np.any(cf > 1):
        raise PhysicalRangeError(f"combustion_factor must be at most 1; got {np.nanmax(cf):g}")
    return a * fc * cf


def tier1_emissions(area_ha, ef_g_per_kg: Mapping, fuel_consumption_t_ha=DEFAULT_FUEL_CONSUMPTION_T_HA,
                    combustion_factor=1.0) -> dict:
    """Gas emitted by organic-soil fires at Tier 1: ``L = A x M_B x C_f x G_ef x 10^-3`` per gas.

    Parameters
    ----------
    area_ha : float or array_like
        Burned area of organic soil [ha].
    ef_g_per_kg : mapping of str to float
        Emission factor per gas [g / kg dry matter], e.g. :data:`WETLANDS_2013_EF_G_KG` or
        ``load_factor_set("smouldering_ipcc2013_wetlands").ef``. Keys are passed through: a
        ``co2_c`` factor gives tonnes of carbon, a ``co2`` factor tonnes of CO2.
    fuel_consumption_t_ha, combustion_factor
        As in :func:`tier1_fuel_consumed`.

    Returns
    -------
    dict of str to numpy.ndarray
        Emission per gas [t] (same keys as ``ef_g_per_kg``).

    Raises
    ------
    PhysicalRangeError
        A negative area, fuel consumption or emission factor.

    References
    ----------
    IPCC 2013 Wetlands Supplement, Ch. 2, Eq. 2.8, Tables 2.6 and 2.7 (recalled, unchecked);
    IPCC 2006 Vol. 4 Ch. 2 Eq. 2.27.
    """
    dm_t = tier1_fuel_consumed(area_ha, fuel_consumption_t_ha, combustion_factor)
    out = {}
    for gas, ef in ef_g_per_kg.items():
        g = _array(ef, f"ef_g_per_kg[{gas!r}]", "g/kg")
        out[gas] = dm_t * g * 1e-3
    return out


def tier1_equivalent_depth(fuel_consumption_t_ha=DEFAULT_FUEL_CONSUMPTION_T_HA, bulk_density_g_cm3=0.1):
    """Burn depth that would consume the Tier 1 fuel at a given dry bulk density.

    ``d = FC / rho_b``: FC [t/ha] x 0.1 = kg/m² (1 t/ha = 1000 kg / 10 000 m²), rho_b [g/cm³] x 1000
    = kg/m³, so ``d [m] = FC x 0.1 / (rho_b x 1000)``. With 353 t/ha and 0.1 g/cm³: 0.353 m. Used to
    set the Tier 1 default beside a measured or modelled depth.

    Parameters
    ----------
    fuel_consumption_t_ha : float or array_like
        Fuel consumed [t dry matter / ha].
    bulk_density_g_cm3 : float or array_like
        Dry bulk density [g/cm³] (> 0).

    Returns
    -------
    numpy.ndarray or numpy.float64
        Equivalent burn depth [m].
    """
    fc = _array(fuel_consumption_t_ha, "fuel_consumption_t_ha", "t/ha")
    rho = _array(bulk_density_g_cm3, "bulk_density_g_cm3", "g/cm^3")
    if np.any(rho == 0):
        raise PhysicalRangeError("bulk_density_g_cm3 must be greater than 0")
    return fc * 0.1 / (rho * 1000.0)
