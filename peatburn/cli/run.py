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
@click.option("--pdf", is_flag=True, default=False,
              help="Also print report.html to report.pdf with headless chromium (apt-get install chromium).")
@quiet_option
@handle_errors
def run_cmd(config, out_dir, overwrite, workers, scheduler, pdf, quiet):
    """Estimate smouldering (below-ground) peat-fire emissions for CONFIG and write the outputs.

    Writes zones.csv, fires.csv, results.gpkg, totals.json, inventory.csv, inventory.json, daily.csv, burn_depth.tif,
    carbon_smouldering.tif, depth_method.tif, report.html (and report.pdf with --pdf), dossiers/<zone>.html
    (and .pdf) for the burned zones of every [[zones]] layer with dossiers = true, provenance.json and
    SHA256SUMS into --out, as one set: the folder holds the old set or the new one, never a mix
    (`peatburn check --outputs` verifies it). An existing, non-empty output folder is refused unless
    --overwrite is given.
    """
    from ..config import load_config
    from ..engine.executors import tune_malloc
    from ..engine.progress import progress_bar
    from ..engine.runner import run
    from .summary import echo_pdfs_and_dossiers, print_summary

    if pdf:
        from ..outputs.pdf import find_chromium

        find_chromium()  # a missing chromium fails before the run, not after it
    cfg = load_config(config)
    tune_malloc()  # block-sized numpy temporaries reuse the heap (docs/performance.md)
    result = run(cfg, out_dir, overwrite=overwrite, workers=workers, scheduler=scheduler,
                 progress=progress_bar(quiet=quiet), pdf=pdf)  # report.pdf is part of the set
    if not quiet:
        print_summary(result)
        echo_pdfs_and_dossiers(result, pdf)
