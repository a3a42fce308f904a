from __future__ import annotations

from pathlib import Path

import click

from ..errors import OutputExistsError
from .options import handle_errors, overwrite_option


@click.command("ground")
@click.argument("clouds", nargs=-1, required=True, type=click.Path(dir_okay=False))
@click.option("--res", type=float, required=True, help="Cell size of the grid [m], in the clouds' CRS.")
@click.option("--out", "out_tif", type=click.Path(dir_okay=False), required=True,
              help="GeoTIFF to write (name it as pre or post of [depth.survey]).")
@click.option("--crs", default=None, help="CRS of the points when the files carry none (e.g. EPSG:32749).")
@overwrite_option
@handle_errors
def ground_cmd(clouds, res, out_tif, crs, overwrite):
    """Grid the ground returns (ASPRS class 2) of classified LAS/LAZ CLOUDS into a bare-earth GeoTIFF.

    Each cell holds the mean elevation of its ground returns; a cell with none has no value. The
    grid covers the files' extent, snapped to multiples of --res. Needs peatburn[lidar] (laspy, lazrs).
    """
    from ..io.point_clouds import ground_raster

    out = Path(out_tif)
    if out.exists() and not overwrite:
        raise OutputExistsError(f"{out} exists; choose another path or pass --overwrite")
    s = ground_raster([Path(c) for c in clouds], out, res=res, crs=crs)
    click.echo(f"{s['ground_points']:,} ground return(s) of {s['points']:,} point(s); {s['width']} x {s['height']} "
               f"cells of {res:g} m, {s['cells_with_value']:,} with a value: {out}")
