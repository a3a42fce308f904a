"""Shared click options and the error wrapper of every command."""

from __future__ import annotations

import functools
import logging
import sys
import traceback
import warnings

import click

from ..errors import PeatburnError
from . import exit_codes

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


class _EchoHandler(logging.Handler):
    """Log records to the current stderr through click (so a test runner's captured stream gets them)."""

    def emit(self, record):
        try:
            click.echo(self.format(record), err=True)
        except Exception:  # noqa: BLE001  (logging must never raise)
            self.handleError(record)


def configure_logging(verbosity: int) -> None:
    """Log level of the ``peatburn`` loggers from ``-v`` / ``-q`` counts, as rasterio's ``rio`` does:
    warnings by default, info with -v (the run's steps and notes), debug with -vv, errors only with -q."""
    logger = logging.getLogger("peatburn")
    logger.setLevel(max(logging.DEBUG, min(logging.ERROR, logging.WARNING - 10 * verbosity)))
    if not any(isinstance(h, _EchoHandler) for h in logger.handlers):
        handler = _EchoHandler()
        handler.setFormatter(logging.Formatter("%(levelname)s %(name)s: %(message)s"))
        logger.addHandler(handler)


class ExitStatusGroup(click.Group):
    """The command group: click's usage errors exit with 64 (``EX_USAGE``) instead of click's 2, which
    peatburn keeps for bad input data; Ctrl-C exits with 130 after one line. Every verb gets it, as
    the group parses the command line and invokes the verb (docs/cli.md, "Exit status")."""

    def make_context(self, info_name, args, parent=None, **extra):
        try:  # the group's own options, and no verb at all (click's NoArgsIsHelpError)
            return super().make_context(info_name, args, parent=parent, **extra)
        except click.UsageError as exc:
            exc.exit_code = exit_codes.USAGE
            raise

    def invoke(self, ctx):
        try:  # an unknown verb, the verb's options and arguments, a UsageError raised by a verb
            return super().invoke(ctx)
        except click.UsageError as exc:
            exc.exit_code = exit_codes.USAGE
            raise
        except KeyboardInterrupt:
            click.echo("\npeatburn: interrupted", err=True)
            sys.exit(exit_codes.INTERRUPTED)


def handle_errors(fn):
    """Turn peatburn errors into one line on stderr and exit status 2 (traceback with --debug);
    unforeseen errors also give one line, with exit status 3 (``exit_codes.INTERNAL``)."""

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        ctx = click.get_current_context()
        debug = (ctx.find_root().params or {}).get("debug", False)
        try:
            with warnings.catch_warnings():
                if not debug:
                    warnings.showwarning = _one_line_warning(warnings.showwarning)
                return fn(*args, **kwargs)
        except PeatburnError as exc:
            if debug:
                traceback.print_exc()
            click.echo(f"peatburn: error: {exc}", err=True)
            sys.exit(exc.exit_code)
        except (click.exceptions.Exit, click.ClickException, SystemExit):
            raise
        except Exception as exc:  # an error we did not foresee: still one line, exit status 3
            if debug:
                traceback.print_exc()
            first = str(exc).splitlines()[0] if str(exc) else ""
            click.echo(f"peatburn: unexpected error: {exc.__class__.__name__}: {first} (run with --debug for the "
                       f"traceback and report it; no output was left half-written)", err=True)
            sys.exit(exit_codes.INTERNAL)

    return wrapper


def _one_line_warning(default):
    """peatburn's own notices (UserWarning: debris removed, a stale lock taken over) as one line
    ``peatburn: warning: ...`` on stderr; other warnings as Python prints them."""

    def show(message, category, filename, lineno, file=None, line=None):
        if category is UserWarning:
            click.echo(f"peatburn: warning: {message}", err=True)
        else:
            default(message, category, filename, lineno, file, line)

    return show
