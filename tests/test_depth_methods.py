"""The one table of depth methods (peatburn.depth_methods) and the one vocabulary of sums: every
consumer reads them. Checks of consistency between modules (no outside reference applies)."""

import numpy as np

from peatburn import config, depth_methods as dm
from peatburn.engine import intervals, sums
from peatburn.outputs import fires, report, tables
from peatburn.science import uncertainty as unc


def test_codes_are_distinct_and_leave_zero_and_the_mineral_code_free():
    codes = [m.code for m in dm.DEPTH_METHODS]
    assert len(set(codes)) == len(codes)
    assert 0 not in codes and dm.MINERAL_CODE not in codes
    assert max(codes) < 256  # depth_method.tif is uint8


def test_raster_description_names_every_code():
    # the description written before the table existed (peatburn 0.1.0 runs), kept byte for byte
    assert dm.raster_description() == "depth method: 1 survey, 2 water-table model, 3 IPCC Tier 1 default"


def test_consumers_read_the_table():
    assert sums.METHOD_CODES == dm.METHOD_CODES and sums.MINERAL_CODE == dm.MINERAL_CODE
    assert tables.METHODS == dm.METHODS
    assert report.METHOD_COLOURS == {m.name: m.colour for m in dm.DEPTH_METHODS}
    assert report.METHOD_LABELS == {m.name: m.label for m in dm.DEPTH_METHODS}
    cols = tables.zone_columns()
    for m in dm.METHODS:
        for key in (f"area_m2_{m}", f"peat_kg_{m}", f"carbon_kg_{m}"):
            assert key in sums.SUM_KEYS
        assert f"area_{m}_ha" in cols and f"carbon_share_{m}" in cols
        assert f"carbon_share_{m}" in fires.BASE_COLUMNS


def test_configuration_sections_and_inputs_exist():
    for m in dm.DEPTH_METHODS:
        parent, child = m.section.rsplit(".", 1)
        assert child in config._SCHEMA[parent], m.section
        for key in m.inputs:
            sect, name = key.rsplit(".", 1)
            assert name in config._SCHEMA[sect], key


def test_one_vocabulary_of_sums():
    """The uncertainty model reads the engine's sums by the engine's names; only the flaming sums,
    made by the above-ground route, are not block sums."""
    assert set(unc.SUM_KEYS) - set(sums.SUM_KEYS) == {"flaming_dm_fre_kg", "flaming_dm_area_kg", "flaming_carbon_kg",
                                                      "flaming_fre_ssq_kg2"}  # issue 16: FRE integration
    assert set(intervals.MODEL_SUMS) == set(unc.SUM_KEYS) & set(sums.SUM_KEYS)


def test_a_zone_sum_reaches_the_model_under_its_own_name():
    acc = {k: np.arange(3.0) + i for i, k in enumerate(sums.SUM_KEYS)}
    out = intervals._model_sums(acc, np.array([0, 2]), None, False, 0.5)
    for k in intervals.MODEL_SUMS:
        np.testing.assert_array_equal(out[k], acc[k][[0, 2]])
