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
