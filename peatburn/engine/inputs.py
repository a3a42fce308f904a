"""Open and check every input of a run and choose the run grid."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import shapely
from affine import Affine

from ..config import RasterRef, RunConfig
from ..errors import GridError
from ..grid import RunGrid
from ..io.mosaics import RasterInput
from ..io.rasters import RasterSource, check_overlap, grid_from_raster, inspect_raster
from ..io.vectors import read_polygons, zone_ids


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
    burn_mask: object | None = None  # io.burn_rasters.MaskFires when burned_area.path is a raster mask

    @property
    def has_survey(self) -> bool:
        return self.config.survey is not None


def open_inputs(cfg: RunConfig) -> Inputs:
    """Open and check every input; build the run grid.

    The grid is the pre-fire survey's by default; without a survey, the water-table raster's, then
    the peat rasters'; else ``run.crs`` and ``run.resolution`` over the burn scars; else a burned-area
    mask's own grid.
    """
    rasters = {}
    if cfg.survey is not None:
        rasters["depth.survey.pre"] = inspect_raster(cfg.survey.pre, "depth.survey.pre")
        rasters["depth.survey.post"] = inspect_raster(cfg.survey.post, "depth.survey.post")
    for key, val in _raster_params(cfg).items():
        rasters[key] = inspect_raster(val.path, key)
    notes = []
    mask = _read_burn_mask(cfg)
    grid = _run_grid(cfg, rasters, notes, mask)
    for key, info in rasters.items():
        check_overlap(info, grid, key)
    scars = _burn_scars(cfg, grid.crs, mask)
    notes += [f"burned_area: {n}" for n in ([mask.describe()] if mask is not None else []) + scars.notes]
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
    return Inputs(cfg, grid, rasters, scars, zones, stable, stations, plots, notes, extent, burn_mask=mask)


def _read_burn_mask(cfg: RunConfig):
    """The fires of a burned-area raster (io.burn_rasters), or None for burn-scar polygons."""
    if cfg.burn_mask is None:
        return None
    from ..io.burn_rasters import read_burn_mask

    return read_burn_mask(cfg.burned_area, cfg.burn_mask, cfg.year, cfg.start_field, cfg.end_field)


def _burn_scars(cfg: RunConfig, crs, mask=None):
    """The burn scars in ``crs``: the polygon file, or the fires of the raster mask."""
    if mask is not None:
        return mask.to_layer(crs)
    return read_polygons(cfg.burned_area, crs, "burned_area.path", cfg.burned_area_layer)


def _is_raster_path(path) -> bool:
    if isinstance(path, RasterInput):  # tiles or a URL (io.mosaics)
        return True
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


def _run_grid(cfg: RunConfig, rasters: dict, notes: list, mask=None) -> RunGrid:
    keys = ("depth.survey.pre", "depth.water_table.depth", "depth.water_table.depth[0]", "peat.thickness",
            "peat.bulk_density", "peat.carbon_fraction")
    if mask is not None and not (cfg.crs and cfg.resolution) and not any(k in rasters for k in keys):
        # no other raster and no stated grid: the burned-area mask's own grid
        rasters = {**rasters, "burned_area.path": inspect_raster(cfg.burned_area, "burned_area.path")}
        keys += ("burned_area.path",)
    for key in keys:
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
        scars = _burn_scars(cfg, cfg.crs, mask)
        minx, miny, maxx, maxy = scars.frame.total_bounds
        r = cfg.resolution
        minx, miny = math.floor(minx / r) * r, math.floor(miny / r) * r
        maxx, maxy = math.ceil(maxx / r) * r, math.ceil(maxy / r) * r
        from affine import Affine as _A

        from ..grid import normalise_crs

        return RunGrid(normalise_crs(cfg.crs, "run.crs"), _A(r, 0, minx, 0, -r, maxy),
                       max(1, int(round((maxx - minx) / r))), max(1, int(round((maxy - miny) / r))))
    raise GridError("no raster defines the run grid (no survey, water-table raster, peat raster or burn mask); "
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
    if cfg.survey is not None and cfg.survey.quality is not None:
        out["depth.survey.quality"] = RasterRef(cfg.survey.quality)
    if cfg.water_table is not None and cfg.water_table.raster is not None:
        out["depth.water_table.depth"] = cfg.water_table.raster
    for i, (ref, _) in enumerate(cfg.water_table.dated_rasters if cfg.water_table is not None else ()):
        out[f"depth.water_table.depth[{i}]"] = ref  # dated rasters: each aligned onto the run grid
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
