"""Zone-level uncertainty: correlated survey error, Monte Carlo intervals, contributions.

References used by the checks (named beside each): Rolstad et al. 2009 (J. Glaciol. 55:666,
spherical area-averaging), Ballhorn et al. 2009 (PNAS 106:21213 abstract: 0.33 +/- 0.18 m and
49.15 +/- 26.81 Mt C; the +/- is a spatial spread of depth, not an error of the total), scipy
(integration, normal and binomial distributions), hand arithmetic.
"""

import math

import numpy as np
import pytest
import scipy.integrate
import scipy.stats

from peatburn.errors import ConfigError, PeatburnError, PhysicalRangeError
from peatburn.factors import load_factor_set
from peatburn.science import survey
from peatburn.science import uncertainty as u
from peatburn.science import variogram as vg


# ----------------------------------------------------------------------------- Ballhorn et al. 2009


def _one_zone(carbon_kg, depth_m):
    """A zone whose carbon is carbon_kg at mean burn depth depth_m: rho_f_area = carbon / depth."""
    return {"carbon_kg": np.array([carbon_kg]), "rho_f_area_survey": np.array([carbon_kg / depth_m]),
            "area_m2_survey": np.array([1e9]), "volume_m3": np.array([1e9 * depth_m]),
            "peat_kg": np.array([carbon_kg / 0.56]), "rho_area_survey": np.array([carbon_kg / 0.56 / depth_m])}


def test_error_of_the_mean_depth_carries_linearly_to_carbon():
    """An error of a zone's mean burn depth (survey_bias: one shift of the whole zone) of sd s
    gives a carbon sd of C s / d. A zone of 49.15 Mt C at a mean depth of 0.33 m (the size of
    Ballhorn et al. 2009's study area) with s = 0.05 m: 49.15 * 0.05 / 0.33 = 7.4470 Mt C (hand)."""
    sums = _one_zone(49.15e9, 0.33)
    params = {"survey_bias_sd_m": 0.05}
    comp = u.variance_components(sums, params)
    assert math.sqrt(comp["survey_bias"][0]) / 1e9 == pytest.approx(7.4470, abs=0.0005)
    assert u.contributions(sums, params)["survey_bias"][0] == pytest.approx(1.0)
    draws = u.draw_zone_totals(sums, params, draws=20_000, seed=4)["carbon_kg"][:, 0]
    assert draws.std() / 1e9 == pytest.approx(7.4470, rel=0.03)
    assert draws.mean() / 1e9 == pytest.approx(49.15, abs=3 * 7.447 / math.sqrt(20_000))
    lo, hi = u.intervals(sums, params, draws=20_000, seed=4)["carbon_kg"]
    # normal 95 % interval: 49.15 -/+ 1.959964 * 7.4470 = 34.55 and 63.75 Mt C
    z = scipy.stats.norm.ppf(0.975)
    assert lo[0] / 1e9 == pytest.approx(49.15 - z * 7.4470, abs=0.6)
    assert hi[0] / 1e9 == pytest.approx(49.15 + z * 7.4470, abs=0.6)
    # half the error of the mean depth, half the carbon sd
    half = u.variance_components(sums, {"survey_bias_sd_m": 0.025})
    assert math.sqrt(half["survey_bias"][0]) / 1e9 == pytest.approx(7.4470 / 2, abs=0.0005)


def test_a_spatial_spread_of_depth_is_not_the_error_of_the_total():
    """Ballhorn et al. 2009 (PNAS 106:21213, abstract, checked): "an average burn scar depth of
    0.33 +/- 0.18 m" and 49.15 +/- 26.81 Mt C, i.e. the +/- carried linearly (26.81 / 49.15 =
    0.18 / 0.33). Read as the spread of burn depth from place to place across the burned area
    (recalled, unchecked: the abstract does not say), 0.18 m is not the error of the mean depth:
    as pixel-to-pixel scatter it averages out over the area. Independent pixels (pure nugget) of
    25 m2 over 1e9 m2: n = 4e7, zone-mean sd 0.18 / sqrt(4e7) = 2.846e-5 m, carbon sd
    49.15 * 2.846e-5 / 0.33 = 0.0042393 Mt C (hand), not 26.81 Mt C."""
    sums = _one_zone(49.15e9, 0.33)
    as_scatter = u.variance_components(sums, {"survey_sigma_m": 0.18, "survey_range_m": 10.0,
                                              "survey_nugget_fraction": 1.0, "pixel_area_m2": 25.0})
    sd = math.sqrt(as_scatter["survey_random"][0]) / 1e9
    assert sd == pytest.approx(49.15 * 0.18 / math.sqrt(4e7) / 0.33, rel=1e-6)
    # even spatially correlated over 100 m (Rolstad et al. 2009 averaging), a 0.18 m spread leaves
    # the total far better known than the spread carried linearly would say
    correlated = u.variance_components(sums, {"survey_sigma_m": 0.18, "survey_range_m": 100.0})
    assert math.sqrt(correlated["survey_random"][0]) / 1e9 < 0.01 * 26.81
    # only a shift of the whole mean depth by 0.18 m would give Ballhorn et al.'s 26.81 Mt C
    as_bias = u.variance_components(sums, {"survey_bias_sd_m": 0.18})
    assert math.sqrt(as_bias["survey_bias"][0]) / 1e9 == pytest.approx(26.81, abs=0.005)


# ----------------------------------------------------------------------------- reproducibility


def _zones(n=300, seed=0):
    rng = np.random.default_rng(seed)
    area = rng.uniform(1e4, 5e6, n)
    area[:3] = 0.0  # empty zones (bin 0, zones without burns): constant draws
    depth, rho, f = rng.uniform(0.1, 0.5, n), 0.1, 0.56
    return {"area_m2_survey": area, "volume_m3": area * depth, "peat_kg": area * depth * rho * 1000,
            "carbon_kg": area * depth * rho * f * 1000, "rho_area_survey": area * rho * 1000,
            "rho_f_area_survey": area * rho * f * 1000}


PARAMS = {"survey_bias_sd_m": 0.02, "survey_sigma_m": 0.15, "survey_range_m": 100.0,
          "subsidence_rate_sd_m_per_yr": 0.01, "interval_years": 2.0, "bulk_density_cv": 0.15,
          "carbon_fraction_cv": 0.05, "ef_smouldering": {"co2": (1703.0, 38.0), "co": (210.0, 109.0),
                                                         "ch4": (20.8, 11.4)},
          "gwp": {"co2": 1.0, "ch4": 27.0}}


def test_same_seed_same_intervals_whatever_the_chunks_and_threads():
    sums = _zones()
    a = u.intervals(sums, PARAMS, draws=500, seed=7, total=True)
    b = u.intervals(sums, PARAMS, draws=500, seed=7, total=True, chunk_zones=16)
    c = u.intervals(sums, PARAMS, draws=500, seed=7, total=True, workers=2, chunk_zones=64)
    assert set(a) == {"volume_m3", "peat_kg", "carbon_kg", "co2_smouldering_kg", "co_smouldering_kg",
                      "ch4_smouldering_kg", "co2e_smouldering_kg"}
    for q in a:
        for i in (0, 1):
            np.testing.assert_array_equal(a[q][i], b[q][i])
            np.testing.assert_array_equal(a[q][i], c[q][i])


def test_intervals_are_the_percentiles_of_the_draws():
    # the fast tail selection (draws >= 4096) must return exactly numpy's linear-interpolated
    # percentiles of the same draws, empty zones (all draws equal) included
    sums = {k: v[:40] for k, v in _zones().items()}
    d = u.draw_zone_totals(sums, PARAMS, draws=5000, seed=3)
    iv = u.intervals(sums, PARAMS, draws=5000, seed=3)
    for q in d:
        ref = np.quantile(d[q], [0.025, 0.975], axis=0)
        np.testing.assert_allclose(iv[q][0], ref[0], rtol=1e-13, atol=0)
        np.testing.assert_allclose(iv[q][1], ref[1], rtol=1e-13, atol=0)
    assert np.all(iv["carbon_kg"][0][:3] == 0) and np.all(iv["carbon_kg"][1][:3] == 0)


def test_different_seeds_differ_only_within_monte_carlo_noise():
    """Additive sources only: the draws are exactly normal with the sd of variance_components.
    The standard error of a sample p-quantile is sqrt(p (1-p) / N) / f(x_p) (asymptotic result for
    sample quantiles, e.g. Serfling 1980 §2.3, recalled), f the normal density (scipy)."""
    sums = _zones()
    params = {"survey_bias_sd_m": 0.02, "survey_sigma_m": 0.15, "survey_range_m": 100.0}
    n = 4000
    a = u.intervals(sums, params, draws=n, seed=1)["carbon_kg"]
    b = u.intervals(sums, params, draws=n, seed=2)["carbon_kg"]
    sd = np.sqrt(sum(u.variance_components(sums, params).values()))
    live = sd > 0
    se = math.sqrt(0.975 * 0.025 / n) / scipy.stats.norm.pdf(scipy.stats.norm.ppf(0.975)) * sd[live]
    for i in (0, 1):
        diff = np.abs(a[i][live] - b[i][live])
        assert np.all(diff <= 5.0 * math.sqrt(2.0) * se)  # two independent estimates
        assert np.mean(diff <= 2.0 * math.sqrt(2.0) * se) > 0.9  # and mostly within 2 standard errors
        assert not np.array_equal(a[i], b[i])


# ----------------------------------------------------------------------------- the model by hand


def test_lognormal_scale_has_mean_one_and_its_cv():
    # bulk density only, CV 0.15: draws of peat mass have mean = nominal and sd/mean = 0.15
    sums = _one_zone(1e9, 0.3)
    d = u.draw_zone_totals(sums, {"bulk_density_cv": 0.15}, draws=40_000, seed=0)["peat_kg"][:, 0]
    nominal = sums["peat_kg"][0]
    assert d.mean() == pytest.approx(nominal, rel=3 * 0.15 / math.sqrt(40_000))
    assert d.std() / d.mean() == pytest.approx(0.15, rel=0.03)
    assert d.min() > 0


def test_gas_mass_is_peat_mass_times_ef_and_co2e_weights_gases():
    """No spread anywhere: every draw is the nominal value. Peat 1e6 kg; CO2 1703 g/kg -> 1.703e6 kg;
    CH4 20.8 -> 2.08e4 kg; CO2e (AR6: CH4 27, CO has no GWP) = 1.703e6 + 27 x 2.08e4 = 2.2646e6 kg."""
    sums = {"peat_kg": np.array([1e6]), "carbon_kg": np.array([5.6e5])}
    params = {"ef_smouldering": {"co2": (1703.0, 0.0), "co": (210.0, 0.0), "ch4": (20.8, 0.0)},
              "gwp": {"co2": 1.0, "ch4": 27.0}}
    iv = u.intervals(sums, params, draws=10, seed=0)
    for q, v in (("co2_smouldering_kg", 1.703e6), ("co_smouldering_kg", 2.10e5), ("ch4_smouldering_kg", 2.08e4),
                 ("co2e_smouldering_kg", 2.2646e6)):
        assert iv[q][0][0] == pytest.approx(v, rel=1e-12)
        assert iv[q][1][0] == pytest.approx(v, rel=1e-12)


def test_ef_spread_of_a_gas_and_of_co2e():
    # Akagi et al. 2011 peatland CH4 20.8 +/- 11.4 g/kg (recalled; used here as arithmetic only):
    # CH4 mass sd = 1e6 kg x 11.4e-3 = 1.14e4 kg; CO2e variance adds GWP-weighted gas variances:
    # (38e-3 x 1e6)^2 + (27 x 11.4e-3 x 1e6)^2 = 3.8e4^2 + 3.078e5^2 = 1.444e9 + 9.474084e10
    # = 9.618484e10 -> sd 3.10137e5 kg (hand)
    sums = {"peat_kg": np.array([1e6])}
    params = {"ef_smouldering": {"co2": (1703.0, 38.0), "ch4": (20.8, 11.4)}, "gwp": {"co2": 1.0, "ch4": 27.0}}
    ch4 = u.variance_components(sums, params, quantity="ch4_smouldering_kg")
    assert math.sqrt(ch4["emission_factors_smouldering"][0]) == pytest.approx(1.14e4, rel=1e-9)
    co2e = u.variance_components(sums, params, quantity="co2e_smouldering_kg")
    assert math.sqrt(co2e["emission_factors_smouldering"][0]) == pytest.approx(3.10137e5, rel=1e-5)
    d = u.draw_zone_totals(sums, params, draws=40_000, seed=1)
    assert d["ch4_smouldering_kg"].std() == pytest.approx(1.14e4, rel=0.03)
    assert d["co2e_smouldering_kg"].std() == pytest.approx(3.10137e5, rel=0.03)


def test_water_table_coefficients_by_hand():
    """Depth = a + b wt; var(C) = g' Sigma g with g = (wt_rho_f_area, wt_rho_f_area_wt).
    g = (1e6 kg C/m, 5e5 kg C), Sigma = [[0.01, -0.002], [-0.002, 0.0025]]:
    1e12 x 0.01 + 2 x 5e11 x (-0.002) + 2.5e11 x 0.0025 = 1e10 - 2e9 + 6.25e8 = 8.625e9 (hand)."""
    sums = {"carbon_kg": np.array([3e5]), "wt_area": np.array([1e5]), "wt_rho_f_area": np.array([1e6]),
            "wt_rho_f_area_wt": np.array([5e5])}
    params = {"wt_coef_cov": [[0.01, -0.002], [-0.002, 0.0025]]}
    comp = u.variance_components(sums, params)
    assert comp["water_table_coefficients"][0] == pytest.approx(8.625e9, rel=1e-9)
    d = u.draw_zone_totals(sums, params, draws=40_000, seed=2)["carbon_kg"][:, 0]
    assert d.var() == pytest.approx(8.625e9, rel=0.03)


def test_flaming_routes_by_hand():
    """FRE route: dry matter 1e6 kg x coefficient scale, CV 0.015/0.368 = 0.040761 (Wooster et al.
    2005, recalled; arithmetic only) -> sd 4.0761e4 kg. Area route: 2e6 kg with biomass CV 0.3 and
    combustion-factor CV 0.13/0.36 = 0.36111 -> variance (2e6)^2 (0.09 + 0.130401) = 8.81604e11.
    CO flaming, 104 g/kg with sd 0 (arithmetic): nominal 3e6 x 0.104 = 3.12e5 kg."""
    sums = {"flaming_dm_fre_kg": np.array([1e6]), "flaming_dm_area_kg": np.array([2e6]),
            "flaming_carbon_kg": np.array([1.41e6])}
    params = {"fre_coefficient_cv": 0.015 / 0.368, "biomass_cv": 0.3, "combustion_factor_cv": 0.13 / 0.36,
              "ef_flaming": {"co": (104.0, 0.0)}}
    comp = u.variance_components(sums, params, quantity="flaming_dm_kg")
    assert math.sqrt(comp["fre_coefficient"][0]) == pytest.approx(4.0761e4, rel=1e-4)
    assert comp["biomass"][0] + comp["combustion_factor"][0] == pytest.approx(8.81604e11, rel=1e-5)
    ccomp = u.variance_components(sums, params, quantity="carbon_flaming_kg")
    # carbon scales with dry matter: 1.41e6 / 3e6 = 0.47 of each variance's sd
    assert math.sqrt(ccomp["fre_coefficient"][0]) == pytest.approx(0.47 * 4.0761e4, rel=1e-4)
    d = u.draw_zone_totals(sums, {**params, "biomass_cv": 0.0, "combustion_factor_cv": 0.0, "fre_coefficient_cv": 0.0},
                           draws=5, seed=0)
    assert d["co_flaming_kg"][0, 0] == pytest.approx(3.12e5)


def test_run_wide_sources_add_up_across_zones_and_zone_sources_do_not():
    """Four identical zones, bias variance v and random variance v per zone: for the total,
    run-wide bias gives (4 sqrt v)^2 = 16 v, independent zone errors 4 v: shares 0.8 and 0.2 (hand);
    per zone 0.5 and 0.5."""
    area = np.full(4, 1e6)
    sz = u.correlated_sum_sd(0.1, 100.0, 1e6)
    sums = {"area_m2_survey": area, "carbon_kg": np.full(4, 1e7), "rho_f_area_survey": np.full(4, 5e7)}
    params = {"survey_bias_sd_m": sz, "survey_sigma_m": 0.1, "survey_range_m": 100.0}
    c = u.contributions(sums, params, total=True)
    np.testing.assert_allclose(c["survey_bias"], [0.5, 0.5, 0.5, 0.5, 0.8], rtol=1e-12)
    np.testing.assert_allclose(c["survey_random"], [0.5, 0.5, 0.5, 0.5, 0.2], rtol=1e-12)


def test_analytic_contributions_agree_with_fixing_one_source_at_a_time():
    sums = {k: v[3:23] for k, v in _zones().items()}
    an = u.contributions(sums, PARAMS, total=True)
    mc = u.contributions(sums, PARAMS, draws=20_000, seed=5, method="fix-one", total=True)
    assert set(an) == set(mc) == {"survey_bias", "survey_random", "subsidence_rate", "bulk_density", "carbon_fraction"}
    np.testing.assert_allclose(sum(an.values()), 1.0, rtol=1e-12)
    for k in an:
        np.testing.assert_allclose(mc[k], an[k], atol=0.03)


def test_memory_guard_and_argument_errors(monkeypatch):
    sums = _zones(50)
    monkeypatch.setattr(u.monte_carlo, "MAX_FLOATS", 1000)  # read by draw_zone_totals there
    with pytest.raises(ConfigError):
        u.draw_zone_totals(sums, PARAMS, draws=100, seed=0)
    monkeypatch.undo()
    with pytest.raises(ConfigError):
        u.intervals(sums, PARAMS, draws=1, seed=0)
    with pytest.raises(ConfigError):
        u.intervals(sums, PARAMS, draws=10, seed=0, fixed={"survey_nonsense"})
    with pytest.raises(ConfigError):
        u.intervals(sums, {**PARAMS, "bulk_densty_cv": 0.1}, draws=10, seed=0)
    with pytest.raises(ConfigError):
        u.intervals({"carbon_kg": np.ones(3), "rho_f_area_survey": np.ones(4)}, PARAMS, draws=10, seed=0)
    with pytest.raises(ConfigError):
        u.intervals(sums, {"ef_smouldering": {"co": (210.0, float("nan"))}}, draws=10, seed=0)
    with pytest.raises(PhysicalRangeError):
        u.intervals(sums, {"survey_bias_sd_m": -0.1}, draws=10, seed=0)
    with pytest.raises(PeatburnError):
        u.contributions(sums, PARAMS, method="sobol")


def test_fixed_sources_are_held_at_nominal():
    sums = _zones(40)
    iv = u.intervals(sums, PARAMS, draws=200, seed=0, fixed=set(u.SOURCE_NAMES))
    np.testing.assert_allclose(iv["carbon_kg"][0], sums["carbon_kg"], rtol=1e-12)
    np.testing.assert_allclose(iv["carbon_kg"][1], sums["carbon_kg"], rtol=1e-12)


# ----------------------------------------------------------------------------- sources


def test_default_sources_take_the_factor_set_spread_and_borrow_missing_ones():
    akagi = load_factor_set("smouldering_akagi2011")
    tellus = load_factor_set("smouldering_sumatra_shipboard2017")
    ipcc = load_factor_set("smouldering_ipcc2013_wetlands")
    src = u.default_sources(survey_bias_sd_m=0.01, survey_sigma_m=0.1, survey_range_m=80.0, interval_years=3.0,
                            smouldering_factors=akagi)
    assert [s.name for s in src] == ["survey_bias", "survey_random", "subsidence_rate", "bulk_density",
                                     "carbon_fraction", "emission_factors_smouldering"]
    assert all(s.citation and s.note and s.distribution for s in src)
    p = u.sources_to_params(src)
    # the sd column of the set (Akagi et al. 2011 peatland CO 210 +/- 109, as shipped)
    assert p["ef_smouldering"]["co"] == (210.0, 109.0)
    assert p["subsidence_rate_sd_m_per_yr"] == u.DEFAULT_SUBSIDENCE_RATE_SD
    assert p["carbon_fraction_cv"] == pytest.approx(0.03 / 0.56)
    # the IPCC set has no spread and is Akagi et al.'s values rounded (derived_from): it inherits
    # Akagi's relative spreads, by hand from the shipped CSV: CO 109/210 = 0.519048; CH4 11.4/20.8 =
    # 0.548077; CO2 38/1703 = 0.022314 (not the widest of all sets, 54/1663 = 0.032471)
    src2 = u.default_sources(survey_bias_sd_m=0.01, survey_sigma_m=0.1, survey_range_m=80.0,
                             smouldering_factors=ipcc, reference_factor_sets=[akagi, tellus, ipcc])
    gases = src2[-1].parameters["gases"]
    assert gases["co"]["cv"] == pytest.approx(0.519048, rel=1e-5)
    assert gases["ch4"]["cv"] == pytest.approx(0.548077, rel=1e-5)
    assert gases["co2"]["cv"] == pytest.approx(0.022314, rel=1e-4)
    assert "inherited" in gases["co"]["sd_basis"]
    # without its parent among the references, the widest of the independent smouldering sets
    src4 = u.default_sources(survey_bias_sd_m=0.01, survey_sigma_m=0.1, survey_range_m=80.0,
                             smouldering_factors=ipcc, reference_factor_sets=[tellus])
    assert src4[-1].parameters["gases"]["co2"]["cv"] == pytest.approx(0.032471, rel=1e-4)
    assert "borrowed" in src4[-1].parameters["gases"]["co2"]["sd_basis"]
    # no reference: the documented assumption
    src3 = u.default_sources(survey_bias_sd_m=0.01, survey_sigma_m=0.1, survey_range_m=80.0, smouldering_factors=ipcc)
    assert src3[-1].parameters["gases"]["ch4"]["cv"] == u.DEFAULT_EF_CV


def test_default_flaming_sources():
    ff = load_factor_set("flaming_ipcc2006_tropical_forest")
    src = u.default_sources(survey_bias_sd_m=0.01, survey_sigma_m=0.1, survey_range_m=80.0, flaming_factors=ff,
                            wt_coef_cov=[[0.01, 0.0], [0.0, 0.001]], wt_residual_sd_m=0.1, wt_residual_range_m=200.0)
    names = [s.name for s in src]
    assert names == [n for n in u.SOURCE_NAMES if n in names]  # documented order
    assert {"fre_coefficient", "biomass", "combustion_factor", "emission_factors_flaming", "water_table_coefficients",
            "water_table_residual"} <= set(names)
    p = u.sources_to_params(src, gwp={"co2": 1, "ch4": 27.0, "n2o": 273})
    # Wooster et al. 2005 0.368 +/- 0.015 (recalled): CV 0.040761 (hand)
    assert p["fre_coefficient_cv"] == pytest.approx(0.040761, rel=1e-4)
    assert p["ef_flaming"]["n2o"][1] == pytest.approx(0.20 * u.DEFAULT_EF_CV)  # no published spread
    with pytest.raises(PhysicalRangeError):
        u.default_sources(survey_bias_sd_m=-1.0, survey_sigma_m=0.1, survey_range_m=80.0)


# ----------------------------------------------------------------------------- coverage

P_M, SIGMA, RANGE = 10.0, 0.15, 100.0
N_SCENES = 250
ZONES = [(r0, c0) for r0 in range(0, 256, 64) for c0 in (128, 184)]  # 8 zones of 64 x 56 px


def _scene(s):
    """One synthetic scene: a spherical-correlated survey error field (circulant embedding, checked
    in test_variogram.py), stable ground in columns 0-95, a gap wider than the range, eight zones in
    columns 128-239 (the field wraps round, so columns 240-255 are left out as a gap too). True depths
    are known; the estimate adds the error and removes the stable-ground median (co-registration).
    sigma and the range are estimated from the stable ground with the project's NMAD and variogram."""
    rng = np.random.default_rng(10_000 + s)
    e = vg.simulate_spherical_field((256, 256), P_M, SIGMA, RANGE, seed=s)
    stable = e[:, :96]
    yy, xx = np.mgrid[0:256, 0:96]
    sig = float(survey.nmad(stable))
    lags, g, c = vg.empirical_variogram(xx * P_M, yy * P_M, stable, max_lag=3 * RANGE, n_lags=15,
                                        max_pairs=20_000, seed=s)
    rng_m = vg.fit_spherical(lags, g, c)["range_m"]
    shift = float(np.median(stable))
    truth = rng.uniform(0.1, 0.6, (256, 256))
    est = truth + e - shift
    rho, f, a_px = 0.1, 0.56, P_M * P_M
    true_c = np.array([truth[r:r + 64, c:c + 56].sum() for r, c in ZONES]) * rho * f * a_px * 1000
    est_c = np.array([est[r:r + 64, c:c + 56].sum() for r, c in ZONES]) * rho * f * a_px * 1000
    n_px = 64 * 56
    sums = {"area_m2_survey": np.full(8, n_px * a_px), "carbon_kg": est_c,
            "rho_f_area_survey": np.full(8, n_px * rho * f * a_px * 1000)}
    bias = u.residual_bias_sd(sig, rng_m, stable.size * a_px, estimator="median")
    truth_all = np.append(true_c, true_c.sum())
    out = {}
    for label, nug in (("correlated", 0.0), ("independent", 1.0)):
        params = {"survey_bias_sd_m": bias if nug == 0 else sig / math.sqrt(stable.size) * u.MEDIAN_EFFICIENCY_FACTOR,
                  "survey_sigma_m": sig, "survey_range_m": rng_m, "survey_nugget_fraction": nug, "pixel_area_m2": a_px}
        lo, hi = u.intervals(sums, params, draws=1000, seed=s, total=True)["carbon_kg"]
        out[label] = (lo <= truth_all) & (truth_all <= hi)
    return out


@pytest.fixture(scope="module")
def coverage_hits():
    scenes = [_scene(s) for s in range(N_SCENES)]
    return {k: np.array([sc[k] for sc in scenes]) for k in ("correlated", "independent")}


def test_coverage_of_the_95_percent_interval(coverage_hits):
    """250 scenes with fresh correlated noise: the interval of one zone per scene (zone 0) and of the
    run total must hold the truth a number of times inside the binomial 99 % acceptance band for
    p = 0.95 (scipy.stats.binom): [228, 245] of 250."""
    lo_band = scipy.stats.binom.ppf(0.005, N_SCENES, 0.95)
    hi_band = scipy.stats.binom.isf(0.005, N_SCENES, 0.95)
    assert (lo_band, hi_band) == (228, 245)
    hits = coverage_hits["correlated"]
    assert lo_band <= hits[:, 0].sum() <= hi_band
    assert lo_band <= hits[:, -1].sum() <= hi_band
    # every zone (not independent of each other, so only a loose check of the average)
    assert 0.93 <= hits[:, :-1].mean() <= 0.985


def test_independent_error_assumption_fails_the_same_coverage(coverage_hits):
    """The control: treating the survey error as independent pixel noise (shrinking like 1/sqrt(n))
    gives intervals far too narrow; the same test would reject them."""
    hits = coverage_hits["independent"]
    assert hits[:, 0].sum() < scipy.stats.binom.ppf(0.005, N_SCENES, 0.95) - 50


def test_a_quantity_draws_the_same_whatever_else_is_drawn():
    """Invariant: drawing a subset of the quantities (the run leaves out the peat volume, which
    has no interval column) gives exactly the intervals of those quantities in a full draw."""
    sums = _zones()
    full = u.intervals(sums, PARAMS, draws=500, seed=7, total=True)
    part = u.intervals(sums, PARAMS, draws=500, seed=7, total=True, quantities={"carbon_kg", "co2e_smouldering_kg"})
    assert set(part) == {"carbon_kg", "co2e_smouldering_kg"}
    for q in part:
        for i in (0, 1):
            np.testing.assert_array_equal(part[q][i], full[q][i])


def test_tier1_pixels_drawn_with_their_own_source_not_the_bulk_density():
    """A zone whose carbon is all Tier 1: its variance comes from the spread of the default (IPCC 2013
    Wetlands Supplement Table 2.6, 353 +/- 170 t/ha, recalled) and the carbon fraction, never from the
    bulk density (the default's mass does not depend on it). First order, hand arithmetic:
    Var C = (C x cv_t1)^2 + (C x cv_f)^2."""
    sums = {"peat_kg": np.array([1000.0]), "carbon_kg": np.array([500.0]),
            "peat_kg_tier1": np.array([1000.0]), "carbon_kg_tier1": np.array([500.0])}
    params = {"bulk_density_cv": 0.15, "carbon_fraction_cv": 0.05, "tier1_fuel_cv": 0.246}
    comp = u.variance_components(sums, params, quantity="carbon_kg")
    assert comp.get("bulk_density", np.zeros(1))[0] == 0.0
    assert comp["tier1_fuel"][0] == pytest.approx((500 * 0.246) ** 2, rel=1e-12)
    assert comp["carbon_fraction"][0] == pytest.approx((500 * 0.05) ** 2, rel=1e-12)
    lo, hi = u.intervals(sums, params, draws=20_000, seed=1, quantities={"carbon_kg"})["carbon_kg"]
    # lognormal scales of mean 1: the 95 % interval of the product, to within Monte Carlo noise
    s = math.sqrt(math.log1p(0.246 ** 2) + math.log1p(0.05 ** 2))
    assert lo[0] == pytest.approx(500 * math.exp(-1.96 * s - s * s / 2), rel=0.03)
    assert hi[0] == pytest.approx(500 * math.exp(1.96 * s - s * s / 2), rel=0.03)


def test_subsidence_map_term_is_zone_correlated():
    """The rate-map error is one value per zone: within a zone it acts on the whole surveyed area
    (sd = sd_r x T x sum rho f A, not averaged down like the pixel noise), and two zones add their
    variances (independent), unlike a run-wide source whose derivatives add before squaring."""
    sums = {"area_m2_survey": np.array([1e4, 2e4]), "volume_m3": np.array([4e3, 8e3]), "peat_kg": np.array([4e5, 8e5]),
            "carbon_kg": np.array([2e5, 4e5]), "rho_area_survey": np.array([1e6, 2e6]), "rho_f_area_survey": np.array([5e5, 1e6])}
    params = {"subsidence_rate_map_sd_m_per_yr": 0.01, "interval_years": 3.0}
    comp = u.variance_components(sums, params, quantity="carbon_kg", total=True)
    per = (0.01 * 3.0 * np.array([5e5, 1e6])) ** 2
    np.testing.assert_allclose(comp["subsidence_rate_map"][:2], per, rtol=1e-12)
    assert comp["subsidence_rate_map"][2] == pytest.approx(per.sum(), rel=1e-12)


def test_filled_peat_properties_widen_the_spread():
    sums = {"peat_kg": np.array([1000.0]), "carbon_kg": np.array([500.0]),
            "peat_kg_filled": np.array([200.0]), "carbon_kg_filled": np.array([100.0])}
    comp = u.variance_components(sums, {"bulk_density_cv": 0.15, "peat_fill_cv": 0.3}, quantity="carbon_kg")
    assert comp["peat_property_fill"][0] == pytest.approx((100 * 0.3) ** 2, rel=1e-12)
    assert comp["bulk_density"][0] == pytest.approx((500 * 0.15) ** 2, rel=1e-12)  # all pixels, filled too


# ----------------------------------------------------------------------------- issue 17: carbon balance, spreads

# Nara et al. 2017 (Tellus B 69:1399047, abstract, checked): 1663 +/- 54, 205 +/- 23, 7.6 +/- 1.6 g/kg.
NARA = {"co2": (1663.0, 54.0), "co": (205.0, 23.0), "ch4": (7.6, 1.6)}
# carbon per g of gas, hand (IUPAC conventional weights C 12.011, O 15.999, H 1.008)
CPG = {"co2": 12.011 / 44.009, "co": 12.011 / 28.010, "ch4": 12.011 / 16.043}
C_NARA = {g: NARA[g][0] * CPG[g] for g in NARA}  # 453.868, 87.906, 5.690 g C/kg
S_NARA = sum(C_NARA.values())  # 547.465 g C/kg


def _gas_carbon(d, phase):
    return sum(d[f"{g}_{phase}_kg"] * CPG[g] for g in CPG)


def test_carbon_balance_every_draw_closes_and_carries_the_carbon_fraction():
    sums = {"peat_kg": np.array([1e6, 2e6]), "carbon_kg": np.array([5.5e5, 1.1e6])}
    params = {"carbon_fraction_cv": 0.05, "ef_smouldering": NARA, "gas_form": "carbon_balance"}
    d = u.draw_zone_totals(sums, params, draws=20_000, seed=5)
    # the carbon of every drawn CO2 + CO + CH4 is the drawn carbon (the method's closure)
    np.testing.assert_allclose(_gas_carbon(d, "smouldering"), d["carbon_kg"], rtol=1e-10)
    # first order, by hand: CO2 = C x EF_CO2 m_CO2 / S(m); d ln CO2 / d ln m_j = [j = CO2] - C_j / S
    nominal = 5.5e5 * 1663.0 / S_NARA  # 1.67075e6 kg
    rel_ef2 = sum(((1.0 if g == "co2" else 0.0) - C_NARA[g] / S_NARA) ** 2 * (NARA[g][1] / NARA[g][0]) ** 2
                  for g in NARA)  # 3.6015e-4
    comp = u.variance_components(sums, params, quantity="co2_smouldering_kg")
    assert math.sqrt(comp["emission_factors_smouldering"][0]) == pytest.approx(math.sqrt(rel_ef2) * nominal, rel=1e-9)
    assert math.sqrt(comp["carbon_fraction"][0]) == pytest.approx(0.05 * nominal, rel=1e-9)
    assert math.sqrt(rel_ef2) == pytest.approx(0.018978, rel=1e-4)
    co2 = d["co2_smouldering_kg"][:, 0]
    assert co2.mean() == pytest.approx(nominal, rel=0.01)
    assert co2.std() == pytest.approx(math.sqrt(rel_ef2 + 0.05**2) * nominal, rel=0.05)


def test_dry_matter_form_gases_do_not_see_the_carbon_fraction():
    sums = {"peat_kg": np.array([1e6]), "carbon_kg": np.array([5.5e5])}
    params = {"carbon_fraction_cv": 0.05, "ef_smouldering": NARA}
    comp = u.variance_components(sums, params, quantity="co2_smouldering_kg")
    assert "carbon_fraction" not in comp
    # 1e6 kg x 54 g/kg x 1e-3 = 5.4e4 kg (IPCC 2006 Eq. 2.27 with the published spread)
    assert math.sqrt(comp["emission_factors_smouldering"][0]) == pytest.approx(5.4e4, rel=1e-9)
    with pytest.raises(ConfigError):
        u.draw_zone_totals(sums, {**params, "gas_form": "per_area"}, draws=10, seed=0)


def test_carbon_balance_flaming_draws_close():
    sums = {"peat_kg": np.array([0.0]), "carbon_kg": np.array([0.0]), "flaming_dm_fre_kg": np.array([1e6]),
            "flaming_dm_area_kg": np.array([0.0]), "flaming_carbon_kg": np.array([4.7e5])}
    # IPCC 2006 Table 2.5 tropical forest (recalled; arithmetic only): 1580 +/- 90, 104 +/- 20, 6.8 +/- 2.0
    params = {"ef_flaming": {"co2": (1580.0, 90.0), "co": (104.0, 20.0), "ch4": (6.8, 2.0), "n2o": (0.2, 0.1)},
              "fre_coefficient_cv": 0.04, "gas_form": "carbon_balance"}
    d = u.draw_zone_totals(sums, params, draws=2000, seed=6)
    np.testing.assert_allclose(_gas_carbon(d, "flaming"), d["carbon_flaming_kg"], rtol=1e-10)
    # N2O keeps its ratio to the carbon species: nominal 4.7e5 x 0.2 / (1580 CPG + 104 CPG + 6.8 CPG)
    s_fl = 1580.0 * CPG["co2"] + 104.0 * CPG["co"] + 6.8 * CPG["ch4"]  # 480.886 g C/kg
    assert d["n2o_flaming_kg"].mean() == pytest.approx(4.7e5 * 0.2 / s_fl, rel=0.04)  # lognormal factors of mean 1


def test_ipcc2013_set_inherits_akagi_spreads_and_phases_do_not_mix():
    akagi = load_factor_set("smouldering_akagi2011")
    tellus = load_factor_set("smouldering_sumatra_shipboard2017")
    field = load_factor_set("smouldering_kalimantan_field2015")
    ipcc = load_factor_set("smouldering_ipcc2013_wetlands")
    flaming = load_factor_set("flaming_ipcc2006_tropical_forest")
    refs = [akagi, tellus, field, ipcc, flaming]
    src = u.default_sources(survey_bias_sd_m=0.01, survey_sigma_m=0.1, survey_range_m=80.0,
                            smouldering_factors=ipcc, reference_factor_sets=refs)
    g = src[-1].parameters["gases"]
    # the IPCC 2013 values are Akagi et al. 2011 rounded: Akagi's relative spreads (as shipped), by hand
    assert g["co2"]["cv"] == pytest.approx(38 / 1703, rel=1e-9)  # 0.022314, not the widest (flaming 90/1580)
    assert g["co"]["cv"] == pytest.approx(109 / 210, rel=1e-9)
    assert g["ch4"]["cv"] == pytest.approx(11.4 / 20.8, rel=1e-9)
    assert all("inherited" in v["sd_basis"] and "smouldering_akagi2011" in v["sd_basis"] for v in g.values())
    # a smouldering set with no spread and no parent borrows the widest of the smouldering sets only:
    # CO2 max(38/1703, 54/1663, 77/1564) = 77/1564 = 0.049233 (the flaming 90/1580 = 0.056962 is not used)
    fb = u.ef_fallback_cv(refs, "smouldering")
    assert fb["co2"] == pytest.approx(77 / 1564, rel=1e-9)
    assert "n2o" not in fb and "nox" not in fb
    assert u.ef_fallback_cv(refs, "flaming")["co2"] == pytest.approx(90 / 1580, rel=1e-9)
