"""`peatburn series` end to end with click's runner (tiny synthetic years, series_scenes)."""

from __future__ import annotations

import csv

from click.testing import CliRunner
from series_scenes import box, make_year, write_series

from peatburn.cli.main import cli


def test_series_command_runs_refuses_and_recalculates(tmp_path):
    c1 = make_year(tmp_path / "a", 2031, [box(2, 2, 12, 12)], draws=50)
    c2 = make_year(tmp_path / "b", 2032, [box(20, 20, 30, 30)], draws=50)
    s = write_series(tmp_path, {2031: c1, 2032: c2})
    runner = CliRunner()
    out = tmp_path / "out"
    res = runner.invoke(cli, ["series", str(s), "--out", str(out)])
    assert res.exit_code == 0, res.output
    assert "sum 2031-2032" in res.output and "not legal findings" in res.output
    assert (out / "series_report.html").exists() and (out / "2031" / "zones.csv").exists()
    # refuse to overwrite: one line, exit status 2
    res = runner.invoke(cli, ["series", str(s), "--out", str(out)])
    assert res.exit_code == 2 and "--overwrite" in res.output and len(res.output.strip().splitlines()) == 1
    # a year with another GWP set: one line naming the year and the key, exit status 2
    make_year(tmp_path / "b", 2032, [box(20, 20, 30, 30)], draws=50, gwp="AR5")
    res = runner.invoke(cli, ["series", str(s), "--out", str(tmp_path / "x")])
    assert res.exit_code == 2 and "year 2032" in res.output and "emission_factors.gwp" in res.output
    assert len(res.output.strip().splitlines()) == 1
    # a resubmission with a changed input and setting, against the first series
    make_year(tmp_path / "b", 2032, [box(20, 20, 30, 30)], draws=50, wt=0.7)
    res = runner.invoke(cli, ["series", str(s), "--out", str(tmp_path / "new"), "--against", str(out), "-q"])
    assert res.exit_code == 0, res.output
    with open(tmp_path / "new" / "recalculation.csv", newline="") as f:
        rows = list(csv.DictReader(f))
    changed = {(r["year"], r["what"], r["key"]) for r in rows}
    assert ("2032", "input", "depth.water_table.depth") in changed
    assert ("2032", "figure", "carbon_smouldering_t") in changed
    assert not any(r["year"] == "2031" and r["what"] in ("input", "figure") for r in rows)
