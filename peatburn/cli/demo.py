from __future__ import annotations

from pathlib import Path

import click

from .options import handle_errors, overwrite_option, quiet_option, workers_option


@click.command("demo")
@click.option("--out", "out_dir", type=click.Path(file_okay=False), default="demo_output", show_default=True,
              help="Folder for the demo's results.")
@click.option("--inputs", "inputs_dir", type=click.Path(file_okay=False), default=None,
              help="Folder for the generated demo inputs [default: OUT/inputs].")
@overwrite_option
@workers_option
@click.option("--pdf", is_flag=True, default=False,
              help="Also print report.html to report.pdf with headless chromium (apt-get install chromium).")
@quiet_option
@handle_errors
def demo_cmd(out_dir, inputs_dir, overwrite, workers, pdf, quiet):
    """Generate the invented demo region and run the whole pipeline on it.

    The first fire year's results go to OUT/results; the two invented fire years together run as a
    series (peatburn series) into OUT/series. Every name and number of the demo is invented; no real
    place, company or person is shown.
    """
    from ..config import load_config
    from ..demo import make_demo_region
    from ..engine.runner import prepare_out_dir, run
    from ..io.result_set import remove_temporaries
    from .summary import echo_pdfs_and_dossiers, print_summary

    if pdf:
        from ..outputs.pdf import find_chromium

        find_chromium()  # a missing chromium fails before the run, not after it
    out = Path(out_dir)
    prepare_out_dir(out, overwrite)
    inputs = Path(inputs_dir) if inputs_dir else out / "inputs"
    remove_temporaries(inputs)  # a killed demo's half-written inputs (peatburn's marker only)
    region = make_demo_region(inputs)
    from ..engine.executors import tune_malloc
    from ..engine.progress import progress_bar

    tune_malloc()  # block-sized numpy temporaries reuse the heap (docs/performance.md)
    result = run(load_config(region.config_path), out / "results", overwrite=True, workers=workers,
                 progress=progress_bar(quiet=quiet), pdf=pdf)
    from ..engine.series import run_series
    from ..series_config import load_series

    series = run_series(load_series(region.folder / "series.toml"), out / "series", overwrite=True, workers=workers,
                        progress=progress_bar(quiet=quiet))
    if not quiet:
        print_summary(result)
        click.echo(f"report: {result.files['report']}")
        click.echo(f"two-year series ({', '.join(map(str, series.years))}): {series.files['report']}")
        echo_pdfs_and_dossiers(result, pdf)
