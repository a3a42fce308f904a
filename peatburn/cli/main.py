"""The peatburn command line: one verb per module of this package."""

from __future__ import annotations

import click

from .. import __version__
from .calibrate import calibrate_cmd
from .check import check_cmd
from .demo import demo_cmd
from .factors import factors_cmd
from .options import ExitStatusGroup, configure_logging
from .run import run_cmd
from .series import series_cmd


@click.group(cls=ExitStatusGroup)
@click.version_option(__version__, prog_name="peatburn")
@click.option("--debug", is_flag=True, default=False, help="Show tracebacks of errors.")
@click.option("--verbose", "-v", count=True, help="Log more on stderr: -v the run's steps and notes, -vv debug.")
@click.option("--quiet", "-q", count=True, help="Log errors only.")
def cli(debug, verbose, quiet):
    """peatburn: carbon and greenhouse gases released by smouldering tropical peat fires,
    reported apart from flaming emissions."""
    configure_logging(verbose - quiet)


cli.add_command(run_cmd)
cli.add_command(check_cmd)
cli.add_command(demo_cmd)
cli.add_command(factors_cmd)
cli.add_command(calibrate_cmd)
cli.add_command(series_cmd)
