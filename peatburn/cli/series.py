from __future__ import annotations

import click

from .options import handle_errors, out_option, overwrite_option, quiet_option, scheduler_option, workers_option


@click.command("series")
@click.argument("series_file", metavar="SERIES", type=click.Path(dir_okay=False))
@out_option
@overwrite_option
@workers_option
@scheduler_option
@click.option("--against", "against", type=click.Path(file_okay=False), default=None,
              help="Output folder of an earlier series: also write recalculation.csv (per year, the inputs, "
                   "settings and figures that differ).")
@quiet_option
@handle_errors
def series_cmd(series_file, out_dir, overwrite, workers, scheduler, against, quiet):
    """Run the yearly runs SERIES lists (a TOML file with [[runs]] config = ...) with one method.

    Writes each year's outputs into --out/<year>/, and for the series inventory.csv, inventory.json
    (every year), series.csv (year x phase x quantity with intervals; the multi-year sum and the
    trend from joint draws), series.json and series_report.html. A year whose factor set, GWP set
    or [shared] settings differ from the others is refused unless its [[runs]] entry states it
    (allow_differences). The folder is written as one set: staged, swapped in whole, with SHA256SUMS
    over every file (each year's too; `peatburn check --outputs` verifies it). An existing, non-empty
    output folder is refused unless --overwrite is given.
    """
    from ..engine.executors import tune_malloc
    from ..engine.progress import progress_bar
    from ..engine.series import run_series
    from ..engine.runner import CAUTIONS
    from ..series_config import load_series

    series = load_series(series_file)
    tune_malloc()
    result = run_series(series, out_dir, overwrite=overwrite, workers=workers, scheduler=scheduler, against=against,
                        progress=progress_bar(quiet=quiet))
    if quiet:
        return
    for note in series.notes:
        click.echo(f"note: {note}")
    click.echo(f"{'year':<8}{'C below ground [t]':>34}{'CO2e below ground [t]':>34}")
    for y, r in zip(result.years, result.results):
        t = r.total
        click.echo(f"{y:<8}{_iv(t, 'carbon_smouldering_t'):>34}{_iv(t, 'co2e_smouldering_t'):>34}")
    for q in result.summary.get("quantities", []):
        if q["quantity"] == "carbon_t" and q["phase"] == "smouldering":
            s, tr = q["sum"], q["trend"]
            click.echo(f"sum {result.summary['span']}: {_n(s['value'])} t C ({_n(s['lo'])}-{_n(s['hi'])}, joint draws); "
                       f"trend {result.summary['trend_years']}: "
                       + ("-" if tr["value"] is None else f"{tr['value']:+.1f} %")
                       + (f" ({tr['lo']:+.1f} to {tr['hi']:+.1f} %)" if tr["lo"] is not None else ""))
    click.echo(f"series report: {result.files['report']}")
    for c in CAUTIONS:
        click.echo(f"caution: {c}")


def _n(v) -> str:
    if v is None or v != v:
        return "-"
    return f"{v:,.1f}" if abs(v) >= 10 else f"{v:.3g}"


def _iv(row, k) -> str:
    lo, hi = row.get(f"{k}_lo"), row.get(f"{k}_hi")
    return _n(row[k]) + (f" ({_n(lo)}-{_n(hi)})" if lo is not None and hi is not None else "")
