"""The depth methods of a run, in one table every consumer reads.

A burned pixel of organic soil takes its burn depth from the first method of
:data:`DEPTH_METHODS` that gives one there (the precedence of ``compute_block``). Each method has
its code in ``depth_method.tif``, its name in the sums, tables and totals (``area_{name}_ha``,
``carbon_share_{name}``...), its label and colour in the report and plots, its configuration
section and inputs, and how it reads in IPCC terms. Adding a method starts here (DEVELOPERS.md,
"Where to put a new ...").

Colours: the Okabe-Ito palette (Okabe & Ito 2008, "Color Universal Design"), as in the report.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class DepthMethod:
    """One depth method.

    Attributes
    ----------
    name : str
        Key in sums, tables and totals (``area_m2_{name}``, ``carbon_share_{name}``).
    code : int
        Its value in ``depth_method.tif`` (uint8; 0 is outside the burned area).
    short : str
        Its words in the raster's description.
    label : str
        Its label in the report's legends and tables.
    colour : str
        Its colour in maps and charts (hex).
    section : str
        Its configuration section.
    inputs : tuple of str
        The configuration keys of its inputs.
    gives_depth : bool
        Whether it gives a burn depth that a field plot can check (Tier 1 gives fuel per hectare).
    tier : str
        How its activity data reads in IPCC terms (totals.json ``method.depth``).
    """

    name: str
    code: int
    short: str
    label: str
    colour: str
    section: str
    inputs: tuple
    gives_depth: bool
    tier: str


#: The depth methods in order of precedence.
DEPTH_METHODS = (
    DepthMethod("survey", 1, "survey", "surveys differenced", "#0072B2",  # Okabe-Ito blue
                "depth.survey", ("depth.survey.pre", "depth.survey.post", "depth.survey.subsidence_rate",
                                 "peat.thickness"), True,
                # IPCC terms: measured activity data with default emission factors is not Tier 3 outright
                # (Tier 3 also needs country-specific factors or models; IPCC 2006 Vol. 1 Ch. 1, recalled)
                "measured activity data with default emission factors: burn depth measured by differencing "
                "two bare-earth surveys"),
    DepthMethod("water_table", 2, "water-table model", "water-table model", "#E69F00",  # Okabe-Ito orange
                "depth.water_table", ("depth.water_table.depth", "depth.water_table.model", "peat.thickness"), True,
                "modelled activity data with default emission factors: burn depth from the water-table "
                "depth, model calibrated on surveys or plots"),
    DepthMethod("tier1", 3, "IPCC Tier 1 default", "IPCC Tier 1 default", "#CC79A7",  # Okabe-Ito reddish purple
                "depth.tier1", ("depth.tier1.fuel_consumption",), False,
                "Tier 1: IPCC 2013 Wetlands Supplement default fuel consumption"),
)

#: name -> method.
BY_NAME = {m.name: m for m in DEPTH_METHODS}
#: name -> code in depth_method.tif.
METHOD_CODES = {m.name: m.code for m in DEPTH_METHODS}
#: The names, in order of precedence.
METHODS = tuple(METHOD_CODES)

#: depth_method.tif code of burned mineral soil (thickness 0 or outside the peat extent): no peat burned.
MINERAL_CODE = 4
MINERAL_COLOUR = "#BBBBBB"
MINERAL_LABEL = "mineral soil (no peat)"


def raster_description() -> str:
    """The band description of depth_method.tif: each code and its method."""
    return "depth method: " + ", ".join(f"{m.code} {m.short}" for m in DEPTH_METHODS)
