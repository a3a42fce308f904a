"""SHA-256 of every output of a run, and the proof that a folder is one run's complete, unaltered set.

A run records its outputs' SHA-256 twice:

* ``provenance.json`` (key ``output_sha256``): every output except provenance.json itself (a file
  cannot hold its own hash), so that the record an auditor keeps covers the tables, rasters and report;
* ``SHA256SUMS``, written last, in the format of GNU coreutils' ``sha256sum`` (``<hex>  <name>``, one
  line per file, sorted by name): every other file of the set, provenance.json included. Anyone can
  check a folder with ``sha256sum -c SHA256SUMS``, without peatburn; it is written last, so a set
  that has it was finished.

:func:`check_outputs` proves a folder is one run's complete, unaltered set: every file SHA256SUMS
lists is there with its hash, no other file is, and provenance.json's record agrees. It proves
consistency, not authorship: someone who alters a file and rewrites both records on purpose is not
detected; for that, keep the SHA-256 of SHA256SUMS (printed by ``peatburn check --outputs``) elsewhere.
"""

from __future__ import annotations

import json
import re
from pathlib import Path

from ..io.writers import file_record, sha256_of, write_text

SUMS_NAME = "SHA256SUMS"
PROVENANCE_NAME = "provenance.json"
#: The file that makes a folder a series' (``peatburn series``): its ``year_folders`` name the years' folders.
SERIES_NAME = "series.json"
_LINE = re.compile(r"^([0-9a-f]{64}) [ *](.+)$")


def set_files(folder: Path) -> list[str]:
    """Every file of ``folder`` and its subfolders, as sorted relative POSIX paths (a link counts as
    a file: it is not followed)."""
    folder = Path(folder)
    return sorted(p.relative_to(folder).as_posix() for p in folder.rglob("*") if p.is_symlink() or not p.is_dir())


def output_records(folder: Path, exclude: tuple = (PROVENANCE_NAME, SUMS_NAME)) -> dict:
    """name -> size and SHA-256 of every file in ``folder`` but ``exclude`` (provenance.json's record)."""
    out = {}
    for name in set_files(folder):
        if name not in exclude:
            rec = file_record(Path(folder) / name)
            out[name] = {"size_bytes": rec["size_bytes"], "sha256": rec["sha256"]}
    return out


def write_sums(folder: Path, known: dict | None = None) -> Path:
    """Write ``SHA256SUMS`` for every file in ``folder`` (sha256sum's text format); returns its path.
    ``known`` (name -> record with ``sha256``, as from :func:`output_records`) spares reading those
    files a second time."""
    folder = Path(folder)
    known = known or {}
    names = [n for n in set_files(folder) if n != SUMS_NAME]
    bad = [n for n in names if "\n" in n or "\\" in n]
    if bad:  # sha256sum escapes such names; peatburn never writes them
        raise ValueError(f"{folder}: output names with a newline or backslash cannot be listed: {bad}")
    lines = [f"{known[n]['sha256'] if n in known else sha256_of(folder / n)}  {n}\n" for n in names]
    return write_text(folder / SUMS_NAME, "".join(lines))


def write_series_sums(folder: Path, year_folders: list[str]) -> Path:
    """Write the ``SHA256SUMS`` of a series folder: every file of the folder, each year folder's files
    (its own SHA256SUMS and provenance.json included) listed by their path below ``folder``. The
    hashes a year's own SHA256SUMS holds are taken from it (the year was sealed a moment before), so
    the rasters are not read twice."""
    folder = Path(folder)
    known = {}
    for sub in year_folders:
        for name, digest in read_sums(folder / sub / SUMS_NAME)[0].items():
            known[f"{sub}/{name}"] = {"sha256": digest}
    return write_sums(folder, known)


def is_series(folder: Path | str) -> bool:
    """Whether ``folder`` holds a series' outputs (series.json, no run's provenance.json)."""
    folder = Path(folder)
    return (folder / SERIES_NAME).is_file() and not (folder / PROVENANCE_NAME).exists()


def read_sums(path: Path) -> tuple[dict, list[str]]:
    """The ``name -> sha256`` of a SHA256SUMS file and a problem line for each malformed line."""
    sums, problems = {}, []
    for i, line in enumerate(Path(path).read_text(encoding="utf-8").splitlines(), 1):
        m = _LINE.match(line)
        if not m:
            problems.append(f"malformed: {SUMS_NAME} line {i} is not '<sha256>  <name>'")
            continue
        sums[m.group(2)] = m.group(1)
    return sums, problems


def check_outputs(folder: Path | str) -> list[str]:
    """Problems that keep ``folder`` from being one run's complete, unaltered set, one line each
    (``missing: ...``, ``altered: ...``, ``extra: ...``, ``malformed: ...``); empty when it is one.

    A series folder (:func:`is_series`) is checked as one set too: its SHA256SUMS covers every file
    below it, and each year folder's own SHA256SUMS and provenance.json must agree with it
    (:func:`_series_years`).

    Raises
    ------
    MissingInputError
        When ``folder`` is not a folder.
    """
    from ..errors import MissingInputError

    folder = Path(folder)
    if not folder.is_dir():
        raise MissingInputError(f"{folder} is not a folder; give the output folder of a run to --outputs")
    present = set(set_files(folder))
    if SUMS_NAME not in present:
        return [f"missing: {SUMS_NAME} (written last by a run: without it the folder is not a finished set, "
                f"or it was written before runs recorded their outputs' checksums)"]
    sums, problems = read_sums(folder / SUMS_NAME)
    for name, digest in sorted(sums.items()):
        p = folder / name
        if name not in present or not p.is_file() or p.is_symlink():
            problems.append(f"missing: {name} (listed in {SUMS_NAME})")
        elif sha256_of(p) != digest:
            problems.append(f"altered: {name} (its SHA-256 differs from {SUMS_NAME})")
    what = "series" if is_series(folder) else "run"
    for name in sorted(present - set(sums) - {SUMS_NAME}):
        problems.append(f"extra: {name} (not listed in {SUMS_NAME}: not an output of this {what})")
    for p in sorted(folder.rglob("*")):
        if p.is_dir() and not p.is_symlink() and not any(p.iterdir()):
            problems.append(f"extra: {p.relative_to(folder).as_posix()}/ (an empty folder, not an output of this {what})")
    problems += _series_years(folder, sums) if what == "series" else _against_provenance(folder, sums)
    return list(dict.fromkeys(problems))


def _series_years(folder: Path, sums: dict) -> list[str]:
    """Each year folder of a series: its own SHA256SUMS lists the files and hashes the series'
    SHA256SUMS lists below it, and its provenance.json's record agrees (no file is read twice)."""
    if SERIES_NAME not in sums:
        return [f"missing: {SERIES_NAME} (not listed in {SUMS_NAME})"]
    try:
        subs = [str(v) for v in json.loads((folder / SERIES_NAME).read_text(encoding="utf-8"))["year_folders"].values()]
    except (ValueError, KeyError, TypeError, AttributeError):
        return [f"malformed: {SERIES_NAME} has no year_folders record"]
    problems = []
    for sub in subs:
        listed = {n[len(sub) + 1:]: d for n, d in sums.items() if n.startswith(sub + "/")}
        if SUMS_NAME not in listed:
            problems.append(f"missing: {sub}/{SUMS_NAME} (a year's own checksums, not listed in {SUMS_NAME})")
            continue
        if not (folder / sub / SUMS_NAME).is_file():
            continue  # reported as missing above
        own, bad = read_sums(folder / sub / SUMS_NAME)
        problems += [_within(sub, line) for line in bad]
        for name in sorted((set(own) | set(listed)) - {SUMS_NAME}):
            if name not in own:
                problems.append(f"extra: {sub}/{name} (in {SUMS_NAME}, not in {sub}/{SUMS_NAME})")
            elif name not in listed:
                problems.append(f"missing: {sub}/{name} (in {sub}/{SUMS_NAME}, not in {SUMS_NAME})")
            elif own[name] != listed[name]:
                problems.append(f"altered: {sub}/{name} ({sub}/{SUMS_NAME} and {SUMS_NAME} record different SHA-256)")
        problems += [_within(sub, line) for line in _against_provenance(folder / sub, own)]
    return problems


def _within(sub: str, line: str) -> str:
    """A problem line of a year folder with the file named by its path in the series folder."""
    kind, _, rest = line.partition(": ")
    return f"{kind}: {sub}/{rest}"


def _against_provenance(folder: Path, sums: dict) -> list[str]:
    """provenance.json's record of the outputs agrees with SHA256SUMS."""
    if PROVENANCE_NAME not in sums or not (folder / PROVENANCE_NAME).is_file():
        return [] if PROVENANCE_NAME in sums else [f"missing: {PROVENANCE_NAME} (not listed in {SUMS_NAME})"]
    try:
        record = json.loads((folder / PROVENANCE_NAME).read_text(encoding="utf-8")).get("output_sha256")
    except (ValueError, AttributeError):
        return [f"malformed: {PROVENANCE_NAME} is not a JSON object"]
    if not isinstance(record, dict):
        return [f"malformed: {PROVENANCE_NAME} has no output_sha256 record"]
    problems = []
    for name in sorted((set(record) | set(sums)) - {PROVENANCE_NAME}):
        digest = (record.get(name) or {}).get("sha256") if isinstance(record.get(name), dict) else None
        if name not in sums:
            problems.append(f"missing: {name} (recorded in {PROVENANCE_NAME}, not in {SUMS_NAME})")
        elif digest is None:
            problems.append(f"extra: {name} (in {SUMS_NAME}, not recorded in {PROVENANCE_NAME})")
        elif digest != sums[name]:
            problems.append(f"altered: {name} ({PROVENANCE_NAME} and {SUMS_NAME} record different SHA-256)")
    return problems


def describe(folder: Path | str) -> str:
    """One line naming the set of a checked folder: run name, creation time, the SHA-256 of SHA256SUMS."""
    folder = Path(folder)
    if is_series(folder):
        try:
            doc = json.loads((folder / SERIES_NAME).read_text(encoding="utf-8"))
            name, years = doc.get("series", "?"), ", ".join(str(y) for y in doc.get("years", []))
        except (OSError, ValueError, AttributeError):
            name, years = "?", "?"
        return (f"series {name!r} (years {years}); SHA-256 of {SUMS_NAME} {sha256_of(folder / SUMS_NAME)} "
                f"(keep it elsewhere to detect deliberate rewriting)")
    try:
        prov = json.loads((folder / PROVENANCE_NAME).read_text(encoding="utf-8"))
        run = (prov.get("config") or {}).get("run", {}).get("name", "?")
        created = prov.get("created_utc", "?")
    except (OSError, ValueError, AttributeError):
        run, created = "?", "?"
    return (f"run {run!r} of {created}; SHA-256 of {SUMS_NAME} {sha256_of(folder / SUMS_NAME)} "
            f"(keep it elsewhere to detect deliberate rewriting)")
