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

import math

import numpy as np

from ..errors import GridError, PhysicalRangeError

__all__ = ["patch_means", "calibration_ratio", "sampled_patch_rms"]


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


def sampled_patch_rms(x, y, values, side_m, *, pixel_size_m, sample_fraction, n_patches=300, min_valid=0.8,
                      seed=0):
    """RMS of stable-ground patch means estimated from a random sample of the stable pixels [m].

    A run keeps a simple random sample of its stable-ground residuals (a share ``f`` of them), not the
    whole grid. Square patches of side ``side_m`` are centred on sample points drawn at random; in a
    patch the ``k`` sampled points are a simple random sample of its ``N = k / f`` stable pixels, so
    their mean ``m`` has an extra sampling variance ``(1 - f) s^2 / k`` (``s^2`` the variance within
    the patch; Cochran 1977, Eq. 2.8 and Thm 2.4, recalled, unchecked). The unbiased estimate of
    the squared patch mean is ``m^2 - (1 - f) s^2 / k``; the result is the square root of its average
    over the patches (0 when negative).

    Parameters
    ----------
    x, y : array_like
        Coordinates of the sampled stable pixels [m] (pixel centres, projected CRS).
    values : array_like
        Elevation differences after co-registration at those pixels [m].
    side_m : float
        Patch side [m] (a zone of area A: sqrt(A)).
    pixel_size_m : float
        Pixel side [m].
    sample_fraction : float
        Share f of the stable pixels that the sample holds, in (0, 1].
    n_patches : int
        Patches tried.
    min_valid : float
        A patch counts when it holds at least this share of the sample points a fully stable patch
        would hold (``f * (side / pixel)^2``), and at least 2.
    seed : int
        Seed of the patch centres.

    Returns
    -------
    rms : float
        RMS of the patch means [m] (NaN without patches).
    n_kept : int
        Patches kept.
    rms_se : float
        Standard error of ``rms`` [m] (delta method, ``se(mean square) / (2 rms)``, the patches counted
        as at most ``stable area / patch area`` independent ones). With a small sample share and
        nearly uncorrelated error the sampling correction dominates and the check is loose.

    References
    ----------
    Cochran, W. G. (1977). Sampling Techniques, 3rd ed. Wiley (recalled, unchecked); Rolstad et al.
    (2009) Sect. 4; Hugonnet et al. (2022).
    """
    from scipy.spatial import cKDTree

    x = np.asarray(x, dtype="float64").ravel()
    y = np.asarray(y, dtype="float64").ravel()
    v = np.asarray(values, dtype="float64").ravel()
    ok = np.isfinite(x) & np.isfinite(y) & np.isfinite(v)
    x, y, v = x[ok], y[ok], v[ok]
    f = float(sample_fraction)
    side, pix = float(side_m), float(pixel_size_m)
    if not (0.0 < f <= 1.0 and side > 0 and pix > 0 and 0.0 < min_valid <= 1.0):
        raise PhysicalRangeError("sampled_patch_rms: sample_fraction and min_valid in (0, 1], side and pixel > 0")
    if v.size < 2:
        return float("nan"), 0
    tree = cKDTree(np.column_stack([x, y]))
    rng = np.random.default_rng(seed)
    centres = rng.integers(0, v.size, int(n_patches))
    # s x s pixels: an odd side is centred on a pixel, an even one on a pixel corner; the half side less
    # a hair keeps the pixel centres on the patch edge out
    s_px = max(1, int(round(side / pix)))
    off = 0.0 if s_px % 2 else pix / 2
    members = tree.query_ball_point(np.column_stack([x[centres] + off, y[centres] + off]),
                                    r=s_px * pix / 2 * (1 - 1e-9), p=np.inf)
    expected = f * s_px**2
    sq = []
    for idx in members:
        k = len(idx)
        if k < 2 or k < min_valid * expected:
            continue
        vals = v[idx]
        m = float(vals.mean())
        sq.append(m * m - (1.0 - f) * float(vals.var(ddof=1)) / k)
    if not sq:
        return float("nan"), 0, float("nan")
    sq = np.asarray(sq)
    ms = float(sq.mean())
    # standard error: overlapping patches are not independent; count at most as many as the sampled
    # stable ground holds side by side
    n_eff = max(1.0, min(sq.size, v.size / f / s_px**2))
    se_ms = float(sq.std(ddof=1)) / math.sqrt(n_eff) if sq.size > 1 else float("inf")
    rms = math.sqrt(max(ms, 0.0))
    return float(rms), int(sq.size), float(se_ms / (2.0 * rms)) if rms > 0 else float("inf")
