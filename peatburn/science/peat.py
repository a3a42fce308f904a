"""Peat dry mass and carbon from burn depth, dry bulk density and carbon fraction.

    M = d * rho_b * A        C = M * f_C

the volume-times-density approach of Page et al. (2002) and Ballhorn et al. (2009), with carbon
density rho_b * f_C as in Warren et al. (2012). Units: d [m], rho_b [g cm-3] (1 g cm-3 =
1000 kg m-3), A [m2], M [kg], f_C [-], C [kg].

References
----------
Page, S. E., Siegert, F., Rieley, J. O., Boehm, H.-D. V., Jaya, A. & Limin, S. (2002). The amount of
carbon released from peat and forest fires in Indonesia during 1997. Nature 420:61-65.
Ballhorn, U., Siegert, F., Mason, M. & Limin, S. (2009). Derivation of burn scar depths and estimation
of carbon emissions with LIDAR in Indonesian peatlands. PNAS 106:21213-21218.
Warren, M. W., Kauffman, J. B., Murdiyarso, D., Anshari, G., Hergoualc'h, K., Kurnianto, S., Purbopuspito,
J., Gusmayanti, E., Afifudin, M., Rahajoe, J., Alhamd, L., Limin, S. & Iswandi, A. (2012). A cost-efficient
method to assess carbon stocks in tropical peat soil. Biogeosciences 9:4477-4485.
"""

from __future__ import annotations

import numpy as np

#: kg m-3 per g cm-3 (exact: 1 g cm-3 = 1000 kg m-3; SI definition).
KG_M3_PER_G_CM3 = 1000.0
#: kg m-2 per t ha-1 (exact: 1000 kg per 10,000 m2; SI definition).
KG_M2_PER_T_HA = 0.1
#: ha per m2 (exact: 1 ha = 10,000 m2).
HA_PER_M2 = 1e-4


def cap_depth(depth, thickness, tolerance=0.0):
    """Burn depth never exceeds the peat that is there [m].

    ``min(depth, thickness)`` applied to a noisy measured depth truncates only the upper tail of
    the noise where the true burn reaches the mineral soil, a low bias near the cap (of
    ``E[min(e, 0)] = -sigma / sqrt(2 pi)`` per pixel when the true depth equals the thickness), and
    where the thickness is 0 it keeps every negative noise value: negative mass. So the cap is
    applied only where the depth exceeds the thickness by more than ``tolerance`` (the level of
    detection of the depth): within the noise the measured depth is kept as it is, and the
    noise averages out in the zone sums as it does everywhere else (the estimator of
    :mod:`peatburn.science.survey`). Where the thickness is 0 or less (mineral soil) the depth is 0:
    no peat, no peat burned. ``tolerance = 0`` gives the plain ``min(depth, thickness)`` (right for a
    modelled depth, which carries no pixel noise).

    Parameters
    ----------
    depth : array_like
        Burn depth [m] (NaN where unknown).
    thickness : array_like
        Peat thickness [m]; NaN means unknown (no cap).
    tolerance : float
        Level of detection of ``depth`` [m], >= 0.

    Returns
    -------
    numpy.ndarray
        Capped depth [m].

    Notes
    -----
    The exceedance threshold is common practice for change detection (a difference is acted on
    only beyond its level of detection: Lane et al. 2003; Brasington et al. 2003; Wheaton et al.
    2010); its use for the thickness cap is this project's choice (docs/method.md). The bias that
    remains is the noise of the pixels beyond the tolerance: with a normal error and a tolerance of
    1.96 sigma, ``-sigma phi(1.96)`` = -0.058 sigma per pixel at the cap, against -0.40 sigma
    (``-sigma / sqrt(2 pi)``) for the plain minimum.

    References
    ----------
    Lane, S. N., Westaway, R. M. & Hicks, D. M. (2003). Earth Surf. Process. Landforms 28:249-271.
    Wheaton, J. M., Brasington, J., Darby, S. E. & Sear, D. A. (2010). Earth Surf. Process. Landforms
    35:136-156.
    """
    d = np.asarray(depth, dtype="float64")
    t = np.asarray(thickness, dtype="float64")
    tol = float(tolerance) if np.isfinite(tolerance) else 0.0
    with np.errstate(invalid="ignore"):
        out = np.where(np.isfinite(t) & (d > t + tol), t, d)
        return np.where(np.isfinite(t) & (t <= 0), np.where(np.isnan(d), d, 0.0), out)


def mineral_soil(thickness, in_extent=None):
    """True where a burned pixel has no peat: thickness 0 or less, or outside the organic-soil extent.

    Below-ground fire emissions are counted on organic soil only: the 2013 Wetlands Supplement,
    Ch. 2, applies its fire equation (Eq. 2.8, with the Table 2.6 fuel consumption) to burned
    organic soils (chapter scope recalled, unchecked). NaN thickness means unknown, not mineral.

    Parameters
    ----------
    thickness : array_like or None
        Peat thickness [m] (None: unknown everywhere).
    in_extent : array_like of bool, optional
        True inside the peat / organic-soil extent (None: no extent given, all inside).

    Returns
    -------
    numpy.ndarray of bool
    """
    shapes = [np.shape(x) for x in (thickness, in_extent) if x is not None]
    out = np.zeros(np.broadcast_shapes(*shapes) if shapes else (), bool)
    if thickness is not None:
        t = np.asarray(thickness, dtype="float64")
        with np.errstate(invalid="ignore"):
            out = out | (t <= 0)
    if in_extent is not None:
        out = out | ~np.asarray(in_extent, bool)
    return out


def thickness_left(thickness, earlier_depths):
    """Peat left for a later fire after the earlier burns of a series [m]: ``max(T - sum_k d_k, 0)``.

    A pixel that burned before has less peat the next time it burns: the later fire's depth is
    capped by the thickness minus the depths burned by the earlier fires of the series (the cap at
    the peat that exists, of Page et al. 2002 and Ballhorn et al. 2009, applied to what an earlier
    fire left; the bookkeeping is common practice). A NaN earlier depth (no burn there, or a burn
    without a depth estimate) removes nothing; a negative earlier depth (survey noise about 0)
    removes nothing either. A NaN thickness stays NaN (unknown: no cap).

    Parameters
    ----------
    thickness : array_like or None
        Peat thickness before the first fire of the series [m]; None: unknown (returned as None).
    earlier_depths : sequence of array_like
        Burn depth of each earlier fire at the same pixels [m] (NaN: not burned, or no estimate).

    Returns
    -------
    numpy.ndarray or None
        Thickness left [m], >= 0 where known.

    References
    ----------
    Page, S. E. et al. (2002). Nature 420:61-65. Ballhorn, U. et al. (2009). PNAS 106:21213-21218
    (burn depth times area is a volume of peat that existed).
    """
    if thickness is None:
        return None
    t = np.asarray(thickness, dtype="float64")
    burned = np.zeros(np.broadcast_shapes(t.shape, *(np.shape(d) for d in earlier_depths)))
    for d in earlier_depths:
        d = np.asarray(d, dtype="float64")
        burned = burned + np.where(np.isfinite(d) & (d > 0), d, 0.0)
    with np.errstate(invalid="ignore"):
        return np.where(np.isfinite(t), np.maximum(t - burned, 0.0), np.nan)


def earlier_removed_depth(depth, tier1, fuel_consumption_t_ha, bulk_density_g_cm3):
    """Depth of peat an earlier fire of a series removed at each pixel [m], for :func:`thickness_left`.

    Where the earlier fire has a burn depth (survey, water-table model) it is that depth. An earlier
    Tier 1 pixel has none (Tier 1 is area-based: a fuel consumption per hectare, IPCC 2013 Wetlands
    Supplement Ch. 2, Eq. 2.8, Table 2.6; recalled, unchecked), so it removes the depth that holds the
    fuel it was assigned at the pixel's dry bulk density, ``d = FC x 0.1 / (rho_b x 1000)``
    (:func:`peatburn.science.tier1.tier1_equivalent_depth`: 353 t/ha at 0.1 g/cm3 is 0.353 m; the
    conversion is common practice). :func:`thickness_left` caps what is removed at the thickness. A
    Tier 1 pixel without a positive, finite bulk density removes nothing (NaN).

    Parameters
    ----------
    depth : array_like
        The earlier fire's burn depth [m] (NaN: none).
    tier1 : array_like of bool
        True where the earlier fire's depth method was Tier 1.
    fuel_consumption_t_ha : float
        Tier 1 fuel consumption the earlier fire was assigned [t dry matter / ha].
    bulk_density_g_cm3 : array_like
        Dry bulk density at the pixels [g/cm3].

    Returns
    -------
    numpy.ndarray
        Depth removed [m] (NaN: none).

    References
    ----------
    IPCC (2014). 2013 Wetlands Supplement, Ch. 2, Eq. 2.8 and Table 2.6 (recalled, unchecked).
    """
    from .tier1 import tier1_equivalent_depth

    d = np.asarray(depth, dtype="float64")
    rho = np.asarray(bulk_density_g_cm3, dtype="float64")
    t1 = np.asarray(tier1, bool) & ~np.isfinite(d)
    if not t1.any():
        return d
    ok = np.isfinite(rho) & (rho > 0)
    with np.errstate(invalid="ignore", divide="ignore"):
        eq = tier1_equivalent_depth(fuel_consumption_t_ha, np.where(ok, rho, 1.0))
    return np.where(t1 & ok, eq, d)


def fires_before(earlier_burned) -> np.ndarray:
    """How many earlier fires of a series burned each pixel (the repeat-fire status a series gives
    where the burn scars carry no fire count: a fire is a repeat fire when this is >= 1).

    Parameters
    ----------
    earlier_burned : sequence of array_like of bool
        True where each earlier fire burned.

    Returns
    -------
    numpy.ndarray of float
    """
    shapes = [np.shape(b) for b in earlier_burned]
    out = np.zeros(np.broadcast_shapes(*shapes) if shapes else ())
    for b in earlier_burned:
        out = out + np.asarray(b, bool)
    return out


def fill_missing(values, fallback):
    """Missing values (NaN) replaced by ``fallback``; returns ``(filled, was_missing)``.

    Used for dry bulk density and carbon fraction: a hole in a peat-property raster must not throw
    away a measured or modelled burn depth (the depth method falls back to Tier 1 only for want of
    a *depth*). The fallback is the configured default, else the median of the run's valid values
    (chosen by the caller and said in the run notes); the filled pixels get a wider spread in the
    uncertainty (docs/uncertainty.md). Common practice (gap filling with a stated default).

    Parameters
    ----------
    values : array_like
        Property per pixel (any unit), NaN where missing.
    fallback : float
        Value put in the holes (same unit). NaN leaves the holes as they are.

    Returns
    -------
    tuple of numpy.ndarray
        The filled values (float64) and a boolean mask of the pixels that were filled.
    """
    v = np.asarray(values, dtype="float64")
    missing = np.isnan(v)
    if not np.isfinite(fallback):
        return v, np.zeros(v.shape, bool)
    return np.where(missing, float(fallback), v), missing


def peat_dry_mass(depth, bulk_density, area):
    """Dry mass of peat burned.

    Parameters
    ----------
    depth : array_like
        Burn depth [m].
    bulk_density : array_like
        Dry bulk density [g cm-3].
    area : array_like
        Area burned [m2].

    Returns
    -------
    numpy.ndarray
        Dry mass [kg] = depth * bulk_density * 1000 * area.

    References
    ----------
    Page et al. (2002), Nature 420:61; Ballhorn et al. (2009), PNAS 106:21213.
    """
    return (np.asarray(depth, dtype="float64") * np.asarray(bulk_density, dtype="float64")
            * KG_M3_PER_G_CM3 * np.asarray(area, dtype="float64"))


def carbon_mass(dry_mass, carbon_fraction):
    """Carbon in a dry mass of peat [kg C] = dry_mass [kg] * carbon_fraction [-]."""
    return np.asarray(dry_mass, dtype="float64") * np.asarray(carbon_fraction, dtype="float64")


def carbon_density(bulk_density, carbon_fraction):
    """Carbon per volume of peat [kg C m-3] = bulk_density [g cm-3] * 1000 * carbon_fraction [-].

    References
    ----------
    Warren et al. (2012), Biogeosciences 9:4477 (carbon density from bulk density and carbon content).
    """
    return np.asarray(bulk_density, dtype="float64") * KG_M3_PER_G_CM3 * np.asarray(carbon_fraction, dtype="float64")


def carbon_per_area(depth, bulk_density, carbon_fraction):
    """Carbon burned per unit area [kg C m-2] = depth [m] * carbon density [kg C m-3]."""
    return np.asarray(depth, dtype="float64") * carbon_density(bulk_density, carbon_fraction)
