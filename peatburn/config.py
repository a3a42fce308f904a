"""The run configuration: a TOML file turned into a validated, typed run description.

Unknown keys are refused with the nearest known key suggested; paths are resolved relative to the
file; quantities are parsed with :mod:`peatburn.units` and checked against plausible ranges.
"""

from __future__ import annotations

import datetime as dt
import difflib
import math
import os
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from .depth_methods import DEPTH_METHODS
from .errors import ConfigError, PhysicalRangeError, UnitError
from .io.mosaics import RasterInput, is_url, resolve_raster_input
from .names import check_layer_name, printable
from .units import DOCUMENTED_UNITS, conversion_factor, to_magnitude


@dataclass(frozen=True)
class RasterRef:
    """A parameter given as a raster; ``scale`` turns the file's unit into the documented unit."""

    path: Path | RasterInput  # one local file; tiles or a URL (peatburn.io.mosaics)
    units: str | None = None
    scale: float = 1.0


Value = float | RasterRef


@dataclass(frozen=True)
class SurveyConfig:
    pre: Path | RasterInput
    post: Path | RasterInput
    interval_years: float
    subsidence_rate: Value | None = None
    stable: Path | None = None
    stable_buffer_m: float = 30.0
    tilt: bool = False
    lod_t: float = 1.96
    #: survey quality: a raster of per-pixel sd [m] (point density, flight strips) that may explain a
    #: spread varying in space (peatburn.science.error_scale)
    quality: Path | RasterInput | None = None


@dataclass(frozen=True)
class PeatConfig:
    bulk_density: Value
    carbon_fraction: Value
    thickness: Value | None = None
    #: organic-soil extent: polygons (any vector file) or a raster (non-zero = organic soil)
    extent: Path | RasterInput | None = None
    #: stated fallbacks for holes in the bulk-density / carbon-fraction rasters [g cm-3, -];
    #: None: the median of the run's valid values (with a note)
    bulk_density_fill: float | None = None
    carbon_fraction_fill: float | None = None


@dataclass(frozen=True)
class FactorsConfig:
    smouldering: str
    flaming: str
    gwp: str
    #: how the gases follow the fuel: "dry_matter" (mass burned x EF, IPCC 2006 Vol. 4 Eq. 2.27, the
    #: Tier 1 convention) or "carbon_balance" (carbon burned through the set's emission ratios,
    #: the carbon mass-balance form; peatburn.science.gases.gases_from_carbon)
    form: str = "dry_matter"


#: Largest ``uncertainty.draws`` accepted. JCGM 101:2008 (GUM Supplement 1), §7.2, gives
#: 10^6 Monte Carlo trials as usually enough for a 95 % coverage interval correct to one or two
#: significant digits (recalled, unchecked); more only costs time (about 10 ns per draw, zone and
#: quantity on this machine, docs/uncertainty.md) and memory (the draws hold about
#: 8 x 16 x draws float64 per thread at least: 1 GiB per thread at this bound).
MAX_DRAWS = 1_000_000
#: Largest ``run.block_size`` [px]: a 4096 x 4096 block already holds 16.8 million pixels in each
#: of the block's arrays (64 MiB per float32 array, and a block holds dozens); larger blocks only
#: raise the memory of a run (common practice: blocks of a few hundred to a few thousand pixels).
MAX_BLOCK_SIZE = 4096
#: Default ``run.block_size`` [px]. 1024: on the national benchmark (400 Mpx, 20,000 scars) a quarter of the
#: blocks of 512 cut the run's CPU time by about a fifth (fewer per-block calls into GDAL, numpy and
#: Python), with no more memory once the GDAL cache stopped growing with the block (peak 661 against
#: 752 MiB); 2048 saved little more CPU and peaked at 1.0 GiB (docs/performance.md, benchmark 8).
#: Project choice, measured.
DEFAULT_BLOCK_SIZE = 1024  # project choice, measured (above)
#: Smallest ``run.resolution`` [m]: 1 cm, finer than the elevation grids of airborne or drone
#: surveys (common practice: decimetres to a metre); a finer pixel only multiplies the pixels.
MIN_RESOLUTION_M = 0.01


@dataclass(frozen=True)
class BurnMaskConfig:
    """A burned-area raster's reading (burned_area.path a raster; docs/configuration.md)."""

    burned_values: tuple | None = None  # class codes meaning burned; None: every non-zero value
    close_m: float = 0.0  # radius of the disk of the closing [m]; 0: none
    open_m: float = 0.0  # radius of the disk of the opening [m]; 0: none
    min_area_ha: float = 0.0  # burned patches below this are removed [ha]
    min_hole_ha: float | None = None  # unburned holes below this are filled [ha]; None: min_area_ha
    date_path: Path | None = None  # day of burn raster (day of year or YYYYMMDD) on the mask's grid


@dataclass(frozen=True)
class ZoneLayerConfig:
    path: Path
    id: str
    name: str
    layer: str | None = None
    dossiers: bool = False  # write dossiers/<zone id>.html for every burned zone of the layer (issue 21)


@dataclass(frozen=True)
class UncertaintyConfig:
    draws: int = 0
    seed: int = 1
    bulk_density_cv: float | None = None
    carbon_fraction_sd: float | None = None
    subsidence_rate_sd: float | None = None
    correlation_range_m: float | None = None
    surface_change_sd: float | None = None  # [m] non-fire surface change over the survey interval (issue 16)
    # relative sd of the FRE of a fire event observed once (issue 16; None: the stated default,
    # science.uncertainty.fre_sampling; 0: no term)
    fre_integration_cv: float | None = None


@dataclass(frozen=True)
class AreaAccuracyConfig:
    """[burned_area.accuracy]: the burned-area map's accuracy as an area term (issue 16;
    science.uncertainty.area_accuracy). ``ratio`` is the error-adjusted area over the mapped area."""

    ratio: float
    ratio_se: float
    adjust: bool = False  # scale the estimates by the ratio (bias-corrected); else they follow the mapped area
    basis: str = ""  # how the ratio was given (for the QA and the report)


@dataclass(frozen=True)
class WaterTableConfig:
    """Water-table depth at fire time [m below the surface, positive down]: a raster or station points."""

    raster: RasterRef | None = None
    stations: Path | None = None
    # several dated rasters: ((RasterRef, "YYYY-MM-DD"), ...) in date order; each scar takes the one nearest
    # its fire start within date_window_days (engine.plan.rasters_by_fire_date)
    dated_rasters: tuple = ()
    value_column: str = "water_table_m"
    crs: str | None = None
    date_column: str | None = None
    model: str = "fit"  # "fit" | "default" | "user" | "file"
    intercept: float | None = None
    slope: float | None = None
    model_file: Path | None = None
    fit_method: str = "theil-sen"
    fit_target: str = "mean"  # "mean" (for totals) | "median" (the plain robust line)
    error_m: float | None = None  # random error of the water table [m]: errors-in-variables fit
    # dated station readings: each scar uses the reading of each station nearest its fire start within
    # this many days (project choice: about two weeks, over which a dry-season water table falls by a
    # few centimetres); 0 pools every reading as if undated
    date_window_days: float = 15.0
    # burn depth tapered to the scar edge: "cv" (the taper distance chosen by leave-scar-out
    # cross-validation, none if it does not help), a distance [m], or None (no taper, the default)
    edge_taper: object = None
    # burn depth reduced on thin peat, x (1 - exp(-thickness / L_T)): "cv" (L_T chosen by leave-scar-out
    # cross-validation with the edge taper, none if it does not help), a scale [m], or None (the default)
    thickness_taper: object = None
    idw_power: float = 2.0
    idw_neighbours: int = 12
    idw_max_distance_m: float | None = None


@dataclass(frozen=True)
class PlotsConfig:
    """Field plots: points with a measured burn depth [m]."""

    path: Path
    value_column: str = "burn_depth_m"
    crs: str | None = None
    date_column: str | None = None


@dataclass(frozen=True)
class Tier1Config:
    fuel_consumption_t_ha: float | None = None  # None: the IPCC 2013 Wetlands Supplement default


@dataclass(frozen=True)
class FlamingConfig:
    """Above-ground (flaming) emissions: from active-fire detections (FRE) or burned area x biomass."""

    method: str = "frp"  # "frp" | "biomass"
    detections: Path | None = None
    crs: str | None = None
    columns: dict = field(default_factory=dict)
    event_distance_m: float | None = None
    event_gap_hours: float | None = None
    coefficient_kg_per_mj: float | None = None
    biomass: Value | None = None  # t d.m./ha
    combustion_factor: float | None = None
    vegetation_carbon_fraction: float | None = None
    # ignition attribution (science.ignition): detection pixel side [m], tie window [h], zone layer of fires.csv
    footprint_m: float | None = None
    ignition_tie_hours: float | None = None
    ignition_layer: str | None = None
    #: user's FRE-to-dry-matter conversion for peat [kg/MJ], for the comparison column
    #: carbon_fre_peat_t only (none is shipped: no value was checked)
    peat_coefficient_kg_per_mj: float | None = None


@dataclass(frozen=True)
class RunConfig:
    """A validated run description (every key: docs/configuration.md)."""

    source: Path | None
    name: str
    year: int | None
    crs: str | None
    burned_area: Path
    burned_area_layer: str | None
    survey: SurveyConfig | None
    peat: PeatConfig
    factors: FactorsConfig
    zones: tuple[ZoneLayerConfig, ...]
    uncertainty: UncertaintyConfig
    block_size: int = DEFAULT_BLOCK_SIZE
    water_table: WaterTableConfig | None = None
    plots: PlotsConfig | None = None
    tier1: Tier1Config = field(default_factory=Tier1Config)
    flaming: FlamingConfig | None = None
    fire_count_field: str | None = None
    resolution: float | None = None
    start_field: str = "fire_start"
    end_field: str = "fire_end"
    id_field: str | None = None  # fires.csv id; None: the scar layer's first text field
    #: (burn_depth.tif, depth_method.tif) of each earlier year of a series (set by ``peatburn series``,
    #: not by the TOML): the thickness left and the repeat-fire status of this run (docs/method.md 7.7)
    earlier_burns: tuple[tuple[Path, Path], ...] = ()
    #: Tier 1 fuel consumption [t/ha] each earlier year used (one per ``earlier_burns``; set by ``peatburn
    #: series``): its Tier 1 pixels remove the equivalent depth from the thickness (docs/method.md 7.7)
    earlier_tier1_fuel_t_ha: tuple[float, ...] = ()
    #: (input key, path) pairs provenance.json records instead of the path read: a series reads the earlier
    #: years from its staging folder and records where they are once it is swapped in (set by ``peatburn series``)
    recorded_as: tuple[tuple[str, str], ...] = ()
    burn_mask: BurnMaskConfig | None = None  # burned_area.path is a raster mask
    area_accuracy: AreaAccuracyConfig | None = None  # [burned_area.accuracy] (issue 16); None: no area term
    raw: dict = field(default_factory=dict, compare=False, repr=False)

    @property
    def tier1_only(self) -> bool:
        """No survey and no water table: every burned pixel on peat gets the IPCC Tier 1 default."""
        return self.survey is None and self.water_table is None

    def input_paths(self) -> dict[str, Path]:
        """Every input file of the run, by config key."""
        out = {"burned_area.path": self.burned_area}
        if self.burn_mask is not None and self.burn_mask.date_path is not None:
            out["burned_area.date_path"] = self.burn_mask.date_path
        if self.survey is not None:
            out["depth.survey.pre"] = self.survey.pre
            out["depth.survey.post"] = self.survey.post
            if isinstance(self.survey.subsidence_rate, RasterRef):
                out["depth.survey.subsidence_rate"] = self.survey.subsidence_rate.path
            if self.survey.stable is not None:
                out["depth.survey.stable"] = self.survey.stable
            if self.survey.quality is not None:
                out["depth.survey.quality"] = self.survey.quality
        wt = self.water_table
        if wt is not None:
            if wt.raster is not None:
                out["depth.water_table.depth"] = wt.raster.path
            for i, (ref, _) in enumerate(wt.dated_rasters):
                out[f"depth.water_table.depth[{i}]"] = ref.path
            if wt.stations is not None:
                out["depth.water_table.depth"] = wt.stations
            if wt.model_file is not None:
                out["depth.water_table.model"] = wt.model_file
        if self.plots is not None:
            out["depth.plots.path"] = self.plots.path
        if self.flaming is not None:
            if self.flaming.detections is not None:
                out["flaming.detections"] = self.flaming.detections
            if isinstance(self.flaming.biomass, RasterRef):
                out["flaming.biomass"] = self.flaming.biomass.path
        for key in ("thickness", "bulk_density", "carbon_fraction"):
            v = getattr(self.peat, key)
            if isinstance(v, RasterRef):
                out[f"peat.{key}"] = v.path
        if self.peat.extent is not None:
            out["peat.extent"] = self.peat.extent
        for i, z in enumerate(self.zones):
            out[f"zones[{i}].path"] = z.path
        for i, (depth, method) in enumerate(self.earlier_burns):
            out[f"series.earlier_burns[{i}].depth"] = depth
            out[f"series.earlier_burns[{i}].method"] = method
        for key in ("smouldering", "flaming"):
            v = getattr(self.factors, key)
            if v.lower().endswith(".csv"):
                out[f"emission_factors.{key}"] = Path(v)
        return out


# --------------------------------------------------------------------------------------------
# schema helpers

#: [burned_area] keys of a raster mask, and those of a polygon layer only.
_MASK_KEYS = ("burned_values", "close_m", "open_m", "min_area_ha", "min_hole_ha", "date_path")
_POLYGON_KEYS = ("layer", "fire_count_field", "id_field")

_SCHEMA = {
    "run": {"name", "year", "crs", "block_size", "force_ranges", "resolution"},
    "burned_area": {"path", "layer", "fire_count_field", "start_field", "end_field", "id_field",
                    "accuracy", *_MASK_KEYS},
    "burned_area.accuracy": {"area_ratio", "area_ratio_se", "omission", "commission", "omission_se",
                             "commission_se", "omission_n", "commission_n", "adjust"},
    "depth": {*(m.section.removeprefix("depth.") for m in DEPTH_METHODS), "plots"},  # peatburn.depth_methods
    "depth.water_table": {"depth", "value_column", "crs", "date_column", "model", "intercept", "slope",
                          "fit_method", "idw_power", "idw_neighbours", "idw_max_distance_m", "units",
                          "fit_target", "error", "date_window_days", "edge_taper", "thickness_taper"},
    "depth.plots": {"path", "value_column", "crs", "date_column"},
    "depth.tier1": {"fuel_consumption"},
    "flaming": {"method", "detections", "crs", "columns", "event_distance_m", "event_gap_hours", "coefficient", "peat_coefficient",
                "biomass", "combustion_factor", "vegetation_carbon_fraction", "footprint_m", "ignition_tie_hours",
                "ignition_layer"},
    "depth.survey": {"pre", "post", "interval_years", "pre_date", "post_date", "subsidence_rate", "stable",
                     "stable_buffer_m", "tilt", "lod_t", "quality"},
    "peat": {"thickness", "bulk_density", "carbon_fraction", "extent", "bulk_density_fill", "carbon_fraction_fill"},
    "emission_factors": {"smouldering", "flaming", "gwp", "form"},
    "zones": {"path", "id", "name", "layer", "dossiers"},
    "uncertainty": {"draws", "seed", "bulk_density_cv", "carbon_fraction_sd", "subsidence_rate_sd",
                    "correlation_range_m", "surface_change_sd", "fre_integration_cv"},
}
_TOP = {"run", "burned_area", "depth", "peat", "emission_factors", "zones", "uncertainty", "flaming"}
#: Sections of the contract that later work fills in; refused until then so no input is silently ignored.
_NOT_YET: dict = {}

#: Plausible ranges (documented units). Bulk density of tropical peat is about 0.05-0.2 g cm-3
#: (Warren et al. 2012, recalled, unchecked); 0.02-0.5 bounds any peat (common practice).
RANGES = {
    "bulk_density": (0.02, 0.5, "g/cm^3", "a value near 100 suggests kg/m^3: write e.g. '100 kg/m^3'"),
    "carbon_fraction": (0.0, 1.0, "", "a value above 1 suggests percent: write e.g. 0.55 or '55 percent'"),
    "thickness": (0.0, 30.0, "m", "peat thickness is in metres"),
    "subsidence_rate": (-0.05, 0.3, "m/yr", "a value above 0.3 suggests cm/yr: write e.g. '4 cm/yr'"),
    "interval_years": (0.0, 50.0, "yr", "the interval is in years between the two surveys"),
    "fuel_consumption": (1.0, 3000.0, "t/ha", "fuel consumption is dry matter per hectare"),
    "biomass": (0.0, 1500.0, "t/ha", "above-ground biomass is dry matter per hectare"),
    "combustion_coefficient": (0.05, 2.0, "kg/MJ", "the FRE combustion coefficient is in kg per MJ"),
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


#: What a missing top-level table should hold (the message names the table and what to add).
_TABLE_HINTS = {
    "burned_area": "add [burned_area] with `path` = the burn-scar polygons",
    "depth": "add a [depth.survey] table (`pre`, `post`: two elevation surveys) or a [depth.water_table] "
             "table (`depth`: water-table depths at fire time)",
    "peat": "add [peat] with `bulk_density` and `carbon_fraction`",
}


def _require(table: dict, key: str, section: str, where: str):
    if key not in table:
        if not section:  # a top-level table
            raise ConfigError(f"{where}: no [{key}] table; {_TABLE_HINTS.get(key, f'add [{key}]')}")
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
        return RasterRef(_raster(value["raster"], base, key, where), units, scale)
    if isinstance(value, list) or (isinstance(value, str) and _looks_like_path(value)):
        return RasterRef(_raster(value, base, key, where))
    try:
        mag = to_magnitude(value, unit, key)
    except UnitError as exc:
        raise UnitError(f"{where}: {exc}") from None
    if not force:
        _range(range_name or quantity, mag, where, key)
    return mag


_RASTER_SUFFIXES = (".tif", ".tiff", ".vrt", ".img", ".nc")


def _looks_like_path(s: str) -> bool:
    return s.lower().endswith(_RASTER_SUFFIXES) or is_url(s)


def _extent(value, base: Path, where: str):
    """peat.extent: a vector file (Path), or a raster given as one file, tiles or a URL."""
    text = value if isinstance(value, str) else ""
    raster_url = is_url(text) and text.split("?")[0].lower().endswith(_RASTER_SUFFIXES)
    if isinstance(value, list) or raster_url or set("*?[") & set(text):
        return _raster(value, base, "peat.extent", where)
    return _path(value, base, "peat.extent", where)


def _raster(value, base: Path, key: str, where: str):
    """A raster input: one local file (Path), or tiles / a URL (:class:`peatburn.io.mosaics.RasterInput`)."""
    if isinstance(value, str) and not value.strip():
        return _path(value, base, key, where)
    return resolve_raster_input(value, base, key, where)


# --------------------------------------------------------------------------------------------

def load_config(path: str | os.PathLike) -> RunConfig:
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
    return config_from_dict(read_toml(path, "config"), base=path.parent.resolve(), source=path.resolve())


def read_toml(path: Path, what: str) -> dict:
    """A TOML file as a dict; a missing file or a syntax error is one line naming the file."""
    if not path.exists():
        from .errors import MissingInputError

        raise MissingInputError(f"{what}: file not found: {path}")
    try:
        return tomllib.loads(path.read_text(encoding="utf-8"))
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{path}: TOML syntax error: {exc}; fix that line") from None


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
    block_size = run.get("block_size", DEFAULT_BLOCK_SIZE)
    if not isinstance(block_size, int) or isinstance(block_size, bool) or not 16 <= block_size <= MAX_BLOCK_SIZE:
        raise ConfigError(f"{where}: `run.block_size` must be an integer from 16 to {MAX_BLOCK_SIZE} pixels, got "
                          f"{block_size!r}; {DEFAULT_BLOCK_SIZE} (the default) suits most runs")

    ba = _require(raw, "burned_area", "", where)
    if not isinstance(ba, dict):
        raise ConfigError(f"{where}: [burned_area] must be a table with `path`")
    _check_keys(ba, "burned_area", where)
    burned = _path(_require(ba, "path", "burned_area", where), base, "burned_area.path", where)
    burn_mask = _burn_mask(ba, burned, base, where)
    area_accuracy = _area_accuracy(ba["accuracy"], where) if "accuracy" in ba else None

    depth = raw.get("depth", {})  # no [depth] at all: a Tier-1-only run
    if not isinstance(depth, dict):
        raise ConfigError(f"{where}: [depth] must be a table")
    _check_keys(depth, "depth", where)
    survey = None
    if "survey" in depth:
        sv = depth["survey"]
        _check_keys(sv, "depth.survey", where)
        survey = _survey(sv, base, where, force)
    water_table = _water_table(depth["water_table"], base, where) if "water_table" in depth else None
    plots = None
    if "plots" in depth:
        pr = depth["plots"]
        _check_keys(pr, "depth.plots", where)
        plots = PlotsConfig(_path(_require(pr, "path", "depth.plots", where), base, "depth.plots.path", where),
                            str(pr.get("value_column", "burn_depth_m")), pr.get("crs"), pr.get("date_column"))
    tier1 = Tier1Config()
    if "tier1" in depth:
        _check_keys(depth["tier1"], "depth.tier1", where)
        if "fuel_consumption" in depth["tier1"]:
            tier1 = Tier1Config(_value(depth["tier1"]["fuel_consumption"], base, "depth.tier1.fuel_consumption",
                                       "biomass", where, "fuel_consumption", force=force))
    # neither a survey nor a water table: a Tier-1-only run (burned area and peat inputs), the first
    # thing a national compiler runs; accepted and labelled as such in every output (RunConfig.tier1_only)
    fire_count_field = ba.get("fire_count_field")
    resolution = run.get("resolution")
    if resolution is not None:
        resolution = to_magnitude(resolution, "m", "run.resolution")
        if not MIN_RESOLUTION_M <= resolution < float("inf"):
            raise ConfigError(f"{where}: `run.resolution` = {resolution:g} m; it must be at least {MIN_RESOLUTION_M:g} m "
                              f"(finer than any survey grid); give the pixel size in metres, such as 1 or \"2 m\"")

    peat_raw = _require(raw, "peat", "", where)
    _check_keys(peat_raw, "peat", where)
    peat = PeatConfig(
        bulk_density=_value(_require(peat_raw, "bulk_density", "peat", where), base, "peat.bulk_density",
                            "bulk_density", where, force=force),
        carbon_fraction=_value(_require(peat_raw, "carbon_fraction", "peat", where), base, "peat.carbon_fraction",
                               "carbon_fraction", where, force=force),
        thickness=_value(peat_raw["thickness"], base, "peat.thickness", "peat_thickness", where, "thickness", force=force)
        if "thickness" in peat_raw else None,
        extent=_extent(peat_raw["extent"], base, where) if "extent" in peat_raw else None,
        bulk_density_fill=_fill_value(peat_raw, "bulk_density_fill", "bulk_density", base, where, force),
        carbon_fraction_fill=_fill_value(peat_raw, "carbon_fraction_fill", "carbon_fraction", base, where, force),
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
        form=_factor_form(ef.get("form", "dry_matter"), where),
    )

    zones = []
    zraw = raw.get("zones", [])
    if isinstance(zraw, dict):
        zraw = [zraw]
    for i, z in enumerate(zraw):
        _check_keys(z, "zones", where)
        zp = _path(_require(z, "path", f"[zones] #{i + 1}", where), base, f"zones[{i}].path", where)
        zid = _require(z, "id", f"[zones] #{i + 1}", where)
        zname = printable(z.get("name", zp.stem))
        check_layer_name(zname, f"{where}: [[zones]] #{i + 1}")
        dossiers = z.get("dossiers", False)
        if not isinstance(dossiers, bool):
            raise ConfigError(f"{where}: [[zones]] #{i + 1}: `dossiers` must be true or false, got {dossiers!r}")
        zones.append(ZoneLayerConfig(path=zp, id=str(zid), name=zname, layer=z.get("layer"), dossiers=dossiers))
    names = [z.name for z in zones]
    if len(set(names)) != len(names):
        raise ConfigError(f"{where}: two [[zones]] layers share the name {names}; give each a distinct `name`")
    if "flaming" in raw and isinstance(raw["flaming"], dict) and "ignition_layer" in raw["flaming"] \
            and raw["flaming"]["ignition_layer"] not in names:
        raise ConfigError(f"{where}: `flaming.ignition_layer` = {raw['flaming']['ignition_layer']!r} names no "
                          f"[[zones]] layer; layers are: {', '.join(names) or '(none)'}")

    un = raw.get("uncertainty", {})
    _check_keys(un, "uncertainty", where)
    draws = un.get("draws", 0)
    seed = un.get("seed", 1)
    if not isinstance(draws, int) or isinstance(draws, bool) or draws < 0:
        raise ConfigError(f"{where}: `uncertainty.draws` must be a whole number >= 0, got {draws!r}")
    if draws > MAX_DRAWS:
        raise ConfigError(f"{where}: `uncertainty.draws` = {draws} is more than the {MAX_DRAWS:,} accepted (a 95 % "
                          f"interval is already stable to a digit or two with that many); use 10000 for most runs")
    if not isinstance(seed, int) or isinstance(seed, bool):
        raise ConfigError(f"{where}: `uncertainty.seed` must be an integer, got {seed!r}")
    unc = UncertaintyConfig(
        draws, seed,
        bulk_density_cv=_opt_number(un, "bulk_density_cv", "uncertainty", where, 0, 2),
        carbon_fraction_sd=_opt_number(un, "carbon_fraction_sd", "uncertainty", where, 0, 0.5),
        subsidence_rate_sd=to_magnitude(un["subsidence_rate_sd"], "m/yr", "uncertainty.subsidence_rate_sd")
        if "subsidence_rate_sd" in un else None,
        correlation_range_m=to_magnitude(un["correlation_range_m"], "m", "uncertainty.correlation_range_m")
        if "correlation_range_m" in un else None,
        surface_change_sd=to_magnitude(un["surface_change_sd"], "m", "uncertainty.surface_change_sd")
        if "surface_change_sd" in un else None,
        fre_integration_cv=_opt_number(un, "fre_integration_cv", "uncertainty", where, 0, 5),
    )
    flaming = _flaming(raw["flaming"], base, where, force) if "flaming" in raw else None

    return RunConfig(
        source=source, name=printable(run.get("name", source.stem if source else "peatburn run")), year=year,
        crs=run.get("crs"), burned_area=burned, burned_area_layer=ba.get("layer"), survey=survey, peat=peat,
        factors=factors, zones=tuple(zones), uncertainty=unc, block_size=block_size,
        water_table=water_table, plots=plots, tier1=tier1, flaming=flaming, fire_count_field=fire_count_field,
        resolution=resolution, start_field=str(ba.get("start_field", "fire_start")),
        end_field=str(ba.get("end_field", "fire_end")),
        id_field=str(ba["id_field"]) if ba.get("id_field") is not None else None, raw=raw, burn_mask=burn_mask,
        area_accuracy=area_accuracy,
    )


def _burn_mask(ba: dict, burned: Path, base: Path, where: str) -> BurnMaskConfig | None:
    """The raster-mask keys of [burned_area]; None for a polygon file (which refuses them)."""
    if not _looks_like_path(str(burned)):
        given = [k for k in _MASK_KEYS if k in ba]
        if given:
            raise ConfigError(f"{where}: `burned_area.{given[0]}` applies to a burned-area raster (.tif); "
                              f"{burned.name} is read as polygons; remove the key or give the raster")
        return None
    given = [k for k in _POLYGON_KEYS if k in ba]
    if given:
        raise ConfigError(f"{where}: `burned_area.{given[0]}` applies to a polygon file; {burned.name} is a raster "
                          f"mask whose fires are numbered F0001, F0002...; remove the key")
    values = ba.get("burned_values")
    if values is not None:
        if (not isinstance(values, list) or not values
                or not all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in values)):
            raise ConfigError(f"{where}: `burned_area.burned_values` must be a list of class codes such as [1] or "
                              f"[2, 3], got {values!r}")
        values = tuple(values)
    amounts = {}
    for key, unit in (("close_m", "m"), ("open_m", "m"), ("min_area_ha", "ha"), ("min_hole_ha", "ha")):
        if key in ba:
            try:
                v = to_magnitude(ba[key], unit, f"burned_area.{key}")
            except UnitError as exc:
                raise UnitError(f"{where}: {exc}") from None
            if not 0 <= v < float("inf"):
                raise ConfigError(f"{where}: `burned_area.{key}` = {v:g} {unit} must be 0 or more (0: no such step)")
            amounts[key] = v
    date_path = _path(ba["date_path"], base, "burned_area.date_path", where) if "date_path" in ba else None
    return BurnMaskConfig(burned_values=values, date_path=date_path, **amounts)


def _area_accuracy(acc, where: str) -> AreaAccuracyConfig:
    """[burned_area.accuracy]: either `area_ratio` and `area_ratio_se` (the error-adjusted burned area over
    the mapped one, and its standard error, from an accuracy assessment: Olofsson et al. 2014), or
    `omission` and `commission` rates with their standard errors (`omission_se`, `commission_se`) or the
    reference sample sizes they came from (`omission_n`, `commission_n`); `adjust` (default false) scales
    the estimates by the ratio."""
    from .science.uncertainty import area_accuracy as aa

    if not isinstance(acc, dict):
        raise ConfigError(f"{where}: [burned_area.accuracy] must be a table (area_ratio and area_ratio_se, or "
                          f"omission and commission)")
    _check_keys(acc, "burned_area.accuracy", where)
    adjust = acc.get("adjust", False)
    if not isinstance(adjust, bool):
        raise ConfigError(f"{where}: `burned_area.accuracy.adjust` must be true or false, got {adjust!r}")
    rates = [k for k in ("omission", "commission", "omission_se", "commission_se", "omission_n", "commission_n")
             if k in acc]
    try:
        if "area_ratio" in acc:
            if rates:
                raise ConfigError(f"{where}: [burned_area.accuracy] takes either area_ratio (with area_ratio_se) or "
                                  f"omission and commission, not both; remove `{rates[0]}`")
            if "area_ratio_se" not in acc:
                raise ConfigError(f"{where}: [burned_area.accuracy] needs `area_ratio_se` (the standard error of "
                                  f"area_ratio) beside `area_ratio`")
            r = _opt_number(acc, "area_ratio", "burned_area.accuracy", where, 0.05, 20)
            se = _opt_number(acc, "area_ratio_se", "burned_area.accuracy", where, 0, 20)
            basis = f"error-adjusted area ratio {r:g} +/- {se:g} (standard error), as given"
        else:
            missing = [k for k in ("omission", "commission") if k not in acc]
            if missing:
                raise ConfigError(f"{where}: [burned_area.accuracy] needs `area_ratio` and `area_ratio_se`, or "
                                  f"`omission` and `commission`; `{missing[0]}` is missing")
            o = _opt_number(acc, "omission", "burned_area.accuracy", where, 0, 0.99)
            c = _opt_number(acc, "commission", "burned_area.accuracy", where, 0, 0.99)
            ses = {}
            for k, rate in (("omission", o), ("commission", c)):
                if f"{k}_se" in acc and f"{k}_n" in acc:
                    raise ConfigError(f"{where}: give `burned_area.accuracy.{k}_se` or `{k}_n`, not both")
                if f"{k}_n" in acc:
                    n = acc[f"{k}_n"]
                    if not isinstance(n, int) or isinstance(n, bool):
                        raise ConfigError(f"{where}: `burned_area.accuracy.{k}_n` must be a whole number of reference "
                                          f"units, got {n!r}")
                    ses[k] = aa.proportion_se(rate, n)
                elif f"{k}_se" in acc:
                    ses[k] = _opt_number(acc, f"{k}_se", "burned_area.accuracy", where, 0, 1)
                else:
                    raise ConfigError(f"{where}: [burned_area.accuracy] needs `{k}_se` (standard error of the rate) "
                                      f"or `{k}_n` (reference units it was estimated from)")
            r, se = aa.area_ratio_from_rates(o, c, ses["omission"], ses["commission"])
            basis = (f"omission {o:g} +/- {ses['omission']:.3g}, commission {c:g} +/- {ses['commission']:.3g}: "
                     f"area ratio (1 - commission) / (1 - omission) = {r:.4g} +/- {se:.3g}")
    except PhysicalRangeError as exc:
        raise PhysicalRangeError(f"{where}: {exc}") from None
    return AreaAccuracyConfig(ratio=float(r), ratio_se=float(se), adjust=adjust, basis=basis)


def _fill_value(peat_raw: dict, key: str, quantity: str, base: Path, where: str, force: bool) -> float | None:
    """A stated fallback for holes in a peat-property raster: a number or quantity, not a raster."""
    if key not in peat_raw:
        return None
    v = _value(peat_raw[key], base, f"peat.{key}", quantity, where, force=force)
    if isinstance(v, RasterRef):
        raise ConfigError(f"{where}: `peat.{key}` must be one value (the fallback put in the holes of "
                          f"peat.{quantity}), not a raster")
    if quantity == "carbon_fraction" and not (0.0 < v <= 1.0):
        raise PhysicalRangeError(f"{where}: `peat.{key}` = {v:g} is not a mass fraction in (0, 1]")
    return float(v)


def _opt_number(table: dict, key: str, section: str, where: str, lo=None, hi=None):
    if key not in table:
        return None
    v = table[key]
    if not isinstance(v, (int, float)) or isinstance(v, bool):
        raise ConfigError(f"{where}: `{section}.{key}` must be a number, got {v!r}")
    if (lo is not None and v < lo) or (hi is not None and v > hi):
        raise PhysicalRangeError(f"{where}: `{section}.{key}` = {v!r} is outside {lo}-{hi}")
    return float(v)


_STATION_SUFFIXES = (".csv", ".txt", ".gpkg", ".geojson", ".json", ".shp", ".fgb")


def _water_table(wt: dict, base: Path, where: str) -> WaterTableConfig:
    _check_keys(wt, "depth.water_table", where)
    src = _require(wt, "depth", "depth.water_table", where)
    raster = stations = None
    dated = ()
    units = wt.get("units")
    if isinstance(src, list) and src and all(isinstance(x, dict) for x in src):
        dated = _dated_rasters(src, base, units, where)
    elif isinstance(src, dict):
        raster = _value(src, base, "depth.water_table.depth", "water_table_depth", where)
    elif isinstance(src, str) and src.lower().endswith(_STATION_SUFFIXES):
        stations = _path(src, base, "depth.water_table.depth", where)
    elif isinstance(src, (str, list)):
        raster = RasterRef(_raster(src, base, "depth.water_table.depth", where), units,
                           conversion_factor(units, "m", "depth.water_table.units") if units else 1.0)
    else:
        raise ConfigError(f"{where}: `depth.water_table.depth` must be a raster or a station file path, got {src!r}")
    model = wt.get("model", "fit")
    model_file = None
    intercept = slope = None
    if "intercept" in wt or "slope" in wt:
        if "intercept" not in wt or "slope" not in wt:
            raise ConfigError(f"{where}: give both `depth.water_table.intercept` (m) and `slope` (m/m)")
        intercept = to_magnitude(wt["intercept"], "m", "depth.water_table.intercept")
        slope = to_magnitude(wt["slope"], "dimensionless", "depth.water_table.slope")
        model = "user"
    elif isinstance(model, str) and model.lower().endswith(".json"):
        model_file = _path(model, base, "depth.water_table.model", where)
        model = "file"
    elif model not in ("fit", "default"):
        raise ConfigError(f"{where}: `depth.water_table.model` must be \"fit\", \"default\" or a fit JSON from "
                          f"`peatburn calibrate`, got {model!r}")
    fit_method = wt.get("fit_method", "theil-sen")
    if fit_method not in ("theil-sen", "huber"):
        raise ConfigError(f"{where}: `depth.water_table.fit_method` must be \"theil-sen\" or \"huber\"")
    fit_target = wt.get("fit_target", "mean")
    if fit_target not in ("mean", "median"):
        raise ConfigError(f"{where}: `depth.water_table.fit_target` must be \"mean\" (for totals) or \"median\", "
                          f"got {fit_target!r}")
    error_m = None
    if "error" in wt:
        error_m = to_magnitude(wt["error"], "m", "depth.water_table.error")
        if not (error_m >= 0 and math.isfinite(error_m)) or error_m > 2.0:
            raise PhysicalRangeError(f"{where}: `depth.water_table.error` = {wt['error']!r} must be a standard "
                                     f"deviation between 0 and 2 m (e.g. 0.1 or \"10 cm\")")
        if fit_target == "median" and error_m > 0:
            raise ConfigError(f"{where}: `depth.water_table.error` corrects the mean fit; drop it or set "
                              f"`fit_target = \"mean\"`")
    return WaterTableConfig(
        raster=raster, stations=stations, dated_rasters=dated,
        value_column=str(wt.get("value_column", "water_table_m")),
        crs=wt.get("crs"), date_column=wt.get("date_column"), model=model, intercept=intercept, slope=slope,
        model_file=model_file, fit_method=fit_method, fit_target=fit_target, error_m=error_m or None,
        idw_power=_opt_number(wt, "idw_power", "depth.water_table", where, 0.5, 6) or 2.0,
        idw_neighbours=int(_opt_number(wt, "idw_neighbours", "depth.water_table", where, 1, 100) or 12),
        idw_max_distance_m=_opt_number(wt, "idw_max_distance_m", "depth.water_table", where, 0, None),
        date_window_days=_opt_number(wt, "date_window_days", "depth.water_table", where, 0, 366) if
        "date_window_days" in wt else 15.0,
        edge_taper=_taper(wt, "edge_taper", where, 1000.0, "a distance such as 20 or \"20 m\""),
        thickness_taper=_taper(wt, "thickness_taper", where, 20.0, "a thickness scale such as 0.5 or \"50 cm\""),
    )


def _dated_rasters(entries: list, base: Path, units, where: str) -> tuple:
    """``depth.water_table.depth`` as a list of tables ``{path = ..., date = ...}``: the rasters with their
    dates (ISO strings), sorted by date; each date must parse, no date twice (the files are checked when
    the inputs are opened, like every raster)."""
    import datetime as _dt

    key = "depth.water_table.depth"
    out = []
    for i, e in enumerate(entries):
        if set(e) != {"path", "date"}:
            raise ConfigError(f"{where}: `{key}[{i}]` takes `path` (a raster) and `date` (e.g. 2031-08-15), "
                              f"got {sorted(e)}")
        d = e["date"]
        if isinstance(d, _dt.datetime):
            d = d.date()
        if isinstance(d, str):
            try:
                d = _dt.date.fromisoformat(d.strip())
            except ValueError:
                raise ConfigError(f"{where}: `{key}[{i}].date` = {e['date']!r} is not a date; write it as "
                                  f"2031-08-15 (or \"2031-08-15\")") from None
        if not isinstance(d, _dt.date):
            raise ConfigError(f"{where}: `{key}[{i}].date` must be a date such as 2031-08-15, got {e['date']!r}")
        ref = RasterRef(_raster(e["path"], base, f"{key}[{i}].path", where), units,
                        conversion_factor(units, "m", "depth.water_table.units") if units else 1.0)
        out.append((ref, d.isoformat()))
    dates = [d for _, d in out]
    twice = sorted({d for d in dates if dates.count(d) > 1})
    if twice:
        raise ConfigError(f"{where}: `{key}` has more than one raster dated {', '.join(twice)}; give one raster "
                          f"per date")
    return tuple(sorted(out, key=lambda x: x[1]))


def _taper(wt: dict, key: str, where: str, hi: float, example: str):
    """``depth.water_table.<key>`` (edge_taper, thickness_taper): "cv", a length [m] (number or quantity
    string) in (0, hi], or absent (None)."""
    if key not in wt:
        return None
    v = wt[key]
    if v == "cv":
        return "cv"
    try:
        m = to_magnitude(v, "m", f"depth.water_table.{key}")
    except UnitError:
        raise ConfigError(f"{where}: `depth.water_table.{key}` must be \"cv\" (chosen by cross-validation) "
                          f"or {example}, got {v!r}") from None
    if not (0 < m <= hi):
        raise PhysicalRangeError(f"{where}: `depth.water_table.{key}` = {v!r} must be between 0 and {hi:g} m")
    return float(m)


def _flaming(fl: dict, base: Path, where: str, force: bool) -> FlamingConfig:
    _check_keys(fl, "flaming", where)
    method = fl.get("method", "frp" if "detections" in fl else "biomass")
    if method not in ("frp", "biomass"):
        raise ConfigError(f"{where}: `flaming.method` must be \"frp\" (active-fire detections) or \"biomass\"")
    detections = _path(fl["detections"], base, "flaming.detections", where) if "detections" in fl else None
    if method == "frp" and detections is None:
        raise ConfigError(f"{where}: `flaming.method = \"frp\"` needs `flaming.detections` (a CSV or vector file)")
    biomass = None
    if "biomass" in fl:
        biomass = _value(fl["biomass"], base, "flaming.biomass", "biomass", where, force=force)
    cf = _opt_number(fl, "combustion_factor", "flaming", where, 0, 1)
    if method == "biomass" and (biomass is None or cf is None):
        raise ConfigError(f"{where}: `flaming.method = \"biomass\"` needs `flaming.biomass` (t d.m./ha, number or "
                          f"raster) and `flaming.combustion_factor` (0-1, IPCC 2006 Table 2.6)")
    columns = fl.get("columns", {})
    if not isinstance(columns, dict):
        raise ConfigError(f"{where}: `flaming.columns` must be a table such as {{ time = \"obs_time\" }}")
    coef = None
    if "coefficient" in fl:
        coef = _value(fl["coefficient"], base, "flaming.coefficient", "combustion_coefficient", where, force=force)
    peat_coef = None
    if "peat_coefficient" in fl:
        peat_coef = _value(fl["peat_coefficient"], base, "flaming.peat_coefficient", "combustion_coefficient", where,
                           force=force)
        if not isinstance(peat_coef, float):
            raise ConfigError(f"{where}: `flaming.peat_coefficient` must be one number in kg/MJ (e.g. \"1.5 kg/MJ\")")
    gap = fl.get("event_gap_hours")
    return FlamingConfig(
        method=method, detections=detections, crs=fl.get("crs"), columns=dict(columns),
        event_distance_m=_opt_number(fl, "event_distance_m", "flaming", where, 0, None),
        event_gap_hours=float(gap) if gap is not None else None, coefficient_kg_per_mj=coef,
        biomass=biomass, combustion_factor=cf,
        vegetation_carbon_fraction=_opt_number(fl, "vegetation_carbon_fraction", "flaming", where, 0, 1),
        footprint_m=_opt_number(fl, "footprint_m", "flaming", where, 0, 100_000),
        ignition_tie_hours=_opt_number(fl, "ignition_tie_hours", "flaming", where, 0, 24 * 30),
        ignition_layer=str(fl["ignition_layer"]) if "ignition_layer" in fl else None,
        peat_coefficient_kg_per_mj=peat_coef,
    )


def _factor_form(value, where: str) -> str:
    from .science.gases import FORMS

    if value not in FORMS:
        raise ConfigError(f"{where}: `emission_factors.form` = {value!r}; use \"dry_matter\" (mass burned x "
                          f"emission factor, the IPCC Tier 1 convention) or \"carbon_balance\" (carbon burned "
                          f"through the set's emission ratios)")
    return value


def _factor_ref(value, base: Path) -> str:
    if not isinstance(value, str):
        raise ConfigError(f"emission factor set must be a built-in name or a CSV path, got {value!r}")
    if value.lower().endswith(".csv"):
        p = Path(value)
        return str(p if p.is_absolute() else base / p)
    return value


def _survey(sv: dict, base: Path, where: str, force: bool = False) -> SurveyConfig:
    pre = _raster(_require(sv, "pre", "depth.survey", where), base, "depth.survey.pre", where)
    post = _raster(_require(sv, "post", "depth.survey", where), base, "depth.survey.post", where)
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
    quality = _raster(sv["quality"], base, "depth.survey.quality", where) if "quality" in sv else None
    return SurveyConfig(pre, post, float(interval), subsidence, stable, float(buf), tilt, float(lod_t), quality)


def _date(value, key, where) -> dt.date:
    if isinstance(value, dt.datetime):
        return value.date()
    if isinstance(value, dt.date):
        return value
    try:
        return dt.date.fromisoformat(str(value))
    except ValueError:
        raise ConfigError(f"{where}: `depth.survey.{key}` must be a date like 2028-06-30, got {value!r}") from None
