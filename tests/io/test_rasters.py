"""Reading rasters onto the run grid by window, checked against rasterio.warp.reproject (whole array)."""

import numpy as np
import pytest
import rasterio
import rasterio.vrt
from rasterio.crs import CRS
from rasterio.enums import Resampling
from rasterio.transform import from_origin
from rasterio.warp import reproject
from rasterio.windows import Window

from peatburn.errors import CRSError, InputFileError, MissingInputError
from peatburn.grid import RunGrid
from peatburn.io.rasters import GridReader, RasterSource, inspect_raster


def _write(path, arr, transform, crs="EPSG:32749", nodata=-9999.0):
    with rasterio.open(path, "w", driver="GTiff", width=arr.shape[1], height=arr.shape[0], count=1,
                       dtype="float32", crs=crs, transform=transform, nodata=nodata) as ds:
        ds.write(arr.astype("float32"), 1)


def _blocks(reader, grid, block):
    out = np.full(grid.shape, np.nan)
    for w in grid.windows(block):
        out[int(w.row_off):int(w.row_off + w.height), int(w.col_off):int(w.col_off + w.width)] = reader.read(w)
    return out


def test_aligned_read_equals_file(tmp_path):
    arr = np.arange(37 * 53, dtype="float32").reshape(37, 53)
    arr[3, 4] = -9999
    t = from_origin(1000, 2000, 2, 2)
    _write(tmp_path / "a.tif", arr, t)
    grid = RunGrid(CRS.from_epsg(32749), t, 53, 37)
    with GridReader(RasterSource(str(tmp_path / "a.tif"), "a", scale=2.0), grid) as r:
        got = _blocks(r, grid, 16)
    exp = np.where(arr == -9999, np.nan, arr * 2.0)
    np.testing.assert_array_equal(got, exp)


@pytest.mark.parametrize("origin, nodata", [((1000, 2000), -9999.0), ((1010, 1990), -9999.0), ((1000, 2000), None)])
def test_read_at_equals_the_file_at_the_pixels(tmp_path, origin, nodata):
    """read_at (the pixels of a mask only) gives the file's values there, read with rasterio's own
    masked read (the reference), NaN for nodata and outside the file; windows inside the file, and
    crossing its edge (the file offset by 5 px), scale applied."""
    arr = np.arange(40 * 44, dtype="float32").reshape(40, 44)
    arr[7, 9] = -9999
    _write(tmp_path / "a.tif", arr, from_origin(*origin, 2, 2), nodata=nodata)
    with rasterio.open(tmp_path / "a.tif") as ds:
        ref = ds.read(1, masked=True).astype("float64").filled(np.nan) * 0.5
    grid = RunGrid(CRS.from_epsg(32749), from_origin(1000, 2000, 2, 2), 44, 40)
    r_off, c_off = round((2000 - origin[1]) / 2), round((origin[0] - 1000) / 2)
    want = np.full((40, 44), np.nan)
    want[r_off:, c_off:] = ref[:40 - r_off, :44 - c_off]
    rng = np.random.default_rng(1)
    with GridReader(RasterSource(str(tmp_path / "a.tif"), "a", scale=0.5), grid) as r:
        for w in grid.windows(16):
            sl = (slice(int(w.row_off), int(w.row_off + w.height)), slice(int(w.col_off), int(w.col_off + w.width)))
            where = rng.random((int(w.height), int(w.width))) < 0.4
            np.testing.assert_array_equal(r.read_at(w, where), want[sl][where])


def test_offset_and_partial_cover_read(tmp_path):
    arr = np.ones((10, 10), "float32")
    _write(tmp_path / "small.tif", arr, from_origin(1010, 1990, 2, 2))  # 5 px right, 5 px down of grid origin
    grid = RunGrid(CRS.from_epsg(32749), from_origin(1000, 2000, 2, 2), 30, 30)
    with GridReader(RasterSource(str(tmp_path / "small.tif"), "s"), grid) as r:
        got = _blocks(r, grid, 7)
    assert np.isnan(got[:5]).all() and np.isnan(got[:, :5]).all()
    assert (got[5:15, 5:15] == 1).all() and np.isnan(got[15:]).all()


def test_internal_mask_integer_nodata_and_no_nodata(tmp_path):
    """Masks read on the file's lattice and through the warper agree with rasterio's own masked read
    of the file (the reference): an internal mask band, an integer nodata, and a file without
    nodata whose edge lies inside the grid (outside the file is missing)."""
    t = from_origin(1000, 2000, 2, 2)
    arr = np.arange(20 * 30, dtype="float32").reshape(20, 30)
    mask = np.full(arr.shape, 255, "uint8")
    mask[2:6, 3:9] = 0
    with rasterio.Env(GDAL_TIFF_INTERNAL_MASK=True):
        with rasterio.open(tmp_path / "m.tif", "w", driver="GTiff", width=30, height=20, count=1, dtype="float32",
                           crs="EPSG:32749", transform=t) as ds:
            ds.write(arr, 1)
            ds.write_mask(mask)
    ints = (np.arange(20 * 30) % 7).astype("uint8").reshape(20, 30)
    with rasterio.open(tmp_path / "i.tif", "w", driver="GTiff", width=30, height=20, count=1, dtype="uint8",
                       crs="EPSG:32749", transform=t, nodata=3) as ds:
        ds.write(ints, 1)
    for name in ("m.tif", "i.tif"):
        with rasterio.open(tmp_path / name) as ds:
            ref = np.ma.filled(ds.read(1, masked=True).astype("float64"), np.nan)
        grid = RunGrid(CRS.from_epsg(32749), t, 30, 20)
        with GridReader(RasterSource(str(tmp_path / name), "x"), grid) as r:
            np.testing.assert_array_equal(_blocks(r, grid, 8), ref)
        # the same file through the warper (a shift of whole pixels, nearest): the same mask, moved
        shifted = RunGrid(CRS.from_epsg(32749), from_origin(1004, 1996, 2, 2), 30, 20)
        with GridReader(RasterSource(str(tmp_path / name), "x", resampling="nearest",
                                     src_transform=from_origin(1000.0001, 2000, 2, 2)), shifted) as r:
            got = _blocks(r, shifted, 8)
        np.testing.assert_array_equal(got[:-2, :-2], ref[2:, 2:])
        assert np.isnan(got[-2:]).all() and np.isnan(got[:, -2:]).all()
    # no nodata at all: every value is data, the part of the grid outside the file is missing
    _write(tmp_path / "n.tif", np.zeros((10, 10)), from_origin(1010, 1990, 2, 2), nodata=None)
    grid = RunGrid(CRS.from_epsg(32749), from_origin(1000, 2000, 2, 2), 20, 20)
    with GridReader(RasterSource(str(tmp_path / "n.tif"), "n"), grid) as r:
        got = _blocks(r, grid, 7)
    assert (got[5:15, 5:15] == 0).all() and np.isnan(got[:5]).all() and np.isnan(got[15:, :]).all()


def test_windowed_warp_matches_whole_array_reproject(tmp_path):
    """Blocks read through the windowed warper equal rasterio.warp.reproject of the whole array
    (the reference: GDAL's warper run once on everything)."""
    yy, xx = np.mgrid[0:60, 0:70]
    arr = (np.sin(xx / 5.0) + np.cos(yy / 7.0)).astype("float32")
    src_t = from_origin(500_000, 8_650_000, 3, 3)
    _write(tmp_path / "s.tif", arr, src_t)
    grid = RunGrid(CRS.from_epsg(32749), from_origin(500_010.5, 8_649_990.5, 2, 2), 80, 70)
    with GridReader(RasterSource(str(tmp_path / "s.tif"), "s", resampling="bilinear"), grid) as r:
        got = _blocks(r, grid, 32)
    ref = np.full(grid.shape, np.nan, "float64")
    reproject(arr.astype("float64"), ref, src_transform=src_t, src_crs="EPSG:32749", src_nodata=-9999.0,
              dst_transform=grid.transform, dst_crs=grid.crs, dst_nodata=np.nan, resampling=Resampling.bilinear)
    ok = np.isfinite(ref) & np.isfinite(got)
    assert ok.mean() > 0.9
    np.testing.assert_allclose(got[ok], ref[ok], atol=1e-5)


def test_reprojected_read_from_geographic(tmp_path):
    arr = np.full((50, 50), 7.0, "float32")
    _write(tmp_path / "g.tif", arr, from_origin(113.0, -12.0, 0.001, 0.001), crs="EPSG:4326")
    from pyproj import Transformer

    x, y = Transformer.from_crs(4326, 32749, always_xy=True).transform(113.02, -12.02)  # inside the lon/lat box (open sea)
    grid = RunGrid(CRS.from_epsg(32749), from_origin(x, y, 10, 10), 4, 4)
    with GridReader(RasterSource(str(tmp_path / "g.tif"), "g"), grid) as r:
        got = r.read(Window(0, 0, 4, 4))
    assert np.isfinite(got).all() and np.allclose(got, 7.0)


def test_inspect_errors(tmp_path):
    with pytest.raises(MissingInputError, match="file not found"):
        inspect_raster(tmp_path / "nope.tif", "depth.survey.pre")
    _write(tmp_path / "nocrs.tif", np.ones((4, 4)), from_origin(0, 4, 1, 1), crs=None)
    with pytest.raises(CRSError, match="has no CRS"):
        inspect_raster(tmp_path / "nocrs.tif", "peat.thickness")
    good = tmp_path / "good.tif"
    _write(good, np.ones((300, 300)), from_origin(0, 300, 1, 1))
    data = good.read_bytes()
    (tmp_path / "cut.tif").write_bytes(data[: len(data) // 3])
    with pytest.raises(InputFileError, match="cannot read"):
        inspect_raster(tmp_path / "cut.tif", "depth.survey.post")
    (tmp_path / "text.tif").write_text("not a raster")
    with pytest.raises(InputFileError):
        inspect_raster(tmp_path / "text.tif", "x")


@pytest.mark.parametrize("shift", [(0.6, -0.4), (-1.3, 0.25), (0.0, 0.5), (2.0, -3.0)])
def test_translated_read_equals_gdal_warper(tmp_path, shift):
    """A survey moved by a co-registration shift is resampled by the translation fast path; it must
    equal GDAL's warper (a WarpedVRT with bilinear resampling, the reference), also next to nodata
    holes and at the edges of the file, where GDAL renormalises over the valid neighbours."""
    rng = np.random.default_rng(1)
    arr = rng.normal(10, 2, (45, 60)).astype("float32")
    arr[10:14, 20:25] = -9999  # a nodata hole
    arr[30, 40] = -9999
    t = from_origin(500_000, 8_650_000, 2, 2)
    _write(tmp_path / "p.tif", arr, t)
    moved = from_origin(500_000 + shift[0], 8_650_000 + shift[1], 2, 2)
    grid = RunGrid(CRS.from_epsg(32749), from_origin(499_990, 8_650_010, 2, 2), 70, 55)  # overhangs the file
    src = RasterSource(str(tmp_path / "p.tif"), "p", src_transform=moved)
    with GridReader(src, grid) as r:
        assert r._translation is not None
        got = _blocks(r, grid, 16)
    with rasterio.open(tmp_path / "p.tif") as ds, rasterio.vrt.WarpedVRT(
            ds, crs=grid.crs, transform=grid.transform, width=grid.width, height=grid.height,
            resampling=Resampling.bilinear, dtype="float64", nodata=np.nan, src_transform=moved,
            src_nodata=-9999.0) as vrt:
        ref = vrt.read(1)
    np.testing.assert_array_equal(np.isnan(got), np.isnan(ref))
    np.testing.assert_allclose(got, ref, rtol=0, atol=1e-9, equal_nan=True)
