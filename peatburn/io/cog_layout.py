"""A Cloud Optimized GeoTIFF assembled from tiles compressed once: no second compression pass.

GDAL's COG driver makes a COG by reading a finished raster again, computing its overviews from the
full resolution and compressing every tile of every level; on a national grid of mostly empty output
rasters that copy was half of the run (docs/performance.md, benchmark 8). Here the tiles of each level
are compressed once, while they are written (the full resolution during the block pass, the overviews
from the level below), into temporary tiled GeoTIFFs with the final tile size, compression and
predictor; at the end the COG is assembled from them:

1. GDAL writes the COG's *skeleton*: its header, the structural metadata ("ghost area"), and every
   image file directory (IFD) with its tags (georeferencing, nodata, band description, units, palette)
   in the COG layout. The GTiff driver does it (``COPY_SRC_OVERVIEWS=YES``, the layout the COG driver
   uses) from a VRT with the run's metadata, no pixel source and empty sparse overviews, so every tile
   is empty (``SPARSE_OK``): offset and byte count 0.
2. The compressed tiles are appended, smallest overview first and the full resolution last, each in
   row-major order, with the 4-byte size before and the last 4 bytes repeated after each tile (the
   ``BLOCK_LEADER=SIZE_AS_UINT4`` and ``BLOCK_TRAILER=LAST_4_BYTES_REPEATED`` the ghost area
   announces), and the IFDs' TileOffsets and TileByteCounts arrays are filled in place.

A tile that holds no value is never written and stays sparse (it reads as nodata). The layout is the
one GDAL's COG driver writes (GDAL documentation, "COG -- Cloud Optimized GeoTIFF generator", file
format details): the IFDs first, then the tile data from the smallest overview to the full resolution.
TIFF structure: TIFF 6.0 (Adobe 1992), section 2 (header, IFD entries) and BigTIFF (libtiff.org).
"""

from __future__ import annotations

import os
import struct
import xml.etree.ElementTree as ET

import numpy as np

#: Tile size of the output COGs [px] (GDAL's COG default).
COG_TILE = 512  # GDAL COG driver's default BLOCKSIZE
#: Largest offset of a classic TIFF [bytes] (32-bit offsets, TIFF 6.0); past it the COG must be a BigTIFF.
CLASSIC_TIFF_MAX = 2**32 - 1  # TIFF 6.0 (Adobe 1992): 32-bit offsets
_TILE_OFFSETS, _TILE_BYTE_COUNTS = 324, 325
_TYPES = {3: ("H", 2), 4: ("I", 4), 16: ("Q", 8)}  # SHORT, LONG, LONG8


class OffsetOverflow(ValueError):
    """The tiles do not fit under the 4 GiB offsets of a classic TIFF (the skeleton must be BigTIFF)."""


def overview_shapes(width: int, height: int, tile: int = COG_TILE) -> list[tuple[int, int]]:
    """(height, width) of each overview level: halved (ceiling) until the level fits in one tile,
    as GDAL's COG driver does with ``OVERVIEWS=AUTO``."""
    out = []
    h, w = int(height), int(width)
    while max(h, w) > tile:
        h, w = (h + 1) // 2, (w + 1) // 2
        out.append((h, w))
    return out


def _ifds(fh) -> tuple[str, bool, list[dict]]:
    """Byte order, BigTIFF flag and, per IFD, ``{tag: (type, count, position of the values)}``."""
    fh.seek(0)
    head = fh.read(16)
    bo = {b"II": "<", b"MM": ">"}[head[:2]]
    magic = struct.unpack(bo + "H", head[2:4])[0]
    big = magic == 43
    pos = struct.unpack(bo + ("Q" if big else "I"), head[8:16] if big else head[4:8])[0]
    out = []
    while pos:
        fh.seek(pos)
        n = struct.unpack(bo + ("Q" if big else "H"), fh.read(8 if big else 2))[0]
        size = 20 if big else 12
        raw = fh.read(n * size + (8 if big else 4))
        tags = {}
        for i in range(n):
            e = raw[i * size:(i + 1) * size]
            tag, typ = struct.unpack(bo + "HH", e[:4])
            count = struct.unpack(bo + ("Q" if big else "I"), e[4:12] if big else e[4:8])[0]
            inline = 8 if big else 4
            field = e[12:20] if big else e[8:12]
            vpos = pos + (8 if big else 2) + i * size + (12 if big else 8)
            if typ in _TYPES and count * _TYPES[typ][1] > inline:
                vpos = struct.unpack(bo + ("Q" if big else "I"), field)[0]
            tags[tag] = (typ, count, vpos, pos + (8 if big else 2) + i * size)
        out.append(tags)
        pos = struct.unpack(bo + ("Q" if big else "I"), raw[n * size:])[0]
    return bo, big, out


def _array(fh, bo: str, entry) -> np.ndarray:
    typ, count, vpos, _ = entry
    code, size = _TYPES[typ]
    fh.seek(vpos)
    return np.frombuffer(fh.read(count * size), dtype=np.dtype(bo + code)).astype(np.uint64)


def tile_table(path) -> tuple[np.ndarray, np.ndarray]:
    """Offsets and byte counts of the tiles of the first image of a tiled TIFF (0, 0: never written)."""
    with open(path, "rb") as fh:
        bo, _, ifds = _ifds(fh)
        return _array(fh, bo, ifds[0][_TILE_OFFSETS]), _array(fh, bo, ifds[0][_TILE_BYTE_COUNTS])


def skeleton_vrt(main_path, overview_paths: list[str], vrt_path) -> None:
    """A VRT with the metadata of ``main_path`` (georeferencing, nodata, description, units, palette),
    no pixel source (it reads as nodata everywhere) and ``overview_paths`` as its overviews."""
    import rasterio.shutil

    rasterio.shutil.copy(main_path, vrt_path, driver="VRT")
    tree = ET.parse(vrt_path)
    root = tree.getroot()
    for md in list(root.findall("Metadata")):
        if md.get("domain") == "IMAGE_STRUCTURE":
            root.remove(md)
    band = root.find("VRTRasterBand")
    for tag in ("SimpleSource", "ComplexSource"):
        for src in list(band.findall(tag)):
            band.remove(src)
    for p in overview_paths:
        ov = ET.SubElement(band, "Overview")
        ET.SubElement(ov, "SourceFilename", relativeToVRT="0").text = str(p)
        ET.SubElement(ov, "SourceBand").text = "1"
    tree.write(vrt_path, encoding="utf-8")


def write_skeleton(vrt_path, dst, *, dtype: str, predictor: bool, bigtiff: str = "IF_SAFER") -> None:
    """The COG's header, ghost area and IFDs, every tile empty (step 1 of the module docstring)."""
    import rasterio.shutil

    pred = (3 if np.dtype(dtype).kind == "f" else 2) if predictor else 1
    rasterio.shutil.copy(vrt_path, dst, driver="GTiff", TILED="YES", BLOCKXSIZE=str(COG_TILE),
                         BLOCKYSIZE=str(COG_TILE), COMPRESS="DEFLATE", PREDICTOR=str(pred), SPARSE_OK="TRUE",
                         COPY_SRC_OVERVIEWS="YES", BIGTIFF=bigtiff, INTERLEAVE="BAND")


def fill_skeleton(skeleton, level_files: list) -> None:
    """Append the tiles of ``level_files`` (the full resolution first, then each overview, as tiled
    TIFFs with the skeleton's tile size, compression and predictor) to ``skeleton`` in the COG
    order and fill its tile arrays (step 2 of the module docstring).

    Raises :class:`OffsetOverflow` when the file would pass :data:`CLASSIC_TIFF_MAX` and the skeleton is
    a classic TIFF. In a BigTIFF skeleton libtiff may store the (all zero) arrays in a narrower type
    (LONG, SHORT); where the values need more, LONG8 arrays are written after the skeleton, before the
    tiles (the IFDs and their arrays stay ahead of the data, as the layout requires), and the IFD entries
    are pointed at them.
    """
    with open(skeleton, "r+b") as out:
        bo, big, ifds = _ifds(out)
        if len(ifds) != len(level_files):
            raise ValueError(f"{skeleton}: {len(ifds)} image(s) in the COG skeleton, {len(level_files)} level(s)")
        tables = [tile_table(f) for f in level_files]
        for k, (ifd, (src_off, _)) in enumerate(zip(ifds, tables)):
            if ifd[_TILE_OFFSETS][1] != src_off.size:
                raise ValueError(f"{skeleton}: level {k} has {ifd[_TILE_OFFSETS][1]} tiles, its file {src_off.size}")
        out.seek(0, os.SEEK_END)
        pos = out.tell()
        data = sum(int(n.sum()) + 8 * int(np.count_nonzero(n)) for _, n in tables)
        widen = {}  # (IFD index, tag) -> where its 64-bit array goes (None: one value, inline)
        for k, ifd in enumerate(ifds):
            for tag, need in ((_TILE_OFFSETS, pos + data), (_TILE_BYTE_COUNTS, int(tables[k][1].max(initial=0)))):
                typ, count, _, _ = ifd[tag]
                if need <= _capacity(typ):
                    continue
                if not big:
                    raise OffsetOverflow(f"{skeleton}: {pos + data} bytes do not fit a classic TIFF's fields")
                widen[(k, tag)] = None
        for key in sorted(widen):  # the arrays ahead of the tiles, 8-byte aligned
            count = ifds[key[0]][key[1]][1]
            if count > 1:
                pos += -pos % 8
                widen[key] = pos
                pos += count * 8
        out.write(b"\0" * (pos - out.tell()))
        filled = [None] * len(level_files)
        for k in reversed(range(len(level_files))):  # smallest overview first, full resolution last
            src_off, src_len = tables[k]
            offsets = np.zeros(src_off.size, dtype=np.uint64)
            with open(level_files[k], "rb") as src:
                for i in np.flatnonzero(src_len):
                    n = int(src_len[i])
                    src.seek(int(src_off[i]))
                    chunk = src.read(n)
                    out.write(struct.pack("<I", n) + chunk + chunk[-4:])
                    offsets[i] = pos + 4
                    pos += n + 8
            filled[k] = {_TILE_OFFSETS: offsets, _TILE_BYTE_COUNTS: src_len}
        for k, (ifd, values) in enumerate(zip(ifds, filled)):
            for tag in (_TILE_OFFSETS, _TILE_BYTE_COUNTS):
                typ, count, vpos, epos = ifd[tag]
                if (k, tag) in widen:  # the entry becomes LONG8: inline for one value, else at its new array
                    at = widen[(k, tag)]
                    out.seek(epos + 2)
                    out.write(struct.pack(bo + "H", 16))
                    typ, vpos = 16, (epos + 12 if at is None else at)
                    if at is not None:
                        out.seek(epos + 12)
                        out.write(struct.pack(bo + "Q", at))
                out.seek(vpos)
                out.write(values[tag].astype(np.dtype(bo + _TYPES[typ][0])).tobytes())


def _capacity(typ: int) -> int:
    """Largest value a tile-array field of TIFF type ``typ`` holds (LONG: also the classic file's limit)."""
    return {3: 2**16 - 1, 4: min(2**32 - 1, CLASSIC_TIFF_MAX)}.get(typ, 2**64 - 1)


def level_windows(height: int, width: int, rows: int = 2 * COG_TILE):
    """Row strips of a level of ``height`` x ``width`` px, ``rows`` at a time: (row offset, rows)."""
    return [(r, min(rows, height - r)) for r in range(0, height, rows)]
