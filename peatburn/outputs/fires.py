"""The per-fire table (fires.csv): one row per burn-scar polygon.

Auditors and inventory compilers work fire by fire. Each row holds the fire's id (the field named
by ``burned_area.id_field``, default the scar layer's first text field, else the row number), its
dates, its inventory year, its burned area (on peat and on mineral soil), its mean burn depth, its
peat and carbon burned below ground with the interval, the carbon shares of the depth methods and
the flaming carbon of the detections (or biomass) inside it.

Repeat burns: where scar polygons overlap (the same ground burned twice), the shared pixels are
split **equally** between the fires that cover them; every other pixel belongs wholly to its one
fire. One pair of surveys measures the total lowering between the surveys and cannot tell at a
pixel how much of it each burn removed, so no other split is supported by the data (a split by
each fire's modelled depth would rest on the water-table model alone). Sums over the fires
therefore equal the run's sums exactly. Common practice (equal allocation of an unresolved
quantity), stated in docs/method.md.

Columns are built from :data:`BASE_COLUMNS` plus the ``extra`` columns a caller passes, so later
columns (ignition attribution, a series' fire history) are added without touching this module's
arithmetic.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..depth_methods import METHODS
from .tables import HA_PER_M2, quantities

#: Columns of fires.csv, in order (intervals and extra columns are inserted by :func:`fire_columns`).
BASE_COLUMNS = [
    "fire", "fire_start", "fire_end", "inventory_year", "burned_area_ha", "mineral_soil_area_ha",
    "repeat_burn_area_ha", "mean_burn_depth_m", "peat_burned_t", "carbon_smouldering_t",
    *(f"carbon_share_{m}" for m in METHODS),
    "carbon_flaming_t", "n_detections",
]
#: Columns that get ``_lo``/``_hi`` when Monte Carlo draws are made.
FIRE_INTERVAL_COLUMNS = ["carbon_smouldering_t"]


def fire_ids(frame, id_field: str | None, what: str = "burned_area.id_field") -> tuple[list[str], str]:
    """The fires' ids and the field they come from.

    ``id_field`` when given (an error naming the fields when the layer has no such field); else the
    first text field of the layer; else the 1-based row number (field name ``"(row)"``).
    """
    from ..errors import ZoneError

    fields = [c for c in frame.columns if c != frame.geometry.name]
    if id_field:
        if id_field not in fields:
            raise ZoneError(f"{what}: the burn-scar layer has no field {id_field!r}; fields are: "
                            f"{', '.join(fields) or '(none)'}")
        field = id_field
    else:
        text = [c for c in fields if pd.api.types.is_object_dtype(frame[c]) or pd.api.types.is_string_dtype(frame[c])]
        if not text:
            return [str(i + 1) for i in range(len(frame))], "(row)"
        field = text[0]
    ids = ["" if pd.isna(v) else str(v) for v in frame[field].tolist()]
    return ids, field


def inventory_year(period: tuple, run_year):
    """The inventory year of a fire: the year of its start date, else the run's year.

    A fire burning across New Year is split by days in inventory.csv (outputs.timeline); its row
    here carries the year it started.
    """
    start = period[0] if period else None
    return start.year if start is not None else run_year


def fire_columns(with_intervals: bool, extra: list[str] | tuple = ()) -> list[str]:
    """The columns of fires.csv: the base columns, ``_lo``/``_hi`` after each interval column when
    drawn, then ``extra`` (columns later features add, e.g. ignition attribution)."""
    cols = []
    for c in BASE_COLUMNS:
        cols.append(c)
        if with_intervals and c in FIRE_INTERVAL_COLUMNS:
            cols += [f"{c}_lo", f"{c}_hi"]
    return cols + [c for c in extra if c not in cols]


def fire_rows(ids: list[str], periods: list[tuple], scar_sums: dict, factors, run_year, *,
              flame: dict | None = None, extra: dict | None = None) -> list[dict]:
    """Rows of fires.csv.

    Parameters
    ----------
    ids, periods
        Per fire: the id and the (start, end) dates (None where unknown), in layer order.
    scar_sums : dict of str to array
        The block pass's sums of the internal scar layer, one value per fire (engine.sums.SUM_KEYS),
        shared pixels already split between the fires covering them; ``repeat_area_m2`` holds each
        fire's whole area shared with another fire, ``mineral_area_m2`` its share of burned
        mineral soil.
    factors
        The run's factor sets (as for :func:`peatburn.outputs.tables.quantities`).
    flame : dict of str to array, optional
        Flaming sums per fire (``dry_matter_kg``, ``fre_mj``, ``n_detections``).
    extra : dict of str to list, optional
        Further columns, one value per fire.
    """
    q = quantities(scar_sums, factors, flame)
    n = len(ids)
    mineral = np.asarray(scar_sums.get("mineral_area_m2", np.zeros(n)), dtype="float64")
    rep = np.asarray(scar_sums.get("repeat_area_m2", np.zeros(n)), dtype="float64")
    rows = []
    for i in range(n):
        start, end = periods[i] if i < len(periods) else (None, None)
        row = {
            "fire": ids[i],
            "fire_start": start.isoformat() if start is not None else "",
            "fire_end": end.isoformat() if end is not None else "",
            "inventory_year": _blank(inventory_year((start, end), run_year)),
            "burned_area_ha": float(q["burned_area_ha"][i]),
            "mineral_soil_area_ha": float(mineral[i] * HA_PER_M2),
            "repeat_burn_area_ha": float(rep[i] * HA_PER_M2),
            "mean_burn_depth_m": float(q["mean_burn_depth_m"][i]),
            "peat_burned_t": float(q["peat_burned_t"][i]),
            "carbon_smouldering_t": float(q["carbon_smouldering_t"][i]),
            **{f"carbon_share_{m}": float(q[f"carbon_share_{m}"][i]) for m in METHODS},
            "carbon_flaming_t": float(q["carbon_flaming_t"][i]),
            "n_detections": float(q["n_detections"][i]),
        }
        for col, vals in (extra or {}).items():
            row[col] = vals[i]
        rows.append(row)
    return rows


def _blank(v):
    return "" if v is None else v
