"""One measured task in a fresh interpreter (started by _common.child); prints one JSON line.

Tasks
-----
run      peatburn.run on a config as `peatburn run` makes it (malloc tuned), with the time and the
         memory high-water of each phase (instrumented from outside).
floor    the I/O floor of a survey-only run: read both surveys by blocks, write two float32
         rasters block by block and copy them to COG (the same writer as a serial run, writing
         in its own thread).
blocks   the CPU-bound part alone: map_blocks(process_block) over every window, results summed
         and dropped (no writing), after the plan is built (worker processes started before the
         co-registration, as in a run, unless early=False).
write    one float32 raster written by BlockRasterWriter (memory of the writer alone).
events   the grouping of active-fire detections into events and their FRE alone, on a CSV of
         detections (x, y in metres, time, frp_mw).
main_writes  the main process's work per block in a parallel run (unpickle, sums, three raster
         writes), one raster after another and through the writing threads.
"""

from __future__ import annotations

import contextlib
import functools
import json
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

PHASES: dict = {}
HWM: dict = {}  # phase -> peak resident memory of this process when the phase ended [MiB]


def _hwm() -> float:
    """Peak resident memory so far [MiB] (VmHWM, Linux; ru_maxrss elsewhere)."""
    try:
        for line in open("/proc/self/status"):
            if line.startswith("VmHWM"):
                return int(line.split()[1]) / 1024
    except OSError:
        pass
    import resource

    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / (1024 if sys.platform != "darwin" else 2**20)


def _timed(owner, name, phase):
    fn = getattr(owner, name)

    @functools.wraps(fn)
    def wrapper(*a, **k):
        t = time.perf_counter()
        try:
            return fn(*a, **k)
        finally:
            PHASES[phase] = PHASES.get(phase, 0.0) + time.perf_counter() - t
            HWM[phase] = _hwm()

    setattr(owner, name, wrapper)


def _timed_generator(owner, name, phase):
    """Time spent inside the generator's next() (producing blocks), apart from the consumer's."""
    fn = getattr(owner, name)

    @functools.wraps(fn)
    def wrapper(*a, **k):
        gen = fn(*a, **k)
        while True:
            t = time.perf_counter()
            try:
                item = next(gen)
            except StopIteration:
                PHASES[phase] = PHASES.get(phase, 0.0) + time.perf_counter() - t
                HWM[phase] = _hwm()
                return
            PHASES[phase] = PHASES.get(phase, 0.0) + time.perf_counter() - t
            yield item

    setattr(owner, name, wrapper)


def _env_for(gdal_env):
    """``gdal_env``: False (GDAL defaults), True (peatburn.engine.executors.gdal_env()) or a cache size [MiB]."""
    from peatburn.engine.executors import gdal_env as _env

    if gdal_env is False or gdal_env is None:
        return contextlib.nullcontext()
    if gdal_env is True:
        return _env()
    return _env(int(gdal_env) * 2**20)


def task_run(config, out, workers=1, gdal_env=False, scheduler=None, block_cache_mib=None, cli_malloc=True):
    import peatburn
    import peatburn.io.writers as writers
    import peatburn.outputs.provenance as provenance
    import peatburn.outputs.report as report
    import peatburn.engine.runner as runner
    _timed(runner, "open_inputs", "open inputs")
    _timed(runner, "coregister", "co-registration")
    _timed(runner, "build_plan", "plan")
    _timed_generator(runner, "map_blocks", "blocks (compute, or wait for workers)")
    # with workers the writes run in threads (writers.BlockWrites): then this is the main thread's wait
    _timed(writers.BlockWrites, "write_at", "block writes")
    _timed(writers.BlockWrites, "close", "block writes")
    # the three COGs are assembled in parallel threads (runner._finish_rasters), beside the tables: its wall time
    _timed(runner, "_finish_rasters", "COG conversion")
    _timed(provenance, "build", "provenance (hashes)")
    _timed(report, "write_report", "report")
    import peatburn.engine.intervals as intervals

    _timed(intervals, "add_intervals", "intervals (analytic, and draws when asked)")
    if block_cache_mib:
        # a smaller GDAL cache from the end of the co-registration on (a variant the runner may adopt)
        from rasterio.env import set_gdal_config

        coreg = runner.coregister

        def coregister_then_shrink(*a, **k):
            out = coreg(*a, **k)
            set_gdal_config("GDAL_CACHEMAX", int(block_cache_mib) * 2**20)
            return out

        runner.coregister = coregister_then_shrink
    if cli_malloc:
        from peatburn.engine.executors import tune_malloc

        tune_malloc()  # as `peatburn run` does (peatburn/cli/run.py)
    cfg = peatburn.load_config(config)
    t = time.perf_counter()
    with _env_for(gdal_env):
        r = peatburn.run(cfg, out, overwrite=True, workers=workers, scheduler=scheduler)
    total = time.perf_counter() - t
    PHASES["other (sums, tables, rest)"] = total - sum(PHASES.values())
    return {"wall_s": total, "phases": PHASES, "hwm_mib": HWM, "carbon_t": r.total["carbon_smouldering_t"],
            "zones": len(r.zones)}


def task_floor(config, out, gdal_env=False):
    import rasterio

    import _common
    from peatburn.config import load_config
    from peatburn.grid import RunGrid
    from peatburn.io.writers import BlockRasterWriter, BlockWrites

    cfg = load_config(config)
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    t = time.perf_counter()
    with _env_for(gdal_env):
        with rasterio.open(cfg.survey.pre) as dpre, rasterio.open(cfg.survey.post) as dpost:
            grid = RunGrid(dpre.crs, dpre.transform, dpre.width, dpre.height)
            with BlockRasterWriter(out / "a.tif", grid, block_size=cfg.block_size) as wa, \
                    BlockRasterWriter(out / "b.tif", grid, block_size=cfg.block_size) as wb:
                writes = BlockWrites([wa, wb], threads=False)  # as a serial run writes
                for w in grid.windows(cfg.block_size):
                    pre = dpre.read(1, window=w)
                    post = dpost.read(1, window=w)
                    x, y = grid.pixel_centres(w)
                    # the same footprint as a run's outputs (nodata outside the scars), no science
                    m = _common.scar_mask(x, y)
                    d = (pre - post)[m]
                    writes.write_at(w, m, [d, d * 0.055])
                writes.close()
    return {"wall_s": time.perf_counter() - t}


def task_blocks(config, workers=1, cold=True, early=True):
    """``early``: start the worker processes before the co-registration, as a run does (their
    start-up then is not in the time); else they start inside the timed block pass."""
    import peatburn
    from peatburn.engine.executors import BLOCK_GROUP, WorkerPool, map_blocks
    from peatburn.engine.alignment import coregister
    from peatburn.engine.blocks import process_block
    from peatburn.engine.inputs import open_inputs, window_group
    from peatburn.engine.plan import build_plan
    from peatburn.engine.sums import Sums

    cfg = peatburn.load_config(config)
    inputs = open_inputs(cfg)
    pool = WorkerPool(workers) if workers > 1 and early else None
    plan = build_plan(inputs, coregister(inputs))
    windows = plan.grid.windows(cfg.block_size, group=window_group(inputs, cfg.block_size, BLOCK_GROUP))  # the run's order
    sums = Sums.empty(plan)
    if cold:
        # empty this process's GDAL block cache: the co-registration read both surveys whole and, with
        # GDAL's default cache (5 % of the RAM), a serial pass would find many tiles already decoded,
        # which worker processes never do
        import rasterio

        with rasterio.Env(GDAL_CACHEMAX=1):  # shrinking the cache drops its blocks; leaving restores the size
            pass
    t = time.perf_counter()
    for r in map_blocks(process_block, plan, windows, workers, pool=pool):
        sums.add(r)
    wall = time.perf_counter() - t
    if pool is not None:
        pool.close()
    return {"wall_s": wall, "blocks": len(windows), "carbon_kg": sums.total["carbon_kg"]}


def task_write(n, out, gdal_env=False):
    import numpy as np
    from affine import Affine
    from rasterio.crs import CRS

    from peatburn.grid import RunGrid
    from peatburn.io.writers import BlockRasterWriter

    grid = RunGrid(CRS.from_epsg(32749), Affine(1, 0, 500000, 0, -1, 8650000), n, n)
    base = np.random.default_rng(0).normal(0, 0.1, (512, 512)).astype("float32")
    t = time.perf_counter()
    with _env_for(gdal_env):
        with BlockRasterWriter(out, grid, block_size=512) as w:
            for win in grid.windows(512):
                w.write(win, base[:int(win.height), :int(win.width)] + float(win.row_off))
    return {"wall_s": time.perf_counter() - t}


def task_main_writes(config, out, repeat=3):
    """The main process's share of a parallel run, per block: unpickle a worker's result, add its
    sums and write its three rasters, one raster after another (``threads`` False) or through the
    run's writing threads (BlockWrites). The block results are computed first and kept
    pickled, as they arrive from workers; the COG conversion is not timed."""
    import pickle

    import peatburn
    from peatburn.engine.executors import BLOCK_GROUP, gdal_env, map_blocks, run_cache_bytes
    from peatburn.io.writers import BlockRasterWriter, BlockWrites
    from peatburn.engine.alignment import coregister
    from peatburn.engine.blocks import compute_block, process_block, read_block
    from peatburn.engine.inputs import open_inputs, window_group
    from peatburn.engine.plan import build_plan
    from peatburn.engine.sums import Sums

    cfg = peatburn.load_config(config)
    inputs = open_inputs(cfg)
    plan = build_plan(inputs, coregister(inputs))
    windows = plan.grid.windows(cfg.block_size, group=window_group(inputs, cfg.block_size, BLOCK_GROUP))
    t = time.perf_counter()
    packed = [pickle.dumps(r) for r in map_blocks(process_block, plan, windows, stages=(read_block, compute_block))]
    block_s = (time.perf_counter() - t) / len(windows)
    times = {False: [], True: []}
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    with gdal_env(run_cache_bytes(plan.grid.width, cfg.block_size)):
        for _ in range(repeat):
            for threads in (False, True):
                rasters = [BlockRasterWriter(out / f"{name}.tif", plan.grid, block_size=cfg.block_size, **kw)
                           for name, kw in (("depth", {}), ("carbon", {}), ("method", dict(dtype="uint8", nodata=0)))]
                sums = Sums.empty(plan)
                t = time.perf_counter()
                writes = BlockWrites(rasters, threads=threads)
                for b in packed:
                    r = pickle.loads(b)
                    sums.add(r)
                    writes.write_at(r.window, r.burned, [r.depth_b, r.cdens_b, r.codes])
                writes.close()
                times[threads].append(time.perf_counter() - t)
                for w in rasters:
                    w.close(ok=False)  # no COG conversion
    return {"wall_s": 0.0, "blocks": len(windows), "serial_read_ahead_block_s": block_s,
            "one_after_another_s": times[False], "threads_s": times[True]}


def task_events(path):
    import numpy as np
    import pandas as pd

    from peatburn.science import flaming

    f = pd.read_csv(path)
    t_s = (pd.to_datetime(f["time"], utc=True) - pd.Timestamp(0, tz="UTC")).dt.total_seconds().to_numpy()
    x, y = f["x"].to_numpy(float), f["y"].to_numpy(float)
    read_mib = _hwm()
    t = time.perf_counter()
    ev = flaming.assign_events(x, y, t_s)
    grouping = time.perf_counter() - t
    energy = flaming.detection_energy(t_s, f["frp_mw"].to_numpy(float), ev)
    return {"wall_s": time.perf_counter() - t, "grouping_s": grouping, "n": int(len(f)),
            "events": int(ev.max()) + 1, "fre_mj": float(np.sum(energy)), "read_mib": read_mib,
            "hwm_mib": _hwm()}


def task_decode(path, block=512):
    """Decode one raster once, window by window (block x block), as float64 with NaN for nodata:
    the floor a run reading that raster cannot beat."""
    import numpy as np
    import rasterio
    from rasterio.windows import Window

    t = time.perf_counter()
    n = 0
    with rasterio.open(path) as ds:
        nd = ds.nodata
        for r in range(0, ds.height, block):
            for c in range(0, ds.width, block):
                a = ds.read(1, window=Window(c, r, min(block, ds.width - c), min(block, ds.height - r)))
                a = a.astype("float64")
                if nd is not None:
                    a[a == nd] = np.nan
                n += a.size
    return {"wall_s": time.perf_counter() - t, "pixels": n}


if __name__ == "__main__":
    task, kwargs = sys.argv[1], json.loads(sys.argv[2])
    res = {"run": task_run, "floor": task_floor, "blocks": task_blocks, "write": task_write,
           "main_writes": task_main_writes, "events": task_events, "decode": task_decode}[task](**kwargs)
    print(json.dumps(res))
