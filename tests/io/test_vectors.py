"""Reading, repairing and reprojecting polygon layers."""

import geopandas as gpd
import pytest
import shapely

from peatburn.errors import CRSError, InputFileError, MissingInputError, ZoneError
from peatburn.io.vectors import read_polygons, zone_ids


def test_reprojects_to_run_crs_and_repairs(tmp_path):
    bowtie = shapely.Polygon([(0, 0), (1, 1), (1, 0), (0, 1)])  # self-intersecting
    ok = shapely.box(113.0, -12.1, 113.01, -12.09)      # open sea south of Java: invented zones, not land
    frame = gpd.GeoDataFrame({"name": ["bow", "ok", "empty"]},
                             geometry=[shapely.affinity.translate(bowtie, 113.0, -12.0), ok, shapely.Polygon()],
                             crs="EPSG:4326")
    frame.to_file(tmp_path / "z.gpkg", driver="GPKG")
    layer = read_polygons(tmp_path / "z.gpkg", "EPSG:32749", "zones")
    assert layer.frame.crs.to_epsg() == 32749
    assert any("repaired" in n for n in layer.notes) and any("dropped" in n for n in layer.notes)
    assert shapely.is_valid(layer.frame.geometry.values).all()
    # a 0.01 deg square at 12.1 deg S: 1106.2 m of meridian arc (WGS84 degree of latitude
    # 111132.95 - 559.82 cos 2phi + 1.18 cos 4phi m = 110623 m; recalled, unchecked) times 1088.5 m of
    # parallel (111.32 km * cos 12.1 deg), times the UTM areal scale k^2 = 1.0004 at 2 deg from the
    # central meridian (k = 0.9996 (1 + (dlon cos phi)^2 / 2) = 1.00019; Snyder 1987 Eq. 8-11)
    assert layer.frame.geometry.iloc[1].area == pytest.approx(1106.2 * 1088.5 * 1.0004, rel=0.002)


def test_zone_id_errors(tmp_path):
    frame = gpd.GeoDataFrame({"name": ["a", "a"], "code": [1, 2]},
                             geometry=[shapely.box(0, 0, 1, 1), shapely.box(1, 0, 2, 1)], crs="EPSG:32749")
    frame.to_file(tmp_path / "z.gpkg", driver="GPKG")
    layer = read_polygons(tmp_path / "z.gpkg", "EPSG:32749", "zones[0]")
    with pytest.raises(ZoneError, match="no field 'nmae'; fields are: name, code"):
        zone_ids(layer, "nmae")
    with pytest.raises(ZoneError, match="duplicate ids"):
        zone_ids(layer, "name")
    assert zone_ids(layer, "code") == ["1", "2"]


def test_missing_crs_and_bad_files(tmp_path):
    gpd.GeoDataFrame({"a": [1]}, geometry=[shapely.box(0, 0, 1, 1)]).to_file(tmp_path / "n.gpkg", driver="GPKG")
    with pytest.raises(CRSError, match="has no CRS"):
        read_polygons(tmp_path / "n.gpkg", "EPSG:32749", "burned_area.path")
    with pytest.raises(MissingInputError):
        read_polygons(tmp_path / "nope.gpkg", "EPSG:32749")
    (tmp_path / "bad.gpkg").write_text("garbage")
    with pytest.raises(InputFileError, match="cannot read"):
        read_polygons(tmp_path / "bad.gpkg", "EPSG:32749")
