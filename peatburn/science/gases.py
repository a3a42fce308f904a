"""Gases from burned dry matter or carbon: emission factors, the carbon mass balance,
CO2-equivalent, carbon bookkeeping and MCE.

Pure functions: numbers or numpy arrays in, numpy arrays (or numpy scalars) out; no files, no
printing. Gas names are lower-case formulas (``"co2"``, ``"co"``, ``"ch4"``, ``"n2o"``).
Emission factors are in g of gas per kg of dry matter burned, masses in kg unless a docstring
says otherwise.

References
----------
.. [1] IPCC (2006). 2006 IPCC Guidelines for National Greenhouse Gas Inventories, Vol. 4,
   Ch. 2, Eq. 2.27 (``L_fire = A x M_B x C_f x G_ef x 10^-3``).
.. [2] Meija, J. et al. (2016). Atomic weights of the elements 2013 (IUPAC Technical Report).
   Pure and Applied Chemistry 88, 265-291 (conventional atomic weights C 12.011, O 15.999,
   H 1.008, N 14.007: recalled, unchecked; consistent to three decimals with the IUPAC 1995
   standard atomic weights C 12.0107, O 15.9994, H 1.00794, N 14.00674, which were checked).
.. [3] Akagi, S. K. et al. (2011). Atmos. Chem. Phys. 11, 4039-4072, Sect. 2, Eq. 1: the carbon
   mass-balance form of an emission factor (after Ward and Radke 1993 and Yokelson et al. 1999;
   equation number recalled, unchecked); see :func:`carbon_mass_balance_ef`.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np

from ..errors import PhysicalRangeError

#: Conventional standard atomic weights [g/mol], IUPAC (Meija et al. 2016, ref. [2] of the
#: module docstring; recalled, unchecked, consistent with the checked IUPAC 1995 values).
ATOMIC_WEIGHT = {"c": 12.011, "o": 15.999, "h": 1.008, "n": 14.007}

_C, _O, _H, _N = (ATOMIC_WEIGHT[k] for k in ("c", "o", "h", "n"))

#: Molar masses [g/mol] from :data:`ATOMIC_WEIGHT`: CO2 44.009, CO 28.010, CH4 16.043,
#: N2O 44.013, C 12.011.
MOLAR_MASS = {
    "co2": _C + 2 * _O,
    "co": _C + _O,
    "ch4": _C + 4 * _H,
    "n2o": 2 * _N + _O,
    "c": _C,
}

#: Carbon atoms per molecule of each species (gases without carbon have 0).
CARBON_ATOMS = {"co2": 1, "co": 1, "ch4": 1, "n2o": 0, "c": 1}

#: Mass ratio CO2 / C = 44.009 / 12.011 (dimensionless).
CO2_PER_C = MOLAR_MASS["co2"] / MOLAR_MASS["c"]


def _as_float_array(value, name: str) -> np.ndarray:
    try:
        return np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise PhysicalRangeError(f"{name}: expected a number or an array of numbers, got {value!r}") from None


def _check_non_negative(arr: np.ndarray, name: str, unit: str) -> None:
    # NaN (nodata) passes; only values known to be negative are refused.
    if np.any(arr < 0):
        raise PhysicalRangeError(f"{name} must not be negative [{unit}]; the smallest value given is {np.nanmin(arr)}")


def gas_emissions(dry_mass_kg, ef_g_per_kg):
    """Mass of a gas emitted by burning a mass of dry matter.

    ``E = M_dm x EF x 10^-3``: the form of IPCC (2006) Vol. 4 Ch. 2 Eq. 2.27, ``L_fire = A x M_B x
    C_f x G_ef x 10^-3``, in which ``A x M_B x C_f`` [t] is the dry matter burned and the
    factor 10^-3 turns g/kg into t/t (here kg/kg).

    Parameters
    ----------
    dry_mass_kg : float or array_like
        Dry matter burned [kg]. NaN (nodata) propagates. A slightly negative value is allowed: it is
        what the unbiased survey estimator gives for a zone that did not burn measurably (see
        :mod:`peatburn.science.survey`), and gases scale linearly with it.
    ef_g_per_kg : float or array_like
        Emission factor of the gas [g gas / kg dry matter]; broadcast against ``dry_mass_kg``.

    Returns
    -------
    numpy.ndarray or numpy.float64
        Gas emitted [kg].

    Raises
    ------
    PhysicalRangeError
        If an emission factor is negative.

    References
    ----------
    .. [1] IPCC (2006). 2006 IPCC Guidelines for National Greenhouse Gas Inventories, Vol. 4,
       Ch. 2, Eq. 2.27.
    """
    mass = _as_float_array(dry_mass_kg, "dry_mass_kg")
    ef = _as_float_array(ef_g_per_kg, "ef_g_per_kg")
    _check_non_negative(ef, "ef_g_per_kg", "g/kg")
    return mass * ef * 1e-3


def _gwp_mapping(gwp) -> Mapping:
    # Accept a plain mapping or any object with a ``gwp`` mapping (such as a GWPSet).
    table = getattr(gwp, "gwp", gwp)
    if not isinstance(table, Mapping):
        raise TypeError(f"gwp: expected a mapping of gas name to GWP, got {type(gwp).__name__}")
    return {str(k).lower(): float(v) for k, v in table.items()}


def excluded_gases(masses_kg: Mapping, gwp) -> list[str]:
    """Gases of ``masses_kg`` that have no GWP in ``gwp`` and so are left out of CO2-equivalent.

    Parameters
    ----------
    masses_kg : mapping of str to array_like
        Gas masses, keyed by lower-case gas name.
    gwp : mapping of str to float, or an object with a ``gwp`` mapping
        GWP-100 per gas [kg CO2e / kg gas].

    Returns
    -------
    list of str
        Sorted names of the excluded gases (for example ``["co"]``: the IPCC GWP tables used by
        peatburn give no GWP for CO).
    """
    table = _gwp_mapping(gwp)
    return sorted(str(g).lower() for g in masses_kg if str(g).lower() not in table)


def co2_equivalent(masses_kg: Mapping, gwp):
    """CO2-equivalent of several gas masses with a GWP set.

    ``CO2e = sum_g m_g x GWP_g`` over the gases that have a GWP in ``gwp``. Gases without a GWP in
    the set are **excluded** (contribute nothing): in particular CO, which has no GWP-100 in
    IPCC AR5 WG1 Table 8.7 or AR6 WG1 Table 7.15, is not counted. Use :func:`excluded_gases` to
    list what was left out.

    Parameters
    ----------
    masses_kg : mapping of str to array_like
        Gas masses [kg], keyed by lower-case gas name; arrays are broadcast together.
    gwp : mapping of str to float, or an object with a ``gwp`` mapping
        GWP-100 per gas [kg CO2e / kg gas]; ``co2`` should be 1.

    Returns
    -------
    numpy.ndarray or numpy.float64
        CO2-equivalent [kg CO2e]; zero where no gas has a GWP.

    References
    ----------
    .. [1] Myhre, G. et al. (2013). Anthropogenic and natural radiative forcing. In: Climate
       Change 2013, The Physical Science Basis, IPCC AR5 WG1, Ch. 8, Table 8.7.
    .. [2] Forster, P. et al. (2021). The Earth's energy budget, climate feedbacks, and climate
       sensitivity. In: Climate Change 2021, The Physical Science Basis, IPCC AR6 WG1, Ch. 7,
       Table 7.15.
    """
    table = _gwp_mapping(gwp)
    arrays = {str(g).lower(): _as_float_array(m, f"masses_kg[{g!r}]") for g, m in masses_kg.items()}
    if not arrays:
        return np.float64(0.0)
    shape = np.broadcast_shapes(*(a.shape for a in arrays.values()))
    total = np.zeros(shape)
    for gas, mass in arrays.items():
        if gas in table:
            total = total + mass * table[gas]
    return total if total.ndim else np.float64(total)


def carbon_to_co2(mass_c):
    """Mass of CO2 holding a mass of carbon: ``m_CO2 = m_C x 44.009 / 12.011``.

    Parameters
    ----------
    mass_c : float or array_like
        Carbon mass [any mass unit].

    Returns
    -------
    numpy.ndarray or numpy.float64
        CO2 mass [same unit].

    References
    ----------
    .. [1] Meija, J. et al. (2016). Atomic weights of the elements 2013 (IUPAC Technical
       Report). Pure Appl. Chem. 88, 265-291 (C 12.011, O 15.999; recalled, unchecked).
    """
    return _as_float_array(mass_c, "mass_c") * CO2_PER_C


def co2_to_carbon(mass_co2):
    """Mass of carbon in a mass of CO2: ``m_C = m_CO2 x 12.011 / 44.009``.

    Parameters
    ----------
    mass_co2 : float or array_like
        CO2 mass [any mass unit].

    Returns
    -------
    numpy.ndarray or numpy.float64
        Carbon mass [same unit].

    References
    ----------
    .. [1] Meija, J. et al. (2016). Atomic weights of the elements 2013 (IUPAC Technical
       Report). Pure Appl. Chem. 88, 265-291 (C 12.011, O 15.999; recalled, unchecked).
    """
    return _as_float_array(mass_co2, "mass_co2") / CO2_PER_C


def carbon_in_emissions(ef: Mapping):
    """Carbon carried by the carbon-bearing species of an emission-factor set.

    ``C = sum_g EF_g x n_C,g x M_C / M_g`` over the species of :data:`CARBON_ATOMS` with at
    least one carbon atom (CO2, CO, CH4). Species unknown to :data:`MOLAR_MASS` (non-methane
    organics, particles...) are not counted, so the result is a lower bound of the carbon the
    set emits (common practice: the carbon mass-balance method of deriving emission factors
    attributes all fuel carbon to the measured species).

    Parameters
    ----------
    ef : mapping of str to float or array_like
        Emission factors [g gas / kg dry matter], keyed by lower-case gas name.

    Returns
    -------
    numpy.ndarray or numpy.float64
        Carbon emitted [g C / kg dry matter].
    """
    total = np.float64(0.0)
    for gas, value in ef.items():
        g = str(gas).lower()
        n_c = CARBON_ATOMS.get(g, 0)
        if n_c and g in MOLAR_MASS:
            total = total + _as_float_array(value, f"ef[{gas!r}]") * n_c * MOLAR_MASS["c"] / MOLAR_MASS[g]
    return total


def carbon_closure(ef: Mapping, carbon_fraction):
    """Carbon emitted by an emission-factor set per unit of carbon in the fuel.

    ``closure = C_emitted / (1000 x f_C)`` with ``C_emitted`` from :func:`carbon_in_emissions`
    [g C / kg dry matter] and ``f_C`` the fuel's carbon mass fraction. A value above 1 means
    the set, applied to that fuel, emits more carbon than the fuel holds (it "creates carbon").
    Values somewhat below 1 are expected: by the usual convention some fuel carbon stays as
    char and ash or leaves as species the set does not list (non-methane organics, particles).

    Parameters
    ----------
    ef : mapping of str to float or array_like
        Emission factors [g gas / kg dry matter].
    carbon_fraction : float or array_like
        Carbon mass fraction of the dry fuel [dimensionless, 0 < f <= 1].

    Returns
    -------
    numpy.ndarray or numpy.float64
        Carbon closure [dimensionless].

    Raises
    ------
    PhysicalRangeError
        If a carbon fraction is not in (0, 1].
    """
    f = _check_fraction(carbon_fraction)
    return carbon_in_emissions(ef) / (1000.0 * f)


def modified_combustion_efficiency(ef_co2, ef_co):
    """Modified combustion efficiency, MCE = dCO2 / (dCO2 + dCO), in moles.

    Computed from mass emission factors: ``n = EF / M`` for CO2 (44.009 g/mol) and CO
    (28.010 g/mol), so ``MCE = (EF_CO2/M_CO2) / (EF_CO2/M_CO2 + EF_CO/M_CO)``; the same ratio as
    from excess mole fractions of CO2 and CO in a plume. Around 0.99 for pure flaming and about
    0.8 for pure smouldering (Yokelson et al. 1996; recalled, unchecked).

    Parameters
    ----------
    ef_co2 : float or array_like
        CO2 emission factor [g CO2 / kg dry matter].
    ef_co : float or array_like
        CO emission factor [g CO / kg dry matter].

    Returns
    -------
    numpy.ndarray or numpy.float64
        MCE [dimensionless, 0..1]; NaN where both factors are 0.

    References
    ----------
    .. [1] Ward, D. E. and Radke, L. F. (1993). Emissions measurements from vegetation fires: a
       comparative evaluation of methods and results. In: Crutzen, P. J. and Goldammer, J. G.
       (eds), Fire in the Environment, Wiley, 53-76 (introduces MCE; recalled, unchecked).
    .. [2] Yokelson, R. J., Griffith, D. W. T. and Ward, D. E. (1996). Open-path Fourier
       transform infrared studies of large-scale laboratory biomass fires. J. Geophys. Res.
       101(D15), 21067-21080 (recalled, unchecked).
    """
    co2 = _as_float_array(ef_co2, "ef_co2")
    co = _as_float_array(ef_co, "ef_co")
    _check_non_negative(co2, "ef_co2", "g/kg")
    _check_non_negative(co, "ef_co", "g/kg")
    n_co2 = co2 / MOLAR_MASS["co2"]
    n_co = co / MOLAR_MASS["co"]
    with np.errstate(invalid="ignore", divide="ignore"):
        return n_co2 / (n_co2 + n_co)


# ----------------------------------------------------------------------------- carbon mass balance
#
# The carbon mass-balance form of an emission factor (Ward and Radke 1993; Yokelson et al. 1999,
# as written in Akagi et al. 2011, Sect. 2, Eq. 1; equation number recalled, unchecked):
#
#     EF_X = F_C x 1000 x (MM_X / MM_C) x C_X / C_T,   C_X / C_T = (dX/dCO2) / sum_j NC_j (dC_j/dCO2)
#
# F_C the carbon mass fraction of the fuel, MM molar masses, dX/dCO2 the molar emission ratio of X to
# CO2 in the plume, NC_j the carbon atoms of species j; the sum runs over the carbon-bearing species
# measured. It assumes that all the carbon burned leaves as those species, so the carbon of the
# factors equals the fuel's carbon: closure is 1 by construction.

#: The two forms a run can give its gases in (``[emission_factors] form``).
FORMS = ("dry_matter", "carbon_balance")


def emission_ratios_to_co2(ef: Mapping) -> dict:
    """Molar emission ratios to CO2 of the species of an emission-factor set.

    ``ER_X = (EF_X / MM_X) / (EF_CO2 / MM_CO2)`` [mol X / mol CO2] for every species of
    :data:`MOLAR_MASS`; species without a molar mass here (particles, lumped organics) are left out.
    The inverse of :func:`carbon_mass_balance_ef` (the ratios are what a plume measurement gives).

    Parameters
    ----------
    ef : mapping of str to float or array_like
        Emission factors [g / kg dry matter]; must hold ``co2`` > 0.

    Returns
    -------
    dict of str to numpy.ndarray
        Molar emission ratio to CO2 [mol/mol] per species (``co2`` is 1).

    References
    ----------
    .. [1] Akagi, S. K. et al. (2011). Atmos. Chem. Phys. 11, 4039-4072, Sect. 2 (emission ratios
       and the carbon mass-balance method; recalled, unchecked).
    """
    table = {str(g).lower(): _as_float_array(v, f"ef[{g!r}]") for g, v in ef.items()}
    if "co2" not in table or np.any(table["co2"] <= 0):
        raise PhysicalRangeError("emission_ratios_to_co2: the set needs a CO2 emission factor > 0 [g/kg]")
    n_co2 = table["co2"] / MOLAR_MASS["co2"]
    return {g: (v / MOLAR_MASS[g]) / n_co2 for g, v in table.items() if g in MOLAR_MASS}


def carbon_mass_balance_ef(emission_ratios: Mapping, carbon_fraction) -> dict:
    """Emission factors from molar emission ratios to CO2 by the carbon mass-balance method.

    ``EF_X = F_C x 1000 x (MM_X / MM_C) x ER_X / sum_j NC_j ER_j`` with ``ER`` the molar emission
    ratio to CO2 (``ER_CO2 = 1``) and the sum over the carbon-bearing species given (Ward and Radke
    1993; Yokelson et al. 1999; in the form of Akagi et al. 2011, Sect. 2, Eq. 1, recalled,
    unchecked). The carbon of the resulting factors equals ``1000 x F_C``: all the fuel carbon
    burned leaves as the species given.

    Parameters
    ----------
    emission_ratios : mapping of str to float or array_like
        Molar emission ratios to CO2 [mol / mol CO2] of species of :data:`MOLAR_MASS`; ``co2`` may be
        left out (it is 1).
    carbon_fraction : float or array_like
        Carbon mass fraction of the dry fuel, F_C [-, 0 < F_C <= 1].

    Returns
    -------
    dict of str to numpy.ndarray
        Emission factor per species [g / kg dry matter], ``co2`` included.

    Raises
    ------
    PhysicalRangeError
        A species without a molar mass here, a negative ratio, or a carbon fraction outside (0, 1].

    References
    ----------
    .. [1] Ward, D. E. and Radke, L. F. (1993). Emissions measurements from vegetation fires: a
       comparative evaluation of methods and results. In: Crutzen, P. J. and Goldammer, J. G.
       (eds), Fire in the Environment, Wiley, 53-76 (recalled, unchecked).
    .. [2] Yokelson, R. J. et al. (1999). Emissions of formaldehyde, acetic acid, methanol, and
       other trace gases from biomass fires in North Carolina measured by airborne Fourier
       transform infrared spectroscopy. J. Geophys. Res. 104(D23), 30109-30125 (recalled, unchecked).
    .. [3] Akagi, S. K. et al. (2011). Emission factors for open and domestic biomass burning for
       use in atmospheric models. Atmos. Chem. Phys. 11, 4039-4072, Sect. 2, Eq. 1 (recalled,
       unchecked).
    """
    f = _check_fraction(carbon_fraction)
    ratios = {"co2": np.float64(1.0)}
    for g, v in emission_ratios.items():
        key = str(g).lower()
        if key not in MOLAR_MASS:
            raise PhysicalRangeError(f"carbon_mass_balance_ef: no molar mass for {g!r}; known: "
                                     f"{', '.join(k for k in MOLAR_MASS if k != 'c')}")
        arr = _as_float_array(v, f"emission_ratios[{g!r}]")
        _check_non_negative(arr, f"emission_ratios[{g!r}]", "mol/mol")
        ratios[key] = arr
    carbon_moles = sum(CARBON_ATOMS.get(g, 0) * r for g, r in ratios.items())
    return {g: f * 1000.0 * (MOLAR_MASS[g] / MOLAR_MASS["c"]) * r / carbon_moles for g, r in ratios.items()}


def _check_fraction(carbon_fraction) -> np.ndarray:
    f = _as_float_array(carbon_fraction, "carbon_fraction")
    if np.any(f <= 0) or np.any(f > 1):
        raise PhysicalRangeError(
            f"carbon_fraction must be a mass fraction in (0, 1], got values from {np.nanmin(f)} to {np.nanmax(f)}"
        )
    return f


def carbon_balance_scale(ef: Mapping):
    """Mass of each species per mass of carbon burned, over its per-dry-matter factor.

    ``k = 1 / C_set`` [kg dry matter / g C] with ``C_set`` the carbon of the set's CO2, CO and CH4
    (:func:`carbon_in_emissions`): in the carbon mass-balance form a species' mass is ``m_X =
    carbon burned x EF_X x k`` (see :func:`gases_from_carbon`). Exactly the factors of
    :func:`carbon_mass_balance_ef` with the set's own emission ratios (:func:`emission_ratios_to_co2`),
    for species with a molar mass; species without one (PM2.5, lumped organics) keep their ratio
    to CO2 by mass, which is how their factors are formed in the same method (Akagi et al. 2011,
    Sect. 2; recalled, unchecked).

    Parameters
    ----------
    ef : mapping of str to float or array_like
        Emission factors [g / kg dry matter]; its CO2 + CO + CH4 must carry some carbon.

    Returns
    -------
    numpy.ndarray or numpy.float64
        ``1 / C_set`` [kg dry matter / g C].
    """
    c_set = carbon_in_emissions(ef)
    if np.any(c_set <= 0):
        raise PhysicalRangeError("carbon mass balance: the emission-factor set has no carbon in CO2, CO or CH4; "
                                 "it needs a CO2 row > 0")
    return 1.0 / c_set


def gases_from_carbon(carbon_kg, ef: Mapping) -> dict:
    """Species masses from the carbon burned, by the carbon mass-balance form.

    ``m_X = C_burned x EF_X / C_set`` with ``C_set`` [g C / kg dry matter] the carbon of the set's
    CO2, CO and CH4 (:func:`carbon_in_emissions`): the set serves only through its emission ratios,
    and the carbon of the CO2, CO and CH4 emitted equals the carbon burned (closure 1). Equivalent to
    applying :func:`carbon_mass_balance_ef` with the set's emission ratios at the fuel's carbon
    fraction and multiplying by the dry matter burned (Ward and Radke 1993; Yokelson et al. 1999;
    Akagi et al. 2011, Sect. 2, Eq. 1; recalled, unchecked). Carbon in particles and organics the
    set does not list as CO2, CO or CH4 is not counted in ``C_set`` (a few percent for peat smoke), so
    their carbon is not taken from the other species.

    Parameters
    ----------
    carbon_kg : float or array_like
        Carbon burned [kg C].
    ef : mapping of str to float or array_like
        Emission factors [g / kg dry matter] (only their ratios matter).

    Returns
    -------
    dict of str to numpy.ndarray
        Mass of each species [kg].
    """
    c = _as_float_array(carbon_kg, "carbon_kg")
    k = carbon_balance_scale(ef)
    out = {}
    for g, v in ef.items():
        arr = _as_float_array(v, f"ef[{g!r}]")
        _check_non_negative(arr, f"ef[{g!r}]", "g/kg")
        out[str(g).lower()] = c * arr * k
    return out


def phase_emissions(dry_mass_kg, carbon_kg, ef: Mapping, form: str = "dry_matter") -> dict:
    """Species masses of one burning phase in the chosen form.

    ``"dry_matter"``: ``m_X = M_dm x EF_X x 10^-3`` (:func:`gas_emissions`; IPCC 2006 Vol. 4
    Eq. 2.27 form, the Tier 1 convention). ``"carbon_balance"``: ``m_X = C_burned x EF_X / C_set``
    (:func:`gases_from_carbon`; the carbon mass-balance form).

    Parameters
    ----------
    dry_mass_kg, carbon_kg : float or array_like
        Dry matter [kg] and carbon [kg C] burned (one of them is used, by ``form``).
    ef : mapping of str to float
        Emission factors [g / kg dry matter].
    form : {"dry_matter", "carbon_balance"}

    Returns
    -------
    dict of str to numpy.ndarray
        Mass of each species [kg].
    """
    if form == "dry_matter":
        return {str(g).lower(): gas_emissions(dry_mass_kg, v) for g, v in ef.items()}
    if form == "carbon_balance":
        return gases_from_carbon(carbon_kg, ef)
    raise PhysicalRangeError(f"form {form!r}: use one of {', '.join(FORMS)}")
