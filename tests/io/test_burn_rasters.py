"""Burned area given as a raster mask: fires labelled and polygonised, a run from the mask against
the run from the equivalent polygons, `peatburn check`'s account of the mask, dates from a
day-of-burn raster.

The mask is made from the scene's scar polygons with rasterio.features.rasterize (GDAL's pixel-centre
rule, the rule a run applies to polygons), so both runs see the same burned pixels; component counts
are checked against scipy.ndimage.label.
"""

from __future__ import annotations

import csv
import datetime as dt
import shutil

import geopandas as gpd
import numpy as np
import pytest
import rasterio
import shapely
from click.testing import CliRunner
from rasterio.features import rasterize
from scipy import ndimage

import peatburn
from conftest import EPSG
from peatburn.config import BurnMaskConfig
from peatburn.errors import ConfigError, GridError, InputFileError
from peatburn.io.burn_rasters import read_burn_mask

EIGHT = np.ones((3, 3), dtype=bool)


def write_mask(path, arr, transform, nodata=None, dtype="uint8", crs=f"EPSG:{EPSG}"):
    with rasterio.open(path, "w", driver="GTiff", width=arr.shape[1], height=arr.shape[0], count=1, dtype=dtype,
                       crs=crs, transform=transform, nodata=nodata) as ds:
        ds.write(arr.astype(dtype), 1)


def scene_mask(scene):
    """The scene's scars burned into its survey grid: 1 in scar A, 2 in scar B (pixel centres)."""
    with rasterio.open(scene.folder / "pre.tif") as ds:
        transform, shape = ds.transform, ds.shape
    scars = gpd.read_file(scene.folder / "scars.gpkg")
    arr = rasterize(((g, i + 1) for i, g in enumerate(scars.geometry)), out_shape=shape, transform=transform,
                    fill=0, dtype="uint8")
    return arr, transform


@pytest.fixture(scope="module")
def mask_scene(scene, tmp_path_factory):
    """The shared scene with its burned area as a raster mask (plus a nodata strip and a speckle
    that min_area_ha removes)."""
    folder = tmp_path_factory.mktemp("mask_scene")
    for f in scene.folder.iterdir():
        shutil.copy(f, folder / f.name)
    arr, transform = scene_mask(scene)
    arr[-3:, :] = 255  # a strip of nodata along the south edge, away from the scars
    arr[5:7, 5:7] = 3  # a 2 x 2 px speckle (16 m2 at 2 m) far from both scars
    write_mask(folder / "mask.tif", arr, transform, nodata=255)
    text = (folder / "config.toml").read_text().replace('path = "scars.gpkg"',
                                                          'path = "mask.tif"\nmin_area_ha = 0.01')
    (folder / "config.toml").write_text(text)
    return folder, arr, transform


def test_mask_fires_match_the_components(mask_scene, scene):
    folder, arr, transform = mask_scene
    fires = read_burn_mask(folder / "mask.tif", BurnMaskConfig(min_area_ha=0.01))
    burned = (arr != 0) & (arr != 255)
    n_ref = ndimage.label(burned, structure=EIGHT)[1]  # outside reference: 3 (A, B, the speckle)
    assert n_ref == 3
    assert len(fires.frame) == n_ref - 1  # the speckle (4 px = 0.0016 ha) is under 0.01 ha
    assert fires.frame["fire"].tolist() == ["F0001", "F0002"]
    assert fires.summary["burned_px_raw"] == int(burned.sum())
    assert fires.summary["burned_px"] == int(burned.sum()) - 4
    assert fires.summary["nodata_px"] == 3 * arr.shape[1]
    assert shapely.is_valid(fires.frame.geometry.values).all()
    # each fire's polygon covers exactly its pixels: area = pixel count x 4 m2 (2 m pixels)
    for code, geom in zip((1, 2), fires.frame.geometry):
        assert geom.area == pytest.approx(float((arr == code).sum()) * 4.0, rel=1e-12)
    assert fires.frame.crs.to_epsg() == EPSG


def test_run_from_mask_equals_run_from_polygons(mask_scene, scene_run, tmp_path):
    """Same burned pixels -> same burned area per zone (to rounding); the carbon differs only through
    the stable ground (outside the scars, buffered: the pixel outlines buffer slightly differently from
    the smooth polygons), so the co-registration moves a little: within 0.1 % (measured 0.005-0.008 %
    per zone on this scene when the test was written; the bound leaves room for other GDAL builds)."""
    folder, _, _ = mask_scene
    r = peatburn.run(folder / "config.toml", tmp_path / "out")
    assert len(r.zones) == len(scene_run.zones)
    for a, b in zip(scene_run.zones, r.zones):
        assert (a["layer"], a["zone"]) == (b["layer"], b["zone"])
        assert b["burned_area_ha"] == pytest.approx(a["burned_area_ha"], rel=1e-9, abs=1e-12)
        assert b["carbon_smouldering_t"] == pytest.approx(a["carbon_smouldering_t"], rel=1e-3, abs=1e-9)
    with open(r.out_dir / "fires.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert [row["fire"] for row in rows] == ["F0001", "F0002"]
    assert all(row["fire_start"] == "" for row in rows)  # no dates: the fires count in run.year
    assert any("burn mask:" in n and "2 fire(s)" in n for n in r.totals["notes"])


def test_check_says_what_it_made_of_the_mask(mask_scene):
    folder, arr, _ = mask_scene
    from peatburn.cli.main import cli

    res = CliRunner().invoke(cli, ["check", str(folder / "config.toml")])
    assert res.exit_code == 0, res.output
    burned = int(((arr != 0) & (arr != 255)).sum())
    assert "burn scars: 2 fires labelled in the raster mask" in res.output
    assert f"burn mask: {burned:,} burned px" in res.output
    assert "burned patches under 0.01 ha (25 px) removed" in res.output  # 0.01 ha = 100 m2 = 25 px of 4 m2
    assert "2 fire(s) (8-connected)" in res.output


def test_day_of_burn_raster_gives_each_fire_its_days(tmp_path):
    """Two fires; the west one burned on days 250-252 of 2028 (7-9 Sep), the east one has no date."""
    t = rasterio.transform.from_origin(500_000, 8_650_000, 10, 10)
    m = np.zeros((6, 10), np.uint8)
    m[1:4, 1:4] = 1
    m[2:5, 6:9] = 1
    doy = np.zeros((6, 10), np.int16)
    doy[1:4, 1:4] = [[250, 250, 251], [251, 252, 252], [250, 251, 251]]
    doy[0, 0] = 200  # outside every fire: ignored
    write_mask(tmp_path / "m.tif", m, t)
    write_mask(tmp_path / "d.tif", doy, t, dtype="int16")
    f = read_burn_mask(tmp_path / "m.tif", BurnMaskConfig(date_path=tmp_path / "d.tif"), year=2028)
    assert f.frame["fire_start"].tolist() == ["2028-09-06", None]  # 2028 is leap: day 250 = 6 Sep
    assert f.frame["fire_end"].tolist() == ["2028-09-08", None]
    assert dt.date(2028, 1, 1) + dt.timedelta(days=249) == dt.date(2028, 9, 6)
    assert f.summary["n_dated"] == 1 and any("no dated pixel" in n for n in f.notes)
    # a date raster on another grid is refused, not resampled
    write_mask(tmp_path / "d2.tif", doy, rasterio.transform.from_origin(500_005, 8_650_000, 10, 10), dtype="int16")
    with pytest.raises(GridError, match="not on the grid"):
        read_burn_mask(tmp_path / "m.tif", BurnMaskConfig(date_path=tmp_path / "d2.tif"), year=2028)
    with pytest.raises(InputFileError, match="run.year"):
        read_burn_mask(tmp_path / "m.tif", BurnMaskConfig(date_path=tmp_path / "d.tif"))


def test_burned_values_and_a_lon_lat_mask(tmp_path):
    """Class codes: only 3 and 4 burned. A lon/lat mask (0.0002 deg ~ 22 m at 5 deg S): min_area in
    hectares becomes a pixel count through the geodesic pixel size."""
    t = rasterio.transform.from_origin(100.0, -5.0, 0.0002, 0.0002)
    m = np.zeros((20, 20), np.uint8)
    m[2:6, 2:6] = 3  # 16 px ~ 0.79 ha
    m[10:12, 10:12] = 4  # 4 px ~ 0.2 ha
    m[15:19, 15:19] = 1  # not burned by the codes
    write_mask(tmp_path / "ll.tif", m, t, crs="EPSG:4326")
    f = read_burn_mask(tmp_path / "ll.tif", BurnMaskConfig(burned_values=(3, 4)))
    assert len(f.frame) == 2
    dx, dy = f.summary["pixel_m"]
    assert dx == pytest.approx(22.1, rel=0.01) and dy == pytest.approx(22.1, rel=0.01)  # 111.3 km/deg x 0.0002
    f = read_burn_mask(tmp_path / "ll.tif", BurnMaskConfig(burned_values=(3, 4), min_area_ha=0.5))
    assert len(f.frame) == 1
    with pytest.raises(GridError, match="no burned pixel"):
        read_burn_mask(tmp_path / "ll.tif", BurnMaskConfig(burned_values=(9,)))


def test_config_keys_belong_to_their_kind_of_input(tmp_path):
    from peatburn.config import load_config

    base = '[run]\nyear = 2030\n[peat]\nbulk_density = 0.1\ncarbon_fraction = 0.5\n[burned_area]\n'
    (tmp_path / "a.toml").write_text(base + 'path = "scars.gpkg"\nmin_area_ha = 1\n')
    with pytest.raises(ConfigError, match="applies to a burned-area raster"):
        load_config(tmp_path / "a.toml")
    (tmp_path / "b.toml").write_text(base + 'path = "m.tif"\nlayer = "x"\n')
    with pytest.raises(ConfigError, match="applies to a polygon file"):
        load_config(tmp_path / "b.toml")
    (tmp_path / "c.toml").write_text(base + 'path = "m.tif"\nclose_m = "0.03 km"\nmin_area_ha = "2000 m^2"\n'
                                     'burned_values = [1, 2]\n')
    c = load_config(tmp_path / "c.toml").burn_mask
    assert (c.close_m, c.min_area_ha, c.min_hole_ha, c.burned_values) == (pytest.approx(30), pytest.approx(0.2),
                                                                         None, (1, 2))


def test_tier1_run_from_a_mask_with_dates(tmp_path):
    """A Tier-1-only run whose grid is run.crs and run.resolution over the mask's fires. Fire F0001
    (12 px of 100 m2) burned from 30 Dec 2029 to 2 Jan 2030, F0002 (4 px) on 5 Jan 2030 (YYYYMMDD
    codes). Hand arithmetic: carbon = 353 t/ha (IPCC 2013 Wetlands Supplement Table 2.6, recalled,
    unchecked) x 0.1 kg m-2 per t/ha x f_C x area; F0001's spread evenly over its 4 days, so half of it
    in 2029; intervals are drawn per fire."""
    from conftest import X0, Y0

    t = rasterio.transform.from_origin(X0, Y0, 10, 10)
    m = np.zeros((8, 10), np.uint8)
    m[1:4, 1:5] = 1  # 12 px
    m[5:7, 7:9] = 1  # 4 px
    d = np.zeros((8, 10), np.int32)
    d[1:4, 1:5] = 20291230
    d[3, 4] = 20300102
    d[1, 2] = 20291231
    d[5:7, 7:9] = 20300105
    write_mask(tmp_path / "mask.tif", m, t, nodata=255)
    write_mask(tmp_path / "dates.tif", d, t, dtype="int32", nodata=0)
    (tmp_path / "run.toml").write_text(f"""[run]
year = 2030
crs = "EPSG:{EPSG}"
resolution = 10
[burned_area]
path = "mask.tif"
date_path = "dates.tif"
[peat]
bulk_density = "0.1 g/cm^3"
carbon_fraction = 0.55
[uncertainty]
draws = 200
""")
    r = peatburn.run(tmp_path / "run.toml", tmp_path / "out")
    per_m2 = 353 * 0.1 * 0.55 / 1000  # t C per m2
    assert r.total["burned_area_ha"] == pytest.approx(16 * 100 / 1e4, rel=1e-12)
    assert r.total["carbon_smouldering_t"] == pytest.approx(per_m2 * 1600, rel=1e-9)
    with open(r.out_dir / "fires.csv", newline="") as fh:
        fires = {row["fire"]: row for row in csv.DictReader(fh)}
    assert (fires["F0001"]["fire_start"], fires["F0001"]["fire_end"]) == ("2029-12-30", "2030-01-02")
    assert (fires["F0002"]["fire_start"], fires["F0002"]["fire_end"]) == ("2030-01-05", "2030-01-05")
    assert float(fires["F0001"]["carbon_smouldering_t_lo"]) < float(fires["F0001"]["carbon_smouldering_t"])
    with open(r.out_dir / "daily.csv", newline="") as fh:
        daily = [row for row in csv.DictReader(fh) if row["phase"] == "smouldering"]
    assert [row["date"] for row in daily] == ["2029-12-30", "2029-12-31", "2030-01-01", "2030-01-02", "2030-01-05"]
    assert float(daily[0]["carbon_t"]) == pytest.approx(per_m2 * 1200 / 4, rel=1e-9)
    assert float(daily[-1]["carbon_t"]) == pytest.approx(per_m2 * 400, rel=1e-9)


def test_the_mask_gives_the_grid_when_nothing_else_does(tmp_path):
    """No survey, water-table or peat raster and no run.crs/run.resolution: the grid is the mask's
    (10 x 8 px of 10 m); a lon/lat mask gets its UTM zone, as a lon/lat survey would."""
    from conftest import X0, Y0
    from peatburn.cli.main import cli

    m = np.zeros((8, 10), np.uint8)
    m[2:5, 2:6] = 1
    write_mask(tmp_path / "mask.tif", m, rasterio.transform.from_origin(X0, Y0, 10, 10))
    write_mask(tmp_path / "ll.tif", m, rasterio.transform.from_origin(111.0, -12.2, 0.0001, 0.0001), crs="EPSG:4326")
    for name in ("mask.tif", "ll.tif"):
        (tmp_path / f"{name}.toml").write_text(f'[run]\nyear = 2030\n[burned_area]\npath = "{name}"\n'
                                               '[peat]\nbulk_density = 0.1\ncarbon_fraction = 0.55\n')
    res = CliRunner().invoke(cli, ["check", str(tmp_path / "mask.tif.toml")])
    assert res.exit_code == 0, res.output
    assert f"grid: 10 x 8 px of 10 x 10 in EPSG:{EPSG}" in res.output
    assert "burn scars: 1 fires labelled in the raster mask" in res.output
    res = CliRunner().invoke(cli, ["check", str(tmp_path / "ll.tif.toml")])
    assert res.exit_code == 0, res.output
    assert "EPSG:32749" in res.output and "geographic CRS" in res.output  # 111 E, 12.2 S: UTM zone 49 S
