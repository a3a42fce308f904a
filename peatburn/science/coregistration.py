"""Co-registration of the post-fire survey to the pre-fire one on stable ground.

The horizontal shift and vertical offset are estimated with the method of Nuth & Kääb (2011),

    dh / tan(slope) = a * cos(b - aspect) + c,

as implemented by :class:`xdem.coreg.NuthKaab` (iterative, bin-and-fit on aspect). We use xdem for
the estimation because it is a maintained, tested implementation of exactly this published method
that works on plain arrays with a transform; peatburn only chooses the sample and applies the result
block by block (as a corrected geotransform of the post survey plus a vertical term), which xdem's
own ``apply`` cannot do without the whole raster in memory.

An optional planar tilt (``a + b x + c y``) is fitted by least squares to the stable-ground
residuals after the shift, with outliers beyond 3 NMAD dropped (common practice in DEM
co-registration; compare the deramping step of xdem).

References
----------
Nuth, C. & Kääb, A. (2011). Co-registration and bias corrections of satellite elevation data sets
for quantifying glacier thickness change. The Cryosphere 5:271-290.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, asdict

import numpy as np

from .survey import nmad


@dataclass(frozen=True)
class ShiftEstimate:
    """Translation that aligns the post survey to the pre survey.

    ``shift_x``/``shift_y`` [m] are added to the post survey's geotransform origin;
    ``shift_z`` [m] is added to its elevations.
    """

    shift_x: float
    shift_y: float
    shift_z: float
    n_stable: int
    method: str = "Nuth & Kääb (2011) via xdem.coreg.NuthKaab"

    def to_dict(self):
        return asdict(self)


def estimate_shift(reference, to_align, stable, transform, crs, *, random_state=0,
                   max_samples=100_000) -> ShiftEstimate:
    """Estimate the horizontal and vertical shift of ``to_align`` against ``reference``.

    Parameters
    ----------
    reference, to_align : numpy.ndarray
        Elevations [m] on the same grid (2-D), NaN where missing.
    stable : numpy.ndarray of bool
        Pixels known to be unchanged between the surveys (besides the shift).
    transform : affine.Affine
        Geotransform of the arrays.
    crs : rasterio.crs.CRS
        Projected CRS of the arrays (Nuth & Kääb works in metres).
    random_state : int
        Seed of xdem's subsampling.
    max_samples : int
        Stable pixels xdem subsamples for the fit. 100 000 recovers the benchmark scene's shift of
        (0.6, -0.4) m within 2 cm and its datum offset within 0.3 mm, as 500 000 does, in a third
        of the time (measured on the 67 Mpx scene of benchmarks/; docs/performance.md).

    Returns
    -------
    ShiftEstimate
    """
    import xdem

    ok = stable & np.isfinite(reference) & np.isfinite(to_align)
    n = int(ok.sum())
    if n < 100:
        raise ValueError(f"only {n} stable-ground pixels with both surveys; need at least 100")
    coreg = xdem.coreg.NuthKaab(subsample=min(max_samples, n))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        coreg.fit(np.asarray(reference, dtype="float32"), np.asarray(to_align, dtype="float32"), inlier_mask=ok,
                  transform=transform, crs=crs, random_state=random_state)
    aff = coreg.meta["outputs"]["affine"]
    return ShiftEstimate(float(aff["shift_x"]), float(aff["shift_y"]), float(aff["shift_z"]), n)


def fit_plane(x, y, dh, *, reject=3.0):
    """Least-squares plane ``dh = c0 + c1 (x - x0) + c2 (y - y0)`` with outlier rejection.

    Parameters
    ----------
    x, y : array_like
        Coordinates [m].
    dh : array_like
        Residual elevation differences [m]; NaN ignored.
    reject : float
        Drop points further than ``reject`` NMAD from the median before fitting (common practice).

    Returns
    -------
    tuple
        (c0 [m], c1 [m/m], c2 [m/m], x0 [m], y0 [m]).
    """
    x = np.asarray(x, dtype="float64").ravel()
    y = np.asarray(y, dtype="float64").ravel()
    z = np.asarray(dh, dtype="float64").ravel()
    ok = np.isfinite(x) & np.isfinite(y) & np.isfinite(z)
    x, y, z = x[ok], y[ok], z[ok]
    med, s = np.median(z), nmad(z)
    if s > 0:
        keep = np.abs(z - med) <= reject * s
        x, y, z = x[keep], y[keep], z[keep]
    x0, y0 = float(x.mean()), float(y.mean())
    a = np.column_stack([np.ones_like(x), x - x0, y - y0])
    coef, *_ = np.linalg.lstsq(a, z, rcond=None)
    return float(coef[0]), float(coef[1]), float(coef[2]), x0, y0


def plane(x, y, coefficients):
    """Evaluate a plane from :func:`fit_plane` at ``x``, ``y`` [m] -> [m]."""
    c0, c1, c2, x0, y0 = coefficients
    return c0 + c1 * (np.asarray(x, dtype="float64") - x0) + c2 * (np.asarray(y, dtype="float64") - y0)
