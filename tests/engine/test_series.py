"""peatburn series: years run with one method, each year's figures equal its own run, the series
tables, the consistency refusals (tiny synthetic scenes with a hand-computed truth: series_scenes)."""

from __future__ import annotations

import csv
import json

import pytest
from series_scenes import box, carbon_t, make_year, write_series

import peatburn
from peatburn.engine.series import run_series
from peatburn.errors import ConfigError, OutputExistsError
from peatburn.series_config import load_series


@pytest.fixture(scope="module")
def two_years(tmp_path_factory):
    """Two years whose scars do not overlap, with draws; run as a series once."""
    root = tmp_path_factory.mktemp("series")
    c1 = make_year(root / "y2031", 2031, [box(2, 2, 12, 12)], draws=200)
    c2 = make_year(root / "y2032", 2032, [box(30, 20, 45, 35)], wt=0.8, draws=200)
    s = write_series(root, {2031: c1, 2032: c2})
    result = run_series(load_series(s), root / "out")
    return root, (c1, c2), result


def _read(path):
    with open(path, newline="", encoding="utf-8") as f:
        return list(csv.DictReader(f))


def test_each_year_equals_its_own_run(two_years, tmp_path):
    root, configs, result = two_years
    for year, cfg in zip((2031, 2032), configs):
        own = peatburn.run(cfg, tmp_path / str(year))
        # byte-identical tables: the series runs the year as its own run does
        for name in ("zones.csv", "fires.csv", "inventory.csv"):
            assert (root / "out" / str(year) / name).read_bytes() == (own.out_dir / name).read_bytes(), name
    # hand arithmetic: depth a + b w = 0.1 + 0.5 x 0.6 = 0.4 m on 100 px, 0.1 + 0.5 x 0.8 = 0.5 m
    # capped by the 0.5 m thickness on 225 px
    assert result.results[0].total["carbon_smouldering_t"] == pytest.approx(carbon_t({0.4: 100}), rel=1e-6)
    assert result.results[1].total["carbon_smouldering_t"] == pytest.approx(carbon_t({0.5: 225}), rel=1e-6)


def test_series_tables_hold_every_year(two_years):
    root, _, result = two_years
    rows = _read(root / "out" / "series.csv")
    by = {(r["kind"], r["year"], r["phase"], r["quantity"]): r for r in rows}
    for year, res in zip((2031, 2032), result.results):
        r = by[("year", str(year), "smouldering", "carbon_t")]
        assert float(r["value"]) == pytest.approx(res.total["carbon_smouldering_t"], rel=1e-9)
        assert float(r["lo"]) == pytest.approx(res.total["carbon_smouldering_t_lo"], rel=1e-9)
        assert float(r["hi"]) == pytest.approx(res.total["carbon_smouldering_t_hi"], rel=1e-9)
    s = by[("sum", "2031-2032", "smouldering", "carbon_t")]
    assert float(s["value"]) == pytest.approx(carbon_t({0.4: 100, 0.5: 225}), rel=1e-6)
    assert float(s["lo"]) < float(s["value"]) < float(s["hi"])
    t = by[("trend", "2031-2032", "smouldering", "carbon_t")]
    # trend = (E_last - E_base) / E_base x 100 (IPCC 2006 Vol. 1 Ch. 3), by hand: (225 x 0.5 / (100 x 0.4) - 1)
    assert float(t["value"]) == pytest.approx((225 * 0.5 / (100 * 0.4) - 1) * 100, rel=1e-6)
    inv = _read(root / "out" / "inventory.csv")
    assert {r["run_year"] for r in inv} == {"2031", "2032"}
    assert json.loads((root / "out" / "inventory.json").read_text())["years"] == [2031, 2032]
    report = (root / "out" / "series_report.html").read_text(encoding="utf-8")
    assert "2031/report.html" in report and "not legal findings" in report and "if independent" in report
    # the sum and trend chart, self-contained: every image is a data: URI, every link a year's own report
    import re

    assert 'alt="Sum of the years and trend of CO2e, joint and independent intervals" src="data:image/png' in report
    links = re.findall(r'(?:href|src)="([^"]*)"', report)
    assert all(u.startswith("data:") or re.fullmatch(r"\d{4}/report\.html", u) for u in links), links
    assert (root / "out" / "2032" / "report.html").exists()


def test_series_refuses_to_overwrite(two_years):
    root, _, _ = two_years
    with pytest.raises(OutputExistsError, match="--overwrite"):
        run_series(load_series(root / "SERIES.toml"), root / "out")


def test_year_with_another_gwp_set_is_refused_unless_stated(tmp_path):
    c1 = make_year(tmp_path / "a", 2031, [box(2, 2, 12, 12)])
    c2 = make_year(tmp_path / "b", 2032, [box(2, 2, 12, 12)], gwp="AR5")
    s = write_series(tmp_path, {2031: c1, 2032: c2})
    with pytest.raises(ConfigError, match=r"year 2032 .*emission_factors.gwp = 'AR5'.*allow_differences") as exc:
        load_series(s)
    assert "\n" not in str(exc.value)
    text = s.read_text().replace('config = "b/config.toml"', 'config = "b/config.toml"\nallow_differences = ["emission_factors.gwp"]')
    s.write_text(text)
    ser = load_series(s)
    assert any("emission_factors.gwp" in n and "2032" in n for n in ser.notes)


def test_shared_settings_are_checked(tmp_path):
    c1 = make_year(tmp_path / "a", 2031, [box(2, 2, 12, 12)])
    c2 = make_year(tmp_path / "b", 2032, [box(2, 2, 12, 12)])
    s = write_series(tmp_path, {2031: c1, 2032: c2},
                     extra='\n[shared]\nemission_factors = { smouldering = "smouldering_ipcc2013_wetlands" }\n')
    with pytest.raises(ConfigError, match=r"year 2031 .*\[shared\] sets 'smouldering_ipcc2013_wetlands'"):
        load_series(s)
    s.write_text(s.read_text().replace("[shared]\nemission_factors", "[shared]\nemission_factor"))
    with pytest.raises(ConfigError, match="did you mean 'emission_factors"):
        load_series(s)


def test_missing_years_are_reported_and_duplicates_refused(tmp_path):
    c1 = make_year(tmp_path / "a", 2031, [box(2, 2, 12, 12)])
    c3 = make_year(tmp_path / "c", 2034, [box(2, 2, 12, 12)])
    ser = load_series(write_series(tmp_path, {2031: c1, 2034: c3}))
    assert ser.years == [2031, 2034]
    assert any("2032, 2033" in n for n in ser.notes)
    c4 = make_year(tmp_path / "d", 2031, [box(2, 2, 12, 12)])
    with pytest.raises(ConfigError, match="year 2031 is listed by more than one run"):
        load_series(write_series(tmp_path, {2031: c1, 2034: c4}))


def test_joint_draws_of_the_base_year_are_its_runs_draws(two_years):
    """The base year keeps its run's seed for every source, so its joint draws give its run's interval;
    the other year's total is drawn with common random numbers for the shared factors."""
    from peatburn.engine.series import joint_draws
    from peatburn.science import trend

    root, _, result = two_years
    series = load_series(root / "SERIES.toml")
    d = joint_draws(series, result.results)
    carbon = d["quantities"]["carbon_kg"] * 1e-3
    lo, hi = trend.interval(carbon[0])
    total = result.results[0].total
    assert lo == pytest.approx(total["carbon_smouldering_t_lo"], rel=1e-9)
    assert hi == pytest.approx(total["carbon_smouldering_t_hi"], rel=1e-9)
    # these tiny years have no survey and a stated depth model: every error is a shared factor, so the
    # years' totals move together draw by draw (correlation 1) and the trend has no spread
    assert trend.correlation(carbon)[0, 1] == pytest.approx(1.0, abs=1e-9)
    t = trend.trend_draws(carbon[0], carbon[1])
    assert float(t.max() - t.min()) == pytest.approx(0.0, abs=1e-9)
