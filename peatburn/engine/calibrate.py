"""Calibrate the water-table depth model of a run, for ``peatburn calibrate`` and for reuse by ``run``.

The samples are the pixels of surveyed scars where both the survey burn depth and the water-table
depth exist (evenly spread sample windows, at most 200,000 pairs), or the field plots when no
survey pixel qualifies. The fit itself is :func:`peatburn.science.water_table.fit_depth_model`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .. import __version__
from ..errors import ConfigError
from ..io.writers import atomic_path, write_json
from .alignment import coregister
from .depth_models import MIN_FIT_SAMPLES, DepthModels, depth_samples, fit_models, plot_samples
from .inputs import open_inputs
from .plan import build_plan


@dataclass
class Calibration:
    models: DepthModels
    water_table: np.ndarray
    depth: np.ndarray
    source: str
    notes: list = field(default_factory=list)


def calibrate(cfg) -> Calibration:
    """Fit the depth model of ``cfg`` (which must have a [depth.water_table] section)."""
    if cfg.water_table is None:
        raise ConfigError(f"{cfg.source}: `peatburn calibrate` needs a [depth.water_table] section")
    inputs = open_inputs(cfg)
    notes = list(inputs.notes)
    alignment = coregister(inputs) if inputs.has_survey else None
    plan = build_plan(inputs, alignment)
    pairs = {}
    models = fit_models(inputs, plan, notes, pairs)  # samples the surveys (or plots) once, and says which
    if not pairs:  # coefficients given (user, file, default): the pairs are only shown, sampled here
        wt, d, _, _ = depth_samples(inputs, plan) if inputs.has_survey else (np.array([]), np.array([]), None, None)
        source = "surveyed scars"
        if wt.size < MIN_FIT_SAMPLES:
            wt, d = plot_samples(inputs, plan)
            ok = np.isfinite(wt) & np.isfinite(d)
            wt, d = wt[ok], d[ok]
            source = "field plots"
        pairs = {"wt": wt, "depth": d, "source": source}
    return Calibration(models, pairs["wt"], pairs["depth"], pairs["source"], notes)


def write_fit(path, calib: Calibration) -> Path:
    """The fit as JSON that `run` reuses with ``[depth.water_table] model = "fit.json"``."""
    return write_json(path, {"tool": "peatburn", "version": __version__, "samples_from": calib.source,
                             "n_samples": int(calib.water_table.size), "models": calib.models.to_dict(),
                             "notes": calib.notes})


def write_scatter(path, calib: Calibration, max_points: int = 5000) -> Path:
    """A small scatter plot of survey burn depth against water-table depth, with the fitted line."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from ..science.water_table import predict_depth

    wt, d = calib.water_table, calib.depth
    if wt.size > max_points:
        keep = np.random.default_rng(0).choice(wt.size, max_points, replace=False)
        wt, d = wt[keep], d[keep]
    fig, ax = plt.subplots(figsize=(5.2, 4.0))
    ax.scatter(wt, d, s=4, alpha=0.35, color="#0072B2", label=f"{calib.source} (n = {calib.water_table.size})")
    if wt.size:
        xs = np.linspace(np.nanmin(wt), np.nanmax(wt), 50)
        m = calib.models.all
        # the line far from any scar edge, on peat of unknown thickness (no thin-peat factor, no cap)
        ax.plot(xs, predict_depth(m, xs, thickness_m=np.full(xs.shape, np.nan), edge_distance_m=np.full(xs.shape, np.inf)),
                color="#D55E00", lw=2,
                label=f"depth = {m.intercept:.3f} + {m.slope:.3f} x water table")
    ax.set_xlabel("water-table depth at fire time [m below surface]")
    ax.set_ylabel("burn depth [m]")
    ax.legend(fontsize=7)
    with atomic_path(path, suffix=".png") as tmp:
        fig.savefig(tmp, format="png", dpi=110, bbox_inches="tight")
    plt.close(fig)
    return Path(path)
