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
