"""A survey error whose spread varies in space: per-pixel sd from explanatory variables (issue 16).

Hugonnet et al. (2022) estimate the dispersion of the elevation difference on stable ground binned by
explanatory variables (terrain slope, curvature, a quality of the survey), model it as a function of
them, standardise the differences by it, and fit the variogram on the standardised field; an area's
error is then the average of the per-pixel sds with the correlation of the standardised field
(Sect. II-C to II-E; recalled, unchecked). Here:

* **variables**: the slope of the pre-fire surface, tan(slope) = |grad z| [m/m]
  (:func:`surface_slope`), and optionally a survey-quality raster the user gives as a per-pixel sd
  [m] (point density or flight strips turned into an sd);
* **binning**: quantile bins of each variable (and their cross bins with two variables), the NMAD
  of each bin (Höhle & Höhle 2009) by xdem's ``spatialstats.nd_binning``;
* **function**: ``sd^2 = a^2 + b^2 tan^2(slope) + c^2 q^2``, fitted by non-negative least squares on
  the binned NMAD^2, each bin weighted by its count over its fitted variance. The slope term is the
  error of a residual horizontal shift ``dz = shift . grad z``: its variance is proportional to
  tan^2(slope) (Nuth & Kääb 2011, Eq. 2-3, recalled, unchecked); ``a`` is the noise of flat ground;
  ``c`` scales the user's sd. The form is monotone in each variable and smooth (a choice of ours,
  in place of the interpolation of the binned values that Hugonnet et al. use: fewer free
  parameters, no steps where bins hold few pixels);
* **choice** (:func:`choose_error_scale`): the model replaces a constant sd only when the binned
  NMADs differ from one common value by more than their sampling error explains
  (chi-square test at :data:`CHOICE_ALPHA`, the NMAD's standard error 1.167 sd / sqrt(n) for normal
  data, Rousseeuw & Croux 1993, recalled, unchecked) **and** the fitted sd varies by at least
  :data:`MIN_SPREAD_RATIO` between the 10th and 90th percentile of the stable pixels
  (both thresholds assumptions).

Pure functions: arrays in [m, m/m], arrays out; no files, no printing.

References
----------
Hugonnet, R., Brun, F., Berthier, E. et al. (2022). Uncertainty analysis of digital elevation models by
spatial inference from stable terrain. IEEE J. Sel. Top. Appl. Earth Obs. Remote Sens. 15:6456-6472,
doi:10.1109/JSTARS.2022.3188922 (recalled, unchecked).
Nuth, C. & Kääb, A. (2011). The Cryosphere 5:271-290 (recalled, unchecked).
Höhle, J. & Höhle, M. (2009). ISPRS J. Photogramm. Remote Sens. 64:398-406.
Rousseeuw, P. J. & Croux, C. (1993). J. Am. Stat. Assoc. 88:1273-1283 (recalled, unchecked).
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import PhysicalRangeError

__all__ = ["surface_gradient", "surface_slope", "choose_local_shift", "local_shift_at", "binned_nmad", "fit_error_scale", "error_scale_at", "choose_error_scale",
           "N_BINS", "CHOICE_ALPHA", "MIN_SPREAD_RATIO", "NMAD_SE_FACTOR"]

#: Quantile bins per variable (with two variables, N_BINS x N_BINS cross bins).
N_BINS = 10  # project choice
#: Level of the chi-square test that binned NMADs differ from one value (assumption).
CHOICE_ALPHA = 0.001  # assumption
#: Least ratio of the fitted sd at the 90th to that at the 10th percentile of the stable pixels for
#: the varying model to be chosen (assumption: below it the constant model is as good for intervals).
MIN_SPREAD_RATIO = 1.2  # assumption
#: Standard error of the NMAD of n normal values, in units of sd / sqrt(n): sqrt(1 / (4 phi(q)^2
#: q^2)) with q = 0.6745 the normal quartile, 1.167 (Rousseeuw & Croux 1993: Gaussian efficiency of
#: the MAD 36.7 %; recalled, unchecked; the value follows from the asymptotic variance of a sample quantile).
NMAD_SE_FACTOR = 1.167  # Rousseeuw & Croux 1993 (MAD efficiency 36.7 %; recalled, unchecked)
#: Fewest stable pixels a bin needs to count.
MIN_BIN_COUNT = 30  # common practice


def surface_gradient(z, dx_m, dy_m=None):
    """Gradient of a surface, ``(dz/dx, dz/dy)`` [m/m], x east and y north on a north-up grid (rows run
    south), by central differences (one-sided at the edges; ``numpy.gradient``; common practice). NaN
    where a neighbour is missing.

    Parameters
    ----------
    z : array_like
        Surface elevation [m], 2-D (rows north to south).
    dx_m, dy_m : float
        Pixel width and height [m] (``dy_m`` defaults to ``dx_m``).
    """
    z = np.asarray(z, dtype="float64")
    dx = float(dx_m)
    dy = dx if dy_m is None else float(dy_m)
    if not (dx > 0 and dy > 0):
        raise PhysicalRangeError("surface_gradient: pixel sizes must be > 0 m")
    if z.ndim != 2:
        raise PhysicalRangeError("surface_gradient: z must be 2-D")
    if min(z.shape) < 2:
        nan = np.full(z.shape, np.nan)
        return nan, nan.copy()
    g_row, gx = np.gradient(z, dy, dx)
    return gx, -g_row


def surface_slope(z, dx_m, dy_m=None):
    """tan(slope) = |grad z| of a surface [m/m] (:func:`surface_gradient`)."""
    return np.hypot(*surface_gradient(z, dx_m, dy_m))


def binned_nmad(values, variables: dict, n_bins: int = N_BINS):
    """NMAD of ``values`` in quantile bins of the explanatory variables (xdem.spatialstats.nd_binning).

    Parameters
    ----------
    values : array_like
        Stable-ground differences [m], 1-D.
    variables : dict
        Name -> values of the variable at the same points (1-D, finite).
    n_bins : int
        Quantile bins per variable.

    Returns
    -------
    dict
        ``centre`` (name -> median of the variable in each bin), ``nmad`` [m], ``count``: one entry per
        bin of all variables at once that holds at least :data:`MIN_BIN_COUNT` points.
    """
    import pandas as pd
    from xdem.spatialstats import nd_binning

    from .survey import nmad

    v = np.asarray(values, dtype="float64")
    names = list(variables)
    arrs = [np.asarray(variables[k], dtype="float64") for k in names]
    edges = []
    for a in arrs:
        u = np.unique(a)
        if u.size <= n_bins:  # a few distinct values (strips of a quality raster): one bin each
            e = np.concatenate([[u[0]], (u[:-1] + u[1:]) / 2, [u[-1]]])
        else:
            e = np.unique(np.quantile(a, np.linspace(0.0, 1.0, n_bins + 1)))
        e[-1] = np.nextafter(e[-1], np.inf)  # the largest value inside the last bin
        edges.append(e)
    df = nd_binning(v, list_var=arrs, list_var_names=names, statistics=["count", nmad], list_var_bins=edges)
    df = df[(df["nd"] == len(names)) & (df["count"] >= MIN_BIN_COUNT)]
    centre = {k: [] for k in names}
    for _, row in df.iterrows():
        sel = np.ones(v.size, bool)
        for k, a in zip(names, arrs):
            iv = row[k]
            sel &= (a >= iv.left) & (a < iv.right) if isinstance(iv, pd.Interval) else True
        for k, a in zip(names, arrs):
            centre[k].append(float(np.median(a[sel])))
    return {"centre": {k: np.asarray(c) for k, c in centre.items()},
            "nmad": df["nmad"].to_numpy(dtype="float64"), "count": df["count"].to_numpy(dtype="float64")}


def fit_error_scale(binned: dict):
    """Coefficients of ``sd^2 = a^2 + b^2 s^2 + c^2 q^2`` from binned NMADs [m^2, per variable].

    Non-negative least squares (``scipy.optimize.nnls``) of NMAD_k^2 on (1, s_k^2, q_k^2), each bin
    weighted by sqrt(n_k) / sd_k^2 (the standard error of NMAD^2 is 2 x 1.167 sd^2 / sqrt(n)),
    twice: first with the binned values as sd_k, then with the first fit's.

    Returns
    -------
    dict
        ``{"const": a^2, name: coefficient of name^2, ...}`` [m^2, m^2 per unit^2].
    """
    from scipy.optimize import nnls

    names = list(binned["centre"])
    y = np.asarray(binned["nmad"], dtype="float64") ** 2
    n = np.asarray(binned["count"], dtype="float64")
    X = np.column_stack([np.ones_like(y)] + [np.asarray(binned["centre"][k]) ** 2 for k in names])
    pred = y
    coef = None
    for _ in range(2):
        w = np.sqrt(n) / np.maximum(pred, 1e-12)
        coef, _res = nnls(X * w[:, None], y * w)
        pred = X @ coef
    return {"const": float(coef[0]), **{k: float(c) for k, c in zip(names, coef[1:])}}


def error_scale_at(coef: dict, variables: dict):
    """Per-pixel sd [m] of the fitted model at the given variable values (NaN where a variable is NaN),
    at least ``coef["floor_m"]`` when given (:func:`choose_error_scale` sets it to a quarter of the
    10th percentile on stable ground, so that no pixel is given no error at all)."""
    var = np.asarray(coef["const"], dtype="float64")
    for k, a in variables.items():
        var = var + coef[k] * np.asarray(a, dtype="float64") ** 2
    return np.maximum(np.sqrt(var), coef.get("floor_m", 0.0))


def _support(rel_nmad, counts, fitted):
    """The test of a varying spread: ``(chi2, dof, p, ratio, supported)`` from binned NMADs relative to
    the NMAD of all (``rel_nmad``), their counts, and the fitted sd (or factor) at the stable points."""
    from scipy.stats import chi2 as chi2_dist

    se = NMAD_SE_FACTOR / np.sqrt(np.asarray(counts, dtype="float64"))
    chi2 = float(np.sum(((np.asarray(rel_nmad) - 1.0) / se) ** 2))
    dof = int(np.size(rel_nmad) - 1)
    p = float(chi2_dist.sf(chi2, dof))
    lo, hi = np.quantile(fitted, [0.1, 0.9])
    ratio = float(hi / lo) if lo > 0 else float("inf")
    supported = p < CHOICE_ALPHA and math.isfinite(ratio) and ratio >= MIN_SPREAD_RATIO
    return chi2, dof, p, ratio, bool(supported)


def choose_error_scale(values, variables: dict, n_bins: int = N_BINS):
    """Fit the varying sd on stable ground and say whether it is supported (module docstring).

    Parameters
    ----------
    values : array_like
        Stable-ground differences after co-registration and any planar trend [m], 1-D.
    variables : dict
        Name -> explanatory variable at the same points (NaN allowed: those points are left out).

    Returns
    -------
    dict
        ``chosen`` (bool), ``coefficients`` (:func:`fit_error_scale`), ``chi2``, ``dof``, ``p_value``,
        ``spread_ratio`` (fitted sd at the 90th over the 10th percentile of the stable pixels),
        ``bins`` (the binned NMADs, as lists), ``reason`` (words).
    """
    from .survey import nmad

    v = np.asarray(values, dtype="float64")
    ok = np.isfinite(v)
    for a in variables.values():
        ok &= np.isfinite(np.asarray(a, dtype="float64"))
    out = {"chosen": False, "coefficients": None, "chi2": float("nan"), "dof": 0, "p_value": float("nan"),
           "spread_ratio": 1.0, "bins": None, "variables": list(variables)}
    if int(ok.sum()) < MIN_BIN_COUNT * 4 or not variables:
        out["reason"] = "too few stable pixels with every explanatory variable to bin the spread"
        return out
    v = v[ok]
    var = {k: np.asarray(a, dtype="float64")[ok] for k, a in variables.items()}
    b = binned_nmad(v, var, n_bins)
    if b["nmad"].size < 3:
        out["reason"] = "fewer than 3 bins of the explanatory variables hold enough stable pixels"
        return out
    m0 = float(nmad(v))
    coef = fit_error_scale(b)
    sd = error_scale_at(coef, var)
    chi2, dof, p, ratio, supported = _support(b["nmad"] / m0, b["count"], sd)
    coef["floor_m"] = float(np.quantile(sd, 0.1)) / 4.0
    out.update(coefficients=coef, chi2=chi2, dof=dof, p_value=p, spread_ratio=ratio,
               bins={"centre": {k: c.tolist() for k, c in b["centre"].items()}, "nmad_m": b["nmad"].tolist(),
                     "count": b["count"].astype(int).tolist()})
    out["chosen"] = supported
    out["reason"] = (f"binned NMAD varies beyond sampling noise (chi-square {chi2:.0f} on {dof} dof, p = {p:.2g}) "
                     f"and the fitted sd varies {ratio:.2f}-fold between the 10th and 90th percentile"
                     if supported else
                     f"not supported: chi-square {chi2:.0f} on {dof} dof (p = {p:.2g}, needs < {CHOICE_ALPHA:g}), "
                     f"fitted sd ratio 90th/10th percentile {ratio:.2f} (needs >= {MIN_SPREAD_RATIO:g})")
    return out


#: Stable-ground sample points per cell of the local spread map, on average (the map has at most
#: MAX_CELLS x MAX_CELLS cells and at least 2 x 2).
POINTS_PER_CELL, MAX_CELLS = 800, 8


def choose_local_scale(x, y, values):
    """A map of the local spread of (standardised) stable-ground differences, and whether it is supported.

    The sample's extent is cut into K x K cells (K = sqrt(n / :data:`POINTS_PER_CELL`), 2 to
    :data:`MAX_CELLS`); the NMAD of each cell over the NMAD of all is the local factor ``g``, bilinear
    between cell centres and constant beyond them (:func:`local_scale_at`). It is a level of detection
    that varies in space where no explanatory variable says why (a misregistration that grows across
    the scene, strips of different quality with no quality raster): Hugonnet et al. (2022) bin by
    variables; binning by position is the same estimator with the coordinates as the variables. The
    map is chosen by the test of :func:`choose_error_scale` (cells with at least
    :data:`MIN_BIN_COUNT` points as bins).

    Parameters
    ----------
    x, y : array_like
        Coordinates [m] of the stable-ground points.
    values : array_like
        Differences [m], or differences over a per-pixel sd already modelled [-].

    Returns
    -------
    dict
        ``chosen``, ``x_centres``, ``y_centres`` [m], ``factor`` (K x K list of lists, rows by y),
        ``chi2``, ``dof``, ``p_value``, ``spread_ratio``, ``reason``.
    """
    from .survey import nmad

    x = np.asarray(x, dtype="float64")
    y = np.asarray(y, dtype="float64")
    v = np.asarray(values, dtype="float64")
    ok = np.isfinite(x) & np.isfinite(y) & np.isfinite(v)
    x, y, v = x[ok], y[ok], v[ok]
    out = {"chosen": False, "x_centres": None, "y_centres": None, "factor": None, "chi2": float("nan"), "dof": 0,
           "p_value": float("nan"), "spread_ratio": 1.0}
    cells = _cells(x, y, v.size)
    if cells is None:
        out["reason"] = "too few stable pixels for a map of the local spread"
        return out
    k, ex, ey, ix, iy = cells
    m0 = float(nmad(v))
    if not m0 > 0:
        out["reason"] = "no spread on stable ground"
        return out
    g = np.full((k, k), np.nan)
    n = np.zeros((k, k))
    for j in range(k):
        for i in range(k):
            sel = (iy == j) & (ix == i)
            n[j, i] = sel.sum()
            if n[j, i] >= MIN_BIN_COUNT:
                g[j, i] = float(nmad(v[sel])) / m0
    good = np.isfinite(g)
    if good.sum() < 3:
        out["reason"] = "fewer than 3 cells hold enough stable pixels"
        return out
    g_cells, n_cells = g[good], n[good]
    g = np.where(good, g, np.nanmedian(g[good]))  # cells without enough points: the median factor
    g = np.maximum(g, 0.25 * float(np.quantile(g, 0.1)))
    cx, cy = (ex[:-1] + ex[1:]) / 2, (ey[:-1] + ey[1:]) / 2
    out.update(x_centres=cx.tolist(), y_centres=cy.tolist(), factor=g.tolist())
    chi2, dof, p, ratio, supported = _support(g_cells, n_cells, local_scale_at(out, x, y))
    out.update(chi2=chi2, dof=dof, p_value=p, spread_ratio=ratio, chosen=supported)
    out["reason"] = (f"local spread varies beyond sampling noise over {k} x {k} cells (chi-square {chi2:.0f} on "
                     f"{dof} dof, p = {p:.2g}; {ratio:.2f}-fold between the 10th and 90th percentile)"
                     if supported else
                     f"local spread over {k} x {k} cells not supported: chi-square {chi2:.0f} on {dof} dof "
                     f"(p = {p:.2g}), ratio 90th/10th percentile {ratio:.2f}")
    return out


def local_scale_at(local: dict, x, y):
    """The local spread factor of :func:`choose_local_scale` at points [m] (bilinear between cell
    centres, constant beyond the outer centres) [-]."""
    from scipy.interpolate import RegularGridInterpolator

    cx = np.asarray(local["x_centres"], dtype="float64")
    cy = np.asarray(local["y_centres"], dtype="float64")
    g = np.asarray(local["factor"], dtype="float64")
    xx = np.clip(np.asarray(x, dtype="float64"), cx[0], cx[-1])
    yy = np.clip(np.asarray(y, dtype="float64"), cy[0], cy[-1])
    xx, yy = np.broadcast_arrays(xx, yy)
    f = RegularGridInterpolator((cy, cx), g, method="linear")
    return f(np.column_stack([yy.ravel(), xx.ravel()])).reshape(xx.shape)


def _cells(x, y, n_points):
    """K x K cells over the extent of the points (K = sqrt(n / POINTS_PER_CELL), 2 to MAX_CELLS): edges, cell
    index of each point; None when fewer than 2 x 2 cells are possible."""
    k = int(min(MAX_CELLS, math.isqrt(max(n_points // POINTS_PER_CELL, 0))))
    if k < 2 or not (np.ptp(x) > 0 and np.ptp(y) > 0):
        return None
    ex = np.linspace(x.min(), x.max(), k + 1)
    ey = np.linspace(y.min(), y.max(), k + 1)
    ix = np.clip(np.searchsorted(ex, x, side="right") - 1, 0, k - 1)
    iy = np.clip(np.searchsorted(ey, y, side="right") - 1, 0, k - 1)
    return k, ex, ey, ix, iy


def choose_local_shift(x, y, values, gx, gy):
    """A map of the residual horizontal shift left after a global co-registration, and whether it is
    supported.

    A shift (dx, dy) of one survey against the other changes the difference by ``dx dz/dx + dy dz/dy``
    (Nuth & Kääb 2011, recalled, unchecked). A global co-registration removes one shift for the scene;
    a shift that varies across it stays. In each of the K x K cells of :func:`choose_local_scale` the
    stable-ground differences are regressed on (1, dz/dx, dz/dy) by least squares; the cell's shift
    estimate less its sampling variance gives the local shift size, per component
    ``s_c^2 = max((dx^2 - se_x^2 + dy^2 - se_y^2) / 2, 0)`` [m^2]. The shift is not corrected (the
    estimates stay as they are); its local size is taken as the sd of a shift of unknown direction,
    so a zone's mean error from it has the variance ``s^2 ((mean dz/dx)^2 + (mean dz/dy)^2)`` over the
    zone's pixels: the shift times the zone's *mean* gradient, a long-range error the variogram of the
    pixels barely shows. Chosen when the cells' shifts differ from zero beyond their least-squares
    standard errors (chi-square on 2 x cells dof at :data:`CHOICE_ALPHA`; the standard errors take the
    differences as independent, so correlated error alone makes this test readier to choose) **and** a
    held-out check agrees: each cell's quarters are split into two diagonal halves (NW + SE, NE + SW)
    fitted apart, and their shift estimates must correlate over the cells (one-sided test of Pearson's
    r at the same level): a real shift field is seen by both halves, a shift fitted on noise of a
    shorter range than a quarter is not.

    Returns
    -------
    dict
        ``chosen``, ``x_centres``, ``y_centres``, ``shift_sd_m`` (K x K, rows by y), ``shifts_m``
        (K x K x 2 estimates), ``chi2``, ``dof``, ``p_value``, ``reason``.
    """
    from scipy.stats import chi2 as chi2_dist

    x, y, v, gx, gy = (np.asarray(a, dtype="float64") for a in (x, y, values, gx, gy))
    ok = np.isfinite(x) & np.isfinite(y) & np.isfinite(v) & np.isfinite(gx) & np.isfinite(gy)
    x, y, v, gx, gy = x[ok], y[ok], v[ok], gx[ok], gy[ok]
    out = {"chosen": False, "x_centres": None, "y_centres": None, "shift_sd_m": None, "shifts_m": None,
           "chi2": float("nan"), "dof": 0, "p_value": float("nan")}
    cells = _cells(x, y, v.size)
    if cells is None:
        out["reason"] = "too few stable pixels for a map of the residual shift"
        return out
    k, ex, ey, ix, iy = cells
    from scipy.stats import t as t_dist

    s2 = np.full((k, k), np.nan)
    shifts = np.zeros((k, k, 2))
    chi2, dof = 0.0, 0
    # held-out check: each cell's 2 x 2 quarters in two diagonal halves, fitted apart
    qx = (x - ex[ix]) > (ex[ix + 1] - ex[ix]) / 2
    qy = (y - ey[iy]) > (ey[iy + 1] - ey[iy]) / 2
    diag = qx == qy
    halves = ([], [])
    for j in range(k):
        for i in range(k):
            sel = (iy == j) & (ix == i)
            fit = _shift_fit(v[sel], gx[sel], gy[sel])
            if fit is None:
                continue
            coef, se2 = fit
            shifts[j, i] = coef[1:]
            s2[j, i] = max((coef[1] ** 2 - se2[1] + coef[2] ** 2 - se2[2]) / 2.0, 0.0)
            chi2 += float(coef[1] ** 2 / se2[1] + coef[2] ** 2 / se2[2])
            dof += 2
            fa = _shift_fit(v[sel & diag], gx[sel & diag], gy[sel & diag])
            fb = _shift_fit(v[sel & ~diag], gx[sel & ~diag], gy[sel & ~diag])
            if fa is not None and fb is not None:
                halves[0].extend(fa[0][1:])
                halves[1].extend(fb[0][1:])
    if dof < 6:
        out["reason"] = "fewer than 3 cells hold enough stable pixels with a slope"
        return out
    p = float(chi2_dist.sf(chi2, dof))
    m = len(halves[0])
    r = float(np.corrcoef(halves[0], halves[1])[0, 1]) if m >= 6 else float("nan")
    p_r = float(t_dist.sf(r * math.sqrt((m - 2) / max(1.0 - r * r, 1e-12)), m - 2)) if math.isfinite(r) else 1.0
    s2 = np.where(np.isfinite(s2), s2, np.nanmedian(s2))
    out.update(x_centres=((ex[:-1] + ex[1:]) / 2).tolist(), y_centres=((ey[:-1] + ey[1:]) / 2).tolist(),
               shift_sd_m=np.sqrt(s2).tolist(), shifts_m=shifts.tolist(), chi2=chi2, dof=dof, p_value=p,
               held_out_r=r, held_out_p=p_r, chosen=bool(p < CHOICE_ALPHA and p_r < CHOICE_ALPHA))
    med = float(np.median(np.sqrt(s2)))
    test = (f"chi-square {chi2:.0f} on {dof} dof, p = {p:.2g}; the two diagonal halves of the cells agree, "
            f"r = {r:.2f} over {m} shift components, p = {p_r:.2g}")
    out["reason"] = (f"a residual shift varies over {k} x {k} cells ({test}; median local shift sd {med:.2g} m per "
                     f"axis)" if out["chosen"] else
                     f"residual shift over {k} x {k} cells not supported ({test}; both p need < {CHOICE_ALPHA:g})")
    return out


def _shift_fit(v, gx, gy):
    """Least squares of differences on (1, dz/dx, dz/dy): coefficients and their variances (independent
    differences), or None with fewer than MIN_BIN_COUNT points or a rank-deficient design."""
    if v.size < MIN_BIN_COUNT:
        return None
    a = np.column_stack([np.ones(v.size), gx, gy])
    coef, _res, rank, _sv = np.linalg.lstsq(a, v, rcond=None)
    if rank < 3:
        return None
    resid = v - a @ coef
    var = float(resid @ resid) / max(v.size - 3, 1)
    return coef, np.diag(np.linalg.inv(a.T @ a)) * var


def local_shift_at(shift: dict, x, y):
    """The local residual shift sd of :func:`choose_local_shift` at points [m] (bilinear between cell
    centres, constant beyond)."""
    return local_scale_at({"x_centres": shift["x_centres"], "y_centres": shift["y_centres"],
                           "factor": shift["shift_sd_m"]}, x, y)
