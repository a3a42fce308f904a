"""Executors (serial, local processes, dask.distributed) and the progress bar.

The contract checked here (DEVELOPERS.md, "Layers": blocks -> executors): every executor yields the block results in
window order, so sums are added in the same order and a parallel run equals the serial run.
"""

from __future__ import annotations

import io
import os
import pickle
import time

import numpy as np
import pytest
import rasterio
from rasterio.windows import Window

import peatburn
from peatburn.engine import executors
from peatburn.errors import ExecutorError, GridError
from peatburn.engine.executors import map_blocks
from peatburn.engine.progress import BlockProgress, progress_bar

WINDOWS = [Window(c, r, 10, 10) for r in range(0, 40, 10) for c in range(0, 30, 10)]  # 12 windows


class CountingPlan:
    """A plan that counts how often it is pickled in this process (i.e. sent to a worker)."""

    pickled = 0

    def __init__(self, k):
        self.k = k

    def __getstate__(self):
        CountingPlan.pickled += 1
        return {"k": self.k}


def _slow_block(plan, window):
    # later windows finish first, so results complete out of order in a pool
    time.sleep(0.0008 * (120 - window.row_off - window.col_off))
    return (int(window.col_off), int(window.row_off), plan.k * int(window.col_off + window.row_off), os.getpid())


def _failing_block(plan, window):
    if window.row_off == 20 and window.col_off == 10:
        raise GridError("block (10, 20) holds no data")
    return 1


def _gdal_cache(plan, window):
    from rasterio.env import get_gdal_config

    return get_gdal_config("GDAL_CACHEMAX"), get_gdal_config("GDAL_NUM_THREADS")


def _expected(k=3):
    # hand arithmetic of _slow_block without the pid: (col, row, k * (col + row)) in window order
    return [(int(w.col_off), int(w.row_off), k * int(w.col_off + w.row_off)) for w in WINDOWS]


def test_serial_in_order_in_this_process():
    out = list(map_blocks(_slow_block, CountingPlan(3), WINDOWS))
    assert [o[:3] for o in out] == _expected()
    assert {o[3] for o in out} == {os.getpid()}


def test_processes_keep_window_order_and_send_plan_once_per_worker():
    CountingPlan.pickled = 0
    out = list(map_blocks(_slow_block, CountingPlan(3), WINDOWS, workers=2))
    assert [o[:3] for o in out] == _expected()
    pids = {o[3] for o in out}
    assert os.getpid() not in pids and 1 <= len(pids) <= 2
    # the plan is pickled once (to the file the workers read), not with every block
    assert CountingPlan.pickled == 1


def test_pool_started_before_the_plan_serves_two_plans_and_cleans_up():
    from peatburn.engine.executors import WorkerPool

    with WorkerPool(2) as pool:
        first = list(map_blocks(_slow_block, CountingPlan(3), WINDOWS, pool=pool))
        second = list(map_blocks(_slow_block, CountingPlan(5), WINDOWS, pool=pool))  # a new plan replaces the old
        folder = pool._dir
        assert os.listdir(folder) == []  # each plan file is removed when its map ends
    assert [o[:3] for o in first] == _expected(3)
    assert [o[:3] for o in second] == _expected(5)
    assert os.getpid() not in {o[3] for o in first + second}
    assert not os.path.exists(folder)


def test_worker_error_keeps_its_type():
    with pytest.raises(GridError, match=r"block \(10, 20\)"):
        list(map_blocks(_failing_block, CountingPlan(1), WINDOWS, workers=2))
    with pytest.raises(GridError):
        list(map_blocks(_failing_block, CountingPlan(1), WINDOWS))


def test_closing_early_stops_the_pool():
    gen = map_blocks(_slow_block, CountingPlan(1), WINDOWS, workers=2)
    first = next(gen)
    gen.close()  # must return promptly, cancelling blocks not yet started
    assert first[:2] == (0, 0)


def test_workers_get_bounded_gdal_cache_and_one_thread():
    out = list(map_blocks(_gdal_cache, CountingPlan(1), WINDOWS[:4], workers=2))
    assert {(int(c), str(t)) for c, t in out} == {(executors.WORKER_GDAL_CACHE, "1")}


def test_gdal_env_caps_the_cache():
    from rasterio.env import get_gdal_config

    with executors.gdal_env(64 * 2**20):
        assert get_gdal_config("GDAL_CACHEMAX") == 64 * 2**20


# --------------------------------------------------------------------------------------------
# dask.distributed


@pytest.fixture(scope="module")
def cluster():
    import distributed  # the scale extra; part of the test extra so that CI runs these tests

    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None,
                                  silence_logs=40) as c:
        yield c


def test_dask_keeps_window_order(cluster):
    out = list(map_blocks(_slow_block, CountingPlan(3), WINDOWS, scheduler=cluster.scheduler_address))
    assert [o[:3] for o in out] == _expected()
    assert os.getpid() not in {o[3] for o in out}  # ran on the cluster's worker processes


def test_dask_accepts_a_client_or_a_cluster_object(cluster):
    import distributed

    with distributed.Client(cluster, set_as_default=False) as client:
        out = list(map_blocks(_slow_block, CountingPlan(3), WINDOWS, scheduler=client))
        assert client.status == "running"  # a client passed in is left open
    assert [o[:3] for o in out] == _expected()
    out = list(map_blocks(_slow_block, CountingPlan(3), WINDOWS, scheduler=cluster))
    assert [o[:3] for o in out] == _expected()


def test_dask_error_keeps_its_type(cluster):
    with pytest.raises(GridError):
        list(map_blocks(_failing_block, CountingPlan(1), WINDOWS, scheduler=cluster.scheduler_address))


def test_local_cluster_run_equals_serial_run(scene, scene_run, cluster, tmp_path):
    """A run on a LocalCluster of two worker processes gives the serial result. Blocks are combined
    in window order by both, so the additions happen in the same order and the sums are equal
    exactly (not only to rounding)."""
    r = peatburn.run(scene.config, tmp_path / "dask", scheduler=cluster.scheduler_address)
    assert len(r.zones) == len(scene_run.zones)
    for a, b in zip(scene_run.zones, r.zones):
        assert (a["layer"], a["zone"]) == (b["layer"], b["zone"])
        for k in ("burned_area_ha", "peat_burned_t", "carbon_smouldering_t", "co2_smouldering_t"):
            assert a[k] == b[k], (a["zone"], k)
    for name in ("burn_depth.tif", "carbon_smouldering.tif"):
        with rasterio.open(scene_run.out_dir / name) as d1, rasterio.open(tmp_path / "dask" / name) as d2:
            assert np.array_equal(d1.read(1), d2.read(1))


def test_unreachable_scheduler_is_one_line_error(monkeypatch):
    monkeypatch.setattr(executors, "CONNECT_TIMEOUT", 1)
    with pytest.raises(ExecutorError, match="cannot connect to a dask scheduler"):
        list(map_blocks(_slow_block, CountingPlan(1), WINDOWS, scheduler="tcp://127.0.0.1:9"))


def test_run_with_unreachable_scheduler_fails_before_reading_inputs(scene, tmp_path, monkeypatch):
    """The CLI connects first: exit 2, one line, and no input was opened (co-registration of a
    national survey is not wasted on a typo in the address)."""
    from click.testing import CliRunner

    import peatburn.engine.runner as runner
    from peatburn.cli.main import cli

    monkeypatch.setattr(executors, "CONNECT_TIMEOUT", 1)
    opened = []
    monkeypatch.setattr(runner, "open_inputs", lambda *a, **k: opened.append(1))
    res = CliRunner().invoke(cli, ["run", str(scene.config), "--out", str(tmp_path / "o"),
                                   "--scheduler", "tcp://127.0.0.1:9"])
    assert res.exit_code == 2, res.output
    assert "cannot connect to a dask scheduler" in res.output and not opened
    assert isinstance(ExecutorError("x"), RuntimeError)  # also the built-in a library user would catch


# --------------------------------------------------------------------------------------------
# progress


class FakeTTY(io.StringIO):
    def isatty(self):
        return True


class Clock:
    def __init__(self):
        self.t = 0.0

    def __call__(self):
        return self.t


@pytest.fixture
def clock(monkeypatch):
    import tqdm.std

    c = Clock()
    monkeypatch.setattr(tqdm.std, "time", c)  # tqdm reads its clock from tqdm.std.time
    return c


def test_progress_draws_on_a_terminal_after_the_delay(clock):
    s = FakeTTY()
    p = BlockProgress(s, delay=1.0, interval=0.0)
    p(1, 10)  # t = 0: within the delay, nothing drawn
    assert s.getvalue() == ""
    clock.t = 4.0
    p(5, 10)
    # 4 blocks finished in 4 s since the first call -> 5 remaining take 5 s (hand arithmetic)
    assert "5/10 [00:04<00:05" in s.getvalue() and " 50%" in s.getvalue()
    clock.t = 8.0
    p(10, 10)
    assert "10/10 [00:08<00:00" in s.getvalue() and s.getvalue().endswith("\n")


def test_progress_short_run_prints_nothing(clock):
    s = FakeTTY()
    p = BlockProgress(s, delay=1.0, interval=0.0)
    for i in range(1, 11):
        clock.t = i * 0.05  # the whole run within the delay
        p(i, 10)
    assert s.getvalue() == ""


def test_progress_silent_off_a_terminal_and_when_quiet():
    s = io.StringIO()  # not a TTY (e.g. a log file or a pipe)
    p = BlockProgress(s, delay=0.0)
    for i in range(1, 4):
        p(i, 3)
    assert s.getvalue() == ""
    t = FakeTTY()
    progress_bar(quiet=True, stream=t)(3, 3)
    assert t.getvalue() == ""


def test_progress_silent_with_the_groups_quiet():
    import logging

    from peatburn.cli.options import configure_logging

    logger = logging.getLogger("peatburn")
    level = logger.level
    try:
        configure_logging(-1)  # peatburn -q: errors only
        t = FakeTTY()
        bar = progress_bar(stream=t, delay=0.0)
        bar(1, 2)
        bar(2, 2)
        assert t.getvalue() == ""
        configure_logging(0)
        assert isinstance(progress_bar(stream=t), BlockProgress)
    finally:
        logger.setLevel(level)


def test_progress_throttles_redraws(clock):
    s = FakeTTY()
    p = BlockProgress(s, delay=0.0, interval=1.0)
    for i in range(1, 100):
        clock.t = i * 0.01  # 99 blocks within 1 s
        p(i, 100)
    assert s.getvalue().count("\r") == 1  # only the first draw; the next waits 1 s
    clock.t = 1.0
    p(100, 100)  # the last block always draws
    assert "100/100" in s.getvalue() and s.getvalue().endswith("\n")


@pytest.mark.skipif(not hasattr(os, "openpty"), reason="needs a pseudo-terminal")
def test_progress_draws_on_a_terminal_of_unset_size():
    """A pseudo-terminal whose size was never set reports 0 columns (as under `script` or a CI runner):
    the bar still draws, 80 columns wide."""
    master, slave = os.openpty()
    assert os.get_terminal_size(slave).columns == 0  # the premise: an unsized terminal
    with os.fdopen(slave, "w") as stream:
        p = BlockProgress(stream, delay=0.0, interval=0.0)
        for i in range(1, 4):
            p(i, 3)
    chunks = []
    while True:  # a pty hands its output over in pieces; read until the closed slave ends it
        try:
            chunk = os.read(master, 65536)
        except OSError:  # EIO: the slave side is closed and drained
            break
        if not chunk:
            break
        chunks.append(chunk)
    os.close(master)
    text = b"".join(chunks).decode("utf-8", "replace")
    assert "3/3 [" in text and "blocks: 100%" in text


def test_progress_one_bar_per_run(clock):
    """`peatburn series` passes one callable to every year's run: each run gets its own bar."""
    s = FakeTTY()
    p = BlockProgress(s, delay=0.0, interval=0.0)
    for run in range(2):
        for i in range(1, 5):
            clock.t += 1.0
            p(i, 4)
    assert s.getvalue().count("4/4 [") >= 2 and s.getvalue().count("\n") == 2


def test_counting_plan_pickles():
    # the counting plan used above is a faithful plan: it survives a round trip
    assert pickle.loads(pickle.dumps(CountingPlan(7))).k == 7


def _read_stage(plan, window):
    import threading

    from rasterio.env import get_gdal_config

    return window, threading.current_thread().name, get_gdal_config("GDAL_CACHEMAX")


def _compute_stage(plan, data):
    window, thread, cache = data
    time.sleep(0.0005 * (window.row_off + window.col_off) / 10)
    return (int(window.col_off), int(window.row_off), plan.k * int(window.col_off + window.row_off)), thread, cache


def test_serial_read_ahead_keeps_order_thread_and_gdal_options():
    """The serial executor with (read, compute) stages reads in a background thread, under the
    caller's GDAL options (rasterio sets them process-wide), and yields in window order (hand
    arithmetic, as _expected)."""
    with rasterio.Env(GDAL_CACHEMAX=123 * 2**20):
        got = list(map_blocks(None, CountingPlan(3), WINDOWS, stages=(_read_stage, _compute_stage)))
    assert [g[0] for g in got] == _expected()
    assert all(g[1].startswith("peatburn-read") for g in got)
    assert all(int(g[2]) == 123 * 2**20 for g in got)


def test_serial_read_ahead_reports_a_failed_read():
    def read(plan, window):
        return _failing_block(plan, window)

    with pytest.raises(GridError, match="holds no data"):
        list(map_blocks(None, CountingPlan(1), WINDOWS, stages=(read, lambda plan, d: d)))


def test_run_cache_holds_two_block_rows_of_two_inputs_within_bounds():
    # hand arithmetic: 2 rows x 2 float32 inputs x width x 512 rows x 4 bytes
    assert executors.run_cache_bytes(8192, 512) == 2 * 2 * 8192 * 512 * 4 == 64 * 2**20
    assert executors.run_cache_bytes(12_000, 512) == 2 * 2 * 12_000 * 512 * 4  # between the bounds
    assert executors.run_cache_bytes(300, 64) == 64 * 2**20  # floor
    assert executors.run_cache_bytes(100_000, 512) == 256 * 2**20  # cap
    # blocks taller than a row of 512 px input tiles count as 512 rows (what the next row of blocks reads again)
    assert executors.run_cache_bytes(12_000, 1024) == executors.run_cache_bytes(12_000, 512) == 2 * 2 * 12_000 * 512 * 4
    assert executors.run_cache_bytes(20_000, 256) == 2 * 2 * 20_000 * 256 * 4  # smaller blocks: their rows
