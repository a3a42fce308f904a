"""report.html in a real browser: headless chromium draws it, escapes input text, prints it to PDF.

A tiny synthetic scene is run once with one zone renamed to ``<b>Bold & "Co"</b>``. Chromium
renders the report to a PNG screenshot and dumps its DOM. The screenshot must not be blank (over
1 % of the pixels differ from the page background, many distinct colours, and the coloured pixels
that only the figures carry); the DOM must hold the zone name as escaped text: the HTML
serialization algorithm (WHATWG HTML, "Serializing HTML fragments") writes ``<`` ``>`` ``&`` of a
text node as ``&lt;`` ``&gt;`` ``&amp;``, so a name drawn as text appears as ``&lt;b&gt;Bold``, and a
name parsed as markup would appear as a ``<b>`` element instead. A PDF starts with ``%PDF-`` and
ends with ``%%EOF`` (ISO 32000-1, 7.5.2 and 7.5.5); an A4 page is 210 mm x 297 mm = 595.3 pt x
841.9 pt (ISO 216; 1 pt = 1/72 in = 25.4/72 mm).

Skipped only when chromium is missing and the environment variable CI is not set; on CI (which
installs Debian's chromium) a missing chromium fails.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
from pathlib import Path

import geopandas as gpd
import matplotlib.image as mpimg
import numpy as np
import pytest
from click.testing import CliRunner
from conftest import make_scene

import peatburn
from peatburn.cli.main import cli
from peatburn.errors import InputFileError, PeatburnError
from peatburn.outputs import pdf

MARKUP_NAME = '<b>Bold & "Co"</b>'
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync"]


def _chromium_or_skip() -> str:
    exe = shutil.which("chromium") or shutil.which("chromium-browser")
    if exe:
        return exe
    if os.environ.get("CI"):
        pytest.fail("chromium is not installed but CI is set: CI must install it (apt-get install -y chromium)")
    pytest.skip("chromium not installed (apt-get install chromium); this test runs on CI")


@pytest.fixture(scope="module")
def chromium() -> str:
    return _chromium_or_skip()


@pytest.fixture(scope="module")
def markup_run(tmp_path_factory, chromium):
    """The scene run with the first zone named with markup; returns the run's output folder."""
    base = tmp_path_factory.mktemp("browser")
    scene = make_scene(base / "scene", shape=(120, 150))
    zones = gpd.read_file(scene.folder / "zones.gpkg", layer="zones")
    zones.loc[0, "name"] = MARKUP_NAME
    zones.to_file(scene.folder / "zones.gpkg", layer="zones", driver="GPKG")
    out = base / "out"
    peatburn.run(scene.config, out, overwrite=True)
    return scene, out


def _chromium(exe: str, profile: Path, *args: str) -> subprocess.CompletedProcess:
    return subprocess.run([exe, *FLAGS, f"--user-data-dir={profile}", *args], capture_output=True, timeout=120,
                          stdin=subprocess.DEVNULL)


def test_report_draws_in_chromium(chromium, markup_run, tmp_path):
    _, out = markup_run
    png = tmp_path / "report.png"
    res = _chromium(chromium, tmp_path / "profile", "--hide-scrollbars", f"--screenshot={png}",
                    "--window-size=1200,2400", (out / "report.html").as_uri())
    assert png.is_file(), res.stderr.decode(errors="replace")[-2000:]
    img = mpimg.imread(png)[..., :3]
    assert img.shape[:2] == (2400, 1200)
    rgb = (img * 255).round().astype(np.uint8).reshape(-1, 3)
    colours, counts = np.unique(rgb, axis=0, return_counts=True)
    background = colours[np.argmax(counts)]
    differs = np.abs(rgb.astype(int) - background.astype(int)).max(axis=1) > 8
    assert differs.mean() > 0.01                    # over 1 % of the pixels are not background
    assert len(colours) > 200                       # text, tables and figures: many colours
    # figures: strongly coloured pixels (max - min channel > 0.35) come from the maps and charts;
    # text, rules and backgrounds of the page are grey or pale
    sat = img.reshape(-1, 3).max(axis=1) - img.reshape(-1, 3).min(axis=1)
    assert (sat > 0.35).mean() > 0.02


def test_zone_name_with_markup_shows_as_text(chromium, markup_run, tmp_path):
    _, out = markup_run
    res = _chromium(chromium, tmp_path / "profile", "--dump-dom", (out / "report.html").as_uri())
    dom = res.stdout.decode("utf-8", errors="replace")
    assert "</html>" in dom, res.stderr.decode(errors="replace")[-2000:]
    assert "&lt;b&gt;Bold" in dom
    assert "<b>Bold" not in dom
    assert dom.count('&lt;b&gt;Bold &amp; "Co"&lt;/b&gt;') >= 2   # the zone table and the gas table
    # the figures are in the page: embedded PNGs, nothing loaded from elsewhere
    imgs = re.findall(r'<img [^>]*src="([^"]{0,40})', dom)
    assert len(imgs) >= 5 and all(s.startswith("data:image/png;base64,") for s in imgs)
    assert 'id="headline"' in dom and 'id="provenance"' in dom


def test_print_pdf(chromium, markup_run, tmp_path):
    _, out = markup_run
    target = tmp_path / "report.pdf"
    path = pdf.print_pdf(out / "report.html", target)
    assert path == target
    data = target.read_bytes()
    assert data.startswith(b"%PDF-") and data.rstrip().endswith(b"%%EOF")
    assert len(re.findall(rb"/Type\s*/Page\b", data)) >= 2           # the report runs over several pages
    boxes = re.findall(rb"/MediaBox\s*\[\s*0\s+0\s+([\d.]+)\s+([\d.]+)\s*\]", data)
    assert boxes
    w, h = (float(v) for v in boxes[0])
    assert w == pytest.approx(210 / 25.4 * 72, abs=1.0) and h == pytest.approx(297 / 25.4 * 72, abs=1.0)
    assert not list(tmp_path.glob(".report.pdf.*"))                  # no temporary file left behind


def test_cli_run_with_pdf(chromium, markup_run, tmp_path):
    scene, _ = markup_run
    res = CliRunner().invoke(cli, ["run", str(scene.config), "--out", str(tmp_path / "o"), "--pdf"])
    assert res.exit_code == 0, res.output
    assert (tmp_path / "o" / "report.pdf").read_bytes().startswith(b"%PDF-")
    assert "report (PDF):" in res.output
    # issue 22: the PDF is printed inside the staging folder, so it belongs to the checked set
    from peatburn.outputs.checksums import check_outputs

    assert "  report.pdf\n" in (tmp_path / "o" / "SHA256SUMS").read_text() and check_outputs(tmp_path / "o") == []


# ----------------------------------------------------------------------------- without chromium


def test_missing_chromium_is_a_clear_error(tmp_path, monkeypatch):
    monkeypatch.setenv("PATH", str(tmp_path))  # an empty folder: no chromium on PATH
    with pytest.raises(InputFileError, match=r"apt-get install chromium"):
        pdf.find_chromium()
    with pytest.raises(InputFileError, match="not found"):
        pdf.find_chromium(tmp_path / "no-such-chromium")
    html = tmp_path / "report.html"
    html.write_text("<!doctype html><title>x</title>")
    with pytest.raises(PeatburnError, match=r"apt-get install chromium"):
        pdf.print_pdf(html)
    assert not (tmp_path / "report.pdf").exists()
    # the CLI says so in one line, exit status 2, before running anything
    res = CliRunner().invoke(cli, ["run", str(tmp_path / "missing.toml"), "--out", str(tmp_path / "o"), "--pdf"])
    assert res.exit_code == 2 and "apt-get install chromium" in res.output and "Traceback" not in res.output
    assert not (tmp_path / "o").exists()


def test_print_pdf_needs_the_html(tmp_path):
    with pytest.raises(InputFileError, match="not found"):
        pdf.print_pdf(tmp_path / "nothing.html")


def test_pdf_flags_keep_chromium_off_the_network():
    cmd = pdf.chromium_command("chromium", "/tmp/p", "--print-to-pdf=x.pdf", "file:///r.html")
    for flag in FLAGS + ["--user-data-dir=/tmp/p"]:
        assert flag in cmd
