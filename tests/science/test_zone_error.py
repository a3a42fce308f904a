"""Zone-mean survey error of a multi-range variogram (Rolstad et al. 2009; Hugonnet et al. 2022),
checked against numerical integration (scipy), exact pixel double sums (numpy) and textbook limits."""

import math

import numpy as np
import pytest
from scipy.integrate import quad

from peatburn.errors import PhysicalRangeError
from peatburn.science import zone_error as ze

COMPS = [(0.010, 40.0), (0.004, 600.0)]  # partial sill [m2], range [m]


def _rho_sph(r, a):
    x = min(r / a, 1.0)
    return 1.0 - 1.5 * x + 0.5 * x**3


@pytest.mark.parametrize("area", [400.0, 5_000.0, 2.0e5, 5.0e6])
def test_sum_of_components_is_the_disc_average_of_the_summed_covariance(area):
    """Rolstad et al. (2009): var = (2 / L^2) int_0^L C(r) r dr from the disc centre, here with
    C(r) = sum_k c_k rho_k(r), integrated by scipy.integrate.quad (not by our code)."""
    big_l = math.sqrt(area / math.pi)
    ref = 2.0 / big_l**2 * quad(lambda r: sum(c * _rho_sph(r, a) for c, a in COMPS) * r, 0.0, big_l,
                                points=[40.0, 600.0] if big_l > 40 else None, limit=200)[0]
    c0, pix = 0.006, 4.0
    ref += c0 / max(area / pix, 1.0)  # the nugget: independent pixels, c0 / n
    assert float(ze.zone_mean_sd(area, c0, COMPS, pix)) ** 2 == pytest.approx(ref, rel=1e-6)


def test_upper_bound_of_the_exact_double_sum_over_a_square():
    """The disc-centre form bounds the exact variance of a square's mean from above (Riesz
    rearrangement; docs/uncertainty.md) and is close to it: exact pixel double sum by numpy."""
    pix, side = 5.0, 40  # 200 m square of 5 m pixels
    yy, xx = np.mgrid[0:side, 0:side] * pix
    p = np.column_stack([xx.ravel(), yy.ravel()])
    h = np.hypot(p[:, None, 0] - p[None, :, 0], p[:, None, 1] - p[None, :, 1])
    cov = sum(c * np.where(h < a, 1 - 1.5 * h / a + 0.5 * (h / a) ** 3, 0.0) for c, a in COMPS)
    exact = cov.mean()
    ours = float(ze.zone_mean_sd((side * pix) ** 2, 0.0, COMPS, pix**2)) ** 2
    assert 0.85 * ours <= exact <= ours


def test_limits_and_median():
    pix = 1.0
    # nugget only: mean sd = sqrt(c0 / n); median sd = sqrt(pi/2) times it (textbook, e.g. Cramér 1946)
    assert float(ze.zone_mean_sd(100.0, 0.04, [], pix)) == pytest.approx(0.02)
    assert ze.stable_median_sd(100.0, 0.04, [], pix) == pytest.approx(0.02 * math.sqrt(math.pi / 2))
    # a zone of no area carries the full per-pixel sd
    assert float(ze.zone_mean_sd(0.0, 0.01, COMPS, pix)) == pytest.approx(math.sqrt(0.024))
    # the median of correlated errors is a little less efficient than the mean (arcsin rho >= rho)
    med = ze.stable_median_sd(4e6, 0.006, COMPS, pix)
    mean = ze.stable_median_sd(4e6, 0.006, COMPS, pix, "mean")
    assert mean < med < 1.1 * mean
    zone, bias = ze.coregistered_zone_sd(1e4, 4e6, 0.006, COMPS, pix)
    assert float(zone) == pytest.approx(float(ze.zone_mean_sd(1e4, 0.006, COMPS, pix)))
    assert bias == pytest.approx(math.sqrt(med**2 - mean**2))
    with pytest.raises(PhysicalRangeError):
        ze.zone_mean_sd(1.0, -1.0, COMPS, pix)
    with pytest.raises(PhysicalRangeError):
        ze.zone_mean_sd(1.0, 0.0, [(0.01, 0.0)], pix)


def test_components_scaled_to_the_pixel_sd():
    fit = [{"nugget": 0.01}, {"partial_sill": 0.02, "range_m": 30.0}, {"partial_sill": 0.01, "range_m": 500.0}]
    c0, comps = ze.components_from_fit(fit, 0.4)  # sigma^2 = 0.16 = 4 x the fitted 0.04
    assert c0 + sum(c for c, _ in comps) == pytest.approx(0.16)
    assert c0 == pytest.approx(0.04) and comps == [(pytest.approx(0.08), 30.0), (pytest.approx(0.04), 500.0)]
    # a sigma below the fitted sill (heavy tails: the NMAD under the sd) keeps the fitted sill
    c0b, compsb = ze.components_from_fit(fit, 0.05)
    assert c0b == pytest.approx(0.01) and compsb == [(pytest.approx(0.02), 30.0), (pytest.approx(0.01), 500.0)]


def test_surface_change_term_adds_its_variance_over_the_surveyed_depth():
    """Issue 16 item 4: a run-wide non-fire surface change of sd s [m] adds (s x sum rho f A)^2 to the
    carbon variance of every zone and of their total (hand arithmetic: an additive depth error)."""
    from peatburn.science import uncertainty as unc

    sums = {"area_m2_survey": np.array([1e4, 4e4]), "carbon_kg": np.array([1.2e5, 5.0e5]),
            "peat_kg": np.array([2.2e5, 9.0e5]), "volume_m3": np.array([3e3, 1.2e4]),
            "rho_area_survey": np.array([1e6, 4e6]), "rho_f_area_survey": np.array([5.5e5, 2.2e6])}
    src = unc.default_sources(survey_bias_sd_m=0.0, survey_sigma_m=0.0, survey_range_m=1.0,
                              surface_change_sd_m=0.04, bulk_density_cv=0.0, carbon_fraction_sd=0.0)
    assert "surface_change" in [s.name for s in src]
    comp = unc.variance_components(sums, unc.sources_to_params(src), quantity="carbon_kg", total=True)
    expected = (0.04 * np.array([5.5e5, 2.2e6, 2.75e6])) ** 2  # zones, then the total: run-wide, derivatives add
    assert np.allclose(comp["surface_change"], expected)
    with pytest.raises(PhysicalRangeError):
        unc.default_sources(survey_bias_sd_m=0.0, survey_sigma_m=0.0, survey_range_m=1.0, surface_change_sd_m=-1.0)


def test_zone_at_its_own_rms_sd_when_the_spread_varies():
    """With survey_scale_ref_m, a zone whose pixels' A sd^2 sum is k^2 times its area x s_ref^2 gets k
    times the stationary zone sd (hand arithmetic: the model is stated at s_ref); a trend adds apart."""
    from peatburn.science import uncertainty as unc

    comps = [(0.004, 30.0)]
    area = np.array([3600.0, 3600.0, 3600.0])
    base = {"area_m2_survey": area, "rho_area_survey": area, "rho_f_area_survey": area, "carbon_kg": area,
            "peat_kg": area, "volume_m3": area}
    params = {"survey_nugget_m2": 0.002, "survey_components": comps, "pixel_area_m2": 4.0,
              "survey_trend_sd_m": 0.01}
    stationary = unc.variance_components(base, params, quantity="volume_m3")["survey_random"]
    s_ref = 0.08
    hetero = unc.variance_components({**base, "sd2_area_survey": area * s_ref**2 * np.array([1.0, 4.0, 0.25])},
                                     {**params, "survey_scale_ref_m": s_ref}, quantity="volume_m3")["survey_random"]
    v0 = float(ze.zone_mean_sd(3600.0, 0.002, comps, 4.0)) ** 2
    expect = (np.array([1.0, 4.0, 0.25]) * v0 + 0.01**2) * 3600.0**2
    assert np.allclose(hetero, expect, rtol=1e-9)
    assert np.allclose(stationary, (v0 + 0.01**2) * 3600.0**2, rtol=1e-9)


def test_residual_shift_sums_add_the_shift_times_the_mean_gradient():
    """Zone sums A s dz/dx = Sx and A s dz/dy = Sy add (Sx^2 + Sy^2) / A^2 to the zone-level variance of the
    survey error (hand arithmetic: a shift of sd s per axis times the zone's mean gradient)."""
    from peatburn.science import uncertainty as unc

    area = np.array([3600.0, 3600.0])
    base = {"area_m2_survey": area, "rho_area_survey": area, "rho_f_area_survey": area, "carbon_kg": area,
            "peat_kg": area, "volume_m3": area}
    params = {"survey_nugget_m2": 0.002, "survey_components": [(0.004, 30.0)], "pixel_area_m2": 4.0}
    v0 = float(ze.zone_mean_sd(3600.0, 0.002, [(0.004, 30.0)], 4.0)) ** 2
    sx, sy = np.array([0.0, 3600 * 0.3 * 0.05]), np.array([0.0, -3600 * 0.3 * 0.02])
    var = unc.variance_components({**base, "shift_gx_area_survey": sx, "shift_gy_area_survey": sy}, params,
                                  quantity="volume_m3")["survey_random"]
    assert np.allclose(var, (v0 + np.array([0.0, (0.3 * 0.05) ** 2 + (0.3 * 0.02) ** 2])) * 3600.0**2, rtol=1e-9)
