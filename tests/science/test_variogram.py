"""Empirical semivariogram, spherical fit and the correlated-field simulator, checked against
hand arithmetic on the spherical formula (Cressie 1993 §2.3.1; Rolstad et al. 2009) and against
covariances computed directly with numpy."""

import numpy as np
import pytest

from peatburn.errors import GridError, PeatburnError, PhysicalRangeError
from peatburn.science import variogram as vg


def test_spherical_model_hand_values():
    # gamma(h) = c0 + c1 (1.5 h/a - 0.5 (h/a)^3) for 0 < h <= a, sill beyond, 0 at 0 (Cressie 1993).
    # a = 100, nugget 0.1, sill 1.1 (partial sill 1): h = 50 -> 0.1 + (0.75 - 0.0625) = 0.7875;
    # h = 20 -> 0.1 + (0.3 - 0.004) = 0.396; h = 100 and 250 -> 1.1; h = 0 -> 0.
    g = vg.spherical_variogram([0.0, 20.0, 50.0, 100.0, 250.0], 0.1, 1.1, 100.0)
    np.testing.assert_allclose(g, [0.0, 0.396, 0.7875, 1.1, 1.1], atol=1e-12)
    # covariance = sill - gamma: at h = 50 with no nugget, 1 - 0.6875 = 0.3125
    assert vg.spherical_covariance(50.0, 1.0, 100.0) == pytest.approx(0.3125)


def test_simulated_field_has_the_spherical_covariance():
    """Covariances at pixel lags, averaged over independent fields with numpy products, against the
    spherical covariance by hand: rho(r) = 1 - 1.5 r + 0.5 r^3 with r = h/a:
    r = 0.2 -> 0.704; r = 0.5 -> 0.3125; r = 0.8 -> 0.056; r >= 1 -> 0."""
    fields = [vg.simulate_spherical_field((96, 96), 10.0, 1.0, 100.0, seed=s) for s in range(40)]
    expected = {0: 1.0, 2: 0.704, 5: 0.3125, 8: 0.056, 12: 0.0}
    for lag, rho in expected.items():
        cx = np.mean([np.mean(f[:, : 96 - lag] * f[:, lag:]) for f in fields])  # along rows
        cy = np.mean([np.mean(f[: 96 - lag, :] * f[lag:, :]) for f in fields])  # along columns
        assert cx == pytest.approx(rho, abs=0.035), lag
        assert cy == pytest.approx(rho, abs=0.035), lag


def test_simulated_nugget_adds_uncorrelated_variance():
    # nugget fraction 0.5: variance 1 at lag 0, half the spherical correlation at lag 5 px
    # (0.5 * 0.3125 = 0.156, hand arithmetic)
    fields = [vg.simulate_spherical_field((96, 96), 10.0, 1.0, 100.0, nugget_fraction=0.5, seed=s) for s in range(40)]
    c0 = np.mean([np.mean(f * f) for f in fields])
    c5 = np.mean([np.mean(f[:, :91] * f[:, 5:]) for f in fields])
    assert c0 == pytest.approx(1.0, abs=0.04)
    assert c5 == pytest.approx(0.156, abs=0.035)


def test_integer_lags_of_a_linear_trend_by_hand():
    """Points 1 m apart on a line with v = 0.01 x: every pair at lag k has (v_i - v_j)^2 = (0.01 k)^2,
    so gamma(k) = 0.5e-4 k^2 exactly (Matheron's estimator, Cressie 1993 Eq. 2.4.2), in bin (k-1, k]."""
    x = np.arange(200.0)
    y = np.zeros_like(x)
    lags, gamma, counts = vg.empirical_variogram(x, y, 0.01 * x, max_lag=20.0, n_lags=20, max_pairs=100_000, seed=3)
    k = np.arange(1, 21)
    assert np.all(counts > 0)
    assert counts.sum() <= 100_000
    np.testing.assert_allclose(lags, k, rtol=1e-12)
    np.testing.assert_allclose(gamma, 0.5e-4 * k**2, rtol=1e-9)


def test_white_noise_is_flat_at_its_variance():
    # independent errors: gamma(h) = sigma^2 at every lag (Cressie 1993 §2.3); sigma = 0.2 -> 0.04
    rng = np.random.default_rng(5)
    yy, xx = np.mgrid[0:150, 0:150]
    v = rng.normal(0.0, 0.2, xx.shape)
    for est in ("matheron", "dowd"):
        lags, gamma, counts = vg.empirical_variogram(xx * 5.0, yy * 5.0, v, max_lag=200.0, n_lags=10,
                                                     max_pairs=100_000, seed=1, estimator=est)
        assert np.all(counts > 3000)
        np.testing.assert_allclose(gamma, 0.04, rtol=0.08)


def test_fit_recovers_a_noise_free_model():
    # gamma from the formula by hand (nugget 0.002, sill 0.0225, range 120 m) must be fitted exactly
    h = np.linspace(10.0, 400.0, 25)
    r = np.minimum(h / 120.0, 1.0)
    g = 0.002 + 0.0205 * (1.5 * r - 0.5 * r**3)
    fit = vg.fit_spherical(h, g, np.full(h.size, 1000))
    assert fit["nugget"] == pytest.approx(0.002, rel=1e-4)
    assert fit["sill"] == pytest.approx(0.0225, rel=1e-4)
    assert fit["partial_sill"] == pytest.approx(0.0205, rel=1e-4)
    assert fit["range_m"] == pytest.approx(120.0, rel=1e-4)


def test_fit_on_simulated_fields_recovers_sill_and_range():
    yy, xx = np.mgrid[0:200, 0:200]
    ranges, sills = [], []
    for s in range(4):
        f = vg.simulate_spherical_field((200, 200), 10.0, 0.15, 100.0, seed=100 + s)
        lags, g, c = vg.empirical_variogram(xx * 10.0, yy * 10.0, f, max_lag=300.0, n_lags=15, max_pairs=40_000, seed=s)
        fit = vg.fit_spherical(lags, g, c)
        ranges.append(fit["range_m"])
        sills.append(fit["sill"])
    assert np.mean(ranges) == pytest.approx(100.0, rel=0.12)
    assert np.mean(sills) == pytest.approx(0.15**2, rel=0.12)


def test_seed_reproducible_and_nan_dropped():
    rng = np.random.default_rng(2)
    x, y = rng.uniform(0, 1000, 3000), rng.uniform(0, 1000, 3000)
    v = rng.normal(size=3000)
    a = vg.empirical_variogram(x, y, v, max_lag=300, n_lags=6, max_pairs=5000, seed=9)
    b = vg.empirical_variogram(x, y, v, max_lag=300, n_lags=6, max_pairs=5000, seed=9)
    c = vg.empirical_variogram(x, y, v, max_lag=300, n_lags=6, max_pairs=5000, seed=10)
    for u, w in zip(a, b):
        np.testing.assert_array_equal(u, w)
    assert not np.array_equal(a[1], c[1])
    v2 = v.copy()
    v2[:10] = np.nan
    lags, gamma, counts = vg.empirical_variogram(x, y, v2, max_lag=300, n_lags=6, max_pairs=5000, seed=9)
    assert np.all(np.isfinite(gamma))


def test_errors_are_peatburn_errors():
    with pytest.raises(GridError):
        vg.empirical_variogram([0.0], [0.0], [1.0], max_lag=10.0)
    with pytest.raises(PhysicalRangeError):
        vg.empirical_variogram([0.0, 1.0], [0.0, 0.0], [1.0, 2.0], max_lag=0.0)
    with pytest.raises(PeatburnError):
        vg.empirical_variogram([0.0, 1.0], [0.0, 0.0], [1.0, 2.0], max_lag=5.0, estimator="cressie")
    with pytest.raises(GridError):
        vg.fit_spherical([10.0, 20.0], [0.1, 0.2], [5, 5])
    with pytest.raises(PhysicalRangeError):
        vg.simulate_spherical_field((10, 10), 1.0, 1.0, -5.0)


def test_two_range_fit_recovers_a_known_sum():
    """Noise-free sum of a nugget and two spherical models (hand formula, Cressie 1993 §2.3.1):
    the fit returns its parameters."""
    h = np.linspace(5.0, 1500.0, 60)

    def sph(hh, a):
        r = np.minimum(hh / a, 1.0)
        return 1.5 * r - 0.5 * r**3

    g = 0.002 + 0.010 * sph(h, 40.0) + 0.004 * sph(h, 600.0)
    nug, short, long_ = vg.fit_spherical_sum(h, g, np.full(h.size, 1000))
    assert nug["nugget"] == pytest.approx(0.002, abs=3e-4)
    assert short["partial_sill"] == pytest.approx(0.010, rel=0.05)
    assert short["range_m"] == pytest.approx(40.0, rel=0.1)
    assert long_["partial_sill"] == pytest.approx(0.004, rel=0.05)
    assert long_["range_m"] == pytest.approx(600.0, rel=0.05)
