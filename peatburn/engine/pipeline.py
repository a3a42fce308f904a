"""Orchestration: configuration -> inputs on one grid -> co-registration -> blocks -> sums.

The science lives in :mod:`peatburn.science`; this module reads, aligns, plans and combines.
Per-block work (:func:`process_block`) is a module-level function of a picklable
:class:`RunPlan`, so any executor (serial, local processes) can run it.
"""

from __future__ import annotations

import math
import threading
import uuid
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import shapely
from affine import Affine
from rasterio.windows import Window

from ..config import RasterRef, RunConfig
from ..errors import GridError
from ..grid import RunGrid
from ..io.rasters import GridReader, RasterSource, check_overlap, grid_from_raster, inspect_raster, read_on_grid
from ..io.vectors import WindowRasterizer, read_polygons, zone_ids
from ..science import coregistration, peat, survey
from .zones import ZoneLayerIndex, accumulate_stacked, coverage_count

#: Pixel budget of the co-registration sample (evenly spread full-resolution windows). 2 Mpx
#: recovers the benchmark scene's shift within 2 cm in 1.0 s, 4 Mpx within 1 cm in 1.5 s
#: (benchmarks/, 67 Mpx scene; docs/performance.md).
SAMPLE_PIXELS = 2_000_000
#: Stable-ground residuals kept for the variogram of the survey error.
STABLE_SAMPLE_MAX = 50_000

# --------------------------------------------------------------------------------------------
# inputs

@dataclass
class Inputs:
    """Inputs opened and checked, on one grid."""

    config: RunConfig
    grid: RunGrid
    rasters: dict  # key -> RasterInfo
    scars: object  # PolygonLayer
    zones: list  # (ZoneLayerConfig, PolygonLayer, ids)
    stable: object | None
    stations: object | None = None  # io.points.Points (water-table stations)
    plots: object | None = None  # io.points.Points (field plots)
    notes: list[str] = field(default_factory=list)
    extent: object | None = None  # PolygonLayer of the organic-soil extent (a raster extent is in ``rasters``)
    fill: dict | None = None  # fallbacks for holes in the peat properties (fill_values), found once

    @property
    def has_survey(self) -> bool:
        return self.config.survey is not None


def open_inputs(cfg: RunConfig) -> Inputs:
    """Open and check every input; build the run grid.

    The grid is the pre-fire survey's by default; without a survey, the water-table raster's, then
    the peat rasters'; else ``run.crs`` and ``run.resolution`` over the burn scars.
    """
    rasters = {}
    if cfg.survey is not None:
        rasters["depth.survey.pre"] = inspect_raster(cfg.survey.pre, "depth.survey.pre")
        rasters["depth.survey.post"] = inspect_raster(cfg.survey.post, "depth.survey.post")
    for key, val in _raster_params(cfg).items():
        rasters[key] = inspect_raster(val.path, key)
    notes = []
    grid = _run_grid(cfg, rasters, notes)
    for key, info in rasters.items():
        check_overlap(info, grid, key)
    scars = read_polygons(cfg.burned_area, grid.crs, "burned_area.path", cfg.burned_area_layer)
    notes += [f"burned_area: {n}" for n in scars.notes]
    if len(scars.frame) == 0:
        raise GridError(f"burned_area.path: {cfg.burned_area} holds no polygon; nothing burned to estimate")
    if cfg.fire_count_field and cfg.fire_count_field not in scars.frame.columns:
        from ..errors import ZoneError

        fields = [c for c in scars.frame.columns if c != scars.frame.geometry.name]
        raise ZoneError(f"burned_area.fire_count_field: {cfg.burned_area} has no field {cfg.fire_count_field!r}; "
                        f"fields are: {', '.join(fields)}")
    zones = []
    for i, z in enumerate(cfg.zones):
        layer = read_polygons(z.path, grid.crs, f"zones[{i}] ({z.name})", z.layer)
        ids = zone_ids(layer, z.id)
        notes += [f"zones {z.name}: {n}" for n in layer.notes]
        outside = ~shapely.intersects(layer.geometries, shapely.box(*grid.bounds))
        if outside.any():
            names = [ids[i] for i in np.flatnonzero(outside)]
            notes.append(f"zones {z.name}: {len(names)} zone(s) lie outside the run grid and get zero: "
                         f"{', '.join(names[:5])}{' ...' if len(names) > 5 else ''}")
        zones.append((z, layer, ids))
    stable = None
    if cfg.survey is not None and cfg.survey.stable is not None:
        stable = read_polygons(cfg.survey.stable, grid.crs, "depth.survey.stable")
    stations = plots = None
    wt = cfg.water_table
    if wt is not None and wt.stations is not None:
        from ..io.points import read_points

        stations = read_points(wt.stations, grid.crs, value_column=wt.value_column, crs=wt.crs,
                               date_column=wt.date_column, bounds=grid.bounds, drop_outside=False,
                               what="depth.water_table.depth")
        if stations.n_outside:
            notes.append(f"water-table stations: {stations.n_outside} station(s) outside the run grid "
                         f"(kept for interpolation near the edge)")
        _note_rejected(notes, "water-table stations", stations)
        from ..science.water_table import check_water_table

        notes += [f"water table: {w}" for w in check_water_table(stations.frame["value"].to_numpy(),
                                                                  "depth.water_table.depth")]
    if cfg.plots is not None:
        from ..io.points import read_points

        plots = read_points(cfg.plots.path, grid.crs, value_column=cfg.plots.value_column, crs=cfg.plots.crs,
                            date_column=cfg.plots.date_column, bounds=grid.bounds, what="depth.plots.path")
        _note_rejected(notes, "field plots", plots)
    extent = None
    if cfg.peat.extent is not None and not _is_raster_path(cfg.peat.extent):
        extent = read_polygons(cfg.peat.extent, grid.crs, "peat.extent")
        notes += [f"peat.extent: {n}" for n in extent.notes]
    return Inputs(cfg, grid, rasters, scars, zones, stable, stations, plots, notes, extent)


def _is_raster_path(path) -> bool:
    return str(path).lower().endswith((".tif", ".tiff", ".vrt", ".img", ".nc"))


def window_group(inputs: Inputs, block_size: int, group: int) -> int:
    """Side of the squares of blocks the run's windows are ordered in (:meth:`RunGrid.windows`):
    ``group`` when every input raster's internal blocks (tiles or strips), measured in run-grid
    pixels, fit in a square of ``group`` x ``group`` blocks; 1 (row order) otherwise.

    A striped GeoTIFF holds rows of the whole width in each strip: in square order every strip
    would be decoded once per column of squares, in row order once. A raster in another CRS than
    the grid's counts as not fitting (its blocks cannot be measured in grid pixels). Common
    practice (follow the files' own tiling); docs/performance.md.
    """
    span = group * int(block_size)
    gx, gy = inputs.grid.res
    for info in inputs.rasters.values():
        if info.crs != inputs.grid.crs:
            return 1
        bh, bw = info.block_shapes[0]
        if bw * info.res[0] / gx > span or bh * info.res[1] / gy > span:
            return 1
    return group


def _note_rejected(notes: list, what: str, points) -> None:
    for reason, n in (points.rejected or {}).items():
        if n:
            notes.append(f"{what}: {n} row(s) not used ({reason}) from {points.path}")


def _run_grid(cfg: RunConfig, rasters: dict, notes: list) -> RunGrid:
    for key in ("depth.survey.pre", "depth.water_table.depth", "peat.thickness", "peat.bulk_density",
                "peat.carbon_fraction"):
        if key in rasters:
            info = rasters[key]
            run_crs = cfg.crs
            if run_crs is None and info.crs.is_geographic:
                run_crs = _utm_for(info)
                notes.append(f"run grid: {key} is in a geographic CRS; differencing, co-registration and buffers "
                             f"need metres, so the run uses {run_crs} (set run.crs to choose another projected CRS)")
            grid = grid_from_raster(info, run_crs)
            if cfg.resolution:
                grid = _regrid(grid, cfg.resolution)
            return grid
    if cfg.crs and cfg.resolution:
        scars = read_polygons(cfg.burned_area, cfg.crs, "burned_area.path", cfg.burned_area_layer)
        minx, miny, maxx, maxy = scars.frame.total_bounds
        r = cfg.resolution
        minx, miny = math.floor(minx / r) * r, math.floor(miny / r) * r
        maxx, maxy = math.ceil(maxx / r) * r, math.ceil(maxy / r) * r
        from affine import Affine as _A

        from ..grid import normalise_crs

        return RunGrid(normalise_crs(cfg.crs, "run.crs"), _A(r, 0, minx, 0, -r, maxy),
                       max(1, int(round((maxx - minx) / r))), max(1, int(round((maxy - miny) / r))))
    raise GridError("no raster defines the run grid (no survey, water-table raster or peat raster); "
                    "set run.crs and run.resolution")


def _regrid(grid: RunGrid, res: float) -> RunGrid:
    left, bottom, right, top = grid.bounds
    w = max(1, int(round((right - left) / res)))
    h = max(1, int(round((top - bottom) / res)))
    return RunGrid(grid.crs, Affine(res, 0, left, 0, -res, top), w, h)


def _utm_for(info) -> str:
    """The UTM CRS of the centre of a lon/lat raster (pyproj's estimate_utm_crs)."""
    from pyproj import CRS as PCRS
    from pyproj.aoi import AreaOfInterest
    from pyproj.database import query_utm_crs_info

    t = info.transform
    lon = t.c + t.a * info.width / 2
    lat = t.f + t.e * info.height / 2
    found = query_utm_crs_info(datum_name="WGS 84", area_of_interest=AreaOfInterest(lon, lat, lon, lat))
    return f"EPSG:{found[0].code}" if found else PCRS.from_epsg(3395).to_string()


def _raster_params(cfg: RunConfig) -> dict[str, RasterRef]:
    out = {}
    if cfg.survey is not None and isinstance(cfg.survey.subsidence_rate, RasterRef):
        out["depth.survey.subsidence_rate"] = cfg.survey.subsidence_rate
    if cfg.water_table is not None and cfg.water_table.raster is not None:
        out["depth.water_table.depth"] = cfg.water_table.raster
    if cfg.flaming is not None and isinstance(cfg.flaming.biomass, RasterRef):
        out["flaming.biomass"] = cfg.flaming.biomass
    for key in ("thickness", "bulk_density", "carbon_fraction"):
        v = getattr(cfg.peat, key)
        if isinstance(v, RasterRef):
            out[f"peat.{key}"] = v
    if cfg.peat.extent is not None and _is_raster_path(cfg.peat.extent):
        out["peat.extent"] = RasterRef(cfg.peat.extent)
    return out


def _param_source(value, key: str):
    """A constant stays a float; a raster becomes a RasterSource with its unit scale."""
    if value is None:
        return None
    if isinstance(value, RasterRef):
        return RasterSource(str(value.path), key, scale=value.scale)
    return float(value)


# --------------------------------------------------------------------------------------------
# co-registration

@dataclass(frozen=True)
class SurveyAlignment:  # noqa: D101
    """How the post survey is aligned to the pre survey, and the stable-ground QA."""

    shift_x: float
    shift_y: float
    shift_z: float
    tilt: tuple | None
    post_transform: Affine
    nmad_before: float
    nmad_after: float
    median_before: float
    median_after: float
    n_stable_sample: int
    lod: float
    sample_decimation: int
    stable_sample: tuple = field(default=(), repr=False, compare=False)  # (x, y, residual) after alignment [m]

    def to_dict(self) -> dict:
        return {
            "method": "Nuth & Kääb (2011) horizontal/vertical shift via xdem; planar tilt: "
                      + ("least squares on stable-ground residuals" if self.tilt else "not applied"),
            "shift_x_m": self.shift_x, "shift_y_m": self.shift_y, "vertical_offset_m": self.shift_z,
            "tilt_coefficients": list(self.tilt) if self.tilt else None,
            "stable_nmad_before_m": self.nmad_before, "stable_nmad_after_m": self.nmad_after,
            "stable_median_before_m": self.median_before, "stable_median_after_m": self.median_after,
            "stable_sample_pixels": self.n_stable_sample, "level_of_detection_m": self.lod,
            "sample_decimation": self.sample_decimation,
        }


def _stable_mask(inputs: Inputs, grid: RunGrid, window: Window) -> np.ndarray:
    buffered = WindowRasterizer(shapely.buffer(inputs.scars.geometries, inputs.config.survey.stable_buffer_m))
    outside = ~buffered.mask(grid, window)
    if inputs.stable is not None:
        return outside & WindowRasterizer(inputs.stable.geometries).mask(grid, window)
    return outside


def _read_param(src, grid: RunGrid, window: Window):
    if src is None:
        return None
    if isinstance(src, float):
        return np.full((int(window.height), int(window.width)), src)
    with GridReader(src, grid) as r:
        return r.read(window)


def _subsidence(cfg: RunConfig, grid: RunGrid, window: Window, sub_src=None):
    src = sub_src if sub_src is not None else _param_source(cfg.survey.subsidence_rate, "depth.survey.subsidence_rate")
    rate = _read_param(src, grid, window)
    if rate is None:
        return 0.0
    return survey.subsidence_lowering(rate, cfg.survey.interval_years)


#: Gap of missing pixels between sample windows in the co-registration mosaic [pixels]: wider than the
#: reach of the slope kernel and of a resampled shift of a few pixels.
MOSAIC_GUTTER = 8
#: Stable pixels the sample windows must hold before the decimated whole view is used instead [pixels].
MIN_WINDOW_STABLE = 10_000


@dataclass
class _SampleWindow:
    window: Window
    pre: np.ndarray
    post_raw: np.ndarray  # post survey + subsidence, before alignment [m]
    sub: object  # subsidence lowering [m], scalar or array
    stable: np.ndarray


def coregister(inputs: Inputs, random_state: int = 0) -> SurveyAlignment:
    """Estimate the post survey's shift on stable ground and measure the stable-ground spread
    before and after alignment.

    Both steps use the same evenly spread full-resolution sample windows
    (:func:`sample_windows`, at most :data:`SAMPLE_PIXELS` pixels), read once: the shift is
    estimated on a mosaic of them (:func:`_mosaic`), so the cost does not grow with the survey.
    When the windows hold too little stable ground (a survey mostly outside its grid, say), the
    shift is estimated on a decimated view of the whole grid instead.
    """
    cfg, grid = inputs.config, inputs.grid
    windows = sample_windows(grid, cfg.block_size)
    samples = []
    pre_src = RasterSource(str(cfg.survey.pre), "depth.survey.pre")
    raw_src = RasterSource(str(cfg.survey.post), "depth.survey.post")
    with GridReader(pre_src, grid) as rp, GridReader(raw_src, grid) as rr:
        for w in windows:
            sub = _subsidence(cfg, grid, w)
            samples.append(_SampleWindow(w, rp.read(w), rr.read(w) + sub, sub, _stable_mask(inputs, grid, w)))
    n_ok = sum(int(np.count_nonzero(s.stable & np.isfinite(s.pre) & np.isfinite(s.post_raw))) for s in samples)
    whole = len(windows) == len(grid.windows(cfg.block_size))
    factor = 1
    if whole or n_ok >= MIN_WINDOW_STABLE:
        pre, post_c, stable, transform = _mosaic(samples, grid, whole)
    else:
        factor = max(1, math.ceil(math.sqrt(grid.size / SAMPLE_PIXELS)))
        pre, post_c, stable, transform = _decimated_view(inputs, factor)
    if not np.isfinite(pre).any() or not np.isfinite(post_c).any():
        raise GridError("depth.survey: the pre- or post-fire survey holds no data on the run grid; "
                        "check nodata values and extents")
    try:
        est = coregistration.estimate_shift(pre, post_c, stable, transform, grid.crs, random_state=random_state)
    except ValueError as exc:
        raise GridError(f"depth.survey: co-registration impossible: {exc}; give a larger area of unburned ground "
                        f"(depth.survey.stable) or reduce depth.survey.stable_buffer_m") from None
    del pre, post_c, stable
    post_info = inputs.rasters["depth.survey.post"]
    post_t = Affine.translation(*_shift_in_crs(est.shift_x, est.shift_y, grid, post_info.crs)) @ post_info.transform

    # stable-ground statistics at full resolution on the same windows
    before, after, xs, ys = [], [], [], []
    al_src = RasterSource(str(cfg.survey.post), "depth.survey.post", src_transform=post_t)
    with GridReader(al_src, grid) as ra:
        for s in samples:
            w = s.window
            b = s.pre - s.post_raw
            a = s.pre - (ra.read(w) + s.sub + est.shift_z)
            ok = s.stable & np.isfinite(a) & np.isfinite(b)
            before.append(b[ok])
            after.append(a[ok])
            x, y = grid.pixel_centres(w)
            xs.append(np.broadcast_to(x, a.shape)[ok])
            ys.append(np.broadcast_to(y, a.shape)[ok])
    before = np.concatenate(before)
    after = np.concatenate(after)
    tilt = None
    if cfg.survey.tilt and after.size > 100:
        # residual after = pre - post_aligned; a plane added to the post survey removes it
        tilt = coregistration.fit_plane(np.concatenate(xs), np.concatenate(ys), after)
        after = after - coregistration.plane(np.concatenate(xs), np.concatenate(ys), tilt)
    s_after = float(survey.nmad(after))
    xs_all, ys_all = np.concatenate(xs), np.concatenate(ys)
    keep = np.random.default_rng(random_state).permutation(after.size)[:STABLE_SAMPLE_MAX]
    return SurveyAlignment(
        shift_x=est.shift_x, shift_y=est.shift_y, shift_z=est.shift_z, tilt=tilt, post_transform=post_t,
        nmad_before=float(survey.nmad(before)), nmad_after=s_after,
        median_before=float(np.median(before)) if before.size else float("nan"),
        median_after=float(np.median(after)) if after.size else float("nan"),
        n_stable_sample=int(after.size), lod=float(survey.level_of_detection(s_after, cfg.survey.lod_t)),
        sample_decimation=factor, stable_sample=(xs_all[keep], ys_all[keep], after[keep]),
    )


def _mosaic(samples: list, grid: RunGrid, whole: bool):
    """The sample windows side by side in one float32 array for the shift estimate (xdem works in
    float32), with its geotransform.

    When the windows tile the whole grid they keep their places (the mosaic is the grid). Else
    they are laid out in rows, separated by :data:`MOSAIC_GUTTER` missing pixels so that no slope
    or resampled value mixes two windows. A pure translation is estimated the same way at any
    position, so the mosaic only needs the grid's pixel size and axis directions.
    """
    if whole:
        pre = np.full(grid.shape, np.nan, "float32")
        post = np.full(grid.shape, np.nan, "float32")
        stable = np.zeros(grid.shape, bool)
        for s in samples:
            sl = (slice(int(s.window.row_off), int(s.window.row_off + s.window.height)),
                  slice(int(s.window.col_off), int(s.window.col_off + s.window.width)))
            pre[sl], post[sl], stable[sl] = s.pre, s.post_raw, s.stable
        return pre, post, stable, grid.transform
    g = MOSAIC_GUTTER
    per_row = max(1, math.ceil(math.sqrt(len(samples))))
    rows = [samples[i:i + per_row] for i in range(0, len(samples), per_row)]
    height = sum(max(s.pre.shape[0] for s in r) for r in rows) + g * (len(rows) + 1)
    width = max(sum(s.pre.shape[1] for s in r) + g * (len(r) + 1) for r in rows)
    pre = np.full((height, width), np.nan, "float32")
    post = np.full((height, width), np.nan, "float32")
    stable = np.zeros((height, width), bool)
    r0 = g
    for r in rows:
        c0 = g
        for s in r:
            h, w = s.pre.shape
            pre[r0:r0 + h, c0:c0 + w], post[r0:r0 + h, c0:c0 + w], stable[r0:r0 + h, c0:c0 + w] = \
                s.pre, s.post_raw, s.stable
            c0 += w + g
        r0 += max(s.pre.shape[0] for s in r) + g
    t = grid.transform
    return pre, post, stable, Affine(t.a, t.b, t.c, t.d, t.e, t.f)


def _decimated_view(inputs: Inputs, factor: int):
    """Both surveys read whole through a decimating warp (``factor`` pixels a side become one)."""
    cfg, grid = inputs.config, inputs.grid
    sg = grid.decimated(factor)
    whole = Window(0, 0, sg.width, sg.height)
    pre = read_on_grid(RasterSource(str(cfg.survey.pre), "depth.survey.pre"), sg)
    post = read_on_grid(RasterSource(str(cfg.survey.post), "depth.survey.post"), sg)
    return pre, post + _subsidence(cfg, sg, whole), _stable_mask(inputs, sg, whole), sg.transform


def _shift_in_crs(dx: float, dy: float, grid: RunGrid, crs) -> tuple[float, float]:
    """A translation (dx, dy) in the run CRS expressed in ``crs`` at the grid centre (the same
    numbers when both CRSs agree; a local linearisation otherwise, exact enough for the sub-metre
    to metre shifts of co-registration)."""
    if crs == grid.crs:
        return dx, dy
    from rasterio.warp import transform as warp_transform

    left, bottom, right, top = grid.bounds
    cx, cy = (left + right) / 2, (bottom + top) / 2
    xs, ys = warp_transform(grid.crs, crs, [cx, cx + dx], [cy, cy + dy])
    return xs[1] - xs[0], ys[1] - ys[0]


def sample_windows(grid: RunGrid, block: int, max_pixels: int | None = None) -> list[Window]:
    """Evenly spread block windows whose pixels add up to at most ``max_pixels``
    (default :data:`SAMPLE_PIXELS`)."""
    max_pixels = SAMPLE_PIXELS if max_pixels is None else max_pixels
    wins = grid.windows(block)
    n = max(1, min(len(wins), max_pixels // (block * block)))
    idx = np.unique(np.linspace(0, len(wins) - 1, n).round().astype(int))
    return [wins[i] for i in idx]


# --------------------------------------------------------------------------------------------
# the plan and one block

METHOD_CODES = {"survey": 1, "water_table": 2, "tier1": 3}
#: depth_method.tif code of burned mineral soil (thickness 0 or outside the peat extent): no peat burned.
MINERAL_CODE = 4
#: Internal zone layer of the burn scars themselves (per-scar sums for the daily series and years).
SCAR_LAYER = "__scars__"
METHODS = tuple(METHOD_CODES)

#: Quantities summed per zone and for the run [m2, m3, kg, kg/m ...].
SUM_KEYS = (
    "burned_area_m2", "estimated_area_m2", "depth_area_m2", "volume_m3", "peat_kg", "carbon_kg",
    "unestimated_area_m2", "below_lod_area_m2", "capped_area_m2",
    # burned mineral soil (thickness 0 or outside the peat extent); ground burned more than once (in the
    # scar layer: each fire's whole area shared with another); survey outliers; filled peat properties
    "mineral_area_m2", "repeat_area_m2", "outlier_area_m2", "rho_filled_area_m2", "cf_filled_area_m2",
    # peat and carbon of pixels whose bulk density or carbon fraction was filled (wider spread)
    "peat_kg_filled", "carbon_kg_filled",
    # water-table-modelled pixels whose water table lies outside the fitted range (clamped to it)
    "wt_extrapolated_area_m2",
    *(f"{k}_{m}" for m in METHODS for k in ("area_m2", "peat_kg", "carbon_kg")),
    # for zone-level Monte Carlo: mass per metre of depth over survey / water-table pixels
    "rho_area_survey", "rho_f_area_survey",
    # over water-table pixels where the model is not clipped (0 < a + b wt < thickness): there the
    # depth responds linearly to the coefficients (peatburn.science.uncertainty)
    "wt_area", "wt_area_wt", "wt_rho_area", "wt_rho_area_wt", "wt_rho_f_area", "wt_rho_f_area_wt",
    # Tier 1 applied to every burned pixel (side-by-side columns) [kg dry matter, kg C]
    "tier1_all_peat_kg", "tier1_all_carbon_kg",
    # flaming by burned area x biomass [t dry matter available above ground]
    "biomass_t",
)


@dataclass
class DepthModels:
    """Water-table depth models: one for all scars, or one for first and one for repeat fires."""

    all: object  # science.water_table.DepthModel
    first: object | None = None
    repeat: object | None = None

    def to_dict(self) -> dict:
        out = {"all": self.all.to_dict()}
        if self.first is not None:
            out["first_fire"] = self.first.to_dict()
        if self.repeat is not None:
            out["repeat_fire"] = self.repeat.to_dict()
        return out


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
    models: DepthModels | None = None
    tier1_fuel_t_ha: float = 0.0
    biomass: object = None  # RasterSource | float | None [t/ha]
    extent: object = None  # RasterSource (non-zero = organic soil) | geometries array | None
    rho_fill: float = float("nan")  # fallback bulk density for holes [g cm-3] (science.peat.fill_missing)
    cf_fill: float = float("nan")  # fallback carbon fraction for holes [-]
    fill_cv: float = 0.0  # relative spread of a filled value (uncertainty source peat_property_fill)
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
        models=models,
        tier1_fuel_t_ha=cfg.tier1.fuel_consumption_t_ha or tier1_default_fuel(),
        biomass=_param_source(cfg.flaming.biomass, "flaming.biomass") if cfg.flaming else None,
        extent=_extent_source(inputs), **fill,
    )


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


@dataclass
class BlockResult:
    """One window's results, compact: the rasters only at the burned pixels (a worker sends this
    back to the writing process; most of a block is usually unburned).

    ``zones`` holds per layer only the summed quantities that are not zero in this window.
    """

    window: Window
    burned: np.ndarray | None  # bool mask of the window; None when nothing burned
    depth_b: np.ndarray  # burn depth at the burned pixels [m], NaN where no depth (float32)
    cdens_b: np.ndarray  # carbon density at the burned pixels [kg C m-2] (float32)
    codes: np.ndarray  # METHOD_CODES at the burned pixels (uint8)
    total: dict  # key -> float
    zones: list  # per layer: key -> array(n_bins)

    @property
    def shape(self) -> tuple[int, int]:
        return int(self.window.height), int(self.window.width)

    def _full(self, values, fill, dtype):
        out = np.full(self.shape, fill, dtype)
        if self.burned is not None:
            out[self.burned] = values
        return out

    @property
    def depth(self) -> np.ndarray:
        """Burn depth of the window [m], NaN where no depth (float32)."""
        return self._full(self.depth_b, np.nan, "float32")

    @property
    def carbon_density(self) -> np.ndarray:
        """Carbon burned per area [kg C m-2], NaN where not estimated (float32)."""
        return self._full(self.cdens_b, np.nan, "float32")

    @property
    def method(self) -> np.ndarray:
        """Depth method code per pixel (uint8 METHOD_CODES), 0 outside the burned area."""
        return self._full(self.codes, 0, "uint8")

    def __getstate__(self):
        state = dict(self.__dict__)
        if self.burned is not None:
            state["burned"] = np.packbits(self.burned)  # a bit per pixel on the way to the writer
        return state

    def __setstate__(self, state):
        if state["burned"] is not None:
            h, w = int(state["window"].height), int(state["window"].width)
            state["burned"] = np.unpackbits(state["burned"], count=h * w).reshape(h, w).astype(bool)
        self.__dict__.update(state)


_LOCAL = threading.local()


def _state(plan: RunPlan):
    """Readers and rasterizers of a plan, opened once per thread (GDAL datasets must not be shared
    by threads running at the same time; a thread keeps those of its latest plan)."""
    cache = getattr(_LOCAL, "cache", None)
    if cache is None:
        cache = _LOCAL.cache = {}
    st = cache.get(plan.token)
    if st is None:
        for old in cache.values():
            for r in old["readers"].values():
                r.close()
        cache.clear()
        readers = {}
        for name in ("pre", "post", "subsidence_rate", "thickness", "bulk_density", "carbon_fraction",
                     "water_table", "biomass", "extent"):
            src = getattr(plan, name)
            if isinstance(src, RasterSource):
                readers[name] = GridReader(src, plan.grid)
        st = {
            "readers": readers,
            "scars": WindowRasterizer(plan.scars),
            "fire_count": WindowRasterizer(plan.scars, values=plan.scar_fire_counts)
            if plan.scar_fire_counts is not None else None,
            "zones": [ZoneLayerIndex.from_geometries(n, ids, g) for n, ids, g in plan.zone_layers],
            "extent": WindowRasterizer(plan.extent) if isinstance(plan.extent, np.ndarray) else None,
        }
        cache[plan.token] = st
    return st


def _param(st, plan, name, window):
    src = getattr(plan, name)
    if src is None:
        return None
    if isinstance(src, float):
        return src
    return st["readers"][name].read(window)


def _at(x, sel: np.ndarray, shape):
    """``x`` (scalar, or an array broadcastable to ``shape``) at the pixels ``sel``; scalars stay scalars."""
    if x is None or np.ndim(x) == 0:
        return x
    return np.broadcast_to(x, shape)[sel]


def survey_depth(st, plan: RunPlan, window: Window, where: np.ndarray | None = None):
    """Raw and capped survey burn depth of a window [m] (NaN where a survey is missing).

    With ``where`` (a boolean mask of the window) both are 1-D, at those pixels only.
    """
    shape = (int(window.height), int(window.width))
    sel = np.ones(shape, bool) if where is None else where
    pre, post, rate, thick = _survey_inputs(st, plan, window, sel)
    raw, capped = _depth_from_survey(plan, window, sel, pre, post, rate, thick)
    if where is None:
        return raw.reshape(shape), capped.reshape(shape)
    return raw, capped


def _survey_inputs(st, plan: RunPlan, window: Window, sel: np.ndarray):
    """Pre survey, post survey, subsidence rate and peat thickness at the pixels ``sel`` (1-D
    arrays, or scalars for constants; the surveys None without a survey)."""
    shape = sel.shape
    thick = _at(_param(st, plan, "thickness", window), sel, shape)
    if plan.pre is None:
        return None, None, None, thick
    pre = st["readers"]["pre"].read(window)[sel]
    post = st["readers"]["post"].read(window)[sel]
    rate = _at(_param(st, plan, "subsidence_rate", window), sel, shape)
    return pre, post, rate, thick


def _depth_from_survey(plan: RunPlan, window: Window, sel: np.ndarray, pre, post, rate, thick):
    """Raw and capped burn depth at the pixels ``sel`` from the surveys there [m]."""
    n = int(np.count_nonzero(sel))
    if pre is None:
        nan = np.full(n, np.nan)
        return nan, nan
    post = post + plan.shift_z
    if plan.tilt is not None:
        x, y = plan.grid.pixel_centres(window)
        post = post + np.broadcast_to(coregistration.plane(x, y, plan.tilt), sel.shape)[sel]
    sub = 0.0 if rate is None else survey.subsidence_lowering(rate, plan.interval_years)
    raw = survey.burn_depth(pre, post, sub)
    # the cap acts beyond the level of detection only (no low bias at the cap; docs/method.md 2.4)
    return raw, (raw if thick is None else peat.cap_depth(raw, thick, plan.lod))


def water_table_depth(st, plan: RunPlan, window: Window, where: np.ndarray) -> np.ndarray:
    """Water-table depth at fire time on a window [m below surface]: raster, or IDW of stations at
    the pixels of ``where`` only (NaN elsewhere)."""
    shape = (int(window.height), int(window.width))
    if plan.water_table is not None:
        v = _param(st, plan, "water_table", window)
        return np.broadcast_to(v, shape).astype("float64") if np.ndim(v) == 0 else v
    out = np.full(shape, np.nan)
    scar = st["scars"].rasterize(plan.grid, window)[where] if plan.station_days is not None else None
    out[where] = _idw_at(plan, window, where, scar)
    return out


def _idw_at(plan: RunPlan, window: Window, where: np.ndarray, scar=None) -> np.ndarray:
    """Water-table depth interpolated from the stations at the pixels ``where`` (1-D) [m]; with
    dated readings (``plan.station_days``) and ``scar`` (1-based scar index at those pixels), each
    scar's pixels use the readings nearest its fire start."""
    n = int(np.count_nonzero(where))
    if plan.stations is None or n == 0:
        return np.full(n, np.nan)
    from ..science.water_table import idw

    shape = where.shape
    x, y = plan.grid.pixel_centres(window)
    px, py = np.broadcast_to(x, shape)[where], np.broadcast_to(y, shape)[where]
    power, k, dmax = plan.idw
    if plan.station_days is None or scar is None:
        sx, sy, sv = plan.stations
        return idw(sx, sy, sv, px, py, power=power, k=k, max_distance=dmax)
    group_of_scar, subsets = plan.station_days[0], plan.station_days[1]
    group = np.where(scar > 0, group_of_scar[np.maximum(scar, 1) - 1], -1)
    out = np.full(n, np.nan)
    for g in np.unique(group):
        sel = group == g
        sx, sy, sv = plan.stations if g < 0 else subsets[g]
        out[sel] = idw(sx, sy, sv, px[sel], py[sel], power=power, k=k, max_distance=dmax)
    return out


#: Row of each summed quantity in a block's weight matrix.
_ROW = {k: i for i, k in enumerate(SUM_KEYS)}


@dataclass
class BlockData:
    """What one window reads: its burned pixels and every input at them (1-D arrays, or scalars
    for constants), and the zone bins of those pixels. ``burned`` is None when nothing burned."""

    window: Window
    burned: np.ndarray | None
    area: np.ndarray = None  # [m2]
    rho: object = None  # [g cm-3]
    cf: object = None  # [-]
    pre: np.ndarray | None = None  # [m]
    post: np.ndarray | None = None  # [m], co-registered, before the vertical term
    rate: object = None  # subsidence rate [m/yr]
    thick: object = None  # [m]
    wt: object = None  # water-table raster or constant [m]; None with stations (interpolated later)
    fire_count: np.ndarray | None = None
    scar: np.ndarray | None = None  # 1-based scar index (only with dated station readings)
    edge: np.ndarray | None = None  # distance to the scar edge [m] (only when the depth model tapers)
    biomass: object = None  # [t/ha]
    in_extent: np.ndarray | None = None  # inside the organic-soil extent (None: no extent given)
    zone_bins: list = field(default_factory=list)  # per layer: per pass 1-D bins


def read_block(plan: RunPlan, window: Window) -> BlockData:
    """All the reading and rasterizing of one window (GDAL work, no arithmetic of the method)."""
    st = _state(plan)
    grid = plan.grid
    shape = (int(window.height), int(window.width))
    burned = st["scars"].mask(grid, window)
    if not burned.any():  # most blocks of a national mosaic: no reads, no zone rasterization
        return BlockData(window, None)

    def at(x):
        return _at(x, burned, shape)

    pre, post, rate, thick = _survey_inputs(st, plan, window, burned)
    fire_count = None
    m = plan.models
    if m is not None and m.first is not None and m.repeat is not None and st["fire_count"] is not None:
        fire_count = st["fire_count"].rasterize(grid, window, dtype="float64")[burned]
    return BlockData(
        window, burned, area=np.broadcast_to(grid.pixel_area(window), shape)[burned],
        rho=at(_param(st, plan, "bulk_density", window)), cf=at(_param(st, plan, "carbon_fraction", window)),
        pre=pre, post=post, rate=rate, thick=thick,
        wt=at(_param(st, plan, "water_table", window)) if m is not None else None,
        fire_count=fire_count, biomass=at(_param(st, plan, "biomass", window)),
        in_extent=_in_extent(st, plan, window, burned),
        scar=st["scars"].rasterize(grid, window)[burned] if plan.station_days is not None and m is not None else None,
        edge=edge_distance(st, plan, window, EDGE_REACH * _taper_m(m))[burned] if _taper_m(m) > 0 else None,
        zone_bins=[[b[burned] for b in z.bin_rasters(grid, window)] for z in st["zones"]],
    )


def _in_extent(st, plan: RunPlan, window: Window, burned: np.ndarray):
    """Inside the organic-soil extent at the burned pixels (None without an extent)."""
    if plan.extent is None:
        return None
    if st["extent"] is not None:
        return st["extent"].mask(plan.grid, window)[burned]
    v = st["readers"]["extent"].read(window)[burned]
    return np.isfinite(v) & (v != 0)


def process_block(plan: RunPlan, window: Window) -> BlockResult:
    """Burn depth (survey, else water-table model, else Tier 1), peat mass and carbon of one window,
    with zone sums: :func:`read_block` then :func:`compute_block`."""
    return compute_block(plan, read_block(plan, window))


def compute_block(plan: RunPlan, data: BlockData) -> BlockResult:
    """The method on the burned pixels of one window read by :func:`read_block` (arithmetic only).

    Everything is computed on 1-D vectors of the burned pixels; the summed quantities are rows of
    one matrix reduced per zone pass by ``bincount`` (:func:`peatburn.engine.zones.accumulate_stacked`).
    """
    window, burned = data.window, data.burned
    shape = (int(window.height), int(window.width))
    n_bins = [len(ids) + 2 for _, ids, _ in plan.zone_layers]
    if burned is None:
        none = np.zeros(0, "float32")
        return BlockResult(window, None, none, none, np.zeros(0, "uint8"), {k: 0.0 for k in SUM_KEYS},
                           [{} for _ in n_bins])
    n = int(np.count_nonzero(burned))
    area = data.area
    # holes in the peat properties are filled (Tier 1 is the last resort for the depth, never for them)
    rho, rho_filled = peat.fill_missing(np.broadcast_to(data.rho, n), plan.rho_fill)
    cf, cf_filled = peat.fill_missing(np.broadcast_to(data.cf, n), plan.cf_fill)
    thick = data.thick
    # burned mineral soil (thickness 0, or outside the extent): nothing burns below ground there
    mineral = np.broadcast_to(peat.mineral_soil(thick, data.in_extent), n)
    organic = ~mineral
    peat_ok = np.isfinite(rho) & np.isfinite(cf) & organic
    raw, depth_s = _depth_from_survey(plan, window, burned, data.pre, data.post, data.rate, thick)
    m_survey = np.isfinite(depth_s) & peat_ok
    depth = np.where(m_survey, depth_s, np.nan)
    m_wt = np.zeros(n, bool)
    m_lin = m_wt
    wt = None
    if plan.models is not None:
        need = ~m_survey & peat_ok
        if data.wt is not None:
            wt = np.broadcast_to(data.wt, n).astype("float64")
        else:
            wt = np.full(n, np.nan)
            need_full = np.zeros(shape, bool)
            need_full[burned] = need
            wt[need] = _idw_at(plan, window, need_full, None if data.scar is None else data.scar[need])
        m_wt = need & np.isfinite(wt)
        if m_wt.any():
            wt, m_out = _clamp_to_fit(plan.models, wt, m_wt)
            depth = np.where(m_wt, _model_depth(plan, wt, thick, data.fire_count, data.edge), depth)
            taper = 1.0
            if data.edge is not None:
                from ..science.water_table import edge_taper

                taper = edge_taper(data.edge, plan.models.all.edge_taper_m)
            lin = (plan.models.all.intercept + plan.models.all.slope * np.where(m_wt, wt, 0.0)) * taper
            cap = np.inf if thick is None else np.where(np.isfinite(thick), thick, np.inf)
            m_lin = m_wt & (lin > 0) & (lin < cap)
    m_t1 = ~m_survey & ~m_wt & np.isfinite(cf) & organic
    valid_depth = m_survey | m_wt
    estimated = valid_depth | m_t1 | mineral  # mineral soil: estimated, as zero
    with np.errstate(invalid="ignore"):
        mass = np.where(valid_depth, peat.peat_dry_mass(depth, rho, area), 0.0)
    fuel_kg_m2 = plan.tier1_fuel_t_ha * peat.KG_M2_PER_T_HA  # Tier 1 fuel consumption [kg m-2]
    t1_mass_all = np.where(organic, fuel_kg_m2 * area, 0.0)  # kg per pixel, on organic soil only
    mass = np.where(m_t1, t1_mass_all, mass)
    cf0 = np.where(np.isfinite(cf), cf, 0.0)
    carbon = np.where(estimated, peat.carbon_mass(mass, cf0), 0.0)
    lod_mask = survey.below_detection(depth, plan.lod) & m_survey if np.isfinite(plan.lod) else None
    rho_a = np.where(peat_ok, rho * peat.KG_M3_PER_G_CM3 * area, 0.0)
    rho_f_a = rho_a * cf0

    w = np.empty((len(SUM_KEYS), n))  # only the rows in ``used`` are ever written or read
    used = []  # rows holding anything: only those are reduced per zone
    # row -> (an earlier row, factor): its sums are the earlier row's times the factor. Factor 1: the
    # same array on every pixel; other factors: a constant times the same pixels (constant peat
    # properties, the Tier 1 fuel), so one bincount serves both
    alias = {}
    whole = {}  # id of an array put on every pixel -> (its row, the array)

    def put(key, mask, v):
        everywhere = mask is True or mask.all()
        if not everywhere and not mask.any():
            return
        r = _ROW[key]
        if everywhere and id(v) in whole:
            alias[r] = (whole[id(v)][0], 1.0)
            return
        if everywhere:
            w[r] = v
        else:
            w[r] = 0.0
            np.copyto(w[r], v, where=mask)
        used.append(r)
        if everywhere:
            whole[id(v)] = (r, v)  # holding v keeps its id from being reused by a later temporary

    def scaled(key, src_key, factor, v=None):
        """``key`` = ``factor`` x the row ``src_key`` on every pixel (``v``: the array it stands for)."""
        r, src = _ROW[key], _ROW[src_key]
        if src not in used and src not in alias:
            return  # the source is zero in this block: so is this row
        alias[r] = (src, float(factor))
        if v is not None:
            whole[id(v)] = (r, v)

    # constant, finite bulk density and carbon fraction (the usual inventory case): the peat rows are
    # constants times the volume and area rows [kg = (g cm-3 x kg m-3 per g cm-3) x m3]
    const_peat = np.ndim(data.rho) == 0 and np.ndim(data.cf) == 0 and bool(peat_ok.all())
    any_mineral = bool(mineral.any())
    k_rho = float(data.rho) * peat.KG_M3_PER_G_CM3 if const_peat else None
    only_survey = const_peat and not m_wt.any() and not m_t1.any()
    put("burned_area_m2", True, area)
    put("estimated_area_m2", estimated, area)
    put("depth_area_m2", valid_depth, area)
    put("volume_m3", valid_depth, depth * area)
    if only_survey:  # mass = depth x rho x K x area, carbon = mass x cf, on the surveyed pixels only
        scaled("peat_kg", "volume_m3", k_rho, mass)
        scaled("carbon_kg", "volume_m3", k_rho * float(data.cf), carbon)
    else:
        put("peat_kg", estimated, mass)
        put("carbon_kg", True, carbon)
    put("unestimated_area_m2", ~estimated, area)
    put("mineral_area_m2", mineral, area)
    if lod_mask is not None:
        put("below_lod_area_m2", lod_mask, area)
        put("outlier_area_m2", survey.outliers(raw, plan.lod, thick) & m_survey, area)
    put("rho_filled_area_m2", rho_filled & valid_depth, area)  # where the density was used
    put("cf_filled_area_m2", cf_filled & (valid_depth | m_t1), area)
    filled = (rho_filled | cf_filled) & valid_depth
    if filled.any():
        put("peat_kg_filled", filled, mass)
        put("carbon_kg_filled", filled, carbon)
    with np.errstate(invalid="ignore"):
        put("capped_area_m2", m_survey & (raw > depth_s), area)
    if m_wt.any():
        put("wt_extrapolated_area_m2", m_out, area)
    if m_lin.any():
        wt_f = np.where(m_lin, wt, 0.0)
        # depth = f (a + b wt) with the edge taper f (1 without): its derivatives carry f
        f_a, f_rho_a, f_rho_f_a = (area, rho_a, rho_f_a) if data.edge is None else (
            area * taper, rho_a * taper, rho_f_a * taper)
        put("wt_area", m_lin, f_a)
        put("wt_area_wt", m_lin, f_a * wt_f)
        put("wt_rho_area", m_lin, f_rho_a)
        put("wt_rho_area_wt", m_lin, f_rho_a * wt_f)
        put("wt_rho_f_area", m_lin, f_rho_f_a)
        put("wt_rho_f_area_wt", m_lin, f_rho_f_a * wt_f)
    for name, m in (("survey", m_survey), ("water_table", m_wt), ("tier1", m_t1)):
        if m.any():
            put(f"area_m2_{name}", m, area)
            put(f"peat_kg_{name}", m, mass)
            put(f"carbon_kg_{name}", m, carbon)
    if const_peat:  # rho x K x area and rho x K x cf x area over the surveyed pixels
        scaled("rho_area_survey", "area_m2_survey", k_rho)
        scaled("rho_f_area_survey", "area_m2_survey", k_rho * float(data.cf))
    else:
        put("rho_area_survey", m_survey, rho_a)
        put("rho_f_area_survey", m_survey, rho_f_a)
    if not any_mineral:  # fuel x area on every burned pixel
        scaled("tier1_all_peat_kg", "burned_area_m2", fuel_kg_m2)
    else:  # ... of organic soil only
        put("tier1_all_peat_kg", organic, t1_mass_all)
    if np.ndim(data.cf) == 0 and np.isfinite(data.cf):
        scaled("tier1_all_carbon_kg", "tier1_all_peat_kg", float(data.cf))
    else:
        put("tier1_all_carbon_kg", True, t1_mass_all * cf0)
    if data.biomass is not None:
        b = np.broadcast_to(data.biomass, n)
        put("biomass_t", np.isfinite(b), b * (area * peat.HA_PER_M2))  # t/ha x ha

    def root(r):
        while r in alias:
            r = alias[r][0]
        return r

    # repeat burns: a pixel inside k scars gives each 1/k of every quantity (outputs/fires.py), and its
    # whole area to each one's repeat_area_m2; in the zones and the total, repeat_area_m2 is the ground
    # that burned more than once
    cover = coverage_count(data.zone_bins[-1])  # the scar layer is the last layer
    repeat = cover > 1
    nonzero = sorted(set(used) | set(alias))
    total_sums = np.zeros(len(SUM_KEYS))
    for r in used:
        total_sums[r] = w[r].sum()
    rows = sorted({root(r) for r in nonzero})
    w_scar = w
    if repeat.any():
        w_scar = np.empty_like(w)
        w_scar[rows] = w[rows] / np.maximum(cover, 1)
    sums = [total_sums] + [
        accumulate_stacked(bins, w_scar if name == SCAR_LAYER else w, nb, rows=rows)
        for (name, _, _), bins, nb in zip(plan.zone_layers, data.zone_bins, n_bins)]
    if repeat.any():
        r_rep = _ROW["repeat_area_m2"]
        rep_w = np.where(repeat, area, 0.0)[None, :]
        total_sums[r_rep] = rep_w.sum()
        for a, bins, nb in zip(sums[1:], data.zone_bins, n_bins):
            a[r_rep] = accumulate_stacked(bins, rep_w, nb)[0]
        nonzero.append(r_rep)
    for r, (src, factor) in alias.items():  # in the order defined: a source is final before it is used
        for a in sums:
            a[r] = a[src] * factor
    total = dict(zip(SUM_KEYS, sums[0].tolist()))
    zsums = [{SUM_KEYS[r]: a[r] for r in nonzero} for a in sums[1:]]
    codes = np.zeros(n, "uint8")
    codes[m_survey] = METHOD_CODES["survey"]
    codes[m_wt] = METHOD_CODES["water_table"]
    codes[m_t1] = METHOD_CODES["tier1"]
    codes[mineral] = MINERAL_CODE
    depth = np.where(mineral, 0.0, depth)  # no peat, so no peat burned (burn_depth.tif shows 0)
    with np.errstate(invalid="ignore", divide="ignore"):
        cdens = np.where(estimated, carbon / area, np.nan).astype("float32")
    return BlockResult(window, burned, depth.astype("float32"), cdens, codes, total, zsums)


def edge_distance(st, plan: RunPlan, window: Window, reach_m: float) -> np.ndarray:
    """Distance from each pixel centre of ``window`` to the nearest pixel centre outside every scar [m]
    (0 outside the scars), by :func:`scipy.ndimage.distance_transform_edt` on the scar mask of the
    window padded by ``reach_m`` (so scars crossing the window's border are measured whole up to
    that distance; farther distances are underestimated, and the edge taper is flat there). Pixels
    are taken as squares of side sqrt(pixel area) (exact for square projected pixels)."""
    from scipy.ndimage import distance_transform_edt

    side = float(np.sqrt(np.mean(plan.grid.pixel_area(window))))
    pad = int(math.ceil(reach_m / side)) + 1
    h, w = int(window.height), int(window.width)
    big = Window(window.col_off - pad, window.row_off - pad, w + 2 * pad, h + 2 * pad)
    dist = distance_transform_edt(st["scars"].mask(plan.grid, big), sampling=side)
    return dist[pad:pad + h, pad:pad + w]


#: Reach of the edge distance [m] as a multiple of the taper distance: 1 - exp(-5) = 0.993.
EDGE_REACH = 5.0


def _clamp_to_fit(models: DepthModels, wt: np.ndarray, sel: np.ndarray):
    """The water table clamped to the range the model was fitted on (no change for user or default
    coefficients, which have none), and the mask of the pixels of ``sel`` that were outside it."""
    lo, hi = models.all.water_table_range
    if not (math.isfinite(lo) and math.isfinite(hi)):
        return wt, np.zeros(wt.shape, bool)
    with np.errstate(invalid="ignore"):
        out = sel & ((wt < lo) | (wt > hi))
    return (np.clip(wt, lo, hi) if out.any() else wt), out


def _taper_m(models) -> float:
    """The edge-taper distance of the run's depth model [m] (0: none, or no model)."""
    return 0.0 if models is None else float(getattr(models.all, "edge_taper_m", 0.0) or 0.0)


def _model_depth(plan: RunPlan, wt: np.ndarray, thick, fire_count, edge=None) -> np.ndarray:
    """Modelled depth from the water table (1-D, with ``thick``, ``fire_count`` and ``edge`` at the same pixels)."""
    from ..science.water_table import predict_depth

    m = plan.models
    if fire_count is not None:
        return np.where(fire_count >= 2, predict_depth(m.repeat, wt, thick, edge), predict_depth(m.first, wt, thick, edge))
    return predict_depth(m.all, wt, thick, edge)


# --------------------------------------------------------------------------------------------
# water-table model: samples, fit, plots

def depth_samples(inputs: Inputs, plan: RunPlan, max_samples: int = 200_000, seed: int = 0):
    """Pairs of (water-table depth, survey burn depth, fire count, scar) on surveyed burned pixels,
    from evenly spread sample windows [m, m, -, -]; see :func:`depth_sample_table`."""
    t = depth_sample_table(inputs, plan, max_samples, seed)
    return t["wt"], t["depth"], t["fire_count"], t["scar"]


def depth_sample_table(inputs: Inputs, plan: RunPlan, max_samples: int = 200_000, seed: int = 0,
                       edge_reach_m: float = 0.0) -> dict:
    """Surveyed burned pixels from evenly spread sample windows: ``wt`` (water-table depth [m]),
    ``depth`` (survey burn depth, capped by the thickness [m]), ``thickness`` [m] (NaN unknown),
    ``weight`` (bulk density x carbon fraction x pixel area [kg C per m of depth]), ``scar`` (1-based
    scar index), ``fire_count`` (None without a fire-count field) and, with ``edge_reach_m`` > 0,
    ``edge`` (distance to the scar edge [m], :func:`edge_distance`)."""
    st = _state(plan)
    wts, ds, fcs, cls, ths, wgs, eds = [], [], [], [], [], [], []
    grid = plan.grid
    for w in sample_windows(grid, plan.block_size):
        scar_id = st["scars"].rasterize(grid, w)  # 1-based scar index, 0 outside (last polygon wins)
        burned = scar_id > 0
        if not burned.any():
            continue
        _, d = survey_depth(st, plan, w)
        # mineral soil (thickness 0, outside the peat extent) burns no peat: not a calibration pair
        everywhere = np.ones(burned.shape, bool)
        ext = _in_extent(st, plan, w, everywhere)
        mineral = peat.mineral_soil(_param(st, plan, "thickness", w),
                                    None if ext is None else ext.reshape(burned.shape))
        ok = burned & np.isfinite(d) & ~mineral
        wt = water_table_depth(st, plan, w, ok)
        ok &= np.isfinite(wt)
        if not ok.any():
            continue
        shape, n_ok = ok.shape, int(np.count_nonzero(ok))

        def at_ok(name, unknown):
            v = _at(_param(st, plan, name, w), ok, shape)
            return np.broadcast_to(unknown if v is None else v, n_ok).astype("float64")

        thick = at_ok("thickness", np.nan)
        # carbon per metre of depth [kg m-1] (density unknown: 1 per m2, so the CV weighs by area)
        weight = (at_ok("bulk_density", 1.0 / peat.KG_M3_PER_G_CM3) * peat.KG_M3_PER_G_CM3
                  * at_ok("carbon_fraction", 1.0) * np.broadcast_to(grid.pixel_area(w), shape)[ok])
        wts.append(wt[ok])
        ds.append(d[ok])
        cls.append(scar_id[ok])
        ths.append(thick)
        wgs.append(weight)
        if edge_reach_m > 0:
            eds.append(edge_distance(st, plan, w, edge_reach_m)[ok])
        if st["fire_count"] is not None:
            fcs.append(st["fire_count"].rasterize(grid, w, dtype="float64")[ok])
    if not wts:
        return {"wt": np.array([]), "depth": np.array([]), "fire_count": None, "scar": None,
                "thickness": np.array([]), "weight": np.array([]), "edge": None}
    out = {"wt": np.concatenate(wts), "depth": np.concatenate(ds), "scar": np.concatenate(cls),
           "thickness": np.concatenate(ths), "weight": np.concatenate(wgs),
           "fire_count": np.concatenate(fcs) if fcs else None, "edge": np.concatenate(eds) if eds else None}
    n = out["wt"].size
    if n > max_samples:
        keep = np.random.default_rng(seed).choice(n, max_samples, replace=False)
        out = {k: (v[keep] if v is not None else None) for k, v in out.items()}
    return out


MIN_FIT_SAMPLES = 30


def plot_samples(inputs: Inputs, plan: RunPlan):
    """Water-table depth at each field plot (raster value, or IDW of stations) and the measured depth."""
    if inputs.plots is None or not len(inputs.plots.frame):
        return np.array([]), np.array([])
    f = inputs.plots.frame
    x, y = f.geometry.x.to_numpy(), f.geometry.y.to_numpy()
    obs = f["value"].to_numpy(dtype=float)
    wt = sample_points(plan, "water_table", x, y) if plan.water_table is not None else None
    if wt is None and plan.stations is not None:
        from ..science.water_table import idw

        power, k, dmax = plan.idw
        sx, sy, sv = plan.stations
        wt = idw(sx, sy, sv, x, y, power=power, k=k, max_distance=dmax)
    if wt is None:
        return np.array([]), np.array([])
    return wt, obs


def sample_points(plan: RunPlan, name: str, x, y) -> np.ndarray | None:
    """Values of a plan raster at points (nearest pixel of the run grid), NaN outside."""
    src = getattr(plan, name)
    if src is None:
        return None
    if isinstance(src, float):
        return np.full(len(x), src)
    grid = plan.grid
    inv = ~grid.transform
    out = np.full(len(x), np.nan)
    with GridReader(src, grid) as r:
        for i, (xx, yy) in enumerate(zip(x, y)):
            c, rr = inv * (xx, yy)
            c, rr = int(math.floor(c)), int(math.floor(rr))
            if 0 <= c < grid.width and 0 <= rr < grid.height:
                out[i] = r.read(Window(c, rr, 1, 1))[0, 0]
    return out


def fit_models(inputs: Inputs, plan: RunPlan, notes: list) -> DepthModels:
    """The water-table depth models of a run: fitted on surveyed scars (separately for first and repeat
    fires when both have enough samples), else on field plots, else user or default coefficients."""
    from ..science import water_table as wtm

    cfg = inputs.config.water_table
    if plan.station_days is not None:
        _, subsets, window, n_without = plan.station_days
        notes.append(f"water table: station readings chosen per scar, nearest its fire start within {window:g} days "
                     f"({len(subsets)} fire date(s))" + (f"; {n_without} scar(s) have no reading in that window and "
                                                         f"get no water-table depth" if n_without else ""))
    if cfg.model == "user":
        m = wtm.DepthModel(cfg.intercept, cfg.slope, float("nan"), float("nan"), float("nan"), 0, float("nan"),
                           float("nan"), "user-given coefficients", "user")
        return DepthModels(m)
    if cfg.model == "file":
        return load_models(cfg.model_file)
    if cfg.model == "default":
        notes.append("water table: default depth-model coefficients used (low confidence)")
        return DepthModels(wtm.DEFAULT_MODEL)
    kw = {"method": cfg.fit_method, "target": cfg.fit_target, "water_table_error_m": cfg.error_m}
    chosen_taper = cfg.edge_taper  # "cv", a distance [m], or None
    reach = EDGE_REACH * (max(wtm.EDGE_TAPER_CANDIDATES_M) if chosen_taper == "cv" else (chosen_taper or 0.0))
    t = depth_sample_table(inputs, plan, edge_reach_m=reach) if plan.pre is not None else None
    wt, d = (t["wt"], t["depth"]) if t is not None else (np.array([]), np.array([]))
    fc, cl, th, wg, ed = ((t["fire_count"], t["scar"], t["thickness"], t["weight"], t["edge"]) if t is not None
                          else (None,) * 5)
    source = "surveyed scars"
    if wt.size < MIN_FIT_SAMPLES:
        wt, d = plot_samples(inputs, plan)
        ok = np.isfinite(wt) & np.isfinite(d)
        wt, d, fc, cl, th, wg, ed = wt[ok], d[ok], None, None, None, None, None
        source = "field plots"
    if wt.size < MIN_FIT_SAMPLES:
        notes.append(f"water table: too few calibration pairs ({wt.size} < {MIN_FIT_SAMPLES}) on surveyed scars or "
                     f"field plots; default coefficients used (low confidence)")
        return DepthModels(wtm.DEFAULT_MODEL)
    # standard errors by a bootstrap over whole scars (pixels of one scar are not independent)
    clusters = cl if cl is not None and len(np.unique(cl)) >= 3 else None

    taper = 0.0
    if chosen_taper == "cv" and clusters is not None and ed is not None:
        pick = wtm.select_edge_taper(wt, d, cl, ed, weight=wg, thickness_m=th, **kw)
        taper = pick["taper_m"]
        notes.append("water table: edge taper by leave-scar-out cross-validation (rms relative error of scar carbon "
                     "per taper distance: " + ", ".join(f"{k:g} m {v:.1%}" for k, v in pick["rmse"].items())
                     + f"): {'none' if not taper else f'{taper:g} m'}")
    elif chosen_taper == "cv":
        notes.append("water table: no edge taper: choosing one needs at least 3 surveyed scars")
    elif chosen_taper and ed is not None:
        taper = float(chosen_taper)
    kw = {**kw, "edge_taper_m": taper}

    def fit(sel):
        """The model on the pairs ``sel``, with its leave-scar-out error when there are scars."""
        c = None if clusters is None else cl[sel]
        e = None if not taper else ed[sel]
        m = wtm.fit_depth_model(wt[sel], d[sel], cluster=c if c is not None and len(np.unique(c)) >= 3 else None,
                                thickness_m=None if th is None else th[sel], edge_distance_m=e, **kw)
        if c is not None and len(np.unique(c)) >= 3:
            cv = wtm.scar_cross_validation(wt[sel], d[sel], c, weight=wg[sel], thickness_m=th[sel],
                                           edge_distance_m=e, **kw)
            m = wtm.with_cross_validation(m, cv)
        return m

    every = np.ones(wt.size, bool)
    models = DepthModels(fit(every))
    notes.append(f"water table: depth model fitted on {wt.size} pairs from {source} ({models.all.estimator})")
    if models.all.cv_n_scars:
        notes.append(f"water table: leave-scar-out error of scar carbon over {models.all.cv_n_scars} scars: bias "
                     f"{models.all.cv_bias:+.1%}, RMSE {models.all.cv_rmse:.1%}")
    else:
        notes.append("water table: no leave-scar-out error (fewer than 3 surveyed scars, or a fit on field plots); "
                     "the Monte Carlo uses the in-sample scatter, which understates the error of a missed scar")
    if fc is not None:
        first, rep = fc < 2, fc >= 2
        n_first = len(np.unique(cl[first])) if cl is not None else 0
        n_rep = len(np.unique(cl[rep])) if cl is not None else 0
        enough = min(n_first, n_rep) >= wtm.MIN_SCARS_PER_GROUP
        if enough and first.sum() >= MIN_FIT_SAMPLES and rep.sum() >= MIN_FIT_SAMPLES:
            models.first = fit(first)
            models.repeat = fit(rep)
            notes.append(f"water table: separate models for first ({n_first} scars, {int(first.sum())} pairs) and "
                         f"repeat fires ({n_rep} scars, {int(rep.sum())} pairs)")
        else:
            notes.append(f"water table: one model for first and repeat fires: separate models need at least "
                         f"{wtm.MIN_SCARS_PER_GROUP} surveyed scars (and {MIN_FIT_SAMPLES} pairs) of each "
                         f"({n_first} first-fire, {n_rep} repeat-fire scars)")
    return models


def load_models(path) -> DepthModels:
    """Depth models from a JSON written by ``peatburn calibrate``."""
    import json

    from ..errors import ConfigError
    from ..science import water_table as wtm

    try:
        data = json.loads(Path(path).read_text(encoding="utf-8"))
        models = data["models"]

        def mk(d):  # fields added since a file was written take their defaults
            return wtm.DepthModel.from_dict(d)

        return DepthModels(mk(models["all"]), mk(models["first_fire"]) if "first_fire" in models else None,
                           mk(models["repeat_fire"]) if "repeat_fire" in models else None)
    except (OSError, ValueError, KeyError, TypeError) as exc:
        raise ConfigError(f"depth.water_table.model: cannot read a depth model from {path} ({exc}); "
                          f"write it with `peatburn calibrate CONFIG --out FILE`") from None


# --------------------------------------------------------------------------------------------
# combining

@dataclass
class Sums:
    """Sums over the run and per zone layer (arrays indexed by bin: 0 unused, 1..n zones, n+1 outside)."""

    total: dict
    layers: list  # (name, ids, {key: array})

    @classmethod
    def empty(cls, plan: RunPlan) -> "Sums":
        return cls({k: 0.0 for k in SUM_KEYS},
                   [(n, ids, {k: np.zeros(len(ids) + 2) for k in SUM_KEYS}) for n, ids, _ in plan.zone_layers])

    def add(self, r: BlockResult):
        for k in SUM_KEYS:
            self.total[k] += r.total[k]
        for (_, _, acc), z in zip(self.layers, r.zones):
            for k, v in z.items():  # only the quantities not zero in the block
                acc[k] += v
