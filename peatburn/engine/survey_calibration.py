"""The calibration check of a run's survey error model: stable-ground patches of each zone layer's
typical zone size, their mean error against the model's sd (issue 16).

Patches of a zone's area are laid on the stable-ground sample the co-registration kept
(:func:`peatburn.science.patches.sampled_patch_rms`); the RMS of their mean residual is what a zone
of that size carries, measured; the model predicts ``sqrt(zone_sd^2 + bias_sd^2)``
(:func:`peatburn.science.zone_error.coregistered_zone_sd`). Their ratio near 1 means calibrated
(Rolstad et al. 2009 Sect. 4; Hugonnet et al. 2022, the patches method; recalled, unchecked).
When the run chose a survey error spread that varies in space (science.error_scale), the patches are
laid on the residuals standardised by the modelled per-pixel sd, so the check tests the same model.
"""

from __future__ import annotations

import math

import numpy as np

from ..science import patches, zone_error

#: Patches tried per size (the check costs about 0.05 s per size on 50,000 sample points).
N_PATCHES = 300
#: Ratios beyond these bounds get a warning sentence: the model is off by more than the check's own
#: scatter on synthetic scenes (0.9-1.2 there; tests/engine/test_survey_calibration.py).
RATIO_LOW, RATIO_HIGH = 0.67, 1.5


def patch_check(alignment, survey: dict, pixel_area_m2: float, areas: dict, seed: int = 0) -> list[dict]:
    """One row per named area: ``{"scope", "area_ha", "patches", "patch_rms_m", "model_sd_m", "ratio",
    "ratio_se", "sentence"}``.

    Parameters
    ----------
    alignment : SurveyAlignment
        Holds the stable-ground sample (x, y, residual) and the number of stable pixels it was
        drawn from.
    survey : dict
        The run's survey error model (:func:`peatburn.engine.intervals.survey_error_model`).
    pixel_area_m2 : float
        Pixel area [m2].
    areas : dict
        Scope (e.g. "zones: West (median zone)") -> area [m2] to check.
    seed : int
        Seed of the patch positions.
    """
    x, y, r = alignment.stable_sample
    scale = getattr(alignment, "stable_scale", None)
    if survey.get("scale_ref_m") and scale is not None:
        # a spread varying in space: the residuals standardised by their modelled sd (at the reference sd
        # the model is stated at), so that each patch is compared with the same model the zones get
        r, _ = zone_error.standardise(x, y, r, scale, survey.get("trend_coefficients"))
    n_all = max(int(alignment.n_stable_sample), 1)
    frac = min(max(len(r) / n_all, 1e-12), 1.0)
    comps = [(c["partial_sill_m2"], c["range_m"]) for c in survey["components"]]
    out = []
    for scope, area in areas.items():
        if not (area > 0 and math.isfinite(area)):
            continue
        zsd, bsd = zone_error.coregistered_zone_sd(area, survey["stable_area_m2"], survey["nugget_m2"], comps,
                                                   pixel_area_m2, survey.get("trend_sd_m", 0.0))
        model = float(math.hypot(float(zsd), bsd))
        rms, n, se = patches.sampled_patch_rms(x, y, r, math.sqrt(area), pixel_size_m=math.sqrt(pixel_area_m2),
                                           sample_fraction=frac, n_patches=N_PATCHES, seed=seed)
        ratio = rms / model if n and model > 0 else float("nan")
        ratio_se = se / model if n and model > 0 else float("nan")
        scale = zone_sd_scale(rms, float(zsd), bsd, ratio, ratio_se)
        sentence = _sentence(scope, area, n, rms, model, ratio, ratio_se)
        if scale > 1.0:
            sentence += (f" The intervals of this layer use the patches' spread: its zone-level survey sd is widened "
                         f"{scale:.2f}-fold.")
        out.append({"scope": scope, "area_ha": area / 1e4, "patches": int(n), "patch_rms_m": rms,
                    "model_sd_m": model, "ratio": ratio, "ratio_se": ratio_se, "zone_sd_scale": scale,
                    "sentence": sentence})
    return out


def zone_sd_scale(rms: float, zone_sd: float, bias_sd: float, ratio: float, ratio_se: float) -> float:
    """Factor on the zone-level survey sd that makes the model match the patches, when the patches show
    it too narrow beyond the check's own scatter (``ratio - 2 se > 1``); else 1. Never below 1: the
    variogram model stays the estimate, the patches only widen it where they show error it misses
    (a long-range component the F test left out; the patches method of Hugonnet et al. 2022 as an
    estimate of an area's error, recalled, unchecked). ``k^2 zone_sd^2 + bias_sd^2 = rms^2``."""
    if not (math.isfinite(ratio) and math.isfinite(ratio_se) and ratio - 2.0 * ratio_se > 1.0 and zone_sd > 0):
        return 1.0
    return max(1.0, math.sqrt(max(rms * rms - bias_sd * bias_sd, 0.0)) / zone_sd)


def _sentence(scope, area, n, rms, model, ratio, ratio_se) -> str:
    size = f"{area / 1e4:.3g} ha"
    if not n:
        return (f"{scope}: no stable-ground patch of {size} fits in the sampled stable ground, so the survey error "
                f"model could not be checked at this size.")
    head = (f"{scope}: {n} stable-ground patches of {size} have a mean survey error of {rms:.3g} m (RMS); the model "
            f"predicts {model:.3g} m, a ratio of {ratio:.2f} (standard error of the check "
            f"{ratio_se:.2f})")
    se = ratio_se if math.isfinite(ratio_se) else float("inf")
    if ratio - 2 * se > RATIO_HIGH:
        return head + (" - the intervals are likely too narrow at this size (a trend or long-range error the "
                       "variogram misses; consider depth.survey.tilt or more stable ground).")
    if ratio + 2 * se < RATIO_LOW:
        return head + " - the intervals are likely too wide at this size."
    if se > 0.25 * ratio:
        return head + " - too few stable-ground samples at this size for a firm check."
    if not RATIO_LOW <= ratio <= RATIO_HIGH:
        return head + " - outside 0.67-1.5, but within twice the check's own standard error."
    return head + " (near 1: calibrated)."


def typical_areas(sums, area_key: str, scar_layer: str) -> dict:
    """Scope -> median surveyed area [m2] of the zones (with a surveyed area) of each zone layer
    and of the burn scars (fires)."""
    return {scope_label(name, scar_layer): a for name, a in median_areas(sums, area_key).items()}


def scope_label(name: str, scar_layer: str) -> str:
    """The scope a layer's check is reported under."""
    return "fires (median burn scar)" if name == scar_layer else f"zone layer {name} (median zone)"


def median_areas(sums, area_key: str) -> dict:
    """Layer name -> median surveyed area [m2] of its zones with a surveyed area."""
    out = {}
    for name, ids, acc in sums.layers:
        a = np.asarray(acc[area_key], dtype=float)[1:len(ids) + 1]
        a = a[a > 0]
        if a.size:
            out[name] = float(np.median(a))
    return out
