"""Reading tables of points: a CSV (delimiter detected) or any vector layer geopandas reads.

Shared by the readers of active-fire detections, water-table stations and field plots.
"""

from __future__ import annotations

import csv
import warnings

import geopandas as gpd
import numpy as np
import pandas as pd

from ..errors import InputFileError

CSV_SUFFIXES = (".csv", ".txt", ".tsv")


class RowCounts:
    """What a point reader kept and rejected: mixed into the readers' result dataclasses, which
    have ``frame``, ``rejected`` (reason -> count), ``path`` and ``n_read``."""

    noun = "row"

    @property
    def n_rejected(self) -> int:
        return int(sum(self.rejected.values()))

    def describe(self) -> str:
        """One line: rows read, kept and rejected (by reason)."""
        parts = [f"{n} {why}" for why, n in self.rejected.items() if n]
        text = f"{self.path}: {self.n_read} {self.noun}(s) read, {len(self.frame)} kept"
        return text + (f", {self.n_rejected} rejected ({'; '.join(parts)})" if parts else "")


def read_point_table(path: str, what: str, header_hint: str = "x,y,value or lon,lat,value",
                     row_name: str = "point") -> tuple[pd.DataFrame, object]:
    """The file's rows as a (Geo)DataFrame, and its CRS (None for a CSV or a vector without one).

    CSV columns are read as text (parsed later, so bad cells can be counted, not guessed).
    """
    if path.lower().endswith(CSV_SUFFIXES):
        try:
            with open(path, newline="", encoding="utf-8-sig") as fh:
                sample = fh.read(64 * 1024)
            try:
                sep = csv.Sniffer().sniff(sample, delimiters=",;\t").delimiter
            except csv.Error:
                sep = ","
            frame = pd.read_csv(path, sep=sep, dtype=str, keep_default_na=True, skipinitialspace=True,
                                encoding="utf-8-sig")
        except pd.errors.EmptyDataError:
            raise InputFileError(f"{what}: {path} is empty; it needs a header row ({header_hint}) "
                                 f"and one row per {row_name}") from None
        except (UnicodeDecodeError, pd.errors.ParserError, OSError) as exc:
            raise InputFileError(f"{what}: cannot read {path} as CSV ({str(exc).splitlines()[0]}); "
                                 f"save it as UTF-8 CSV with a header row") from None
        frame.columns = [str(c).strip() for c in frame.columns]
        return frame, None
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            frame = gpd.read_file(path)
    except Exception as exc:  # pyogrio raises its own error kinds
        raise InputFileError(f"{what}: cannot read {path} as a CSV or vector file ({str(exc).splitlines()[0]}); "
                             f"give a .csv file or a point layer (GeoPackage, shapefile, GeoJSON)") from None
    try:
        has_geometry = isinstance(frame, gpd.GeoDataFrame) and frame.geometry is not None
    except AttributeError:  # a GeoDataFrame without an active geometry column
        has_geometry = False
    if not has_geometry:
        raise InputFileError(f"{what}: {path} has no geometry; give points, or a CSV with x, y or lon, lat columns")
    return frame, frame.crs


def numeric_column(frame: pd.DataFrame, col) -> np.ndarray:
    """A column as float, NaN where empty or not a number (all NaN when ``col`` is None)."""
    if col is None:
        return np.full(len(frame), np.nan)
    values = frame[col]
    if not pd.api.types.is_numeric_dtype(values.dtype):
        values = values.astype("string").str.strip()
    return pd.to_numeric(values, errors="coerce").to_numpy(dtype=float, na_value=np.nan)


def reproject_points(xs, ys, ok, src_crs, dst_crs) -> tuple[np.ndarray, np.ndarray]:
    """x, y of the rows where ``ok`` reprojected from ``src_crs`` to ``dst_crs`` (NaN elsewhere or
    where the transform fails)."""
    out_x = np.full(len(xs), np.nan)
    out_y = np.full(len(xs), np.nan)
    if ok.any():
        pts = gpd.GeoSeries(gpd.points_from_xy(xs[ok], ys[ok]), crs=src_crs.to_wkt()).to_crs(dst_crs.to_wkt())
        out_x[ok] = pts.x.to_numpy()
        out_y[ok] = pts.y.to_numpy()
    return out_x, out_y


def outside_bounds(x, y, bounds, what: str) -> np.ndarray:
    """True where a point lies outside ``bounds`` (xmin, ymin, xmax, ymax; edges inside); all False
    without bounds. NaN positions count as outside."""
    if bounds is None:
        return np.zeros(len(x), dtype=bool)
    try:
        xmin, ymin, xmax, ymax = (float(b) for b in bounds)
    except (TypeError, ValueError):
        from ..errors import ConfigError

        raise ConfigError(f"{what}: bounds must be (xmin, ymin, xmax, ymax), got {bounds!r}") from None
    with np.errstate(invalid="ignore"):
        return ~((x >= xmin) & (x <= xmax) & (y >= ymin) & (y <= ymax))
