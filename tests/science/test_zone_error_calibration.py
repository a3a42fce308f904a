"""Issue 16, item 1: does the run's survey-error model predict the spread of zone-mean errors on
synthetic survey differences with a known truth?

The truth is built here: a difference field (several error structures, not only the model's own
spherical one), co-registered by its median, cut into square zones; the realised RMS of the zone
means is computed with numpy. The prediction is the run's chain
(:func:`peatburn.science.zone_error.model_from_stable_sample` on a 50,000-pixel sample: planar trend,
log-binned variogram, one or two spherical ranges by an F test, zone mean and residual bias without
counting the long-range error twice). A calibrated model gives predicted / realised near 1 (the
patch-size check of Rolstad et al. 2009 §4 and Hugonnet et al. 2022, recalled, unchecked).

Measured (scene seed 1, the first one tried; 1.6 km scene, 2 m pixels, zones 20-200 m): white +
Gaussian 20 m 1.04-1.29; residual shift on textured terrain 1.01-1.11; 0.3 m tilt 1.02-1.07; 5 cm
field correlated over 300 m 0.72-1.04. The former chain (one spherical range, an independent residual
bias) gives 0.4-0.6 at 200 m zones on the last two (the control test below). The 200 m zones are 64
per scene and share long-range error, so their realised RMS is itself uncertain by about +-10-20 %.
"""

import math

import numpy as np
import pytest
import scipy.ndimage as ndi

from peatburn.science import uncertainty as unc
from peatburn.science import variogram as vg
from peatburn.science import zone_error

N, PIX = 800, 2.0  # 1.6 km square, 2 m pixels


def _gauss_field(rng, sd, length_m):
    f = ndi.gaussian_filter(rng.standard_normal((N, N)), length_m / PIX / math.sqrt(2), mode="wrap")
    return f / f.std() * sd


def _scene(kind):
    rng = np.random.default_rng(1)
    err = rng.standard_normal((N, N)) * 0.10 + _gauss_field(rng, 0.10, 20.0)
    if kind == "shift_on_texture":
        terrain = _gauss_field(rng, 1.0, 6.0) + _gauss_field(rng, 3.0, 100.0)
        gy, gx = np.gradient(terrain, PIX)
        err = err + 0.3 * gx + 0.2 * gy  # dz = residual shift . terrain gradient (Nuth & Kääb 2011)
    elif kind == "tilt":
        err = err + (np.arange(N)[None, :] / N - 0.5) * 0.3
    elif kind == "long_range":
        err = err + _gauss_field(rng, 0.05, 300.0)
    return err - np.median(err), rng


def _ratios(kind, model="run"):
    """Predicted / realised sd of square zone means, per zone side [m].

    ``model="run"``: the run's chain (engine.intervals.survey_error_model): NMAD sigma, nugget + two
    spherical components fitted on the sample (Hugonnet et al. 2022) scaled to sigma^2
    (:func:`zone_error.components_from_fit`), zone sd and residual bias from
    :func:`zone_error.coregistered_zone_sd` (the long-range error is not counted twice).
    ``model="single"``: the former chain, one spherical range and an independent residual bias."""
    e, rng = _scene(kind)
    yy, xx = np.mgrid[0:N, 0:N] * PIX
    idx = rng.choice(N * N, 50_000, replace=False)  # the run keeps 50,000 stable-ground residuals
    x, y, r = xx.ravel()[idx], yy.ravel()[idx], e.ravel()[idx]
    scene = (N * PIX) ** 2
    if model == "run":
        m = zone_error.model_from_stable_sample(x, y, r, pixel_area_m2=PIX**2, stable_area_m2=scene)
        comps = [(c["partial_sill_m2"], c["range_m"]) for c in m["components"]]

        def sd(area):
            z, b = zone_error.coregistered_zone_sd(area, scene, m["nugget_m2"], comps, PIX**2, m["trend_sd_m"])
            return math.hypot(float(z), b)
    else:
        lags, gam, cnt = vg.empirical_variogram(x, y, r, max_lag=N * PIX / 3)
        sigma = 1.482602 * float(np.median(np.abs(r - np.median(r))))
        fit = vg.fit_spherical(lags, gam, cnt)
        nu = fit["nugget"] / fit["sill"]
        bias = unc.residual_bias_sd(sigma, fit["range_m"], scene, nugget_fraction=nu, pixel_area_m2=PIX**2)

        def sd(area):
            return math.hypot(float(unc.correlated_sum_sd(sigma, fit["range_m"], area, nu, pixel_area_m2=PIX**2)), bias)
    out = {}
    for z in (10, 25, 50, 100):
        k = N // z
        means = e[:k * z, :k * z].reshape(k, z, k, z).mean(axis=(1, 3))
        out[z * PIX] = sd((z * PIX) ** 2) / float(np.sqrt(np.mean(means**2)))
    return out


@pytest.mark.parametrize("kind", ["white_gauss", "shift_on_texture", "tilt", "long_range"])
def test_zone_sd_calibrated(kind):
    """The run's model holds short- and long-range error alike (was xfail with one range)."""
    ratios = _ratios(kind)
    for size, ratio in ratios.items():
        assert 0.67 <= ratio <= 1.5, f"{kind}, {size:.0f} m zones: predicted/realised = {ratio:.2f}"


@pytest.mark.parametrize("kind", ["tilt", "long_range"])
def test_single_range_model_is_too_narrow_on_long_range_error(kind):
    """The control: the former single-range model underestimates the 200 m zones (why issue 16 changed it)."""
    assert _ratios(kind, model="single")[200.0] < 0.67


@pytest.mark.parametrize("kind", ["white_gauss", "tilt"])
def test_patch_check_measures_the_realised_zone_error(kind):
    """The user's calibration check (random stable-ground patches of a zone's size) finds the RMS of
    the tiled zone means built here, so its ratio to a predicted sd is the calibration ratio."""
    from peatburn.science import patches

    e, _ = _scene(kind)
    for z in (25, 100):
        k = N // z
        realised = float(np.sqrt(np.mean(e[:k * z, :k * z].reshape(k, z, k, z).mean(axis=(1, 3)) ** 2)))
        m = patches.patch_means(e, np.ones(e.shape, bool), z, n_patches=400, seed=2)
        assert patches.calibration_ratio(m, realised) == pytest.approx(1.0, abs=0.2), f"{kind}, {z} px"
