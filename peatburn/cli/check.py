from __future__ import annotations

import click

from .options import handle_errors


@click.command("check")
@click.argument("config", type=click.Path(dir_okay=False), required=False)
@click.option("--against", "against", type=click.Path(dir_okay=False), default=None,
              help="A provenance.json: tell whether the inputs still match it.")
@click.option("--outputs", "outputs", type=click.Path(file_okay=False), default=None,
              help="A run's output folder: tell whether it is one run's complete, unaltered set (one line per "
                   "missing, altered or extra file; exit status 1 if there is any).")
@handle_errors
def check_cmd(config, against, outputs):
    """Validate CONFIG and its inputs and print what a run would do, without running it (CONFIG may be a
    series file: every year is checked and the years must share one method); or, with --outputs, check
    an output folder (a run's or a series') against its SHA256SUMS and provenance.json."""
    if config is None and outputs is None:
        raise click.UsageError("give a CONFIG to check, or --outputs DIR")
    if config is not None:
        from ..series_config import is_series_file

        if is_series_file(config):
            if against is not None:
                raise click.UsageError("--against takes one run's provenance.json; check a series file without it")
            _check_series(config)
        else:
            _check_config(config, against)
    if outputs is not None:
        _check_outputs(outputs)


def _check_outputs(folder) -> None:
    import sys

    from . import exit_codes
    from ..names import printable
    from ..outputs.checksums import check_outputs, describe, is_series

    problems = check_outputs(folder)
    one = "one series'" if is_series(folder) else "one run's"
    for line in problems:
        click.echo(printable(line))  # file names in the folder may hold control characters
    if problems:
        click.echo(f"not {one} complete, unaltered set: {len(problems)} problem(s) in {printable(str(folder))}")
        sys.exit(exit_codes.DIFFERENCES)
    click.echo(f"ok: {printable(str(folder))} is {one} complete, unaltered set: {printable(describe(folder))}")


def _check_series(path) -> None:
    from ..engine.check import check_series

    for line in check_series(path).lines:  # the library function (engine/check.py)
        click.echo(line)


def _check_config(config, against) -> None:
    from ..engine.check import check
    from ..outputs.provenance import mismatch_error

    report = check(config, against, strict=False)  # the library function (engine/check.py)
    for line in report.lines:
        click.echo(line)
    if report.mismatches:
        raise mismatch_error(report.mismatches)
