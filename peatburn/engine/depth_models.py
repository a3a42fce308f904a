"""The run's water-table depth models: calibration pairs from surveyed scars or field plots, the
fits (one model, or first and repeat fires apart), and a model file written by ``peatburn calibrate``."""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np
from rasterio.windows import Window

from ..io.rasters import GridReader
from ..science import peat
from .alignment import sample_windows
from .blocks import (EDGE_REACH, _at, _in_extent, _param, _state, edge_distance, series_fire_count, survey_depth,
                     thickness_at, water_table_depth)
from .inputs import Inputs
from .plan import RunPlan

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
        th = thickness_at(st, plan, w, everywhere)  # the peat left, in a later year of a series
        th = th.reshape(burned.shape) if np.ndim(th) == 1 else th
        mineral = peat.mineral_soil(th, None if ext is None else ext.reshape(burned.shape))
        ok = burned & np.isfinite(d) & ~mineral
        wt = water_table_depth(st, plan, w, ok)
        ok &= np.isfinite(wt)
        if not ok.any():
            continue
        shape, n_ok = ok.shape, int(np.count_nonzero(ok))

        def at_ok(name, unknown):
            v = _at(_param(st, plan, name, w), ok, shape)
            return np.broadcast_to(unknown if v is None else v, n_ok).astype("float64")

        thick = np.broadcast_to(np.nan if th is None else th, shape)[ok].astype("float64")
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
        fc = series_fire_count(st, plan, w, ok)
        if fc is not None:
            fcs.append(fc)
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
    wt = water_table_at_points(plan, x, y)
    if wt is None:
        return np.array([]), np.array([])
    return wt, obs


def dated_raster_note(plan: RunPlan) -> str:
    """What the dated water-table rasters did, in one note: which raster the scars took, the window,
    and the scars with none in it (no water-table depth) or without a start date (the mean)."""
    pick, window, n_without, n_undated = plan.raster_days
    dates = [d for _, d in plan.water_table_dated]
    if not window > 0:
        return (f"water table: {len(dates)} dated rasters ({dates[0]} to {dates[-1]}) pooled: every scar uses their "
                f"mean (date_window_days = 0)")
    used = ", ".join(f"{dates[i]}: {int(np.sum(pick == i))}" for i in range(len(dates)))
    text = (f"water table: {len(dates)} dated rasters, each scar takes the one nearest its fire start within "
            f"{window:g} days (scars per raster: {used})")
    if n_without:
        text += (f"; {n_without} scar(s) have no raster within {window:g} days of their fire start and get no "
                 f"water-table depth (Tier 1 fills them; widen date_window_days to accept a farther raster)")
    if n_undated:
        text += f"; {n_undated} scar(s) have no fire start and use the mean of the rasters"
    return text


def water_table_at_points(plan: RunPlan, x, y) -> np.ndarray | None:
    """Water-table depth at points (field plots) [m]: the raster's value; with several dated rasters the
    one the scar holding the point took (``plan.raster_days``: nearest its fire start, the same raster as
    the scar's pixels; the mean of the rasters for a point in no scar or in an undated scar, NaN for a
    scar with none in the window); or IDW of the stations; None without a water table."""
    if plan.water_table_dated:
        import shapely

        # the scar holding each point (the last polygon wins, as when the scars are rasterized)
        pt, scar = shapely.STRtree(plan.scars).query(shapely.points(x, y), predicate="within")
        holder = np.full(len(x), -1)
        np.maximum.at(holder, pt, scar)
        pick = np.where(holder >= 0, plan.raster_days[0][np.maximum(holder, 0)], -1)
        values = [sample_points(plan, src, x, y) for src, _ in plan.water_table_dated]
        with np.errstate(invalid="ignore"):
            mean = np.nanmean(np.stack(values), axis=0) if values else np.full(len(x), np.nan)
        return np.array([mean[i] if g == -1 else (np.nan if g == -2 else values[g][i]) for i, g in enumerate(pick)],
                        dtype="float64")
    if plan.water_table is not None:
        return sample_points(plan, "water_table", x, y)
    if plan.stations is not None:
        from ..science.water_table import idw

        power, k, dmax = plan.idw
        sx, sy, sv = plan.stations
        return idw(sx, sy, sv, x, y, power=power, k=k, max_distance=dmax)
    return None


def sample_points(plan: RunPlan, name: str, x, y) -> np.ndarray | None:
    """Values of a plan raster (its name, or a RasterSource) at points (nearest pixel of the run grid), NaN outside."""
    src = getattr(plan, name) if isinstance(name, str) else name
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


def fit_models(inputs: Inputs, plan: RunPlan, notes: list, pairs: dict | None = None) -> DepthModels:
    """The water-table depth models of a run: fitted on surveyed scars (separately for first and repeat
    fires when both have enough samples), else on field plots, else user or default coefficients.

    ``pairs`` (a dict), when given, receives the calibration pairs the fit sampled: ``wt``, ``depth``
    [m] and ``source`` ("surveyed scars" or "field plots"); nothing when the coefficients are given
    (user, file, default), so that ``peatburn calibrate`` samples the surveys once.
    """
    from ..science import water_table as wtm

    cfg = inputs.config.water_table
    if plan.station_days is not None:
        _, subsets, window, n_without = plan.station_days
        notes.append(f"water table: station readings chosen per scar, nearest its fire start within {window:g} days "
                     f"({len(subsets)} fire date(s))" + (f"; {n_without} scar(s) have no reading in that window and "
                                                         f"get no water-table depth" if n_without else ""))
    if plan.raster_days is not None:
        notes.append(dated_raster_note(plan))
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
    if pairs is not None:
        pairs.update(wt=wt, depth=d, source=source)
    if wt.size < MIN_FIT_SAMPLES:
        notes.append(f"water table: too few calibration pairs ({wt.size} < {MIN_FIT_SAMPLES}) on surveyed scars or "
                     f"field plots; default coefficients used (low confidence)")
        return DepthModels(wtm.DEFAULT_MODEL)
    # standard errors by a bootstrap over whole scars (pixels of one scar are not independent)
    clusters = cl if cl is not None and len(np.unique(cl)) >= 3 else None

    taper, thin, scores = _covariates(cfg, wt, d, cl, ed, th, wg, clusters is not None, kw, notes)
    kw = {**kw, "edge_taper_m": taper, "thickness_taper_m": thin}

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
        return replace(m, cv_scores=scores) if scores else m

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


def _covariates(cfg, wt, d, cl, ed, th, wg, have_scars: bool, kw: dict, notes: list):
    """The edge taper and thin-peat scales of the run's model [m] (0: none) and the leave-scar-out
    scores of the covariate sets tried (empty without a selection): fixed values from the
    configuration, or chosen by :func:`peatburn.science.water_table.select_covariates`."""
    from ..science import water_table as wtm

    edge, thick = cfg.edge_taper, cfg.thickness_taper
    if ed is None and edge is not None and edge != "cv":
        edge = None
    known_t = th is not None and np.isfinite(th).any() and np.nanmax(th) > np.nanmin(th)
    if thick is not None and not known_t:
        notes.append("water table: no thin-peat factor: it needs a peat thickness that varies over the surveyed "
                     "scars (peat.thickness as a raster)")
        thick = None
    asked = [name for name, v in (("edge taper", edge), ("thin-peat factor", thick)) if v == "cv"]
    fixed = (float(edge) if edge not in (None, "cv") else 0.0, float(thick) if thick not in (None, "cv") else 0.0)
    if not asked:
        return fixed[0], fixed[1], {}
    if not have_scars:
        notes.append(f"water table: no {' or '.join(asked)}: choosing one needs at least 3 surveyed scars")
        return fixed[0], fixed[1], {}
    pick = wtm.select_covariates(wt, d, cl, edge_distance_m=ed, thickness_m=th, edge=edge, thickness=thick,
                                 weight=wg, **kw)
    chosen = wtm.covariate_labels(pick["edge_taper_m"], pick["thickness_taper_m"])
    notes.append(f"water table: covariates chosen by leave-scar-out cross-validation among {' and '.join(asked)} "
                 "(rms relative error of scar carbon per covariate set: "
                 + ", ".join(f"{k} {v:.1%}" for k, v in pick["scores"].items()) + f"): {' + '.join(chosen) or 'none'}")
    return pick["edge_taper_m"], pick["thickness_taper_m"], pick["scores"]


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
