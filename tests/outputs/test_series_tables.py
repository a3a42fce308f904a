"""Inventory lines of one calendar year from two runs of a series, combined (outputs.series_tables)."""

from __future__ import annotations


def test_combined_lines_by_hand():
    """combine_calendar_years on lines written by hand: sums, added bounds without draws, the
    percentiles of summed draws with them, and lines without a year kept apart."""
    import numpy as np
    import pytest

    from peatburn.outputs.series_tables import ADDED_BOUNDS, combine_calendar_years

    def line(run, year, v, lo, hi, gas="CO2", u1=float("nan")):
        return {"run_year": run, "year": year, "phase": "smouldering", "gas": gas, "emissions_gg": v,
                "emissions_gg_lo": lo, "emissions_gg_hi": hi, "approach1_pct": u1,
                "approach2_minus_pct": float("nan"), "approach2_plus_pct": float("nan")}

    rows = [line(2031, 2031, 1.0, 0.8, 1.3, u1=25.0), line(2031, 2032, 0.5, 0.4, 0.65, u1=20.0),
            line(2032, 2032, 2.0, 1.5, 2.6, u1=10.0),
            line(2031, 2032, 0.1, 0.05, 0.2, gas="CH4"), line(2032, 2032, 0.3, 0.1, 0.5, gas="CH4"),
            line(2031, "", 0.2, 0.1, 0.3), line(2032, "", 0.4, 0.3, 0.5)]
    # draws of the two CO2 lines of 2032: 0..99 and 100..199 (k-th draws together) -> the sum 100..298 step 2
    draws = {(2031, 2032, "smouldering", "CO2"): np.arange(100.0), (2032, 2032, "smouldering", "CO2"): np.arange(100.0, 200.0)}
    out = combine_calendar_years(rows, draws)
    by = {(str(r["year"]), r["gas"], str(r["run_year"])): r for r in out}
    assert by[("2031", "CO2", "2031")]["interval"] == "run"
    co2 = by[("2032", "CO2", "2031+2032")]
    assert co2["emissions_gg"] == pytest.approx(2.5) and co2["interval"] == "joint draws"
    # numpy's default (linear) 2.5 % point of 100, 102, ..., 298: position 0.025 x 99 = 2.475 -> 104.95
    assert co2["emissions_gg_lo"] == pytest.approx(100 + 2 * 2.475)
    # IPCC Approach 1 of the sum taken as fully correlated: (0.5 x 20 + 2.0 x 10) / 2.5 = 12 %
    assert co2["approach1_pct"] == pytest.approx(12.0)
    # Approach 2 from the summed draws: mean 199, 2.5 % point 104.95, 97.5 % point 100 + 2 x 96.525 = 293.05
    assert co2["approach2_minus_pct"] == pytest.approx(100 * (199 - 104.95) / 199)
    assert co2["approach2_plus_pct"] == pytest.approx(100 * (293.05 - 199) / 199)
    assert by[("2031", "CO2", "2031")]["approach1_pct"] == 25.0  # a one-run line keeps its own
    ch4 = by[("2032", "CH4", "2031+2032")]
    # no Approach 1 without every line's, no Approach 2 without joint draws
    assert np.isnan(ch4["approach1_pct"]) and np.isnan(ch4["approach2_minus_pct"])
    assert (ch4["emissions_gg"], ch4["emissions_gg_lo"], ch4["emissions_gg_hi"]) == pytest.approx((0.4, 0.15, 0.7))
    assert ch4["interval"] == ADDED_BOUNDS
    assert by[("", "CO2", "2031")]["emissions_gg"] == 0.2 and by[("", "CO2", "2032")]["emissions_gg"] == 0.4
    assert [str(r["year"]) for r in out] == sorted(str(r["year"]) for r in out)
