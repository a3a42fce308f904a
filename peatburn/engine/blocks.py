"""One block of the run: :func:`read_block` (file work) then :func:`compute_block` (the method on
the burned pixels, arithmetic only), and the compact :class:`BlockResult`.

:func:`process_block` is a module-level function of a picklable :class:`~peatburn.engine.plan.RunPlan`,
so any executor (serial, local processes, dask) can run it.
"""

from __future__ import annotations

import math
import threading
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np
from rasterio.windows import Window

from ..io.rasters import GridReader, RasterSource
from ..io.vectors import WindowRasterizer
from ..science import coregistration, peat, survey
from .plan import RunPlan
from .sums import METHOD_CODES, MINERAL_CODE, SCAR_LAYER, SUM_KEYS
from .zones import ZoneLayerIndex, accumulate_stacked, compact_bins, coverage_count

if TYPE_CHECKING:
    from .depth_models import DepthModels

@dataclass
class BlockResult:
    """One window's results, compact: the rasters only at the burned pixels (a worker sends this
    back to the writing process; most of a block is usually unburned).

    ``zones`` holds per layer ``(present, sums)``: the bins the window touches (sorted, distinct) and,
    for the summed quantities that are not zero in this window only, their sums at those bins.
    """

    window: Window
    burned: np.ndarray | None  # bool mask of the window; None when nothing burned
    depth_b: np.ndarray  # burn depth at the burned pixels [m], NaN where no depth (float32)
    cdens_b: np.ndarray  # carbon density at the burned pixels [kg C m-2] (float32)
    codes: np.ndarray  # METHOD_CODES at the burned pixels (uint8)
    total: dict  # key -> float
    zones: list  # per layer: (bins touched, key -> array at those bins)

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
                     "water_table", "biomass", "extent", "quality"):
            src = getattr(plan, name)
            if isinstance(src, RasterSource):
                readers[name] = GridReader(src, plan.grid)
        for i, (src, _) in enumerate(plan.water_table_dated):
            readers[f"water_table_{i}"] = GridReader(src, plan.grid)
        for i, (depth, method) in enumerate(plan.earlier_burns):
            readers[f"earlier_depth_{i}"] = GridReader(depth, plan.grid)
            readers[f"earlier_method_{i}"] = GridReader(method, plan.grid)
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


def _param_at(st, plan, name, window, sel: np.ndarray):
    """A run parameter at the pixels ``sel`` of ``window`` (1-D; a scalar for a constant, None when not
    given): ``_at(_param(...), sel)`` without converting the rest of the window."""
    src = getattr(plan, name)
    if src is None or isinstance(src, float):
        return src
    return st["readers"][name].read_at(window, sel)


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


def thickness_at(st, plan: RunPlan, window: Window, sel: np.ndarray):
    """Peat thickness at the pixels ``sel`` [m] (1-D, a scalar for a constant, None unknown); in a later
    year of a series, the peat the earlier years left (science.peat.thickness_left, docs/method.md 7.7)."""
    thick = _param_at(st, plan, "thickness", window, sel)
    if plan.earlier_burns and thick is not None:
        rho = _param_at(st, plan, "bulk_density", window, sel)
        rho = peat.fill_missing(np.broadcast_to(np.asarray(rho, "float64"), (int(np.count_nonzero(sel)),)),
                                plan.rho_fill)[0]
        removed = [peat.earlier_removed_depth(d, code == METHOD_CODES["tier1"], _earlier_fuel(plan, i), rho)
                   for i, (d, code) in enumerate(_earlier_codes(st, plan, window, sel))]
        thick = peat.thickness_left(thick, removed)
    return thick


def _earlier_fuel(plan: RunPlan, i: int) -> float:
    """Tier 1 fuel consumption [t/ha] of the i-th earlier year (this run's when not given)."""
    fuel = getattr(plan, "earlier_tier1_fuel", ())
    return float(fuel[i]) if i < len(fuel) else float(plan.tier1_fuel_t_ha)


def series_fire_count(st, plan: RunPlan, window: Window, sel: np.ndarray):
    """Fire count at the pixels ``sel``: the scars' own count where they carry one, else 1 + the
    earlier years of a series that burned there; None when neither is known."""
    if st["fire_count"] is not None:
        return st["fire_count"].rasterize(plan.grid, window, dtype="float64")[sel]
    if plan.earlier_burns:
        return 1.0 + peat.fires_before([b for _, b in _earlier_burns(st, plan, window, sel)])
    return None


def _survey_inputs(st, plan: RunPlan, window: Window, sel: np.ndarray):
    """Pre survey, post survey, subsidence rate and peat thickness at the pixels ``sel`` (1-D
    arrays, or scalars for constants; the surveys None without a survey)."""
    thick = thickness_at(st, plan, window, sel)
    if plan.pre is None:
        return None, None, None, thick
    pre = st["readers"]["pre"].read_at(window, sel)
    post = st["readers"]["post"].read_at(window, sel)
    rate = _param_at(st, plan, "subsidence_rate", window, sel)
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
    if plan.water_table is not None or plan.water_table_dated:
        v = _water_table_raster(st, plan, window)
        return np.broadcast_to(v, shape).astype("float64") if np.ndim(v) == 0 else v
    out = np.full(shape, np.nan)
    scar = st["scars"].rasterize(plan.grid, window)[where] if plan.station_days is not None else None
    out[where] = _idw_at(plan, window, where, scar)
    return out


def _water_table_raster(st, plan: RunPlan, window: Window):
    """The water-table raster (or constant) on a window [m]; with several dated rasters, each scar's
    pixels from the raster chosen for it (``plan.raster_days``: the one nearest its fire start within
    the window, the mean of all for an undated scar, NaN for a scar with none in the window) and NaN
    outside the scars. None without a water-table raster."""
    if not plan.water_table_dated:
        return _param(st, plan, "water_table", window)
    scar = st["scars"].rasterize(plan.grid, window)  # 1-based scar index, 0 outside
    index = plan.raster_days[0]
    pick = np.where(scar > 0, index[np.maximum(scar, 1) - 1], -2)
    out = np.full(pick.shape, np.nan)
    for g in np.unique(pick):
        if g == -2:
            continue
        sel = pick == g
        if g >= 0:
            out[sel] = st["readers"][f"water_table_{g}"].read(window)[sel]
        else:  # undated scar: the mean of the rasters (NaN only where every raster is)
            stack = np.stack([st["readers"][f"water_table_{i}"].read(window)[sel]
                              for i in range(len(plan.water_table_dated))])
            n = np.isfinite(stack).sum(axis=0)
            with np.errstate(invalid="ignore", divide="ignore"):
                out[sel] = np.where(n > 0, np.nansum(stack, axis=0) / np.maximum(n, 1), np.nan)
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
    scale_sd: np.ndarray | None = None  # per-pixel survey error sd [m] (only with a spread that varies)
    shift_grad: tuple | None = None  # residual shift sd x (dz/dx, dz/dy) [m] (only with a residual shift map)
    zone_bins: list = field(default_factory=list)  # per layer: per pass 1-D bins


def read_block(plan: RunPlan, window: Window) -> BlockData:
    """All the reading and rasterizing of one window (GDAL work, no arithmetic of the method)."""
    st = _state(plan)
    grid = plan.grid
    shape = (int(window.height), int(window.width))
    # the scars' own zone layer, rasterized once: its bins give the burned mask too (a pixel is burned
    # where a pass of the layer puts a scar: the same polygons and GDAL rule as rasterizing all at once)
    zones = st["zones"]
    scar_i = next((i for i, z in enumerate(zones) if z.name == SCAR_LAYER and len(z.ids) == len(plan.scars)), None)
    scar_passes = zones[scar_i].pass_rasters(grid, window) if scar_i is not None else None
    if scar_passes is not None:
        burned = np.zeros(shape, bool)
        for b in scar_passes:
            if b is not None:
                burned |= b > 0
    else:
        burned = st["scars"].mask(grid, window)
    if not burned.any():  # most blocks of a national mosaic: no reads, no zone rasterization
        return BlockData(window, None)

    def at(x):
        return _at(x, burned, shape)

    pre, post, rate, thick = _survey_inputs(st, plan, window, burned)  # thickness left, in a series
    fire_count = None
    m = plan.models
    if m is not None and m.first is not None and m.repeat is not None:
        fire_count = series_fire_count(st, plan, window, burned)
    return BlockData(
        window, burned, area=np.broadcast_to(grid.pixel_area(window), shape)[burned],
        rho=_param_at(st, plan, "bulk_density", window, burned),
        cf=_param_at(st, plan, "carbon_fraction", window, burned),
        pre=pre, post=post, rate=rate, thick=thick,
        wt=(_param_at(st, plan, "water_table", window, burned) if not plan.water_table_dated
            else at(_water_table_raster(st, plan, window))) if m is not None else None,
        fire_count=fire_count, biomass=_param_at(st, plan, "biomass", window, burned),
        in_extent=_in_extent(st, plan, window, burned),
        scar=st["scars"].rasterize(grid, window)[burned] if plan.station_days is not None and m is not None else None,
        edge=edge_distance(st, plan, window, EDGE_REACH * _taper_m(m))[burned] if _taper_m(m) > 0 else None,
        zone_bins=[z.bins_at(scar_passes, shape, burned) if i == scar_i else z.bin_rasters(grid, window, burned)
                   for i, z in enumerate(zones)],
        **(survey_error_terms(st, plan, window, burned) if plan.error_scale is not None and pre is not None else {}),
    )


def survey_error_terms(st, plan: RunPlan, window: Window, sel: np.ndarray) -> dict:
    """The survey error terms that vary in space at the pixels ``sel`` (science.error_scale), as BlockData
    fields: ``scale_sd``, the per-pixel sd [m] (with a spread that varies), and ``shift_grad``, the local
    residual shift sd times the pre-fire gradient (dz/dx, dz/dy) [m] (with a residual shift map). The
    gradient is taken on the window and a one-pixel rim (block edges get central differences like the
    inside); a missing variable takes its stable-ground median, a missing gradient 0."""
    from ..science import error_scale
    from .alignment import pixel_sides_m

    grid, es = plan.grid, plan.error_scale
    r0, c0 = int(window.row_off), int(window.col_off)
    h, w = int(window.height), int(window.width)
    top, left = max(r0 - 1, 0), max(c0 - 1, 0)
    bottom, right = min(r0 + h + 1, grid.height), min(c0 + w + 1, grid.width)
    z = st["readers"]["pre"].read(Window(left, top, right - left, bottom - top))
    inner = (slice(r0 - top, r0 - top + h), slice(c0 - left, c0 - left + w))
    gx, gy = (g[inner][sel] for g in error_scale.surface_gradient(z, *pixel_sides_m(grid, window)))
    n = int(np.count_nonzero(sel))
    out = {}
    xy = None
    if es.get("local") is not None or es.get("shift") is not None:
        x, y = grid.pixel_centres(window)
        xx, yy = np.broadcast_arrays(x, y)
        xy = (xx[sel], yy[sel])
    if es.get("spread", True):
        variables = {"slope": np.hypot(gx, gy)}
        if "quality" in es["variables"]:
            variables["quality"] = st["readers"]["quality"].read(window)[sel]
        variables = {k: v for k, v in variables.items() if k in es["variables"]}
        filled = {k: np.where(np.isfinite(v), v, es["fill"][k]) for k, v in variables.items()}
        sd = error_scale.error_scale_at(es["coefficients"], filled)
        if es.get("local") is not None:  # times the map of the local spread
            sd = sd * error_scale.local_scale_at(es["local"], *xy)
        out["scale_sd"] = np.broadcast_to(sd, (n,))
    if es.get("shift") is not None:
        s = error_scale.local_shift_at(es["shift"], *xy)
        out["shift_grad"] = (s * np.where(np.isfinite(gx), gx, 0.0), s * np.where(np.isfinite(gy), gy, 0.0))
    return out


def _earlier_burns(st, plan: RunPlan, window: Window, burned: np.ndarray) -> list:
    """Per earlier year of a series, (burn depth [m], burned) at the burned pixels: the depth of its
    burn_depth.tif (NaN: none) and whether its depth_method.tif marks the pixel burned (code > 0)."""
    return [(d, np.isfinite(code) & (code > 0)) for d, code in _earlier_codes(st, plan, window, burned)]


def _earlier_codes(st, plan: RunPlan, window: Window, burned: np.ndarray) -> list:
    """Per earlier year of a series, (burn depth [m], depth-method code) at the burned pixels."""
    return [(st["readers"][f"earlier_depth_{i}"].read(window)[burned],
             st["readers"][f"earlier_method_{i}"].read(window)[burned]) for i in range(len(plan.earlier_burns))]


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
    if burned is None:
        none = np.zeros(0, "float32")
        return BlockResult(window, None, none, none, np.zeros(0, "uint8"), {k: 0.0 for k in SUM_KEYS},
                           [(np.zeros(0, np.int64), {}) for _ in plan.zone_layers])
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
            from ..science.water_table import covariate_factor

            taper = covariate_factor(plan.models.all, data.edge, thick)  # edge taper x thin-peat factor (1: none)
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
        # depth = f (a + b wt) with the covariate factor f (1 without): its derivatives carry f
        f_a, f_rho_a, f_rho_f_a = (area, rho_a, rho_f_a) if np.ndim(taper) == 0 and taper == 1.0 else (
            area * taper, rho_a * taper, rho_f_a * taper)
        put("wt_area", m_lin, f_a)
        put("wt_area_wt", m_lin, f_a * wt_f)
        put("wt_rho_area", m_lin, f_rho_a)
        put("wt_rho_area_wt", m_lin, f_rho_a * wt_f)
        put("wt_rho_f_area", m_lin, f_rho_f_a)
        put("wt_rho_f_area_wt", m_lin, f_rho_f_a * wt_f)
    masks = {"survey": m_survey, "water_table": m_wt, "tier1": m_t1}  # one per depth method
    for name, m in masks.items():
        if m.any():
            put(f"area_m2_{name}", m, area)
            put(f"peat_kg_{name}", m, mass)
            put(f"carbon_kg_{name}", m, carbon)
    if data.scale_sd is not None:  # A sd^2 over the surveyed pixels: a zone's RMS survey error sd
        put("sd2_area_survey", m_survey, area * data.scale_sd**2)
    if data.shift_grad is not None:  # A s grad z over the surveyed pixels: a residual shift's zone error
        put("shift_gx_area_survey", m_survey, area * data.shift_grad[0])
        put("shift_gy_area_survey", m_survey, area * data.shift_grad[1])
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
    # per layer, only the bins this block touches (a national run's scar layer has a bin per scar)
    compact = [compact_bins(bins) for bins in data.zone_bins]
    sums = [total_sums] + [
        accumulate_stacked(local, w_scar if name == SCAR_LAYER else w, len(present) + 1, rows=rows)
        for (name, _, _), (present, local) in zip(plan.zone_layers, compact)]
    if repeat.any():
        r_rep = _ROW["repeat_area_m2"]
        rep_w = np.where(repeat, area, 0.0)[None, :]
        total_sums[r_rep] = rep_w.sum()
        for a, (present, local) in zip(sums[1:], compact):
            a[r_rep] = accumulate_stacked(local, rep_w, len(present) + 1)[0]
        nonzero.append(r_rep)
    for r, (src, factor) in alias.items():  # in the order defined: a source is final before it is used
        for a in sums:
            a[r] = a[src] * factor
    total = dict(zip(SUM_KEYS, sums[0].tolist()))
    zsums = [(present, {SUM_KEYS[r]: a[r, 1:] for r in nonzero}) for a, (present, _) in zip(sums[1:], compact)]
    codes = np.zeros(n, "uint8")
    for name, m in masks.items():
        codes[m] = METHOD_CODES[name]
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
