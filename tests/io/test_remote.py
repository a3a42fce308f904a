"""Remote rasters (issue 19 item 2): the scene's GeoTIFFs served by a local HTTP server with range
requests (tests/io/range_server.py, on 127.0.0.1 only) give the same run as the local files; s3://
goes through GDAL's /vsis3/ against the same server as an S3 endpoint; a 404 and a silent server
give one-line errors (the timeout stated)."""

from __future__ import annotations

import shutil

import pytest

from peatburn.config import load_config
from peatburn.errors import InputFileError
from peatburn.io.mosaics import RasterInput
from peatburn.io.rasters import inspect_raster

from range_server import serve  # tests/io/range_server.py (pytest puts this folder on sys.path)


def _remote_config(scene, folder, base_url, bucket=None):
    folder.mkdir(parents=True, exist_ok=True)
    for f in ("scars.gpkg", "zones.gpkg"):
        shutil.copy(scene.folder / f, folder / f)
    text = scene.config.read_text()
    for name in ("pre", "post", "thickness"):
        url = f"s3://{bucket}/{name}.tif" if bucket else f"{base_url}/{name}.tif"
        text = text.replace(f'"{name}.tif"', f'"{url}"')
    (folder / "config.toml").write_text(text)
    return folder / "config.toml"


def _same_zones(a, b):
    for want, got in zip(a.zones, b.zones):
        assert (want["layer"], want["zone"]) == (got["layer"], got["zone"])
        for k in ("carbon_smouldering_t", "burned_area_ha", "co2e_smouldering_t", "area_survey_ha"):
            assert got[k] == pytest.approx(want[k], rel=1e-9, abs=1e-12), k


@pytest.mark.slow
def test_https_inputs_give_the_local_result(scene, scene_run, tmp_path):
    import peatburn

    with serve(scene.folder) as (url, log):
        cfg = load_config(_remote_config(scene, tmp_path / "cfg", url))
        assert isinstance(cfg.survey.pre, RasterInput) and str(cfg.survey.pre).startswith("/vsicurl/http://")
        res = peatburn.run(cfg, tmp_path / "out", overwrite=True)
    _same_zones(scene_run, res)
    tif_gets = [r for r in log if r[0] == "GET" and r[1].endswith(".tif")]
    assert tif_gets and all(r[2] for r in tif_gets)  # every read was a byte range, none a whole download


@pytest.mark.slow
def test_s3_inputs_through_vsis3(scene, scene_run, tmp_path, monkeypatch):
    import peatburn

    bucket_root = tmp_path / "root"
    (bucket_root / "bucket").mkdir(parents=True)
    for name in ("pre", "post", "thickness"):
        shutil.copy(scene.folder / f"{name}.tif", bucket_root / "bucket" / f"{name}.tif")
    with serve(bucket_root) as (url, log):
        # GDAL's documented S3 settings: a local endpoint, plain HTTP, path-style, no signature
        monkeypatch.setenv("AWS_S3_ENDPOINT", url.removeprefix("http://"))
        monkeypatch.setenv("AWS_HTTPS", "NO")
        monkeypatch.setenv("AWS_VIRTUAL_HOSTING", "FALSE")
        monkeypatch.setenv("AWS_NO_SIGN_REQUEST", "YES")
        cfg = load_config(_remote_config(scene, tmp_path / "cfg", url, bucket="bucket"))
        assert str(cfg.survey.pre) == "/vsis3/bucket/pre.tif"
        res = peatburn.run(cfg, tmp_path / "out", overwrite=True)
    _same_zones(scene_run, res)
    assert any(r[1].startswith("/bucket/pre.tif") and r[2] for r in log)


def test_404_is_one_line(scene, tmp_path):
    with serve(scene.folder) as (url, _):
        cfg_path = _remote_config(scene, tmp_path / "cfg", url)
        cfg_path.write_text(cfg_path.read_text().replace("/pre.tif", "/missing.tif"))
        cfg = load_config(cfg_path)
        with pytest.raises(InputFileError) as exc:
            inspect_raster(cfg.survey.pre, "depth.survey.pre")
    msg = str(exc.value)
    assert "\n" not in msg and "depth.survey.pre" in msg and "missing.tif" in msg and "404" in msg


def test_silent_server_times_out_with_the_timeout_stated(scene, tmp_path, monkeypatch):
    monkeypatch.setenv("GDAL_HTTP_TIMEOUT", "1")
    monkeypatch.setenv("GDAL_HTTP_MAX_RETRY", "0")
    with serve(scene.folder, stall_s=3.0) as (url, _):
        cfg = load_config(_remote_config(scene, tmp_path / "cfg", url + "/slow"))
        with pytest.raises(InputFileError) as exc:
            inspect_raster(cfg.survey.post, "depth.survey.post")
    msg = str(exc.value)
    assert "\n" not in msg and "within 1 s" in msg and "GDAL_HTTP_TIMEOUT" in msg


def _s3_env(monkeypatch, url):
    # GDAL's documented S3 settings: a local endpoint, plain HTTP, path-style, no signature
    monkeypatch.setenv("AWS_S3_ENDPOINT", url.removeprefix("http://"))
    monkeypatch.setenv("AWS_HTTPS", "NO")
    monkeypatch.setenv("AWS_VIRTUAL_HOSTING", "FALSE")
    monkeypatch.setenv("AWS_NO_SIGN_REQUEST", "YES")


def _bucket(scene, tmp_path):
    root = tmp_path / "root"
    (root / "bucket").mkdir(parents=True)
    for name in ("pre", "post", "thickness"):
        shutil.copy(scene.folder / f"{name}.tif", root / "bucket" / f"{name}.tif")
    return root


def _same_rasters(a_dir, b_dir):
    import numpy as np
    import rasterio

    for name in ("burn_depth.tif", "carbon_smouldering.tif", "depth_method.tif"):
        with rasterio.open(a_dir / name) as a, rasterio.open(b_dir / name) as b:
            np.testing.assert_array_equal(a.read(1), b.read(1), err_msg=name)


@pytest.mark.slow
def test_s3_inputs_read_by_local_workers_started_before(scene, scene_run, tmp_path, monkeypatch):
    """Local workers fork from Python's process server, started here before the S3 settings exist (as an
    earlier run in the same session would have started it); the run starts its pool before it opens the
    inputs. The settings reach the workers with their tasks: the local files' result, read over S3."""
    import peatburn
    from peatburn.engine.executors import WorkerPool

    with WorkerPool(1):  # starts the process server now, with today's environment
        pass
    with serve(_bucket(scene, tmp_path)) as (url, log):
        _s3_env(monkeypatch, url)
        cfg = load_config(_remote_config(scene, tmp_path / "cfg", url, bucket="bucket"))
        res = peatburn.run(cfg, tmp_path / "out", overwrite=True, workers=2)
    _same_zones(scene_run, res)
    _same_rasters(scene_run.out_dir, tmp_path / "out")
    assert any(r[1].startswith("/bucket/post.tif") and r[2] for r in log)


@pytest.mark.slow
def test_s3_inputs_read_by_dask_workers_started_before(scene, scene_run, tmp_path, monkeypatch):
    """A dask cluster whose workers started before the S3 settings were set: the client sends them
    (they hold no credential) with the tasks; the local files' result comes out."""
    import peatburn

    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None) as cl:
        with serve(_bucket(scene, tmp_path)) as (url, log):
            _s3_env(monkeypatch, url)
            cfg = load_config(_remote_config(scene, tmp_path / "cfg", url, bucket="bucket"))
            res = peatburn.run(cfg, tmp_path / "out", overwrite=True, scheduler=cl)
    _same_zones(scene_run, res)
    _same_rasters(scene_run.out_dir, tmp_path / "out")
    assert any(r[1].startswith("/bucket/post.tif") and r[2] for r in log)


def test_credentials_are_not_sent_to_dask_workers(monkeypatch):
    from peatburn.engine.executors import network_env

    monkeypatch.setenv("AWS_SECRET_ACCESS_KEY", "s")
    monkeypatch.setenv("GDAL_HTTP_HEADERS", "Authorization: Bearer t")
    monkeypatch.setenv("AWS_S3_ENDPOINT", "h:1")
    assert network_env()["AWS_SECRET_ACCESS_KEY"] == "s" and "GDAL_HTTP_HEADERS" in network_env()
    safe = network_env(secrets=False)
    assert safe["AWS_S3_ENDPOINT"] == "h:1" and "AWS_SECRET_ACCESS_KEY" not in safe and "GDAL_HTTP_HEADERS" not in safe
