"""Executors run a per-block function (:func:`peatburn.engine.blocks.process_block`) over block windows.

Three ways, one contract (:func:`map_blocks`): results come back **in window order**, so the caller
adds sums in the same order whatever the executor and the totals equal the serial run's.

``serial``
    in this process.
``processes`` (``workers=N``, :class:`WorkerPool`)
    N local worker processes, which a run starts before its co-registration. The plan is written
    once to a temporary file that each worker reads on its first task; a task carries only a few
    consecutive windows; each worker opens the input files itself.
``dask.distributed`` (``scheduler="tcp://host:8786"``)
    blocks are submitted to an existing cluster; the plan is scattered once to every worker
    (broadcast) and each result is gathered back to this process, which writes the outputs. The
    input paths must be readable on every worker (a shared file system or object store).

Memory stays bounded whatever the raster size: at most :data:`PREFETCH` chunks of
:data:`CHUNK` consecutive windows per worker are in flight, and results are handed to the caller
one at a time.

GDAL settings (common practice, not a published rule): each worker process gets a block cache of
:data:`WORKER_GDAL_CACHE` bytes and one GDAL thread, and BLAS/OpenMP pools of one thread, so N
workers on N cores do not oversubscribe the machine or multiply GDAL's default cache (5 % of the
RAM per process), and glibc's malloc keeps block-sized arrays in its heap (:func:`tune_malloc`).
:func:`gdal_env` gives the matching GDAL settings for the main process.

Open datasets are kept per thread (:func:`peatburn.engine.blocks._state`), so dask workers may run
several threads; one single-threaded worker process per core runs fastest (see :func:`_dask_task`):
``dask worker ADDRESS --nworkers N --nthreads 1``.
"""

from __future__ import annotations

import collections
import contextlib
import multiprocessing
import os
import pickle
import shutil
import sys
import tempfile
import threading
from concurrent.futures import ProcessPoolExecutor
from typing import Callable, Iterable, Iterator

from ..errors import ExecutorError

#: GDAL block cache of one worker process [bytes]. A block touches at most 4 input tiles of each of
#: up to 6 input rasters (24 MiB with 512 x 512 float32 tiles); 128 MiB leaves room for a row of tiles.
WORKER_GDAL_CACHE = 128 * 2**20
#: GDAL block cache of the main process during a run [bytes], at least and at most (see
#: :func:`run_cache_bytes`): bounds the memory of the readers, of the block writers and of the COG
#: conversion, which otherwise grows with the raster up to GDAL's default of 5 % of the RAM.
MAIN_GDAL_CACHE = 64 * 2**20
MAX_GDAL_CACHE = 256 * 2**20
#: Block rows counted by :func:`run_cache_bytes` at most [px]: one row of 512 px input tiles.
CACHE_ROWS = 512  # common practice: the cache sized to the working set (above)
#: Seconds to wait for a dask scheduler to answer.
CONNECT_TIMEOUT = 10
#: Chunks in flight per worker (submitted, not yet handed to the caller).
PREFETCH = 2
#: Side of the squares of blocks a run orders its windows in (``RunGrid.windows(block, group)``).
#: A block read with a sub-pixel shift touches the tiles to its right and below, which its
#: neighbours decode too; a worker given a 4 x 4 square decodes 25 tiles of the shifted survey for
#: 16 blocks (a 1 x 4 run: 10 for 4). Measured on 2 workers: about 7 % less time than runs of 4 in
#: row order (docs/performance.md).
BLOCK_GROUP = 4
#: Consecutive windows per task: one square of blocks (it also cuts the round trips per block).
#: Results in flight: PREFETCH x workers x CHUNK blocks.
CHUNK = BLOCK_GROUP * BLOCK_GROUP

_THREAD_VARS = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")


def gdal_settings(cache_bytes: int = MAIN_GDAL_CACHE) -> dict:
    """GDAL configuration options of a peatburn process (``rasterio.Env(**gdal_settings())``).

    Parameters
    ----------
    cache_bytes : int
        GDAL block-cache size [bytes].
    """
    return {"GDAL_CACHEMAX": int(cache_bytes), "GDAL_NUM_THREADS": "1"}


def run_cache_bytes(width: int, block: int) -> int:
    """GDAL block cache of a run on a grid ``width`` pixels wide [bytes].

    Room for two rows of blocks of two float32 inputs: the co-registered survey's bilinear read
    reaches one row into the next row of tiles, which the next row of blocks reads again; with
    less, those tiles are decoded twice. Blocks count at most :data:`CACHE_ROWS` rows: what the next
    row of blocks reads again is one row of input tiles (512 px for the COGs this tool writes and
    most surveys), whatever the block size, and the cache also holds the output tiles not yet
    written, so a larger one only raises the memory (measured: 1024 px blocks with a cache sized
    for them peaked 235 MiB above 512 px blocks on the national benchmark). At least
    :data:`MAIN_GDAL_CACHE` (64 MiB, enough up to 8192 pixels wide with 512-pixel blocks), at most
    :data:`MAX_GDAL_CACHE`. Common practice (size the cache to the working set), measured in
    docs/performance.md.
    """
    need = 2 * 2 * int(width) * min(int(block), CACHE_ROWS) * 4
    return int(min(max(need, MAIN_GDAL_CACHE), MAX_GDAL_CACHE))


def gdal_env(cache_bytes: int = MAIN_GDAL_CACHE):
    """A :class:`rasterio.Env` with :func:`gdal_settings`: wrap a whole run in it to bound GDAL's cache."""
    import rasterio

    return rasterio.Env(**gdal_settings(cache_bytes))


#: glibc malloc settings of worker processes [bytes]: arrays up to this size come from the heap
#: (not a fresh mmap per array) and up to MALLOC_TRIM of free heap is kept for the next block.
MALLOC_MMAP_THRESHOLD = 32 * 2**20  # the largest value glibc accepts on 64-bit systems
MALLOC_TRIM = 256 * 2**20
#: glibc malloc arenas (M_ARENA_MAX = -8 in <malloc.h>).
MALLOC_ARENAS = 1


def tune_malloc() -> bool:
    """Stop glibc from mapping and unmapping every block-sized array (Linux only; else a no-op).

    A fresh process maps each array above 128 KiB with its own ``mmap`` and returns it on free, so
    every block pays page faults for all its temporaries: measured 2 s of system time per 256
    blocks of 512 x 512 (a quarter of the block time; docs/performance.md). Raising the mmap and
    trim thresholds (glibc ``mallopt``, M_MMAP_THRESHOLD = -3, M_TRIM_THRESHOLD = -1 in
    <malloc.h>) lets the heap reuse that memory, and one arena (M_ARENA_MAX = -8) keeps the
    threads of a process on that one heap. Common practice for numpy-heavy worker processes.
    """
    if not sys.platform.startswith("linux"):
        return False
    try:
        import ctypes

        libc = ctypes.CDLL("libc.so.6")
        ok = libc.mallopt(-3, MALLOC_MMAP_THRESHOLD) == 1
        # one arena for all threads: the serial run's reading thread allocates the block inputs that
        # the main thread frees; with an arena per thread each kept its own free heap (measured:
        # peak 891 instead of 661 MiB at 67 Mpx)
        ok = libc.mallopt(-8, MALLOC_ARENAS) == 1 and ok
        return bool(libc.mallopt(-1, MALLOC_TRIM) == 1 and ok)
    except (OSError, AttributeError):  # not glibc (e.g. musl)
        return False


def configure_worker(cache_bytes: int = WORKER_GDAL_CACHE) -> None:
    """Set this process's GDAL cache, thread options and malloc thresholds (process-wide, for
    worker processes)."""
    for var in _THREAD_VARS:
        os.environ.setdefault(var, "1")
    tune_malloc()
    from rasterio.env import set_gdal_config

    for key, value in gdal_settings(cache_bytes).items():
        set_gdal_config(key, value)


# --------------------------------------------------------------------------------------------
# ordered, bounded submission


def _chunks(windows: list, size: int) -> list[list]:
    return [windows[i:i + size] for i in range(0, len(windows), size)]


def _ordered(submit: Callable, chunks: list, depth: int) -> Iterator:
    """Submit ``chunks`` keeping at most ``depth`` futures in flight; yield each chunk's results
    in order."""
    pending: collections.deque = collections.deque()
    try:
        for ch in chunks:
            pending.append(submit(ch))
            if len(pending) >= depth:
                yield from pending.popleft().result()
        while pending:
            yield from pending.popleft().result()
    finally:
        for f in pending:
            f.cancel()


# --------------------------------------------------------------------------------------------
# local processes

_WORKER: dict = {}


def _started() -> int:
    return os.getpid()


#: Environment variables GDAL reads as configuration options for remote rasters (its own settings and
#: those of its cloud file systems: GDAL documentation, "Configuration options" and "GDAL Virtual File
#: Systems"). A worker started before the inputs were opened, or from a process started earlier (the
#: forkserver), does not have what was set since; they are sent along with each task (:func:`network_env`).
NETWORK_ENV_PREFIXES = ("GDAL_", "CPL_", "VSI_", "AWS_", "GS_", "GOOGLE_", "AZURE_", "OSS_", "SWIFT_", "WEBHDFS_")
#: Names that look like credentials; never sent to dask workers (other machines, possibly over an
#: unencrypted connection): a cluster's workers need their own (docs/configuration.md, "Remote rasters").
SECRET_WORDS = ("SECRET", "TOKEN", "KEY", "PASSWORD", "USERPWD", "SAS", "CREDENTIAL", "HEADER", "AUTH", "BEARER",
                "COOKIE")


def network_env(secrets: bool = True) -> dict:
    """This process's GDAL remote-access settings (:data:`NETWORK_ENV_PREFIXES`); without ``secrets``,
    the names holding one of :data:`SECRET_WORDS` are left out."""
    out = {}
    for k, v in os.environ.items():
        if k.startswith(NETWORK_ENV_PREFIXES) and (secrets or not any(w in k for w in SECRET_WORDS)):
            out[k] = v
    return out


def _apply_env(env: dict | None) -> None:
    """Set ``env`` in this worker's environment (GDAL reads these at each request)."""
    for k, v in (env or {}).items():
        if os.environ.get(k) != v:
            os.environ[k] = v


def _pool_task(fn, plan_path: str, windows, env: dict | None = None):
    """Run a chunk of blocks in a worker; the plan is read from ``plan_path`` once per worker, after
    the parent's remote-access settings ``env`` are applied (they travel through the pool's pipe,
    never through the plan file)."""
    _apply_env(env)
    if _WORKER.get("path") != plan_path:
        with open(plan_path, "rb") as fh:
            _WORKER["plan"] = pickle.load(fh)
        _WORKER["path"] = plan_path
    plan = _WORKER["plan"]
    return [fn(plan, w) for w in windows]


def _mp_context():
    """``forkserver`` where the platform has it (no GDAL handles or threads inherited from this
    process; workers fork from a clean server with peatburn imported), else ``spawn``."""
    methods = multiprocessing.get_all_start_methods()
    if "forkserver" in methods and sys.platform != "darwin":
        ctx = multiprocessing.get_context("forkserver")
        ctx.set_forkserver_preload(["peatburn.engine.blocks"])
        return ctx
    return multiprocessing.get_context("spawn")


class WorkerPool:
    """``workers`` local processes, started at once and given a plan later (:meth:`map`).

    Starting a worker costs about 1.7 s on the benchmark machine (a fresh interpreter importing
    numpy, rasterio, shapely and peatburn; docs/performance.md). A run starts its pool before the
    co-registration, so that start-up overlaps the co-registration instead of the block pass. The
    plan, which exists only after the co-registration, is written once to a temporary file that
    each worker reads on its first task (not pickled into every task: with many zones it holds
    every polygon).

    Use as a context manager, or call :meth:`close`.
    """

    def __init__(self, workers: int, cache_bytes: int = WORKER_GDAL_CACHE):
        self.workers = max(1, int(workers))
        self._pool = ProcessPoolExecutor(max_workers=self.workers, mp_context=_mp_context(),
                                         initializer=configure_worker, initargs=(cache_bytes,))
        self._dir = tempfile.mkdtemp(prefix="peatburn-plan-")
        self._count = 0
        # the processes start now; their start-up runs while the caller goes on
        self._starting = [self._pool.submit(_started) for _ in range(self.workers)]

    def map(self, fn: Callable, plan, windows: list, chunk: int = CHUNK) -> Iterator:
        """Yield ``fn(plan, w)`` for each of ``windows`` in order (see :func:`map_blocks`)."""
        self._count += 1
        path = os.path.join(self._dir, f"plan{self._count}.pickle")
        with open(path, "wb") as fh:
            pickle.dump(plan, fh, protocol=pickle.HIGHEST_PROTOCOL)
        chunk = max(1, min(chunk, len(windows) // self.workers))
        try:
            env = network_env()
            yield from _ordered(lambda ch: self._pool.submit(_pool_task, fn, path, ch, env), _chunks(windows, chunk),
                                PREFETCH * self.workers)
        finally:
            with contextlib.suppress(OSError):
                os.unlink(path)

    def close(self) -> None:
        """Stop the workers (blocks not yet run are cancelled) and remove the plan files; a second
        call does nothing."""
        self._pool.shutdown(wait=True, cancel_futures=True)
        shutil.rmtree(self._dir, ignore_errors=True)

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()


# --------------------------------------------------------------------------------------------
# dask.distributed

_DASK_LOCK = threading.Lock()
_DASK_CONFIGURED: dict = {}


def _dask_task(fn, plan, windows, cache_bytes, env: dict | None = None):
    """Run a chunk of blocks on a dask worker.

    The GDAL settings are applied once per worker process, the client's remote-access settings
    ``env`` (no credentials: :func:`network_env`) before each chunk. The blocks keep their open datasets
    per thread, so a worker may run several threads; numpy work holds the GIL for part of each
    block, so one single-threaded worker process per core runs fastest (``--nthreads 1``).
    """
    with _DASK_LOCK:
        if _DASK_CONFIGURED.get("cache") != cache_bytes:
            configure_worker(cache_bytes)
            _DASK_CONFIGURED["cache"] = cache_bytes
        _apply_env(env)
    return [fn(plan, w) for w in windows]


def connect(scheduler):
    """A :class:`distributed.Client` connected to the scheduler at ``scheduler`` (an address, or a
    cluster object such as :class:`distributed.LocalCluster`).

    Raises
    ------
    ExecutorError
        dask.distributed is not installed, or no scheduler answers within :data:`CONNECT_TIMEOUT` s.
    """
    try:
        from distributed import Client
    except ImportError:  # pragma: no cover - depends on the installed extras
        raise ExecutorError("--scheduler needs dask.distributed, which is not installed: "
                            "pip install 'peatburn[scale]'") from None
    try:
        return Client(scheduler, set_as_default=False, timeout=CONNECT_TIMEOUT)
    except (OSError, TimeoutError, ValueError) as exc:
        raise ExecutorError(f"--scheduler: cannot connect to a dask scheduler at {scheduler!r} "
                            f"({str(exc).splitlines()[0] if str(exc) else type(exc).__name__}); check the "
                            f"address (e.g. tcp://10.0.0.5:8786) and that the scheduler is running") from None


def _dask_map(fn, plan, windows, scheduler, cache_bytes, chunk):
    try:
        from distributed import Client
    except ImportError:  # pragma: no cover - depends on the installed extras
        raise ExecutorError("--scheduler needs dask.distributed, which is not installed: "
                            "pip install 'peatburn[scale]'") from None
    own = not isinstance(scheduler, Client)  # an address or a cluster object: a client of our own
    client = connect(scheduler) if own else scheduler
    try:
        [plan_f] = client.scatter([plan], broadcast=True, hash=False)
        threads = sum(client.nthreads().values()) or 1
        chunk = max(1, min(chunk, len(windows) // threads))
        env = network_env(secrets=False)
        yield from _ordered(lambda ch: client.submit(_dask_task, fn, plan_f, ch, cache_bytes, env, pure=False),
                            _chunks(windows, chunk), PREFETCH * threads)
    finally:
        if own:
            client.close()


# --------------------------------------------------------------------------------------------


#: Windows read ahead by the serial executor's reading thread.
READ_AHEAD = 2


def _read_ahead_map(read: Callable, compute: Callable, plan, windows: list) -> Iterator:
    """Serial map with the reads of the next windows overlapping this window's computation.

    One reading thread: the GDAL datasets of the plan are only ever used by one thread at a time.
    GDAL options set by the caller (:func:`gdal_env`) are process-wide, so the thread reads under them.
    """
    from concurrent.futures import ThreadPoolExecutor

    pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="peatburn-read")
    pending = collections.deque()
    try:
        it = iter(windows)
        for w in it:
            pending.append(pool.submit(read, plan, w))
            if len(pending) > READ_AHEAD:
                break
        while pending:
            data = pending.popleft().result()
            nxt = next(it, None)
            if nxt is not None:
                pending.append(pool.submit(read, plan, nxt))
            yield compute(plan, data)
    finally:
        for f in pending:
            f.cancel()
        pool.shutdown(wait=True)


def map_blocks(fn: Callable, plan, windows: Iterable, workers: int = 1, scheduler=None, *,
               worker_cache: int = WORKER_GDAL_CACHE, chunk: int = CHUNK, stages: tuple | None = None,
               pool: WorkerPool | None = None) -> Iterator:
    """Yield ``fn(plan, window)`` for each window, in window order.

    Parameters
    ----------
    fn : callable
        A module-level function ``fn(plan, window) -> result`` (picklable by reference).
    plan : object
        Picklable; sent once per worker process.
    windows : iterable of rasterio.windows.Window
    workers : int
        Local worker processes; 1 runs serially in this process. Ignored when ``scheduler`` or
        ``pool`` is given.
    scheduler : str or distributed.Client, optional
        Address of a dask.distributed scheduler (e.g. ``"tcp://10.0.0.5:8786"``), or a client.
        A client made from an address is closed at the end; a client passed in is left open.
    worker_cache : int
        GDAL block cache of each worker process [bytes] (of a pool made here).
    chunk : int
        Consecutive windows per task sent to a worker (tile reuse, fewer round trips).
    stages : (read, compute), optional
        ``fn`` split in two, ``fn(plan, w) == compute(plan, read(plan, w))``: ``read`` does the
        file work (GDAL decoding and rasterizing, which release the GIL) and ``compute`` the
        arithmetic. A serial run then reads the next windows in a background thread while it
        computes this one (:data:`READ_AHEAD` windows ahead).
    pool : WorkerPool, optional
        Worker processes started earlier (their start-up overlapped other work); left running.

    Notes
    -----
    Results are produced lazily and at most ``PREFETCH`` chunks per worker are held in flight,
    so the memory used does not depend on the number of windows. Closing the generator early cancels
    the blocks not yet run.
    """
    windows = list(windows)
    if scheduler is not None:
        yield from _dask_map(fn, plan, windows, scheduler, worker_cache, max(1, chunk))
        return
    if pool is not None and len(windows) > 1:
        yield from pool.map(fn, plan, windows, max(1, chunk))
        return
    if workers <= 1 or len(windows) <= 1:
        if stages is not None and len(windows) > 1:
            yield from _read_ahead_map(*stages, plan, windows)
            return
        for w in windows:
            yield fn(plan, w)
        return
    with WorkerPool(min(workers, len(windows)), worker_cache) as own:
        yield from own.map(fn, plan, windows, max(1, chunk))
