"""Atomic writers: every output is written under a temporary name and renamed when complete.

Rasters are written block by block into a tiled GeoTIFF, then copied to a Cloud Optimized
GeoTIFF with GDAL's COG driver reading that tiled file (the copy streams by blocks; the COG
driver's direct-create path would buffer the whole raster, which we avoid).
"""

from __future__ import annotations

import contextlib
import csv
import datetime
import hashlib
import json
import math
import os
import re
import tempfile
from pathlib import Path

import numpy as np
import rasterio
import rasterio.shutil

from ..grid import RunGrid

RASTER_NODATA = -9999.0  # on-disk nodata of float outputs (in memory: NaN)
#: Compression of the temporary tiled GeoTIFF, read once by the COG conversion and deleted: ZSTD
#: level 1 writes 2.4x faster than DEFLATE with a predictor and is read back faster, for a file
#: about 30 % larger (measured on a 67 Mpx float32 raster; docs/performance.md).
TEMPORARY_COMPRESSION = {"compress": "zstd", "zstd_level": 1}
#: Threads of the COG conversion (compression of the final tiles). It runs after the block pass,
#: when no worker competes for the cores: 1.7x faster on 2 cores than one thread (same page).
COG_THREADS = "ALL_CPUS"
#: Every temporary file peatburn creates beside an output carries this marker in its name
#: (``.<output name>.peatburn-tmp.<8 random characters>...``); only such files are ever deleted
#: as debris of a killed run, never a file by its suffix alone (issue 26).
TEMP_MARKER = "peatburn-tmp"
#: Share of a raster's pixels holding values above which its COG uses GDAL's predictor (floating-point
#: or horizontal differencing). Measured on two rasters only (docs/performance.md, benchmark 8): at
#: 48 % burned the predictor made the COG 8 % faster and smaller; at about 2 % (the national scene)
#: leaving it out made the conversion 29 % faster and the file 19 % smaller. Set between them, not tuned.
PREDICTOR_MIN_SHARE = 0.1
_TEMP_NAME = re.compile(r"^\..+\." + TEMP_MARKER + r"\.[A-Za-z0-9_]{8}.*(\.part|\.tiled\.tif|\.part\.gpkg(-journal|-wal|-shm)?)$")


def is_own_temporary(path: Path | str) -> bool:
    """True for a regular file (not a folder, not a link) named like one of peatburn's temporaries."""
    p = Path(path)
    return bool(_TEMP_NAME.match(p.name)) and p.is_file() and not p.is_symlink()


def _temp_prefix(final: Path) -> str:
    return f".{final.name}.{TEMP_MARKER}."


def _file_mode() -> int:
    """Permissions of a new file under this process's umask (``mkstemp`` would leave 0600)."""
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


@contextlib.contextmanager
def atomic_path(final: Path | str, suffix: str = "", tail: str = ".part"):
    """Yield a temporary path beside ``final``; rename it onto ``final`` only if the block succeeds.

    The temporary is ``.<final name>.peatburn-tmp.<8 characters><suffix><tail>``; ``tail`` is
    ``.part``, or ``.part.gpkg`` for a GeoPackage (its driver wants the extension).

    The file gets the permissions any new file of this process would get (umask), so outputs can
    be read by the colleagues and cluster workers a plain file could.
    """
    final = Path(final)
    final.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=_temp_prefix(final), suffix=suffix + tail, dir=final.parent)
    os.close(fd)
    tmp = Path(tmp)
    try:
        yield tmp
        os.chmod(tmp, _file_mode())
        os.replace(tmp, final)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()
        raise


def write_text(final, text: str) -> Path:
    with atomic_path(final) as tmp:
        tmp.write_text(text, encoding="utf-8")
    return Path(final)


def write_json(final, obj) -> Path:
    return write_text(final, json.dumps(_jsonable(obj), indent=2, sort_keys=False, allow_nan=False) + "\n")


def write_csv(final, rows: list[dict], columns: list[str]) -> Path:
    """Write ``rows`` (dicts; keys outside ``columns`` are ignored, missing ones are empty) as CSV.

    Floats are rounded to 9 decimals and written in their shortest form (``repr``); NaN, infinities
    and None are written as empty fields; text that a spreadsheet would run as a formula is
    neutralised (:func:`spreadsheet_safe`). Lines end in CRLF (RFC 4180), so that a text field holding
    a carriage return is quoted (with a bare LF ending, the csv module leaves it unquoted and a
    reader splits the row there).
    """
    texts = [_column_texts([row.get(k) for row in rows]) for k in columns]
    with atomic_path(final) as tmp:
        with open(tmp, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh, lineterminator="\r\n")
            w.writerow(columns)
            w.writerows(zip(*texts))
    return Path(final)


def _column_texts(values: list) -> list:
    """The fields of one column. A column of floats (None allowed) is rounded at once with
    numpy (about 2.5 times faster than value by value on a 10,000-zone table; numpy's rounding
    can differ from Python's ``round`` in the last digit, well below the 9th decimal's meaning)."""
    if values and all(v is None or isinstance(v, float) for v in values):
        a = np.asarray(values, dtype="float64")  # None becomes NaN
        with np.errstate(all="ignore"):  # from 1e15 up a float has no 9th decimal to round (and x 1e9 overflows)
            r = np.where(np.abs(a) < 1e15, np.round(a, 9), a)
        out = list(map(repr, r.tolist()))
        for i in np.flatnonzero(~np.isfinite(a)):
            out[i] = ""
        return out
    return [_fmt(v) for v in values]


def _fmt(v):
    if isinstance(v, (float, np.floating)):
        if not math.isfinite(v):
            return ""
        return repr(float(round(float(v), 9)))
    if isinstance(v, str):
        return spreadsheet_safe(v)
    return "" if v is None else v


#: First characters with which a spreadsheet reads a text field as a formula: = + - @, and tab
#: and carriage return (OWASP, "CSV Injection"; common practice).
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
_PLAIN_NUMBER = re.compile(r"[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?")


def spreadsheet_safe(text: str) -> str:
    """A CSV text field that a spreadsheet shows as text, never runs as a formula.

    A field beginning with ``=``, ``+``, ``-``, ``@``, tab or carriage return gets a leading
    apostrophe (the OWASP advice for CSV files opened in spreadsheets; common practice), unless
    it is a plain number such as ``-5`` or ``+1.5e3``, which no spreadsheet reads as a formula.
    Only text fields pass here: numbers are written by :func:`write_csv` as numbers. The
    GeoPackage and JSON outputs keep the text as given.
    """
    if text.startswith(_FORMULA_START) and not _PLAIN_NUMBER.fullmatch(text):
        return "'" + text
    return text


def _jsonable(obj):
    if isinstance(obj, dict):
        return {str(k): _jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_jsonable(v) for v in obj]
    if isinstance(obj, (np.floating, float)):
        f = float(obj)
        return f if math.isfinite(f) else None
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, np.bool_):
        return bool(obj)
    if isinstance(obj, Path):
        return str(obj)
    if isinstance(obj, (datetime.date, datetime.time)):  # TOML dates and times in the configuration
        return obj.isoformat()
    return obj


class BlockRasterWriter:
    """Write a float32 raster of the run grid block by block; finish into a COG atomically.

    Use as a context manager; :meth:`write` takes a window and an array with NaN for nodata.
    On error the temporary files are removed and nothing appears under the final name.
    """

    def __init__(self, final: Path | str, grid: RunGrid, *, description: str = "", units: str = "",
                 block_size: int = 512, dtype: str = "float32", nodata: float = RASTER_NODATA,
                 colormap: dict | None = None):
        self.final = Path(final)
        self.grid = grid
        self.final.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=_temp_prefix(self.final), suffix=".tiled.tif", dir=self.final.parent)
        os.close(fd)
        self._tiled = Path(tmp)
        bs = 256 if block_size % 256 else min(block_size, 512)
        self.dtype, self.nodata = dtype, nodata
        self._written = 0  # pixels written with a value (the mask's count)
        profile = dict(driver="GTiff", width=grid.width, height=grid.height, count=1, dtype=dtype,
                       crs=grid.crs, transform=grid.transform, nodata=nodata, tiled=True,
                       blockxsize=bs, blockysize=bs, BIGTIFF="IF_SAFER", SPARSE_OK="TRUE",
                       **TEMPORARY_COMPRESSION)
        try:
            self._ds = rasterio.open(self._tiled, "w", **profile)
        except rasterio.errors.RasterioIOError:  # a GDAL built without ZSTD
            profile.update(compress="deflate", zstd_level=None)
            self._ds = rasterio.open(self._tiled, "w", **{k: v for k, v in profile.items() if v is not None})
        if description:
            self._ds.set_band_description(1, description)
        if units:
            self._ds.update_tags(1, units=units)
            self._ds.units = (units,)
        if colormap:  # a TIFF palette (TIFF 6.0 ColorMap): value -> (r, g, b, a), for a uint8 class raster
            self._ds.write_colormap(1, colormap)

    def write(self, window, array: np.ndarray):
        self._written = -1  # whole windows of values: dense
        if np.dtype(self.dtype).kind == "f":
            a = np.where(np.isfinite(array), array, self.nodata).astype(self.dtype)
        else:
            a = np.asarray(array).astype(self.dtype)
        self._ds.write(a, 1, window=window)

    def write_at(self, window, mask: np.ndarray | None, values: np.ndarray):
        """Write a window holding ``values`` at the pixels of ``mask`` and nodata elsewhere (NaN
        values are nodata too); ``mask`` None (or all False) writes nothing: the file is sparse
        (GDAL's SPARSE_OK), a block never written reads as nodata and costs neither compression nor
        space, in the temporary file and in the COG (most blocks of a national run hold no scar)."""
        if mask is None or not mask.any():
            return
        shape = (int(window.height), int(window.width))
        a = np.full(shape, self.nodata, dtype=self.dtype)
        if mask is not None:
            v = np.asarray(values)
            if np.dtype(self.dtype).kind == "f":
                v = np.where(np.isfinite(v), v, self.nodata)
            a[mask] = v
            self._written += int(np.count_nonzero(mask))
        self._ds.write(a, 1, window=window)

    @property
    def dense(self) -> bool:
        """More than :data:`PREDICTOR_MIN_SHARE` of the grid written with values (through
        :meth:`write_at`; :meth:`write` counts as dense). GDAL's predictor then pays; on a raster of
        mostly nodata it costs time and size (docs/performance.md, benchmark 8)."""
        return self._written < 0 or self._written > PREDICTOR_MIN_SHARE * self.grid.width * self.grid.height

    def close(self, ok: bool = True):
        self._ds.close()
        try:
            if ok:
                with atomic_path(self.final, suffix=".tif") as tmp:
                    rasterio.shutil.copy(self._tiled, tmp, driver="COG", COMPRESS="DEFLATE",
                                         PREDICTOR="YES" if self.dense else "NO",
                                         BLOCKSIZE="512", BIGTIFF="IF_SAFER", OVERVIEWS="AUTO", SPARSE_OK="TRUE",
                                         NUM_THREADS=COG_THREADS,
                                         RESAMPLING="NEAREST" if np.dtype(self.dtype).kind != "f" else "AVERAGE")
                    check_space(tmp.parent)  # GDAL only prints a failed write: never rename a cut file
        finally:
            with contextlib.suppress(FileNotFoundError):
                self._tiled.unlink()

    def __enter__(self):
        return self

    def __exit__(self, exc_type, exc, tb):
        self.close(ok=exc_type is None)


#: Below this many free bytes a file system counts as full: GDAL reports a failed write (ENOSPC) on
#: stderr without raising, so a COG cut short would otherwise be renamed onto its final name.
FULL_DISK_BYTES = 64 * 1024


def free_bytes(folder) -> int:
    st = os.statvfs(folder)
    return st.f_bavail * st.f_frsize


def check_space(folder) -> None:
    """Raise ``OSError(ENOSPC)`` if the file system of ``folder`` is (all but) full."""
    import errno

    if free_bytes(folder) < FULL_DISK_BYTES:
        raise OSError(errno.ENOSPC, "No space left on device", str(folder))


def sha256_of(path, chunk: int = 1 << 20) -> str:
    """SHA-256 of a file, read in chunks (constant memory)."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        while True:
            b = fh.read(chunk)
            if not b:
                break
            h.update(b)
    return h.hexdigest()


def file_record(path) -> dict:
    """Path, size and SHA-256 of one input file (a GeoPackage's or shapefile's sidecars are not followed)."""
    p = Path(path)
    return {"path": str(p), "size_bytes": p.stat().st_size, "sha256": sha256_of(p)}


class BlockWrites:
    """Write each block's windows into several :class:`BlockRasterWriter`: in the calling thread,
    or (``threads=True``) in background threads, one per writer (a GDAL dataset is only ever used
    by one thread), at most ``depth`` blocks behind the caller.

    GDAL compresses a tile in the thread that writes it and releases the GIL meanwhile, so with
    threads the writes of the output rasters overlap each other and the caller's next block: the
    main process of a parallel run takes in a block in about 2.9 ms instead of 4.6 ms on the
    benchmark scene (1.2x-2.3x over five measurements; benchmarks/bench_writes.py). A serial run
    gains nothing from them on 2 cores (its reading thread and its computation already fill
    them; docs/performance.md) and writes in its own thread.
    """

    def __init__(self, writers: list, threads: bool = True, depth: int = 2):
        import collections
        from concurrent.futures import ThreadPoolExecutor

        self._writers = list(writers)
        self._threads = [ThreadPoolExecutor(max_workers=1, thread_name_prefix="peatburn-write")
                         for _ in self._writers] if threads else None
        self._pending = collections.deque()
        self.depth = max(1, int(depth))

    def write_at(self, window, mask, values: list) -> None:
        """``writer.write_at(window, mask, v)`` for each writer and its array of ``values``. With
        threads the writes are queued (``mask`` and the arrays must not change afterwards), and
        this waits while ``depth`` blocks are queued."""
        if self._threads is None:
            for w, v in zip(self._writers, values):
                w.write_at(window, mask, v)
            return
        while len(self._pending) >= self.depth:
            self._wait(self._pending.popleft())
        self._pending.append([t.submit(w.write_at, window, mask, v)
                              for t, w, v in zip(self._threads, self._writers, values)])

    @staticmethod
    def _wait(futures) -> None:
        err = None
        for f in futures:
            try:
                f.result()
            except BaseException as exc:  # noqa: BLE001 - re-raised below, after every write ended
                err = err or exc
        if err is not None:
            raise err

    def close(self) -> None:
        """Wait for every queued write (re-raising the first error) and stop the threads."""
        try:
            while self._pending:
                self._wait(self._pending.popleft())
        finally:
            for t in self._threads or ():
                t.shutdown(wait=True, cancel_futures=True)
