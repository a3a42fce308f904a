"""Tests of the water-table depth model as a predictor of the *mean* burn depth (issue 15).

The truth of every scene is built here: a known conditional mean (a + b w, or an edge-tapered,
scar-level relation) with several error structures (right-skewed, left-skewed with edge zeros,
heteroscedastic, with canal-edge artefacts). Expected values come from that truth, from hand
arithmetic written beside each check, or from an independent implementation (numpy.polyfit for
least squares). None is produced by running peatburn's own code.

Sources named beside the checks:
* Duan (1983), J. Am. Stat. Assoc. 78:605: the mean of a skewed response is not its median line;
  a mean-residual (smearing) correction or least squares recovers the mean.
* Fuller (1987), Measurement Error Models, section 1.1: least squares attenuates the slope by the
  reliability ratio var(w_true) / (var(w_true) + sigma_u^2); the method-of-moments estimator
  undoes it.
* Roberts et al. (2017), Ecography 40:913: cross-validation must leave out whole groups (scars).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from peatburn.errors import GridError, PhysicalRangeError
from peatburn.science import water_table as wt

A, B = 0.05, 0.5  # truth of the mean line [m, m/m]


def _errors(kind, w, rng, scale=0.12):
    """Mean-zero errors of several shapes [m]."""
    n = w.size
    if kind == "right-skewed":  # deep pockets: exponential minus its mean, mean 0, median -0.31 scale
        return scale * (rng.exponential(1.0, n) - 1.0)
    if kind == "left-skewed":  # shallow burn at edges: the mirror image
        return -scale * (rng.exponential(1.0, n) - 1.0)
    if kind == "heteroscedastic":  # spread grows with the water table (gamma, shape 2, mean 0)
        return scale * (w / w.mean()) * (rng.gamma(2.0, 0.5, n) - 1.0)
    raise AssertionError(kind)


@pytest.mark.parametrize("kind", ["right-skewed", "left-skewed", "heteroscedastic"])
@pytest.mark.parametrize("method", wt.METHODS)
def test_mean_fit_is_unbiased_for_the_mean_on_skewed_data(kind, method):
    # Duan (1983): for skewed errors the median line misses the mean. The truth's mean at w is
    # A + B w exactly (errors of mean 0), so the total of predicted means must match the total of
    # true means; the Theil-Sen median line is off by about 0.31 x 0.12 = 0.037 m against a mean depth
    # of 0.05 + 0.5 x 0.85 = 0.475 m (about 8 %) for the exponential errors; Huber lies between the
    # median and the mean (about 4 %).
    rng = np.random.default_rng(31)
    n = 20_000
    w = rng.uniform(0.2, 1.5, n)
    d = A + B * w + _errors(kind, w, rng)
    true_total = float(np.sum(A + B * w))
    mean = wt.fit_depth_model(w, d, method=method, n_boot=0)
    got = float(np.sum(mean.intercept + mean.slope * w))
    assert got / true_total - 1 == pytest.approx(0.0, abs=0.02)
    assert mean.target == "mean" and "least squares" in mean.estimator
    if kind != "heteroscedastic":
        median = wt.fit_depth_model(w, d, method=method, n_boot=0, target="median")
        assert abs(float(np.sum(median.intercept + median.slope * w)) / true_total - 1) > 0.03


@pytest.mark.parametrize("method", wt.METHODS)
def test_mean_fit_keeps_its_robustness_to_canal_edge_artefacts(method):
    # 3 % of pixels carry 2-4 m of spurious lowering where the water table is deep (canals); least
    # squares on everything (numpy.polyfit) is pulled far off, the screened fit is not, and it
    # still recovers the mean of right-skewed data (Duan 1983).
    rng = np.random.default_rng(5)
    n = 10_000
    w = rng.uniform(0.2, 1.5, n)
    d = A + B * w + _errors("right-skewed", w, rng)
    hit = (w > 1.1) & (rng.random(n) < 0.12)
    d[hit] += rng.uniform(2.0, 4.0, int(hit.sum()))
    ols_b, _ = np.polyfit(w, d, 1)
    assert abs(ols_b - B) > 0.2  # the artefacts matter: the test can fail
    m = wt.fit_depth_model(w, d, method=method, n_boot=0)
    assert m.slope == pytest.approx(B, abs=0.03)
    assert m.intercept == pytest.approx(A, abs=0.03)
    assert m.n_screened >= hit.sum()  # every artefact (2 m >> 5 scales of 0.12 m) is screened
    assert m.n_screened < hit.sum() + 0.01 * n  # and little real tail with it
    clean = ~hit
    ref_b, ref_a = np.polyfit(w[clean], d[clean], 1)  # least squares on the true pixels only
    assert m.slope == pytest.approx(ref_b, abs=0.01)
    assert any("screened out as artefacts" in x for x in m.notes)


def test_mean_fit_without_artefacts_is_ordinary_least_squares():
    # normal errors, nothing to screen: the fit is numpy.polyfit's line
    rng = np.random.default_rng(2)
    w = rng.uniform(0.2, 1.5, 3000)
    d = A + B * w + rng.normal(0, 0.05, 3000)
    m = wt.fit_depth_model(w, d, n_boot=0)
    ref_b, ref_a = np.polyfit(w, d, 1)
    assert m.n_screened == 0
    assert m.slope == pytest.approx(ref_b, abs=1e-10)
    assert m.intercept == pytest.approx(ref_a, abs=1e-10)


def test_capped_pixels_are_censored_out_of_the_fit():
    # truth d = min(A + B w + e, T) with T = 0.35 m on half the pixels: the capped depths are lower
    # bounds. Fitted as values they flatten the slope; left out, the slope comes back.
    rng = np.random.default_rng(4)
    n = 8000
    w = rng.uniform(0.2, 1.5, n)
    thick = np.where(rng.random(n) < 0.5, 0.35, np.nan)  # NaN: thickness unknown, no cap
    latent = A + B * w + rng.normal(0, 0.05, n)
    d = np.where(np.isnan(thick), latent, np.minimum(latent, thick))
    naive = wt.fit_depth_model(w, d, n_boot=0)
    assert naive.slope < B - 0.08  # the cap bites: the test can fail
    m = wt.fit_depth_model(w, d, n_boot=0, thickness_m=thick)
    capped = (~np.isnan(thick)) & (latent >= 0.35)
    assert m.n_censored == int(capped.sum())
    assert m.slope == pytest.approx(B, abs=0.03)
    assert any("censored" in x for x in m.notes)
    with pytest.raises(GridError, match="peat thicknesses"):
        wt.fit_depth_model(w, d, thickness_m=thick[:10])


@pytest.mark.parametrize("sigma_u, naive_expected", [(0.1, 0.467), (0.2, 0.389)])
def test_errors_in_variables_undoes_regression_dilution(sigma_u, naive_expected):
    # Fuller (1987, section 1.1): w_obs = w_true + u, var(w_true) = 1.3^2 / 12 = 0.1408 m^2 (uniform on
    # [0.2, 1.5]); least squares tends to B x 0.1408 / (0.1408 + sigma_u^2): 0.467 for 0.1 m, 0.389 for
    # 0.2 m. The corrected fit recovers B.
    rng = np.random.default_rng(8)
    n = 30_000
    w_true = rng.uniform(0.2, 1.5, n)
    d = A + B * w_true + rng.normal(0, 0.05, n)
    w_obs = w_true + rng.normal(0, sigma_u, n)
    naive = wt.fit_depth_model(w_obs, d, n_boot=0)
    assert naive.slope == pytest.approx(naive_expected, abs=0.015)
    m = wt.fit_depth_model(w_obs, d, n_boot=0, water_table_error_m=sigma_u)
    assert m.slope == pytest.approx(B, abs=0.02)
    assert m.intercept == pytest.approx(A, abs=0.02)
    assert "errors-in-variables" in m.estimator and m.water_table_error_m == sigma_u
    assert math.isnan(naive.water_table_error_m)


def test_errors_in_variables_refuses_unusable_settings():
    w = np.linspace(0.5, 0.7, 50)  # spread 0.058 m sd: an error of 0.1 m swamps it
    d = 0.5 * w
    with pytest.raises(GridError, match="reliability"):
        wt.fit_depth_model(w, d, water_table_error_m=0.1, n_boot=0)
    with pytest.raises(PhysicalRangeError, match="target"):
        wt.fit_depth_model(w, d, water_table_error_m=0.01, target="median")
    with pytest.raises(PhysicalRangeError, match="water-table error"):
        wt.fit_depth_model(w, d, water_table_error_m=-0.1)
    with pytest.raises(PhysicalRangeError, match="unknown target"):
        wt.fit_depth_model(w, d, target="mode")


# --------------------------------------------------------------------------- scars


def _scene(n_scars, rng, radius=(4, 12), pixel=10.0, taper_m=25.0):
    """Disc-shaped scars with an edge-tapered, skewed truth.

    Per scar: a mean water table, a gradient across it, a scar-level random effect. Per pixel:
    the mean depth is (A + B w) x (1 - exp(-e / taper_m)) with e the distance to the scar edge
    [m], times a right-skewed multiplier of mean 1 (deep pockets). Returns per-pixel arrays and
    the per-pixel true mean depth.
    """
    ws, ds, truth, scar = [], [], [], []
    for s in range(n_scars):
        r = int(rng.integers(*radius))
        yy, xx = np.mgrid[-r:r + 1, -r:r + 1]
        inside = xx**2 + yy**2 <= r * r
        edge = (r + 0.5 - np.sqrt(xx**2 + yy**2))[inside] * pixel
        w0 = rng.uniform(0.3, 1.3)
        w = w0 + 0.002 * xx[inside] * pixel / 10 + rng.normal(0, 0.03, edge.size)
        mean = (A + B * w) * (1 - np.exp(-edge / taper_m)) * math.exp(rng.normal(0, 0.15) - 0.15**2 / 2)
        d = mean * rng.gamma(2.0, 0.5, edge.size)  # mean 1, right-skewed
        ws.append(w)
        ds.append(d)
        truth.append(mean)
        scar.append(np.full(edge.size, s))
    return np.concatenate(ws), np.concatenate(ds), np.concatenate(truth), np.concatenate(scar)


def test_leave_scar_out_error_covers_held_out_scars():
    # Roberts et al. (2017): the error of a scar the survey missed is estimated by leaving whole
    # scars out. 60 surveyed scars give the cross-validated 5-95 % range of a scar's relative error;
    # 120 further scars of the same kind, never seen by the fit, realise their errors. About 90 % of
    # them must fall inside that range (accept >= 75 % for the noise of 60 + 120 scars).
    rng = np.random.default_rng(17)
    w, d, _, scar = _scene(60, rng)
    cv = wt.scar_cross_validation(w, d, scar, n_folds=10)
    assert cv["n_scars"] == 60 and cv["n_folds"] == 10 and cv["n_skipped"] == 0
    assert "leave-scar-out" in cv["method"]
    m = wt.fit_depth_model(w, d, n_boot=0)
    wh, dh, _, sh = _scene(120, rng)
    pred = m.predict(wh)
    p = np.bincount(sh, weights=pred)
    o = np.bincount(sh, weights=dh)
    rel = (p - o) / o
    inside = (rel >= cv["rel_q05"]) & (rel <= cv["rel_q95"])
    assert inside.mean() >= 0.75
    # and the cross-validated RMSE is of the size of the realised one (ratio within 0.6-1.6)
    realised = math.sqrt(np.mean((p - o) ** 2)) / np.mean(o)
    assert 0.6 < cv["rmse"] / realised < 1.6
    # the total over the held-out scars is predicted within the CV bias +- 2 x RMSE / sqrt(120)
    total_rel = p.sum() / o.sum() - 1
    assert abs(total_rel - cv["bias"]) < 2 * cv["rmse"] / math.sqrt(120) + 0.03


def test_mean_fit_on_an_edge_tapered_skewed_scene():
    # The truth's mean depth per pixel is known (built in _scene); the fitted line's total over the
    # scene matches the true total within 3 %, and the median line does not (Duan 1983).
    rng = np.random.default_rng(3)
    w, d, truth, _ = _scene(40, rng)
    for method in wt.METHODS:
        m = wt.fit_depth_model(w, d, n_boot=0, method=method)
        assert float(np.sum(m.predict(w))) / truth.sum() - 1 == pytest.approx(0.0, abs=0.03)
    med = wt.fit_depth_model(w, d, n_boot=0, target="median")
    assert float(np.sum(med.predict(w))) / truth.sum() - 1 < -0.05


def test_scar_cross_validation_weights_thickness_and_refusals():
    rng = np.random.default_rng(6)
    w, d, _, scar = _scene(12, rng)
    cv = wt.scar_cross_validation(w, d, scar, n_folds=20)
    assert cv["n_folds"] == 12 and "one scar per fold" in cv["method"]  # leave-one-scar-out
    # a constant weight scales P and O alike: relative statistics unchanged
    cv2 = wt.scar_cross_validation(w, d, scar, n_folds=20, weight=7.0)
    assert cv2["bias"] == pytest.approx(cv["bias"], rel=1e-12)
    assert cv2["rmse"] == pytest.approx(cv["rmse"], rel=1e-12)
    np.testing.assert_allclose(cv2["observed"], 7.0 * cv["observed"])
    # a thickness cap of 0.2 m bounds every predicted pixel depth: P_s <= 0.2 x pixels of the scar
    cvt = wt.scar_cross_validation(w, d, scar, thickness_m=0.2)
    assert np.all(cvt["predicted"] <= 0.2 * np.bincount(scar)[cvt["scar"]] + 1e-9)
    with pytest.raises(GridError, match="at least 3"):
        wt.scar_cross_validation(w[:10], d[:10], np.zeros(10))
    with pytest.raises(GridError, match="one of each"):
        wt.scar_cross_validation(w, d, scar[:5])
    m = wt.with_cross_validation(wt.fit_depth_model(w, d, n_boot=0), cv)
    assert m.cv_n_scars == 12 and m.cv_rmse == cv["rmse"] and m.cv_method == cv["method"]
    assert wt.DepthModel.from_dict(m.to_dict()) == m


def test_separate_groups_need_enough_scars():
    # 2 repeat-fire scars with 600 pixels each: enough pixels, too few scars (MIN_SCARS_PER_GROUP).
    rng = np.random.default_rng(1)
    n = 6000
    scar = np.repeat(np.arange(10), 600)
    w = rng.uniform(0.2, 1.4, n)
    d = 0.5 * w + rng.normal(0, 0.05, n)
    count = np.where(scar < 2, 2, 1)
    models = wt.fit_depth_models_by_group(w, d, count, cluster=scar, n_boot=0)
    assert models[2].method == "pooled"
    assert any("2 scar(s)" in x for x in models[2].notes)
    scar20 = np.repeat(np.arange(20), 300)
    count20 = np.where(scar20 < 10, 2, 1)
    models = wt.fit_depth_models_by_group(w, d, count20, cluster=scar20, n_boot=0)
    assert models[2].method == "theil-sen" and models[1].method == "theil-sen"


def test_extrapolated_share_hand_arithmetic():
    m = wt.user_model(0.0, 0.5)
    assert math.isnan(wt.extrapolated_share(m, [0.5, 1.0]))  # no fitted range
    rng = np.random.default_rng(0)
    w = rng.uniform(0.4, 0.9, 200)
    fitted = wt.fit_depth_model(w, 0.5 * w + rng.normal(0, 0.01, 200), n_boot=0)
    lo, hi = fitted.water_table_range
    # values: one below, one inside, two above; areas 1, 2, 3, 4 -> (1 + 3 + 4) / 10 = 0.8
    got = wt.extrapolated_share(fitted, [lo - 0.1, (lo + hi) / 2, hi + 0.1, hi + 1.0], [1, 2, 3, 4])
    assert got == pytest.approx(0.8)
    assert wt.extrapolated_share(fitted, [lo, hi]) == 0.0


def test_cross_validation_measures_against_real_depths_not_artefacts():
    # 2 % of pixels of an edge-tapered scene carry 2-4 m canal-edge artefacts (+0.06 m per pixel on
    # average against a mean depth near 0.3 m, about +20 %). Counted as burn depth they would make
    # the model look 20 % low; the screen leaves them out of the held-out sums, so the bias stays
    # near the truth's (within 5 %).
    rng = np.random.default_rng(12)
    w, d, truth, scar = _scene(40, rng)
    bad = rng.random(d.size) < 0.02
    d_bad = d.copy()
    d_bad[bad] += rng.uniform(2.0, 4.0, int(bad.sum()))
    cv = wt.scar_cross_validation(w, d_bad, scar)
    # the upper scale of this skewed scene is about 0.25 m, so 8 scales reach 2 m: the smallest
    # artefacts on top of a deep pocket can pass the screen (most do not)
    assert cv["n_screened"] >= 0.9 * bad.sum()
    assert abs(cv["bias"]) < 0.05
    clean = wt.scar_cross_validation(w, d, scar)
    assert cv["bias"] == pytest.approx(clean["bias"], abs=0.03)


def _edge_distances(n_scars, rng, radius=(4, 12), pixel=10.0):
    """The same scars as _scene with the same seed, returning each pixel's distance to the edge [m]."""
    out = []
    for _ in range(n_scars):
        r = int(rng.integers(*radius))
        yy, xx = np.mgrid[-r:r + 1, -r:r + 1]
        inside = xx**2 + yy**2 <= r * r
        out.append((r + 0.5 - np.sqrt(xx**2 + yy**2))[inside] * pixel)
        # consume the scene's other draws in the same order
        rng.uniform(0.3, 1.3)
        rng.normal(0, 0.03, int(inside.sum()))
        rng.normal(0, 0.15)
        rng.gamma(2.0, 0.5, int(inside.sum()))
    return np.concatenate(out)


def test_edge_taper_is_chosen_by_cross_validation_and_fixes_small_scars():
    # The truth tapers as 1 - exp(-e / 25 m) (built in _scene). Fitted on surveyed scars of radius
    # 3-16 px (mostly large in area) without taper, the model overstates small scars (radius 2-4 px),
    # whose pixels lie mostly near the edge; with the taper chosen by leave-scar-out CV it does not.
    # Hand arithmetic (numerical quadrature of the mean of 1 - exp(-(R - r)/L) over a disc, L = 25 m):
    # 0.30 for R = 30 m and 0.40 for 45 m, against 0.69 for R = 130 m, so a line fitted mostly on
    # large-scar pixels overstates small scars by well over 30 %.
    big, small = np.random.default_rng(40), np.random.default_rng(41)
    w, d, truth, scar = _scene(50, big, radius=(3, 17))
    e = _edge_distances(50, np.random.default_rng(40), radius=(3, 17))
    sel = wt.select_edge_taper(w, d, scar, e)
    assert sel["taper_m"] > 0 and sel["rmse"][sel["taper_m"]] < sel["rmse"][0.0]
    assert 10 <= sel["taper_m"] <= 40  # the truth's 25 m lies between the candidates 20 and 40
    plain = wt.fit_depth_model(w, d, n_boot=0)
    tapered = wt.fit_depth_model(w, d, n_boot=0, edge_distance_m=e, edge_taper_m=sel["taper_m"])
    assert "tapered" in tapered.estimator and tapered.edge_taper_m == sel["taper_m"]
    ws, ds, ts, ss = _scene(60, small, radius=(2, 5))
    es = _edge_distances(60, np.random.default_rng(41), radius=(2, 5))
    over_plain = plain.predict(ws).sum() / ts.sum() - 1
    over_taper = tapered.predict(ws, edge_distance_m=es).sum() / ts.sum() - 1
    assert over_plain > 0.3  # the failure the issue describes (14 % there; larger with smaller scars here)
    assert abs(over_taper) < 0.10
    with pytest.raises(GridError, match="edge distances"):
        tapered.predict(ws)
    with pytest.raises(PhysicalRangeError, match="edge taper"):
        wt.fit_depth_model(w, d, edge_taper_m=20.0)


def test_no_taper_is_chosen_where_depth_does_not_taper():
    # depth independent of the edge distance: no candidate improves the CV RMSE by 5 %
    rng = np.random.default_rng(7)
    w, _, _, scar = _scene(30, rng)
    e = _edge_distances(30, np.random.default_rng(7))
    d = A + B * w + rng.normal(0, 0.05, w.size)
    assert wt.select_edge_taper(w, d, scar, e)["taper_m"] == 0.0
