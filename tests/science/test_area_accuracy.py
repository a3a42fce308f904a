"""The burned-area map's accuracy as an area term (issue 16 item 5).

References used by the checks (named beside each): the definitions of user's and producer's accuracy
and of the error-adjusted area (Olofsson et al. 2014, Remote Sens. Environ. 148:42-57; recalled,
unchecked) applied to a population error matrix written in the test; numpy binomial sampling (a
simulation of the accuracy assessment); scipy's lognormal quantiles; hand arithmetic.
"""

import math

import numpy as np
import pytest
import scipy.stats

from peatburn.errors import PhysicalRangeError
from peatburn.science import uncertainty as u
from peatburn.science.uncertainty import area_accuracy as aa


def test_ratio_from_omission_and_commission_is_the_true_over_the_mapped_area():
    # A population error matrix of proportions of the map's area (rows: map, columns: reference):
    # mapped burned & truly burned 0.09, mapped burned & not burned 0.01, mapped unburned & burned 0.03.
    # Mapped burned area 0.10, truly burned 0.12: the true / mapped ratio is 1.2 (arithmetic).
    p11, p12, p21 = 0.09, 0.01, 0.03
    users = p11 / (p11 + p12)  # Olofsson et al. 2014 (recalled): U = p_ii / p_i.
    producers = p11 / (p11 + p21)  # P = p_jj / p_.j
    r, se = aa.area_ratio_from_rates(1 - producers, 1 - users)
    assert r == pytest.approx((p11 + p21) / (p11 + p12), rel=1e-12)
    assert se == 0.0


def test_ratio_standard_error_matches_a_simulated_accuracy_assessment():
    # Simulation: the commission rate estimated from 150 mapped-burned reference units, the omission
    # rate from 120 truly burned units (binomial sampling, numpy); the spread of the ratio over many
    # assessments against the first-order standard error.
    o, c, n_o, n_c = 0.25, 0.10, 120, 150
    rng = np.random.default_rng(3)
    o_hat = rng.binomial(n_o, o, 200_000) / n_o
    c_hat = rng.binomial(n_c, c, 200_000) / n_c
    r_hat = (1 - c_hat) / (1 - o_hat)
    r, se = aa.area_ratio_from_rates(o, c, aa.proportion_se(o, n_o), aa.proportion_se(c, n_c))
    assert r == pytest.approx(1.2)
    assert se == pytest.approx(r_hat.std(), rel=0.05)


def test_proportion_se_by_hand():
    # sqrt(0.1 x 0.9 / 100) = 0.03 (arithmetic)
    assert aa.proportion_se(0.1, 101) == pytest.approx(0.03, rel=1e-12)
    with pytest.raises(PhysicalRangeError):
        aa.proportion_se(0.1, 1)


def test_area_term_adjusted_or_only_widened():
    # adjusted: scale R, relative sd SE/R; not adjusted: scale 1, relative sd sqrt(SE^2 + (R-1)^2)
    assert aa.area_term(0.8, 0.04, adjust=True) == pytest.approx((0.8, 0.05))
    assert aa.area_term(0.8, 0.04) == pytest.approx((1.0, math.hypot(0.04, 0.2)))
    assert aa.area_term(1.0, 0.0) == (1.0, 0.0)
    for bad in ((0.0, 0.1), (1.1, -0.1), (float("nan"), 0.1)):
        with pytest.raises(PhysicalRangeError):
            aa.area_term(*bad)
    for bad in ((1.0, 0.1), (0.1, -0.2)):
        with pytest.raises(PhysicalRangeError):
            aa.area_ratio_from_rates(*bad)


def _zone():
    return {"carbon_kg": np.array([2e9]), "peat_kg": np.array([4e9]), "volume_m3": np.array([1e7]),
            "area_m2_survey": np.array([3e7]), "rho_area_survey": np.array([1.3e10]),
            "rho_f_area_survey": np.array([7e9]),
            "flaming_dm_fre_kg": np.array([1e6]), "flaming_dm_area_kg": np.array([3e6]),
            "flaming_carbon_kg": np.array([1.88e6])}


def test_area_term_scales_below_ground_and_area_flaming_not_fre_flaming():
    cv = 0.1
    comp = u.variance_components(_zone(), {"burned_area_cv": cv}, quantity="carbon_kg")
    assert comp["burned_area"][0] == pytest.approx((cv * 2e9) ** 2, rel=1e-12)  # (cv C)^2 by hand
    fl = u.variance_components(_zone(), {"burned_area_cv": cv}, quantity="flaming_dm_kg")
    assert fl["burned_area"][0] == pytest.approx((cv * 3e6) ** 2, rel=1e-12)  # the area route only
    vol = u.variance_components(_zone(), {"burned_area_cv": cv}, quantity="volume_m3")
    assert vol["burned_area"][0] == pytest.approx((cv * 1e7) ** 2, rel=1e-12)
    # one run-wide value: two zones' total has (cv (C1 + C2))^2, not the sum of squares
    two = {k: np.repeat(v, 2) for k, v in _zone().items()}
    tot = u.variance_components(two, {"burned_area_cv": cv}, quantity="carbon_kg", total=True)
    assert tot["burned_area"][-1] == pytest.approx((cv * 4e9) ** 2, rel=1e-12)


def test_area_term_draws_are_lognormal_with_mean_one():
    # only the area term: carbon = C x m, m lognormal of mean 1 and CV 0.2 (scipy quantiles)
    cv = 0.2
    iv = u.intervals(_zone(), {"burned_area_cv": cv}, draws=100_000, seed=5, quantities={"carbon_kg"})
    s = math.sqrt(math.log1p(cv * cv))
    dist = scipy.stats.lognorm(s, scale=math.exp(-s * s / 2))
    assert iv["carbon_kg"][0][0] == pytest.approx(2e9 * dist.ppf(0.025), rel=0.01)
    assert iv["carbon_kg"][1][0] == pytest.approx(2e9 * dist.ppf(0.975), rel=0.01)


def test_without_an_accuracy_the_draws_are_unchanged():
    # burned_area_cv 0 (the default) adds no factor: every draw is the same as without the key
    base = {"bulk_density_cv": 0.15, "carbon_fraction_cv": 0.05}
    a = u.draw_zone_totals(_zone(), base, draws=200, seed=2)
    b = u.draw_zone_totals(_zone(), {**base, "burned_area_cv": 0.0}, draws=200, seed=2)
    for q in a:
        assert np.array_equal(a[q], b[q])
    c = u.draw_zone_totals(_zone(), {**base, "burned_area_cv": 0.1}, draws=200, seed=2)
    assert not np.array_equal(a["carbon_kg"], c["carbon_kg"])
