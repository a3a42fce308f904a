"""Tests of peatburn.io.points: layouts, CRS handling, dates, and rejected rows counted by reason.

Expected positions come from the definition of UTM (false easting 500 000 m on the central
meridian, false northing 10 000 000 m at the equator for southern zones) or from pyproj as an
independent reference; expected dates from Python's datetime; counts by hand from the rows written.
"""

from __future__ import annotations

import datetime as dt

import geopandas as gpd
import pytest
import shapely
from pyproj import Transformer

from peatburn.errors import ConfigError, CRSError, InputFileError, MissingInputError, PeatburnError
from peatburn.io.points import REJECT_REASONS, read_points

RUN = "EPSG:32749"  # UTM zone 49 south: central meridian 6 x 49 - 183 = 111 deg E
BOUNDS = (499_000.0, 8_699_000.0, 501_000.0, 8_701_000.0)


def _write(path, text):
    path.write_text(text, encoding="utf-8")
    return path


def test_xy_csv_in_the_run_crs(tmp_path):
    p = _write(tmp_path / "wt.csv", "x,y,water_table_m\n500000.5,8700000.25,0.45\n500010,8700010,0.6\n")
    pts = read_points(p, RUN, value_column="water_table_m", crs=RUN)
    assert len(pts.frame) == 2
    g = pts.frame.geometry.iloc[0]
    assert (g.x, g.y) == (500000.5, 8700000.25)
    assert pts.frame["value"].tolist() == [0.45, 0.6]
    assert pts.frame["source_row"].tolist() == [0, 1]
    assert pts.rejected == {r: 0 for r in REJECT_REASONS}
    assert pts.frame.crs.equals(RUN)
    assert pts.path == str(p) and pts.n_read == 2
    assert "date" not in pts.frame.columns


def test_lon_lat_csv_is_epsg4326_and_reprojected(tmp_path):
    # On the central meridian (111 E) at the equator, UTM 49S gives x = 500 000 m and y = 10 000 000 m.
    p = _write(tmp_path / "wt.csv", "Longitude,Latitude,wt\n111,0,0.3\n112.25,-2.5,0.8\n")
    pts = read_points(p, RUN, value_column="wt")
    g0, g1 = pts.frame.geometry.iloc[0], pts.frame.geometry.iloc[1]
    assert g0.x == pytest.approx(500_000.0, abs=1e-6)
    assert g0.y == pytest.approx(10_000_000.0, abs=1e-6)
    ex, ey = Transformer.from_crs("EPSG:4326", RUN, always_xy=True).transform(112.25, -2.5)
    assert (g1.x, g1.y) == pytest.approx((ex, ey), abs=1e-6)
    assert pts.source_crs == "EPSG:4326"


def test_custom_coordinate_names_semicolon_and_case_insensitive_value(tmp_path):
    p = _write(tmp_path / "plots.csv", "E;N;Burn_Depth_M\n500000;8700000;0.31\n")
    pts = read_points(p, RUN, value_column="burn_depth_m", crs=RUN, x="E", y="N")
    assert pts.frame["value"].tolist() == [0.31]


def test_missing_value_column_names_the_file_the_column_and_the_columns(tmp_path):
    p = _write(tmp_path / "wt.csv", "x,y,gwl_cm\n500000,8700000,-30\n")
    with pytest.raises(ConfigError) as err:
        read_points(p, RUN, value_column="water_table_m", crs=RUN, what="depth.water_table.depth")
    msg = str(err.value)
    assert "depth.water_table.depth" in msg and "wt.csv" in msg
    assert "'water_table_m'" in msg and "x, y, gwl_cm" in msg
    assert isinstance(err.value, PeatburnError)


def test_missing_date_column_names_the_columns(tmp_path):
    p = _write(tmp_path / "wt.csv", "x,y,wt\n500000,8700000,0.3\n")
    with pytest.raises(ConfigError, match=r"no date column 'obs_date'.*x, y, wt"):
        read_points(p, RUN, value_column="wt", crs=RUN, date_column="obs_date")


def test_xy_without_crs_is_a_crs_error(tmp_path):
    p = _write(tmp_path / "wt.csv", "x,y,wt\n500000,8700000,0.3\n")
    with pytest.raises(CRSError, match="no CRS"):
        read_points(p, RUN, value_column="wt")


def test_no_position_columns(tmp_path):
    p = _write(tmp_path / "wt.csv", "easting,northing,wt\n500000,8700000,0.3\n")
    with pytest.raises(ConfigError, match="no position columns.*easting, northing, wt"):
        read_points(p, RUN, value_column="wt", crs=RUN)


def test_missing_and_empty_files(tmp_path):
    with pytest.raises(MissingInputError, match="not found"):
        read_points(tmp_path / "nope.csv", RUN, value_column="wt", crs=RUN)
    p = _write(tmp_path / "empty.csv", "")
    with pytest.raises(InputFileError, match="empty"):
        read_points(p, RUN, value_column="wt", crs=RUN)


def test_bad_rows_counted_by_reason_once_each(tmp_path):
    # row 0 good; row 1 no value; row 2 value not a number; row 3 no position; row 4 bad date;
    # row 5 empty date; row 6 outside the grid; row 7 no value AND no position -> counted as "no value".
    text = (
        "x,y,wt,date\n"
        "500000,8700000,0.5,2031-09-01\n"
        "500100,8700100,,2031-09-01\n"
        "500100,8700100,n/a,2031-09-01\n"
        ",8700100,0.3,2031-09-01\n"
        "500200,8700200,0.7,first of September\n"
        "500200,8700200,0.7,\n"
        "900000,8700200,0.8,2031-09-02\n"
        ",,,2031-09-02\n"
    )
    p = _write(tmp_path / "wt.csv", text)
    pts = read_points(p, RUN, value_column="wt", crs=RUN, date_column="date", bounds=BOUNDS)
    assert pts.rejected == {"no value": 3, "no position": 1, "bad date": 2, "outside grid": 1}
    assert pts.n_read == 8 and len(pts.frame) == 1 and pts.n_rejected == 7
    assert pts.frame["source_row"].tolist() == [0]
    assert pts.n_outside == 1
    assert any("outside the run grid, rejected: data rows 6" in n for n in pts.notes)
    assert "8 point(s) read, 1 kept, 7 rejected" in pts.describe()


def test_points_outside_the_grid_can_be_kept_and_flagged(tmp_path):
    # stations beyond the edge still inform interpolation near it: kept, flagged, reported
    p = _write(tmp_path / "wt.csv", "x,y,wt\n500000,8700000,0.5\n502500,8700000,0.9\n")
    pts = read_points(p, RUN, value_column="wt", crs=RUN, bounds=BOUNDS, drop_outside=False)
    assert len(pts.frame) == 2
    assert pts.frame["outside"].tolist() == [False, True]
    assert pts.rejected["outside grid"] == 0 and pts.n_outside == 1
    assert any("kept" in n and "data rows 1" in n for n in pts.notes)


def test_grid_edges_count_as_inside(tmp_path):
    p = _write(tmp_path / "wt.csv", "x,y,wt\n499000,8699000,0.5\n501000,8701000,0.6\n")
    pts = read_points(p, RUN, value_column="wt", crs=RUN, bounds=BOUNDS)
    assert len(pts.frame) == 2 and pts.n_outside == 0


def test_dates_are_parsed_as_utc(tmp_path):
    p = _write(tmp_path / "plots.csv",
               "x,y,d,when\n500000,8700000,0.3,2031-09-14\n500000,8700000,0.4,2031-09-14T12:00+07:00\n")
    pts = read_points(p, RUN, value_column="d", crs=RUN, date_column="when")
    t = pts.frame["date"]
    assert t.iloc[0] == dt.datetime(2031, 9, 14, tzinfo=dt.timezone.utc)
    assert t.iloc[1] == dt.datetime(2031, 9, 14, 5, 0, tzinfo=dt.timezone.utc)  # 12:00 at UTC+7


def test_vector_points_in_another_crs(tmp_path):
    f = gpd.GeoDataFrame({"burn_depth_m": [0.25, None]},
                         geometry=[shapely.Point(111.0, 0.0), shapely.Point(111.1, -0.1)], crs="EPSG:4326")
    path = tmp_path / "plots.gpkg"
    f.to_file(path)
    pts = read_points(path, RUN, value_column="burn_depth_m")
    assert len(pts.frame) == 1 and pts.rejected["no value"] == 1
    g = pts.frame.geometry.iloc[0]
    assert (g.x, g.y) == pytest.approx((500_000.0, 10_000_000.0), abs=1e-6)


def test_vector_non_points_are_no_position(tmp_path):
    f = gpd.GeoDataFrame({"wt": [0.3, 0.4]},
                         geometry=[shapely.Point(500000, 8700000), shapely.box(0, 0, 1, 1)], crs=RUN)
    path = tmp_path / "mixed.geojson"
    f.to_file(path, driver="GeoJSON")
    pts = read_points(path, RUN, value_column="wt")
    assert len(pts.frame) == 1 and pts.rejected["no position"] == 1


def test_lat_beyond_90_is_no_position(tmp_path):
    p = _write(tmp_path / "wt.csv", "lon,lat,wt\n111,95,0.3\n111,0,0.4\n")
    pts = read_points(p, RUN, value_column="wt")
    assert pts.rejected["no position"] == 1 and pts.frame["value"].tolist() == [0.4]
