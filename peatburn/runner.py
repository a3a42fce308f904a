"""Run a configuration end to end and write the outputs of the run contract.

open inputs -> co-register the surveys -> plan -> blocks (any executor) -> sums -> tables,
rasters, provenance, report. Every file is written atomically.
"""

from __future__ import annotations

import math
import shutil
from dataclasses import dataclass, field
from pathlib import Path

from . import __version__
from .config import RunConfig
from .errors import OutputExistsError
from .executors import map_blocks
from .factors import load_factor_set, load_gwp_set
from .io.writers import BlockRasterWriter, write_csv, write_json
from .outputs import provenance, tables
from .pipeline import Sums, build_plan, coregister, open_inputs, process_block

CAUTIONS = [
    "These are estimates with uncertainty, not measurements and not legal findings.",
    "Enforcement and national reporting follow the country's own procedures and field verification.",
    "Burnt and smouldering peat is dangerous ground (hidden burning below a crust, collapse, smoke): "
    "field checks follow local safety practice.",
]


@dataclass
class RunResult:
    """What a run produced."""

    out_dir: Path
    zones: list[dict]
    totals: dict
    qa: dict
    files: dict = field(default_factory=dict)

    @property
    def total(self) -> dict:
        return self.zones[-1]


def prepare_out_dir(out_dir: Path, overwrite: bool) -> None:
    out_dir = Path(out_dir)
    if out_dir.exists() and any(out_dir.iterdir()):
        if not overwrite:
            raise OutputExistsError(f"output folder {out_dir} exists and is not empty; choose another --out "
                                    f"or pass --overwrite")
    out_dir.mkdir(parents=True, exist_ok=True)


def run(cfg: RunConfig, out_dir, *, overwrite: bool = False, workers: int = 1, progress=None) -> RunResult:
    """Run ``cfg`` and write zones.csv, totals.json, inventory.csv, burn_depth.tif,
    carbon_smouldering.tif, provenance.json and report.html into ``out_dir``.
    """
    out_dir = Path(out_dir)
    prepare_out_dir(out_dir, overwrite)
    smouldering = load_factor_set(cfg.factors.smouldering, "smouldering")
    flaming = load_factor_set(cfg.factors.flaming, "flaming")
    gwp = load_gwp_set(cfg.factors.gwp)

    inputs = open_inputs(cfg)
    alignment = coregister(inputs)
    plan = build_plan(inputs, alignment)
    grid = plan.grid
    windows = grid.windows(cfg.block_size)
    sums = Sums.empty(plan)
    with BlockRasterWriter(out_dir / "burn_depth.tif", grid, description="burn depth", units="m",
                           block_size=cfg.block_size) as wd, \
            BlockRasterWriter(out_dir / "carbon_smouldering.tif", grid, description="carbon burned below ground",
                              units="kg C m-2", block_size=cfg.block_size) as wc:
        for i, r in enumerate(map_blocks(process_block, plan, windows, workers)):
            sums.add(r)
            wd.write(r.window, r.depth)
            wc.write(r.window, r.carbon_density)
            if progress:
                progress(i + 1, len(windows))

    rows = tables.zone_rows(sums, smouldering, gwp)
    total = rows[-1]
    qa = qa_summary(sums.total, alignment)
    notes = list(inputs.notes)
    checks = factor_checks(smouldering, sums.total)
    if checks["carbon_closure"] is not None and checks["carbon_closure"] > 1.0:
        notes.append(f"emission factors: the set {smouldering.name} puts {checks['carbon_closure']:.3f} times the "
                     f"fuel's carbon into CO2+CO+CH4 at this run's carbon fraction "
                     f"({checks['effective_carbon_fraction']:.3f}); its gases overstate the carbon burned")
    totals = {
        "run": cfg.name, "year": cfg.year, "tool_version": __version__,
        "quantities": {k: {"value": total[k], "unit": tables.UNITS[k]} for k in tables.ZONE_COLUMNS[2:]},
        "method": {
            "depth": {"survey": {"share_of_carbon": 1.0 if total["carbon_smouldering_t"] else 0.0,
                                 "area_ha": total["estimated_area_ha"],
                                 "tier": "Tier 3 (measured burn depth, IPCC 2013 Wetlands Supplement Ch. 2 terms)"},
                      "unestimated_area_ha": total["unestimated_area_ha"]},
            "smouldering_factors": smouldering.name,
            "smouldering_factor_checks": checks,
            "flaming": "not estimated by this version (columns are zero)",
            "gwp": gwp.name,
            "uncertainty": "no Monte Carlo intervals in this version",
        },
        "qa": qa,
        "notes": notes,
        "cautions": CAUTIONS,
    }
    files = {}
    files["zones"] = write_csv(out_dir / "zones.csv", rows, tables.ZONE_COLUMNS)
    files["totals"] = write_json(out_dir / "totals.json", totals)
    files["inventory"] = write_csv(out_dir / "inventory.csv",
                                   tables.inventory_rows(total, cfg.year, smouldering, gwp),
                                   ["year", "phase", "gas", "emissions_gg"])
    prov = provenance.build(cfg, grid, alignment, smouldering, flaming, gwp,
                            extra={"qa": qa, "outputs": sorted(["zones.csv", "totals.json", "inventory.csv",
                                                                "burn_depth.tif", "carbon_smouldering.tif",
                                                                "report.html"])})
    files["provenance"] = write_json(out_dir / "provenance.json", prov)
    result = RunResult(out_dir, rows, totals, qa, files)
    from .outputs import report

    files["report"] = report.write_report(out_dir / "report.html", result, cfg, prov, smouldering, gwp)
    files["burn_depth"] = out_dir / "burn_depth.tif"
    files["carbon_smouldering"] = out_dir / "carbon_smouldering.tif"
    return result


def factor_checks(factor_set, total: dict) -> dict:
    """MCE of the set and its carbon closure at the run's effective carbon fraction (carbon / dry mass)."""
    from .science import gases

    ef = factor_set.ef
    mce = float(gases.modified_combustion_efficiency(ef["co2"], ef["co"])) if "co" in ef else None
    f = total["carbon_kg"] / total["peat_kg"] if total["peat_kg"] > 0 else None
    closure = float(gases.carbon_closure(ef, f)) if f and 0 < f <= 1 else None
    return {"mce": mce, "effective_carbon_fraction": f, "carbon_closure": closure,
            "carbon_in_gases_g_per_kg": float(gases.carbon_in_emissions(ef))}


def qa_summary(total: dict, alignment) -> dict:
    est = total["estimated_area_m2"]
    burned = total["burned_area_m2"]
    return {
        **alignment.to_dict(),
        "share_of_estimated_area_below_lod": total["below_lod_area_m2"] / est if est else math.nan,
        "share_of_burned_area_unestimated": total["unestimated_area_m2"] / burned if burned else math.nan,
        "share_of_estimated_area_capped_by_thickness": total["capped_area_m2"] / est if est else math.nan,
    }
