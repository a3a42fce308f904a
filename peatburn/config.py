"""The run configuration: a TOML file turned into a validated, typed run description.

Unknown keys are refused with the nearest known key suggested; paths are resolved relative to the
file; quantities are parsed with :mod:`peatburn.units` and checked against plausible ranges.
"""

from __future__ import annotations

import datetime as dt
import difflib
import os
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from .errors import ConfigError, PhysicalRangeError, UnitError
from .units import DOCUMENTED_UNITS, conversion_factor, to_magnitude


@dataclass(frozen=True)
class RasterRef:
    """A parameter given as a raster; ``scale`` turns the file's unit into the documented unit."""

    path: Path
    units: str | None = None
    scale: float = 1.0


Value = float | RasterRef


@dataclass(frozen=True)
class SurveyConfig:
    pre: Path
    post: Path
    interval_years: float
    subsidence_rate: Value | None = None
    stable: Path | None = None
    stable_buffer_m: float = 30.0
    tilt: bool = False
    lod_t: float = 1.96


@dataclass(frozen=True)
class PeatConfig:
    bulk_density: Value
    carbon_fraction: Value
    thickness: Value | None = None


@dataclass(frozen=True)
class FactorsConfig:
    smouldering: str
    flaming: str
    gwp: str


@dataclass(frozen=True)
class ZoneLayerConfig:
    path: Path
    id: str
    name: str
    layer: str | None = None


@dataclass(frozen=True)
class UncertaintyConfig:
    draws: int = 0
    seed: int = 1


@dataclass(frozen=True)
class RunConfig:
    """A validated run description (see DESIGN.md, "The run configuration")."""

    source: Path | None
    name: str
    year: int | None
    crs: str | None
    burned_area: Path
    burned_area_layer: str | None
    survey: SurveyConfig
    peat: PeatConfig
    factors: FactorsConfig
    zones: tuple[ZoneLayerConfig, ...]
    uncertainty: UncertaintyConfig
    block_size: int = 512
    raw: dict = field(default_factory=dict, compare=False, repr=False)

    def input_paths(self) -> dict[str, Path]:
        """Every input file of the run, by config key."""
        out = {"burned_area.path": self.burned_area, "depth.survey.pre": self.survey.pre,
               "depth.survey.post": self.survey.post}
        if isinstance(self.survey.subsidence_rate, RasterRef):
            out["depth.survey.subsidence_rate"] = self.survey.subsidence_rate.path
        if self.survey.stable is not None:
            out["depth.survey.stable"] = self.survey.stable
        for key in ("thickness", "bulk_density", "carbon_fraction"):
            v = getattr(self.peat, key)
            if isinstance(v, RasterRef):
                out[f"peat.{key}"] = v.path
        for i, z in enumerate(self.zones):
            out[f"zones[{i}].path"] = z.path
        for key in ("smouldering", "flaming"):
            v = getattr(self.factors, key)
            if v.lower().endswith(".csv"):
                out[f"emission_factors.{key}"] = Path(v)
        return out


# --------------------------------------------------------------------------------------------
# schema helpers

_SCHEMA = {
    "run": {"name", "year", "crs", "block_size", "force_ranges"},
    "burned_area": {"path", "layer"},
    "depth": {"survey", "water_table"},
    "depth.survey": {"pre", "post", "interval_years", "pre_date", "post_date", "subsidence_rate", "stable",
                     "stable_buffer_m", "tilt", "lod_t"},
    "peat": {"thickness", "bulk_density", "carbon_fraction"},
    "emission_factors": {"smouldering", "flaming", "gwp"},
    "zones": {"path", "id", "name", "layer"},
    "uncertainty": {"draws", "seed"},
}
_TOP = {"run", "burned_area", "depth", "peat", "emission_factors", "zones", "uncertainty"}
#: Sections of the contract that later work fills in; refused until then so no input is silently ignored.
_NOT_YET = {"depth.water_table": "burn depth from the water table", "flaming": "flaming emissions"}

#: Plausible ranges (documented units). Bulk density of tropical peat is about 0.05-0.2 g cm-3
#: (Warren et al. 2012, recalled, unchecked); 0.02-0.5 bounds any peat (common practice).
RANGES = {
    "bulk_density": (0.02, 0.5, "g/cm^3", "a value near 100 suggests kg/m^3: write e.g. '100 kg/m^3'"),
    "carbon_fraction": (0.0, 1.0, "", "a value above 1 suggests percent: write e.g. 0.55 or '55 percent'"),
    "thickness": (0.0, 30.0, "m", "peat thickness is in metres"),
    "subsidence_rate": (-0.05, 0.3, "m/yr", "a value above 0.3 suggests cm/yr: write e.g. '4 cm/yr'"),
    "interval_years": (0.0, 50.0, "yr", "the interval is in years between the two surveys"),
}


def _check_keys(table: dict, section: str, where: str):
    allowed = _SCHEMA[section] if section else _TOP
    for key in table:
        full = f"{section}.{key}" if section else key
        if full in _NOT_YET:
            raise ConfigError(f"{where}: [{full}] ({_NOT_YET[full]}) is not supported by this version of peatburn; "
                              f"remove the section")
        if key not in allowed:
            near = difflib.get_close_matches(key, sorted(allowed), n=1)
            hint = f"; did you mean {near[0]!r}?" if near else f"; known keys: {', '.join(sorted(allowed))}"
            raise ConfigError(f"{where}: unknown key {full!r}{hint}")


def _require(table: dict, key: str, section: str, where: str):
    if key not in table:
        raise ConfigError(f"{where}: [{section}] needs `{key}`")
    return table[key]


def _path(value, base: Path, key: str, where: str) -> Path:
    if not isinstance(value, str) or not value.strip():
        raise ConfigError(f"{where}: `{key}` must be a file path (a string), got {value!r}")
    p = Path(os.path.expanduser(value))
    return p if p.is_absolute() else (base / p)


def _range(name: str, value: float, where: str, key: str):
    if name not in RANGES:
        return
    lo, hi, unit, hint = RANGES[name]
    if not (lo <= value <= hi):
        raise PhysicalRangeError(f"{where}: `{key}` = {value:g} {unit} is outside the plausible range "
                                 f"{lo:g}-{hi:g} {unit}; {hint} (or set run.force_ranges = true if the value is right)")


def _value(value, base: Path, key: str, quantity: str, where: str, range_name: str | None = None,
           force: bool = False) -> Value:
    unit = DOCUMENTED_UNITS[quantity]
    if isinstance(value, dict):
        extra = set(value) - {"raster", "units"}
        if extra or "raster" not in value:
            raise ConfigError(f"{where}: `{key}` as a table takes `raster` and optional `units`, got {sorted(value)}")
        units = value.get("units")
        scale = conversion_factor(units, unit, key) if units else 1.0
        return RasterRef(_path(value["raster"], base, key, where), units, scale)
    if isinstance(value, str) and _looks_like_path(value):
        return RasterRef(_path(value, base, key, where))
    try:
        mag = to_magnitude(value, unit, key)
    except UnitError as exc:
        raise UnitError(f"{where}: {exc}") from None
    if not force:
        _range(range_name or quantity, mag, where, key)
    return mag


def _looks_like_path(s: str) -> bool:
    return s.lower().endswith((".tif", ".tiff", ".vrt", ".img", ".nc"))


# --------------------------------------------------------------------------------------------

def load_config(path) -> RunConfig:
    """Read and validate a run configuration TOML file.

    Raises
    ------
    ConfigError
        Syntax errors (with the line), unknown keys (with the nearest known key), missing or
        wrongly typed values.
    UnitError, PhysicalRangeError
        Quantities of the wrong dimension or outside plausible ranges.
    """
    path = Path(path)
    if not path.exists():
        from .errors import MissingInputError

        raise MissingInputError(f"config: file not found: {path}")
    try:
        raw = tomllib.loads(path.read_text(encoding="utf-8"))
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{path}: TOML syntax error: {exc}; fix that line") from None
    return config_from_dict(raw, base=path.parent.resolve(), source=path.resolve())


def config_from_dict(raw: dict, base: Path, source: Path | None = None) -> RunConfig:
    """Validate a configuration already parsed into a dict (paths relative to ``base``)."""
    where = str(source) if source else "config"
    _check_keys(raw, "", where)
    run = raw.get("run", {})
    _check_keys(run, "run", where)
    year = run.get("year")
    if year is not None and (not isinstance(year, int) or isinstance(year, bool)):
        raise ConfigError(f"{where}: `run.year` must be an integer year, got {year!r}")
    force = run.get("force_ranges", False)
    if not isinstance(force, bool):
        raise ConfigError(f"{where}: `run.force_ranges` must be true or false, got {force!r}")
    block_size = run.get("block_size", 512)
    if not isinstance(block_size, int) or block_size < 16:
        raise ConfigError(f"{where}: `run.block_size` must be an integer >= 16, got {block_size!r}")

    ba = _require(raw, "burned_area", "", where)
    if not isinstance(ba, dict):
        raise ConfigError(f"{where}: [burned_area] must be a table with `path`")
    _check_keys(ba, "burned_area", where)
    burned = _path(_require(ba, "path", "burned_area", where), base, "burned_area.path", where)

    depth = _require(raw, "depth", "", where)
    _check_keys(depth, "depth", where)
    sv = _require(depth, "survey", "depth", where)
    _check_keys(sv, "depth.survey", where)
    survey = _survey(sv, base, where, force)

    peat_raw = _require(raw, "peat", "", where)
    _check_keys(peat_raw, "peat", where)
    peat = PeatConfig(
        bulk_density=_value(_require(peat_raw, "bulk_density", "peat", where), base, "peat.bulk_density",
                            "bulk_density", where, force=force),
        carbon_fraction=_value(_require(peat_raw, "carbon_fraction", "peat", where), base, "peat.carbon_fraction",
                               "carbon_fraction", where, force=force),
        thickness=_value(peat_raw["thickness"], base, "peat.thickness", "peat_thickness", where, "thickness", force=force)
        if "thickness" in peat_raw else None,
    )

    if isinstance(peat.carbon_fraction, float) and not (0.0 < peat.carbon_fraction <= 1.0):
        raise PhysicalRangeError(f"{where}: `peat.carbon_fraction` = {peat.carbon_fraction:g} is not a mass fraction "
                                 f"in (0, 1]; {RANGES['carbon_fraction'][3]}")

    from .factors import DEFAULT_FLAMING, DEFAULT_GWP, DEFAULT_SMOULDERING

    ef = raw.get("emission_factors", {})
    _check_keys(ef, "emission_factors", where)
    factors = FactorsConfig(
        smouldering=_factor_ref(ef.get("smouldering", DEFAULT_SMOULDERING), base),
        flaming=_factor_ref(ef.get("flaming", DEFAULT_FLAMING), base),
        gwp=str(ef.get("gwp", DEFAULT_GWP)),
    )

    zones = []
    zraw = raw.get("zones", [])
    if isinstance(zraw, dict):
        zraw = [zraw]
    for i, z in enumerate(zraw):
        _check_keys(z, "zones", where)
        zp = _path(_require(z, "path", f"[zones] #{i + 1}", where), base, f"zones[{i}].path", where)
        zid = _require(z, "id", f"[zones] #{i + 1}", where)
        zones.append(ZoneLayerConfig(path=zp, id=str(zid), name=str(z.get("name", zp.stem)), layer=z.get("layer")))
    names = [z.name for z in zones]
    if len(set(names)) != len(names):
        raise ConfigError(f"{where}: two [[zones]] layers share the name {names}; give each a distinct `name`")

    un = raw.get("uncertainty", {})
    _check_keys(un, "uncertainty", where)
    draws = un.get("draws", 0)
    seed = un.get("seed", 1)
    if not isinstance(draws, int) or isinstance(draws, bool) or draws < 0:
        raise ConfigError(f"{where}: `uncertainty.draws` must be a whole number >= 0, got {draws!r}")
    if not isinstance(seed, int) or isinstance(seed, bool):
        raise ConfigError(f"{where}: `uncertainty.seed` must be an integer, got {seed!r}")
    if draws > 0:
        raise ConfigError(f"{where}: `uncertainty.draws` > 0 (Monte Carlo intervals) is not supported by this "
                          f"version of peatburn; set draws = 0")

    return RunConfig(
        source=source, name=str(run.get("name", source.stem if source else "peatburn run")), year=year,
        crs=run.get("crs"), burned_area=burned, burned_area_layer=ba.get("layer"), survey=survey, peat=peat,
        factors=factors, zones=tuple(zones), uncertainty=UncertaintyConfig(draws, seed), block_size=block_size,
        raw=raw,
    )


def _factor_ref(value, base: Path) -> str:
    if not isinstance(value, str):
        raise ConfigError(f"emission factor set must be a built-in name or a CSV path, got {value!r}")
    if value.lower().endswith(".csv"):
        p = Path(value)
        return str(p if p.is_absolute() else base / p)
    return value


def _survey(sv: dict, base: Path, where: str, force: bool = False) -> SurveyConfig:
    pre = _path(_require(sv, "pre", "depth.survey", where), base, "depth.survey.pre", where)
    post = _path(_require(sv, "post", "depth.survey", where), base, "depth.survey.post", where)
    if "interval_years" in sv:
        try:
            interval = to_magnitude(sv["interval_years"], "yr", "depth.survey.interval_years")
        except UnitError as exc:
            raise UnitError(f"{where}: {exc}") from None
    elif "pre_date" in sv and "post_date" in sv:
        d0, d1 = _date(sv["pre_date"], "pre_date", where), _date(sv["post_date"], "post_date", where)
        interval = (d1 - d0).days / 365.25  # Julian year (IAU), common practice for rates per year
    else:
        raise ConfigError(f"{where}: [depth.survey] needs `interval_years` or both `pre_date` and `post_date`")
    if interval <= 0:
        raise PhysicalRangeError(f"{where}: the survey interval must be positive (post after pre), got {interval:g} yr")
    if not force:
        _range("interval_years", interval, where, "depth.survey.interval_years")
    sub = sv.get("subsidence_rate")
    subsidence = _value(sub, base, "depth.survey.subsidence_rate", "subsidence_rate", where,
                        force=force) if sub is not None else None
    stable = _path(sv["stable"], base, "depth.survey.stable", where) if "stable" in sv else None
    buf = sv.get("stable_buffer_m", 30.0)
    if not isinstance(buf, (int, float)) or isinstance(buf, bool) or buf < 0:
        raise ConfigError(f"{where}: `depth.survey.stable_buffer_m` must be a number of metres >= 0, got {buf!r}")
    tilt = sv.get("tilt", False)
    if not isinstance(tilt, bool):
        raise ConfigError(f"{where}: `depth.survey.tilt` must be true or false, got {tilt!r}")
    lod_t = sv.get("lod_t", 1.96)
    if not isinstance(lod_t, (int, float)) or lod_t <= 0:
        raise ConfigError(f"{where}: `depth.survey.lod_t` must be a positive number, got {lod_t!r}")
    return SurveyConfig(pre, post, float(interval), subsidence, stable, float(buf), tilt, float(lod_t))


def _date(value, key, where) -> dt.date:
    if isinstance(value, dt.datetime):
        return value.date()
    if isinstance(value, dt.date):
        return value
    try:
        return dt.date.fromisoformat(str(value))
    except ValueError:
        raise ConfigError(f"{where}: `depth.survey.{key}` must be a date like 2028-06-30, got {value!r}") from None
