"""Survey differencing, error and detection, checked against independent references."""

import math

import numpy as np
import pytest
import scipy.stats
from hypothesis import given, settings
from hypothesis import strategies as st

from peatburn.science import survey


def test_nmad_matches_scipy_normal_scaled_mad():
    # reference: scipy.stats.median_abs_deviation(scale="normal") is the same estimator
    # (Höhle & Höhle 2009, Eq. 2) from an independent library.
    rng = np.random.default_rng(1)
    x = rng.normal(0.2, 0.07, 20_000)
    x[:50] = 40.0  # gross outliers (canal edges, vegetation) barely move a robust spread
    assert survey.nmad(x) == pytest.approx(scipy.stats.median_abs_deviation(x, scale="normal"), rel=1e-3)


def test_nmad_constant_is_inverse_normal_quartile():
    # 1 / Phi^-1(0.75) from scipy's normal distribution (Höhle & Höhle 2009)
    assert survey.NMAD_CONSTANT == pytest.approx(1 / scipy.stats.norm.ppf(0.75), abs=5e-5)


def test_propagated_error_and_lod_hand_arithmetic():
    # Lane et al. 2003 / Wheaton et al. 2010 Eq. 3: LoD = t * sqrt(s1^2 + s2^2);
    # s1 = 0.3, s2 = 0.4 -> 0.5 (3-4-5 triangle); t = 1.96 -> 0.98
    s = survey.propagated_error(0.3, 0.4)
    assert s == pytest.approx(0.5)
    assert survey.level_of_detection(s) == pytest.approx(0.98)


def test_subsidence_lowering():
    # 4 cm/yr over 3 yr is 0.12 m (hand arithmetic)
    assert survey.subsidence_lowering(0.04, 3.0) == pytest.approx(0.12)


def test_burn_depth_removes_subsidence_and_caps():
    pre = np.array([10.0, 10.0, 10.0, np.nan])
    post = np.array([9.5, 9.9, 10.05, 9.0])
    d = survey.burn_depth(pre, post, subsidence=0.1, thickness=np.array([2.0, 2.0, 2.0, 2.0]))
    # 0.5-0.1 = 0.4; 0.1-0.1 = 0; -0.05-0.1 = -0.15 (kept: unbiased); NaN stays NaN
    np.testing.assert_allclose(d[:3], [0.4, 0.0, -0.15], atol=1e-12)
    assert np.isnan(d[3])
    capped = survey.burn_depth(np.array([10.0]), np.array([8.0]), thickness=np.array([0.7]))
    assert capped[0] == pytest.approx(0.7)


def test_unbiased_sum_versus_clipping():
    """The zone sum of the estimator stays unbiased over unburned islands and thin burns, while
    clipping at zero adds sigma/sqrt(2*pi) per pixel: the mean of a half-normal (a textbook
    property of the normal distribution, e.g. scipy.stats.halfnorm.mean() = sqrt(2/pi))."""
    rng = np.random.default_rng(7)
    n, sigma = 200_000, 0.08
    true = np.where(rng.random(n) < 0.5, 0.0, 0.03)  # islands and a 3 cm thin burn
    pre = np.full(n, 10.0)
    post = pre - true + rng.normal(0, sigma, n)
    d = survey.burn_depth(pre, post)
    # standard error of the mean is sigma/sqrt(n) = 1.8e-4 m: 5 standard errors
    assert abs(d.mean() - true.mean()) < 5 * sigma / math.sqrt(n)
    clipped = np.maximum(d, 0).mean() - true.mean()
    assert clipped > 0.02  # the bias the design avoids (about 0.025 m here)
    # at true depth 0 the clipping bias is exactly the half-normal mean times 0.5 probability mass:
    zero = true == 0
    assert np.maximum(d[zero], 0).mean() == pytest.approx(
        sigma * scipy.stats.halfnorm.mean() / 2, rel=0.03)


@settings(max_examples=60, deadline=None)
@given(st.lists(st.floats(-3, 3), min_size=1, max_size=30), st.floats(0.0, 2.0))
def test_depth_never_exceeds_thickness(lowering, thickness):
    lowering = np.array(lowering)
    d = survey.burn_depth(np.full_like(lowering, 5.0), 5.0 - lowering, thickness=np.full_like(lowering, thickness))
    assert np.all(d <= thickness + 1e-12)


def test_below_detection():
    assert survey.below_detection(np.array([0.05, -0.2, np.nan]), 0.1).tolist() == [True, False, False]


def test_outliers_flag_spoil_banks_and_canals_not_noise():
    """Synthetic truth: a burn of 0.4 m on 4 m of peat with noise (sd 0.05, LoD 0.098 m), plus a spoil
    bank (ground raised 1.5 m) and a canal (water 6 m below the old surface, deeper than the peat)."""
    rng = np.random.default_rng(3)
    lod = 1.96 * 0.05
    d = 0.4 + rng.normal(0, 0.05, 1000)
    d[:10] = -1.5
    d[10:20] = 6.0
    flag = survey.outliers(d, lod, thickness=np.full(1000, 4.0))
    assert flag[:20].all()
    assert not flag[20:].any()  # 5 LoD = 10 sd: noise never reaches it
    assert not survey.outliers(d, float("nan")).any()  # no LoD (no survey QA): nothing flagged


def test_burn_depth_cap_uses_the_tolerance():
    d = survey.burn_depth(np.array([10.0, 10.0]), np.array([9.65, 9.0]), 0.0, thickness=0.3, tolerance=0.1)
    np.testing.assert_allclose(d, [0.35, 0.3])
