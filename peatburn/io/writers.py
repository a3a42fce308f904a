"""Atomic writers: every output is written under a temporary name and renamed when complete.

Rasters are written block by block as the tiles of a Cloud Optimized GeoTIFF, each tile compressed
once, and the COG is assembled from them at the end (:class:`BlockRasterWriter`,
:mod:`peatburn.io.cog_layout`; the COG driver's direct-create path would buffer the whole raster, and
its copy from a finished raster compressed everything twice).
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
#: Every temporary file peatburn creates beside an output carries this marker in its name
#: (``.<output name>.peatburn-tmp.<8 random characters>...``); only such files are ever deleted
#: as debris of a killed run, never a file by its suffix alone (issue 26).
TEMP_MARKER = "peatburn-tmp"
#: Share of a raster's pixels holding values above which its COG uses GDAL's predictor (floating-point
#: or horizontal differencing). Measured on two rasters only (docs/performance.md, benchmark 8): at
#: 48 % burned the predictor made the COG 8 % faster and smaller; at about 2 % (the national scene)
#: leaving it out made the conversion 29 % faster and the file 19 % smaller. Set between them, not tuned.
#: The predictor is chosen before the first tile is written, from the scars' share of the grid
#: (:func:`peatburn.engine.runner.burned_share`).
PREDICTOR_MIN_SHARE = 0.1
#: DEFLATE level of the output tiles (GDAL's ZLEVEL with libdeflate; GDAL's default is 6), for rasters of
#: values (float) and of codes. Measured (docs/performance.md, benchmark 8; CPU of writing and finishing
#: one raster, three alternated rounds): values at level 1 cost 18 % less CPU than at 6 with files 0.4-0.6 %
#: larger, at 2 % burned (the half-scale national outputs) and at 50 % burned (a synthetic 67 Mpx raster)
#: alike; level 2 is no faster than 1. A class raster (long runs of a few codes) is 25-55 % larger at
#: levels 1-2 than at 6, and level 1 is not even faster there: codes stay at GDAL's default.
DEFLATE_LEVEL = {"values": 1, "codes": 6}  # project choice, measured (above)
#: Overview levels of at most this many pixels are held in memory while the block pass writes them
#: (16 MiB of float32; the levels of a raster together hold at most a third more). Twice as many (the
#: third level of a 20,000 px grid, 2,500 px square, in memory too) was measured with the levels halved
#: from the valid pixels: no CPU saved within the noise, 70 MiB more peak memory in the national run,
#: and edge tiles written whole are padded with zeros past the raster's edge (GDAL's choice), larger
#: than the nodata padding of tiles written by pieces (docs/performance.md, benchmark 8).
MEMORY_LEVEL_PX = 2**22  # project choice, measured (above)
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
    """Write a raster of the run grid block by block; finish into a COG atomically.

    Use as a context manager; :meth:`write` takes a window and an array with NaN for nodata,
    :meth:`write_at` the values at the pixels of a mask.

    The tiles are compressed once, in their final form (DEFLATE, :data:`~peatburn.io.cog_layout.COG_TILE`
    px tiles), as they are written: the full resolution into a temporary tiled GeoTIFF, and, from each
    window, the first overview level (:mod:`peatburn.numerics.pyramids`) into another; :meth:`close`
    builds the further levels from the first and assembles the COG from the compressed tiles
    (:mod:`peatburn.io.cog_layout`; before, GDAL's COG driver read the finished raster again, computed
    every overview from the full resolution and compressed everything a second time).

    ``predictor`` (GDAL's floating-point or horizontal differencing) has to be chosen before the first
    tile is compressed: pass the share of the grid expected to hold values as ``expected_share``; the
    predictor is used above :data:`PREDICTOR_MIN_SHARE` (docs/performance.md, benchmark 8).
    On error the temporary files are removed and nothing appears under the final name.
    """

    def __init__(self, final: Path | str, grid: RunGrid, *, description: str = "", units: str = "",
                 block_size: int = 512, dtype: str = "float32", nodata: float = RASTER_NODATA,
                 colormap: dict | None = None, expected_share: float = 1.0):
        from .cog_layout import COG_TILE, overview_shapes

        self.final = Path(final)
        self.grid = grid
        self.final.parent.mkdir(parents=True, exist_ok=True)
        self.dtype, self.nodata = dtype, nodata
        self.categorical = np.dtype(dtype).kind != "f"
        self.predictor = expected_share > PREDICTOR_MIN_SHARE
        self._levels = overview_shapes(grid.width, grid.height)
        #: first level that a window did not halve onto (its pixels straddle windows): that level and the
        #: ones above are rebuilt at close from the level below (len(levels) + 1: none)
        self._stale = len(self._levels) + 1
        self._paths = [self._temp(".tiled.tif")] + [self._temp(f".o{k + 1}.tiled.tif") for k in range(len(self._levels))]
        self._profile = dict(driver="GTiff", count=1, dtype=dtype, nodata=nodata, tiled=True, blockxsize=COG_TILE,
                             blockysize=COG_TILE, BIGTIFF="IF_SAFER", SPARSE_OK="TRUE", compress="deflate",
                             zlevel=DEFLATE_LEVEL["codes" if self.categorical else "values"],
                             predictor=(3 if not self.categorical else 2) if self.predictor else 1)
        self._ds = None
        self._level_ds = []
        self._blank = {}
        #: the small levels, held in memory and written whole at close (a GDAL write costs about 60 us,
        #: more than the halving of a block's piece of a small level)
        self._level_mem = {k: np.full(hw, nodata, dtype=dtype) for k, hw in enumerate(self._levels, start=1)
                           if hw[0] * hw[1] <= MEMORY_LEVEL_PX}
        try:
            self._ds = rasterio.open(self._paths[0], "w", width=grid.width, height=grid.height, crs=grid.crs,
                                     transform=grid.transform, **self._profile)
            for k in range(1, len(self._levels) + 1):
                self._level_ds.append(self._open_level(k))
        except BaseException:
            self._cleanup()
            raise
        if description:
            self._ds.set_band_description(1, description)
        if units:
            self._ds.update_tags(1, units=units)
            self._ds.units = (units,)
        if colormap:  # a TIFF palette (TIFF 6.0 ColorMap): value -> (r, g, b, a), for a uint8 class raster
            self._ds.write_colormap(1, colormap)

    def _temp(self, suffix: str) -> Path:
        fd, tmp = tempfile.mkstemp(prefix=_temp_prefix(self.final), suffix=suffix, dir=self.final.parent)
        os.close(fd)
        return Path(tmp)

    def _open_level(self, k: int):
        from affine import Affine

        h, w = self._levels[k - 1]
        return rasterio.open(self._paths[k], "w", width=w, height=h, crs=self.grid.crs,
                             transform=self.grid.transform * Affine.scale(2**k), **self._profile)

    def _halve_into_levels(self, window, flat_index, values) -> None:
        """Write the window's piece of each overview level (:func:`peatburn.numerics.pyramids.halve_cells`,
        each level from the valid pixels of the one below), up to the first level whose pixels the window
        does not hold whole. A level held in memory gets the valid pixels alone; a dense piece is formed
        only for a level written through GDAL."""
        from rasterio.windows import Window

        from ..numerics.pyramids import halve_cells, scatter

        r0, c0, h, w = int(window.row_off), int(window.col_off), int(window.height), int(window.width)
        H, W = self.grid.height, self.grid.width
        cells, vals = flat_index, values
        for k in range(1, self._stale):
            if r0 % 2 or c0 % 2 or (h % 2 and r0 + h != H) or (w % 2 and c0 + w != W):
                self._stale = k  # rebuilt at close from level k - 1
                return
            cells, vals = halve_cells((h, w), cells, vals, categorical=self.categorical, nodata=self.nodata)
            r0, c0, H, W = r0 // 2, c0 // 2, (H + 1) // 2, (W + 1) // 2
            h, w = (h + 1) // 2, (w + 1) // 2
            mem = self._level_mem.get(k)
            if mem is not None:
                mem[r0:r0 + h, c0:c0 + w] = self.nodata
                mem[r0 + cells // w, c0 + cells % w] = vals
            elif cells.size:  # an empty piece is not written: the level's file stays sparse there
                piece = scatter((1, h, w), cells, vals, nodata=self.nodata, dtype=self.dtype)
                self._level_ds[k - 1].write(piece, [1], window=Window(c0, r0, w, h))

    def write(self, window, array: np.ndarray):
        if np.dtype(self.dtype).kind == "f":
            a = np.where(np.isfinite(array), array, self.nodata).astype(self.dtype)
        else:
            a = np.asarray(array).astype(self.dtype)
        self._ds.write(a[None], [1], window=window)
        idx = np.flatnonzero(a != self.nodata)
        self._halve_into_levels(window, idx, a.ravel()[idx])

    def write_at(self, window, mask: np.ndarray | None, values: np.ndarray, flat_index: np.ndarray | None = None):
        """Write a window holding ``values`` at the pixels of ``mask`` and nodata elsewhere (NaN
        values are nodata too); ``mask`` None (or all False) writes nothing: the file is sparse
        (GDAL's SPARSE_OK), a block never written reads as nodata and costs neither compression nor
        space, in the temporary file and in the COG (most blocks of a national run hold no scar).
        ``flat_index``, if given, is ``numpy.flatnonzero(mask)`` (computed once for several rasters)."""
        if mask is None:
            return
        idx = np.flatnonzero(mask) if flat_index is None else flat_index
        if not idx.size:
            return
        shape = (int(window.height), int(window.width))
        a = self._blank.get(shape)
        if a is None:  # one array per window shape, reset after each write (a fresh one costs page faults)
            a = self._blank[shape] = np.full(shape, self.nodata, dtype=self.dtype)
        flat = a.reshape(-1)
        v = np.asarray(values)
        if np.dtype(self.dtype).kind == "f":
            v = np.where(np.isfinite(v), v, self.nodata)
        try:
            flat[idx] = v
            self._ds.write(a[None], [1], window=window)  # (the 3-d form: rasterio's 2-d one stacks a copy)
            v = flat[idx]  # the values as stored (the raster's dtype)
        finally:
            flat[idx] = self.nodata
        keep = v != self.nodata
        if keep.all():
            self._halve_into_levels(window, idx, v)
        else:
            self._halve_into_levels(window, idx[keep], v[keep])

    def _build_levels(self) -> None:
        """Close the levels; rebuild the stale ones (a window did not halve onto them), each from the
        level below, by strips of two rows of tiles, written as they come."""
        from rasterio.windows import Window

        from ..numerics.pyramids import halve_dense
        from .cog_layout import level_windows

        for k, a in self._level_mem.items():
            if k < self._stale and (a != self.nodata).any():
                self._level_ds[k - 1].write(a, 1)
        self._level_mem = {}
        for ds in self._level_ds:
            ds.close()
        for k in range(self._stale, len(self._levels) + 1):
            h, w = (self.grid.height, self.grid.width) if k == 1 else self._levels[k - 2]
            with rasterio.open(self._paths[k - 1]) as src, self._open_level(k) as dst:
                for r, n in level_windows(h, w):
                    piece = halve_dense(src.read(1, window=Window(0, r, w, n)), categorical=self.categorical,
                                        nodata=self.nodata)
                    if (piece != self.nodata).any():  # an empty strip stays sparse
                        dst.write(piece.astype(self.dtype, copy=False), 1,
                                  window=Window(0, r // 2, piece.shape[1], piece.shape[0]))

    def close(self, ok: bool = True):
        from .cog_layout import OffsetOverflow, fill_skeleton, skeleton_vrt, write_skeleton

        try:
            self._ds.close()
            if not ok:
                return
            self._build_levels()
            with atomic_path(self.final, suffix=".tif") as tmp:
                self._assemble(tmp, skeleton_vrt, write_skeleton, fill_skeleton, OffsetOverflow)
                check_space(tmp.parent)  # GDAL only prints a failed write: never rename a cut file
        finally:
            self._cleanup()

    def _assemble(self, tmp: Path, skeleton_vrt, write_skeleton, fill_skeleton, overflow) -> None:
        """The COG into ``tmp``: GDAL's skeleton, then the tiles (peatburn.io.cog_layout)."""
        import uuid

        from affine import Affine

        empties = []
        vrt = self._temp(".skeleton.vrt.part")
        try:
            for k, (h, w) in enumerate(self._levels, start=1):  # empty sparse overviews: nothing to read or write
                p = f"/vsimem/peatburn-skeleton-{uuid.uuid4().hex}-{k}.tif"
                with rasterio.open(p, "w", width=w, height=h, crs=self.grid.crs,
                                   transform=self.grid.transform * Affine.scale(2**k), **self._profile):
                    pass
                empties.append(p)
            skeleton_vrt(self._paths[0], empties, vrt)
            for bigtiff in ("IF_SAFER", "YES"):
                write_skeleton(vrt, tmp, dtype=self.dtype, predictor=self.predictor, bigtiff=bigtiff)
                try:
                    fill_skeleton(tmp, self._paths)
                    return
                except overflow:
                    if bigtiff == "YES":
                        raise
        finally:
            with contextlib.suppress(FileNotFoundError):
                vrt.unlink()
            for p in empties:
                with contextlib.suppress(Exception):
                    rasterio.shutil.delete(p)

    def _cleanup(self) -> None:
        for ds in [self._ds] + self._level_ds:
            if ds is not None and not ds.closed:
                with contextlib.suppress(Exception):
                    ds.close()
        for p in self._paths:
            with contextlib.suppress(FileNotFoundError):
                p.unlink()

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
    benchmark scene (1.2x-2.3x over five measurements; benchmarks/bench_writes.py). Since the tiles are
    compressed once in their final form (DEFLATE, slower than the former temporary ZSTD), a serial run
    writes through them too (docs/performance.md, benchmark 8).
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
        if mask is None:
            return
        idx = np.flatnonzero(mask)  # once for all the writers
        if not idx.size:
            return
        if self._threads is None:
            for w, v in zip(self._writers, values):
                w.write_at(window, mask, v, flat_index=idx)
            return
        while len(self._pending) >= self.depth:
            self._wait(self._pending.popleft())
        self._pending.append([t.submit(w.write_at, window, mask, v, flat_index=idx)
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
