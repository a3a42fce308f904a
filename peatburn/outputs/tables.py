"""Result tables: zones.csv rows, the run totals and the inventory rows.

Gas masses follow IPCC 2006 Vol. 4 Ch. 2 Eq. 2.27 in the form mass of gas = dry matter burned x
emission factor (applied to sums of dry mass: the factors are constants of a set, so applying them
to the sum equals summing per pixel). CO2-equivalent uses the chosen GWP-100 set.
"""

from __future__ import annotations

import math
import re

import numpy as np

from ..depth_methods import METHODS
from ..factors import gas_label
from ..names import OUTSIDE, TOTAL_LAYER, TOTAL_ZONE  # noqa: F401  (reserved labels, see peatburn.names)
from ..science import gases
from ..science.uncertainty.sources import DEFAULT_CARBON_FRACTION

#: Gases every run reports (the Tier 1 set has all three); a factor set's other gases follow them.
GASES = ("co2", "ch4", "co")
PHASES = ("smouldering", "flaming")


def gas_key(gas: str) -> str:
    """Column stem of a gas: its lower-case name with characters other than letters, digits and
    ``_`` replaced by ``_`` (``pm2.5`` -> ``pm2_5``)."""
    return re.sub(r"[^a-z0-9_]", "_", gas.lower())


def run_gases(factors) -> tuple[str, ...]:
    """The gases of a run: :data:`GASES`, then every other gas of the smouldering, Tier 1 and
    flaming sets in the order they first appear (so a set's N2O, NOx or PM2.5 reach the tables)."""
    out = [*GASES]
    for fs in (factors.smouldering, factors.tier1, factors.flaming):
        out += [g for g in fs.ef if g not in out]
    return tuple(out)


def zone_columns(gases=GASES) -> list[str]:
    """zones.csv columns for the run's ``gases`` (see :func:`run_gases`)."""
    def per(phase):
        return [f"{gas_key(g)}_{phase}_t" for g in gases]

    return [
        "layer", "zone", "burned_area_ha", "estimated_area_ha", "unestimated_area_ha", "below_lod_area_ha",
        "mineral_soil_area_ha",
        "mean_burn_depth_m", "peat_burned_t", "carbon_smouldering_t", *per("smouldering"),
        "carbon_flaming_t", *per("flaming"),
        "co2e_smouldering_t", "co2e_flaming_t",
        *(f"area_{m}_ha" for m in METHODS), *(f"carbon_share_{m}" for m in METHODS),
        "carbon_tier1_t", *per("tier1"), "co2e_tier1_t",
        "fre_mj", "n_detections", "carbon_frp_only_t", "smouldering_to_frp_ratio",
        "carbon_fre_peat_t", "smouldering_to_fre_peat_ratio",
    ]


def interval_columns(gases=GASES) -> list[str]:
    """Columns that get _lo and _hi when Monte Carlo draws are made."""
    return ["peat_burned_t", "carbon_smouldering_t", *(f"{gas_key(g)}_smouldering_t" for g in gases),
            "co2e_smouldering_t", "carbon_flaming_t", *(f"{gas_key(g)}_flaming_t" for g in gases), "co2e_flaming_t"]


ZONE_COLUMNS = zone_columns()
#: Columns that get _lo and _hi when Monte Carlo draws are made (the gases every run reports).
INTERVAL_COLUMNS = interval_columns()


HA_PER_M2 = 1e-4  # exact
#: Smallest burned area [ha] of a zone whose below-ground / FRE-carbon ratio is given: three
#: footprints of a 1 km active-fire pixel at nadir (100 ha each; MODIS, Giglio et al. 2003,
#: recalled, unchecked). Below it the detections cannot be placed inside the zone, so the ratio is
#: left empty (the FRE and the carbon are still given).
MIN_AREA_FOR_FRE_RATIO_HA = 300.0
T_PER_KG = 1e-3  # exact
#: Carbon fraction of tropical peat where a zone burned none: the project's one default, 0.56
#: (science.uncertainty.sources.DEFAULT_CARBON_FRACTION; Hu et al. 2018, abstract, checked).
PEAT_CARBON_FRACTION = DEFAULT_CARBON_FRACTION  # Hu et al. 2018 (abstract, checked): 0.56


def quantities(sums: dict, factors, flame: dict | None = None) -> dict:
    """Zone quantities from summed areas [m2], volume [m3], masses [kg] (see engine.sums.SUM_KEYS).

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
        _phase_gases(out, "smouldering", peat_kg, carbon, factors.smouldering, factors)
        for m in METHODS:
            out[f"area_{m}_ha"] = s[f"area_m2_{m}"] * ha
            out[f"carbon_share_{m}"] = np.where(carbon != 0, s[f"carbon_kg_{m}"] / carbon, np.nan)
        t1_dm = s["tier1_all_peat_kg"]
        out["carbon_tier1_t"] = s["tier1_all_carbon_kg"] * t
        _phase_gases(out, "tier1", t1_dm, None, factors.tier1, factors)
        # flaming, apart
        dm = np.asarray(flame["dry_matter_kg"], dtype="float64") if flame else np.zeros_like(peat_kg)
        out["carbon_flaming_t"] = dm * factors.vegetation_carbon_fraction * t
        _phase_gases(out, "flaming", dm, dm * factors.vegetation_carbon_fraction, factors.flaming, factors)
        has_fre = flame is not None and factors.frp_route
        nan = np.full(np.shape(peat_kg), np.nan)
        if has_fre:
            from ..science import flaming

            fre = np.asarray(flame["fre_mj"], dtype="float64")
            frp_c = flaming.frp_only_carbon(fre, factors.coefficient, factors.vegetation_carbon_fraction) * t
            out["fre_mj"] = fre
            out["n_detections"] = np.asarray(flame["n_detections"], dtype="float64")
            out["carbon_frp_only_t"] = frp_c
            big = out["burned_area_ha"] >= MIN_AREA_FOR_FRE_RATIO_HA
            out["smouldering_to_frp_ratio"] = np.where((frp_c > 0) & big, out["carbon_smouldering_t"] / frp_c, np.nan)
        else:
            out["fre_mj"] = out["n_detections"] = out["carbon_frp_only_t"] = out["smouldering_to_frp_ratio"] = nan
        out["carbon_fre_peat_t"] = out["smouldering_to_fre_peat_ratio"] = nan
        peat_coef = getattr(factors, "peat_coefficient", None)
        if has_fre and peat_coef:
            # the user's peat conversion: FRE x C_e,peat x the zone's peat carbon fraction (sum C / sum M;
            # 0.56 where no peat burned, Hu et al. 2018, abstract, checked)
            f_c = np.where(peat_kg > 0, carbon / np.where(peat_kg > 0, peat_kg, 1.0), PEAT_CARBON_FRACTION)
            peat_c = fre * peat_coef * f_c * t
            out["carbon_fre_peat_t"] = peat_c
            out["smouldering_to_fre_peat_ratio"] = np.where((peat_c > 0) & big, out["carbon_smouldering_t"] / peat_c,
                                                            np.nan)
    return out


def form_of(factors, carbon_kg) -> str:
    """The form of a phase's gases: the run's ``factors.form``, except per dry matter where no
    carbon is given (the Tier 1 line, which is the Tier 1 convention by definition)."""
    return getattr(factors, "form", "dry_matter") if carbon_kg is not None else "dry_matter"


def phase_masses(dry_matter_kg, carbon_kg, factor_set, factors) -> dict:
    """Mass [t] of each species of ``factor_set`` for one phase, in the run's form
    (:func:`peatburn.science.gases.phase_emissions`): per dry matter (IPCC 2006 Vol. 4 Eq. 2.27) or
    from the carbon burned by the carbon mass balance."""
    kg = gases.phase_emissions(dry_matter_kg, carbon_kg, factor_set.ef, form_of(factors, carbon_kg))
    return {g: m * T_PER_KG for g, m in kg.items()}


def _phase_gases(out: dict, phase: str, dry_matter_kg, carbon_kg, factor_set, factors) -> None:
    """Gas masses [t] of one phase for every gas of the run (:func:`phase_masses`), and
    their CO2e over the gases that have a GWP-100 in the run's set. A gas of the run that this
    phase's set lacks is NaN (written empty: not estimated), not zero."""
    masses = phase_masses(dry_matter_kg, carbon_kg, factor_set, factors)
    nan = np.full(np.shape(dry_matter_kg), np.nan)
    for g in run_gases(factors):
        out[f"{gas_key(g)}_{phase}_t"] = masses.get(g, nan)
    out[f"co2e_{phase}_t"] = gases.co2_equivalent(masses, factors.gwp.gwp)


def factor_set_sensitivity(peat_kg: float, factor_sets, gwp, chosen: str, *, carbon_kg: float | None = None,
                           form: str = "dry_matter") -> list[dict]:
    """The run's smouldering gases under each factor set, side by side.

    Same dry matter burned (``peat_kg``, the run's total) or, in the ``"carbon_balance"`` form, the
    same carbon burned (``carbon_kg``), each set's emission factors (IPCC 2006 Vol. 4 Eq. 2.27 form,
    or the set's emission ratios through the carbon mass balance) and the run's GWP-100 set. Every
    gas any of the sets has gets a key (None where a set lacks it). ``co2e_vs_chosen`` is the set's
    CO2e over the chosen set's.

    Returns
    -------
    list of dict
        ``set``, ``chosen`` (bool), ``status`` (``checked`` when every row of the set was compared
        with its publication, else ``recalled`` / ``user-supplied``), ``derived_from`` (the set this
        one was rounded from, so not independent of it; None), ``{gas}_t``, ``co2e_t``,
        ``co2e_vs_chosen``.
    """
    names = list(GASES)
    for fs in factor_sets:
        names += [g for g in fs.ef if g not in names]
    rows = []
    for fs in factor_sets:
        kg = gases.phase_emissions(peat_kg, carbon_kg, fs.ef, form if carbon_kg is not None else "dry_matter")
        masses = {g: float(m) * T_PER_KG for g, m in kg.items()}
        statuses = set(fs.status.values())
        rows.append({"set": fs.name, "chosen": fs.name == chosen,
                     "status": statuses.pop() if len(statuses) == 1 else "recalled",
                     "derived_from": getattr(fs, "derived_from", None),
                     **{f"{gas_key(g)}_t": masses.get(g) for g in names},
                     "co2e_t": float(gases.co2_equivalent(masses, gwp.gwp))})
    ref = next((r["co2e_t"] for r in rows if r["chosen"]), None)
    for r in rows:
        r["co2e_vs_chosen"] = r["co2e_t"] / ref if ref else None
    return rows


def _rows(layer: str, zones: list[str], q: dict) -> list[dict]:
    """Rows (dicts of Python floats) from quantities of ``len(zones)`` zones."""
    cols = {k: np.broadcast_to(v, (len(zones),)).tolist() for k, v in q.items()}
    return [{"layer": layer, "zone": z, **{k: c[i] for k, c in cols.items()}} for i, z in enumerate(zones)]


def zone_rows(result_sums, factors, flame_sums=None) -> list[dict]:
    """One row per zone of each layer, one "outside" row per layer, then the run total."""
    from ..engine.sums import SCAR_LAYER

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


def units(gases=GASES) -> dict:
    """Unit of each zones.csv column (and of its _lo / _hi)."""
    out = dict(_BASE_UNITS)
    for g in gases:
        for p in PHASES + ("tier1",):
            out[f"{gas_key(g)}_{p}_t"] = f"t {gas_label(g)}"
    for c in interval_columns(gases):
        out[f"{c}_lo"] = out[f"{c}_hi"] = out[c]
    return out


_BASE_UNITS = {
    "burned_area_ha": "ha", "estimated_area_ha": "ha", "unestimated_area_ha": "ha", "below_lod_area_ha": "ha",
    "mineral_soil_area_ha": "ha",
    "mean_burn_depth_m": "m", "peat_burned_t": "t dry matter", "carbon_smouldering_t": "t C",
    "carbon_flaming_t": "t C", "co2e_smouldering_t": "t CO2e", "co2e_flaming_t": "t CO2e",
    **{f"area_{m}_ha": "ha" for m in METHODS}, **{f"carbon_share_{m}": "1" for m in METHODS},
    "carbon_tier1_t": "t C", "co2e_tier1_t": "t CO2e", "fre_mj": "MJ", "n_detections": "1",
    "carbon_frp_only_t": "t C", "smouldering_to_frp_ratio": "1",
    "carbon_fre_peat_t": "t C", "smouldering_to_fre_peat_ratio": "1",
}
UNITS = units()


def inventory_rows(total: dict, year_shares: dict, gwp_name: str, gases_of_run=GASES, ipcc: dict | None = None
                   ) -> list[dict]:
    """Emissions by year, phase and gas in Gg (1 Gg = 1000 t), the lines an inventory adds.

    ``year_shares`` maps phase -> {year: share of the phase's run total}; from the scars' fire dates
    (smouldering) and the detection times (flaming), or all in ``[run] year``. CO2 is also given as
    CO2-C (x 12.011/44.009) and the CO2e line names its GWP set. ``_lo`` and ``_hi`` are the run
    interval scaled by the year's share (the years of one run share their uncertain parameters).
    Every gas of ``gases_of_run`` that the phase's set has (a finite total) gets a line; a gas the
    set lacks gets none. ``ipcc`` (the run total's ``<col>_approach1_pct`` / ``_approach2_minus_pct`` /
    ``_approach2_plus_pct``, engine.intervals.ipcc_percentages) gives each line its uncertainty as a
    percentage (IPCC 2006 Vol. 1 Ch. 3 Approaches 1 and 2): the same on every year's line of a gas and
    phase, since a line is the run total times its share.
    """
    rows = []
    for phase in PHASES:
        for yr, share in sorted(year_shares[phase].items(), key=lambda kv: str(kv[0])):
            for g in gases_of_run:
                key = f"{gas_key(g)}_{phase}_t"
                if math.isfinite(total.get(key, math.nan)):
                    rows.append(_inv(yr, phase, gas_label(g), total, key, share, ipcc))
            rows.append(_inv(yr, phase, "CO2-C", total, f"co2_{phase}_t", share * float(gases.co2_to_carbon(1.0)), ipcc))
            rows.append(_inv(yr, phase, f"CO2e ({gwp_name})", total, f"co2e_{phase}_t", share, ipcc))
    return rows


def _inv(year, phase, gas, total, key, scale, ipcc=None):
    row = {"year": "" if year is None else year, "phase": phase, "gas": gas,
           "emissions_gg": total[key] * scale * 1e-3}
    for s in ("lo", "hi"):
        v = total.get(f"{key}_{s}")
        row[f"emissions_gg_{s}"] = v * scale * 1e-3 if v is not None else math.nan
    for name in INVENTORY_PCT_COLUMNS:
        v = (ipcc or {}).get(f"{key}_{name}")
        row[name] = float(v) if v is not None else math.nan
    return row


#: What each phase's lines are in inventory terms (inventory.json and the report).
INVENTORY_CONVENTIONS = {
    "smouldering": (
        "Fire loss from drained (or rewetted) organic soil: the L_fire term of the 2013 IPCC Wetlands "
        "Supplement, Chapter 2 (Eq. 2.8 form, L_fire = A x M_B x C_f x G_ef x 10^-3, with M_B x C_f "
        "replaced by the measured or modelled peat burned; equation numbers recalled, unchecked). Report "
        "under the organic-soil fire line, apart from above-ground biomass burning."),
    "flaming": (
        "Above-ground biomass burning (IPCC 2006 Vol. 4 Ch. 2 Eq. 2.27). On forest land the CO2 of this "
        "line may already be counted in the carbon-stock change of the biomass pool (IPCC 2006 Vol. 4 "
        "Ch. 2, recalled, unchecked): add only its non-CO2 gases in that case, so the CO2 is not counted twice."),
}

#: Uncertainty of each inventory line as a percentage, 95 % (issue 16 item 7): Approach 1 (first-order
#: propagation, symmetric, over the estimate) and Approach 2 (the draws: mean less 2.5 percentile, 97.5
#: percentile less mean, over the mean); IPCC 2006 Vol. 1 Ch. 3 (recalled, unchecked).
INVENTORY_PCT_COLUMNS = ["approach1_pct", "approach2_minus_pct", "approach2_plus_pct"]
INVENTORY_COLUMNS = ["year", "phase", "gas", "emissions_gg", "emissions_gg_lo", "emissions_gg_hi",
                     *INVENTORY_PCT_COLUMNS]
