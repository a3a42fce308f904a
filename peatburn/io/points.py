"""Read point files with one value per point: water-table stations, field plots of burn depth.

Accepted files
--------------
* **CSV** (``.csv``, ``.txt``, ``.tsv``; delimiter sniffed: comma, semicolon or tab) with a header
  row and either

  ``x``, ``y`` (names set by ``x=``, ``y=``)
      position in the CRS given by ``crs`` (required; never guessed), or
  ``lon``, ``lat``
      longitude and latitude in degrees, always EPSG:4326 (also found as ``longitude``,
      ``latitude``, any case);

  plus the value column (``value_column``) and, optionally, a date column (``date_column``,
  ISO 8601: ``2031-09-14`` or ``2031-09-14T06:00``; times without a UTC offset are read as UTC).

* **Any point layer geopandas can read** (GeoPackage, shapefile, GeoJSON...): the position is
  the geometry in the file's CRS (``crs`` only for a file without one); value and date are
  attribute columns.

The value is read as a number in whatever unit the file uses: this module does not convert or
judge it (the science layer does, e.g. :func:`peatburn.science.water_table.check_water_table`).

Rows are never dropped silently: :attr:`Points.rejected` counts them by reason, each row once,
under the first check it fails, in the order of :data:`REJECT_REASONS`: ``"no value"`` (empty or
not a number), ``"no position"`` (empty or non-numeric coordinates, latitude beyond ±90, longitude
beyond -180..360, empty or non-point geometry, or a point the run CRS cannot represent),
``"bad date"`` (date column given, date empty or unreadable), ``"outside grid"`` (outside
``bounds`` when ``drop_outside`` is true). Points outside ``bounds`` that are kept
(``drop_outside=False``, e.g. stations just beyond the grid that still inform interpolation near
its edge) are counted in :attr:`Points.n_outside` and listed in the notes.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from ..errors import ConfigError, CRSError, MissingInputError
from ..grid import normalise_crs
from .point_tables import RowCounts, numeric_column, outside_bounds, read_point_table, reproject_points

__all__ = ["Points", "read_points", "REJECT_REASONS"]

#: Reasons a row is rejected, in the order they are checked.
REJECT_REASONS = ("no value", "no position", "bad date", "outside grid")

_LON_NAMES = ("lon", "longitude", "long")
_LAT_NAMES = ("lat", "latitude")


@dataclass
class Points(RowCounts):
    """Points in the run CRS with one value each, and what was rejected while reading.

    Attributes
    ----------
    frame : geopandas.GeoDataFrame
        One row per accepted point: ``value`` (float, the file's unit), ``date`` (datetime64 UTC;
        only when a date column was given), ``source_row`` (0-based data row in the file, header
        not counted), ``outside`` (bool: beyond ``bounds``, kept because ``drop_outside`` was
        false), ``geometry`` (Point, run CRS).
    rejected : dict of str to int
        Reason -> rows rejected for it; every reason of :data:`REJECT_REASONS` is present.
    path : str
        The file read.
    n_read : int
        Rows (features) in the file.
    n_outside : int
        Points beyond ``bounds``: rejected (``drop_outside``) or kept and flagged.
    source_crs : str
        CRS the positions were given in.
    notes : list of str
        What was assumed or found while reading.
    """

    frame: gpd.GeoDataFrame
    rejected: dict[str, int]
    path: str
    n_read: int = 0
    n_outside: int = 0
    source_crs: str = ""
    notes: list[str] = field(default_factory=list)
    noun = "point"  # for describe() (a class attribute, not a field)


def _column(name: str, existing: list[str]):
    """The file's column for ``name``: same name, else the same name ignoring case (if unique)."""
    if name in existing:
        return name
    folded = [c for c in existing if c.lower() == name.lower()]
    return folded[0] if len(folded) == 1 else None


def _first_of(names, existing):
    for name in names:
        col = _column(name, existing)
        if col is not None:
            return col
    return None


def _parse_dates(raw: pd.Series) -> tuple[pd.Series, np.ndarray]:
    """UTC datetimes and a mask of rows whose date is empty or unreadable."""
    if pd.api.types.is_datetime64_any_dtype(raw.dtype):  # typed date field of a vector file
        t = raw.dt.tz_localize("UTC") if raw.dt.tz is None else raw.dt.tz_convert("UTC")
        return t, raw.isna().to_numpy()
    text = raw.astype("string").str.strip()
    missing = (text.isna() | (text == "")).fillna(True).to_numpy(dtype=bool)
    parsed = pd.to_datetime(text.where(~missing, None), utc=True, format="ISO8601", errors="coerce")
    return pd.Series(parsed), missing | pd.Series(parsed).isna().to_numpy()


def read_points(path, run_crs, *, value_column: str, crs=None, x: str = "x", y: str = "y",
                date_column: str | None = None, bounds=None, drop_outside: bool = True,
                what: str = "points") -> Points:
    """Read a point file with one numeric value per point, reject bad rows (counted), reproject.

    Parameters
    ----------
    path : str or os.PathLike
        A CSV file or a point vector file (see the module docstring).
    run_crs : any CRS input
        The run grid's CRS.
    value_column : str
        Column holding the value (matched exactly, then ignoring case).
    crs : any CRS input, optional
        CRS of the ``x``, ``y`` columns of a CSV (required for them), or of a vector file that has
        none. ``lon``, ``lat`` columns are always EPSG:4326.
    x, y : str
        Names of the coordinate columns of a CSV.
    date_column : str, optional
        Column holding the date of each value (ISO 8601); rows with an empty or unreadable date
        are rejected as ``"bad date"``.
    bounds : (xmin, ymin, xmax, ymax), optional
        The run grid's extent in the run CRS; points beyond it (edges inside) are counted.
    drop_outside : bool
        Reject points beyond ``bounds`` (``"outside grid"``), or keep them flagged ``outside``.
    what : str
        The config key, used in messages.

    Returns
    -------
    Points

    Raises
    ------
    MissingInputError
        The file does not exist.
    InputFileError
        The file cannot be read, or has no geometry.
    ConfigError
        The value, date or position columns are missing; the message names the file, the
        column asked for and the columns that exist.
    CRSError
        ``x``, ``y`` columns without ``crs``; a vector file without a CRS and no ``crs``; a CRS
        that cannot be understood.
    """
    path = os.fspath(path)
    if not os.path.exists(path):
        raise MissingInputError(f"{what}: file not found: {path}; "
                                f"check the path (paths are relative to the config file)")
    dst = normalise_crs(run_crs, "run grid")
    frame, file_crs = read_point_table(path, what)
    is_vector = isinstance(frame, gpd.GeoDataFrame)
    existing = [str(c) for c in frame.columns if not (is_vector and c == frame.geometry.name)]
    listing = ", ".join(existing) or "(none)"
    n = len(frame)
    notes: list[str] = []

    vcol = _column(value_column, existing)
    if vcol is None:
        raise ConfigError(f"{what}: {path} has no column {value_column!r} for the values; its columns are: "
                          f"{listing}; name the right one as value_column")
    dcol = None
    if date_column is not None:
        dcol = _column(date_column, existing)
        if dcol is None:
            raise ConfigError(f"{what}: {path} has no date column {date_column!r}; its columns are: {listing}; "
                              f"name the right one as date_column, or leave it out")

    # --- position and its CRS
    not_point = np.zeros(n, dtype=bool)
    if is_vector:
        if file_crs is not None:
            src = normalise_crs(file_crs, f"{what}: {path}")
            if crs is not None:
                notes.append("the file's own CRS was used; crs applies to files without one")
        elif crs is not None:
            src = normalise_crs(crs, f"{what}: crs")
        else:
            raise CRSError(f"{what}: {path} has no CRS; give crs (e.g. crs = \"EPSG:32749\") or set one on the file")
        geoms = frame.geometry.values
        empty = np.asarray(pd.isna(geoms) | shapely.is_empty(geoms), dtype=bool)
        single_multi = (shapely.get_type_id(geoms) == 4) & (shapely.get_num_geometries(geoms) == 1)
        geoms = np.where(single_multi, shapely.get_geometry(geoms, 0), geoms)
        not_point = ~empty & (shapely.get_type_id(geoms) != 0)
        usable = ~(empty | not_point)
        xs = np.full(n, np.nan)
        ys = np.full(n, np.nan)
        xs[usable] = shapely.get_x(geoms[usable])
        ys[usable] = shapely.get_y(geoms[usable])
        lonlat = bool(src.is_geographic)
    else:
        xc, yc = _column(x, existing), _column(y, existing)
        lonc, latc = _first_of(_LON_NAMES, existing), _first_of(_LAT_NAMES, existing)
        if xc is not None and yc is not None and (crs is not None or lonc is None or latc is None):
            if crs is None:
                raise CRSError(f"{what}: {path} gives positions as {x}, {y} but no CRS for them; give crs "
                               f"(e.g. crs = \"EPSG:32749\"), or give lon, lat columns (EPSG:4326) instead")
            src = normalise_crs(crs, f"{what}: crs")
            xs, ys = numeric_column(frame, xc), numeric_column(frame, yc)
        elif lonc is not None and latc is not None:
            src = normalise_crs("EPSG:4326", what)
            if crs is not None:
                notes.append("lon, lat columns are EPSG:4326; crs applies to x, y columns only")
            xs, ys = numeric_column(frame, lonc), numeric_column(frame, latc)
        else:
            raise ConfigError(f"{what}: {path} has no position columns ({x}, {y} with a crs, or lon, lat); "
                              f"its columns are: {listing}")
        lonlat = bool(src.is_geographic)
    no_pos = ~np.isfinite(xs) | ~np.isfinite(ys) | not_point
    if lonlat:
        with np.errstate(invalid="ignore"):
            no_pos |= (np.abs(ys) > 90) | (xs < -180) | (xs > 360)

    # --- value and date
    values = numeric_column(frame, vcol)
    no_value = ~np.isfinite(values)
    bad_date = np.zeros(n, dtype=bool)
    dates = None
    if dcol is not None:
        dates, bad_date = _parse_dates(frame[dcol])
        if not is_vector or not pd.api.types.is_datetime64_any_dtype(frame[dcol].dtype):
            notes.append("dates without a UTC offset were read as UTC")

    # --- reproject what has a position
    ok_pos = ~no_pos
    out_x, out_y = reproject_points(xs, ys, ok_pos, src, dst)
    no_pos |= ok_pos & ~(np.isfinite(out_x) & np.isfinite(out_y))
    outside = ~no_pos & outside_bounds(out_x, out_y, bounds, what)

    # --- one reason per row, in REJECT_REASONS order
    checks = (("no value", no_value), ("no position", no_pos), ("bad date", bad_date),
              ("outside grid", outside if drop_outside else np.zeros(n, dtype=bool)))
    taken = np.zeros(n, dtype=bool)
    rejected: dict[str, int] = {}
    for reason, mask in checks:
        hit = np.asarray(mask, dtype=bool) & ~taken
        rejected[reason] = int(hit.sum())
        taken |= hit
    keep = ~taken
    n_outside = int((outside & ~(no_value | no_pos | bad_date)).sum())
    if n_outside:
        rows = np.flatnonzero(outside & ~(no_value | no_pos | bad_date))
        shown = ", ".join(str(int(r)) for r in rows[:10]) + (" ..." if rows.size > 10 else "")
        verb = "rejected" if drop_outside else "kept (they still inform interpolation near the edge)"
        notes.append(f"{n_outside} point(s) lie outside the run grid, {verb}: data rows {shown}")

    data = {
        "value": values[keep],
        "source_row": np.flatnonzero(keep).astype(np.int64),
        "outside": outside[keep],
    }
    if dates is not None:
        data["date"] = pd.Series(dates).iloc[np.flatnonzero(keep)].reset_index(drop=True)
    clean = gpd.GeoDataFrame(data, geometry=gpd.points_from_xy(out_x[keep], out_y[keep]), crs=dst.to_wkt())
    return Points(frame=clean, rejected=rejected, path=path, n_read=n, n_outside=n_outside,
                  source_crs=src.to_string(), notes=notes)
