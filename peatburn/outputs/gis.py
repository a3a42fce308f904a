"""GIS-ready results: one GeoPackage holding each zone layer's polygons joined with their zones.csv
rows, and the burn scars joined with their fires.csv rows, so that a GIS user opens one file and
styles it.

GeoPackage is an open OGC standard (OGC 12-128r18). Text is kept as the user wrote it (the CSV
files neutralise a leading ``=``, ``+``, ``-``, ``@`` for spreadsheets; a GIS does not evaluate
formulas). The run total and the remainder row (``(outside every zone)``) have no polygon of their
own and stay in zones.csv only.
"""

from __future__ import annotations

import contextlib
import re
import warnings
from pathlib import Path

import numpy as np
import pandas as pd

from ..io.writers import atomic_path

#: The fixed date written into the GeoPackage's ``gpkg_contents.last_change`` (GDAL's
#: ``OGR_CURRENT_DATE`` option) so that a run's outputs stay byte-identical between runs.
FIXED_DATE = "2000-01-01T00:00:00.000Z"

FIRES_LAYER = "fires"


def layer_names(names: list[str]) -> list[str]:
    """GeoPackage table names for the zone layers: ``zones_<name>`` with characters other than
    letters, digits and ``_`` made ``_``, made unique by a number where two names meet."""
    out, seen = [], set()
    for name in names:
        base = "zones_" + (re.sub(r"[^0-9A-Za-z_]", "_", name).strip("_") or "layer")
        cand, k = base, 2
        while cand.lower() in seen or cand.lower() == FIRES_LAYER:
            cand, k = f"{base}_{k}", k + 1
        seen.add(cand.lower())
        out.append(cand)
    return out


def _frame(rows: list[dict], columns: list[str], geometry, crs):
    import geopandas as gpd

    data = {c: [r.get(c) for r in rows] for c in columns}
    df = pd.DataFrame(data, columns=columns)
    for c in columns:  # numbers stay numbers, empty text stays text
        if df[c].map(lambda v: isinstance(v, (int, float, np.integer, np.floating)) or v is None).all():
            df[c] = pd.to_numeric(df[c], errors="coerce")
    return gpd.GeoDataFrame(df, geometry=list(geometry), crs=crs)


def zone_frames(zone_layers, rows: list[dict], columns: list[str]) -> list[tuple[str, object]]:
    """(layer name, GeoDataFrame) per zone layer: each polygon with its zones.csv row."""
    cols = [c for c in columns if c != "layer"]
    out = []
    for name, frame, ids in zone_layers:
        by_id = {r["zone"]: r for r in rows if r.get("layer") == name}
        sel = [by_id.get(i, {"zone": i}) for i in ids]
        out.append((name, _frame(sel, cols, frame.geometry.values, frame.crs)))
    return out


def fire_frame(scars, fire_rows: list[dict], columns: list[str]):
    """The burn-scar polygons with their fires.csv rows (both in layer order)."""
    return _frame(fire_rows, columns, scars.geometry.values[:len(fire_rows)], scars.crs)


def write_results_gpkg(final, zone_layers, rows, columns, scars, fire_rows, fire_columns) -> Path:
    """Write ``results.gpkg``: a ``zones_<name>`` layer per zone layer and a ``fires`` layer."""
    import pyogrio

    frames = zone_frames(zone_layers, rows, columns)
    names = layer_names([n for n, _ in frames])
    layers = list(zip(names, [f for _, f in frames])) + [(FIRES_LAYER, fire_frame(scars, fire_rows, fire_columns))]
    old = pyogrio.get_gdal_config_option("OGR_CURRENT_DATE")
    pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": FIXED_DATE})
    try:
        with atomic_path(final, suffix=".gpkg") as tmp:
            with contextlib.suppress(FileNotFoundError):
                tmp.unlink()  # GDAL creates the file itself
            with warnings.catch_warnings():  # the temporary name ends in .part until the rename
                warnings.filterwarnings("ignore", message=".*(extension|non conformant).*", category=RuntimeWarning)
                for name, gdf in layers:
                    pyogrio.write_dataframe(gdf, tmp, layer=name, driver="GPKG", append=tmp.exists(),
                                            promote_to_multi=True)
    finally:
        pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": old})
    return Path(final)
