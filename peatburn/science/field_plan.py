"""Field verification plan: how many measurements would narrow a zone's interval, and where to take them.

Sample size. A zone's carbon ``C`` has variance ``V`` (from its 95 % interval, ``V = ((hi - lo) /
(2 x 1.96))**2``, a normal approximation), split by source into shares that add to one
(:func:`peatburn.science.uncertainty.contributions`). Two groups of sources can be replaced by field
measurements:

* **depth** (survey error, subsidence, water-table model, Tier 1 default): depth pins measured at
  ``n_d`` points give the zone's mean burn depth with relative standard error ``cv_d / sqrt(n_d)``,
  ``cv_d`` the spread of burn depth between points of the zone [-];
* **cores** (bulk density, carbon fraction, filled peat properties): ``n_c`` density cores analysed
  for dry bulk density and carbon content give their zone mean with relative standard error
  ``cv_c / sqrt(n_c)``.

The standard error of a mean of a simple random sample, ``s / sqrt(n)``, and the sample size
``n = (s / e)**2`` for a wanted standard error ``e`` (Cochran 1977, Sampling Techniques, 3rd ed.,
Ch. 4; recalled, unchecked). A group measured in the field contributes ``(C cv / sqrt(n))**2`` in
place of its share of ``V`` (the prior is dropped, a conservative choice); a group not measured
keeps its share; the other sources (emission factors and the like) are not reduced by plots. To
shrink the interval's width by ``factor`` the variance must fall to ``V / factor**2``; of the three
choices (pins only, cores only, both) the one with the fewest measurements is given, and for both
the split that minimises ``n_d + n_c`` under ``a_d / n_d + a_c / n_c = R``: ``n_i = sqrt(a_i)
(sqrt(a_d) + sqrt(a_c)) / R`` (Lagrange multiplier; the same algebra as Neyman allocation,
Cochran 1977 Ch. 5, recalled). Measurements are rounded up.

Locations: a stratified random draw over the zone's burned pixels: a square grid of cells over
their extent (about as many cells as plots), plots allocated to the cells in proportion to their
burned pixels (largest remainders), each plot a random burned pixel of its cell, with a stated seed
(common practice: spatially stratified sampling spreads plots over the area).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["Z95", "DEPTH_SOURCES", "CORE_SOURCES", "source_group", "Allocation", "measurements_to_shrink",
           "stratified_sample"]

#: 97.5 % quantile of the standard normal (scipy.stats.norm.ppf(0.975) = 1.95996...).
Z95 = 1.959963984540054
#: Uncertainty sources that depth pins replace (prefixes of the source names).
DEPTH_SOURCES = ("survey", "subsidence", "water_table", "tier1")
#: Uncertainty sources that density cores (bulk density and carbon content) replace.
CORE_SOURCES = ("bulk_density", "carbon_fraction", "peat_property", "rho_", "cf_")


def source_group(name: str) -> str:
    """``"depth"``, ``"cores"`` or ``"other"`` for an uncertainty source name."""
    n = str(name)
    if n.startswith(DEPTH_SOURCES):
        return "depth"
    if n.startswith(CORE_SOURCES):
        return "cores"
    return "other"


@dataclass
class Allocation:
    """Measurements that shrink a zone's interval width by ``factor`` (``feasible`` False when the
    sources plots cannot reduce already hold more than the target variance: then the counts are 0)."""

    n_depth: int
    n_cores: int
    feasible: bool
    share_depth: float
    share_cores: float
    share_other: float


def measurements_to_shrink(sd, carbon, share_depth, share_cores, cv_depth, cv_cores, factor=2.0) -> Allocation:
    """Depth pins and density cores that bring the standard deviation of a zone's carbon from ``sd``
    down to ``sd / factor`` (see the module docstring).

    Parameters
    ----------
    sd : float
        Standard deviation of the zone's carbon [t C].
    carbon : float
        The zone's carbon [t C].
    share_depth, share_cores : float
        Shares of the variance from the depth and the core sources [-].
    cv_depth, cv_cores : float
        Relative spread between single measurements of burn depth and of bulk density x carbon
        fraction in the zone [-].
    factor : float
        Wanted shrink of the interval's width [-] (2 = halve it).

    Returns
    -------
    Allocation
    """
    V = float(sd) ** 2
    sd_, sc = max(float(share_depth), 0.0), max(float(share_cores), 0.0)
    so = max(1.0 - sd_ - sc, 0.0)
    target = V / float(factor) ** 2
    a_d = (float(carbon) * float(cv_depth)) ** 2
    a_c = (float(carbon) * float(cv_cores)) ** 2
    v_d, v_c, v_o = sd_ * V, sc * V, so * V
    best = None
    R = target - v_o
    if R > 0 and V > 0:
        options = []
        if v_c < R:  # pins only
            options.append((_n(a_d, R - v_c), 0))
        if v_d < R:  # cores only
            options.append((0, _n(a_c, R - v_d)))
        options.append(_both(a_d, a_c, R))
        best = min(options, key=lambda o: (o[0] + o[1], o))
    if best is None:
        return Allocation(0, 0, False, sd_, sc, so)
    return Allocation(int(best[0]), int(best[1]), True, sd_, sc, so)


def _both(a_d: float, a_c: float, R: float) -> tuple[int, int]:
    """Whole (n_d, n_c), both measured, with a_d / n_d + a_c / n_c <= R and the least sum: the
    continuous optimum's neighbourhood searched for whole numbers."""
    if a_d <= 0 or a_c <= 0:
        return _n(a_d, R), _n(a_c, R)
    root = math.sqrt(a_d) + math.sqrt(a_c)
    cont = math.sqrt(a_d) * root / R
    lo = math.floor(a_d / R) + 1  # n_d must leave room for the cores
    hi = max(lo, math.ceil(3 * cont) + 2)
    if hi - lo > 1_000_000:  # a huge campaign: the rounded-up continuous optimum is close enough
        return _n(math.sqrt(a_d) * root, R), _n(math.sqrt(a_c) * root, R)
    nd = np.arange(lo, hi + 1, dtype="float64")
    left = R - a_d / nd
    nc = np.ceil(a_c / left - 1e-9)
    k = int(np.argmin(nd + nc))
    return int(nd[k]), int(max(nc[k], 1))


def _n(a: float, r: float) -> int:
    """Smallest whole n with a / n <= r (n = 0 when a = 0)."""
    if a <= 0:
        return 0
    n = math.ceil(a / r - 1e-9)
    return max(n, 1)


def stratified_sample(x, y, n: int, seed: int) -> np.ndarray:
    """Indices of ``n`` candidate points drawn by a spatially stratified random draw.

    Parameters
    ----------
    x, y : array (m,)
        Candidate positions (burned pixel centres) [CRS units].
    n : int
        Number of points wanted (at most ``m``).
    seed : int
        Seed of numpy's default generator (PCG64).

    Returns
    -------
    numpy.ndarray of int
        Indices into ``x``, ``y``, sorted by cell (row-major from the north-west), then drawn order.
    """
    x = np.asarray(x, dtype="float64")
    y = np.asarray(y, dtype="float64")
    m = x.size
    n = int(min(max(n, 0), m))
    if n == 0:
        return np.zeros(0, dtype=np.int64)
    rng = np.random.default_rng(seed)
    g = max(1, math.ceil(math.sqrt(n)))
    x0, x1, y0, y1 = x.min(), x.max(), y.min(), y.max()
    side = max(x1 - x0, y1 - y0) / g or 1.0
    ci = np.minimum(((x - x0) / side).astype(np.int64), g - 1)
    cj = np.minimum(((y1 - y) / side).astype(np.int64), g - 1)
    cell = cj * g + ci
    cells, counts = np.unique(cell, return_counts=True)
    quota = n * counts / m
    take = np.floor(quota).astype(np.int64)
    rest = n - int(take.sum())
    if rest:
        order = np.lexsort((cells, -(quota - take)))  # largest remainders, ties by cell
        take[order[:rest]] += 1
    out = []
    for c, k in zip(cells, take):
        if k:
            members = np.flatnonzero(cell == c)
            out.append(rng.choice(members, size=int(min(k, members.size)), replace=False))
    return np.concatenate(out).astype(np.int64) if out else np.zeros(0, dtype=np.int64)
