"""peatburn.science.error_scale: a survey error spread that varies in space (issue 16 item 4).

Truths are built here: synthetic stable-ground differences whose sd follows a stated formula or a stated
map; the checks are that the fit recovers the formula's coefficients and that the choice says no where the
spread is constant."""

import math

import numpy as np
import pytest

from peatburn.science import error_scale as es


def test_surface_slope_of_a_plane():
    # z = 0.1 x + 0.2 y on 2 m pixels (rows run north to south: y falls with the row): |grad z| = sqrt(0.05)
    cols, rows = np.meshgrid(np.arange(6) * 2.0, np.arange(5) * 2.0)
    z = 0.1 * cols - 0.2 * rows
    assert np.allclose(es.surface_slope(z, 2.0), math.sqrt(0.05))


def test_slope_dependent_spread_is_recovered_and_chosen():
    rng = np.random.default_rng(3)
    s = np.abs(rng.normal(0.0, 0.3, 40_000))
    # noise of flat ground 0.05 m plus a residual shift of 0.4 m across the slope: sd^2 = 0.05^2 + 0.4^2 s^2
    v = rng.normal(size=s.size) * np.sqrt(0.05**2 + 0.4**2 * s**2)
    ch = es.choose_error_scale(v, {"slope": s})
    assert ch["chosen"]
    assert ch["coefficients"]["const"] == pytest.approx(0.05**2, rel=0.15)
    assert ch["coefficients"]["slope"] == pytest.approx(0.4**2, rel=0.1)


def test_constant_spread_is_not_chosen():
    rng = np.random.default_rng(4)
    s = np.abs(rng.normal(0.0, 0.3, 40_000))
    ch = es.choose_error_scale(rng.normal(0.0, 0.1, s.size), {"slope": s})
    assert not ch["chosen"]


def test_quality_raster_strips_scale_the_sd():
    rng = np.random.default_rng(5)
    q = np.where(rng.random(40_000) < 0.5, 0.05, 0.15)  # two flight strips, the user's sd
    ch = es.choose_error_scale(rng.normal(size=q.size) * q, {"slope": np.abs(rng.normal(0, 0.3, q.size)),
                                                              "quality": q})
    assert ch["chosen"]
    assert ch["coefficients"]["quality"] == pytest.approx(1.0, rel=0.1)


def test_local_map_follows_strips_and_not_white_noise():
    rng = np.random.default_rng(6)
    x, y = rng.uniform(0, 1000, 40_000), rng.uniform(0, 1000, 40_000)
    white = es.choose_local_scale(x, y, rng.normal(0.0, 0.1, x.size))
    assert not white["chosen"]
    sd = np.where(x < 500, 0.04, 0.12)
    ch = es.choose_local_scale(x, y, rng.normal(size=x.size) * sd)
    assert ch["chosen"]
    f = es.local_scale_at(ch, np.array([50.0, 950.0]), np.array([500.0, 500.0]))
    # the factors are relative to the NMAD of the whole mixture; their ratio is the strips' ratio, 3
    assert f[1] / f[0] == pytest.approx(3.0, rel=0.1)


def test_local_shift_map_finds_a_growing_misregistration_and_not_noise():
    """A residual shift growing from -0.6 to +0.6 m along x, dz = shift(x) dz/dx (Nuth & Kääb 2011): the cells'
    shift sd per axis is |shift| / sqrt(2) (model: a shift of unknown direction, the estimate's size shared
    by two axes); noise unrelated to the slope is not taken for a shift."""
    rng = np.random.default_rng(7)
    n = 40_000
    x, y = rng.uniform(0, 1000, n), rng.uniform(0, 1000, n)
    gx, gy = rng.normal(0, 0.15, n), rng.normal(0, 0.15, n)
    noise = rng.normal(0, 0.04, n)
    assert not es.choose_local_shift(x, y, noise, gx, gy)["chosen"]
    shift = (x / 1000 - 0.5) * 1.2
    ch = es.choose_local_shift(x, y, noise + shift * gx, gx, gy)
    assert ch["chosen"]
    k = len(ch["x_centres"])
    edge = (np.asarray(ch["x_centres"])[-1] / 1000 - 0.5) * 1.2  # the shift at the last cells' centre
    s = es.local_shift_at(ch, np.array([ch["x_centres"][-1]] * 3), np.array(ch["y_centres"][:3]))
    assert np.allclose(s, abs(edge) / math.sqrt(2), rtol=0.1)
    assert k >= 2
