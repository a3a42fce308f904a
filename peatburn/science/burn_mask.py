"""Burn scars from a classified burned-area raster: which pixels burned, mask clean-up, fires as
connected components, and each fire's first and last day.

Pure array work (no files, no CRS): :mod:`peatburn.io.burn_rasters` reads the rasters, turns
metres and hectares into pixels and polygonises the labels.

The clean-up steps are the usual morphological filters of a classified map (common practice):
closing with a disk bridges gaps and notches narrower than about its diameter, opening removes
spurs and lines thinner than that, and a minimum mapping unit drops burned patches and fills
unburned holes below a size. Every step is off by default, so a mask is used as delivered.

Fires are the connected components of the burned pixels under 8-connectivity (pixels touching
by an edge or a corner belong to one fire), labelled with :func:`skimage.measure.label`
(``connectivity=2``). Holes (unburned patches inside a fire) are their dual, 4-connected.

References
----------
van der Walt, S. et al. (2014). scikit-image: image processing in Python. PeerJ 2:e453.
Soille, P. (2003). Morphological Image Analysis, 2nd ed. Springer (opening, closing: ch. 4; recalled).
"""

from __future__ import annotations

import datetime as dt
import inspect

import numpy as np
from scipy import ndimage
from skimage import measure, morphology

#: Day-of-year codes run from 1 to 366; date codes of the form YYYYMMDD from 1900-01-01 on.
DOY_MAX = 366
YYYYMMDD_MIN = 19000101


def burned_pixels(values, valid, burned_values=None) -> np.ndarray:
    """Which pixels of a classified raster burned.

    Parameters
    ----------
    values : array
        The raster's values [class code].
    valid : bool array
        False where the raster has no data; such a pixel is never burned.
    burned_values : sequence of numbers, optional
        Class codes meaning burned; default: every non-zero value.

    Returns
    -------
    bool array
    """
    values = np.asarray(values)
    burned = values != 0 if burned_values is None else np.isin(values, np.asarray(burned_values))
    if np.issubdtype(values.dtype, np.floating):
        burned &= np.isfinite(values)
    return burned & np.asarray(valid, dtype=bool)


def footprint(radius_x_px: float, radius_y_px: float) -> np.ndarray | None:
    """The structuring element of a disk of a given radius in metres, in pixels.

    A disk (:func:`skimage.morphology.disk`) on square pixels; on rectangular pixels (a lon/lat
    grid away from the equator) the ellipse that is a disk on the ground
    (:func:`skimage.morphology.ellipse`). None when the radius rounds to less than one pixel.

    Parameters
    ----------
    radius_x_px, radius_y_px : float
        The radius divided by the pixel width and by the pixel height [px].
    """
    rx, ry = int(round(radius_x_px)), int(round(radius_y_px))
    if rx < 1 and ry < 1:
        return None
    if rx == ry:
        return morphology.disk(rx).astype(bool)
    return morphology.ellipse(max(rx, 0), max(ry, 0)).astype(bool)


def clean_mask(burned, valid=None, close=None, open_=None, min_object_px: int = 0, min_hole_px: int = 0):
    """Morphological clean-up of a burned mask, in the order closing, opening, minimum mapping unit.

    Parameters
    ----------
    burned : bool array
    valid : bool array, optional
        Pixels with data; a pixel without data is unburned after every step (closing or hole
        filling never spreads a fire onto it).
    close, open_ : bool array, optional
        Structuring elements (:func:`footprint`) of the closing and the opening; None skips the step.
    min_object_px : int
        Burned patches (8-connected) of fewer pixels are removed
        (:func:`skimage.morphology.remove_small_objects`).
    min_hole_px : int
        Enclosed unburned patches (4-connected) of fewer pixels are filled; a patch open to the
        raster's edge is not a hole.

    Returns
    -------
    bool array
        The cleaned mask.
    """
    out = np.asarray(burned, dtype=bool).copy()
    if close is not None:
        out = _binary("closing", out, close)
    if open_ is not None:
        out = _binary("opening", out, open_)
    if min_object_px > 1:
        out = _remove_small_objects(out, int(min_object_px))
    if min_hole_px > 1:
        out = _fill_holes(out, int(min_hole_px))
    if valid is not None:
        out &= np.asarray(valid, dtype=bool)
    return out


def _binary(op: str, mask, fp):
    """Binary closing or opening with the outside of the raster unburned: the mask is padded with
    unburned pixels wider than the footprint (so the result does not depend on how the library
    treats borders), closed or opened (:func:`skimage.morphology.closing`, ``opening``: on a
    bool image the binary operations), and cropped."""
    r = max(fp.shape) // 2 + 1
    padded = np.pad(mask, r, mode="constant", constant_values=False)
    return np.asarray(getattr(morphology, op)(padded, fp), dtype=bool)[r:-r, r:-r]


def _fill_holes(mask, n_px: int):
    """Fill the unburned patches (4-connected, :func:`skimage.measure.label`) of fewer than ``n_px``
    pixels that are enclosed: a patch open to the raster's edge is not a hole (the ground beyond the
    edge is unknown). What :func:`skimage.morphology.remove_small_holes` does, less the edge patches."""
    bg = measure.label(~mask, connectivity=1)
    small = np.bincount(bg.ravel()) < n_px
    small[0] = False  # label 0: the burned pixels
    small[np.concatenate([bg[0], bg[-1], bg[:, 0], bg[:, -1]])] = False
    return mask | small[bg]


def _remove_small_objects(mask, n_px: int):
    """Drop burned patches (8-connected) of fewer than ``n_px`` pixels, on scikit-image before and
    after 0.26 (which renamed ``min_size``, "fewer than", to ``max_size``, "at most")."""
    func = morphology.remove_small_objects
    if "max_size" in inspect.signature(func).parameters:
        return func(mask, max_size=n_px - 1, connectivity=2)
    return func(mask, min_size=n_px, connectivity=2)


def label_fires(mask) -> tuple[np.ndarray, int]:
    """Number each fire: the 8-connected components of the burned pixels.

    Parameters
    ----------
    mask : bool array

    Returns
    -------
    labels : int32 array
        0 unburned, 1..n the fires, numbered in the order their first pixel appears row by row.
    n : int
        The number of fires.

    References
    ----------
    :func:`skimage.measure.label` with ``connectivity=2`` (van der Walt et al. 2014).
    """
    labels, n = measure.label(np.asarray(mask, dtype=bool), connectivity=2, background=0, return_num=True)
    return labels.astype(np.int32, copy=False), int(n)


def date_codes_to_days(codes, valid, year: int | None = None) -> tuple[np.ndarray, str]:
    """Day of burn codes -> days since 0001-01-01 (proleptic Gregorian ordinal), -1 where none.

    The encoding is read from the values: all in 1..366 is a day of the year (of ``year``); all of
    the form YYYYMMDD (from 19000101) is a calendar date. Zero and pixels without data mean no date.

    Parameters
    ----------
    codes : array
        Day-of-burn raster values [day of year or YYYYMMDD].
    valid : bool array
    year : int, optional
        The year of day-of-year codes (the run's year).

    Returns
    -------
    days : int64 array
        Ordinal days, -1 where there is no date.
    encoding : str
        ``"day of year"``, ``"YYYYMMDD"`` or ``"none"`` (no dated pixel).

    Raises
    ------
    ValueError
        Codes of neither form, a mixture, an impossible calendar date, or day-of-year codes with no
        year (the message says which).
    """
    codes = np.asarray(codes)
    valid = np.asarray(valid, dtype=bool) & (codes != 0)
    if np.issubdtype(codes.dtype, np.floating):
        valid &= np.isfinite(codes)
        if np.any(codes[valid] != np.round(codes[valid])):
            raise ValueError("day-of-burn codes must be whole numbers")
    days = np.full(codes.shape, -1, dtype=np.int64)
    if not valid.any():
        return days, "none"
    v = codes[valid].astype(np.int64)
    uniq = np.unique(v)  # few distinct days: convert each once
    if uniq.min() >= 1 and uniq.max() <= DOY_MAX:
        if year is None:
            raise ValueError("day-of-year codes need the year: set run.year")
        first = dt.date(int(year), 1, 1).toordinal() - 1
        last_day = 366 if dt.date(int(year), 12, 31).timetuple().tm_yday == 366 else 365
        if uniq.max() > last_day:
            raise ValueError(f"day of year {int(uniq.max())} does not exist in {year}")
        conv = {int(u): first + int(u) for u in uniq}
        encoding = "day of year"
    elif uniq.min() >= YYYYMMDD_MIN:
        conv = {}
        for u in uniq.tolist():
            try:
                conv[u] = dt.date(u // 10000, (u // 100) % 100, u % 100).toordinal()
            except ValueError:
                raise ValueError(f"{u} is not a calendar date YYYYMMDD") from None
        encoding = "YYYYMMDD"
    else:
        raise ValueError(f"codes from {int(uniq.min())} to {int(uniq.max())} are neither days of the year "
                         f"(1-366) nor dates YYYYMMDD")
    lut_keys = np.array(sorted(conv), dtype=np.int64)
    lut_vals = np.array([conv[k] for k in lut_keys.tolist()], dtype=np.int64)
    days[valid] = lut_vals[np.searchsorted(lut_keys, v)]
    return days, encoding


def fire_day_range(labels, n: int, days) -> tuple[np.ndarray, np.ndarray]:
    """Each fire's first and last day of burning: the earliest and latest dated pixel.

    Parameters
    ----------
    labels : int array
        Fires 1..n (:func:`label_fires`), 0 unburned.
    n : int
    days : int array
        Ordinal day of each pixel, -1 where undated (:func:`date_codes_to_days`).

    Returns
    -------
    first, last : int64 arrays of length n
        Ordinal days; -1 for a fire with no dated pixel.
    """
    labels = np.asarray(labels).ravel()
    days = np.asarray(days, dtype=np.int64).ravel()
    sel = (labels > 0) & (days >= 0)
    if n == 0:
        return np.empty(0, dtype=np.int64), np.empty(0, dtype=np.int64)
    lab = np.where(sel, labels, 0)
    index = np.arange(1, n + 1)
    dated = np.bincount(lab, minlength=n + 1)[1:] > 0
    first = np.asarray(ndimage.minimum(days, lab, index), dtype=np.int64)
    last = np.asarray(ndimage.maximum(days, lab, index), dtype=np.int64)
    return np.where(dated, first, -1), np.where(dated, last, -1)
