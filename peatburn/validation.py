"""The validation table: the tool's numbers beside numbers from outside the code, by kind.

:func:`build_rows` calls peatburn's science functions on the inputs of published figures and on
published measurements, and the public API :func:`peatburn.run` on invented scenes with a known
truth (survey, water table, Tier 1 on a lon/lat grid, a spread of burn depth); it returns one row
per check. :func:`render_markdown` turns the rows into ``docs/validation.md``, ending with what
is not validated; ``python -m peatburn.validation [--out PATH]`` writes it (exit status 1 when a
check of the code differs). ``tests/test_validation.py`` runs the builder, asserts that every
check of the code agrees within its stated tolerance, pins the result of every independent
comparison, and that the page in the repository equals what this module renders now.

A row is a dict::

    group             section of the page the row belongs to (see GROUPS)
    kind              what the row can show (see KINDS): "identity", "published", "synthetic" or
                      "independent"
    check             what is compared
    source            the publication (authors, year, journal, table or page)
    published         the reference value [unit]
    published_status  "checked (...)", "recalled, unchecked", "derived (...)" or "synthetic truth"
    tool              peatburn's value for the same quantity [unit]
    difference        tool - published [unit]
    tolerance         largest |difference| accepted [unit], justified in ``note``
    unit              unit of published, tool, difference and tolerance
    status            "agrees" when |difference| <= tolerance, else "DIFFERS"; an independent row
                      whose measured value is recalled: "not counted (recalled)"
    note              why the tolerance is what it is; caveats

The headline of the page counts rows and agreement per kind, never one total: an arithmetic
identity that agrees shows only that the code does the sum it says, while an independent
measurement that agrees shows that the tool's output matches something it was not built from.
A row that rests on a value recalled from memory is shown but is not counted as evidence.

"Published" values come from the publication (or, for derived figures, from hand arithmetic on
published numbers, written out beside the constant below). None is produced by running
peatburn's own code. Where a publication's number is quoted from memory and has not been checked,
the row says "recalled, unchecked" (see docs/sources.md).
"""

from __future__ import annotations

import argparse
import math
import sys
import tempfile
from pathlib import Path

import numpy as np

from .factors import list_factor_sets, load_factor_set
from .science import gases, peat

__all__ = ["GROUPS", "KINDS", "build_rows", "render_markdown", "main", "synthetic_survey_scene",
           "synthetic_tier1_scene"]

#: What a row can show, in page order: (title, what agreement shows, what it does not show).
KINDS: dict[str, tuple[str, str, str]] = {
    "identity": (
        "arithmetic identity",
        "the code does the sum it says (hand arithmetic on the same inputs)",
        "nothing about whether the inputs or the formula fit real fires",
    ),
    "published": (
        "published total from published inputs",
        "the tool reproduces a published total from the inputs the publication used",
        "that the total was right; some inputs are recalled, and inputs recalled to fit a total "
        "will fit it",
    ),
    "synthetic": (
        "synthetic truth recovered",
        "the whole tool recovers a known truth from invented rasters (several error structures, "
        "not only the one the model assumes)",
        "how real surveys, water tables or fires behave",
    ),
    "independent": (
        "independent measurement",
        "the tool's output matches a measured quantity it was not built from",
        "that the tool is right for other fires; nothing where the measured value is recalled (a "
        "recalled value never counts as agreement)",
    ),
}

#: The kind of the rows of each group (a row may override it).
GROUP_KIND = {
    "page2002": "published", "ballhorn2009": "identity", "graham2022": "published",
    "agus2012": "published", "tier1": "identity", "mce": "identity", "closure": "identity",
    "synthetic_survey": "synthetic", "synthetic_water_table": "synthetic", "synthetic_tier1": "synthetic",
    "smoke": "independent",
}

#: Section titles and the text shown above each section's table, in page order. Rows of a group
#: not listed here (added later) are rendered under their group name with no text.
GROUPS: dict[str, tuple[str, str]] = {
    "page2002": (
        "Carbon from area, burn depth, bulk density and carbon fraction (Page et al. 2002)",
        "C = A × d × ρ_b × f_C (`peatburn.science.peat.peat_dry_mass`, `carbon_mass`). Page et al. 2002 "
        "(Nature 420:61) estimate 0.19–0.23 Gt C from peat combustion over 0.73 Mha of burned peatland "
        "(abstract, checked). Their inputs, a mean burn depth of 0.51 ± 0.05 m, a dry bulk density of "
        "0.1 g cm⁻³ and a carbon content of 57 %, are **recalled, unchecked** (not in the abstract). "
        "The tool is run at depths 0.46 and 0.56 m (the ends of 0.51 ± 0.05 m) and compared with the "
        "two ends of the published range.",
    ),
    "ballhorn2009": (
        "Spread of burn depth across a burned area (Ballhorn et al. 2009)",
        "Ballhorn et al. 2009 (PNAS 106:21213) write in their abstract (checked): \"we determined an "
        "average burn scar depth of 0.33 +/- 0.18 m\" and \"49.15 +/- 26.81 megatons of carbon were "
        "released\". The abstract does not say what the ± is. Read with their method (LiDAR depths "
        "over the burn scars), 0.18 m is the **spread of burn depth from place to place across the "
        "burned area**, not the error of the mean depth; that reading is recalled, unchecked: the "
        "paper's methods and results could not be consulted here. Their carbon ± is that spread "
        "carried through linearly (26.81 / 49.15 = 0.18 / 0.33): it says how unevenly the peat "
        "burned, not how well the total is known. The error of a total is that of the area-averaged "
        "depth (docs/uncertainty.md), far smaller than the pixel spread when the errors average out "
        "over many pixels; the tool never uses a spatial spread as the uncertainty of a total. The "
        "first row checks only the linear arithmetic. The others run the tool on an invented scene "
        "whose burn depth varies across a scar with mean 0.33 m and spread 0.18 m (a gamma "
        "distribution, spatially correlated: not the normal pixel noise of the error model; the "
        "table gives the values realised over the scar's interior) and "
        "compare that spread with the spread of the pixel depths the tool reports in "
        "`burn_depth.tif`, with the survey noise the tool measured (stable-ground NMAD) removed in "
        "quadrature. They are compared with a spread, never with an interval.",
    ),
    "graham2022": (
        "Carbon per cubic metre of peat burned (Graham et al. 2022)",
        "Graham et al. 2022 (Fire 5:62, abstract, checked): peat volume losses of 102 m³/ha (August "
        "2015) and 754 m³/ha (September 2015) emitted 8.1 and 60.2 t C/ha, i.e. 0.079 and 0.080 "
        "t C per m³. The tool's carbon per area is depth × ρ_b × f_C; its carbon density is set from "
        "the August campaign (ρ_b × f_C = 8.1 / 102 t C m⁻³, split as f_C = 0.56, Hu et al. 2018, "
        "and ρ_b = 0.1418 g cm⁻³) and the September carbon is predicted from the September volume.",
    ),
    "agus2012": (
        "Carbon density from bulk density and carbon content (Warren et al. 2012; Agus et al. 2012)",
        "Carbon density ρ_C = ρ_b × f_C (`peatburn.science.peat.carbon_density`), the relation "
        "Warren et al. 2012 (Biogeosciences 9:4477) use to estimate peat carbon stocks from bulk "
        "density. Warren et al.'s regression coefficients could not be consulted (recalled, "
        "unchecked), so no row reproduces them. Instead, Agus et al. 2012 (Proceedings of the 14th "
        "International Peat Congress, summary, checked) give, for over 2200 samples from Sumatra and "
        "Kalimantan, the mean carbon content, bulk density and volumetric carbon density Cv of each "
        "maturity class. The tool multiplies the two means; the published Cv is the mean of the "
        "per-sample products, which differs by the (unpublished) covariance of ρ_b and f_C, so the "
        "tolerance is one published standard deviation of Cv. This is a consistency check, not a "
        "reproduction.",
    ),
    "tier1": (
        "IPCC Tier 1 arithmetic (2006 Guidelines Eq. 2.27; 2013 Wetlands Supplement Ch. 2)",
        "L = A × (M_B × C_f) × G_ef × 10⁻³ [t], with A = 1 ha, fuel consumed (IPCC default) M_B × C_f = 353 t d.m./ha "
        "(wildfire on tropical organic soil, IPCC 2013 Wetlands Supplement Ch. 2, recalled, "
        "unchecked) and the emission factors of the shipped set `smouldering_ipcc2013_wetlands` "
        "(CO2-C 464, CO 210, CH4 21 g/kg d.m., recalled, unchecked). Tool: "
        "`peatburn.science.tier1.tier1_emissions(1 ha, EF)` with the tool's own default fuel "
        "consumption. Published column: the hand formula on the published numbers.",
    ),
    "mce": (
        "Modified combustion efficiency of each shipped factor set",
        "MCE = n_CO2 / (n_CO2 + n_CO), n = EF / M (`gases.modified_combustion_efficiency`). "
        "Published column: hand arithmetic on the set's published emission factors with the IUPAC "
        "1995 standard atomic weights (C 12.0107, O 15.9994, H 1.00794; Coplen 1996, Pure Appl. Chem. "
        "68:2339, Table 2, checked), an independent set of molar masses. For context, Jayarathne et "
        "al. 2018 (Atmos. Chem. Phys. 18:2585, abstract, checked) measured MCE 0.725–0.833 in 18 "
        "peat-fire plumes in Central Kalimantan in 2015: the shipped smouldering sets sit just above "
        "that range.",
    ),
    "closure": (
        "Carbon closure of each shipped factor set",
        "closure = Σ EF_g × (M_C / M_g) / (1000 × f_C) over CO2, CO and CH4 (`gases.carbon_closure`): "
        "carbon emitted per unit of carbon in the fuel. Above 1, the set emits more carbon than the "
        "fuel holds. Published column: hand arithmetic with the IUPAC 1995 weights as above. Peat "
        "carbon fractions 0.55, 0.56 (the mean of tropical peat in the studies reviewed by Hu et al. "
        "2018, Int. J. Wildland Fire 27:293, abstract, checked) and 0.58; vegetation 0.47 (IPCC 2006 "
        "Vol. 4 Table 4.3 default, recalled, unchecked) and 0.50 (common practice). **At 0.56 the "
        "Akagi et al. 2011 and IPCC 2013 Wetlands sets emit about 2 % more carbon than the fuel "
        "holds**; the rows say so rather than hide it.",
    ),
    "synthetic_survey": (
        "Synthetic-truth recovery: burn depth from two surveys",
        "A small invented scene (`peatburn.validation.synthetic_survey_scene`): a textured terrain "
        "surveyed twice, the post-fire survey with a datum offset, a sub-pixel horizontal "
        "georeferencing error, subsidence, noise, and two burn scars (one with an unburned island, one "
        "on thin peat where the burn reaches the mineral soil). Run end to end with "
        "`peatburn.run(config, out, overwrite=True)`; the estimate is compared with the truth the "
        "scene was made from (sum over pixel centres of true depth × pixel area × ρ_b × f_C).",
    ),
    "synthetic_water_table": (
        "Synthetic-truth recovery: burn depth from the water table, and its leave-scar-out error",
        "An invented scene (`peatburn.validation.synthetic_water_table_scene`) with ten scars, two of "
        "them in a gap of the post-fire survey. The true burn depth is not the model's straight line "
        "plus independent noise: it saturates with the water-table depth, each scar is scaled by its "
        "own random factor (sd 15 %), and a spatially correlated residual is added. The tool fits its "
        "depth model on the eight surveyed scars (least squares on the screened pairs) and predicts "
        "the two; the rows compare their carbon with the truth, with twice the tool's own "
        "leave-scar-out error as the tolerance: they test whether the error the run states covers "
        "the error it makes on a scene whose errors are not the model's own. Expect an underestimate: "
        "the unsurveyed scars lie in the middle of the water-table range, where a straight line "
        "fitted to a saturating relation runs below it (on other scene seeds, 6-8, the errors were "
        "-29 to +35 % against leave-scar-out errors of 18-32 %, always within twice them; seed 5 is "
        "the one shown, the first "
        "tried).",
    ),
    "synthetic_tier1": (
        "Synthetic-truth recovery: IPCC Tier 1 on a lon/lat grid",
        "A Tier-1-only run (no depth at all) on an invented scene in geographic coordinates "
        "(`peatburn.validation.synthetic_tier1_scene`), far south in the open Indian Ocean where a "
        "degree of longitude is much shorter than one of latitude: two irregular scars, one with an "
        "unburned hole, edges at odd angles to the grid. The truth is the geodesic area of the "
        "polygons on the WGS 84 ellipsoid from pyproj (`Geod.geometry_area_perimeter`, Karney "
        "2013), an independent area computation, times the Tier 1 fuel consumption (353 t d.m./ha, "
        "recalled, unchecked) and the set's emission factors. It tests the pixel areas, the "
        "pixel-centre rule and the Tier 1 arithmetic together, not the Tier 1 default itself (which "
        "only field data can test: see the last section).",
    ),
    "smoke": (
        "Independent measurements: smoke of peat fires against the shipped factor sets",
        "The emission factors and MCE the tool applies, against smoke measured in the field by "
        "studies the set was not built from (a set is never compared with its own source or with "
        "another paper of the same field campaign). Jayarathne "
        "et al. 2018 (Atmos. Chem. Phys. 18:2585, abstract, checked) sampled 18 peat-fire plumes in "
        "Central Kalimantan in 2015 with MCE 0.725–0.833; a set agrees when its MCE lies in that "
        "range (published: the middle, tolerance: half the range); a set with a PM2.5 factor is "
        "compared with their 17.3 ± 6.0 g/kg (within two ±). The shipboard study of Sumatran "
        "peat fires of 2013 (Tellus B 69:1399047, 2017, abstract, checked) gives typical emission "
        "factors 1663 ± 54 g/kg CO2, 205 ± 23 g/kg CO and 7.6 ± 1.6 g/kg CH4; a set agrees when its "
        "factor lies within two of those ± (the abstract does not say whether ± is a standard "
        "deviation or an error of the mean). Tool: `gases.gas_emissions` of 1 kg dry matter burned "
        "with the set as loaded (the IPCC set stores CO2-C, converted by the loader), and "
        "`gases.modified_combustion_efficiency`. Rows that DIFFER are findings, not failures of the "
        "code: the recalled CH4 factors of the Akagi et al. 2011 and IPCC 2013 sets are about three "
        "times the Sumatran measurement; every set compared with the 2015 Kalimantan plumes burns a "
        "little more completely (higher MCE) than they did; and the field set of that campaign "
        "(recalled values) has 1.4 times the Sumatran CO. Smoke of different fires differs, so a "
        "difference says which sets are far apart, not which is wrong.",
    ),
}

# ------------------------------------------------------------------------------------------
# published values and hand arithmetic (never computed by peatburn)

#: Page et al. 2002 (Nature 420:61), abstract (checked): 0.19-0.23 Gt C from 0.73 Mha of burned peat.
PAGE_AREA_HA = 0.73e6
PAGE_CARBON_GT = (0.19, 0.23)
#: Page et al. 2002 inputs (recalled, unchecked): depth 0.51 +/- 0.05 m, 0.1 g/cm3, 57 % carbon.
PAGE_DEPTH_M, PAGE_DEPTH_SD_M, PAGE_BULK_DENSITY, PAGE_CARBON_FRACTION = 0.51, 0.05, 0.1, 0.57
#: Derived: 0.19e9 t / 0.73e6 ha = 260.27 t C/ha; 0.23e9 / 0.73e6 = 315.07 t C/ha.
PAGE_T_PER_HA = (260.27, 315.07)

#: Ballhorn et al. 2009 (PNAS 106:21213), abstract (checked): "an average burn scar depth of
#: 0.33 +/- 0.18 m" and "49.15 +/- 26.81 megatons of carbon". That +/- 0.18 m is the spatial spread
#: of burn depth across the burned area is recalled, unchecked (the abstract does not say).
BALLHORN_DEPTH_M, BALLHORN_DEPTH_SPREAD_M = 0.33, 0.18
BALLHORN_CARBON_MT, BALLHORN_CARBON_SPREAD_MT = 49.15, 26.81
#: Derived: 26.81 / 49.15 = 0.545473.
BALLHORN_RELATIVE = 0.545473

#: Jayarathne et al. 2018 (Atmos. Chem. Phys. 18:2585), abstract (checked): 18 peat-fire plumes,
#: Central Kalimantan, 2015, "modified combustion efficiency (MCE) values of 0.725-0.833".
JAYARATHNE_MCE = (0.725, 0.833)
#: Tellus B 69:1399047 (2017), abstract (checked): "typical EF values for peat fires" from shipboard
#: measurements of Sumatran peat-fire smoke in 2013 [g/kg]: 1663 +/- 54 CO2, 205 +/- 23 CO,
#: 7.6 +/- 1.6 CH4.
SHIPBOARD_EF = {"co2": (1663.0, 54.0), "co": (205.0, 23.0), "ch4": (7.6, 1.6)}
#: Jayarathne et al. 2018, abstract (checked): fuel-based PM2.5 emission factor "average of
#: 17.3 +/- 6.0 g kg-1" (range 6.0-29.6) over 21 samples from the same 18 plumes.
JAYARATHNE_PM25 = (17.3, 6.0)

#: Words that mark a factor set as built from a measurement campaign (in its citation, notes or
#: per-gas citations): such a set is never compared with that campaign, which would be an identity.
#: Jayarathne et al. 2018 and Stockwell et al. 2016 sampled the same 2015 Central Kalimantan fires.
SAME_CAMPAIGN = {
    "kalimantan2015": ("Jayarathne", "Stockwell"),
    "shipboard2013": ("1399047", "shipboard"),
}


def _built_from(fs, campaign: str) -> bool:
    text = " ".join([fs.name, fs.citation or "", fs.notes or "", *getattr(fs, "citations", {}).values()])
    return any(word.lower() in text.lower() for word in SAME_CAMPAIGN[campaign])

#: Graham et al. 2022 (Fire 5:62), abstract (checked): volume lost [m3/ha], carbon emitted [t C/ha].
GRAHAM_AUGUST = (102.0, 8.1)
GRAHAM_SEPTEMBER = (754.0, 60.2)
#: Mean fuel carbon of tropical peat, Hu et al. 2018 (Int. J. Wildland Fire 27:293), abstract (checked).
HU2018_CARBON_FRACTION = 0.56  # Hu et al. 2018, abstract (checked)

#: Agus et al. 2012 (Proc. 14th International Peat Congress, Stockholm; summary, checked): per maturity
#: class, mean carbon content [Mg/Mg], bulk density [Mg m-3], and carbon density Cv [Mg m-3] with its SD.
#: The summary prints the sapric carbon content as "0.049 +/- 0.08", an evident misprint of 0.49 (the
#: text says the carbon content "has relatively little variation"; 0.049 would be mineral soil).
AGUS2012 = {
    "fibric": {"f_c": 0.52, "bd": 0.10, "cv": 0.048, "cv_sd": 0.024},
    "hemic": {"f_c": 0.51, "bd": 0.12, "cv": 0.060, "cv_sd": 0.028},
    "sapric": {"f_c": 0.49, "bd": 0.18, "cv": 0.082, "cv_sd": 0.032},
}

#: IPCC 2013 Wetlands Supplement Ch. 2: fuel consumed by a wildfire on tropical organic soil
#: [t d.m./ha] (recalled, unchecked; table number unchecked too).
IPCC2013_FUEL_T_PER_HA = 353.0
#: Hand formula L = 1 ha x 353 t/ha x G_ef x 1e-3 [t]:
#:   CO2-C: 353 x 464 x 1e-3 = 163.792;  CO: 353 x 210 x 1e-3 = 74.13;  CH4: 353 x 21 x 1e-3 = 7.413;
#:   CO2 with the IPCC's usual 44/12: 163.792 x 44 / 12 = 600.571.
TIER1_HAND_T = {"co2_c": 163.792, "co": 74.13, "ch4": 7.413, "co2_44_12": 600.571}

#: MCE and carbon emitted [g C / kg d.m.] of each shipped set, by hand with the IUPAC 1995 standard
#: atomic weights (Coplen 1996, Table 2, checked): M_CO2 = 44.0095, M_CO = 28.0101, M_CH4 = 16.04246.
#:   Akagi 2011:   1703 x 12.0107/44.0095 = 464.768; 210 x 12.0107/28.0101 = 90.048;
#:                 20.8 x 12.0107/16.04246 = 15.573; sum 570.389.
#:                 MCE = (1703/44.0095) / (1703/44.0095 + 210/28.0101) = 38.6962 / 46.1935 = 0.83770
#:   IPCC 2013:    464 (given as CO2-C) + 90.048 + 21 x 12.0107/16.04246 = 15.722; sum 569.770.
#:                 MCE = (464/12.0107) / (464/12.0107 + 210/28.0101) = 38.6322 / 46.1295 = 0.83747
#:   Tellus B 2017: 1663 x 12.0107/44.0095 = 453.852; 205 x 12.0107/28.0101 = 87.904;
#:                 7.6 x 12.0107/16.04246 = 5.690; sum 547.446.
#:                 MCE = 37.7873 / (37.7873 + 7.3188) = 0.83774
#:   IPCC 2006 Table 2.5 tropical forest (flaming): 1580 x 12.0107/44.0095 = 431.200;
#:                 104 x 12.0107/28.0101 = 44.595; 6.8 x 12.0107/16.04246 = 5.091; sum 480.886.
#:                 MCE = 35.9013 / (35.9013 + 3.7129) = 0.90627
HAND_SETS = {
    "smouldering_akagi2011": {"carbon": 570.389, "mce": 0.83770, "status": "derived from recalled EFs",
                              "source": "Akagi et al. 2011, Atmos. Chem. Phys. 11:4039, Table 1, peatland",
                              "fractions": (0.55, 0.56, 0.58)},
    "smouldering_ipcc2013_wetlands": {"carbon": 569.770, "mce": 0.83747, "status": "derived from recalled EFs",
                                      "source": "IPCC 2013 Wetlands Supplement, Ch. 2, Table 2.7, tropical",
                                      "fractions": (0.55, 0.56, 0.58)},
    "smouldering_sumatra_shipboard2017": {"carbon": 547.446, "mce": 0.83774,
                                          "status": "derived from checked EFs (abstract)",
                                          "source": "Tellus B 69:1399047 (2017), shipboard, abstract",
                                          "fractions": (0.55, 0.56, 0.58)},
    "smouldering_kalimantan_field2015": {"carbon": 558.734, "mce": 0.77379, "status": "derived from recalled EFs",
                                        "source": "Stockwell et al. 2016, Atmos. Chem. Phys. 16:11711, field, "
                                                  "Central Kalimantan 2015",
                                        "fractions": (0.55, 0.56, 0.58)},
    "flaming_ipcc2006_tropical_forest": {"carbon": 480.886, "mce": 0.90627, "status": "derived from recalled EFs",
                                         "source": "IPCC 2006 Vol. 4 Ch. 2, Table 2.5, tropical forest "
                                                   "(Andreae & Merlet 2001)",
                                         "fractions": (0.47, 0.50)},
}

#: Tolerance of the hand MCE and closure values: 5-decimal rounding plus the difference between the
#: IUPAC 1995 weights and the conventional ones peatburn uses (below 1e-4 relative).
HAND_TOL = 2e-4

# ------------------------------------------------------------------------------------------
# row helpers


def _row(group, check, source, published, published_status, tool, tolerance, unit, note="", *, kind=None):
    kind = kind or GROUP_KIND[group]
    if kind not in KINDS:
        raise ValueError(f"validation row kind {kind!r}: use one of {sorted(KINDS)}")
    published = float(published)
    tool = float(tool)
    diff = tool - published
    ok = bool(np.isfinite(diff) and abs(diff) <= tolerance)
    status = "agrees" if ok else "DIFFERS"
    if kind == "independent" and _rests_on_recalled(published_status):
        status = NOT_COUNTED  # a recalled measurement never counts as agreement
    return {
        "group": group, "kind": kind, "check": check, "source": source,
        "published": published, "published_status": published_status,
        "tool": tool, "difference": diff, "tolerance": float(tolerance), "unit": unit,
        "status": status, "note": note,
    }


#: Status of an independent row whose measured value is recalled: shown, never counted.
NOT_COUNTED = "not counted (recalled)"

#: Kinds whose rows check the code: a row of these that differs is a failure (exit status 1 of
#: ``main``, a failing test). An independent measurement that differs is a finding, shown as such.
CODE_KINDS = ("identity", "published", "synthetic")


def _rests_on_recalled(published_status: str) -> bool:
    return "recalled" in published_status


def _carbon_t(depth_m, bulk_density, carbon_fraction, area_m2):
    """Carbon [t] with the tool's peat module (kg -> t)."""
    return float(peat.carbon_mass(peat.peat_dry_mass(depth_m, bulk_density, area_m2), carbon_fraction)) / 1000.0


# ------------------------------------------------------------------------------------------
# the groups


def _page2002_rows():
    src = "Page et al. 2002, Nature 420:61, abstract"
    area_m2 = PAGE_AREA_HA * 1e4
    rows = []
    for depth, pub, end in ((PAGE_DEPTH_M - PAGE_DEPTH_SD_M, PAGE_CARBON_GT[0], "low"),
                            (PAGE_DEPTH_M + PAGE_DEPTH_SD_M, PAGE_CARBON_GT[1], "high")):
        tool = _carbon_t(depth, PAGE_BULK_DENSITY, PAGE_CARBON_FRACTION, area_m2) / 1e9
        rows.append(_row(
            "page2002", f"carbon from 0.73 Mha at depth {depth:.2f} m ({end} end)", src, pub,
            "checked (abstract); inputs recalled, unchecked", tool, 0.005, "Gt C",
            "tolerance: the abstract gives the range to 0.01 Gt"))
    tool = _carbon_t(PAGE_DEPTH_M, PAGE_BULK_DENSITY, PAGE_CARBON_FRACTION, 1e4)
    lo, hi = PAGE_T_PER_HA
    rows.append(_row(
        "page2002", "carbon per hectare at the mean depth 0.51 m, against the middle of 260–315 t C/ha", src,
        (lo + hi) / 2, "derived (0.19–0.23 Gt / 0.73 Mha)", tool, (hi - lo) / 2, "t C/ha",
        "tolerance: half the published range"))
    return rows


def _ballhorn2009_rows(spread_rows=()):
    a = 1e6  # any area [m2]: the ratio does not depend on it
    c0 = _carbon_t(BALLHORN_DEPTH_M, 0.1, 0.55, a)
    c1 = _carbon_t(BALLHORN_DEPTH_M + BALLHORN_DEPTH_SPREAD_M, 0.1, 0.55, a)
    return [_row(
        "ballhorn2009", "carbon spread from the depth spread, carried linearly (0.18 / 0.33 m)",
        "Ballhorn et al. 2009, PNAS 106:21213, abstract", BALLHORN_RELATIVE,
        "derived (26.81 / 49.15 Mt C, checked)", (c1 - c0) / c0, 2e-4, "–",
        "arithmetic only: carbon is linear in depth. The ± is a spatial spread (recalled reading), "
        "not the error of the total; tolerance: rounding of 26.81 and 49.15 to 0.01 Mt")] + list(spread_rows)


def _graham2022_rows():
    vol_aug, c_aug = GRAHAM_AUGUST
    vol_sep, c_sep = GRAHAM_SEPTEMBER
    rho_c = c_aug / vol_aug  # t C per m3 of peat burned, from the August campaign
    bd = rho_c / HU2018_CARBON_FRACTION  # t/m3 = g/cm3
    depth_sep = vol_sep / 1e4  # m3/ha -> m over one hectare
    tool = float(peat.carbon_per_area(depth_sep, bd, HU2018_CARBON_FRACTION)) * 10.0  # kg C/m2 -> t C/ha
    # rounding of the published figures, each to its last digit, propagated to the September carbon:
    # 8.1 (+/-0.05 -> 0.62 %), 102 (+/-0.5 -> 0.49 %), 754 (+/-0.5 -> 0.07 %), 60.2 (+/-0.05)
    tol = 60.2 * (0.05 / 8.1 + 0.5 / 102 + 0.5 / 754) + 0.05
    return [_row(
        "graham2022", "September carbon from the September volume, density set on August",
        "Graham et al. 2022, Fire 5:62, abstract", c_sep, "checked (abstract)", tool, tol, "t C/ha",
        f"tolerance: rounding of the four published figures; implied bulk density {bd:.3f} g/cm³ at "
        "f_C = 0.56 (Hu et al. 2018), within the 0.05–0.2 g/cm³ of tropical peat (recalled)")]


def _agus2012_rows():
    src = "Agus et al. 2012, Proc. 14th Int. Peat Congress, summary"
    rows = []
    for name, v in AGUS2012.items():
        tool = float(peat.carbon_density(v["bd"], v["f_c"])) / 1000.0  # kg C/m3 -> Mg C/m3
        rows.append(_row(
            "agus2012", f"carbon density of {name} peat (ρ_b {v['bd']:.2f}, f_C {v['f_c']:.2f})", src, v["cv"],
            "checked (summary)", tool, v["cv_sd"], "Mg C/m³",
            "tolerance: one published SD of Cv (product of means vs mean of products)"))
    return rows


def _tier1_rows():
    from .science import tier1

    fs = load_factor_set("smouldering_ipcc2013_wetlands", "smouldering")
    src = "IPCC 2006 Vol. 4 Ch. 2 Eq. 2.27; IPCC 2013 Wetlands Supplement Ch. 2"
    # the tool's own Tier 1 default fuel consumption (not this module's constant), 1 ha
    out = {g: float(v) for g, v in tier1.tier1_emissions(1.0, fs.ef).items()}  # t
    rows = [_row("tier1", "CO2-C from 1 ha of tropical organic soil wildfire", src, TIER1_HAND_T["co2_c"],
                 "hand formula on recalled defaults", float(gases.co2_to_carbon(out["co2"])), 1e-6, "t C",
                 "353 × 464 × 10⁻³; the set stores CO2-C and the loader converts it to CO2 and back")]
    for gas, label in (("co", "CO"), ("ch4", "CH4")):
        rows.append(_row("tier1", f"{label} from 1 ha of tropical organic soil wildfire", src, TIER1_HAND_T[gas],
                         "hand formula on recalled defaults", out[gas], 1e-6, f"t {label}",
                         f"353 × {fs.ef[gas]:g} × 10⁻³"))
    rows.append(_row("tier1", "CO2 from 1 ha, against CO2-C × 44/12", src, TIER1_HAND_T["co2_44_12"],
                     "hand formula on recalled defaults", out["co2"], 0.001 * TIER1_HAND_T["co2_44_12"], "t CO2",
                     "peatburn converts with 44.009/12.011 (IUPAC), the IPCC worksheets with 44/12: "
                     "a 0.07 % difference; tolerance 0.1 %"))
    return rows


def _factor_set_rows():
    mce, closure = [], []
    for fs in list_factor_sets():
        hand = HAND_SETS.get(fs.name)
        if hand is None:  # a set added later without hand values: shown, and failing, until they are written
            mce.append(_row("mce", f"`{fs.name}`: no hand value written", fs.citation[:60], float("nan"),
                            "missing", float("nan"), 0.0, "–", "add its hand arithmetic to HAND_SETS"))
            continue
        tool_mce = float(gases.modified_combustion_efficiency(fs.ef["co2"], fs.ef["co"]))
        mce.append(_row("mce", f"`{fs.name}` ({fs.phase})", hand["source"], hand["mce"], hand["status"],
                        tool_mce, HAND_TOL, "–", "tolerance: 5-decimal rounding and atomic-weight convention"))
        for f in hand["fractions"]:
            tool = float(gases.carbon_closure(fs.ef, f))
            pub = hand["carbon"] / (1000.0 * f)
            flag = ("closure > 1: the set emits more carbon than the fuel holds" if tool > 1
                    else "closure ≤ 1")
            closure.append(_row("closure", f"`{fs.name}` at f_C = {f:.2f}", hand["source"], pub,
                                f"{hand['status']}; {hand['carbon']:.3f} g C/kg / (1000 × {f:.2f})", tool,
                                HAND_TOL, "–", flag))
    return mce + closure


def _smoke_rows():
    """Independent measurements: field smoke of peat fires against each shipped smouldering set
    that was not built from the same measurements."""
    rows = []
    lo, hi = JAYARATHNE_MCE
    src_j = "Jayarathne et al. 2018, Atmos. Chem. Phys. 18:2585, abstract"
    for fs in list_factor_sets():
        if fs.phase != "smouldering":
            continue
        if not _built_from(fs, "kalimantan2015"):
            mce = float(gases.modified_combustion_efficiency(fs.ef["co2"], fs.ef["co"]))
            rows.append(_row(
                "smoke", f"MCE of `{fs.name}` within the 2015 Kalimantan peat plumes (0.725–0.833)", src_j,
                (lo + hi) / 2, "checked (abstract)", mce, (hi - lo) / 2, "–",
                "tolerance: half the measured range; "
                + ("inside the range" if lo <= mce <= hi else
                   "above the range: the set burns more completely than the measured plumes" if mce > hi
                   else "below the range")))
            if "pm2_5" in fs.ef:
                pub, pm = JAYARATHNE_PM25
                tool = float(gases.gas_emissions(1.0, fs.ef["pm2_5"])) * 1000.0
                rows.append(_row(
                    "smoke", f"PM2.5 emitted per kg of peat burned, `{fs.name}`", src_j, pub, "checked (abstract)",
                    tool, 2 * pm, "g/kg", f"tolerance: 2 × the published ± {pm:g} g/kg"))
        if _built_from(fs, "shipboard2013"):
            continue
        for gas, label in (("co2", "CO2"), ("co", "CO"), ("ch4", "CH4")):
            pub, pm = SHIPBOARD_EF[gas]
            tool = float(gases.gas_emissions(1.0, fs.ef[gas])) * 1000.0  # kg gas per kg d.m. -> g/kg
            rows.append(_row(
                "smoke", f"{label} emitted per kg of peat burned, `{fs.name}`",
                "Tellus B 69:1399047 (2017), shipboard, Sumatra 2013, abstract", pub, "checked (abstract)",
                tool, 2 * pm, "g/kg",
                f"tolerance: 2 × the published ± {pm:g} g/kg; "
                + ("within it" if abs(tool - pub) <= 2 * pm else
                   f"the set's factor is {tool / pub:.1f} × the measurement")
                + ("; the set's factor is recalled, unchecked" if fs.status.get(gas) == "recalled" else "")))
    return rows


# ------------------------------------------------------------------------------------------
# synthetic scene


def _peat_and_factors_toml(bd, cf) -> str:
    """The [peat] and [emission_factors] tables shared by the scenes' configurations."""
    return f"""[peat]
thickness = "thickness.tif"
bulk_density = "{bd} g/cm^3"
carbon_fraction = {cf}

[emission_factors]
smouldering = "smouldering_ipcc2013_wetlands"
gwp = "AR6"
"""


def _terrain(dx, dy):
    """Invented bare-earth elevation [m] at offsets dx, dy [m] from a scene's corner: a gentle slope
    with ripples of 20-90 m wavelength (slopes in every aspect, which the co-registration needs)."""
    return (8.0 + 0.004 * dx - 0.002 * dy + 0.6 * np.sin(dx / 14.0) * np.cos(dy / 11.0)
            + 0.4 * np.sin((dx + dy) / 9.0))


def _wave_field(rng, shortest_m, longest_m, n_waves=64):
    """A smooth random field of position, about standard normal: the sum of ``n_waves`` plane waves
    of random direction, phase and wavelength in [shortest_m, longest_m] [m], scaled to unit
    variance. A function, so a shifted survey sees the same field."""
    wavelength = rng.uniform(shortest_m, longest_m, n_waves)
    angle = rng.uniform(0.0, 2 * np.pi, n_waves)
    kx, ky = 2 * np.pi / wavelength * np.cos(angle), 2 * np.pi / wavelength * np.sin(angle)
    phase = rng.uniform(0.0, 2 * np.pi, n_waves)

    def field(dx, dy):
        arg = np.multiply.outer(dx, kx) + np.multiply.outer(dy, ky) + phase
        return np.sqrt(2.0 / n_waves) * np.cos(arg).sum(axis=-1)

    return field


def _write_raster(path, arr, crs, transform, nodata=-9999.0):
    import rasterio

    h, w = arr.shape
    with rasterio.open(path, "w", driver="GTiff", width=w, height=h, count=1, dtype="float32", crs=crs,
                       transform=transform, nodata=nodata, tiled=True, blockxsize=64, blockysize=64) as ds:
        ds.write(np.where(np.isfinite(arr), arr, nodata).astype("float32"), 1)


def synthetic_survey_scene(folder, *, shape=(140, 180), pixel=2.0, noise=0.05, offset=0.35,
                           shift=(1.3, -0.8), subsidence=0.03, interval=3.0, depth=0.4, depth_spread=None,
                           seed=7) -> dict:
    """Write a small invented survey scene and its ``config.toml`` into ``folder``; return the truth.

    The terrain is analytic with ripples of 20-90 m wavelength (slopes in every aspect, which the
    co-registration needs). The post-fire survey sees the ground shifted by ``shift`` [m] (its pixel
    at (x, y) shows the ground at (x - sx, y - sy)), lowered by ``subsidence * interval`` and by the
    burn, raised by the datum ``offset`` [m], plus Gaussian noise. Scar A is a rectangle burned to
    ``depth`` with a 10 m unburned island inside the mapped polygon; scar B is a disc burned to
    1.5 ``depth`` of which the east part lies on 0.2 m of peat, so the burn there is capped at 0.2 m.

    With ``depth_spread`` [m], scar A's burn depth varies from place to place: a gamma
    distribution of mean ``depth`` and standard deviation ``depth_spread``, spatially correlated
    (the normal scores of a sum of 64 random plane waves of 25-80 m wavelength; a smooth function
    of position, so the shifted post survey sees the same burn).

    Returns
    -------
    dict
        ``config`` (path), ``carbon_t`` (true carbon burned [t]), ``volume_m3``, ``shift``,
        ``offset``, ``noise``, ``tolerance_rel`` (the a-priori bound of the relative error, see
        :func:`_synthetic_rows`), and the quantities it is made from; ``interior_a`` (pixels of
        scar A at least 3 pixels inside its edges and the island's) and ``true_depth`` (true burn
        depth at the pixel centres).
    """
    import geopandas as gpd
    import shapely
    from rasterio.transform import from_origin

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    epsg, x0, y0 = 32749, 500_000.0, 8_650_000.0   # open Indian Ocean (about 12.2 S, 111 E): not land
    h, w = shape
    transform = from_origin(x0, y0, pixel, pixel)
    cols, rows = np.meshgrid(np.arange(w) + 0.5, np.arange(h) + 0.5)
    x, y = x0 + cols * pixel, y0 - rows * pixel
    wm, hm = w * pixel, h * pixel

    def terrain(xx, yy):
        return _terrain(xx - x0, yy - y0)

    scar_a = shapely.box(x0 + 0.10 * wm, y0 - 0.80 * hm, x0 + 0.45 * wm, y0 - 0.20 * hm)
    island = shapely.Point(x0 + 0.27 * wm, y0 - 0.5 * hm).buffer(10.0)
    scar_b = shapely.Point(x0 + 0.72 * wm, y0 - 0.5 * hm).buffer(0.17 * wm)
    thin_x = x0 + 0.78 * wm
    thin_m, thick_m = 0.2, 4.0
    depth_b = 1.5 * depth

    if depth_spread is None:
        def depth_a(xx, yy):
            return depth
    else:
        import scipy.stats

        waves = _wave_field(rng, 25.0, 80.0)
        shape_k = (depth / depth_spread) ** 2  # gamma: mean k theta, variance k theta^2
        scale = depth_spread ** 2 / depth

        def depth_a(xx, yy):
            g = waves(xx - x0, yy - y0)
            return scipy.stats.gamma.ppf(scipy.stats.norm.cdf(g), shape_k, scale=scale)

    def true_depth(xx, yy):
        in_a = shapely.contains_xy(scar_a, xx, yy) & ~shapely.contains_xy(island, xx, yy)
        in_b = shapely.contains_xy(scar_b, xx, yy)
        thick = np.where(xx > thin_x, thin_m, thick_m)
        return np.minimum(np.where(in_a, depth_a(xx, yy), 0.0) + np.where(in_b, depth_b, 0.0), thick)

    sx, sy = shift
    pre = terrain(x, y) + rng.normal(0, noise, shape)
    post = (terrain(x - sx, y - sy) - true_depth(x - sx, y - sy) - subsidence * interval + offset
            + rng.normal(0, noise, shape))
    thickness = np.where(x > thin_x, thin_m, thick_m)

    def write(name, arr):
        _write_raster(folder / name, arr, f"EPSG:{epsg}", transform)

    write("pre.tif", pre)
    write("post.tif", post)
    write("thickness.tif", thickness)
    crs = f"EPSG:{epsg}"
    # scar A's polygon includes the island: mapped burned area with zero depth
    gpd.GeoDataFrame({"scar": ["A", "B"]}, geometry=[scar_a, scar_b], crs=crs).to_file(
        folder / "scars.gpkg", layer="scars", driver="GPKG")

    bd, cf = 0.1, 0.55  # g/cm3, mass fraction
    area = pixel * pixel
    burned = shapely.contains_xy(scar_a, x, y) | shapely.contains_xy(scar_b, x, y)
    d_true = true_depth(x, y)
    volume = float((d_true * burned).sum() * area)
    carbon_t = volume * bd * 1000.0 * cf / 1000.0
    # a-priori error bound (see _synthetic_rows): bilinear resampling of the shifted post survey
    # smears each scar edge over about one pixel, moving at most perimeter x pixel/2 x depth of
    # volume across the mapped edge; plus 3 standard deviations of the summed noise.
    perimeter_a = scar_a.length + island.length
    smear = perimeter_a * pixel / 2 * depth + scar_b.length * pixel / 2 * depth_b
    sigma_dh = noise * math.sqrt(2.0)
    noise_sd = sigma_dh * area * math.sqrt(float(burned.sum()))
    tolerance_rel = (smear + 3 * noise_sd) / volume
    (folder / "config.toml").write_text(f"""[run]
name = "validation synthetic scene"
year = 2030
block_size = 64

[burned_area]
path = "scars.gpkg"

[depth.survey]
pre = "pre.tif"
post = "post.tif"
interval_years = {interval}
subsidence_rate = "{subsidence} m/yr"
stable_buffer_m = 10

{_peat_and_factors_toml(bd, cf)}
[uncertainty]
draws = 0
""", encoding="utf-8")
    inner = scar_a.buffer(-3 * pixel).difference(island.buffer(3 * pixel))
    return {"config": folder / "config.toml", "carbon_t": carbon_t, "volume_m3": volume, "shift": shift,
            "offset": offset, "noise": noise, "tolerance_rel": tolerance_rel, "n_burned": int(burned.sum()),
            "bulk_density": bd, "carbon_fraction": cf, "interior_a": shapely.contains_xy(inner, x, y),
            "true_depth": d_true}


def _synthetic_rows():
    import peatburn

    with tempfile.TemporaryDirectory(prefix="peatburn_validation_") as tmp:
        truth = synthetic_survey_scene(Path(tmp) / "scene")
        result = peatburn.run(truth["config"], Path(tmp) / "out", overwrite=True)
    total = result.total
    qa = result.qa
    sx, sy = truth["shift"]
    src = "synthetic truth (invented scene)"
    tol = truth["tolerance_rel"] * truth["carbon_t"]
    return [
        _row("synthetic_survey", "total carbon burned", src, truth["carbon_t"], "synthetic truth",
             total["carbon_smouldering_t"], tol, "t C",
             f"tolerance {100 * truth['tolerance_rel']:.1f} % set before the run: scar perimeter × pixel/2 × "
             "depth (edge smear of the resampled post survey) + 3 SD of the summed survey noise"),
        _row("synthetic_survey", "x correction of the post survey (Nuth & Kääb 2011)", src, -sx, "synthetic truth",
             qa["shift_x_m"], 0.1, "m", "tolerance: 1/20 of a 2 m pixel"),
        _row("synthetic_survey", "y correction of the post survey (Nuth & Kääb 2011)", src, -sy, "synthetic truth",
             qa["shift_y_m"], 0.1, "m", "tolerance: 1/20 of a 2 m pixel"),
        _row("synthetic_survey", "vertical offset (datum) of the post survey", src, -truth["offset"],
             "synthetic truth", qa["vertical_offset_m"], 0.01, "m",
             "tolerance: 1 cm (0.07 m difference noise over thousands of stable pixels)"),
    ]


def _spread_rows():
    """Ballhorn et al. 2009's mean and spread as the truth of a scar: the tool's pixel depths."""
    import rasterio

    import peatburn

    with tempfile.TemporaryDirectory(prefix="peatburn_validation_") as tmp:
        truth = synthetic_survey_scene(Path(tmp) / "scene", depth=BALLHORN_DEPTH_M,
                                       depth_spread=BALLHORN_DEPTH_SPREAD_M, seed=11)
        result = peatburn.run(truth["config"], Path(tmp) / "out", overwrite=True)
        with rasterio.open(result.out_dir / "burn_depth.tif") as ds:
            reported = ds.read(1, masked=True).filled(np.nan).astype("float64")
    inside = truth["interior_a"]
    d_true, d_tool = truth["true_depth"][inside], reported[inside]
    n = int(inside.sum())
    sigma = float(result.qa["stable_nmad_after_m"])  # the survey noise the tool measured on stable ground
    spread_true = float(d_true.std())
    spread_tool = math.sqrt(max(float(np.nanstd(d_tool)) ** 2 - sigma ** 2, 0.0))
    src = "synthetic truth (invented scene) at Ballhorn et al. 2009's 0.33 ± 0.18 m"
    return [
        _row("ballhorn2009", f"spread (SD) of burn depth across a scar, {n} interior pixels", src, spread_true,
             "synthetic truth", spread_tool, 0.1 * spread_true, "m",
             f"tool: SD of the pixel depths in burn_depth.tif with the measured survey noise "
             f"({sigma:.3f} m) removed in quadrature; raw SD {float(np.nanstd(d_tool)):.3f} m. Tolerance: 10 % "
             "of the spread, for the smoothing of the resampled post survey (shortest wavelength 12 pixels) "
             "and the error of the noise estimate", kind="synthetic"),
        _row("ballhorn2009", f"mean burn depth over the same {n} pixels", src, float(d_true.mean()),
             "synthetic truth", float(np.nanmean(d_tool)), 0.01, "m",
             "tolerance: 1 cm (co-registration residual; the noise averages out over the pixels)",
             kind="synthetic"),
    ]


# ------------------------------------------------------------------------------------------
# synthetic water-table scene


def synthetic_water_table_scene(folder, *, shape=(200, 300), pixel=5.0, noise=0.05, offset=0.2,
                                scar_sd=0.15, seed=5) -> dict:
    """Write an invented scene where two of ten scars have no post-fire survey; return the truth.

    The true burn depth is **not** the model's straight line plus independent noise: it saturates
    with the water-table depth w [m, positive down], ``f(w) = 0.8 (1 - exp(-max(w - 0.3, 0) / 0.45))``,
    each scar's depth is scaled by its own factor ``1 + u_s`` (u_s normal, sd ``scar_sd``: a
    scar-level error the leave-scar-out cross-validation has to see), and a spatially correlated
    residual of 0.06 m sd (plane waves of 40-150 m) is added. The water table varies smoothly
    across the scene (0.4-1.0 m). The post survey has a gap (nodata) over two scars in the middle
    of the water-table range; the tool must fit its depth model on the eight surveyed scars and
    predict the two.

    Returns
    -------
    dict
        ``config``; ``carbon_t`` per scar id (sum over pixel centres of true depth x pixel area x
        rho_b x f_C [t]); ``gap`` (the ids of the unsurveyed scars).
    """
    import geopandas as gpd
    import shapely
    from rasterio.transform import from_origin

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    epsg, x0, y0 = 32749, 520_000.0, 8_660_000.0  # open Indian Ocean (about 12.1 S, 111.2 E): not land
    crs = f"EPSG:{epsg}"
    h, w = shape
    transform = from_origin(x0, y0, pixel, pixel)
    cols, rows = np.meshgrid(np.arange(w) + 0.5, np.arange(h) + 0.5)
    dx, dy = cols * pixel, rows * pixel
    x, y = x0 + dx, y0 - dy
    wm, hm = w * pixel, h * pixel

    wt = 0.4 + 0.6 * dx / wm + 0.08 * np.sin(dy / 90.0)  # water-table depth [m], positive down
    residual = 0.06 * _wave_field(rng, 40.0, 150.0)(dx, dy)
    centres = [(0.10, 0.25), (0.10, 0.72), (0.27, 0.45), (0.36, 0.80), (0.46, 0.22),
               (0.55, 0.62), (0.66, 0.30), (0.75, 0.75), (0.88, 0.22), (0.90, 0.68)]
    gap = ("s06", "s07")  # (0.55, 0.62) and (0.66, 0.30): water table about 0.73-0.80 m
    ids = [f"s{i + 1:02d}" for i in range(len(centres))]
    polys = [shapely.Point(x0 + fx * wm, y0 - fy * hm).buffer(rng.uniform(55.0, 80.0)) for fx, fy in centres]
    scale = 1.0 + rng.normal(0.0, scar_sd, len(polys))
    depth = np.zeros(shape)
    which = np.full(shape, -1)
    for i, (poly, k) in enumerate(zip(polys, scale)):
        inside = shapely.contains_xy(poly, x, y)
        which[inside] = i
        f = 0.8 * (1.0 - np.exp(-np.maximum(wt - 0.3, 0.0) / 0.45))
        depth[inside] = np.maximum(k * f[inside] + residual[inside], 0.0)
    pre = _terrain(dx, dy) + rng.normal(0.0, noise, shape)
    post = _terrain(dx, dy) - depth + offset + rng.normal(0.0, noise, shape)
    gap_box = shapely.union_all([polys[ids.index(g)] for g in gap]).envelope.buffer(20.0)
    post[shapely.contains_xy(gap_box, x, y)] = np.nan
    for name, arr in (("pre.tif", pre), ("post.tif", post), ("wt.tif", wt), ("thickness.tif", np.full(shape, 4.0))):
        _write_raster(folder / name, arr, crs, transform)
    gpd.GeoDataFrame({"scar": ids}, geometry=polys, crs=crs).to_file(folder / "scars.gpkg", layer="scars",
                                                                     driver="GPKG")
    bd, cf = 0.1, 0.55
    carbon = {sid: float(depth[which == i].sum() * pixel * pixel * bd * 1000.0 * cf / 1000.0)
              for i, sid in enumerate(ids)}
    (folder / "config.toml").write_text(f"""[run]
name = "validation water-table scene"
year = 2030

[burned_area]
path = "scars.gpkg"

[depth.survey]
pre = "pre.tif"
post = "post.tif"
interval_years = 1.0
subsidence_rate = "0 m/yr"
stable_buffer_m = 15

[depth.water_table]
depth = "wt.tif"
model = "fit"

{_peat_and_factors_toml(bd, cf)}
[[zones]]
path = "scars.gpkg"
id = "scar"
name = "scars"

[uncertainty]
draws = 0
""", encoding="utf-8")
    return {"config": folder / "config.toml", "carbon_t": carbon, "gap": gap}


def _water_table_rows():
    import peatburn

    with tempfile.TemporaryDirectory(prefix="peatburn_validation_") as tmp:
        truth = synthetic_water_table_scene(Path(tmp) / "scene")
        result = peatburn.run(truth["config"], Path(tmp) / "out", overwrite=True)
    model = result.totals["water_table_model"]["all"]
    cv = float(model["cv_rmse"])
    est = {r["zone"]: r for r in result.zones if r["layer"] == "scars"}
    src = "synthetic truth (invented scene, saturating depth, scar-level error)"
    rows = []
    for sid in truth["gap"]:
        true_c = truth["carbon_t"][sid]
        rows.append(_row(
            "synthetic_water_table", f"carbon of scar {sid}, which no survey covers", src, true_c,
            "synthetic truth", est[sid]["carbon_smouldering_t"], 2 * cv * true_c, "t C",
            f"tolerance: twice the tool's own leave-scar-out error ({100 * cv:.1f} % RMSE over "
            f"{model['cv_n_scars']} surveyed scars): does the stated error cover the realised one?"))
    true_sum = sum(truth["carbon_t"][g] for g in truth["gap"])
    rows.append(_row(
        "synthetic_water_table", "carbon of the two unsurveyed scars together", src, true_sum, "synthetic truth",
        sum(est[g]["carbon_smouldering_t"] for g in truth["gap"]), 2 * cv * true_sum, "t C",
        "tolerance: twice the leave-scar-out RMSE (conservative for a sum: scar errors partly cancel)"))
    return rows


# ------------------------------------------------------------------------------------------
# synthetic Tier 1 scene (geographic coordinates)


def synthetic_tier1_scene(folder, *, pixel_deg=0.0002, lon0=80.0, lat0=-45.0, shape=(300, 360)) -> dict:
    """Write an invented Tier-1-only scene on a lon/lat grid and its ``config.toml``; return the truth.

    Two irregular scars (one with an unburned hole) in the open southern Indian Ocean (45 S, 80 E:
    not land, where a degree of longitude is 0.71 of one of latitude). The truth is the geodesic area
    of the polygons on the WGS 84 ellipsoid (pyproj ``Geod.geometry_area_perimeter``) and the
    a-priori tolerance of the pixel-centre rule (see :func:`_synthetic_tier1_rows`).
    """
    import geopandas as gpd
    import shapely
    from pyproj import Geod
    from rasterio.transform import from_origin

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    h, w = shape
    transform = from_origin(lon0, lat0, pixel_deg, pixel_deg)
    wd, hd = w * pixel_deg, h * pixel_deg

    def at(fx, fy):
        return (lon0 + fx * wd, lat0 - fy * hd)

    star = shapely.Polygon([at(0.08, 0.30), at(0.22, 0.12), at(0.31, 0.27), at(0.46, 0.16), at(0.41, 0.43),
                            at(0.52, 0.61), at(0.33, 0.58), at(0.21, 0.83), at(0.17, 0.55), at(0.05, 0.47)])
    outer = shapely.Polygon([at(0.58, 0.21), at(0.93, 0.09), at(0.88, 0.57), at(0.71, 0.90), at(0.61, 0.66)])
    hole = shapely.Polygon([at(0.70, 0.35), at(0.79, 0.31), at(0.77, 0.52), at(0.68, 0.49)])
    ring = outer.difference(hole)
    crs = "EPSG:4326"
    gpd.GeoDataFrame({"scar": ["S", "R"]}, geometry=[star, ring], crs=crs).to_file(
        folder / "scars.gpkg", layer="scars", driver="GPKG")
    _write_raster(folder / "thickness.tif", np.full(shape, 3.0), crs, transform)

    geod = Geod(ellps="WGS84")
    area_m2, perimeter_m, n_edge = 0.0, 0.0, 0.0
    lat_mid = math.radians(lat0 - hd / 2)
    # pixel sides [m] at the scene's middle latitude (a sphere of 6371 km is enough for a tolerance)
    px_x = math.radians(pixel_deg) * 6_371_000.0 * math.cos(lat_mid)
    px_y = math.radians(pixel_deg) * 6_371_000.0
    for g in (star, ring):
        a, per = geod.geometry_area_perimeter(g)
        area_m2 += abs(a)
        perimeter_m += per
    # pixels cut by an edge: at most perimeter / (shorter side) x sqrt(2) for edges at any angle
    n_edge = perimeter_m / min(px_x, px_y) * math.sqrt(2.0)
    (folder / "config.toml").write_text(f"""[run]
name = "validation Tier 1 scene"
year = 2030

[burned_area]
path = "scars.gpkg"

{_peat_and_factors_toml(0.1, 0.55)}
[uncertainty]
draws = 0
""", encoding="utf-8")
    return {"config": folder / "config.toml", "area_ha": area_m2 / 1e4, "perimeter_m": perimeter_m,
            "pixel_area_m2": px_x * px_y, "n_edge": n_edge}


def _synthetic_tier1_rows():
    import peatburn

    with tempfile.TemporaryDirectory(prefix="peatburn_validation_") as tmp:
        truth = synthetic_tier1_scene(Path(tmp) / "scene")
        result = peatburn.run(truth["config"], Path(tmp) / "out", overwrite=True)
    total = result.total
    # the pixel-centre rule counts a pixel cut by an edge wholly or not at all: an error of at most
    # one pixel area each, about uniformly signed along irregular edges: 3 SD of the sum of n_edge
    # independent errors of SD pixel/sqrt(12) (uniform on +-1/2 pixel), plus 0.1 % for the pixel areas
    # (a geodesic pixel area against the ellipsoid's polygon area)
    tol_ha = (3 * truth["pixel_area_m2"] * math.sqrt(truth["n_edge"] / 12.0)) / 1e4 + 1e-3 * truth["area_ha"]
    area = truth["area_ha"]
    src = "synthetic truth (invented scene); pyproj geodesic area (Karney 2013)"
    fuel = IPCC2013_FUEL_T_PER_HA
    ef = {"co": 210.0, "ch4": 21.0}  # the set smouldering_ipcc2013_wetlands (recalled, unchecked)
    rows = [_row("synthetic_tier1", "burned area of two irregular scars on a lon/lat grid", src, area,
                 "synthetic truth", total["burned_area_ha"], tol_ha, "ha",
                 f"tolerance: 3 SD of the pixel-centre rule over about {truth['n_edge']:.0f} edge pixels "
                 "+ 0.1 % for pixel areas")]
    for gas, label in (("co", "CO"), ("ch4", "CH4")):
        pub = area * fuel * ef[gas] * 1e-3
        rows.append(_row("synthetic_tier1", f"{label} from Tier 1 over the same scars", src, pub,
                         "synthetic truth × hand formula (353 t/ha, recalled)", total[f"{gas}_smouldering_t"],
                         tol_ha * fuel * ef[gas] * 1e-3, f"t {label}",
                         f"area × 353 t d.m./ha × {ef[gas]:g} g/kg × 10⁻³; tolerance: that of the area"))
    return rows


# ------------------------------------------------------------------------------------------
# public


def build_rows(*, synthetic: bool = True) -> list[dict]:
    """All validation rows, in page order (see the module docstring for the keys).

    Parameters
    ----------
    synthetic : bool
        Include the synthetic-truth rows (they run the tool end to end on a small scene, a few
        seconds).
    """
    rows = (_page2002_rows() + _ballhorn2009_rows(_spread_rows() if synthetic else ())
            + _graham2022_rows() + _agus2012_rows() + _tier1_rows() + _factor_set_rows())
    if synthetic:
        rows += _synthetic_rows() + _water_table_rows() + _synthetic_tier1_rows()
    return rows + _smoke_rows()


def _fmt(v: float, ref: float | None = None) -> str:
    if v is None or not math.isfinite(v):
        return "–"
    scale = max(abs(ref), 1.0) if ref is not None and math.isfinite(ref) else max(abs(v), 1.0)
    if abs(v) < 1e-9 * scale:
        return "0"
    return f"{v:.5g}"


def _fmt_rel(diff: float, ref: float) -> str:
    if not (math.isfinite(diff) and math.isfinite(ref)) or ref == 0:
        return "–"
    rel = 100.0 * diff / abs(ref)
    if abs(rel) < 0.005:
        return "0.00 %"
    return f"{rel:+.2f} %"


def _headline(rows: list[dict]) -> list[str]:
    out = ["| kind | what agreement shows | what it does not show | rows | agree | differ | rest on recalled values |",
           "| --- | --- | --- | --- | --- | --- | --- |"]
    sentence = []
    for kind, (title, shows, not_shows) in KINDS.items():
        sub = [r for r in rows if r["kind"] == kind]
        n_ok = sum(r["status"] == "agrees" for r in sub)
        n_bad = sum(r["status"] == "DIFFERS" for r in sub)
        n_rec = sum(_rests_on_recalled(r["published_status"]) for r in sub)
        out.append(f"| {title} | {shows} | {not_shows} | {len(sub)} | {n_ok} | {n_bad} | {n_rec} |")
        if sub:
            sentence.append(f"{title}: {n_ok} of {len(sub)} agree" + (f", {n_bad} differ" if n_bad else ""))
    text = "; ".join(sentence)
    return ["**" + text[:1].upper() + text[1:] + ".**", ""] + out + [""]


#: What no row of this page tests, and what a user should do before relying on the numbers.
NOT_VALIDATED = [
    "**The survey route against real paired surveys.** No public pair of pre- and post-fire "
    "bare-earth surveys of a tropical peat fire with field-measured burn depths is available here; "
    "the survey rows are synthetic (invented rasters). Real surveys add vegetation and canopy "
    "artefacts, water on the burned surface, ground-class errors of the filter and ash, none of "
    "which the synthetic scenes contain.",
    "**The water-table model against field burn depths.** No checked pairs of (fire-time water "
    "table, measured burn depth) from a publication could be consulted here, neither for first "
    "nor for repeat fires; the default line (docs/water_table.md) is a construction, and its "
    "only check, Ballhorn et al. 2009's mean depth, is a consistency check that needs an assumed "
    "water table. The water-table rows above are synthetic (one scene, two unsurveyed scars).",
    "**The calibration of the Monte Carlo intervals on scenes with error structures other than "
    "the model's own.** No row here yet: the coverage test of docs/uncertainty.md uses the model's "
    "own (spherical, normal) survey error; tests/science/test_zone_error_calibration.py compares "
    "the predicted spread of zone means with the realised one on several error structures at the "
    "level of the science functions (a long-range error breaks the one-range model there), not in "
    "a run. The leave-scar-out error is tested above on one scene only.",
    "**The IPCC Tier 1 default itself** (353 t d.m./ha, recalled, unchecked): the Tier 1 rows check "
    "the arithmetic and the areas, not whether 353 t/ha fits a given fire.",
    "**Bulk density, carbon fraction and their maps**: only the product ρ_b × f_C is checked "
    "(Agus et al. 2012, a consistency check of means); maps of them are not validated.",
    "**The flaming (above-ground) route**: no row compares FRE- or biomass-based flaming emissions "
    "with a measured fire.",
    "**Gases other than CO2, CO and CH4** (PM2.5 only where a set is not from the campaign that "
    "measured it), and emission factors from recalled tables (Akagi et al. 2011, IPCC 2006 and "
    "2013, the 2015 Kalimantan field set): their values are recalled, unchecked; the smoke rows "
    "above show that the recalled CH4 factors of two sets are about three times a checked field "
    "measurement.",
]

BEFORE_RELYING = (
    "Before relying on the numbers for a region: measure burn depth in the field on a sample of "
    "burned plots (with the fire-time water table where the water-table route is used) and give "
    "them to the run (`[depth.plots]`); the run reports, for every depth method, the bias and RMSE "
    "against those plots (`totals.json`, the report). That comparison is the validation that "
    "counts for your fires; this page cannot replace it. Estimates carry uncertainty and are not "
    "legal findings; enforcement and national reporting follow the country's own procedures and "
    "field verification; burnt peat is dangerous ground for field crews (hidden smouldering, "
    "collapse)."
)


def render_markdown(rows: list[dict]) -> str:
    """The validation page (Markdown) for ``rows`` from :func:`build_rows`."""
    out = [
        "# Validation: what was checked, against what, and what was not",
        "",
        "<!-- Generated by `python -m peatburn.validation`; do not edit by hand. "
        "tests/test_validation.py fails when this page differs from what the script renders. -->",
        "",
        "Each row compares a number of peatburn with a number from outside the code: hand arithmetic, "
        "a publication, a synthetic truth or a field measurement. *Published* is the publication's "
        "number, hand arithmetic on published numbers written out in `peatburn/validation.py`, or the "
        "truth an invented scene was made from; none is produced by peatburn. Its status says whether "
        "it was checked against the publication or is recalled from memory (see "
        "[sources.md](sources.md)). *Difference* is peatburn − published; a row *agrees* when "
        "|difference| ≤ tolerance, and the note says where the tolerance comes from.",
        "",
        "Rows are of four kinds, and they show very different things: most rows are arithmetic "
        "identities, which only show that the code does the sum it says. Only the independent "
        "measurements compare the tool with something it was not built from, and where they differ "
        "the page says so (a difference there is a finding about the inputs, not a failure of the code).",
        "",
    ] + _headline(rows)
    order = list(GROUPS)
    for g in dict.fromkeys(r["group"] for r in rows):
        if g not in order:
            order.append(g)
    for g in order:
        grp = [r for r in rows if r["group"] == g]
        if not grp:
            continue
        title, text = GROUPS.get(g, (g, ""))
        out += [f"## {title}", ""]
        if text:
            out += [text, ""]
        out += ["| check | kind | source | published | published is | peatburn | difference | tolerance | unit "
                "| result | note |",
                "| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |"]
        for r in grp:
            diff = f"{_fmt(r['difference'], r['published'])} ({_fmt_rel(r['difference'], r['published'])})"
            result = {"agrees": "agrees", "DIFFERS": "**DIFFERS**"}.get(r["status"], r["status"])
            cells = [r["check"], KINDS[r["kind"]][0], r["source"], _fmt(r["published"]), r["published_status"],
                     _fmt(r["tool"]), diff, _fmt(r["tolerance"]), r["unit"], result, r["note"]]
            out.append("| " + " | ".join(str(c).replace("|", "\\|") for c in cells) + " |")
        out.append("")
    out += ["## What is not validated", ""]
    out += [f"- {item}" for item in NOT_VALIDATED]
    out += ["", BEFORE_RELYING, ""]
    return "\n".join(out)


DEFAULT_OUT = Path(__file__).resolve().parent.parent / "docs" / "validation.md"


def main(argv=None) -> int:
    """Write the validation page; ``python -m peatburn.validation [--out PATH]``."""
    parser = argparse.ArgumentParser(prog="python -m peatburn.validation",
                                     description="Write docs/validation.md: published figures beside peatburn's.")
    parser.add_argument("--out", type=Path, default=DEFAULT_OUT, help=f"output file (default: {DEFAULT_OUT})")
    args = parser.parse_args(argv)
    rows = build_rows()
    text = render_markdown(rows)
    args.out.parent.mkdir(parents=True, exist_ok=True)
    tmp = args.out.with_name(args.out.name + ".tmp")
    tmp.write_text(text, encoding="utf-8")
    tmp.replace(args.out)
    bad = [r for r in rows if r["status"] == "DIFFERS" and r["kind"] in CODE_KINDS]
    findings = [r for r in rows if r["status"] == "DIFFERS" and r["kind"] not in CODE_KINDS]
    checks = [r for r in rows if r["kind"] in CODE_KINDS]
    print(f"{args.out}: {len(checks) - len(bad)} of {len(checks)} checks of the code agree; "
          f"{len(findings)} independent comparisons differ (findings, shown on the page)")
    for r in bad:
        print(f"  DIFFERS: {r['group']}: {r['check']}: published {r['published']}, tool {r['tool']}")
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
