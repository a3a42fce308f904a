"""Burn depth from two bare-earth elevation surveys: subsidence, difference, error, detection.

All functions are pure: arrays and scalars in [m, yr], arrays out.

The burn-depth estimator
------------------------
Within the burned area, the per-pixel estimate is the fire-caused lowering

    d = (z_pre - z_post_aligned) - r * T,      then capped by the peat thickness


with *no* lower clip at zero. Survey noise e has (after co-registration) zero mean on stable
ground, so E[d] equals the true lowering and a zone sum of d is unbiased. Clipping every negative
difference to zero (max(d, 0)) would instead add E[max(e, 0)] = sigma / sqrt(2 pi) per pixel over
unburned islands and thin burns, a positive bias that grows with the area (Lane et al. 2003 and
Wheaton et al. 2010 discuss the analogous bias of thresholded change budgets). The cap at the peat
thickness is a physical bound: fire cannot remove more peat than was there. Applied as a plain
``min(d, thickness)`` it would bias low where the true burn reaches the mineral soil (it cuts the
upper tail of the noise only), so it is applied only beyond the level of detection
(:func:`peatburn.science.peat.cap_depth`). Pixels below the level of detection are counted for the
QA summary, not removed from the sums; pixels far beyond it (:func:`outliers`: canal water, spoil
banks, survey blunders) are counted with their area in the QA table, not removed either.

References
----------
Lane, S. N., Westaway, R. M. & Hicks, D. M. (2003). Estimation of erosion and deposition volumes in
a large, gravel-bed, braided river using synoptic remote sensing. Earth Surf. Process. Landforms 28:249-271.
Brasington, J., Langham, J. & Rumsby, B. (2003). Methodological sensitivity of morphometric estimates of
coarse fluvial sediment transport. Geomorphology 53:299-316.
Wheaton, J. M., Brasington, J., Darby, S. E. & Sear, D. A. (2010). Accounting for uncertainty in DEMs
from repeat topographic surveys. Earth Surf. Process. Landforms 35:136-156.
Höhle, J. & Höhle, M. (2009). Accuracy assessment of digital elevation models by means of robust
statistical methods. ISPRS J. Photogramm. Remote Sens. 64:398-406.
"""

from __future__ import annotations

import numpy as np

#: Consistency constant of the NMAD for normally distributed errors: 1 / Phi^-1(3/4)
#: (Höhle & Höhle 2009, Eq. 2; the value of 1/scipy.stats.norm.ppf(0.75) to 4 decimals).
NMAD_CONSTANT = 1.4826


def subsidence_lowering(rate, interval_years):
    """Surface lowering by peat subsidence between two surveys.

    Parameters
    ----------
    rate : array_like
        Subsidence rate [m/yr], positive downwards.
    interval_years : float
        Time between the surveys [yr].

    Returns
    -------
    numpy.ndarray
        Lowering [m], positive downwards.

    Notes
    -----
    Drained tropical peat subsides by a few cm per year (order 3-5 cm/yr; Hooijer et al. 2012,
    Biogeosciences 9:1053, recalled, unchecked); a survey pair years apart must have it removed
    before differencing, or the fire would be blamed for it.
    """
    return np.asarray(rate, dtype="float64") * float(interval_years)


def elevation_change(pre, post):
    """Surface lowering between two aligned surveys, ``pre - post`` [m] (positive = lowered)."""
    return np.asarray(pre, dtype="float64") - np.asarray(post, dtype="float64")


def burn_depth(pre, post_aligned, subsidence=0.0, thickness=None, tolerance=0.0):
    """Unbiased per-pixel burn depth: lowering not explained by subsidence, capped by the peat.

    Parameters
    ----------
    pre : array_like
        Pre-fire bare-earth elevation [m].
    post_aligned : array_like
        Post-fire elevation after co-registration to ``pre`` [m].
    subsidence : array_like, optional
        Subsidence between the surveys [m] (see :func:`subsidence_lowering`).
    thickness : array_like, optional
        Pre-fire peat thickness [m]; the depth never exceeds it by more than ``tolerance``. NaN
        means unknown (no cap).
    tolerance : float, optional
        Level of detection [m]: the cap applies only beyond it (:func:`peatburn.science.peat.cap_depth`).

    Returns
    -------
    numpy.ndarray
        Burn depth [m]. Can be slightly negative where noise exceeds a thin or null burn; that is
        what keeps zone sums unbiased (module docstring). NaN where either survey is missing.
    """
    d = elevation_change(pre, post_aligned) - np.asarray(subsidence, dtype="float64")
    if thickness is not None:
        from .peat import cap_depth

        d = cap_depth(d, thickness, tolerance)
    return d


def nmad(values, axis=None):
    """Normalised median absolute deviation, a spread robust to outliers.

    ``NMAD = 1.4826 * median(|x - median(x)|)``, ignoring NaN (Höhle & Höhle 2009, Eq. 2).

    Parameters
    ----------
    values : array_like
        Elevation differences [m].

    Returns
    -------
    float or numpy.ndarray
        NMAD [m]; NaN for no finite value.
    """
    x = np.asarray(values, dtype="float64")
    if not np.isfinite(x).any():
        return np.nan
    med = np.nanmedian(x, axis=axis, keepdims=True)
    return NMAD_CONSTANT * np.nanmedian(np.abs(x - med), axis=axis)


def propagated_error(sigma_pre, sigma_post):
    """Error of an elevation difference from the errors of the two surveys.

    ``sigma_dh = sqrt(sigma_pre**2 + sigma_post**2)`` for independent errors
    (Brasington et al. 2003; Lane et al. 2003, Eq. 9).

    Parameters
    ----------
    sigma_pre, sigma_post : array_like
        Vertical error (standard deviation) of each survey [m].

    Returns
    -------
    numpy.ndarray
        Standard error of the difference [m].
    """
    return np.hypot(np.asarray(sigma_pre, dtype="float64"), np.asarray(sigma_post, dtype="float64"))


def level_of_detection(sigma_dh, t=1.96):
    """Minimum level of detection of an elevation change.

    ``LoD = t * sigma_dh`` (Lane et al. 2003; Wheaton et al. 2010, Eq. 3 with
    sigma_dh from :func:`propagated_error` or from the stable-ground NMAD); t = 1.96 gives 95 %
    confidence for normal errors.

    Parameters
    ----------
    sigma_dh : array_like
        Standard error of the difference [m].
    t : float
        Critical value [-].

    Returns
    -------
    numpy.ndarray
        Level of detection [m].
    """
    return float(t) * np.asarray(sigma_dh, dtype="float64")


def below_detection(depth, lod):
    """True where ``|depth| < lod`` (changes indistinguishable from survey noise); NaN -> False."""
    d = np.asarray(depth, dtype="float64")
    with np.errstate(invalid="ignore"):
        return np.abs(d) < np.asarray(lod, dtype="float64")


#: Multiple of the level of detection beyond which a surveyed difference inside a scar is flagged as
#: an outlier (:func:`outliers`). Common practice in spirit (robust screening at a few times the
#: noise level); the value 5 is this project's choice, stated in docs/method.md.
OUTLIER_LOD_MULTIPLE = 5.0


def outliers(depth, lod, thickness=None, multiple=OUTLIER_LOD_MULTIPLE):
    """Surveyed burn depths far beyond what noise or fire explains: flagged, never dropped.

    A pixel is an outlier where the surface *rose* by more than ``multiple x lod`` (``depth <
    -multiple x lod``: spoil banks, regrowth or a blunder; a fire only lowers the ground), or where
    it fell deeper than the peat by more than ``multiple x lod`` (``depth > thickness + multiple x
    lod``: canal water, excavation). The caller counts their area in the QA table and keeps them in
    the sums (removing them would bias the sums in an unknown direction; the QA lets a reviewer
    judge).

    Parameters
    ----------
    depth : array_like
        Raw burn depth (before the thickness cap) [m].
    lod : float
        Level of detection [m] (:func:`level_of_detection`); NaN flags nothing.
    thickness : array_like, optional
        Peat thickness [m]; NaN or None: no upper test.
    multiple : float
        Multiple of the level of detection [-].

    Returns
    -------
    numpy.ndarray of bool
        True at the outliers (NaN depth -> False).

    References
    ----------
    Wheaton, J. M. et al. (2010). Earth Surf. Process. Landforms 35:136-156 (level of detection).
    """
    d = np.asarray(depth, dtype="float64")
    if not np.isfinite(lod):
        return np.zeros(d.shape, bool)
    k = float(multiple) * float(lod)
    with np.errstate(invalid="ignore"):
        out = d < -k
        if thickness is not None:
            t = np.asarray(thickness, dtype="float64")
            out = out | (np.isfinite(t) & (d > t + k))
    return out
