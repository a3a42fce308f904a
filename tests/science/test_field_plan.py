"""Field verification plan (peatburn.science.field_plan).

The sample sizes are checked against a brute-force search written here (the smallest n_d + n_c
whose variance a_d / n_d + a_c / n_c, plus the sources not measured, reaches V / 4), and against
hand arithmetic; the 97.5 % normal quantile against scipy.
"""

import math

import numpy as np
import pytest
from scipy import stats

from peatburn.science import field_plan as fp


def test_z95_is_scipy_quantile():
    assert fp.Z95 == pytest.approx(stats.norm.ppf(0.975), rel=1e-15)


def test_source_groups():
    assert [fp.source_group(s) for s in ("survey_bias", "survey_random", "water_table_residual", "tier1_fuel",
                                         "subsidence_rate_map", "bulk_density", "carbon_fraction",
                                         "emission_factors_smouldering")] == \
        ["depth", "depth", "depth", "depth", "depth", "cores", "cores", "other"]


def _brute(V, carbon, sd_, sc, cv_d, cv_c, factor=2.0, n_max=400):
    a_d, a_c = (carbon * cv_d) ** 2, (carbon * cv_c) ** 2
    target = V / factor ** 2
    best = None
    for nd in range(0, n_max):
        for nc in range(0, n_max):
            var = (a_d / nd if nd else sd_ * V) + (a_c / nc if nc else sc * V) + (1 - sd_ - sc) * V
            if var <= target + 1e-9 and (best is None or nd + nc < sum(best)):
                best = (nd, nc)
                break
    return best


@pytest.mark.parametrize("sd_, sc, cv_d, cv_c", [(0.6, 0.3, 0.5, 0.2), (0.85, 0.1, 0.3, 0.1), (0.1, 0.85, 0.4, 0.3),
                                                   (0.5, 0.45, 0.05, 0.05)])
def test_counts_match_a_brute_force_search(sd_, sc, cv_d, cv_c):
    sd, carbon = 100.0, 1000.0
    a = fp.measurements_to_shrink(sd, carbon, sd_, sc, cv_d, cv_c)
    assert a.feasible
    assert a.n_depth + a.n_cores == sum(_brute(sd ** 2, carbon, sd_, sc, cv_d, cv_c))


def test_hand_arithmetic_both_groups():
    # V = 1e4, target 2500, other 1000 -> R = 1500; a_d = (1000*0.5)^2, a_c = (1000*0.2)^2
    # continuous optimum n_d = 500 * 700 / 1500 = 233.3, n_c = 200 * 700 / 1500 = 93.3: sum 326.7
    a = fp.measurements_to_shrink(100.0, 1000.0, 0.6, 0.3, 0.5, 0.2)
    assert a.n_depth + a.n_cores == 327
    assert 2.5e5 / a.n_depth + 4e4 / a.n_cores <= 1500


def test_infeasible_when_other_sources_dominate():
    # 30 % of the variance from sources no plot reduces > 25 % allowed
    a = fp.measurements_to_shrink(100.0, 1000.0, 0.4, 0.3, 0.3, 0.1)
    assert not a.feasible and (a.n_depth, a.n_cores) == (0, 0)


def test_stratified_sample_spreads_over_cells():
    xs, ys = np.meshgrid(np.arange(40) + 0.5, np.arange(40) + 0.5)
    x, y = xs.ravel(), ys.ravel()
    idx = fp.stratified_sample(x, y, 16, seed=3)
    assert idx.size == 16 and np.unique(idx).size == 16
    # 4 x 4 cells of 10 x 10 points: one plot in each
    cells = set(zip((x[idx] // 10).astype(int), (y[idx] // 10).astype(int)))
    assert len(cells) == 16
    assert np.array_equal(idx, fp.stratified_sample(x, y, 16, seed=3))
    assert not np.array_equal(idx, fp.stratified_sample(x, y, 16, seed=4))
    assert fp.stratified_sample(x[:5], y[:5], 10, seed=1).size == 5
    assert fp.stratified_sample(x, y, 0, seed=1).size == 0


def test_stratified_sample_is_proportional():
    # two clusters, 300 and 100 points: 8 plots -> 6 and 2
    rng = np.random.default_rng(0)
    a = rng.uniform(0, 10, (300, 2))
    b = rng.uniform(90, 100, (100, 2))
    pts = np.vstack([a, b])
    idx = fp.stratified_sample(pts[:, 0], pts[:, 1], 8, seed=1)
    assert (idx < 300).sum() == 6 and (idx >= 300).sum() == 2
    assert math.isclose(len(idx), 8)
