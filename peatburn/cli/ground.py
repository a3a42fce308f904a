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
@click.option("--fill", type=click.Choice(["tin", "idw", "none"]), default="tin", show_default=True,
              help="Fill the cells without ground return: linear on a Delaunay triangulation of the cells "
                   "with returns (tin), inverse-distance weighting of the 8 nearest (idw), or not at all.")
@click.option("--max-gap", type=click.FloatRange(min=0), default=None,
              help="Fill only cells within this distance [m] of a cell with ground returns "
                   "(centre to centre); farther cells stay empty.  [default: 4 x --res]")
@click.option("--origin", "origin_tif", type=click.Path(dir_okay=False), default=None,
              help="Also write a uint8 GeoTIFF: 1 where the cell holds ground returns, 2 where it was "
                   "filled, nodata where it has no value (keep it out of a folder read as a mosaic).")
@click.option("--crs", default=None, help="CRS of the points when the files carry none (e.g. EPSG:32749).")
@overwrite_option
@handle_errors
def ground_cmd(clouds, res, out_tif, fill, max_gap, origin_tif, crs, overwrite):
    """Grid the ground returns (ASPRS class 2) of classified LAS/LAZ CLOUDS into a bare-earth GeoTIFF.

    Each cell holds the mean elevation of its ground returns. A cell with none is filled from the cells
    around it (--fill) when it lies within --max-gap of a cell with returns; wider holes (water, dense
    vegetation) stay without value, and TIN never extrapolates beyond the returns' outline. The grid
    covers the files' extent, snapped to multiples of --res. Needs peatburn[lidar] (laspy, lazrs).
    """
    from ..io.point_clouds import ground_raster

    out = Path(out_tif)
    origin = Path(origin_tif) if origin_tif else None
    for p in (out, origin):
        if p is not None and p.exists() and not overwrite:
            raise OutputExistsError(f"{p} exists; choose another path or pass --overwrite")
    if origin is not None and origin.resolve() == out.resolve():
        raise OutputExistsError(f"--origin {origin} is the --out file; give the origin raster its own name")
    s = ground_raster([Path(c) for c in clouds], out, res=res, crs=crs, fill=fill, max_gap=max_gap, origin=origin)
    filled = "" if fill == "none" else f" and {s['cells_filled']:,} filled by {fill.upper()}"
    click.echo(f"{s['ground_points']:,} ground return(s) of {s['points']:,} point(s); {s['width']} x {s['height']} "
               f"cells of {res:g} m, {s['cells_with_returns']:,} with ground returns{filled}, "
               f"{s['cells_with_value']:,} with a value: {out}")
