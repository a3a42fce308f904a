"""Flaming, above-ground emissions: fire events, fire radiative energy, IPCC Eq. 2.27, and what an
FRP-only view misses.

Two routes to the dry matter burned above ground, reported apart from the smouldering peat:

1. **From active-fire detections** (position, time, fire radiative power FRP [MW]):
   :func:`assign_events` groups detections into fire events; :func:`fire_radiative_energy`
   integrates each event's FRP over time into fire radiative energy FRE [MJ];
   :func:`dry_matter_from_fre` turns FRE into dry matter with the combustion coefficient of
   Wooster et al. (2005), ``M = FRE x C_e``; gases then follow from emission factors
   (:func:`flaming_emissions`, the form of IPCC 2006 Eq. 2.27).
2. **Without detections**: IPCC (2006) Vol. 4 Ch. 2 Eq. 2.27, fuel consumed ``A x M_B x C_f``
   (:func:`fuel_consumed_eq227`), with combustion factors from Table 2.6
   (:data:`IPCC2006_TABLE_2_6`).

:func:`frp_only_carbon` and :func:`missed_ratio` compare what an FRP-only inventory would attribute
to a fire with the below-ground carbon measured from surveys. See ``docs/flaming.md`` for why
low-temperature smouldering radiates little and is under-detected.

Pure functions: numbers or numpy arrays in, numpy arrays (or numpy scalars) out; no files, no CRS,
no printing. Times are seconds on any common time axis (for example since 1970-01-01 UTC),
positions are metres in a projected CRS.

References
----------
.. [1] Wooster, M. J., Roberts, G., Perry, G. L. W. and Kaufman, Y. J. (2005). Retrieval of
   biomass combustion rates and totals from fire radiative power observations: FRP derivation
   and calibration relationships between biomass consumption and fire radiative energy
   release. J. Geophys. Res. 110, D24311, doi:10.1029/2005JD006318.
.. [2] IPCC (2006). 2006 IPCC Guidelines for National Greenhouse Gas Inventories, Vol. 4
   (AFOLU), Ch. 2, Eq. 2.27, Table 2.5 (emission factors) and Table 2.6 (combustion factors).
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

from ..errors import PhysicalRangeError
from .gases import gas_emissions

__all__ = [
    "WOOSTER_2005_COEFFICIENT",
    "WOOSTER_2005_COEFFICIENT_SD",
    "IPCC2006_TABLE_2_6",
    "IPCC2006_CARBON_FRACTION_FOREST",
    "DEFAULT_EVENT_DISTANCE_M",
    "DEFAULT_EVENT_GAP_S",
    "DEFAULT_EDGE_S",
    "DEFAULT_LOOK_S",
    "STEFAN_BOLTZMANN",
    "assign_events",
    "detection_energy",
    "fire_radiative_energy",
    "dry_matter_from_fre",
    "cap_by_biomass",
    "flaming_emissions",
    "fuel_consumed_eq227",
    "frp_only_carbon",
    "missed_ratio",
    "blackbody_exitance",
]

# ----------------------------------------------------------------------------- constants

#: Combustion coefficient C_e [kg dry matter / MJ of fire radiative energy]: the slope of the
#: regression of fuel mass consumed on FRE in laboratory fires, Wooster et al. (2005), J. Geophys.
#: Res. 110, D24311. Status: recalled, unchecked against the paper (title and DOI checked; the
#: abstract, checked, gives 14 +/- 3 % of the fuel's heat radiated and r^2 = 0.98 for fuel mass
#: against FRE, not the slope). The value 0.368 kg/MJ agrees with several public secondary
#: copies that cite Wooster et al. (2005).
WOOSTER_2005_COEFFICIENT = 0.368  # kg/MJ, Wooster et al. 2005 (recalled, unchecked)

#: Standard error of :data:`WOOSTER_2005_COEFFICIENT` [kg/MJ] (Wooster et al. 2005; recalled,
#: unchecked: neither the value nor whether it is a standard error or a standard deviation was
#: compared with the paper).
WOOSTER_2005_COEFFICIENT_SD = 0.015

#: A few combustion factors C_f [dimensionless: fraction of the pre-fire fuel consumed] of
#: IPCC (2006) Vol. 4 Ch. 2 Table 2.6, as ``name -> {"cf", "sd", "row", "status"}``. That Table 2.6
#: holds the C_f of Eq. 2.27 was checked against the Vol. 4 AFOLU worksheets (3C1a); the values and
#: spreads below are **recalled, unchecked** (the table itself could not be consulted).
IPCC2006_TABLE_2_6: dict[str, dict] = {
    "tropical_forest_primary": {
        "cf": 0.36, "sd": 0.13,
        "row": "IPCC 2006 Vol. 4 Ch. 2 Table 2.6, all primary tropical forests",
        "status": "recalled, unchecked",
    },
    "tropical_forest_secondary": {
        "cf": 0.55, "sd": 0.06,
        "row": "IPCC 2006 Vol. 4 Ch. 2 Table 2.6, all secondary tropical forests",
        "status": "recalled, unchecked",
    },
    "tropical_forest_tertiary": {
        "cf": 0.59, "sd": float("nan"),
        "row": "IPCC 2006 Vol. 4 Ch. 2 Table 2.6, tertiary tropical forest",
        "status": "recalled, unchecked",
    },
    "shrubland": {
        "cf": 0.72, "sd": 0.25,
        "row": "IPCC 2006 Vol. 4 Ch. 2 Table 2.6, shrublands (general)",
        "status": "recalled, unchecked",
    },
}

#: Carbon fraction of above-ground forest biomass [t C / t dry matter], IPCC (2006) Vol. 4 Ch. 4
#: Table 4.3 default (recalled, unchecked). A fuel carbon fraction for :func:`frp_only_carbon`.
IPCC2006_CARBON_FRACTION_FOREST = 0.47

#: Default event rule, distance [m]: two detections of the same event lie within 1 km of each
#: other (assumption: about the size of one pixel of a 1-km-class fire sensor, so neighbouring
#: hot pixels and the same fire seen on later overpasses join).
DEFAULT_EVENT_DISTANCE_M = 1000.0
#: Default event rule, time gap [s]: 24 h (assumption: one day without a detection ends an event;
#: long enough to bridge the gap between consecutive day/night overpasses).
DEFAULT_EVENT_GAP_S = 86400.0
#: Default edge extension [s] of the FRE integral: 6 h, half the roughly 12-h interval between
#: the day and night overpasses of one polar-orbiting sensor (assumption).
DEFAULT_EDGE_S = 21600.0
#: Detections of one event within 10 min of each other form one "look" (one overpass; their FRP
#: is summed), assumption.
DEFAULT_LOOK_S = 600.0

#: Stefan-Boltzmann constant [W m-2 K-4], CODATA 2018 (exact since the 2019 SI redefinition:
#: 5.670374419e-8; checked against scipy.constants.Stefan_Boltzmann in the tests).
STEFAN_BOLTZMANN = 5.670374419e-8


# ----------------------------------------------------------------------------- helpers


def _as_float(value, name: str) -> np.ndarray:
    try:
        return np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise PhysicalRangeError(f"{name}: expected a number or an array of numbers, got {value!r}") from None


def _non_negative(arr: np.ndarray, name: str, unit: str) -> None:
    # NaN (nodata) passes; only values known to be negative are refused.
    if np.any(arr < 0):
        raise PhysicalRangeError(f"{name} must not be negative [{unit}]; the smallest value given is {np.nanmin(arr)}")


def _finite_1d(value, name: str) -> np.ndarray:
    arr = np.ravel(_as_float(value, name))
    if not np.all(np.isfinite(arr)):
        raise PhysicalRangeError(f"{name}: {int((~np.isfinite(arr)).sum())} value(s) are NaN or infinite; "
                                 f"drop those detections before grouping them")
    return arr


def _event_ids(event, n: int) -> np.ndarray:
    ev = np.ravel(np.asarray(event))
    if ev.shape[0] != n:
        raise PhysicalRangeError(f"event: expected one event id per detection ({n}), got {ev.shape[0]}")
    if n and not np.issubdtype(ev.dtype, np.integer):
        as_float = _as_float(ev, "event")
        if not np.all(np.isfinite(as_float)) or np.any(as_float != np.round(as_float)):
            raise PhysicalRangeError("event: event ids must be whole numbers (as returned by assign_events)")
        ev = as_float.astype(np.int64)
    ev = ev.astype(np.int64)
    if np.any(ev < 0):
        raise PhysicalRangeError("event: event ids must be 0 or more (as returned by assign_events)")
    return ev


# ----------------------------------------------------------------------------- events


#: Point pairs tested at once by :func:`assign_events` when it looks for links between two
#: neighbouring grid cells (bounds the memory of the search; the result does not depend on it).
_PAIR_BUDGET = 1 << 19
#: Points of each cell tried first, spread through the cell (``_SAMPLE`` squared pairs per pair of
#: cells): in dense detections one of them almost always links the two cells, so the full test of
#: every pair is rarely needed. The result does not depend on it.
_SAMPLE = 8
#: Whether a cell whose bounding box meets the rule is joined at once (False: every cell is
#: treated as one that fails the check, its detections tested pair by pair; for the tests of
#: that path, which rounding alone rarely reaches). The result does not depend on it.
_WHOLE_CELLS = True


def _lookup(sorted_unique: np.ndarray, values: np.ndarray) -> np.ndarray:
    """Position of each value in ``sorted_unique``, -1 where it is absent."""
    if sorted_unique.size == 0:
        return np.full(values.shape, -1, dtype=np.int64)
    pos = np.minimum(np.searchsorted(sorted_unique, values), sorted_unique.size - 1)
    return np.where(sorted_unique[pos] == values, pos, -1)


def _compact(index: np.ndarray, reach: int) -> np.ndarray:
    """Integer cell indices with every gap wider than ``reach`` shortened to ``reach + 1``.

    Two indices differ by at most ``reach`` after the change exactly when they did before, and
    the values stay below ``(reach + 1) x`` (number of distinct indices), so keys built from
    them cannot overflow however far apart the detections lie.
    """
    uniq, inv = np.unique(index, return_inverse=True)
    steps = np.minimum(np.diff(uniq), reach + 1)
    return np.r_[0, np.cumsum(steps)][inv].astype(np.int64)


class _Cells:
    """Detections binned on a space-time grid, sorted by cell (see :func:`_linked_components`)."""

    def __init__(self, x, y, t, distance_m, gap_s):
        self.x, self.y, self.t, self.d, self.g = x, y, t, distance_m, gap_s
        # Side D / sqrt(2) in space and G in time (each widened by a few units in the last place,
        # so that two linked detections are never more than 2 cells apart in space or 1 in time,
        # whatever the rounding). With G = 0 each distinct time is its own time cell.
        big = max(float(np.abs(x).max()), float(np.abs(y).max()))
        side = distance_m / np.sqrt(2.0) + 8.0 * np.spacing(big)
        ix = _compact(np.floor((x - x.min()) / side).astype(np.int64), 2)
        iy = _compact(np.floor((y - y.min()) / side).astype(np.int64), 2)
        if gap_s > 0:
            side_t = gap_s * (1.0 + 1e-9) + 8.0 * np.spacing(float(np.abs(t).max()))
            it = _compact(np.floor((t - t.min()) / side_t).astype(np.int64), 1)
            self.t_reach = 1
        else:
            it = np.unique(t, return_inverse=True)[1].astype(np.int64)
            self.t_reach = 0
        self.ny, self.nt = int(iy.max()) + 3, int(it.max()) + 2  # room for the offsets
        kxy = ix * self.ny + iy
        self.uxy, rxy = np.unique(kxy, return_inverse=True)
        self.ukey, cell = np.unique(rxy * self.nt + it, return_inverse=True)
        self.order = np.argsort(cell, kind="stable")  # detections sorted by cell
        self.count = np.bincount(cell)
        self.start = np.r_[0, np.cumsum(self.count)[:-1]]
        first = self.order[self.start]
        self.ix, self.iy, self.it = ix[first], iy[first], it[first]
        # A cell is "whole" when its bounding box meets the rule: floating-point subtraction and
        # hypot are monotonic, so every pair inside then passes the test of ``linked``. By the
        # choice of the sides every cell is whole, but for rounding at the bounds.
        xs, ys, ts = x[self.order], y[self.order], t[self.order]
        span = [np.maximum.reduceat(v, self.start) - np.minimum.reduceat(v, self.start) for v in (xs, ys, ts)]
        self.whole = (np.hypot(span[0], span[1]) <= distance_m) & (span[2] <= gap_s) & _WHOLE_CELLS
        # Graph nodes: one per whole cell, one per detection of a cell that is not whole.
        n_cells = self.count.size
        split_point = ~self.whole[cell]
        self.node = cell.copy()
        self.node[split_point] = n_cells + np.arange(int(split_point.sum()))
        self.n_nodes = n_cells + int(split_point.sum())
        self._last_xy = (None, None, None)  # the latest (dx, dy) look-up (see neighbour)

    def neighbour(self, offset) -> np.ndarray:
        """For each cell, the cell at ``offset`` (dx, dy, dt in cells), -1 where none."""
        ox, oy, ot = offset
        if self._last_xy[0] != (ox, oy):  # consecutive offsets often share dx, dy
            rxy = _lookup(self.uxy, (self.ix + ox) * self.ny + self.iy + oy)
            self._last_xy = ((ox, oy), np.flatnonzero(rxy >= 0), rxy[rxy >= 0])
        _, where, rxy = self._last_xy
        out = np.full(self.ix.size, -1, dtype=np.int64)
        out[where] = _lookup(self.ukey, rxy * self.nt + self.it[where] + ot)
        return out

    def linked(self, i, j) -> np.ndarray:
        """The rule of :func:`assign_events` for detection pairs (i, j) (cell-sorted positions)."""
        i, j = self.order[i], self.order[j]
        x, y, t = self.x, self.y, self.t
        return (np.hypot(x[i] - x[j], y[i] - y[j]) <= self.d) & (np.abs(t[i] - t[j]) <= self.g)


def _cell_links(cells: _Cells, a: np.ndarray, b: np.ndarray):
    """Graph edges (node pairs) between the cells ``a[k]`` and ``b[k]``: one edge for two whole
    cells with any linked pair of detections, every linked pair when a cell is not whole."""
    out_a, out_b = [], []
    whole = cells.whole[a] & cells.whole[b]
    # 1. A sample of pairs, spread through both cells, for pairs of whole cells.
    aw, bw = a[whole], b[whole]
    k = _SAMPLE
    u = np.arange(k)
    found = np.zeros(aw.size, dtype=bool)
    step = max(1, _PAIR_BUDGET // (k * k))
    for s in range(0, aw.size, step):
        ca, cb = aw[s:s + step], bw[s:s + step]
        i = cells.start[ca][:, None, None] + (u[None, :, None] * cells.count[ca][:, None, None]) // k
        j = cells.start[cb][:, None, None] + (u[None, None, :] * cells.count[cb][:, None, None]) // k
        i, j = np.broadcast_arrays(i, j)
        found[s:s + step] = cells.linked(i.reshape(-1), j.reshape(-1)).reshape(ca.size, k * k).any(axis=1)
    out_a.append(aw[found])
    out_b.append(bw[found])
    # 2. Every pair, in pieces of at most _PAIR_BUDGET pairs; a pair of whole cells stops at its first link.
    a = np.r_[aw[~found], a[~whole]]
    b = np.r_[bw[~found], b[~whole]]
    any_only = np.r_[np.ones(int((~found).sum()), dtype=bool), np.zeros(int((~whole).sum()), dtype=bool)]
    total = cells.count[a].astype(np.int64) * cells.count[b]
    done = np.zeros(a.size, dtype=np.int64)
    while a.size:
        rest = total - done
        before = np.r_[0, np.cumsum(rest)[:-1]]
        take = np.clip(_PAIR_BUDGET - before, 0, rest)
        pk = np.repeat(np.arange(a.size), take)
        r = done[pk] + np.arange(pk.size) - np.repeat(np.cumsum(take) - take, take)
        nb = cells.count[b][pk]
        i = cells.start[a][pk] + r // nb
        j = cells.start[b][pk] + r % nb
        hit = cells.linked(i, j)
        hit_any = np.bincount(pk[hit], minlength=a.size) > 0
        first = hit_any & any_only
        out_a.append(a[first])
        out_b.append(b[first])
        every = hit & ~any_only[pk] & (i != j)
        out_a.append(cells.node[cells.order[i[every]]])
        out_b.append(cells.node[cells.order[j[every]]])
        done += take
        keep = (done < total) & ~first
        a, b, any_only, total, done = a[keep], b[keep], any_only[keep], total[keep], done[keep]
    return np.concatenate(out_a), np.concatenate(out_b)


def _linked_components(x, y, t, distance_m, gap_s) -> np.ndarray:
    """Connected components of the space-time link graph (see :func:`assign_events`).

    Detections are binned on a grid of cells of side ``distance_m / sqrt(2)`` in space and
    ``gap_s`` in time, so that the detections of one cell are all linked to each other (checked
    on the cell's bounding box; a cell that fails the check keeps its detections apart and has
    every pair tested). Linked detections lie at most 2 cells apart in space and 1 in time, so
    only the cells at those offsets are compared, one offset at a time, nearest first; two
    cells already in the same component are skipped, and a pair of cells stops at its first
    link. Memory is proportional to the number of detections (plus ``_PAIR_BUDGET`` pairs at a
    time), however dense they are; the time is that of sorting the detections, plus the pair
    tests between cells that turn out not to be linked (few, except for dense groups of
    detections lying just beyond ``distance_m`` or ``gap_s`` of each other).
    """
    cells = _Cells(x, y, t, distance_m, gap_s)
    offsets = [(ox, oy, ot) for ot in range(-cells.t_reach, cells.t_reach + 1)
               for ox in range(-2, 3) for oy in range(-2, 3) if (ot, ox, oy) > (0, 0, 0)]
    # Nearest in space first; the time offsets of one (dx, dy) together (they share a look-up).
    offsets.sort(key=lambda o: (max(abs(o[0]), abs(o[1])), abs(o[0]) + abs(o[1]), o[0], o[1], abs(o[2])))
    n_cells = cells.count.size
    # Cells that are not whole: their detections are compared with each other too.
    split = np.flatnonzero(~cells.whole)
    edge_a, edge_b = _cell_links(cells, split, split)
    label = _components(cells.n_nodes, edge_a, edge_b)
    edge_a, edge_b = _star(label)
    pending_a, pending_b = [], []
    for offset in offsets:
        a = np.arange(n_cells)
        b = cells.neighbour(offset)
        keep = b >= 0
        a, b = a[keep], b[keep]
        # ``label`` may lag behind the edges found since (it is a finer partition): it only
        # skips pairs of cells known to be joined.
        same = cells.whole[a] & cells.whole[b] & (label[a] == label[b])
        new_a, new_b = _cell_links(cells, a[~same], b[~same])
        pending_a.append(new_a)
        pending_b.append(new_b)
        if sum(e.size for e in pending_a) > max(64, cells.n_nodes // 64):  # worth a new partition
            label = _components(cells.n_nodes, np.concatenate([edge_a, *pending_a]),
                                np.concatenate([edge_b, *pending_b]))
            edge_a, edge_b = _star(label)
            pending_a, pending_b = [], []
    label = _components(cells.n_nodes, np.concatenate([edge_a, *pending_a]), np.concatenate([edge_b, *pending_b]))
    # numbered 0..k-1 over the detections (the node of a cell that is not whole holds none)
    return np.unique(label[cells.node], return_inverse=True)[1].reshape(-1)


def _components(n: int, i: np.ndarray, j: np.ndarray) -> np.ndarray:
    graph = coo_matrix((np.ones(i.shape[0], dtype=np.int8), (i, j)), shape=(n, n))
    return connected_components(graph, directed=False)[1]


def _star(label: np.ndarray):
    """The fewest edges that keep ``label``'s components: each node to its component's first node."""
    first = np.unique(label, return_index=True)[1]
    rep = first[label]
    star = rep != np.arange(label.size)
    return np.flatnonzero(star), rep[star]


def assign_events(x_m, y_m, t_s, *, distance_m=DEFAULT_EVENT_DISTANCE_M, gap_s=DEFAULT_EVENT_GAP_S):
    """Group active-fire detections into fire events (space-time single linkage).

    **Rule.** Two detections are *linked* when they are at most ``distance_m`` apart (Euclidean
    distance of their positions) **and** at most ``gap_s`` apart in time (both bounds inclusive).
    An event is a connected group of linked detections (single linkage): a detection joins an
    event if it is linked to *any* detection of the event, so an event may spread further than
    ``distance_m`` and last longer than ``gap_s``. Consequently, within one event, consecutive
    detection times (sorted) never differ by more than ``gap_s``. Events are numbered 0, 1, ...
    in the order of their first detection (ties in the order of the input). The rule is an
    assumption chosen for this tool (common practice in spirit: fire-event clustering of active-fire
    detections by space-time proximity); it has no single published source.

    Detections are binned on a space-time grid (cells of side ``distance_m / sqrt(2)`` and
    ``gap_s``, whose detections are all linked to each other); only neighbouring cells are
    compared, a pair of cells stops at its first link and cells already joined are skipped; events
    are the connected components (``scipy.sparse.csgraph.connected_components``) of the cells.
    Memory is proportional to the number of detections however dense they are (a million
    detections packed over a few square kilometres: see ``benchmarks/bench_detections.py``).

    Parameters
    ----------
    x_m, y_m : array_like
        Detection positions [m] in a projected CRS; one value per detection.
    t_s : array_like
        Detection times [s] on a common axis (for example seconds since 1970-01-01 UTC).
    distance_m : float
        Largest distance [m] between two linked detections; > 0.
    gap_s : float
        Largest time difference [s] between two linked detections; >= 0.

    Returns
    -------
    numpy.ndarray of int64
        Event id of each detection, 0 .. n_events - 1.

    Raises
    ------
    PhysicalRangeError
        If inputs differ in length, hold NaN or infinity, or the thresholds are out of range.

    References
    ----------
    .. [1] Virtanen, P. et al. (2020). SciPy 1.0: fundamental algorithms for scientific computing
       in Python. Nature Methods 17, 261-272 (connected_components).
    """
    x = _finite_1d(x_m, "x_m")
    y = _finite_1d(y_m, "y_m")
    t = _finite_1d(t_s, "t_s")
    if not (x.shape == y.shape == t.shape):
        raise PhysicalRangeError(f"x_m, y_m and t_s must have one value per detection; got lengths "
                                 f"{x.shape[0]}, {y.shape[0]}, {t.shape[0]}")
    distance_m = float(distance_m)
    gap_s = float(gap_s)
    if not np.isfinite(distance_m) or distance_m <= 0:
        raise PhysicalRangeError(f"distance_m must be a positive number of metres, got {distance_m}")
    if not np.isfinite(gap_s) or gap_s < 0:
        raise PhysicalRangeError(f"gap_s must be a number of seconds >= 0, got {gap_s}")
    n = x.shape[0]
    if n == 0:
        return np.zeros(0, dtype=np.int64)

    labels = _linked_components(x, y, t, distance_m, gap_s)
    n_comp = int(labels.max()) + 1
    # Renumber by first detection time, ties by input order.
    order = np.lexsort((np.arange(n), t))
    comp, first_pos = np.unique(labels[order], return_index=True)  # first position of each component
    new_id = np.empty(n_comp, dtype=np.int64)
    new_id[comp[np.argsort(first_pos)]] = np.arange(n_comp)
    return new_id[labels]


# ----------------------------------------------------------------------------- FRE


def detection_energy(t_s, frp_mw, event, *, edge_s=DEFAULT_EDGE_S, look_s=DEFAULT_LOOK_S):
    """Fire radiative energy [MJ] apportioned to each detection; sums to the FRE of its event.

    The scheme is the one of :func:`fire_radiative_energy`: each event's detections are grouped
    into *looks* (detections within ``look_s`` of the previous one, sorted in time; one overpass),
    a look's FRP is the sum of its detections' FRP at the mean time of the look, and the event's
    FRP curve is integrated with the trapezoid rule, extended at each end by ``edge_s`` over which
    FRP ramps linearly between zero and the end look's FRP. The integral equals
    ``sum_k w_k F_k`` with trapezoid weights ``w_k`` [s]: for looks at times ``T_1 < ... < T_m``,
    ``w_k = (T_{k+1} - T_{k-1}) / 2`` inside, ``w_1 = (T_2 - T_1) / 2 + edge_s / 2`` and
    ``w_m = (T_m - T_{m-1}) / 2 + edge_s / 2`` at the ends, and ``w_1 = edge_s`` for a single look.
    Detection *i* in look *k* gets ``w_k x FRP_i`` [MW s = MJ], so that per-zone FRE is a sum over
    the detections in the zone.

    Parameters
    ----------
    t_s : array_like
        Detection times [s].
    frp_mw : array_like
        Fire radiative power of each detection [MW]; >= 0.
    event : array_like of int
        Event id of each detection (0 or more), as from :func:`assign_events`.
    edge_s : float
        Duration [s] of the linear ramp assumed before the first and after the last look of an
        event; >= 0 (assumption, see :data:`DEFAULT_EDGE_S`).
    look_s : float
        Detections of one event closer than this in time [s] (chained) form one look; >= 0.

    Returns
    -------
    numpy.ndarray
        Energy [MJ] per detection, in input order.

    Raises
    ------
    PhysicalRangeError
        If lengths differ, a time or FRP is NaN, an FRP is negative, or a parameter is out of range.

    References
    ----------
    .. [1] Wooster, M. J. et al. (2005). J. Geophys. Res. 110, D24311 (FRE as the time integral
       of FRP).
    """
    t = _finite_1d(t_s, "t_s")
    f = _finite_1d(frp_mw, "frp_mw")
    if t.shape != f.shape:
        raise PhysicalRangeError(f"t_s and frp_mw must have one value per detection; got lengths "
                                 f"{t.shape[0]} and {f.shape[0]}")
    _non_negative(f, "frp_mw", "MW")
    edge_s, look_s = float(edge_s), float(look_s)
    if not np.isfinite(edge_s) or edge_s < 0:
        raise PhysicalRangeError(f"edge_s must be a number of seconds >= 0, got {edge_s}")
    if not np.isfinite(look_s) or look_s < 0:
        raise PhysicalRangeError(f"look_s must be a number of seconds >= 0, got {look_s}")
    n = t.shape[0]
    ev = _event_ids(event, n)
    if n == 0:
        return np.zeros(0)

    order = np.lexsort((t, ev))  # by event, then time
    ev_s, t_s_ = ev[order], t[order]
    new_event = np.r_[True, ev_s[1:] != ev_s[:-1]]
    new_look = new_event | np.r_[True, np.diff(t_s_) > look_s]
    look = np.cumsum(new_look) - 1  # look id per sorted detection
    n_look = int(look[-1]) + 1
    counts = np.bincount(look, minlength=n_look)
    look_t = np.bincount(look, weights=t_s_, minlength=n_look) / counts
    look_ev = ev_s[new_look]

    # Trapezoid weights per look, within each event.
    same_prev = np.r_[False, look_ev[1:] == look_ev[:-1]]
    same_next = np.r_[look_ev[1:] == look_ev[:-1], False]
    dt_prev = np.where(same_prev, look_t - np.r_[look_t[0], look_t[:-1]], 0.0)
    dt_next = np.where(same_next, np.r_[look_t[1:], look_t[-1]] - look_t, 0.0)
    w = 0.5 * (dt_prev + dt_next) + 0.5 * edge_s * (~same_prev) + 0.5 * edge_s * (~same_next)

    energy = np.empty(n)
    energy[order] = w[look] * f[order]
    return energy


def fire_radiative_energy(t_s, frp_mw, event, *, edge_s=DEFAULT_EDGE_S, look_s=DEFAULT_LOOK_S):
    """Fire radiative energy FRE [MJ] of each event: the time integral of its FRP.

    ``FRE = integral FRP(t) dt`` (Wooster et al. 2005). FRP [MW] integrated over seconds gives MJ.

    **Scheme** (documented assumption; see ``docs/flaming.md``):

    1. *Looks.* An event's detections, sorted by time, are cut into looks where the time step to
       the previous detection exceeds ``look_s``; a look stands for one overpass. Its FRP is the
       **sum** of its detections' FRP (hot pixels of one fire seen at once), at the look's mean
       time. Two sensors seeing the same fire within ``look_s`` are therefore summed (double
       counted): feed one sensor, or de-duplicated detections.
    2. *Between looks*, FRP varies linearly: trapezoid rule.
    3. *Before the first and after the last look*, FRP is assumed to ramp linearly from zero,
       ``edge_s`` before the first look, up to the first look's FRP, and down to zero ``edge_s``
       after the last look: each end adds ``FRP_end x edge_s / 2``. A single look thus gives
       ``FRP x edge_s``. This end rule is an assumption of this tool (a fire is assumed to start
       ``edge_s`` before its first detection and end ``edge_s`` after its last), with
       ``edge_s`` defaulting to half the day/night revisit of one polar-orbiting sensor.

    Parameters
    ----------
    t_s : array_like
        Detection times [s].
    frp_mw : array_like
        Fire radiative power of each detection [MW]; >= 0.
    event : array_like of int
        Event id of each detection (0 or more), as from :func:`assign_events`.
    edge_s : float
        End ramp duration [s]; >= 0.
    look_s : float
        Largest time step [s] within one look; >= 0.

    Returns
    -------
    numpy.ndarray
        FRE [MJ] per event, indexed by event id (length ``max(event) + 1``; ids with no
        detection get 0).

    References
    ----------
    .. [1] Wooster, M. J., Roberts, G., Perry, G. L. W. and Kaufman, Y. J. (2005). Retrieval of
       biomass combustion rates and totals from fire radiative power observations: FRP derivation
       and calibration relationships between biomass consumption and fire radiative energy
       release. J. Geophys. Res. 110, D24311.
    """
    energy = detection_energy(t_s, frp_mw, event, edge_s=edge_s, look_s=look_s)
    ev = _event_ids(event, energy.shape[0])
    if ev.size == 0:
        return np.zeros(0)
    return np.bincount(ev, weights=energy, minlength=int(ev.max()) + 1)


# ----------------------------------------------------------------------------- dry matter, gases


def cap_by_biomass(dry_matter_kg, biomass_kg):
    """Scale of a fire's FRE dry matter that keeps it within the biomass available.

    ``s = min(1, B / M_FRE)``: FRE x C_e is not bounded by the fuel there is (an event's FRE also
    holds radiant energy of burning surface peat and, with coarse pixels, of neighbouring fires), so
    the dry matter an FRP route gives a fire may exceed the above-ground biomass of its burned area,
    ``B = A x M_B`` (IPCC 2006 Vol. 4 Ch. 2 Eq. 2.27 with C_f = 1: nothing burns that is not there;
    common practice). The cap only lowers; where no biomass figure is known (NaN) the scale is 1.

    Parameters
    ----------
    dry_matter_kg : float or array_like
        FRE dry matter per fire [kg], >= 0.
    biomass_kg : float or array_like
        Above-ground biomass available on each fire's burned area [kg]; NaN: unknown (no cap).

    Returns
    -------
    numpy.ndarray or numpy.float64
        Scale in [0, 1] [dimensionless]; the capped dry matter is ``s x M_FRE``.

    References
    ----------
    .. [1] IPCC (2006). 2006 IPCC Guidelines, Vol. 4, Ch. 2, Eq. 2.27 (fuel available M_B, combustion
       factor C_f <= 1).
    """
    dm = _as_float(dry_matter_kg, "dry_matter_kg")
    b = _as_float(biomass_kg, "biomass_kg")
    _non_negative(dm, "dry_matter_kg", "kg")
    _non_negative(b, "biomass_kg", "kg")
    with np.errstate(divide="ignore", invalid="ignore"):
        s = np.where(np.isfinite(b) & (dm > b), b / np.where(dm > 0, dm, 1.0), 1.0)
    return s if s.ndim else np.float64(s)


def dry_matter_from_fre(fre_mj, coefficient=WOOSTER_2005_COEFFICIENT):
    """Dry matter burned from fire radiative energy: ``M = FRE x C_e``.

    Parameters
    ----------
    fre_mj : float or array_like
        Fire radiative energy [MJ]; >= 0, NaN propagates.
    coefficient : float or array_like
        Combustion coefficient C_e [kg dry matter / MJ]; default 0.368 kg/MJ (Wooster et al.
        2005; recalled, unchecked, see :data:`WOOSTER_2005_COEFFICIENT`).

    Returns
    -------
    numpy.ndarray or numpy.float64
        Dry matter burned [kg].

    Raises
    ------
    PhysicalRangeError
        If an energy or the coefficient is negative.

    References
    ----------
    .. [1] Wooster, M. J. et al. (2005). J. Geophys. Res. 110, D24311, doi:10.1029/2005JD006318.
    """
    fre = _as_float(fre_mj, "fre_mj")
    ce = _as_float(coefficient, "coefficient")
    _non_negative(fre, "fre_mj", "MJ")
    _non_negative(ce, "coefficient", "kg/MJ")
    out = fre * ce
    return out if out.ndim else np.float64(out)


def flaming_emissions(dry_mass_kg, ef_g_per_kg: Mapping):
    """Gas masses from burned dry matter and an emission-factor set.

    ``E_g = M x EF_g x 10^-3`` for each gas (the form of IPCC 2006 Vol. 4 Ch. 2 Eq. 2.27; see
    :func:`peatburn.science.gases.gas_emissions`). For the default flaming set use IPCC (2006)
    Table 2.5, tropical forest (shipped as ``flaming_ipcc2006_tropical_forest``).

    Parameters
    ----------
    dry_mass_kg : float or array_like
        Dry matter burned [kg].
    ef_g_per_kg : mapping of str to float, or an object with an ``ef`` mapping (a FactorSet)
        Emission factors [g gas / kg dry matter] by lower-case gas name.

    Returns
    -------
    dict of str to numpy.ndarray
        Gas emitted [kg] per gas.

    References
    ----------
    .. [1] IPCC (2006). 2006 IPCC Guidelines for National Greenhouse Gas Inventories, Vol. 4,
       Ch. 2, Eq. 2.27 and Table 2.5 (from Andreae, M. O. and Merlet, P. (2001), Global
       Biogeochem. Cycles 15, 955-966).
    """
    table = getattr(ef_g_per_kg, "ef", ef_g_per_kg)
    if not isinstance(table, Mapping):
        raise TypeError(f"ef_g_per_kg: expected a mapping of gas name to g/kg, got {type(ef_g_per_kg).__name__}")
    return {str(g).lower(): gas_emissions(dry_mass_kg, v) for g, v in table.items()}


def fuel_consumed_eq227(area_ha, biomass_t_per_ha, combustion_factor):
    """Dry matter burned by area: ``A x M_B x C_f`` of IPCC (2006) Vol. 4 Ch. 2 Eq. 2.27.

    Eq. 2.27 reads ``L_fire = A x M_B x C_f x G_ef x 10^-3``; this function returns the fuel
    consumed ``A x M_B x C_f``; multiply by ``G_ef x 10^-3`` (or pass it, in kg, times 1000 to
    :func:`flaming_emissions`) for gases. Where only the product ``M_B x C_f`` is known (IPCC
    Table 2.4), pass it as ``biomass_t_per_ha`` with ``combustion_factor = 1``.

    Parameters
    ----------
    area_ha : float or array_like
        Area burned A [ha]; >= 0.
    biomass_t_per_ha : float or array_like
        Mass of fuel available for combustion M_B [t dry matter / ha]; >= 0 (number or raster
        values; NaN propagates).
    combustion_factor : float or array_like
        Combustion factor C_f [dimensionless, 0..1], the fraction of the fuel consumed (IPCC 2006
        Table 2.6; see :data:`IPCC2006_TABLE_2_6`).

    Returns
    -------
    numpy.ndarray or numpy.float64
        Dry matter burned [t].

    Raises
    ------
    PhysicalRangeError
        If an area or biomass is negative, or a combustion factor is outside [0, 1].

    References
    ----------
    .. [1] IPCC (2006). 2006 IPCC Guidelines for National Greenhouse Gas Inventories, Vol. 4,
       Ch. 2, Eq. 2.27 and Table 2.6.
    """
    a = _as_float(area_ha, "area_ha")
    mb = _as_float(biomass_t_per_ha, "biomass_t_per_ha")
    cf = _as_float(combustion_factor, "combustion_factor")
    _non_negative(a, "area_ha", "ha")
    _non_negative(mb, "biomass_t_per_ha", "t/ha")
    if np.any(cf < 0) or np.any(cf > 1):
        raise PhysicalRangeError(f"combustion_factor must be a fraction in [0, 1] (IPCC 2006 Table 2.6), "
                                 f"got values from {np.nanmin(cf)} to {np.nanmax(cf)}")
    out = a * mb * cf
    return out if out.ndim else np.float64(out)


# ----------------------------------------------------------------------------- what FRP misses


def frp_only_carbon(fre_mj, coefficient, carbon_fraction):
    """Carbon an FRP-only estimate would attribute to a fire: ``C = FRE x C_e x f_C``.

    Parameters
    ----------
    fre_mj : float or array_like
        Fire radiative energy [MJ].
    coefficient : float or array_like
        Combustion coefficient C_e [kg dry matter / MJ] (Wooster et al. 2005: 0.368, recalled).
    carbon_fraction : float or array_like
        Carbon mass fraction of the fuel [dimensionless, 0..1] (for example 0.47 for forest
        biomass, :data:`IPCC2006_CARBON_FRACTION_FOREST`).

    Returns
    -------
    numpy.ndarray or numpy.float64
        Carbon [kg C].

    References
    ----------
    .. [1] Wooster, M. J. et al. (2005). J. Geophys. Res. 110, D24311.
    .. [2] IPCC (2006). Vol. 4, Ch. 4, Table 4.3 (carbon fraction of forest biomass; recalled).
    """
    fc = _as_float(carbon_fraction, "carbon_fraction")
    if np.any(fc < 0) or np.any(fc > 1):
        raise PhysicalRangeError(f"carbon_fraction must be a mass fraction in [0, 1], got values from "
                                 f"{np.nanmin(fc)} to {np.nanmax(fc)}")
    out = dry_matter_from_fre(fre_mj, coefficient) * fc
    return out if np.ndim(out) else np.float64(out)


def missed_ratio(below_ground_carbon, frp_only_carbon):
    """How many times the FRP-only carbon the survey-based below-ground carbon is.

    ``ratio = C_below / C_FRP``, both in the same unit (for example kg C per zone). A ratio of 10
    means the smouldering peat released ten times the carbon an FRP-only view attributes to the
    whole fire. NaN where ``C_FRP`` is 0 (the FRP view saw nothing: the ratio is undefined, and
    the below-ground carbon is entirely missed) or either input is NaN.

    Parameters
    ----------
    below_ground_carbon : float or array_like
        Carbon released below ground [any mass unit], from the surveys.
    frp_only_carbon : float or array_like
        Carbon an FRP-only estimate attributes (:func:`frp_only_carbon`) [same unit].

    Returns
    -------
    numpy.ndarray or numpy.float64
        Ratio [dimensionless].

    References
    ----------
    This tool's definition (see ``docs/flaming.md``).
    """
    below = _as_float(below_ground_carbon, "below_ground_carbon")
    frp = _as_float(frp_only_carbon, "frp_only_carbon")
    _non_negative(below, "below_ground_carbon", "mass")
    _non_negative(frp, "frp_only_carbon", "mass")
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.where(frp > 0, below / np.where(frp > 0, frp, 1.0), np.nan)
    return out if out.ndim else np.float64(out)


def blackbody_exitance(temperature_k, emissivity=1.0):
    """Radiant power per unit area of a grey body: ``M = eps x sigma x T^4`` [W m-2].

    Stefan-Boltzmann law; used to show why smouldering peat (about 620-820 K, i.e. 350-550 degC,
    in a laboratory deep-peat column: Qin et al. 2023, abstract, checked) radiates far less per
    unit area than flaming vegetation (around 1000 K and above, common practice): at 600 K a
    black body radiates (600/1200)^4 = 1/16 of what it radiates at 1200 K.

    Parameters
    ----------
    temperature_k : float or array_like
        Temperature [K]; >= 0.
    emissivity : float or array_like
        Emissivity [dimensionless, 0..1].

    Returns
    -------
    numpy.ndarray or numpy.float64
        Radiant exitance [W m-2].

    References
    ----------
    .. [1] Qin, Y., Musa, D. N. S., Lin, S. and Huang, X. (2023). Deep peat fire persistently
       smouldering for weeks: a laboratory demonstration. Int. J. Wildland Fire 32, 86-98.
    .. [2] Tiesinga, E. et al. (2021). CODATA recommended values of the fundamental physical
       constants: 2018. Rev. Mod. Phys. 93, 025010 (sigma = 5.670374419e-8 W m-2 K-4, exact;
       recalled, checked against scipy.constants).
    """
    temp = _as_float(temperature_k, "temperature_k")
    eps = _as_float(emissivity, "emissivity")
    _non_negative(temp, "temperature_k", "K")
    if np.any(eps < 0) or np.any(eps > 1):
        raise PhysicalRangeError(f"emissivity must be in [0, 1], got values from {np.nanmin(eps)} to {np.nanmax(eps)}")
    out = eps * STEFAN_BOLTZMANN * temp ** 4
    return out if out.ndim else np.float64(out)
