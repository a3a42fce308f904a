"""``peatburn check`` as a library function: validate a configuration and its inputs and say what a
run would do, without reading any pixel beyond the checks (issue 25 item 3).

The CLI (``peatburn/cli/check.py``) prints :attr:`CheckReport.lines`; a notebook reads the fields.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field


@dataclass
class CheckReport:
    """What :func:`check` found: the configuration, the run grid, the raster inputs as inspected,
    the notes, and the report's lines as ``peatburn check`` prints them."""

    config: object
    grid: object
    rasters: dict
    notes: list
    lines: list = field(default_factory=list)
    against: str | None = None
    #: with ``against``: one line per input that no longer matches (empty: all match)
    mismatches: list = field(default_factory=list)
    #: the burn scars as read (a GeoDataFrame in the run grid's CRS; a series checks them across years)
    scars: object = field(default=None, repr=False)

    @property
    def ok(self) -> bool:
        return not self.mismatches

    def __str__(self) -> str:
        return "\n".join(self.lines)


def check(config, against=None, *, strict: bool = True) -> CheckReport:
    """Validate ``config`` (a :class:`peatburn.RunConfig` or a path to a TOML file) and its inputs.

    Parameters
    ----------
    config : RunConfig or path
    against : path, optional
        A provenance.json: are the inputs still the files it records (every tile of a mosaic too)?
    strict : bool
        Raise :class:`peatburn.errors.ProvenanceMismatch` when they are not (default); False puts the
        findings in :attr:`CheckReport.mismatches` instead.

    Raises
    ------
    PeatburnError
        Any problem a run would meet before its block pass (one-line message).
    """
    from ..config import RunConfig, load_config
    from ..depth_methods import METHOD_CODES as code
    from ..factors import load_factor_set, load_gwp_set, require_gases
    from ..names import printable
    from ..outputs.provenance import compare_inputs, mismatch_error
    from .inputs import open_inputs

    cfg = config if isinstance(config, RunConfig) else load_config(config)
    sm = require_gases(load_factor_set(cfg.factors.smouldering, "smouldering"), "smouldering")
    fl = require_gases(load_factor_set(cfg.factors.flaming, "flaming"), "flaming")
    gwp = load_gwp_set(cfg.factors.gwp)
    inputs = open_inputs(cfg)
    g = inputs.grid
    out = []
    out.append(f"run: {cfg.name}")
    out.append(f"grid: {g.width} x {g.height} px of {g.res[0]:g} x {g.res[1]:g} in {g.crs.to_string()}; "
               f"{len(g.windows(cfg.block_size))} blocks of {cfg.block_size} px")
    for key, info in inputs.rasters.items():
        aligned = "on grid" if (info.crs == g.crs and info.transform == g.transform) else "warped onto grid"
        out.append(f"raster {key}: {info.path} ({info.width} x {info.height}, nodata {info.nodata}, {aligned})")
    kind = "fires labelled in the raster mask" if inputs.burn_mask is not None else "polygons from"
    out.append(f"burn scars: {len(inputs.scars.frame)} {kind} {cfg.burned_area}")
    for z, layer, ids in inputs.zones:
        out.append(f"zones {z.name}: {len(ids)} polygons, id field {z.id!r}"
                   f"{'; a dossier per burned zone (dossiers/)' if z.dossiers else ''}")
    if cfg.uncertainty.draws:
        from .intervals import draw_cost

        n_rows = sum(len(ids) + 1 for _, _, ids in inputs.zones) + 1
        seconds, memory = draw_cost(cfg.uncertainty.draws, n_rows)
        out.append(f"uncertainty: {cfg.uncertainty.draws:,} draws x {n_rows:,} zone rows: about {seconds:.0f} s "
                   f"and at most {memory / 2**20:.0f} MiB for the intervals (after the block pass)")
        from .intervals import area_basis

        out.append(f"uncertainty, burned-area map accuracy: {area_basis(cfg) or 'none given, no area term'}")
    if cfg.survey is not None:
        sv = cfg.survey
        sub = "raster" if hasattr(sv.subsidence_rate, "path") else sv.subsidence_rate
        stable = "polygons" if sv.stable else f"outside scars buffered by {sv.stable_buffer_m:g} m"
        out.append(f"depth {code['survey']}: two surveys {sv.interval_years:g} yr apart; subsidence {sub}; co-registration on "
                   f"stable ground ({stable})")
    if cfg.water_table is not None:
        wt = cfg.water_table
        src = f"raster {wt.raster.path}" if wt.raster else f"stations {wt.stations} (IDW, power {wt.idw_power:g})"
        if wt.dated_rasters:
            src = (f"{len(wt.dated_rasters)} dated rasters ({wt.dated_rasters[0][1]} to {wt.dated_rasters[-1][1]}; "
                   f"each scar takes the one nearest its fire start within {wt.date_window_days:g} days)")
        out.append(f"depth {code['water_table']}: water-table model ({wt.model}) from {src}")
    if cfg.tier1_only:
        out.append("depth: Tier 1 only (no survey, no water table): the IPCC 2013 Wetlands Supplement default on "
                   "every burned pixel of organic soil")
    else:
        out.append(f"depth {code['tier1']}: IPCC 2013 Wetlands Supplement Tier 1 default where neither gives a depth")
    if cfg.peat.extent is not None:
        out.append(f"peat extent: {cfg.peat.extent} (outside it, and where the thickness is 0: mineral soil, "
                   f"no below-ground emission)")
    if cfg.flaming is not None:
        out.append(f"flaming: {cfg.flaming.method} route")
    out.append(f"smouldering factors: {sm.name} ({sm.citation}); GWP: {gwp.name}")
    out.append(f"flaming factors: {fl.name}; gases reported: smouldering {', '.join(sm.gases)}; "
               f"flaming {', '.join(fl.gases)}")
    for n in inputs.notes:
        out.append(f"note: {printable(n)}")  # notes may quote names from input files
    problems = []
    if against:
        problems = compare_inputs(_read_record(against))
        if problems and strict:
            raise mismatch_error(problems)
        if not problems:
            out.append(f"inputs match {against}")
    if not problems:
        out.append("ok: the configuration is valid")
    return CheckReport(cfg, g, dict(inputs.rasters), list(inputs.notes), out, str(against) if against else None,
                       problems, inputs.scars.frame)


@dataclass
class SeriesCheckReport:
    """What :func:`check_series` found: the series, each year's :class:`CheckReport`, the series' notes
    (years missing in the middle, stated differences) and the lines ``peatburn check SERIES.toml`` prints."""

    series: object
    years: dict  # year -> CheckReport
    notes: list
    lines: list = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return True  # a problem raises

    def __str__(self) -> str:
        return "\n".join(self.lines)


def check_series(series) -> SeriesCheckReport:
    """Validate a series (a :class:`peatburn.series_config.SeriesConfig` or a path to SERIES.toml)
    before anything runs: the series file (duplicate years refused; the shared and consistent
    settings of every year agree, refused with the messages ``peatburn series`` gives; years missing
    in the middle reported), then every year's configuration and inputs as :func:`check` does.

    Raises
    ------
    PeatburnError
        The first problem, one line; a year's problem names the year and its configuration file.
    """
    from ..errors import PeatburnError
    from ..series_config import SeriesConfig, load_series

    s = series if isinstance(series, SeriesConfig) else load_series(series)
    lines = [f"series: {s.name}: {len(s.years)} year(s) {', '.join(map(str, s.years))}; base year {s.base_year}"]
    if s.shared:
        lines.append("shared settings: " + "; ".join(f"{k} = {v}" for k, v in s.shared.items()))
    reports = {}
    for entry in s.runs:
        try:
            rep = check(entry.config)
        except PeatburnError as exc:
            try:
                err = type(exc)(f"year {entry.year} ({entry.path}): {exc}")
            except TypeError:  # an error class with other arguments: the message as it is
                raise exc from None
            raise err from exc
        reports[entry.year] = rep
        lines.append(f"year {entry.year} ({entry.path}):")
        lines += [f"  {line}" for line in rep.lines]
    _same_fire_twice(s, reports)
    if s.fire_history and len(s.runs) > 1:
        lines.append("note: fire history: each year after the first reads the burn depths of the earlier years once "
                     "they have run (thickness left, repeat-fire status; docs/method.md 7.7): not checked here")
    for n in s.notes:
        lines.append(f"note: {n}")
    lines.append(f"ok: the series is valid ({len(s.years)} year(s), one method)")
    return SeriesCheckReport(s, reports, list(s.notes), lines)


def _same_fire_twice(s, reports: dict) -> None:
    """Refuse a series whose runs hold the same fire in one calendar year (their scars overlap in place
    and dates): what ``peatburn series`` refuses when it adds their inventory lines
    (peatburn.engine.series.refuse_same_fire). Flaming detections shared by two runs are found when
    the series runs."""
    from .series import calendar_years, refuse_same_fire, scar_periods_of

    scars = [(reports[e.year].scars, e.config) for e in s.runs]
    reach = [calendar_years(scar_periods_of(f, cfg, e.year)) | {e.year} for (f, cfg), e in zip(scars, s.runs)]
    for cal in sorted(set().union(*reach)):
        idx = [i for i, years in enumerate(reach) if cal in years]
        if len(idx) > 1:
            refuse_same_fire(s, scars, cal, idx)


def _read_record(path) -> dict:
    """A provenance.json given as ``against``; a missing or unreadable file is bad input (one line)."""
    from ..errors import InputFileError, MissingInputError

    try:
        with open(path, encoding="utf-8") as fh:
            record = json.load(fh)
    except FileNotFoundError:
        raise MissingInputError(f"--against: {path} not found; give the provenance.json of an earlier run") from None
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise InputFileError(f"--against: {path} is not a readable provenance.json ({exc.__class__.__name__}); "
                             f"give the provenance.json of an earlier run") from None
    if not isinstance(record, dict):
        raise InputFileError(f"--against: {path} is not a provenance.json (no JSON object); give the "
                             f"provenance.json of an earlier run")
    return record
