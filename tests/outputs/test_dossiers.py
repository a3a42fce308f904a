"""Ignition columns of fires.csv and the zone dossiers in a whole run (issue 21).

The synthetic scene (tests/conftest.py) has two zones split at x = X0 + 150 m (West Block, East
Block) and two scars (A in the west, B in the east); a third scar C is added across the split.
Detections are placed by hand (pixel side 10 m, so a detection reaches a boundary within
10 / sqrt(2) = 7.07 m): A first seen inside West, B inside East, C first seen in the east 15 m
from the split and a day later in the west 10 m from it: it came into the West Block from the
East Block. The answers follow from that drawing.
"""

from __future__ import annotations

import csv
import re
from pathlib import Path

import geopandas as gpd
import pytest
import shapely
from conftest import X0, Y0, make_scene

import peatburn

DETECTIONS = [  # x, y, time, frp_mw
    (X0 + 90, Y0 - 90, "2030-08-01T05:00:00Z", 20.0),
    (X0 + 100, Y0 - 100, "2030-08-02T05:00:00Z", 15.0),
    (X0 + 216, Y0 - 144, "2030-08-03T05:00:00Z", 30.0),
    (X0 + 165, Y0 - 215, "2030-08-01T06:00:00Z", 10.0),
    (X0 + 140, Y0 - 215, "2030-08-02T06:00:00Z", 12.0),
]


def _scene(base: Path, zone_names=None):
    s = make_scene(base / "scene", shape=(120, 150), extra_config=(
        '[flaming]\ndetections = "det.csv"\ncrs = "EPSG:32749"\nfootprint_m = 10\n\n'
        "[uncertainty]\ndraws = 300\nseed = 5\n"))
    scars = gpd.read_file(s.folder / "scars.gpkg")
    c = gpd.GeoDataFrame({"scar_id": ["C"]}, geometry=[shapely.box(X0 + 130, Y0 - 230, X0 + 170, Y0 - 200)],
                         crs=scars.crs)
    gpd.GeoDataFrame(pd_concat([scars, c]), crs=scars.crs).to_file(s.folder / "scars.gpkg", layer="scars",
                                                                   driver="GPKG")
    if zone_names:
        z = gpd.read_file(s.folder / "zones.gpkg")
        z["name"] = zone_names
        z.to_file(s.folder / "zones.gpkg", layer="zones", driver="GPKG")
    rows = ["x,y,time,frp_mw"] + [f"{x},{y},{t},{f}" for x, y, t, f in DETECTIONS]
    (s.folder / "det.csv").write_text("\n".join(rows) + "\n")
    text = s.config.read_text().replace('id = "name"\n', 'id = "name"\ndossiers = true\n', 1)
    s.config.write_text(text)
    return s


def pd_concat(frames):
    import pandas as pd

    return pd.concat(frames, ignore_index=True)


@pytest.fixture(scope="module")
def run_out(tmp_path_factory):
    base = tmp_path_factory.mktemp("dossier")
    s = _scene(base)
    out = base / "out"
    peatburn.run(s.config, out, overwrite=True)
    return s, out


def _fires(out):
    with open(out / "fires.csv", newline="", encoding="utf-8") as f:
        return {r["fire"]: r for r in csv.DictReader(f)}


def test_ignition_columns(run_out):
    _, out = run_out
    f = _fires(out)
    assert f["A"]["ignition_zone"] == "West Block" and f["A"]["ignition_status"] == "inside"
    assert f["B"]["ignition_zone"] == "East Block" and f["B"]["ignition_status"] == "inside"
    assert f["C"]["ignition_zone"] == "East Block" and f["C"]["spread_to"] == "West Block"
    assert f["C"]["ignition_time"] == "2030-08-01T06:00:00Z"
    # 15 m from the split at x = X0 + 150 (hand arithmetic)
    assert float(f["C"]["ignition_boundary_distance_m"]) == pytest.approx(15.0)
    assert float(f["C"]["ignition_x"]) == X0 + 165 and float(f["C"]["ignition_footprint_m"]) == 10.0
    assert f["A"]["ignition_layer"] == "zones"


def test_dossiers_written_for_burned_zones(run_out):
    _, out = run_out
    d = out / "dossiers"
    assert sorted(p.name for p in d.glob("*.html")) == ["East_Block.html", "West_Block.html"]
    with open(d / "index.csv", newline="", encoding="utf-8") as fh:
        index = list(csv.DictReader(fh))
    assert [r["zone"] for r in index] == ["West Block", "East Block"]
    west = (d / index[0]["file"]).read_text(encoding="utf-8")
    assert "came in" in west and "started inside this zone" in west
    assert "not a legal finding" in west and "dangerous ground" in west
    assert "SHA-256" in west and re.search(r"[0-9a-f]{64}", west)
    assert "data:image/png;base64," in west
    assert "Field verification plan" in west
    # the provenance record names the dossiers among the outputs
    import json

    prov = json.loads((out / "provenance.json").read_text())
    assert "dossiers/index.csv" in prov["outputs"] and f"dossiers/{index[0]['file']}" in prov["outputs"]
    # issue 22: the dossiers are part of the checked set (SHA256SUMS and provenance.json's record)
    from peatburn.outputs.checksums import check_outputs

    assert f"dossiers/{index[0]['file']}" in prov["output_sha256"] and check_outputs(out) == []


def test_field_plan_counts_and_plots(run_out):
    _, out = run_out
    d = out / "dossiers"
    plots = sorted(d.glob("*_plots.csv"))
    for p in plots:
        with open(p, newline="", encoding="utf-8") as fh:
            rows = list(csv.DictReader(fh))
        assert rows and all(r["measure"] in ("depth pin", "depth pin + density core") for r in rows)
        assert all(-90 <= float(r["lat"]) <= 90 for r in rows)


# ----------------------------------------------------------------------------- in a real browser

def test_hostile_zone_ids_dossiers_render_in_chromium_and_print(tmp_path):
    """Zones named with path traversal and markup get safe, distinct files inside dossiers/; chromium
    draws such a dossier: the DOM holds the name as escaped text (WHATWG HTML serialization writes a
    text node's < > & as &lt; &gt; &amp;), the screenshot is not blank; ``run --pdf`` prints every
    dossier (a PDF starts with %PDF-, ISO 32000-1 7.5.2); a later run leaves no stale dossier."""
    import subprocess

    import matplotlib.image as mpimg
    import numpy as np
    from click.testing import CliRunner

    from peatburn.cli.main import cli

    from test_browser import FLAGS, _chromium_or_skip

    exe = _chromium_or_skip()
    s = _scene(tmp_path, zone_names=['../../<b>Bold & "Co"</b>', '..\\..\\<b>Bold & "Co"</b>'])
    out = tmp_path / "o"
    res = CliRunner().invoke(cli, ["run", str(s.config), "--out", str(out), "--pdf", "--quiet"])
    assert res.exit_code == 0, res.output
    d = out / "dossiers"
    htmls = sorted(d.glob("*.html"))
    assert len(htmls) == 2 and len({h.name.casefold() for h in htmls}) == 2
    assert all(re.fullmatch(r"b_Bold_Co_b-[0-9a-f]{10}\.html", h.name) for h in htmls), htmls
    assert not list(tmp_path.glob("**/Bold*")) and not list(tmp_path.glob("*.html"))
    for h in htmls:
        assert h.with_suffix(".pdf").read_bytes().startswith(b"%PDF-")
        text = h.read_text(encoding="utf-8")
        assert "<b>Bold" not in text and "&lt;b&gt;Bold &amp;" in text
    bold = htmls[0]
    flags = [*FLAGS, f"--user-data-dir={tmp_path / 'profile'}"]
    dom = subprocess.run([exe, *flags, "--dump-dom", bold.as_uri()], capture_output=True, timeout=120,
                         stdin=subprocess.DEVNULL).stdout.decode("utf-8", errors="replace")
    assert "</html>" in dom and "&lt;b&gt;Bold &amp;" in dom and "<b>Bold" not in dom
    assert 'id="fires"' in dom and 'id="provenance"' in dom
    png = tmp_path / "d.png"
    subprocess.run([exe, *flags, "--hide-scrollbars", f"--screenshot={png}", "--window-size=1100,2000",
                    bold.as_uri()], capture_output=True, timeout=120, stdin=subprocess.DEVNULL)
    img = mpimg.imread(png)[..., :3]
    sat = img.reshape(-1, 3).max(axis=1) - img.reshape(-1, 3).min(axis=1)
    assert (sat > 0.35).mean() > 0.01  # the map's colours are drawn
    assert len(np.unique((img * 255).astype(np.uint8).reshape(-1, 3), axis=0)) > 200
    # a second run into the same folder with other zones leaves no stale dossier (HTML or PDF) behind
    z = gpd.read_file(s.folder / "zones.gpkg")
    z["name"] = ["North", "South"]
    z.to_file(s.folder / "zones.gpkg", layer="zones", driver="GPKG")
    peatburn.run(s.config, out, overwrite=True)
    assert sorted(p.name for p in d.iterdir()) == ["North.html", "North_plots.csv", "South.html",
                                                   "South_plots.csv", "index.csv"]


def test_east_dossier_says_where_fire_c_went(run_out):
    _, out = run_out
    east = (out / "dossiers" / "East_Block.html").read_text(encoding="utf-8")
    # fire C started in the East Block and was later detected in the West Block
    assert "later detected in: West Block" in east
