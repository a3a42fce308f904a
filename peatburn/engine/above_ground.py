"""Orchestration of the flaming (above-ground) term: detections -> events -> FRE -> zones.

Two routes, chosen by ``[flaming] method``:

* ``"frp"``: active-fire detections are grouped into events and their FRP integrated into fire
  radiative energy (:mod:`peatburn.science.flaming`); each detection carries its share of its
  event's FRE, so a zone's FRE is the sum over the detections that fall in it (point in polygon;
  overlapping zones each count a detection). Dry matter = FRE x combustion coefficient
  (Wooster et al. 2005).
* ``"biomass"``: dry matter = burned area x above-ground biomass x combustion factor (IPCC 2006
  Vol. 4 Ch. 2 Eq. 2.27), from the per-zone sums of biomass x area computed in the block pass.

Either way carbon = dry matter x vegetation carbon fraction and gases = dry matter x the flaming
emission-factor set. When detections exist, the carbon an FRP-only view would attribute to the
fire is FRE x coefficient x fuel carbon fraction, reported beside the below-ground carbon.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import shapely

from .sums import SCAR_LAYER
from ..science import flaming
from ..science.uncertainty import fre_sampling


@dataclass
class FlamingSums:
    """Per zone-layer arrays (same bins as :class:`peatburn.engine.sums.Sums`) and the run total."""

    route: str
    total: dict
    layers: list  # (name, {key: array})
    notes: list = field(default_factory=list)
    parameters: dict = field(default_factory=dict)
    daily_dry_matter_kg: dict = field(default_factory=dict)  # ISO date -> kg (detection route only)
    detections: tuple | None = None  # (x, y, t_s) in the run CRS (detection route only; ignition, dossiers)


KEYS = ("dry_matter_kg", "fre_mj", "n_detections")


def _empty(n):
    return {k: np.zeros(n) for k in KEYS}


def flaming_sums(cfg, inputs, sums) -> FlamingSums | None:
    """Flaming dry matter and FRE per zone and in total; None when no [flaming] section."""
    fl = cfg.flaming
    if fl is None:
        return None
    coef = fl.coefficient_kg_per_mj or flaming.WOOSTER_2005_COEFFICIENT
    layers_bins = [(name, len(ids) + 2) for name, ids, _ in sums.layers]
    if fl.method == "biomass":
        cf = fl.combustion_factor
        total = {k: 0.0 for k in KEYS}
        total["dry_matter_kg"] = float(flaming.fuel_consumed_eq227(1.0, sums.total["biomass_t"], cf)) * 1000.0
        layers = []
        for name, ids, acc in sums.layers:
            d = _empty(len(ids) + 2)
            d["dry_matter_kg"] = np.asarray(flaming.fuel_consumed_eq227(1.0, acc["biomass_t"], cf)) * 1000.0
            layers.append((name, d))
        return FlamingSums("burned area x biomass x combustion factor (IPCC 2006 Eq. 2.27)", total, layers,
                           parameters={"combustion_factor": cf})

    from ..io.detections import read_detections

    det = read_detections(fl.detections, inputs.grid.crs, crs=fl.crs, columns=fl.columns or None,
                          bounds=inputs.grid.bounds)
    notes = [f"flaming: {det.describe()}"] + [f"flaming: {n}" for n in det.notes]
    f = det.frame
    x, y = f.geometry.x.to_numpy(), f.geometry.y.to_numpy()
    t, frp = f["t_s"].to_numpy(float), f["frp_mw"].to_numpy(float)
    dist = fl.event_distance_m or flaming.DEFAULT_EVENT_DISTANCE_M
    gap = fl.event_gap_hours * 3600.0 if fl.event_gap_hours is not None else flaming.DEFAULT_EVENT_GAP_S
    if len(f):
        events = flaming.assign_events(x, y, t, distance_m=dist, gap_s=gap)
        energy = flaming.detection_energy(t, frp, events)
    else:
        events, energy = np.zeros(0, int), np.zeros(0)
    dm = flaming.dry_matter_from_fre(energy, coef) if len(f) else np.zeros(0)
    pts = np.asarray(f.geometry.array, dtype=object)  # the points read (no new geometries: 1e6 cost seconds)
    hits = []
    for (name, ids, geoms), (_, n_bins) in zip(inputs_zone_geoms(inputs, with_scars=True), layers_bins):
        pi, gi = shapely.STRtree(geoms).query(pts, predicate="intersects") if len(f) else (np.zeros(0, int),) * 2
        # a detection inside several fires (a repeat burn) is split equally between them, as the
        # shared pixels are (outputs.fires); zones of a layer that overlap each count it whole
        share = 1.0 / np.bincount(pi, minlength=len(f))[pi] if name == SCAR_LAYER else np.ones(len(pi))
        hits.append((name, n_bins, pi, gi, share))
    if fl.biomass is not None and len(f):
        dm, note = _cap_fre_dry_matter(dm, hits, sums)
        notes.append(note)
    total = {"dry_matter_kg": float(np.sum(dm)), "fre_mj": float(np.sum(energy)), "n_detections": float(len(f))}
    # FRE integration error (science.uncertainty.fre_sampling): sum_e D_ez^2 / n_e per zone and in total
    n_obs = fre_sampling.observation_count(events, t) if len(f) else np.zeros(0, int)
    every = np.arange(len(f))
    total["fre_ssq_kg2"] = float(fre_sampling.hits_ssq(dm, events, n_obs, every, np.zeros(len(f), int),
                                                       np.ones(len(f)), 1)[0]) if len(f) else 0.0
    layers = []
    for name, n_bins, pi, gi, share in hits:
        d = _empty(n_bins)
        inside_any = np.zeros(len(f), bool)
        if len(f):
            for k in KEYS:
                vals = {"dry_matter_kg": dm, "fre_mj": energy, "n_detections": np.ones(len(f))}[k]
                d[k] += np.bincount(gi + 1, weights=vals[pi] * share, minlength=n_bins)[:n_bins]
            inside_any[pi] = True
            out = ~inside_any
            for k in KEYS:
                vals = {"dry_matter_kg": dm, "fre_mj": energy, "n_detections": np.ones(len(f))}[k]
                d[k][n_bins - 1] += vals[out].sum()
            # the detections outside every zone go to the layer's outside bin, whole
            d["fre_ssq_kg2"] = fre_sampling.hits_ssq(
                dm, events, n_obs, np.concatenate([pi, every[out]]),
                np.concatenate([gi + 1, np.full(int(out.sum()), n_bins - 1)]),
                np.concatenate([share, np.ones(int(out.sum()))]), n_bins)
        else:
            d["fre_ssq_kg2"] = np.zeros(n_bins)
        layers.append((name, d))
    daily = {}
    if len(f):  # UTC days since 1970-01-01 (one pass, not one per day: a season of dense detections)
        day_of, day_idx = np.unique(np.floor(t / 86400.0).astype(np.int64), return_inverse=True)
        per_day = np.bincount(day_idx, weights=dm, minlength=day_of.size)
        for day, value in zip(day_of, per_day):
            daily[str(np.datetime64(int(day), "D"))] = float(value)
    return FlamingSums("active-fire detections: FRE x combustion coefficient (Wooster et al. 2005)", total, layers,
                       notes, daily_dry_matter_kg=daily, detections=(x, y, t), parameters={"coefficient_kg_per_mj": coef, "event_distance_m": dist,
                                          "event_gap_s": gap, "n_events": int(events.max() + 1) if len(f) else 0,
                                          "rejected": det.rejected})


def _cap_fre_dry_matter(dm, hits, sums):
    """Cap each fire's FRE dry matter by the above-ground biomass on its burned area
    (:func:`peatburn.science.flaming.cap_by_biomass`); a detection shared by fires takes the
    share-weighted scale of its fires; detections outside every scar are not capped (no burned area,
    no biomass figure). Returns the capped dry matter per detection and a note."""
    name, n_bins, pi, gi, share = next(h for h in hits if h[0] == SCAR_LAYER)
    n = n_bins - 2
    per_fire = np.bincount(gi, weights=dm[pi] * share, minlength=n)[:n]
    acc = next(a for nm, _, a in sums.layers if nm == SCAR_LAYER)
    biomass_kg = np.asarray(acc["biomass_t"], dtype=float)[1:n + 1] * 1000.0
    scale = flaming.cap_by_biomass(per_fire, biomass_kg)
    inside = np.bincount(pi, weights=share, minlength=len(dm)) > 0
    s = np.where(inside, np.bincount(pi, weights=share * scale[gi], minlength=len(dm)), 1.0)
    capped = dm * s
    n_capped = int(np.sum(scale < 1.0))
    return capped, (f"flaming: FRE dry matter capped by the above-ground biomass (flaming.biomass x burned area) "
                    f"in {n_capped} of {n} fire(s): {float(np.sum(dm) - np.sum(capped)) * 1e-3:.6g} t removed; "
                    f"detections outside every scar are not capped")


def inputs_zone_geoms(inputs, with_scars: bool = False):
    """(name, ids, geometries) of the zone layers, in the order of the run's sums; with
    ``with_scars`` the internal layer of the burn scars last (as in the block pass)."""
    out = [(z.name, ids, np.asarray(layer.geometries, dtype=object)) for z, layer, ids in inputs.zones]
    if with_scars:
        n = len(inputs.scars.frame)
        out.append((SCAR_LAYER, [str(i) for i in range(n)], np.asarray(inputs.scars.geometries, dtype=object)))
    return out
