"""Peat thickness as a covariate of the water-table depth model, chosen by leave-scar-out
cross-validation (issue 15, item 2).

Every scene's truth is built here, in several forms that are *not* all the model's own
(``1 - exp(-T / L_T)``): a saturating factor, a linear ramp ``min(1, T / T_full)``, a step at a
thickness, and scenes where thickness does not matter at all (with errors of several shapes, and a
thickness that is correlated with the water table but has no effect of its own). Expected values come
from that truth (held-out scars never seen by the fit), not from running peatburn's code.

Sources named beside the checks:
* Roberts et al. (2017), Ecography 40:913: cross-validation must leave out whole groups (scars).
* Frandsen (1997), Can. J. For. Res. 27:1471 (abstract checked): ignition of organic soil depends
  on moisture and inorganic content, the physical reason thin peat may burn shallower than the line.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from peatburn.errors import GridError, PhysicalRangeError
from peatburn.science import water_table as wt

A, B = 0.05, 0.5  # the line of the truth [m, m/m]


def _truth_factor(kind, t):
    """Share of the line that burns on peat of thickness t [m], per form of the truth."""
    if kind == "saturating":  # the model's own form, L_T = 0.6 m
        return 1 - np.exp(-t / 0.6)
    if kind == "ramp":  # proportional to thickness up to 1.5 m, full beyond (not the model's form)
        return np.minimum(1.0, t / 1.5)
    if kind == "step":  # 40 % of the line on peat thinner than 1 m (not the model's form)
        return np.where(t < 1.0, 0.4, 1.0)
    if kind in ("none", "none-correlated"):
        return np.ones_like(t)
    raise AssertionError(kind)


def _noise(errors, mean, rng, n):
    """Per-pixel depth around a mean, with errors of several shapes (mean of the multiplier 1)."""
    if errors == "gamma":  # right-skewed deep pockets, multiplicative
        return mean * rng.gamma(4.0, 0.25, n)
    if errors == "normal":  # additive, symmetric
        return mean + rng.normal(0, 0.05, n)
    if errors == "heteroscedastic":  # additive, spread growing with the mean, left-skewed
        return mean - mean * 0.4 * (rng.exponential(1.0, n) - 1.0)
    raise AssertionError(errors)


def _scene(n_scars, rng, kind, errors="gamma", radius=(2, 5), thickness=(0.15, 3.0)):
    """Disc-shaped scars: per scar a water table, a peat thickness (uniform in ``thickness`` [m]) and a
    scar-level random effect; the survey depth is capped at the thickness (what a survey sees).
    Returns per-pixel water table, observed depth, thickness, scar label."""
    ws, ds, ts, ss = [], [], [], []
    for s in range(n_scars):
        r = int(rng.integers(*radius))
        yy, xx = np.mgrid[-r:r + 1, -r:r + 1]
        n = int((xx**2 + yy**2 <= r * r).sum())
        w0 = rng.uniform(0.3, 1.3)
        t0 = rng.uniform(*thickness)
        if kind == "none-correlated":  # thick peat (dome centres) has deep water tables; no effect of its own
            t0 = thickness[0] + (thickness[1] - thickness[0]) * (w0 - 0.3) + rng.normal(0, 0.2)
        w = w0 + rng.normal(0, 0.04, n)
        t = np.maximum(t0 + rng.normal(0, 0.05, n), 0.05)
        mean = (A + B * w) * _truth_factor(kind, t) * math.exp(rng.normal(0, 0.1) - 0.1**2 / 2)
        d = np.minimum(_noise(errors, mean, rng, n), t)  # capped at the thickness, as a survey is
        ws.append(w)
        ds.append(d)
        ts.append(t)
        ss.append(np.full(n, s))
    return np.concatenate(ws), np.concatenate(ds), np.concatenate(ts), np.concatenate(ss)


def _held_out_rel_rmse(model, w, d, t, s):
    """Root mean square of the per-scar relative error of the depth sum on scars never fitted."""
    p = np.bincount(s, weights=model.predict(w, thickness_m=t))
    o = np.bincount(s, weights=d)
    keep = o > 0
    return float(np.sqrt(np.mean(((p[keep] - o[keep]) / o[keep]) ** 2)))


@pytest.mark.parametrize("kind,errors,method", [("saturating", "gamma", "theil-sen"), ("ramp", "normal", "huber"),
                                                ("step", "heteroscedastic", "huber")])
def test_thickness_is_chosen_where_it_matters_and_the_held_out_error_drops(kind, errors, method):
    # Roberts et al. (2017): choose by leaving whole scars out. 50 surveyed scars choose the covariate;
    # 80 further scars of the same kind, never seen, measure the realised error with and without it.
    rng = np.random.default_rng({"saturating": 1, "ramp": 2, "step": 3}[kind])
    w, d, t, s = _scene(50, rng, kind, errors)
    sel = wt.select_covariates(w, d, s, thickness_m=t, thickness="cv", method=method)
    assert sel["thickness_taper_m"] > 0, sel["scores"]
    assert sel["edge_taper_m"] == 0.0  # not asked for
    assert sel["scores"][f"thickness {sel['thickness_taper_m']:g} m"] <= 0.95 * sel["scores"]["none"]
    assert set(sel["scores"]) == {"none"} | {f"thickness {c:g} m" for c in wt.THICKNESS_TAPER_CANDIDATES_M}
    plain = wt.fit_depth_model(w, d, thickness_m=t, n_boot=0, method=method)
    chosen = wt.fit_depth_model(w, d, thickness_m=t, n_boot=0, thickness_taper_m=sel["thickness_taper_m"],
                                method=method)
    assert chosen.covariates == (f"thickness {sel['thickness_taper_m']:g} m",)
    assert "thin-peat factor" in chosen.estimator
    wh, dh, th, sh = _scene(80, rng, kind, errors)
    before = _held_out_rel_rmse(plain, wh, dh, th, sh)
    after = _held_out_rel_rmse(chosen, wh, dh, th, sh)
    assert after < 0.85 * before, (before, after)
    # the prediction stays capped by the thickness (burn cannot remove more peat than is there)
    assert np.all(chosen.predict(wh, thickness_m=th) <= th + 1e-12)


@pytest.mark.parametrize("kind,errors", [("none", "gamma"), ("none", "heteroscedastic"),
                                         ("none-correlated", "normal")])
def test_thickness_is_not_chosen_where_it_does_not_matter(kind, errors):
    # Depth depends on the water table only; the thickness varies from 1 to 4 m (and in one scene
    # rises with the water table, so it carries the water table's signal but nothing of its own).
    # The selection keeps the water table alone, so the model is exactly the one fitted without it.
    # (On thinner peat the thickness *does* matter even when the burn itself ignores it: a survey
    # depth capped at T has a mean E[min(X, T)] below min(E[X], T) when X is skewed, which the
    # thin-peat factor picks up; peat of 1 m and more leaves the cap out of play here.)
    rng = np.random.default_rng({"gamma": 11, "heteroscedastic": 12, "normal": 13}[errors])
    w, d, t, s = _scene(50, rng, kind, errors, thickness=(1.0, 4.0))
    sel = wt.select_covariates(w, d, s, thickness_m=t, thickness="cv", method="huber")
    assert sel["thickness_taper_m"] == 0.0, sel["scores"]
    plain = wt.fit_depth_model(w, d, thickness_m=t, n_boot=0, method="huber")
    chosen = wt.fit_depth_model(w, d, thickness_m=t, n_boot=0, thickness_taper_m=sel["thickness_taper_m"],
                                method="huber")
    wh, dh, th, sh = _scene(80, rng, kind, errors, thickness=(1.0, 4.0))
    assert _held_out_rel_rmse(chosen, wh, dh, th, sh) <= _held_out_rel_rmse(plain, wh, dh, th, sh) + 1e-12


def test_capped_pixels_stay_out_of_the_fit_with_the_thickness_covariate():
    # The censoring rule holds with the covariate: pairs whose depth reached the thickness are left out.
    rng = np.random.default_rng(5)
    w, d, t, _ = _scene(30, rng, "saturating")
    capped = int(np.sum(d >= t))
    assert capped > 0
    m = wt.fit_depth_model(w, d, thickness_m=t, n_boot=0, thickness_taper_m=0.5)
    assert m.n_censored == capped and m.n == w.size - capped


def test_thin_peat_factor_hand_arithmetic_and_refusals():
    # 1 - exp(-T / L): T = L gives 1 - 1/e = 0.6321; T = 0 gives 0; unknown (NaN) thickness gives 1.
    f = wt.thickness_taper([0.5, 0.0, np.nan, -1.0], 0.5)
    np.testing.assert_allclose(f, [1 - math.exp(-1), 0.0, 1.0, 0.0])
    m = wt.DepthModel(0.0, 1.0, math.nan, math.nan, math.nan, 10, math.nan, math.nan, "theil-sen", "fitted",
                      thickness_taper_m=0.5)
    # d = clip(f (a + b w), 0, T): w = 1 m on 0.5 m of peat -> 0.6321 x 1 = 0.632, capped at 0.5;
    # on 2 m of peat -> (1 - exp(-4)) x 1 = 0.9817
    np.testing.assert_allclose(m.predict([1.0, 1.0], thickness_m=[0.5, 2.0]), [0.5, 1 - math.exp(-4)])
    with pytest.raises(GridError, match="thickness"):
        m.predict([1.0])
    assert wt.DepthModel.from_dict(m.to_dict()) == m and m.covariates == ("thickness 0.5 m",)
    w = np.linspace(0.2, 1.4, 50)
    with pytest.raises(PhysicalRangeError, match="thin-peat"):
        wt.fit_depth_model(w, 0.5 * w, thickness_taper_m=0.5)  # no thickness given


def test_forward_selection_takes_edge_and_thickness_when_both_matter():
    # Both covariates in the truth: disc scars whose depth tapers to the edge (L = 20 m, 10 m pixels)
    # and is reduced on thin peat (ramp to 1.5 m). Asked to choose both, the selection takes both,
    # and the score of the chosen pair is below those of either alone.
    rng = np.random.default_rng(21)
    ws, ds, ts, es, ss = [], [], [], [], []
    for k in range(50):
        r = int(rng.integers(2, 7))
        yy, xx = np.mgrid[-r:r + 1, -r:r + 1]
        inside = xx**2 + yy**2 <= r * r
        e = (r + 0.5 - np.sqrt(xx**2 + yy**2))[inside] * 10.0
        n = e.size
        w = rng.uniform(0.3, 1.3) + rng.normal(0, 0.04, n)
        t = np.maximum(rng.uniform(0.15, 3.0) + rng.normal(0, 0.05, n), 0.05)
        mean = (A + B * w) * (1 - np.exp(-e / 20.0)) * np.minimum(1.0, t / 1.5)
        ws.append(w)
        ds.append(np.minimum(mean * rng.gamma(4.0, 0.25, n), t))
        ts.append(t)
        es.append(e)
        ss.append(np.full(n, k))
    w, d, t, e, s = map(np.concatenate, (ws, ds, ts, es, ss))
    sel = wt.select_covariates(w, d, s, edge_distance_m=e, thickness_m=t, edge="cv", thickness="cv", method="huber",
                               n_folds=5)
    assert sel["edge_taper_m"] > 0 and sel["thickness_taper_m"] > 0, sel["scores"]
    both = sel["scores"][f"edge {sel['edge_taper_m']:g} m + thickness {sel['thickness_taper_m']:g} m"]
    assert both < sel["scores"][f"edge {sel['edge_taper_m']:g} m"]
    assert both < sel["scores"]["none"]
    # a fixed covariate is always in, the other still chosen
    fixed = wt.select_covariates(w, d, s, edge_distance_m=e, thickness_m=t, edge=20.0, thickness="cv",
                                 method="huber", n_folds=5)
    assert fixed["edge_taper_m"] == 20.0 and fixed["thickness_taper_m"] > 0
    assert "none" not in fixed["scores"]
