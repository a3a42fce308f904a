"""How much each source contributes to the variance of a quantity: first-order components and
shares, or Monte Carlo with one source fixed at a time."""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np

from ...errors import ConfigError
from ...numerics.draws import Drawer, block_sums, map_chunks
from .monte_carlo import _check_draws
from .zone_model import _build

def variance_components(sums: Mapping, params: Mapping, *, quantity="carbon_kg", total=False) -> dict[str, np.ndarray]:
    """First-order (delta-method) variance of a quantity per zone, split by source.

    Every quantity is a sum of terms ``coef * prod(m) * (base + sum_s a_s z_s)`` with independent
    standard normals z_s and independent multiplicative factors m of mean 1 and CV c_m. To first
    order about the nominal values, ``Var Q = sum_s (dQ/dz_s)^2 + sum_m (dQ/dm)^2 c_m^2`` with
    ``dQ/dz_s = sum_t coef_t a_{t,s}`` and ``dQ/dm = sum_{t containing m} coef_t base_t``: exact for
    the additive sources, and exact to first order for products of independent factors (the
    neglected products of relative variances, e.g. c_rho^2 c_f^2, are second order). Sources that
    are run-wide add their derivatives over zones before squaring for the total; zone-level
    sources add their variances.

    Parameters
    ----------
    sums, params : mapping
        As :func:`draw_zone_totals`.
    quantity : str
        One of the quantities (e.g. ``"carbon_kg"``, ``"co2_smouldering_kg"``).
    total : bool
        Append the run total as a last element.

    Returns
    -------
    dict of str to numpy.ndarray
        Source name -> variance [unit of the quantity squared] per zone; only sources present in
        the model.

    References
    ----------
    JCGM 100:2008 (GUM), §5.1.2, Eq. (10): the law of propagation of uncertainty for
    uncorrelated inputs (section recalled, unchecked).
    """
    model = _build(sums, params)
    if quantity not in model.quantities:
        raise ConfigError(f"quantity {quantity!r} is not produced by these sums and parameters; "
                          f"available: {', '.join(model.quantities)}")
    terms = model.quantities[quantity]
    comp: dict[str, np.ndarray] = {}

    def add(group, deriv, run_wide):
        if total:
            tot = deriv.sum() ** 2 if run_wide else np.sum(deriv**2)
            v = np.append(deriv**2, tot)
        else:
            v = deriv**2
        comp[group] = comp.get(group, 0.0) + v

    for k, (group, run_wide) in model.additive.items():
        deriv = np.zeros(model.n)
        hit = False
        for core, coef, _ in terms:
            a = model.core_coefficients(core).get(k)
            if a is not None:
                deriv = deriv + coef * a
                hit = True
        if hit:
            add(group, deriv, run_wide)
    for m, (group, cv) in model.factors.items():
        deriv = np.zeros(model.n)
        hit = False
        for core, coef, facs in terms:
            if m in facs:
                deriv = deriv + coef * model.cores[core][0]
                hit = True
            for d in facs:  # through a derived factor (the carbon mass-balance normaliser)
                grad = model.derived.get(d, (None, {}))[1].get(m)
                if grad:
                    deriv = deriv + coef * grad * model.cores[core][0]
                    hit = True
        if hit and cv > 0:
            add(group, deriv * cv, True)
    return comp


def contributions(sums: Mapping, params: Mapping, *, draws: int = 2000, seed: int = 0, quantity="carbon_kg",
                  method="analytic", total=False, chunk_zones=2000) -> dict[str, np.ndarray]:
    """Share of the variance of a quantity that each source contributes, per zone (and total).

    Methods
    -------
    ``"analytic"`` (default; ``draws`` and ``seed`` unused)
        First-order shares from :func:`variance_components`: each source's variance over their
        sum. The shares add to 1. Exact for the additive survey and water-table sources and exact
        to first order for the multiplicative factors.
    ``"fix-one"``
        Monte Carlo, one source at a time: share_s = 1 - Var(Q | s fixed) / Var(Q), every run with
        the same seed (common random numbers, so differences are not swamped by Monte Carlo noise).
        Shares need not add to exactly 1 (interactions between multiplicative factors, Monte Carlo
        noise).

    Parameters
    ----------
    sums, params : mapping
        As :func:`draw_zone_totals`.
    draws, seed : int
        For ``"fix-one"``.
    quantity : str
        The quantity (default ``"carbon_kg"``).
    method : {"analytic", "fix-one"}
    total : bool
        Append the run total as a last element.
    chunk_zones : int
        As :func:`draw_zone_totals`.

    Returns
    -------
    dict of str to numpy.ndarray
        Source name -> share [-] per zone; NaN where the quantity has no variance.
    """
    if method == "analytic":
        comp = variance_components(sums, params, quantity=quantity, total=total)
        tot = sum(comp.values()) if comp else None
        with np.errstate(divide="ignore", invalid="ignore"):
            return {k: np.where(tot > 0, v / np.where(tot > 0, tot, 1.0), np.nan) for k, v in comp.items()}
    if method != "fix-one":
        raise ConfigError(f"contributions: method {method!r}; use 'analytic' or 'fix-one'")
    draws = _check_draws(draws, seed)
    model = _build(sums, params)
    if quantity not in model.quantities:
        raise ConfigError(f"quantity {quantity!r} is not produced by these sums and parameters; "
                          f"available: {', '.join(model.quantities)}")
    groups = list(variance_components(sums, params, quantity=quantity))

    def variance(fixed):
        n_out = model.n + (1 if total else 0)
        v = np.empty(n_out)
        acc = np.zeros(draws)

        def reduce(sl, evaluate):
            arr = evaluate(quantity)
            return sl, arr.var(axis=1), (block_sums(arr) if total else None)

        drawer = Drawer(model, draws, seed, set(fixed), quantities=[quantity])
        for sl, var, s in map_chunks(drawer, chunk_zones, 1, reduce):
            v[sl] = var
            if total:
                for row in s:
                    acc += row
        if total:
            v[-1] = acc.var()
        return v

    v_all = variance(())
    out = {}
    with np.errstate(divide="ignore", invalid="ignore"):
        for g in groups:
            v_g = variance((g,))
            out[g] = np.where(v_all > 0, 1.0 - v_g / np.where(v_all > 0, v_all, 1.0), np.nan)
    return out
