"""Tests of peatburn.science.water_table: depth model, robust fitting, checks, IDW, validation.

Expected values come from hand arithmetic written out beside each check, from the synthetic truth
the test itself draws (known a, b, noise), from least-squares theory written out by hand
(SE(b) = sigma / sqrt(Sxx), Cov(a, b) = -sigma^2 xbar / Sxx), or from independent implementations
(scipy.stats.theilslopes, scipy.optimize.least_squares, numpy.polyfit, a brute-force IDW written
here). None is produced by running peatburn's own code.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
import scipy.optimize
import scipy.stats
from hypothesis import given, settings
from hypothesis import strategies as st

from peatburn.errors import GridError, PeatburnError, PhysicalRangeError
from peatburn.io.writers import write_json
from peatburn.science import water_table as wt


def _synthetic(n, a, b, sigma, seed, lo=0.2, hi=1.5):
    rng = np.random.default_rng(seed)
    w = rng.uniform(lo, hi, n)
    d = a + b * w + rng.normal(0.0, sigma, n)
    return w, d, rng


def _add_canal_edges(w, d, rng, share):
    """Canal-edge artefacts: a few pixels with 2-4 m of apparent lowering (spoil banks, water)."""
    d = d.copy()
    bad = rng.random(d.size) < share
    d[bad] += rng.uniform(2.0, 4.0, int(bad.sum()))
    return d, bad


# --------------------------------------------------------------------------- the model


def test_predict_depth_hand_arithmetic():
    # d = clip(-0.4 + 1.0 w, 0, T):
    # w 0.2 -> -0.2 -> 0;  w 0.4 -> 0;  w 0.9 -> 0.5 (T 1 does not bind);
    # w 2.0 -> 1.6, capped at T 1.2;  w NaN -> NaN;  w 1.0 with unknown T (NaN) -> 0.6 uncapped.
    w = np.array([0.2, 0.4, 0.9, 2.0, np.nan, 1.0])
    t = np.array([1.0, 1.0, 1.0, 1.2, 1.0, np.nan])
    got = wt.predict_depth((-0.4, 1.0), w, t)
    np.testing.assert_allclose(got, [0.0, 0.0, 0.5, 1.2, np.nan, 0.6], atol=1e-12)


def test_predict_depth_without_thickness_and_with_model():
    # a = 0.1, b = 0.5: w 0.6 -> 0.1 + 0.3 = 0.4; w -0.5 (flooded) -> -0.15 -> 0.
    m = wt.user_model(0.1, 0.5)
    np.testing.assert_allclose(wt.predict_depth(m, [0.6, -0.5]), [0.4, 0.0], atol=1e-12)
    np.testing.assert_allclose(m.predict([0.6], [0.3]), [0.3], atol=1e-12)  # capped by T = 0.3


def test_predict_depth_per_pixel_coefficients_broadcast():
    # two coefficient sets side by side: (0, 1) and (0.2, 0.5) at w = 0.8 -> 0.8 and 0.2 + 0.4 = 0.6
    got = wt.predict_depth((np.array([0.0, 0.2]), np.array([1.0, 0.5])), np.array([0.8, 0.8]))
    np.testing.assert_allclose(got, [0.8, 0.6], atol=1e-12)


def test_predict_depth_grouped_by_fire_count():
    first = wt.user_model(0.0, 0.5)
    repeat = wt.user_model(0.1, 0.8)
    # w = 1.0: first fire 0.5; repeat 0.1 + 0.8 = 0.9; label 3 unknown -> default -0.4 + 1.0 = 0.6
    got = wt.predict_depth_grouped({1: first, 2: repeat}, [1, 2, 3], [1.0, 1.0, 1.0], default=wt.DEFAULT_MODEL)
    np.testing.assert_allclose(got, [0.5, 0.9, 0.6], atol=1e-12)
    no_default = wt.predict_depth_grouped({1: first}, [1, 2], [1.0, 1.0])
    assert no_default[0] == pytest.approx(0.5) and np.isnan(no_default[1])


def test_default_model_is_low_confidence_and_documented():
    m = wt.DEFAULT_MODEL
    assert (m.intercept, m.slope) == (-0.40, 1.0)
    assert m.confidence == "default (low confidence)"
    assert m.n == 0 and math.isnan(m.r2)
    for name in ("Hayasaka", "Wösten", "0.40"):
        assert name in m.basis
    # The documented consistency check: Ballhorn et al. 2009 (PNAS 106:21213, abstract) mean depth
    # 0.33 m corresponds to a water table of 0.33 + 0.40 = 0.73 m under the default.
    assert float(wt.predict_depth(m, 0.73)) == pytest.approx(0.33, abs=1e-12)


def test_user_model_checks_and_flags_negative_slope():
    with pytest.raises(PhysicalRangeError, match="slope"):
        wt.user_model(0.1, float("nan"))
    with pytest.raises(PhysicalRangeError, match="intercept_se"):
        wt.user_model(0.1, 0.5, intercept_se=-1)
    m = wt.user_model(0.1, -0.5)
    assert m.confidence == "user"
    assert any("negative" in n for n in m.notes)


def test_depth_model_positional_construction_and_covariance_matrix():
    # The pipeline builds user models positionally: (a, b, se_a, se_b, cov, n, r2, rmse, method, confidence)
    m = wt.DepthModel(0.1, 0.5, 0.02, 0.03, -0.0004, 0, float("nan"), float("nan"), "user", "user")
    np.testing.assert_allclose(m.covariance_matrix(), [[0.0004, -0.0004], [-0.0004, 0.0009]])


def test_to_dict_round_trips_through_the_json_writer(tmp_path):
    w, d, _ = _synthetic(300, 0.1, 0.6, 0.05, seed=3)
    m = wt.fit_depth_model(w, d, n_boot=20)
    path = write_json(tmp_path / "m.json", {"models": {"all": m.to_dict()}})
    data = json.loads(path.read_text())["models"]["all"]
    # what the pipeline's loader does: every dataclass field by name
    back = wt.DepthModel(**{k: data[k] for k in wt.DepthModel.__dataclass_fields__})
    assert back == m
    # a model with NaNs: JSON writes null, the model gets NaN back
    path = write_json(tmp_path / "d.json", wt.DEFAULT_MODEL.to_dict())
    back = wt.DepthModel.from_dict(json.loads(path.read_text()))
    assert math.isnan(back.r2) and back.slope == 1.0 and back.confidence == "default (low confidence)"


# --------------------------------------------------------------------------- fitting


@pytest.mark.parametrize("method", wt.METHODS)
def test_fit_recovers_known_coefficients(method):
    # truth a = 0.10 m, b = 0.60, sigma = 0.08 m, n = 5000, w uniform on [0.2, 1.5].
    # OLS theory: SE(b) = sigma / sqrt(Sxx) with Sxx = n var(w) = 5000 x 1.3^2 / 12 = 704.2
    # -> SE(b) = 0.08 / 26.5 = 0.0030; robust estimators are a little less efficient. 5 SE = 0.015.
    w, d, _ = _synthetic(5000, 0.10, 0.60, 0.08, seed=11)
    m = wt.fit_depth_model(w, d, method=method, n_boot=50)
    assert m.slope == pytest.approx(0.60, abs=0.015)
    assert m.intercept == pytest.approx(0.10, abs=0.015)
    assert m.n == 5000 and m.confidence == "fitted" and m.method == method
    assert m.water_table_range[0] >= 0.2 and m.water_table_range[1] <= 1.5
    # R^2 of a line with sigma 0.08 and signal sd b x 1.3/sqrt(12) = 0.225: 0.225^2 / (0.225^2 + 0.08^2) = 0.888
    assert m.r2 == pytest.approx(0.888, abs=0.02)
    assert m.rmse == pytest.approx(0.08, rel=0.05)
    assert m.residual_nmad == pytest.approx(0.08, rel=0.1)


@pytest.mark.parametrize("method", wt.METHODS)
def test_fit_is_robust_to_canal_edge_artefacts(method):
    # 3 % of pixels carry +2 to +4 m of spurious lowering, more often where the water table is deep
    # (canals drain it). Least squares (numpy.polyfit) is pulled far off; the robust fits are not.
    w, d, rng = _synthetic(4000, 0.05, 0.50, 0.06, seed=5)
    d_bad, bad = _add_canal_edges(w, d, rng, 0.0)
    deep = w > 1.1
    hit = deep & (rng.random(w.size) < 0.12)  # about 0.12 x 0.31 = 3.7 % of all pixels
    d_bad[hit] += rng.uniform(2.0, 4.0, int(hit.sum()))
    ols_b, ols_a = np.polyfit(w, d_bad, 1)
    assert abs(ols_b - 0.50) > 0.2  # the test can fail: least squares is badly biased here
    m = wt.fit_depth_model(w, d_bad, method=method, n_boot=0)
    assert m.slope == pytest.approx(0.50, abs=0.03)
    assert m.intercept == pytest.approx(0.05, abs=0.03)


def test_theil_sen_matches_scipy_theilslopes():
    # Independent implementation: scipy.stats.theilslopes, intercept method "joint" = median(d - b w).
    w, d, rng = _synthetic(400, 0.2, 0.7, 0.1, seed=8)
    d, _ = _add_canal_edges(w, d, rng, 0.05)
    ref = scipy.stats.theilslopes(d, w, method="joint")
    m = wt.fit_depth_model(w, d, method="theil-sen", n_boot=0, target="median")
    assert m.slope == pytest.approx(ref.slope, abs=1e-12)
    assert m.intercept == pytest.approx(ref.intercept, abs=1e-12)


def test_huber_matches_scipy_least_squares_with_huber_loss():
    # Independent implementation: scipy.optimize.least_squares with loss="huber" and the Huber
    # threshold 1.345 sigma at the true noise sigma = 0.05 m. Our IRLS estimates sigma robustly
    # (NMAD), so the two agree to a fraction of the standard error (SE(b) ~ 0.05 / sqrt(2000 x 0.14) = 0.003).
    w, d, rng = _synthetic(2000, 0.1, 0.6, 0.05, seed=21)
    d, _ = _add_canal_edges(w, d, rng, 0.04)
    ref = scipy.optimize.least_squares(lambda p: d - (p[0] + p[1] * w), x0=[0.0, 0.0], loss="huber",
                                       f_scale=1.345 * 0.05)
    m = wt.fit_depth_model(w, d, method="huber", n_boot=0, target="median")
    assert m.intercept == pytest.approx(ref.x[0], abs=0.003)
    assert m.slope == pytest.approx(ref.x[1], abs=0.003)


@pytest.mark.parametrize("method", wt.METHODS)
def test_bootstrap_standard_errors_match_least_squares_theory(method):
    # Normal errors, no outliers, n = 20 000 so the bootstrap runs on m < n points and scales.
    # Hand theory (OLS): Sxx = sum (w - wbar)^2; SE(b) = sigma / sqrt(Sxx); SE(a) = sigma sqrt(1/n + wbar^2/Sxx);
    # Cov(a, b) = -sigma^2 wbar / Sxx. Theil-Sen has asymptotic efficiency about 0.91 under normal
    # errors and Huber (c = 1.345) about 0.95 (recalled), so SEs are 2-5 % above OLS; the bootstrap
    # with 200 replicates has about 5 % noise of its own. Accept 0.8-1.4 x OLS.
    sigma = 0.1
    w, d, _ = _synthetic(20_000, 0.1, 0.6, sigma, seed=2)
    sxx = np.sum((w - w.mean()) ** 2)
    se_b = sigma / math.sqrt(sxx)
    se_a = sigma * math.sqrt(1 / w.size + w.mean() ** 2 / sxx)
    cov = -(sigma**2) * w.mean() / sxx
    m = wt.fit_depth_model(w, d, method=method, n_boot=200, seed=4)
    assert 0.8 < m.slope_se / se_b < 1.4
    assert 0.8 < m.intercept_se / se_a < 1.4
    assert 0.6 < m.covariance / cov < 1.6  # same (negative) sign, similar size
    assert "pixel bootstrap" in m.se_method and "scaled" in m.se_method
    assert any("independent pixels" in n for n in m.notes)


def test_cluster_bootstrap_widens_the_errors_of_correlated_scars():
    # 40 scars, each with its own mean water table and its own random depth offset (sd 0.1 m): the
    # pixels of a scar are not independent, so the pixel bootstrap is overconfident. By hand, the slope
    # is identified between scars: SE ~ 0.1 / (sd of scar means 0.26 x sqrt(40)) = 0.06, while the
    # pixel SE is ~ 0.05 / sqrt(40 x 150 x 0.08) ~ 0.002.
    rng = np.random.default_rng(9)
    k, per = 40, 150
    means = rng.uniform(0.3, 1.2, k)
    offsets = rng.normal(0, 0.1, k)
    scar = np.repeat(np.arange(k), per)
    w = means[scar] + rng.normal(0, 0.1, k * per)
    d = 0.1 + 0.6 * w + offsets[scar] + rng.normal(0, 0.05, k * per)
    pixel = wt.fit_depth_model(w, d, n_boot=100, seed=1)
    clus = wt.fit_depth_model(w, d, n_boot=100, seed=1, cluster=scar)
    assert clus.n_clusters == 40 and "cluster bootstrap over 40 scars" in clus.se_method
    assert clus.slope_se > 3 * pixel.slope_se
    assert 0.02 < clus.slope_se < 0.15


def test_fit_is_deterministic_for_a_seed():
    w, d, _ = _synthetic(3000, 0.1, 0.6, 0.08, seed=1)
    a = wt.fit_depth_model(w, d, seed=7, n_boot=30)
    b = wt.fit_depth_model(w, d, seed=7, n_boot=30)
    assert a == b


def test_fit_subsamples_above_max_samples_and_says_so():
    w, d, _ = _synthetic(3000, 0.1, 0.6, 0.05, seed=1)
    m = wt.fit_depth_model(w, d, max_samples=1000, n_boot=0)
    assert m.n == 1000
    assert any("random sample of 1000 of 3000" in n for n in m.notes)
    assert m.slope == pytest.approx(0.6, abs=0.03)


def test_fit_ignores_nan_pairs():
    w, d, _ = _synthetic(500, 0.1, 0.6, 0.05, seed=1)
    w[:50] = np.nan
    d[50:100] = np.nan
    m = wt.fit_depth_model(w, d, n_boot=0)
    assert m.n == 400


def test_fit_refuses_too_few_pairs_and_constant_water_table():
    with pytest.raises(GridError, match="only 3"):
        wt.fit_depth_model([0.5, 0.6, np.nan, 0.7], [0.1, 0.2, 0.3, 0.3])
    with pytest.raises(GridError, match="same water table"):
        wt.fit_depth_model([0.5] * 10, np.linspace(0, 1, 10))
    with pytest.raises(GridError, match="same pixels"):
        wt.fit_depth_model([0.5] * 10, [0.1] * 9)
    with pytest.raises(PhysicalRangeError, match="unknown method"):
        wt.fit_depth_model(np.linspace(0, 1, 10), np.linspace(0, 1, 10), method="ols")
    assert issubclass(GridError, PeatburnError)


def test_fit_notes_narrow_range_few_samples_and_negative_slope():
    rng = np.random.default_rng(0)
    w = rng.uniform(0.5, 0.6, 20)  # a 0.1 m range, 20 pairs
    d = 0.5 - 0.8 * w + rng.normal(0, 0.01, 20)  # slope -0.8
    m = wt.fit_depth_model(w, d, n_boot=20)
    text = " ".join(m.notes)
    assert "few samples (20)" in text
    assert "spans only" in text
    assert "negative" in text


def test_fit_on_field_plots_with_few_points():
    # 12 plots on an exact line d = 0.05 + 0.5 w: Theil-Sen reproduces it exactly (all pairwise slopes 0.5).
    w = np.linspace(0.3, 1.4, 12)
    d = 0.05 + 0.5 * w
    m = wt.fit_depth_model(w, d, n_boot=50)
    assert m.slope == pytest.approx(0.5, abs=1e-12)
    assert m.intercept == pytest.approx(0.05, abs=1e-12)
    assert m.rmse == pytest.approx(0.0, abs=1e-12)


def test_grouped_fits_separate_first_and_repeat_fires():
    rng = np.random.default_rng(12)
    n = 3000
    count = np.where(rng.random(n) < 0.5, 1, 2)
    w = rng.uniform(0.2, 1.4, n)
    # truth: first fires d = 0.0 + 0.4 w, repeat fires d = 0.1 + 0.8 w
    d = np.where(count == 1, 0.4 * w, 0.1 + 0.8 * w) + rng.normal(0, 0.05, n)
    models = wt.fit_depth_models_by_group(w, d, count, n_boot=0)
    assert models[1].slope == pytest.approx(0.4, abs=0.02)
    assert models[2].slope == pytest.approx(0.8, abs=0.02)
    assert models[2].intercept == pytest.approx(0.1, abs=0.02)
    assert "pooled" in models
    # predictions per pixel at w = 1: 0.4 and 0.9
    got = wt.predict_depth_grouped({1: models[1], 2: models[2]}, [1, 2], [1.0, 1.0])
    np.testing.assert_allclose(got, [0.4, 0.9], atol=0.03)


def test_grouped_fit_falls_back_to_pooled_for_a_small_group():
    rng = np.random.default_rng(1)
    w = rng.uniform(0.2, 1.4, 1000)
    d = 0.5 * w + rng.normal(0, 0.05, 1000)
    count = np.ones(1000)
    count[:50] = 2  # 50 repeat-fire pixels < min_n 200
    models = wt.fit_depth_models_by_group(w, d, count, n_boot=0)
    assert models[2.0].method == "pooled"
    assert models[2.0].slope == models["pooled"].slope
    assert any("50 pairs" in n for n in models[2.0].notes)
    assert models[1.0].method == "theil-sen"


# --------------------------------------------------------------------------- checks


def test_check_water_table_accepts_plausible_depths():
    assert wt.check_water_table(np.array([0.2, 0.5, 0.9, 1.3, np.nan]), "depth.water_table.depth") == []


def test_check_water_table_refuses_the_opposite_sign_convention():
    # dipwell style: groundwater level negative below the surface (e.g. -0.3 m = 30 cm below)
    with pytest.raises(PhysicalRangeError, match=r"stations\.csv.*negative.*multiply the values by -1"):
        wt.check_water_table(-np.array([0.3, 0.5, 0.8, 1.1]), "stations.csv")


def test_check_water_table_refuses_centimetres_and_nodata_values():
    with pytest.raises(PhysicalRangeError, match=r"wt\.tif.*centimetres"):
        wt.check_water_table(np.array([30.0, 55.0, 80.0]), "wt.tif")
    with pytest.raises(PhysicalRangeError, match=r"-9999.*nodata"):
        wt.check_water_table(np.array([0.4, 0.6, -9999.0]), "wt.tif")


def test_check_water_table_warns_about_some_negatives_and_deep_values():
    v = np.array([0.5] * 8 + [-0.2, 4.0])  # 10 % above the surface, one 4 m deep
    warnings = wt.check_water_table(v, "wt.tif")
    assert any("10% of the water-table values are negative" in w for w in warnings)
    assert any("deeper than 3 m" in w and "wt.tif" in w for w in warnings)
    assert wt.check_water_table(np.full(4, np.nan), "wt.tif") == ["wt.tif: no valid water-table value (all nodata)"]


# --------------------------------------------------------------------------- IDW


def _idw_brute_force(xs, ys, vs, x, y, power):
    """Shepard (1968) weights over all stations, written out directly."""
    out = []
    for px, py in zip(x, y):
        dist = np.hypot(xs - px, ys - py)
        if np.any(dist == 0):
            out.append(vs[dist == 0].mean())
            continue
        wts = 1.0 / dist**power
        out.append(np.sum(wts * vs) / np.sum(wts))
    return np.array(out)


def test_idw_hand_arithmetic():
    # stations (0,0) v=1 and (3,0) v=4; target (1,0): distances 1 and 2, weights 1 and 1/4
    # -> (1 x 1 + 0.25 x 4) / 1.25 = 1.6. Midpoint (1.5, 0): equal weights -> 2.5. At a station: its value.
    got = wt.idw([0, 3], [0, 0], [1, 4], [1, 1.5, 3], [0, 0, 0])
    np.testing.assert_allclose(got, [1.6, 2.5, 4.0], atol=1e-12)


def test_idw_matches_brute_force_with_all_neighbours():
    rng = np.random.default_rng(4)
    xs, ys, vs = rng.uniform(0, 1000, 30), rng.uniform(0, 1000, 30), rng.uniform(0.2, 1.5, 30)
    x, y = rng.uniform(-100, 1100, 200), rng.uniform(-100, 1100, 200)
    got = wt.idw(xs, ys, vs, x, y, power=2.0, k=30)
    np.testing.assert_allclose(got, _idw_brute_force(xs, ys, vs, x, y, 2.0), rtol=1e-12)
    got3 = wt.idw(xs, ys, vs, x, y, power=3.0, k=100)  # k above the station count: all stations
    np.testing.assert_allclose(got3, _idw_brute_force(xs, ys, vs, x, y, 3.0), rtol=1e-12)


def test_idw_uses_only_the_k_nearest():
    # stations at x = 0, 1, 10 with values 0, 1, 100; target x = 0.25, k = 2: only the first two count.
    # distances 0.25, 0.75 -> weights 16, 16/9 -> (0 + 16/9) / (16 + 16/9) = 1/10 = 0.1
    got = wt.idw([0, 1, 10], [0, 0, 0], [0, 1, 100], [0.25], [0], k=2)
    assert got[0] == pytest.approx(0.1, abs=1e-12)


def test_idw_max_distance_gives_nan_far_from_stations_and_keeps_shape():
    got = wt.idw([0.0], [0.0], [0.7], np.array([[10.0, 500.0]]), np.array([[0.0, 0.0]]), max_distance=100.0)
    assert got.shape == (1, 2)
    assert got[0, 0] == pytest.approx(0.7) and np.isnan(got[0, 1])


def test_idw_averages_duplicate_stations_and_ignores_nan_stations():
    # two readings at (0,0): 0.4 and 0.6 -> 0.5 there; a NaN station is ignored
    got = wt.idw([0, 0, 5], [0, 0, 5], [0.4, 0.6, np.nan], [0.0, 2.0], [0.0, 2.0])
    np.testing.assert_allclose(got, [0.5, 0.5], atol=1e-12)
    assert np.isnan(wt.idw([], [], [], [1.0], [1.0])).all()


@settings(max_examples=40, deadline=None)
@given(st.lists(st.floats(0.0, 2.0), min_size=2, max_size=8), st.floats(-50, 50), st.floats(-50, 50))
def test_idw_stays_within_the_station_values(values, px, py):
    # a convex combination: never below the smallest nor above the largest station value
    n = len(values)
    xs = np.arange(n) * 7.0
    ys = (np.arange(n) % 3) * 5.0
    got = float(wt.idw(xs, ys, values, px, py))
    assert min(values) - 1e-12 <= got <= max(values) + 1e-12


def test_idw_cross_validation_hand_arithmetic():
    # stations on a line at x = 0, 1, 2 with values 0, 1, 4; each predicted from the other two:
    # x0: d 1 (v 1, w 1), d 2 (v 4, w 1/4) -> 2 / 1.25 = 1.6, error +1.6
    # x1: d 1, d 1 -> (0 + 4) / 2 = 2, error +1
    # x2: d 2 (v 0, w 1/4), d 1 (v 1, w 1) -> 1 / 1.25 = 0.8, error -3.2
    # bias = (1.6 + 1 - 3.2) / 3 = -0.2; RMSE = sqrt((2.56 + 1 + 10.24) / 3) = sqrt(4.6); MAE = 5.8 / 3
    cv = wt.idw_cross_validation([0, 1, 2], [0, 0, 0], [0, 1, 4])
    np.testing.assert_allclose(cv["predicted"], [1.6, 2.0, 0.8], atol=1e-12)
    assert cv["n"] == 3
    assert cv["bias"] == pytest.approx(-0.2, abs=1e-12)
    assert cv["rmse"] == pytest.approx(math.sqrt(4.6), abs=1e-12)
    assert cv["mae"] == pytest.approx(5.8 / 3, abs=1e-12)


def test_readings_near_date_picks_one_per_station():
    # station A: days 10, 18, 25 -> target 20: gaps 10, 2, 5 -> day 18.
    # station B: days 19 and 21, tie (gap 1) -> the earlier (19). station C: day 40, gap 20 > 7 -> none.
    st_ = ["A", "A", "A", "B", "B", "C"]
    day = [10, 18, 25, 21, 19, 40]
    got = wt.readings_near_date(st_, day, 20.0, max_days=7)
    assert got.tolist() == [False, True, False, False, True, False]


# --------------------------------------------------------------------------- validation


def test_validate_against_plots_hand_arithmetic():
    # errors (pred - obs): 0.1, -0.3, 0.2 (the NaN pair is left out)
    # bias = 0.0 / 3 = 0; RMSE = sqrt((0.01 + 0.09 + 0.04) / 3) = sqrt(0.14 / 3); MAE = 0.6 / 3 = 0.2
    got = wt.validate_against_plots([0.5, 0.2, 0.9, np.nan], [0.4, 0.5, 0.7, 0.3])
    assert got["n"] == 3
    assert got["bias"] == pytest.approx(0.0, abs=1e-12)
    assert got["rmse"] == pytest.approx(math.sqrt(0.14 / 3), abs=1e-12)
    assert got["mae"] == pytest.approx(0.2, abs=1e-12)
    assert got["mean_observed"] == pytest.approx((0.4 + 0.5 + 0.7) / 3, abs=1e-12)
    empty = wt.validate_against_plots([np.nan], [0.2])
    assert empty["n"] == 0 and math.isnan(empty["rmse"])
