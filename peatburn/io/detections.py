"""Read active-fire detections (position, observation time, FRP) and check them row by row.

Accepted files
--------------
* **CSV** (``.csv``, ``.txt``, ``.tsv``; the delimiter is sniffed: comma, semicolon or tab), one
  detection per row, with our default column names:

  ``x``, ``y``
      position in the CRS given by ``crs`` (the config key ``flaming.crs``); or
  ``lon``, ``lat``
      longitude and latitude in degrees, always EPSG:4326;
  ``time``
      observation time, ISO 8601 (``2031-09-14T05:42:00Z``, ``2031-09-14 05:42``,
      ``2031-09-14T12:42+07:00``, ``2031-09-14``). **Times without a UTC offset are UTC.**
  ``frp_mw``
      fire radiative power [MW].

* **Any vector file geopandas can read** (GeoPackage, shapefile, GeoJSON...) of points: the
  position is the geometry, in the file's CRS (or ``crs`` when the file has none); ``time`` and
  ``frp_mw`` are attribute columns.

``columns`` maps our names (``x``, ``y``, ``lon``, ``lat``, ``time``, ``frp_mw``) onto the file's
column names, for example ``{"time": "obs_time", "frp_mw": "power"}``. ``time`` may also map to
two columns, a date and a time of day: ``{"time": ["obs_date", "obs_clock"]}``, the time of day
as ``HH:MM[:SS]`` or as ``HHMM`` digits (``542`` is 05:42), UTC. Unmapped names fall back to our
default names, matched exactly first and then ignoring case.

Bad rows are counted, not silently dropped: :attr:`Detections.rejected` maps each reason to its
count. Each rejected row is counted once, under the first check it fails, in this order:
``"no time"`` (empty time), ``"bad time"`` (not ISO 8601), ``"negative or missing FRP"``,
``"no position"`` (empty or non-numeric coordinates, latitude outside +/-90, longitude outside
-180..360, empty geometry, or a point the run CRS cannot represent), ``"not a point"`` (vector
files: a line or polygon), ``"outside run area"`` (outside ``bounds``).
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

__all__ = ["Detections", "read_detections", "OUR_COLUMNS", "REJECT_REASONS"]

#: Our column names, which ``columns`` may map onto a file's names.
OUR_COLUMNS = ("x", "y", "lon", "lat", "time", "frp_mw")

#: Reasons a row is rejected, in the order they are checked.
REJECT_REASONS = ("no time", "bad time", "negative or missing FRP", "no position", "not a point",
                  "outside run area")

_EPOCH = pd.Timestamp(0, tz="UTC")


@dataclass
class Detections(RowCounts):
    """Clean active-fire detections in the run CRS, with what was rejected and why.

    Attributes
    ----------
    frame : geopandas.GeoDataFrame
        One row per accepted detection, columns ``time`` (datetime64[ns, UTC]), ``frp_mw`` (float,
        MW), ``t_s`` (float, seconds since 1970-01-01T00:00:00Z), ``source_row`` (0-based row
        of the detection in the file, header not counted) and ``geometry`` (Point, run CRS).
    rejected : dict of str to int
        Reason -> number of rows rejected for it; every reason of :data:`REJECT_REASONS` is
        present (0 when none).
    path : str
        The file read.
    n_read : int
        Rows (features) in the file.
    source_crs : str
        CRS the positions were given in (``EPSG:4326`` for lon/lat).
    notes : list of str
        What was assumed while reading (for the report and the log).
    """

    frame: gpd.GeoDataFrame
    rejected: dict[str, int]
    path: str
    n_read: int = 0
    source_crs: str = ""
    notes: list[str] = field(default_factory=list)
    noun = "detection"  # for describe() (a class attribute, not a field)


# ----------------------------------------------------------------------------- reading


def _check_mapping(columns, path: str, what: str, existing: list[str]) -> dict:
    if columns is None:
        return {}
    if not isinstance(columns, dict):
        raise ConfigError(f"{what}: columns must be a table such as {{ time = \"obs_time\" }}, got {columns!r}")
    unknown = [k for k in columns if k not in OUR_COLUMNS]
    if unknown:
        raise ConfigError(f"{what}: columns: unknown name(s) {', '.join(map(repr, unknown))}; "
                          f"the names that can be mapped are {', '.join(OUR_COLUMNS)}")
    out = {}
    for ours, theirs in columns.items():
        names = list(theirs) if isinstance(theirs, (list, tuple)) else [theirs]
        if ours != "time" and len(names) != 1:
            raise ConfigError(f"{what}: columns.{ours} must name one column of {path}, got {theirs!r}")
        if ours == "time" and len(names) not in (1, 2):
            raise ConfigError(f"{what}: columns.time must name one column, or two (date, time of day), got {theirs!r}")
        for name in names:
            if not isinstance(name, str) or name not in existing:
                raise ConfigError(f"{what}: columns.{ours} = {name!r}, but {path} has no such column; "
                                  f"its columns are: {', '.join(existing) or '(none)'}")
        out[ours] = names if ours == "time" else names[0]
    return out


def _find(name: str, mapping: dict, existing: list[str]):
    """The file's column for our ``name``: mapped, else same name, else same name ignoring case."""
    if name in mapping:
        return mapping[name]
    if name in existing:
        return name
    folded = [c for c in existing if c.lower() == name]
    return folded[0] if len(folded) == 1 else None


def _parse_time(frame: pd.DataFrame, cols) -> tuple[pd.Series, np.ndarray, np.ndarray]:
    """UTC times, and masks of rows with no time and with an unreadable time."""
    cols = cols if isinstance(cols, list) else [cols]
    if len(cols) == 1:
        raw = frame[cols[0]]
        if pd.api.types.is_datetime64_any_dtype(raw.dtype):  # typed field of a vector file
            missing = raw.isna().to_numpy()
            t = raw.dt.tz_localize("UTC") if raw.dt.tz is None else raw.dt.tz_convert("UTC")
            return t, missing, np.zeros(len(raw), dtype=bool)
        text = raw.astype("string").str.strip()
    else:
        date = frame[cols[0]].astype("string").str.strip()
        tod = frame[cols[1]].astype("string").str.strip()
        digits = tod.str.fullmatch(r"\d{1,4}").fillna(False)
        padded = tod.where(~digits, tod.str.zfill(4).str.slice(0, 2) + ":" + tod.str.zfill(4).str.slice(2, 4))
        text = date + "T" + padded
        text = text.where(date.notna() & (date != "") & tod.notna() & (tod != ""), pd.NA)
    missing = (text.isna() | (text == "")).fillna(True).to_numpy(dtype=bool)
    parsed = pd.to_datetime(text.where(~missing, None), utc=True, format="ISO8601", errors="coerce")
    bad = parsed.isna().to_numpy() & ~missing
    return parsed, missing, bad


def read_detections(path, run_crs, *, crs=None, columns: dict | None = None, bounds=None,
                    what: str = "flaming.detections") -> Detections:
    """Read active-fire detections, reject bad rows (counted by reason), reproject to the run CRS.

    Parameters
    ----------
    path : str or os.PathLike
        A CSV file or a point vector file (see the module docstring for the layout).
    run_crs : any CRS input
        The run grid's CRS (EPSG code, ``"EPSG:..."``, WKT, pyproj or rasterio CRS).
    crs : any CRS input, optional
        CRS of the ``x``, ``y`` columns of a CSV (config key ``flaming.crs``), or of a vector file
        that has none. ``lon``, ``lat`` columns are always EPSG:4326.
    columns : dict, optional
        Our column names -> the file's (see the module docstring).
    bounds : (xmin, ymin, xmax, ymax), optional
        The run area in the run CRS [CRS units]; detections outside (edges included in the area)
        are rejected as ``"outside run area"``.
    what : str
        The config key, for messages.

    Returns
    -------
    Detections
        Clean rows in the run CRS; times are UTC (times without an offset are read as UTC).

    Raises
    ------
    MissingInputError
        The file does not exist.
    InputFileError
        The file cannot be read, or holds no geometry.
    ConfigError
        ``columns`` names a column the file does not have (the message lists the file's columns),
        or the file has no time, FRP or position columns.
    CRSError
        ``x``, ``y`` columns without ``crs``, a vector file without a CRS and no ``crs``, or a CRS
        that cannot be understood.
    """
    path = os.fspath(path)
    if not os.path.exists(path):
        raise MissingInputError(f"{what}: file not found: {path}; check the path (paths are relative to the config file)")
    dst = normalise_crs(run_crs, "run grid")
    frame, file_crs = read_point_table(path, what, "x,y,time,frp_mw or lon,lat,time,frp_mw", "detection")
    is_vector = isinstance(frame, gpd.GeoDataFrame)
    existing = [str(c) for c in frame.columns if not (is_vector and c == frame.geometry.name)]
    mapping = _check_mapping(columns, path, what, existing)
    notes: list[str] = []
    n = len(frame)

    time_col = _find("time", mapping, existing)
    frp_col = _find("frp_mw", mapping, existing)
    missing_cols = [name for name, col in (("time", time_col), ("frp_mw", frp_col)) if col is None]
    if missing_cols:
        raise ConfigError(f"{what}: {path} has no column for {', '.join(missing_cols)}; its columns are: "
                          f"{', '.join(existing) or '(none)'}; name them so or map them with "
                          f"flaming.columns, e.g. columns = {{ time = \"obs_time\", frp_mw = \"power\" }}")

    # --- position and its CRS
    if is_vector:
        if file_crs is not None:
            src = normalise_crs(file_crs, f"{what}: {path}")
            if crs is not None:
                notes.append("the file's own CRS was used; flaming.crs applies to files without one")
        elif crs is not None:
            src = normalise_crs(crs, f"{what}: crs")
        else:
            raise CRSError(f"{what}: {path} has no CRS; set flaming.crs (e.g. crs = \"EPSG:32749\") "
                           f"or set one on the file")
        geoms = frame.geometry.values
        empty = np.asarray(pd.isna(geoms) | shapely.is_empty(geoms), dtype=bool)
        type_id = shapely.get_type_id(geoms)
        single_multi = (type_id == 4) & (shapely.get_num_geometries(geoms) == 1)  # MultiPoint of one
        geoms = np.where(single_multi, shapely.get_geometry(geoms, 0), geoms)
        not_point = ~empty & (shapely.get_type_id(geoms) != 0)
        xs = np.where(empty | not_point, np.nan, shapely.get_x(np.where(empty | not_point, None, geoms)))
        ys = np.where(empty | not_point, np.nan, shapely.get_y(np.where(empty | not_point, None, geoms)))
        lonlat = False
    else:
        not_point = np.zeros(n, dtype=bool)
        xc, yc = _find("x", mapping, existing), _find("y", mapping, existing)
        lonc, latc = _find("lon", mapping, existing), _find("lat", mapping, existing)
        have_xy = xc is not None and yc is not None
        have_ll = lonc is not None and latc is not None
        mapped_xy = "x" in mapping or "y" in mapping
        if have_xy and (crs is not None or mapped_xy or not have_ll):
            if crs is None:
                raise CRSError(f"{what}: {path} gives positions as x, y but no CRS for them; set "
                               f"flaming.crs (e.g. crs = \"EPSG:32749\"), or give lon, lat columns "
                               f"(EPSG:4326) instead")
            src = normalise_crs(crs, f"{what}: crs")
            xs, ys = numeric_column(frame, xc), numeric_column(frame, yc)
            lonlat = False
        elif have_ll:
            src = normalise_crs("EPSG:4326", what)
            if crs is not None:
                notes.append("lon, lat columns are EPSG:4326; flaming.crs applies to x, y columns only")
            xs, ys = numeric_column(frame, lonc), numeric_column(frame, latc)
            lonlat = True
        else:
            raise ConfigError(f"{what}: {path} has no position columns (x, y or lon, lat); its columns are: "
                              f"{', '.join(existing) or '(none)'}; map them with flaming.columns, "
                              f"e.g. columns = {{ lon = \"longitude\", lat = \"latitude\" }}")
    if not is_vector and src.is_geographic:
        lonlat = True
    no_pos = ~np.isfinite(xs) | ~np.isfinite(ys)
    if lonlat:
        no_pos |= (np.abs(ys) > 90) | (xs < -180) | (xs > 360)
    if is_vector:
        no_pos &= ~not_point

    # --- time and FRP
    times, no_time, bad_time = _parse_time(frame, time_col)
    notes.append("times without a UTC offset were read as UTC")
    frp = numeric_column(frame, frp_col)
    bad_frp = ~np.isfinite(frp) | (frp < 0)

    # --- reproject what has a position
    ok_pos = ~no_pos & ~not_point
    out_x, out_y = reproject_points(xs, ys, ok_pos, src, dst)
    no_pos |= ok_pos & ~(np.isfinite(out_x) & np.isfinite(out_y))
    outside = outside_bounds(out_x, out_y, bounds, what)

    # --- one reason per row, in REJECT_REASONS order
    checks = (("no time", no_time), ("bad time", bad_time), ("negative or missing FRP", bad_frp),
              ("no position", no_pos), ("not a point", not_point), ("outside run area", outside))
    taken = np.zeros(n, dtype=bool)
    rejected: dict[str, int] = {}
    for reason, mask in checks:
        hit = np.asarray(mask, dtype=bool) & ~taken
        rejected[reason] = int(hit.sum())
        taken |= hit
    keep = ~taken

    t_kept = pd.Series(times).iloc[np.flatnonzero(keep)].reset_index(drop=True).dt.as_unit("ns")
    clean = gpd.GeoDataFrame(
        {
            "time": t_kept,
            "frp_mw": frp[keep],
            "t_s": (t_kept - _EPOCH).dt.total_seconds().to_numpy(dtype=float),
            "source_row": np.flatnonzero(keep).astype(np.int64),
        },
        geometry=gpd.points_from_xy(out_x[keep], out_y[keep]),
        crs=dst.to_wkt(),
    )
    return Detections(frame=clean, rejected=rejected, path=path, n_read=n,
                      source_crs=src.to_string(), notes=notes)
