"""Sum and trend of a series from joint draws (peatburn.science.trend), and the joint draws of the
zone-level model with common random numbers for shared sources, checked against the analytic
limits: fully correlated years (only shared factors) and independent years (only each year's own
errors). Expected values from hand arithmetic and scipy.stats."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from peatburn.science import trend


def test_sum_and_trend_by_hand():
    d = np.array([[100.0, 200.0], [150.0, 100.0]])
    np.testing.assert_allclose(trend.sum_draws(d), [250.0, 300.0])
    # IPCC 2006 Vol. 1 Ch. 3: trend = (E_t - E_0) / E_0 x 100: (150 - 100) / 100 = +50 %, (100 - 200) / 200 = -50 %
    np.testing.assert_allclose(trend.trend_draws(d[0], d[1]), [50.0, -50.0])
    assert math.isnan(trend.trend_draws(np.array([0.0]), np.array([1.0]))[0])


def test_decorrelate_keeps_each_year_and_removes_the_correlation():
    rng = np.random.default_rng(5)
    a = rng.standard_normal(20000)
    d = np.stack([a, 2 * a + 1])  # fully correlated years
    ind = trend.decorrelate(d, seed=1)
    np.testing.assert_array_equal(np.sort(ind, axis=1), np.sort(d, axis=1))  # marginals unchanged
    r = trend.correlation(ind)[0, 1]
    assert abs(r) < 4 / math.sqrt(20000)  # sampling sd of r under independence is 1/sqrt(n)
    assert trend.correlation(d)[0, 1] == pytest.approx(1.0)


def test_interval_of_normal_draws_matches_scipy():
    d = np.random.default_rng(2).normal(10.0, 2.0, 200_000)
    lo, hi = trend.interval(d)
    assert lo == pytest.approx(stats.norm.ppf(0.025, 10, 2), abs=0.03)
    assert hi == pytest.approx(stats.norm.ppf(0.975, 10, 2), abs=0.03)


# --- joint draws of two years' totals from the zone-level model ------------------------------------

DRAWS = 40_000


def _year(carbon_kg, rho_f_area):
    """A year's total as model sums: survey pixels only, peat 2 x carbon (f = 0.5)."""
    return {"area_m2_survey": np.array([1e4]), "volume_m3": np.array([carbon_kg / 50.0]),
            "peat_kg": np.array([2 * carbon_kg]), "carbon_kg": np.array([carbon_kg]),
            "rho_area_survey": np.array([2 * rho_f_area]), "rho_f_area_survey": np.array([rho_f_area])}


def _joint(params, shared, seeds=(1, 99)):
    from peatburn.science.uncertainty import draw_zone_totals

    years = [_year(1000.0, 2000.0), _year(1500.0, 3000.0)]
    return np.stack([draw_zone_totals(y, params, draws=DRAWS, seed=s, group_seeds={g: 1 for g in shared})
                     ["carbon_kg"][:, 0] for y, s in zip(years, seeds)])


def test_fully_correlated_limit_shared_carbon_fraction():
    """Only a shared multiplicative factor (carbon fraction, lognormal mean 1, CV c): every draw of
    year 2 is 1.5 x year 1's, so the trend is exactly +50 % in every draw, and the sum's interval is
    2500 x the lognormal's 2.5 / 97.5 % quantiles (scipy.stats.lognorm with s^2 = ln(1 + c^2))."""
    c = 0.1
    d = _joint({"carbon_fraction_cv": c}, shared={"carbon_fraction"})
    t = trend.trend_draws(d[0], d[1])
    np.testing.assert_allclose(t, 50.0, rtol=1e-12)
    s = math.sqrt(math.log1p(c * c))
    ln = stats.lognorm(s, scale=math.exp(-0.5 * s * s))
    lo, hi = trend.interval(trend.sum_draws(d))
    assert lo == pytest.approx(2500 * ln.ppf(0.025), rel=0.01)
    assert hi == pytest.approx(2500 * ln.ppf(0.975), rel=0.01)
    # the same factor drawn apart per year (not shared): the trend's spread is that of the ratio of two
    # independent lognormals, itself lognormal with s^2 doubled
    d_ind = _joint({"carbon_fraction_cv": c}, shared=set())
    lo, hi = trend.interval(trend.trend_draws(d_ind[0], d_ind[1]))
    ratio = stats.lognorm(math.sqrt(2) * s)  # median 1
    assert lo == pytest.approx(150 * ratio.ppf(0.025) - 100, abs=1.0)
    assert hi == pytest.approx(150 * ratio.ppf(0.975) - 100, abs=1.0)


def test_independent_limit_each_years_survey_bias():
    """Only each year's own survey bias (normal, sd s m, times the carbon per metre of depth): the
    years are independent, var(sum) = (2000 s)^2 + (3000 s)^2 (scipy.stats.norm for the interval),
    and the decorrelated draws agree with the joint ones."""
    sd = 0.01
    d = _joint({"survey_bias_sd_m": sd}, shared={"carbon_fraction"})
    assert abs(trend.correlation(d)[0, 1]) < 4 / math.sqrt(DRAWS)
    sigma = math.hypot(2000 * sd, 3000 * sd)
    lo, hi = trend.interval(trend.sum_draws(d))
    assert lo == pytest.approx(stats.norm.ppf(0.025, 2500, sigma), abs=0.03 * sigma)
    assert hi == pytest.approx(stats.norm.ppf(0.975, 2500, sigma), abs=0.03 * sigma)


def test_same_seed_for_a_year_own_sources_would_correlate_them():
    """The reason each year's own sources need a stream of their own: with one seed for both years a
    run-wide survey bias takes the same normal in both (correlation 1), which the series avoids."""
    d = _joint({"survey_bias_sd_m": 0.01}, shared=set(), seeds=(1, 1))
    assert trend.correlation(d)[0, 1] == pytest.approx(1.0)
