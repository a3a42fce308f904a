"""Zone dossiers: one self-contained hand-over page per burned zone of a layer that asks for them.

``dossiers = true`` under a ``[[zones]]`` layer makes the run write ``dossiers/<stem>.html`` for every
zone of that layer with burned area (and ``.pdf`` with ``peatburn run --pdf``), plus
``dossiers/index.csv`` (layer, zone, file) and, where a field plan can be drawn,
``dossiers/<stem>_plots.csv`` (the suggested plot locations). The stem is made from the zone id by
:func:`peatburn.names.file_stems` (no path traversal, no clashes, also between layers).

A dossier holds: the zone's map (its boundary, the burn scars, the burn depth and the active-fire
detections coloured by date, each fire's first detection marked), its numbers with their 95 %
intervals and the depth methods' shares, its fires with the ignition attribution
(:mod:`peatburn.science.ignition`), the timeline of its detections, the field verification plan
(:mod:`peatburn.science.field_plan`), the data it rests on with their SHA-256 and the run's
provenance, and the cautions. Everything from the inputs is escaped (Jinja2 autoescape; matplotlib
never draws an input text).
"""

from __future__ import annotations

import datetime as dt
import hashlib
import math
from dataclasses import dataclass
from importlib import resources
from pathlib import Path

import numpy as np

from ..io.writers import write_csv, write_text
from ..names import file_stems, printable
from ..science import field_plan as fp
from ..science import ignition as ign
from . import report as rp

#: Folder of the dossiers inside the run's output folder.
FOLDER = "dossiers"
#: Longest side of a dossier map [px].
MAP_PIXELS = 600
#: Suggested plots listed per zone at most (the CSV beside the dossier holds the same list).
MAX_PLOTS = 200
#: Relation of a fire to the zone (science.ignition.relation_to_zone) in words.
RELATION_TEXT = {
    "started inside": "started inside this zone",
    "came in": "came in: first detected outside this zone, later inside it",
    "started outside": "started outside this zone (no later detection inside it clear of its boundary)",
    "undetermined": "undetermined: the first detection cannot be placed on one side of a boundary",
    "no detections": "no active-fire detection: the start is unknown",
}
IGNITION_CAUTION = (
    "Where a fire started is attributed from its earliest active-fire detection (common practice). "
    "Satellites see a spot at most a few times a day and not through cloud or thick smoke; a fire is first "
    "detected where it burned at the first clear overpass, which may be after it crossed a boundary. "
    "A detection whose pixel reaches a boundary is reported as undetermined, never assigned to a side.")
FIELD_CAUTION = (
    "Field teams: burnt and smouldering peat is dangerous ground (fire burning unseen below a crust, "
    "collapse into burned-out hollows, smoke). Visit plots only where local safety practice allows, "
    "never on ground that is still smouldering; move or drop a plot rather than take a risk.")


@dataclass
class DossierItem:
    """One dossier: the zone (layer, position in the layer, id), its file stem and its zones.csv row."""

    layer: str
    layer_index: int
    index: int
    zone: str
    stem: str
    row: dict

    @property
    def file(self) -> str:
        return f"{FOLDER}/{self.stem}.html"


def plan(cfg, inputs, rows) -> list[DossierItem]:
    """The dossiers a run writes: every zone with burned area of every layer with ``dossiers = true``."""
    items = []
    for li, (z, _layer, ids) in enumerate(inputs.zones):
        if not z.dossiers:
            continue
        lrows = [r for r in rows if r.get("layer") == z.name][:len(ids)]
        for i, (zid, row) in enumerate(zip(ids, lrows)):
            if (rp._finite(row.get("burned_area_ha")) or 0.0) > 0:
                items.append(DossierItem(z.name, li, i, str(zid), "", row))
    stems = file_stems([it.zone for it in items],
                       key=lambda k: f"{items[k].layer}\0{items[k].zone}\0{items[k].index}")
    for it, s in zip(items, stems):
        it.stem = s
    return items


def write_dossiers(out_dir: Path, items, result, cfg, prov: dict, inputs, fire_rows, ignitions: dict,
                   flame, periods) -> list[Path]:
    """Write every dossier of ``items`` (from :func:`plan`) and ``dossiers/index.csv``; returns the
    HTML paths. Dossiers of an earlier run in the folder that this run does not write are removed
    (only ``.html``, ``.pdf`` and ``_plots.csv`` files: the folder is the tool's own)."""
    folder = Path(out_dir) / FOLDER
    folder.mkdir(exist_ok=True)
    keep = {f"{it.stem}{sfx}" for it in items for sfx in (".html", ".pdf", "_plots.csv")} | {"index.csv"}
    for stale in folder.iterdir():
        if stale.is_file() and stale.name not in keep and stale.name.endswith((".html", ".pdf", "_plots.csv")):
            stale.unlink()
    common = _common(out_dir, result, cfg, prov)
    import shapely

    det = flame.detections if flame is not None and flame.detections is not None else None
    scars = np.asarray(inputs.scars.geometries, dtype=object)
    # trees built once: a layer of thousands of zones must not test every scar and detection per zone
    trees = {"scars": shapely.STRtree(scars),
             "det": shapely.STRtree(shapely.points(det[0], det[1])) if det is not None and len(det[0]) else None}
    from .fires import fire_ids

    scar_ids, _ = fire_ids(inputs.scars.frame, cfg.id_field)
    paths, index = [], []
    for it in items:
        _, layer, _ = inputs.zones[it.layer_index]
        geom = layer.frame.geometry.iloc[it.index]
        ctx = _context(it, geom, out_dir, inputs, fire_rows, scar_ids, scars, trees, ignitions.get(it.layer), det,
                       common)
        if ctx["plan"]["plots"]:
            write_csv(folder / f"{it.stem}_plots.csv", ctx["plan"]["plot_rows"], PLOT_COLUMNS)
            ctx["plan"]["csv"] = f"{it.stem}_plots.csv"
        paths.append(write_text(folder / f"{it.stem}.html", render(ctx)))
        index.append({"layer": it.layer, "zone": it.zone, "file": f"{it.stem}.html"})
    write_csv(folder / "index.csv", index, ["layer", "zone", "file"])
    return paths


PLOT_COLUMNS = ["plot", "measure", "x", "y", "lon", "lat", "burn_depth_m"]


def render(context: dict) -> str:
    """The dossier's HTML; its stylesheet is the report's own (one look for both pages, one place to
    change it), rendered with the report's phase colours."""
    from jinja2 import Environment, StrictUndefined

    env = Environment(autoescape=True, undefined=StrictUndefined, trim_blocks=True, lstrip_blocks=True)
    folder = resources.files("peatburn.outputs").joinpath("templates")
    report = folder.joinpath("report.html").read_text(encoding="utf-8")
    css = report[report.index("<style>") + len("<style>"):report.index("</style>")]
    style = env.from_string(css).render(palette={"smouldering": rp.PHASE_COLOURS["smouldering"],
                                                 "flaming": rp.PHASE_COLOURS["flaming"]})
    text = folder.joinpath("dossier.html").read_text(encoding="utf-8")
    return env.from_string(text).render(style=style, **context)


def _sha256(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for chunk in iter(lambda: f.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def _common(out_dir, result, cfg, prov) -> dict:
    """What every dossier of the run shows alike: provenance, data hashes, cautions."""
    totals = result.totals or {}
    inputs = [{"key": k, "path": rec.get("path", ""), "size": rp.fmt_int(rec.get("size_bytes")),
               "sha": str(rec.get("sha256", ""))} for k, rec in (prov.get("inputs") or {}).items()]
    outputs = []
    # provenance.json is written after the dossiers (it records their SHA-256; issue 22), so not here
    for name in ("zones.csv", "fires.csv", "totals.json", "burn_depth.tif",
                 "carbon_smouldering.tif", "depth_method.tif"):
        p = Path(out_dir) / name
        if p.is_file():
            outputs.append({"path": name, "sha": _sha256(p)})
    unc = totals.get("uncertainty") if isinstance(totals.get("uncertainty"), dict) else {}
    bd_cv = next((s.get("parameters", {}).get("cv") for s in unc.get("sources") or []
                  if isinstance(s, dict) and s.get("name") == "bulk_density"), None)
    return {
        "run_name": printable(getattr(cfg, "name", totals.get("run", ""))),
        "created": rp._created(prov.get("created_utc")), "version": (prov.get("versions") or {}).get("peatburn", ""),
        "year": totals.get("year"), "cautions": [str(c) for c in totals.get("cautions") or []],
        "ignition_caution": IGNITION_CAUTION, "field_caution": FIELD_CAUTION,
        "uncertainty_text": str((totals.get("method") or {}).get("uncertainty") or ""),
        "provenance": {"inputs": inputs, "outputs": outputs, "config_file": prov.get("config_file") or "",
                       "versions": [(k, str(v)) for k, v in (prov.get("versions") or {}).items() if v is not None],
                       "seed": prov.get("seed"), "draws": prov.get("draws")},
        "_by_zone": unc.get("contributions_by_zone") or {}, "_bd_cv": bd_cv,
        "_seed": int(getattr(cfg.uncertainty, "seed", 1)),
    }


# ----------------------------------------------------------------------------- one dossier

NUMBERS = [
    ("burned_area_ha", "Burned area", "ha"), ("mean_burn_depth_m", "Mean burn depth", "m"),
    ("peat_burned_t", "Peat burned", "t dry matter"), ("carbon_smouldering_t", "Carbon, below ground", "t C"),
    ("co2_smouldering_t", "CO₂, below ground", "t CO₂"), ("ch4_smouldering_t", "CH₄, below ground", "t CH₄"),
    ("co_smouldering_t", "CO, below ground", "t CO"), ("co2e_smouldering_t", "CO₂e, below ground", "t CO₂e"),
    ("carbon_flaming_t", "Carbon, above ground", "t C"), ("co2e_flaming_t", "CO₂e, above ground", "t CO₂e"),
    ("n_detections", "Active-fire detections inside", "count"),
]


def _context(it, geom, out_dir, inputs, fire_rows, scar_ids, scars, trees, li, det, common) -> dict:
    import shapely

    row = it.row
    numbers = [{"label": label, "unit": unit, **(rp._iv(row, key) if unit != "count"
                                                   else {"v": rp.fmt_int(row.get(key)), "r": ""})}
               for key, label, unit in NUMBERS if key in row]
    shares = [{"label": rp.METHOD_LABELS[m], "colour": rp.METHOD_COLOURS[m],
               "area": rp.fmt_num(row.get(f"area_{m}_ha")), "share": rp.fmt_pct(row.get(f"carbon_share_{m}"))}
              for m in rp.METHOD_CODES]

    # fires that reach the zone (their polygon overlaps it)
    hits = [int(k) for k in np.sort(trees["scars"].query(geom, predicate="intersects"))
            if shapely.area(shapely.intersection(scars[k], geom)) > 0]
    fires, firsts = [], []
    for k in hits:
        fr = fire_rows[k] if k < len(fire_rows) else {}
        rel = ign.relation_to_zone(li.result, k, it.index) if li is not None else "no detections"
        area_share = float(shapely.area(shapely.intersection(scars[k], geom)) / max(shapely.area(scars[k]), 1e-300))
        first = ""
        if li is not None and li.result.first[k] >= 0:
            i = int(li.result.first[k])
            firsts.append((float(li.x[i]), float(li.y[i])))
            first = f"{_iso(li.result.time_s[k])}"
        fires.append({
            "id": str(scar_ids[k]), "start": fr.get("fire_start", ""), "end": fr.get("fire_end", ""),
            "area": rp.fmt_num(fr.get("burned_area_ha")), "inside": rp.fmt_pct(area_share),
            "carbon": rp._iv(fr, "carbon_smouldering_t"), "relation": RELATION_TEXT.get(rel, rel), "rel": rel,
            "first": first,
            "from": li.zone_label(int(li.result.zone[k])) if li is not None and rel == "came in" else "",
            "later": "; ".join(li.zone_label(z) for z in li.result.reached[k]) if li is not None else "",
            "distance": (rp.fmt_num(li.result.distance_m[k]) if li is not None and li.result.first[k] >= 0
                         and math.isfinite(li.result.distance_m[k]) else "–"),
            "status": (ign.STATUS[int(li.result.status[k])][1] if li is not None else ""),
        })

    # detections inside the zone, by day
    days: dict = {}
    view = _view(geom, scars[hits] if hits else [])
    pts_view = None
    if trees["det"] is not None:
        x, y, t = det
        inside = np.sort(trees["det"].query(geom, predicate="intersects"))
        for d in np.floor(t[inside] / 86400.0).astype(np.int64):
            days[d] = days.get(d, 0) + 1
        in_view = np.sort(trees["det"].query(shapely.box(view[0], view[2], view[1], view[3])))
        pts_view = (x[in_view], y[in_view], t[in_view])
    timeline = [{"date": str(np.datetime64(int(d), "D")), "n": n} for d, n in sorted(days.items())]

    depth, cdens, extent, mask_xy = _read_zone(Path(out_dir), geom, view)
    fig = _map(depth, extent, view, geom, scars[hits] if hits else [], pts_view, firsts, inputs.grid.crs.is_geographic)
    chart = _timeline_chart(timeline)
    plan = _field_plan(it, row, depth, cdens, mask_xy, common, inputs)
    return {**{k: v for k, v in common.items() if not k.startswith("_")},
            "zone": it.zone, "layer": it.layer, "numbers": numbers, "shares": shares,
            "has_intervals": any(f"{k}_lo" in row for k, _, _ in NUMBERS),
            "fires": fires, "timeline": timeline, "figures": {"map": fig, "timeline": chart},
            "footprint": rp.fmt_num(li.footprint_m) if li is not None else "–",
            "tie_hours": rp.fmt_num(li.tie_s / 3600.0) if li is not None else "–",
            "has_detections": det is not None, "plan": plan}


def _iso(t_s: float) -> str:
    return str(np.datetime64(int(round(t_s)), "s")).replace("T", " ") + " UTC"


def _view(geom, scar_geoms):
    """Map extent: the zone's bounds with a margin of 10 % (at least a little around a point)."""
    x0, y0, x1, y1 = geom.bounds
    w, h = x1 - x0, y1 - y0
    m = 0.1 * max(w, h) or 1.0
    return (x0 - m, x1 + m, y0 - m, y1 + m)


def _read_zone(out_dir: Path, geom, view):
    """Burn depth and carbon density over the view (decimated to MAP_PIXELS a side), and the centres
    of the burned pixels inside the zone with their depth and carbon density."""
    import rasterio
    from rasterio.enums import Resampling
    from rasterio.features import geometry_mask
    from rasterio.windows import from_bounds

    path = out_dir / "burn_depth.tif"
    if not path.is_file():
        return None, view, None, None
    with rasterio.open(path) as ds:
        win = from_bounds(view[0], view[2], view[1], view[3], ds.transform).round_offsets().round_lengths()
        full = rasterio.windows.Window(0, 0, ds.width, ds.height)
        try:
            win = win.intersection(full)
        except rasterio.errors.WindowError:
            return None, view, None, None
        f = max(1, math.ceil(max(win.width, win.height) / MAP_PIXELS))
        shape = (max(1, int(win.height) // f), max(1, int(win.width) // f))
        depth = ds.read(1, window=win, out_shape=shape, masked=True, resampling=Resampling.nearest)
        tr = ds.window_transform(win) * rasterio.Affine.scale(win.width / shape[1], win.height / shape[0])
        b = rasterio.windows.bounds(win, ds.transform)
    cd = None
    cpath = out_dir / "carbon_smouldering.tif"
    if cpath.is_file():
        with rasterio.open(cpath) as ds:
            cd = np.ma.filled(ds.read(1, window=win, out_shape=shape, masked=True,
                                      resampling=Resampling.nearest).astype("float64"), np.nan)
    depth = np.ma.filled(depth.astype("float64"), np.nan)
    inside = geometry_mask([geom], out_shape=shape, transform=tr, invert=True, all_touched=False)
    rows, cols = np.nonzero(inside & np.isfinite(depth))
    xs, ys = rasterio.transform.xy(tr, rows, cols)
    pts = (np.asarray(xs, dtype="float64"), np.asarray(ys, dtype="float64"), depth[rows, cols],
           cd[rows, cols] if cd is not None else np.full(rows.size, np.nan))
    return depth, cd, (b[0], b[2], b[1], b[3]), pts


def _map(depth, extent, view, geom, scar_geoms, pts, firsts, geographic: bool) -> str | None:
    """The zone's map over ``view`` (the burn depth drawn over ``extent``, the part of the raster read)."""
    import shapely

    with rp._style():
        fig = rp._figure(6.4, rp._map_height(view, geographic, width=6.4))
        ax = fig.add_subplot()
        if depth is not None:
            finite = depth[np.isfinite(depth)]
            vmax = float(np.percentile(finite, 98)) if finite.size else 1.0
            im = ax.imshow(depth, extent=extent, cmap="cividis", vmin=0.0, vmax=max(vmax, 1e-6),
                           interpolation="nearest")
            cb = fig.colorbar(im, ax=ax, shrink=0.8, extend="both", location="right")
            cb.set_label("burn depth [m]")
        for g, colour, dash, lw in ([(s, rp.OKABE_ITO_NAMED["vermillion"], "--", 0.9) for s in scar_geoms]
                                    + [(geom, rp.OKABE_ITO_NAMED["black"], "-", 1.6)]):
            lines = shapely.get_parts(shapely.boundary(g))
            for line in lines:
                c = shapely.get_coordinates(line)
                ax.plot(c[:, 0], c[:, 1], color=colour, linestyle=dash, linewidth=lw)
        from matplotlib.lines import Line2D

        handles = [Line2D([], [], color="black", linewidth=1.6, label="zone boundary"),
                   Line2D([], [], color=rp.OKABE_ITO_NAMED["vermillion"], linestyle="--", label="burn scars")]
        if pts is not None and len(pts[0]):
            x, y, t = pts
            days = t / 86400.0
            sc = ax.scatter(x, y, c=days, cmap="plasma", s=14, edgecolors="white", linewidths=0.4, zorder=3)
            cb2 = fig.colorbar(sc, ax=ax, shrink=0.8, location="bottom", pad=0.02)
            cb2.set_label("active-fire detection, date (UTC)")
            ticks = np.linspace(days.min(), days.max(), min(4, max(1, len(np.unique(np.floor(days))))))
            cb2.set_ticks(ticks)
            cb2.set_ticklabels([str(np.datetime64(int(round(d * 86400)), "s"))[:10] for d in ticks])
            handles.append(Line2D([], [], marker="o", linestyle="", color="#7a0177", label="detections"))
        if firsts:
            fx, fy = zip(*firsts)
            ax.scatter(fx, fy, marker="*", s=120, facecolors="none", edgecolors="black", linewidths=1.0, zorder=4)
            handles.append(Line2D([], [], marker="*", linestyle="", markerfacecolor="none", markeredgecolor="black",
                                  markersize=10, label="first detection of a fire"))
        rp._map_axes(ax, view, geographic, [], False)
        ax.legend(handles=handles, loc="upper left", fontsize=7, framealpha=0.9)
        return rp._png(fig)


def _timeline_chart(timeline) -> str | None:
    if not timeline:
        return None
    import matplotlib.dates as mdates

    days = [dt.date.fromisoformat(r["date"]) for r in timeline]
    with rp._style():
        fig = rp._figure(6.4, 2.2)
        ax = fig.add_subplot()
        ax.bar(mdates.date2num(days), [r["n"] for r in timeline], width=0.8, color=rp.PHASE_COLOURS["flaming"])
        ax.set_ylabel("detections\nper day")
        ax.set_xlabel("date (UTC)")
        span = (days[-1] - days[0]).days
        loc = mdates.DayLocator() if span <= 8 else mdates.AutoDateLocator(maxticks=8)
        ax.xaxis.set_major_locator(loc)
        ax.xaxis.set_major_formatter(mdates.ConciseDateFormatter(loc))
        ax.set_xlim(mdates.date2num(days[0]) - 0.7, mdates.date2num(days[-1]) + 0.7)
        ax.yaxis.get_major_locator().set_params(integer=True)
        return rp._png(fig)


def _cv(v) -> float | None:
    v = np.asarray(v, dtype="float64")
    v = v[np.isfinite(v)]
    if v.size < 2 or v.mean() <= 0:
        return None
    return float(v.std(ddof=1) / v.mean())


def _field_plan(it, row, depth, cdens, pts, common, inputs) -> dict:
    """Depth pins and density cores that would halve the zone's interval, and where to take them."""
    out = {"available": False, "reason": "", "plots": [], "plot_rows": [], "csv": "", "seed": "",
           "n_depth": 0, "n_cores": 0, "cv_depth": "–", "cv_cores": "–", "shares": {}}
    lo, hi, c = (rp._finite(row.get(f"carbon_smouldering_t{s}")) for s in ("_lo", "_hi", ""))
    shares = (common["_by_zone"].get(it.layer) or {}).get(it.zone)
    if lo is None or hi is None or not shares or not c:
        out["reason"] = ("needs the Monte Carlo intervals (uncertainty.draws > 0) and a zone with carbon burned "
                         "below ground")
        return out
    groups = {"depth": 0.0, "cores": 0.0, "other": 0.0}
    for name, v in shares.items():
        f = rp._finite(v)
        if f is not None:
            groups[fp.source_group(name)] += f
    x, y, d, cd = pts if pts is not None else (np.zeros(0),) * 4
    cv_d = _cv(d)
    with np.errstate(divide="ignore", invalid="ignore"):
        cv_map = _cv(np.where(d > 0, cd / d, np.nan))
    cv_c = max([v for v in (cv_map, rp._finite(common["_bd_cv"])) if v is not None], default=None)
    out.update(shares={k: rp.fmt_pct(v) for k, v in groups.items()}, cv_depth=rp.fmt_num(cv_d),
               cv_cores=rp.fmt_num(cv_c))
    if cv_d is None or cv_c is None:
        out["reason"] = "too few burned pixels in the zone to measure the spread of burn depth"
        return out
    sd = (hi - lo) / (2.0 * fp.Z95)
    a = fp.measurements_to_shrink(sd, c, groups["depth"], groups["cores"], cv_d, cv_c, factor=2.0)
    out.update(available=True, feasible=a.feasible, n_depth=a.n_depth, n_cores=a.n_cores, sd=rp.fmt_num(sd))
    if not a.feasible:
        out["reason"] = (f"{rp.fmt_pct(groups['other'])} of the variance comes from sources that plots do not "
                         f"reduce (e.g. emission factors); field plots alone cannot halve the interval")
        return out
    n = min(max(a.n_depth, a.n_cores), MAX_PLOTS, x.size)
    seed = [common["_seed"], it.layer_index, it.index]
    out["seed"] = f"numpy default_rng({seed})"
    idx = fp.stratified_sample(x, y, n, seed=seed)
    lon, lat = _lonlat(inputs.grid.crs, x[idx], y[idx])
    # the cores at plots spread evenly through the list (which runs cell by cell over the zone)
    cores = set(np.round(np.linspace(0, n - 1, min(a.n_cores, n))).astype(int).tolist()) if a.n_cores else set()
    for j, i in enumerate(idx):
        measure = "depth pin + density core" if j in cores else "depth pin"
        out["plot_rows"].append({"plot": j + 1, "measure": measure, "x": round(float(x[i]), 2),
                                 "y": round(float(y[i]), 2), "lon": round(float(lon[j]), 6),
                                 "lat": round(float(lat[j]), 6), "burn_depth_m": round(float(d[i]), 3)})
    out["plots"] = [{**r, "x": f"{r['x']:.1f}", "y": f"{r['y']:.1f}", "lon": f"{r['lon']:.6f}",
                     "lat": f"{r['lat']:.6f}", "d": rp.fmt_num(r["burn_depth_m"])} for r in out["plot_rows"]]
    out["capped"] = max(a.n_depth, a.n_cores) > n
    return out


def _lonlat(crs, x, y):
    from pyproj import CRS, Transformer

    tr = Transformer.from_crs(CRS.from_wkt(crs.to_wkt()), CRS.from_epsg(4326), always_xy=True)
    lon, lat = tr.transform(np.asarray(x, dtype="float64"), np.asarray(y, dtype="float64"))
    return np.atleast_1d(lon), np.atleast_1d(lat)
