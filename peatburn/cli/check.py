from __future__ import annotations

import json

import click

from .options import handle_errors


@click.command("check")
@click.argument("config", type=click.Path(dir_okay=False), required=False)
@click.option("--against", "against", type=click.Path(dir_okay=False, exists=True), default=None,
              help="A provenance.json: tell whether the inputs still match it.")
@click.option("--outputs", "outputs", type=click.Path(file_okay=False), default=None,
              help="A run's output folder: tell whether it is one run's complete, unaltered set (one line per "
                   "missing, altered or extra file; exit status 1 if there is any).")
@handle_errors
def check_cmd(config, against, outputs):
    """Validate CONFIG and its inputs and print what a run would do, without running it; or, with
    --outputs, check an output folder against its SHA256SUMS and provenance.json."""
    if config is None and outputs is None:
        raise click.UsageError("give a CONFIG to check, or --outputs DIR")
    if config is not None:
        _check_config(config, against)
    if outputs is not None:
        _check_outputs(outputs)


def _check_outputs(folder) -> None:
    import sys

    from ..names import printable
    from ..outputs.checksums import check_outputs, describe

    problems = check_outputs(folder)
    for line in problems:
        click.echo(printable(line))  # file names in the folder may hold control characters
    if problems:
        click.echo(f"not one run's complete, unaltered set: {len(problems)} problem(s) in {printable(str(folder))}")
        sys.exit(1)
    click.echo(f"ok: {printable(str(folder))} is one run's complete, unaltered set: {printable(describe(folder))}")


def _check_config(config, against) -> None:
    from ..config import load_config
    from ..depth_methods import METHOD_CODES as code
    from ..factors import load_factor_set, load_gwp_set, require_gases
    from ..names import printable
    from ..outputs.provenance import check_against
    from ..engine.inputs import open_inputs

    cfg = load_config(config)
    sm = require_gases(load_factor_set(cfg.factors.smouldering, "smouldering"), "smouldering")
    fl = require_gases(load_factor_set(cfg.factors.flaming, "flaming"), "flaming")
    gwp = load_gwp_set(cfg.factors.gwp)
    inputs = open_inputs(cfg)
    g = inputs.grid
    click.echo(f"run: {cfg.name}")
    click.echo(f"grid: {g.width} x {g.height} px of {g.res[0]:g} x {g.res[1]:g} in {g.crs.to_string()}; "
               f"{len(g.windows(cfg.block_size))} blocks of {cfg.block_size} px")
    for key, info in inputs.rasters.items():
        aligned = "on grid" if (info.crs == g.crs and info.transform == g.transform) else "warped onto grid"
        click.echo(f"raster {key}: {info.path} ({info.width} x {info.height}, nodata {info.nodata}, {aligned})")
    click.echo(f"burn scars: {len(inputs.scars.frame)} polygons from {cfg.burned_area}")
    for z, layer, ids in inputs.zones:
        click.echo(f"zones {z.name}: {len(ids)} polygons, id field {z.id!r}"
                   f"{'; a dossier per burned zone (dossiers/)' if z.dossiers else ''}")
    if cfg.uncertainty.draws:
        from ..engine.intervals import draw_cost

        n_rows = sum(len(ids) + 1 for _, _, ids in inputs.zones) + 1
        seconds, memory = draw_cost(cfg.uncertainty.draws, n_rows)
        click.echo(f"uncertainty: {cfg.uncertainty.draws:,} draws x {n_rows:,} zone rows: about {seconds:.0f} s "
                   f"and at most {memory / 2**20:.0f} MiB for the intervals (after the block pass)")
    if cfg.survey is not None:
        sv = cfg.survey
        sub = "raster" if hasattr(sv.subsidence_rate, "path") else sv.subsidence_rate
        stable = "polygons" if sv.stable else f"outside scars buffered by {sv.stable_buffer_m:g} m"
        click.echo(f"depth {code['survey']}: two surveys {sv.interval_years:g} yr apart; subsidence {sub}; co-registration on "
                   f"stable ground ({stable})")
    if cfg.water_table is not None:
        wt = cfg.water_table
        src = f"raster {wt.raster.path}" if wt.raster else f"stations {wt.stations} (IDW, power {wt.idw_power:g})"
        click.echo(f"depth {code['water_table']}: water-table model ({wt.model}) from {src}")
    if cfg.tier1_only:
        click.echo("depth: Tier 1 only (no survey, no water table): the IPCC 2013 Wetlands Supplement default on "
                   "every burned pixel of organic soil")
    else:
        click.echo(f"depth {code['tier1']}: IPCC 2013 Wetlands Supplement Tier 1 default where neither gives a depth")
    if cfg.peat.extent is not None:
        click.echo(f"peat extent: {cfg.peat.extent} (outside it, and where the thickness is 0: mineral soil, "
                   f"no below-ground emission)")
    if cfg.flaming is not None:
        click.echo(f"flaming: {cfg.flaming.method} route")
    click.echo(f"smouldering factors: {sm.name} ({sm.citation}); GWP: {gwp.name}")
    click.echo(f"flaming factors: {fl.name}; gases reported: smouldering {', '.join(sm.gases)}; "
               f"flaming {', '.join(fl.gases)}")
    for n in inputs.notes:
        click.echo(f"note: {printable(n)}")  # notes may quote names from input files
    if against:
        with open(against, encoding="utf-8") as fh:
            record = json.load(fh)
        check_against(record)
        click.echo(f"inputs match {against}")
    click.echo("ok: the configuration is valid")
