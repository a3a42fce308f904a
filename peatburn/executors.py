"""Executors run :func:`peatburn.pipeline.process_block` over the block windows.

``serial`` runs in this process; ``processes`` in N local worker processes (each opens the
input files itself; GDAL's block cache is kept small per worker and GDAL threads at one, so N
workers do not oversubscribe the machine). Results come back in window order, so sums are
added in the same order whatever the executor, and results equal the serial run's.
"""

from __future__ import annotations

import os
from concurrent.futures import ProcessPoolExecutor
from typing import Callable, Iterable, Iterator


def _init_worker():
    os.environ.setdefault("GDAL_CACHEMAX", "128")
    os.environ["GDAL_NUM_THREADS"] = "1"
    os.environ.setdefault("OMP_NUM_THREADS", "1")
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")


def _call(args):
    fn, plan, window = args
    return fn(plan, window)


def map_blocks(fn: Callable, plan, windows: Iterable, workers: int = 1) -> Iterator:
    """Yield ``fn(plan, window)`` for each window, in order."""
    windows = list(windows)
    if workers <= 1 or len(windows) <= 1:
        for w in windows:
            yield fn(plan, w)
        return
    with ProcessPoolExecutor(max_workers=workers, initializer=_init_worker) as pool:
        yield from pool.map(_call, ((fn, plan, w) for w in windows), chunksize=1)
