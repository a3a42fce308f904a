"""Survey error of a zone mean from a multi-range variogram, after co-registration.

The stable-ground variogram is modelled as a nugget plus a sum of spherical components
(:func:`peatburn.science.variogram.fit_spherical_sum`):

    gamma(h) = c0 + sum_k c_k Sph(h; a_k),     sigma^2 = c0 + sum_k c_k.

**Zone mean.** Each component is averaged over the zone like Rolstad et al. (2009) do for one
spherical model (:func:`peatburn.science.uncertainty.correlated_sum_sd`), and the variances add
(the components are independent); the nugget shrinks like 1/n over the zone's n pixels:

    V_z(A) = c0 / n + sum_k c_k R(sqrt(A / pi) / a_k)

(Hugonnet et al. 2022, Sect. 2.3 and Eq. 14 for the sum of components; recalled, unchecked).

**Co-registration.** The run subtracts the median m_S of the stable-ground differences, so a
zone's error is ``e_z - m_S``:

    Var(e_z - m_S) = V_z + V_S,med - 2 Cov(e_z, m_S)

with ``V_S,med`` the variance of the stable-ground median (:func:`stable_median_sd`) and, to first
order, ``Cov(e_z, m_S) = Cov(e_z, mean_S)`` (the Bahadur representation of the median; Sen 1972,
recalled). The covariance depends on where the zone lies relative to the stable ground: 0 for a
zone far from it (then the model is V_z + V_S,med: the zone error plus an independent residual
bias), and V_S,mean on average over zones spread uniformly among the stable ground (then
V_z + V_S,med - 2 V_S,mean: the long-range error is largely removed by the co-registration). The
zone sums do not say where a zone lies, so the midpoint ``Cov = V_S,mean / 2`` is taken:

    Var(e_z - m_S) = V_z + (V_S,med - V_S,mean).

It is within a factor sqrt(2) of either end in sd (V_S <= V_z: the stable ground is larger than a
zone). Adding an independent residual bias V_S,med on top of V_z (the former model) counts the
long-range error twice, once in the zone mean and once in the bias (issue 16). In the draws
``V_z`` is the zone-level term (survey_random) and ``V_S,med - V_S,mean`` (>= 0, since
arcsin rho >= rho) the run-wide term (survey_bias).

Pure functions: numbers and arrays in [m, m2], arrays out; no files, no printing.

References
----------
Rolstad, C., Haug, T. & Denby, B. (2009). J. Glaciol. 55(192):666-680, doi:10.3189/002214309789470950.
Hugonnet, R., Brun, F., Berthier, E. et al. (2022). Uncertainty analysis of digital elevation models
by spatial inference from stable terrain. IEEE J. Sel. Top. Appl. Earth Obs. Remote Sens.
15:6456-6472, doi:10.1109/JSTARS.2022.3188922 (recalled, unchecked).
Sen, P. K. (1972). J. Multivar. Anal. 2:77-95 (recalled, unchecked); Sheppard, W. F. (1899). Phil.
Trans. R. Soc. Lond. A 192:101-167 (recalled, unchecked).
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import PhysicalRangeError
from .uncertainty.averaging import correlated_sum_sd

__all__ = ["check_components", "components_from_fit", "zone_mean_sd", "stable_median_sd", "coregistered_zone_sd",
           "model_from_stable_sample", "standardise",
           "VARIOGRAM_LAGS", "VARIOGRAM_PAIRS", "SECOND_RANGE_ALPHA"]

#: Log-spaced lag bins from one pixel to a third of the stable ground's extent, and the pairs drawn
#: (:func:`peatburn.science.variogram.empirical_variogram` with ``min_lag``; about 0.3 s).
VARIOGRAM_LAGS, VARIOGRAM_PAIRS = 30, 400_000
#: Level of the F test that keeps a second (long) range (:func:`peatburn.science.variogram.fit_spherical_ranges`).
SECOND_RANGE_ALPHA = 0.05


def check_components(nugget, components):
    """Validate a nugget [m2] and spherical components ``[(partial_sill [m2], range [m]), ...]``;
    return ``(nugget, [(c, a), ...])`` as floats, components with no sill dropped."""
    c0 = float(nugget)
    if not (math.isfinite(c0) and c0 >= 0):
        raise PhysicalRangeError(f"survey error model: nugget must be a finite variance >= 0 m2, got {nugget!r}")
    out = []
    for c, a in components:
        c, a = float(c), float(a)
        if not (math.isfinite(c) and c >= 0 and math.isfinite(a) and a > 0):
            raise PhysicalRangeError(f"survey error model: component ({c!r} m2, {a!r} m) needs a partial sill >= 0 "
                                     "and a range > 0")
        if c > 0:
            out.append((c, a))
    return c0, out


def components_from_fit(fit, sigma):
    """Nugget [m2] and spherical components ``[(c_k [m2], a_k [m])]`` from a multi-range fit, scaled
    so that the total sill is the larger of ``sigma^2`` and the fitted total sill.

    The fit (:func:`peatburn.science.variogram.fit_spherical_sum`) gives the shares and ranges. The
    per-pixel sigma is the NMAD of the stable-ground residuals (Höhle & Höhle 2009): it holds
    variance at lags beyond the variogram's reach (a trend), but it is a robust scale and falls below
    the standard deviation of heavy-tailed error (a residual shift times the terrain slope), while
    the error of a zone mean follows the variance. The larger of the two keeps both. On the synthetic
    scenes of tests/science/test_zone_error_calibration.py the scaling moves predicted / realised
    zone sd by at most 0.1 except for a 0.3 m tilt, where it lifts 0.73-0.91 to 0.81-1.01.

    Parameters
    ----------
    fit : list of dict
        ``[{"nugget"}, {"partial_sill", "range_m"}, ...]`` [m2, m].
    sigma : float
        Per-pixel sd [m] (the NMAD).

    Returns
    -------
    tuple
        ``(nugget, components)``.
    """
    c0 = float(fit[0]["nugget"])
    comps = [(float(p["partial_sill"]), float(p["range_m"])) for p in fit[1:]]
    total = c0 + sum(c for c, _ in comps)
    sig2 = float(sigma) ** 2
    if not (math.isfinite(sig2) and sig2 >= 0):
        raise PhysicalRangeError(f"components_from_fit: sigma must be a finite sd >= 0 m, got {sigma!r}")
    if not total > 0:
        return sig2, []
    k = max(sig2 / total, 1.0)
    return check_components(c0 * k, [(c * k, a) for c, a in comps])


def zone_mean_sd(area_m2, nugget, components, pixel_area_m2, trend_sd=0.0):
    """Standard deviation of the mean survey error over an area [m] (before co-registration).

    ``sqrt(c0 / n + sum_k c_k max(R(L / a_k), 1 / n))``, R the Rolstad et al. (2009) disc average of
    the spherical correlation (:func:`peatburn.science.uncertainty.correlated_sum_sd`), L = sqrt(A / pi),
    n = A / pixel area (at least 1). The floor 1 / n: on pixels the mean of a correlated error has at
    least the variance of independent pixels (the diagonal of the pixel double sum); the continuous
    average drops below it for a range of about a pixel (the smoothing of a resampled survey).

    Parameters
    ----------
    area_m2 : array_like
        Area [m2] (0 gives the per-pixel sd).
    nugget : float
        Nugget c0 [m2]: uncorrelated pixel noise.
    components : sequence of (float, float)
        Spherical components (partial sill c_k [m2], range a_k [m]).
    pixel_area_m2 : float
        Pixel area [m2].
    trend_sd : float
        sd [m] of a planar trend left in the surveys (no tilt correction) over the stable ground: the
        plane's value at a zone does not average out over the zone, so it adds ``trend_sd^2`` whatever
        the area (a zone's position is unknown to the zone sums: drawn per zone with this sd).

    Returns
    -------
    numpy.ndarray
        sd [m].

    References
    ----------
    Rolstad et al. (2009); Hugonnet et al. (2022), Eq. 14 (sum of components; recalled, unchecked).
    """
    c0, comps = check_components(nugget, components)
    area = np.asarray(area_m2, dtype="float64")
    pix = float(pixel_area_m2)
    if not pix > 0:
        raise PhysicalRangeError("zone_mean_sd: pixel_area_m2 must be > 0")
    if np.any(~(area >= 0)):
        raise PhysicalRangeError("zone_mean_sd: areas must be >= 0 m2")
    t = float(trend_sd)
    if not (math.isfinite(t) and t >= 0):
        raise PhysicalRangeError(f"zone_mean_sd: trend_sd must be a finite sd >= 0 m, got {trend_sd!r}")
    var = c0 / np.maximum(area / pix, 1.0) + t * t
    n = np.maximum(area / pix, 1.0)
    for c, a in comps:
        # sampled on pixels, a correlated error averages no better than independent pixels: the
        # pixel double sum is at least its diagonal, c / n (spherical correlations are >= 0); the
        # continuous disc average falls below that when the range is about a pixel
        var = var + np.maximum(correlated_sum_sd(math.sqrt(c), a, area) ** 2, c / n)
    return np.sqrt(var)


def stable_median_sd(stable_area_m2, nugget, components, pixel_area_m2, estimator="median"):
    """Standard deviation of the statistic co-registration subtracts (median or mean of the
    stable-ground differences) [m].

    Mean: :func:`zone_mean_sd` over the stable area. Median: as
    :func:`peatburn.science.uncertainty.residual_bias_sd`, with the correlation of the sum of
    components, rho(r) = sum_k c_k rho_k(r) / sigma^2:

        var = (2 / L^2) sigma^2 integral_0^min(L, max a_k) arcsin(rho_c(r)) r dr + c0 (pi/2) / n

    where rho_c is the correlated part (without the nugget), L = sqrt(A / pi).

    References
    ----------
    Sen (1972), Sheppard (1899) (recalled, unchecked); Rolstad et al. (2009).
    """
    if estimator == "mean":
        return float(zone_mean_sd(stable_area_m2, nugget, components, pixel_area_m2))
    if estimator != "median":
        raise PhysicalRangeError(f"stable_median_sd: estimator {estimator!r}; use 'median' or 'mean'")
    from scipy.integrate import quad

    c0, comps = check_components(nugget, components)
    area, pix = float(stable_area_m2), float(pixel_area_m2)
    if not (area >= 0 and pix > 0):
        raise PhysicalRangeError("stable_median_sd: stable area >= 0 and pixel area > 0 m2")
    sig2 = c0 + sum(c for c, _ in comps)
    big_l = math.sqrt(area / math.pi)
    if big_l == 0 or sig2 == 0:
        return math.sqrt(sig2)
    var = c0 * (math.pi / 2.0) / max(area / pix, 1.0)
    if comps:
        def rho(r):
            s = 0.0
            for c, a in comps:
                x = min(r / a, 1.0)
                s += c * (1.0 - 1.5 * x + 0.5 * x**3)
            return s / sig2

        upper = min(big_l, max(a for _, a in comps))
        breaks = sorted({a for _, a in comps if a < upper})
        integral = quad(lambda r: math.asin(min(rho(r), 1.0)) * r, 0.0, upper, points=breaks or None,
                        epsabs=0.0, epsrel=1e-9, limit=200)[0]
        var += sig2 * 2.0 / big_l**2 * integral
    return math.sqrt(var)


def coregistered_zone_sd(area_m2, stable_area_m2, nugget, components, pixel_area_m2, trend_sd=0.0):
    """Zone-level and run-wide parts of the zone-mean survey error after co-registration [m].

    Returns ``(zone_sd, bias_sd)``: ``zone_sd = zone_mean_sd(area)`` per zone and
    ``bias_sd = sqrt(V_S,med - V_S,mean)`` (one value), so that
    ``zone_sd^2 + bias_sd^2 = V_z + V_S,med - 2 Cov`` with ``Cov = V_S,mean / 2`` (the midpoint
    between a zone far from the stable ground and zones spread among it; module docstring). A planar
    trend (``trend_sd``) enters the zone part only: the median removes its centre.

    References
    ----------
    Rolstad et al. (2009); Hugonnet et al. (2022); Sen (1972) (recalled, unchecked).
    """
    zone = zone_mean_sd(area_m2, nugget, components, pixel_area_m2, trend_sd)
    med = stable_median_sd(stable_area_m2, nugget, components, pixel_area_m2, "median")
    mean = stable_median_sd(stable_area_m2, nugget, components, pixel_area_m2, "mean")
    return zone, math.sqrt(max(med**2 - mean**2, 0.0))


def standardise(x, y, residuals, scale, trend_coefficients=None):
    """Stable-ground residuals standardised by a per-pixel sd and brought back to metres at the
    sample's RMS sd ``s_ref`` [m]: ``(r - plane) / scale * s_ref + plane`` (Hugonnet et al. 2022: the
    variogram is fitted on the standardised field; recalled, unchecked). Returns ``(values, s_ref)``."""
    from .coregistration import plane

    r = np.asarray(residuals, dtype="float64")
    s = np.asarray(scale, dtype="float64")
    if s.shape != r.shape or not np.all(np.isfinite(s) & (s > 0)):
        raise PhysicalRangeError("standardise: scale must be a finite sd > 0 m at every residual")
    s_ref = float(np.sqrt(np.mean(s * s)))
    p = 0.0 if trend_coefficients is None else plane(np.asarray(x, dtype="float64"), np.asarray(y, dtype="float64"),
                                                      trend_coefficients)
    return (r - p) / s * s_ref + p, s_ref


def model_from_stable_sample(x, y, residuals, *, pixel_area_m2, stable_area_m2, sigma=None, range_m=None, seed=0,
                             scale=None):
    """The survey error model from a sample of stable-ground residuals after co-registration.

    1. A least-squares plane is fitted to the residuals
       (:func:`peatburn.science.coregistration.fit_plane`): a tilt that co-registration left (no
       ``depth.survey.tilt``) is a trend, not a stationary error, and a variogram over a third of the
       scene sees only part of it. Its sd over the sample is ``trend_sd`` (near 0 without a trend or
       after a tilt correction).
    2. The residuals less the plane: NMAD sigma (Höhle & Höhle 2009), a variogram on log-spaced lags
       from one pixel to a third of the extent (:func:`peatburn.science.variogram.empirical_variogram`),
       a nugget and one spherical range, or two when an F test supports the second
       (:func:`peatburn.science.variogram.fit_spherical_ranges`), scaled by :func:`components_from_fit`.
    3. With ``range_m`` (the user's correlation range), one spherical component of sill sigma^2 and
       that range instead; with too few points (< 200), one of a pixel's range.
    4. With ``scale`` (a per-pixel sd at each residual, :mod:`peatburn.science.error_scale`), steps 2-3
       run on the residuals less the plane standardised by it and brought back to metres at the
       sample's RMS sd ``s_ref`` (:func:`standardise`): the nugget and components are then those of a
       pixel of sd ``s_ref``, and a zone whose pixels have an RMS sd ``s_z`` gets ``(s_z / s_ref)^2``
       times their zone-mean variance (Hugonnet et al. 2022; the RMS is exact for the nugget and, for
       correlations >= 0, not below the exact double sum when the sd varies little within a range:
       s_i s_j <= (s_i^2 + s_j^2) / 2).

    Parameters
    ----------
    x, y, residuals : array_like
        Stable-ground sample [m].
    pixel_area_m2, stable_area_m2 : float
        Pixel area and the stable area the co-registration used [m2].
    sigma : float, optional
        Per-pixel sd [m] to use when the sample is too small for a fit (default: NMAD of the sample).
    range_m : float, optional
        Fixed spherical range [m].
    seed : int
        Seed of the pair sampling.

    Returns
    -------
    dict
        ``sigma_m``, ``nugget_m2``, ``components`` (list of ``{"partial_sill_m2", "range_m"}``),
        ``trend_sd_m``, ``bias_sd_m`` (run-wide part, :func:`coregistered_zone_sd`), ``stable_area_m2``,
        ``range_m`` and ``nugget_fraction`` (a one-range summary: the component of largest sill),
        ``model`` (words), ``variogram`` (the raw fit or None), ``trend_coefficients`` (the plane, or
        None), ``scale_ref_m`` (``s_ref`` with ``scale``, else None).

    References
    ----------
    Hugonnet et al. (2022) (recalled, unchecked); Rolstad et al. (2009); Höhle, J. & Höhle, M. (2009).
    ISPRS J. Photogramm. Remote Sens. 64:398-406.
    """
    from . import variogram
    from .coregistration import fit_plane, plane
    from .survey import nmad

    x = np.asarray(x, dtype="float64")
    y = np.asarray(y, dtype="float64")
    r = np.asarray(residuals, dtype="float64")
    pix_side = math.sqrt(float(pixel_area_m2))
    trend_sd, fit, coef, s_ref = 0.0, None, None, None
    if range_m is None and r.size >= 200:
        coef = fit_plane(x, y, r)
        p = plane(x, y, coef)
        trend_sd = float(np.std(p))
        r = r - p
        if scale is not None:
            r, s_ref = standardise(x, y, r, scale)
        sig = float(nmad(r))
        extent = float(max(np.ptp(x), np.ptp(y)))
        lags, gamma, counts = variogram.empirical_variogram(
            x, y, r, max_lag=max(extent / 3, 10 * pix_side), n_lags=VARIOGRAM_LAGS, min_lag=pix_side,
            max_pairs=VARIOGRAM_PAIRS, seed=seed)
        fit = variogram.fit_spherical_ranges(lags, gamma, counts, alpha=SECOND_RANGE_ALPHA)
        nugget, comps = components_from_fit(fit, sig)
    else:
        if scale is not None:
            r, s_ref = standardise(x, y, r, scale)
        sig = float(nmad(r)) if sigma is None or scale is not None else float(sigma)
        nugget, comps = check_components(0.0, [(sig**2, range_m if range_m is not None else pix_side)])
    _, bias = coregistered_zone_sd(0.0, stable_area_m2, nugget, comps, pixel_area_m2)
    total = nugget + sum(c for c, _ in comps)
    main = max(comps, key=lambda c: c[0]) if comps else (0.0, pix_side)
    return {"sigma_m": math.sqrt(total), "nugget_m2": nugget,
            "components": [{"partial_sill_m2": c, "range_m": a} for c, a in comps],
            "trend_sd_m": trend_sd, "bias_sd_m": float(bias), "stable_area_m2": float(stable_area_m2),
            "range_m": float(main[1]), "nugget_fraction": nugget / total if total > 0 else 1.0,
            "model": ("planar trend + nugget + one or two spherical components fitted on stable ground (Hugonnet et al. "
                      "2022); total sill the larger of NMAD^2 and the fitted sill" if fit is not None else
                      "one spherical component of sill sigma^2 and the given or a one-pixel range"),
            "variogram": None if fit is None else [{k: float(v) for k, v in d.items()} for d in fit],
            "trend_coefficients": None if coef is None else [float(c) for c in coef], "scale_ref_m": s_ref}
