"""The output folder's lock (issue 22 item 2), with real processes: a second run into a folder another
process is writing is refused in one line (exit 2); a lock left by a killed process is taken over."""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import textwrap

import pytest
import rasterio
from click.testing import CliRunner

from peatburn.cli.main import cli
from peatburn.io.lock import lock_path, output_lock
from conftest import make_scene


def _holder(out, sleep=60):
    script = textwrap.dedent(f"""
        import time
        from peatburn.io.lock import output_lock
        with output_lock({str(out)!r}):
            print("locked", flush=True)
            time.sleep({sleep})
    """)
    proc = subprocess.Popen([sys.executable, "-c", script], stdout=subprocess.PIPE)
    assert proc.stdout.readline().strip() == b"locked"
    return proc


def test_second_run_into_a_locked_folder_is_refused_in_one_line(tmp_path):
    s = make_scene(tmp_path / "s")
    out = tmp_path / "o"
    proc = _holder(out)
    try:
        res = CliRunner().invoke(cli, ["run", str(s.config), "--out", str(out), "--quiet"])
    finally:
        proc.kill()
        proc.wait(timeout=30)
    assert res.exit_code == 2, res.output
    lines = res.output.strip().splitlines()
    assert len(lines) == 1 and "being written by another run" in lines[0] and f"pid {proc.pid}" in lines[0], lines
    assert not out.exists() or not any(out.iterdir())


def test_lock_of_a_killed_process_is_stale_and_taken_over(tmp_path):
    out = tmp_path / "o"
    proc = _holder(out)
    proc.kill()  # SIGKILL: no clean-up, the lock file stays
    proc.wait(timeout=30)
    assert lock_path(out).exists()
    with pytest.warns(UserWarning, match=rf"stale lock .*pid {proc.pid}"):
        with output_lock(out):
            with pytest.raises(BlockingIOError, match="another run"):  # and it is now held by this process
                with output_lock(out):
                    pass
    assert not lock_path(out).exists()


@pytest.mark.skipif(not hasattr(os, "geteuid") or os.geteuid() != 0 or shutil.which("mount") is None,
                    reason="mounting a small tmpfs needs root")
def test_full_disk_is_one_line_exit_2_and_no_cut_file(tmp_path):
    """Issue 22 item 3: a 120 KiB tmpfs fills during the rasters' conversion (real file system, no mock)."""
    s = make_scene(tmp_path / "s")
    mnt = tmp_path / "small"
    mnt.mkdir()
    if subprocess.run(["mount", "-t", "tmpfs", "-o", "size=120k", "tmpfs", str(mnt)]).returncode:
        pytest.skip("mount -t tmpfs refused (a container without CAP_SYS_ADMIN)")
    try:
        res = CliRunner().invoke(cli, ["run", str(s.config), "--out", str(mnt / "o"), "--quiet"])
        # issue 22 item 1: the set is staged beside the folder, so a failed run leaves no folder at all
        assert not [n for n in os.listdir(mnt) if "peatburn-" in n], os.listdir(mnt)
        names = {p.name: p for p in (mnt / "o").iterdir()} if (mnt / "o").exists() else {}
        for name in ("burn_depth.tif", "carbon_smouldering.tif", "depth_method.tif"):
            if name in names:  # every raster under its final name opens and reads whole
                with rasterio.open(names[name]) as ds:
                    ds.read(1)
        assert not [n for n in names if "peatburn-tmp" in n], names
    finally:
        subprocess.run(["umount", str(mnt)])
    assert res.exit_code == 2, res.output
    lines = [ln for ln in res.output.strip().splitlines() if ln.startswith("peatburn: error")]
    assert len(lines) == 1 and "is full" in lines[0] and str(mnt) in lines[0] and "MiB" in lines[0], res.output
