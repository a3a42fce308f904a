"""Tests of peatburn.science.flaming against hand arithmetic, published coefficients and scipy.

Every expected number below is written out by hand (the arithmetic is in the comment or the
expression), taken from a named publication, or computed by an independent reference (scipy,
a brute-force oracle written in this file); none is produced by running peatburn's own code.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.constants
import scipy.integrate
from hypothesis import given, settings
from hypothesis import strategies as st

from peatburn.errors import PeatburnError, PhysicalRangeError
from peatburn.factors import load_factor_set
from peatburn.science import flaming
from peatburn.science.gases import gas_emissions
from peatburn.units import ureg

HOUR = 3600.0
DAY = 86400.0


# --------------------------------------------------------------------------- published constants


def test_wooster_2005_coefficient():
    # Wooster et al. 2005, J. Geophys. Res. 110, D24311: 0.368 +/- 0.015 kg of dry matter per MJ
    # of fire radiative energy (recalled, unchecked; see docs/sources.md).
    assert flaming.WOOSTER_2005_COEFFICIENT == 0.368
    assert flaming.WOOSTER_2005_COEFFICIENT_SD == 0.015


def test_stefan_boltzmann_matches_codata_via_scipy():
    # CODATA 2018 (exact since the 2019 SI): sigma = 5.670374419e-8 W m-2 K-4, as scipy.constants.
    assert flaming.STEFAN_BOLTZMANN == pytest.approx(scipy.constants.Stefan_Boltzmann, rel=1e-12)


def test_ipcc2006_table_2_6_entries_are_fractions_with_citation_and_status():
    # IPCC 2006 Vol. 4 Ch. 2 Table 2.6 gives combustion factors as fractions of the pre-fire fuel.
    assert {"tropical_forest_primary", "tropical_forest_secondary", "shrubland"} <= set(flaming.IPCC2006_TABLE_2_6)
    for name, row in flaming.IPCC2006_TABLE_2_6.items():
        assert 0 < row["cf"] <= 1, name
        assert "Table 2.6" in row["row"], name
        assert row["status"] in ("checked", "recalled, unchecked"), name


# --------------------------------------------------------------------------- units


def test_one_megawatt_for_one_second_is_one_megajoule():
    # SI: 1 W = 1 J/s, so 1 MW x 1 s = 1 MJ (pint, the project's one registry).
    assert (1 * ureg.MW * ureg.s).to("MJ").magnitude == pytest.approx(1.0, rel=1e-15)


# --------------------------------------------------------------------------- FRE


def test_fre_of_a_hand_computable_series():
    # Event 0: looks at t = 0, 1 h, 3 h with FRP 10, 30 (two detections, 12 + 18), 20 MW.
    # Event 1: one look of 50 MW.  edge_s = 1800 s (ramp from / to zero at each end).
    t = [0.0, HOUR, HOUR, 3 * HOUR, 10 * DAY]
    frp = [10.0, 12.0, 18.0, 20.0, 50.0]
    ev = [0, 0, 0, 0, 1]
    fre = flaming.fire_radiative_energy(t, frp, ev, edge_s=1800.0)
    # Trapezoids: (10 + 30) / 2 x 3600 = 72 000; (30 + 20) / 2 x 7200 = 180 000.
    # End ramps: 10 x 1800 / 2 = 9 000 and 20 x 1800 / 2 = 18 000.  Sum: 279 000 MJ.
    # Single look: 50 x 1800 / 2 x 2 = 90 000 MJ.
    np.testing.assert_allclose(fre, [279_000.0, 90_000.0], rtol=1e-12)


def test_fre_without_edges_is_the_plain_trapezoid():
    # Same event 0 with edge_s = 0: 72 000 + 180 000 = 252 000 MJ.
    fre = flaming.fire_radiative_energy([0.0, HOUR, HOUR, 3 * HOUR], [10.0, 12.0, 18.0, 20.0], [0, 0, 0, 0], edge_s=0.0)
    np.testing.assert_allclose(fre, [252_000.0], rtol=1e-12)


def test_detections_within_look_s_are_one_look_at_their_mean_time():
    # 12 MW at 3500 s and 18 MW at 3700 s (look_s = 600): one look of 30 MW at 3600 s, so the
    # result equals the hand sum of the first test: 279 000 MJ.
    t = [0.0, 3500.0, 3700.0, 3 * HOUR]
    frp = [10.0, 12.0, 18.0, 20.0]
    fre = flaming.fire_radiative_energy(t, frp, [0, 0, 0, 0], edge_s=1800.0, look_s=600.0)
    np.testing.assert_allclose(fre, [279_000.0], rtol=1e-12)
    # With look_s = 0 they are two looks: trapezoids (10+12)/2*3500 + (12+18)/2*200
    # + (18+20)/2*7100 = 38 500 + 3 000 + 134 900 = 176 400; ends 9 000 + 18 000 -> 203 400 MJ.
    fre0 = flaming.fire_radiative_energy(t, frp, [0, 0, 0, 0], edge_s=1800.0, look_s=0.0)
    np.testing.assert_allclose(fre0, [203_400.0], rtol=1e-12)


def test_constant_frp_for_a_day():
    # 100 MW seen every hour for 24 h, no end ramps: 100 MW x 86 400 s = 8.64e6 MJ.
    t = np.arange(25) * HOUR
    fre = flaming.fire_radiative_energy(t, np.full(25, 100.0), np.zeros(25, int), edge_s=0.0)
    np.testing.assert_allclose(fre, [8.64e6], rtol=1e-12)


def test_detection_energy_apportions_the_event_fre():
    # Looks at 0, 3600, 10800 s, edge 1800: weights w = 3600/2 + 900 = 2700, (10800-0)/2 = 5400,
    # 7200/2 + 900 = 4500 s.  Energies: 10 x 2700 = 27 000; 12 x 5400 = 64 800;
    # 18 x 5400 = 97 200; 20 x 4500 = 90 000 (sum 279 000, as by trapezoids above).
    e = flaming.detection_energy([0.0, HOUR, HOUR, 3 * HOUR], [10.0, 12.0, 18.0, 20.0], [0, 0, 0, 0], edge_s=1800.0)
    np.testing.assert_allclose(e, [27_000.0, 64_800.0, 97_200.0, 90_000.0], rtol=1e-12)


def test_fre_does_not_depend_on_input_order():
    t = [0.0, HOUR, HOUR, 3 * HOUR, 10 * DAY]
    frp = [10.0, 12.0, 18.0, 20.0, 50.0]
    ev = [0, 0, 0, 0, 1]
    perm = [4, 2, 0, 3, 1]
    fre = flaming.fire_radiative_energy(np.take(t, perm), np.take(frp, perm), np.take(ev, perm), edge_s=1800.0)
    np.testing.assert_allclose(fre, [279_000.0, 90_000.0], rtol=1e-12)  # hand sums of the first test


@settings(max_examples=40, deadline=None)
@given(st.lists(st.tuples(st.floats(1.0, 5000.0), st.floats(0.0, 500.0)), min_size=1, max_size=30))
def test_fre_equals_scipy_trapezoid_plus_hand_end_ramps(steps):
    # Independent reference: scipy.integrate.trapezoid over the looks, plus the end ramps
    # FRP_first x edge / 2 + FRP_last x edge / 2 written out here.
    dt = np.array([s[0] for s in steps])
    frp = np.array([s[1] for s in steps])
    t = np.cumsum(dt) + 1.0e9  # strictly increasing, steps >= 1 s > look_s = 0.5
    edge = 1234.0
    expected = scipy.integrate.trapezoid(frp, t) + frp[0] * edge / 2 + frp[-1] * edge / 2
    got = flaming.fire_radiative_energy(t, frp, np.zeros(len(t), int), edge_s=edge, look_s=0.5)
    np.testing.assert_allclose(got, [expected], rtol=1e-9, atol=1e-6)


def test_fre_refuses_bad_input():
    with pytest.raises(PhysicalRangeError):
        flaming.fire_radiative_energy([0.0, 1.0], [10.0, -1.0], [0, 0])  # negative FRP
    with pytest.raises(PhysicalRangeError):
        flaming.fire_radiative_energy([0.0, np.nan], [10.0, 1.0], [0, 0])  # no time
    with pytest.raises(PhysicalRangeError):
        flaming.fire_radiative_energy([0.0, 1.0], [10.0, 1.0], [0, -1])  # negative event id
    with pytest.raises(PhysicalRangeError):
        flaming.fire_radiative_energy([0.0, 1.0], [10.0, 1.0], [0])  # lengths differ
    with pytest.raises(PeatburnError):
        flaming.fire_radiative_energy([0.0], [10.0], [0], edge_s=-1.0)
    assert flaming.fire_radiative_energy([], [], []).shape == (0,)


# --------------------------------------------------------------------------- events


def _oracle_events(x, y, t, d, g):
    """Brute force: union-find over every pair (O(n^2)), numbered by first detection time."""
    n = len(x)
    parent = list(range(n))

    def find(a):
        while parent[a] != a:
            parent[a] = parent[parent[a]]
            a = parent[a]
        return a

    for i in range(n):
        for j in range(i + 1, n):
            if math.hypot(x[i] - x[j], y[i] - y[j]) <= d and abs(t[i] - t[j]) <= g:
                parent[find(i)] = find(j)
    roots = [find(i) for i in range(n)]
    ids, out = {}, [0] * n
    for k in sorted(range(n), key=lambda k: (t[k], k)):
        ids.setdefault(roots[k], len(ids))
    for k in range(n):
        out[k] = ids[roots[k]]
    return out


def test_events_by_hand():
    # Rule: linked if distance <= 1000 m AND |dt| <= 86 400 s; events = single-linkage groups,
    # numbered by first detection time (ties: input order).
    rows = [
        (0, 0, 0),                  # 0  A
        (900, 0, HOUR),             # 1  B: 900 m from A -> A's event
        (1800, 0, 2 * HOUR),        # 2  C: 1800 m from A but 900 m from B -> same event (chain)
        (0, 0, 2 * HOUR + DAY + 1),  # 3  D: same place as A, 1 s past a day after C -> new event
        (10_000, 0, 0),             # 4  E
        (10_600, 800, 0),           # 5  F: exactly 1000 m from E (600-800-1000) -> linked
        (20_000, 0, 0),             # 6  G
        (20_000, 0, DAY),           # 7  H: exactly one day after G -> linked
        (30_000, 0, 0),             # 8  I
        (31_000.5, 0, 0),           # 9  J: 1000.5 m from I -> not linked
        (40_000, 0, 0),             # 10 K
        (40_800, 800, 0),           # 11 L: |dx|, |dy| <= 1000 but 1131 m apart -> not linked
    ]
    x, y, t = (np.array(c, dtype=float) for c in zip(*rows))
    ev = flaming.assign_events(x, y, t)
    # Ties at t = 0 in input order: A(0) -> 0, E(4) -> 1, G(6) -> 2, I(8) -> 3, J(9) -> 4,
    # K(10) -> 5, L(11) -> 6; D (latest) -> 7.
    expected = [0, 0, 0, 7, 1, 1, 2, 2, 3, 4, 5, 6]
    assert ev.tolist() == expected


def test_events_with_large_projected_coordinates():
    # UTM-sized coordinates: 743 000 and 744 000 m are exactly 1000 m apart -> linked.
    ev = flaming.assign_events([743_000.0, 744_000.0, 745_000.5], [8_715_000.0] * 3, [0.0, 10.0, 20.0])
    assert ev.tolist() == [0, 0, 1]


def test_gap_zero_links_only_equal_times():
    ev = flaming.assign_events([0.0, 10.0, 20.0], [0.0, 0.0, 0.0], [5.0, 5.0, 6.0], gap_s=0.0)
    assert ev.tolist() == [0, 0, 1]


@settings(max_examples=30, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 30), st.integers(0, 30), st.integers(0, 12)), min_size=1, max_size=60),
       st.sampled_from([(1, 1), (7, 2), (1 << 19, 8)]))
def test_events_match_a_brute_force_oracle(points, budget_sample):
    # Coordinates on a 400 m lattice and times on a 6-h lattice: many exact ties with the
    # 1000 m / 1 day bounds. A tiny pair budget and sample exercise the piecewise pair tests.
    x = [p[0] * 400.0 for p in points]
    y = [p[1] * 400.0 for p in points]
    t = [p[2] * 6 * HOUR for p in points]
    with _budget(*budget_sample):
        got = flaming.assign_events(x, y, t)
    assert got.tolist() == _oracle_events(x, y, t, 1000.0, DAY)


class _budget:
    """Set the pair budget and sample size of the event grouping for one block (results must not
    depend on them)."""

    def __init__(self, budget, sample, whole=True):
        self.new = (budget, sample, whole)

    def __enter__(self):
        self.old = (flaming._PAIR_BUDGET, flaming._SAMPLE, flaming._WHOLE_CELLS)
        flaming._PAIR_BUDGET, flaming._SAMPLE, flaming._WHOLE_CELLS = self.new

    def __exit__(self, *exc):
        flaming._PAIR_BUDGET, flaming._SAMPLE, flaming._WHOLE_CELLS = self.old


def _scipy_components(x, y, t, d, g):
    """Reference: scipy's connected_components on the brute-force link graph (every pair)."""
    from scipy.sparse import csr_matrix
    from scipy.sparse.csgraph import connected_components

    x, y, t = (np.asarray(v, dtype=float) for v in (x, y, t))
    linked = ((np.hypot(x[:, None] - x[None, :], y[:, None] - y[None, :]) <= d)
              & (np.abs(t[:, None] - t[None, :]) <= g))
    return connected_components(csr_matrix(linked), directed=False)[1]


def _same_partition(a, b) -> bool:
    a, b = np.asarray(a), np.asarray(b)
    pairs = np.unique(np.column_stack([a, b]), axis=0)
    return len(pairs) == len(np.unique(a)) == len(np.unique(b))


@settings(max_examples=40, deadline=None)
@given(st.integers(0, 2**32 - 1), st.integers(1, 400), st.sampled_from([50.0, 1000.0, 5000.0]),
       st.sampled_from([0.0, 600.0, DAY]), st.sampled_from(["dense", "spread", "clumps"]),
       st.sampled_from([(1, 1, True), (5, 3, True), (1 << 19, 8, True), (7, 2, False), (1 << 19, 8, False)]))
def test_events_match_scipy_on_the_brute_force_graph(seed, n, d, g, layout, budget_sample):
    # (pair budget, sample, whole cells): False tests every cell's detections pair by pair, the
    # path of cells that fail the bounding-box check through rounding.
    # Float positions and times (no lattice), three layouts: all packed in a few cells, spread
    # over a large area (many singletons), and clumps lying close to the distance bound.
    rng = np.random.default_rng(seed)
    if layout == "dense":
        x, y = rng.uniform(0, 2 * d, n) + 743_000.0, rng.uniform(0, 2 * d, n) + 9_715_000.0
        t = rng.choice(np.arange(4) * 12 * HOUR, n) + rng.uniform(0, 300, n)
    elif layout == "spread":
        x, y = rng.uniform(0, 200 * d, n), rng.uniform(-100 * d, 100 * d, n)
        t = rng.uniform(0, 40 * DAY, n)
    else:
        centres = rng.uniform(0, 10 * d, (5, 2))
        k = rng.integers(0, 5, n)
        x = centres[k, 0] + rng.normal(0, 0.4 * d, n)
        y = centres[k, 1] + rng.normal(0, 0.4 * d, n)
        t = np.round(rng.uniform(0, 5 * DAY, n) / HOUR) * HOUR
    with _budget(*budget_sample):
        got = flaming.assign_events(x, y, t, distance_m=d, gap_s=g)
    ref = _scipy_components(x, y, t, d, g)
    assert _same_partition(got, ref)
    # Numbering: by first detection time, ties in input order.
    order = np.lexsort((np.arange(n), t))
    firsts = got[order][np.sort(np.unique(got[order], return_index=True)[1])]
    assert firsts.tolist() == list(range(got.max() + 1))


def test_events_in_cells_on_the_bounds():
    # Detections exactly D / sqrt(2) apart on both axes (the cell's own diagonal: exactly D,
    # linked) and exactly one gap apart in time, at large coordinates: the grid must not link
    # any pair the rule does not, nor miss one (reference: scipy on the brute-force graph).
    s = 1000.0 / math.sqrt(2.0)
    k = np.arange(6)
    x = 743_000.0 + np.r_[k * s, k * s + 0.25]
    y = 9_715_000.0 + np.r_[k * s, -k * s]
    t = np.r_[k * DAY, k * DAY + 1.0]
    got = flaming.assign_events(x, y, t)
    assert _same_partition(got, _scipy_components(x, y, t, 1000.0, DAY))


def test_dense_detections_group_in_bounded_memory():
    # 12,000 detections within 300 m and one hour: every pair is linked (one event). Listing the
    # 72 million linked pairs, as a pair search does, takes gigabytes; the grouping must stay
    # within memory proportional to the detections (peak traced by tracemalloc, which numpy
    # reports to; generous bound: 32 MiB against about 0.4 MiB of input).
    import tracemalloc

    rng = np.random.default_rng(3)
    n = 12_000
    x, y = 743_000.0 + rng.uniform(0, 300, n), 9_715_000.0 + rng.uniform(0, 300, n)
    t = rng.uniform(0, HOUR, n)
    tracemalloc.start()
    try:
        ev = flaming.assign_events(x, y, t)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert ev.tolist() == [0] * n
    assert peak < 32 * 2**20


def test_events_refuse_bad_input():
    with pytest.raises(PhysicalRangeError):
        flaming.assign_events([0.0, np.nan], [0.0, 0.0], [0.0, 0.0])
    with pytest.raises(PhysicalRangeError):
        flaming.assign_events([0.0], [0.0, 1.0], [0.0])
    with pytest.raises(PhysicalRangeError):
        flaming.assign_events([0.0], [0.0], [0.0], distance_m=0.0)
    assert flaming.assign_events([], [], []).shape == (0,)


# --------------------------------------------------------------------------- dry matter and gases


def test_dry_matter_and_co2_from_fre_by_hand():
    # FRE 279 000 MJ (the hand series above) x 0.368 kg/MJ (Wooster et al. 2005, recalled)
    # = 102 672 kg dry matter.
    dm = flaming.dry_matter_from_fre(279_000.0)
    assert dm == pytest.approx(102_672.0, rel=1e-12)
    # CO2: 102 672 kg x 1580 g/kg x 1e-3 = 162 221.76 kg (IPCC 2006 Vol. 4 Ch. 2 Table 2.5,
    # tropical forest, 1580 g CO2/kg, from Andreae & Merlet 2001; recalled).
    # CH4: 102 672 x 6.8 x 1e-3 = 698.1696 kg.
    gases = flaming.flaming_emissions(dm, {"co2": 1580.0, "ch4": 6.8})
    assert gases["co2"] == pytest.approx(162_221.76, rel=1e-12)
    assert gases["ch4"] == pytest.approx(698.1696, rel=1e-12)


def test_flaming_emissions_with_the_shipped_ipcc_table_2_5_set():
    # The shipped set holds IPCC 2006 Table 2.5 tropical forest: CO2 1580, CO 104, CH4 6.8 g/kg
    # (recalled). 1000 kg of dry matter -> 1580 kg CO2, 104 kg CO, 6.8 kg CH4.
    fs = load_factor_set("flaming_ipcc2006_tropical_forest", "flaming")
    out = flaming.flaming_emissions(1000.0, fs)
    assert out["co2"] == pytest.approx(1580.0)
    assert out["co"] == pytest.approx(104.0)
    assert out["ch4"] == pytest.approx(6.8)


def test_dry_matter_with_a_user_coefficient_and_arrays():
    # 1000 MJ x 0.5 kg/MJ = 500 kg; 2000 MJ x 0.5 = 1000 kg; NaN propagates.
    np.testing.assert_allclose(flaming.dry_matter_from_fre([1000.0, 2000.0, np.nan], 0.5), [500.0, 1000.0, np.nan])
    with pytest.raises(PhysicalRangeError):
        flaming.dry_matter_from_fre(-1.0)


# --------------------------------------------------------------------------- IPCC 2006 Eq. 2.27


def test_eq_2_27_by_hand():
    # IPCC 2006 Vol. 4 Ch. 2 Eq. 2.27: L = A x M_B x C_f x G_ef x 10^-3.
    # A = 250 ha, M_B = 180 t d.m./ha, C_f = 0.36: fuel consumed 250 x 180 x 0.36 = 16 200 t.
    fuel = flaming.fuel_consumed_eq227(250.0, 180.0, 0.36)
    assert fuel == pytest.approx(16_200.0, rel=1e-12)
    # CH4 with G_ef = 6.8 g/kg: 16 200 x 6.8 x 10^-3 = 110.16 t (t x g/kg x 1e-3 = t).
    assert gas_emissions(fuel, 6.8) == pytest.approx(110.16, rel=1e-12)


def test_eq_2_27_with_a_biomass_raster_and_table_2_6_factor():
    # Per-pixel biomass (t/ha) x 0.04 ha pixels (20 m x 20 m = 400 m2 = 0.04 ha) x C_f 0.5:
    # 100 x 0.04 x 0.5 = 2; 250 x 0.04 x 0.5 = 5; NaN stays NaN.
    mb = np.array([[100.0, 250.0], [np.nan, 0.0]])
    np.testing.assert_allclose(flaming.fuel_consumed_eq227(0.04, mb, 0.5), [[2.0, 5.0], [np.nan, 0.0]])
    # With a Table 2.6 row: A x M_B x C_f = 1 x 100 x cf.
    cf = flaming.IPCC2006_TABLE_2_6["tropical_forest_primary"]["cf"]
    assert flaming.fuel_consumed_eq227(1.0, 100.0, cf) == pytest.approx(100.0 * cf)


def test_eq_2_27_refuses_out_of_range():
    with pytest.raises(PhysicalRangeError):
        flaming.fuel_consumed_eq227(1.0, 100.0, 1.2)
    with pytest.raises(PhysicalRangeError):
        flaming.fuel_consumed_eq227(-1.0, 100.0, 0.5)
    with pytest.raises(PhysicalRangeError):
        flaming.fuel_consumed_eq227(1.0, -100.0, 0.5)


# --------------------------------------------------------------------------- what FRP misses


def test_frp_only_carbon_and_missed_ratio_by_hand():
    # 279 000 MJ x 0.368 kg/MJ = 102 672 kg d.m.; x 0.47 (IPCC 2006 Vol. 4 Ch. 4 Table 4.3 carbon
    # fraction, recalled) = 48 255.84 kg C.
    c = flaming.frp_only_carbon(279_000.0, flaming.WOOSTER_2005_COEFFICIENT, 0.47)
    assert c == pytest.approx(48_255.84, rel=1e-12)
    # Below-ground 482 558.4 kg C is ten times that: ratio 10.  A zone the FRP view missed
    # entirely (0 kg C) gets NaN.
    r = flaming.missed_ratio([482_558.4, 5.0, 0.0], [48_255.84, 0.0, 2.0])
    np.testing.assert_allclose(r, [10.0, np.nan, 0.0], rtol=1e-12)
    assert math.isnan(flaming.missed_ratio(1.0, 0.0))


def test_frp_only_carbon_refuses_bad_fraction():
    with pytest.raises(PhysicalRangeError):
        flaming.frp_only_carbon(1.0, 0.368, 47.0)  # a percentage, not a fraction


# --------------------------------------------------------------------------- Stefan-Boltzmann


def test_smouldering_radiates_one_sixteenth_of_flaming_per_area():
    # Stefan-Boltzmann: (600 / 1200)^4 = 1/16 = 0.0625.
    m = flaming.blackbody_exitance([600.0, 1200.0])
    assert m[0] / m[1] == pytest.approx(1.0 / 16.0, rel=1e-12)
    # 1000 K black body: 5.670374419e-8 x 1e12 = 56 703.74419 W m-2 (CODATA sigma).
    assert flaming.blackbody_exitance(1000.0) == pytest.approx(56_703.74419, rel=1e-12)
    # Emissivity 0.5 halves it.
    assert flaming.blackbody_exitance(1000.0, 0.5) == pytest.approx(28_351.872095, rel=1e-12)


def test_cap_by_biomass_hand_cases():
    from peatburn.science.flaming import cap_by_biomass

    # 1200 kg from FRE on a fire holding 300 kg of biomass -> scale 0.25; 100 kg under 300 kg -> 1;
    # no biomass figure (NaN) -> no cap; nothing burned -> 1
    np.testing.assert_allclose(cap_by_biomass([1200.0, 100.0, 50.0, 0.0], [300.0, 300.0, np.nan, 0.0]),
                               [0.25, 1.0, 1.0, 1.0])
    assert cap_by_biomass(10.0, 0.0) == 0.0  # no biomass at all: nothing above ground burns
    with pytest.raises(PhysicalRangeError):
        cap_by_biomass(-1.0, 1.0)
