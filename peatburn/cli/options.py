"""Shared click options and the error wrapper of every command."""

from __future__ import annotations

import functools
import sys
import traceback

import click

from ..errors import PeatburnError

out_option = click.option("--out", "out_dir", type=click.Path(file_okay=False), required=True,
                          help="Folder to write the outputs into.")
overwrite_option = click.option("--overwrite", is_flag=True, default=False,
                                help="Replace the outputs in an existing, non-empty output folder.")
workers_option = click.option("--workers", type=click.IntRange(1, 256), default=1, show_default=True,
                              help="Run blocks in this many local processes.")
scheduler_option = click.option("--scheduler", metavar="ADDRESS", default=None,
                                help="Run blocks on an existing dask.distributed cluster (e.g. tcp://10.0.0.5:8786); "
                                     "every worker must be able to read the input paths. Needs peatburn[scale].")
quiet_option = click.option("--quiet", "-q", is_flag=True, default=False, help="Print only errors.")
config_argument = click.argument("config", type=click.Path(dir_okay=False))


def handle_errors(fn):
    """Turn peatburn errors into one line on stderr and exit status 2 (traceback with --debug)."""

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        ctx = click.get_current_context()
        debug = (ctx.find_root().params or {}).get("debug", False)
        try:
            return fn(*args, **kwargs)
        except PeatburnError as exc:
            if debug:
                traceback.print_exc()
            click.echo(f"peatburn: error: {exc}", err=True)
            sys.exit(exc.exit_code)

    return wrapper
