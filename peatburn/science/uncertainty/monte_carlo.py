"""Monte Carlo draws of the zone totals and their intervals (JCGM 101:2008 percentiles).

References: see :mod:`peatburn.science.uncertainty`.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np

from ...errors import ConfigError
from ...numerics.draws import MAX_FLOATS, Drawer, block_sums, map_chunks
from ...numerics.percentiles import row_quantiles
from .sources import SOURCE_NAMES
from .zone_model import _build, _check_fixed

def _check_draws(draws, seed):
    draws = int(draws)
    if draws < 2:
        raise ConfigError(f"uncertainty.draws must be at least 2, got {draws}")
    if int(seed) < 0:
        raise ConfigError(f"uncertainty.seed must be >= 0, got {seed}")
    return draws


def draw_zone_totals(sums: Mapping, params: Mapping, *, draws: int, seed: int, fixed=frozenset(),
                     chunk_zones=2000, group_seeds: Mapping | None = None) -> dict[str, np.ndarray]:
    """Monte Carlo draws of every quantity for every zone.

    Parameters
    ----------
    sums : mapping of str to numpy.ndarray
        Zone sums (:data:`SUM_KEYS`), float arrays of one length (zones).
    params : mapping
        Run-level parameters (:func:`sources_to_params`).
    draws : int
        Number of draws (>= 2).
    seed : int
        Seed (>= 0). Results do not depend on ``chunk_zones``.
    fixed : set of str
        Sources held at their nominal value (names from :data:`SOURCE_NAMES`).
    chunk_zones : int
        Upper bound on zones per chunk (also capped so that memory stays near :data:`MAX_FLOATS`).
    group_seeds : mapping of str to int, optional
        Seed of the random streams of the source groups named (from :data:`SOURCE_NAMES`) instead of
        ``seed``: draws of several runs made with one seed for their shared sources take common
        random numbers for those (the joint draws of a series, peatburn.engine.series).

    Returns
    -------
    dict of str to numpy.ndarray
        Quantity -> array (draws, zones) [kg, or m3 for ``volume_m3``]; keys as
        :data:`QUANTITY_COLUMNS`.

    Raises
    ------
    ConfigError
        When draws x zones x quantities exceeds :data:`MAX_FLOATS` (use :func:`intervals`, which
        never holds them all).
    """
    draws = _check_draws(draws, seed)
    model = _build(sums, params)
    fixed = _check_fixed(fixed)
    nq = len(model.quantities)
    if draws * model.n * nq > MAX_FLOATS:
        raise ConfigError(f"draw_zone_totals: {draws} draws x {model.n} zones x {nq} quantities exceed "
                          f"{MAX_FLOATS:,} values; use intervals(), which reduces each chunk to percentiles")
    out = {q: np.empty((draws, model.n)) for q in model.quantities}

    def store(sl, evaluate):
        for q in model.quantities:
            out[q][:, sl] = evaluate(q).T

    bad = set(group_seeds or {}) - set(SOURCE_NAMES)
    if bad:
        raise ConfigError(f"group_seeds: unknown source(s) {', '.join(sorted(bad))}; known: {', '.join(SOURCE_NAMES)}")
    for _ in map_chunks(Drawer(model, draws, seed, fixed, group_seeds=group_seeds), chunk_zones, 1, store):
        pass
    return out


def intervals(sums: Mapping, params: Mapping, *, draws: int, seed: int, quantiles=(0.025, 0.975),
              fixed=frozenset(), chunk_zones=2000, total=False, workers=1,
              quantities=None) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    """Monte Carlo intervals (default 2.5 and 97.5 percentiles) of every quantity per zone.

    The percentiles of the draws are the 95 % coverage interval of the Monte Carlo method of
    JCGM 101:2008 (probabilistically symmetric interval). Chunks of zones are drawn, reduced to
    their percentiles and dropped, so memory stays near :data:`MAX_FLOATS` whatever the number of
    zones; the run total (when ``total``) is accumulated draw by draw over all zones, keeping the
    correlation that the run-wide sources induce between zones.

    Parameters
    ----------
    sums, params, draws, seed, fixed, chunk_zones
        As :func:`draw_zone_totals`.
    quantiles : sequence of float
        Probabilities in [0, 1] (numpy's linear interpolation between order statistics).
    total : bool
        Append the run total (sum over all zones given) as a last element of every array.
    workers : int
        Threads over chunks of zones (results do not depend on it; memory stays near
        :data:`MAX_FLOATS` in total).
    quantities : collection of str, optional
        Draw only these quantities (default: all of the model). Each quantity's draws are the
        same whichever others are drawn: the random streams are keyed by source and zone block.

    Returns
    -------
    dict of str to tuple of numpy.ndarray
        Quantity -> one array per quantile (``(lo, hi)`` by default), each of length zones
        (zones + 1 with ``total``).
    """
    draws = _check_draws(draws, seed)
    qs = [float(q) for q in quantiles]
    if not all(0.0 <= q <= 1.0 for q in qs):
        raise ConfigError(f"quantiles must lie in [0, 1], got {quantiles!r}")
    model = _build(sums, params)
    fixed = _check_fixed(fixed)
    wanted = [q for q in model.quantities if quantities is None or q in quantities]
    n_out = model.n + (1 if total else 0)
    res = {q: [np.empty(n_out) for _ in qs] for q in wanted}
    tot = {q: np.zeros(draws) for q in wanted}

    def reduce(sl, evaluate):
        part = {}
        for q in wanted:
            arr = evaluate(q)
            s = block_sums(arr) if total else None
            part[q] = (row_quantiles(arr, qs), s)
            del arr
        return sl, part

    for sl, part in map_chunks(Drawer(model, draws, seed, fixed, wanted), chunk_zones, int(workers), reduce):
        for q, (vals, s) in part.items():
            for out, val in zip(res[q], vals):
                out[sl] = val
            if total:
                for row in s:  # block by block, in zone order: the total does not depend on chunking
                    tot[q] += row
    if total:
        for q in wanted:
            for out, val in zip(res[q], row_quantiles(tot[q][None, :].copy(), qs)):
                out[-1] = val[0]
    return {q: tuple(v) for q, v in res.items()}


def draw_means(sums: Mapping, params: Mapping, *, draws: int, seed: int, fixed=frozenset(), chunk_zones=2000,
               quantities=None) -> dict[str, np.ndarray]:
    """Mean of the Monte Carlo draws of every quantity per zone: the same draws as :func:`intervals`
    (same seed, same streams), reduced to their mean chunk by chunk. The mean is the reference of the
    IPCC Approach 2 percentages (IPCC 2006 Vol. 1 Ch. 3, recalled, unchecked: the 2.5 and 97.5
    percentiles as percentages of the mean).

    Parameters
    ----------
    sums, params, draws, seed, fixed, chunk_zones, quantities
        As :func:`intervals`.

    Returns
    -------
    dict of str to numpy.ndarray
        Quantity -> mean per zone.
    """
    draws = _check_draws(draws, seed)
    model = _build(sums, params)
    fixed = _check_fixed(fixed)
    wanted = [q for q in model.quantities if quantities is None or q in quantities]
    res = {q: np.empty(model.n) for q in wanted}

    def reduce(sl, evaluate):
        return sl, {q: evaluate(q).mean(axis=1) for q in wanted}

    for sl, part in map_chunks(Drawer(model, draws, seed, fixed, wanted), chunk_zones, 1, reduce):
        for q, v in part.items():
            res[q][sl] = v
    return res
