"""A series folder as one sealed set: written into a staging folder and swapped in whole, one writer
at a time, SHA256SUMS over every file below it (each year's folder too), and ``peatburn check
--outputs`` on it. GNU coreutils' ``sha256sum -c`` (a tool outside the project) checks the
SHA256SUMS; the file list is made here with pathlib, not by peatburn."""

from __future__ import annotations

import json
import shutil
import subprocess

import pytest
from click.testing import CliRunner
from series_scenes import box, make_year, write_series

from peatburn.cli.main import cli
from peatburn.engine import series as series_engine
from peatburn.engine.series import run_series
from peatburn.errors import OutputLockedError
from peatburn.io.lock import output_lock
from peatburn.outputs.checksums import check_outputs
from peatburn.series_config import load_series


@pytest.fixture(scope="module")
def sealed(tmp_path_factory):
    """Two overlapping years (the second reads the first's burn depth) run as a series once."""
    root = tmp_path_factory.mktemp("sealed")
    c1 = make_year(root / "a", 2031, [box(2, 2, 12, 12)])
    c2 = make_year(root / "b", 2032, [box(6, 6, 16, 16)])
    s = write_series(root, {2031: c1, 2032: c2})
    s.write_text(s.read_text().replace('name = "tiny series"', 'name = "<script>x()</script> & co"'))
    return root, s, run_series(load_series(s), root / "out")


def _files(folder):
    return sorted(p.relative_to(folder).as_posix() for p in folder.rglob("*") if p.is_file())


def test_series_folder_is_one_sealed_set(sealed):
    root, _, result = sealed
    out = root / "out"
    listed = [line.split("  ", 1)[1] for line in (out / "SHA256SUMS").read_text().splitlines()]
    assert listed == [f for f in _files(out) if f != "SHA256SUMS"]
    assert {"series.csv", "inventory.csv", "series_report.html", "2031/SHA256SUMS", "2031/provenance.json",
            "2032/burn_depth.tif"} <= set(listed)
    if shutil.which("sha256sum"):
        assert subprocess.run(["sha256sum", "--quiet", "-c", "SHA256SUMS"], cwd=out).returncode == 0
        assert subprocess.run(["sha256sum", "--quiet", "-c", "SHA256SUMS"], cwd=out / "2031").returncode == 0
    assert check_outputs(out) == []
    res = CliRunner().invoke(cli, ["check", "--outputs", str(out)])
    assert res.exit_code == 0 and "one series' complete, unaltered set" in res.output and "2031, 2032" in res.output
    # nothing of the staging or the lock is left, and no output names the staging folder
    assert sorted(p.name for p in root.iterdir() if p.name.startswith(".")) == []
    for f in _files(out):
        assert b"peatburn-stage" not in (out / f).read_bytes(), f
    # the series' name is escaped in its report (autoescape); without draws there is no sum/trend chart
    report = (out / "series_report.html").read_text(encoding="utf-8")
    assert "&lt;script&gt;x()&lt;/script&gt; &amp; co" in report and "<script>" not in report
    assert "Sum of the years and trend of CO2e" not in report
    # the later year records the earlier year's burn depth where it now is
    prov = json.loads((out / "2032" / "provenance.json").read_text())
    assert prov["inputs"]["series.earlier_burns[0].depth"]["path"] == str(out / "2031" / "burn_depth.tif")
    assert result.files["series"] == out / "series.csv" and result.results[1].out_dir == out / "2032"
    assert result.results[0].files["burn_depth"] == out / "2031" / "burn_depth.tif"


def test_altered_missing_and_extra_files_of_a_series(sealed, tmp_path):
    root, _, _ = sealed
    runner = CliRunner()
    bad = tmp_path / "bad"
    shutil.copytree(root / "out", bad)
    with open(bad / "2031" / "zones.csv", "a") as f:
        f.write("x\n")
    (bad / "series.csv").unlink()
    (bad / "2032" / "notes.txt").write_text("a user's note\n")
    problems = check_outputs(bad)
    assert "altered: 2031/zones.csv (its SHA-256 differs from SHA256SUMS)" in problems
    assert "missing: series.csv (listed in SHA256SUMS)" in problems
    assert "extra: 2032/notes.txt (not listed in SHA256SUMS: not an output of this series)" in problems
    res = runner.invoke(cli, ["check", "--outputs", str(bad)])
    assert res.exit_code == 1 and "not one series' complete, unaltered set: 3 problem(s)" in res.output
    # a year folder rewritten consistently on its own is still caught by the series' SHA256SUMS
    again = tmp_path / "again"
    shutil.copytree(root / "out", again)
    with open(again / "2032" / "zones.csv", "a") as f:
        f.write("x\n")
    assert CliRunner().invoke(cli, ["check", "--outputs", str(again / "2032")]).exit_code == 1
    from peatburn.outputs.checksums import write_sums

    write_sums(again / "2032")  # the year's SHA256SUMS now agrees with its altered zones.csv
    problems = check_outputs(again)
    assert "altered: 2032/zones.csv (its SHA-256 differs from SHA256SUMS)" in problems
    assert "altered: 2032/SHA256SUMS (its SHA-256 differs from SHA256SUMS)" in problems
    assert any(p.startswith("altered: 2032/zones.csv (provenance.json") for p in problems), problems
    res = runner.invoke(cli, ["check", "--outputs", str(tmp_path / "nowhere")])
    assert res.exit_code == 2 and len(res.output.strip().splitlines()) == 1


def test_a_failed_series_leaves_the_old_set_whole(sealed, tmp_path, monkeypatch):
    root, s, _ = sealed
    out = tmp_path / "out"
    shutil.copytree(root / "out", out)
    before = {f: (out / f).read_bytes() for f in _files(out)}

    def fail(*args, **kwargs):
        raise RuntimeError("killed while writing the series tables")

    monkeypatch.setattr(series_engine, "_write", fail)
    with pytest.raises(RuntimeError, match="killed"):
        run_series(load_series(s), out, overwrite=True)
    assert {f: (out / f).read_bytes() for f in _files(out)} == before
    assert [p.name for p in tmp_path.iterdir()] == ["out"]  # the staging folder is gone
    assert check_outputs(out) == []


def test_a_second_writer_is_refused(sealed, tmp_path):
    root, s, _ = sealed
    out = tmp_path / "busy"
    with output_lock(out):
        with pytest.raises(OutputLockedError, match="being written by another run"):
            run_series(load_series(s), out)
    assert not out.exists() or not any(out.iterdir())
