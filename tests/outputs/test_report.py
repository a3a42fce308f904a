"""Tests of report.html (peatburn.outputs.report), without a browser.

The demo region is run once (a small grid); the report is parsed with the standard library's
HTMLParser. Expected values come from outside the report code: the published GWP-100 of CH4 in AR6
(27.0, IPCC AR6 WG1 Table 7.15, as checked in docs/sources.md), SHA-256 digests computed here with
hashlib, the HTML escaping rules of the markupsafe documentation (``& < > " '`` become ``&amp;
&lt; &gt; &#34; &#39;``), the numbers of zones.csv read with the csv module, and hand arithmetic
written out beside each check.
"""

from __future__ import annotations

import base64
import copy
import csv
import dataclasses
import hashlib
import io
import json
from html.parser import HTMLParser
from pathlib import Path

import matplotlib.image as mpimg
import numpy as np
import pytest

import peatburn
from peatburn.config import load_config
from peatburn.demo import make_demo_region
from peatburn.outputs import report
from peatburn.outputs.tables import INTERVAL_COLUMNS
from peatburn.engine.runner import load_factors

SECTIONS = ["headline", "cautions", "maps", "zones", "timeline", "methods", "qa", "field-plots", "uncertainty",
            "inventory", "sources", "notes", "provenance"]


class Page(HTMLParser):
    """Section ids, the text of each section, every tag with its attributes."""

    def __init__(self, text: str):
        super().__init__(convert_charrefs=True)
        self.sections: list[str] = []
        self.text: dict[str, list[str]] = {}
        self.tags: list[tuple[str, dict]] = []
        self._current: str | None = None
        self.feed(text)

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags.append((tag, a))
        if tag == "section" and a.get("id"):
            self._current = a["id"]
            self.sections.append(a["id"])
            self.text[a["id"]] = []

    def handle_endtag(self, tag):
        if tag == "section":
            self._current = None

    def handle_data(self, data):
        if self._current:
            self.text[self._current].append(data)

    def section(self, name: str) -> str:
        return " ".join(" ".join(self.text[name]).split())

    def images(self) -> list[str]:
        return [a["src"] for t, a in self.tags if t == "img"]


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    """The demo region on a small grid, run once: (out folder, result, cfg, prov, factors, inputs folder)."""
    base = tmp_path_factory.mktemp("report_demo")
    region = make_demo_region(base / "inputs", shape=(200, 240), pixel_size=2.0)
    cfg = load_config(region.config_path)
    result = peatburn.run(cfg, base / "out", overwrite=True)
    prov = json.loads((base / "out" / "provenance.json").read_text())
    return base / "out", result, cfg, prov, load_factors(cfg), base / "inputs"


@pytest.fixture(scope="module")
def page(demo):
    return Page((demo[0] / "report.html").read_text(encoding="utf-8"))


def shown(v: float) -> str:
    """The report's rule for a number, written out independently: from 1000 up, whole numbers with a
    thousands separator (17374.06 -> "17,374"); below, 3 significant digits (365.397 -> "365",
    0.2 -> "0.200")."""
    if abs(float(f"{v:.3g}")) >= 1000:
        return f"{v:,.0f}"
    return f"{v:#.3g}".rstrip(".")


def _variant(demo, name, result) -> Page:
    out, _, cfg, prov, factors, _ = demo
    path = report.write_report(out / name, result, cfg, prov, factors)
    return Page(path.read_text(encoding="utf-8"))


# ----------------------------------------------------------------------------- the demo's report


def test_demo_report_has_every_section_in_order(page):
    assert page.sections == SECTIONS


def test_report_is_self_contained(page, demo):
    text = (demo[0] / "report.html").read_text(encoding="utf-8")
    assert not any(t in ("script", "link", "iframe", "object", "embed") for t, _ in page.tags)
    for tag, attrs in page.tags:
        for key in ("src", "href", "srcset", "data"):
            v = attrs.get(key)
            if v is None:
                continue
            if key == "href":
                assert v.startswith("#"), (tag, v)  # only links within the page
            else:
                assert v.startswith("data:image/png;base64,"), (tag, v[:40])
    assert "url(" not in text and "@import" not in text and "http://" not in text.replace("xmlns", "")


def test_figures_are_embedded_pngs_that_draw(page):
    srcs = page.images()
    # burn depth map, carbon map, method map, zone chart, method-share chart, daily chart
    assert len(srcs) >= 6
    for src in srcs:
        png = base64.b64decode(src.split(",", 1)[1])
        assert png[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG specification, section 5.2)
        img = mpimg.imread(io.BytesIO(png), format="png")
        rgb = (img[..., :3] * 255).round().astype(np.uint8).reshape(-1, 3)
        assert len(np.unique(rgb, axis=0)) > 20          # more than a blank or flat image
        assert (rgb != 255).any(axis=1).mean() > 0.02  # more than 2 % of the pixels are not white


def test_headline_numbers_are_those_of_zones_csv(page, demo):
    with open(demo[0] / "zones.csv", newline="", encoding="utf-8") as fh:
        total = [r for r in csv.DictReader(fh) if r["layer"] == "total"][0]
    head = page.section("headline")
    for key in ("carbon_smouldering_t", "co2e_smouldering_t", "carbon_flaming_t", "co2e_flaming_t",
                "burned_area_ha"):
        assert shown(float(total[key])) in head, key
    assert "t C" in head and "t CO₂e" in head and "AR6" in head
    assert "below ground" in head.lower() and "above ground" in head.lower()
    # smouldering and flaming are apart: each has its own card and number
    assert head.count(shown(float(total["carbon_smouldering_t"]))) >= 2
    assert head.count(shown(float(total["carbon_flaming_t"]))) >= 2


def test_demo_intervals_and_contributions_are_shown(page, demo):
    assert demo[3]["draws"] > 0
    q = demo[1].totals["quantities"]
    head = page.section("headline")
    for key in ("carbon_smouldering_t", "co2e_smouldering_t", "carbon_flaming_t"):
        lo, hi = q[key]["lo"], q[key]["hi"]
        assert lo < q[key]["value"] < hi, key
        assert f"{shown(lo)}–{shown(hi)}" in head, key  # "lo–hi" with an en dash
    assert f"{demo[3]['draws']} Monte Carlo draws" in head
    unc = page.section("uncertainty")
    assert "No Monte Carlo draws" not in unc
    for name, share in demo[1].totals["uncertainty"]["contributions"].items():
        assert name.replace("_", " ") in unc
    # the largest source's share, as a percentage to 3 significant digits
    name, share = max(demo[1].totals["uncertainty"]["contributions"].items(), key=lambda kv: kv[1])
    assert f"{shown(100 * share)} %" in unc


def test_no_draws_is_said_plainly(scene_run):
    p = Page((Path(scene_run.out_dir) / "report.html").read_text(encoding="utf-8"))
    assert "No Monte Carlo draws were made" in p.section("uncertainty")
    assert "without intervals" in p.section("headline")
    assert "95 % interval " not in p.section("headline")  # no "95 % interval lo–hi" line


def test_cautions_and_notes_are_shown(page, demo):
    cautions = page.section("cautions")
    for c in demo[1].totals["cautions"]:
        assert " ".join(c.split()) in cautions
    notes = page.section("notes")
    for n in demo[1].totals["notes"]:
        assert " ".join(n.split()) in notes


def test_every_zone_and_unit_is_in_the_tables(page, demo):
    zones = page.section("zones")
    for r in demo[1].zones:
        if r["layer"] != "total":
            assert r["zone"] in zones and f"Zone layer: {r['layer']}" in zones
    for unit in ("[ha]", "[m]", "[t dry matter]", "[t C]", "[t CO₂e]", "[%]", "[t CO₂]", "[t CH₄]", "[t CO]"):
        assert unit in zones, unit
    assert "all zones (run total)" in zones


def test_method_tiers_qa_and_field_plots(page, demo):
    methods = page.section("methods")
    for tier in ("measured activity data with default emission factors", "Tier 1"):
        assert tier in methods
    assert "Tier 3" not in methods  # issue 17: the survey route is not Tier 3 outright
    share = demo[1].total["carbon_share_survey"]
    assert f"{100 * share:.3g} %" in methods  # e.g. 0.882 -> "88.2 %"
    qa = page.section("qa")
    assert "level of detection" in qa and "NMAD" in qa
    assert f"{demo[1].qa['level_of_detection_m']:.3g}" in qa
    plots = page.section("field-plots")
    assert "Bias" in plots and "[m]" in plots


def test_sources_name_every_set_with_status_and_the_methods(page, demo):
    src = page.section("sources")
    f = demo[4]
    for fs in (f.smouldering, f.flaming, f.tier1):
        assert fs.name in src
        assert " ".join(fs.citation.split())[:60] in src
    for ref in ("Nuth", "Kääb", "Lane", "Wheaton", "Page", "Eq. 2.27", "Wetlands", "Wooster", "Okabe"):
        assert ref in src, ref
    assert "recalled" in src and "checked" in src
    # AR6 GWP-100 of CH4 (non-fossil) is 27.0: IPCC AR6 WG1 Table 7.15 (docs/sources.md, checked)
    assert "AR6" in src and "27" in src and "273" in src
    # the flaming set's nitrogen oxides in the usual notation (NOx; IUPAC/IPCC writing), not upper-cased
    assert "nox" in f.flaming.ef and "NOx" in src and "NOX" not in src


def test_provenance_shows_sha256_prefixes_versions_and_seed(page, demo):
    prov = page.section("provenance")
    inputs = demo[5]
    for name in ("scars.gpkg", "survey_pre.tif", "concessions.gpkg"):
        digest = hashlib.sha256((inputs / name).read_bytes()).hexdigest()
        assert digest[:16] in prov, name
    assert "random seed" in prov and "numpy" in prov and "EPSG:32749" in prov


def test_timeline_has_the_daily_chart(page):
    tl = page.section("timeline")
    assert "t C per day" in tl and "daily.csv" in tl


# ----------------------------------------------------------------------------- variants


def test_input_text_is_escaped(demo):
    _, result, cfg, prov, factors, _ = demo
    r = copy.deepcopy(result)
    r.zones[0]["zone"] = '<b>Bold & "Co"</b>'
    r.totals["notes"] = r.totals["notes"] + ["<img src=x onerror=alert(1)>"]
    cfg2 = dataclasses.replace(cfg, name="<script>alert('run')</script>")
    out = report.write_report(demo[0] / "escaped.html", r, cfg2, prov, factors).read_text(encoding="utf-8")
    # markupsafe escaping: & -> &amp;  < -> &lt;  > -> &gt;  " -> &#34;  ' -> &#39;
    assert "&lt;b&gt;Bold &amp; &#34;Co&#34;&lt;/b&gt;" in out
    assert "<b>Bold" not in out
    assert "&lt;script&gt;alert(&#39;run&#39;)&lt;/script&gt;" in out and "<script>" not in out
    assert "&lt;img src=x onerror=alert(1)&gt;" in out and "<img src=x" not in out


def test_intervals_are_shown_as_value_lo_hi(demo):
    _, result, cfg, prov, factors, _ = demo
    r = copy.deepcopy(result)
    for row in r.zones:
        for c in INTERVAL_COLUMNS:
            row[f"{c}_lo"], row[f"{c}_hi"] = row[c] * 0.5, row[c] * 2.0
    total = r.zones[-1]
    total["carbon_smouldering_t"], total["carbon_smouldering_t_lo"], total["carbon_smouldering_t_hi"] = (
        17374.06, 13899.2, 21718.0)
    r.totals["quantities"]["carbon_smouldering_t"].update(value=17374.06, lo=13899.2, hi=21718.0)
    r.totals["uncertainty"] = {"draws": 500, "contributions": {"bulk_density": 0.6, "survey_random": 0.4}}
    for row in r.inventory:
        row["emissions_gg_lo"], row["emissions_gg_hi"] = 1.25, 2.5
    p = _variant(demo, "intervals.html", r)
    head = p.section("headline")
    # 13899.2 -> "13,899", 21718.0 -> "21,718" (thousands separator, rounded to whole tonnes)
    assert "13,899–21,718" in head
    assert "Monte Carlo" in head
    unc = p.section("uncertainty")
    assert "bulk density" in unc and "60.0 %" in unc and "40.0 %" in unc  # 0.6 and 0.4 of the variance
    assert "No Monte Carlo draws" not in unc
    assert "1.25–2.50" in p.section("inventory")  # 3 significant digits
    assert len(p.images()) == 7  # the contribution chart is added


def test_run_report_draws_the_runs_zone_layers_without_reading_them_again(demo, page, tmp_path, monkeypatch):
    out, result, cfg, prov, factors, inputs = demo
    assert cfg.zones, "the demo has zone layers"
    # the maps a report draws after reading the zone layers from the config are those of the run's report
    ctx = report.build_context(result, cfg, prov, factors)
    for key in ("depth", "carbon", "method_map"):
        assert ctx["figures"][key] in page.images(), key

    def no_second_read(*a, **k):
        raise AssertionError("the report read the zone layers again")

    monkeypatch.setattr(report, "_zone_frames", no_second_read)
    again = peatburn.run(cfg, tmp_path / "again", overwrite=True)
    assert Page((Path(again.out_dir) / "report.html").read_text(encoding="utf-8")).images() == page.images()


def test_report_without_rasters_or_zones_still_renders(demo, tmp_path):
    _, result, cfg, prov, factors, _ = demo
    r = copy.deepcopy(result)
    r.daily = []
    r.totals["field_plots"] = None
    path = report.write_report(tmp_path / "report.html", r, cfg, prov, factors)
    p = Page(path.read_text(encoding="utf-8"))
    assert "field-plots" not in p.sections
    assert "rasters for the maps were not found" in p.section("maps")
    assert "No daily series" in p.section("timeline")


def test_scene_without_flaming_dates_or_plots(scene_run):
    p = Page((Path(scene_run.out_dir) / "report.html").read_text(encoding="utf-8"))
    assert "not estimated" in p.section("headline")
    zones = p.section("zones")
    assert "Above-ground (flaming) emissions were not estimated" in zones
    assert "Carbon, above ground" not in zones and "CO₂e, above ground" not in zones
    assert "No daily series" in p.section("timeline")
    assert "field-plots" not in p.sections
    assert "West Block" in p.section("zones") and "East Block" in p.section("zones")


# ----------------------------------------------------------------------------- pieces


def test_number_formats():
    assert report.fmt_num(17374.06) == "17,374"
    assert report.fmt_num(24.3748) == "24.4"
    assert report.fmt_num(0.322106) == "0.322"
    assert report.fmt_num(0.2) == "0.200"          # significant zeros kept
    assert report.fmt_num(107.0012) == "107"
    assert report.fmt_num(999.6) == "1,000"        # 999.6 to 3 significant digits is 1.00e3
    assert report.fmt_num(-1.2917) == "-1.29"
    assert report.fmt_num(0.000101) == "1.01 × 10⁻⁴"
    assert report.fmt_num(0) == "0"
    assert report.fmt_num(None) == "–" and report.fmt_num(float("nan")) == "–"
    assert report.fmt_interval(17374.06, 13899.2, 21718.0) == "17,374 (13,899–21,718)"
    assert report.fmt_interval(5.0) == "5.00"
    assert report.fmt_pct(0.8824) == "88.2 %"
    assert report.fmt_plain(6.8) == "6.8" and report.fmt_plain(1580.0) == "1580"


def test_uncertainty_contributions_of_any_shape():
    f = report.uncertainty_contributions
    assert f(None) == [] and f({}) == [] and f({"contributions": None}) == []
    assert f({"contributions": {"a": 0.25, "b": 0.75}}) == [("a", 0.25), ("b", 0.75)]
    # per zone with the run total last
    assert f({"contributions": {"a": [0.1, 0.2, 0.3], "b": np.array([0.9, 0.8, 0.7])}}) == [("a", 0.3), ("b", 0.7)]
    # per quantity: the carbon quantity is used
    got = f({"contributions": {"co2e_smouldering_t": {"a": 0.9, "b": 0.1},
                               "carbon_smouldering_t": {"a": 0.4, "b": 0.6}}})
    assert got == [("a", 0.4), ("b", 0.6)]
    assert f({"contributions": {"a": {"total": 0.5}, "b": {"total": 0.5}}}) == [("a", 0.5), ("b", 0.5)]
    assert f({"contributions": {"a": "n/a", "b": float("nan"), "c": 1.0}}) == [("c", 1.0)]


def test_charts_take_literal_text_and_many_zones():
    rows = [{"layer": "l", "zone": f"z{i}", "burned_area_ha": 1.0, "carbon_smouldering_t": float(i),
             "carbon_flaming_t": 0.0} for i in range(40)]
    rows.append({"layer": "l", "zone": r"$\notacommand{x}$ & <b>", "burned_area_ha": 1.0,
                 "carbon_smouldering_t": 1000.0, "carbon_flaming_t": 1.0})
    layers, cut = report._chart_rows(rows)
    assert cut and len(layers["l"]) == report.MAX_CHART_ZONES
    assert layers["l"][0]["carbon_smouldering_t"] == 1000.0  # the largest first
    assert [r["zone"] for r in layers["l"][1:3]] == ["z39", "z38"]
    # mathtext would fail on an unknown command: the name is drawn as literal text
    assert report.zone_chart(rows).startswith("data:image/png;base64,")
