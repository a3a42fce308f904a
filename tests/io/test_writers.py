"""Atomic writers and the block-wise COG writer."""

import json
import os

import numpy as np
import pytest
import rasterio
from hypothesis import given, settings
from hypothesis import strategies as st
from rasterio.crs import CRS
from rasterio.transform import from_origin

from peatburn.grid import RunGrid
from peatburn.io.writers import BlockRasterWriter, atomic_path, sha256_of, write_json


def test_interrupted_write_leaves_no_file(tmp_path):
    final = tmp_path / "zones.csv"
    with pytest.raises(RuntimeError):
        with atomic_path(final) as tmp:
            tmp.write_text("half")
            raise RuntimeError("killed")
    assert not final.exists()
    assert list(tmp_path.iterdir()) == []


def test_interrupted_raster_leaves_no_file(tmp_path):
    grid = RunGrid(CRS.from_epsg(32749), from_origin(0, 100, 1, 1), 100, 100)
    with pytest.raises(RuntimeError):
        with BlockRasterWriter(tmp_path / "burn_depth.tif", grid) as w:
            w.write(grid.windows(50)[0], np.ones((50, 50)))
            raise RuntimeError("killed")
    assert list(tmp_path.iterdir()) == []


def test_block_writer_makes_a_cog_with_nodata(tmp_path):
    grid = RunGrid(CRS.from_epsg(32749), from_origin(0, 700, 1, 1), 700, 600)
    full = np.random.default_rng(0).random(grid.shape)
    full[:10, :10] = np.nan
    with BlockRasterWriter(tmp_path / "c.tif", grid, units="m") as w:
        for win in grid.windows(256):
            r0, c0 = int(win.row_off), int(win.col_off)
            w.write(win, full[r0:r0 + int(win.height), c0:c0 + int(win.width)])
    with rasterio.open(tmp_path / "c.tif") as ds:
        assert ds.tags(ns="IMAGE_STRUCTURE").get("LAYOUT") == "COG"
        assert ds.crs.to_epsg() == 32749 and ds.transform == grid.transform
        got = ds.read(1, masked=True)
    assert got.mask[:10, :10].all()
    np.testing.assert_allclose(got.filled(np.nan)[10:], full[10:].astype("float32"))


def test_sha256_against_hashlib_reference(tmp_path):
    # reference digest of b"abc" from FIPS 180-2, Appendix B.1
    p = tmp_path / "abc"
    p.write_bytes(b"abc")
    assert sha256_of(p) == "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"


def test_json_has_no_nan(tmp_path):
    write_json(tmp_path / "t.json", {"a": float("nan"), "b": np.float32(1.5)})
    assert json.loads((tmp_path / "t.json").read_text()) == {"a": None, "b": 1.5}


def test_outputs_get_the_permissions_of_a_plain_new_file(tmp_path):
    """Outputs are written through mkstemp (mode 0600); they must end with the mode a plain
    open() gives a new file under the same umask (the reference: the operating system itself)."""
    import stat

    from peatburn.io.writers import write_text

    old = os.umask(0o022)
    try:
        write_text(tmp_path / "out.txt", "x")
        (tmp_path / "plain022.txt").write_text("x")
    finally:
        os.umask(old)
    mode = stat.S_IMODE((tmp_path / "out.txt").stat().st_mode)
    assert mode == stat.S_IMODE((tmp_path / "plain022.txt").stat().st_mode) == 0o644


def _as_text(s: str) -> str:
    """The OWASP rule written out: an apostrophe before a formula-like text that is no plain number."""
    import re

    number = re.fullmatch(r"[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?", s)
    return "'" + s if s[:1] in ("=", "+", "-", "@", "\t", "\r") and not number else s


_floats = st.one_of(st.floats(allow_nan=True, allow_infinity=True), st.none(),
                    st.floats(min_value=-1e7, max_value=1e7))


@given(st.lists(st.tuples(_floats, _floats, st.text(max_size=8), st.integers(-10**6, 10**6)), max_size=30))
@settings(max_examples=150, deadline=None)
def test_csv_fields_read_back_with_the_csv_module(tmp_path_factory, rows):
    """Reference: Python's csv reader, float() and repr(). Floats come back rounded to 9 decimals in
    their shortest form, NaN/inf/None as empty fields, integers unchanged, text unchanged but for a
    leading apostrophe where a spreadsheet would run it as a formula (OWASP "CSV Injection": text
    beginning with = + - @ tab CR that is not a plain number); a column mixing floats with text
    takes the value-by-value path and must agree with the same rules."""
    import csv
    import math

    from peatburn.io.writers import write_csv

    path = tmp_path_factory.mktemp("csv") / "t.csv"
    dicts = [{"a": a, "b": b, "s": s, "i": i, "mixed": (a if k % 2 else s)} for k, (a, b, s, i) in enumerate(rows)]
    write_csv(path, dicts, ["s", "a", "b", "i", "mixed", "absent"])
    with open(path, newline="", encoding="utf-8") as fh:
        back = list(csv.DictReader(fh))
    assert len(back) == len(dicts)
    for d, r in zip(dicts, back):
        assert r["s"] == _as_text(d["s"]) and r["i"] == str(d["i"]) and r["absent"] == ""
        for key in ("a", "b", "mixed"):
            v, text = d[key], r[key]
            if isinstance(v, str):
                assert text == _as_text(v)
            elif v is None or not math.isfinite(v):
                assert text == ""
            else:
                assert repr(float(text)) == text  # the shortest form
                assert abs(float(text) - v) <= 0.5e-9 + 4 * math.ulp(v)  # rounded to 9 decimals


def _grid(n=96):
    return RunGrid(CRS.from_epsg(32749), from_origin(500_000, 8_650_000, 1, 1), n, n)


def test_background_writes_equal_direct_writes(tmp_path):
    """Reference: the same windows written directly by BlockRasterWriter.write_at, read back with rasterio."""
    from peatburn.io.writers import BlockWrites

    grid = _grid()
    rng = np.random.default_rng(3)
    blocks = []
    for win in grid.windows(32, group=2):
        mask = rng.random((int(win.height), int(win.width))) < 0.4
        blocks.append((win, mask, rng.normal(size=int(mask.sum())).astype("float32"),
                       rng.integers(1, 4, int(mask.sum())).astype("uint8")))
    outs = {}
    for how in ("direct", "threads"):
        ws = [BlockRasterWriter(tmp_path / f"{how}_f.tif", grid, block_size=32),
              BlockRasterWriter(tmp_path / f"{how}_c.tif", grid, block_size=32, dtype="uint8", nodata=0)]
        if how == "direct":
            for win, mask, f, c in blocks:
                ws[0].write_at(win, mask, f)
                ws[1].write_at(win, mask, c)
        else:
            bg = BlockWrites(ws, threads=True, depth=2)
            for win, mask, f, c in blocks:
                bg.write_at(win, mask, [f, c])
            bg.close()
        for w in ws:
            w.close()
        outs[how] = [rasterio.open(tmp_path / f"{how}_{k}.tif").read(1) for k in ("f", "c")]
    for a, b in zip(outs["direct"], outs["threads"]):
        np.testing.assert_array_equal(a, b)
    assert (outs["threads"][1] > 0).sum() == sum(int(m.sum()) for _, m, _, _ in blocks)


def test_background_write_error_is_raised_and_nothing_is_left(tmp_path):
    from peatburn.io.writers import BlockWrites

    grid = _grid(64)
    w = BlockRasterWriter(tmp_path / "out.tif", grid, block_size=32)
    bg = BlockWrites([w], threads=True)
    win = grid.windows(32)[0]
    bg.write_at(win, np.ones((32, 32), bool), [np.zeros(5, "float32")])  # 5 values for 1024 pixels
    with pytest.raises(ValueError):
        bg.close()
    w.close(ok=False)
    assert list(tmp_path.iterdir()) == []
