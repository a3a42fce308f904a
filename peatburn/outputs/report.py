"""report.html: one self-contained page (figures embedded as PNG data URIs, no external loads).

Text that comes from inputs (run name, zone names) is escaped by Jinja2's autoescape.
"""

from __future__ import annotations

import base64
import datetime as dt
import io
import math
from importlib import resources
from pathlib import Path

import numpy as np

from ..io.writers import write_text

#: Colour-blind-safe sequential maps (matplotlib's perceptually uniform maps; Nuñez et al. 2018
#: for cividis) and the Okabe-Ito palette for categories (Okabe & Ito 2008).
OKABE_ITO = ["#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7", "#000000"]


def _png(fig) -> str:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110, bbox_inches="tight")
    import matplotlib.pyplot as plt

    plt.close(fig)
    return "data:image/png;base64," + base64.b64encode(buf.getvalue()).decode("ascii")


def _overview(path: Path, max_side: int = 700):
    """Read a raster decimated to at most ``max_side`` pixels a side (uses the COG's overviews)."""
    import rasterio
    from rasterio.enums import Resampling

    with rasterio.open(path) as ds:
        f = max(1, math.ceil(max(ds.width, ds.height) / max_side))
        shape = (max(1, ds.height // f), max(1, ds.width // f))
        a = ds.read(1, out_shape=shape, masked=True, resampling=Resampling.average)
        b = ds.bounds
    return np.ma.filled(a.astype("float64"), np.nan), (b.left, b.right, b.bottom, b.top)


def map_figure(path: Path, title: str, unit: str, cmap: str, zone_layers=()) -> str:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    arr, extent = _overview(path)
    fig, ax = plt.subplots(figsize=(6.4, 5.0))
    finite = arr[np.isfinite(arr)]
    vmax = float(np.percentile(finite, 98)) if finite.size else 1.0
    im = ax.imshow(arr, extent=extent, cmap=cmap, vmin=0, vmax=max(vmax, 1e-6), interpolation="nearest")
    for i, (name, frame) in enumerate(zone_layers):
        frame.boundary.plot(ax=ax, color=OKABE_ITO[(i + 4) % len(OKABE_ITO)], linewidth=0.9, label=name)
    if zone_layers:
        ax.legend(loc="lower right", fontsize=7, frameon=True)
    cb = fig.colorbar(im, ax=ax, shrink=0.8)
    cb.set_label(f"{title} [{unit}]")
    ax.set_title(title)
    ax.set_xlabel("easting [m]")
    ax.set_ylabel("northing [m]")
    ax.ticklabel_format(style="plain", useOffset=False)
    ax.tick_params(labelsize=7)
    return _png(fig)


def zone_chart(rows: list[dict]) -> str | None:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    zr = [r for r in rows if r["layer"] != "total"]
    if not zr:
        return None
    labels = [f"{r['layer']}: {r['zone']}" for r in zr]
    smoul = [r["carbon_smouldering_t"] for r in zr]
    flam = [r["carbon_flaming_t"] for r in zr]
    y = np.arange(len(zr))
    fig, ax = plt.subplots(figsize=(7.0, 0.35 * len(zr) + 1.2))
    ax.barh(y - 0.2, smoul, height=0.4, color=OKABE_ITO[5], label="smouldering (below ground)")
    ax.barh(y + 0.2, flam, height=0.4, color=OKABE_ITO[1], label="flaming (above ground)")
    ax.set_yticks(y, labels, fontsize=7)
    ax.invert_yaxis()
    ax.set_xlabel("carbon released [t C]")
    ax.legend(fontsize=7)
    return _png(fig)


def write_report(final: Path, result, cfg, prov: dict, factors) -> Path:
    """Render report.html for a finished run."""
    from jinja2 import Environment, select_autoescape

    from ..io.vectors import read_polygons
    from .tables import UNITS, ZONE_COLUMNS

    env = Environment(autoescape=select_autoescape(default=True, default_for_string=True))
    env.filters["num"] = _num
    template = env.from_string(resources.files("peatburn.outputs").joinpath("templates/report.html")
                               .read_text(encoding="utf-8"))
    zone_frames = []
    for z in cfg.zones:
        try:
            zone_frames.append((z.name, read_polygons(z.path, prov["grid"]["crs"], z.name, z.layer).frame))
        except Exception:  # a map without outlines is still a map
            pass
    out_dir = Path(final).parent
    figures = {
        "depth": map_figure(out_dir / "burn_depth.tif", "burn depth", "m", "cividis", zone_frames),
        "carbon": map_figure(out_dir / "carbon_smouldering.tif", "carbon released below ground", "kg C m-2",
                             "viridis", zone_frames),
        "zones": zone_chart(result.zones),
    }
    html = template.render(
        run_name=cfg.name, created=prov["created_utc"], date=dt.date.today().isoformat(), total=result.total,
        rows=result.zones, columns=ZONE_COLUMNS, units=UNITS, qa=result.qa, totals=result.totals,
        figures=figures, smouldering=factors.smouldering, gwp=factors.gwp, prov=prov, cautions=result.totals["cautions"],
    )
    return write_text(final, html)


def _num(v, digits: int = 3):
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "–"
    if isinstance(v, (int, float, np.floating)):
        v = float(v)
        if v == 0:
            return "0"
        mag = abs(v)
        if mag >= 1000:
            return f"{v:,.0f}"
        return f"{v:.{digits}g}"
    return str(v)
