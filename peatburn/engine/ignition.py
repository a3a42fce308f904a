"""Orchestration of the ignition attribution (:mod:`peatburn.science.ignition`): geometry to arrays.

For each zone layer attributed, this module finds

* which detections belong to which fire: a detection belongs to a fire when its footprint can
  touch the scar (its reported position within the footprint's half-diagonal of the polygon) and,
  for a fire with dates, its UTC day lies within the fire's start and end days (a scar burned again
  in another season does not take the other season's detections). This is wider than the
  point-in-polygon count of ``n_detections`` (the flaming term), on purpose: the first sighting of a
  fire is often a pixel centred just outside the mapped scar;
* the zone each detection lies in (point in polygon) and its distance to the nearest zone
  boundary, with shapely's STR-tree; in a geographic CRS both in a local UTM projection (metres).

The science module then decides per fire; :func:`ignition_columns` writes the columns of fires.csv.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import shapely

from ..names import OUTSIDE
from ..science import ignition as ign

#: Columns added to fires.csv when the run has active-fire detections.
IGNITION_COLUMNS = ["ignition_layer", "ignition_zone", "ignition_status", "ignition_time", "ignition_x",
                    "ignition_y", "ignition_boundary_distance_m", "ignition_footprint_m", "ignition_n_first",
                    "ignition_n_detections", "spread_to", "ignition_note"]


@dataclass
class LayerIgnition:
    """The attribution of every fire against one zone layer."""

    layer: str
    ids: list
    result: ign.Ignition
    x: np.ndarray  # the detections' positions in the run CRS (as read)
    y: np.ndarray
    footprint_m: float
    tie_s: float

    def zone_label(self, z: int) -> str:
        if z >= 0:
            return str(self.ids[z])
        return {ign.OUTSIDE_ZONE: OUTSIDE, ign.UNDETERMINED: "", ign.NONE: ""}.get(z, "")


def metric(crs, x, y, geoms_list):
    """Positions and geometries in metres: as given in a projected CRS, else in the local UTM zone
    of the points' centre (pyproj)."""
    if not crs.is_geographic:
        f = crs.linear_units_factor[1] if crs.linear_units else 1.0
        if f == 1.0:
            return x, y, geoms_list
        return x * f, y * f, [shapely.transform(g, lambda c: c * f) for g in geoms_list]
    from pyproj import CRS, Transformer
    from pyproj.aoi import AreaOfInterest
    from pyproj.database import query_utm_crs_info

    allx = np.concatenate([x] + [shapely.get_coordinates(g)[:, 0] for g in geoms_list])
    ally = np.concatenate([y] + [shapely.get_coordinates(g)[:, 1] for g in geoms_list])
    cx, cy = float(np.nanmean(allx)) if allx.size else 0.0, float(np.nanmean(ally)) if ally.size else 0.0
    info = query_utm_crs_info(datum_name="WGS 84", area_of_interest=AreaOfInterest(cx, cy, cx, cy))
    utm = CRS.from_epsg(info[0].code)
    tr = Transformer.from_crs(CRS.from_wkt(crs.to_wkt()), utm, always_xy=True)
    mx, my = tr.transform(x, y)

    def to_utm(c):
        a, b = tr.transform(c[:, 0], c[:, 1])
        return np.column_stack([a, b])

    return np.asarray(mx), np.asarray(my), [shapely.transform(g, to_utm) for g in geoms_list]


def detection_zones(x, y, zone_geoms):
    """Zone of each point (index, :data:`~peatburn.science.ignition.OUTSIDE_ZONE` or
    :data:`~peatburn.science.ignition.OVERLAP_ZONE`) and its distance to the nearest zone boundary
    [CRS units; ``inf`` without zones]."""
    n = len(x)
    zone = np.full(n, ign.OUTSIDE_ZONE, dtype=np.int64)
    dist = np.full(n, np.inf)
    geoms = np.asarray(zone_geoms, dtype=object)
    keep = ~(shapely.is_missing(geoms) | shapely.is_empty(geoms)) if len(geoms) else np.zeros(0, bool)
    if n == 0 or not keep.any():
        return zone, dist
    pts = shapely.points(x, y)
    tree = shapely.STRtree(np.where(keep, geoms, None))
    pi, gi = tree.query(pts, predicate="intersects")
    count = np.bincount(pi, minlength=n)
    zone[pi] = gi
    zone[count > 1] = ign.OVERLAP_ZONE
    lines = shapely.boundary(geoms[keep])
    btree = shapely.STRtree(lines)
    (pi2, _), d = btree.query_nearest(pts, return_distance=True, all_matches=False)
    dist[pi2] = d
    return zone, dist


def fire_detections(x, y, t_s, scar_geoms, periods, radius):
    """Detection-fire pairs ``(fire, detection)``: the detection's footprint (``radius`` [CRS units])
    reaches the scar and, where the fire has dates, its UTC day lies within them."""
    n = len(x)
    if n == 0 or len(scar_geoms) == 0:
        return np.zeros(0, np.int64), np.zeros(0, np.int64)
    pts = shapely.points(x, y)
    tree = shapely.STRtree(np.asarray(scar_geoms, dtype=object))
    if radius > 0:
        pi, gi = tree.query(pts, predicate="dwithin", distance=radius)
    else:
        pi, gi = tree.query(pts, predicate="intersects")
    day = np.floor(np.asarray(t_s, dtype="float64")[pi] / 86400.0)
    lo = np.full(len(scar_geoms), -np.inf)
    hi = np.full(len(scar_geoms), np.inf)
    for k, (start, end) in enumerate(periods):
        if start is not None:
            lo[k] = _day(start)
        if end is not None:
            hi[k] = _day(end)
    ok = (day >= lo[gi]) & (day <= hi[gi])
    order = np.lexsort((pi[ok], gi[ok]))
    return gi[ok][order].astype(np.int64), pi[ok][order].astype(np.int64)


def _day(d) -> float:
    return float(np.datetime64(d.isoformat()[:10], "D").astype(np.int64))


def attribute_layer(crs, layer_name, ids, zone_geoms, scar_geoms, periods, x, y, t_s, *,
                    footprint_m=ign.DEFAULT_FOOTPRINT_M, tie_s=ign.DEFAULT_TIE_S) -> LayerIgnition:
    """Attribute every fire of ``scar_geoms`` against the zones ``zone_geoms`` (both in ``crs``, the
    detections' positions too)."""
    x = np.asarray(x, dtype="float64")
    y = np.asarray(y, dtype="float64")
    mx, my, (zg, sg) = metric(crs, x, y, [np.asarray(zone_geoms, dtype=object),
                                             np.asarray(scar_geoms, dtype=object)])
    r = float(ign.footprint_radius(footprint_m))
    fire, det = fire_detections(mx, my, t_s, sg, periods, r)
    # zones and boundary distances only of the detections that belong to a fire (the costly step)
    used, inv = np.unique(det, return_inverse=True)
    zone, dist = detection_zones(mx[used], my[used], zg)
    res = ign.attribute_ignition(fire, np.asarray(t_s, dtype="float64")[det], zone[inv], dist[inv], len(sg),
                                 footprint_m=footprint_m, tie_s=tie_s)
    res.first = np.where(res.first >= 0, det[np.maximum(res.first, 0)] if det.size else -1, -1)
    return LayerIgnition(layer_name, list(ids), res, x, y, float(footprint_m), float(tie_s))


def ignition_columns(li: LayerIgnition | None, n_fires: int) -> dict:
    """The ignition columns of fires.csv (:data:`IGNITION_COLUMNS`), one value per fire."""
    cols = {c: [""] * n_fires for c in IGNITION_COLUMNS}
    if li is None:
        return cols
    r = li.result
    for k in range(n_fires):
        code = int(r.status[k])
        status, why = ign.STATUS[code]
        cols["ignition_layer"][k] = li.layer
        cols["ignition_status"][k] = status
        cols["ignition_footprint_m"][k] = li.footprint_m
        cols["ignition_n_detections"][k] = int(r.n_detections[k])
        cols["ignition_note"][k] = why
        if r.first[k] < 0:
            cols["ignition_n_first"][k] = 0
            continue
        i = int(r.first[k])
        cols["ignition_zone"][k] = li.zone_label(int(r.zone[k]))
        cols["ignition_time"][k] = _iso(r.time_s[k])
        cols["ignition_x"][k] = float(li.x[i])
        cols["ignition_y"][k] = float(li.y[i])
        d = float(r.distance_m[k])
        cols["ignition_boundary_distance_m"][k] = round(d, 1) if math.isfinite(d) else ""
        cols["ignition_n_first"][k] = int(r.n_first[k])
        cols["spread_to"][k] = "; ".join(li.zone_label(z) for z in r.reached[k])
    return cols


def _iso(t_s: float) -> str:
    return str(np.datetime64(int(round(t_s)), "s")) + "Z"


def fires_csv_layer(cfg) -> str | None:
    """The zone layer whose attribution fires.csv carries: ``flaming.ignition_layer``, else the first
    layer that asks for dossiers, else the first zone layer (None without zone layers)."""
    fl = cfg.flaming
    if fl is not None and fl.ignition_layer:
        return fl.ignition_layer
    for z in cfg.zones:
        if z.dossiers:
            return z.name
    return cfg.zones[0].name if cfg.zones else None


def run_ignition(cfg, inputs, flame, periods) -> tuple[dict | None, dict]:
    """The ignition columns of fires.csv (None when the run has no detections) and the attribution
    against every zone layer that fires.csv or a dossier needs (``layer name -> LayerIgnition``)."""
    if flame is None or flame.detections is None:
        return None, {}
    x, y, t = flame.detections
    fl = cfg.flaming
    footprint = fl.footprint_m if fl.footprint_m is not None else ign.DEFAULT_FOOTPRINT_M
    tie = fl.ignition_tie_hours * 3600.0 if fl.ignition_tie_hours is not None else ign.DEFAULT_TIE_S
    scars = np.asarray(inputs.scars.geometries, dtype=object)
    chosen = fires_csv_layer(cfg)
    wanted = {z.name for z in cfg.zones if z.dossiers} | ({chosen} if chosen else set())
    out = {}
    for z, layer, ids in inputs.zones:
        if z.name in wanted:
            out[z.name] = attribute_layer(inputs.grid.crs, z.name, ids, layer.geometries, scars, periods, x, y, t,
                                          footprint_m=footprint, tie_s=tie)
    if chosen is None:  # no zone layer: the place and time of the start, no zone
        li = attribute_layer(inputs.grid.crs, "", [], [], scars, periods, x, y, t, footprint_m=footprint, tie_s=tie)
        cols = ignition_columns(li, len(scars))
        for c in ("ignition_zone", "ignition_status", "spread_to", "ignition_boundary_distance_m"):
            cols[c] = [""] * len(scars)
        cols["ignition_note"] = ["no zone layer: the start is not attributed to a zone"] * len(scars)
        return cols, out
    return ignition_columns(out[chosen], len(scars)), out
