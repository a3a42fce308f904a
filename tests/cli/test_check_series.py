"""`peatburn check SERIES.toml` and ``peatburn.check_series``: a series validated before anything
runs, with the refusals of `peatburn series` word for word (tiny synthetic years, series_scenes)."""

from __future__ import annotations

import pytest
from click.testing import CliRunner
from series_scenes import box, make_year, write_series

import peatburn
from peatburn.cli.main import cli
from peatburn.errors import ConfigError, MissingInputError


def _one_line(res):
    lines = res.output.strip().splitlines()
    assert res.exit_code == 2 and len(lines) == 1, res.output
    return lines[0]


def test_check_series_lists_every_year_and_reports_gaps(tmp_path):
    c1 = make_year(tmp_path / "a", 2031, [box(2, 2, 12, 12)])
    c3 = make_year(tmp_path / "c", 2033, [box(2, 2, 12, 12)])
    s = write_series(tmp_path, {2031: c1, 2033: c3})
    report = peatburn.check_series(s)
    assert sorted(report.years) == [2031, 2033] and report.years[2031].ok
    assert any("2032" in n for n in report.notes)
    res = CliRunner().invoke(cli, ["check", str(s)])
    assert res.exit_code == 0, res.output
    assert "year 2031 (" in res.output and "year 2033 (" in res.output and "note: years missing" in res.output
    assert "  grid: 50 x 40 px" in res.output and res.output.strip().endswith("one method)")
    assert not (tmp_path / "out").exists()  # nothing ran


def test_check_series_refuses_as_the_series_command_does(tmp_path):
    runner = CliRunner()
    c1 = make_year(tmp_path / "a", 2031, [box(2, 2, 12, 12)])
    c2 = make_year(tmp_path / "b", 2032, [box(2, 2, 12, 12)], gwp="AR5")
    s = write_series(tmp_path, {2031: c1, 2032: c2})
    checked = _one_line(runner.invoke(cli, ["check", str(s)]))
    ran = _one_line(runner.invoke(cli, ["series", str(s), "--out", str(tmp_path / "o")]))
    assert checked == ran and "year 2032" in checked and "emission_factors.gwp" in checked
    with pytest.raises(ConfigError, match="allow_differences"):
        peatburn.check_series(s)
    # a year listed twice
    c4 = make_year(tmp_path / "d", 2031, [box(2, 2, 12, 12)])
    dup = write_series(tmp_path, {2031: c1, 2032: c4})
    line = _one_line(runner.invoke(cli, ["check", str(dup)]))
    assert line == _one_line(runner.invoke(cli, ["series", str(dup), "--out", str(tmp_path / "o")]))
    assert "year 2031 is listed by more than one run" in line


def test_a_years_own_problem_names_the_year(tmp_path):
    c1 = make_year(tmp_path / "a", 2031, [box(2, 2, 12, 12)])
    c2 = make_year(tmp_path / "b", 2032, [box(2, 2, 12, 12)])
    (tmp_path / "b" / "water_table.tif").unlink()
    s = write_series(tmp_path, {2031: c1, 2032: c2})
    with pytest.raises(MissingInputError, match=r"^year 2032 \(.*config.toml\): .*water_table.tif"):
        peatburn.check_series(s)
    line = _one_line(CliRunner().invoke(cli, ["check", str(s)]))
    assert line.startswith("error: year 2032") or "year 2032" in line
    res = CliRunner().invoke(cli, ["check", str(s), "--against", str(c1)])
    assert res.exit_code == 64 and "--against" in res.output  # a usage error: EX_USAGE (docs/cli.md)
