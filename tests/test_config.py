"""Configuration: contract keys, units, ranges and one-line errors."""

import pytest

from peatburn.config import RasterRef, load_config
from peatburn.errors import ConfigError, MissingInputError, PhysicalRangeError, UnitError

BASE = """
[run]
name = "t"
[burned_area]
path = "scars.gpkg"
[depth.survey]
pre = "pre.tif"
post = "post.tif"
interval_years = 3.0
subsidence_rate = "{sub}"
[peat]
thickness = "thick.tif"
bulk_density = {bd}
carbon_fraction = {cf}
"""


def _cfg(tmp_path, sub="3 cm/yr", bd='"0.1 g/cm^3"', cf="0.55", extra=""):
    p = tmp_path / "c.toml"
    p.write_text(BASE.format(sub=sub, bd=bd, cf=cf) + extra)
    return p


def test_quantities_and_paths(tmp_path):
    cfg = load_config(_cfg(tmp_path, bd='{ raster = "bd.tif", units = "kg/m^3" }'))
    assert cfg.survey.subsidence_rate == pytest.approx(0.03)  # 3 cm/yr in m/yr (hand conversion)
    assert isinstance(cfg.peat.bulk_density, RasterRef)
    assert cfg.peat.bulk_density.scale == pytest.approx(1e-3)  # kg/m^3 -> g/cm^3
    assert cfg.peat.bulk_density.path == tmp_path / "bd.tif"
    assert cfg.survey.pre == tmp_path / "pre.tif"


def test_survey_dates_give_interval(tmp_path):
    p = tmp_path / "c.toml"
    p.write_text(BASE.format(sub="0.03", bd="0.1", cf="0.55").replace(
        "interval_years = 3.0", "pre_date = 2028-07-01\npost_date = 2031-07-01"))
    # 1 Jul 2028 -> 1 Jul 2031 is 3 x 365 = 1095 days (29 Feb 2028 falls before the start);
    # / 365.25 days per Julian year = 2.998 yr
    assert load_config(p).survey.interval_years == pytest.approx(1095 / 365.25)


def test_unknown_key_suggests(tmp_path):
    with pytest.raises(ConfigError, match="unknown key 'peat.bulk_densty'; did you mean 'bulk_density'"):
        p = _cfg(tmp_path)
        p.write_text(p.read_text().replace("bulk_density", "bulk_densty"))
        load_config(p)


def test_missing_depth_table_is_a_tier1_only_run(tmp_path):
    # no survey and no water table: accepted as an IPCC Tier 1 run (issue 14), not an error
    p = _cfg(tmp_path)
    kept = [block for block in p.read_text().split("\n[") if not block.startswith("depth")]
    p.write_text("\n[".join(kept))
    assert load_config(p).tier1_only


@pytest.mark.parametrize("table, what_to_add", [
    ("burned_area", "add [burned_area] with `path`"),
    ("peat", "add [peat] with `bulk_density` and `carbon_fraction`"),
])
def test_missing_table_is_named_with_what_to_add(tmp_path, table, what_to_add):
    p = _cfg(tmp_path)
    kept = [block for block in p.read_text().split("\n[") if not block.startswith(table)]
    p.write_text("\n[".join(kept))
    with pytest.raises(ConfigError) as err:
        load_config(p)
    msg = str(err.value)
    assert f"no [{table}] table" in msg and what_to_add in msg and "[]" not in msg, msg


def test_toml_syntax_error_names_line(tmp_path):
    p = tmp_path / "c.toml"
    p.write_text("[run]\nname = \"a\nyear = 2030\n")
    with pytest.raises(ConfigError, match="line 2"):
        load_config(p)


def test_wrong_dimension(tmp_path):
    with pytest.raises(UnitError, match="subsidence_rate.*convertible to m/yr"):
        load_config(_cfg(tmp_path, sub="3 kg/yr"))


@pytest.mark.parametrize("bd, hint", [("100", "kg/m\\^3"), ("0.001", "outside the plausible range")])
def test_absurd_bulk_density(tmp_path, bd, hint):
    with pytest.raises(PhysicalRangeError, match=hint):
        load_config(_cfg(tmp_path, bd=bd))


def test_carbon_fraction_percent_hint(tmp_path):
    with pytest.raises(PhysicalRangeError, match="percent"):
        load_config(_cfg(tmp_path, cf="55"))


def test_negative_interval(tmp_path):
    p = _cfg(tmp_path)
    p.write_text(p.read_text().replace("interval_years = 3.0", "interval_years = -1"))
    with pytest.raises(PhysicalRangeError, match="positive"):
        load_config(p)


def test_wrong_type(tmp_path):
    p = _cfg(tmp_path)
    p.write_text(p.read_text().replace('name = "t"', 'name = "t"\nyear = "last year"'))
    with pytest.raises(ConfigError, match="run.year"):
        load_config(p)


def test_missing_config():
    with pytest.raises(MissingInputError):
        load_config("/nonexistent/c.toml")


def test_force_ranges_allows_unusual_but_not_impossible(tmp_path):
    p = _cfg(tmp_path, bd="0.6", extra="")
    p.write_text(p.read_text().replace('name = "t"', 'name = "t"\nforce_ranges = true'))
    assert load_config(p).peat.bulk_density == pytest.approx(0.6)
    p.write_text(p.read_text().replace("carbon_fraction = 0.55", "carbon_fraction = 1.5"))
    with pytest.raises(PhysicalRangeError, match="mass fraction"):
        load_config(p)


def test_dated_water_table_rasters(tmp_path):
    # depth.water_table.depth as a list of tables {path, date}: TOML dates or ISO strings, sorted by date;
    # a bad date, a date given twice or another key is one line naming the key
    from peatburn.config import config_from_dict
    from peatburn.errors import ConfigError
    import datetime

    def cfg(depth):
        return config_from_dict({"run": {"name": "x"}, "burned_area": {"path": "s.gpkg"},
                                 "peat": {"bulk_density": 0.1, "carbon_fraction": 0.55},
                                 "depth": {"water_table": {"depth": depth, "units": "cm"}}},
                                base=tmp_path, source=tmp_path / "c.toml")

    c = cfg([{"path": "b.tif", "date": "2031-09-15"}, {"path": "a.tif", "date": datetime.date(2031, 8, 1)}])
    wt = c.water_table
    assert [d for _, d in wt.dated_rasters] == ["2031-08-01", "2031-09-15"] and wt.raster is None
    assert wt.dated_rasters[0][0].scale == pytest.approx(0.01)  # units apply to every raster (pint: 1 cm = 0.01 m)
    assert c.input_paths()["depth.water_table.depth[1]"] == tmp_path / "b.tif"
    for bad, match in (([{"path": "a.tif", "date": "15/09/2031"}], r"depth\[0\]\.date"),
                       ([{"path": "a.tif", "date": "2031-08-01"}, {"path": "b.tif", "date": "2031-08-01"}],
                        "more than one raster dated 2031-08-01"),
                       ([{"path": "a.tif", "when": "2031-08-01"}], r"depth\[0\]` takes `path`")):
        with pytest.raises(ConfigError, match=match) as e:
            cfg(bad)
        assert "\n" not in str(e.value)
