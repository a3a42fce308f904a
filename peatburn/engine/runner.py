"""Run a configuration end to end and write the outputs of the run contract.

open inputs -> co-register the surveys -> fit the water-table model -> plan -> blocks (any
executor) -> sums -> flaming -> tables -> intervals -> rasters, report, provenance, SHA256SUMS. Every
file is written atomically into a staging folder that is swapped in whole at the end
(:mod:`peatburn.io.result_set`): the output folder holds one run's complete set at every moment.
"""

from __future__ import annotations

import contextlib
import logging
import math

import numpy as np
from dataclasses import dataclass, field
from pathlib import Path

from .. import __version__
from ..config import RunConfig
from ..errors import OutputExistsError
from .executors import BLOCK_GROUP, map_blocks
from ..factors import load_factor_set, load_gwp_set, require_gases
from ..io.writers import BlockRasterWriter, BlockWrites, write_csv, write_json
from ..outputs import provenance, tables
from .alignment import coregister
from .blocks import compute_block, process_block, read_block
from .depth_models import fit_models
from .inputs import open_inputs, window_group
from .plan import build_plan
from ..depth_methods import DEPTH_METHODS, METHOD_CODES, raster_description
from .sums import SCAR_LAYER, Sums

log = logging.getLogger(__name__)

CAUTIONS = [
    "These are estimates with uncertainty, not measurements and not legal findings.",
    "Enforcement and national reporting follow the country's own procedures and field verification.",
    "Burnt and smouldering peat is dangerous ground (hidden burning below a crust, collapse, smoke): "
    "field checks follow local safety practice.",
]

TIER1_FACTOR_SET = "smouldering_ipcc2013_wetlands"

#: How the gases follow the fuel, per ``[emission_factors] form`` (totals.json and the report).
GAS_FORM_TEXT = {
    "dry_matter": "gas = dry matter burned x emission factor (IPCC 2006 Vol. 4 Eq. 2.27 form; the Tier 1 "
                  "convention): the gases do not depend on the carbon fraction",
    "carbon_balance": "gas = carbon burned x emission factor / carbon of the set's CO2+CO+CH4 (carbon mass balance, "
                      "Ward and Radke 1993, Yokelson et al. 1999, in the form of Akagi et al. 2011 Eq. 1): the "
                      "carbon of the gases equals the carbon burned, and the carbon fraction's uncertainty reaches "
                      "the gases; the Tier 1 comparison line stays per dry matter",
}


@dataclass
class Factors:
    """The factor sets and constants a run's tables use."""

    smouldering: object
    flaming: object
    tier1: object
    gwp: object
    vegetation_carbon_fraction: float
    coefficient: float
    frp_route: bool
    #: "dry_matter" or "carbon_balance" (config emission_factors.form); the Tier 1 line stays per dry matter
    form: str = "dry_matter"
    #: the user's FRE-to-dry-matter conversion for peat [kg/MJ] (comparison column only), or None
    peat_coefficient: float | None = None


@dataclass
class RunResult:
    """What a run produced."""

    out_dir: Path | None
    zones: list[dict]
    totals: dict
    qa: dict
    files: dict = field(default_factory=dict)
    daily: list = field(default_factory=list)
    inventory: list = field(default_factory=list)
    fires: list = field(default_factory=list)
    provenance: dict = field(default_factory=dict)
    #: the run total's model sums and draw parameters (joint draws of a series), or None without draws
    draw_inputs: dict | None = None
    #: where the rasters are: ``out_dir``, or a private temporary folder of a run without one (removed
    #: with the result)
    raster_dir: Path | None = None

    @property
    def total(self) -> dict:
        return self.zones[-1]

    @property
    def frames(self) -> "ResultFrames":
        """The tables as pandas objects: ``zones``, ``fires``, ``daily``, ``inventory`` DataFrames (the
        columns of the CSV files) and the run ``total`` as a Series."""
        import pandas as pd

        parts = getattr(self, "_parts", None)
        zcols = parts.columns if parts else None
        zones = pd.DataFrame(self.zones, columns=zcols)
        return ResultFrames(zones=zones, fires=pd.DataFrame(self.fires, columns=parts.fire_columns if parts else None),
                            total=zones.iloc[-1].rename("total"),
                            daily=pd.DataFrame(self.daily, columns=parts.daily_columns if parts else None),
                            inventory=pd.DataFrame(self.inventory, columns=tables.INVENTORY_COLUMNS))

    def write(self, out_dir, *, overwrite: bool = False, pdf: bool = False) -> dict:
        """Write the result's files (tables, results.gpkg, rasters, report, provenance, SHA256SUMS) into
        ``out_dir`` as one set, as ``peatburn run`` does; an existing, non-empty folder is refused
        unless ``overwrite``. Returns the written files by name."""
        from ..io.lock import output_lock
        from ..io.result_set import staged

        if getattr(self, "_parts", None) is None or self.raster_dir is None or not Path(self.raster_dir).exists():
            raise OutputExistsError("this result cannot be written again: its rasters are gone; run again")
        out_dir = Path(out_dir)
        with output_lock(out_dir):
            with staged(out_dir, overwrite) as stage:
                self.files = {}
                write_outputs(self, stage)
                seal(stage, self, pdf)
            self.out_dir = out_dir
            self.files = {k: _moved(v, stage, out_dir) for k, v in self.files.items()}
        return self.files


@dataclass(frozen=True)
class ResultFrames:
    """A run's tables as pandas objects (:attr:`RunResult.frames`)."""

    zones: object
    fires: object
    total: object
    daily: object
    inventory: object


def prepare_out_dir(out_dir: Path, overwrite: bool) -> None:
    """A folder that is not a run's result set (the demo's top folder): a killed run's temporaries
    (peatburn's marker only) are removed with a warning; a non-empty folder needs ``overwrite``."""
    from ..io.result_set import remove_temporaries

    out_dir = Path(out_dir)
    remove_temporaries(out_dir)
    if out_dir.exists() and any(out_dir.iterdir()) and not overwrite:
        raise OutputExistsError(f"output folder {out_dir} exists and is not empty; choose another --out "
                                f"or pass --overwrite")
    out_dir.mkdir(parents=True, exist_ok=True)


def load_factors(cfg: RunConfig) -> Factors:
    from ..science import flaming

    fl = cfg.flaming
    return Factors(
        smouldering=require_gases(load_factor_set(cfg.factors.smouldering, "smouldering"), "smouldering"),
        flaming=require_gases(load_factor_set(cfg.factors.flaming, "flaming"), "flaming"),
        tier1=load_factor_set(TIER1_FACTOR_SET, "smouldering"),
        gwp=load_gwp_set(cfg.factors.gwp),
        vegetation_carbon_fraction=(fl.vegetation_carbon_fraction if fl and fl.vegetation_carbon_fraction
                                    else flaming.IPCC2006_CARBON_FRACTION_FOREST),
        coefficient=(fl.coefficient_kg_per_mj if fl and fl.coefficient_kg_per_mj
                     else flaming.WOOSTER_2005_COEFFICIENT),
        frp_route=bool(fl and fl.method == "frp"),
        form=getattr(cfg.factors, "form", "dry_matter"),
        peat_coefficient=fl.peat_coefficient_kg_per_mj if fl else None,
    )


def run(cfg: RunConfig, out_dir=None, *, overwrite: bool = False, workers: int = 1, progress=None,
        scheduler: str | None = None, pdf: bool = False) -> RunResult:
    """Run ``cfg`` and write zones.csv, fires.csv, results.gpkg, totals.json, inventory.csv/json,
    daily.csv, burn_depth.tif, carbon_smouldering.tif, depth_method.tif, report.html (and report.pdf
    with ``pdf``), provenance.json and SHA256SUMS into ``out_dir``, swapped in as one set
    (:mod:`peatburn.io.result_set`; ``peatburn check --outputs`` verifies it).

    ``out_dir`` None computes without writing any output: the result holds the tables in memory
    (:attr:`RunResult.frames`), the rasters wait in a private temporary folder removed with the
    result, and :meth:`RunResult.write` writes everything when asked.

    GDAL's block cache is bounded for the whole run (:func:`peatburn.engine.executors.gdal_env`, sized
    by :func:`peatburn.engine.executors.run_cache_bytes`): peak memory depends on the block size and the
    grid's width (up to a bound), not on the raster's area (docs/performance.md).
    ``scheduler`` (an address) is connected to before any input is read, so a wrong address fails
    at once; a :class:`distributed.Client` may be passed instead and is left open.
    """
    from .executors import connect, gdal_env

    client = connect(scheduler) if isinstance(scheduler, str) else scheduler  # a Client or cluster: as given
    try:
        with gdal_env():
            if out_dir is None:
                return _compute_only(cfg, workers=workers, progress=progress, scheduler=client)
            return _run(cfg, out_dir, overwrite=overwrite, workers=workers, progress=progress, scheduler=client,
                        pdf=pdf)
    finally:
        if client is not scheduler:
            client.close()


def _run(cfg: RunConfig, out_dir, *, overwrite: bool, workers: int, progress, scheduler, pdf: bool) -> RunResult:
    from ..io.lock import output_lock
    from ..io.result_set import staged

    out_dir = Path(out_dir)
    with output_lock(out_dir):  # one run at a time per output folder (issue 22)
        try:
            with staged(out_dir, overwrite) as stage:  # the outputs appear as one set, or not at all
                result = _run_locked(cfg, stage, workers=workers, progress=progress, scheduler=scheduler)
                seal(stage, result, pdf)
            result.out_dir = out_dir
            result.files = {k: _moved(v, stage, out_dir) for k, v in result.files.items()}
            return result
        except Exception as exc:
            _raise_if_disk_full(out_dir, exc)
            raise


def _compute_only(cfg: RunConfig, *, workers: int, progress, scheduler) -> RunResult:
    import shutil
    import tempfile
    import weakref

    tmp = Path(tempfile.mkdtemp(prefix="peatburn-rasters-"))
    try:
        result = _run_locked(cfg, None, workers=workers, progress=progress, scheduler=scheduler, raster_dir=tmp)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    weakref.finalize(result, shutil.rmtree, str(tmp), True)
    return result


def _raise_if_disk_full(out_dir: Path, exc: BaseException) -> None:
    """Turn an error of a full file system (GDAL's read of a cut temporary, ENOSPC) into one line."""
    import errno

    from ..errors import DiskFullError
    from ..io.writers import FULL_DISK_BYTES, free_bytes

    folder = out_dir if out_dir.exists() else out_dir.absolute().parent  # a new folder: its staging was beside
    if isinstance(exc, DiskFullError) or not folder.exists():
        return
    free = free_bytes(folder)
    if getattr(exc, "errno", None) != errno.ENOSPC and free >= FULL_DISK_BYTES:
        return
    import os

    st = os.statvfs(folder)
    raise DiskFullError(f"the disk holding {out_dir.absolute()} is full: the run needed more than the "
                        f"{st.f_blocks * st.f_frsize / 2**20:.2f} MiB file system had ({free / 2**20:.2f} MiB free "
                        f"after its temporaries were removed); free space or choose another --out (files under their "
                        f"final names are complete)") from exc


def _moved(path, stage: Path, out_dir: Path):
    """Where a file written into the staging folder is after the swap (a list: each of its files)."""
    if isinstance(path, (list, tuple)):
        return [_moved(p, stage, out_dir) for p in path]
    try:
        return out_dir / Path(path).relative_to(stage)
    except ValueError:
        return Path(path)


def seal(stage: Path, result: RunResult, pdf: bool = False) -> None:
    """The last files of a staged set: report.pdf (``pdf``), provenance.json with every other output's
    SHA-256, and SHA256SUMS of them all (:mod:`peatburn.outputs.checksums`)."""
    from ..outputs import checksums

    if pdf:  # report.html and every dossier printed by headless chromium, inside the set
        from ..outputs.pdf import print_pdf

        result.files["report_pdf"] = print_pdf(result.files["report"])
        result.files["dossier_pdfs"] = [print_pdf(p) for p in result.files.get("dossiers") or []]
        pdfs = [result.files["report_pdf"], *result.files["dossier_pdfs"]]
        result.provenance["outputs"] = sorted(set(result.provenance.get("outputs", []))
                                              | {Path(p).relative_to(stage).as_posix() for p in pdfs})
    result.provenance["output_sha256"] = checksums.output_records(stage)
    result.files["provenance"] = write_json(stage / checksums.PROVENANCE_NAME, result.provenance)
    result.files["checksums"] = checksums.write_sums(stage, known=result.provenance["output_sha256"])


def _run_locked(cfg: RunConfig, out_dir: Path | None, *, workers: int, progress, scheduler,
                raster_dir: Path | None = None) -> RunResult:
    factors = load_factors(cfg)
    from .executors import WorkerPool, gdal_env, run_cache_bytes

    # local workers start now: their start-up overlaps opening the inputs (remote ones take a while) and the
    # co-registration (docs/performance.md); what the inputs set up for remote reads reaches them with
    # each task (executors.network_env)
    pool = WorkerPool(workers) if workers > 1 and scheduler is None else None
    try:
        inputs = open_inputs(cfg)
        with gdal_env(run_cache_bytes(inputs.grid.width, cfg.block_size)):
            return _run_inputs(cfg, out_dir, inputs, factors, progress=progress, scheduler=scheduler, pool=pool,
                               raster_dir=raster_dir or out_dir)
    finally:
        if pool is not None:
            pool.close()


def _run_inputs(cfg: RunConfig, out_dir: Path | None, inputs, factors, *, progress, scheduler, pool,
                raster_dir: Path) -> RunResult:
    """The run after its inputs are open; ``pool`` (local workers, or None) is closed as soon as the
    block pass ends, so the COG conversion has the cores to itself."""
    try:
        plan, alignment, models, sums, rasters, notes = _block_pass(cfg, raster_dir, inputs, progress, scheduler, pool)
    finally:
        if pool is not None:
            pool.close()
    # the COG conversions (GDAL, outside the GIL) run while the tables and intervals are computed
    converting = _background(_finish_rasters, rasters)
    if out_dir is not None:
        _background(_import_report_tools)
    try:
        result = _compute_tables(cfg, out_dir, raster_dir, inputs, plan, alignment, models, factors, sums, notes,
                                 converting)
        if out_dir is not None:
            write_outputs(result, out_dir)
        return result
    finally:
        converting.wait()


def _import_report_tools() -> None:
    """Import the report's drawing modules (matplotlib: about 0.3 s) in a thread while the tables are
    computed, where the main thread mostly waits for the COGs; the report then finds them loaded."""
    import matplotlib.backends.backend_agg  # noqa: F401
    import matplotlib.dates  # noqa: F401
    import matplotlib.figure  # noqa: F401


def _block_pass(cfg, out_dir, inputs, progress, scheduler, pool):
    """Co-registration, plan and the block pass; returns the plan, the alignment, the water-table
    models, the sums, the open raster writers and the notes."""
    notes = list(inputs.notes) + run_notes(cfg)
    log.info("inputs open: grid %d x %d px, %d scar(s), %d zone layer(s)", inputs.grid.width, inputs.grid.height,
             len(inputs.scars.frame), len(inputs.zones))
    alignment = coregister(inputs) if inputs.has_survey else None
    if alignment is not None:
        log.info("co-registration: shift %.3f, %.3f, %.3f m; stable-ground NMAD %.3f -> %.3f m", alignment.shift_x,
                 alignment.shift_y, alignment.shift_z, alignment.nmad_before, alignment.nmad_after)
    plan = build_plan(inputs, alignment)
    models = None
    if cfg.water_table is not None:
        models = fit_models(inputs, plan, notes)
        plan.models = models  # built once: only the models change, the blocks read the plan after this
    grid = plan.grid
    # squares of blocks (fewer tiles decoded twice by workers) unless an input is striped
    windows = grid.windows(cfg.block_size, group=window_group(inputs, cfg.block_size, BLOCK_GROUP))
    sums = Sums.empty(plan)
    log.info("block pass: %d block(s) of %d px", len(windows), cfg.block_size)
    specs = [
        ("burn_depth.tif", dict(description="burn depth", units="m")),
        ("carbon_smouldering.tif", dict(description="carbon burned below ground", units="kg C m-2")),
        ("depth_method.tif", dict(description=raster_description(),
                                  units="code", dtype="uint8", nodata=0, colormap=method_colormap())),
    ]
    rasters = []
    writes = None
    share = burned_share(plan)
    try:
        for name, kw in specs:
            rasters.append(BlockRasterWriter(out_dir / name, grid, block_size=cfg.block_size, expected_share=share,
                                             **kw))
        # a thread per raster: the DEFLATE compression of the output tiles (once, in their final form) overlaps
        # the computation, serial or parallel (docs/performance.md, benchmark 8)
        writes = BlockWrites(rasters, threads=True)
        for i, r in enumerate(map_blocks(process_block, plan, windows, scheduler=scheduler, pool=pool,
                                         stages=(read_block, compute_block))):
            sums.add(r)
            writes.write_at(r.window, r.burned, [r.depth_b, r.cdens_b, r.codes])
            if progress:
                progress(i + 1, len(windows))
        writes.close()
    except BaseException:
        if writes is not None:
            with contextlib.suppress(BaseException):
                writes.close()
        _finish_rasters(rasters, ok=False)
        raise
    return plan, alignment, models, sums, rasters, notes


def burned_share(plan) -> float:
    """Share of the grid inside the burn scars (their summed area over the grid's; overlaps count
    twice, at most 1): the output rasters' predictor is chosen from it before the first tile is written."""
    import shapely

    scars = np.asarray(plan.scars, dtype=object)
    if scars.size == 0:
        return 0.0
    a, e = abs(plan.grid.transform.a), abs(plan.grid.transform.e)
    area = float(np.nansum(shapely.area(scars[~shapely.is_missing(scars)])))
    return min(1.0, area / (plan.grid.width * plan.grid.height * a * e))


def method_colormap() -> dict:
    """depth_method.tif's palette (a TIFF ColorMap): each code in its colour of the depth-method
    table (peatburn/depth_methods.py), so that a GIS shows the map as the report does."""
    from ..depth_methods import DEPTH_METHODS, MINERAL_CODE, MINERAL_COLOUR

    def rgba(hex_):
        return tuple(int(hex_[i:i + 2], 16) for i in (1, 3, 5)) + (255,)

    cmap = {0: (0, 0, 0, 0)}
    cmap.update({m.code: rgba(m.colour) for m in DEPTH_METHODS})
    cmap[MINERAL_CODE] = rgba(MINERAL_COLOUR)
    return cmap


def run_notes(cfg) -> list[str]:
    """Notes a run's configuration alone calls for (method scope, what a setting does or not do)."""
    from ..config import RasterRef

    notes = []
    if cfg.tier1_only:
        notes.append("Tier 1 only: no survey and no water table, so every burned pixel on organic soil gets the "
                     "IPCC 2013 Wetlands Supplement default fuel consumption (no measured or modelled depth)")
    if cfg.earlier_burns:  # a later year of a series (docs/method.md 7.7)
        n = len(cfg.earlier_burns)
        notes.append(f"fire history: {n} earlier year(s) of the series burned before this run; the peat thickness "
                     f"is reduced by their burn depths (a pixel with no peat left burns none) and, where the scars "
                     f"carry no fire count, a pixel they burned counts as a repeat fire"
                     + ("" if cfg.peat.thickness is not None else
                        "; no peat.thickness is given, so only the repeat-fire status applies"))
    sv = cfg.survey
    if sv is not None and sv.subsidence_rate is not None and not isinstance(sv.subsidence_rate, RasterRef):
        notes.append(f"subsidence: the rate is one constant ({float(sv.subsidence_rate):g} m/yr); the vertical "
                     f"co-registration on stable ground absorbs a uniform lowering, so it has no effect on the burn "
                     f"depths: only a rate map that differs between scars and stable ground changes them")
    return notes


def fill_notes(cfg, plan, total: dict) -> list[str]:
    """Notes on holes in the peat-property rasters that were filled (science.peat.fill_missing)."""
    out = []
    for key, label, unit, configured in (
            ("rho", "bulk_density", "g/cm^3", cfg.peat.bulk_density_fill),
            ("cf", "carbon_fraction", "", cfg.peat.carbon_fraction_fill)):
        area = total.get(f"{key}_filled_area_m2", 0.0)
        if not area:
            continue
        value = getattr(plan, f"{key}_fill")
        how = (f"the configured peat.{label}_fill" if configured is not None
               else f"the median of the run's valid values (set peat.{label}_fill to state another)")
        out.append(f"peat.{label}: {area * tables.HA_PER_M2:.4g} ha of burned pixels had no value and were filled "
                   f"with {value:.4g}{' ' + unit if unit else ''}, {how}; their measured or modelled depth is kept "
                   f"and their carbon carries a wider spread (peat_property_fill)")
    return out


def _background(fn, *args):
    """Run ``fn(*args)`` in a thread; ``.result()`` re-raises its error, ``.wait()`` only waits."""
    import concurrent.futures

    pool = concurrent.futures.ThreadPoolExecutor(max_workers=1, thread_name_prefix=f"peatburn-{fn.__name__}")
    fut = pool.submit(fn, *args)
    pool.shutdown(wait=False)

    class Job:
        def result(self):
            return fut.result()

        def wait(self):
            concurrent.futures.wait([fut])

    return Job()


def _finish_rasters(rasters, ok: bool = True) -> None:
    """Close every raster writer: the COG of each assembled in its own thread when ``ok`` (mostly GDAL and
    file work, which release the GIL), else only cleaned up; every writer is closed, and the first
    error is raised."""
    import concurrent.futures

    if not ok or len(rasters) < 2:
        errors = []
        for w in rasters:
            try:
                w.close(ok=ok and not errors)
            except BaseException as exc:  # noqa: BLE001 - re-raised below
                errors.append(exc)
        if errors:
            raise errors[0]
        return
    with concurrent.futures.ThreadPoolExecutor(len(rasters), thread_name_prefix="peatburn-cog") as pool:
        futures = [pool.submit(w.close) for w in rasters]
    errors = [f.exception() for f in futures if f.exception() is not None]
    if errors:
        raise errors[0]


def area_adjusted(cfg, sums: Sums, notes: list) -> Sums:
    """The run's sums scaled by the error-adjusted burned-area ratio when ``[burned_area.accuracy] adjust =
    true`` (issue 16; science.uncertainty.area_accuracy); else ``sums`` unchanged. Every sum is an area
    integral (areas, volumes, masses), so one scale keeps each table consistent (zones add up to the total,
    mean depths and shares unchanged); the rasters keep the mapped scars, pixel by pixel."""
    from .intervals import area_term

    scale = area_term(cfg)[0]
    if scale == 1.0:
        return sums
    notes.append(f"burned area: every area, mass and emission is scaled by the error-adjusted area ratio {scale:.4g} "
                 f"([burned_area.accuracy] adjust = true); the rasters show the mapped scars")
    return Sums({k: v * scale for k, v in sums.total.items()},
                [(n, ids, {k: np.asarray(v) * scale for k, v in acc.items()}) for n, ids, acc in sums.layers])


def _compute_tables(cfg, out_dir, raster_dir, inputs, plan, alignment, models, factors, sums, notes, converting):
    """Every table of the run in memory (a :class:`RunResult`), the rasters in ``raster_dir``."""
    grid = plan.grid
    from .above_ground import flaming_sums

    # the inputs' SHA-256 for the provenance, in a thread (hashlib releases the GIL) while the tables are made
    hashing = _background(provenance.input_records, cfg.input_paths())
    sums = area_adjusted(cfg, sums, notes)
    flame = flaming_sums(cfg, inputs, sums)
    if flame is not None:
        notes += flame.notes
    rows = tables.zone_rows(sums, factors, flame)
    total = rows[-1]
    run_gases = tables.run_gases(factors)
    qa = qa_summary(sums.total, alignment, models)
    from .intervals import area_basis

    # issue 16 item 5: the burned-area term is stated either way (default: none)
    qa["burned_area_accuracy"] = area_basis(cfg) or "none given ([burned_area.accuracy]): no area term"
    notes += fill_notes(cfg, plan, sums.total)
    checks = factor_checks(factors.smouldering, sums.total)
    checks["closure_of_reported_gases"] = 1.0 if factors.form == "carbon_balance" else checks["carbon_closure"]
    if factors.form == "dry_matter" and checks["carbon_closure"] is not None and checks["carbon_closure"] > 1.0:
        notes.append(f"emission factors: the set {factors.smouldering.name} puts {checks['carbon_closure']:.3f} times "
                     f"the fuel's carbon into CO2+CO+CH4 at this run's carbon fraction "
                     f"({checks['effective_carbon_fraction']:.3f}); its gases overstate the carbon burned "
                     f"([emission_factors] form = \"carbon_balance\" makes them close)")
    flame_checks = None
    if flame is not None:
        from ..science import gases

        ef = factors.flaming.ef
        closure = float(gases.carbon_closure(ef, factors.vegetation_carbon_fraction))
        flame_checks = {"mce": (float(gases.modified_combustion_efficiency(ef["co2"], ef["co"]))
                                if "co" in ef else None),
                        "vegetation_carbon_fraction": factors.vegetation_carbon_fraction, "carbon_closure": closure}
        if closure > 1.0 and factors.form == "dry_matter":
            notes.append(f"emission factors: the flaming set {factors.flaming.name} puts {closure:.3f} times the "
                         f"vegetation's carbon (fraction {factors.vegetation_carbon_fraction:g}) into CO2+CO+CH4")
    from ..outputs import fires, timeline

    periods = timeline.scar_periods(inputs.scars.frame, cfg.start_field, cfg.end_field)
    scar_sums = scar_layer_sums(sums, len(inputs.scars.frame))
    from .ignition import run_ignition

    ignition_cols, ignitions = run_ignition(cfg, inputs, flame, periods)
    fire_rows = fire_table(cfg, inputs, sums, flame, factors, periods, scar_sums, extra=ignition_cols)
    uncertainty = None
    draw_inputs = {}
    if cfg.uncertainty.draws > 0:
        from .intervals import add_intervals

        log.info("intervals: %d Monte Carlo draws, seed %d", cfg.uncertainty.draws, cfg.uncertainty.seed)
        uncertainty = add_intervals(rows, sums, flame, factors, cfg, alignment, models, grid, fire_rows=fire_rows,
                                    fill_cv=plan.fill_cv, keep=draw_inputs)
        if uncertainty.get("survey_calibration"):
            # the user's calibration check of the survey error model (engine.survey_calibration)
            qa["survey_error_calibration"] = uncertainty["survey_calibration"]
    converting.result()  # the rasters are complete from here on (field plots sample them)
    plots = None
    if inputs.plots is not None:
        from ..plots import validate_plots

        plots = validate_plots(inputs, plan, raster_dir)

    # the scars' sums add up to the run's: shared pixels of repeat burns are split between their fires
    # in the block pass (outputs.fires), so no rescaling is needed and no scar lends carbon to another
    flame_daily = flame.daily_dry_matter_kg if flame else {}
    daily = timeline.daily_rows(scar_sums, periods, flame_daily, factors)
    shares = timeline.year_shares(scar_sums, periods, flame_daily,
                                  flame.total["dry_matter_kg"] if flame else 0.0, cfg.year)
    if any(p[0] is None for p in periods):
        notes.append(f"timeline: {sum(p[0] is None for p in periods)} scar(s) without a fire date "
                     f"({cfg.start_field}); their emissions count in run.year ({cfg.year}) and are not in daily.csv")

    unit_of = tables.units(run_gases)
    totals = {
        "run": cfg.name, "year": cfg.year, "tool_version": __version__,
        "quantities": {k: {"value": total[k], "unit": unit_of.get(k, ""),
                           **({"lo": total.get(f"{k}_lo"), "hi": total.get(f"{k}_hi")}
                              if f"{k}_lo" in total else {})}
                       for k in tables.zone_columns(run_gases)[2:]},
        "method": {**method_summary(cfg, total, factors, alignment, models, flame),
                   "smouldering_factor_checks": checks, "flaming_factor_checks": flame_checks},
        "smouldering_factor_sensitivity": tables.factor_set_sensitivity(
            sums.total["peat_kg"], _sensitivity_sets(factors.smouldering), factors.gwp, factors.smouldering.name,
            carbon_kg=sums.total["carbon_kg"], form=factors.form),
        "qa": qa,
        "water_table_model": models.to_dict() if models else None,
        "field_plots": plots,
        "uncertainty": uncertainty,
        "notes": notes,
        "cautions": CAUTIONS,
    }
    for n in notes:  # also in totals.json and the report
        log.info("note: %s", n)
    columns = tables.zone_columns(run_gases)
    if uncertainty:
        for c in tables.interval_columns(run_gases):
            if c in tables.INTERVAL_COLUMNS or f"{c}_lo" in total:
                columns += [f"{c}_lo", f"{c}_hi"]
    inv = tables.inventory_rows(total, shares, factors.gwp.name, run_gases,
                                (uncertainty or {}).get("ipcc_total_uncertainty_pct"))
    from ..outputs import dossiers

    dossier_items = dossiers.plan(cfg, inputs, rows)  # issue 21: one page per burned zone of a layer asking
    dossier_files = ([it.file for it in dossier_items] + [f"{dossiers.FOLDER}/index.csv"]
                     if any(z.dossiers for z in cfg.zones) else [])
    prov = provenance.build(cfg, grid, alignment, factors, models, records=hashing.result(),
                            extra={"qa": qa, "method_shares": {m: total[f"carbon_share_{m}"] for m in METHOD_CODES},
                                   "outputs": sorted(["zones.csv", "fires.csv", "totals.json", "inventory.csv", "inventory.json", "daily.csv",
                                                      "results.gpkg", "burn_depth.tif", "carbon_smouldering.tif",
                                                      "depth_method.tif", "report.html", "provenance.json",
                                                      "SHA256SUMS"] + dossier_files)})
    # provenance.json and SHA256SUMS are written last, with the outputs' SHA-256 (runner.seal)
    result = RunResult(out_dir, rows, totals, qa, daily=daily, inventory=inv, fires=fire_rows, provenance=prov,
                       raster_dir=raster_dir, draw_inputs=draw_inputs or None)
    result._parts = _WriteParts(cfg, factors, columns, fires.fire_columns(bool(uncertainty), list(ignition_cols or ())),
                                timeline.daily_columns(run_gases),
                                [(z.name, layer.frame, ids) for z, layer, ids in inputs.zones],  # not read twice
                                inputs.scars.frame,
                                (dossier_items, inputs, ignitions, flame, periods) if dossier_files else None)
    return result


@dataclass
class _WriteParts:
    """What writing a computed result needs besides its tables."""

    cfg: RunConfig
    factors: Factors
    columns: list
    fire_columns: list
    daily_columns: list
    zone_layers: list
    scars: object
    #: (items, inputs, ignitions, flame, periods) when a zone layer asks for dossiers (issue 21)
    dossiers: tuple | None = None


RASTER_NAMES = ("burn_depth", "carbon_smouldering", "depth_method")


def write_outputs(result: RunResult, out_dir: Path) -> dict:
    """Write a computed result's files into ``out_dir`` (the folder is ready and locked): the
    rasters (copied when they were computed elsewhere), zones.csv, fires.csv, results.gpkg,
    totals.json, inventory.csv/json, daily.csv, report.html and the dossiers (provenance.json and
    SHA256SUMS follow in :func:`seal`)."""
    import shutil

    from ..io.writers import atomic_path
    from ..outputs import report
    from ..outputs.gis import write_results_gpkg

    parts = result._parts
    out_dir = Path(out_dir)
    files = result.files
    for name in RASTER_NAMES:
        src = Path(result.raster_dir) / f"{name}.tif"
        if Path(result.raster_dir).resolve() != out_dir.resolve():
            with atomic_path(out_dir / f"{name}.tif", suffix=".tif") as tmp:
                shutil.copyfile(src, tmp)
    files["zones"] = write_csv(out_dir / "zones.csv", result.zones, parts.columns)
    files["fires"] = write_csv(out_dir / "fires.csv", result.fires, parts.fire_columns)
    files["gis"] = write_results_gpkg(out_dir / "results.gpkg", parts.zone_layers, result.zones, parts.columns,
                                      parts.scars, result.fires, parts.fire_columns)
    files["totals"] = write_json(out_dir / "totals.json", result.totals)
    files["daily"] = write_csv(out_dir / "daily.csv", result.daily, parts.daily_columns)
    files["inventory"] = write_csv(out_dir / "inventory.csv", result.inventory, tables.INVENTORY_COLUMNS)
    files["inventory_json"] = write_json(out_dir / "inventory.json",
                                         {"unit": "Gg", "gwp": parts.factors.gwp.name,
                                          "conventions": tables.INVENTORY_CONVENTIONS, "rows": result.inventory})
    result.out_dir = out_dir
    files["report"] = report.write_report(out_dir / "report.html", result, parts.cfg, result.provenance,
                                          parts.factors, parts.zone_layers)
    if parts.dossiers is not None:
        from ..outputs import dossiers

        items, inputs, ignitions, flame, periods = parts.dossiers
        files["dossiers"] = dossiers.write_dossiers(out_dir, items, result, parts.cfg, result.provenance, inputs,
                                                    result.fires, ignitions, flame, periods)
    for name in RASTER_NAMES:
        files[name] = out_dir / f"{name}.tif"
    return files


def scar_layer_sums(sums, n_scars: int) -> dict:
    """The block pass's sums per fire (burn-scar polygon), in layer order: ``key -> array(n_scars)``."""
    acc = next(acc for name, _, acc in sums.layers if name == SCAR_LAYER)
    return {k: np.asarray(v[1:n_scars + 1], dtype="float64").copy() for k, v in acc.items()}


def fire_table(cfg, inputs, sums, flame, factors, periods, scar_sums, extra=None) -> list[dict]:
    """Rows of fires.csv (intervals are filled in later by :func:`peatburn.engine.intervals.add_intervals`)."""
    from ..outputs import fires

    ids, _ = fires.fire_ids(inputs.scars.frame, cfg.id_field)
    n = len(ids)
    fl = None
    if flame is not None:
        li = [name for name, _, _ in sums.layers].index(SCAR_LAYER)
        fl = {k: np.asarray(v)[1:n + 1] for k, v in flame.layers[li][1].items()}
    return fires.fire_rows(ids, periods, scar_sums, factors, cfg.year, flame=fl, extra=extra)


def method_summary(cfg, total, factors, alignment, models, flame) -> dict:
    depth = {}
    for dm in DEPTH_METHODS:
        m = dm.name
        depth[m] = {"area_ha": total[f"area_{m}_ha"], "share_of_carbon": total[f"carbon_share_{m}"],
                    "tier": dm.tier}
    return {
        "depth": depth,
        "tier1_only": cfg.tier1_only,
        "unestimated_area_ha": total["unestimated_area_ha"],
        "mineral_soil_area_ha": total["mineral_soil_area_ha"],
        "smouldering_factors": factors.smouldering.name,
        "gas_form": factors.form,
        "gas_form_text": GAS_FORM_TEXT[factors.form],
        "tier1_factors": factors.tier1.name,
        "flaming": flame.route if flame else "not estimated (no [flaming] section): flaming columns are zero",
        "flaming_factors": factors.flaming.name if flame else None,
        "flaming_parameters": flame.parameters if flame else None,
        "vegetation_carbon_fraction": factors.vegetation_carbon_fraction,
        "gwp": factors.gwp.name,
        "uncertainty": (f"Monte Carlo, {cfg.uncertainty.draws} draws at zone level, seed {cfg.uncertainty.seed}"
                        if cfg.uncertainty.draws else "no Monte Carlo draws (uncertainty.draws = 0)"),
    }


def _sensitivity_sets(chosen) -> list:
    """Every shipped smouldering set, and the run's own set where it is a user file."""
    from ..factors import list_factor_sets

    shipped = list_factor_sets("smouldering")
    return shipped + ([chosen] if chosen.name not in {s.name for s in shipped} else [])


def factor_checks(factor_set, total: dict) -> dict:
    """MCE of the set and its carbon closure at the run's effective carbon fraction (carbon / dry mass)."""
    from ..science import gases

    ef = factor_set.ef
    mce = float(gases.modified_combustion_efficiency(ef["co2"], ef["co"])) if "co" in ef else None
    f = total["carbon_kg"] / total["peat_kg"] if total["peat_kg"] > 0 else None
    closure = float(gases.carbon_closure(ef, f)) if f and 0 < f <= 1 else None
    return {"mce": mce, "effective_carbon_fraction": f, "carbon_closure": closure,
            "carbon_in_gases_g_per_kg": float(gases.carbon_in_emissions(ef))}


def qa_summary(total: dict, alignment, models=None) -> dict:
    est = total["area_m2_survey"]
    burned = total["burned_area_m2"]
    out = alignment.to_dict() if alignment else {"method": "no survey pair"}
    out.update({
        "share_of_surveyed_area_below_lod": total["below_lod_area_m2"] / est if est else math.nan,
        "share_of_burned_area_unestimated": total["unestimated_area_m2"] / burned if burned else math.nan,
        "share_of_surveyed_area_capped_by_thickness": total["capped_area_m2"] / est if est else math.nan,
        # survey outliers inside the scars (science.survey.outliers): flagged, kept in the sums
        "outlier_area_ha": total["outlier_area_m2"] * tables.HA_PER_M2,
        "share_of_surveyed_area_outliers": total["outlier_area_m2"] / est if est else math.nan,
        # holes in the peat-property rasters filled from the stated fallback (science.peat.fill_missing)
        "bulk_density_filled_area_ha": total["rho_filled_area_m2"] * tables.HA_PER_M2,
        "carbon_fraction_filled_area_ha": total["cf_filled_area_m2"] * tables.HA_PER_M2,
        "mineral_soil_area_ha": total["mineral_area_m2"] * tables.HA_PER_M2,
    })
    if models is not None:
        m = models.all
        modelled = total["area_m2_water_table"]
        out.update({
            "water_table_fit": m.estimator or m.method,
            "water_table_cv_scars": m.cv_n_scars, "water_table_cv_bias": m.cv_bias, "water_table_cv_rmse": m.cv_rmse,
            # covariates beside the water table and the leave-scar-out score of every set tried (issue 15)
            "water_table_covariates": list(getattr(m, "covariates", ())),
            "water_table_cv_scores": dict(getattr(m, "cv_scores", {}) or {}),
            "share_of_modelled_area_extrapolated":
                total.get("wt_extrapolated_area_m2", 0.0) / modelled if modelled else math.nan,
        })
    return out
