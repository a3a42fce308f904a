"""Ignition attribution on synthetic geometries with a known answer (peatburn.engine.ignition).

A zone is the square 0..1000 m; scars and detections are placed so that the answer follows from
the drawing: a fire wholly inside, a fire first seen outside and later inside (came in), a fire
first seen on the boundary (footprint straddles it: undetermined), a fire without detections.
Distances are hand arithmetic (distance of a point to a straight edge). The geographic case is
checked against pyproj.Geod (Karney 2013), a general-purpose geodesic library.
"""

import datetime as dt

import numpy as np
import pytest
import shapely
from rasterio.crs import CRS

from peatburn.engine import ignition as eng
from peatburn.names import OUTSIDE
from peatburn.science import ignition as ign

UTM = CRS.from_epsg(32749)
ZONE = shapely.box(0, 0, 1000, 1000)
DAY = 86400.0


def _scene():
    scars = [
        shapely.box(300, 300, 700, 700),     # 0: inside
        shapely.box(800, 400, 1600, 600),    # 1: crosses the east edge, starts outside
        shapely.box(900, 0, 1200, 100),      # 2: first seen on the edge
        shapely.box(200, 800, 300, 900),     # 3: no detection
    ]
    det = [  # x, y, t
        (500, 500, 2 * DAY), (600, 400, 3 * DAY),
        (1500, 500, 1 * DAY), (1200, 500, 2 * DAY), (900, 500, 4 * DAY),
        (1030, 50, 5 * DAY), (950, 50, 6 * DAY),
        (5000, 5000, 0.0),  # far from every scar: belongs to no fire
    ]
    x, y, t = (np.array(c, dtype=float) for c in zip(*det))
    return scars, x, y, t


def test_known_answers():
    scars, x, y, t = _scene()
    li = eng.attribute_layer(UTM, "concessions", ["Z"], [ZONE], scars, [(None, None)] * 4, x, y, t,
                             footprint_m=100.0, tie_s=3600.0)
    cols = eng.ignition_columns(li, 4)
    assert cols["ignition_status"] == ["inside", "outside", "undetermined", "no_detections"]
    assert cols["ignition_zone"] == ["Z", OUTSIDE, "", ""]
    assert cols["spread_to"] == ["", "Z", "", ""]
    # first detections: (500, 500) 500 m from every edge; (1500, 500) 500 m east of x = 1000;
    # (1030, 50): 30 m from the east edge, inside the 70.7 m half-diagonal of a 100 m pixel
    assert cols["ignition_boundary_distance_m"][:3] == [500.0, 500.0, 30.0]
    assert (cols["ignition_x"][:3], cols["ignition_y"][:3]) == ([500.0, 1500.0, 1030.0], [500.0, 500.0, 50.0])
    assert cols["ignition_time"][:3] == ["1970-01-03T00:00:00Z", "1970-01-02T00:00:00Z", "1970-01-06T00:00:00Z"]
    assert cols["ignition_n_detections"] == [2, 3, 2, 0]
    assert ign.relation_to_zone(li.result, 1, 0) == "came in"


def test_footprint_of_a_kilometre_makes_everything_near_undetermined():
    scars, x, y, t = _scene()
    li = eng.attribute_layer(UTM, "c", ["Z"], [ZONE], scars, [(None, None)] * 4, x, y, t, footprint_m=1000.0)
    # radius 707 m: every detection of this 1.6 km scene is within reach of the boundary
    assert eng.ignition_columns(li, 4)["ignition_status"][:3] == ["undetermined"] * 3


def test_footprint_reaches_detections_outside_the_scar():
    # a detection centred 50 m outside the scar belongs to it when the footprint's half-diagonal
    # (70.7 m for 100 m) reaches the polygon, not when it is 35.4 m (50 m pixel)
    scar = [shapely.box(100, 100, 400, 400)]
    x, y, t = np.array([450.0]), np.array([250.0]), np.array([0.0])
    a = eng.attribute_layer(UTM, "c", ["Z"], [ZONE], scar, [(None, None)], x, y, t, footprint_m=100.0)
    b = eng.attribute_layer(UTM, "c", ["Z"], [ZONE], scar, [(None, None)], x, y, t, footprint_m=50.0)
    assert a.result.n_detections[0] == 1 and b.result.n_detections[0] == 0


def test_fire_dates_keep_other_seasons_out():
    scar = [shapely.box(100, 100, 400, 400)]
    x, y = np.array([200.0, 300.0]), np.array([200.0, 300.0])
    t = np.array([0.0, 400 * DAY])  # 1970-01-01 and 1971-02-05
    period = [(dt.date(1971, 2, 1), dt.date(1971, 2, 10))]
    li = eng.attribute_layer(UTM, "c", ["Z"], [ZONE], scar, period, x, y, t, footprint_m=10.0)
    assert li.result.n_detections[0] == 1 and eng.ignition_columns(li, 1)["ignition_x"] == [300.0]


def test_overlapping_zones():
    zones = [shapely.box(0, 0, 600, 600), shapely.box(400, 400, 1000, 1000)]
    scar = [shapely.box(450, 450, 550, 550)]
    x, y, t = np.array([500.0]), np.array([500.0]), np.array([0.0])
    li = eng.attribute_layer(UTM, "c", ["A", "B"], zones, scar, [(None, None)], x, y, t, footprint_m=10.0)
    c = eng.ignition_columns(li, 1)
    assert c["ignition_status"] == ["undetermined"] and "overlap" in c["ignition_note"][0]


def test_geographic_distances_are_metres():
    from pyproj import Geod

    # zone: 110.0..110.1 E, -3.1..-3.0; a detection at 110.11 E, -3.05 (east of the zone)
    zone = shapely.box(110.0, -3.1, 110.1, -3.0)
    scar = [shapely.box(110.05, -3.06, 110.12, -3.04)]
    li = eng.attribute_layer(CRS.from_epsg(4326), "c", ["Z"], [zone], scar, [(None, None)],
                             np.array([110.11]), np.array([-3.05]), np.array([0.0]), footprint_m=375.0)
    c = eng.ignition_columns(li, 1)
    _, _, along_parallel = Geod(ellps="WGS84").inv(110.1, -3.05, 110.11, -3.05)
    assert c["ignition_boundary_distance_m"][0] == pytest.approx(along_parallel, rel=2e-3)
    assert c["ignition_status"] == ["outside"] and c["ignition_x"] == [110.11]


def _cfg_inputs(zones, dossiers=(), ignition_layer=None):
    from types import SimpleNamespace as NS

    scars, x, y, t = _scene()
    zcfg = [NS(name=n, dossiers=n in dossiers) for n, _ in zones]
    cfg = NS(flaming=NS(footprint_m=100.0, ignition_tie_hours=None, ignition_layer=ignition_layer), zones=zcfg)
    inputs = NS(scars=NS(geometries=scars), grid=NS(crs=UTM),
                zones=[(zc, NS(geometries=[g]), [n]) for zc, (n, g) in zip(zcfg, zones)])
    return cfg, inputs, NS(detections=(x, y, t))


def test_run_ignition_without_zone_layers_gives_place_and_time_only():
    cfg, inputs, flame = _cfg_inputs([])
    cols, layers = eng.run_ignition(cfg, inputs, flame, [(None, None)] * 4)
    assert layers == {}
    assert cols["ignition_zone"] == [""] * 4 and cols["ignition_status"] == [""] * 4
    assert cols["ignition_x"][:3] == [500.0, 1500.0, 1030.0] and cols["ignition_x"][3] == ""
    assert "no zone layer" in cols["ignition_note"][0]


def test_run_ignition_layer_choice():
    other = shapely.box(-5000, -5000, -4000, -4000)
    # default: the first layer asking for dossiers, else the first layer; flaming.ignition_layer wins
    cfg, inputs, flame = _cfg_inputs([("far", other), ("near", ZONE)], dossiers=("near",))
    cols, layers = eng.run_ignition(cfg, inputs, flame, [(None, None)] * 4)
    assert set(layers) == {"near"} and cols["ignition_layer"][0] == "near"
    cfg, inputs, flame = _cfg_inputs([("far", other), ("near", ZONE)])
    cols, layers = eng.run_ignition(cfg, inputs, flame, [(None, None)] * 4)
    assert set(layers) == {"far"} and cols["ignition_zone"][0] == OUTSIDE
    cfg, inputs, flame = _cfg_inputs([("far", other), ("near", ZONE)], dossiers=("far",), ignition_layer="near")
    cols, layers = eng.run_ignition(cfg, inputs, flame, [(None, None)] * 4)
    assert set(layers) == {"far", "near"} and cols["ignition_zone"][0] == "near"  # zone ids here are the layer names
    # no detections file (biomass route): no columns
    assert eng.run_ignition(cfg, inputs, None, [])[0] is None
