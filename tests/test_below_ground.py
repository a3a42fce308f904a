"""Below-ground accounting on synthetic scenes with known truth (issue 14): repeat burns and the
per-fire table, peat extent and mineral soil, Tier-1-only runs, holes in the peat properties,
survey outliers, the subsidence note.

Every expected value is built here from the scene's geometry and the numbers the scene was made
with (tests/conftest.py: burn depth 0.4 m in scar A, 0.24 m in scar B, bulk density 0.1 g cm-3,
carbon fraction 0.55, 2 m pixels), never by running peatburn.
"""

import csv

import geopandas as gpd
import numpy as np
import pytest
import rasterio
import shapely

import peatburn
from conftest import EPSG, X0, Y0, make_scene, write_tif

PIXEL = 2.0
AREA = PIXEL * PIXEL  # m2
BD, CF = 0.1, 0.55
KG_C_PER_M3 = BD * 1000 * CF  # g cm-3 -> kg m-3 (exact), times the carbon fraction
# tolerance of the survey route on these scenes (tests/engine/test_runner.py TOL, justified there)
TOL = 0.03
# The scene's scars (tests/conftest.py make_scene, default shape 240 x 300 at 2 m)
W_M, H_M = 600.0, 480.0
SCAR_A = shapely.box(X0 + 0.15 * W_M, Y0 - 0.55 * H_M, X0 + 0.45 * W_M, Y0 - 0.2 * H_M)
ISLAND = shapely.Point(X0 + 0.3 * W_M, Y0 - 0.375 * H_M).buffer(10.0)
SCAR_B = shapely.Point(X0 + 0.72 * W_M, Y0 - 0.6 * H_M).buffer(0.14 * W_M)
# a second fire the next year over part of A and unburned ground east of it
SCAR_C = shapely.box(X0 + 200.0, Y0 - 200.0, X0 + 330.0, Y0 - 150.0)


def centres():
    cols, rows = np.meshgrid(np.arange(300) + 0.5, np.arange(240) + 0.5)
    return X0 + cols * PIXEL, Y0 - rows * PIXEL


def true_carbon_t(mask_depth):
    """Carbon [t] of a true-depth field [m] (already masked)."""
    return float(mask_depth.sum() * AREA * KG_C_PER_M3 / 1000)


def true_depth():
    x, y = centres()
    d = np.zeros(x.shape)
    d[shapely.contains_xy(SCAR_A, x, y) & ~shapely.contains_xy(ISLAND, x, y)] = 0.4
    d[shapely.contains_xy(SCAR_B, x, y)] = 0.24
    return d


def write_scars(folder, polys, ids, starts, ends):
    gpd.GeoDataFrame({"scar_id": ids, "fire_start": starts, "fire_end": ends},
                     geometry=polys, crs=f"EPSG:{EPSG}").to_file(folder / "scars.gpkg", layer="scars", driver="GPKG")


def read_fires(out):
    with open(out / "fires.csv", newline="", encoding="utf-8") as fh:
        return {r["fire"]: r for r in csv.DictReader(fh)}


@pytest.fixture(scope="module")
def repeat_runs(tmp_path_factory):
    """The same surveys run with scars {A, B} and with {A, B, C} (C burned A's east part again)."""
    base = tmp_path_factory.mktemp("repeat")
    # the scars also as a zone layer: a zone counts every pixel inside it in full (docs/method.md 4)
    s = make_scene(base / "s", zones=False,
                   extra_config='[[zones]]\npath = "scars.gpkg"\nid = "scar_id"\nname = "scar_zones"\n')
    write_scars(s.folder, [SCAR_A, SCAR_B], ["A", "B"], ["2030-08-01", "2030-09-01"], ["2030-08-20", "2030-09-10"])
    two = peatburn.run(s.config, base / "two")
    write_scars(s.folder, [SCAR_A, SCAR_B, SCAR_C], ["A", "B", "C"], ["2030-08-01", "2030-09-01", "2031-08-05"],
                ["2030-08-20", "2030-09-10", "2031-08-09"])
    three = peatburn.run(s.config, base / "three")
    return two, three


def test_repeat_burn_splits_only_the_shared_pixels(repeat_runs):
    """Rule (docs/method.md, outputs/fires.py): a pixel inside k fires gives each 1/k of its carbon; a
    pixel inside one fire belongs wholly to it. Truth: B overlaps nothing, so it keeps exactly what
    it had; A and C share A∩C, whose true carbon is the true depth there (0.4 m) x area."""
    two, three = repeat_runs
    f2, f3 = read_fires(two.out_dir), read_fires(three.out_dir)
    assert sorted(f3) == ["A", "B", "C"]  # ids from the first text field (scar_id)
    zone = {r["zone"]: r["carbon_smouldering_t"] for r in three.zones if r["layer"] == "scar_zones"}
    cb3 = float(f3["B"]["carbon_smouldering_t"])
    assert cb3 == pytest.approx(zone["B"], rel=1e-9)  # B overlaps nothing: it keeps all its pixels' carbon
    # A and C each give up half of the shared pixels' carbon, and nothing else
    half_shared_a = zone["A"] - float(f3["A"]["carbon_smouldering_t"])
    half_shared_c = zone["C"] - float(f3["C"]["carbon_smouldering_t"])
    assert half_shared_a == pytest.approx(half_shared_c, rel=1e-9)
    # between the two runs B changes only through the co-registration (C's buffer changes the stable
    # ground); the old rescaling of every scar moved B's carbon by the shared carbon's share (~10 %)
    assert cb3 == pytest.approx(float(f2["B"]["carbon_smouldering_t"]), rel=2e-3)
    x, y = centres()
    d = true_depth()
    in_b = shapely.contains_xy(SCAR_B, x, y)
    assert cb3 == pytest.approx(true_carbon_t(d * in_b), rel=TOL)
    shared = shapely.contains_xy(SCAR_A, x, y) & shapely.contains_xy(SCAR_C, x, y)
    assert half_shared_c == pytest.approx(0.5 * true_carbon_t(d * shared), rel=TOL)
    cc = float(f3["C"]["carbon_smouldering_t"])
    assert cc == pytest.approx(0.5 * true_carbon_t(d * shared), rel=TOL)  # C burned nothing outside A
    ca2, ca3 = float(f2["A"]["carbon_smouldering_t"]), float(f3["A"]["carbon_smouldering_t"])
    assert ca3 + cc == pytest.approx(ca2, rel=2e-3)
    # the fires add up to the run: nothing counted twice, nothing lost
    assert sum(float(r["carbon_smouldering_t"]) for r in f3.values()) == pytest.approx(
        three.total["carbon_smouldering_t"], rel=1e-9)
    # each fire's area shared with another: the pixel count of A∩C (pixel-centre rule)
    assert float(f3["A"]["repeat_burn_area_ha"]) == pytest.approx(shared.sum() * AREA / 1e4, rel=1e-9)
    assert float(f3["C"]["repeat_burn_area_ha"]) == pytest.approx(shared.sum() * AREA / 1e4, rel=1e-9)
    assert float(f3["B"]["repeat_burn_area_ha"]) == 0.0


def test_fires_table_dates_years_and_inventory(repeat_runs):
    _, three = repeat_runs
    f = read_fires(three.out_dir)
    assert (f["A"]["fire_start"], f["A"]["fire_end"], f["A"]["inventory_year"]) == ("2030-08-01", "2030-08-20", "2030")
    assert f["C"]["inventory_year"] == "2031"
    assert float(f["A"]["carbon_share_survey"]) == pytest.approx(1.0)
    # the second year's smouldering line is fire C's share of the run (outputs/timeline.py: by days)
    inv = [r for r in three.inventory if r["phase"] == "smouldering" and r["gas"] == "CO2"]
    by_year = {r["year"]: r["emissions_gg"] for r in inv}
    share_c = float(f["C"]["peat_burned_t"]) / three.total["peat_burned_t"]
    assert by_year[2031] / sum(by_year.values()) == pytest.approx(share_c, rel=1e-9)


# ---------------------------------------------------------------------------------------------
# peat extent, mineral soil, Tier 1 only

def _mineral_scene(folder, extra="", survey=True, raster_extent=False):
    """Scene whose scar B has no peat south of its centre (thickness 0) and whose peat extent leaves
    out the west strip of scar A (x < X0 + 130 m)."""
    s = make_scene(folder, zones=False, extra_config=extra)
    x, y = centres()
    with rasterio.open(s.folder / "thickness.tif") as ds:
        thick, t = ds.read(1), ds.transform
    thick = thick.astype(float)
    south_b = y < Y0 - 0.6 * H_M
    thick[south_b] = 0.0
    write_tif(s.folder / "thickness.tif", thick, t)
    extent = shapely.box(X0 + 130.0, Y0 - H_M, X0 + W_M, Y0)
    if raster_extent:  # 1 = organic soil, 0 = mineral soil
        write_tif(s.folder / "peat_extent.tif", (x >= X0 + 130.0).astype(float), t)
        name = "peat_extent.tif"
    else:
        gpd.GeoDataFrame({"kind": ["organic soil"]}, geometry=[extent], crs=f"EPSG:{EPSG}").to_file(
            s.folder / "peat_extent.gpkg", layer="extent", driver="GPKG")
        name = "peat_extent.gpkg"
    text = s.config.read_text().replace('thickness = "thickness.tif"',
                                        f'thickness = "thickness.tif"\nextent = "{name}"')
    if not survey:
        start = text.index("[depth.survey]")
        end = text.index("[peat]")
        text = text[:start] + text[end:]
    s.config.write_text(text)
    mineral = (shapely.contains_xy(SCAR_B, x, y) & south_b) | (shapely.contains_xy(SCAR_A, x, y) & (x < X0 + 130.0))
    burned = shapely.contains_xy(SCAR_A, x, y) | shapely.contains_xy(SCAR_B, x, y)
    return s, mineral, burned


@pytest.mark.parametrize("raster_extent", [False, True], ids=["polygon extent", "raster extent"])
def test_no_peat_burned_on_mineral_soil(tmp_path, raster_extent):
    """IPCC 2013 Wetlands Supplement Ch. 2: organic-soil fire emissions apply to burned organic soil
    only (recalled, unchecked). Truth: zero below ground where thickness is 0 or outside the extent."""
    s, mineral, burned = _mineral_scene(tmp_path / "s", raster_extent=raster_extent)
    r = peatburn.run(s.config, tmp_path / "o")
    d = true_depth() * ~mineral
    assert r.total["carbon_smouldering_t"] == pytest.approx(true_carbon_t(d), rel=TOL)
    assert r.total["mineral_soil_area_ha"] == pytest.approx(mineral.sum() * AREA / 1e4, rel=1e-9)
    assert r.total["burned_area_ha"] == pytest.approx(burned.sum() * AREA / 1e4, rel=1e-9)
    # Tier 1 side by side only on organic soil too: 353 t/ha x 0.1 kg m-2 per t/ha x cf x peat area
    peat_area = (burned & ~mineral).sum() * AREA
    assert r.total["carbon_tier1_t"] == pytest.approx(353 * 0.1 * CF * peat_area / 1000, rel=1e-9)
    f = read_fires(r.out_dir)
    x, y = centres()
    assert float(f["B"]["mineral_soil_area_ha"]) == pytest.approx(
        (mineral & shapely.contains_xy(SCAR_B, x, y)).sum() * AREA / 1e4, rel=1e-9)
    html = (r.out_dir / "report.html").read_text(encoding="utf-8")
    assert "mineral soil" in html


def test_tier1_only_run_is_accepted_and_labelled(tmp_path):
    """Burned area + peat inputs, no survey, no water table: every burned pixel on organic soil gets
    the IPCC 2013 Wetlands Supplement Table 2.6 default, 353 t d.m./ha (recalled, unchecked); the
    carbon is 353 x 0.1 kg m-2 per t/ha x f_C x organic-soil area (hand arithmetic)."""
    s, mineral, burned = _mineral_scene(tmp_path / "s", survey=False)
    r = peatburn.run(s.config, tmp_path / "o")
    peat_area = (burned & ~mineral).sum() * AREA
    assert r.total["carbon_smouldering_t"] == pytest.approx(353 * 0.1 * CF * peat_area / 1000, rel=1e-9)
    assert r.total["carbon_share_tier1"] == pytest.approx(1.0)
    assert r.totals["method"]["tier1_only"] is True
    assert any("Tier 1 only" in n for n in r.totals["notes"])
    assert "Tier 1 only" in (r.out_dir / "report.html").read_text(encoding="utf-8")


# ---------------------------------------------------------------------------------------------
# holes in the peat properties

def _hole_scene(folder, extra_peat=""):
    """Scene whose bulk-density and carbon-fraction rasters are constant (0.1, 0.55) with a 20 x 20
    pixel hole (NaN) inside scar A, away from its edges and its island."""
    s = make_scene(folder, zones=False)
    with rasterio.open(s.folder / "thickness.tif") as ds:
        t = ds.transform
    bd = np.full((240, 300), BD)
    cf = np.full((240, 300), CF)
    hole = (slice(60, 80), slice(100, 120))  # rows 60-79: y 9799840-9799880; cols 100-119: x +200..+240 m
    bd[hole] = np.nan
    cf[hole] = np.nan
    write_tif(s.folder / "bd.tif", bd, t)
    write_tif(s.folder / "cf.tif", cf, t)
    text = s.config.read_text()
    text = text.replace(f'bulk_density = "{BD} g/cm^3"', 'bulk_density = "bd.tif"')
    text = text.replace(f"carbon_fraction = {CF}", 'carbon_fraction = "cf.tif"' + extra_peat)
    s.config.write_text(text)
    return s, hole


def test_hole_in_density_keeps_the_measured_depth(tmp_path):
    """A hole in ρ_b and f_C never throws away the measured depth: filled by the median of the run's
    valid values (here exactly 0.1 and 0.55), the run equals the truth as a run without holes does,
    every pixel stays surveyed (Tier 1 is for want of a depth only), and the filled area is in QA."""
    s, hole = _hole_scene(tmp_path / "s")
    r = peatburn.run(s.config, tmp_path / "o")
    assert r.total["carbon_smouldering_t"] == pytest.approx(true_carbon_t(true_depth()), rel=TOL)
    assert r.total["area_tier1_ha"] == 0.0
    assert r.total["carbon_share_survey"] == pytest.approx(1.0)
    assert r.qa["bulk_density_filled_area_ha"] == pytest.approx(400 * AREA / 1e4, rel=1e-9)
    assert r.qa["carbon_fraction_filled_area_ha"] == pytest.approx(400 * AREA / 1e4, rel=1e-9)
    assert any("median" in n and "bulk_density" in n for n in r.totals["notes"])


def test_hole_filled_from_the_configured_default(tmp_path):
    """With peat.bulk_density_fill = 0.2 g/cm3 the hole's carbon doubles: + true volume of the hole
    (400 px x 4 m2 x 0.4 m = 640 m3) x 0.1 g/cm3 x 1000 x 0.55 = 35.2 t C (hand arithmetic)."""
    s0, _ = _hole_scene(tmp_path / "s0")
    r0 = peatburn.run(s0.config, tmp_path / "o0")
    s, _ = _hole_scene(tmp_path / "s", extra_peat='\nbulk_density_fill = "0.2 g/cm^3"')
    r = peatburn.run(s.config, tmp_path / "o")
    extra = r.total["carbon_smouldering_t"] - r0.total["carbon_smouldering_t"]
    # the survey noise over the 400 hole pixels (sd 0.07 m each) moves this by ~0.8 t C
    assert extra == pytest.approx(640 * 0.1 * 1000 * CF / 1000, abs=2.5)


# ---------------------------------------------------------------------------------------------
# survey outliers

def test_survey_outliers_flagged_with_their_area_and_kept(tmp_path):
    """A spoil bank (ground raised 2 m on 10 x 10 pixels) inside scar A: a fire only lowers the ground,
    so a rise of 2 m (about 20 levels of detection) is flagged (science/survey.outliers), its area
    reported in QA, and kept in the sums: the carbon falls by the bank's volume (2.4 m relative to
    the 0.4 m burn) x carbon density (hand arithmetic)."""
    s = make_scene(tmp_path / "s", zones=False)
    with rasterio.open(s.folder / "post.tif") as ds:
        post, t = ds.read(1).astype(float), ds.transform
    bank = (slice(100, 110), slice(110, 120))
    post[bank] += 2.0
    write_tif(s.folder / "post.tif", post, t)
    r = peatburn.run(s.config, tmp_path / "o")
    assert r.qa["outlier_area_ha"] == pytest.approx(100 * AREA / 1e4, rel=0.05)  # resampling smears the edge
    expected = true_carbon_t(true_depth()) - 100 * AREA * 2.0 * KG_C_PER_M3 / 1000
    assert r.total["carbon_smouldering_t"] == pytest.approx(expected, rel=TOL)


# ---------------------------------------------------------------------------------------------
# subsidence

def test_constant_subsidence_cancels_and_is_said(tmp_path):
    """The vertical co-registration on stable ground absorbs a uniform lowering: 0 and 3 cm/yr of
    subsidence give the same carbon (only the contrast between scars and stable ground matters), and
    the run notes say that a constant rate has no effect (docs/method.md 2.1)."""
    s = make_scene(tmp_path / "s", zones=False)
    r3 = peatburn.run(s.config, tmp_path / "o3")
    s.config.write_text(s.config.read_text().replace('subsidence_rate = "0.03 m/yr"', 'subsidence_rate = "0 m/yr"'))
    r0 = peatburn.run(s.config, tmp_path / "o0")
    assert r3.total["carbon_smouldering_t"] == pytest.approx(r0.total["carbon_smouldering_t"], rel=1e-4)
    assert any("one constant" in n for n in r3.totals["notes"])


def test_tier1_intervals_come_from_the_default_not_the_density(tmp_path):
    """Tier-1-only run with draws: the variance of the carbon is the default's stated spread
    (tier1_fuel, IPCC 2013 Wetlands Supplement Table 2.6, recalled) and the carbon fraction's; the
    bulk density plays no part (the default's mass does not depend on it). Each fire gets an interval."""
    s, _, _ = _mineral_scene(tmp_path / "s", extra="[uncertainty]\ndraws = 200\nseed = 1\n", survey=False)
    r = peatburn.run(s.config, tmp_path / "o")
    con = r.totals["uncertainty"]["contributions"]
    assert con["tier1_fuel"] > 0.9
    assert not con.get("bulk_density")
    f = read_fires(r.out_dir)
    lo, mid, hi = (float(f["A"][k]) for k in ("carbon_smouldering_t_lo", "carbon_smouldering_t",
                                               "carbon_smouldering_t_hi"))
    assert lo < mid < hi


def test_subsidence_map_error_drawn_by_default(tmp_path):
    """A subsidence-rate raster brings the zone-correlated rate-map term with its marked default
    spread (0.01 m/yr, an assumption stated in docs/uncertainty.md); one constant rate brings none."""
    s = make_scene(tmp_path / "s", zones=False, extra_config="[uncertainty]\ndraws = 100\nseed = 1\n")
    with rasterio.open(s.folder / "thickness.tif") as ds:
        t = ds.transform
    write_tif(s.folder / "subsidence.tif", np.full((240, 300), 0.03), t)
    text = s.config.read_text()
    s.config.write_text(text.replace('subsidence_rate = "0.03 m/yr"', 'subsidence_rate = "subsidence.tif"'))
    r = peatburn.run(s.config, tmp_path / "o")
    src = {x["name"]: x for x in r.totals["uncertainty"]["sources"]}
    assert src["subsidence_rate_map"]["parameters"]["sd_m_per_yr"] == 0.01
    assert "assumption" in src["subsidence_rate_map"]["citation"]
    s.config.write_text(text)
    r2 = peatburn.run(s.config, tmp_path / "o2")
    assert "subsidence_rate_map" not in {x["name"] for x in r2.totals["uncertainty"]["sources"]}


def test_flaming_carbon_per_fire_with_repeat_burns(tmp_path):
    """Burned area x biomass x combustion factor (IPCC 2006 Vol. 4 Ch. 2 Eq. 2.27) per fire, x the
    vegetation carbon fraction 0.47 (IPCC 2006 default, recalled): hand arithmetic on each fire's pixel
    area, the pixels shared by A and C counted half in each (the repeat-burn rule)."""
    s = make_scene(tmp_path / "s", zones=False,
                   extra_config='[flaming]\nmethod = "biomass"\nbiomass = "200 t/ha"\ncombustion_factor = 0.36\n')
    write_scars(s.folder, [SCAR_A, SCAR_B, SCAR_C], ["A", "B", "C"], ["2030-08-01", "2030-09-01", "2031-08-05"],
                ["2030-08-20", "2030-09-10", "2031-08-09"])
    r = peatburn.run(s.config, tmp_path / "o")
    f = read_fires(r.out_dir)
    x, y = centres()
    in_a, in_b, in_c = (shapely.contains_xy(g, x, y) for g in (SCAR_A, SCAR_B, SCAR_C))
    share = {"A": in_a * np.where(in_c, 0.5, 1.0), "B": in_b * 1.0, "C": in_c * np.where(in_a, 0.5, 1.0)}
    for k, w in share.items():
        expected = w.sum() * AREA / 1e4 * 200 * 0.36 * 0.47
        assert float(f[k]["carbon_flaming_t"]) == pytest.approx(expected, rel=1e-6), k
