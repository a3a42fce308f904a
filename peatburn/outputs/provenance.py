"""The provenance record: what was run, on which inputs (with SHA-256), with which parameters,
factor sets and citations, so that an auditor can re-run it and check the inputs still match.
"""

from __future__ import annotations

import datetime as dt
import platform
import sys
from importlib import metadata
from pathlib import Path

from ..errors import ProvenanceMismatch
from ..io.mosaics import RasterInput, is_url, resolved_files
from ..io.writers import file_record

DEPENDENCIES = ("numpy", "scipy", "rasterio", "geopandas", "shapely", "pyproj", "pint", "xdem", "click")


def versions() -> dict:
    out = {"python": sys.version.split()[0], "platform": platform.platform()}
    for name in ("peatburn",) + DEPENDENCIES:
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = None
    try:
        import rasterio

        out["gdal"] = rasterio.__gdal_version__
    except Exception:  # pragma: no cover
        pass
    return out


def _sidecars(path: Path) -> list[Path]:
    if path.suffix.lower() == ".shp":
        return [p for p in path.parent.glob(path.stem + ".*") if p != path]
    return []


def input_records(paths: dict) -> dict:
    """key -> path, size and SHA-256 of each input (and a shapefile's sidecar files).

    A virtual input (tiles read as a mosaic, a ``.vrt`` file, a URL) also lists every file it
    resolves to under ``files``, each with its SHA-256, so that ``check --against`` sees a changed
    tile; a URL is recorded as it is (reading a remote raster whole to hash it would defeat the
    windowed reads).
    """
    out = {}
    for key, p in paths.items():
        files = resolved_files(p)
        if isinstance(p, RasterInput):
            rec = {"path": p.text}
        else:
            p = Path(p)
            rec = file_record(p)
            side = _sidecars(p)
            if side:
                rec["sidecars"] = [file_record(s) for s in sorted(side)]
            files = files[1:]  # the .vrt file itself is the record
        if files or isinstance(p, RasterInput):
            rec["files"] = [{"url": f, "sha256": None} if is_url(f) else file_record(f) for f in files]
        out[key] = rec
    return out


def build(cfg, grid, alignment, factors, models=None, extra: dict | None = None, records: dict | None = None) -> dict:
    """The provenance.json content of a run; ``records``: :func:`input_records` of ``cfg.input_paths()``
    when the caller already has them (a run hashes its inputs while it finishes its tables)."""
    params = {"block_size": {"value": cfg.block_size, "unit": "px"}}
    if cfg.survey is not None:
        params.update({
            "survey_interval_years": {"value": cfg.survey.interval_years, "unit": "yr"},
            "stable_buffer_m": {"value": cfg.survey.stable_buffer_m, "unit": "m"},
            "level_of_detection_t": {"value": cfg.survey.lod_t, "unit": "1"},
        })
    if alignment is not None:
        params["coregistration"] = alignment.to_dict()
    if models is not None:
        params["water_table_model"] = models.to_dict()
    params["tier1_fuel_consumption"] = {"value": cfg.tier1.fuel_consumption_t_ha, "unit": "t/ha",
                                        "note": "null: the IPCC 2013 Wetlands Supplement default"}
    params["vegetation_carbon_fraction"] = {"value": factors.vegetation_carbon_fraction, "unit": "1"}
    params["fre_combustion_coefficient"] = {"value": factors.coefficient, "unit": "kg/MJ"}
    return {
        "tool": "peatburn",
        "created_utc": dt.datetime.now(dt.timezone.utc).replace(microsecond=0).isoformat(),
        "versions": versions(),
        "config_file": str(cfg.source) if cfg.source else None,
        "config": cfg.raw,
        "inputs": _recorded(input_records(cfg.input_paths()) if records is None else records,
                            getattr(cfg, "recorded_as", ())),
        "grid": grid.to_dict(),
        "parameters": params,
        "emission_factors": {"smouldering": _set(factors.smouldering), "flaming": _set(factors.flaming),
                             "tier1": _set(factors.tier1)},
        "gwp": {"name": factors.gwp.name, "citation": factors.gwp.citation, "values": factors.gwp.gwp,
                "status": factors.gwp.status},
        "seed": cfg.uncertainty.seed,
        "draws": cfg.uncertainty.draws,
        **(extra or {}),
    }


def _recorded(inputs: dict, recorded_as) -> dict:
    """``inputs`` with the path of each key of ``recorded_as`` replaced by the path to record (the file's
    place once a series' staging folder is swapped in; its size and SHA-256 are those read)."""
    for key, path in recorded_as:
        if key in inputs:
            inputs[key]["path"] = str(path)
    return inputs


def _set(fs) -> dict:
    return {"name": fs.name, "phase": fs.phase, "citation": fs.citation, "doi": fs.doi,
            "factors_g_per_kg": fs.ef, "sd_g_per_kg": fs.sd, "status": fs.status,
            "source_path": fs.source_path, "derived_from": getattr(fs, "derived_from", None)}


def compare_inputs(record: dict, base: Path | None = None) -> list[str]:
    """Differences between the inputs named in a provenance record and the files on disk now.

    Returns a list of one-line findings (empty when everything matches).
    """
    problems = []
    for key, rec in record.get("inputs", {}).items():
        for one in ([rec] if "sha256" in rec else []) + [f for f in rec.get("files", []) if "url" not in f]:
            p = Path(one["path"])
            if not p.is_absolute() and base is not None:
                p = base / p
            if not p.exists():
                problems.append(f"{key}: {p} is missing")
                continue
            now = file_record(p)
            if now["sha256"] != one["sha256"]:
                problems.append(f"{key}: {p} has changed (SHA-256 {now['sha256'][:12]}… != recorded "
                                f"{one['sha256'][:12]}…)")
    return problems


def mismatch_error(problems: list[str]) -> ProvenanceMismatch:
    return ProvenanceMismatch("inputs do not match the provenance record: " + "; ".join(problems))


def check_against(record: dict) -> None:
    problems = compare_inputs(record)
    if problems:
        raise mismatch_error(problems)
