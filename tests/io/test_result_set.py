"""Result sets whole or absent (issue 22 items 1 and 4), with real processes killed by SIGKILL.

The reference of "old set" and "new set" is the bytes of two complete runs (old and new settings)
written to folders of their own; a folder caught at any moment must hold every data file of one of
them and none of the other. GNU coreutils' ``sha256sum -c`` (a tool outside the project) checks
the SHA256SUMS of each folder seen.
"""

from __future__ import annotations

import os
import shutil
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest
from click.testing import CliRunner

import peatburn
from peatburn.cli.main import cli
from peatburn.io import result_set
from peatburn.outputs.checksums import check_outputs
from conftest import make_scene

DATA = ("zones.csv", "fires.csv", "inventory.csv", "daily.csv", "totals.json", "burn_depth.tif",
        "carbon_smouldering.tif", "depth_method.tif")
CLI = "import sys; from peatburn.cli.main import cli; sys.exit(cli())"


@pytest.fixture(scope="module")
def two_sets(tmp_path_factory):
    """A scene, a second configuration of it (another bulk density: other carbon, same depths) and
    the bytes of both runs' data files."""
    base = tmp_path_factory.mktemp("sets")
    s = make_scene(base / "s", shape=(120, 150))
    new_cfg = s.folder / "new.toml"
    new_cfg.write_text(s.config.read_text().replace('bulk_density = "0.1 g/cm^3"', 'bulk_density = "0.13 g/cm^3"'))
    assert new_cfg.read_text() != s.config.read_text()
    peatburn.run(s.config, base / "old")
    peatburn.run(new_cfg, base / "new")
    ref = {k: {n: (base / k / n).read_bytes() for n in DATA} for k in ("old", "new")}
    assert ref["old"]["carbon_smouldering.tif"] != ref["new"]["carbon_smouldering.tif"]
    return s, new_cfg, base, ref


def _which_set(out: Path, ref: dict) -> str:
    """'old' or 'new' when every data file of ``out`` is that run's; fails on a mix or a gap."""
    got = {n: (out / n).read_bytes() if (out / n).is_file() else None for n in DATA}
    matches = [k for k in ("old", "new") if got == ref[k]]
    assert matches, {n: [k for k in ("old", "new") if got[n] == ref[k][n]] for n in DATA}
    assert check_outputs(out) == []
    if shutil.which("sha256sum"):
        assert subprocess.run(["sha256sum", "--quiet", "-c", "SHA256SUMS"], cwd=out).returncode == 0
    return matches[0]


def _killed_when(cmd, stage_of, marker: str | None, timeout=120.0) -> Path | None:
    """Start ``cmd``; SIGKILL it once its staging folder holds ``marker`` (None: once the folder
    exists). Returns the staging folder if the killed process left it, else None."""
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    stage = stage_of(proc.pid)
    t0 = time.monotonic()
    try:
        while proc.poll() is None and time.monotonic() - t0 < timeout:
            if stage.is_dir() and (marker is None or (stage / marker).exists()):
                proc.send_signal(signal.SIGKILL)
                proc.wait(timeout=30)
                return stage if stage.is_dir() else None
            time.sleep(0.002)
        proc.wait(timeout=timeout)
        return None
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait(timeout=30)


def test_killed_overwrite_leaves_old_or_new_set_never_a_mix(two_sets, tmp_path):
    """SIGKILL of `peatburn run --overwrite` at three moments (staging folder made; tables written;
    checksums written, the swap next): the folder always holds one whole set, and the next run
    removes the killed run's staging folder with a one-line warning."""
    s, new_cfg, base, ref = two_sets
    out = tmp_path / "o"
    shutil.copytree(base / "old", out)
    assert _which_set(out, ref) == "old"
    cmd = [sys.executable, "-c", CLI, "run", str(new_cfg), "--out", str(out), "--overwrite", "--quiet"]
    seen, left = [], []
    for marker in (None, "zones.csv", "SHA256SUMS"):
        left.append(_killed_when(cmd, lambda pid: result_set.stage_path(out, pid), marker))
        seen.append(_which_set(out, ref))
    assert seen[0] == "old"  # killed long before its swap
    # the next run cleans the last killed run's staging folder (if it was left) and finishes
    res = CliRunner().invoke(cli, cmd[3:])
    assert res.exit_code == 0, res.output
    if left[-1] is not None:  # the earlier ones were removed by the later killed runs
        assert f"peatburn: warning: removed {left[-1].name}," in res.output, res.output
    assert _which_set(out, ref) == "new"
    assert [p.name for p in tmp_path.iterdir()] == ["o"]  # no staging folder, no lock left


_CRASH = textwrap.dedent("""
    import errno, os, signal, sys
    import peatburn
    from peatburn.io import result_set
    mode, config, out = sys.argv[1:4]
    die = lambda: os.kill(os.getpid(), signal.SIGKILL)
    if mode == "between-renames":  # a file system without RENAME_EXCHANGE: two renames, killed between
        def no_exchange(a, b):
            raise OSError(errno.EINVAL, "no exchange here")
        result_set._exchange = no_exchange
        rename = os.rename
        def rename_then_die(a, b):
            rename(a, b)
            if ".peatburn-old-" in str(b):
                die()
        result_set.os.rename = rename_then_die
    else:  # exchanged, killed before the old set is deleted
        exchange = result_set._exchange
        def exchange_then_die(a, b):
            exchange(a, b)
            die()
        result_set._exchange = exchange_then_die
    peatburn.run(config, out, overwrite=True)
""")


@pytest.mark.parametrize("mode, expect", [("between-renames", "old"), ("after-exchange", "new")])
def test_crash_during_swap_is_recovered_by_the_next_run(two_sets, tmp_path, mode, expect):
    """A run killed inside the swap (SIGKILL at the exact step): between the two renames the folder
    name is briefly absent and the next run restores the old set whole; after the exchange the new set
    is in place and the next run deletes the old one. Either way with a warning, and the folder then
    holds one whole set."""
    s, new_cfg, base, ref = two_sets
    out = tmp_path / "o"
    shutil.copytree(base / "old", out)
    proc = subprocess.run([sys.executable, "-c", _CRASH, mode, str(new_cfg), str(out)], timeout=300)
    assert proc.returncode == -signal.SIGKILL
    left = sorted(p.name for p in tmp_path.iterdir())
    pid = _pid(left, "stage")  # the killed process's
    if mode == "between-renames":  # the old set under its hidden name, the complete new set staged
        assert left == [".o.peatburn-lock", f".o.peatburn-old-{pid}", f".o.peatburn-stage-{pid}"]
        assert _which_set(tmp_path / f".o.peatburn-stage-{pid}", ref) == "new"
    else:  # exchanged: the new set in place, the old one under the staging name
        assert left == [".o.peatburn-lock", f".o.peatburn-stage-{pid}", "o"]
        assert _which_set(tmp_path / f".o.peatburn-stage-{pid}", ref) == "old"
    # the next run into the folder (without --overwrite) recovers, then refuses the non-empty folder
    res = CliRunner().invoke(cli, ["run", str(s.config), "--out", str(out), "--quiet"])
    assert res.exit_code == 2 and "exists and is not empty" in res.output, res.output
    warnings = [ln for ln in res.output.splitlines() if ln.startswith("peatburn: warning: ")]
    assert "stale lock" in warnings[0] and f"removed .o.peatburn-stage-{pid}," in warnings[-1], warnings
    if expect == "old":
        assert len(warnings) == 3 and "the previous outputs were restored whole" in warnings[1], warnings
    else:
        assert len(warnings) == 2, warnings
    assert _which_set(out, ref) == expect
    assert [p.name for p in tmp_path.iterdir()] == ["o"]


def _pid(names, kind):
    return next(n.rsplit("-", 1)[1] for n in names if f".peatburn-{kind}-" in n)


def test_debris_is_ours_only(tmp_path):
    """A killed run's staging folder and temporaries are removed (warning); look-alikes are kept:
    a staging name without a pid, a file so named, another folder's staging folder."""
    out = tmp_path / "o"
    out.mkdir()
    (tmp_path / ".o.peatburn-stage-4242").mkdir()
    (tmp_path / ".o.peatburn-stage-4242" / "zones.csv").write_text("half\n")
    (out / ".zones.csv.peatburn-tmp.abcdefgh.part").write_text("half\n")
    keep = [tmp_path / ".o.peatburn-stage-mine", tmp_path / ".p.peatburn-stage-4242"]
    for k in keep:
        k.mkdir()
    (tmp_path / ".o.peatburn-stage-77").write_text("a user's file")
    (out / "notes.txt").write_text("a user's notes\n")
    with pytest.warns(UserWarning) as record:
        result_set.recover(out)
    text = " ".join(str(w.message) for w in record)
    assert "removed .o.peatburn-stage-4242" in text and ".zones.csv.peatburn-tmp.abcdefgh.part" in text
    assert sorted(p.name for p in tmp_path.iterdir()) == [".o.peatburn-stage-77", ".o.peatburn-stage-mine",
                                                          ".p.peatburn-stage-4242", "o"]
    assert [p.name for p in out.iterdir()] == ["notes.txt"]


def test_overwrite_keeps_a_users_file_and_drops_the_old_sets_own(two_sets, tmp_path):
    """--overwrite replaces the old set whole (report.pdf of an earlier --pdf run goes with it) and keeps,
    with a warning, a file that is no output of a run; the folder's permissions are kept."""
    s, new_cfg, base, ref = two_sets
    out = tmp_path / "o"
    shutil.copytree(base / "old", out)
    (out / "report.pdf").write_bytes(b"%PDF- of the old run")
    (out / "notes.txt").write_text("a user's notes\n")
    os.chmod(out, 0o750)
    with pytest.warns(UserWarning, match=r"kept 1 file\(s\) .* \(notes.txt\)"):
        r = peatburn.run(new_cfg, out, overwrite=True)
    assert (out / "notes.txt").read_text() == "a user's notes\n" and not (out / "report.pdf").exists()
    assert check_outputs(out) == ["extra: notes.txt (not listed in SHA256SUMS: not an output of this run)"]
    (out / "notes.txt").unlink()
    assert _which_set(out, ref) == "new"
    assert os.stat(out).st_mode & 0o777 == 0o750
    assert r.out_dir == out and r.files["zones"] == out / "zones.csv" and r.files["report"].is_file()


def test_no_output_names_the_staging_folder(two_sets):
    """The report and every table were written in the staging folder, yet none names it (the report's
    figures are embedded, its links point inside the page), and the rasters open from the folder."""
    import rasterio

    s, new_cfg, base, ref = two_sets
    for p in (base / "old").iterdir():
        assert b"peatburn-stage" not in p.read_bytes(), p.name
    html = (base / "old" / "report.html").read_text(encoding="utf-8")
    import re

    links = re.findall(r'(?:href|src)="([^"]*)"', html)
    assert links and all(u.startswith(("#", "data:")) for u in links), [u[:40] for u in links]
    with rasterio.open(base / "old" / "carbon_smouldering.tif") as ds:
        assert ds.read(1).shape == (ds.height, ds.width)


def test_demo_temporaries_carry_the_marker(tmp_path, monkeypatch):
    """The demo's input writers write under peatburn's marked temporary names (io.writers)."""
    import geopandas as gpd
    import numpy as np
    import shapely
    from rasterio.transform import from_origin

    from peatburn import demo
    from peatburn.io import writers

    seen = []
    real = os.replace

    def spy(src, dst):
        seen.append(writers.is_own_temporary(src))
        real(src, dst)

    monkeypatch.setattr(writers.os, "replace", spy)
    demo._write_raster(tmp_path / "a.tif", np.ones((4, 4)), from_origin(0, 4, 1, 1), "EPSG:32749", units="m",
                       description="a")
    demo._write_vector(tmp_path / "v.gpkg", gpd.GeoDataFrame(geometry=[shapely.box(0, 0, 1, 1)], crs=32749), "v")
    demo._write_text(tmp_path / "t.txt", "x")
    assert seen == [True, True, True]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.tif", "t.txt", "v.gpkg"]
    assert len(gpd.read_file(tmp_path / "v.gpkg")) == 1


@pytest.mark.skipif(not hasattr(os, "geteuid") or os.geteuid() != 0 or shutil.which("mount") is None,
                    reason="mounting a tmpfs needs root")
def test_output_folder_that_is_a_mount_point(two_sets, tmp_path):
    """A mount point cannot be renamed: the set is staged inside it and replaced file by file,
    checksums last, with a warning; the result is still a complete, checked set."""
    s, new_cfg, base, ref = two_sets
    out = tmp_path / "o"
    out.mkdir()
    if subprocess.run(["mount", "-t", "tmpfs", "-o", "size=8m", "tmpfs", str(out)]).returncode:
        pytest.skip("mount -t tmpfs refused (a container without CAP_SYS_ADMIN)")
    try:
        for p in (base / "old").iterdir():
            shutil.copy(p, out / p.name)
        (out / "notes.txt").write_text("a user's notes\n")
        with pytest.warns(UserWarning, match="is a mount point, so its outputs are replaced file by file"):
            peatburn.run(new_cfg, out, overwrite=True)
        assert check_outputs(out) == ["extra: notes.txt (not listed in SHA256SUMS: not an output of this run)"]
        (out / "notes.txt").unlink()
        assert _which_set(out, ref) == "new"
        assert sorted(p.name for p in tmp_path.iterdir()) == ["o"]
    finally:
        subprocess.run(["umount", str(out)])
