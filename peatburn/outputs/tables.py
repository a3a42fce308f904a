"""Result tables: zones.csv rows, the run totals and the inventory rows.

Gas masses follow IPCC 2006 Vol. 4 Ch. 2 Eq. 2.27 in the form mass of gas = dry matter burned x
emission factor (applied to sums of dry mass: the factors are constants of a set, so applying them
to the sum equals summing per pixel). CO2-equivalent uses the chosen GWP-100 set.
"""

from __future__ import annotations

import math

import numpy as np

from ..factors import gas_label
from ..names import OUTSIDE, TOTAL_LAYER, TOTAL_ZONE  # noqa: F401  (reserved labels, see peatburn.names)
from ..science import gases

GASES = ("co2", "ch4", "co")
PHASES = ("smouldering", "flaming")
METHODS = ("survey", "water_table", "tier1")

ZONE_COLUMNS = [
    "layer", "zone", "burned_area_ha", "estimated_area_ha", "unestimated_area_ha", "below_lod_area_ha",
    "mineral_soil_area_ha",
    "mean_burn_depth_m", "peat_burned_t", "carbon_smouldering_t",
    "co2_smouldering_t", "ch4_smouldering_t", "co_smouldering_t",
    "carbon_flaming_t", "co2_flaming_t", "ch4_flaming_t", "co_flaming_t",
    "co2e_smouldering_t", "co2e_flaming_t",
    "area_survey_ha", "area_water_table_ha", "area_tier1_ha",
    "carbon_share_survey", "carbon_share_water_table", "carbon_share_tier1",
    "carbon_tier1_t", "co2_tier1_t", "ch4_tier1_t", "co_tier1_t", "co2e_tier1_t",
    "fre_mj", "n_detections", "carbon_frp_only_t", "smouldering_to_frp_ratio",
]

#: Columns that get _lo and _hi when Monte Carlo draws are made.
INTERVAL_COLUMNS = [
    "peat_burned_t", "carbon_smouldering_t", "co2_smouldering_t", "ch4_smouldering_t", "co_smouldering_t",
    "co2e_smouldering_t", "carbon_flaming_t", "co2_flaming_t", "ch4_flaming_t", "co_flaming_t", "co2e_flaming_t",
]


HA_PER_M2 = 1e-4  # exact
T_PER_KG = 1e-3  # exact


def quantities(sums: dict, factors, flame: dict | None = None) -> dict:
    """Zone quantities from summed areas [m2], volume [m3], masses [kg] (see pipeline.SUM_KEYS).

    ``factors`` holds the smouldering, flaming and Tier 1 factor sets, the GWP set and the
    vegetation carbon fraction; ``flame`` the flaming sums of the zone (dry matter [kg], FRE [MJ],
    detections) or None. The sums may be scalars (one zone) or arrays (many zones at once); the
    quantities have the same shape.
    """
    ha, t = HA_PER_M2, T_PER_KG
    s = {k: np.asarray(v, dtype="float64") for k, v in sums.items()}
    depth_area = s["depth_area_m2"]
    peat_kg = s["peat_kg"]
    carbon = s["carbon_kg"]
    with np.errstate(invalid="ignore", divide="ignore"):
        out = {
            "burned_area_ha": s["burned_area_m2"] * ha,
            "estimated_area_ha": s["estimated_area_m2"] * ha,
            "unestimated_area_ha": s["unestimated_area_m2"] * ha,
            "below_lod_area_ha": s["below_lod_area_m2"] * ha,
            # burned mineral soil (thickness 0 or outside the peat extent): no below-ground emission
            "mineral_soil_area_ha": s["mineral_area_m2"] * ha if "mineral_area_m2" in s else np.zeros_like(peat_kg),
            "mean_burn_depth_m": np.where(depth_area > 0, s["volume_m3"] / depth_area, np.nan),
            "peat_burned_t": peat_kg * t,
            "carbon_smouldering_t": carbon * t,
        }
        sm = {g: gases.gas_emissions(peat_kg, factors.smouldering.ef[g]) * t for g in GASES}
        for g in GASES:
            out[f"{g}_smouldering_t"] = sm[g]
        out["co2e_smouldering_t"] = gases.co2_equivalent(sm, factors.gwp.gwp)
        for m in METHODS:
            out[f"area_{m}_ha"] = s[f"area_m2_{m}"] * ha
            out[f"carbon_share_{m}"] = np.where(carbon != 0, s[f"carbon_kg_{m}"] / carbon, np.nan)
        t1_dm = s["tier1_all_peat_kg"]
        out["carbon_tier1_t"] = s["tier1_all_carbon_kg"] * t
        t1 = {g: gases.gas_emissions(t1_dm, factors.tier1.ef[g]) * t for g in GASES}
        for g in GASES:
            out[f"{g}_tier1_t"] = t1[g]
        out["co2e_tier1_t"] = gases.co2_equivalent(t1, factors.gwp.gwp)
        # flaming, apart
        dm = np.asarray(flame["dry_matter_kg"], dtype="float64") if flame else np.zeros_like(peat_kg)
        fl = {g: gases.gas_emissions(dm, factors.flaming.ef[g]) * t for g in GASES}
        out["carbon_flaming_t"] = dm * factors.vegetation_carbon_fraction * t
        for g in GASES:
            out[f"{g}_flaming_t"] = fl[g]
        out["co2e_flaming_t"] = gases.co2_equivalent(fl, factors.gwp.gwp)
        has_fre = flame is not None and factors.frp_route
        nan = np.full(np.shape(peat_kg), np.nan)
        if has_fre:
            from ..science import flaming

            fre = np.asarray(flame["fre_mj"], dtype="float64")
            frp_c = flaming.frp_only_carbon(fre, factors.coefficient, factors.vegetation_carbon_fraction) * t
            out["fre_mj"] = fre
            out["n_detections"] = np.asarray(flame["n_detections"], dtype="float64")
            out["carbon_frp_only_t"] = frp_c
            out["smouldering_to_frp_ratio"] = np.where(frp_c > 0, out["carbon_smouldering_t"] / frp_c, np.nan)
        else:
            out["fre_mj"] = out["n_detections"] = out["carbon_frp_only_t"] = out["smouldering_to_frp_ratio"] = nan
    return out


def _rows(layer: str, zones: list[str], q: dict) -> list[dict]:
    """Rows (dicts of Python floats) from quantities of ``len(zones)`` zones."""
    cols = {k: np.broadcast_to(v, (len(zones),)).tolist() for k, v in q.items()}
    return [{"layer": layer, "zone": z, **{k: c[i] for k, c in cols.items()}} for i, z in enumerate(zones)]


def zone_rows(result_sums, factors, flame_sums=None) -> list[dict]:
    """One row per zone of each layer, one "outside" row per layer, then the run total."""
    from ..engine.pipeline import SCAR_LAYER

    rows = []
    for li, (name, ids, acc) in enumerate(result_sums.layers):
        if name == SCAR_LAYER:
            continue
        fl = flame_sums.layers[li][1] if flame_sums else None
        sel = slice(1, len(ids) + 2)  # the zones (bins 1..n), then the outside bin n + 1
        q = quantities({key: v[sel] for key, v in acc.items()}, factors,
                       {key: np.asarray(v)[sel] for key, v in fl.items()} if fl else None)
        rows += _rows(name, [*ids, OUTSIDE], q)
    q = quantities(result_sums.total, factors, flame_sums.total if flame_sums else None)
    rows += _rows(TOTAL_LAYER, [TOTAL_ZONE], {k: np.reshape(v, (1,)) for k, v in q.items()})
    return rows


UNITS = {
    "burned_area_ha": "ha", "estimated_area_ha": "ha", "unestimated_area_ha": "ha", "below_lod_area_ha": "ha",
    "mineral_soil_area_ha": "ha",
    "mean_burn_depth_m": "m", "peat_burned_t": "t dry matter", "carbon_smouldering_t": "t C",
    "carbon_flaming_t": "t C", "co2e_smouldering_t": "t CO2e", "co2e_flaming_t": "t CO2e",
    "area_survey_ha": "ha", "area_water_table_ha": "ha", "area_tier1_ha": "ha",
    "carbon_share_survey": "1", "carbon_share_water_table": "1", "carbon_share_tier1": "1",
    "carbon_tier1_t": "t C", "co2e_tier1_t": "t CO2e", "fre_mj": "MJ", "n_detections": "1",
    "carbon_frp_only_t": "t C", "smouldering_to_frp_ratio": "1",
}
for _g in GASES:
    for _p in PHASES + ("tier1",):
        UNITS[f"{_g}_{_p}_t"] = f"t {gas_label(_g)}"
for _c in INTERVAL_COLUMNS:
    UNITS[f"{_c}_lo"] = UNITS[_c]
    UNITS[f"{_c}_hi"] = UNITS[_c]


def inventory_rows(total: dict, year_shares: dict, gwp_name: str) -> list[dict]:
    """Emissions by year, phase and gas in Gg (1 Gg = 1000 t), the lines an inventory adds.

    ``year_shares`` maps phase -> {year: share of the phase's run total}; from the scars' fire dates
    (smouldering) and the detection times (flaming), or all in ``[run] year``. CO2 is also given as
    CO2-C (x 12.011/44.009) and the CO2e line names its GWP set. ``_lo`` and ``_hi`` are the run
    interval scaled by the year's share (the years of one run share their uncertain parameters).
    """
    rows = []
    for phase in PHASES:
        for yr, share in sorted(year_shares[phase].items(), key=lambda kv: str(kv[0])):
            for g in GASES:
                rows.append(_inv(yr, phase, gas_label(g), total, f"{g}_{phase}_t", share))
            rows.append(_inv(yr, phase, "CO2-C", total, f"co2_{phase}_t", share * float(gases.co2_to_carbon(1.0))))
            rows.append(_inv(yr, phase, f"CO2e ({gwp_name})", total, f"co2e_{phase}_t", share))
    return rows


def _inv(year, phase, gas, total, key, scale):
    row = {"year": "" if year is None else year, "phase": phase, "gas": gas,
           "emissions_gg": total[key] * scale * 1e-3}
    for s in ("lo", "hi"):
        v = total.get(f"{key}_{s}")
        row[f"emissions_gg_{s}"] = v * scale * 1e-3 if v is not None else math.nan
    return row


INVENTORY_COLUMNS = ["year", "phase", "gas", "emissions_gg", "emissions_gg_lo", "emissions_gg_hi"]
