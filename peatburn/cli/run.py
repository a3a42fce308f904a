from __future__ import annotations

import click

from .options import config_argument, handle_errors, out_option, overwrite_option, quiet_option, scheduler_option, \
    workers_option


@click.command("run")
@config_argument
@out_option
@overwrite_option
@workers_option
@scheduler_option
@quiet_option
@handle_errors
def run_cmd(config, out_dir, overwrite, workers, scheduler, quiet):
    """Estimate smouldering (below-ground) peat-fire emissions for CONFIG and write the outputs.

    Writes zones.csv, totals.json, inventory.csv, burn_depth.tif, carbon_smouldering.tif,
    provenance.json and report.html into --out. An existing, non-empty output folder is
    refused unless --overwrite is given.
    """
    from ..config import load_config
    from ..runner import run
    from .summary import print_summary

    cfg = load_config(config)
    result = run(cfg, out_dir, overwrite=overwrite, workers=workers, scheduler=scheduler)
    if not quiet:
        print_summary(result)
