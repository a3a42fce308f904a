"""A catalogue of bad or awkward inputs: each gets a one-line answer or is handled correctly."""

import geopandas as gpd
import numpy as np
import pytest
import rasterio
import shapely
from click.testing import CliRunner
from rasterio.enums import Resampling
from rasterio.warp import calculate_default_transform, reproject

import peatburn
from conftest import X0, Y0, make_scene
from peatburn.cli.main import cli


def _run_cli(*args):
    res = CliRunner().invoke(cli, list(map(str, args)))
    return res


def test_post_survey_on_another_grid_and_crs_is_aligned(tmp_path):
    """A post-fire survey delivered in another CRS (WGS 84 lon/lat) at another resolution is warped
    onto the run grid, not refused; the carbon stays within 5 % of the truth (coarser resampling
    of the survey smears the scar edges more than in tests/engine/test_runner.py)."""
    s = make_scene(tmp_path / "s", zones=False)
    src = s.folder / "post.tif"
    with rasterio.open(src) as ds:
        t, w, h = calculate_default_transform(ds.crs, "EPSG:4326", ds.width, ds.height, *ds.bounds)
        arr = np.full((h, w), -9999.0, "float32")
        reproject(rasterio.band(ds, 1), arr, dst_transform=t, dst_crs="EPSG:4326", resampling=Resampling.bilinear,
                  dst_nodata=-9999.0)
    with rasterio.open(s.folder / "post_ll.tif", "w", driver="GTiff", width=w, height=h, count=1, dtype="float32",
                       crs="EPSG:4326", transform=t, nodata=-9999.0) as out:
        out.write(arr, 1)
    cfg = s.config.read_text().replace('post = "post.tif"', 'post = "post_ll.tif"')
    s.config.write_text(cfg)
    r = peatburn.run(s.config, tmp_path / "o")
    assert r.total["carbon_smouldering_t"] == pytest.approx(s.truth["carbon_t"], rel=0.05)


def test_zone_outside_the_data_gets_zero_with_a_note(tmp_path):
    s = make_scene(tmp_path / "s")
    z = gpd.read_file(s.folder / "zones.gpkg")
    far = gpd.GeoDataFrame({"name": ["Far Away"]}, geometry=[shapely.box(0, 0, 10, 10)], crs=z.crs)
    gpd.pd.concat([z, far]).to_file(s.folder / "zones.gpkg", driver="GPKG")
    r = peatburn.run(s.config, tmp_path / "o")
    row = next(x for x in r.zones if x["zone"] == "Far Away")
    assert row["carbon_smouldering_t"] == 0 and row["burned_area_ha"] == 0
    assert any("outside the run grid" in n and "Far Away" in n for n in r.totals["notes"])


def test_all_nodata_survey_is_refused(tmp_path):
    s = make_scene(tmp_path / "s", zones=False)
    with rasterio.open(s.folder / "post.tif", "r+") as ds:
        ds.write(np.full((ds.height, ds.width), -9999.0, "float32"), 1)
    res = _run_cli("run", s.config, "--out", tmp_path / "o")
    assert res.exit_code == 2 and "holds no data" in res.output


def test_non_overlapping_raster_is_refused(tmp_path):
    s = make_scene(tmp_path / "s", zones=False)
    with rasterio.open(s.folder / "thickness.tif") as ds:
        prof, data = ds.profile, ds.read(1)
    prof["transform"] = rasterio.transform.from_origin(100_000, 1_000_000, 2, 2)
    with rasterio.open(s.folder / "thickness.tif", "w", **prof) as ds:
        ds.write(data, 1)
    res = _run_cli("run", s.config, "--out", tmp_path / "o")
    assert res.exit_code == 2 and "does not overlap the run grid" in res.output


def test_unknown_zone_field_lists_fields(tmp_path):
    s = make_scene(tmp_path / "s")
    s.config.write_text(s.config.read_text().replace('id = "name"', 'id = "nam"'))
    res = _run_cli("run", s.config, "--out", tmp_path / "o")
    assert res.exit_code == 2 and "no field 'nam'; fields are: name" in res.output


def test_unknown_key_suggests_near_one(tmp_path):
    s = make_scene(tmp_path / "s")
    s.config.write_text(s.config.read_text().replace("carbon_fraction", "carbon_fracton"))
    res = _run_cli("check", s.config)
    assert res.exit_code == 2 and "did you mean 'carbon_fraction'" in res.output


def test_same_inputs_give_byte_identical_outputs(tmp_path):
    s = make_scene(tmp_path / "s")
    peatburn.run(s.config, tmp_path / "a")
    peatburn.run(s.config, tmp_path / "b")
    for name in ("zones.csv", "fires.csv", "inventory.csv", "burn_depth.tif", "carbon_smouldering.tif"):
        assert (tmp_path / "a" / name).read_bytes() == (tmp_path / "b" / name).read_bytes(), name


def test_geographic_surveys_run_in_utm_with_correct_areas(tmp_path):
    """Both surveys delivered in WGS 84 lon/lat: the run grid becomes the UTM zone of the area (noted),
    and the burned area matches the polygons' area in metres (scars in UTM 49S)."""
    s = make_scene(tmp_path / "s", zones=False)
    for name in ("pre", "post"):
        with rasterio.open(s.folder / f"{name}.tif") as ds:
            t, w, h = calculate_default_transform(ds.crs, "EPSG:4326", ds.width, ds.height, *ds.bounds)
            arr = np.full((h, w), -9999.0, "float32")
            reproject(rasterio.band(ds, 1), arr, dst_transform=t, dst_crs="EPSG:4326",
                      resampling=Resampling.bilinear, dst_nodata=-9999.0)
        with rasterio.open(s.folder / f"{name}_ll.tif", "w", driver="GTiff", width=w, height=h, count=1,
                           dtype="float32", crs="EPSG:4326", transform=t, nodata=-9999.0) as out:
            out.write(arr, 1)
    s.config.write_text(s.config.read_text().replace('"pre.tif"', '"pre_ll.tif"').replace('"post.tif"', '"post_ll.tif"'))
    r = peatburn.run(s.config, tmp_path / "o")
    assert any("EPSG:32749" in n for n in r.totals["notes"])
    scars = gpd.read_file(s.folder / "scars.gpkg")
    # polygon area in UTM (shapely, independent of our pixel areas); pixel-centre rasterization differs by
    # at most a one-pixel ring: perimeter x pixel / 2
    ref_ha = scars.area.sum() / 1e4
    ring_ha = scars.length.sum() * 2.0 / 2 / 1e4
    assert abs(r.total["burned_area_ha"] - ref_ha) <= ring_ha
    assert r.total["carbon_smouldering_t"] == pytest.approx(s.truth["carbon_t"], rel=0.06)


def test_water_table_with_wrong_sign_is_refused(tmp_path):
    """Water-table depths given as elevations of the water (negative below the surface) instead of
    depths below the surface: a one-line error that names the input."""
    s = make_scene(tmp_path / "s", zones=False)
    import csv

    with open(s.folder / "stations.csv", "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["x", "y", "water_table_m"])
        for i in range(6):
            w.writerow([X0 + 100 + 50 * i, Y0 - 200 - 40 * i, -0.4 - 0.05 * i])
    s.config.write_text(s.config.read_text() + '\n[depth.water_table]\ndepth = "stations.csv"\ncrs = "EPSG:32749"\n')
    res = _run_cli("run", s.config, "--out", tmp_path / "o")
    assert res.exit_code == 2
    assert "depth.water_table.depth" in res.output and "Traceback" not in res.output
