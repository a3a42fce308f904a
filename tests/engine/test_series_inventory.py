"""Inventory lines of one calendar year from two runs of a series (a fire season across the new
year): one line per year x phase x gas, their sum, the interval from the joint draws; refused when
two runs hold the same fire (overlap in place and dates). Tiny synthetic years (series_scenes) with
the truth by hand: peat = depth x area x bulk density; CO2 = peat x 1703 g/kg (Akagi et al. 2011,
Table 1, peatland, as shipped in smouldering_akagi2011.csv; recalled, unchecked)."""

from __future__ import annotations

import csv

import pytest
from series_scenes import box, make_year, write_series

from peatburn.engine.series import run_series
from peatburn.errors import ConfigError
from peatburn.series_config import load_series

EF_CO2 = 1703.0  # g/kg, Akagi et al. 2011 Table 1 peatland (the shipped set's value)
S_A = box(2, 2, 12, 12)      # 100 px
S_B = box(30, 20, 45, 35)    # 225 px, apart from S_A
ACROSS = ("2031-12-01", "2032-01-31")  # 31 days in 2031, 31 in 2032: half of the fire in each year


def _read(path):
    with open(path, newline="", encoding="utf-8") as f:
        return list(csv.DictReader(f))


def _peat_t(depth, n):
    return depth * n * 100.0 * 100.0 / 1000.0  # m x px x 100 m2 x 100 kg m-3 (0.1 g cm-3) -> t


def test_one_calendar_year_from_two_runs_is_one_line(tmp_path):
    c1 = make_year(tmp_path / "a", 2031, [S_A], dates=[ACROSS], draws=300)                 # 0.4 m
    c2 = make_year(tmp_path / "b", 2032, [S_B], wt=0.8, dates=[("2032-03-01", "2032-03-10")], draws=300)  # 0.5 m
    result = run_series(load_series(write_series(tmp_path, {2031: c1, 2032: c2})), tmp_path / "out")
    rows = _read(tmp_path / "out" / "inventory.csv")
    co2 = {r["year"]: r for r in rows if r["phase"] == "smouldering" and r["gas"] == "CO2"}
    assert len([r for r in rows if r["year"] == "2032" and r["phase"] == "smouldering" and r["gas"] == "CO2"]) == 1
    assert co2["2031"]["run_year"] == "2031" and co2["2031"]["interval"] == "run"
    assert float(co2["2031"]["emissions_gg"]) == pytest.approx(0.5 * _peat_t(0.4, 100) * EF_CO2 * 1e-6, rel=1e-6)
    both = co2["2032"]
    assert both["run_year"] == "2031+2032" and both["interval"] == "joint draws"
    assert float(both["emissions_gg"]) == pytest.approx(
        (0.5 * _peat_t(0.4, 100) + _peat_t(0.5, 225)) * EF_CO2 * 1e-6, rel=1e-6)
    # these years' errors are all shared factors (no survey, a stated model): the two lines move together
    # draw by draw, and the 2.5 % point of a sum of comonotone variables is the sum of their 2.5 % points
    per_run = dict(_lines(result, "2032"))
    assert sorted(per_run) == [2031, 2032]
    for s in ("lo", "hi"):
        assert float(both[f"emissions_gg_{s}"]) == pytest.approx(
            sum(float(r[f"emissions_gg_{s}"]) for r in per_run.values()), rel=1e-6)
    notes = (tmp_path / "out" / "series.json").read_text()
    assert "calendar year 2032 has fires of the runs of 2031 and 2032" in notes


def _lines(result, cal):
    """The runs' own 2032 smouldering CO2 lines (their inventory.csv)."""
    for y, r in zip(result.years, result.results):
        for row in r.inventory:
            if str(row["year"]) == cal and row["phase"] == "smouldering" and row["gas"] == "CO2":
                yield y, {"run_year": y, **row}


def test_the_same_fire_in_two_runs_is_refused_a_repeat_fire_is_not(tmp_path):
    c1 = make_year(tmp_path / "a", 2031, [S_A], dates=[ACROSS])
    # the January part of the 2031 fire mapped again by the 2032 run: same place, dates that meet
    twice = make_year(tmp_path / "b", 2032, [box(5, 5, 15, 15)], dates=[("2032-01-10", "2032-01-20")])
    s = write_series(tmp_path, {2031: c1, 2032: twice})
    with pytest.raises(ConfigError, match=r"calendar year 2032 would count a fire twice: scar #1 of the 2031 run "
                                          r"\(2031-12-01 to 2032-01-31\) and scar #1 of the 2032 run") as exc:
        run_series(load_series(s), tmp_path / "out")
    assert "\n" not in str(exc.value)
    assert not (tmp_path / "out").exists()  # nothing written: the staging folder is gone
    # the same place burning again in June is a repeat fire: added (fire history caps its depth)
    again = make_year(tmp_path / "c", 2032, [box(5, 5, 15, 15)], dates=[("2032-06-01", "2032-06-10")])
    res = run_series(load_series(write_series(tmp_path, {2031: c1, 2032: again})), tmp_path / "ok")
    rows = [r for r in _read(tmp_path / "ok" / "inventory.csv") if r["year"] == "2032"
            and r["phase"] == "smouldering" and r["gas"] == "CO2"]
    # 2032: half of the 2031 fire (0.4 m on 100 px) + the June fire: 0.4 m on the 51 px not burned in 2031,
    # 0.5 - 0.4 = 0.1 m left on the 49 px shared with S_A (columns/rows 5-11)
    want = (0.5 * _peat_t(0.4, 100) + _peat_t(0.4, 51) + _peat_t(0.1, 49)) * EF_CO2 * 1e-6
    assert len(rows) == 1 and float(rows[0]["emissions_gg"]) == pytest.approx(want, rel=1e-6)
    assert rows[0]["interval"] == ""  # no draws: no interval
    assert res.years == [2031, 2032]


def test_check_refuses_the_same_fire_before_anything_runs(tmp_path):
    from click.testing import CliRunner

    import peatburn
    from peatburn.cli.main import cli

    c1 = make_year(tmp_path / "a", 2031, [S_A], dates=[ACROSS])
    twice = make_year(tmp_path / "b", 2032, [box(5, 5, 15, 15)], dates=[("2032-01-10", "2032-01-20")])
    s = write_series(tmp_path, {2031: c1, 2032: twice})
    with pytest.raises(ConfigError, match="calendar year 2032 would count a fire twice"):
        peatburn.check_series(s)
    res = CliRunner().invoke(cli, ["check", str(s)])
    assert res.exit_code == 2 and len(res.output.strip().splitlines()) == 1 and "scar #1 of the 2031 run" in res.output
    # a repeat fire on other dates passes the check
    again = make_year(tmp_path / "c", 2032, [box(5, 5, 15, 15)], dates=[("2032-06-01", "2032-06-10")])
    assert peatburn.check_series(write_series(tmp_path, {2031: c1, 2032: again})).years
