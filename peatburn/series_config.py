"""The series configuration: SERIES.toml turned into validated yearly runs of one method.

A series lists yearly runs (``[[runs]] config = "2031.toml"``), optionally with ``[shared]``
settings every year must use (same keys as a run configuration: factor sets, GWP set, uncertainty,
Tier 1 default). National inventories report every year from a base year with one method across the
series (IPCC 2006 Vol. 1 Ch. 5, time-series consistency; recalled, unchecked), so a year whose
factor set, GWP set or number of draws differs from the others is refused unless its ``[[runs]]``
entry states the difference (``allow_differences``). Years missing in the middle are reported, not
refused. Every key: docs/configuration.md ("The series file").
"""

from __future__ import annotations

import difflib
import math
from dataclasses import dataclass, field
from pathlib import Path

from .config import RunConfig, _factor_ref, load_config, read_toml
from .errors import ConfigError
from .units import to_magnitude


def _factors(name):
    return lambda cfg: getattr(cfg.factors, name)


def _unc(name):
    return lambda cfg: getattr(cfg.uncertainty, name)


def _number(key):
    def resolve(value, base):
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise ConfigError(f"[shared] {key} must be a number, got {value!r}")
        return value
    return resolve


#: Settings [shared] may fix: dotted key -> (value in a year's RunConfig, resolve the [shared] value).
SHARED_KEYS = {
    "emission_factors.smouldering": (_factors("smouldering"), lambda v, base: _factor_ref(v, base)),
    "emission_factors.flaming": (_factors("flaming"), lambda v, base: _factor_ref(v, base)),
    "emission_factors.gwp": (_factors("gwp"), lambda v, base: v),
    "uncertainty.draws": (_unc("draws"), _number("uncertainty.draws")),
    "uncertainty.seed": (_unc("seed"), _number("uncertainty.seed")),
    "uncertainty.bulk_density_cv": (_unc("bulk_density_cv"), _number("uncertainty.bulk_density_cv")),
    "uncertainty.carbon_fraction_sd": (_unc("carbon_fraction_sd"), _number("uncertainty.carbon_fraction_sd")),
    "uncertainty.subsidence_rate_sd": (_unc("subsidence_rate_sd"), _number("uncertainty.subsidence_rate_sd")),
    "uncertainty.correlation_range_m": (_unc("correlation_range_m"), _number("uncertainty.correlation_range_m")),
    "depth.tier1.fuel_consumption": (lambda cfg: cfg.tier1.fuel_consumption_t_ha,
                                     lambda v, base: to_magnitude(v, "t/ha", "[shared] depth.tier1.fuel_consumption")),
}
#: Settings every year must have in common even without [shared]: the method of the series (factor
#: sets, GWP set) and the number of draws the joint draws of the series use.
CONSISTENT_KEYS = ("emission_factors.smouldering", "emission_factors.flaming", "emission_factors.gwp",
                   "uncertainty.draws")

#: Uncertainty sources whose errors the years share by default (the same factor sets, density,
#: carbon fraction, Tier 1 default and flaming constants every year): drawn with common random
#: numbers in the joint draws. The others (survey bias and noise, subsidence, the year's
#: water-table model) are each year's own and drawn apart.
SHARED_SOURCES = ("bulk_density", "carbon_fraction", "emission_factors_smouldering", "emission_factors_flaming",
                  "fre_coefficient", "biomass", "combustion_factor", "tier1_fuel", "peat_property_fill")

_SCHEMA = {
    "": {"series", "shared", "runs", "correlation"},
    "series": {"name", "base_year", "fire_history"},
    "runs": {"config", "year", "allow_differences"},
    "correlation": {"independent"},
}


@dataclass(frozen=True)
class SeriesRun:
    """One year of the series."""

    year: int
    config: RunConfig
    path: Path
    allow_differences: tuple[str, ...] = ()


@dataclass(frozen=True)
class SeriesConfig:
    """A validated series: the yearly runs in year order, the base year and the notes."""

    source: Path | None
    name: str
    runs: tuple[SeriesRun, ...]
    base_year: int
    fire_history: bool = True
    shared: dict = field(default_factory=dict)  # dotted key -> resolved value
    shared_sources: tuple[str, ...] = SHARED_SOURCES
    notes: tuple[str, ...] = ()

    @property
    def years(self) -> list[int]:
        return [r.year for r in self.runs]


def _keys(table: dict, section: str, where: str) -> None:
    allowed = _SCHEMA[section]
    for key in table:
        if key not in allowed:
            near = difflib.get_close_matches(key, sorted(allowed), n=1)
            hint = f"; did you mean {near[0]!r}?" if near else f"; known keys: {', '.join(sorted(allowed))}"
            raise ConfigError(f"{where}: unknown key {(section + '.' if section else '') + key!r}{hint}")


def _flatten(table: dict, prefix: str = "") -> dict:
    out = {}
    for k, v in table.items():
        key = f"{prefix}{k}"
        if isinstance(v, dict):
            out.update(_flatten(v, key + "."))
        else:
            out[key] = v
    return out


def _same(a, b) -> bool:
    if isinstance(a, (int, float)) and isinstance(b, (int, float)) and not isinstance(a, bool):
        return math.isclose(float(a), float(b), rel_tol=1e-12, abs_tol=0.0)
    return a == b


def load_series(path) -> SeriesConfig:
    """Read and validate SERIES.toml and every run configuration it lists.

    Raises
    ------
    ConfigError
        Syntax errors, unknown keys, a year listed twice, a run without a year, and a year whose
        shared or consistent settings differ from [shared] or from the other years without
        ``allow_differences`` (one line naming the run, the key and both values).
    """
    path = Path(path)
    return series_from_dict(read_toml(path, "series"), base=path.parent.resolve(), source=path.resolve())


def is_series_file(path) -> bool:
    """Whether the TOML file ``path`` is a series file (it lists ``[[runs]]``) rather than a run's."""
    return "runs" in read_toml(Path(path), "config")


def series_from_dict(raw: dict, base: Path, source: Path | None = None) -> SeriesConfig:
    """Validate a series already parsed into a dict (run config paths relative to ``base``)."""
    where = str(source) if source else "series"
    _keys(raw, "", where)
    head = raw.get("series", {})
    _keys(head, "series", where)
    shared_raw = _flatten(raw.get("shared", {}))
    shared = {}
    for key, value in shared_raw.items():
        if key not in SHARED_KEYS:
            near = difflib.get_close_matches(key, sorted(SHARED_KEYS), n=1)
            hint = f"; did you mean {near[0]!r}?" if near else f"; known keys: {', '.join(sorted(SHARED_KEYS))}"
            raise ConfigError(f"{where}: [shared] cannot fix {key!r}{hint}")
        shared[key] = SHARED_KEYS[key][1](value, base)
    runs_raw = raw.get("runs")
    if not isinstance(runs_raw, list) or not runs_raw:
        raise ConfigError(f"{where}: no [[runs]]; add one [[runs]] table per year with `config` = its run TOML")
    runs = []
    for i, entry in enumerate(runs_raw):
        _keys(entry, "runs", where)
        if "config" not in entry:
            raise ConfigError(f"{where}: [[runs]] number {i + 1} needs `config` = the path of its run TOML")
        p = Path(entry["config"])
        p = p if p.is_absolute() else base / p
        cfg = load_config(p)
        year = entry.get("year", cfg.year)
        if year is None or isinstance(year, bool) or not isinstance(year, int):
            raise ConfigError(f"{where}: run {p} has no year; set `year` in its [[runs]] entry or `run.year` in {p.name}")
        if cfg.year is not None and cfg.year != year:
            raise ConfigError(f"{where}: run {p} says run.year = {cfg.year} but its [[runs]] entry says year = {year}; "
                              f"make them the same")
        allow = entry.get("allow_differences", [])
        if not isinstance(allow, list) or any(a not in SHARED_KEYS for a in allow):
            raise ConfigError(f"{where}: `allow_differences` of run {p} must list keys among "
                              f"{', '.join(sorted(SHARED_KEYS))}")
        runs.append(SeriesRun(int(year), cfg, p, tuple(allow)))
    runs.sort(key=lambda r: r.year)
    years = [r.year for r in runs]
    dup = sorted({y for y in years if years.count(y) > 1})
    if dup:
        raise ConfigError(f"{where}: year {dup[0]} is listed by more than one run; one run per year")
    _check_consistency(runs, shared, where)
    notes = []
    missing = sorted(set(range(years[0], years[-1] + 1)) - set(years))
    if missing:
        notes.append(f"years missing in the middle of the series: {', '.join(map(str, missing))} (no run listed); "
                     f"the sum and the trend cover the listed years only")
    base_year = head.get("base_year", years[0])
    if base_year not in years:
        raise ConfigError(f"{where}: series.base_year = {base_year!r} is not a year of the runs "
                          f"({', '.join(map(str, years))})")
    corr = raw.get("correlation", {})
    _keys(corr, "correlation", where)
    independent = corr.get("independent", [])
    if not isinstance(independent, list) or any(s not in SHARED_SOURCES for s in independent):
        raise ConfigError(f"{where}: correlation.independent must list sources among {', '.join(SHARED_SOURCES)}")
    for r in runs:
        for key in r.allow_differences:
            notes.append(f"year {r.year}: {key} = {SHARED_KEYS[key][0](r.config)!r} differs from the other years "
                         f"(stated in SERIES.toml: allow_differences)")
    return SeriesConfig(
        source=source, name=str(head.get("name", source.stem if source else "peatburn series")), runs=tuple(runs),
        base_year=int(base_year), fire_history=bool(head.get("fire_history", True)), shared=shared,
        shared_sources=tuple(s for s in SHARED_SOURCES if s not in independent), notes=tuple(notes))


def _check_consistency(runs: list[SeriesRun], shared: dict, where: str) -> None:
    """Refuse a year that departs from [shared] or, for :data:`CONSISTENT_KEYS`, from the first year
    that does not state a difference."""
    for key, want in shared.items():
        get = SHARED_KEYS[key][0]
        for r in runs:
            have = get(r.config)
            if key not in r.allow_differences and not _same(have, want):
                raise ConfigError(f"{where}: year {r.year} ({r.path.name}) uses {key} = {have!r} but [shared] sets "
                                  f"{want!r}; make them the same, or state the difference with allow_differences = "
                                  f"[\"{key}\"] in its [[runs]] entry")
    for key in CONSISTENT_KEYS:
        if key in shared:
            continue
        get = SHARED_KEYS[key][0]
        ref = next((r for r in runs if key not in r.allow_differences), None)
        for r in runs:
            if ref is None or key in r.allow_differences:
                continue
            if not _same(get(r.config), get(ref.config)):
                raise ConfigError(f"{where}: year {r.year} ({r.path.name}) uses {key} = {get(r.config)!r} but year "
                                  f"{ref.year} uses {get(ref.config)!r}; one method across the series: make them the "
                                  f"same, or state the difference with allow_differences = [\"{key}\"] in its [[runs]] entry")
