"""The vocabulary of a run's sums: depth-method codes, the summed quantities, and the zone
:class:`Sums` the blocks add into."""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from ..depth_methods import METHOD_CODES, METHODS, MINERAL_CODE  # noqa: F401  (the engine's names for them)

if TYPE_CHECKING:
    from .blocks import BlockResult
    from .plan import RunPlan

#: Internal zone layer of the burn scars themselves (per-scar sums for the daily series and years).
SCAR_LAYER = "__scars__"

#: Quantities summed per zone and for the run [m2, m3, kg, kg/m ...].
SUM_KEYS = (
    "burned_area_m2", "estimated_area_m2", "depth_area_m2", "volume_m3", "peat_kg", "carbon_kg",
    "unestimated_area_m2", "below_lod_area_m2", "capped_area_m2",
    # burned mineral soil (thickness 0 or outside the peat extent); ground burned more than once (in the
    # scar layer: each fire's whole area shared with another); survey outliers; filled peat properties
    "mineral_area_m2", "repeat_area_m2", "outlier_area_m2", "rho_filled_area_m2", "cf_filled_area_m2",
    # peat and carbon of pixels whose bulk density or carbon fraction was filled (wider spread)
    "peat_kg_filled", "carbon_kg_filled",
    # water-table-modelled pixels whose water table lies outside the fitted range (clamped to it)
    "wt_extrapolated_area_m2",
    *(f"{k}_{m}" for m in METHODS for k in ("area_m2", "peat_kg", "carbon_kg")),
    # for zone-level Monte Carlo: mass per metre of depth over survey / water-table pixels
    "rho_area_survey", "rho_f_area_survey",
    # A sd^2 over survey pixels when the survey error's spread varies in space (science.error_scale)
    "sd2_area_survey",
    # A s dz/dx and A s dz/dy over survey pixels: a residual shift of local sd s times the zone's mean gradient
    "shift_gx_area_survey", "shift_gy_area_survey",
    # over water-table pixels where the model is not clipped (0 < a + b wt < thickness): there the
    # depth responds linearly to the coefficients (peatburn.science.uncertainty)
    "wt_area", "wt_area_wt", "wt_rho_area", "wt_rho_area_wt", "wt_rho_f_area", "wt_rho_f_area_wt",
    # Tier 1 applied to every burned pixel (side-by-side columns) [kg dry matter, kg C]
    "tier1_all_peat_kg", "tier1_all_carbon_kg",
    # flaming by burned area x biomass [t dry matter available above ground]
    "biomass_t",
)



@dataclass
class Sums:
    """Sums over the run and per zone layer (arrays indexed by bin: 0 unused, 1..n zones, n+1 outside)."""

    total: dict
    layers: list  # (name, ids, {key: array})

    @classmethod
    def empty(cls, plan: RunPlan) -> "Sums":
        return cls({k: 0.0 for k in SUM_KEYS},
                   [(n, ids, {k: np.zeros(len(ids) + 2) for k in SUM_KEYS}) for n, ids, _ in plan.zone_layers])

    def add(self, r: BlockResult):
        for k in SUM_KEYS:
            self.total[k] += r.total[k]
        for (_, _, acc), (present, z) in zip(self.layers, r.zones):
            for k, v in z.items():  # only the quantities not zero in the block, at the bins it touches
                acc[k][present] += v
