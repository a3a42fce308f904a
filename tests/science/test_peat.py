"""Peat mass and carbon against published figures (hand arithmetic from the papers)."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from peatburn.science import peat
from peatburn.units import Q_


def test_unit_constant_against_pint():
    # 1 g/cm^3 in kg/m^3 from pint, the reference unit library
    assert peat.KG_M3_PER_G_CM3 == pytest.approx(Q_(1, "g/cm^3").to("kg/m^3").magnitude)
    assert peat.KG_M2_PER_T_HA == pytest.approx(Q_(1, "t/ha").to("kg/m^2").magnitude)
    assert peat.HA_PER_M2 == pytest.approx(Q_(1, "m^2").to("ha").magnitude)


def test_page_2002_carbon_per_hectare():
    """Page et al. 2002 (Nature 420:61): 0.19-0.23 Gt C from 0.73 Mha of burned peat, i.e. 260-315 t C/ha.
    Their inputs (recalled, unchecked against the paper): mean burn depth 0.51 +/- 0.05 m, bulk density
    0.1 g/cm^3, carbon content 57 %. One hectare at those values must fall in the published range."""
    ha = 1e4  # m2
    c_t = peat.carbon_mass(peat.peat_dry_mass(0.51, 0.1, ha), 0.57) / 1000
    assert 260 <= c_t <= 315
    lo = peat.carbon_mass(peat.peat_dry_mass(0.46, 0.1, ha), 0.57) / 1000
    hi = peat.carbon_mass(peat.peat_dry_mass(0.56, 0.1, ha), 0.57) / 1000
    # the depth range 0.46-0.56 m spans the published 0.19-0.23 Gt over 0.73 Mha (260-315 t/ha) within 2 %
    assert lo == pytest.approx(0.19e9 / 0.73e6, rel=0.02)
    assert hi == pytest.approx(0.23e9 / 0.73e6, rel=0.02)


def test_ballhorn_2009_carbon_spread_is_the_depth_spread_carried_linearly():
    """Ballhorn et al. 2009 (PNAS 106:21213, abstract): mean depth 0.33 +/- 0.18 m gave 49.15 +/- 26.81
    Mt C. Carbon is linear in depth, so the carbon +/- is the depth +/- carried linearly (0.545
    relative). Arithmetic only: the 0.18 m is a spread of depth across the burned area (recalled
    reading), not the error of the total (tests/science/test_uncertainty.py)."""
    bd, cf, area = 0.1, 0.55, 1e6
    c = peat.carbon_mass(peat.peat_dry_mass(np.array([0.33, 0.33 + 0.18]), bd, area), cf)
    rel = (c[1] - c[0]) / c[0]
    assert rel == pytest.approx(26.81 / 49.15, rel=1e-3)


def test_carbon_density_hand_arithmetic():
    # 0.1 g/cm^3 * 1000 * 0.55 = 55 kg C/m^3; over 0.3 m: 16.5 kg C/m^2
    assert peat.carbon_density(0.1, 0.55) == pytest.approx(55.0)
    assert peat.carbon_per_area(0.3, 0.1, 0.55) == pytest.approx(16.5)


@settings(max_examples=60, deadline=None)
@given(st.floats(0.0, 2.0), st.floats(0.02, 0.5), st.floats(0.3, 0.65), st.floats(0.1, 3.0))
def test_linear_in_bulk_density_and_carbon_fraction(depth, bd, cf, k):
    base = peat.carbon_mass(peat.peat_dry_mass(depth, bd, 4.0), cf)
    assert peat.carbon_mass(peat.peat_dry_mass(depth, bd * k, 4.0), cf) == pytest.approx(base * k, rel=1e-9, abs=1e-12)
    assert peat.carbon_mass(peat.peat_dry_mass(depth, bd, 4.0), cf * min(k, 1.0)) == pytest.approx(
        base * min(k, 1.0), rel=1e-9, abs=1e-12)


@settings(max_examples=60, deadline=None)
@given(st.floats(0.0, 3.0), st.floats(0.02, 0.5), st.floats(0.3, 0.65))
def test_no_carbon_created(depth, bd, cf):
    # carbon released never exceeds the carbon stock of the burned peat volume (depth * area * density)
    mass = peat.peat_dry_mass(depth, bd, 1.0)
    assert peat.carbon_mass(mass, cf) <= mass + 1e-12


def test_cap_depth_nan_thickness_means_unknown():
    np.testing.assert_allclose(peat.cap_depth(np.array([0.5, 0.5]), np.array([np.nan, 0.2])), [0.5, 0.2])


def test_cap_within_detection_keeps_the_mean_at_the_cap():
    """Synthetic truth: the true burn reaches the mineral soil (depth = thickness = 0.3 m) and the
    survey adds normal noise (sd 0.05 m). A plain min(d, thickness) biases the mean low by
    sigma / sqrt(2 pi) (the mean of min(e, 0) for a normal e: a textbook identity, checked here with
    scipy); the cap beyond the level of detection t sigma removes only the noise of the pixels beyond it,
    a bias of -sigma phi(t) (the partial expectation of a normal above t sigma: textbook identity)."""
    import scipy.stats

    rng = np.random.default_rng(7)
    sigma, thick, n = 0.05, 0.3, 400_000
    d = thick + rng.normal(0, sigma, n)
    lod = 1.96 * sigma
    plain = peat.cap_depth(d, thick).mean() - thick
    ours = peat.cap_depth(d, thick, tolerance=lod).mean() - thick
    assert plain == pytest.approx(-sigma / np.sqrt(2 * np.pi), abs=3e-4)
    t = 1.96
    expected = -sigma * scipy.stats.norm.pdf(t)
    assert ours == pytest.approx(expected, abs=3e-4)
    assert abs(ours) < abs(plain) / 5


def test_cap_at_zero_thickness_gives_no_negative_mass():
    """Mineral soil (thickness 0): no peat, so no burn depth and no mass, whatever the noise."""
    rng = np.random.default_rng(8)
    d = rng.normal(0, 0.05, 10_000)
    capped = peat.cap_depth(d, np.zeros_like(d), tolerance=0.1)
    assert np.all(capped == 0.0)
    assert np.all(peat.peat_dry_mass(capped, 0.1, 4.0) >= 0)
    assert np.isnan(peat.cap_depth(np.array([np.nan]), np.array([0.0]))[0])


def test_cap_far_beyond_thickness_still_caps():
    np.testing.assert_allclose(peat.cap_depth(np.array([0.9, 0.35, 0.2]), 0.3, tolerance=0.1), [0.3, 0.35, 0.2])


def test_fill_missing_keeps_valid_values_and_marks_holes():
    v, filled = peat.fill_missing(np.array([0.1, np.nan, 0.12]), 0.09)
    np.testing.assert_allclose(v, [0.1, 0.09, 0.12])
    assert filled.tolist() == [False, True, False]
    v2, filled2 = peat.fill_missing(np.array([np.nan]), np.nan)
    assert np.isnan(v2[0]) and not filled2.any()


def test_mineral_soil_from_thickness_and_extent():
    m = peat.mineral_soil(np.array([0.0, 1.0, np.nan, 2.0]), np.array([True, True, True, False]))
    assert m.tolist() == [True, False, False, True]
    assert not peat.mineral_soil(None, None)


# --- fire history across the years of a series (docs/method.md) ----------------------------------

def test_thickness_left_by_hand():
    from peatburn.science.peat import thickness_left

    # hand arithmetic: 0.5 m of peat; burned 0.3 m then 0.15 m -> 0.05 m left; a second pixel burned
    # 0.4 + 0.4 > 0.5 -> nothing left (never negative); a third never burned; a fourth of unknown
    # thickness stays unknown; negative survey noise (-0.02) and a burn without a depth (NaN) remove nothing
    t = np.array([0.5, 0.5, 0.5, np.nan, 0.5])
    d1 = np.array([0.3, 0.4, np.nan, 0.2, -0.02])
    d2 = np.array([0.15, 0.4, np.nan, 0.1, np.nan])
    np.testing.assert_allclose(thickness_left(t, [d1, d2]), [0.05, 0.0, 0.5, np.nan, 0.5])
    np.testing.assert_allclose(thickness_left(t, []), t)
    assert thickness_left(None, [d1]) is None


def test_fires_before_counts_earlier_burns():
    from peatburn.science.peat import fires_before

    np.testing.assert_array_equal(fires_before([np.array([True, False, True]), np.array([True, False, False])]),
                                  [2, 0, 1])
