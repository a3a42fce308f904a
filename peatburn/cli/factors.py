from __future__ import annotations

import click

from ..factors import gas_label
from .options import handle_errors


@click.command("factors")
@handle_errors
def factors_cmd():
    """List the built-in emission-factor and GWP sets with their citations."""
    from ..factors import list_factor_sets, list_gwp_sets

    for fs in list_factor_sets():
        click.echo(f"{fs.name}  [{fs.phase}]")
        click.echo(f"    {fs.citation}")
        if fs.derived_from:
            click.echo(f"    derived from {fs.derived_from} (its values rounded): not independent of it")
        vals = ", ".join(f"{gas_label(g)} {v:g}" for g, v in fs.ef.items())
        click.echo(f"    g/kg dry matter: {vals}")
    click.echo("")
    for gs in list_gwp_sets():
        vals = ", ".join(f"{gas_label(g)} {v:g}" for g, v in gs.gwp.items())
        click.echo(f"{gs.name}  [GWP-100]  {vals}")
        click.echo(f"    {gs.citation}")
