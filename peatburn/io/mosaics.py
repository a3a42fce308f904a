"""Raster inputs that are not one local file: tiles read as one mosaic, and remote rasters.

A raster key of the configuration may name

* one local file (a ``pathlib.Path``, as before);
* a glob pattern (``"pre_tiles/*.tif"``) or a list of paths, patterns or URLs: the tiles are read as
  one mosaic through GDAL's VRT driver (a VRT document built here, in memory, never written);
* a GDAL VRT file (``.vrt``), opened by GDAL as it is;
* a URL: ``https://`` / ``http://`` through GDAL's ``/vsicurl/``, ``s3://`` through ``/vsis3/``,
  ``gs://`` through ``/vsigs/``; GDAL reads only the byte ranges a window needs (a cloud-optimised
  GeoTIFF is read block by block). Credentials are never read by peatburn: GDAL takes them from its
  own environment variables (docs/configuration.md lists them).

Everything but a single local file is a :class:`RasterInput`. ``str()`` (and ``os.fspath``) of it is
the name GDAL opens (a ``/vsi...`` path, or the VRT document itself), so every reader that opens
``str(path)`` reads a mosaic or a URL unchanged; formatting it in a message (``f"{x}"``) gives what
the user wrote instead, so messages stay one readable line.

Mosaic rules (GDAL VRT semantics): tiles must share CRS, pixel size and pixel lattice (else one-line
error naming the two tiles); the mosaic covers the union of the tiles; pixels no tile covers are
nodata; where tiles overlap, the later tile in name order is drawn over the earlier ones where it
has data (its nodata pixels let the earlier tile show through). Survey tiles that overlap by a
margin hold the same values there, so the order does not matter for them.
"""

from __future__ import annotations

import glob
import math
import os
from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path
from xml.sax.saxutils import escape

from ..errors import ConfigError, GridError, InputFileError, MissingInputError

#: URL schemes and the GDAL virtual file system that reads each (GDAL documentation, "GDAL Virtual
#: File Systems"): only the byte ranges a read needs are fetched.
URL_SCHEMES = {"https://": "/vsicurl/https://", "http://": "/vsicurl/http://", "s3://": "/vsis3/",
               "gs://": "/vsigs/"}

#: GDAL settings applied to remote reads when the user has not set them (environment variables GDAL
#: reads as configuration options): a stated timeout [s], a few retries, and no directory listing on
#: open (a COG needs no sidecar files; listing a bucket is slow).
REMOTE_DEFAULTS = {"GDAL_HTTP_TIMEOUT": "30", "GDAL_HTTP_CONNECTTIMEOUT": "10", "GDAL_HTTP_MAX_RETRY": "2",
                   "GDAL_HTTP_RETRY_DELAY": "0.5", "GDAL_DISABLE_READDIR_ON_OPEN": "EMPTY_DIR"}

_GLOB_CHARS = set("*?[")


def is_url(text: str) -> bool:
    return isinstance(text, str) and text.lower().startswith(tuple(URL_SCHEMES))


def gdal_name(text: str) -> str:
    """The name GDAL opens for a path or URL (``s3://b/k`` -> ``/vsis3/b/k``)."""
    low = text.lower()
    for scheme, prefix in URL_SCHEMES.items():
        if low.startswith(scheme):
            return prefix + text[len(scheme):]
    return text


def apply_remote_defaults() -> None:
    """Set :data:`REMOTE_DEFAULTS` in this process's environment where the user left them unset
    (GDAL reads them at each request; worker processes inherit them)."""
    for k, v in REMOTE_DEFAULTS.items():
        os.environ.setdefault(k, v)


def remote_timeout_s() -> float:
    return float(os.environ.get("GDAL_HTTP_TIMEOUT", REMOTE_DEFAULTS["GDAL_HTTP_TIMEOUT"]))


@dataclass(frozen=True)
class RasterInput:
    """A raster input read through GDAL's machinery: one URL, or tiles read as one mosaic.

    Attributes
    ----------
    text : str
        What the configuration said (pattern, list or URL), for messages and provenance.
    tiles : tuple of str
        The tiles in mosaic order: local paths or URLs.
    key : str
        The configuration key, for messages.
    """

    text: str
    tiles: tuple[str, ...]
    key: str = field(default="raster", compare=False)

    @property
    def remote(self) -> bool:
        return any(is_url(t) for t in self.tiles)

    @cached_property
    def dataset_name(self) -> str:
        """What GDAL opens: the one tile's name, or the mosaic's VRT document."""
        if self.remote:
            apply_remote_defaults()
        if len(self.tiles) == 1:
            return gdal_name(self.tiles[0])
        return mosaic_vrt(self.tiles, self.key)

    def __fspath__(self) -> str:
        return self.dataset_name

    def __str__(self) -> str:
        return self.dataset_name

    def __format__(self, spec: str) -> str:
        return format(self.label, spec)

    def __repr__(self) -> str:
        return f"RasterInput({self.label!r})"

    @property
    def label(self) -> str:
        if len(self.tiles) == 1:
            return self.tiles[0]
        return f"{self.text} ({len(self.tiles)} tiles)"

    @property
    def suffix(self) -> str:
        """Suffix of the tiles (``.tif``) so that suffix tests treat the input as a raster."""
        return Path(self.tiles[0].split("?")[0]).suffix


def resolve_raster_input(value, base: Path, key: str, where: str):
    """A raster value of the configuration -> ``Path`` (one local file) or :class:`RasterInput`.

    ``value`` is a string (path, glob pattern, URL) or a list of them. Relative paths and patterns
    are taken from ``base`` (the configuration file's folder).

    Raises
    ------
    ConfigError
        Not a string or list of strings; an empty list.
    MissingInputError
        A pattern that matches no file.
    """
    items = value if isinstance(value, list) else [value]
    if not items or not all(isinstance(v, str) and v.strip() for v in items):
        raise ConfigError(f"{where}: `{key}` must be a raster path, a glob pattern, a URL or a list of them, "
                          f"got {value!r}")
    tiles: list[str] = []
    simple = True
    for item in items:
        if is_url(item):
            tiles.append(item)
            simple = False
            continue
        p = Path(os.path.expanduser(item))
        p = p if p.is_absolute() else base / p
        if _GLOB_CHARS & set(item):
            found = sorted(glob.glob(str(p), recursive=True))
            found = [f for f in found if os.path.isfile(f)]
            if not found:
                raise MissingInputError(f"{where}: `{key}` pattern {item!r} matches no file (looked in "
                                        f"{p.parent}); check the folder and the pattern")
            tiles += found
            simple = False
        else:
            tiles.append(str(p))
    if isinstance(value, list):
        simple = False
    if simple:
        return Path(tiles[0])
    tiles = list(dict.fromkeys(tiles))  # a tile named twice (in a list and by a pattern) is read once
    text = value if isinstance(value, str) else "[" + ", ".join(value) + "]"
    return RasterInput(text, tuple(tiles), key)


# ------------------------------------------------------------------------------------------------
# the mosaic's VRT document


def _open(name: str, key: str):
    import rasterio
    from rasterio.errors import RasterioIOError

    if not is_url(name) and not os.path.exists(name):
        raise MissingInputError(f"{key}: tile not found: {name}; check the path or the list")
    try:
        return rasterio.open(gdal_name(name))
    except (RasterioIOError, OSError) as exc:
        raise InputFileError(f"{key}: cannot read tile {name} ({remote_reason(exc, name)})") from None


def remote_reason(exc, name: str) -> str:
    """One line saying why a read failed, with the timeout stated for a remote file."""
    msg = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
    if is_url(name) or name.startswith(("/vsicurl/", "/vsis3/", "/vsigs/")):
        low = msg.lower()
        if "timed out" in low or "timeout" in low:
            return f"no answer within {remote_timeout_s():g} s (GDAL_HTTP_TIMEOUT); check the server or raise the timeout"
        if "404" in msg:
            return "HTTP 404 not found; check the URL"
        return f"{msg}; check the URL and, for a private bucket, the credential environment variables"
    return msg


@dataclass(frozen=True)
class _Tile:
    name: str
    crs: object
    transform: object
    width: int
    height: int
    count: int
    dtype: str
    nodata: float | None
    masked: bool


def _tile_header(name: str, key: str) -> _Tile:
    from rasterio.enums import MaskFlags

    with _open(name, key) as ds:
        if ds.crs is None:
            raise GridError(f"{key}: tile {name} has no CRS; set it (gdal_edit.py -a_srs) and re-run")
        flags = set(ds.mask_flag_enums[0])
        masked = not ({MaskFlags.nodata, MaskFlags.all_valid} & flags)
        return _Tile(name, ds.crs, ds.transform, ds.width, ds.height, ds.count, ds.dtypes[0], ds.nodata, masked)


def check_tiles_fit(tiles: list[_Tile], key: str) -> None:
    """Raise GridError when the tiles do not share CRS, pixel size, rotation and pixel lattice."""
    first = tiles[0]
    t0 = first.transform
    if t0.b != 0 or t0.d != 0:
        raise GridError(f"{key}: tile {first.name} is rotated; warp the tiles to a north-up grid first (gdalwarp)")
    for t in tiles[1:]:
        if t.crs != first.crs:
            raise GridError(f"{key}: tiles are in different CRSs ({first.name}: {first.crs.to_string()}, "
                            f"{t.name}: {t.crs.to_string()}); reproject them to one CRS and re-run")
        a = t.transform
        if a.b != 0 or a.d != 0:
            raise GridError(f"{key}: tile {t.name} is rotated; warp the tiles to a north-up grid first (gdalwarp)")
        if not (math.isclose(a.a, t0.a, rel_tol=1e-9) and math.isclose(a.e, t0.e, rel_tol=1e-9)):
            raise GridError(f"{key}: tiles have different resolutions ({first.name}: {abs(t0.a):g} x {abs(t0.e):g}, "
                            f"{t.name}: {abs(a.a):g} x {abs(a.e):g}); resample them to one pixel size and re-run")
        dc, dr = (a.c - t0.c) / t0.a, (a.f - t0.f) / t0.e
        off = max(abs(dc - round(dc)), abs(dr - round(dr)))
        if off > 1e-3:
            raise GridError(f"{key}: tile {t.name} is off the pixel grid of {first.name} by {off:.3f} pixel; "
                            f"resample the tiles onto one grid (same origin) and re-run")
        if t.count != first.count:
            raise GridError(f"{key}: tiles have different band counts ({first.name}: {first.count}, "
                            f"{t.name}: {t.count}); give tiles of one product")


_GDAL_TYPES = {"uint8": "Byte", "int8": "Int8", "uint16": "UInt16", "int16": "Int16", "uint32": "UInt32",
               "int32": "Int32", "uint64": "UInt64", "int64": "Int64", "float32": "Float32", "float64": "Float64"}


def _num(v) -> str:
    return "nan" if v is None or (isinstance(v, float) and math.isnan(v)) else repr(float(v))


def mosaic_vrt(names, key: str = "raster") -> str:
    """The GDAL VRT document reading ``names`` (in order; later tiles drawn over earlier ones) as one
    raster. Tiles are checked to fit together (:func:`check_tiles_fit`).
    """
    tiles = [_tile_header(n, key) for n in names]
    check_tiles_fit(tiles, key)
    t0 = tiles[0].transform
    rx, ry = t0.a, t0.e
    lefts = [t.transform.c for t in tiles]
    tops = [t.transform.f for t in tiles]
    # the union of the tiles, on the first tile's lattice
    col0 = min(round((x - t0.c) / rx) for x in lefts)
    row0 = min(round((y - t0.f) / ry) for y in tops)
    col1 = max(round((t.transform.c - t0.c) / rx) + t.width for t in tiles)
    row1 = max(round((t.transform.f - t0.f) / ry) + t.height for t in tiles)
    left, top = t0.c + col0 * rx, t0.f + row0 * ry
    width, height = col1 - col0, row1 - row0
    dtypes = {t.dtype for t in tiles}
    nodatas = {_num(t.nodata) for t in tiles}
    if len(dtypes) == 1 and len(nodatas) == 1 and tiles[0].nodata is not None:
        dtype, nodata = _GDAL_TYPES[tiles[0].dtype], _num(tiles[0].nodata)
    else:  # mixed types or nodata, or none: float with NaN where no tile has data
        dtype, nodata = ("Float32" if dtypes <= {"float32", "int16", "uint16", "uint8", "int8"} else "Float64"), "nan"
    srs = escape(tiles[0].crs.to_wkt())
    out = [f'<VRTDataset rasterXSize="{width}" rasterYSize="{height}">',
           f"<SRS>{srs}</SRS>",
           f"<GeoTransform>{left!r}, {rx!r}, 0, {top!r}, 0, {ry!r}</GeoTransform>"]
    for band in range(1, tiles[0].count + 1):
        out.append(f'<VRTRasterBand dataType="{dtype}" band="{band}"><NoDataValue>{nodata}</NoDataValue>')
        for t in tiles:
            c = round((t.transform.c - t0.c) / rx) - col0
            r = round((t.transform.f - t0.f) / ry) - row0
            nd = f"<NODATA>{_num(t.nodata)}</NODATA>" if t.nodata is not None else ""
            mask = "<UseMaskBand>true</UseMaskBand>" if t.masked else ""
            out.append(
                f'<ComplexSource><SourceFilename relativeToVRT="0">{escape(gdal_name(t.name))}</SourceFilename>'
                f"<SourceBand>{band}</SourceBand>"
                f'<SrcRect xOff="0" yOff="0" xSize="{t.width}" ySize="{t.height}"/>'
                f'<DstRect xOff="{c}" yOff="{r}" xSize="{t.width}" ySize="{t.height}"/>{nd}{mask}</ComplexSource>')
        out.append("</VRTRasterBand>")
    out.append("</VRTDataset>")
    return "".join(out)


# ------------------------------------------------------------------------------------------------
# provenance: the files a virtual input resolves to


def resolved_files(path) -> list[str]:
    """Every file an input reads: a mosaic's tiles, the files a ``.vrt`` file points to (and the
    ``.vrt`` itself), or the one file. URLs are listed as they are (not downloaded)."""
    if isinstance(path, RasterInput):
        out = []
        for t in path.tiles:
            out += [t] if is_url(t) else resolved_files(Path(t))
        return out
    p = Path(path)
    if p.suffix.lower() == ".vrt" and p.exists():
        import rasterio

        try:
            with rasterio.open(p) as ds:
                files = [os.path.abspath(f) for f in ds.files]
        except Exception:  # an unreadable VRT is reported by the run itself
            return [str(p)]
        here = os.path.abspath(p)
        rest = [f for f in dict.fromkeys(files) if f != here]
        out = [str(p)]
        for f in rest:
            out += resolved_files(Path(f)) if f.lower().endswith(".vrt") else [f]
        return out
    return [str(p)]
