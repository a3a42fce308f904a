"""The accuracy of the burned-area map as an area term: the ratio of the error-adjusted burned area
to the mapped burned area, its standard error, and the multiplicative term the draws take from them.

A map's burned area differs from the true burned area by its omission and commission errors. An
accuracy assessment on a probability sample of reference units gives an error-adjusted (stratified)
estimate of the area and its standard error (Olofsson et al. 2014). Every below-ground quantity of
a run is a sum over the mapped burned pixels (depth x density x carbon fraction x area), and the
flaming of the burned-area route is area x biomass x combustion factor, so both scale with the
burned area: the map's area error enters them as one multiplicative term shared by all zones.

Pure functions: numbers in, numbers out.

References
----------
Olofsson, P., Foody, G. M., Herold, M., Stehman, S. V., Woodcock, C. E. & Wulder, M. A. (2014).
Good practices for estimating area and assessing accuracy of land change. Remote Sensing of
Environment 148:42-57, doi:10.1016/j.rse.2014.02.015 (title, journal, volume and pages checked
through the `search` tool; the equations below are recalled, unchecked: user's accuracy
U_i = p_ii / p_i. (commission error 1 - U_i), producer's accuracy P_j = p_jj / p_.j (omission
error 1 - P_j), the error-adjusted area A_j = A_tot p_.j and its standard error, and the variance of
a user's accuracy from a simple random sample of n_i units in stratum i, U_i (1 - U_i) / (n_i - 1)).
JCGM 100:2008 (GUM) §5.1.6 (relative uncertainties of a product or quotient of independent
quantities add in quadrature; section recalled, unchecked).
"""

from __future__ import annotations

import math

from ...errors import PhysicalRangeError


def _rate(value, name: str) -> float:
    v = float(value)
    if not (math.isfinite(v) and 0.0 <= v < 1.0):
        raise PhysicalRangeError(f"burned_area.accuracy.{name}: a rate in [0, 1) (a fraction, not percent), got {value!r}")
    return v


def proportion_se(rate: float, n: int) -> float:
    """Standard error of a proportion estimated from ``n`` reference units of a simple random
    sample: ``sqrt(p (1 - p) / (n - 1))`` [-] (the variance of a user's accuracy within a stratum,
    Olofsson et al. 2014, recalled, unchecked).

    Parameters
    ----------
    rate : float
        The estimated proportion (an omission or commission rate) [-].
    n : int
        Reference units it was estimated from (>= 2).
    """
    if int(n) != n or n < 2:
        raise PhysicalRangeError(f"burned_area.accuracy: a sample size must be a whole number >= 2, got {n!r}")
    p = float(rate)
    return math.sqrt(p * (1.0 - p) / (int(n) - 1))


def area_ratio_from_rates(omission: float, commission: float, omission_se: float = 0.0,
                          commission_se: float = 0.0) -> tuple[float, float]:
    """Ratio of the true burned area to the mapped burned area, and its standard error, from the
    map's omission and commission rates of the burned class.

    Of the mapped burned area M, the share ``1 - commission`` is truly burned (the user's accuracy);
    that truly burned mapped area is the share ``1 - omission`` of all truly burned area (the
    producer's accuracy). So the true burned area is ``M (1 - c) / (1 - o)`` and

        R = (1 - c) / (1 - o),
        (SE(R) / R)^2 = SE(c)^2 / (1 - c)^2 + SE(o)^2 / (1 - o)^2,

    the second to first order, with the two rates' errors taken as independent (the GUM rule for a
    quotient of independent quantities). The definitions of the two accuracies follow Olofsson et
    al. (2014) (recalled, unchecked); the ratio is their quotient (arithmetic). The independence is
    an approximation: estimated from one sample, the two accuracies share units.

    Parameters
    ----------
    omission, commission : float
        Omission and commission rates of the burned class [-], in [0, 1).
    omission_se, commission_se : float
        Their standard errors [-] (e.g. :func:`proportion_se`).

    Returns
    -------
    tuple of float
        ``(R, SE(R))`` [-].
    """
    o, c = _rate(omission, "omission"), _rate(commission, "commission")
    so, sc = float(omission_se), float(commission_se)
    if not (math.isfinite(so) and so >= 0 and math.isfinite(sc) and sc >= 0):
        raise PhysicalRangeError("burned_area.accuracy: standard errors must be finite numbers >= 0")
    r = (1.0 - c) / (1.0 - o)
    return r, r * math.hypot(sc / (1.0 - c), so / (1.0 - o))


def area_term(ratio: float, ratio_se: float, adjust: bool = False) -> tuple[float, float]:
    """The scale applied to the area-driven estimates and the relative standard deviation of the
    area term the draws take.

    ``adjust=True`` (bias-corrected): the estimates are scaled by the error-adjusted ratio R and
    the term's relative sd is ``SE(R) / R`` (Olofsson et al. 2014: report the error-adjusted area with
    its standard error). ``adjust=False`` (the default when an accuracy is given: the estimates follow
    the mapped area): scale 1 and relative sd ``sqrt(SE(R)^2 + (R - 1)^2)``: the known bias of the
    mapped area that is left in is counted as an uncertainty beside the sampling error, so that the
    interval still reaches the error-adjusted estimate (an uncorrected systematic effect added in
    quadrature: a project choice, in the spirit of the GUM's treatment of uncorrected effects;
    assumption).

    Parameters
    ----------
    ratio : float
        Error-adjusted burned area over mapped burned area [-], > 0.
    ratio_se : float
        Its standard error [-], >= 0.
    adjust : bool
        Scale the estimates by ``ratio``.

    Returns
    -------
    tuple of float
        ``(scale, cv)`` [-].
    """
    r, se = float(ratio), float(ratio_se)
    if not (math.isfinite(r) and r > 0):
        raise PhysicalRangeError(f"burned_area.accuracy.area_ratio: must be a number > 0, got {ratio!r}")
    if not (math.isfinite(se) and se >= 0):
        raise PhysicalRangeError(f"burned_area.accuracy.area_ratio_se: must be a number >= 0, got {ratio_se!r}")
    if adjust:
        return r, se / r
    return 1.0, math.hypot(se, r - 1.0)
