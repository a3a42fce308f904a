"""Fire history across the years of a series (docs/method.md 7.7): a later fire's depth is capped by
the peat the earlier fires left, and a pixel burned earlier in the series gets the repeat-fire model
where the scars carry no fire count. Tiny synthetic years with the truth by hand (series_scenes:
depth = a + b w on a constant water table, 0.5 m of peat, 10 m pixels)."""

from __future__ import annotations

import pytest
from series_scenes import box, carbon_t, make_year, write_series

from peatburn.engine.series import run_series
from peatburn.series_config import load_series

S1 = box(5, 5, 25, 25)     # 20 x 20 = 400 px
S2 = box(15, 10, 35, 30)   # 400 px; overlaps S1 on columns 15-24 x rows 10-24 = 150 px


def _model(a, b):
    return {"intercept": a, "slope": b, "intercept_se": 0.0, "slope_se": 0.0, "covariance": 0.0, "n": 100,
            "r2": 0.9, "rmse": 0.05, "method": "stated for a test", "confidence": "test",
            "water_table_range": [0.0, 2.0]}


def _carbon(result, year):
    return result.results[result.years.index(year)].total["carbon_smouldering_t"]


def test_later_fires_are_capped_by_the_peat_left(tmp_path):
    c1 = make_year(tmp_path / "a", 2031, [S1])                  # 0.1 + 0.5 x 0.6 = 0.4 m
    c2 = make_year(tmp_path / "b", 2032, [S2])                  # 0.4 m, but only 0.1 m left where S1 burned
    c3 = make_year(tmp_path / "c", 2033, [S1], wt=0.8)          # 0.5 m (= the thickness) before the cap
    result = run_series(load_series(write_series(tmp_path, {2031: c1, 2032: c2, 2033: c3})), tmp_path / "out")
    assert _carbon(result, 2031) == pytest.approx(carbon_t({0.4: 400}), rel=1e-6)
    # 2032: 250 px not burned before at 0.4 m; 150 px burned in 2031 keep 0.5 - 0.4 = 0.1 m
    assert _carbon(result, 2032) == pytest.approx(carbon_t({0.4: 250, 0.1: 150}), rel=1e-6)
    # 2033 on S1: 150 px burned twice (0.4 + 0.1 = all 0.5 m: no peat left, counted as mineral soil),
    # 250 px burned once keep 0.1 m
    t3 = result.results[2].total
    assert t3["carbon_smouldering_t"] == pytest.approx(carbon_t({0.1: 250}), rel=1e-6)
    assert t3["mineral_soil_area_ha"] == pytest.approx(150 * 100 / 1e4, rel=1e-9)
    # without the history every year burns its full depth (the cap is the series' doing)
    off = run_series(load_series(write_series(tmp_path, {2031: c1, 2033: c3}, extra="fire_history = false\n")),
                     tmp_path / "off")
    assert _carbon(off, 2033) == pytest.approx(carbon_t({0.5: 400}), rel=1e-6)
    # the earlier burns are recorded inputs of the later years
    prov = (tmp_path / "out" / "2033" / "provenance.json").read_text()
    assert "series.earlier_burns[1].depth" in prov


def test_repeat_fire_status_comes_from_the_series(tmp_path):
    models = {"all": _model(0.1, 0.5), "first_fire": _model(0.1, 0.5), "repeat_fire": _model(0.0, 0.1)}
    c1 = make_year(tmp_path / "a", 2031, [S1], model_file=models)
    c2 = make_year(tmp_path / "b", 2032, [S2], model_file=models)
    result = run_series(load_series(write_series(tmp_path, {2031: c1, 2032: c2})), tmp_path / "out")
    # 2032: first-fire model 0.4 m on 250 px; the 150 px burned in 2031 get the repeat-fire model
    # 0.0 + 0.1 x 0.6 = 0.06 m (below the 0.1 m left, so the cap does not bind)
    assert _carbon(result, 2032) == pytest.approx(carbon_t({0.4: 250, 0.06: 150}), rel=1e-6)
    # a fire count carried by the scars is kept: every pixel of 2032 counts as a first fire there, capped
    c2b = make_year(tmp_path / "b2", 2032, [S2], model_file=models, fire_counts=[1])
    kept = run_series(load_series(write_series(tmp_path, {2031: c1, 2032: c2b})), tmp_path / "kept")
    assert _carbon(kept, 2032) == pytest.approx(carbon_t({0.4: 250, 0.1: 150}), rel=1e-6)


def test_earlier_tier1_pixels_remove_their_equivalent_depth(tmp_path):
    """2031 has no water-table value (NaN raster): every burned pixel gets the Tier 1 fuel consumption,
    which removes FC / rho_b of peat (docs/method.md 7.7). Truth by hand: 353 t/ha x 0.1 kg m-2 per t/ha
    / (0.1 g cm-3 x 1000) = 0.353 m (IPCC 2013 Wetlands Supplement Table 2.6 default, recalled); 0.5 m
    of peat leaves 0.147 m for 2032's 0.4 m fire on the 150 px S1 and S2 share."""
    c1 = make_year(tmp_path / "a", 2031, [S1], wt=float("nan"))
    c2 = make_year(tmp_path / "b", 2032, [S2])
    result = run_series(load_series(write_series(tmp_path, {2031: c1, 2032: c2})), tmp_path / "out")
    t1 = result.results[0].total
    assert t1["area_tier1_ha"] == pytest.approx(4.0, rel=1e-9)  # 400 px x 100 m2
    left = 0.5 - 353.0 * 0.1 / (0.1 * 1000.0)
    assert _carbon(result, 2032) == pytest.approx(carbon_t({0.4: 250, left: 150}), rel=1e-6)
    # a larger stated fuel consumption (600 t/ha = 0.6 m at 0.1 g cm-3) removes more than the 0.5 m there
    # is: the shared pixels have no peat left (capped at the thickness) and burn nothing below ground in 2032
    c1b = make_year(tmp_path / "a2", 2031, [S1], wt=float("nan"),
                    extra='\n[depth.tier1]\nfuel_consumption = "600 t/ha"\n')
    s = write_series(tmp_path, {2031: c1b, 2032: c2})
    text = s.read_text().replace('config = "a2/config.toml"',
                                 'config = "a2/config.toml"\nallow_differences = ["depth.tier1.fuel_consumption"]')
    s.write_text(text)
    capped = run_series(load_series(s), tmp_path / "capped")
    assert _carbon(capped, 2032) == pytest.approx(carbon_t({0.4: 250}), rel=1e-6)
    assert capped.results[1].total["mineral_soil_area_ha"] == pytest.approx(1.5, rel=1e-9)
    # without fire history, the Tier 1 year removes nothing: 2032 burns 0.4 m everywhere
    off = run_series(load_series(write_series(tmp_path, {2031: c1, 2032: c2}, extra="fire_history = false\n")),
                     tmp_path / "off")
    assert _carbon(off, 2032) == pytest.approx(carbon_t({0.4: 400}), rel=1e-6)
