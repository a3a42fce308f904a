"""SHA-256 of every output and `peatburn check --outputs` (issue 22 item 1).

Reference: GNU coreutils' ``sha256sum`` (outside the project) must accept the SHA256SUMS a run
writes, and Python's ``hashlib`` gives the digests provenance.json must record.
"""

from __future__ import annotations

import hashlib
import json
import shutil
import subprocess

import pytest
from click.testing import CliRunner

import peatburn

from peatburn.cli.main import cli
from peatburn.outputs.checksums import check_outputs


@pytest.fixture
def out(scene_run, tmp_path):
    dst = tmp_path / "o"
    shutil.copytree(scene_run.out_dir, dst)
    return dst


def _check(folder):
    return CliRunner().invoke(cli, ["check", "--outputs", str(folder)])


def test_a_runs_set_is_complete_and_unaltered(out):
    names = sorted(p.name for p in out.iterdir())
    assert "SHA256SUMS" in names and "provenance.json" in names and "report.html" in names
    listed = [ln.split("  ", 1)[1] for ln in (out / "SHA256SUMS").read_text().splitlines()]
    assert listed == [n for n in names if n != "SHA256SUMS"]
    prov = json.loads((out / "provenance.json").read_text())
    assert set(prov["output_sha256"]) == set(names) - {"SHA256SUMS", "provenance.json"}
    for name, rec in prov["output_sha256"].items():  # hashlib, not peatburn's reader
        data = (out / name).read_bytes()
        assert rec == {"size_bytes": len(data), "sha256": hashlib.sha256(data).hexdigest()}, name
    assert set(prov["outputs"]) == set(names)
    if shutil.which("sha256sum"):
        assert subprocess.run(["sha256sum", "--quiet", "-c", "SHA256SUMS"], cwd=out).returncode == 0
    assert check_outputs(out) == [] and peatburn.check_outputs(out) == []
    res = _check(out)
    assert res.exit_code == 0 and res.output.startswith(f"ok: {out} is one run's complete, unaltered set")
    assert hashlib.sha256((out / "SHA256SUMS").read_bytes()).hexdigest() in res.output


def test_altered_missing_and_extra_files_one_line_each(out):
    raster = bytearray((out / "burn_depth.tif").read_bytes())
    raster[-100] ^= 0xFF  # one byte of a tile
    (out / "burn_depth.tif").write_bytes(bytes(raster))
    (out / "fires.csv").unlink()
    (out / "zones (copy).csv").write_text("zone\n")
    res = _check(out)
    assert res.exit_code == 1
    assert res.output.splitlines() == [
        "altered: burn_depth.tif (its SHA-256 differs from SHA256SUMS)",
        "missing: fires.csv (listed in SHA256SUMS)",
        "extra: zones (copy).csv (not listed in SHA256SUMS: not an output of this run)",
        f"not one run's complete, unaltered set: 3 problem(s) in {out}",
    ]
    if shutil.which("sha256sum"):  # coreutils agrees that the set is broken
        assert subprocess.run(["sha256sum", "--quiet", "-c", "SHA256SUMS"], cwd=out,
                              capture_output=True).returncode != 0


def test_rewritten_sums_disagree_with_provenance(out):
    """A table edited and SHA256SUMS recomputed (as a hurried user would): provenance.json still
    holds the run's hash of the table."""
    with open(out / "zones.csv", "a", encoding="utf-8") as fh:
        fh.write("edited,1\r\n")
    subprocess.run("sha256sum $(ls | grep -v SHA256SUMS) > SHA256SUMS", shell=True, cwd=out, check=True) \
        if shutil.which("sha256sum") else pytest.skip("no sha256sum")
    assert check_outputs(out) == ["altered: zones.csv (provenance.json and SHA256SUMS record different SHA-256)"]


def test_unfinished_or_foreign_folder(out, tmp_path):
    (out / "SHA256SUMS").unlink()
    assert check_outputs(out)[0].startswith("missing: SHA256SUMS")
    res = _check(out)
    assert res.exit_code == 1 and len(res.output.splitlines()) == 2
    res = _check(tmp_path / "nowhere")
    assert res.exit_code == 2 and res.output.startswith("peatburn: error: ") and len(res.output.splitlines()) == 1
    res = CliRunner().invoke(cli, ["check"])  # neither CONFIG nor --outputs: a usage error, 64 (docs/cli.md)
    assert res.exit_code == 64 and "give a CONFIG to check, or --outputs DIR" in res.output


def test_hostile_file_name_stays_on_one_line(out):
    (out / "evil\nname.csv").write_text("x")
    res = _check(out)
    assert res.exit_code == 1
    assert len(res.output.splitlines()) == 2 and res.output.splitlines()[0].startswith("extra: evil")


def test_outputs_in_a_subfolder_are_listed(tmp_path):
    """An output in a subfolder (e.g. one page per fire) is listed by its relative path, which
    coreutils' sha256sum reads; an empty folder is extra."""
    from peatburn.outputs.checksums import write_sums

    (tmp_path / "pages").mkdir()
    (tmp_path / "pages" / "fire 1.html").write_text("<p>one</p>\n")
    (tmp_path / "zones.csv").write_text("zone\r\n")
    write_sums(tmp_path)
    assert (tmp_path / "SHA256SUMS").read_text().splitlines()[0].endswith("  pages/fire 1.html")
    if shutil.which("sha256sum"):
        assert subprocess.run(["sha256sum", "--quiet", "-c", "SHA256SUMS"], cwd=tmp_path).returncode == 0
    no_record = "missing: provenance.json (not listed in SHA256SUMS)"  # not a run's set without it
    assert check_outputs(tmp_path) == [no_record]
    (tmp_path / "pages" / "fire 1.html").write_text("<p>two</p>\n")
    (tmp_path / "empty").mkdir()
    assert check_outputs(tmp_path) == ["altered: pages/fire 1.html (its SHA-256 differs from SHA256SUMS)",
                                       "extra: empty/ (an empty folder, not an output of this run)", no_record]
