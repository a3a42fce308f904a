"""Where a fire started: attribution of each fire's ignition to a zone from its earliest detection.

Common practice (no single published method; the usual reading of active-fire records in concession
audits): a fire is attributed to the zone in which it was **first detected**, and a fire whose first
detections lie outside a zone and whose later detections lie inside it **came in** from outside.
This module applies that rule with the detection's footprint made explicit, so that a detection
near a boundary is never guessed to one side:

* A detection is a pixel of side ``footprint_m`` (375 m for an I-band pixel of the VIIRS sensor,
  Schroeder et al. 2014, and 1 km for MODIS, both nominal; pixels grow off nadir, so a larger value
  is the cautious choice). The reported position is its centre; the fire may be anywhere in
  the pixel, whose orientation on the ground is not known, so any point within the half-diagonal
  ``r = footprint_m / sqrt(2)`` may be the burning spot. A detection whose distance to the nearest
  zone boundary is at most ``r`` **straddles** the boundary: it is *undetermined* and says nothing
  about the side the fire was on.
* The first detections are those within ``tie_s`` of the earliest one (one overpass, or two
  satellites minutes apart, cannot order the spots they see). When they disagree about the zone,
  or any of them is undetermined, the ignition is *undetermined*.
* Spread: the determined detections after the first ones, in time order, name the zones the fire
  reached after it started; a zone reached from another start zone is one the fire **came into**.

What the rule cannot see (docs/method.md 7.5): a fire that burned under cloud or between overpasses
(a sensor covers a place "every 12 h or less depending on the latitude", Schroeder et al. 2014) is
first detected where it happened to be at the first clear overpass, not where it started; smouldering peat under a small flaming front may
never be detected. An attribution is therefore an estimate to be verified in the field, not a finding.

References
----------
Schroeder, W., Oliva, P., Giglio, L. & Csiszar, I. A. (2014). The New VIIRS 375 m active fire
detection data product: algorithm description and initial assessment. Remote Sensing of Environment
143:85-96, doi:10.1016/j.rse.2013.12.008 (375 m and the revisit checked against the abstract).

Arrays in, arrays out: zone membership and boundary distances are computed by the caller
(:mod:`peatburn.engine.ignition`) from the geometries; here only times, zone indices and distances.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["OUTSIDE_ZONE", "OVERLAP_ZONE", "UNDETERMINED", "NONE", "STATUS", "DEFAULT_FOOTPRINT_M",
           "DEFAULT_TIE_S", "footprint_radius", "Ignition", "attribute_ignition", "relation_to_zone"]

#: Zone index of a detection outside every zone of the layer.
OUTSIDE_ZONE = -1
#: Zone index of a detection inside two or more (overlapping) zones of the layer.
OVERLAP_ZONE = -2
#: Ignition zone of a fire whose start cannot be placed.
UNDETERMINED = -3
#: Ignition zone of a fire without any detection.
NONE = -4

#: Status codes of :attr:`Ignition.status` and their meaning.
STATUS = {
    0: ("inside", "first detected inside a zone, its footprint clear of every boundary"),
    1: ("outside", "first detected outside every zone, its footprint clear of every boundary"),
    2: ("undetermined", "the first detection's footprint straddles a zone boundary"),
    3: ("undetermined", "first detections within the tie window lie in different zones"),
    4: ("undetermined", "the first detection lies where zones overlap"),
    5: ("no_detections", "no active-fire detection belongs to the fire"),
}

#: Default pixel side of a detection [m]: a VIIRS I-band pixel (375 m nominal; Schroeder et al. 2014).
DEFAULT_FOOTPRINT_M = 375.0
#: Default tie window [s]: detections within an hour of the earliest are one first sighting (a
#: project choice: one overpass spans minutes, two satellites of one orbit family pass tens of
#: minutes apart).
DEFAULT_TIE_S = 3600.0


def footprint_radius(footprint_m):
    """Half-diagonal of a square detection pixel of side ``footprint_m`` [m]: the farthest a burning
    spot can lie from the reported centre when the pixel's orientation is unknown.

    Parameters
    ----------
    footprint_m : float or array
        Pixel side [m].

    Returns
    -------
    float or array
        ``footprint_m / sqrt(2)`` [m] (elementary geometry: half of a square's diagonal ``a sqrt(2)``).
    """
    return np.asarray(footprint_m, dtype="float64") / np.sqrt(2.0)


@dataclass
class Ignition:
    """Per-fire ignition attribution (arrays of length ``n_fires``).

    Attributes
    ----------
    first : int array
        Index (into the detection arrays) of the first detection, -1 for a fire without detections.
        Ties in time are broken by the order of the arrays (the earliest row).
    time_s : float array
        Time of the first detection [s since 1970-01-01 UTC]; NaN without detections.
    zone : int array
        Zone of the start: a zone index, :data:`OUTSIDE_ZONE`, :data:`UNDETERMINED` or :data:`NONE`.
    status : int array
        A key of :data:`STATUS`.
    distance_m : float array
        Distance from the first detection to the nearest zone boundary [m]; NaN without detections.
    n_first : int array
        Number of detections in the tie window of the first one.
    n_detections : int array
        Number of detections that belong to the fire.
    reached : list of list of int
        Per fire, the zones (or :data:`OUTSIDE_ZONE`) its determined later detections lie in, other
        than the start zone, in the order the fire reached them; empty when the start is not determined.
    """

    first: np.ndarray
    time_s: np.ndarray
    zone: np.ndarray
    status: np.ndarray
    distance_m: np.ndarray
    n_first: np.ndarray
    n_detections: np.ndarray
    reached: list


def attribute_ignition(fire, t_s, zone, distance_m, n_fires: int, *, footprint_m=DEFAULT_FOOTPRINT_M,
                       tie_s=DEFAULT_TIE_S) -> Ignition:
    """Attribute each fire's start to a zone from its earliest detections (common practice, see
    the module docstring for the rule and its limits).

    Parameters
    ----------
    fire : int array (n,)
        The fire each detection belongs to (0 .. n_fires-1). A detection that belongs to two fires
        appears twice, once per fire.
    t_s : float array (n,)
        Observation time [s].
    zone : int array (n,)
        Zone the detection's reported position lies in: an index >= 0, :data:`OUTSIDE_ZONE` or
        :data:`OVERLAP_ZONE`.
    distance_m : float array (n,)
        Distance from the reported position to the nearest boundary of the zone layer [m]
        (``inf`` when the layer has no zone).
    n_fires : int
        Number of fires.
    footprint_m : float
        Pixel side of a detection [m] (see :func:`footprint_radius`).
    tie_s : float
        Detections within this time of a fire's earliest one count as first detections [s].

    Returns
    -------
    Ignition
    """
    fire = np.asarray(fire, dtype=np.int64)
    t = np.asarray(t_s, dtype="float64")
    zone = np.asarray(zone, dtype=np.int64)
    dist = np.asarray(distance_m, dtype="float64")
    if not (fire.shape == t.shape == zone.shape == dist.shape):
        raise ValueError("fire, t_s, zone and distance_m must have one value per detection")
    if footprint_m < 0 or tie_s < 0:
        raise ValueError("footprint_m and tie_s must be >= 0")
    r = float(footprint_radius(footprint_m))
    # a detection is "determined" when its footprint cannot reach a boundary and it is in one zone at most
    determined = (dist > r) & (zone != OVERLAP_ZONE)

    first = np.full(n_fires, -1, dtype=np.int64)
    time_s = np.full(n_fires, np.nan)
    start = np.full(n_fires, NONE, dtype=np.int64)
    status = np.full(n_fires, 5, dtype=np.int64)
    d_first = np.full(n_fires, np.nan)
    n_first = np.zeros(n_fires, dtype=np.int64)
    n_det = np.bincount(fire, minlength=n_fires)[:n_fires].astype(np.int64)
    reached: list = [[] for _ in range(n_fires)]
    if fire.size == 0:
        return Ignition(first, time_s, start, status, d_first, n_first, n_det, reached)

    # by fire, then time, then row (stable: ties in time keep the rows' order)
    order = np.lexsort((np.arange(fire.size), t, fire))
    f_sorted = fire[order]
    bounds = np.flatnonzero(np.diff(f_sorted)) + 1
    for idx in np.split(order, bounds):
        k = int(fire[idx[0]])
        i0 = int(idx[0])
        t0 = t[i0]
        tied = idx[t[idx] <= t0 + tie_s]
        first[k], time_s[k], d_first[k], n_first[k] = i0, t0, dist[i0], tied.size
        zones_tied = set(zone[tied].tolist())
        if not determined[tied].all():
            start[k] = UNDETERMINED
            status[k] = 4 if (zone[tied] == OVERLAP_ZONE).any() and (dist[tied] > r).all() else 2
            continue
        if len(zones_tied) > 1:
            start[k], status[k] = UNDETERMINED, 3
            continue
        z0 = zones_tied.pop()
        start[k], status[k] = z0, (1 if z0 == OUTSIDE_ZONE else 0)
        later = idx[(t[idx] > t0 + tie_s) & determined[idx]]
        seen = []
        for z in zone[later].tolist():
            if z != z0 and z not in seen:
                seen.append(z)
        reached[k] = seen
    return Ignition(first, time_s, start, status, d_first, n_first, n_det, reached)


def relation_to_zone(ignition: Ignition, k: int, z: int) -> str:
    """How fire ``k`` relates to zone ``z`` (a zone index): ``"started inside"``, ``"came in"`` (started
    elsewhere, determined, and later detected inside ``z``), ``"started outside"`` (started elsewhere and
    never detected inside ``z`` clear of its boundary: the scar reaches the zone, the detections do not
    tell how), ``"undetermined"`` or ``"no detections"``."""
    s = int(ignition.zone[k])
    if s == NONE:
        return "no detections"
    if s == UNDETERMINED:
        return "undetermined"
    if s == z:
        return "started inside"
    return "came in" if z in ignition.reached[k] else "started outside"
