from __future__ import annotations

import click

from .options import config_argument, handle_errors


@click.command("check")
@config_argument
@click.option("--against", "against", type=click.Path(dir_okay=False, exists=True), default=None,
              help="A provenance.json: tell whether the inputs still match it.")
@handle_errors
def check_cmd(config, against):
    """Validate CONFIG and its inputs and print what a run would do, without running it."""
    from ..engine.check import check
    from ..outputs.provenance import mismatch_error

    report = check(config, against, strict=False)
    for line in report.lines:
        click.echo(line)
    if report.mismatches:
        raise mismatch_error(report.mismatches)
