"""``peatburn check`` as a library function: validate a configuration and its inputs and say what a
run would do, without reading any pixel beyond the checks (issue 25 item 3).

The CLI (``peatburn/cli/check.py``) prints :attr:`CheckReport.lines`; a notebook reads the fields.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field


@dataclass
class CheckReport:
    """What :func:`check` found: the configuration, the run grid, the raster inputs as inspected,
    the notes, and the report's lines as ``peatburn check`` prints them."""

    config: object
    grid: object
    rasters: dict
    notes: list
    lines: list = field(default_factory=list)
    against: str | None = None
    #: with ``against``: one line per input that no longer matches (empty: all match)
    mismatches: list = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not self.mismatches

    def __str__(self) -> str:
        return "\n".join(self.lines)


def check(config, against=None, *, strict: bool = True) -> CheckReport:
    """Validate ``config`` (a :class:`peatburn.RunConfig` or a path to a TOML file) and its inputs.

    Parameters
    ----------
    config : RunConfig or path
    against : path, optional
        A provenance.json: are the inputs still the files it records (every tile of a mosaic too)?
    strict : bool
        Raise :class:`peatburn.errors.ProvenanceMismatch` when they are not (default); False puts the
        findings in :attr:`CheckReport.mismatches` instead.

    Raises
    ------
    PeatburnError
        Any problem a run would meet before its block pass (one-line message).
    """
    from ..config import RunConfig, load_config
    from ..depth_methods import METHOD_CODES as code
    from ..factors import load_factor_set, load_gwp_set, require_gases
    from ..names import printable
    from ..outputs.provenance import compare_inputs, mismatch_error
    from .inputs import open_inputs

    cfg = config if isinstance(config, RunConfig) else load_config(config)
    sm = require_gases(load_factor_set(cfg.factors.smouldering, "smouldering"), "smouldering")
    fl = require_gases(load_factor_set(cfg.factors.flaming, "flaming"), "flaming")
    gwp = load_gwp_set(cfg.factors.gwp)
    inputs = open_inputs(cfg)
    g = inputs.grid
    out = []
    out.append(f"run: {cfg.name}")
    out.append(f"grid: {g.width} x {g.height} px of {g.res[0]:g} x {g.res[1]:g} in {g.crs.to_string()}; "
               f"{len(g.windows(cfg.block_size))} blocks of {cfg.block_size} px")
    for key, info in inputs.rasters.items():
        aligned = "on grid" if (info.crs == g.crs and info.transform == g.transform) else "warped onto grid"
        out.append(f"raster {key}: {info.path} ({info.width} x {info.height}, nodata {info.nodata}, {aligned})")
    kind = "fires labelled in the raster mask" if inputs.burn_mask is not None else "polygons from"
    out.append(f"burn scars: {len(inputs.scars.frame)} {kind} {cfg.burned_area}")
    for z, layer, ids in inputs.zones:
        out.append(f"zones {z.name}: {len(ids)} polygons, id field {z.id!r}"
                   f"{'; a dossier per burned zone (dossiers/)' if z.dossiers else ''}")
    if cfg.uncertainty.draws:
        from .intervals import draw_cost

        n_rows = sum(len(ids) + 1 for _, _, ids in inputs.zones) + 1
        seconds, memory = draw_cost(cfg.uncertainty.draws, n_rows)
        out.append(f"uncertainty: {cfg.uncertainty.draws:,} draws x {n_rows:,} zone rows: about {seconds:.0f} s "
                   f"and at most {memory / 2**20:.0f} MiB for the intervals (after the block pass)")
    if cfg.survey is not None:
        sv = cfg.survey
        sub = "raster" if hasattr(sv.subsidence_rate, "path") else sv.subsidence_rate
        stable = "polygons" if sv.stable else f"outside scars buffered by {sv.stable_buffer_m:g} m"
        out.append(f"depth {code['survey']}: two surveys {sv.interval_years:g} yr apart; subsidence {sub}; co-registration on "
                   f"stable ground ({stable})")
    if cfg.water_table is not None:
        wt = cfg.water_table
        src = f"raster {wt.raster.path}" if wt.raster else f"stations {wt.stations} (IDW, power {wt.idw_power:g})"
        if wt.dated_rasters:
            src = (f"{len(wt.dated_rasters)} dated rasters ({wt.dated_rasters[0][1]} to {wt.dated_rasters[-1][1]}; "
                   f"each scar takes the one nearest its fire start within {wt.date_window_days:g} days)")
        out.append(f"depth {code['water_table']}: water-table model ({wt.model}) from {src}")
    if cfg.tier1_only:
        out.append("depth: Tier 1 only (no survey, no water table): the IPCC 2013 Wetlands Supplement default on "
                   "every burned pixel of organic soil")
    else:
        out.append(f"depth {code['tier1']}: IPCC 2013 Wetlands Supplement Tier 1 default where neither gives a depth")
    if cfg.peat.extent is not None:
        out.append(f"peat extent: {cfg.peat.extent} (outside it, and where the thickness is 0: mineral soil, "
                   f"no below-ground emission)")
    if cfg.flaming is not None:
        out.append(f"flaming: {cfg.flaming.method} route")
    out.append(f"smouldering factors: {sm.name} ({sm.citation}); GWP: {gwp.name}")
    out.append(f"flaming factors: {fl.name}; gases reported: smouldering {', '.join(sm.gases)}; "
               f"flaming {', '.join(fl.gases)}")
    for n in inputs.notes:
        out.append(f"note: {printable(n)}")  # notes may quote names from input files
    problems = []
    if against:
        with open(against, encoding="utf-8") as fh:
            record = json.load(fh)
        problems = compare_inputs(record)
        if problems and strict:
            raise mismatch_error(problems)
        if not problems:
            out.append(f"inputs match {against}")
    if not problems:
        out.append("ok: the configuration is valid")
    return CheckReport(cfg, g, dict(inputs.rasters), list(inputs.notes), out, str(against) if against else None,
                       problems)
