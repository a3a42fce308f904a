"""Monte Carlo intervals and variance contributions of a finished block pass.

The per-zone sums of the block pass are the sufficient statistics of the zone-level draws of
:mod:`peatburn.science.uncertainty`: no pixel is resampled. This module gathers the run's
uncertainty sources (survey error from the stable-ground statistics and variogram; water-table
model covariance; the documented defaults or the user's [uncertainty] overrides), draws per zone
layer and for the run total, and writes ``_lo``/``_hi`` into the table rows.
"""

from __future__ import annotations

import dataclasses
import math
import os

import numpy as np

from ..factors import list_factor_sets
from ..outputs.tables import OUTSIDE, TOTAL_LAYER, gas_key
from .sums import SCAR_LAYER, SUM_KEYS
from ..science import uncertainty as unc
from ..science.tier1 import TIER1_FUEL_RELATIVE_SD

#: The engine's zone sums the uncertainty model reads (one vocabulary: the model names its sums as the
#: engine does; the flaming sums come from the above-ground route, :func:`_model_sums`).
MODEL_SUMS = tuple(k for k in unc.SUM_KEYS if k in SUM_KEYS)


def survey_error_model(alignment, pixel_area_m2: float, range_override: float | None = None) -> dict:
    """The survey error model of a run from the stable-ground residuals after co-registration
    (:func:`peatburn.science.zone_error.model_from_stable_sample`: planar trend, nugget and one or
    two spherical ranges; the residual bias without counting the long-range error twice)."""
    from ..science import zone_error

    x, y, r = alignment.stable_sample
    scale = getattr(alignment, "stable_scale", None)
    out = zone_error.model_from_stable_sample(x, y, r, pixel_area_m2=pixel_area_m2,
                                              stable_area_m2=alignment.n_stable_sample * pixel_area_m2,
                                              sigma=float(alignment.nmad_after), range_m=range_override,
                                              scale=scale)
    # which spread was used: constant, or varying with the explanatory variables (science.error_scale)
    out["error_scale"] = getattr(alignment, "error_scale", None)
    return out


def subsidence_map_sd(cfg) -> float:
    """sd of the zone-correlated subsidence-rate term [m/yr] (docs/method.md 2.1, 7.4).

    Only the contrast between the rate in the scars and on the stable ground reaches a burn depth
    (the vertical co-registration absorbs a uniform rate and any run-wide error of it). So the
    error is drawn per zone, fully correlated within a zone: ``uncertainty.subsidence_rate_sd`` when
    given; else, with a rate *map*, the default 0.01 m/yr (half the 3-5 cm/yr span of drained
    tropical peat, Hooijer et al. 2012 through a secondary summary, taken as one sd: an
    assumption); else (one constant rate, or none) 0: a constant cancels.
    """
    from ..config import RasterRef

    sv, u = cfg.survey, cfg.uncertainty
    if sv is None:
        return 0.0
    if u.subsidence_rate_sd is not None:
        return float(u.subsidence_rate_sd)
    return unc.DEFAULT_SUBSIDENCE_RATE_SD if isinstance(sv.subsidence_rate, RasterRef) else 0.0


def wt_prediction_sd_m(model, total: dict) -> float | None:
    """The water-table model's leave-scar-out error as a depth error [m]: the relative RMSE of scar
    carbon (``model.cv_rmse``) times the model's depth at the mean water table of the modelled
    (unclipped) pixels; None when the model was not cross-validated or no pixel was modelled."""
    rel = getattr(model, "cv_rmse", float("nan"))
    area = total.get("wt_area", 0.0)
    if rel is None or not math.isfinite(rel) or not area > 0:
        return None
    return float(rel) * max(model.intercept + model.slope * total["wt_area_wt"] / area, 0.0)


def build_params(cfg, factors, alignment, models, sums, grid, fill_cv: float = 0.0) -> tuple[dict, list, dict]:
    pix = float(np.mean(grid.pixel_area(grid.windows(cfg.block_size)[0])))
    u = cfg.uncertainty
    survey = survey_error_model(alignment, pix, u.correlation_range_m) if alignment is not None else None
    cf = sums.total["carbon_kg"] / sums.total["peat_kg"] if sums.total["peat_kg"] > 0 else unc.DEFAULT_CARBON_FRACTION
    kw = {}
    if models is not None:
        m = models.all
        cov = m.covariance_matrix()
        if np.all(np.isfinite(cov)):
            kw["wt_coef_cov"] = cov
        cv_sd = wt_prediction_sd_m(m, sums.total)
        if cv_sd is not None:
            # the leave-scar-out error of a scar's carbon, as a depth error over the modelled pixels, fully
            # correlated within a zone (no range): a scar-scale error, conservative for zones of many scars
            kw["wt_residual_sd_m"] = cv_sd
        else:
            rs = getattr(m, "residual_nmad", float("nan"))
            kw["wt_residual_sd_m"] = float(rs) if rs is not None and math.isfinite(rs) else 0.0
            # pixel scatter about the fitted line decorrelates like the survey error it largely is; the
            # scar-to-scar departures of the relation are in the coefficients' cluster-bootstrap covariance
            if survey is not None:
                kw["wt_residual_range_m"] = survey["range_m"]
    fl = cfg.flaming
    sources = unc.default_sources(
        survey_bias_sd_m=survey["bias_sd_m"] if survey else 0.0,
        survey_sigma_m=survey["sigma_m"] if survey else 0.0,
        survey_range_m=survey["range_m"] if survey else math.sqrt(pix),
        survey_nugget_fraction=survey["nugget_fraction"] if survey else 0.0, pixel_area_m2=pix,
        survey_nugget_m2=survey["nugget_m2"] if survey else None,
        survey_components=[(c["partial_sill_m2"], c["range_m"]) for c in survey["components"]] if survey else None,
        survey_trend_sd_m=survey["trend_sd_m"] if survey else 0.0,
        surface_change_sd_m=(u.surface_change_sd or 0.0) if survey else 0.0,
        interval_years=cfg.survey.interval_years if cfg.survey else 0.0,
        # a run-wide error of the subsidence rate moves stable ground and scars alike and is removed by
        # the vertical co-registration on stable ground: only the zone-correlated term of a rate map
        # remains (subsidence_map_sd)
        subsidence_rate_sd_m_per_yr=0.0,
        subsidence_rate_map_sd_m_per_yr=subsidence_map_sd(cfg),
        tier1_fuel_cv=TIER1_FUEL_RELATIVE_SD,
        peat_fill_cv=float(fill_cv),
        bulk_density_cv=u.bulk_density_cv if u.bulk_density_cv is not None else unc.DEFAULT_BULK_DENSITY_CV,
        carbon_fraction=cf,
        carbon_fraction_sd=u.carbon_fraction_sd if u.carbon_fraction_sd is not None else unc.DEFAULT_CARBON_FRACTION_SD,
        smouldering_factors=factors.smouldering, flaming_factors=factors.flaming,
        reference_factor_sets=list_factor_sets("smouldering") + list_factor_sets("flaming"),
        fre_coefficient=factors.coefficient,
        combustion_factor=fl.combustion_factor if fl and fl.combustion_factor else unc.DEFAULT_COMBUSTION_FACTOR,
        burned_area_cv=area_term(cfg)[1], burned_area_basis=area_basis(cfg),
        fre_integration_cv=fre_integration_cv(cfg, factors),
        **kw,
    )
    if survey:
        sources = [dataclasses.replace(
            s, citation="stable-ground statistics of this run; variance of the stable median less that of the "
                        "stable mean (science.zone_error.coregistered_zone_sd; Sen 1972, Sheppard 1899, recalled)",
            note="One value per draw for the whole run: the part of the co-registration's error not shared with the "
                 "zones. The part a zone shares with the stable ground is in survey_random once, not twice "
                 "(docs/uncertainty.md, the run's survey error model).")
            if s.name == "survey_bias" else s for s in sources]
    if models is not None and wt_prediction_sd_m(models.all, sums.total) is not None:
        m = models.all
        sources = [dataclasses.replace(
            s, citation=f"leave-scar-out cross-validation of the water-table depth model of this run ({m.cv_method}): "
                        f"RMSE {m.cv_rmse:.1%} of scar carbon, times the modelled depth at the mean water table",
            note="Per zone over the water-table area, fully correlated within a zone (a scar-scale error applied "
                 "to the whole zone: conservative for zones of many scars), independent between zones. Replaces "
                 "the in-sample scatter, which understates the error of a missed scar; overlaps the coefficient "
                 "term a little (conservative).")
            if s.name == "water_table_residual" else s for s in sources]
    form = getattr(factors, "form", "dry_matter")
    if form == "carbon_balance":
        sources = [dataclasses.replace(s, note=_CARBON_BALANCE_NOTES[s.name]) if s.name in _CARBON_BALANCE_NOTES else s
                   for s in sources]
    params = unc.sources_to_params(sources, gwp=factors.gwp.gwp)
    params["gas_form"] = form
    if survey and survey.get("scale_ref_m"):  # each zone at the RMS of its pixels' sd (zone sum sd2_area_survey)
        params["survey_scale_ref_m"] = survey["scale_ref_m"]
    return params, sources, survey or {}


#: How the sources reach the gases in the carbon mass-balance form (config emission_factors.form).
_CARBON_BALANCE_NOTES = {
    "carbon_fraction": "Run-wide multiplicative scale on carbon; in the carbon mass-balance form the gases follow "
                       "the carbon, so this scale reaches them too.",
    "emission_factors_smouldering": "Run-wide; carbon mass balance: gas = carbon x EF draw / carbon of the drawn "
                                    "CO2+CO+CH4 factors, so the factors act through their ratios and every draw "
                                    "closes (the gases hold the drawn carbon). Gases drawn independently.",
    "emission_factors_flaming": "Run-wide; carbon mass balance: flaming gas = flaming carbon x EF draw / carbon of "
                                "the drawn CO2+CO+CH4 factors.",
}


def area_term(cfg) -> tuple[float, float]:
    """(scale, relative sd) of the burned-area term of a run ([burned_area.accuracy];
    :func:`peatburn.science.uncertainty.area_accuracy.area_term`); (1, 0) without one (the default)."""
    from ..science.uncertainty.area_accuracy import area_term as term

    acc = getattr(cfg, "area_accuracy", None)
    return (1.0, 0.0) if acc is None else term(acc.ratio, acc.ratio_se, acc.adjust)


def area_basis(cfg) -> str:
    """Where the burned-area term comes from, in words (the source's citation in totals.json)."""
    acc = getattr(cfg, "area_accuracy", None)
    if acc is None:
        return ""
    how = ("estimates scaled by the ratio (adjust = true), relative sd SE/R" if acc.adjust else
           "estimates follow the mapped area (adjust = false); relative sd sqrt(SE^2 + (R - 1)^2): the bias left in "
           "counted as uncertainty")
    return f"[burned_area.accuracy]: {acc.basis}; {how} (Olofsson et al. 2014, recalled)"


def fre_integration_cv(cfg, factors) -> float:
    """Relative sd of the FRE of an event observed once: ``uncertainty.fre_integration_cv``, else the stated
    default (science.uncertainty.fre_sampling) on the detection route; 0 on the burned-area route."""
    from ..science.uncertainty.fre_sampling import DEFAULT_FRE_SINGLE_OBSERVATION_CV

    if not getattr(factors, "frp_route", False):
        return 0.0
    v = getattr(cfg.uncertainty, "fre_integration_cv", None)
    return DEFAULT_FRE_SINGLE_OBSERVATION_CV if v is None else float(v)


def _model_sums(acc: dict, idx, flame_layer: dict | None, frp_route: bool, vegetation_cf: float) -> dict:
    out = {k: np.asarray(acc[k], dtype=float)[idx] for k in MODEL_SUMS}
    if flame_layer is not None:
        dm = np.asarray(flame_layer["dry_matter_kg"], dtype=float)[idx]
        out["flaming_dm_fre_kg" if frp_route else "flaming_dm_area_kg"] = dm
        out["flaming_carbon_kg"] = dm * vegetation_cf
        if frp_route and "fre_ssq_kg2" in flame_layer:
            out["flaming_fre_ssq_kg2"] = np.asarray(flame_layer["fre_ssq_kg2"], dtype=float)[idx]
    return out


class _HasColumn:
    """The quantities that have an interval column in the tables (the others, such as the peat
    volume, are not drawn)."""

    def __contains__(self, q) -> bool:
        return _column(q) is not None


_WITH_COLUMN = _HasColumn()


def _threads() -> int:
    """Threads for the zone draws: every core this process may use. The draws run after the block
    pass, when nothing else competes; their random streams are keyed by zone block, so the result
    does not depend on the number of threads (numerics.draws.Drawer)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)


#: Time of the zone draws per draw and zone [s] on one thread, for the quantities a run draws:
#: 6.1 s for 10,000 draws x 10,000 zones on the 2-core machine of docs/uncertainty.md (measured).
SECONDS_PER_DRAW_ZONE = 6.1 / (10_000 * 10_000)


def _draw_threads(draws: int) -> int:
    """Threads for the zone draws: every core (:func:`_threads`), but no more than keep the draws
    within ``MAX_FLOATS`` when each thread holds its smallest chunk (8 arrays of 16 zones x draws):
    with many draws, a machine of many cores would otherwise multiply the memory by its cores. The
    result does not depend on the threads."""
    return max(1, min(_threads(), unc.MAX_FLOATS // max(8 * 16 * draws, 1)))


def draw_cost(draws: int, n_zones: int, threads: int | None = None) -> tuple[float, float]:
    """Rough time [s] and largest memory [bytes] of a run's zone draws, known before any pixel is read.

    ``n_zones`` counts every row that gets an interval (each layer's zones and remainder, and the
    run total). Time: :data:`SECONDS_PER_DRAW_ZONE` x draws x zones / threads. Memory: the draws
    hold at most ``MAX_FLOATS`` float64 (science.uncertainty), or, when the draws are too many for
    that, 8 arrays of 16 zones x draws per thread.
    """
    threads = threads or _draw_threads(draws)
    seconds = SECONDS_PER_DRAW_ZONE * draws * max(n_zones, 1) / threads
    memory = 8.0 * max(unc.MAX_FLOATS, 8 * 16 * draws * threads) if draws else 0.0
    return seconds, memory


def add_intervals(rows, sums, flame, factors, cfg, alignment, models, grid, fire_rows=None, fill_cv=0.0,
                  keep: dict | None = None) -> dict:
    """Fill ``<col>_lo``/``<col>_hi`` of every interval column in ``rows`` (in place), and of the
    smouldering carbon in ``fire_rows`` (fires.csv, one per burn-scar polygon, when given), and
    return the uncertainty summary for totals.json. ``keep`` (a dict), when given, receives the run
    total's model sums and draw parameters (``sums``, ``params``): the joint draws of a series
    (peatburn.engine.series) redraw each year's total from them."""
    params, sources, survey = build_params(cfg, factors, alignment, models, sums, grid, fill_cv)
    draws, seed = cfg.uncertainty.draws, cfg.uncertainty.seed
    calibration, widen = None, {}
    if alignment is not None and survey and len(alignment.stable_sample[2]):
        from .survey_calibration import patch_check, scope_label, typical_areas

        pix = float(np.mean(grid.pixel_area(grid.windows(cfg.block_size)[0])))
        calibration = patch_check(alignment, survey, pix, typical_areas(sums, "area_m2_survey", SCAR_LAYER),
                                  seed=seed)
        by_scope = {c["scope"]: c["zone_sd_scale"] for c in calibration}
        # a layer whose patches show the model too narrow draws its zone-level survey error widened to them
        widen = {name: by_scope.get(scope_label(name, SCAR_LAYER), 1.0) for name, _, _ in sums.layers}
    frp = factors.frp_route
    row_i = 0
    per_zone = {}
    for li, (name, ids, acc) in enumerate(sums.layers):
        if name == SCAR_LAYER:
            if fire_rows:
                _fill_fires(fire_rows, acc, flame.layers[li][1] if flame else None, _widened(params, widen, name),
                            draws, seed, frp, factors.vegetation_carbon_fraction)
            continue
        idx = np.arange(1, len(ids) + 2)  # zones, then the outside bin
        fl = flame.layers[li][1] if flame else None
        ms = _model_sums(acc, idx, fl, frp, factors.vegetation_carbon_fraction)
        lp = _widened(params, widen, name)
        iv = unc.intervals(ms, lp, draws=draws, seed=seed, workers=_draw_threads(draws), quantities=_WITH_COLUMN)
        con = unc.contributions(ms, lp, quantity="carbon_kg")
        for k in range(len(idx)):
            _fill(rows[row_i + k], iv, k)
        per_zone[name] = {(ids[k] if k < len(ids) else OUTSIDE): {s: _f(v[k]) for s, v in con.items()}
                          for k in range(len(idx))}
        row_i += len(idx)
    tot = {k: np.array([v]) for k, v in sums.total.items()}
    ms = _model_sums(tot, np.array([0]), {k: np.array([flame.total[k]]) for k in ("dry_matter_kg", "fre_ssq_kg2")
                                          if k in flame.total} if flame else None,
                     frp, factors.vegetation_carbon_fraction)
    # the run total: the widest widening of any layer (conservative)
    params = _widened(params, {"": max(widen.values(), default=1.0)}, "")
    if keep is not None:
        keep.update(sums=ms, params=params)
    iv = unc.intervals(ms, params, draws=draws, seed=seed, quantities=_WITH_COLUMN)
    assert rows[row_i]["layer"] == TOTAL_LAYER
    _fill(rows[row_i], iv, 0)
    means = unc.draw_means(ms, params, draws=draws, seed=seed, quantities=_WITH_COLUMN)
    ipcc = ipcc_percentages(ms, params, iv, rows[row_i], means)
    con = unc.contributions(ms, params, quantity="carbon_kg")
    return {
        "method": "Monte Carlo at zone level: sums reduced once per zone in the block pass, draws of the run-wide "
                  "and zone-level sources (docs/uncertainty.md); 95 % interval = 2.5 and 97.5 percentiles",
        "draws": draws, "seed": seed,
        "sources": [s.to_dict() for s in sources],
        "survey_error": survey,
        "survey_calibration": calibration,
        "ipcc_total_uncertainty_pct": ipcc,
        "ipcc_note": "Uncertainty of the run total as a percentage of the estimate, 95 % (IPCC 2006 Guidelines Vol. 1 "
                     "Ch. 3; section numbers recalled, unchecked): Approach 1 = first-order propagation of the same "
                     "sources (the law of propagation of uncertainty; symmetric +-, over the estimate); Approach 2 = "
                     "Monte Carlo, the mean of the draws less the 2.5 percentile and the 97.5 percentile less the mean, "
                     "over the mean. They agree for small uncertainties and part where the lognormal factors make the "
                     "draws skewed. inventory.csv gives the same percentages on every row (approach1_pct, "
                     "approach2_minus_pct, approach2_plus_pct): a year's row is the run total times its share.",
        "contributions": {s: _f(v[0]) for s, v in con.items()},
        "contributions_by_zone": per_zone,
        "contributions_quantity": "carbon_smouldering_t",
        "note": "Tier 1 default pixels are drawn with the stated uncertainty of the default (tier1_fuel), not with "
                "the bulk density. A run-wide error of the subsidence rate is removed by the vertical co-registration "
                "on stable ground; a rate map's error enters as a zone-correlated term (subsidence_rate_map: "
                "uncertainty.subsidence_rate_sd, default 0.01 m/yr with a rate map, 0 with one constant rate). "
                "Pixels whose bulk density or carbon fraction was filled get a wider spread (peat_property_fill).",
    }


def _widened(params: dict, widen: dict, name: str) -> dict:
    """The draw parameters of a layer whose zone-level survey sd the patch check widens (else unchanged)."""
    k = widen.get(name, 1.0)
    return params if k <= 1.0 else {**params, "survey_random_scale": k}


def ipcc_percentages(ms: dict, params: dict, iv: dict, row: dict, means: dict | None = None) -> dict:
    """Per interval column of the run total: ``<col>_approach1_pct`` (1.96 x the first-order sd from
    :func:`peatburn.science.uncertainty.variance_components`, over the estimate, x 100: for a product of
    independent factors this is IPCC 2006 Vol. 1 Ch. 3 Eq. 3.1, U = sqrt(U_1^2 + ... + U_n^2), and for a
    sum Eq. 3.2; equation numbers recalled, unchecked) and ``<col>_approach2_minus_pct`` / ``_plus_pct``
    (Approach 2, Monte Carlo: the mean of the draws less their 2.5 percentile, and their 97.5 percentile
    less the mean, over the mean, x 100; the estimate stands for the mean when ``means`` is not given)."""
    out = {}
    for q, (lo, hi) in iv.items():
        col = _column(q)
        est = row.get(col)
        if col is None or not isinstance(est, float) or not est > 0:
            continue
        est_kg = est * 1e3
        var = sum(float(v[0]) for v in unc.variance_components(ms, params, quantity=q).values())
        out[f"{col}_approach1_pct"] = 100.0 * 1.96 * math.sqrt(max(var, 0.0)) / est_kg
        mean = float(means[q][0]) if means is not None and q in means else est_kg
        if not mean > 0:
            continue
        out[f"{col}_approach2_minus_pct"] = 100.0 * (mean - float(lo[0])) / mean
        out[f"{col}_approach2_plus_pct"] = 100.0 * (float(hi[0]) - mean) / mean
    return out


def _fill_fires(fire_rows, acc, flame_layer, params, draws, seed, frp, vegetation_cf) -> None:
    """Intervals of each fire's smouldering carbon: the same zone-level draws as a zone layer's, on
    the scar layer's sums (shared pixels of repeat burns split between their fires)."""
    idx = np.arange(1, len(fire_rows) + 1)
    ms = _model_sums(acc, idx, flame_layer, frp, vegetation_cf)
    iv = unc.intervals(ms, params, draws=draws, seed=seed, workers=_draw_threads(draws), quantities={"carbon_kg"})
    for k, row in enumerate(fire_rows):
        _fill(row, iv, k)


def _fill(row: dict, iv: dict, k: int) -> None:
    for q, (lo, hi) in iv.items():
        col = _column(q)
        if col is None:
            continue
        scale = 1e-3  # kg -> t
        row[f"{col}_lo"] = float(lo[k]) * scale
        row[f"{col}_hi"] = float(hi[k]) * scale


def _column(q: str) -> str | None:
    for pattern, col in unc.QUANTITY_COLUMNS.items():
        if col.startswith("("):
            continue
        if "{gas}" in pattern:
            head, tail = pattern.split("{gas}")
            if q.startswith(head) and q.endswith(tail) and len(q) > len(head) + len(tail):
                return col.format(gas=gas_key(q[len(head):len(q) - len(tail)]))
        elif q == pattern:
            return col
    return None


def _f(v) -> float | None:
    v = float(v)
    return v if math.isfinite(v) else None
