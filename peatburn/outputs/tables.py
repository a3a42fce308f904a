"""Result tables: zones.csv rows, the run totals and the inventory rows.

Gas masses follow IPCC 2006 Vol. 4 Ch. 2 Eq. 2.27 in the form mass of gas = dry matter burned x
emission factor (applied to sums of dry peat mass: the factors are constants of the set, so
applying them to the sum equals summing per pixel). CO2-equivalent uses the chosen GWP-100 set.
"""

from __future__ import annotations

import numpy as np

from ..science import gases

GASES = ("co2", "ch4", "co")
PHASES = ("smouldering", "flaming")

ZONE_COLUMNS = [
    "layer", "zone", "burned_area_ha", "estimated_area_ha", "unestimated_area_ha", "below_lod_area_ha",
    "mean_burn_depth_m", "peat_burned_t", "carbon_smouldering_t",
    "co2_smouldering_t", "ch4_smouldering_t", "co_smouldering_t",
    "carbon_flaming_t", "co2_flaming_t", "ch4_flaming_t", "co_flaming_t",
    "co2e_smouldering_t", "co2e_flaming_t",
]

OUTSIDE = "(outside every zone)"
TOTAL_LAYER, TOTAL_ZONE = "total", "all"


def quantities(sums: dict, smouldering, gwp) -> dict:
    """Zone quantities from summed areas [m2], volume [m3], masses [kg].

    Returns a dict of the zones.csv numeric columns (areas in ha, masses in t). Flaming columns are
    zero: flaming emissions are not estimated by this version.
    """
    ha = 1e-4  # ha per m2 (exact)
    t = 1e-3  # t per kg (exact)
    area = sums["estimated_area_m2"]
    peat_kg = sums["peat_kg"]
    out = {
        "burned_area_ha": sums["burned_area_m2"] * ha,
        "estimated_area_ha": area * ha,
        "unestimated_area_ha": sums["unestimated_area_m2"] * ha,
        "below_lod_area_ha": sums["below_lod_area_m2"] * ha,
        "mean_burn_depth_m": sums["volume_m3"] / area if area > 0 else float("nan"),
        "peat_burned_t": peat_kg * t,
        "carbon_smouldering_t": sums["carbon_kg"] * t,
    }
    masses = {g: float(gases.gas_emissions(peat_kg, smouldering.ef[g])) * t for g in GASES}
    for g in GASES:
        out[f"{g}_smouldering_t"] = masses[g]
        out[f"{g}_flaming_t"] = 0.0
    out["carbon_flaming_t"] = 0.0
    out["co2e_smouldering_t"] = float(gases.co2_equivalent(masses, gwp.gwp))
    out["co2e_flaming_t"] = 0.0
    return out


def zone_rows(result_sums, smouldering, gwp) -> list[dict]:
    """One row per zone of each layer, one "outside" row per layer, then the run total."""
    rows = []
    for name, ids, acc in result_sums.layers:
        for k, zid in enumerate(ids, start=1):
            rows.append({"layer": name, "zone": zid,
                         **quantities({key: float(v[k]) for key, v in acc.items()}, smouldering, gwp)})
        n = len(ids) + 1
        rows.append({"layer": name, "zone": OUTSIDE,
                     **quantities({key: float(v[n]) for key, v in acc.items()}, smouldering, gwp)})
    rows.append({"layer": TOTAL_LAYER, "zone": TOTAL_ZONE, **quantities(result_sums.total, smouldering, gwp)})
    return rows


UNITS = {
    "burned_area_ha": "ha", "estimated_area_ha": "ha", "unestimated_area_ha": "ha", "below_lod_area_ha": "ha",
    "mean_burn_depth_m": "m", "peat_burned_t": "t dry matter", "carbon_smouldering_t": "t C",
    "carbon_flaming_t": "t C", "co2e_smouldering_t": "t CO2e", "co2e_flaming_t": "t CO2e",
}
for _g in GASES:
    for _p in PHASES:
        UNITS[f"{_g}_{_p}_t"] = f"t {_g.upper()}"


def inventory_rows(total: dict, year, smouldering, gwp) -> list[dict]:
    """Emissions by year, phase and gas in Gg (1 Gg = 1000 t), the line an inventory adds."""
    rows = []
    for phase in PHASES:
        for g in GASES:
            rows.append({"year": year if year is not None else "", "phase": phase, "gas": g.upper(),
                         "emissions_gg": total[f"{g}_{phase}_t"] * 1e-3})
        rows.append({"year": year if year is not None else "", "phase": phase, "gas": f"CO2e ({gwp.name})",
                     "emissions_gg": total[f"co2e_{phase}_t"] * 1e-3})
    return rows
