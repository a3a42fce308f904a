"""Tables of a series of yearly runs: series.csv, the series inventory, what changed between years,
and what changed against an earlier series (a recalculation).

No file is read here but the JSON records handed in; the series engine (peatburn.engine.series)
writes the tables.
"""

from __future__ import annotations

import math

import numpy as np

from .tables import INVENTORY_PCT_COLUMNS, PHASES, TOTAL_LAYER, gas_key, interval_columns, units

#: series.csv columns. ``kind`` is ``year`` (one run), ``sum`` (the listed years together) or
#: ``trend`` (last year vs base year [%], IPCC 2006 Vol. 1 Ch. 3); ``lo``/``hi`` come from the joint
#: draws, ``lo_independent``/``hi_independent`` (sum and trend only) from the same draws with the
#: years made independent, for comparison.
SERIES_COLUMNS = ["kind", "year", "phase", "quantity", "unit", "value", "lo", "hi", "lo_independent", "hi_independent"]
#: inventory.csv of a series: one line per calendar year x phase x gas, with the series year(s) of the
#: run(s) it comes from (``2031+2032`` when two runs burned in that calendar year: combined, see
#: :func:`combine_calendar_years`) and where its interval comes from (``interval``: ``run`` its run's own,
#: ``joint draws`` the series' joint draws, ``added bounds (conservative)``, or empty without draws), and
#: the line's IPCC Approach 1 / Approach 2 percentages (outputs.tables.INVENTORY_PCT_COLUMNS; a combined
#: line's as in :func:`combine_calendar_years`).
SERIES_INVENTORY_COLUMNS = ["run_year", "year", "phase", "gas", "emissions_gg", "emissions_gg_lo", "emissions_gg_hi",
                            "interval", *INVENTORY_PCT_COLUMNS]
#: ``interval`` of a combined line whose gas has no joint draws: the runs' bounds added.
ADDED_BOUNDS = "added bounds (conservative)"
#: recalculation.csv (``--against``): per year, each input, setting or figure that differs.
RECALCULATION_COLUMNS = ["year", "what", "key", "old", "new"]


def phase_quantity(column: str) -> tuple[str, str]:
    """``carbon_smouldering_t -> ("smouldering", "carbon_t")``; ``peat_burned_t`` is smouldering."""
    for phase in PHASES:
        tag = f"_{phase}_"
        if tag in column:
            return phase, column.replace(tag, "_")
    if column == "peat_burned_t":
        return "smouldering", column
    return "all", column


def flaming_estimated(totals: dict) -> bool:
    """Whether a run estimated the flaming phase (totals.json; without a [flaming] section its
    flaming columns are zeros that mean "not estimated")."""
    return totals["method"].get("flaming_factors") is not None


def year_rows(year: int, total: dict, gases, flaming: bool = True) -> list[dict]:
    """series.csv rows of one year from its run's total row (zones.csv, layer ``total``); no flaming
    rows when the run did not estimate the flaming phase (``flaming`` False)."""
    assert total.get("layer") == TOTAL_LAYER
    unit_of = units(gases)
    rows = [_row("year", year, "all", "burned_area_ha", unit_of["burned_area_ha"], total["burned_area_ha"])]
    for col in interval_columns(gases):
        v = total.get(col)
        if v is None or not math.isfinite(v):
            continue  # a gas the phase's set lacks: not estimated
        phase, q = phase_quantity(col)
        if phase == "flaming" and not flaming:
            continue
        rows.append(_row("year", year, phase, q, unit_of[col], v, total.get(f"{col}_lo"), total.get(f"{col}_hi")))
    return rows


def _row(kind, year, phase, quantity, unit, value, lo=None, hi=None, lo_ind=None, hi_ind=None) -> dict:
    return {"kind": kind, "year": year, "phase": phase, "quantity": quantity, "unit": unit, "value": value,
            "lo": _num(lo), "hi": _num(hi), "lo_independent": _num(lo_ind), "hi_independent": _num(hi_ind)}


def _num(v):
    return math.nan if v is None else float(v)


def joint_rows(summary: dict) -> list[dict]:
    """series.csv rows of the sum and the trend from :func:`peatburn.engine.series.joint_summary`."""
    rows = []
    for q in summary.get("quantities", []):
        s, t = q["sum"], q["trend"]
        rows.append(_row("sum", summary["span"], q["phase"], q["quantity"], q["unit"], s["value"], s["lo"], s["hi"],
                         s["lo_independent"], s["hi_independent"]))
        rows.append(_row("trend", summary["trend_years"], q["phase"], q["quantity"], "%", t["value"], t["lo"], t["hi"],
                         t["lo_independent"], t["hi_independent"]))
    return rows


def inventory_rows(year: int, inventory: list[dict]) -> list[dict]:
    """A year's inventory lines (inventory.csv of its run) with the series year of the run first."""
    return [{"run_year": year, **r} for r in inventory]


def combine_calendar_years(rows: list[dict], draws: dict) -> list[dict]:
    """One inventory line per calendar year x phase x gas from the runs' lines (each with ``run_year``).

    Lines of one calendar year from two runs (a fire season across the new year) are added: the
    mean is the sum of the runs' lines; the interval is the 2.5-97.5 % of the sum of the lines' joint
    draws (``draws[(run_year, year, phase, gas)]``: the run's joint draws scaled to the line, in Gg)
    where every line has them, else the runs' bounds added (as if the runs' errors were perfectly
    correlated: wider than the joint interval for the usual errors, not a proven bound; ``interval``
    says which). Whether adding counts a fire twice is the caller's check
    (peatburn.engine.series). Lines of a calendar year from one run are kept as they are.

    The IPCC percentages of a combined line (IPCC 2006 Vol. 1 Ch. 3; equation numbers recalled,
    unchecked): Approach 2 from the summed joint draws (their mean less the 2.5 percentile, and the
    97.5 percentile less the mean, over the mean, x 100), empty without joint draws; Approach 1 with
    the runs' lines taken as fully correlated, U = sum(U_i x_i) / sum(x_i), because the runs share
    their factor, density and carbon-fraction errors. That is the first-order figure's upper bound
    for errors correlated between 0 and 1 (the sum-of-squares form, Eq. 3.2, is its lower bound,
    for independent runs).
    """
    from ..science import trend

    groups: dict = {}
    for r in rows:
        cal = str(r["year"]) or f"run {r['run_year']}"  # a line without a year (no run.year) stays its run's
        groups.setdefault((cal, r["phase"], r["gas"]), []).append(r)
    out = []
    for (_, phase, gas), members in groups.items():
        if len(members) == 1:
            r = members[0]
            out.append({**r, "interval": "run" if _finite(r["emissions_gg_lo"]) else ""})
            continue
        value = math.fsum(float(r["emissions_gg"]) for r in members)
        d = [draws.get((r["run_year"], r["year"], phase, gas)) for r in members]
        pct = {name: math.nan for name in INVENTORY_PCT_COLUMNS}
        if all(_finite(r.get("approach1_pct")) for r in members) and value > 0:
            pct["approach1_pct"] = math.fsum(float(r["approach1_pct"]) * float(r["emissions_gg"])
                                             for r in members) / value
        if all(x is not None for x in d):
            summed = sum(d[1:], d[0])
            lo, hi = trend.interval(summed)
            mean = float(np.nanmean(summed)) if np.isfinite(summed).any() else math.nan
            if mean > 0:
                pct["approach2_minus_pct"] = 100.0 * (mean - lo) / mean
                pct["approach2_plus_pct"] = 100.0 * (hi - mean) / mean
            how = "joint draws"
        elif all(_finite(r["emissions_gg_lo"]) and _finite(r["emissions_gg_hi"]) for r in members):
            lo = math.fsum(float(r["emissions_gg_lo"]) for r in members)
            hi = math.fsum(float(r["emissions_gg_hi"]) for r in members)
            how = ADDED_BOUNDS
        else:
            lo, hi, how = math.nan, math.nan, ""
        out.append({"run_year": "+".join(str(r["run_year"]) for r in members), "year": members[0]["year"],
                    "phase": phase, "gas": gas, "emissions_gg": value, "emissions_gg_lo": lo, "emissions_gg_hi": hi,
                    "interval": how, **pct})
    return sorted(out, key=lambda r: str(r["year"]))  # stable: each year's lines in the runs' order


def _finite(v) -> bool:
    try:
        return v is not None and v != "" and math.isfinite(float(v))
    except (TypeError, ValueError):
        return False


def method_shares(totals: dict) -> dict:
    """Share of the below-ground carbon by depth method (survey, water_table, tier1) of a run."""
    return {m: d.get("share_of_carbon") for m, d in totals["method"]["depth"].items()}


def _fmt(v) -> str:
    if isinstance(v, float):
        return f"{v:.4g}"
    return str(v)


def changes_between_years(prev_year: int, prev: dict, year: int, cur: dict) -> list[str]:
    """One-line findings on what changed from ``prev_year`` to ``year``: method shares, factor and
    GWP sets, the depth sources in the configuration, the burned area and the below-ground carbon.

    ``prev`` and ``cur`` hold ``totals`` (totals.json) and ``provenance`` (provenance.json) of the runs.
    """
    out = []
    tp, tc = prev["totals"], cur["totals"]
    mp, mc = tp["method"], tc["method"]
    for key, label in (("smouldering_factors", "smouldering factor set"), ("flaming_factors", "flaming factor set"),
                       ("gwp", "GWP set"), ("flaming", "flaming route")):
        if mp.get(key) != mc.get(key):
            out.append(f"{label}: {mp.get(key) or 'not estimated'} -> {mc.get(key) or 'not estimated'}")
    sp, sc = method_shares(tp), method_shares(tc)
    for m in sc:
        a, b = sp.get(m), sc.get(m)
        if a is None or b is None or not (math.isfinite(a) and math.isfinite(b)):
            continue
        if abs(a - b) >= 0.005:
            out.append(f"share of below-ground carbon from {m.replace('_', '-')}: {a:.1%} -> {b:.1%}")
    kp = set(prev["provenance"].get("inputs", {}))
    kc = set(cur["provenance"].get("inputs", {}))
    for k in sorted(kc - kp):
        if not k.startswith("series."):
            out.append(f"input {k} used from {year} on (not in {prev_year})")
    for k in sorted(kp - kc):
        if not k.startswith("series."):
            out.append(f"input {k} not used in {year} (used in {prev_year})")
    qp, qc = tp["quantities"], tc["quantities"]
    for key, label in (("burned_area_ha", "burned area"), ("carbon_smouldering_t", "below-ground carbon")):
        a, b = qp[key]["value"], qc[key]["value"]
        if a and math.isfinite(a) and math.isfinite(b):
            out.append(f"{label}: {_fmt(a)} -> {_fmt(b)} {qc[key]['unit']} ({(b - a) / a:+.1%})")
    return out


def _flatten(d, prefix="") -> dict:
    out = {}
    if isinstance(d, dict):
        for k, v in d.items():
            out.update(_flatten(v, f"{prefix}{k}."))
    elif isinstance(d, list):
        for i, v in enumerate(d):
            out.update(_flatten(v, f"{prefix[:-1]}[{i}]."))
    else:
        out[prefix[:-1]] = d
    return out


#: Keys of provenance.json compared setting by setting in a recalculation (the run's configuration,
#: its factor and GWP sets and parameters, the draws); times and library versions are not.
_SETTING_PARTS = ("config", "parameters", "emission_factors", "gwp", "seed", "draws")
#: Figures of totals.json compared in a recalculation.
_FIGURES = ("burned_area_ha", "carbon_smouldering_t", "co2e_smouldering_t", "co2e_flaming_t")


def recalculation_rows(year: int, old: dict | None, new: dict) -> list[dict]:
    """What differs for one year between an earlier series (``old``) and this one (``new``); each holds
    ``provenance`` and ``totals`` of the year's run (``old`` None: the year is new).

    Rows: ``input`` (an input whose SHA-256 differs, or that is new or gone), ``setting`` (a value of
    the configuration, parameters, factor or GWP sets, seed or draws that differs), ``figure`` (the
    year's totals before and after) and ``tool`` (the version, when it differs).
    """
    if old is None:
        return [{"year": year, "what": "year", "key": "", "old": "", "new": "not in the earlier series"}]
    rows = []
    po, pn = old["provenance"], new["provenance"]
    io_, in_ = po.get("inputs", {}), pn.get("inputs", {})
    for k in sorted(set(io_) | set(in_)):
        a, b = io_.get(k), in_.get(k)
        if a is None or b is None:
            rows.append({"year": year, "what": "input", "key": k, "old": a["path"] if a else "",
                         "new": b["path"] if b else ""})
        elif a.get("sha256") != b.get("sha256"):
            rows.append({"year": year, "what": "input", "key": k, "old": f"sha256 {a['sha256'][:16]}",
                         "new": f"sha256 {b['sha256'][:16]}"})
    fo = {k: v for part in _SETTING_PARTS for k, v in _flatten({part: po.get(part)}).items()}
    fn = {k: v for part in _SETTING_PARTS for k, v in _flatten({part: pn.get(part)}).items()}
    for k in sorted(set(fo) | set(fn)):
        a, b = fo.get(k), fn.get(k)
        if a != b and not (isinstance(a, float) and isinstance(b, float) and math.isnan(a) and math.isnan(b)):
            rows.append({"year": year, "what": "setting", "key": k, "old": "" if a is None else _fmt(a),
                         "new": "" if b is None else _fmt(b)})
    vo, vn = po.get("versions", {}).get("peatburn"), pn.get("versions", {}).get("peatburn")
    if vo != vn:
        rows.append({"year": year, "what": "tool", "key": "peatburn", "old": str(vo), "new": str(vn)})
    qo, qn = old["totals"].get("quantities", {}), new["totals"].get("quantities", {})
    for k in _FIGURES:
        a, b = (qo.get(k) or {}).get("value"), (qn.get(k) or {}).get("value")
        if a != b:
            rows.append({"year": year, "what": "figure", "key": k, "old": "" if a is None else _fmt(a),
                         "new": "" if b is None else _fmt(b)})
    return rows


__all__ = ["SERIES_COLUMNS", "SERIES_INVENTORY_COLUMNS", "RECALCULATION_COLUMNS", "year_rows", "joint_rows",
           "inventory_rows", "changes_between_years", "recalculation_rows", "gas_key", "method_shares"]
