"""The validation table: published figures the tool can reproduce, beside the tool's numbers.

:func:`build_rows` calls peatburn's science functions (and, for the synthetic-truth rows, the
public API :func:`peatburn.run`) on the inputs of each published figure and returns one row per
check. :func:`render_markdown` turns the rows into ``docs/validation.md``;
``python -m peatburn.validation [--out PATH]`` writes it. ``tests/test_validation.py`` runs the
builder, asserts that every row agrees within its stated tolerance, and that the page in the
repository equals what this module renders now.

A row is a dict::

    group             section of the page the row belongs to (see GROUPS)
    check             what is compared
    source            the publication (authors, year, journal, table or page)
    published         the reference value [unit]
    published_status  "checked (...)", "recalled, unchecked", "derived (...)" or "synthetic truth"
    tool              peatburn's value for the same quantity [unit]
    difference        tool - published [unit]
    tolerance         largest |difference| accepted [unit], justified in ``note``
    unit              unit of published, tool, difference and tolerance
    status            "agrees" when |difference| <= tolerance, else "DIFFERS"
    note              why the tolerance is what it is; caveats

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

__all__ = ["GROUPS", "build_rows", "render_markdown", "main", "synthetic_survey_scene"]

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
        "Uncertainty proportional to that of the burn depth (Ballhorn et al. 2009)",
        "Ballhorn et al. 2009 (PNAS 106:21213, abstract, checked): mean burn depth 0.33 ± 0.18 m, "
        "carbon 49.15 ± 26.81 Mt C. Carbon is linear in depth, so its relative uncertainty equals the "
        "depth's: 26.81 / 49.15 = 0.54547 against 0.18 / 0.33. The tool value is the relative change "
        "of `carbon_mass(peat_dry_mass(d, ρ_b, A), f_C)` when d goes from 0.33 to 0.51 m.",
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

#: Ballhorn et al. 2009 (PNAS 106:21213), abstract (checked).
BALLHORN_DEPTH_M, BALLHORN_DEPTH_SD_M = 0.33, 0.18
BALLHORN_CARBON_MT, BALLHORN_CARBON_SD_MT = 49.15, 26.81
#: Derived: 26.81 / 49.15 = 0.545473.
BALLHORN_RELATIVE = 0.545473

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


def _row(group, check, source, published, published_status, tool, tolerance, unit, note=""):
    published = float(published)
    tool = float(tool)
    diff = tool - published
    ok = bool(np.isfinite(diff) and abs(diff) <= tolerance)
    return {
        "group": group, "check": check, "source": source,
        "published": published, "published_status": published_status,
        "tool": tool, "difference": diff, "tolerance": float(tolerance), "unit": unit,
        "status": "agrees" if ok else "DIFFERS", "note": note,
    }


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


def _ballhorn2009_rows():
    a = 1e6  # any area [m2]: the ratio does not depend on it
    c0 = _carbon_t(BALLHORN_DEPTH_M, 0.1, 0.55, a)
    c1 = _carbon_t(BALLHORN_DEPTH_M + BALLHORN_DEPTH_SD_M, 0.1, 0.55, a)
    return [_row(
        "ballhorn2009", "relative uncertainty of carbon from that of depth (0.18 / 0.33 m)",
        "Ballhorn et al. 2009, PNAS 106:21213, abstract", BALLHORN_RELATIVE,
        "derived (26.81 / 49.15 Mt C, checked)", (c1 - c0) / c0, 2e-4, "–",
        "tolerance: rounding of 26.81 and 49.15 to 0.01 Mt (about 1e-4 relative each)")]


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


# ------------------------------------------------------------------------------------------
# synthetic scene


def synthetic_survey_scene(folder, *, shape=(140, 180), pixel=2.0, noise=0.05, offset=0.35,
                           shift=(1.3, -0.8), subsidence=0.03, interval=3.0, depth=0.4, seed=7) -> dict:
    """Write a small invented survey scene and its ``config.toml`` into ``folder``; return the truth.

    The terrain is analytic with ripples of 20-90 m wavelength (slopes in every aspect, which the
    co-registration needs). The post-fire survey sees the ground shifted by ``shift`` [m] (its pixel
    at (x, y) shows the ground at (x - sx, y - sy)), lowered by ``subsidence * interval`` and by the
    burn, raised by the datum ``offset`` [m], plus Gaussian noise. Scar A is a rectangle burned to
    ``depth`` with a 10 m unburned island inside the mapped polygon; scar B is a disc burned to
    1.5 ``depth`` of which the east part lies on 0.2 m of peat, so the burn there is capped at 0.2 m.

    Returns
    -------
    dict
        ``config`` (path), ``carbon_t`` (true carbon burned [t]), ``volume_m3``, ``shift``,
        ``offset``, ``noise``, ``tolerance_rel`` (the a-priori bound of the relative error, see
        :func:`_synthetic_rows`), and the quantities it is made from.
    """
    import geopandas as gpd
    import rasterio
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
        return (8.0 + 0.004 * (xx - x0) - 0.002 * (yy - y0)
                + 0.6 * np.sin((xx - x0) / 14.0) * np.cos((yy - y0) / 11.0)
                + 0.4 * np.sin((xx - x0 + yy - y0) / 9.0))

    scar_a = shapely.box(x0 + 0.10 * wm, y0 - 0.80 * hm, x0 + 0.45 * wm, y0 - 0.20 * hm)
    island = shapely.Point(x0 + 0.27 * wm, y0 - 0.5 * hm).buffer(10.0)
    scar_b = shapely.Point(x0 + 0.72 * wm, y0 - 0.5 * hm).buffer(0.17 * wm)
    thin_x = x0 + 0.78 * wm
    thin_m, thick_m = 0.2, 4.0
    depth_b = 1.5 * depth

    def true_depth(xx, yy):
        in_a = shapely.contains_xy(scar_a, xx, yy) & ~shapely.contains_xy(island, xx, yy)
        in_b = shapely.contains_xy(scar_b, xx, yy)
        thick = np.where(xx > thin_x, thin_m, thick_m)
        return np.minimum(np.where(in_a, depth, 0.0) + np.where(in_b, depth_b, 0.0), thick)

    sx, sy = shift
    pre = terrain(x, y) + rng.normal(0, noise, shape)
    post = (terrain(x - sx, y - sy) - true_depth(x - sx, y - sy) - subsidence * interval + offset
            + rng.normal(0, noise, shape))
    thickness = np.where(x > thin_x, thin_m, thick_m)

    def write(name, arr):
        with rasterio.open(folder / name, "w", driver="GTiff", width=w, height=h, count=1, dtype="float32",
                           crs=f"EPSG:{epsg}", transform=transform, nodata=-9999.0, tiled=True,
                           blockxsize=64, blockysize=64) as ds:
            ds.write(arr.astype("float32"), 1)

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

[peat]
thickness = "thickness.tif"
bulk_density = "{bd} g/cm^3"
carbon_fraction = {cf}

[emission_factors]
smouldering = "smouldering_ipcc2013_wetlands"
gwp = "AR6"

[uncertainty]
draws = 0
""", encoding="utf-8")
    return {"config": folder / "config.toml", "carbon_t": carbon_t, "volume_m3": volume, "shift": shift,
            "offset": offset, "noise": noise, "tolerance_rel": tolerance_rel, "n_burned": int(burned.sum()),
            "bulk_density": bd, "carbon_fraction": cf}


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
    rows = (_page2002_rows() + _ballhorn2009_rows() + _graham2022_rows() + _agus2012_rows() + _tier1_rows()
            + _factor_set_rows())
    if synthetic:
        rows += _synthetic_rows()
    return rows


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


def render_markdown(rows: list[dict]) -> str:
    """The validation page (Markdown) for ``rows`` from :func:`build_rows`."""
    n_ok = sum(r["status"] == "agrees" for r in rows)
    out = [
        "# Validation: published figures beside peatburn's numbers",
        "",
        "<!-- Generated by `python -m peatburn.validation`; do not edit by hand. "
        "tests/test_validation.py fails when this page differs from what the script renders. -->",
        "",
        "Each row runs peatburn's science functions (or, for the synthetic-truth rows, the whole tool) on "
        "the inputs of a published figure and compares the result with the figure. *Published* is the "
        "publication's number, or hand arithmetic on published numbers written out in "
        "`peatburn/validation.py`; none is produced by peatburn. Its status says whether it was checked "
        "against the publication or is recalled from memory (see [sources.md](sources.md)). "
        "*Difference* is peatburn − published; a row *agrees* when |difference| ≤ tolerance, and the "
        "note says where the tolerance comes from.",
        "",
        f"**{n_ok} of {len(rows)} rows agree.**",
        "",
        "Not yet here: synthetic-truth rows for burn depth from the water table and for the IPCC Tier 1 "
        "depth method.",
        "",
    ]
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
        out += ["| check | source | published | published is | peatburn | difference | tolerance | unit | result | note |",
                "| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |"]
        for r in grp:
            diff = f"{_fmt(r['difference'], r['published'])} ({_fmt_rel(r['difference'], r['published'])})"
            cells = [r["check"], r["source"], _fmt(r["published"]), r["published_status"],
                     _fmt(r["tool"]), diff, _fmt(r["tolerance"]), r["unit"],
                     "agrees" if r["status"] == "agrees" else "**DIFFERS**", r["note"]]
            out.append("| " + " | ".join(str(c).replace("|", "\\|") for c in cells) + " |")
        out.append("")
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
    bad = [r for r in rows if r["status"] != "agrees"]
    print(f"{args.out}: {len(rows) - len(bad)} of {len(rows)} rows agree")
    for r in bad:
        print(f"  DIFFERS: {r['group']}: {r['check']}: published {r['published']}, tool {r['tool']}")
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
