"""Shipped emission-factor and GWP sets, and the loader for them and for user CSV files.

Emission-factor sets
--------------------
One CSV per set in this package (file name = set name). Set-level metadata sits in ``#`` comment
lines before the header, as ``# key: value`` with keys ``name``, ``phase`` (``smouldering`` or
``flaming``), ``citation``, ``doi``, ``notes`` (repeated keys are joined) and ``derived_from`` (the
name of a shipped set this one was derived from, e.g. by rounding: the two are not independent
evidence, and a factor without a spread of its own takes its parent's). Then the columns::

    gas,ef_g_per_kg,sd_g_per_kg,citation,status

``gas`` is a lower-case formula (``co2``, ``co``, ``ch4``, ``n2o``, ``nox``...); ``ef_g_per_kg`` is
the emission factor in g of gas per kg of dry matter burned; ``sd_g_per_kg`` the published spread
(empty when the source gives none); ``citation`` the table or page the row comes from;
``status`` ``checked`` (compared with the publication) or ``recalled`` (written from memory,
not yet compared). A row with gas ``co2_c`` gives CO2 as grams of carbon (as the IPCC 2013
Wetlands Supplement does); the loader converts it to CO2 with 44.009/12.011.

A user CSV has the same columns; ``sd_g_per_kg``, ``citation`` and ``status`` may be left out
(a user row without status gets ``"user-supplied"``), and a ``# phase:`` line is optional.

GWP sets
--------
``gwp_sets.csv``: columns ``set,gas,gwp,citation,status``; GWP-100 in kg CO2e per kg gas.
"""

from __future__ import annotations

import csv
import math
import os
import re
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path

from ..errors import FactorSetError, MissingInputError
from ..science.gases import CO2_PER_C

__all__ = [
    "FactorSet",
    "GWPSet",
    "list_factor_sets",
    "load_factor_set",
    "list_gwp_sets",
    "load_gwp_set",
    "DEFAULT_SMOULDERING",
    "DEFAULT_FLAMING",
    "DEFAULT_GWP",
    "PHASES",
    "gas_label",
    "REQUIRED_GASES",
    "GWP_PRESETS",
    "require_gases",
]

#: Default smouldering set: the IPCC Tier 1 defaults for fires on tropical organic soil, the
#: usual choice for a national inventory. Its values are recalled, unchecked (see its file).
DEFAULT_SMOULDERING = "smouldering_ipcc2013_wetlands"
#: Default flaming set: IPCC (2006) Vol. 4 Ch. 2 Table 2.5, tropical forest.
DEFAULT_FLAMING = "flaming_ipcc2006_tropical_forest"
#: Default GWP set: IPCC AR6 WG1 Table 7.15, non-fossil CH4.
DEFAULT_GWP = "AR6"

PHASES = ("smouldering", "flaming")
#: Reporting presets for ``[emission_factors] gwp``: ``"UNFCCC"`` selects AR5 (GWP-100 without
#: climate-carbon feedbacks), the values the Paris Agreement's enhanced transparency framework uses.
#: That decision 18/CMA.1 sets the modalities, procedures and guidelines of that framework was
#: checked (a public summary of the decision); that its annex (para. 37) names the AR5 GWP-100
#: values is recalled, unchecked.
GWP_PRESETS = {"unfccc": "AR5"}
#: Gases every factor set of a run must hold: CO2 gives the CO2-C inventory line and the bulk of
#: CO2e. Every other gas is optional and reported only where the set has it.
REQUIRED_GASES = ("co2",)
_STATUSES = ("checked", "recalled")
_GWP_FILE = "gwp_sets.csv"
_EF_COLUMNS = ("gas", "ef_g_per_kg", "sd_g_per_kg", "citation", "status")
_EF_REQUIRED = ("gas", "ef_g_per_kg")
_META_KEYS = ("name", "phase", "citation", "doi", "notes", "derived_from")
_GAS_RE = re.compile(r"^[a-z][a-z0-9_.+-]*$")


@dataclass(frozen=True)
class FactorSet:
    """One emission-factor set.

    Attributes
    ----------
    name : str
        Set name (built-in: the file name without ``.csv``).
    phase : str
        ``"smouldering"`` or ``"flaming"`` (``"unspecified"`` for a user CSV with no phase given).
    citation : str
        Full citation of the source.
    doi : str or None
        DOI of the source, where it has one.
    notes : str
        Provenance notes: what was checked, conversions made.
    ef : dict of str to float
        Emission factors [g gas / kg dry matter], keyed by lower-case gas name.
    sd : dict of str to float
        Published spread [g/kg], NaN where the source gives none.
    status : dict of str to str
        Per gas: ``"checked"`` or ``"recalled"`` (``"user-supplied"`` for user rows without one).
    source_path : str or None
        Path of a user CSV; None for a built-in set.
    citations : dict of str to str
        Per gas: the row's citation (table, column).
    derived_from : str or None
        Name of the shipped set this one was derived from (rounded, converted), or None.
    """

    name: str
    phase: str
    citation: str
    doi: str | None
    notes: str
    ef: dict[str, float]
    sd: dict[str, float]
    status: dict[str, str]
    source_path: str | None
    citations: dict[str, str] = field(default_factory=dict)
    derived_from: str | None = None

    @property
    def gases(self) -> list[str]:
        """Gas names of the set, in file order."""
        return list(self.ef)


@dataclass(frozen=True)
class GWPSet:
    """One set of 100-year global warming potentials.

    Attributes
    ----------
    name : str
        ``"AR5"``, ``"AR5-CCF"``, ``"AR6"``, ``"AR6-fossil"``.
    citation : str
        Source tables, joined.
    gwp : dict of str to float
        GWP-100 [kg CO2e / kg gas] per lower-case gas name; ``co2`` is 1. CO is absent.
    status : str
        ``"checked"`` if every value was checked, else ``"recalled"``.
    """

    name: str
    citation: str
    gwp: dict[str, float]
    status: str


# ----------------------------------------------------------------------------- reading files


def _package_files():
    return resources.files(__name__)


def _builtin_names() -> list[str]:
    names = []
    for entry in _package_files().iterdir():
        fname = entry.name
        if fname.endswith(".csv") and fname != _GWP_FILE:
            names.append(fname[: -len(".csv")])
    return sorted(names)


def _split_comments(text: str, where: str):
    """Split a CSV text into (metadata dict, list of (line number, line) for data lines)."""
    meta: dict[str, list[str]] = {}
    data: list[tuple[int, str]] = []
    for lineno, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        if not line:
            continue
        if line.startswith("#"):
            body = line[1:].strip()
            key, sep, value = body.partition(":")
            key = key.strip().lower()
            if sep and key in _META_KEYS:
                meta.setdefault(key, []).append(value.strip())
            continue
        data.append((lineno, raw))
    return {k: " ".join(v for v in vals if v) for k, vals in meta.items()}, data


def _parse_number(text: str, where: str, lineno: int, column: str, *, allow_empty: bool, hint: str) -> float:
    text = text.strip()
    if text == "":
        if allow_empty:
            return math.nan
        raise FactorSetError(f"{where}: line {lineno}, column '{column}': empty; {hint}")
    try:
        value = float(text)
    except ValueError:
        raise FactorSetError(f"{where}: line {lineno}, column '{column}': cannot read {text!r} as a number; {hint}") from None
    if not math.isfinite(value) or value < 0:
        raise FactorSetError(
            f"{where}: line {lineno}, column '{column}': {text!r} is not a finite number >= 0; {hint}"
        )
    return value


def _parse_factor_csv(text: str, where: str, *, builtin: bool):
    meta, data = _split_comments(text, where)
    if not data:
        raise FactorSetError(f"{where}: no header line; the first non-comment line must be '{','.join(_EF_COLUMNS)}'")
    header_lineno, header_line = data[0]
    header = [h.strip().lower() for h in next(csv.reader([header_line]))]
    unknown = [h for h in header if h not in _EF_COLUMNS]
    if unknown:
        raise FactorSetError(
            f"{where}: line {header_lineno}: unknown column(s) {', '.join(repr(u) for u in unknown)}; "
            f"the columns are {', '.join(_EF_COLUMNS)}"
        )
    required = _EF_COLUMNS if builtin else _EF_REQUIRED
    missing = [c for c in required if c not in header]
    if missing:
        raise FactorSetError(
            f"{where}: line {header_lineno}: missing column(s) {', '.join(repr(m) for m in missing)}; "
            f"the columns are {', '.join(_EF_COLUMNS)}"
        )
    if len(set(header)) != len(header):
        raise FactorSetError(f"{where}: line {header_lineno}: a column name appears twice")

    ef: dict[str, float] = {}
    sd: dict[str, float] = {}
    status: dict[str, str] = {}
    cites: dict[str, str] = {}
    conversions: list[str] = []
    for lineno, raw in data[1:]:
        cells = next(csv.reader([raw]))
        if len(cells) != len(header):
            raise FactorSetError(
                f"{where}: line {lineno}: {len(cells)} fields, but the header has {len(header)} "
                f"({','.join(header)}); quote a citation that contains commas"
            )
        row = {h: c.strip() for h, c in zip(header, cells)}
        gas = row["gas"].lower()
        if not _GAS_RE.match(gas):
            raise FactorSetError(
                f"{where}: line {lineno}, column 'gas': {row['gas']!r} is not a gas name; "
                "write a lower-case formula such as co2, co, ch4 or n2o"
            )
        value = _parse_number(
            row["ef_g_per_kg"], where, lineno, "ef_g_per_kg", allow_empty=False,
            hint="write the emission factor in g per kg of dry matter, e.g. 210",
        )
        spread = _parse_number(
            row.get("sd_g_per_kg", ""), where, lineno, "sd_g_per_kg", allow_empty=True,
            hint="write the spread in g per kg of dry matter, or leave it empty",
        )
        stat = row.get("status", "").lower()
        if stat == "":
            if builtin:
                raise FactorSetError(f"{where}: line {lineno}, column 'status': empty; write checked or recalled")
            stat = "user-supplied"
        elif stat not in _STATUSES:
            raise FactorSetError(
                f"{where}: line {lineno}, column 'status': {row['status']!r}; write checked or recalled"
            )
        cite = row.get("citation", "")
        if builtin and not cite:
            raise FactorSetError(f"{where}: line {lineno}, column 'citation': empty; every built-in row needs one")
        if gas == "co2_c":
            # CO2 given as grams of carbon (IPCC 2013 Wetlands Supplement convention).
            conversions.append(
                f"co2 converted from CO2-C: {value:g} g C/kg x 44.009/12.011 = {value * CO2_PER_C:.2f} g CO2/kg."
            )
            gas, value, spread = "co2", value * CO2_PER_C, spread * CO2_PER_C
            cite = f"{cite} (converted from CO2-C x 44.009/12.011)" if cite else "converted from CO2-C x 44.009/12.011"
        if gas in ef:
            raise FactorSetError(f"{where}: line {lineno}, column 'gas': {gas!r} appears twice")
        ef[gas], sd[gas], status[gas], cites[gas] = value, spread, stat, cite
    if not ef:
        raise FactorSetError(f"{where}: no emission-factor rows after the header")
    notes = " ".join([meta.get("notes", "")] + conversions).strip()
    return meta, ef, sd, status, cites, notes


def _check_phase(declared: str | None, wanted: str | None, where: str) -> str:
    for value, label in ((declared, "the file's '# phase:' line"), (wanted, "phase")):
        if value is not None and value not in PHASES:
            raise FactorSetError(f"{where}: {label} is {value!r}; it must be one of {', '.join(PHASES)}")
    if declared and wanted and declared != wanted:
        raise FactorSetError(
            f"{where}: this is a {declared} set but it was asked for as the {wanted} set; "
            f"choose a {wanted} set ({', '.join(s.name for s in list_factor_sets(wanted))}) or a CSV with '# phase: {wanted}'"
        )
    return declared or wanted or "unspecified"


def _load_builtin(name: str, phase: str | None) -> FactorSet:
    where = f"built-in factor set {name!r} ({name}.csv)"
    text = (_package_files() / f"{name}.csv").read_text(encoding="utf-8")
    meta, ef, sd, status, cites, notes = _parse_factor_csv(text, where, builtin=True)
    if meta.get("name") and meta["name"] != name:
        raise FactorSetError(f"{where}: '# name:' says {meta['name']!r}; the file name and the name must agree")
    if not meta.get("citation"):
        raise FactorSetError(f"{where}: no '# citation:' line")
    if meta.get("phase") not in PHASES:
        raise FactorSetError(f"{where}: '# phase:' must be one of {', '.join(PHASES)}")
    return FactorSet(
        name=name,
        phase=_check_phase(meta["phase"], phase, where),
        citation=meta["citation"],
        doi=meta.get("doi") or None,
        notes=notes,
        ef=ef,
        sd=sd,
        status=status,
        source_path=None,
        citations=cites,
        derived_from=meta.get("derived_from") or None,
    )


def _load_user(path: Path, phase: str | None) -> FactorSet:
    where = str(path)
    if not path.is_file():
        raise MissingInputError(
            f"{where}: emission-factor file not found; give an existing CSV path or a built-in set name "
            f"({', '.join(_builtin_names())})"
        )
    try:
        text = path.read_text(encoding="utf-8-sig")
    except (OSError, UnicodeDecodeError) as exc:
        raise FactorSetError(f"{where}: cannot read the file as UTF-8 text ({exc.__class__.__name__})") from None
    meta, ef, sd, status, cites, notes = _parse_factor_csv(text, where, builtin=False)
    declared = meta.get("phase", "").lower() or None
    return FactorSet(
        name=meta.get("name") or path.stem,
        phase=_check_phase(declared, phase, where),
        citation=meta.get("citation") or f"user-supplied file {path.name}",
        doi=meta.get("doi") or None,
        notes=notes,
        ef=ef,
        sd=sd,
        status=status,
        source_path=str(path.resolve()),
        citations=cites,
        derived_from=meta.get("derived_from") or None,
    )


def _looks_like_path(text: str) -> bool:
    return text.lower().endswith(".csv") or os.sep in text or "/" in text or (os.altsep or "/") in text


# ----------------------------------------------------------------------------- public API


def list_factor_sets(phase: str | None = None) -> list[FactorSet]:
    """All built-in emission-factor sets, sorted by name, optionally only those of one phase.

    Parameters
    ----------
    phase : {"smouldering", "flaming"}, optional
        Keep only the sets of this phase.

    Returns
    -------
    list of FactorSet
    """
    if phase is not None and phase not in PHASES:
        raise FactorSetError(f"phase is {phase!r}; it must be one of {', '.join(PHASES)}")
    sets = [_load_builtin(n, None) for n in _builtin_names()]
    return [s for s in sets if phase is None or s.phase == phase]


def load_factor_set(name_or_path, phase: str | None = None) -> FactorSet:
    """Load a built-in emission-factor set by name, or a user CSV by path.

    Parameters
    ----------
    name_or_path : str or os.PathLike
        A built-in set name (see :func:`list_factor_sets`) or the path of a CSV file. A string
        ending in ``.csv`` or containing a path separator is read as a path.
    phase : {"smouldering", "flaming"}, optional
        The phase the set is meant for; a set declaring another phase is refused. A user CSV
        without a ``# phase:`` line takes this phase (``"unspecified"`` if None).

    Returns
    -------
    FactorSet

    Raises
    ------
    FactorSetError
        Unknown set name (the message lists the known ones), malformed CSV (the message names
        the file, line and column), or a phase mismatch.
    MissingInputError
        A CSV path that does not exist.
    """
    if isinstance(name_or_path, os.PathLike):
        return _load_user(Path(name_or_path), phase)
    if not isinstance(name_or_path, str) or not name_or_path.strip():
        raise FactorSetError(f"emission-factor set: expected a set name or a CSV path, got {name_or_path!r}")
    text = name_or_path.strip()
    names = _builtin_names()
    if text in names:
        return _load_builtin(text, phase)
    if text.lower() in names:
        return _load_builtin(text.lower(), phase)
    if _looks_like_path(text) or Path(text).is_file():
        return _load_user(Path(text), phase)
    raise FactorSetError(
        f"unknown emission-factor set {text!r}; built-in sets are: {', '.join(names)} "
        "(or give the path of a CSV file with columns gas,ef_g_per_kg,sd_g_per_kg,citation,status)"
    )


def _read_gwp_table() -> dict[str, GWPSet]:
    where = f"built-in GWP table ({_GWP_FILE})"
    text = (_package_files() / _GWP_FILE).read_text(encoding="utf-8")
    _, data = _split_comments(text, where)
    header = [h.strip().lower() for h in next(csv.reader([data[0][1]]))]
    if header != ["set", "gas", "gwp", "citation", "status"]:
        raise FactorSetError(f"{where}: line {data[0][0]}: header must be set,gas,gwp,citation,status")
    rows: dict[str, dict] = {}
    for lineno, raw in data[1:]:
        cells = [c.strip() for c in next(csv.reader([raw]))]
        if len(cells) != 5:
            raise FactorSetError(f"{where}: line {lineno}: expected 5 fields, got {len(cells)}")
        set_name, gas, value, cite, stat = cells
        if stat not in _STATUSES:
            raise FactorSetError(f"{where}: line {lineno}, column 'status': {stat!r}; write checked or recalled")
        entry = rows.setdefault(set_name, {"gwp": {}, "cites": [], "statuses": []})
        entry["gwp"][gas.lower()] = _parse_number(
            value, where, lineno, "gwp", allow_empty=False, hint="write the GWP-100 as a number"
        )
        if cite not in entry["cites"]:
            entry["cites"].append(cite)
        entry["statuses"].append(stat)
    return {
        name: GWPSet(
            name=name,
            citation="; ".join(e["cites"]),
            gwp=e["gwp"],
            status="checked" if all(s == "checked" for s in e["statuses"]) else "recalled",
        )
        for name, e in rows.items()
    }


def require_gases(factor_set: FactorSet, role: str, needed=REQUIRED_GASES) -> FactorSet:
    """Refuse a set that lacks a gas the run needs (called before any pixel is read).

    Parameters
    ----------
    factor_set : FactorSet
    role : str
        What the set is used for in the run (``"smouldering"``, ``"flaming"``), for the message.
    needed : sequence of str
        Gas names the run needs (default :data:`REQUIRED_GASES`).

    Returns
    -------
    FactorSet
        The set, unchanged.

    Raises
    ------
    FactorSetError
        One line naming the set (and its file), the missing gas(es) and the fix.
    """
    missing = [g for g in needed if g not in factor_set.ef]
    if missing:
        where = factor_set.source_path or f"built-in factor set {factor_set.name!r}"
        raise FactorSetError(
            f"{where}: the {role} set has no row for {', '.join(missing)}; a run needs "
            f"{', '.join(needed)} in every set: add the row(s) (gas,ef_g_per_kg)"
        )
    return factor_set


def list_gwp_sets() -> list[GWPSet]:
    """All built-in GWP-100 sets, in file order."""
    return list(_read_gwp_table().values())


def load_gwp_set(name: str) -> GWPSet:
    """Load a built-in GWP-100 set by name (case-insensitive: ``"ar6"`` finds ``"AR6"``), or a
    reporting preset of :data:`GWP_PRESETS` (``"UNFCCC"`` gives the AR5 set).

    Raises
    ------
    FactorSetError
        Unknown name; the message lists the known ones.
    """
    table = _read_gwp_table()
    if isinstance(name, str):
        name = GWP_PRESETS.get(name.strip().lower(), name)
        for key, gwp_set in table.items():
            if key.lower() == name.strip().lower():
                return gwp_set
    raise FactorSetError(f"unknown GWP set {name!r}; built-in GWP sets are: {', '.join(table)} "
                         f"(or the preset UNFCCC, which selects AR5)")



#: Display labels where the upper-cased code is not the usual notation (common practice).
_GAS_LABELS = {"nox": "NOx", "pm25": "PM2.5", "pm2_5": "PM2.5", "co2_c": "CO2-C"}


def gas_label(code: str) -> str:
    """The usual written form of a lower-case gas code: ``"nox"`` -> ``"NOx"``, ``"ch4"`` -> ``"CH4"``.

    Upper case with ``_`` written as ``-`` unless the code has a label of its own (NOx, PM2.5).
    """
    return _GAS_LABELS.get(code.lower(), code.upper().replace("_", "-"))
