"""Uncertainty of zone totals: sources, zone-level Monte Carlo draws, intervals, contributions.

The model
---------
Per pixel i of a zone, the survey burn depth is ``d_i = true_i + b + e_i - dr * T``: ``b`` the
residual vertical bias left after co-registration (one value for the whole run), ``e_i`` a
spatially correlated random error (spherical variogram, sill sigma^2, range L), ``dr`` the error
of the subsidence rate removed over the survey interval T. The zone's carbon is
``C = sum d_i rho_i f_i A_i``. Because every error enters linearly (to first order), a zone is
reduced **once** to a few sums (the pipeline's zone sums, see :data:`SUM_KEYS`) and the draws are
made at zone level:

    V = volume + (b - dr T + E_z) * area + wt terms
    P = m_rho * (peat + (b - dr T + E_z) * rho_area + wt terms)
    C = m_rho * m_f * (carbon + (b - dr T + E_z) * rho_f_area + wt terms)
    G_g = m_g * EF_g / 1000 * P                  (gas g, smouldering; "Gas masses = peat mass x EF")
    D_fl = dm_fre * m_beta + dm_area * m_MB * m_Cf   (flaming dry matter), G_fl,g = m_fl,g EF_fl,g / 1000 * D_fl

``E_z`` is the mean of the correlated random error over the zone's surveyed area, drawn with the
standard deviation of :func:`correlated_sum_sd` (Rolstad et al. 2009), independently between
zones. ``b``, ``dr``, the water-table coefficients and every multiplicative factor ``m`` (mean 1)
are drawn once per draw and shared by all zones, so zone totals are correlated through them and
the run total keeps that correlation. Water-table terms: a depth model ``d = a + b_wt * wt``
(coefficients with covariance from the fit) adds ``da * wt_rho_f_area + db * wt_rho_f_area_wt``
to carbon, the sums taken over pixels where the model is not clipped (first order: clipped pixels
do not respond to small coefficient changes; the draws themselves are not clipped), and an optional
model residual adds a correlated zone-mean error like ``E_z`` over the water-table area.

The cost is O(draws x zones) arithmetic and never touches pixels; chunks of zones keep memory
below about 50 million floats (:data:`MAX_FLOATS`).

Pure functions: numbers and numpy arrays in, numpy arrays out; no files, no printing.

References
----------
Rolstad, C., Haug, T. & Denby, B. (2009). Spatially integrated geodetic glacier mass balance and its
uncertainty based on geostatistical analysis: application to the western Svartisen ice cap,
Norway. J. Glaciol. 55(192):666-680, doi:10.3189/002214309789470950.
Ballhorn, U., Siegert, F., Mason, M. & Limin, S. (2009). Derivation of burn scar depths and
estimation of carbon emissions with LIDAR in Indonesian peatlands. PNAS 106:21213-21218
(0.33 +/- 0.18 m mean burn depth; 49.15 +/- 26.81 Mt C: an uncertainty proportional to the depth's).
Wooster, M. J., Roberts, G., Perry, G. L. W. & Kaufman, Y. J. (2005). J. Geophys. Res. 110, D24311
(combustion coefficient 0.368 +/- 0.015 kg/MJ; recalled, unchecked).
Hu, Y., Fernandez-Anez, N., Smith, T. E. L. & Rein, G. (2018). Review of emissions from smouldering
peat fires and their contribution to regional haze episodes. Int. J. Wildland Fire 27:293-312
(mean fuel carbon 56.0 % for tropical peat: abstract checked; title and authors recalled, unchecked).
Hooijer, A. et al. (2012). Subsidence and carbon loss in drained tropical peatlands.
Biogeosciences 9:1053-1071 (title and pages recalled, unchecked; 3-5 cm/yr checked through a
secondary summary, see docs/sources.md).
IPCC (2006). 2006 IPCC Guidelines for National Greenhouse Gas Inventories, Vol. 4, Ch. 2,
Table 2.6 (combustion factors with standard deviations; recalled, unchecked).
JCGM 101:2008. Evaluation of measurement data - Supplement 1 to the "Guide to the expression of
uncertainty in measurement" - Propagation of distributions using a Monte Carlo method (the
2.5 and 97.5 percentiles of the draws as the 95 % coverage interval, §7.7; section recalled).
"""

from __future__ import annotations

import math
import zlib
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np

from ..errors import ConfigError, PhysicalRangeError
from .flaming import WOOSTER_2005_COEFFICIENT, WOOSTER_2005_COEFFICIENT_SD

__all__ = [
    "Source",
    "SOURCE_NAMES",
    "SUM_KEYS",
    "QUANTITY_COLUMNS",
    "MAX_FLOATS",
    "DEFAULT_SUBSIDENCE_RATE_SD",
    "DEFAULT_BULK_DENSITY_CV",
    "DEFAULT_CARBON_FRACTION",
    "DEFAULT_CARBON_FRACTION_SD",
    "DEFAULT_EF_CV",
    "DEFAULT_FRE_COEFFICIENT",
    "DEFAULT_FRE_COEFFICIENT_SD",
    "DEFAULT_BIOMASS_CV",
    "DEFAULT_COMBUSTION_FACTOR",
    "DEFAULT_COMBUSTION_FACTOR_SD",
    "MEDIAN_EFFICIENCY_FACTOR",
    "correlated_sum_sd",
    "residual_bias_sd",
    "ef_fallback_cv",
    "default_sources",
    "sources_to_params",
    "draw_zone_totals",
    "intervals",
    "variance_components",
    "contributions",
]

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

#: sqrt(pi/2) = 1.2533: standard error of the sample median over that of the sample mean for
#: independent normal data (asymptotic variance of the median pi sigma^2 / (2 n); a textbook
#: result, e.g. Cramér 1946, Mathematical Methods of Statistics, §28.5, recalled, unchecked).
MEDIAN_EFFICIENCY_FACTOR = math.sqrt(math.pi / 2.0)

#: Never hold more than about this many float64 values of draws x zones at once.
MAX_FLOATS = 50_000_000
_LIVE_ARRAYS = 8  # draws-by-chunk arrays alive at once in the draw loop (normals, cores, quantity)
_BLOCK = 16  # zones per random-number block: results do not depend on the chunk size

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
)
_RUN_WIDE = {"survey_bias", "subsidence_rate", "water_table_coefficients", "bulk_density", "carbon_fraction",
             "emission_factors_smouldering", "fre_coefficient", "biomass", "combustion_factor",
             "emission_factors_flaming", "tier1_fuel", "peat_property_fill"}

#: Zone sums read by the draws (arrays over zones; absent keys count as zeros). Survey sums
#: (``area_m2``, ``rho_area``, ``rho_f_area``) cover the pixels whose depth comes from the
#: surveys; ``volume_m3``, ``peat_kg`` and ``carbon_kg`` cover every estimated pixel. The ``wt_*``
#: sums cover the water-table pixels where the depth model is not clipped (0 < a + b wt < peat
#: thickness): elsewhere the depth does not respond to small changes of the coefficients, so
#: summing only those pixels is the exact first-order treatment of the clipping.
SUM_KEYS = {
    "area_m2": "sum A over survey-depth pixels [m2]",
    "volume_m3": "sum d A [m3]",
    "peat_kg": "sum d rho A x 1000 [kg] (rho in g/cm3)",
    "carbon_kg": "sum d rho f A x 1000 [kg C]",
    "rho_area": "sum rho A x 1000 over survey-depth pixels [kg/m]: peat mass per metre of depth",
    "rho_f_area": "sum rho f A x 1000 over survey-depth pixels [kg C/m]",
    "wt_area": "sum A over unclipped water-table-depth pixels [m2]",
    "wt_area_wt": "sum A wt over water-table pixels [m3] (optional)",
    "wt_rho_area": "sum rho A x 1000 over water-table pixels [kg/m] (optional)",
    "wt_rho_area_wt": "sum rho A wt x 1000 over water-table pixels [kg] (optional)",
    "wt_rho_f_area": "sum rho f A x 1000 over water-table pixels [kg C/m]",
    "wt_rho_f_area_wt": "sum rho f A wt x 1000 over water-table pixels [kg C]",
    "peat_kg_tier1": "sum of the Tier 1 default mass, part of peat_kg [kg] (optional; drawn with tier1_fuel, "
                     "not with the bulk density)",
    "carbon_kg_tier1": "sum of the Tier 1 default carbon, part of carbon_kg [kg C] (optional)",
    "peat_kg_filled": "mass of survey / water-table pixels whose bulk density or carbon fraction was filled, "
                      "part of peat_kg [kg] (optional; drawn with peat_property_fill too)",
    "carbon_kg_filled": "carbon of those pixels, part of carbon_kg [kg C] (optional)",
    "flaming_dm_fre_kg": "flaming dry matter from FRE with the nominal combustion coefficient [kg]",
    "flaming_dm_area_kg": "flaming dry matter from area x biomass x combustion factor [kg]",
    "flaming_carbon_kg": "flaming carbon [kg C] (scaled with the flaming dry matter)",
}

#: Output quantities and the zones.csv column each one's interval belongs to (kg -> t by the caller).
QUANTITY_COLUMNS = {
    "peat_kg": "peat_burned_t",
    "carbon_kg": "carbon_smouldering_t",
    "{gas}_smouldering_kg": "{gas}_smouldering_t",
    "co2e_smouldering_kg": "co2e_smouldering_t",
    "carbon_flaming_kg": "carbon_flaming_t",
    "{gas}_flaming_kg": "{gas}_flaming_t",
    "co2e_flaming_kg": "co2e_flaming_t",
    "volume_m3": "(burned peat volume; mean depth = volume / area)",
    "flaming_dm_kg": "(flaming dry matter)",
}


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


def correlated_sum_sd(sigma, range_m, area_m2, nugget_fraction=0.0, *, pixel_area_m2=None):
    """Standard deviation of the mean of a spatially correlated error over an area [m].

    Rolstad et al. (2009) average the spherical covariance of the errors over a circle of the
    same area as the zone, radius ``L = sqrt(A / pi)``, seen from its centre:

        sigma_A^2 = sigma_s^2 (1 - L/a + L^3 / (5 a^3))      for L <= a
        sigma_A^2 = sigma_s^2 a^2 / (5 L^2) = sigma_s^2 pi a^2 / (5 A)   for L > a

    (spherical partial sill sigma_s^2, range a). For a large zone sigma_A = sigma sqrt(pi a^2 / (5 A))
    falls like 1/sqrt(A), but with the correlation area pi a^2 / 5 in place of one pixel: the
    mean of correlated errors does not shrink like 1/sqrt(n). A nugget (uncorrelated share of the
    variance) shrinks like 1/sqrt(n), n = A / pixel area:

        var = sigma^2 [(1 - nugget_fraction) R(L/a) + nugget_fraction / n]

    Parameters
    ----------
    sigma : array_like
        Standard deviation of the per-pixel error [m] (sqrt of the total sill; e.g. the NMAD of
        stable-ground differences).
    range_m : array_like
        Range a of the spherical variogram [m], > 0.
    area_m2 : array_like
        Area over which the error is averaged [m2] (the zone's surveyed burned area).
    nugget_fraction : float
        Share of sigma^2 that is uncorrelated, in [0, 1].
    pixel_area_m2 : float, optional
        Pixel area [m2]; needed when ``nugget_fraction > 0``.

    Returns
    -------
    numpy.ndarray
        Standard deviation of the area-mean error [m]; sigma for an area of 0.

    Notes
    -----
    The form was checked against a public implementation that cites the paper's DOI and
    re-derived here: (2 / L^2) * integral_0^L C(r) r dr with the spherical covariance
    C(r) = sigma^2 (1 - 3r/(2a) + r^3/(2a^3)) gives both branches. The paper's equation numbers
    were not checked. For large areas the expression equals the exact variance of the mean over
    the disc (the integral of the covariance divided by the area). For any zone shape it is an
    upper bound: the average covariance from the centre of a disc is the largest over the disc,
    and the disc maximises the double integral of a decreasing covariance among sets of equal
    area (Riesz rearrangement inequality; e.g. Lieb & Loss 2001, Analysis, Thm 3.7, recalled).
    Elongated or scattered burned areas therefore get conservative (wider) intervals.

    References
    ----------
    Rolstad, C., Haug, T. & Denby, B. (2009). J. Glaciol. 55(192):666-680,
    doi:10.3189/002214309789470950.
    """
    sigma = np.asarray(sigma, dtype="float64")
    a = np.asarray(range_m, dtype="float64")
    area = np.asarray(area_m2, dtype="float64")
    nf = float(nugget_fraction)
    if not 0.0 <= nf <= 1.0:
        raise PhysicalRangeError(f"correlated_sum_sd: nugget_fraction must lie in [0, 1], got {nf!r}")
    if np.any(sigma < 0) or np.any(area < 0):
        raise PhysicalRangeError("correlated_sum_sd: sigma and area must be >= 0")
    if nf < 1.0 and np.any(~(a > 0)):
        raise PhysicalRangeError("correlated_sum_sd: the range must be > 0 m (use nugget_fraction=1 for "
                                 "uncorrelated errors)")
    with np.errstate(divide="ignore", invalid="ignore"):
        if nf < 1.0:
            ratio = np.sqrt(area / math.pi) / a
            r_sph = np.where(ratio <= 1.0, 1.0 - ratio + ratio**3 / 5.0, 1.0 / (5.0 * ratio**2))
        else:
            r_sph = np.zeros(np.broadcast(sigma, area).shape)
        if nf > 0.0:
            if pixel_area_m2 is None or not float(pixel_area_m2) > 0:
                raise PhysicalRangeError("correlated_sum_sd: pixel_area_m2 (> 0) is needed when nugget_fraction > 0")
            n = np.maximum(area / float(pixel_area_m2), 1.0)
            r_nug = 1.0 / n
        else:
            r_nug = 0.0
    return sigma * np.sqrt((1.0 - nf) * r_sph + nf * r_nug)


def residual_bias_sd(sigma, range_m, stable_area_m2, *, nugget_fraction=0.0, pixel_area_m2=None,
                     estimator="median"):
    """Standard deviation of the vertical bias left after co-registration [m].

    Co-registration subtracts the mean or the median of the stable-ground differences; what is
    left is the error of that statistic over the stable ground.

    * ``"mean"``: :func:`correlated_sum_sd` over the stable area (Rolstad et al. 2009).
    * ``"median"``: by the Bahadur representation of the sample median (median - m ~
      (1/2 - F_n(m)) / f(m), also for weakly dependent data; Sen 1972, recalled) and Sheppard's
      formula for the bivariate normal orthant, P(X <= 0, Y <= 0) = 1/4 + arcsin(rho) / (2 pi)
      (Sheppard 1899, recalled), the variance of the median of normal errors with correlations
      rho_ij is ``sigma^2 / n^2 * sum_ij arcsin(rho_ij)`` where the mean has ``sum_ij rho_ij``.
      The spherical part is averaged like Rolstad et al. (2009) do for the mean, from the centre
      of a disc of the stable area, radius L = sqrt(A / pi):

          var / sigma^2 = (2 / L^2) * integral_0^min(L, a) arcsin((1 - nu) rho_s(r)) r dr + nu (pi/2) / n

      with rho_s(r) = 1 - 3r/(2a) + r^3/(2a^3), nugget fraction nu and n = A / pixel area. With
      independent errors (nu = 1) this is the textbook pi sigma^2 / (2 n) (:data:`MEDIAN_EFFICIENCY_FACTOR`);
      for correlated errors over a large area it is only 1.0556 times the variance of the mean
      (integral of arcsin(rho_s) r over that of rho_s r), since most pairs are weakly correlated.

    Parameters
    ----------
    sigma, range_m : float
        Per-pixel error [m] and spherical range [m] from the stable ground.
    stable_area_m2 : float
        Area of stable ground used for the vertical shift [m2].
    nugget_fraction, pixel_area_m2 : float
        As :func:`correlated_sum_sd` (the pixel area is needed with a nugget).
    estimator : {"median", "mean"}
        The statistic co-registration used for the vertical shift.

    Returns
    -------
    float
        sigma_bias [m].

    References
    ----------
    Rolstad et al. (2009), J. Glaciol. 55:666; Sheppard, W. F. (1899). On the application of the
    theory of error to cases of normal distribution and normal correlation. Phil. Trans. R. Soc.
    Lond. A 192:101-167 (recalled, unchecked); Sen, P. K. (1972). On the Bahadur representation
    of sample quantiles for sequences of phi-mixing random variables. J. Multivar. Anal. 2:77-95
    (recalled, unchecked).
    """
    if estimator == "mean":
        return float(correlated_sum_sd(sigma, range_m, stable_area_m2, nugget_fraction, pixel_area_m2=pixel_area_m2))
    if estimator != "median":
        raise ConfigError(f"residual_bias_sd: estimator {estimator!r}; use 'median' or 'mean'")
    from scipy.integrate import quad

    sig, a, area, nu = float(sigma), float(range_m), float(stable_area_m2), float(nugget_fraction)
    if not (sig >= 0 and area >= 0 and 0.0 <= nu <= 1.0 and (a > 0 or nu == 1.0)):
        raise PhysicalRangeError("residual_bias_sd: sigma, area >= 0, range > 0, nugget_fraction in [0, 1]")
    big_l = math.sqrt(area / math.pi)
    if big_l == 0:
        return sig
    var = 0.0
    if nu < 1.0:
        upper = min(big_l, a)

        def integrand(r):
            x = r / a
            return math.asin((1.0 - nu) * (1.0 - 1.5 * x + 0.5 * x**3)) * r

        var += 2.0 / big_l**2 * quad(integrand, 0.0, upper, epsabs=0.0, epsrel=1e-10)[0]
    if nu > 0.0:
        if pixel_area_m2 is None or not float(pixel_area_m2) > 0:
            raise PhysicalRangeError("residual_bias_sd: pixel_area_m2 (> 0) is needed when nugget_fraction > 0")
        var += nu * (math.pi / 2.0) / max(area / float(pixel_area_m2), 1.0)
    return sig * math.sqrt(var)


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


def ef_fallback_cv(factor_sets) -> dict[str, float]:
    """Per gas, the largest relative spread (sd / ef) published by any of the given sets.

    Used to give a spread to an emission factor whose own set publishes none (the IPCC 2013
    Wetlands defaults, for example): the spread borrowed is the widest among sets of the same
    phase that do publish one, so that the borrowed interval is not narrower than the evidence.

    Parameters
    ----------
    factor_sets : iterable
        FactorSet-like objects (``.ef``, ``.sd`` mappings) or mappings gas -> (ef, sd).

    Returns
    -------
    dict of str to float
        gas -> CV [-]; gases with no published spread anywhere are absent.
    """
    out: dict[str, float] = {}
    for fs in factor_sets:
        for g, (ef, sd) in _ef_table(fs).items():
            if ef > 0 and math.isfinite(sd) and sd >= 0:
                out[g] = max(out.get(g, 0.0), sd / ef)
    return out


def _ef_parameters(factors, fallback, phase):
    table = _ef_table(factors)
    gases = {}
    for g, (ef, sd) in table.items():
        if ef < 0 or (math.isfinite(sd) and sd < 0):
            raise PhysicalRangeError(f"{phase} emission factor {g}: ef and sd must be >= 0")
        if math.isfinite(sd):
            cv, basis = (sd / ef if ef > 0 else 0.0), "published spread of the set"
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
                    subsidence_rate_map_sd_m_per_yr=0.0, tier1_fuel_cv=0.0, peat_fill_cv=0.0) -> list[Source]:
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
                      ("tier1_fuel_cv", tier1_fuel_cv), ("peat_fill_cv", peat_fill_cv)):
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
               "zones (approximation: zones closer than the range are in truth correlated)."),
        Source("subsidence_rate", "normal", {"sd_m_per_yr": float(subsidence_rate_sd_m_per_yr),
                                             "interval_years": float(interval_years)},
               "Hooijer et al. 2012 (3-5 cm/yr; secondary check); default sd = half that range (assumption)",
               "Run-wide; the rate error times the survey interval acts like a bias over the surveyed "
               "area. If the stable ground subsides at the same rate, co-registration already removes "
               "it and this source double-counts (conservative)."),
    ]
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
    cf_mean = float(carbon_fraction)
    if not cf_mean > 0:
        raise PhysicalRangeError("carbon_fraction must be > 0")
    src.append(Source("carbon_fraction", "lognormal scale, mean 1",
                      {"mean": cf_mean, "sd": float(carbon_fraction_sd), "cv": float(carbon_fraction_sd) / cf_mean},
                      "mean: Hu et al. 2018 (56.0 %, abstract checked); sd: assumption",
                      "Run-wide multiplicative scale on carbon (the gases follow the peat mass, not f)."))
    if smouldering_factors is not None:
        fallback = ef_fallback_cv(reference_factor_sets)
        src.append(Source("emission_factors_smouldering", "lognormal per gas, independent",
                          {"set": getattr(smouldering_factors, "name", "user mapping"),
                           "gases": _ef_parameters(smouldering_factors, fallback, "smouldering")},
                          getattr(smouldering_factors, "citation", "user-supplied"),
                          "Run-wide; gas mass = peat mass x EF draw. Gases drawn independently "
                          "(in truth CO2 and CO anti-correlate through the combustion efficiency)."))
    if flaming_factors is not None:
        fb = ef_fallback_cv(reference_factor_sets)
        src.append(Source("fre_coefficient", "lognormal scale, mean 1",
                          {"mean_kg_per_mj": float(fre_coefficient), "sd_kg_per_mj": float(fre_coefficient_sd),
                           "cv": float(fre_coefficient_sd) / float(fre_coefficient)},
                          "Wooster et al. 2005, J. Geophys. Res. 110, D24311 "
                          "(0.368 +/- 0.015 kg/MJ; recalled, unchecked)",
                          "Run-wide scale on flaming dry matter from FRE."))
        src.append(Source("biomass", "lognormal scale, mean 1", {"cv": float(biomass_cv)}, "assumption",
                          "Run-wide scale on flaming dry matter from area x biomass x combustion factor."))
        src.append(Source("combustion_factor", "lognormal scale, mean 1",
                          {"mean": float(combustion_factor), "sd": float(combustion_factor_sd),
                           "cv": float(combustion_factor_sd) / float(combustion_factor)},
                          "IPCC 2006 Vol. 4 Ch. 2 Table 2.6, primary tropical forest (recalled, unchecked)",
                          "Run-wide scale on flaming dry matter from area x biomass x combustion factor."))
        src.append(Source("emission_factors_flaming", "lognormal per gas, independent",
                          {"set": getattr(flaming_factors, "name", "user mapping"),
                           "gases": _ef_parameters(flaming_factors, fb, "flaming")},
                          getattr(flaming_factors, "citation", "user-supplied"),
                          "Run-wide; flaming gas = flaming dry matter x EF draw."))
    return src


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
        if s.name == "survey_bias":
            p["survey_bias_sd_m"] = q["sd_m"]
        elif s.name == "survey_random":
            p.update(survey_sigma_m=q["sigma_m"], survey_range_m=q["range_m"],
                     survey_nugget_fraction=q.get("nugget_fraction", 0.0), pixel_area_m2=q.get("pixel_area_m2"))
        elif s.name == "subsidence_rate":
            p.update(subsidence_rate_sd_m_per_yr=q["sd_m_per_yr"], interval_years=q["interval_years"])
        elif s.name == "water_table_coefficients":
            p["wt_coef_cov"] = q["cov"]
        elif s.name == "water_table_residual":
            p.update(wt_residual_sd_m=q["sd_m"], wt_residual_range_m=q.get("range_m"))
        elif s.name == "bulk_density":
            p["bulk_density_cv"] = q["cv"]
        elif s.name == "carbon_fraction":
            p["carbon_fraction_cv"] = q["cv"]
        elif s.name == "emission_factors_smouldering":
            p["ef_smouldering"] = {g: (v["ef_g_per_kg"], v["sd_g_per_kg"]) for g, v in q["gases"].items()}
        elif s.name == "emission_factors_flaming":
            p["ef_flaming"] = {g: (v["ef_g_per_kg"], v["sd_g_per_kg"]) for g, v in q["gases"].items()}
        elif s.name == "fre_coefficient":
            p["fre_coefficient_cv"] = q["cv"]
        elif s.name == "biomass":
            p["biomass_cv"] = q["cv"]
        elif s.name == "combustion_factor":
            p["combustion_factor_cv"] = q["cv"]
        elif s.name == "subsidence_rate_map":
            p.update(subsidence_rate_map_sd_m_per_yr=q["sd_m_per_yr"], interval_years=q["interval_years"])
        elif s.name == "tier1_fuel":
            p["tier1_fuel_cv"] = q["cv"]
        elif s.name == "peat_property_fill":
            p["peat_fill_cv"] = q["cv"]
        else:
            raise ConfigError(f"unknown uncertainty source {s.name!r}; known: {', '.join(SOURCE_NAMES)}")
    if gwp is not None:
        p["gwp"] = {str(g).lower(): float(v) for g, v in dict(gwp).items()}
    return p


# ----------------------------------------------------------------------------- the zone-level model

_PARAM_KEYS = {
    "survey_bias_sd_m", "survey_sigma_m", "survey_range_m", "survey_nugget_fraction", "pixel_area_m2",
    "subsidence_rate_sd_m_per_yr", "interval_years", "wt_coef_cov", "wt_residual_sd_m", "wt_residual_range_m",
    "bulk_density_cv", "carbon_fraction_cv", "ef_smouldering", "ef_flaming", "fre_coefficient_cv",
    "biomass_cv", "combustion_factor_cv", "gwp",
    "subsidence_rate_map_sd_m_per_yr", "tier1_fuel_cv", "peat_fill_cv",
}


@dataclass
class _Model:
    """The zone-level model: quantities are weighted sums of *cores*; a core is a base sum plus
    per-zone multipliers of *error fields* (depth errors [m]); a field is a sum of standard
    normal sources times coefficients (scalars for run-wide sources, per-zone arrays otherwise)."""

    n: int
    fields: dict  # field -> {source key: coefficient (float or (n,) array)}
    cores: dict  # core -> (base (n,), {field: multiplier (n,)})
    additive: dict  # source key -> (group name, run_wide)
    factors: dict  # multiplicative factor key -> (group name, cv)
    quantities: dict  # quantity -> list of (core, coef, tuple of factor keys)

    def core_coefficients(self, core) -> dict:
        """source key -> d core / d z_source, per zone (n,)."""
        out = {}
        for f, mult in self.cores[core][1].items():
            for k, coef in self.fields[f].items():
                out[k] = out.get(k, 0.0) + mult * coef
        return out


def _nonneg(params, key, default=0.0) -> float:
    v = params.get(key, default)
    if v is None:
        return default
    v = float(v)
    if not (math.isfinite(v) and v >= 0):
        raise PhysicalRangeError(f"uncertainty parameter {key}: must be a finite number >= 0, got {v!r}")
    return v


def _efs(params, key) -> dict:
    out = {}
    for g, val in _ef_table(params.get(key)).items():
        ef, sd = val
        if not (math.isfinite(ef) and ef >= 0):
            raise PhysicalRangeError(f"uncertainty parameter {key}[{g}]: emission factor must be >= 0")
        if not (math.isfinite(sd) and sd >= 0):
            raise ConfigError(f"uncertainty parameter {key}[{g}]: no spread (sd); default_sources fills "
                              "missing spreads from reference sets or an assumption")
        out[g] = (ef, sd / ef if ef > 0 else 0.0)
    return out


def _build(sums: Mapping, params: Mapping) -> _Model:
    unknown = set(params) - _PARAM_KEYS
    if unknown:
        raise ConfigError(f"uncertainty parameters: unknown key(s) {', '.join(sorted(unknown))}; "
                          f"known: {', '.join(sorted(_PARAM_KEYS))}")
    arrays = {}
    n = None
    for k in SUM_KEYS:
        if k in sums and sums[k] is not None:
            a = np.asarray(sums[k], dtype="float64")
            if a.ndim != 1:
                raise ConfigError(f"zone sums: {k!r} must be a 1-D array over zones")
            if n is None:
                n = a.size
            elif a.size != n:
                raise ConfigError(f"zone sums: {k!r} has {a.size} zones, other sums have {n}")
            if not np.all(np.isfinite(a)):
                raise ConfigError(f"zone sums: {k!r} holds NaN or infinite values")
            arrays[k] = a
    if n is None:
        raise ConfigError(f"zone sums: none of the expected keys ({', '.join(SUM_KEYS)}) is present")
    z = np.zeros(n)

    def get(k):
        return arrays.get(k, z)

    def ratio(num, den):
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(den != 0, num / np.where(den != 0, den, 1.0), 0.0)

    area = get("area_m2")
    sig_b = _nonneg(params, "survey_bias_sd_m")
    sig = _nonneg(params, "survey_sigma_m")
    T = _nonneg(params, "interval_years")
    sig_r = _nonneg(params, "subsidence_rate_sd_m_per_yr") * T
    sig_map = np.full(n, _nonneg(params, "subsidence_rate_map_sd_m_per_yr") * T)  # per zone
    sz = np.zeros(n)
    if sig > 0:
        rng_m = params.get("survey_range_m")
        if rng_m is None:
            raise ConfigError("uncertainty parameters: survey_range_m is needed with survey_sigma_m > 0")
        sz = correlated_sum_sd(sig, float(rng_m), area, _nonneg(params, "survey_nugget_fraction"),
                               pixel_area_m2=params.get("pixel_area_m2"))
    # water table
    wt_area = get("wt_area")
    wt_rf, wt_rf_wt = get("wt_rho_f_area"), get("wt_rho_f_area_wt")
    # peat and volume analogues, when the pipeline does not give them: scale by the zone's ratios
    wt_r = arrays.get("wt_rho_area", wt_rf * ratio(get("peat_kg"), get("carbon_kg")))
    wt_r_wt = arrays.get("wt_rho_area_wt", wt_rf_wt * ratio(get("peat_kg"), get("carbon_kg")))
    wt_a_wt = arrays.get("wt_area_wt", wt_area * ratio(wt_rf_wt, wt_rf))
    wt_l = np.zeros((2, 2))
    if params.get("wt_coef_cov") is not None:
        cov = np.asarray(params["wt_coef_cov"], dtype="float64")
        if cov.shape != (2, 2) or not np.all(np.isfinite(cov)) or not np.allclose(cov, cov.T):
            raise PhysicalRangeError("uncertainty parameter wt_coef_cov: a finite symmetric 2 x 2 covariance")
        w, v = np.linalg.eigh(cov)
        if w.min() < -1e-9 * max(1.0, abs(w).max()):
            raise PhysicalRangeError("uncertainty parameter wt_coef_cov: not positive semi-definite")
        wt_l = v * np.sqrt(np.clip(w, 0.0, None))  # (da, db) = wt_l @ (z1, z2)
    s_wt = _nonneg(params, "wt_residual_sd_m")
    swz = np.zeros(n)
    if s_wt > 0:
        r_wt = params.get("wt_residual_range_m")
        swz = np.full(n, s_wt) if r_wt is None else correlated_sum_sd(s_wt, float(r_wt), wt_area)

    fields = {
        "survey": {"survey_bias": sig_b, "subsidence_rate": sig_r, "survey_random": sz, "subsidence_map": sig_map},
        "wt_a": {"wt1": float(wt_l[0, 0]), "wt2": float(wt_l[0, 1]), "wt_residual": swz},
        "wt_b": {"wt1": float(wt_l[1, 0]), "wt2": float(wt_l[1, 1])},
    }
    fields = {f: {k: c for k, c in src.items() if np.any(np.asarray(c) != 0)} for f, src in fields.items()}
    fields = {f: src for f, src in fields.items() if src}
    # Tier 1 and filled pixels are parts of peat_kg / carbon_kg with sources of their own: the main
    # cores hold the rest (the survey and water-table error fields act on depth pixels only)
    p_t1, c_t1 = get("peat_kg_tier1"), get("carbon_kg_tier1")
    p_fill, c_fill = get("peat_kg_filled"), get("carbon_kg_filled")
    cores = {
        "V": (get("volume_m3"), {"survey": area, "wt_a": wt_area, "wt_b": wt_a_wt}),
        "P": (get("peat_kg") - p_t1 - p_fill, {"survey": get("rho_area"), "wt_a": wt_r, "wt_b": wt_r_wt}),
        "C": (get("carbon_kg") - c_t1 - c_fill, {"survey": get("rho_f_area"), "wt_a": wt_rf, "wt_b": wt_rf_wt}),
        "PT1": (p_t1, {}), "CT1": (c_t1, {}), "PF": (p_fill, {}), "CF": (c_fill, {}),
    }
    for name, (base, mult) in cores.items():  # drop fields with no effect
        cores[name] = (base, {f: m for f, m in mult.items() if f in fields and np.any(m != 0)})
    additive_src = {"survey_bias": ("survey_bias", True), "subsidence_rate": ("subsidence_rate", True),
                    "survey_random": ("survey_random", False), "subsidence_map": ("subsidence_rate_map", False),
                    "wt1": ("water_table_coefficients", True),
                    "wt2": ("water_table_coefficients", True), "wt_residual": ("water_table_residual", False)}

    factors = {"bulk_density": ("bulk_density", _nonneg(params, "bulk_density_cv")),
               "carbon_fraction": ("carbon_fraction", _nonneg(params, "carbon_fraction_cv")),
               "tier1_fuel": ("tier1_fuel", _nonneg(params, "tier1_fuel_cv")),
               "peat_fill": ("peat_property_fill", _nonneg(params, "peat_fill_cv"))}
    # the peat-mass terms: (core, factors of the mass); gases follow the mass, carbon adds f_C
    mass_terms = [("P", ("bulk_density",)), ("PT1", ("tier1_fuel",)), ("PF", ("bulk_density", "peat_fill"))]
    mass_terms = [t for t in mass_terms if t[0] == "P" or np.any(cores[t[0]][0] != 0)]
    carbon_terms = [("C", ("bulk_density", "carbon_fraction")), ("CT1", ("tier1_fuel", "carbon_fraction")),
                    ("CF", ("bulk_density", "carbon_fraction", "peat_fill"))]
    carbon_terms = [t for t in carbon_terms if t[0] == "C" or np.any(cores[t[0]][0] != 0)]
    quantities = {
        "volume_m3": [("V", 1.0, ())],
        "peat_kg": [(c, 1.0, f) for c, f in mass_terms],
        "carbon_kg": [(c, 1.0, f) for c, f in carbon_terms],
    }
    gwp = {str(g).lower(): float(v) for g, v in dict(params.get("gwp") or {}).items()}
    ef_s = _efs(params, "ef_smouldering")
    co2e = []
    for g, (ef, cv) in ef_s.items():
        fk = f"ef_smouldering:{g}"
        factors[fk] = ("emission_factors_smouldering", cv)
        quantities[f"{g}_smouldering_kg"] = [(c, ef / 1000.0, f + (fk,)) for c, f in mass_terms]
        if g in gwp:
            co2e += [(c, gwp[g] * ef / 1000.0, f + (fk,)) for c, f in mass_terms]
    if co2e:
        quantities["co2e_smouldering_kg"] = co2e

    has_flaming = "flaming_dm_fre_kg" in arrays or "flaming_dm_area_kg" in arrays
    if has_flaming:
        ff, fa = get("flaming_dm_fre_kg"), get("flaming_dm_area_kg")
        cores["FF"] = (ff, {})
        cores["FA"] = (fa, {})
        factors["fre_coefficient"] = ("fre_coefficient", _nonneg(params, "fre_coefficient_cv"))
        factors["biomass"] = ("biomass", _nonneg(params, "biomass_cv"))
        factors["combustion_factor"] = ("combustion_factor", _nonneg(params, "combustion_factor_cv"))
        fre_f, area_f = ("fre_coefficient",), ("biomass", "combustion_factor")
        quantities["flaming_dm_kg"] = [("FF", 1.0, fre_f), ("FA", 1.0, area_f)]
        if "flaming_carbon_kg" in arrays:
            cfrac = ratio(arrays["flaming_carbon_kg"], ff + fa)
            cores["FFC"] = (ff * cfrac, {})
            cores["FAC"] = (fa * cfrac, {})
            quantities["carbon_flaming_kg"] = [("FFC", 1.0, fre_f), ("FAC", 1.0, area_f)]
        co2e_f = []
        for g, (ef, cv) in _efs(params, "ef_flaming").items():
            fk = f"ef_flaming:{g}"
            factors[fk] = ("emission_factors_flaming", cv)
            terms = [("FF", ef / 1000.0, fre_f + (fk,)), ("FA", ef / 1000.0, area_f + (fk,))]
            quantities[f"{g}_flaming_kg"] = terms
            if g in gwp:
                co2e_f += [(c, gwp[g] * w, f) for c, w, f in terms]
        if co2e_f:
            quantities["co2e_flaming_kg"] = co2e_f
    return _Model(n=n, fields=fields, cores=cores, additive=additive_src, factors=factors,
                  quantities=quantities)


def _check_fixed(fixed) -> set:
    fixed = set(fixed or ())
    bad = fixed - set(SOURCE_NAMES)
    if bad:
        raise ConfigError(f"fixed: unknown source(s) {', '.join(sorted(bad))}; known: {', '.join(SOURCE_NAMES)}")
    return fixed


def _stream(seed: int, *keys) -> np.random.Generator:
    return np.random.default_rng([int(seed), *keys])


def _key_id(name: str) -> int:
    return zlib.crc32(name.encode("utf-8"))


def _run_wide_draws(model: _Model, draws: int, seed: int, fixed: set):
    """Standard normals of the run-wide additive sources and the multiplicative factors (mean 1)."""
    zr = {}
    for k, (group, run_wide) in model.additive.items():
        if run_wide:
            zr[k] = (np.zeros(draws) if group in fixed
                     else _stream(seed, SOURCE_NAMES.index(group), 0, _key_id(k)).standard_normal(draws))
    mult = {}
    for k, (group, cv) in model.factors.items():
        if group in fixed or cv == 0:
            mult[k] = np.ones(draws)
        else:
            # lognormal with mean 1 and coefficient of variation cv: s^2 = ln(1 + cv^2), mu = -s^2/2
            s2 = math.log1p(cv * cv)
            z = _stream(seed, SOURCE_NAMES.index(group), 0, _key_id(k)).standard_normal(draws)
            mult[k] = np.exp(math.sqrt(s2) * z - 0.5 * s2)
    return zr, mult


def _chunk_size(n: int, draws: int, chunk_zones: int, workers: int = 1) -> int:
    budget = max(_BLOCK, (MAX_FLOATS // (_LIVE_ARRAYS * max(workers, 1))) // max(draws, 1))
    c = min(int(chunk_zones), budget, max(n, 1))
    return max(_BLOCK, (c // _BLOCK) * _BLOCK)


class _Drawer:
    """Draws of a model, chunk by chunk. ``chunk(start, stop)`` returns ``(zone slice, evaluate)``;
    ``evaluate(q)`` returns the draws of quantity ``q`` for the chunk as a new array (chunk, draws).
    Quantities are evaluated one at a time so that only the chunk's fields, cores and one quantity
    are alive at once. Chunks are independent (their random streams are keyed by zone block), so
    they may run in threads."""

    def __init__(self, model: _Model, draws: int, seed: int, fixed: set, quantities=None):
        self.model, self.draws, self.seed, self.fixed = model, draws, seed, fixed
        zr, mult = _run_wide_draws(model, draws, seed, fixed)
        wanted = list(model.quantities) if quantities is None else list(quantities)
        # per quantity and core: the per-draw weight sum_t coef_t prod_m m
        weights = {}
        for q in wanted:
            w = {}
            for core, coef, facs in model.quantities[q]:
                prod = np.full(draws, float(coef))
                for f in facs:
                    prod = prod * mult[f]
                w[core] = w[core] + prod if core in w else prod
            weights[q] = w
        used_cores = sorted({c for q in wanted for c in weights[q]})
        used_fields = sorted({f for c in used_cores for f in model.cores[c][1]})
        # run-wide part of each field: one vector over draws
        rw_part = {}
        for f in used_fields:
            v = np.zeros(draws)
            for k, coef in model.fields[f].items():
                if model.additive[k][1]:
                    v += coef * zr[k]
            rw_part[f] = v
        pz_keys = sorted({k for f in used_fields for k in model.fields[f]
                          if not model.additive[k][1] and model.additive[k][0] not in fixed})
        self.zr, self.weights, self.used_cores, self.used_fields = zr, weights, used_cores, used_fields
        self.rw_part, self.pz_keys = rw_part, pz_keys

    def chunk(self, start: int, stop: int):
        model, draws, seed = self.model, self.draws, self.seed
        weights, used_cores, used_fields = self.weights, self.used_cores, self.used_fields
        rw_part, pz_keys = self.rw_part, self.pz_keys
        sl = slice(start, stop)
        nz = stop - start
        field_arr = {}
        for f in used_fields:
            arr = None
            for k in pz_keys:
                if k not in model.fields[f]:
                    continue
                gid = SOURCE_NAMES.index(model.additive[k][0])
                z = np.empty((nz, draws))
                for b0 in range(start, stop, _BLOCK):
                    # one stream per block of _BLOCK zones, always drawn in full: a zone's draws do
                    # not depend on how zones are chunked
                    full = _stream(seed, gid, 1 + b0 // _BLOCK, _key_id(k)).standard_normal((_BLOCK, draws))
                    nb = min(_BLOCK, stop - b0)
                    z[b0 - start:b0 - start + nb] = full[:nb]
                z *= np.broadcast_to(np.asarray(model.fields[f][k], dtype="float64"), (model.n,))[sl, None]
                if arr is None:
                    arr = z
                else:
                    arr += z
                del z
            if arr is None:
                field_arr[f] = rw_part[f][None, :]
            else:
                arr += rw_part[f][None, :]
                field_arr[f] = arr
        core_arr = {}
        for c in used_cores:
            base, mults = model.cores[c]
            arr = None
            for f, m in mults.items():
                if arr is None:
                    arr = np.multiply(m[sl, None], field_arr[f], out=np.empty((nz, draws)))
                else:
                    arr += m[sl, None] * field_arr[f]
            if arr is None:
                core_arr[c] = base[sl, None]
            else:
                arr += base[sl, None]
                core_arr[c] = arr
        del field_arr

        def evaluate(q, core_arr=core_arr, nz=nz):
            acc = None
            for c, w in weights[q].items():
                if acc is None:
                    acc = np.multiply(core_arr[c], w[None, :], out=np.empty((nz, draws)))
                else:
                    acc += core_arr[c] * w[None, :]
            return acc

        return sl, evaluate


def _map_chunks(drawer: _Drawer, chunk_zones: int, workers: int, fn):
    """Yield ``fn(zone slice, evaluate)`` for every chunk, in order; chunks run on ``workers`` threads
    (numpy releases the GIL in the heavy loops)."""
    n = drawer.model.n
    step = _chunk_size(n, drawer.draws, chunk_zones, workers)
    starts = list(range(0, n, step))

    def run(start):
        sl, evaluate = drawer.chunk(start, min(start + step, n))
        return fn(sl, evaluate)

    if workers <= 1 or len(starts) <= 1:
        for st in starts:
            yield run(st)
        return
    from concurrent.futures import ThreadPoolExecutor

    with ThreadPoolExecutor(max_workers=workers) as pool:
        pending = []
        for st in starts:
            pending.append(pool.submit(run, st))
            if len(pending) >= workers:  # keep at most `workers` chunks in memory
                yield pending.pop(0).result()
        for fut in pending:
            yield fut.result()


def _block_sums(arr: np.ndarray) -> np.ndarray:
    """Sums over zones of each block of _BLOCK zones (chunks start on block boundaries)."""
    return np.stack([arr[i:i + _BLOCK].sum(axis=0) for i in range(0, arr.shape[0], _BLOCK)])


def _check_draws(draws, seed):
    draws = int(draws)
    if draws < 2:
        raise ConfigError(f"uncertainty.draws must be at least 2, got {draws}")
    if int(seed) < 0:
        raise ConfigError(f"uncertainty.seed must be >= 0, got {seed}")
    return draws


def draw_zone_totals(sums: Mapping, params: Mapping, *, draws: int, seed: int, fixed=frozenset(),
                     chunk_zones=2000) -> dict[str, np.ndarray]:
    """Monte Carlo draws of every quantity for every zone.

    Parameters
    ----------
    sums : mapping of str to numpy.ndarray
        Zone sums (:data:`SUM_KEYS`), float arrays of one length (zones).
    params : mapping
        Run-level parameters (:func:`sources_to_params`).
    draws : int
        Number of draws (>= 2).
    seed : int
        Seed (>= 0). Results do not depend on ``chunk_zones``.
    fixed : set of str
        Sources held at their nominal value (names from :data:`SOURCE_NAMES`).
    chunk_zones : int
        Upper bound on zones per chunk (also capped so that memory stays near :data:`MAX_FLOATS`).

    Returns
    -------
    dict of str to numpy.ndarray
        Quantity -> array (draws, zones) [kg, or m3 for ``volume_m3``]; keys as
        :data:`QUANTITY_COLUMNS`.

    Raises
    ------
    ConfigError
        When draws x zones x quantities exceeds :data:`MAX_FLOATS` (use :func:`intervals`, which
        never holds them all).
    """
    draws = _check_draws(draws, seed)
    model = _build(sums, params)
    fixed = _check_fixed(fixed)
    nq = len(model.quantities)
    if draws * model.n * nq > MAX_FLOATS:
        raise ConfigError(f"draw_zone_totals: {draws} draws x {model.n} zones x {nq} quantities exceed "
                          f"{MAX_FLOATS:,} values; use intervals(), which reduces each chunk to percentiles")
    out = {q: np.empty((draws, model.n)) for q in model.quantities}

    def store(sl, evaluate):
        for q in model.quantities:
            out[q][:, sl] = evaluate(q).T

    for _ in _map_chunks(_Drawer(model, draws, seed, fixed), chunk_zones, 1, store):
        pass
    return out


_SUBSAMPLE = 1024  # draws used to place the tail thresholds of the fast quantile selection
_TAIL_MAX = 0.1  # ranks within this share of either end use the tail selection
_ROW_BLOCK = 32  # rows selected at a time (cache-sized blocks; the result does not depend on it)


def _subsample_threshold(a: np.ndarray, need: int, upper: bool) -> tuple[np.ndarray, int]:
    """Per row, a value that about ``need`` (+6 sd) of the row lie beyond, from the first
    :data:`_SUBSAMPLE` draws; and the number of the subsample kept beyond it."""
    rows, n = a.shape
    m = min(_SUBSAMPLE, n)
    p = need / n
    k_sub = int(math.ceil(p * m + 6.0 * math.sqrt(m * p * (1.0 - p)) + 3.0))
    k_sub = min(max(k_sub, 0), m - 1)
    sub = a[:, :m].copy()
    k = m - 1 - k_sub if upper else k_sub
    sub.partition(k, axis=1)
    return sub[:, k].copy(), k_sub


def _tail_values(a: np.ndarray, lower: list[int], upper: list[int]) -> dict[int, np.ndarray]:
    """Order statistics ``lower`` and ``upper`` (0-based, ascending ranks, near the low and the
    high end) of each row of ``a``, from one pass over ``a``.

    A threshold per tail from a subsample of the row keeps the few candidates of that tail (a few
    percent of the row); both tails' candidates are gathered in one pass, sorted per row and the
    ranks read off. Rows where a threshold keeps too few (or, with ties, too many) candidates fall
    back to a full partition, so the result is always the exact order statistic.
    """
    rows, n = a.shape
    m = min(_SUBSAMPLE, n)
    sides = []  # (ranks, upper, threshold, need, cap)
    for ranks, up in ((lower, False), (upper, True)):
        if ranks:
            need = (n - min(ranks)) if up else (max(ranks) + 1)  # candidates needed from the tail end
            thr, k_sub = _subsample_threshold(a, need, up)
            cap = max(4 * need + 64, int(1.5 * need * m / max(k_sub, 1)))
            sides.append((ranks, up, thr, need, cap))
    mask = None
    for _, up, thr, _, _ in sides:
        side = (a >= thr[:, None]) if up else (a <= thr[:, None])
        mask = side if mask is None else np.logical_or(mask, side, out=mask)
    idx = np.flatnonzero(mask)  # row-major: the candidates come grouped by row
    del mask
    vals = a.ravel()[idx]
    row = idx // n
    del idx
    out: dict[int, np.ndarray] = {}
    bad_any = np.zeros(rows, bool)
    for ranks, up, thr, need, cap in sides:
        keep = (vals >= thr[row]) if up else (vals <= thr[row])
        v, r = vals[keep], row[keep]
        cnt = np.bincount(r, minlength=rows)
        bad = (cnt < need) | (cnt > cap)
        bad_any |= bad
        good = ~bad
        for rank in ranks:
            out[rank] = np.empty(rows)
        if not good.any():
            continue
        ok = good[r]
        v, r = v[ok], r[ok]
        c = np.where(good, cnt, 0)
        width = int(c.max())
        start = np.cumsum(c) - c
        pad = np.full(rows * width, -np.inf if up else np.inf)
        pad[np.arange(v.size) + (r * width - start[r])] = v
        pad = pad.reshape(rows, width)
        pad.sort(axis=1)
        for rank in ranks:
            # upper: the (n - 1 - rank)-th largest, from the top of the sorted candidates (padding
            # -inf comes first); lower: the rank-th smallest (padding +inf comes last)
            out[rank][good] = pad[good, width - (n - rank)] if up else pad[good, rank]
    if bad_any.any():
        all_ranks = [rank for side in sides for rank in side[0]]
        part = np.partition(a[bad_any], all_ranks, axis=1)
        for rank in all_ranks:
            out[rank][bad_any] = part[:, rank]
    return out


def _row_quantiles(a: np.ndarray, qs) -> list[np.ndarray]:
    """Quantiles along axis 1, numpy's default (linear) interpolation between order statistics.

    ``a`` may be modified. Ranks near either end (all the usual interval bounds) are selected
    from the tails (:func:`_tail_values`), about twice as fast as a full partition; other ranks
    by :meth:`numpy.ndarray.partition`. Both give the exact order statistics.
    """
    rows, n = a.shape
    pos = [q * (n - 1) for q in qs]
    ranks = sorted({int(math.floor(p)) for p in pos} | {min(int(math.floor(p)) + 1, n - 1) for p in pos})
    lower = [r for r in ranks if r < _TAIL_MAX * n]
    upper = [r for r in ranks if r >= (1.0 - _TAIL_MAX) * n]
    middle = [r for r in ranks if r not in lower and r not in upper]
    value = {}
    if n < 4 * _SUBSAMPLE or middle:
        a.partition(ranks, axis=1)
        value = {r: a[:, r] for r in ranks}
    else:
        # row blocks small enough (32 x draws) for the selection's passes to stay in the CPU cache:
        # 42 -> 29 ms for 600 rows x 10,000 draws (the rows are independent; same values)
        value = {r: np.empty(rows) for r in lower + upper}
        for i in range(0, rows, _ROW_BLOCK):
            for r, v in _tail_values(a[i:i + _ROW_BLOCK], lower, upper).items():
                value[r][i:i + _ROW_BLOCK] = v
    res = []
    for p in pos:
        lo = int(math.floor(p))
        hi = min(lo + 1, n - 1)
        frac = p - lo
        res.append(value[lo] + frac * (value[hi] - value[lo]))
    return res


def intervals(sums: Mapping, params: Mapping, *, draws: int, seed: int, quantiles=(0.025, 0.975),
              fixed=frozenset(), chunk_zones=2000, total=False, workers=1,
              quantities=None) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    """Monte Carlo intervals (default 2.5 and 97.5 percentiles) of every quantity per zone.

    The percentiles of the draws are the 95 % coverage interval of the Monte Carlo method of
    JCGM 101:2008 (probabilistically symmetric interval). Chunks of zones are drawn, reduced to
    their percentiles and dropped, so memory stays near :data:`MAX_FLOATS` whatever the number of
    zones; the run total (when ``total``) is accumulated draw by draw over all zones, keeping the
    correlation that the run-wide sources induce between zones.

    Parameters
    ----------
    sums, params, draws, seed, fixed, chunk_zones
        As :func:`draw_zone_totals`.
    quantiles : sequence of float
        Probabilities in [0, 1] (numpy's linear interpolation between order statistics).
    total : bool
        Append the run total (sum over all zones given) as a last element of every array.
    workers : int
        Threads over chunks of zones (results do not depend on it; memory stays near
        :data:`MAX_FLOATS` in total).
    quantities : collection of str, optional
        Draw only these quantities (default: all of the model). Each quantity's draws are the
        same whichever others are drawn: the random streams are keyed by source and zone block.

    Returns
    -------
    dict of str to tuple of numpy.ndarray
        Quantity -> one array per quantile (``(lo, hi)`` by default), each of length zones
        (zones + 1 with ``total``).
    """
    draws = _check_draws(draws, seed)
    qs = [float(q) for q in quantiles]
    if not all(0.0 <= q <= 1.0 for q in qs):
        raise ConfigError(f"quantiles must lie in [0, 1], got {quantiles!r}")
    model = _build(sums, params)
    fixed = _check_fixed(fixed)
    wanted = [q for q in model.quantities if quantities is None or q in quantities]
    n_out = model.n + (1 if total else 0)
    res = {q: [np.empty(n_out) for _ in qs] for q in wanted}
    tot = {q: np.zeros(draws) for q in wanted}

    def reduce(sl, evaluate):
        part = {}
        for q in wanted:
            arr = evaluate(q)
            s = _block_sums(arr) if total else None
            part[q] = (_row_quantiles(arr, qs), s)
            del arr
        return sl, part

    for sl, part in _map_chunks(_Drawer(model, draws, seed, fixed, wanted), chunk_zones, int(workers), reduce):
        for q, (vals, s) in part.items():
            for out, val in zip(res[q], vals):
                out[sl] = val
            if total:
                for row in s:  # block by block, in zone order: the total does not depend on chunking
                    tot[q] += row
    if total:
        for q in wanted:
            for out, val in zip(res[q], _row_quantiles(tot[q][None, :].copy(), qs)):
                out[-1] = val[0]
    return {q: tuple(v) for q, v in res.items()}


# ----------------------------------------------------------------------------- contributions


def variance_components(sums: Mapping, params: Mapping, *, quantity="carbon_kg", total=False) -> dict[str, np.ndarray]:
    """First-order (delta-method) variance of a quantity per zone, split by source.

    Every quantity is a sum of terms ``coef * prod(m) * (base + sum_s a_s z_s)`` with independent
    standard normals z_s and independent multiplicative factors m of mean 1 and CV c_m. To first
    order about the nominal values, ``Var Q = sum_s (dQ/dz_s)^2 + sum_m (dQ/dm)^2 c_m^2`` with
    ``dQ/dz_s = sum_t coef_t a_{t,s}`` and ``dQ/dm = sum_{t containing m} coef_t base_t``: exact for
    the additive sources, and exact to first order for products of independent factors (the
    neglected products of relative variances, e.g. c_rho^2 c_f^2, are second order). Sources that
    are run-wide add their derivatives over zones before squaring for the total; zone-level
    sources add their variances.

    Parameters
    ----------
    sums, params : mapping
        As :func:`draw_zone_totals`.
    quantity : str
        One of the quantities (e.g. ``"carbon_kg"``, ``"co2_smouldering_kg"``).
    total : bool
        Append the run total as a last element.

    Returns
    -------
    dict of str to numpy.ndarray
        Source name -> variance [unit of the quantity squared] per zone; only sources present in
        the model.

    References
    ----------
    JCGM 100:2008 (GUM), §5.1.2, Eq. (10): the law of propagation of uncertainty for
    uncorrelated inputs (section recalled, unchecked).
    """
    model = _build(sums, params)
    if quantity not in model.quantities:
        raise ConfigError(f"quantity {quantity!r} is not produced by these sums and parameters; "
                          f"available: {', '.join(model.quantities)}")
    terms = model.quantities[quantity]
    comp: dict[str, np.ndarray] = {}

    def add(group, deriv, run_wide):
        if total:
            tot = deriv.sum() ** 2 if run_wide else np.sum(deriv**2)
            v = np.append(deriv**2, tot)
        else:
            v = deriv**2
        comp[group] = comp.get(group, 0.0) + v

    for k, (group, run_wide) in model.additive.items():
        deriv = np.zeros(model.n)
        hit = False
        for core, coef, _ in terms:
            a = model.core_coefficients(core).get(k)
            if a is not None:
                deriv = deriv + coef * a
                hit = True
        if hit:
            add(group, deriv, run_wide)
    for m, (group, cv) in model.factors.items():
        deriv = np.zeros(model.n)
        hit = False
        for core, coef, facs in terms:
            if m in facs:
                deriv = deriv + coef * model.cores[core][0]
                hit = True
        if hit and cv > 0:
            add(group, deriv * cv, True)
    return comp


def contributions(sums: Mapping, params: Mapping, *, draws: int = 2000, seed: int = 0, quantity="carbon_kg",
                  method="analytic", total=False, chunk_zones=2000) -> dict[str, np.ndarray]:
    """Share of the variance of a quantity that each source contributes, per zone (and total).

    Methods
    -------
    ``"analytic"`` (default; ``draws`` and ``seed`` unused)
        First-order shares from :func:`variance_components`: each source's variance over their
        sum. The shares add to 1. Exact for the additive survey and water-table sources and exact
        to first order for the multiplicative factors.
    ``"fix-one"``
        Monte Carlo, one source at a time: share_s = 1 - Var(Q | s fixed) / Var(Q), every run with
        the same seed (common random numbers, so differences are not swamped by Monte Carlo noise).
        Shares need not add to exactly 1 (interactions between multiplicative factors, Monte Carlo
        noise).

    Parameters
    ----------
    sums, params : mapping
        As :func:`draw_zone_totals`.
    draws, seed : int
        For ``"fix-one"``.
    quantity : str
        The quantity (default ``"carbon_kg"``).
    method : {"analytic", "fix-one"}
    total : bool
        Append the run total as a last element.
    chunk_zones : int
        As :func:`draw_zone_totals`.

    Returns
    -------
    dict of str to numpy.ndarray
        Source name -> share [-] per zone; NaN where the quantity has no variance.
    """
    if method == "analytic":
        comp = variance_components(sums, params, quantity=quantity, total=total)
        tot = sum(comp.values()) if comp else None
        with np.errstate(divide="ignore", invalid="ignore"):
            return {k: np.where(tot > 0, v / np.where(tot > 0, tot, 1.0), np.nan) for k, v in comp.items()}
    if method != "fix-one":
        raise ConfigError(f"contributions: method {method!r}; use 'analytic' or 'fix-one'")
    draws = _check_draws(draws, seed)
    model = _build(sums, params)
    if quantity not in model.quantities:
        raise ConfigError(f"quantity {quantity!r} is not produced by these sums and parameters; "
                          f"available: {', '.join(model.quantities)}")
    groups = list(variance_components(sums, params, quantity=quantity))

    def variance(fixed):
        n_out = model.n + (1 if total else 0)
        v = np.empty(n_out)
        acc = np.zeros(draws)

        def reduce(sl, evaluate):
            arr = evaluate(quantity)
            return sl, arr.var(axis=1), (_block_sums(arr) if total else None)

        drawer = _Drawer(model, draws, seed, set(fixed), quantities=[quantity])
        for sl, var, s in _map_chunks(drawer, chunk_zones, 1, reduce):
            v[sl] = var
            if total:
                for row in s:
                    acc += row
        if total:
            v[-1] = acc.var()
        return v

    v_all = variance(())
    out = {}
    with np.errstate(divide="ignore", invalid="ignore"):
        for g in groups:
            v_g = variance((g,))
            out[g] = np.where(v_all > 0, 1.0 - v_g / np.where(v_all > 0, v_all, 1.0), np.nan)
    return out
