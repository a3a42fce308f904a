"""The picklable :class:`RunPlan`: everything one block needs, built once from the opened inputs."""

from __future__ import annotations

import uuid
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from ..config import RasterRef
from ..grid import RunGrid
from ..io.rasters import GridReader, RasterSource
from ..science import survey
from .alignment import SurveyAlignment, sample_windows
from .inputs import Inputs, _param_source
from .sums import SCAR_LAYER

if TYPE_CHECKING:
    from .depth_models import DepthModels

@dataclass
class RunPlan:
    """Everything one block needs; picklable so worker processes can run blocks."""

    grid: RunGrid
    pre: RasterSource | None
    post: RasterSource | None
    shift_z: float
    tilt: tuple | None
    subsidence_rate: object
    interval_years: float
    thickness: object
    bulk_density: object
    carbon_fraction: object
    scars: np.ndarray
    scar_fire_counts: np.ndarray | None
    zone_layers: list  # (name, ids, geometries)
    lod: float
    block_size: int
    water_table: object = None  # RasterSource | float | None
    stations: tuple | None = None  # (x, y, value) for IDW
    idw: tuple = (2.0, 12, None)  # power, neighbours, max distance [m]
    # dated station readings: (group per scar, -1 undated; per group the (x, y, value) of the readings
    # nearest that group's fire start within the window; window [days]; scars with no reading)
    station_days: tuple | None = None
    # several dated water-table rasters ((RasterSource, ISO date) in date order) and per scar the one it uses:
    # (index per scar, -1 the mean of all (undated scar, or window 0), -2 none within the window; window [days];
    # scars with none within the window; undated scars) (rasters_by_fire_date)
    water_table_dated: tuple = ()
    raster_days: tuple | None = None
    models: DepthModels | None = None
    tier1_fuel_t_ha: float = 0.0
    biomass: object = None  # RasterSource | float | None [t/ha]
    extent: object = None  # RasterSource (non-zero = organic soil) | geometries array | None
    rho_fill: float = float("nan")  # fallback bulk density for holes [g cm-3] (science.peat.fill_missing)
    cf_fill: float = float("nan")  # fallback carbon fraction for holes [-]
    fill_cv: float = 0.0  # relative spread of a filled value (uncertainty source peat_property_fill)
    # earlier years of a series: (burn depth, depth method) RasterSources per year (docs/method.md 7.7)
    earlier_burns: tuple = ()
    earlier_tier1_fuel: tuple = ()  # the Tier 1 fuel consumption [t/ha] each earlier year used
    #: a survey error spread varying in space, when chosen on stable ground (science.error_scale):
    #: ``{"coefficients", "fill", "variables"}``; the blocks sum A sd^2 over the surveyed pixels
    error_scale: dict | None = None
    quality: RasterSource | None = None  # depth.survey.quality, read only with error_scale
    token: str = field(default_factory=lambda: uuid.uuid4().hex)


def _days(values) -> np.ndarray:
    """Dates (anything pandas reads; UTC) as days since 1970-01-01 [d]; NaN where missing or unreadable."""
    import pandas as pd

    t = pd.to_datetime(pd.Series(list(values), dtype=object), utc=True, errors="coerce", format="mixed")
    return ((t - pd.Timestamp("1970-01-01", tz="UTC")) / pd.Timedelta(days=1)).to_numpy(dtype="float64",
                                                                                    na_value=np.nan)


def stations_by_fire_date(stations: tuple, reading_dates, scar_starts, window_days: float) -> tuple:
    """For each distinct fire start of the scars, each station's reading nearest that date within
    ``window_days`` (:func:`peatburn.science.water_table.readings_near_date`).

    Returns ``(group, subsets, window_days, n_without)``: ``group`` per scar (index into ``subsets``,
    -1 for a scar without a start date, which uses every reading), ``subsets`` the (x, y, value)
    arrays of each group, and the number of dated scars with no reading within the window.
    """
    from peatburn.science.water_table import readings_near_date  # absolute: the engine moves (issue 23)

    x, y, v = stations
    day = _days(reading_dates)
    key = np.array([f"{a!r},{b!r}" for a, b in zip(x, y)], dtype=object)  # a station is its position
    start = _days(scar_starts)
    group = np.full(start.size, -1)
    subsets = []
    n_without = 0
    for i, d in enumerate(np.unique(start[np.isfinite(start)])):
        chosen = readings_near_date(key, day, d, max_days=window_days)
        subsets.append((x[chosen], y[chosen], v[chosen]))
        hit = start == d
        group[hit] = i
        n_without += int(hit.sum()) if not chosen.any() else 0
    return group, subsets, float(window_days), n_without


def rasters_by_fire_date(raster_dates, scar_starts, window_days: float) -> tuple:
    """Per scar, the dated water-table raster nearest its fire start within ``window_days``
    (:func:`peatburn.science.water_table.nearest_dated`).

    Returns ``(index, window_days, n_without, n_undated)``: ``index`` per scar into the rasters, -1
    for a scar without a start date (or with ``window_days`` 0: every scar), which uses the mean of
    the rasters, -2 for a dated scar with no raster within the window (no water-table depth, as a
    scar with no station reading in the window); and the counts of those two kinds of scars.
    """
    from peatburn.science.water_table import nearest_dated  # absolute: the engine moves (issue 23)

    start = _days(scar_starts)
    if not window_days > 0:
        return np.full(start.size, -1, dtype=np.int64), float(window_days), 0, 0
    idx = nearest_dated(_days(raster_dates), start, max_days=window_days)
    dated = np.isfinite(start)
    idx = np.where(dated & (idx < 0), -2, idx)
    return idx, float(window_days), int(np.sum(idx == -2)), int(np.sum(~dated))


def tier1_default_fuel() -> float:
    """IPCC 2013 Wetlands Supplement default fuel consumption for wildfire on tropical organic soil
    [t d.m./ha] (see :mod:`peatburn.science.tier1`)."""
    from ..science import tier1

    return float(tier1.DEFAULT_FUEL_CONSUMPTION_T_HA)


def build_plan(inputs: Inputs, alignment: SurveyAlignment | None, models: DepthModels | None = None) -> RunPlan:
    cfg = inputs.config
    sv = cfg.survey
    fc = None
    if cfg.fire_count_field:
        fc = inputs.scars.frame[cfg.fire_count_field].fillna(1).astype(float).to_numpy()
    wt = cfg.water_table
    if inputs.fill is None:
        inputs.fill = fill_values(inputs)
    fill = inputs.fill
    stations = None
    if inputs.stations is not None and len(inputs.stations.frame):
        f = inputs.stations.frame
        stations = (f.geometry.x.to_numpy(), f.geometry.y.to_numpy(), f["value"].to_numpy(dtype=float))
    station_days = None
    if (stations is not None and "date" in inputs.stations.frame.columns and wt.date_window_days > 0
            and cfg.start_field in inputs.scars.frame.columns):
        station_days = stations_by_fire_date(stations, inputs.stations.frame["date"],
                                             inputs.scars.frame[cfg.start_field], wt.date_window_days)
    dated, raster_days = (), None
    if wt is not None and wt.dated_rasters:
        dated = tuple((_param_source(ref, f"depth.water_table.depth[{i}]"), d)
                      for i, (ref, d) in enumerate(wt.dated_rasters))
        starts = (inputs.scars.frame[cfg.start_field] if cfg.start_field in inputs.scars.frame.columns
                  else [None] * len(inputs.scars.frame))
        raster_days = rasters_by_fire_date([d for _, d in wt.dated_rasters], starts, wt.date_window_days)
    return RunPlan(
        grid=inputs.grid,
        pre=RasterSource(str(sv.pre), "depth.survey.pre") if sv else None,
        post=RasterSource(str(sv.post), "depth.survey.post", src_transform=alignment.post_transform) if sv else None,
        shift_z=alignment.shift_z if alignment else 0.0, tilt=alignment.tilt if alignment else None,
        subsidence_rate=_param_source(sv.subsidence_rate, "depth.survey.subsidence_rate") if sv else None,
        interval_years=sv.interval_years if sv else 0.0,
        thickness=_param_source(cfg.peat.thickness, "peat.thickness"),
        bulk_density=_param_source(cfg.peat.bulk_density, "peat.bulk_density"),
        carbon_fraction=_param_source(cfg.peat.carbon_fraction, "peat.carbon_fraction"),
        scars=np.asarray(inputs.scars.geometries, dtype=object), scar_fire_counts=fc,
        zone_layers=[(z.name, ids, np.asarray(layer.geometries, dtype=object)) for z, layer, ids in inputs.zones]
        + [(SCAR_LAYER, [str(i) for i in range(len(inputs.scars.frame))],
            np.asarray(inputs.scars.geometries, dtype=object))],
        lod=alignment.lod if alignment else float("nan"), block_size=cfg.block_size,
        water_table=_param_source(wt.raster, "depth.water_table.depth") if wt is not None and wt.raster else None,
        stations=stations,
        idw=(wt.idw_power, wt.idw_neighbours, wt.idw_max_distance_m) if wt is not None else (2.0, 12, None),
        station_days=station_days,
        water_table_dated=dated, raster_days=raster_days,
        models=models,
        tier1_fuel_t_ha=cfg.tier1.fuel_consumption_t_ha or tier1_default_fuel(),
        biomass=_param_source(cfg.flaming.biomass, "flaming.biomass") if cfg.flaming else None,
        extent=_extent_source(inputs), **fill,
        earlier_burns=tuple((RasterSource(str(d), f"series.earlier_burns[{i}].depth", resampling="nearest"),
                             RasterSource(str(m), f"series.earlier_burns[{i}].method", resampling="nearest"))
                            for i, (d, m) in enumerate(cfg.earlier_burns)),
        earlier_tier1_fuel=tuple(float(v) for v in getattr(cfg, "earlier_tier1_fuel_t_ha", ())),
        error_scale=_error_scale(alignment),
        quality=RasterSource(str(sv.quality), "depth.survey.quality")
        if sv and sv.quality is not None and "quality" in (_error_scale(alignment) or {}).get("variables", ()) else None,
    )


def _error_scale(alignment) -> dict | None:
    """The per-pixel sd model the blocks apply, when the co-registration chose one."""
    ch = getattr(alignment, "error_scale", None)
    if not ch or not (ch.get("chosen") or ch.get("shift", {}).get("chosen")):
        return None
    return {"coefficients": dict(ch["coefficients"]), "fill": dict(ch["fill"]), "variables": list(ch["variables"]),
            "local": ch["local"] if ch["local"].get("chosen") else None, "spread": bool(ch["chosen"]),
            "shift": ch["shift"] if ch["shift"].get("chosen") else None}


def _extent_source(inputs: Inputs):
    """The organic-soil extent as the blocks read it: polygons (geometries) or a raster (nearest)."""
    ext = inputs.config.peat.extent
    if ext is None:
        return None
    if inputs.extent is not None:
        return np.asarray(inputs.extent.geometries, dtype=object)
    return RasterSource(str(ext), "peat.extent", resampling="nearest")


#: Relative spread of a filled peat property when the run's valid values are too few to measure
#: their spread (fewer than this many sampled pixels) [-]: an **assumption**.
MIN_FILL_SAMPLES = 30
DEFAULT_FILL_CV = 0.3


def fill_values(inputs: Inputs) -> dict:
    """Fallbacks for holes in the bulk-density and carbon-fraction rasters, and their spread.

    The configured ``peat.bulk_density_fill`` / ``peat.carbon_fraction_fill``, else the median of
    the raster's valid values on the run's sample windows (evenly spread, :func:`sample_windows`).
    The spread of a filled value (uncertainty source ``peat_property_fill``) is the larger relative
    spread (NMAD / median) of the sampled valid values of the two rasters: putting one value where
    none was measured errs by about the property's spatial variation (common practice); with fewer
    than :data:`MIN_FILL_SAMPLES` valid values, :data:`DEFAULT_FILL_CV` (assumption). Constants
    have no holes.
    """
    from ..errors import ConfigError

    cfg, grid = inputs.config, inputs.grid
    out = {"rho_fill": float("nan"), "cf_fill": float("nan"), "fill_cv": 0.0}
    cvs = []
    for key, name in (("rho", "bulk_density"), ("cf", "carbon_fraction")):
        ref = getattr(cfg.peat, name)
        if not isinstance(ref, RasterRef):
            continue
        src = _param_source(ref, f"peat.{name}")
        vals = []
        with GridReader(src, grid) as r:
            for w in sample_windows(grid, cfg.block_size):
                v = r.read(w)
                vals.append(v[np.isfinite(v)])
        v = np.concatenate(vals) if vals else np.zeros(0)
        med = float(np.median(v)) if v.size else float("nan")
        cvs.append(float(survey.nmad(v)) / med if v.size >= MIN_FILL_SAMPLES and med > 0 else DEFAULT_FILL_CV)
        configured = getattr(cfg.peat, f"{name}_fill")
        if configured is not None:
            out[f"{key}_fill"] = float(configured)
        elif v.size:
            out[f"{key}_fill"] = med
        else:
            raise ConfigError(f"peat.{name}: {ref.path} holds no valid value on the run grid; give "
                              f"peat.{name}_fill (the value for its holes) or a raster with data")
    out["fill_cv"] = max(cvs) if cvs else 0.0
    return out
