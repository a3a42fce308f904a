"""Field plots: validate every depth method against the measured burn depths that fall in its area.

For each plot (a point with a measured burn depth) we look up, on the run grid, the method that gave
the depth there and its value; and, wherever a water-table model exists, what that model predicts at
the plot, so the model is validated on surveyed plots too. Bias = mean(predicted - measured);
RMSE and MAE as usual (computed by :func:`peatburn.science.water_table.validate_against_plots`).
"""

from __future__ import annotations

import math

import numpy as np
import rasterio

from .engine.depth_models import sample_points, water_table_at_points
from .depth_methods import DEPTH_METHODS


def _sample(path, x, y):
    out = np.full(len(x), np.nan)
    with rasterio.open(path) as ds:
        vals = np.array([v[0] for v in ds.sample(list(zip(x, y)), masked=True)], dtype=object)
        for i, v in enumerate(vals):
            out[i] = np.nan if np.ma.is_masked(v) else float(v)
    return out


def validate_plots(inputs, plan, out_dir) -> dict:
    """Bias and RMSE of each depth method against the field plots in its area (from the written
    burn_depth.tif and depth_method.tif)."""
    from .science.water_table import predict_depth, validate_against_plots

    f = inputs.plots.frame
    if not len(f):
        return {"n_plots": 0}
    x, y = f.geometry.x.to_numpy(), f.geometry.y.to_numpy()
    obs = f["value"].to_numpy(dtype=float)
    depth = _sample(out_dir / "burn_depth.tif", x, y)
    method = _sample(out_dir / "depth_method.tif", x, y)
    out = {"n_plots": int(len(f)), "by_method": {}}
    for dm in DEPTH_METHODS:
        code, name = dm.code, dm.name
        sel = (method == code) & np.isfinite(depth) & np.isfinite(obs)
        if not dm.gives_depth:
            out["by_method"][name] = {"n": int((method == code).sum()),
                                      "note": "Tier 1 gives fuel per hectare, not a depth: not comparable"}
            continue
        out["by_method"][name] = _stats(validate_against_plots(depth[sel], obs[sel]), int(sel.sum()))
    if plan.models is not None:
        wt = water_table_at_points(plan, x, y)
        if wt is not None:
            thick = sample_points(plan, "thickness", x, y)
            edge = None
            if getattr(plan.models.all, "edge_taper_m", 0.0) > 0:  # distance of each plot to its scar's edge [m]
                import shapely

                scars = shapely.union_all(plan.scars)
                edge = np.where(shapely.contains_xy(scars, x, y),
                                shapely.distance(shapely.points(x, y), shapely.boundary(scars)), 0.0)
            pred = predict_depth(plan.models.all, wt, thick, edge)
            sel = np.isfinite(pred) & np.isfinite(obs)
            out["water_table_model_at_all_plots"] = _stats(validate_against_plots(pred[sel], obs[sel]), int(sel.sum()))
    return out


def _stats(d: dict, n: int) -> dict:
    d = {k: (float(v) if isinstance(v, (int, float, np.floating)) and not isinstance(v, bool) else v)
         for k, v in dict(d).items()}
    d["n"] = n
    return {k: (None if isinstance(v, float) and not math.isfinite(v) else v) for k, v in d.items()}
