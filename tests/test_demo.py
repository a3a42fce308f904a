"""Tests of the invented demo region (peatburn.demo).

The expected values are the scenario's stated settings (demo_region/README.md and the assignment
that specified it: datum offset +0.35 m, displacement +1.3 m east and -0.8 m north, 3.0 years,
carbon fraction 0.55) and hand arithmetic written out below; sums are recomputed here from the
files with rasterio, geopandas and numpy, not taken from the generator.
"""

from __future__ import annotations

import json
import math
import tomllib
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import rasterio
import rasterio.features
from scipy import ndimage, optimize

from peatburn.demo import DEMO_FILES, make_demo_region
from peatburn.errors import ConfigError, PeatburnError

SMALL = (200, 240)
PIXEL = 2.0
PIXEL_AREA = PIXEL * PIXEL          # 2 m x 2 m = 4 m^2 (hand arithmetic)
RASTERS = ["peat_thickness.tif", "survey_pre.tif", "survey_post.tif", "subsidence_rate.tif", "bulk_density.tif",
           "water_table.tif", "truth_burn_depth.tif"]
QUANTITIES = ["burned_area_ha", "burned_volume_m3", "peat_burned_t", "carbon_smouldering_t"]


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    return make_demo_region(tmp_path_factory.mktemp("demo_a"), shape=SMALL, pixel_size=PIXEL)


def read(folder: Path, name: str) -> np.ndarray:
    """A raster as float64 with NaN for nodata."""
    with rasterio.open(folder / name) as ds:
        return ds.read(1, masked=True).astype("float64").filled(np.nan)


def scar_mask(folder: Path) -> tuple[np.ndarray, gpd.GeoDataFrame]:
    """Scar labels (1..n, 0 outside) by the pixel-centre rule, rasterized here from the GeoPackage."""
    scars = gpd.read_file(folder / "scars.gpkg", layer="scars")
    with rasterio.open(folder / "survey_pre.tif") as ds:
        shape, transform = ds.shape, ds.transform
    return rasterio.features.rasterize([(g, i + 1) for i, g in enumerate(scars.geometry)], out_shape=shape,
                                       transform=transform, fill=0, dtype="int32"), scars


# ------------------------------------------------------------------------------------------------


def test_generation_is_deterministic(demo, tmp_path):
    again = make_demo_region(tmp_path / "b", shape=SMALL, pixel_size=PIXEL)
    for name in RASTERS:
        a, b = read(demo.folder, name), read(again.folder, name)
        assert np.array_equal(a, b, equal_nan=True), name
    for name, layer in [("scars.gpkg", "scars"), ("concessions.gpkg", "concessions"), ("districts.gpkg", "districts")]:
        ga = gpd.read_file(demo.folder / name, layer=layer)
        gb = gpd.read_file(again.folder / name, layer=layer)
        assert list(ga.geometry.to_wkb()) == list(gb.geometry.to_wkb()), name
        pd.testing.assert_frame_equal(ga.drop(columns="geometry"), gb.drop(columns="geometry"))
    for name in ["detections.csv", "field_plots.csv"]:
        pd.testing.assert_frame_equal(pd.read_csv(demo.folder / name), pd.read_csv(again.folder / name))
    assert json.loads((again.folder / "truth.json").read_text()) == json.loads((demo.folder / "truth.json").read_text())


def test_another_seed_gives_another_region(demo, tmp_path):
    other = make_demo_region(tmp_path / "c", shape=SMALL, pixel_size=PIXEL, seed=7)
    assert not np.array_equal(read(demo.folder, "survey_pre.tif"), read(other.folder, "survey_pre.tif"),
                              equal_nan=True)


def test_files_exist_with_crs_and_layout(demo):
    for name in DEMO_FILES:
        assert (demo.folder / name).is_file(), name
    for name in RASTERS:
        with rasterio.open(demo.folder / name) as ds:
            assert ds.crs is not None and ds.crs.to_epsg() == 32749, name
            assert ds.dtypes[0] == "float32" and ds.nodata == -9999.0, name
            assert ds.block_shapes[0] == (256, 256) and ds.compression.name == "deflate", name
            assert ds.shape == SMALL and ds.res == (PIXEL, PIXEL), name
    for name, layer, field in [("scars.gpkg", "scars", "scar_id"), ("concessions.gpkg", "concessions", "name"),
                               ("districts.gpkg", "districts", "district")]:
        g = gpd.read_file(demo.folder / name, layer=layer)
        assert g.crs is not None and g.crs.to_epsg() == 32749, name
        assert g[field].is_unique and len(g) >= 2, name
    scars = gpd.read_file(demo.folder / "scars.gpkg", layer="scars")
    assert 5 <= len(scars) <= 7
    assert set(scars["fire_count"]) <= {1, 2}
    assert (pd.to_datetime(scars["fire_start"]) <= pd.to_datetime(scars["fire_end"])).all()
    assert list(pd.read_csv(demo.folder / "detections.csv").columns) == ["x", "y", "time", "frp_mw"]
    assert {"x", "y", "date", "burn_depth_m"} <= set(pd.read_csv(demo.folder / "field_plots.csv").columns)


def test_config_follows_the_contract_and_points_at_files(demo):
    cfg = tomllib.loads(demo.config_path.read_text())
    assert cfg["depth"]["survey"]["interval_years"] == 3.0
    assert cfg["peat"]["bulk_density"] == {"raster": "bulk_density.tif", "units": "g/cm^3"}
    assert [z["id"] for z in cfg["zones"]] == ["name", "district"]
    assert cfg["burned_area"]["fire_count_field"] == "fire_count"
    paths = [cfg["burned_area"]["path"], cfg["depth"]["survey"]["pre"], cfg["depth"]["survey"]["post"],
             cfg["depth"]["survey"]["subsidence_rate"], cfg["peat"]["thickness"], cfg["peat"]["bulk_density"]["raster"],
             cfg["depth"]["water_table"]["depth"], cfg["depth"]["plots"]["path"], cfg["flaming"]["detections"],
             *[z["path"] for z in cfg["zones"]]]
    for p in paths:  # relative to the config file
        assert not Path(p).is_absolute() and (demo.config_path.parent / p).is_file(), p


def test_truth_carbon_is_mass_times_carbon_fraction(demo):
    cf = tomllib.loads(demo.config_path.read_text())["peat"]["carbon_fraction"]
    assert cf == 0.55
    t = demo.truth
    records = [t["totals"], *t["scars"].values(), *t["by_coverage"].values()]
    records += [r for layer in t["zones"].values() for r in layer.values()]
    for r in records:
        assert r["carbon_smouldering_t"] == pytest.approx(r["peat_burned_t"] * 0.55, rel=1e-12)
    assert t["totals"]["carbon_smouldering_t"] > 0


def test_truth_mass_recomputed_from_the_files(demo):
    """Dry mass = sum(depth [m] x bulk density [g/cm^3] x 4 m^2); 1 g/cm^3 = 1e-6 t / 1e-6 m^3 = 1 t/m^3."""
    labels, scars = scar_mask(demo.folder)
    depth = read(demo.folder, "truth_burn_depth.tif")
    bd = read(demo.folder, "bulk_density.tif")
    inside = labels > 0
    assert demo.truth["totals"]["burned_area_ha"] == pytest.approx(inside.sum() * PIXEL_AREA / 10_000, rel=1e-12)
    assert demo.truth["totals"]["burned_volume_m3"] == pytest.approx(np.sum(depth[inside]) * PIXEL_AREA, rel=1e-9)
    mass = np.sum(depth[inside] * bd[inside]) * PIXEL_AREA
    assert demo.truth["totals"]["peat_burned_t"] == pytest.approx(mass, rel=1e-9)
    for i, sid in enumerate(scars["scar_id"]):
        m = labels == i + 1
        assert demo.truth["scars"][sid]["peat_burned_t"] == pytest.approx(np.sum(depth[m] * bd[m]) * PIXEL_AREA,
                                                                          rel=1e-9)
    assert np.all(depth[~inside] == 0.0)


def test_burn_depth_never_exceeds_thickness_and_the_cap_binds(demo):
    depth = read(demo.folder, "truth_burn_depth.tif")
    thickness = read(demo.folder, "peat_thickness.tif")
    assert np.all(depth <= thickness)
    burning = depth > 0
    assert np.any(burning & (depth == thickness))           # thin peat: the whole peat burned somewhere
    assert demo.truth["burn"]["capped_pixels"] > 0
    assert 0.0 <= np.nanmin(depth) and np.nanmax(depth) <= 0.6 + 1e-6
    assert np.nanmin(thickness) == pytest.approx(0.3, abs=1e-6) and 6.0 <= np.nanmax(thickness) <= 8.0


def test_run_total_equals_sum_over_scars_and_districts(demo):
    t = demo.truth
    for q in QUANTITIES:
        assert t["totals"][q] == pytest.approx(sum(s[q] for s in t["scars"].values()), rel=1e-9), q
        assert t["totals"][q] == pytest.approx(sum(t["by_coverage"][k][q] for k in ("surveyed", "survey_gap")),
                                               rel=1e-9), q
        # the two districts split the region: every scar pixel lies in exactly one
        assert t["totals"][q] == pytest.approx(sum(z[q] for z in t["zones"]["districts"].values()), rel=1e-9), q
        # concessions overlap and leave scars outside: zones = total - outside + counted twice
        conc = sum(z[q] for z in t["zones"]["concessions"].values())
        assert conc == pytest.approx(t["totals"][q] - t["outside_zones"]["concessions"][q]
                                     + t["zone_overlaps"]["concessions"][q], rel=1e-9), q
    assert t["outside_zones"]["concessions"]["burned_area_ha"] > 0
    assert t["zone_overlaps"]["concessions"]["burned_area_ha"] > 0


def test_post_survey_datum_offset_and_gap(demo):
    """Stable ground: post + 3 yr x subsidence - pre has median +0.35 m (the stated datum offset)."""
    labels, scars = scar_mask(demo.folder)
    pre, post = read(demo.folder, "survey_pre.tif"), read(demo.folder, "survey_post.tif")
    subs = read(demo.folder, "subsidence_rate.tif")
    assert 0.02 - 1e-6 <= np.nanmin(subs) and np.nanmax(subs) <= 0.05 + 1e-6
    stable = ndimage.binary_dilation(labels > 0, iterations=5) == 0
    dh = post + 3.0 * subs - pre
    ok = stable & np.isfinite(dh)
    assert np.median(dh[ok]) == pytest.approx(0.35, abs=0.02)
    gap = demo.truth["survey"]["post_gap"]["scars"]
    assert len(gap) == 1
    for i, sid in enumerate(scars["scar_id"]):
        covered = np.isfinite(post[labels == i + 1]).mean()
        assert covered == (0.0 if sid in gap else 1.0), sid


def test_post_survey_is_displaced_east_and_south(demo):
    """Shifting pre by (+0.4 row, +0.65 col) px, i.e. +1.3 m east and -0.8 m north at 2 m pixels,
    best matches post on stable ground (least squares, scipy only)."""
    labels, _ = scar_mask(demo.folder)
    pre, post = read(demo.folder, "survey_pre.tif"), read(demo.folder, "survey_post.tif")
    subs = read(demo.folder, "subsidence_rate.tif")
    target = post + 3.0 * subs
    ok = (ndimage.binary_dilation(labels > 0, iterations=5) == 0) & np.isfinite(target)
    ok &= ndimage.binary_erosion(np.isfinite(pre), iterations=3)
    filled = np.where(np.isfinite(pre), pre, np.nanmean(pre))

    def cost(p):
        d = (target - ndimage.shift(filled, p, order=3, mode="nearest"))[ok]
        return float(np.mean((d - np.median(d)) ** 2))

    res = optimize.minimize(cost, [0.0, 0.0], method="Nelder-Mead", options={"xatol": 0.01, "fatol": 1e-10})
    row, col = res.x
    assert row * PIXEL == pytest.approx(0.8, abs=0.1)     # rows count southwards: 0.8 m south
    assert col * PIXEL == pytest.approx(1.3, abs=0.1)     # 1.3 m east
    s = demo.truth["survey"]
    assert (s["post_displacement_m"]["east"], s["post_displacement_m"]["north"]) == (1.3, -0.8)
    assert (s["correction"]["shift_x_m"], s["correction"]["shift_y_m"], s["correction"]["shift_z_m"]) == (-1.3, 0.8,
                                                                                                         -0.35)


def test_water_table_relation_holds_on_unclipped_burn(demo):
    """Least-squares line of true depth on water-table depth, where neither clip nor cap acts."""
    depth = read(demo.folder, "truth_burn_depth.tif")
    wt = read(demo.folder, "water_table.tif")
    thickness = read(demo.folder, "peat_thickness.tif")
    core = (depth > 0.1) & (depth < 0.6) & (depth < thickness)
    b, a = np.polyfit(wt[core], depth[core], 1)
    rel = demo.truth["water_table"]
    assert b == pytest.approx(rel["b"], abs=0.05) and a == pytest.approx(rel["a"], abs=0.03)
    assert rel["b"] > 0  # burn depth grows as the water table falls (Wösten et al. 2008)


def test_field_plots_measure_the_true_depth(demo):
    plots = pd.read_csv(demo.folder / "field_plots.csv")
    assert 15 <= len(plots) <= 25
    depth = read(demo.folder, "truth_burn_depth.tif")
    with rasterio.open(demo.folder / "truth_burn_depth.tif") as ds:
        r, c = rasterio.transform.rowcol(ds.transform, plots["x"], plots["y"])
    err = plots["burn_depth_m"].to_numpy() - depth[np.asarray(r), np.asarray(c)]
    assert np.max(np.abs(err)) < 0.15          # truth + noise of 3 cm: 5 sigma


def test_too_small_a_region_is_refused(tmp_path):
    with pytest.raises(ConfigError, match="too small"):
        make_demo_region(tmp_path, shape=(40, 40))
    with pytest.raises(PeatburnError, match="pixel_size"):
        make_demo_region(tmp_path, shape=SMALL, pixel_size=0.0)


@pytest.mark.slow
def test_default_region_matches_the_brief(tmp_path):
    """The default region: 720 ha (3.0 km x 2.4 km), scars of 5-40 ha, bulk density 0.08-0.14 g/cm^3."""
    region = make_demo_region(tmp_path)
    t = region.truth
    assert t["grid"]["width"] * 2.0 * t["grid"]["height"] * 2.0 / 10_000 == 720.0
    areas = [s["burned_area_ha"] for s in t["scars"].values()]
    assert 5 <= len(areas) <= 7 and all(5.0 <= a <= 40.0 for a in areas)
    bd = t["peat"]["bulk_density_g_cm3"]
    assert 0.08 - 1e-6 <= bd["min"] and bd["max"] <= 0.14 + 1e-6
    assert t["scars"]["VX-03"]["capped_pixels"] > 100
    assert not math.isclose(t["totals"]["mean_burn_depth_m"], 0.0)


# ------------------------------------------------------------------------------------------------
# The demo is plainly invented: off real land, and no real place words in its names.

#: Boxes (lon min, lon max, lat min, lat max) [deg] drawn generously around the large islands and
#: land masses of the region, read from the map (common knowledge, recalled, unchecked).
LAND_BOXES = {
    "Sumatra": (95.0, 106.2, -6.2, 6.0),
    "Malay Peninsula": (98.0, 104.6, 1.2, 13.0),
    "Indochina": (97.3, 109.5, 8.4, 23.5),
    "Borneo": (108.5, 119.4, -4.3, 7.1),
    "Java, Madura and Bali": (105.0, 115.8, -8.9, -5.8),
    "Lesser Sunda Islands": (115.8, 127.4, -11.1, -7.6),
    "Sulawesi": (118.7, 125.3, -5.7, 1.9),
    "Maluku and Halmahera": (124.0, 135.0, -8.5, 3.0),
    "New Guinea": (130.8, 151.0, -10.8, -0.3),
    "Philippines": (116.9, 126.7, 4.5, 21.2),
    "Australia": (112.9, 153.7, -39.2, -10.6),
    "Christmas Island": (105.5, 105.8, -10.6, -10.4),
}
MARGIN_DEG = 1.0        # about 110 km of sea kept around every box

#: Real place words of the region (places, rivers, the district pattern "<river> Hulu / Hilir",
#: words common in real company names) that must not appear in the demo's names.
REAL_WORDS = {
    "padang", "rimba", "hulu", "hilir", "sungai", "kalimantan", "riau", "jambi", "telaga", "tanjung",
    "pulau", "bukit", "kuala", "kota", "muara", "kampung", "desa", "kabupaten", "kecamatan", "sumatra",
    "sumatera", "borneo", "jawa", "java", "papua", "sarawak", "sabah", "palangka", "raya", "pekanbaru",
    "pontianak", "banjarmasin", "sampit", "kapuas", "kahayan", "sebangau", "siak", "musi", "ogan", "hutan",
    "sawit", "jaya", "makmur", "sejahtera", "lestari", "abadi", "nusantara", "indah", "mas", "sinar",
    "agro", "lahan", "gambut", "indonesia", "malaysia", "brunei",
}


def _on_land(lon: float, lat: float) -> list[str]:
    return [name for name, (x0, x1, y0, y1) in LAND_BOXES.items()
            if x0 - MARGIN_DEG <= lon <= x1 + MARGIN_DEG and y0 - MARGIN_DEG <= lat <= y1 + MARGIN_DEG]


def _corners_lonlat(crs, bounds) -> list[tuple[float, float]]:
    from pyproj import Transformer

    left, bottom, right, top = bounds
    to_ll = Transformer.from_crs(crs, "EPSG:4326", always_xy=True)
    pts = [(left, bottom), (left, top), (right, bottom), (right, top), ((left + right) / 2, (bottom + top) / 2)]
    return [to_ll.transform(x, y) for x, y in pts]


def test_land_boxes_catch_the_places_the_demo_used_to_sit():
    # the boxes are not empty or mis-ordered: the former demo origin (741300 E, 9716900 N) and the
    # former test-scene origin (500000 E, 9800000 N) in EPSG:32749 both lie on Borneo (pyproj)
    for xy in [(741_300.0, 9_716_900.0), (500_000.0, 9_800_000.0)]:
        assert any("Borneo" in _on_land(*ll) for ll in _corners_lonlat("EPSG:32749", (*xy, *xy)))


def test_demo_and_test_scenes_lie_in_open_sea(demo, tmp_path):
    from conftest import EPSG, X0, Y0

    from peatburn import demo as demo_module
    from peatburn.validation import synthetic_survey_scene

    with rasterio.open(demo.folder / "survey_pre.tif") as ds:
        places = {"demo (small)": (ds.crs, ds.bounds)}
    x0, y0 = demo_module.ORIGIN_XY
    places["demo (default 1200 x 1500 of 2 m)"] = (f"EPSG:{demo_module.CRS_EPSG}", (x0, y0 - 2400.0, x0 + 3000.0, y0))
    places["tests/conftest.py scene"] = (f"EPSG:{EPSG}", (X0, Y0 - 600.0, X0 + 600.0, Y0))
    cfg = tomllib.loads(Path(synthetic_survey_scene(tmp_path / "v")["config"]).read_text())
    with rasterio.open(tmp_path / "v" / cfg["depth"]["survey"]["pre"]) as ds:
        places["validation scene"] = (ds.crs, ds.bounds)
    for what, (crs, bounds) in places.items():
        for lon, lat in _corners_lonlat(crs, bounds):
            assert not _on_land(lon, lat), (what, lon, lat, _on_land(lon, lat))
            assert -14.0 < lat < -10.0 and 109.0 < lon < 114.0, (what, lon, lat)   # the sea south of Java


def test_demo_names_are_wholly_invented(demo):
    from peatburn import demo as demo_module

    names = [demo_module.REGION_NAME, demo_module.SCAR_ID_PREFIX]
    for file, layer, field in [("concessions.gpkg", "concessions", "name"), ("districts.gpkg", "districts", "district"),
                               ("scars.gpkg", "scars", "scar_id")]:
        names += [str(v) for v in gpd.read_file(demo.folder / file, layer=layer)[field]]
    names.append(tomllib.loads((demo.folder / "config.toml").read_text())["run"]["name"])
    words = {w.lower() for n in names for w in n.replace("-", " ").replace(":", " ").split()}
    assert {"xelora", "quenti", "zorava", "zarendi", "vexarin"} <= words
    assert not words & REAL_WORDS, words & REAL_WORDS
