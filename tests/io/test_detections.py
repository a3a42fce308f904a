"""Tests of peatburn.io.detections: layouts, CRS handling, times, and rejected rows counted by reason.

Expected positions come from the definition of UTM (false easting 500 000 m on the central
meridian, false northing 10 000 000 m at the equator for southern zones) or from pyproj as an
independent reference; expected times from Python's datetime; counts by hand from the rows written.
"""

from __future__ import annotations

import datetime as dt

import geopandas as gpd
import pytest
import shapely
from pyproj import Transformer

from peatburn.errors import ConfigError, CRSError, InputFileError, MissingInputError, PeatburnError
from peatburn.io.detections import REJECT_REASONS, read_detections

RUN = "EPSG:32749"  # UTM zone 49 south: central meridian 6 x 49 - 183 = 111 deg E


def _write(path, text):
    path.write_text(text, encoding="utf-8")
    return path


def _epoch(*args, tz=dt.timezone.utc):
    return dt.datetime(*args, tzinfo=tz).timestamp()


def test_xy_csv_in_the_run_crs(tmp_path):
    p = _write(tmp_path / "d.csv", "x,y,time,frp_mw\n743000.5,8715000.25,2031-09-14T05:42:00Z,12.5\n")
    d = read_detections(p, RUN, crs=RUN)
    assert len(d.frame) == 1
    g = d.frame.geometry.iloc[0]
    assert (g.x, g.y) == (743000.5, 8715000.25)
    assert d.frame["frp_mw"].iloc[0] == 12.5
    # Python datetime: 2031-09-14 05:42:00 UTC in seconds since 1970-01-01 UTC.
    assert d.frame["t_s"].iloc[0] == _epoch(2031, 9, 14, 5, 42)
    assert str(d.frame["time"].dt.tz) == "UTC"
    assert d.rejected == {r: 0 for r in REJECT_REASONS}
    assert d.frame.crs.equals(RUN)


def test_lon_lat_csv_is_epsg4326_and_reprojected(tmp_path):
    # On the central meridian (111 E) at the equator, UTM zone 49 south gives exactly
    # x = 500 000 m (false easting) and y = 10 000 000 m (false northing): UTM definition.
    p = _write(tmp_path / "d.csv", "lon,lat,time,frp_mw\n111,0,2031-09-14T05:42:00Z,1\n112.25,-2.5,2031-09-14T05:42:00Z,2\n")
    d = read_detections(p, RUN)
    g0, g1 = d.frame.geometry.iloc[0], d.frame.geometry.iloc[1]
    assert g0.x == pytest.approx(500_000.0, abs=1e-6)
    assert g0.y == pytest.approx(10_000_000.0, abs=1e-6)
    # A second point against pyproj (an independent implementation of the projection).
    ex, ey = Transformer.from_crs("EPSG:4326", RUN, always_xy=True).transform(112.25, -2.5)
    assert (g1.x, g1.y) == pytest.approx((ex, ey), abs=1e-6)
    assert d.source_crs == "EPSG:4326"


def test_xy_without_crs_is_a_crs_error_naming_the_key(tmp_path):
    p = _write(tmp_path / "d.csv", "x,y,time,frp_mw\n1,2,2031-09-14T05:42:00Z,3\n")
    with pytest.raises(CRSError, match="flaming.crs"):
        read_detections(p, RUN)


def test_missing_file(tmp_path):
    with pytest.raises(MissingInputError, match="nope.csv"):
        read_detections(tmp_path / "nope.csv", RUN, crs=RUN)
    with pytest.raises(FileNotFoundError):  # also the built-in a Python user expects
        read_detections(tmp_path / "nope.csv", RUN, crs=RUN)


def test_times_naive_is_utc_and_offsets_are_converted(tmp_path):
    p = _write(tmp_path / "d.csv", "\n".join([
        "x,y,time,frp_mw",
        "743000,8715000,2031-09-14 05:42,1",            # naive -> UTC
        "743000,8715000,2031-09-14T12:42:00+07:00,1",   # +07:00 -> 05:42 UTC
        "743000,8715000,2031-09-14,1",                  # date only -> midnight UTC
    ]) + "\n")
    d = read_detections(p, RUN, crs=RUN)
    assert d.frame["t_s"].tolist() == [_epoch(2031, 9, 14, 5, 42), _epoch(2031, 9, 14, 5, 42), _epoch(2031, 9, 14)]
    assert any("UTC" in n for n in d.notes)


def test_bad_rows_are_counted_by_reason(tmp_path):
    p = _write(tmp_path / "d.csv", "\n".join([
        "x,y,time,frp_mw",
        "743000,8715000,2031-09-14T05:42:00Z,10",   # 0 good
        "743000,8715000,,10",                        # 1 no time
        "743000,8715000,yesterday,10",               # 2 bad time
        "743000,8715000,2031-13-40T00:00:00Z,10",    # 3 bad time (month 13)
        "743000,8715000,2031-09-14T05:42:00Z,-1",    # 4 negative FRP
        "743000,8715000,2031-09-14T05:42:00Z,",      # 5 missing FRP
        "743000,8715000,2031-09-14T05:42:00Z,ten",   # 6 missing FRP (not a number)
        ",8715000,2031-09-14T05:42:00Z,10",          # 7 no position
        "750000,8715000,2031-09-14T05:42:00Z,10",    # 8 outside run area
        "744000,8716000,2031-09-14T05:42:00Z,0",     # 9 good (zero FRP is allowed), on the bounds' corner
        ",,,",                                       # 10 no time (first check that fails)
    ]) + "\n")
    d = read_detections(p, RUN, crs=RUN, bounds=(742_000, 8_714_000, 744_000, 8_716_000))
    assert d.rejected == {"no time": 2, "bad time": 2, "negative or missing FRP": 3, "no position": 1,
                          "not a point": 0, "outside run area": 1}
    assert d.n_read == 11 and d.n_rejected == 9
    assert d.frame["source_row"].tolist() == [0, 9]
    assert d.frame["frp_mw"].tolist() == [10.0, 0.0]
    text = d.describe()
    assert "11 detection(s) read, 2 kept, 9 rejected" in text and "2 bad time" in text


def test_latitude_out_of_range_is_no_position(tmp_path):
    p = _write(tmp_path / "d.csv", "lon,lat,time,frp_mw\n111,95,2031-09-14T05:42:00Z,1\n111,-1,2031-09-14T05:42:00Z,1\n")
    d = read_detections(p, RUN)
    assert d.rejected["no position"] == 1 and len(d.frame) == 1


def test_columns_mapping(tmp_path):
    p = _write(tmp_path / "d.csv", "E,N,obs_time,power,sensor\n743000,8715000,2031-09-14T05:42:00Z,7.5,A\n")
    d = read_detections(p, RUN, crs=RUN, columns={"x": "E", "y": "N", "time": "obs_time", "frp_mw": "power"})
    assert d.frame["frp_mw"].tolist() == [7.5]
    assert d.frame.geometry.iloc[0].x == 743000.0


def test_unknown_mapped_column_names_the_file_and_its_columns(tmp_path):
    p = _write(tmp_path / "d.csv", "x,y,obs_time,power\n1,2,2031-09-14T05:42:00Z,3\n")
    with pytest.raises(ConfigError) as err:
        read_detections(p, RUN, crs=RUN, columns={"time": "obs_time", "frp_mw": "FRP"})
    msg = str(err.value)
    assert "d.csv" in msg and "'FRP'" in msg and "x, y, obs_time, power" in msg


def test_unknown_name_in_the_mapping_is_refused(tmp_path):
    p = _write(tmp_path / "d.csv", "x,y,time,frp_mw\n1,2,2031-09-14T05:42:00Z,3\n")
    with pytest.raises(ConfigError, match="frp_mw"):
        read_detections(p, RUN, crs=RUN, columns={"frp": "frp_mw"})


def test_missing_required_columns(tmp_path):
    p = _write(tmp_path / "d.csv", "x,y,time\n1,2,2031-09-14T05:42:00Z\n")
    with pytest.raises(ConfigError, match="frp_mw"):
        read_detections(p, RUN, crs=RUN)
    p2 = _write(tmp_path / "e.csv", "a,b,time,frp_mw\n1,2,2031-09-14T05:42:00Z,1\n")
    with pytest.raises(ConfigError, match="position"):
        read_detections(p2, RUN, crs=RUN)


def test_date_and_time_of_day_columns(tmp_path):
    # Two columns: a date and HHMM digits (542 = 05:42) or HH:MM, UTC.
    p = _write(tmp_path / "d.csv", "lon;lat;obs_date;obs_clock;power\n111;0;2031-09-14;542;3\n111;0;2031-09-14;17:05;4\n")
    d = read_detections(p, RUN, columns={"time": ["obs_date", "obs_clock"], "frp_mw": "power"})
    assert d.frame["t_s"].tolist() == [_epoch(2031, 9, 14, 5, 42), _epoch(2031, 9, 14, 17, 5)]


def test_point_geopackage_reprojected_and_non_points_counted(tmp_path):
    gdf = gpd.GeoDataFrame(
        {"time": ["2031-09-14T05:42:00Z", "2031-09-14T06:00:00Z", "2031-09-14T07:00:00Z"],
         "frp_mw": [5.0, 6.0, 7.0]},
        geometry=[shapely.Point(111.0, 0.0), shapely.box(111, -1, 111.1, -0.9), None],
        crs="EPSG:4326",
    )
    p = tmp_path / "d.gpkg"
    gdf.to_file(p, layer="detections")
    d = read_detections(p, RUN)
    assert len(d.frame) == 1
    g = d.frame.geometry.iloc[0]
    assert (g.x, g.y) == pytest.approx((500_000.0, 10_000_000.0), abs=1e-6)  # UTM definition
    assert d.rejected["not a point"] == 1 and d.rejected["no position"] == 1


@pytest.mark.filterwarnings("ignore:'crs' was not provided")
def test_vector_without_crs_needs_crs(tmp_path):
    gdf = gpd.GeoDataFrame({"time": ["2031-09-14T05:42:00Z"], "frp_mw": [5.0]},
                           geometry=[shapely.Point(743000.0, 8715000.0)])
    # A shapefile without a .prj has no CRS (GeoJSON would not do: GDAL reads it as EPSG:4326).
    shp = tmp_path / "d.shp"
    gdf.to_file(shp)
    with pytest.raises(CRSError, match="flaming.crs"):
        read_detections(shp, RUN)
    d = read_detections(shp, RUN, crs=RUN)
    assert d.frame.geometry.iloc[0].x == 743000.0


def test_typed_datetime_field_of_a_geopackage(tmp_path):
    # A GeoPackage DateTime field comes back typed; 05:42+07:00 is 22:42 UTC the day before.
    times = gpd.pd.to_datetime(["2031-09-14T05:42:00+07:00", None], utc=True)
    gdf = gpd.GeoDataFrame({"time": times, "frp_mw": [5.0, 6.0]},
                           geometry=[shapely.Point(743000.0, 8715000.0)] * 2, crs=RUN)
    p = tmp_path / "d.gpkg"
    gdf.to_file(p, layer="detections")
    d = read_detections(p, RUN)
    assert d.frame["t_s"].tolist() == [_epoch(2031, 9, 13, 22, 42)]
    assert d.rejected["no time"] == 1


def test_unreadable_file(tmp_path):
    p = tmp_path / "d.gpkg"
    p.write_bytes(b"not a geopackage")
    with pytest.raises(InputFileError):
        read_detections(p, RUN)
    with pytest.raises(PeatburnError):
        read_detections(_write(tmp_path / "e.csv", ""), RUN, crs=RUN)


def test_bad_crs_is_a_crs_error(tmp_path):
    p = _write(tmp_path / "d.csv", "x,y,time,frp_mw\n1,2,2031-09-14T05:42:00Z,3\n")
    with pytest.raises(CRSError):
        read_detections(p, RUN, crs="EPSG:not-a-code")
