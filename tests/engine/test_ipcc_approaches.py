"""IPCC Approach 1 beside Approach 2, per inventory line (issue 16 item 7).

References used by the checks: IPCC 2006 Guidelines Vol. 1 Ch. 3, Eq. 3.1 (uncertainty of a product of
independent quantities, U_total = sqrt(U_1^2 + ... + U_n^2), U in % of the quantity, 95 %) and Eq. 3.2
(of a sum: sqrt(sum (U_i x_i)^2) / |sum x_i|) (equation numbers and forms recalled, unchecked); scipy's
lognormal quantiles; hand arithmetic.
"""

import math

import numpy as np
import pytest
import scipy.stats

from peatburn.engine.intervals import ipcc_percentages
from peatburn.outputs import tables
from peatburn.science import uncertainty as u


def _zone(carbon_kg=1e9):
    return {"carbon_kg": np.array([carbon_kg]), "peat_kg": np.array([carbon_kg / 0.5]),
            "volume_m3": np.array([1e6]), "area_m2_survey": np.array([1e7]),
            "rho_area_survey": np.array([carbon_kg / 0.5 / 0.3]), "rho_f_area_survey": np.array([carbon_kg / 0.3])}


def _percentages(sums, params, draws=200_000, seed=4):
    q = {"carbon_kg"}
    iv = u.intervals(sums, params, draws=draws, seed=seed, quantities=q)
    means = u.draw_means(sums, params, draws=draws, seed=seed, quantities=q)
    row = {"carbon_smouldering_t": float(sums["carbon_kg"][0]) * 1e-3}
    out = ipcc_percentages(sums, params, iv, row, means)
    return (out["carbon_smouldering_t_approach1_pct"], out["carbon_smouldering_t_approach2_minus_pct"],
            out["carbon_smouldering_t_approach2_plus_pct"])


def test_approach1_of_a_product_is_ipcc_eq_3_1():
    # carbon = C x m_rho x m_f x m_area, independent factors with CV 0.15, 0.05, 0.08: U_i = 1.96 CV_i x 100 %;
    # Eq. 3.1: U = sqrt(sum U_i^2)
    cvs = {"bulk_density_cv": 0.15, "carbon_fraction_cv": 0.05, "burned_area_cv": 0.08}
    a1, _, _ = _percentages(_zone(), cvs, draws=50)
    assert a1 == pytest.approx(math.sqrt(sum((196.0 * c) ** 2 for c in cvs.values())), rel=1e-12)


def test_approach1_of_a_sum_is_ipcc_eq_3_2():
    # two zones with zone-level independent errors (subsidence map term, sd 0.01 m/yr x 2 yr over their
    # survey areas): the total's U = sqrt(sum (U_i x_i)^2) / sum x_i (Eq. 3.2), U_i of each zone
    sums = {k: np.concatenate([v, 3 * v]) for k, v in _zone().items()}
    params = {"subsidence_rate_map_sd_m_per_yr": 0.01, "interval_years": 2.0}
    comp = u.variance_components(sums, params, quantity="carbon_kg", total=True)
    sd = np.sqrt(sum(comp.values()))
    x = sums["carbon_kg"]
    u_i = 196.0 * sd[:2] / x
    eq32 = math.sqrt(float(np.sum((u_i * x) ** 2))) / float(x.sum())
    assert 196.0 * sd[2] / x.sum() == pytest.approx(eq32, rel=1e-12)
    # hand arithmetic of one zone: 0.02 m x rho_f_area
    assert sd[0] == pytest.approx(0.02 * 1e9 / 0.3, rel=1e-12)


def test_approach2_is_the_lognormal_quantiles_over_the_mean():
    # one lognormal factor of mean 1 and CV 0.4: the 2.5 / 97.5 percentiles (scipy) over the mean 1
    cv = 0.4
    _, minus, plus = _percentages(_zone(), {"bulk_density_cv": cv})
    s = math.sqrt(math.log1p(cv * cv))
    dist = scipy.stats.lognorm(s, scale=math.exp(-s * s / 2))
    assert minus == pytest.approx(100 * (1 - dist.ppf(0.025)), rel=0.02)
    assert plus == pytest.approx(100 * (dist.ppf(0.975) - 1), rel=0.02)


def test_the_two_approaches_agree_when_small_and_part_when_large():
    small = _percentages(_zone(), {"bulk_density_cv": 0.02})
    assert small[1] == pytest.approx(small[0], rel=0.05) and small[2] == pytest.approx(small[0], rel=0.05)
    large = _percentages(_zone(), {"bulk_density_cv": 0.8})
    a1, minus, plus = large
    # Approach 1 is symmetric (1.96 x 80 % = 156.8 %, below -100 %: a negative emission); the draws are
    # skewed: less than 100 % below the mean, more above than below
    assert a1 == pytest.approx(156.8, rel=1e-9)
    assert minus < 100.0 < a1 and plus > 1.5 * minus


def test_inventory_lines_carry_the_run_percentages():
    total = {"co2_smouldering_t": 1000.0, "co2e_smouldering_t": 1200.0, "co2_flaming_t": math.nan,
             "co2e_flaming_t": 0.0, "ch4_smouldering_t": math.nan, "co_smouldering_t": math.nan}
    ipcc = {"co2_smouldering_t_approach1_pct": 30.0, "co2_smouldering_t_approach2_minus_pct": 25.0,
            "co2_smouldering_t_approach2_plus_pct": 36.0, "co2e_smouldering_t_approach1_pct": 31.0}
    rows = tables.inventory_rows(total, {"smouldering": {2031: 0.25, 2032: 0.75}, "flaming": {}}, "AR6",
                                 ("co2",), ipcc)
    co2 = [r for r in rows if r["gas"] == "CO2"]
    assert [r["emissions_gg"] for r in co2] == pytest.approx([0.25, 0.75])
    for r in co2:  # the same percentage on every year's line: a line is the total times its share
        assert (r["approach1_pct"], r["approach2_minus_pct"], r["approach2_plus_pct"]) == (30.0, 25.0, 36.0)
    co2c = [r for r in rows if r["gas"] == "CO2-C"]
    assert co2c[0]["approach1_pct"] == 30.0
    co2e = [r for r in rows if r["gas"].startswith("CO2e")]
    assert co2e[0]["approach1_pct"] == 31.0 and math.isnan(co2e[0]["approach2_plus_pct"])
    assert set(tables.INVENTORY_PCT_COLUMNS) <= set(tables.INVENTORY_COLUMNS)
