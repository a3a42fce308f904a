"""The error of fire radiative energy integrated from sparse observations, per fire event and per zone.

FRE is the time integral of FRP. Polar orbiters see a fire a few times a day, so the integral
between and beyond the observations is interpolated, and its error shrinks as the observations
grow in number. Here the relative standard deviation of an event's FRE is

    cv_e = cv_1 / sqrt(n_e),

``n_e`` the distinct observation times of the event and ``cv_1`` that of an event seen once: the
standard error of a mean of ``n_e`` independent samples of the fire's power (sampling theory;
that the samples are independent is an assumption: FRP is autocorrelated over hours, so closely
spaced observations are worth less). Events err independently; within an event the error is one
value, shared by every zone the event touches. A zone's dry matter from FRE, ``D_z = sum_e D_ez``,
then has the standard deviation ``cv_1 sqrt(sum_e D_ez^2 / n_e)``: many small events average out,
one large event does not.

No published value of ``cv_1`` could be checked (the sparse-sampling problem of FRE is treated by
Freeborn et al. 2011, Boschetti & Roy 2009 and Vermote et al. 2009, all recalled, unchecked), so
:data:`DEFAULT_FRE_SINGLE_OBSERVATION_CV` is a stated assumption the user can change
(``uncertainty.fre_integration_cv``).

Pure functions: arrays in, arrays out.

References
----------
Freeborn, P. H., Wooster, M. J. & Roberts, G. (2011). Addressing the spatiotemporal sampling
design of MODIS to provide estimates of the fire radiative energy emitted from Africa. Remote
Sensing of Environment 115:475-489 (recalled, unchecked).
Boschetti, L. & Roy, D. P. (2009). Strategies for the fusion of satellite fire radiative power with
burned area data for fire radiative energy derivation. J. Geophys. Res. 114, D20302 (recalled,
unchecked).
Vermote, E. et al. (2009). An approach to estimate global biomass burning emissions of organic and
black carbon from MODIS fire radiative power. J. Geophys. Res. 114, D18205 (recalled, unchecked).
"""

from __future__ import annotations

import numpy as np

#: Relative standard deviation of the FRE of a fire event observed once [-]: 1.0. Assumption (no
#: checkable source): one snapshot of FRP fixes the power, not how long the fire burned, so its FRE
#: is uncertain by about a factor of two. Four observations give 0.5, a hundred 0.1.
DEFAULT_FRE_SINGLE_OBSERVATION_CV = 1.0  # assumption: no checkable source

#: Detections less than this far apart in time [s] count as one observation of their event: a
#: quarter hour, the repeat of a geostationary imager and longer than one polar-orbiter swath takes
#: to pass (common practice).
OBSERVATION_BIN_S = 900.0  # common practice


def observation_count(event, t_s, bin_s: float = OBSERVATION_BIN_S) -> np.ndarray:
    """Distinct observation times of each event [count].

    Parameters
    ----------
    event : array of int
        Event id of each detection (0 .. n_events - 1).
    t_s : array of float
        Detection times [s].
    bin_s : float
        Width of the time bins that count as one observation [s].

    Returns
    -------
    numpy.ndarray
        Count per event (length max(event) + 1; 0 for ids with no detection).
    """
    event = np.asarray(event, dtype=np.int64)
    if event.size == 0:
        return np.zeros(0, dtype=np.int64)
    slot = np.floor(np.asarray(t_s, dtype="float64") / float(bin_s)).astype(np.int64)
    pairs = np.unique(np.stack([event, slot], axis=1), axis=0)
    return np.bincount(pairs[:, 0], minlength=int(event.max()) + 1)


def hits_ssq(dry_matter_kg, event, n_obs, pick, zone, weight, n_zones: int) -> np.ndarray:
    """Per zone, ``sum_e D_ez^2 / n_e`` [kg^2] from detection-zone hits.

    Parameters
    ----------
    dry_matter_kg : array of float
        Dry matter of each detection [kg].
    event : array of int
        Event of each detection.
    n_obs : array of int
        Observations of each event (:func:`observation_count`).
    pick : array of int
        Detection of each hit.
    zone : array of int
        Zone bin of each hit (0 .. n_zones - 1).
    weight : array of float
        Share of the detection the hit's zone takes.
    n_zones : int
        Number of zone bins.

    Returns
    -------
    numpy.ndarray
        Length ``n_zones``.
    """
    dm = np.asarray(dry_matter_kg, dtype="float64")
    pick = np.asarray(pick, dtype=np.int64)
    zone = np.asarray(zone, dtype=np.int64)
    out = np.zeros(int(n_zones))
    if pick.size == 0:
        return out
    ev = np.asarray(event, dtype=np.int64)[pick]
    key = zone * (int(ev.max()) + 1) + ev
    uniq, inv = np.unique(key, return_inverse=True)
    d_ez = np.bincount(inv, weights=dm[pick] * np.asarray(weight, dtype="float64"), minlength=uniq.size)
    z_of, e_of = uniq // (int(ev.max()) + 1), uniq % (int(ev.max()) + 1)
    n = np.maximum(np.asarray(n_obs, dtype="float64")[e_of], 1.0)
    return np.bincount(z_of, weights=d_ez * d_ez / n, minlength=int(n_zones))[:int(n_zones)]
