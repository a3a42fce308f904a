"""Co-registration of the post-fire survey to the pre-fire survey on evenly spread sample windows,
and the stable-ground QA."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import shapely
from affine import Affine
from rasterio.windows import Window

from ..config import RunConfig
from ..errors import GridError
from ..grid import RunGrid
from ..io.rasters import GridReader, RasterSource, read_on_grid
from ..io.vectors import WindowRasterizer
from ..science import coregistration, error_scale, survey
from .inputs import Inputs, _param_source

#: Pixel budget of the co-registration sample (evenly spread full-resolution windows). 2 Mpx
#: recovers the benchmark scene's shift within 2 cm in 1.0 s, 4 Mpx within 1 cm in 1.5 s
#: (benchmarks/, 67 Mpx scene; docs/performance.md).
SAMPLE_PIXELS = 2_000_000
#: Largest side of a sample window [px] (the co-registration's, the depth model's calibration pairs',
#: the fill values'): a run's block size when smaller, so that a larger ``run.block_size`` (a speed
#: setting) spreads the same sample as the block size of 512 did, and changes no result (project choice).
SAMPLE_BLOCK = 512  # project choice (the default block size until the fifth session of issue 19)
#: Stable-ground residuals kept for the variogram of the survey error.
STABLE_SAMPLE_MAX = 50_000


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
    #: the choice of a survey error spread varying in space (:func:`_error_scale`) and the per-pixel sd
    #: at each stable_sample point when one was chosen [m]
    error_scale: dict | None = field(default=None, repr=False, compare=False)
    stable_scale: np.ndarray | None = field(default=None, repr=False, compare=False)

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
            "survey_error_spread": _spread_words(self.error_scale),
        }


def _spread_words(choice: dict | None) -> str:
    """Which survey error spread the run used, in words (QA)."""
    if choice is None:
        return "constant (too few stable-ground samples to test a spread that varies)"
    vt, loc = choice["variables_test"], choice["local"]
    if not choice["chosen"]:
        return (f"constant over the scene: {', '.join(vt['variables'])} tested, {vt['reason']}; "
                f"{loc.get('reason', 'local spread not tested')}" + _shift_words(choice))
    c = choice["coefficients"]
    terms = " + ".join([f"{c['const']:.3g} m2"] + [f"{c[k]:.3g} x {k}^2" for k in choice["variables"]])
    parts = [f"sd^2 = {terms} ({vt['reason']})" if choice["variables"] else f"no variable explains it ({vt['reason']})"]
    parts.append(f"times a map of the local spread ({loc['reason']})" if loc["chosen"] else loc.get("reason", ""))
    words = "varies in space (Hugonnet et al. 2022): " + "; ".join(p for p in parts if p)
    return words + _shift_words(choice)


def _shift_words(choice: dict) -> str:
    sh = choice.get("shift") or {}
    return (f"; zones also carry a residual shift times their mean slope ({sh['reason']})" if sh.get("chosen")
            else "")


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
    cov = {"slope": []}
    grads = ([], [])
    quality = None
    if cfg.survey.quality is not None:
        quality = GridReader(RasterSource(str(cfg.survey.quality), "depth.survey.quality"), grid)
        cov["quality"] = []
    al_src = RasterSource(str(cfg.survey.post), "depth.survey.post", src_transform=post_t)
    try:
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
                gx, gy = error_scale.surface_gradient(s.pre, *pixel_sides_m(grid, w))
                grads[0].append(gx[ok])
                grads[1].append(gy[ok])
                cov["slope"].append(np.hypot(gx, gy)[ok])
                if quality is not None:
                    cov["quality"].append(quality.read(w)[ok])
    finally:
        if quality is not None:
            quality.close()
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
    choice, scale = _error_scale(xs_all[keep], ys_all[keep], after[keep],
                                 {k: np.concatenate(v)[keep] for k, v in cov.items()},
                                 tuple(np.concatenate(g)[keep] for g in grads))
    return SurveyAlignment(
        shift_x=est.shift_x, shift_y=est.shift_y, shift_z=est.shift_z, tilt=tilt, post_transform=post_t,
        nmad_before=float(survey.nmad(before)), nmad_after=s_after,
        median_before=float(np.median(before)) if before.size else float("nan"),
        median_after=float(np.median(after)) if after.size else float("nan"),
        n_stable_sample=int(after.size), lod=float(survey.level_of_detection(s_after, cfg.survey.lod_t)),
        sample_decimation=factor, stable_sample=(xs_all[keep], ys_all[keep], after[keep]),
        error_scale=choice, stable_scale=scale,
    )


def pixel_sides_m(grid: RunGrid, window: Window) -> tuple[float, float]:
    """Width and height of the pixels of ``window`` [m]: the side of the mean pixel area (geodesic for
    lon/lat grids) split in the ratio of the grid's resolution."""
    side = math.sqrt(float(np.mean(grid.pixel_area(window))))
    aspect = math.sqrt(grid.res[0] / grid.res[1])
    return side * aspect, side / aspect


def _error_scale(x, y, residual, variables: dict, gradient=None):
    """The survey error spread on the stable sample (science.error_scale), after removing a
    least-squares plane (a trend is not a spread): first a per-pixel sd from the explanatory
    variables (slope, quality raster), then a map of the local spread of the differences over that sd
    (or over one constant sd). Returns ``(choice, sd at each sample point or None)``; ``choice`` holds
    both tests (``variables_test``, ``local``), whether either was chosen (``chosen``), the
    ``coefficients`` and ``variables`` of the sd applied (a constant NMAD^2 when the variables were not
    chosen) and the ``fill`` of missing variables (their median on stable ground); and, with the
    pre-fire survey's ``gradient`` (dz/dx, dz/dy) at the points, the test of a residual shift that
    varies across the scene (``shift``, science.error_scale.choose_local_shift)."""
    if residual.size < 200:
        return None, None
    coef = coregistration.fit_plane(x, y, residual)
    r = residual - coregistration.plane(x, y, coef)
    var_test = error_scale.choose_error_scale(r, variables)
    fill = {k: float(np.nanmedian(v)) if np.isfinite(v).any() else 0.0 for k, v in variables.items()}
    if var_test["chosen"]:
        used, coefficients = list(variables), dict(var_test["coefficients"])
        filled = {k: np.where(np.isfinite(v), v, fill[k]) for k, v in variables.items()}
        sd = error_scale.error_scale_at(coefficients, filled)
    else:
        used, coefficients = [], {"const": float(survey.nmad(r)) ** 2}
        sd = np.full(r.size, math.sqrt(coefficients["const"]))
    local = error_scale.choose_local_scale(x, y, r / sd) if np.all(sd > 0) else {"chosen": False, "reason": "no spread"}
    choice = {"chosen": bool(var_test["chosen"] or local["chosen"]), "coefficients": coefficients, "variables": used,
              "fill": fill, "variables_test": var_test, "local": local,
              "shift": error_scale.choose_local_shift(x, y, r, *gradient) if gradient is not None else
              {"chosen": False, "reason": "not tested"}}
    if not choice["chosen"]:
        return choice, None
    if local["chosen"]:
        sd = sd * error_scale.local_scale_at(local, x, y)
    return choice, sd


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
    """Evenly spread windows of ``block`` px (at most :data:`SAMPLE_BLOCK`) whose pixels add up to at
    most ``max_pixels`` (default :data:`SAMPLE_PIXELS`)."""
    max_pixels = SAMPLE_PIXELS if max_pixels is None else max_pixels
    block = min(int(block), SAMPLE_BLOCK)
    wins = grid.windows(block)
    n = max(1, min(len(wins), max_pixels // (block * block)))
    idx = np.unique(np.linspace(0, len(wins) - 1, n).round().astype(int))
    return [wins[i] for i in idx]
