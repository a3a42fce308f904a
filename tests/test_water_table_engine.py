"""Water-table model in the run engine (issue 15): dated station readings per scar, clamping to the
fitted range. Expected values are hand arithmetic on tiny synthetic inputs built here."""

import csv

import geopandas as gpd
import numpy as np
import pytest

from conftest import make_scene
from peatburn.config import load_config
from peatburn.science import water_table as wtm

from peatburn.engine import blocks, intervals
from peatburn.engine.alignment import coregister
from peatburn.engine.depth_models import DepthModels, load_models
from peatburn.engine.inputs import open_inputs
from peatburn.engine.plan import build_plan, stations_by_fire_date


def _dated_scene(tmp_path, window_days):
    s = make_scene(tmp_path / "s", zones=False)
    scars = gpd.read_file(s.folder / "scars.gpkg", layer="scars")
    scars["fire_start"] = ["2026-08-01", "2026-09-20"]  # A early in the dry season, B seven weeks later
    scars.to_file(s.folder / "scars.gpkg", layer="scars", driver="GPKG")
    x0, y0 = 500_000.0, 9_800_000.0  # the scene's corner (tests/conftest.py X0, Y0)
    with open(s.folder / "stations.csv", "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["x", "y", "water_table_m", "read_on"])
        for i, (dx, dy) in enumerate([(100, -100), (500, -100), (100, -400), (500, -400)]):
            # every station reads 0.30 m on 3 August and 0.90 m on 18 September
            w.writerow([x0 + dx, y0 + dy, 0.30, "2026-08-03"])
            w.writerow([x0 + dx, y0 + dy, 0.90, "2026-09-18"])
    s.config.write_text(s.config.read_text() + f'''
[depth.water_table]
depth = "stations.csv"
crs = "EPSG:32749"
date_column = "read_on"
date_window_days = {window_days}
''')
    return s


@pytest.mark.parametrize("window_days, expected", [(15, {1: 0.30, 2: 0.90}), (0, {1: 0.60, 2: 0.60})])
def test_each_scar_uses_the_readings_nearest_its_fire_start(tmp_path, window_days, expected):
    # Within 15 days: scar A (1 August) takes the 3 August readings (2 days off, 0.30 m), scar B
    # (20 September) the 18 September readings (0.90 m); IDW of equal values is that value. With the
    # window 0 (dates ignored) both readings of a station are averaged: (0.30 + 0.90) / 2 = 0.60 m.
    s = _dated_scene(tmp_path, window_days)
    inputs = open_inputs(load_config(s.config))
    plan = build_plan(inputs, coregister(inputs))
    assert (plan.station_days is not None) == (window_days > 0)
    if plan.station_days is not None:
        group, subsets, window, n_without = plan.station_days
        assert list(group) == [0, 1] and window == 15 and n_without == 0
    from rasterio.windows import Window

    st = blocks._state(plan)
    win = Window(0, 0, plan.grid.width, plan.grid.height)
    scar = st["scars"].rasterize(plan.grid, win)
    wt = blocks.water_table_depth(st, plan, win, scar > 0)
    for k, v in expected.items():
        np.testing.assert_allclose(wt[scar == k], v, atol=1e-9)


def test_scar_without_a_reading_in_the_window_gets_none():
    # hand check of the grouping: readings on day 10 and day 40; fires on day 12 (window 5: day 10
    # chosen), day 25 (nothing within 5 days) and undated (-1: all readings)
    x = np.array([0.0, 0.0])
    y = np.array([0.0, 0.0])
    v = np.array([0.2, 0.8])
    group, subsets, window, n_without = stations_by_fire_date(
        (x, y, v), ["1970-01-11", "1970-02-10"], ["1970-01-13", "1970-01-26", None], 5)
    assert list(group) == [0, 1, -1] and n_without == 1
    assert list(subsets[0][2]) == [0.2] and subsets[1][2].size == 0


def test_water_table_is_clamped_to_the_fitted_range():
    # fitted range 0.3-0.9 m: 0.1 -> 0.3, 1.5 -> 0.9, 0.5 unchanged; two of three pixels extrapolate
    m = DepthModels(wtm.DepthModel(0.0, 0.5, 0, 0, 0, 10, 0, 0, "theil-sen", "fitted", water_table_range=(0.3, 0.9)))
    wt, out = blocks._clamp_to_fit(m, np.array([0.1, 0.5, 1.5, np.nan]), np.array([True, True, True, False]))
    np.testing.assert_allclose(wt[:3], [0.3, 0.5, 0.9])
    assert list(out) == [True, False, True, False]
    # user and default coefficients have no fitted range: nothing is clamped
    wt, out = blocks._clamp_to_fit(DepthModels(wtm.DEFAULT_MODEL), np.array([0.1, 2.0]), np.array([True, True]))
    np.testing.assert_allclose(wt, [0.1, 2.0])
    assert not out.any()


def test_edge_distance_matches_shapely_across_block_borders(tmp_path):
    # Independent reference: shapely's distance from each pixel centre to the boundary of scar B (a
    # disc). The distance transform measures to the nearest pixel centre outside, about half a pixel
    # farther: |edt - (shapely + pixel/2)| <= 0.75 pixel. Small blocks (32 px) cut the scar, so the
    # padding must carry the scar across block borders.
    import shapely
    from rasterio.windows import Window

    s = make_scene(tmp_path / "s", zones=False, extra_config="")
    inputs = open_inputs(load_config(s.config))
    plan = build_plan(inputs, coregister(inputs))
    st = blocks._state(plan)
    disc = plan.scars[1]
    px = s.pixel
    for col, row in [(150, 120), (180, 140), (210, 160)]:
        win = Window(col, row, 32, 32)
        dist = blocks.edge_distance(st, plan, win, 200.0)
        x, y = plan.grid.pixel_centres(win)
        xx, yy = np.broadcast_arrays(x, y)
        inside = shapely.contains_xy(disc, xx, yy) & (dist > 0)
        ref = shapely.distance(shapely.points(xx[inside], yy[inside]), disc.boundary)
        assert inside.any()
        assert np.max(np.abs(dist[inside] - (ref + px / 2))) <= 0.75 * px


def test_run_with_a_fixed_edge_taper(tmp_path):
    # the taper flows through the run: the model carries it, the estimator says so, and the missed
    # scar of the invented demo region stays within two leave-scar-out RMSEs of its true carbon
    import peatburn
    from peatburn.demo import make_demo_region

    region = make_demo_region(tmp_path / "in", shape=(300, 375))
    cfg = region.config_path.read_text().replace("[depth.water_table]", "[depth.water_table]\nedge_taper = 8")
    region.config_path.write_text(cfg + '\n[[zones]]\npath = "scars.gpkg"\nid = "scar_id"\nname = "scars"\n')
    res = peatburn.run(region.config_path, tmp_path / "out")
    m = res.totals["water_table_model"]["all"]
    assert m["edge_taper_m"] == 8.0 and "tapered" in m["estimator"]
    gap = region.truth["survey"]["post_gap"]["scars"][0]
    row = next(r for r in res.zones if r["layer"] == "scars" and r["zone"] == gap)
    assert abs(row["carbon_smouldering_t"] / region.truth["scars"][gap]["carbon_smouldering_t"] - 1) <= 2 * m["cv_rmse"]


def test_monte_carlo_term_is_the_leave_scar_out_error():
    # hand arithmetic: mean water table of the modelled pixels 60 / 100 = 0.6 m; depth there
    # 0.1 + 0.5 x 0.6 = 0.4 m; a leave-scar-out RMSE of 20 % of scar carbon -> 0.2 x 0.4 = 0.08 m
    wt_prediction_sd_m = intervals.wt_prediction_sd_m
    m = wtm.DepthModel(0.1, 0.5, 0, 0, 0, 10, 0, 0, "theil-sen", "fitted", cv_rmse=0.2, cv_n_scars=12)
    assert wt_prediction_sd_m(m, {"wt_area": 100.0, "wt_area_wt": 60.0}) == pytest.approx(0.08)
    assert wt_prediction_sd_m(m, {"wt_area": 0.0, "wt_area_wt": 0.0}) is None
    assert wt_prediction_sd_m(wtm.DEFAULT_MODEL, {"wt_area": 100.0, "wt_area_wt": 60.0}) is None


def test_model_files_written_before_issue_15_still_load(tmp_path):
    # a calibrate file with only the fields of the earlier model (no target, cross-validation...)
    import json

    old = {k: v for k, v in wtm.DEFAULT_MODEL.to_dict().items()
           if k not in ("target", "estimator", "n_screened", "n_censored", "water_table_error_m", "cv_n_scars",
                        "cv_bias", "cv_rmse", "cv_method", "edge_taper_m")}
    path = tmp_path / "fit.json"
    path.write_text(json.dumps({"models": {"all": old}}))
    m = load_models(path).all
    assert m.slope == 1.0 and m.edge_taper_m == 0.0 and m.cv_n_scars == 0


def test_run_chooses_covariates_by_cross_validation_and_reports_the_scores(tmp_path):
    # Both covariates asked for on the invented demo region (peat thickness is a raster there): the
    # model, totals.json's QA and the report carry the covariates chosen and the leave-scar-out score of
    # every set tried; the prediction stays capped by the thickness (burn_depth.tif <= thickness).
    import json

    import rasterio

    import peatburn
    from peatburn.demo import make_demo_region

    region = make_demo_region(tmp_path / "in", shape=(300, 375))
    cfg = region.config_path.read_text().replace(
        "[depth.water_table]", '[depth.water_table]\nedge_taper = "cv"\nthickness_taper = "cv"')
    region.config_path.write_text(cfg.replace("draws = 2000", "draws = 0"))
    res = peatburn.run(region.config_path, tmp_path / "out")
    m = res.totals["water_table_model"]["all"]
    scores = m["cv_scores"]
    assert "none" in scores and any(k.startswith("thickness ") for k in scores)
    assert any(k.startswith("edge ") for k in scores)
    qa = res.totals["qa"]
    assert qa["water_table_cv_scores"] == scores
    chosen = " + ".join(qa["water_table_covariates"]) or "none"
    assert chosen in scores and scores[chosen] == min(v for v in scores.values() if v == v)
    assert any("covariates chosen by leave-scar-out" in n for n in res.totals["notes"])
    html = (tmp_path / "out" / "report.html").read_text(encoding="utf-8")
    assert "per covariate set tried" in html
    from peatburn.engine.sums import METHOD_CODES

    out = tmp_path / "out"
    with rasterio.open(out / "burn_depth.tif") as d, rasterio.open(out / "depth_method.tif") as c, \
            rasterio.open(region.folder / "peat_thickness.tif") as t:
        depth, code, thick = d.read(1, masked=True).filled(0), c.read(1), t.read(1)
    modelled = code == METHOD_CODES["water_table"]
    assert depth.shape == thick.shape and modelled.any()
    assert np.all(depth[modelled] <= thick[modelled] + 1e-5)
    json.dumps(res.totals["qa"], allow_nan=True)
