"""When the emissions happened: a daily series and the split by inventory year.

Smouldering: each scar's gases are spread uniformly over its burning period, from its
``fire_start`` to its ``fire_end`` date inclusive (peat fires smoulder for days to weeks after
ignition; a flat profile is the simplest shape that conserves the scar's total and makes no claim
about the peak: an assumption, documented in docs/method.md). Scars without dates are left out of
the daily series and counted in the run's ``[run] year``. Flaming: each detection's dry matter on the
UTC date of the detection.
"""

from __future__ import annotations

import datetime as dt
import math

import numpy as np
import pandas as pd

from ..science import gases
from .tables import GASES, gas_key, phase_masses


def daily_columns(gas_names=GASES) -> list[str]:
    """daily.csv columns for the run's gases (:func:`peatburn.outputs.tables.run_gases`); a gas
    the phase's set lacks is left empty on that phase's rows."""
    return ["date", "phase", "dry_matter_t", "carbon_t", *(f"{gas_key(g)}_t" for g in gas_names), "co2e_t"]


DAILY_COLUMNS = daily_columns()


def _dates(frame, field: str | None):
    if not field or field not in frame.columns:
        return [None] * len(frame)
    out = []
    for v in frame[field].tolist():
        try:
            d = pd.Timestamp(v)
            out.append(None if pd.isna(d) else d.date())
        except (ValueError, TypeError):
            out.append(None)
    return out


def scar_periods(frame, start_field="fire_start", end_field="fire_end") -> list[tuple]:
    """(start, end) dates of each scar, None where unknown; end defaults to start."""
    starts, ends = _dates(frame, start_field), _dates(frame, end_field)
    out = []
    for s, e in zip(starts, ends):
        if s is None:
            out.append((None, None))
        else:
            out.append((s, e if e is not None and e >= s else s))
    return out


def daily_rows(scar_sums: dict, periods: list[tuple], flame_daily: dict, factors) -> list[dict]:
    """Daily rows for both phases. ``scar_sums`` has per-scar arrays ``peat_kg`` and ``carbon_kg``
    (index = scar); ``flame_daily`` maps ISO date -> flaming dry matter [kg]."""
    acc: dict = {}
    for i, (start, end) in enumerate(periods):
        if start is None:
            continue
        n_days = (end - start).days + 1
        dm = scar_sums["peat_kg"][i] / n_days
        c = scar_sums["carbon_kg"][i] / n_days
        for k in range(n_days):
            day = start + dt.timedelta(days=k)
            a = acc.setdefault(("smouldering", day), [0.0, 0.0])
            a[0] += dm
            a[1] += c
    for day, dm in flame_daily.items():
        a = acc.setdefault(("flaming", dt.date.fromisoformat(day)), [0.0, 0.0])
        a[0] += dm
        a[1] += dm * factors.vegetation_carbon_fraction
    rows = []
    for (phase, day), (dm, c) in sorted(acc.items(), key=lambda kv: (kv[0][1], kv[0][0])):
        fs = factors.smouldering if phase == "smouldering" else factors.flaming
        masses = {g: float(m) for g, m in phase_masses(dm, c, fs, factors).items()}
        rows.append({"date": day.isoformat(), "phase": phase, "dry_matter_t": dm * 1e-3, "carbon_t": c * 1e-3,
                     **{f"{gas_key(g)}_t": m for g, m in masses.items()},
                     "co2e_t": float(gases.co2_equivalent(masses, factors.gwp.gwp))})
    return rows


def year_shares(scar_sums: dict, periods: list[tuple], flame_daily: dict, flame_total_kg: float,
                run_year) -> dict:
    """phase -> {year: share of the phase's run total}, by days of burning (smouldering) and
    detection dates (flaming); mass without dates goes to ``run_year``."""
    out = {"smouldering": {}, "flaming": {}}
    total = float(np.sum(scar_sums["peat_kg"]))
    for i, (start, end) in enumerate(periods):
        m = float(scar_sums["peat_kg"][i])
        if start is None:
            out["smouldering"][run_year] = out["smouldering"].get(run_year, 0.0) + m
            continue
        n = (end - start).days + 1
        for y in range(start.year, end.year + 1):
            a = max(start, dt.date(y, 1, 1))
            b = min(end, dt.date(y, 12, 31))
            out["smouldering"][y] = out["smouldering"].get(y, 0.0) + m * ((b - a).days + 1) / n
    dated = 0.0
    for day, dm in flame_daily.items():
        y = int(day[:4])
        out["flaming"][y] = out["flaming"].get(y, 0.0) + dm
        dated += dm
    rest = flame_total_kg - dated
    if rest > 0 or not out["flaming"]:
        out["flaming"][run_year] = out["flaming"].get(run_year, 0.0) + max(rest, 0.0)
    for phase, tot in (("smouldering", total), ("flaming", flame_total_kg)):
        if tot and math.isfinite(tot) and tot != 0:
            out[phase] = {y: v / tot for y, v in out[phase].items()}
        else:
            out[phase] = {run_year: 1.0}
    return out
