"""The zone-level error model: the zone sums it reads, the output quantities, and the linear model
(error fields, cores, multiplicative factors) built from the sums and the run's parameters."""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np

from ...errors import ConfigError, PhysicalRangeError
from .averaging import correlated_sum_sd
from .sources import SOURCE_NAMES, _ef_table

#: Zone sums read by the draws (arrays over zones; absent keys count as zeros), named as the
#: engine names them (:data:`peatburn.engine.sums.SUM_KEYS`; the ``flaming_*`` sums come from the
#: above-ground route). Survey sums (``area_m2_survey``, ``rho_area_survey``, ``rho_f_area_survey``) cover the pixels whose depth comes from the
#: surveys; ``volume_m3``, ``peat_kg`` and ``carbon_kg`` cover every estimated pixel. The ``wt_*``
#: sums cover the water-table pixels where the depth model is not clipped (0 < a + b wt < peat
#: thickness): elsewhere the depth does not respond to small changes of the coefficients, so
#: summing only those pixels is the exact first-order treatment of the clipping.
SUM_KEYS = {
    "area_m2_survey": "sum A over survey-depth pixels [m2]",
    "volume_m3": "sum d A [m3]",
    "peat_kg": "sum d rho A x 1000 [kg] (rho in g/cm3)",
    "carbon_kg": "sum d rho f A x 1000 [kg C]",
    "rho_area_survey": "sum rho A x 1000 over survey-depth pixels [kg/m]: peat mass per metre of depth",
    "rho_f_area_survey": "sum rho f A x 1000 over survey-depth pixels [kg C/m]",
    "sd2_area_survey": "sum A sd^2 over survey-depth pixels [m4] (optional; a survey error spread that varies in "
                       "space, with the parameter survey_scale_ref_m: science.error_scale)",
    "shift_gx_area_survey": "sum A s dz/dx over survey-depth pixels [m3] (optional; s the local residual shift sd, "
                            "science.error_scale.choose_local_shift)",
    "shift_gy_area_survey": "sum A s dz/dy over survey-depth pixels [m3] (optional)",
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
    "flaming_fre_ssq_kg2": "sum over fire events of (the event's FRE dry matter in the zone)^2 / (its observations) "
                           "[kg^2] (optional; science.uncertainty.fre_sampling)",
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


_PARAM_KEYS = {
    "survey_bias_sd_m", "survey_sigma_m", "survey_range_m", "survey_nugget_fraction", "pixel_area_m2",
    "subsidence_rate_sd_m_per_yr", "interval_years", "wt_coef_cov", "wt_residual_sd_m", "wt_residual_range_m",
    "bulk_density_cv", "carbon_fraction_cv", "ef_smouldering", "ef_flaming", "fre_coefficient_cv",
    "biomass_cv", "combustion_factor_cv", "gwp",
    "subsidence_rate_map_sd_m_per_yr", "tier1_fuel_cv", "peat_fill_cv", "gas_form",
    # multi-range survey error (issue 16; science.zone_error): replaces sigma / range / nugget share when given
    "survey_nugget_m2", "survey_components", "survey_trend_sd_m", "surface_change_sd_m",
    # the per-pixel sd the multi-range model is stated at, when the spread varies in space (sd2_area_survey)
    "survey_scale_ref_m",
    # factor >= 1 on the zone-level survey sd where stable-ground patches show the model too narrow
    # (engine.survey_calibration.zone_sd_scale)
    "survey_random_scale",
    # issue 16 items 5 and 6: the burned-area map's accuracy; the FRE integration error
    "burned_area_cv", "fre_integration_cv",
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
    #: factors computed from the drawn ones: key -> (function of {factor key: draws}, {factor key:
    #: first derivative at the nominal values}) (the carbon mass-balance normaliser)
    derived: dict = field(default_factory=dict)
    #: fields whose per-zone coefficient is a relative sd (cv) and that are drawn as a lognormal
    #: scale less 1, exp(s z - s^2/2) - 1 with s^2 = ln(1 + cv^2), not as cv z (the FRE
    #: integration term: a relative error that must not make the dry matter negative)
    lognormal_fields: frozenset = frozenset()

    def stream_id(self, group: str) -> int:
        """Index that keys the random stream of a source group (its place in :data:`SOURCE_NAMES`)."""
        return SOURCE_NAMES.index(group)

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

    area = get("area_m2_survey")
    sig_b = _nonneg(params, "survey_bias_sd_m")
    sig = _nonneg(params, "survey_sigma_m")
    T = _nonneg(params, "interval_years")
    sig_r = _nonneg(params, "subsidence_rate_sd_m_per_yr") * T
    sig_map = np.full(n, _nonneg(params, "subsidence_rate_map_sd_m_per_yr") * T)  # per zone
    sz = np.zeros(n)
    if params.get("survey_components") is not None:
        from ..zone_error import zone_mean_sd  # here: zone_error imports this package

        s_ref = _nonneg(params, "survey_scale_ref_m")
        if s_ref > 0:  # each zone at its own RMS sd: (s_z / s_ref)^2 x the zone-mean variance, + the trend
            rel2 = ratio(get("sd2_area_survey"), area * s_ref**2)
            sz = zone_mean_sd(area, _nonneg(params, "survey_nugget_m2"), params["survey_components"],
                              params.get("pixel_area_m2") or 1.0)
            sz = np.sqrt(sz**2 * np.where(area > 0, rel2, 1.0) + _nonneg(params, "survey_trend_sd_m") ** 2)
        else:
            sz = zone_mean_sd(area, _nonneg(params, "survey_nugget_m2"), params["survey_components"],
                              params.get("pixel_area_m2") or 1.0, _nonneg(params, "survey_trend_sd_m"))
    elif sig > 0:
        rng_m = params.get("survey_range_m")
        if rng_m is None:
            raise ConfigError("uncertainty parameters: survey_range_m is needed with survey_sigma_m > 0")
        sz = correlated_sum_sd(sig, float(rng_m), area, _nonneg(params, "survey_nugget_fraction"),
                               pixel_area_m2=params.get("pixel_area_m2"))
    if params.get("survey_random_scale") is not None:
        sz = sz * _nonneg(params, "survey_random_scale")
    if np.any(get("shift_gx_area_survey") != 0) or np.any(get("shift_gy_area_survey") != 0):
        # a residual shift of unknown direction and local sd s per axis: the zone mean error is the shift
        # times the zone's mean gradient, variance (sum A s dz/dx)^2 + (sum A s dz/dy)^2 over A^2 (Nuth &
        # Kaab 2011; science.error_scale.choose_local_shift); independent of the pixel-scale term
        shift_var = ratio(get("shift_gx_area_survey") ** 2 + get("shift_gy_area_survey") ** 2, area**2)
        sz = np.sqrt(sz**2 + shift_var)
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

    # FRE integration (science.uncertainty.fre_sampling): per zone cv_z = cv_1 sqrt(ssq) / D_fre
    ff_dm = get("flaming_dm_fre_kg")
    fre_cv = _nonneg(params, "fre_integration_cv") * ratio(np.sqrt(np.clip(get("flaming_fre_ssq_kg2"), 0.0, None)),
                                                             ff_dm)
    fields = {
        "fre": {"fre_integration": fre_cv},
        "survey": {"survey_bias": sig_b, "subsidence_rate": sig_r, "survey_random": sz, "subsidence_map": sig_map,
                   "surface_change": _nonneg(params, "surface_change_sd_m")},
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
        "P": (get("peat_kg") - p_t1 - p_fill, {"survey": get("rho_area_survey"), "wt_a": wt_r, "wt_b": wt_r_wt}),
        "C": (get("carbon_kg") - c_t1 - c_fill, {"survey": get("rho_f_area_survey"), "wt_a": wt_rf, "wt_b": wt_rf_wt}),
        "PT1": (p_t1, {}), "CT1": (c_t1, {}), "PF": (p_fill, {}), "CF": (c_fill, {}),
    }
    for name, (base, mult) in cores.items():  # drop fields with no effect
        cores[name] = (base, {f: m for f, m in mult.items() if f in fields and np.any(m != 0)})
    additive_src = {"survey_bias": ("survey_bias", True), "subsidence_rate": ("subsidence_rate", True),
                    "survey_random": ("survey_random", False), "subsidence_map": ("subsidence_rate_map", False),
                    "surface_change": ("surface_change", True), "fre_integration": ("fre_integration", False),
                    "wt1": ("water_table_coefficients", True),
                    "wt2": ("water_table_coefficients", True), "wt_residual": ("water_table_residual", False)}

    factors = {"bulk_density": ("bulk_density", _nonneg(params, "bulk_density_cv")),
               "carbon_fraction": ("carbon_fraction", _nonneg(params, "carbon_fraction_cv")),
               "tier1_fuel": ("tier1_fuel", _nonneg(params, "tier1_fuel_cv")),
               "peat_fill": ("peat_property_fill", _nonneg(params, "peat_fill_cv"))}
    # the burned-area map's accuracy (science.uncertainty.area_accuracy): one run-wide scale on every
    # area-driven quantity, added only when given so that runs without it draw exactly as before
    ba_cv = _nonneg(params, "burned_area_cv")
    ba = ("burned_area",) if ba_cv > 0 else ()
    if ba:
        factors["burned_area"] = ("burned_area", ba_cv)
    # the peat-mass terms: (core, factors of the mass); gases follow the mass, carbon adds f_C
    mass_terms = [("P", ("bulk_density",) + ba), ("PT1", ("tier1_fuel",) + ba),
                  ("PF", ("bulk_density", "peat_fill") + ba)]
    mass_terms = [t for t in mass_terms if t[0] == "P" or np.any(cores[t[0]][0] != 0)]
    carbon_terms = [("C", ("bulk_density", "carbon_fraction") + ba), ("CT1", ("tier1_fuel", "carbon_fraction") + ba),
                    ("CF", ("bulk_density", "carbon_fraction", "peat_fill") + ba)]
    carbon_terms = [t for t in carbon_terms if t[0] == "C" or np.any(cores[t[0]][0] != 0)]
    quantities = {
        "volume_m3": [("V", 1.0, ba)],
        "peat_kg": [(c, 1.0, f) for c, f in mass_terms],
        "carbon_kg": [(c, 1.0, f) for c, f in carbon_terms],
    }
    gwp = {str(g).lower(): float(v) for g, v in dict(params.get("gwp") or {}).items()}
    form = params.get("gas_form") or "dry_matter"
    if form not in ("dry_matter", "carbon_balance"):
        raise ConfigError(f"uncertainty parameter gas_form: {form!r}; use dry_matter or carbon_balance")
    derived: dict = {}
    _gas_quantities(quantities, factors, derived, _efs(params, "ef_smouldering"), "smouldering", gwp, form,
                    [(c, 1.0, f) for c, f in mass_terms], [(c, 1.0, f) for c, f in carbon_terms])

    has_flaming = "flaming_dm_fre_kg" in arrays or "flaming_dm_area_kg" in arrays
    if has_flaming:
        ff, fa = get("flaming_dm_fre_kg"), get("flaming_dm_area_kg")
        fre_mult = {"fre": ff} if "fre" in fields else {}
        cores["FF"] = (ff, fre_mult)
        cores["FA"] = (fa, {})
        factors["fre_coefficient"] = ("fre_coefficient", _nonneg(params, "fre_coefficient_cv"))
        factors["biomass"] = ("biomass", _nonneg(params, "biomass_cv"))
        factors["combustion_factor"] = ("combustion_factor", _nonneg(params, "combustion_factor_cv"))
        fre_f, area_f = ("fre_coefficient",), ("biomass", "combustion_factor") + ba
        quantities["flaming_dm_kg"] = [("FF", 1.0, fre_f), ("FA", 1.0, area_f)]
        if "flaming_carbon_kg" in arrays:
            cfrac = ratio(arrays["flaming_carbon_kg"], ff + fa)
            cores["FFC"] = (ff * cfrac, {"fre": ff * cfrac} if fre_mult else {})
            cores["FAC"] = (fa * cfrac, {})
            quantities["carbon_flaming_kg"] = [("FFC", 1.0, fre_f), ("FAC", 1.0, area_f)]
        c_terms = ([("FFC", 1.0, fre_f), ("FAC", 1.0, area_f)] if "flaming_carbon_kg" in arrays else None)
        _gas_quantities(quantities, factors, derived, _efs(params, "ef_flaming"), "flaming", gwp,
                        form if c_terms else "dry_matter", [("FF", 1.0, fre_f), ("FA", 1.0, area_f)], c_terms)
    return _Model(n=n, fields=fields, cores=cores, additive=additive_src, factors=factors,
                  quantities=quantities, derived=derived,
                  lognormal_fields=frozenset({"fre"} & set(fields)))


def _gas_quantities(quantities, factors, derived, efs, phase, gwp, form, dm_terms, c_terms) -> None:
    """Add ``{gas}_{phase}_kg`` and ``co2e_{phase}_kg`` to ``quantities``.

    ``"dry_matter"``: gas = dry matter x EF_g m_g / 1000 (IPCC 2006 Vol. 4 Eq. 2.27 form).
    ``"carbon_balance"``: gas = carbon x EF_g m_g / S(m), ``S(m) = sum_j c_j EF_j m_j`` the carbon of
    the drawn CO2, CO and CH4 factors (c_j = n_C M_C / M_j): the carbon mass balance
    (peatburn.science.gases.gases_from_carbon), so every draw closes (the gases' carbon is the
    drawn carbon) and the carbon-fraction draw reaches the gases. ``S(1) / S(m)`` is a derived
    factor of the draw; its first derivatives ``-c_j EF_j / S(1)`` serve the delta method.
    ``dm_terms`` / ``c_terms``: (core, coef, factor keys) of the phase's dry matter / carbon [kg].
    """
    from .. import gases

    if not efs:
        return
    for g, (ef, cv) in efs.items():
        factors[f"ef_{phase}:{g}"] = (f"emission_factors_{phase}", cv)
    scale = {g: ef / 1000.0 for g, (ef, _) in efs.items()}
    base_terms, extra = dm_terms, ()
    if form == "carbon_balance":
        c_of = {g: gases.CARBON_ATOMS[g] * gases.MOLAR_MASS["c"] / gases.MOLAR_MASS[g] * ef
                for g, (ef, _) in efs.items() if gases.CARBON_ATOMS.get(g, 0) and g in gases.MOLAR_MASS}
        c_set = sum(c_of.values())
        if not c_set > 0:
            raise ConfigError(f"{phase} emission factors: no carbon in CO2, CO or CH4; the carbon mass balance "
                              f"needs a CO2 factor > 0")
        nk = f"carbon_balance:{phase}"
        keys = {g: f"ef_{phase}:{g}" for g in c_of}

        def normaliser(mult, c_of=c_of, keys=keys, c_set=c_set):
            return c_set / sum(c * mult[keys[g]] for g, c in c_of.items())

        derived[nk] = (normaliser, {keys[g]: -c / c_set for g, c in c_of.items()})
        scale = {g: ef / c_set for g, (ef, _) in efs.items()}
        base_terms, extra = c_terms, (nk,)
    co2e = []
    for g in efs:
        fk = f"ef_{phase}:{g}"
        terms = [(c, coef * scale[g], f + (fk,) + extra) for c, coef, f in base_terms]
        quantities[f"{g}_{phase}_kg"] = terms
        if g in gwp:
            co2e += [(c, gwp[g] * w, f) for c, w, f in terms]
    if co2e:
        quantities[f"co2e_{phase}_kg"] = co2e


def _check_fixed(fixed) -> set:
    fixed = set(fixed or ())
    bad = fixed - set(SOURCE_NAMES)
    if bad:
        raise ConfigError(f"fixed: unknown source(s) {', '.join(sorted(bad))}; known: {', '.join(SOURCE_NAMES)}")
    return fixed
