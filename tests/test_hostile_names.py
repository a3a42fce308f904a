"""Names a careless or hostile user may give: labels reserved for the tool's own rows, spreadsheet
formulas, control characters. Expected texts are written by hand; the formula rule is the OWASP
advice for CSV files ("CSV Injection": prefix text beginning with = + - @ tab CR with an apostrophe)."""

import re
import csv

import geopandas as gpd
import pytest
from click.testing import CliRunner

import peatburn
from conftest import make_scene
from peatburn import names
from peatburn.cli.main import cli
from peatburn.io.writers import spreadsheet_safe, write_csv

FORMULA = '=HYPERLINK("http://x","y")'
ESCAPED = "West\x1b[31mBlock\x00\u202e"


def _run_cli(*args):
    return CliRunner().invoke(cli, list(map(str, args)))


def _rename_zones(scene, ids):
    z = gpd.read_file(scene.folder / "zones.gpkg")
    z["name"] = ids
    z.to_file(scene.folder / "zones.gpkg", driver="GPKG")


# --------------------------------------------------------------------------- units

@pytest.mark.parametrize("text, expected", [
    ("=1+1", "'=1+1"), ("+SUM(A1)", "'+SUM(A1)"), ("-2+3", "'-2+3"), ("@cmd", "'@cmd"),
    ("\tx", "'\tx"), ("\rx", "'\rx"),
    ("-5", "-5"), ("+1.5e3", "+1.5e3"), ("-.25", "-.25"),  # plain numbers: never formulas
    ("West Block", "West Block"), ("a=b", "a=b"), ("", ""),
])
def test_spreadsheet_safe(text, expected):
    assert spreadsheet_safe(text) == expected


def test_csv_neutralises_text_but_not_numbers(tmp_path):
    rows = [{"zone": FORMULA, "v": -1.5, "n": -3}, {"zone": "@x", "v": 2.0, "n": 4}]
    write_csv(tmp_path / "t.csv", rows, ["zone", "v", "n"])
    got = list(csv.reader(open(tmp_path / "t.csv", newline="")))
    assert got == [["zone", "v", "n"], ["'" + FORMULA, "-1.5", "-3"], ["'@x", "2.0", "4"]]


@pytest.mark.parametrize("text, expected", [
    ("West\x1b[31mBlock\x00", "West[31mBlock"), ("a\tb\nc\r", "a b c "), ("ok\u202egnp", "okgnp"),
    ("\x7fdel\x9bcsi", "delcsi"), ("Zarendi Hulu", "Zarendi Hulu"), ("é ü 漢", "é ü 漢"),
])
def test_printable(text, expected):
    assert names.printable(text) == expected


def test_reserved_scar_layer_matches_the_pipeline():
    from peatburn.engine.sums import SCAR_LAYER

    assert names.SCAR_LAYER == SCAR_LAYER


# --------------------------------------------------------------------------- runs

def test_formula_and_control_characters_in_zone_ids(tmp_path):
    s = make_scene(tmp_path / "s")
    _rename_zones(s, [FORMULA, ESCAPED])
    res = _run_cli("run", s.config, "--out", tmp_path / "o")
    assert res.exit_code == 0, res.output
    assert "\x1b" not in res.output
    rows = list(csv.DictReader(open(tmp_path / "o" / "zones.csv", newline="", encoding="utf-8")))
    zones = [r["zone"] for r in rows if r["layer"] == "zones"]
    assert zones == ["'" + FORMULA, "West[31mBlock", "(outside every zone)"]
    html = (tmp_path / "o" / "report.html").read_text(encoding="utf-8")
    assert "\x1b" not in html and "\x00" not in html and "\u202e" not in html
    # the API keeps the text as given (without the control characters)
    r = peatburn.run(s.config, tmp_path / "o2")
    assert [z["zone"] for z in r.zones if z["layer"] == "zones"][:2] == [FORMULA, "West[31mBlock"]


@pytest.mark.parametrize("layer_name", ["total", " Total ", "__scars__"])
def test_zone_layer_may_not_take_a_reserved_name(tmp_path, layer_name):
    s = make_scene(tmp_path / "s")
    s.config.write_text(s.config.read_text().replace('id = "name"\n', f'id = "name"\nname = "{layer_name}"\n'))
    res = _run_cli("check", s.config)
    assert res.exit_code == 2 and len(res.output.strip().splitlines()) == 1
    assert "is reserved for the run total" in res.output and "another `name`" in res.output


def test_zone_id_may_not_take_the_outside_label(tmp_path):
    s = make_scene(tmp_path / "s")
    s.config.write_text(s.config.read_text().replace('id = "name"\n', 'id = "name"\nname = "total_zones"\n'))
    _rename_zones(s, ["all", "(Outside every zone)"])
    res = _run_cli("run", s.config, "--out", tmp_path / "o")
    assert res.exit_code == 2 and len(res.output.strip().splitlines()) == 1
    assert "reserved for the area outside every zone" in res.output


def test_total_row_is_unique_with_a_zone_named_all(tmp_path):
    s = make_scene(tmp_path / "s")
    _rename_zones(s, ["all", "total"])
    r = peatburn.run(s.config, tmp_path / "o")
    rows = list(csv.DictReader(open(tmp_path / "o" / "zones.csv", newline="")))
    assert [(x["layer"], x["zone"]) for x in rows].count(("total", "all")) == 1
    assert [(x["layer"], x["zone"]) for x in r.zones][-1] == ("total", "all")


def test_run_name_with_control_characters(tmp_path):
    s = make_scene(tmp_path / "s")
    text = s.config.read_text()
    assert 'name = "synthetic scene"' in text
    s.config.write_text(text.replace('name = "synthetic scene"', 'name = "fire\\u001b]0;owned\\u0007 season"', 1))
    res = _run_cli("check", s.config)
    assert res.exit_code == 0, res.output
    assert "\x1b" not in res.output and "\x07" not in res.output and "fire]0;owned season" in res.output


# --------------------------------------------------------------------------- absurd sizes

@pytest.mark.parametrize("section, line, words", [
    ("[uncertainty]", "draws = 1000000000", "`uncertainty.draws` = 1000000000 is more than the 1,000,000"),
    ("[run]", "block_size = 100000", "`run.block_size` must be an integer from 16 to 4096"),
])
def test_absurd_sizes_are_refused_before_any_pixel(tmp_path, section, line, words):
    s = make_scene(tmp_path / "s")
    text = s.config.read_text()
    if section == "[run]":
        text = text.replace("block_size = 64", line)
    else:
        text += f"\n{section}\n{line}\n"
    s.config.write_text(text)
    for args in (("check", s.config), ("run", s.config, "--out", tmp_path / "o")):
        res = _run_cli(*args)
        assert res.exit_code == 2 and len(res.output.strip().splitlines()) == 1, res.output
        assert words in res.output
    assert not (tmp_path / "o").exists()


def test_check_states_the_cost_of_the_draws(tmp_path):
    # 3 zone rows (2 zones and the remainder) + the total = 4; 1,000,000 draws: at 61 ns per draw
    # and zone, 0.244 s on one thread; memory: 8 arrays x 16 zones x 1e6 draws x 8 B = 1.024e9 B
    # per thread (hand arithmetic).
    s = make_scene(tmp_path / "s")
    s.config.write_text(s.config.read_text() + "\n[uncertainty]\ndraws = 1000000\n")
    res = _run_cli("check", s.config)
    assert res.exit_code == 0, res.output
    assert "uncertainty: 1,000,000 draws x 4 zone rows: about 0 s and at most " in res.output
    from peatburn.engine.intervals import draw_cost

    assert draw_cost(1_000_000, 4, threads=1) == pytest.approx((0.244, 1.024e9))


def test_absurd_resolution_is_refused(tmp_path):
    s = make_scene(tmp_path / "s")
    s.config.write_text(s.config.read_text().replace("block_size = 64", 'block_size = 64\nresolution = "1 um"'))
    res = _run_cli("check", s.config)
    assert res.exit_code == 2 and "`run.resolution` = 1e-06 m; it must be at least 0.01 m" in res.output


def test_grid_side_beyond_the_geotiff_limit_is_refused():
    from affine import Affine
    from rasterio.crs import CRS

    from peatburn.errors import GridError
    from peatburn.grid import RunGrid

    with pytest.raises(GridError, match="2147483647"):  # 2^31 - 1, GDAL's int raster sizes
        RunGrid(CRS.from_epsg(32749), Affine(1e-3, 0, 0, 0, -1e-3, 0), 2**31, 10)


def test_draw_memory_does_not_grow_with_the_cores(monkeypatch):
    # On a 64-core machine each thread would hold 8 arrays of 16 zones x draws: with 1,000,000
    # draws 64 x 1.024e9 B. The threads are capped so that the draws stay within 50 million floats
    # or one thread's least (hand arithmetic: 5e7 // (8 x 16 x 1e4) = 39 threads at 10,000 draws).
    from peatburn.engine import intervals

    monkeypatch.setattr(intervals, "_threads", lambda: 64)
    assert intervals._draw_threads(1_000_000) == 1
    assert intervals._draw_threads(10_000) == 39
    assert intervals._draw_threads(100) == 64
    assert intervals.draw_cost(1_000_000, 10)[1] == pytest.approx(1.024e9)


# ----------------------------------------------------------------------------- dossier file names (issue 21)

HOSTILE_IDS = ["../../etc/passwd", "..", ".", "", "/abs/path", "C:\\\\win\\\\x", "CON", "nul.txt", "a/b", "a\\\\b",
               "Alpha", "alpha", "ALPHA", "x" * 300, "\u202eevil", "tab\there", "index", "Bloc Nord", "Bloc_Nord",
               "émile", "e\u0301mile", "<script>", "a\x00b", "-rf", ".hidden"]


def test_file_stems_are_safe_and_distinct():
    from peatburn.names import MAX_STEM, file_stems

    stems = file_stems(HOSTILE_IDS)
    assert len(stems) == len(HOSTILE_IDS)
    assert len({s.casefold() for s in stems}) == len(stems)  # distinct on case-insensitive file systems
    for s in stems:
        assert s and re.fullmatch(r"[A-Za-z0-9][A-Za-z0-9._-]*", s), s
        assert ".." not in s and "/" not in s and "\\" not in s
        assert len(s) <= len("zone-") + MAX_STEM + 11 + 3
        assert s.split(".")[0].casefold() not in {"con", "nul", "index"}
    # names that would clash all get the hash suffix, whatever their order; others keep a readable stem
    assert stems[HOSTILE_IDS.index("Alpha")].startswith("Alpha-")
    assert stems[HOSTILE_IDS.index("alpha")].startswith("alpha-")
    assert stems[HOSTILE_IDS.index("Bloc_Nord")].startswith("Bloc_Nord-")
    assert stems[HOSTILE_IDS.index("-rf")] == "rf" and stems[HOSTILE_IDS.index("tab\there")] == "tab_here"
    assert stems[HOSTILE_IDS.index("CON")] == "zone-CON" and stems[HOSTILE_IDS.index("index")].startswith("index-")
    assert file_stems(["Bloc Nord", "Other"]) == ["Bloc_Nord", "Other"]
    assert file_stems(list(reversed(HOSTILE_IDS))) == list(reversed(stems))
    # deterministic
    assert file_stems(HOSTILE_IDS) == stems


def test_file_stems_stay_inside_their_folder(tmp_path):
    from peatburn.names import file_stems

    for s in file_stems(HOSTILE_IDS):
        p = (tmp_path / f"{s}.html").resolve()
        assert p.parent == tmp_path.resolve()
