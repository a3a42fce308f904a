"""Patch sampling of stable ground: an empirical check of the predicted zone-mean survey error.

Square patches of a zone's size are laid at random on the stable ground (pixels known not to have
changed between the surveys); the mean elevation difference of each patch is a draw of the error a
zone of that size carries. Their RMS over the predicted sd is the calibration ratio: near 1 the
predicted sd is calibrated, above 1 it is too narrow, below 1 too wide. The check of Rolstad et
al. (2009, Sect. 4: averages over areas of increasing size on stable ground) and of Hugonnet et al.
(2022, the "patches method"; recalled, unchecked).

Pure functions: arrays in [m], arrays out; no files, no printing.

References
----------
Rolstad, C., Haug, T. & Denby, B. (2009). J. Glaciol. 55(192):666-680, doi:10.3189/002214309789470950.
Hugonnet, R. et al. (2022). IEEE J. Sel. Top. Appl. Earth Obs. Remote Sens. 15:6456-6472,
doi:10.1109/JSTARS.2022.3188922 (recalled, unchecked).
"""

from __future__ import annotations

import numpy as np

from ..errors import GridError, PhysicalRangeError

__all__ = ["patch_means", "calibration_ratio"]


def patch_means(diff, stable, side_px, *, n_patches=200, min_valid=0.8, seed=0):
    """Means of the elevation difference over random square patches of stable ground.

    Parameters
    ----------
    diff : array_like
        Elevation difference after co-registration [m], 2-D; NaN where unknown.
    stable : array_like of bool
        Stable-ground mask, same shape.
    side_px : int
        Patch side [pixels] (a zone of area A on pixels of area p: side = round(sqrt(A / p))).
    n_patches : int
        Patches tried (upper-left corners drawn uniformly; overlapping patches allowed).
    min_valid : float
        Share of a patch's pixels that must be stable and finite for the patch to count.
    seed : int
        Seed of the patch positions.

    Returns
    -------
    numpy.ndarray
        Mean difference of each kept patch [m] (may be fewer than ``n_patches``).

    Raises
    ------
    GridError
        The patch does not fit in the grid.
    """
    d = np.asarray(diff, dtype="float64")
    ok = np.asarray(stable, dtype=bool) & np.isfinite(d)
    if d.ndim != 2 or ok.shape != d.shape:
        raise PhysicalRangeError("patch_means: diff and stable must be 2-D arrays of the same shape")
    s = int(side_px)
    if s < 1 or s > min(d.shape):
        raise GridError(f"patch_means: a patch of {s} pixels does not fit in a {d.shape[0]} x {d.shape[1]} grid; "
                        "give more stable ground or check the zone size")
    if not 0.0 < min_valid <= 1.0:
        raise PhysicalRangeError("patch_means: min_valid must lie in (0, 1]")
    # summed-area tables: each patch sum in O(1)
    sat_v = np.pad(np.where(ok, d, 0.0).cumsum(0).cumsum(1), ((1, 0), (1, 0)))
    sat_n = np.pad(ok.astype("int64").cumsum(0).cumsum(1), ((1, 0), (1, 0)))
    rng = np.random.default_rng(seed)
    r0 = rng.integers(0, d.shape[0] - s + 1, int(n_patches))
    c0 = rng.integers(0, d.shape[1] - s + 1, int(n_patches))

    def box(t):
        return t[r0 + s, c0 + s] - t[r0, c0 + s] - t[r0 + s, c0] + t[r0, c0]

    n = box(sat_n)
    keep = n >= min_valid * s * s
    return box(sat_v)[keep] / n[keep]


def calibration_ratio(means, predicted_sd):
    """RMS of the patch means over the predicted sd of a zone mean [-]; NaN without patches.

    Near 1: calibrated; > 1: predicted sd too small; < 1: too large. The patch means are taken
    about zero (co-registration removed the stable ground's centre), so the residual bias the
    model adds to every zone is part of what they measure.
    """
    m = np.asarray(means, dtype="float64")
    if m.size == 0 or not float(predicted_sd) > 0:
        return float("nan")
    return float(np.sqrt(np.mean(m**2)) / float(predicted_sd))
