"""Ignition attribution from the earliest detections (peatburn.science.ignition).

Expected values are hand arithmetic on the synthetic arrays written here (times, zones and
distances chosen so the answer is known); the footprint radius is the half-diagonal of a square,
a sqrt(2) / 2 (elementary geometry).
"""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from peatburn.science import ignition as ign

H = 3600.0


def test_footprint_radius_is_half_diagonal():
    # a 375 m square: diagonal 375 * sqrt(2) = 530.33 m, half 265.17 m (hand arithmetic)
    assert float(ign.footprint_radius(375.0)) == pytest.approx(265.165, abs=1e-3)
    assert float(ign.footprint_radius(1000.0)) == pytest.approx(1000 / math.sqrt(2))


def test_inside_outside_then_in_straddling_and_none():
    # fire 0: two detections in zone 3, far from any boundary -> started inside zone 3
    # fire 1: first outside (-1) 300 m from the boundary, a day later inside zone 3 -> came in
    # fire 2: first 40 m from the boundary (< 70.7 m for a 100 m pixel) -> undetermined, no spread
    # fire 3: no detection
    fire = np.array([0, 0, 1, 1, 2, 2])
    t = np.array([0.0, 5 * H, 10 * H, 34 * H, 1 * H, 30 * H])
    zone = np.array([3, 3, -1, 3, -1, 3])
    dist = np.array([500.0, 450.0, 300.0, 100.0, 40.0, 200.0])
    r = ign.attribute_ignition(fire, t, zone, dist, 4, footprint_m=100.0, tie_s=H)
    assert r.zone.tolist() == [3, ign.OUTSIDE_ZONE, ign.UNDETERMINED, ign.NONE]
    assert [ign.STATUS[s][0] for s in r.status] == ["inside", "outside", "undetermined", "no_detections"]
    assert r.status[2] == 2  # the footprint reason, not a tie
    assert r.first.tolist() == [0, 2, 4, -1]
    assert r.time_s[:3].tolist() == [0.0, 10 * H, 1 * H] and math.isnan(r.time_s[3])
    assert r.distance_m[:3].tolist() == [500.0, 300.0, 40.0]
    assert r.reached == [[], [3], [], []]
    assert r.n_detections.tolist() == [2, 2, 2, 0]
    assert ign.relation_to_zone(r, 0, 3) == "started inside"
    assert ign.relation_to_zone(r, 1, 3) == "came in"
    assert ign.relation_to_zone(r, 2, 3) == "undetermined"
    assert ign.relation_to_zone(r, 3, 3) == "no detections"
    assert ign.relation_to_zone(r, 0, 5) == "started outside"


def test_smaller_footprint_resolves_the_straddling_detection():
    # 40 m from the boundary: undetermined for a 100 m pixel (radius 70.7 m), determined for 50 m (35.4 m)
    args = (np.array([0, 0]), np.array([0.0, 30 * H]), np.array([-1, 3]), np.array([40.0, 200.0]), 1)
    assert ign.attribute_ignition(*args, footprint_m=100.0).zone[0] == ign.UNDETERMINED
    r = ign.attribute_ignition(*args, footprint_m=50.0)
    assert r.zone[0] == ign.OUTSIDE_ZONE and r.reached[0] == [3]


def test_ties_in_time():
    # same overpass (10 min apart, tie window 1 h): one inside zone 0, one in zone 1 -> undetermined (tie)
    fire = np.array([0, 0, 0])
    zone = np.array([0, 1, 1])
    dist = np.array([900.0, 900.0, 900.0])
    t = np.array([0.0, 600.0, 10 * H])
    r = ign.attribute_ignition(fire, t, zone, dist, 1, footprint_m=375.0, tie_s=H)
    assert r.zone[0] == ign.UNDETERMINED and r.status[0] == 3 and r.n_first[0] == 2
    # with no tie window the earlier one wins, and the fire reached zone 1 afterwards
    r0 = ign.attribute_ignition(fire, t, zone, dist, 1, footprint_m=375.0, tie_s=0.0)
    assert r0.zone[0] == 0 and r0.reached[0] == [1] and r0.n_first[0] == 1
    # exactly equal times, same zone: determined; the first row (array order) is the place reported
    r2 = ign.attribute_ignition(np.array([0, 0]), np.array([5.0, 5.0]), np.array([2, 2]), np.array([800.0, 700.0]),
                                1, footprint_m=375.0, tie_s=0.0)
    assert r2.zone[0] == 2 and r2.first[0] == 0 and r2.n_first[0] == 2


def test_overlapping_zones_are_undetermined():
    r = ign.attribute_ignition(np.array([0]), np.array([0.0]), np.array([ign.OVERLAP_ZONE]), np.array([900.0]), 1)
    assert r.zone[0] == ign.UNDETERMINED and r.status[0] == 4


def test_later_straddling_detections_do_not_make_spread():
    # started inside 0; later in zone 1 but only 10 m from the boundary -> not counted as reached
    r = ign.attribute_ignition(np.array([0, 0]), np.array([0.0, 50 * H]), np.array([0, 1]),
                               np.array([900.0, 10.0]), 1, footprint_m=375.0)
    assert r.zone[0] == 0 and r.reached[0] == []


def test_bad_arrays_refused():
    with pytest.raises(ValueError):
        ign.attribute_ignition(np.array([0]), np.array([0.0, 1.0]), np.array([0]), np.array([1.0]), 1)


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 3), st.floats(0, 1e6), st.integers(-1, 2), st.floats(0, 2000)),
                min_size=0, max_size=30))
def test_invariants(rows):
    # invariants: a fire's first time is its minimum time; a determined start lies in the zone of a
    # detection at that time; the rows' order does not change a determined answer's zone
    fire = np.array([r[0] for r in rows], dtype=int)
    t = np.array([r[1] for r in rows], dtype=float)
    zone = np.array([r[2] for r in rows], dtype=int)
    dist = np.array([r[3] for r in rows], dtype=float)
    res = ign.attribute_ignition(fire, t, zone, dist, 4, footprint_m=375.0, tie_s=H)
    perm = np.random.default_rng(0).permutation(len(rows))
    res2 = ign.attribute_ignition(fire[perm], t[perm], zone[perm], dist[perm], 4, footprint_m=375.0, tie_s=H)
    for k in range(4):
        mine = fire == k
        if not mine.any():
            assert res.zone[k] == ign.NONE
            continue
        assert res.time_s[k] == t[mine].min()
        assert res.zone[k] == res2.zone[k]
        if res.zone[k] >= ign.OUTSIDE_ZONE:
            assert res.zone[k] in set(zone[mine & (t <= t[mine].min() + H)].tolist())
