"""The error of FRE integrated from sparse observations (issue 16 item 6).

References used by the checks: hand arithmetic; scipy's lognormal quantiles; numpy sampling.
"""

import math

import numpy as np
import pytest
import scipy.stats

from peatburn.science import uncertainty as u
from peatburn.science.uncertainty import fre_sampling as fs


def test_observation_count_counts_distinct_times_per_event():
    # event 0: three detections in one overpass (within 15 min) and one 12 h later -> 2 observations;
    # event 1: one detection -> 1; event 2: four overpasses -> 4 (hand count)
    event = [0, 0, 0, 0, 1, 2, 2, 2, 2]
    t = [0, 30, 200, 43200, 500, 0, 21600, 43200, 64800]
    assert fs.observation_count(event, t).tolist() == [2, 1, 4]
    assert fs.observation_count([], []).size == 0


def test_hits_ssq_by_hand():
    # detections: (dry matter, event) = (10, 0), (20, 0), (30, 1); events observed 2 and 1 times.
    # Zone 1 holds detections 0 and 2 whole and half of detection 1; zone 2 the other half of 1.
    # zone 1: event 0 has 10 + 10 = 20 -> 400 / 2; event 1 has 30 -> 900 / 1; sum 1100
    # zone 2: event 0 has 10 -> 100 / 2 = 50
    ssq = fs.hits_ssq([10.0, 20.0, 30.0], [0, 0, 1], [2, 1], pick=[0, 1, 2, 1], zone=[1, 1, 1, 2],
                      weight=[1.0, 0.5, 1.0, 0.5], n_zones=3)
    assert ssq.tolist() == pytest.approx([0.0, 1100.0, 50.0])


def _flaming(ssq):
    return {"flaming_dm_fre_kg": np.array([1e6, 1e6]), "flaming_carbon_kg": np.array([4.7e5, 4.7e5]),
            "flaming_fre_ssq_kg2": np.asarray(ssq, dtype=float)}


def test_zone_variance_is_cv1_squared_times_ssq_and_zones_are_independent():
    # zone 0: one event of 1e6 kg seen 4 times: ssq 1e12 / 4; zone 1: 100 events of 1e4 kg seen once: 1e10
    sums = _flaming([1e12 / 4, 100 * 1e8])
    comp = u.variance_components(sums, {"fre_integration_cv": 1.0}, quantity="flaming_dm_kg", total=True)
    assert comp["fre_integration"][:2] == pytest.approx([0.25e12, 1e10])  # (cv1^2 ssq) by hand
    assert comp["fre_integration"][2] == pytest.approx(0.25e12 + 1e10)  # zone-level: variances add


def test_fewer_observations_give_a_wider_lognormal_interval():
    # one zone, one event of 1e6 kg: cv = 1 / sqrt(n); the draws are lognormal of mean 1 (scipy)
    lo_hi = {}
    for n in (1, 4, 100):
        sums = {k: v[:1] for k, v in _flaming([1e12 / n, 0]).items()}
        iv = u.intervals(sums, {"fre_integration_cv": 1.0}, draws=100_000, seed=1, quantities={"flaming_dm_kg"})
        lo, hi = iv["flaming_dm_kg"][0][0], iv["flaming_dm_kg"][1][0]
        cv = 1.0 / math.sqrt(n)
        s = math.sqrt(math.log1p(cv * cv))
        dist = scipy.stats.lognorm(s, scale=math.exp(-s * s / 2))
        assert lo == pytest.approx(1e6 * dist.ppf(0.025), rel=0.02)
        assert hi == pytest.approx(1e6 * dist.ppf(0.975), rel=0.02)
        assert lo > 0
        lo_hi[n] = hi - lo
    assert lo_hi[1] > lo_hi[4] > lo_hi[100]
    # the draws' mean stays the estimate (mean-1 scale)
    m = u.draw_means({k: v[:1] for k, v in _flaming([1e12, 0]).items()}, {"fre_integration_cv": 1.0},
                     draws=200_000, seed=2, quantities={"flaming_dm_kg"})
    assert m["flaming_dm_kg"][0] == pytest.approx(1e6, rel=0.01)


def test_one_over_sqrt_n_is_the_spread_of_a_mean_of_n_independent_looks():
    # The assumption of the module: FRE = duration x mean power, the mean estimated from n independent
    # looks at a power whose relative spread is cv1. Simulation (numpy): exponential powers (cv1 = 1).
    rng = np.random.default_rng(0)
    for n in (1, 4, 16):
        est = rng.exponential(1.0, (100_000, n)).mean(axis=1)
        assert est.std() / est.mean() == pytest.approx(1.0 / math.sqrt(n), rel=0.03)


def test_no_term_without_the_sum_or_with_cv_zero():
    sums = _flaming([1e12, 1e12])
    base = {"fre_coefficient_cv": 0.04}
    a = u.draw_zone_totals(sums, base, draws=100, seed=0)
    b = u.draw_zone_totals(sums, {**base, "fre_integration_cv": 0.0}, draws=100, seed=0)
    c = u.draw_zone_totals({k: v for k, v in sums.items() if k != "flaming_fre_ssq_kg2"},
                           {**base, "fre_integration_cv": 1.0}, draws=100, seed=0)
    for q in a:
        assert np.array_equal(a[q], b[q]) and np.array_equal(a[q], c[q])
