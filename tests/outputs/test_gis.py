"""results.gpkg (issue 19 item 4): zone polygons joined with their zones.csv rows, scars with their
fires.csv rows. Checked against the run's own CSV files read back with pandas and the input polygons
read with geopandas (the join is what is tested, not the numbers)."""

from __future__ import annotations

import hashlib

import geopandas as gpd
import pandas as pd
import pyogrio
import pytest
import shapely

from peatburn.outputs.gis import layer_names, write_results_gpkg


def test_results_gpkg_joins_zones_and_fires(scene, scene_run):
    out = scene_run.out_dir
    path = out / "results.gpkg"
    assert scene_run.files["gis"] == path
    layers = [name for name, _ in pyogrio.list_layers(path)]
    assert layers == ["zones_zones", "fires"]
    csv = pd.read_csv(out / "zones.csv")
    z = gpd.read_file(path, layer="zones_zones")
    src = gpd.read_file(scene.folder / "zones.gpkg")
    assert list(z["zone"]) == list(src["name"])
    for _, row in z.iterrows():
        want = csv[(csv["layer"] == "zones") & (csv["zone"] == row["zone"])].iloc[0]
        for col in ("carbon_smouldering_t", "burned_area_ha", "co2e_smouldering_t"):
            assert row[col] == pytest.approx(want[col], rel=1e-6, abs=1e-9)
    assert all(shapely.equals_exact(a, b, 1e-6) or shapely.equals(a, b) for a, b in zip(z.geometry, src.geometry))
    assert z.crs == src.crs
    fires = gpd.read_file(path, layer="fires")
    fcsv = pd.read_csv(out / "fires.csv")
    scars = gpd.read_file(scene.folder / "scars.gpkg")
    assert list(fires["fire"]) == list(fcsv["fire"].astype(str)) == ["A", "B"]
    assert fires["carbon_smouldering_t"].tolist() == pytest.approx(fcsv["carbon_smouldering_t"].tolist(), rel=1e-6)
    assert all(shapely.equals(a, b) for a, b in zip(fires.geometry, scars.geometry))


def test_layer_names_are_safe_and_unique():
    assert layer_names(["zones", "Peat Units", "peat_units", "=x", "fires", ""]) == [
        "zones_zones", "zones_Peat_Units", "zones_peat_units_2", "zones_x", "zones_fires", "zones_layer"]


def test_written_bytes_repeat(tmp_path):
    frame = gpd.GeoDataFrame({"name": ["a"]}, geometry=[shapely.box(0, 0, 1, 1)], crs="EPSG:32749")
    rows = [{"layer": "l", "zone": "a", "carbon_smouldering_t": 1.5, "note": "=1+1"}]
    digests = []
    for k in range(2):
        p = write_results_gpkg(tmp_path / f"r{k}.gpkg", [("l", frame, ["a"])], rows,
                               ["layer", "zone", "carbon_smouldering_t", "note"], frame, [{"fire": "f"}], ["fire"])
        digests.append(hashlib.sha256(p.read_bytes()).hexdigest())
    assert digests[0] == digests[1]
    z = gpd.read_file(tmp_path / "r0.gpkg", layer="zones_l")
    assert z["note"].tolist() == ["=1+1"]  # text as written: a GIS evaluates no formula


def test_output_rasters_as_rio_info_sees_them(scene_run):
    """Band description, units, nodata and the depth-method palette, read with rasterio's `rio info`
    (an outside tool) from the run's COGs."""
    import json

    from click.testing import CliRunner
    from rasterio.rio.main import main_group

    want = {"burn_depth.tif": ("burn depth", "m", -9999.0), "carbon_smouldering.tif":
            ("carbon burned below ground", "kg C m-2", -9999.0), "depth_method.tif": (None, "code", 0.0)}
    for name, (desc, units, nodata) in want.items():
        r = CliRunner().invoke(main_group, ["info", str(scene_run.out_dir / name)])
        assert r.exit_code == 0, r.output
        info = json.loads(r.output)
        if desc:
            assert info["descriptions"] == [desc]
        assert info["units"] == [units] and info["nodata"] == nodata
    import rasterio

    with rasterio.open(scene_run.out_dir / "depth_method.tif") as ds:
        cmap = ds.colormap(1)
    # Okabe & Ito (2008) blue, orange, vermillion as the report draws them
    assert cmap[1][:3] == (0x00, 0x72, 0xB2) and cmap[2][:3] == (0xE6, 0x9F, 0x00)


def test_large_output_raster_has_overviews(tmp_path):
    import numpy as np
    import rasterio
    from rasterio.transform import from_origin
    from rasterio.windows import Window

    from peatburn.grid import RunGrid
    from peatburn.io.writers import BlockRasterWriter

    grid = RunGrid(rasterio.crs.CRS.from_epsg(32749), from_origin(500000, 8650000, 2, 2), 1500, 1400)
    with BlockRasterWriter(tmp_path / "big.tif", grid, description="x", units="m") as w:
        for win in grid.windows(512):
            w.write(win, np.ones((int(win.height), int(win.width))))
    with rasterio.open(tmp_path / "big.tif") as ds:
        # GDAL COG driver, OVERVIEWS=AUTO: halve until the overview fits in one 512 px block (1500 -> 750 -> 375)
        assert ds.overviews(1) == [2, 4]
        assert ds.read(1, window=Window(0, 0, 4, 4)).tolist() == [[1.0] * 4] * 4
