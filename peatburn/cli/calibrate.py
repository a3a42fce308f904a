from __future__ import annotations

from pathlib import Path

import click

from ..errors import OutputExistsError
from .options import config_argument, handle_errors, overwrite_option


@click.command("calibrate")
@config_argument
@click.option("--out", "out_json", type=click.Path(dir_okay=False), default="depth_model.json", show_default=True,
              help="Where to write the fit (JSON; give it to run as [depth.water_table] model = \"FILE\").")
@click.option("--plot", "plot_png", type=click.Path(dir_okay=False), default=None,
              help="Scatter plot of survey depth vs water table with the fit [default: beside --out, .png].")
@overwrite_option
@handle_errors
def calibrate_cmd(config, out_json, plot_png, overwrite):
    """Fit the burn-depth vs water-table model of CONFIG and print it.

    Samples surveyed burned pixels where both the survey depth and the water table exist (or the
    field plots when there is no survey), fits depth = a + b x water-table depth robustly, and
    writes the fit as JSON that `peatburn run` can reuse, with a scatter plot.
    """
    from ..engine.calibrate import calibrate, write_fit, write_scatter
    from ..config import load_config

    out = Path(out_json)
    png = Path(plot_png) if plot_png else out.with_suffix(".png")
    for p in (out, png):
        if p.exists() and not overwrite:
            raise OutputExistsError(f"{p} exists; choose another path or pass --overwrite")
    calib = calibrate(load_config(config))
    for name, m in calib.models.to_dict().items():
        click.echo(f"{name}: burn depth = {m['intercept']:.3f} + {m['slope']:.3f} x water-table depth  "
                   f"(n {m['n']}, R2 {_f(m['r2'])}, RMSE {_f(m['rmse'])} m; {m['confidence']}; {m['method']})")
        click.echo(f"    standard errors: intercept {_f(m['intercept_se'])} m, slope {_f(m['slope_se'])}")
    for n in calib.notes:
        click.echo(f"note: {n}")
    write_fit(out, calib)
    write_scatter(png, calib)
    click.echo(f"fit: {out}\nplot: {png}")


def _f(v):
    try:
        return f"{float(v):.3f}"
    except (TypeError, ValueError):
        return "-"
