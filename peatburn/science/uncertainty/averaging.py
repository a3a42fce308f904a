"""Area-averaged error: the standard deviation of the mean of a spatially correlated error over an
area (Rolstad et al. 2009), and of the vertical bias left after co-registration.

References: see :mod:`peatburn.science.uncertainty`.
"""

from __future__ import annotations

import math

import numpy as np

from ...errors import ConfigError, PhysicalRangeError


#: sqrt(pi/2) = 1.2533: standard error of the sample median over that of the sample mean for
#: independent normal data (asymptotic variance of the median pi sigma^2 / (2 n); a textbook
#: result, e.g. Cramér 1946, Mathematical Methods of Statistics, §28.5, recalled, unchecked).
MEDIAN_EFFICIENCY_FACTOR = math.sqrt(math.pi / 2.0)


def correlated_sum_sd(sigma, range_m, area_m2, nugget_fraction=0.0, *, pixel_area_m2=None):
    """Standard deviation of the mean of a spatially correlated error over an area [m].

    Rolstad et al. (2009) average the spherical covariance of the errors over a circle of the
    same area as the zone, radius ``L = sqrt(A / pi)``, seen from its centre:

        sigma_A^2 = sigma_s^2 (1 - L/a + L^3 / (5 a^3))      for L <= a
        sigma_A^2 = sigma_s^2 a^2 / (5 L^2) = sigma_s^2 pi a^2 / (5 A)   for L > a

    (spherical partial sill sigma_s^2, range a). For a large zone sigma_A = sigma sqrt(pi a^2 / (5 A))
    falls like 1/sqrt(A), but with the correlation area pi a^2 / 5 in place of one pixel: the
    mean of correlated errors does not shrink like 1/sqrt(n). A nugget (uncorrelated share of the
    variance) shrinks like 1/sqrt(n), n = A / pixel area:

        var = sigma^2 [(1 - nugget_fraction) R(L/a) + nugget_fraction / n]

    Parameters
    ----------
    sigma : array_like
        Standard deviation of the per-pixel error [m] (sqrt of the total sill; e.g. the NMAD of
        stable-ground differences).
    range_m : array_like
        Range a of the spherical variogram [m], > 0.
    area_m2 : array_like
        Area over which the error is averaged [m2] (the zone's surveyed burned area).
    nugget_fraction : float
        Share of sigma^2 that is uncorrelated, in [0, 1].
    pixel_area_m2 : float, optional
        Pixel area [m2]; needed when ``nugget_fraction > 0``.

    Returns
    -------
    numpy.ndarray
        Standard deviation of the area-mean error [m]; sigma for an area of 0.

    Notes
    -----
    The form was checked against a public implementation that cites the paper's DOI and
    re-derived here: (2 / L^2) * integral_0^L C(r) r dr with the spherical covariance
    C(r) = sigma^2 (1 - 3r/(2a) + r^3/(2a^3)) gives both branches. The paper's equation numbers
    were not checked. For large areas the expression equals the exact variance of the mean over
    the disc (the integral of the covariance divided by the area). For any zone shape it is an
    upper bound: the average covariance from the centre of a disc is the largest over the disc,
    and the disc maximises the double integral of a decreasing covariance among sets of equal
    area (Riesz rearrangement inequality; e.g. Lieb & Loss 2001, Analysis, Thm 3.7, recalled).
    Elongated or scattered burned areas therefore get conservative (wider) intervals.

    References
    ----------
    Rolstad, C., Haug, T. & Denby, B. (2009). J. Glaciol. 55(192):666-680,
    doi:10.3189/002214309789470950.
    """
    sigma = np.asarray(sigma, dtype="float64")
    a = np.asarray(range_m, dtype="float64")
    area = np.asarray(area_m2, dtype="float64")
    nf = float(nugget_fraction)
    if not 0.0 <= nf <= 1.0:
        raise PhysicalRangeError(f"correlated_sum_sd: nugget_fraction must lie in [0, 1], got {nf!r}")
    if np.any(sigma < 0) or np.any(area < 0):
        raise PhysicalRangeError("correlated_sum_sd: sigma and area must be >= 0")
    if nf < 1.0 and np.any(~(a > 0)):
        raise PhysicalRangeError("correlated_sum_sd: the range must be > 0 m (use nugget_fraction=1 for "
                                 "uncorrelated errors)")
    with np.errstate(divide="ignore", invalid="ignore"):
        if nf < 1.0:
            ratio = np.sqrt(area / math.pi) / a
            r_sph = np.where(ratio <= 1.0, 1.0 - ratio + ratio**3 / 5.0, 1.0 / (5.0 * ratio**2))
        else:
            r_sph = np.zeros(np.broadcast(sigma, area).shape)
        if nf > 0.0:
            if pixel_area_m2 is None or not float(pixel_area_m2) > 0:
                raise PhysicalRangeError("correlated_sum_sd: pixel_area_m2 (> 0) is needed when nugget_fraction > 0")
            n = np.maximum(area / float(pixel_area_m2), 1.0)
            r_nug = 1.0 / n
        else:
            r_nug = 0.0
    return sigma * np.sqrt((1.0 - nf) * r_sph + nf * r_nug)


def residual_bias_sd(sigma, range_m, stable_area_m2, *, nugget_fraction=0.0, pixel_area_m2=None,
                     estimator="median"):
    """Standard deviation of the vertical bias left after co-registration [m].

    Co-registration subtracts the mean or the median of the stable-ground differences; what is
    left is the error of that statistic over the stable ground.

    * ``"mean"``: :func:`correlated_sum_sd` over the stable area (Rolstad et al. 2009).
    * ``"median"``: by the Bahadur representation of the sample median (median - m ~
      (1/2 - F_n(m)) / f(m), also for weakly dependent data; Sen 1972, recalled) and Sheppard's
      formula for the bivariate normal orthant, P(X <= 0, Y <= 0) = 1/4 + arcsin(rho) / (2 pi)
      (Sheppard 1899, recalled), the variance of the median of normal errors with correlations
      rho_ij is ``sigma^2 / n^2 * sum_ij arcsin(rho_ij)`` where the mean has ``sum_ij rho_ij``.
      The spherical part is averaged like Rolstad et al. (2009) do for the mean, from the centre
      of a disc of the stable area, radius L = sqrt(A / pi):

          var / sigma^2 = (2 / L^2) * integral_0^min(L, a) arcsin((1 - nu) rho_s(r)) r dr + nu (pi/2) / n

      with rho_s(r) = 1 - 3r/(2a) + r^3/(2a^3), nugget fraction nu and n = A / pixel area. With
      independent errors (nu = 1) this is the textbook pi sigma^2 / (2 n) (:data:`MEDIAN_EFFICIENCY_FACTOR`);
      for correlated errors over a large area it is only 1.0556 times the variance of the mean
      (integral of arcsin(rho_s) r over that of rho_s r), since most pairs are weakly correlated.

    Parameters
    ----------
    sigma, range_m : float
        Per-pixel error [m] and spherical range [m] from the stable ground.
    stable_area_m2 : float
        Area of stable ground used for the vertical shift [m2].
    nugget_fraction, pixel_area_m2 : float
        As :func:`correlated_sum_sd` (the pixel area is needed with a nugget).
    estimator : {"median", "mean"}
        The statistic co-registration used for the vertical shift.

    Returns
    -------
    float
        sigma_bias [m].

    References
    ----------
    Rolstad et al. (2009), J. Glaciol. 55:666; Sheppard, W. F. (1899). On the application of the
    theory of error to cases of normal distribution and normal correlation. Phil. Trans. R. Soc.
    Lond. A 192:101-167 (recalled, unchecked); Sen, P. K. (1972). On the Bahadur representation
    of sample quantiles for sequences of phi-mixing random variables. J. Multivar. Anal. 2:77-95
    (recalled, unchecked).
    """
    if estimator == "mean":
        return float(correlated_sum_sd(sigma, range_m, stable_area_m2, nugget_fraction, pixel_area_m2=pixel_area_m2))
    if estimator != "median":
        raise ConfigError(f"residual_bias_sd: estimator {estimator!r}; use 'median' or 'mean'")
    from scipy.integrate import quad

    sig, a, area, nu = float(sigma), float(range_m), float(stable_area_m2), float(nugget_fraction)
    if not (sig >= 0 and area >= 0 and 0.0 <= nu <= 1.0 and (a > 0 or nu == 1.0)):
        raise PhysicalRangeError("residual_bias_sd: sigma, area >= 0, range > 0, nugget_fraction in [0, 1]")
    big_l = math.sqrt(area / math.pi)
    if big_l == 0:
        return sig
    var = 0.0
    if nu < 1.0:
        upper = min(big_l, a)

        def integrand(r):
            x = r / a
            return math.asin((1.0 - nu) * (1.0 - 1.5 * x + 0.5 * x**3)) * r

        var += 2.0 / big_l**2 * quad(integrand, 0.0, upper, epsabs=0.0, epsrel=1e-10)[0]
    if nu > 0.0:
        if pixel_area_m2 is None or not float(pixel_area_m2) > 0:
            raise PhysicalRangeError("residual_bias_sd: pixel_area_m2 (> 0) is needed when nugget_fraction > 0")
        var += nu * (math.pi / 2.0) / max(area / float(pixel_area_m2), 1.0)
    return sig * math.sqrt(var)
