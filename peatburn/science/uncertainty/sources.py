"""The sources of uncertainty of a run: their defaults with citations, :class:`Source`, and
:func:`default_sources` / :func:`sources_to_params`.

References: see :mod:`peatburn.science.uncertainty`.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np

from ...errors import ConfigError, PhysicalRangeError
from ..flaming import WOOSTER_2005_COEFFICIENT, WOOSTER_2005_COEFFICIENT_SD

# ----------------------------------------------------------------------------- defaults

#: Standard deviation of the subsidence rate [m/yr] when none is given: 0.01 m/yr, half the width
#: of the 3-5 cm/yr range of drained tropical peat (Hooijer et al. 2012; checked through a
#: secondary summary only, see docs/sources.md), taken as one standard deviation (assumption).
DEFAULT_SUBSIDENCE_RATE_SD = 0.01

#: Coefficient of variation of the run-wide bulk-density scale: 0.15, the middle of a 10-20 % span
#: (assumption: no source checked; it stands for the error of the mean density used, not for the
#: pixel-to-pixel scatter, which averages out over a zone).
DEFAULT_BULK_DENSITY_CV = 0.15

#: Mean fuel carbon fraction of tropical peat, 0.560 (Hu et al. 2018, abstract, checked).
DEFAULT_CARBON_FRACTION = 0.56  # Hu et al. 2018 (abstract, checked)
#: Standard deviation of the run-wide carbon fraction: 0.03 (about 5 % of 0.56). Assumption: the
#: abstract of Hu et al. (2018) gives the mean, not its spread.
DEFAULT_CARBON_FRACTION_SD = 0.03

#: Coefficient of variation of an emission factor with no published spread and no reference set
#: to borrow one from: 0.5 (assumption; the order of the CO and CH4 spreads of peat-fire sets).
DEFAULT_EF_CV = 0.5

#: Combustion coefficient of fire radiative energy [kg/MJ], Wooster et al. (2005) (recalled,
#: unchecked; the same value as ``peatburn.science.flaming.WOOSTER_2005_COEFFICIENT``).
DEFAULT_FRE_COEFFICIENT = WOOSTER_2005_COEFFICIENT  # Wooster et al. 2005 (recalled, unchecked)
#: Its spread [kg/MJ], Wooster et al. (2005) (recalled, unchecked; whether it is a standard error
#: or a standard deviation is unchecked).
DEFAULT_FRE_COEFFICIENT_SD = WOOSTER_2005_COEFFICIENT_SD  # Wooster et al. 2005 (recalled, unchecked)

#: Coefficient of variation of above-ground biomass [-] for the area-based flaming route: 0.3
#: (assumption; biomass maps and IPCC defaults disagree by tens of percent).
DEFAULT_BIOMASS_CV = 0.3

#: Combustion factor C_f of primary tropical forest and its standard deviation, IPCC (2006) Vol. 4
#: Ch. 2 Table 2.6 (recalled, unchecked; as ``peatburn.science.flaming.IPCC2006_TABLE_2_6``).
DEFAULT_COMBUSTION_FACTOR = 0.36
DEFAULT_COMBUSTION_FACTOR_SD = 0.13

#: The sources, in a fixed order (their index seeds their random stream).
SOURCE_NAMES = (
    "survey_bias",
    "survey_random",
    "subsidence_rate",
    "water_table_coefficients",
    "water_table_residual",
    "bulk_density",
    "carbon_fraction",
    "emission_factors_smouldering",
    "fre_coefficient",
    "biomass",
    "combustion_factor",
    "emission_factors_flaming",
    # below-ground sources of issue 14 (appended, so the random streams of the others keep their keys)
    "subsidence_rate_map",
    "tier1_fuel",
    "peat_property_fill",
    # issue 16 (appended likewise)
    "surface_change",
    "burned_area",
    "fre_integration",
)
_RUN_WIDE = {"survey_bias", "subsidence_rate", "water_table_coefficients", "bulk_density", "carbon_fraction",
             "emission_factors_smouldering", "fre_coefficient", "biomass", "combustion_factor",
             "emission_factors_flaming", "tier1_fuel", "peat_property_fill", "surface_change", "burned_area"}


# ----------------------------------------------------------------------------- sources


@dataclass(frozen=True)
class Source:
    """One source of uncertainty, documented.

    Attributes
    ----------
    name : str
        One of :data:`SOURCE_NAMES`.
    distribution : str
        The distribution drawn (``"normal"``, ``"lognormal (mean 1)"``...).
    parameters : dict
        Its parameters, in the units named by the keys.
    citation : str
        Where the default comes from (or "assumption").
    note : str
        How it enters the zone totals, and its approximations.
    """

    name: str
    distribution: str
    parameters: dict = field(default_factory=dict)
    citation: str = ""
    note: str = ""

    def to_dict(self) -> dict:
        return {"name": self.name, "distribution": self.distribution, "parameters": self.parameters,
                "citation": self.citation, "note": self.note}


def _ef_table(factors) -> dict[str, tuple[float, float]]:
    """gas -> (ef, sd) from a FactorSet-like object (``.ef``, ``.sd``) or a mapping."""
    if factors is None:
        return {}
    if hasattr(factors, "ef"):
        sd = getattr(factors, "sd", {}) or {}
        return {g: (float(v), float(sd.get(g, math.nan))) for g, v in factors.ef.items()}
    out = {}
    for g, v in dict(factors).items():
        if isinstance(v, Mapping):
            out[g] = (float(v["ef"]), float(v.get("sd", math.nan)))
        elif np.ndim(v) == 0:
            out[g] = (float(v), math.nan)
        else:
            ef, sd = v
            out[g] = (float(ef), float(sd))
    return out


def ef_fallback_cv(factor_sets, phase: str | None = None) -> dict[str, float]:
    """Per gas, the largest relative spread (sd / ef) published by any of the given independent sets
    of one phase.

    Used to give a spread to an emission factor whose own set publishes none and was not derived
    from another set (a user set, for example): the spread borrowed is the widest among the sets of
    the same phase that do publish one, so that the borrowed interval is not narrower than the
    evidence. Sets of the other phase are not used (a flaming spread says nothing of smouldering
    smoke), nor sets derived from another (``derived_from``: rounded copies are not independent
    evidence; their parent is in the list).

    Parameters
    ----------
    factor_sets : iterable
        FactorSet-like objects (``.ef``, ``.sd`` mappings, optional ``.phase`` and ``.derived_from``)
        or mappings gas -> (ef, sd) (always used).
    phase : {"smouldering", "flaming"}, optional
        Use only the sets of this phase (sets without a phase are used).

    Returns
    -------
    dict of str to float
        gas -> CV [-]; gases with no published spread anywhere are absent.
    """
    out: dict[str, float] = {}
    for fs in factor_sets:
        if getattr(fs, "derived_from", None):
            continue
        if phase is not None and getattr(fs, "phase", phase) not in (phase, "unspecified"):
            continue
        for g, (ef, sd) in _ef_table(fs).items():
            if ef > 0 and math.isfinite(sd) and sd >= 0:
                out[g] = max(out.get(g, 0.0), sd / ef)
    return out


def _parent_set(factors, reference_factor_sets):
    """The reference set ``factors`` was derived from (its ``derived_from`` name), or None."""
    name = getattr(factors, "derived_from", None)
    return next((fs for fs in reference_factor_sets if getattr(fs, "name", None) == name), None) if name else None


def _ef_parameters(factors, fallback, phase, parent=None):
    table = _ef_table(factors)
    parent_cv = {g: sd / ef for g, (ef, sd) in _ef_table(parent).items() if ef > 0 and math.isfinite(sd)}
    gases = {}
    for g, (ef, sd) in table.items():
        if ef < 0 or (math.isfinite(sd) and sd < 0):
            raise PhysicalRangeError(f"{phase} emission factor {g}: ef and sd must be >= 0")
        if math.isfinite(sd):
            cv, basis = (sd / ef if ef > 0 else 0.0), "published spread of the set"
        elif g in parent_cv:
            # the set is its parent's values rounded (IPCC 2013 Wetlands from Akagi et al. 2011): the
            # same evidence, so the parent's relative spread, not the widest of all sets
            cv = parent_cv[g]
            sd, basis = cv * ef, (f"inherited: relative spread of {parent.name}, the set these values were "
                                  f"derived from (not independent of it)")
        elif g in fallback:
            cv = fallback[g]
            sd, basis = cv * ef, "borrowed: largest relative spread among the reference sets for this gas"
        else:
            cv = DEFAULT_EF_CV
            sd, basis = cv * ef, f"assumption: CV {DEFAULT_EF_CV} (no published spread)"
        gases[g] = {"ef_g_per_kg": ef, "sd_g_per_kg": sd, "cv": cv, "sd_basis": basis}
    return gases


def default_sources(*, survey_bias_sd_m, survey_sigma_m, survey_range_m, interval_years=0.0,
                    survey_nugget_fraction=0.0, pixel_area_m2=None,
                    subsidence_rate_sd_m_per_yr=DEFAULT_SUBSIDENCE_RATE_SD,
                    bulk_density_cv=DEFAULT_BULK_DENSITY_CV,
                    carbon_fraction=DEFAULT_CARBON_FRACTION, carbon_fraction_sd=DEFAULT_CARBON_FRACTION_SD,
                    smouldering_factors=None, flaming_factors=None, reference_factor_sets=(),
                    fre_coefficient=DEFAULT_FRE_COEFFICIENT, fre_coefficient_sd=DEFAULT_FRE_COEFFICIENT_SD,
                    biomass_cv=DEFAULT_BIOMASS_CV,
                    combustion_factor=DEFAULT_COMBUSTION_FACTOR, combustion_factor_sd=DEFAULT_COMBUSTION_FACTOR_SD,
                    wt_coef_cov=None, wt_residual_sd_m=0.0, wt_residual_range_m=None,
                    subsidence_rate_map_sd_m_per_yr=0.0, tier1_fuel_cv=0.0, peat_fill_cv=0.0,
                    survey_nugget_m2=None, survey_components=None, survey_trend_sd_m=0.0,
                    surface_change_sd_m=0.0, burned_area_cv=0.0, burned_area_basis="",
                    fre_integration_cv=0.0) -> list[Source]:
    """The sources of uncertainty of a run, each with its distribution, parameters and basis.

    Parameters
    ----------
    survey_bias_sd_m : float
        Residual vertical bias after co-registration, sd [m] (see :func:`residual_bias_sd`).
    survey_sigma_m : float
        Per-pixel random survey error [m] (NMAD of stable-ground differences after co-registration).
    survey_range_m : float
        Range of its spherical variogram [m] (:func:`peatburn.science.variogram.fit_spherical`).
    interval_years : float
        Time between the surveys T [yr] (the subsidence-rate error acts as ``dr * T``).
    survey_nugget_fraction : float
        Uncorrelated share of the survey error variance, in [0, 1].
    pixel_area_m2 : float, optional
        Pixel area [m2] (needed with a nugget).
    subsidence_rate_sd_m_per_yr : float
        sd of the subsidence rate [m/yr] (default :data:`DEFAULT_SUBSIDENCE_RATE_SD`).
    survey_nugget_m2, survey_components, survey_trend_sd_m : optional
        The multi-range survey error model (:func:`peatburn.science.zone_error.model_from_stable_sample`):
        nugget [m2], spherical components ``[(partial sill [m2], range [m]), ...]`` and a planar trend's sd
        [m]. When given, the zone sd is :func:`peatburn.science.zone_error.zone_mean_sd` of them, and
        ``survey_sigma_m`` / ``survey_range_m`` / ``survey_nugget_fraction`` are a summary only.
    surface_change_sd_m : float
        sd [m] of a non-fire change of the ground surface between the surveys over the burned area
        (canopy bias of a pre-fire ground model under dense forest, ash, peat swelling or shrinkage):
        run-wide, additive on every surveyed depth. Default 0: no published value fits every survey
        pair; the user states it (``uncertainty.surface_change_sd``).
    bulk_density_cv : float
        CV of the run-wide bulk-density scale [-].
    carbon_fraction, carbon_fraction_sd : float
        Mean and sd of the carbon fraction [-]; drawn as a scale with CV = sd / mean.
    smouldering_factors, flaming_factors : FactorSet or mapping, optional
        Emission-factor sets (``peatburn.factors.FactorSet``, whose ``sd`` column is the published
        spread) or mappings gas -> (ef, sd) [g/kg].
    reference_factor_sets : iterable
        Sets to borrow a spread from where a factor has none (:func:`ef_fallback_cv`), e.g. all
        built-in sets of the same phase. Without one, :data:`DEFAULT_EF_CV`.
    fre_coefficient, fre_coefficient_sd : float
        Combustion coefficient of FRE and its spread [kg/MJ] (Wooster et al. 2005, recalled).
    biomass_cv : float
        CV of above-ground biomass [-] (assumption).
    combustion_factor, combustion_factor_sd : float
        Combustion factor and its sd [-] (IPCC 2006 Table 2.6, recalled).
    wt_coef_cov : array_like (2, 2), optional
        Covariance of the water-table depth model's intercept [m] and slope [m/m] from the fit.
    wt_residual_sd_m, wt_residual_range_m : float, optional
        Scatter of the water-table model about its line [m] and its correlation range [m]
        (no range: fully correlated within a zone).
    subsidence_rate_map_sd_m_per_yr : float
        Error of a subsidence-rate *map* [m/yr], as a zone-correlated term: one value per zone
        (fully correlated within it, independent between zones), acting as ``dr_z * T`` over the
        surveyed area. Only the contrast between scars and stable ground matters (a run-wide error
        is absorbed by the co-registration), so this is the term a rate map adds.
    tier1_fuel_cv : float
        Relative spread of the Tier 1 default fuel consumption [-]
        (:data:`peatburn.science.tier1.TIER1_FUEL_RELATIVE_SD`); a run-wide scale on the Tier 1
        pixels' mass and carbon, which do not depend on the bulk density.
    peat_fill_cv : float
        Relative spread of a filled bulk density or carbon fraction [-]; a run-wide scale on the
        mass and carbon of the pixels whose property was filled, on top of ``bulk_density``.
    burned_area_cv : float
        Relative sd of the burned-area term [-] (:func:`.area_accuracy.area_term`); 0: no term
        (the default: no accuracy assessment given). ``burned_area_basis`` says where it comes from.
    fre_integration_cv : float
        Relative sd of the FRE of a fire event observed once [-] (:mod:`.fre_sampling`); the zone's
        spread follows from its ``flaming_fre_ssq_kg2`` sum. 0: no term.

    Returns
    -------
    list of Source
        In the order of :data:`SOURCE_NAMES`; sources without a spread are left out.
    """
    for name, val in (("survey_bias_sd_m", survey_bias_sd_m), ("survey_sigma_m", survey_sigma_m),
                      ("subsidence_rate_sd_m_per_yr", subsidence_rate_sd_m_per_yr),
                      ("bulk_density_cv", bulk_density_cv), ("carbon_fraction_sd", carbon_fraction_sd),
                      ("fre_coefficient_sd", fre_coefficient_sd), ("biomass_cv", biomass_cv),
                      ("combustion_factor_sd", combustion_factor_sd), ("wt_residual_sd_m", wt_residual_sd_m),
                      ("interval_years", interval_years),
                      ("subsidence_rate_map_sd_m_per_yr", subsidence_rate_map_sd_m_per_yr),
                      ("tier1_fuel_cv", tier1_fuel_cv), ("peat_fill_cv", peat_fill_cv),
                      ("burned_area_cv", burned_area_cv), ("fre_integration_cv", fre_integration_cv)):
        if not (math.isfinite(float(val)) and float(val) >= 0):
            raise PhysicalRangeError(f"uncertainty source {name}: must be a finite number >= 0, got {val!r}")
    src = [
        Source("survey_bias", "normal", {"sd_m": float(survey_bias_sd_m)},
               "Rolstad et al. 2009 (area-mean of correlated errors over the stable ground); "
               "stable-ground statistics of this run",
               "One value per draw for the whole run (all zones): the error of the vertical shift "
               "estimated on stable ground. Multiplies rho_area / rho_f_area / area."),
        Source("survey_random", "normal zone mean of a spatially correlated error (spherical variogram)",
               {"sigma_m": float(survey_sigma_m), "range_m": float(survey_range_m),
                "nugget_fraction": float(survey_nugget_fraction),
                "pixel_area_m2": None if pixel_area_m2 is None else float(pixel_area_m2)},
               "Rolstad et al. 2009, J. Glaciol. 55:666 (circular-area approximation); sigma = NMAD "
               "(Höhle & Höhle 2009); range from the stable-ground variogram",
               "Per zone, sd = correlated_sum_sd(sigma, range, surveyed area); independent between "
               "zones (approximation: zones closer than the range are in truth correlated).")
        if survey_components is None else
        Source("survey_random", "normal zone mean of a spatially correlated error (nugget + spherical components "
               "+ planar trend)",
               {"sigma_m": float(survey_sigma_m), "nugget_m2": float(survey_nugget_m2 or 0.0),
                "components": [{"partial_sill_m2": float(c), "range_m": float(a)} for c, a in survey_components],
                "trend_sd_m": float(survey_trend_sd_m),
                "pixel_area_m2": None if pixel_area_m2 is None else float(pixel_area_m2)},
               "Rolstad et al. 2009 (disc average of each spherical component); Hugonnet et al. 2022 (sum of "
               "ranges; recalled, unchecked); fitted on this run's stable ground (science.zone_error)",
               "Per zone, var = nugget / n + sum of the components' Rolstad averages over the surveyed area + the "
               "planar trend's variance; independent between zones. With survey_bias it counts the long-range "
               "error once: co-registration removes what zones share with the stable ground (docs/uncertainty.md)."),
        Source("subsidence_rate", "normal", {"sd_m_per_yr": float(subsidence_rate_sd_m_per_yr),
                                             "interval_years": float(interval_years)},
               "Hooijer et al. 2012 (3-5 cm/yr; secondary check); default sd = half that range (assumption)",
               "Run-wide; the rate error times the survey interval acts like a bias over the surveyed "
               "area. If the stable ground subsides at the same rate, co-registration already removes "
               "it and this source double-counts (conservative)."),
    ]
    if not (math.isfinite(float(surface_change_sd_m)) and float(surface_change_sd_m) >= 0):
        raise PhysicalRangeError(f"uncertainty source surface_change_sd_m: must be a finite number >= 0, "
                                 f"got {surface_change_sd_m!r}")
    if float(surface_change_sd_m) > 0:
        src.append(Source("surface_change", "normal, one value per draw for the whole run",
                          {"sd_m": float(surface_change_sd_m)},
                          "user-stated (uncertainty.surface_change_sd); no default",
                          "Non-fire change of the surface over the survey interval on the burned ground (canopy bias "
                          "of the pre-fire ground model, ash, swelling): not seen on stable ground, so not in the "
                          "survey terms. Run-wide, additive on the surveyed depth (multiplies rho_area / rho_f_area)."))
    if float(subsidence_rate_map_sd_m_per_yr) > 0:
        src.append(Source("subsidence_rate_map", "normal, one value per zone",
                          {"sd_m_per_yr": float(subsidence_rate_map_sd_m_per_yr),
                           "interval_years": float(interval_years)},
                          "default sd 0.01 m/yr: half the 3-5 cm/yr span of drained tropical peat (Hooijer et "
                          "al. 2012, secondary check) taken as one sd: assumption",
                          "Per zone, fully correlated within it and independent between zones; acts as "
                          "dr_z * T over the surveyed area (only a rate map's contrast between scars and stable "
                          "ground reaches the depths)."))
    if wt_coef_cov is not None:
        cov = np.asarray(wt_coef_cov, dtype="float64")
        if cov.shape != (2, 2) or not np.all(np.isfinite(cov)):
            raise PhysicalRangeError("wt_coef_cov must be a finite 2 x 2 covariance matrix (intercept, slope)")
        src.append(Source("water_table_coefficients", "bivariate normal", {"cov": cov.tolist()},
                          "covariance of the least-squares fit of the water-table depth model of this run",
                          "Run-wide; depth = a + b wt; (da, db) change carbon by da * wt_rho_f_area + "
                          "db * wt_rho_f_area_wt, sums over pixels where the model is not clipped at 0 or "
                          "at the peat thickness (first order); the draws themselves are not clipped."))
    if float(wt_residual_sd_m) > 0:
        src.append(Source("water_table_residual", "normal zone mean of a correlated residual",
                          {"sd_m": float(wt_residual_sd_m),
                           "range_m": None if wt_residual_range_m is None else float(wt_residual_range_m)},
                          "residual scatter of the water-table depth model fit of this run",
                          "Per zone over the water-table area, like survey_random; with no range, fully "
                          "correlated within a zone (conservative)."))
    src.append(Source("bulk_density", "lognormal scale, mean 1", {"cv": float(bulk_density_cv)},
                      "assumption (10-20 % span; see DEFAULT_BULK_DENSITY_CV)",
                      "Run-wide multiplicative scale on peat mass, carbon and smouldering gases."))
    for name, cv, basis, note in (
            ("tier1_fuel", tier1_fuel_cv,
             "IPCC 2013 Wetlands Supplement Ch. 2 Table 2.6: 353 +/- 170 t d.m./ha for tropical wildfire, +/- read "
             "as a 95 % half-width (recalled, unchecked)",
             "Run-wide scale on the mass and carbon of the Tier 1 pixels (not the bulk density: their mass does "
             "not depend on it)."),
            ("peat_property_fill", peat_fill_cv,
             "relative spread (NMAD / median) of the run's valid bulk-density and carbon-fraction values, the "
             "larger of the two; 0.3 when too few (assumption)",
             "Run-wide scale on the mass and carbon of the pixels whose bulk density or carbon fraction was "
             "filled, on top of the bulk-density scale.")):
        if float(cv) > 0:
            src.append(Source(name, "lognormal scale, mean 1", {"cv": float(cv)}, basis, note))
    if float(burned_area_cv) > 0:
        src.append(Source("burned_area", "lognormal scale, mean 1", {"cv": float(burned_area_cv)},
                          burned_area_basis or "accuracy assessment of the burned-area map (Olofsson et al. 2014)",
                          "Run-wide scale on every below-ground quantity (all are sums over the mapped burned "
                          "pixels) and on the flaming dry matter of the burned-area route (area x biomass x "
                          "combustion factor); not on flaming from FRE (detections, not area)."))
    cf_mean = float(carbon_fraction)
    if not cf_mean > 0:
        raise PhysicalRangeError("carbon_fraction must be > 0")
    src.append(Source("carbon_fraction", "lognormal scale, mean 1",
                      {"mean": cf_mean, "sd": float(carbon_fraction_sd), "cv": float(carbon_fraction_sd) / cf_mean},
                      "mean: Hu et al. 2018 (56.0 %, abstract checked); sd: assumption",
                      "Run-wide multiplicative scale on carbon (the gases follow the peat mass, not f)."))
    if smouldering_factors is not None:
        fallback = ef_fallback_cv(reference_factor_sets, "smouldering")
        src.append(Source("emission_factors_smouldering", "lognormal per gas, independent",
                          {"set": getattr(smouldering_factors, "name", "user mapping"),
                           "gases": _ef_parameters(smouldering_factors, fallback, "smouldering",
                                                   _parent_set(smouldering_factors, reference_factor_sets))},
                          getattr(smouldering_factors, "citation", "user-supplied"),
                          "Run-wide; gas mass = peat mass x EF draw. Gases drawn independently "
                          "(in truth CO2 and CO anti-correlate through the combustion efficiency)."))
    if flaming_factors is not None:
        fb = ef_fallback_cv(reference_factor_sets, "flaming")
        src.append(Source("fre_coefficient", "lognormal scale, mean 1",
                          {"mean_kg_per_mj": float(fre_coefficient), "sd_kg_per_mj": float(fre_coefficient_sd),
                           "cv": float(fre_coefficient_sd) / float(fre_coefficient)},
                          "Wooster et al. 2005, J. Geophys. Res. 110, D24311 "
                          "(0.368 +/- 0.015 kg/MJ; recalled, unchecked)",
                          "Run-wide scale on flaming dry matter from FRE."))
        if float(fre_integration_cv) > 0:
            src.append(Source("fre_integration", "lognormal scale per zone, mean 1",
                              {"single_observation_cv": float(fre_integration_cv)},
                              "assumption (no checkable source; uncertainty.fre_integration_cv): relative sd of the "
                              "FRE of an event observed once, / sqrt(observations of the event) (science.uncertainty."
                              "fre_sampling)",
                              "Per zone, cv_z = cv_1 sqrt(sum_e D_ez^2 / n_e) / D_z over the fire events e in the zone "
                              "(events independent, each one value across its zones); independent between zones. "
                              "Scales flaming dry matter from FRE."))
        src.append(Source("biomass", "lognormal scale, mean 1", {"cv": float(biomass_cv)}, "assumption",
                          "Run-wide scale on flaming dry matter from area x biomass x combustion factor."))
        src.append(Source("combustion_factor", "lognormal scale, mean 1",
                          {"mean": float(combustion_factor), "sd": float(combustion_factor_sd),
                           "cv": float(combustion_factor_sd) / float(combustion_factor)},
                          "IPCC 2006 Vol. 4 Ch. 2 Table 2.6, primary tropical forest (recalled, unchecked)",
                          "Run-wide scale on flaming dry matter from area x biomass x combustion factor."))
        src.append(Source("emission_factors_flaming", "lognormal per gas, independent",
                          {"set": getattr(flaming_factors, "name", "user mapping"),
                           "gases": _ef_parameters(flaming_factors, fb, "flaming",
                                                  _parent_set(flaming_factors, reference_factor_sets))},
                          getattr(flaming_factors, "citation", "user-supplied"),
                          "Run-wide; flaming gas = flaming dry matter x EF draw."))
    return src


#: Sources whose parameters the draws take as they are: source name -> {params key: the source's parameter}.
_COPIED = {
    "survey_bias": {"survey_bias_sd_m": "sd_m"},
    "subsidence_rate": {"subsidence_rate_sd_m_per_yr": "sd_m_per_yr", "interval_years": "interval_years"},
    "subsidence_rate_map": {"subsidence_rate_map_sd_m_per_yr": "sd_m_per_yr", "interval_years": "interval_years"},
    "water_table_coefficients": {"wt_coef_cov": "cov"},
    "bulk_density": {"bulk_density_cv": "cv"},
    "carbon_fraction": {"carbon_fraction_cv": "cv"},
    "fre_coefficient": {"fre_coefficient_cv": "cv"},
    "biomass": {"biomass_cv": "cv"},
    "combustion_factor": {"combustion_factor_cv": "cv"},
    "tier1_fuel": {"tier1_fuel_cv": "cv"},
    "surface_change": {"surface_change_sd_m": "sd_m"},
    "burned_area": {"burned_area_cv": "cv"},
    "fre_integration": {"fre_integration_cv": "single_observation_cv"},
    "peat_property_fill": {"peat_fill_cv": "cv"},
}


def sources_to_params(sources, *, gwp=None) -> dict:
    """Turn a list of :class:`Source` into the numeric ``params`` of the draw functions.

    Parameters
    ----------
    sources : list of Source
        From :func:`default_sources` (possibly edited).
    gwp : mapping, optional
        GWP-100 per gas [kg CO2e / kg] (e.g. ``peatburn.factors.GWPSet.gwp``); enables the
        ``co2e_*`` quantities. Gases without a GWP (CO) are left out of CO2e.

    Returns
    -------
    dict
        Keys: ``survey_bias_sd_m``, ``survey_sigma_m``, ``survey_range_m``, ``survey_nugget_fraction``,
        ``pixel_area_m2``, ``subsidence_rate_sd_m_per_yr``, ``interval_years``, ``wt_coef_cov``,
        ``wt_residual_sd_m``, ``wt_residual_range_m``, ``bulk_density_cv``, ``carbon_fraction_cv``,
        ``ef_smouldering`` (gas -> (ef, sd) [g/kg]), ``ef_flaming``, ``fre_coefficient_cv``,
        ``biomass_cv``, ``combustion_factor_cv``, ``gwp``.
    """
    p: dict = {}
    for s in sources:
        q = s.parameters
        if s.name in _COPIED:
            p.update({key: q[field] for key, field in _COPIED[s.name].items()})
        elif s.name == "survey_random" and "components" in q:
            p.update(survey_sigma_m=q["sigma_m"], survey_nugget_m2=q["nugget_m2"], pixel_area_m2=q.get("pixel_area_m2"),
                     survey_components=[(c["partial_sill_m2"], c["range_m"]) for c in q["components"]],
                     survey_trend_sd_m=q.get("trend_sd_m", 0.0))
        elif s.name == "survey_random":
            p.update(survey_sigma_m=q["sigma_m"], survey_range_m=q["range_m"],
                     survey_nugget_fraction=q.get("nugget_fraction", 0.0), pixel_area_m2=q.get("pixel_area_m2"))
        elif s.name == "water_table_residual":
            p.update(wt_residual_sd_m=q["sd_m"], wt_residual_range_m=q.get("range_m"))
        elif s.name in ("emission_factors_smouldering", "emission_factors_flaming"):
            key = "ef_" + s.name.rsplit("_", 1)[1]
            p[key] = {g: (v["ef_g_per_kg"], v["sd_g_per_kg"]) for g, v in q["gases"].items()}
        else:
            raise ConfigError(f"unknown uncertainty source {s.name!r}; known: {', '.join(SOURCE_NAMES)}")
    if gwp is not None:
        p["gwp"] = {str(g).lower(): float(v) for g, v in dict(gwp).items()}
    return p
