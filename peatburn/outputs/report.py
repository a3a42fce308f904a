"""report.html: one self-contained page for a finished run (figures embedded, no external loads).

The page is rendered from ``templates/report.html`` with Jinja2 and autoescape on: every text that
comes from the inputs (run name, zone and layer names, paths, notes) is escaped, never trusted as
markup; the same texts are escaped for matplotlib's mathtext (``$``) before they are drawn. Charts
are drawn with matplotlib's object API (``Figure``, Agg canvas, no pyplot state) and embedded as
PNG ``data:`` URIs. No script, stylesheet, font or image is loaded from anywhere else.

Colours: categories (phases, depth methods, zone layers) use the Okabe-Ito palette (Okabe & Ito
2008); maps use matplotlib's perceptually uniform ``cividis`` (Nuñez et al. 2018) and ``viridis``.

References
----------
Okabe, M. & Ito, K. (2008). Color Universal Design (CUD): how to make figures and presentations that
are friendly to colorblind people. Web publication (first published 2002). The eight hex values
below checked against a published copy of the palette (a colour-vision package's palette table),
not against the original page.
Nuñez, J. R., Anderton, C. R. & Renslow, R. S. (2018). Optimizing colormaps with consideration for
color vision deficiency to enable accurate interpretation of scientific data. PLoS ONE 13(7):
e0199239, doi:10.1371/journal.pone.0199239 (citation checked against secondary copies).
"""

from __future__ import annotations

import base64
import datetime as dt
import io
import math
from importlib import resources
from pathlib import Path

import numpy as np

from ..depth_methods import DEPTH_METHODS, METHOD_CODES, MINERAL_CODE, MINERAL_COLOUR, MINERAL_LABEL
from ..factors import gas_label
from ..io.writers import write_text
from ..names import printable
from .tables import INVENTORY_CONVENTIONS, MIN_AREA_FOR_FRE_RATIO_HA, OUTSIDE, TOTAL_LAYER

#: The Okabe-Ito palette (Okabe & Ito 2008), by colour name.
OKABE_ITO_NAMED = {
    "orange": "#E69F00", "sky_blue": "#56B4E9", "bluish_green": "#009E73", "yellow": "#F0E442",
    "blue": "#0072B2", "vermillion": "#D55E00", "reddish_purple": "#CC79A7", "black": "#000000",
}
OKABE_ITO = list(OKABE_ITO_NAMED.values())

#: One colour per fire phase, the same in every chart and card.
PHASE_COLOURS = {"smouldering": OKABE_ITO_NAMED["vermillion"], "flaming": OKABE_ITO_NAMED["sky_blue"]}
#: One colour per depth method (maps and charts).
METHOD_COLOURS = {m.name: m.colour for m in DEPTH_METHODS}
METHOD_LABELS = {m.name: m.label for m in DEPTH_METHODS}
#: Outline style of each zone layer on the maps: colour and dash, so layers differ without colour.
LAYER_STYLES = [(OKABE_ITO_NAMED["black"], "-"), (OKABE_ITO_NAMED["reddish_purple"], "--"),
                (OKABE_ITO_NAMED["bluish_green"], ":"), (OKABE_ITO_NAMED["vermillion"], "-.")]

#: Charts show at most this many zones per layer (the largest by carbon); the tables show all.
MAX_CHART_ZONES = 25
#: Zone names are written on the maps when there are at most this many zones in all layers.
MAX_MAP_LABELS = 20
DPI = 120

#: Columns of the main zone table: key, label, unit.
ZONE_TABLE = [
    ("burned_area_ha", "Burned area", "ha"),
    ("unestimated_area_ha", "Burned area without estimate", "ha"),
    ("mean_burn_depth_m", "Mean burn depth", "m"),
    ("peat_burned_t", "Peat burned", "t dry matter"),
    ("carbon_smouldering_t", "Carbon, below ground", "t C"),
    ("co2e_smouldering_t", "CO₂e, below ground", "t CO₂e"),
    ("carbon_flaming_t", "Carbon, above ground", "t C"),
    ("co2e_flaming_t", "CO₂e, above ground", "t CO₂e"),
    ("carbon_share_survey", "Carbon from surveyed depth", "%"),
]
GAS_TABLE = [
    ("co2_smouldering_t", "CO₂", "t CO₂"), ("ch4_smouldering_t", "CH₄", "t CH₄"), ("co_smouldering_t", "CO", "t CO"),
    ("co2_flaming_t", "CO₂", "t CO₂"), ("ch4_flaming_t", "CH₄", "t CH₄"), ("co_flaming_t", "CO", "t CO"),
]
FRP_TABLE = [
    ("n_detections", "Active-fire detections", "count"),
    ("fre_mj", "Fire radiative energy", "MJ"),
    ("carbon_frp_only_t", "Carbon from FRE with the stated conversion", "t C"),
    ("carbon_smouldering_t", "Carbon, below ground", "t C"),
    ("smouldering_to_frp_ratio", "Below-ground carbon ÷ carbon from FRE", "ratio"),
]
#: Added to FRP_TABLE when the user gave a peat FRE conversion ([flaming] peat_coefficient).
FRP_PEAT_ROWS = [
    ("carbon_fre_peat_t", "Carbon from FRE with the user's peat conversion", "t C"),
    ("smouldering_to_fre_peat_ratio", "Below-ground carbon ÷ carbon from FRE (peat conversion)", "ratio"),
]

#: Methods and their sources, as printed in the report (statuses as in docs/method.md and docs/sources.md).
REFERENCES = [
    ("Burn depth = pre-fire elevation − co-registered post-fire elevation − subsidence over the interval, "
     "capped by the peat thickness only beyond the level of detection (no low bias at the cap) and not clipped "
     "at zero (so zone sums stay unbiased); survey outliers beyond 5 levels of detection flagged and kept; "
     "propagated error "
     "√(σ_pre² + σ_post²) and level of detection t × √(σ_pre² + σ_post²)",
     "Lane, S. N., Westaway, R. M. & Hicks, D. M. (2003). Estimation of erosion and deposition volumes in a "
     "large, gravel-bed, braided river using synoptic remote sensing. Earth Surf. Process. Landforms 28:249–271. "
     "Wheaton, J. M., Brasington, J., Darby, S. E. & Sear, D. A. (2010). Accounting for uncertainty in DEMs from "
     "repeat topographic surveys. Earth Surf. Process. Landforms 35:136–156.",
     "equations recalled, unchecked"),
    ("Co-registration of the two surveys on stable ground: dh / tan(slope) = a cos(b − aspect) + c",
     "Nuth, C. & Kääb, A. (2011). Co-registration and bias corrections of satellite elevation data sets for "
     "quantifying glacier thickness change. The Cryosphere 5:271–290.",
     "equation recalled, unchecked"),
    ("Peat dry mass = burn depth × dry bulk density × area; carbon = dry mass × carbon fraction",
     "Page, S. E. et al. (2002). The amount of carbon released from peat and forest fires in Indonesia during "
     "1997. Nature 420:61–65.",
     "totals checked against the abstract"),
    ("Gas emissions L = A × M_B × C_f × G_ef × 10⁻³ (A ha, M_B × C_f t dry matter/ha, G_ef g/kg, L t); "
     "for peat, M_B × C_f is the dry mass burned",
     "IPCC (2006). 2006 IPCC Guidelines for National Greenhouse Gas Inventories, Vol. 4, Ch. 2, Eq. 2.27.",
     "checked against the Vol. 4 worksheets"),
    ("Tier 1 (last resort where neither surveys nor a water-table model give a depth): default fuel "
     "consumption and emission factors for fires on tropical organic soil, charged on burned organic soil "
     "only (not where the peat thickness is 0 or outside the peat extent); its uncertainty 353 ± 170 t/ha "
     "drawn as its own source",
     "IPCC (2014). 2013 Supplement to the 2006 IPCC Guidelines for National Greenhouse Gas Inventories: "
     "Wetlands, Ch. 2 (Tables 2.6 and 2.7).",
     "default values and their uncertainty recalled, unchecked"),
    ("Subsidence acts only through its contrast: the vertical co-registration on stable ground absorbs a "
     "uniform rate, so one constant rate changes nothing; a rate map's error is drawn per zone",
     "Nuth, C. & Kääb, A. (2011), The Cryosphere 5:271–290 (co-registration); Hooijer, A. et al. (2012), "
     "Biogeosciences 9:1053 (3–5 cm/yr; default spread 0.01 m/yr is an assumption).",
     "consequence of the method (tested); rate values checked through a secondary summary"),
    ("Flaming dry matter = fire radiative energy (time integral of FRP) × combustion coefficient",
     "Wooster, M. J., Roberts, G., Perry, G. L. W. & Kaufman, Y. J. (2005). Retrieval of biomass combustion "
     "rates and totals from fire radiative power observations. J. Geophys. Res. 110, D24311, "
     "doi:10.1029/2005JD006318.",
     "coefficient 0.368 ± 0.015 kg/MJ recalled, unchecked (title and DOI checked)"),
    ("Burn depth grows as the water table falls: linear model fitted on surveyed scars or field plots, "
     "capped by the peat thickness",
     "Wösten, J. H. M., Clymans, E., Page, S. E., Rieley, J. O. & Limin, S. H. (2008). Peat–water "
     "interrelationships in a tropical peatland ecosystem in Southeast Asia. Catena 73:212–224.",
     "journal details recalled"),
    ("95 % intervals: 2.5 and 97.5 percentiles of Monte Carlo draws at zone level; spatially correlated "
     "survey error averaged over a zone",
     "JCGM 101:2008, Supplement 1 to the GUM (propagation of distributions using a Monte Carlo method). "
     "Rolstad, C., Haug, T. & Denby, B. (2009). J. Glaciol. 55:666–680.",
     "section numbers recalled"),
    ("Colours: Okabe–Ito palette for categories; cividis and viridis for maps",
     "Okabe, M. & Ito, K. (2008). Color Universal Design (CUD), web publication. Nuñez, J. R., Anderton, C. R. & "
     "Renslow, R. S. (2018). PLoS ONE 13(7): e0199239.",
     "checked against secondary copies"),
]


# ----------------------------------------------------------------------------- number formatting



def _inv_pct(v, sign: str) -> str:
    """A percentage of an inventory line's uncertainty (Approach 1 or 2), or "" when not estimated."""
    try:
        v = float(v)
    except (TypeError, ValueError):
        return ""
    return f"{sign}{v:.1f} %" if v == v else ""

def _finite(v) -> float | None:
    if v is None or isinstance(v, bool):
        return None
    try:
        f = float(v)
    except (TypeError, ValueError):
        return None
    return f if math.isfinite(f) else None


def fmt_num(v, digits: int = 3) -> str:
    """A number for people: thousands separators from 1000 up, else ``digits`` significant digits.

    ``17374.06 -> "17,374"``, ``24.3748 -> "24.4"``, ``0.322106 -> "0.322"``, ``0 -> "0"``;
    None and NaN -> "–"; strings are returned unchanged.
    """
    if isinstance(v, str):
        return v
    f = _finite(v)
    if f is None:
        return "–"
    if f == 0:
        return "0"
    rounded = float(f"{f:.{digits}g}")
    if abs(rounded) >= 1000:
        return f"{f:,.0f}"
    if abs(f) < 1e-3:
        mant, exp = f"{f:.{max(digits - 1, 0)}e}".split("e")
        return f"{mant} × 10{_superscript(int(exp))}"
    text = f"{rounded:#.{digits}g}"  # "#" keeps significant trailing zeros: 0.200, not 0.2
    if "e" in text:  # e.g. 1.00e+02: write it out
        text = f"{rounded:.0f}"
    return text.rstrip(".")


def _superscript(n: int) -> str:
    return str(n).translate(str.maketrans("-0123456789", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹"))


def fmt_plain(v) -> str:
    """A published constant as it is tabulated (shortest form, no padding): ``6.8``, ``1580``."""
    f = _finite(v)
    return "–" if f is None else f"{f:g}" if abs(f) < 1e6 else f"{f:,.0f}"


def fmt_int(v) -> str:
    f = _finite(v)
    return "–" if f is None else f"{int(round(f)):,}"


def fmt_pct(share, digits: int = 3) -> str:
    """A share (0..1) as a percentage: ``0.8824 -> "88.2 %"``."""
    f = _finite(share)
    return "–" if f is None else f"{fmt_num(100.0 * f, digits)} %"


def fmt_range(lo, hi) -> str:
    """``"lo–hi"`` (en dash); "" when either end is missing, or both are zero (nothing burned)."""
    if _finite(lo) is None or _finite(hi) is None or (_finite(lo) == 0 and _finite(hi) == 0):
        return ""
    return f"{fmt_num(lo)}–{fmt_num(hi)}"


def fmt_interval(v, lo=None, hi=None) -> str:
    """``"x (lo–hi)"``; just ``"x"`` without an interval."""
    r = fmt_range(lo, hi)
    return f"{fmt_num(v)} ({r})" if r else fmt_num(v)


def _mpl(text) -> str:
    """Input text made literal for matplotlib (``$`` would start mathtext)."""
    return str(text).replace("\\", "\\\\").replace("$", r"\$")


# ----------------------------------------------------------------------------- figures


def _style():
    import matplotlib

    return matplotlib.rc_context({
        "font.size": 8.5, "axes.titlesize": 9, "axes.labelsize": 8.5, "xtick.labelsize": 7.5,
        "ytick.labelsize": 7.5, "legend.fontsize": 7.5, "axes.spines.top": False, "axes.spines.right": False,
        "axes.edgecolor": "#555555", "axes.labelcolor": "#222222", "xtick.color": "#444444",
        "ytick.color": "#444444", "text.color": "#222222",
    })


def _figure(w, h):
    from matplotlib.figure import Figure

    return Figure(figsize=(w, h), dpi=DPI, layout="constrained")


def _png(fig) -> str:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=DPI, facecolor="white")
    return "data:image/png;base64," + base64.b64encode(buf.getvalue()).decode("ascii")


def _overview(path: Path, max_side: int = 700, categorical: bool = False):
    """A raster decimated to at most ``max_side`` pixels a side (reads the COG's overviews)."""
    import rasterio
    from rasterio.enums import Resampling

    with rasterio.open(path) as ds:
        f = max(1, math.ceil(max(ds.width, ds.height) / max_side))
        shape = (max(1, ds.height // f), max(1, ds.width // f))
        a = ds.read(1, out_shape=shape, masked=True,
                    resampling=Resampling.nearest if categorical else Resampling.average)
        b = ds.bounds
        geographic = bool(ds.crs and ds.crs.is_geographic)
    return np.ma.filled(a.astype("float64"), np.nan), (b.left, b.right, b.bottom, b.top), geographic


def _map_height(extent, geographic, width=6.0, colorbar=True) -> float:
    """Figure height [in] that fits the map's aspect without blank bands (axes width is the figure's
    width less the y labels and, with one, the colour bar)."""
    w = extent[1] - extent[0]
    h = (extent[3] - extent[2]) * (1.0 / max(math.cos(math.radians(0.5 * (extent[2] + extent[3]))), 1e-3)
                                   if geographic else 1.0)
    axes_w = width - (1.9 if colorbar else 1.0)
    return float(np.clip(axes_w * h / w + 0.75, 2.5, 8.0)) if w > 0 else 4.8


def _outlines(ax, frame, extent, colour, dash):
    """Draw zone outlines as one line broken by NaN between rings, simplified to half a pixel of a
    700-pixel map (drawing 10,000 polygons one by one took a second per map; docs/performance.md).
    The vertices are kept on the frame (``frame.attrs``) for the next map of the same report."""
    import shapely

    tol = max(extent[1] - extent[0], extent[3] - extent[2]) / 1400.0
    cached = frame.attrs.get("peatburn_outlines")
    if cached is not None and cached[0] == tol:
        xy = cached[1]
    else:
        geoms = np.asarray(frame.geometry.array, dtype=object)
        geoms = geoms[~(shapely.is_missing(geoms) | shapely.is_empty(geoms))]
        lines = shapely.get_parts(shapely.boundary(shapely.simplify(geoms, tol)))
        coords, index = shapely.get_coordinates(lines, return_index=True)
        breaks = np.flatnonzero(np.diff(index)) + 1
        xy = np.insert(coords, breaks, np.nan, axis=0) if len(coords) else np.empty((0, 2))
        frame.attrs["peatburn_outlines"] = (tol, xy)
    ax.plot(xy[:, 0], xy[:, 1], color=colour, linestyle=dash, linewidth=1.0)


def _map_axes(ax, extent, geographic, zone_layers, label_zones):
    from matplotlib import patheffects

    ax.set_xlim(extent[0], extent[1])
    ax.set_ylim(extent[2], extent[3])
    ax.set_aspect("equal" if not geographic else 1.0 / max(math.cos(math.radians(
        0.5 * (extent[2] + extent[3]))), 1e-3))
    handles = []
    for i, (name, frame, ids) in enumerate(zone_layers):
        colour, dash = LAYER_STYLES[i % len(LAYER_STYLES)]
        _outlines(ax, frame, extent, colour, dash)
        from matplotlib.lines import Line2D

        handles.append(Line2D([], [], color=colour, linestyle=dash, linewidth=1.0, label=_mpl(name)))
        if label_zones and ids is not None:
            for geom, zid in zip(frame.geometry, ids):
                if geom is None or geom.is_empty:
                    continue
                p = geom.representative_point()
                frac = (p.x - extent[0]) / (extent[1] - extent[0]) if extent[1] > extent[0] else 0.5
                ha = "right" if frac > 0.8 else "left" if frac < 0.2 else "center"
                ax.text(p.x, p.y, _mpl(zid), fontsize=6.5, color=colour, ha=ha, va="center",
                        path_effects=[patheffects.withStroke(linewidth=2.2, foreground="white")], clip_on=True)
    if handles:
        ax.legend(handles=handles, loc="lower right", frameon=True, framealpha=0.9, title="zone layers",
                  title_fontsize=7)
    if geographic:
        ax.set_xlabel("longitude [°]")
        ax.set_ylabel("latitude [°]")
    else:
        ax.set_xlabel("easting [m]")
        ax.set_ylabel("northing [m]")
        ax.ticklabel_format(style="plain", useOffset=False)
    for s in ("top", "right"):
        ax.spines[s].set_visible(True)


def map_figure(path: Path, label: str, unit: str, cmap: str, zone_layers=(), label_zones=False) -> str | None:
    """A continuous raster map with the zone outlines; colour scale from 0 to the 98th percentile."""
    if not Path(path).exists():
        return None
    arr, extent, geographic = _overview(path)
    with _style():
        fig = _figure(6.0, _map_height(extent, geographic))
        ax = fig.add_subplot()
        finite = arr[np.isfinite(arr)]
        vmax = float(np.percentile(finite, 98)) if finite.size else 1.0
        im = ax.imshow(arr, extent=extent, cmap=cmap, vmin=0.0, vmax=max(vmax, 1e-6), interpolation="nearest")
        _map_axes(ax, extent, geographic, zone_layers, label_zones)
        cb = fig.colorbar(im, ax=ax, shrink=0.85, extend="both")
        cb.set_label(f"{label} [{unit}]")
        return _png(fig)


def method_map_figure(path: Path, zone_layers=(), label_zones=False) -> str | None:
    """Which method gave the burn depth of each pixel (depth_method.tif codes 1, 2, 3)."""
    if not Path(path).exists():
        return None
    from matplotlib.colors import BoundaryNorm, ListedColormap
    from matplotlib.patches import Patch

    arr, extent, geographic = _overview(path, categorical=True)
    arr[arr == 0] = np.nan
    with _style():
        fig = _figure(5.4, _map_height(extent, geographic, width=5.4, colorbar=False))
        ax = fig.add_subplot()
        cmap = ListedColormap([METHOD_COLOURS[m] for m in METHOD_CODES] + [MINERAL_COLOUR])
        ax.imshow(arr, extent=extent, cmap=cmap, norm=BoundaryNorm(np.arange(MINERAL_CODE + 1) + 0.5, MINERAL_CODE),
                  interpolation="nearest")
        _map_axes(ax, extent, geographic, zone_layers, label_zones)
        present = set(np.unique(arr[np.isfinite(arr)]).astype(int))
        leg = [Patch(color=METHOD_COLOURS[m], label=METHOD_LABELS[m]) for m, c in METHOD_CODES.items() if c in present]
        if MINERAL_CODE in present:
            leg.append(Patch(color=MINERAL_COLOUR, label=MINERAL_LABEL))
        if leg:
            first = ax.get_legend()
            ax.legend(handles=leg, loc="upper left", title="burn depth from", title_fontsize=7, framealpha=0.9)
            if first is not None:
                ax.add_artist(first)
        return _png(fig)


def _chart_rows(rows, key=lambda r: (r.get("carbon_smouldering_t") or 0) + (r.get("carbon_flaming_t") or 0)):
    """Per layer, the zones with burned area, largest first, at most MAX_CHART_ZONES; and whether cut."""
    layers: dict = {}
    for r in rows:
        if r.get("layer") == TOTAL_LAYER:
            continue
        if not (_finite(r.get("burned_area_ha")) or 0) > 0:
            continue
        layers.setdefault(r["layer"], []).append(r)
    cut = False
    for name, rs in layers.items():
        rs.sort(key=lambda r: -(_finite(key(r)) or 0))
        if len(rs) > MAX_CHART_ZONES:
            cut = True
            layers[name] = rs[:MAX_CHART_ZONES]
    return layers, cut


def zone_chart(rows: list[dict], flaming: bool = True) -> str | None:
    """Carbon per zone, smouldering and flaming side by side, with 95 % interval bars when present
    (smouldering only when ``flaming`` is False: flaming was not estimated)."""
    layers, _ = _chart_rows(rows)
    if not layers:
        return None
    n = [len(v) for v in layers.values()]
    with _style():
        fig = _figure(7.4, 0.30 * sum(n) + 0.55 * len(n) + 0.9)
        axes = fig.subplots(len(n), 1, sharex=True, gridspec_kw={"height_ratios": n}, squeeze=False)[:, 0]
        for ax, (layer, rs) in zip(axes, layers.items()):
            y = np.arange(len(rs))
            bars = ((-0.2, "smouldering", "below ground (smouldering peat)"),
                    (0.2, "flaming", "above ground (flaming vegetation)")) if flaming else (
                (0.0, "smouldering", "below ground (smouldering peat)"),)
            for off, phase, label in bars:
                key = f"carbon_{phase}_t"
                v = np.array([_finite(r.get(key)) or 0.0 for r in rs])
                lo = np.array([_finite(r.get(f"{key}_lo")) for r in rs], dtype=float)
                hi = np.array([_finite(r.get(f"{key}_hi")) for r in rs], dtype=float)
                err = None
                if np.isfinite(lo).any():
                    err = np.vstack([np.clip(v - np.where(np.isfinite(lo), lo, v), 0, None),
                                     np.clip(np.where(np.isfinite(hi), hi, v) - v, 0, None)])
                ax.barh(y + off, v, height=0.38 if flaming else 0.6, color=PHASE_COLOURS[phase], label=label,
                        xerr=err, error_kw={"ecolor": "#222222", "elinewidth": 0.8, "capsize": 2})
            ax.set_yticks(y, [_mpl(r["zone"]) for r in rs])
            ax.set_ylim(len(rs) - 0.5, -0.5)
            ax.set_title(_mpl(f"zone layer: {layer}"), loc="left")
            ax.grid(axis="x", color="#dddddd", linewidth=0.6)
            ax.set_axisbelow(True)
        fig.legend(*axes[0].get_legend_handles_labels(), loc="outside upper center", ncols=2, frameon=False)
        axes[-1].set_xlabel("carbon released [t C]")
        axes[-1].xaxis.set_major_formatter(_thousands())
        return _png(fig)


def _thousands():
    from matplotlib.ticker import FuncFormatter

    return FuncFormatter(lambda x, _: f"{x:,.0f}" if abs(x) >= 1000 or x == int(x) else f"{x:g}")


def method_share_chart(rows: list[dict]) -> str | None:
    """Share of below-ground carbon by depth method: the run total and each zone (stacked to 100 %)."""
    total = next((r for r in rows if r.get("layer") == TOTAL_LAYER), None)
    layers, _ = _chart_rows(rows, key=lambda r: r.get("carbon_smouldering_t") or 0)
    items = ([("run total", total)] if total else []) + [
        (f"{layer}: {r['zone']}", r) for layer, rs in layers.items() for r in rs]
    items = [(lab, r) for lab, r in items if (_finite(r.get("carbon_smouldering_t")) or 0) > 0]
    if not items:
        return None
    with _style():
        fig = _figure(7.4, 0.28 * len(items) + 1.1)
        ax = fig.add_subplot()
        y = method_bars(ax, [{m: r.get(f"carbon_share_{m}") for m in METHOD_CODES} for _, r in items])
        ax.set_yticks(y, [_mpl(lab) for lab, _ in items])
        if total:
            ax.get_yticklabels()[0].set_fontweight("bold")
        ax.set_ylim(len(items) - 0.5, -0.5)
        ax.set_xlim(0, 100)
        ax.set_xlabel("share of below-ground carbon by the method that gave the burn depth [%]")
        ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.12 if len(items) > 6 else -0.3), ncols=3,
                  frameon=False)
        return _png(fig)


def method_bars(ax, shares: list[dict], height: float = 0.62) -> np.ndarray:
    """Horizontal bars stacked to 100 %, one per item of ``shares`` (method -> share of carbon, 0..1),
    in the method colours; returns the bars' y positions."""
    y = np.arange(len(shares))
    left = np.zeros(len(shares))
    for m in METHOD_CODES:
        s = np.array([100.0 * (_finite(sh.get(m)) or 0.0) for sh in shares])
        ax.barh(y, s, left=left, height=height, color=METHOD_COLOURS[m], label=METHOD_LABELS[m])
        left += s
    return y


def daily_chart(daily: list[dict]) -> str | None:
    """Carbon released per day (stacked bars by phase) and the cumulative carbon of each phase."""
    if not daily:
        return None
    import matplotlib.dates as mdates

    days = sorted({dt.date.fromisoformat(str(r["date"])[:10]) for r in daily})
    start, end = days[0], days[-1]
    n = (end - start).days + 1
    axis = [start + dt.timedelta(days=k) for k in range(n)]
    series = {p: np.zeros(n) for p in PHASE_COLOURS}
    for r in daily:
        p = r.get("phase")
        if p in series:
            series[p][(dt.date.fromisoformat(str(r["date"])[:10]) - start).days] += _finite(r.get("carbon_t")) or 0.0
    with _style():
        fig = _figure(7.4, 4.4)
        ax1, ax2 = fig.subplots(2, 1, sharex=True, gridspec_kw={"height_ratios": [3, 2]})
        x = mdates.date2num(axis)
        bottom = np.zeros(n)
        labels = {"smouldering": "below ground (smouldering peat)", "flaming": "above ground (flaming vegetation)"}
        for p, c in PHASE_COLOURS.items():
            ax1.bar(x, series[p], bottom=bottom, width=0.85, color=c, label=labels[p], align="center")
            bottom += series[p]
            ax2.plot(x, np.cumsum(series[p]), color=c, linewidth=1.8, label=labels[p],
                     linestyle="-" if p == "smouldering" else "--", drawstyle="steps-mid")
        ax1.set_ylabel("carbon released\n[t C per day]")
        ax2.set_ylabel("cumulative carbon\n[t C]")
        ax2.set_xlabel("date (UTC)")
        for ax in (ax1, ax2):
            ax.grid(axis="y", color="#dddddd", linewidth=0.6)
            ax.set_axisbelow(True)
            ax.yaxis.set_major_formatter(_thousands())
        fig.legend(*ax1.get_legend_handles_labels(), loc="outside upper center", ncols=2, frameon=False)
        loc = mdates.AutoDateLocator(maxticks=10)
        ax2.xaxis.set_major_locator(loc)
        ax2.xaxis.set_major_formatter(mdates.ConciseDateFormatter(loc))
        ax2.set_xlim(x[0] - 0.6, x[-1] + 0.6)
        return _png(fig)


def contribution_chart(contributions: list[tuple[str, float]],
                       quantity: str = "below-ground carbon [t C]") -> str | None:
    """Share of the variance of the run's total of ``quantity`` by uncertainty source."""
    if not contributions:
        return None
    items = sorted(contributions, key=lambda kv: -kv[1])
    with _style():
        fig = _figure(7.0, 0.3 * len(items) + 0.9)
        ax = fig.add_subplot()
        y = np.arange(len(items))
        ax.barh(y, [100.0 * v for _, v in items], height=0.6, color=OKABE_ITO_NAMED["bluish_green"])
        ax.set_yticks(y, [_mpl(_pretty(k)) for k, _ in items])
        ax.set_ylim(len(items) - 0.5, -0.5)
        ax.set_xlabel(_mpl(f"share of the variance of the run total of {quantity.split(' [')[0]} [%]"))
        ax.grid(axis="x", color="#dddddd", linewidth=0.6)
        ax.set_axisbelow(True)
        return _png(fig)


def _pretty(key) -> str:
    return str(key).replace("_", " ")


_SUFFIX_UNITS = [("_kg_per_mj", "kg/MJ"), ("_t_per_ha", "t/ha"), ("_m_per_yr", "m/yr"), ("_g_per_kg", "g/kg"),
                 ("_years", "yr"), ("_m2", "m²"), ("_mj", "MJ"), ("_ha", "ha"), ("_kg", "kg"), ("_m", "m"),
                 ("_s", "s"), ("_t", "t"), ("_pct", "%")]


def _label_with_unit(key) -> str:
    """``"event_distance_m" -> "event distance [m]"``, ``"n_events" -> "events [count]"``."""
    key = str(key)
    if key.startswith("n_"):
        return f"{_pretty(key[2:])} [count]"
    for suffix, unit in _SUFFIX_UNITS:
        if key.endswith(suffix) and len(key) > len(suffix):
            return f"{_pretty(key[: -len(suffix)])} [{unit}]"
    return _pretty(key)


# ----------------------------------------------------------------------------- context


def _iv(row: dict, key: str) -> dict:
    """A cell: value text and interval text ("" without one)."""
    return {"v": fmt_num(row.get(key)), "r": fmt_range(row.get(f"{key}_lo"), row.get(f"{key}_hi"))}


def _quantity(totals: dict, key: str) -> dict:
    q = (totals.get("quantities") or {}).get(key) or {}
    return {"value": q.get("value"), "lo": q.get("lo"), "hi": q.get("hi"), "unit": q.get("unit", "")}


def _headline(total: dict, totals: dict, gwp_name: str, flaming_estimated: bool, frp_route: bool) -> dict:
    def card(key):
        q = _quantity(totals, key)
        value = q["value"] if q["value"] is not None else total.get(key)
        lo = q["lo"] if q["lo"] is not None else total.get(f"{key}_lo")
        hi = q["hi"] if q["hi"] is not None else total.get(f"{key}_hi")
        return {"v": fmt_num(value), "r": fmt_range(lo, hi), "text": fmt_interval(value, lo, hi), "raw": value}

    h = {
        "carbon_smouldering": card("carbon_smouldering_t"), "co2e_smouldering": card("co2e_smouldering_t"),
        "peat": card("peat_burned_t"), "carbon_flaming": card("carbon_flaming_t"),
        "co2e_flaming": card("co2e_flaming_t"), "area": fmt_num(total.get("burned_area_ha")),
        "unestimated": fmt_num(total.get("unestimated_area_ha")),
        "has_unestimated": (_finite(total.get("unestimated_area_ha")) or 0) > 0,
        "depth": fmt_num(total.get("mean_burn_depth_m")), "survey_share": fmt_pct(total.get("carbon_share_survey")),
        "gwp": gwp_name, "flaming_estimated": flaming_estimated, "ratio": None, "frp": None,
    }
    cs, cf = _finite(total.get("carbon_smouldering_t")), _finite(total.get("carbon_flaming_t"))
    if flaming_estimated and cs is not None and cf:
        h["ratio"] = fmt_num(cs / cf, 2)
    if frp_route and _finite(total.get("carbon_frp_only_t")):
        h["frp"] = {"carbon": fmt_num(total.get("carbon_frp_only_t")),
                    "ratio": fmt_num(total.get("smouldering_to_frp_ratio"), 2)}
    return h


#: Zones listed per layer in the report's tables (the largest by carbon; all are in zones.csv).
MAX_TABLE_ZONES = 100


def _zone_groups(rows: list[dict]) -> tuple[list[dict], dict | None]:
    groups: list[dict] = []
    total = None
    for r in rows:
        if r.get("layer") == TOTAL_LAYER:
            total = r
            continue
        if not groups or groups[-1]["layer"] != r["layer"]:
            groups.append({"layer": r["layer"], "rows": [], "more": 0})
        groups[-1]["rows"].append(r)
    for g in groups:
        zones = [r for r in g["rows"] if r["zone"] != OUTSIDE]
        if len(zones) > MAX_TABLE_ZONES:
            outside = [r for r in g["rows"] if r["zone"] == OUTSIDE]
            zones.sort(key=lambda r: -((_finite(r.get("carbon_smouldering_t")) or 0)
                                       + (_finite(r.get("carbon_flaming_t")) or 0)))
            g["more"] = len(zones) - MAX_TABLE_ZONES
            g["rows"] = zones[:MAX_TABLE_ZONES] + outside
    return groups, total


def _cells(row: dict, spec) -> list[dict]:
    out = []
    for key, _, unit in spec:
        if unit == "%":
            out.append({"v": fmt_pct(row.get(key)), "r": ""})
        elif unit == "count":
            out.append({"v": fmt_int(row.get(key)), "r": ""})
        else:
            out.append(_iv(row, key))
    return out


def _table(rows: list[dict], spec) -> dict:
    groups, total = _zone_groups(rows)
    return {
        "columns": [{"label": label, "unit": unit} for _, label, unit in spec],
        "groups": [{"layer": g["layer"], "more": g["more"],
                    "rows": [{"zone": r["zone"], "outside": r["zone"] == OUTSIDE, "cells": _cells(r, spec)}
                             for r in g["rows"]]}
                   for g in groups],
        "total": {"zone": "all zones (run total)", "cells": _cells(total, spec)} if total else None,
    }


def _qa_rows(qa: dict) -> list[tuple[str, str]]:
    if not qa or "shift_x_m" not in qa:
        return []
    rows = [
        ("co-registration method", str(qa.get("method", "–"))),
        ("horizontal shift applied to the post-fire survey, x / y [m]",
         f"{fmt_num(qa.get('shift_x_m'))} / {fmt_num(qa.get('shift_y_m'))}"),
        ("vertical offset removed [m]", fmt_num(qa.get("vertical_offset_m"))),
        ("stable-ground spread (NMAD) before → after co-registration [m]",
         f"{fmt_num(qa.get('stable_nmad_before_m'))} → {fmt_num(qa.get('stable_nmad_after_m'))}"),
        ("stable-ground median difference before → after [m]",
         f"{fmt_num(qa.get('stable_median_before_m'))} → {fmt_num(qa.get('stable_median_after_m'))}"),
        ("stable-ground pixels sampled [count]", fmt_int(qa.get("stable_sample_pixels"))),
        ("level of detection, 95 % [m]", fmt_num(qa.get("level_of_detection_m"))),
        ("survey error spread over the scene", str(qa.get("survey_error_spread", "–"))),
        ("surveyed burned area below the level of detection [%]",
         fmt_pct(qa.get("share_of_surveyed_area_below_lod"))),
        ("surveyed area where the burn depth was capped by the peat thickness [%]",
         fmt_pct(qa.get("share_of_surveyed_area_capped_by_thickness"))),
        ("burned area with no estimate [%]", fmt_pct(qa.get("share_of_burned_area_unestimated"))),
        ("survey outliers inside the scars (rise or fall beyond 5 levels of detection; kept in the sums) [ha]",
         fmt_num(qa.get("outlier_area_ha"))),
        ("burned area on mineral soil (no peat burned) [ha]", fmt_num(qa.get("mineral_soil_area_ha"))),
        ("area whose bulk density was filled from the fallback [ha]", fmt_num(qa.get("bulk_density_filled_area_ha"))),
        ("area whose carbon fraction was filled from the fallback [ha]",
         fmt_num(qa.get("carbon_fraction_filled_area_ha"))),
    ]
    if qa.get("tilt_coefficients"):
        rows.insert(3, ("planar tilt removed (coefficients)", ", ".join(fmt_num(c) for c in qa["tilt_coefficients"])))
    if qa.get("water_table_fit"):
        rows.append(("water-table model fit", str(qa["water_table_fit"])))
    if _finite(qa.get("water_table_cv_rmse")) is not None:
        rows.append(("water-table model, leave-scar-out bias / RMSE of scar carbon [%]",
                     f"{_pct(qa.get('water_table_cv_bias'))} / {_pct(qa.get('water_table_cv_rmse')).lstrip('+')}"
                     f" ({fmt_int(qa.get('water_table_cv_scars'))} scars)"))
    if qa.get("water_table_cv_scores"):
        rows.append(("water-table model covariates chosen by leave-scar-out cross-validation",
                     " + ".join(qa.get("water_table_covariates") or []) or "none (water table alone)"))
        rows.append(("water-table model, rms relative error of scar carbon per covariate set tried [%]",
                     ", ".join(f"{k} {_pct(v).lstrip('+')}" for k, v in qa["water_table_cv_scores"].items())))
    elif qa.get("water_table_covariates"):
        rows.append(("water-table model covariates (set in the configuration)", " + ".join(qa["water_table_covariates"])))
    if _finite(qa.get("share_of_modelled_area_extrapolated")) is not None:
        rows.append(("water-table-modelled area outside the fitted water-table range [%]",
                     fmt_pct(qa.get("share_of_modelled_area_extrapolated"))))
    if qa.get("burned_area_accuracy"):
        rows.append(("burned-area map accuracy (area term of the intervals)", str(qa["burned_area_accuracy"])))
    for c in qa.get("survey_error_calibration") or []:
        # the patch check of the survey error model (engine.survey_calibration): ratio near 1 = calibrated
        rows.append((f"survey error check, {c['scope']}: patch RMS / model sd [-]",
                     f"{fmt_num(c.get('ratio'))} — {c.get('sentence', '')}"))
    return rows


def _water_table(models) -> list[dict]:
    if not isinstance(models, dict) or not models:
        return []
    if "slope" in models:  # one model, not a mapping of groups
        models = {"all": models}
    names = {"all": "all scars", "first_fire": "first fires", "repeat_fire": "repeat fires"}
    out = []
    for key, m in models.items():
        if not isinstance(m, dict):
            continue
        rng = m.get("water_table_range") or [None, None]
        out.append({
            "group": names.get(key, _pretty(key)),
            "slope": fmt_num(m.get("slope")) + (f" ± {fmt_num(m.get('slope_se'))}" if _finite(m.get("slope_se"))
                                                     is not None else ""),
            "intercept": fmt_num(m.get("intercept")) + (f" ± {fmt_num(m.get('intercept_se'))}"
                                                        if _finite(m.get("intercept_se")) is not None else ""),
            "n": fmt_int(m.get("n")), "r2": fmt_num(m.get("r2")), "rmse": fmt_num(m.get("rmse")),
            "range": fmt_range(rng[0], rng[1]) if len(rng) == 2 else "",
            "method": str(m.get("method", "")), "confidence": str(m.get("confidence", "")),
            "basis": str(m.get("basis") or ""), "se_method": str(m.get("se_method") or ""),
            "estimator": str(m.get("estimator") or ""),
            "cv_bias": _pct(m.get("cv_bias")), "cv_rmse": _pct(m.get("cv_rmse")),
            "cv_method": str(m.get("cv_method") or ""),
            "notes": [str(n) for n in (m.get("notes") or [])],
        })
    return out


def _pct(v) -> str:
    """A relative error [-] as a signed percentage with one decimal, '' when missing."""
    f = _finite(v)
    return "" if f is None else f"{100 * f:+.1f}"


def _field_plots(plots) -> dict | None:
    if not isinstance(plots, dict):
        return None
    labels = METHOD_LABELS
    rows = []
    for key, s in (plots.get("by_method") or {}).items():
        if isinstance(s, dict):
            rows.append(_plot_row(labels.get(key, _pretty(key)), s))
    extra = plots.get("water_table_model_at_all_plots")
    if isinstance(extra, dict):
        rows.append(_plot_row("water-table model at every plot (incl. surveyed)", extra))
    return {"n": fmt_int(plots.get("n_plots")), "rows": rows}


def _plot_row(label, s):
    return {"method": label, "n": fmt_int(s.get("n")), "bias": fmt_num(s.get("bias")), "rmse": fmt_num(s.get("rmse")),
            "mae": fmt_num(s.get("mae")), "obs": fmt_num(s.get("mean_observed")),
            "pred": fmt_num(s.get("mean_predicted")), "note": str(s.get("note") or "")}


def uncertainty_contributions(unc) -> list[tuple[str, float]]:
    """(source, share of variance) pairs from ``totals["uncertainty"]["contributions"]``.

    Accepts a flat mapping source -> number, source -> sequence (per zone with the run total last:
    the last value is used) or source -> mapping with a ``"total"`` entry; or one level more,
    quantity -> such a mapping (the carbon quantity is preferred). Anything else gives [].
    """
    if not isinstance(unc, dict):
        return []
    c = unc.get("contributions")
    if not isinstance(c, dict) or not c:
        return []
    if all(isinstance(v, dict) for v in c.values()) and not all("total" in v for v in c.values()):
        key = next((k for k in c if "carbon" in str(k)), next(iter(c)))
        c = c[key]
        if not isinstance(c, dict):
            return []
    out = []
    for k, v in c.items():
        if isinstance(v, dict):
            v = v.get("total")
        elif isinstance(v, (list, tuple, np.ndarray)):
            v = v[-1] if len(v) else None
        f = _finite(v)
        if f is not None:
            out.append((str(k), f))
    return out


def _value_text(v) -> str:
    if isinstance(v, dict):
        return "; ".join(f"{_label_with_unit(k)}: {_value_text(x)}" for k, x in v.items())
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_value_text(x) for x in v) + "]"
    if isinstance(v, float):
        return fmt_num(v)
    return "–" if v is None else str(v)


def _uncertainty_sources(unc) -> list[dict]:
    """The drawn sources (``totals["uncertainty"]["sources"]``: name, distribution, parameters,
    citation, note), as text; [] when absent or not a list of mappings."""
    src = unc.get("sources") if isinstance(unc, dict) else None
    if not isinstance(src, list):
        return []
    return [{"name": _pretty(s.get("name", "")), "distribution": str(s.get("distribution") or ""),
             "parameters": _value_text(s.get("parameters") or {}), "citation": str(s.get("citation") or ""),
             "note": str(s.get("note") or "")} for s in src if isinstance(s, dict)]


def _contributions_by_zone(unc) -> dict | None:
    """``layer -> zone -> source -> share`` (``totals["uncertainty"]["contributions_by_zone"]``) as a
    table of percentages; None when absent or of another shape."""
    by = unc.get("contributions_by_zone") if isinstance(unc, dict) else None
    if not isinstance(by, dict):
        return None
    sources: list[str] = []
    groups = []
    for layer, zones in by.items():
        if not isinstance(zones, dict):
            return None
        rows = []
        for zone, shares in zones.items():
            if not isinstance(shares, dict):
                return None
            for k in shares:
                if k not in sources:
                    sources.append(k)
            rows.append((zone, shares))
        groups.append((layer, rows[:MAX_TABLE_ZONES] + [r for r in rows[MAX_TABLE_ZONES:] if r[0] == OUTSIDE]))
    if not sources:
        return None
    return {"sources": [_pretty(k) for k in sources],
            "groups": [{"layer": layer, "rows": [{"zone": z, "outside": z == OUTSIDE,
                                                   "cells": [fmt_pct(sh.get(k)) for k in sources]} for z, sh in rows]}
                       for layer, rows in groups]}


def _uncertainty_items(unc) -> tuple[list[tuple[str, str]], list[str]]:
    """Scalar facts and texts of the uncertainty record, other than the contributions and sources."""
    if not isinstance(unc, dict):
        return [], []
    items, texts = [], []
    for k, v in unc.items():
        if k in ("contributions", "contributions_by_zone", "contributions_quantity", "sources"):
            continue
        if isinstance(v, (str, int, float, bool)) or v is None:
            if isinstance(v, str) and len(v) > 80:
                texts.append(f"{_pretty(k)}: {v}")
            else:
                items.append((_pretty(k), fmt_num(v) if isinstance(v, float) else str(v)))
        elif isinstance(v, (list, tuple)) and all(isinstance(x, str) for x in v):
            texts.extend(str(x) for x in v)
        elif isinstance(v, dict):
            for k2, v2 in v.items():
                if isinstance(v2, (str, int, float)) and not isinstance(v2, bool):
                    items.append((f"{_pretty(k)}: {_label_with_unit(k2)}",
                                  fmt_num(v2) if isinstance(v2, float) else str(v2)))
    return items, texts


def _factor_set(fs, role: str, used: bool) -> dict:
    from ..science import gases

    ef = dict(getattr(fs, "ef", {}) or {})
    sd = dict(getattr(fs, "sd", {}) or {})
    status = dict(getattr(fs, "status", {}) or {})
    cites = dict(getattr(fs, "citations", {}) or {})
    mce = None
    if "co2" in ef and "co" in ef:
        try:
            mce = fmt_num(float(gases.modified_combustion_efficiency(ef["co2"], ef["co"])))
        except Exception:  # a malformed user set still gets its table
            mce = None
    return {
        "role": role, "used": used, "name": getattr(fs, "name", "?"), "citation": getattr(fs, "citation", ""),
        "doi": getattr(fs, "doi", None) or "", "notes": getattr(fs, "notes", "") or "",
        "source_path": getattr(fs, "source_path", None) or "", "mce": mce,
        "rows": [{"gas": gas_label(g), "ef": fmt_plain(v), "sd": fmt_plain(sd.get(g)),
                  "citation": cites.get(g, ""), "status": status.get(g, "")} for g, v in ef.items()],
        "any_recalled": any(s == "recalled" for s in status.values()),
    }


def _grid(prov_grid: dict) -> dict:
    t = prov_grid.get("transform") or [None] * 6
    px = f"{fmt_num(abs(t[0]))} × {fmt_num(abs(t[4]))}" if _finite(t[0]) and _finite(t[4]) else "–"
    return {"crs": str(prov_grid.get("crs", "–")),
            "size": f"{fmt_int(prov_grid.get('width'))} × {fmt_int(prov_grid.get('height'))}", "pixel": px}


def _created(created: str | None) -> str:
    if not created:
        return "–"
    try:
        d = dt.datetime.fromisoformat(created)
    except ValueError:
        return str(created)
    return f"{d.day} {d.strftime('%B %Y, %H:%M')} UTC"


def _zone_frames(cfg, crs) -> list:
    from ..io.vectors import read_polygons

    out = []
    for z in getattr(cfg, "zones", ()) or ():
        try:
            layer = read_polygons(z.path, crs, z.name, z.layer)
            frame = layer.frame
            ids = [printable(i) for i in frame[z.id].astype(str)] if z.id in frame.columns else None
            out.append((z.name, frame, ids))
        except Exception:  # a map without outlines is still a map
            continue
    return out


def _quantity_label(unc) -> str:
    q = unc.get("contributions_quantity") if isinstance(unc, dict) else None
    for key, label, unit in ZONE_TABLE + GAS_TABLE:
        if key == q:
            return f"{label.lower()} [{unit}]"
    return _pretty(q) if q else "below-ground carbon [t C]"


def build_context(result, cfg, prov: dict, factors, raster_dir: Path | None = None, zone_layers=None) -> dict:
    """Everything the template shows, as plain strings, numbers and lists (no file is written).

    The maps are drawn from the rasters in ``raster_dir`` (default: the run's output folder).
    ``zone_layers``: the run's zone layers as ``(name, frame, ids)``, already in the grid's CRS;
    when None they are read again from ``cfg`` (reading 10,000 polygons takes about 0.4 s).
    """
    totals = result.totals or {}
    method = totals.get("method") or {}
    total = result.total if result.zones else {}
    has_intervals = any(f"{k}_lo" in total for k in ("carbon_smouldering_t", "co2e_smouldering_t"))
    flaming_text = str(method.get("flaming") or "")
    flaming_estimated = bool(method.get("flaming_factors"))
    frp_route = bool(getattr(factors, "frp_route", False)) and flaming_estimated
    out_dir = Path(raster_dir if raster_dir is not None else result.out_dir)

    crs = (prov.get("grid") or {}).get("crs")
    if zone_layers is not None:
        zone_frames = list(zone_layers)
    else:
        zone_frames = _zone_frames(cfg, crs) if crs else []
    n_zones = sum(len(f) for _, f, _ in zone_frames)
    label_zones = 0 < n_zones <= MAX_MAP_LABELS
    _, zones_cut = _chart_rows(result.zones)
    unc = totals.get("uncertainty")
    contributions = uncertainty_contributions(unc)
    unc_items, unc_texts = _uncertainty_items(unc)

    figures = {
        "depth": map_figure(out_dir / "burn_depth.tif", "burn depth", "m", "cividis", zone_frames, label_zones),
        "carbon": map_figure(out_dir / "carbon_smouldering.tif", "carbon released below ground", "kg C m⁻²",
                             "viridis", zone_frames, label_zones),
        "method_map": method_map_figure(out_dir / "depth_method.tif", zone_frames, label_zones),
        "zones": zone_chart(result.zones, flaming=flaming_estimated),
        "methods": method_share_chart(result.zones),
        "daily": daily_chart(result.daily),
        "contributions": contribution_chart(contributions, _quantity_label(unc)),
    }

    depth_methods = []
    for m, rec in (method.get("depth") or {}).items():
        depth_methods.append({"key": m, "label": METHOD_LABELS.get(m, _pretty(m)), "tier": rec.get("tier", ""),
                              "area": fmt_num(rec.get("area_ha")), "share": fmt_pct(rec.get("share_of_carbon")),
                              "colour": METHOD_COLOURS.get(m, "#999999")})
    params = method.get("flaming_parameters") or {}
    flaming_params = []
    for k, v in params.items():
        if isinstance(v, dict):
            counts = all(isinstance(x, int) for x in v.values())
            v = ", ".join(f"{_pretty(k2)}: {fmt_num(v2) if isinstance(v2, float) else v2}" for k2, v2 in v.items())
            flaming_params.append((f"{_pretty(k)}{' [count]' if counts else ''}", v))
        else:
            flaming_params.append((_label_with_unit(k), fmt_num(v) if isinstance(v, float) else str(v)))

    inventory = [{"year": str(r.get("year", "")), "phase": r.get("phase", ""), "gas": r.get("gas", ""),
                  "v": fmt_num(r.get("emissions_gg")),
                  "r": fmt_range(r.get("emissions_gg_lo"), r.get("emissions_gg_hi")),
                  "a1": _inv_pct(r.get("approach1_pct"), "±"),
                  "a2": (f"{_inv_pct(r.get('approach2_minus_pct'), '−')} / {_inv_pct(r.get('approach2_plus_pct'), '+')}"
                         if _inv_pct(r.get("approach2_minus_pct"), "") else "")}
                 for r in result.inventory or []]

    gwp = getattr(factors, "gwp", None)
    factor_sets = [
        _factor_set(factors.smouldering, "Below ground (smouldering peat): the gases of the peat burned", True),
        _factor_set(factors.flaming, "Above ground (flaming vegetation)", flaming_estimated),
        _factor_set(factors.tier1, "IPCC Tier 1 (pixels with no depth estimate, and the Tier 1 comparison)", True),
    ]
    inputs = [_input_row(k, rec) for k, rec in (prov.get("inputs") or {}).items()]
    versions = [(k, str(v)) for k, v in (prov.get("versions") or {}).items() if v is not None]

    return {
        "run_name": str(getattr(cfg, "name", totals.get("run", "peatburn run"))),
        "created": _created(prov.get("created_utc")), "created_utc": prov.get("created_utc", ""),
        "year": totals.get("year"), "version": (prov.get("versions") or {}).get("peatburn", ""),
        "has_intervals": has_intervals, "draws": prov.get("draws", 0), "seed": prov.get("seed"),
        "uncertainty_text": str(method.get("uncertainty") or ""),
        "headline": _headline(total, totals, getattr(gwp, "name", ""), flaming_estimated, frp_route),
        "cautions": [str(c) for c in totals.get("cautions") or []],
        "notes": [str(n) for n in totals.get("notes") or []],
        "figures": figures, "zones_cut": zones_cut, "max_chart_zones": MAX_CHART_ZONES, "max_table_zones": MAX_TABLE_ZONES,
        "zone_table": _table(result.zones, [c for c in ZONE_TABLE if flaming_estimated or "flaming" not in c[0]]),
        "gas_table": _table(result.zones, [c for c in GAS_TABLE if flaming_estimated or "flaming" not in c[0]]),
        "frp_table": _table(result.zones, FRP_TABLE + (FRP_PEAT_ROWS if getattr(factors, "peat_coefficient", None)
                                                        else [])) if frp_route else None,
        "peat_coefficient": fmt_num(getattr(factors, "peat_coefficient", None)),
        "frp_min_area": fmt_num(MIN_AREA_FOR_FRE_RATIO_HA),
        "daily_days": len({r["date"] for r in result.daily or []}),
        "depth_methods": depth_methods, "unestimated": fmt_num(method.get("unestimated_area_ha")),
        "mineral": fmt_num(method.get("mineral_soil_area_ha")), "tier1_only": bool(method.get("tier1_only")),
        "gas_form": str(method.get("gas_form") or "dry_matter"),
        "gas_form_text": str(method.get("gas_form_text") or "gas = dry matter burned x emission factor"),
        "factor_sensitivity": [{"set": r.get("set", ""), "chosen": bool(r.get("chosen")), "status": r.get("status", ""),
                                "derived_from": r.get("derived_from") or "",
                                "co2": fmt_num(r.get("co2_t")), "ch4": fmt_num(r.get("ch4_t")),
                                "co": fmt_num(r.get("co_t")), "co2e": fmt_num(r.get("co2e_t")),
                                "ratio": fmt_num(r.get("co2e_vs_chosen"))}
                               for r in totals.get("smouldering_factor_sensitivity") or []],
        "tier1_comparison": {"carbon": fmt_num(total.get("carbon_tier1_t")), "co2e": fmt_num(total.get("co2e_tier1_t")),
                             "ours": fmt_num(total.get("carbon_smouldering_t"))},
        "flaming": {"estimated": flaming_estimated, "route": flaming_text, "params": flaming_params,
                    "factors": method.get("flaming_factors") or "", "frp_route": frp_route,
                    "carbon_fraction": fmt_num(method.get("vegetation_carbon_fraction",
                                                          getattr(factors, "vegetation_carbon_fraction", None))),
                    "coefficient": fmt_num(getattr(factors, "coefficient", None))},
        "water_table": _water_table(totals.get("water_table_model")),
        "qa": _qa_rows(result.qa or totals.get("qa") or {}),
        "qa_method": str((result.qa or {}).get("method", "")),
        "field_plots": _field_plots(totals.get("field_plots")),
        "uncertainty": {"present": isinstance(unc, dict), "contributions": [(_pretty(k), fmt_pct(v)) for k, v in
                                                                          sorted(contributions, key=lambda kv: -kv[1])],
                        "quantity": _quantity_label(unc), "by_zone": _contributions_by_zone(unc),
                        "sources": _uncertainty_sources(unc), "facts": unc_items, "texts": unc_texts},
        "inventory": inventory,
        "inventory_conventions": [(k, v) for k, v in INVENTORY_CONVENTIONS.items() if k != "flaming" or flaming_estimated],
        "factor_sets": factor_sets,
        "gwp": {"name": getattr(gwp, "name", ""), "citation": getattr(gwp, "citation", ""),
                "status": getattr(gwp, "status", ""),
                "table": [(gas_label(g), fmt_plain(v)) for g, v in (getattr(gwp, "gwp", {}) or {}).items()]},
        "references": REFERENCES,
        "provenance": {"inputs": inputs, "versions": versions, "grid": _grid(prov.get("grid") or {}),
                       "config_file": prov.get("config_file") or "", "outputs": prov.get("outputs") or [],
                       "seed": prov.get("seed"), "draws": prov.get("draws")},
        "palette": {"smouldering": PHASE_COLOURS["smouldering"], "flaming": PHASE_COLOURS["flaming"]},
    }


def render(context: dict) -> str:
    """The HTML text of the report for a context from :func:`build_context`."""
    from jinja2 import Environment, StrictUndefined

    env = Environment(autoescape=True, undefined=StrictUndefined, trim_blocks=True, lstrip_blocks=True)
    text = resources.files("peatburn.outputs").joinpath("templates/report.html").read_text(encoding="utf-8")
    return env.from_string(text).render(**context)


def _input_row(key: str, rec: dict) -> dict:
    """One input of the provenance table; a mosaic or VRT shows its files' total size and count."""
    files = rec.get("files") or []
    size = rec.get("size_bytes")
    if size is None and files:
        size = sum(f.get("size_bytes") or 0 for f in files)
    sha = str(rec.get("sha256") or "")[:16]
    if files:
        hashed = sum(1 for f in files if f.get("sha256"))
        sha = (sha + "; " if sha else "") + f"{len(files)} files read, {hashed} hashed (provenance.json)"
    return {"key": key, "path": rec.get("path", ""), "size": fmt_int(size), "sha": sha}


def write_report(final: Path, result, cfg, prov: dict, factors, zone_layers=None) -> Path:
    """Render report.html for a finished run and write it atomically; returns its path.

    The figures are drawn from the rasters beside ``final`` (burn_depth.tif, carbon_smouldering.tif,
    depth_method.tif); a missing raster leaves its map out. ``zone_layers`` as in
    :func:`build_context`.
    """
    return write_text(final, render(build_context(result, cfg, prov, factors, raster_dir=Path(final).parent,
                                                  zone_layers=zone_layers)))
