"""The per-fire table's ids, columns and years (outputs/fires.py)."""

import datetime as dt

import geopandas as gpd
import pytest
import shapely

from peatburn.errors import PeatburnError
from peatburn.outputs import fires


def _frame(**cols):
    n = len(next(iter(cols.values())))
    return gpd.GeoDataFrame(cols, geometry=[shapely.box(i, 0, i + 1, 1) for i in range(n)], crs="EPSG:32749")


def test_id_field_default_is_the_first_text_field():
    f = _frame(area=[1.0, 2.0], label=["north", "south"], other=["x", "y"])
    assert fires.fire_ids(f, None) == (["north", "south"], "label")
    assert fires.fire_ids(f, "other") == (["x", "y"], "other")


def test_no_text_field_numbers_the_rows_and_a_wrong_field_is_one_line():
    f = _frame(area=[1.0, 2.0])
    assert fires.fire_ids(f, None) == (["1", "2"], "(row)")
    with pytest.raises(PeatburnError) as e:
        fires.fire_ids(f, "name")
    assert "\n" not in str(e.value) and "area" in str(e.value)


def test_columns_extend_for_later_features():
    cols = fires.fire_columns(True, extra=["ignition_zone"])
    i = cols.index("carbon_smouldering_t")
    assert cols[i + 1:i + 3] == ["carbon_smouldering_t_lo", "carbon_smouldering_t_hi"]
    assert cols[-1] == "ignition_zone"
    assert "carbon_smouldering_t_lo" not in fires.fire_columns(False)


def test_inventory_year_is_the_start_year_else_the_run_year():
    assert fires.inventory_year((dt.date(2031, 12, 30), dt.date(2032, 1, 5)), 2030) == 2031
    assert fires.inventory_year((None, None), 2030) == 2030
