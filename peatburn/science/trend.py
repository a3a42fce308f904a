"""Sum and trend of a time series of yearly emissions from joint Monte Carlo draws.

The years of a series share their factors (emission factors, bulk density, carbon fraction...), so
their errors are correlated: the interval of a multi-year sum, and of the trend between a base year
and a later year, come from draws made jointly for every year (common random numbers for the
shared sources), not from combining the years' intervals as if independent. IPCC 2006 Vol. 1 Ch. 3
(Approach 2, Monte Carlo) computes the trend per draw as the percentage change from the base year
and takes its percentiles; the same chapter's Approach 1 assumes independence unless correlation is
stated (recalled, unchecked: section 3.2.3).

References
----------
IPCC (2006). 2006 IPCC Guidelines for National Greenhouse Gas Inventories, Vol. 1, Ch. 3:
Uncertainties. Trend = (E_t - E_0) / E_0 x 100 %, Approach 2 (Monte Carlo) for the trend's
uncertainty (recalled, unchecked).
"""

from __future__ import annotations

import numpy as np

QUANTILES = (0.025, 0.975)


def sum_draws(draws) -> np.ndarray:
    """Draws of the multi-year sum [same unit as the draws].

    Parameters
    ----------
    draws : array_like, shape (years, n)
        Joint draws of each year's total: draw ``k`` of every year comes from the same draw of the
        shared sources.

    Returns
    -------
    numpy.ndarray, shape (n,)
    """
    return np.asarray(draws, dtype="float64").sum(axis=0)


def trend_draws(base, last) -> np.ndarray:
    """Draws of the trend [%] from a base year to a later year, per draw (IPCC 2006 Vol. 1 Ch. 3):
    ``(last - base) / base x 100``; NaN where a draw of the base year is 0.

    Parameters
    ----------
    base, last : array_like, shape (n,)
        Joint draws of the base year's and the later year's totals [any one unit].

    Returns
    -------
    numpy.ndarray, shape (n,) [%]
    """
    b = np.asarray(base, dtype="float64")
    t = np.asarray(last, dtype="float64")
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(b != 0, (t - b) / np.where(b != 0, b, 1.0) * 100.0, np.nan)


def decorrelate(draws, seed: int = 0) -> np.ndarray:
    """The same draws with each year's draws put in an independent random order: the marginal
    distribution of every year is kept, the correlation between years is removed (what combining
    the years' intervals as if independent assumes).

    Parameters
    ----------
    draws : array_like, shape (years, n)
    seed : int
        Seed of the permutations (results are deterministic).

    Returns
    -------
    numpy.ndarray, shape (years, n)
    """
    a = np.asarray(draws, dtype="float64")
    rng = np.random.default_rng([int(seed), 20])
    return np.stack([row[rng.permutation(a.shape[1])] for row in a])


def interval(draws, quantiles=QUANTILES) -> tuple[float, float]:
    """The ``quantiles`` (default 2.5 and 97.5 %) of draws, ignoring NaN draws."""
    a = np.asarray(draws, dtype="float64")
    a = a[np.isfinite(a)]
    if a.size == 0:
        return float("nan"), float("nan")
    lo, hi = np.quantile(a, quantiles)
    return float(lo), float(hi)


def correlation(draws) -> np.ndarray:
    """Pearson correlation of the years' totals across the joint draws, shape (years, years);
    NaN for a year whose draws do not vary."""
    a = np.asarray(draws, dtype="float64")
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.atleast_2d(np.corrcoef(a))
