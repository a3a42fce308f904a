"""Area-averaged error (peatburn.science.uncertainty.averaging): the Rolstad et al. 2009 spherical
averaging (J. Glaciol. 55:666) and the residual bias after co-registration, checked against
scipy's integration, exact pixel sums, simulated fields and hand arithmetic (named beside each)."""

import math

import numpy as np
import pytest
import scipy.integrate

from peatburn.errors import PhysicalRangeError
from peatburn.science import uncertainty as u
from peatburn.science import variogram as vg


def _sph_cov(h, a):
    """Spherical correlation written out (Cressie 1993 §2.3.1): 1 - 1.5 h/a + 0.5 (h/a)^3 below a."""
    x = np.minimum(np.asarray(h, float) / a, 1.0)
    return 1.0 - 1.5 * x + 0.5 * x**3


# ----------------------------------------------------------------------------- correlated_sum_sd


def test_rolstad_large_area_by_hand():
    # Rolstad et al. 2009, L > a: sigma_A = sigma sqrt(pi a^2 / (5 A)).
    # sigma 0.2 m, a 100 m, A 1 km2: pi * 1e4 / 5e6 = 0.00628319, sqrt = 0.0792665, x 0.2 = 0.0158533
    assert u.correlated_sum_sd(0.2, 100.0, 1e6) == pytest.approx(0.0158533, rel=1e-5)


def test_rolstad_small_area_by_hand():
    # L <= a: sigma_A^2 = sigma^2 (1 - L/a + L^3/(5 a^3)); L = 50, a = 100 (A = pi 2500):
    # 1 - 0.5 + 0.125/5 = 0.525, sqrt = 0.724569
    assert u.correlated_sum_sd(1.0, 100.0, math.pi * 50.0**2) == pytest.approx(0.724569, rel=1e-5)
    # continuous at L = a: both branches give 1/5 -> sqrt 0.447214
    a = 100.0
    below = u.correlated_sum_sd(1.0, a, math.pi * a**2 * (1 - 1e-12))
    above = u.correlated_sum_sd(1.0, a, math.pi * a**2 * (1 + 1e-12))
    assert below == pytest.approx(0.447214, rel=1e-5) and above == pytest.approx(0.447214, rel=1e-5)
    # no area: the error of one point, sigma
    assert u.correlated_sum_sd(0.3, 100.0, 0.0) == pytest.approx(0.3)


@pytest.mark.parametrize("radius", [20.0, 60.0, 100.0, 250.0, 1000.0])
def test_rolstad_equals_the_centre_to_disc_integral(radius):
    """Rolstad's construction: the spherical covariance averaged over a disc from its centre,
    (2/L^2) int_0^L C(r) r dr, integrated here with scipy.integrate.quad."""
    a = 100.0
    ref, _ = scipy.integrate.quad(lambda r: _sph_cov(r, a) * r, 0.0, radius, points=[a] if radius > a else None)
    ref = 2.0 / radius**2 * ref
    assert u.correlated_sum_sd(1.0, a, math.pi * radius**2) ** 2 == pytest.approx(ref, rel=1e-8)


def test_rolstad_bounds_the_exact_variance_of_a_square_zone():
    """Exact variance of the mean of a correlated error over a square of n x n pixels, from the
    definition (1/N^2) sum_i sum_j C(|x_i - x_j|) = (1/N^2) sum_{dx,dy} (n-|dx|)(n-|dy|) C(h):
    Rolstad's value is an upper bound (docs: Riesz rearrangement) and close for zones much
    larger than the range."""
    a_px, n = 10.0, 60
    d = np.arange(-(n - 1), n)
    w = (n - np.abs(d))[:, None] * (n - np.abs(d))[None, :]
    exact = np.sum(w * _sph_cov(np.hypot(d[:, None], d[None, :]), a_px)) / n**4
    rolstad = u.correlated_sum_sd(1.0, a_px, float(n * n)) ** 2
    assert exact <= rolstad
    assert exact / rolstad > 0.85


def test_nugget_shrinks_like_one_over_sqrt_n_and_correlation_does_not():
    # all nugget: sigma / sqrt(n); sigma 0.2, n = 1e4 pixels of 1 m2 -> 0.002 (hand)
    assert u.correlated_sum_sd(0.2, 100.0, 1e4, nugget_fraction=1.0, pixel_area_m2=1.0) == pytest.approx(0.002)
    # correlated over 1 km2 with 1 m2 pixels: ratio to the independent value is
    # sqrt(pi a^2 / 5 / pixel) = sqrt(6283.19) = 79.27 (hand): no 1/sqrt(n) shrinkage
    corr = u.correlated_sum_sd(0.2, 100.0, 1e6)
    iid = u.correlated_sum_sd(0.2, 100.0, 1e6, nugget_fraction=1.0, pixel_area_m2=1.0)
    assert corr / iid == pytest.approx(79.27, rel=1e-3)
    # half nugget: variances add, 0.5 * 0.00628319 + 0.5 * 1e-6 (hand) for sigma = 1
    half = u.correlated_sum_sd(1.0, 100.0, 1e6, nugget_fraction=0.5, pixel_area_m2=1.0)
    assert half**2 == pytest.approx(0.5 * 0.00628319 + 0.5e-6, rel=1e-5)


def test_correlated_sum_sd_refuses_bad_input():
    with pytest.raises(PhysicalRangeError):
        u.correlated_sum_sd(0.1, 0.0, 1e4)
    with pytest.raises(PhysicalRangeError):
        u.correlated_sum_sd(0.1, 100.0, 1e4, nugget_fraction=0.5)  # pixel area missing
    with pytest.raises(PhysicalRangeError):
        u.correlated_sum_sd(-0.1, 100.0, 1e4)


def test_residual_bias_sd_median_factors():
    # independent errors: the sample median's sd is sqrt(pi/2) = 1.253314 times the mean's (textbook);
    # checked against numpy: medians of 2000 sets of 1001 normal draws
    assert u.MEDIAN_EFFICIENCY_FACTOR == pytest.approx(1.253314, rel=1e-6)
    rng = np.random.default_rng(0)
    med_sd = np.median(rng.normal(size=(2000, 1001)), axis=1).std()
    assert med_sd == pytest.approx(1.253314 / math.sqrt(1001), rel=0.05)
    iid = u.residual_bias_sd(1.0, 1.0, 1001.0, nugget_fraction=1.0, pixel_area_m2=1.0)
    assert iid == pytest.approx(1.253314 / math.sqrt(1001), rel=1e-6)
    # mean estimator: exactly correlated_sum_sd
    assert u.residual_bias_sd(0.15, 100.0, 2.4576e6, estimator="mean") == pytest.approx(
        u.correlated_sum_sd(0.15, 100.0, 2.4576e6))


def test_residual_bias_sd_of_the_median_of_correlated_fields():
    """Simulated: the spread of the median of a spherical-correlated field over a 128 x 128 px
    stable area (10 m pixels, a = 100 m) against residual_bias_sd(..., "median")."""
    meds = [np.median(vg.simulate_spherical_field((128, 128), 10.0, 1.0, 100.0, seed=s)) for s in range(400)]
    pred = u.residual_bias_sd(1.0, 100.0, 128 * 128 * 100.0)
    # 400 samples: the sd estimate has a relative standard error of about 1/sqrt(800) = 3.5 %
    assert np.std(meds) == pytest.approx(pred, rel=0.12)
