"""Patch-sampling calibration check (Rolstad et al. 2009 Sect. 4; Hugonnet et al. 2022)."""

import math

import numpy as np
import pytest

from peatburn.errors import GridError
from peatburn.science import patches


def test_white_noise_patch_means_have_sigma_over_sqrt_n():
    """Independent pixels: the sd of a mean over n pixels is sigma / sqrt(n) (textbook)."""
    rng = np.random.default_rng(0)
    d = rng.normal(0.0, 0.2, (400, 400))
    m = patches.patch_means(d, np.ones(d.shape, bool), 10, n_patches=2000, seed=1)
    assert m.size == 2000
    assert patches.calibration_ratio(m, 0.2 / math.sqrt(100)) == pytest.approx(1.0, abs=0.06)


def test_hand_values_and_masking():
    d = np.arange(16.0).reshape(4, 4)
    stable = np.ones((4, 4), bool)
    m = patches.patch_means(d, stable, 4, n_patches=3)
    assert np.allclose(m, d.mean())  # the only 4 x 4 patch: mean of 0..15 = 7.5
    stable[:, :2] = False  # half the pixels unstable: below min_valid 0.8, the patch is dropped
    assert patches.patch_means(d, stable, 4, n_patches=3).size == 0
    m = patches.patch_means(d, stable, 4, n_patches=3, min_valid=0.5)
    assert np.allclose(m, d[:, 2:].mean())
    assert math.isnan(patches.calibration_ratio([], 1.0))
    assert patches.calibration_ratio([3.0, -4.0], 2.5) == pytest.approx(math.sqrt(12.5) / 2.5)


def test_patch_larger_than_grid_refused():
    with pytest.raises(GridError, match="does not fit"):
        patches.patch_means(np.zeros((5, 5)), np.ones((5, 5), bool), 6)


def test_sampled_patches_find_the_full_grid_patch_rms():
    """From a 10 % random sample of the pixels, the sampling-corrected RMS of patch means equals the
    RMS found on the full grid (numpy; Cochran 1977 correction), for white and correlated fields."""
    import scipy.ndimage as ndi

    rng = np.random.default_rng(4)
    n, pix = 600, 2.0
    white = rng.normal(0.0, 0.2, (n, n))
    corr = ndi.gaussian_filter(rng.standard_normal((n, n)), 8, mode="wrap")
    corr = corr / corr.std() * 0.1 + rng.normal(0.0, 0.1, (n, n))
    yy, xx = np.mgrid[0:n, 0:n] * pix
    for field in (white, corr):
        idx = rng.choice(n * n, n * n // 10, replace=False)
        for side in (10, 40):
            full = patches.patch_means(field, np.ones(field.shape, bool), side, n_patches=2000, seed=5)
            ref = float(np.sqrt(np.mean(full**2)))
            rms, kept, se = patches.sampled_patch_rms(xx.ravel()[idx], yy.ravel()[idx], field.ravel()[idx],
                                                      side * pix, pixel_size_m=pix, sample_fraction=0.1,
                                                      n_patches=1000, seed=6)
            assert kept > 600
            assert abs(rms - ref) < 3 * se + 0.05 * ref, (side, rms, ref, se)
            if field is corr:  # correlated error: the signal dominates the sampling noise
                assert rms == pytest.approx(ref, rel=0.15) and se < 0.1 * ref
