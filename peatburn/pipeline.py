"""Orchestration: configuration -> inputs on one grid -> co-registration -> blocks -> sums.

The science lives in :mod:`peatburn.science`; this module reads, aligns, plans and combines.
Per-block work (:func:`process_block`) is a module-level function of a picklable
:class:`RunPlan`, so any executor (serial, local processes) can run it.
"""

from __future__ import annotations

import math
import uuid
import warnings
from dataclasses import dataclass, field

import numpy as np
import shapely
from affine import Affine
from rasterio.windows import Window

from .config import RasterRef, RunConfig
from .errors import GridError
from .grid import RunGrid
from .io.rasters import GridReader, RasterSource, check_overlap, grid_from_raster, inspect_raster, read_on_grid
from .io.vectors import WindowRasterizer, read_polygons, zone_ids
from .science import coregistration, peat, survey
from .zones import ZoneLayerIndex, accumulate

#: Pixel budget of the co-registration sample (a decimated view of the whole grid).
SAMPLE_PIXELS = 4_000_000
#: Quantities summed per zone and for the run [m2, m3, kg].
SUM_KEYS = ("burned_area_m2", "estimated_area_m2", "volume_m3", "peat_kg", "carbon_kg",
            "unestimated_area_m2", "below_lod_area_m2", "capped_area_m2")


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
    notes: list[str] = field(default_factory=list)


def open_inputs(cfg: RunConfig) -> Inputs:
    """Open and check every input; build the run grid (the pre-fire survey's grid by default)."""
    rasters = {"depth.survey.pre": inspect_raster(cfg.survey.pre, "depth.survey.pre"),
               "depth.survey.post": inspect_raster(cfg.survey.post, "depth.survey.post")}
    for key, val in _raster_params(cfg).items():
        rasters[key] = inspect_raster(val.path, key)
    notes = []
    run_crs = cfg.crs
    pre = rasters["depth.survey.pre"]
    if run_crs is None and pre.crs.is_geographic:
        run_crs = _utm_for(pre)
        notes.append(f"run grid: the pre-fire survey is in a geographic CRS; differencing and co-registration need "
                     f"metres, so the run uses {run_crs} (set run.crs to choose another projected CRS)")
    grid = grid_from_raster(pre, run_crs)
    for key, info in rasters.items():
        check_overlap(info, grid, key)
    scars = read_polygons(cfg.burned_area, grid.crs, "burned_area.path", cfg.burned_area_layer)
    notes += [f"burned_area: {n}" for n in scars.notes]
    if len(scars.frame) == 0:
        raise GridError(f"burned_area.path: {cfg.burned_area} holds no polygon; nothing burned to estimate")
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
    if cfg.survey.stable is not None:
        stable = read_polygons(cfg.survey.stable, grid.crs, "depth.survey.stable")
    return Inputs(cfg, grid, rasters, scars, zones, stable, notes)


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
    if isinstance(cfg.survey.subsidence_rate, RasterRef):
        out["depth.survey.subsidence_rate"] = cfg.survey.subsidence_rate
    for key in ("thickness", "bulk_density", "carbon_fraction"):
        v = getattr(cfg.peat, key)
        if isinstance(v, RasterRef):
            out[f"peat.{key}"] = v
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
class SurveyAlignment:
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


def coregister(inputs: Inputs, random_state: int = 0) -> SurveyAlignment:
    """Estimate the post survey's shift on a decimated view of the stable ground, then measure the
    stable-ground spread before and after at full resolution on sample windows.
    """
    cfg, grid = inputs.config, inputs.grid
    factor = max(1, math.ceil(math.sqrt(grid.size / SAMPLE_PIXELS)))
    sg = grid.decimated(factor)
    whole = Window(0, 0, sg.width, sg.height)
    pre = read_on_grid(RasterSource(str(cfg.survey.pre), "depth.survey.pre"), sg)
    post = read_on_grid(RasterSource(str(cfg.survey.post), "depth.survey.post"), sg)
    if not np.isfinite(pre).any() or not np.isfinite(post).any():
        raise GridError("depth.survey: the pre- or post-fire survey holds no data on the run grid; "
                        "check nodata values and extents")
    post_c = post + _subsidence(cfg, sg, whole)
    stable = _stable_mask(inputs, sg, whole)
    try:
        est = coregistration.estimate_shift(pre, post_c, stable, sg.transform, grid.crs, random_state=random_state)
    except ValueError as exc:
        raise GridError(f"depth.survey: co-registration impossible: {exc}; give a larger area of unburned ground "
                        f"(depth.survey.stable) or reduce depth.survey.stable_buffer_m") from None
    post_info = inputs.rasters["depth.survey.post"]
    post_t = Affine.translation(*_shift_in_crs(est.shift_x, est.shift_y, grid, post_info.crs)) @ post_info.transform

    # stable-ground statistics at full resolution on sample windows
    before, after, xs, ys = [], [], [], []
    pre_src = RasterSource(str(cfg.survey.pre), "depth.survey.pre")
    raw_src = RasterSource(str(cfg.survey.post), "depth.survey.post")
    al_src = RasterSource(str(cfg.survey.post), "depth.survey.post", src_transform=post_t)
    with GridReader(pre_src, grid) as rp, GridReader(raw_src, grid) as rr, GridReader(al_src, grid) as ra:
        for w in sample_windows(grid, cfg.block_size):
            st = _stable_mask(inputs, grid, w)
            p = rp.read(w)
            sub = _subsidence(cfg, grid, w)
            b = p - (rr.read(w) + sub)
            a = p - (ra.read(w) + sub + est.shift_z)
            ok = st & np.isfinite(a) & np.isfinite(b)
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
    return SurveyAlignment(
        shift_x=est.shift_x, shift_y=est.shift_y, shift_z=est.shift_z, tilt=tilt, post_transform=post_t,
        nmad_before=float(survey.nmad(before)), nmad_after=s_after,
        median_before=float(np.median(before)) if before.size else float("nan"),
        median_after=float(np.median(after)) if after.size else float("nan"),
        n_stable_sample=int(after.size), lod=float(survey.level_of_detection(s_after, cfg.survey.lod_t)),
        sample_decimation=factor,
    )


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


def sample_windows(grid: RunGrid, block: int, max_pixels: int = SAMPLE_PIXELS) -> list[Window]:
    """Evenly spread block windows whose pixels add up to at most ``max_pixels``."""
    wins = grid.windows(block)
    n = max(1, min(len(wins), max_pixels // (block * block)))
    idx = np.unique(np.linspace(0, len(wins) - 1, n).round().astype(int))
    return [wins[i] for i in idx]


# --------------------------------------------------------------------------------------------
# the plan and one block

@dataclass
class RunPlan:
    """Everything one block needs; picklable so worker processes can run blocks."""

    grid: RunGrid
    pre: RasterSource
    post: RasterSource
    shift_z: float
    tilt: tuple | None
    subsidence_rate: object
    interval_years: float
    thickness: object
    bulk_density: object
    carbon_fraction: object
    scars: np.ndarray
    zone_layers: list  # (name, ids, geometries)
    lod: float
    block_size: int
    token: str = field(default_factory=lambda: uuid.uuid4().hex)


def build_plan(inputs: Inputs, alignment: SurveyAlignment) -> RunPlan:
    cfg = inputs.config
    return RunPlan(
        grid=inputs.grid,
        pre=RasterSource(str(cfg.survey.pre), "depth.survey.pre"),
        post=RasterSource(str(cfg.survey.post), "depth.survey.post", src_transform=alignment.post_transform),
        shift_z=alignment.shift_z, tilt=alignment.tilt,
        subsidence_rate=_param_source(cfg.survey.subsidence_rate, "depth.survey.subsidence_rate"),
        interval_years=cfg.survey.interval_years,
        thickness=_param_source(cfg.peat.thickness, "peat.thickness"),
        bulk_density=_param_source(cfg.peat.bulk_density, "peat.bulk_density"),
        carbon_fraction=_param_source(cfg.peat.carbon_fraction, "peat.carbon_fraction"),
        scars=np.asarray(inputs.scars.geometries, dtype=object),
        zone_layers=[(z.name, ids, np.asarray(layer.geometries, dtype=object)) for z, layer, ids in inputs.zones],
        lod=alignment.lod, block_size=cfg.block_size,
    )


@dataclass
class BlockResult:
    window: Window
    depth: np.ndarray  # m, NaN outside estimated pixels
    carbon_density: np.ndarray  # kg C m-2
    total: dict  # key -> float
    zones: list  # per layer: key -> array(n_bins)


_CACHE: dict = {}


def _state(plan: RunPlan):
    """Readers and rasterizers of a plan, opened once per process."""
    st = _CACHE.get(plan.token)
    if st is None:
        _CACHE.clear()
        readers = {}
        for name in ("pre", "post", "subsidence_rate", "thickness", "bulk_density", "carbon_fraction"):
            src = getattr(plan, name)
            if isinstance(src, RasterSource):
                readers[name] = GridReader(src, plan.grid)
        st = {
            "readers": readers,
            "scars": WindowRasterizer(plan.scars),
            "zones": [ZoneLayerIndex.from_geometries(n, ids, g) for n, ids, g in plan.zone_layers],
        }
        _CACHE[plan.token] = st
    return st


def _param(st, plan, name, window):
    src = getattr(plan, name)
    if src is None:
        return None
    if isinstance(src, float):
        return src
    return st["readers"][name].read(window)


def process_block(plan: RunPlan, window: Window) -> BlockResult:
    """Burn depth, peat mass and carbon of one window, with zone sums (pure of side effects
    except reading the inputs)."""
    st = _state(plan)
    grid = plan.grid
    shape = (int(window.height), int(window.width))
    burned = st["scars"].mask(grid, window)
    zone_bins = [(z, z.bin_rasters(grid, window)) for z in st["zones"]]
    if not burned.any():
        nan = np.full(shape, np.nan, dtype="float32")
        return BlockResult(window, nan, nan, {k: 0.0 for k in SUM_KEYS},
                           [{k: np.zeros(z.n_bins) for k in SUM_KEYS} for z, _ in zone_bins])
    pre = st["readers"]["pre"].read(window)
    post = st["readers"]["post"].read(window) + plan.shift_z
    if plan.tilt is not None:
        x, y = grid.pixel_centres(window)
        post = post + coregistration.plane(x, y, plan.tilt)
    rate = _param(st, plan, "subsidence_rate", window)
    sub = 0.0 if rate is None else survey.subsidence_lowering(rate, plan.interval_years)
    thick = _param(st, plan, "thickness", window)
    raw = survey.burn_depth(pre, post, sub)
    depth = raw if thick is None else peat.cap_depth(raw, thick)
    rho = _param(st, plan, "bulk_density", window)
    cf = _param(st, plan, "carbon_fraction", window)
    area = np.broadcast_to(grid.pixel_area(window), shape)
    valid = burned & np.isfinite(depth) & np.isfinite(np.broadcast_to(rho, shape)) & \
        np.isfinite(np.broadcast_to(cf, shape))
    depth = np.where(valid, depth, np.nan)
    mass = peat.peat_dry_mass(depth, rho, area)
    carbon = peat.carbon_mass(mass, cf)
    zero = np.zeros(shape)
    lod_mask = survey.below_detection(depth, plan.lod) & valid
    capped = valid & np.isfinite(raw) & (raw > depth)
    values = {
        "burned_area_m2": np.where(burned, area, 0.0),
        "estimated_area_m2": np.where(valid, area, 0.0),
        "volume_m3": np.where(valid, depth * area, 0.0),
        "peat_kg": np.where(valid, mass, 0.0),
        "carbon_kg": np.where(valid, carbon, 0.0),
        "unestimated_area_m2": np.where(burned & ~valid, area, zero),
        "below_lod_area_m2": np.where(lod_mask, area, 0.0),
        "capped_area_m2": np.where(capped, area, 0.0),
    }
    total = {k: float(v.sum()) for k, v in values.items()}
    zsums = [accumulate(bins, values, z.n_bins) for z, bins in zone_bins]
    cdens = np.where(valid, carbon / area, np.nan)
    return BlockResult(window, depth.astype("float32"), cdens.astype("float32"), total, zsums)


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
            for k in SUM_KEYS:
                acc[k] += z[k]
