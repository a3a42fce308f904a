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
    for name in sorted(present - set(sums) - {SUMS_NAME}):
        problems.append(f"extra: {name} (not listed in {SUMS_NAME}: not an output of this run)")
    for p in sorted(folder.rglob("*")):
        if p.is_dir() and not p.is_symlink() and not any(p.iterdir()):
            problems.append(f"extra: {p.relative_to(folder).as_posix()}/ (an empty folder, not an output of this run)")
    problems += _against_provenance(folder, sums)
    return problems


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
    try:
        prov = json.loads((folder / PROVENANCE_NAME).read_text(encoding="utf-8"))
        run = (prov.get("config") or {}).get("run", {}).get("name", "?")
        created = prov.get("created_utc", "?")
    except (OSError, ValueError, AttributeError):
        run, created = "?", "?"
    return (f"run {run!r} of {created}; SHA-256 of {SUMS_NAME} {sha256_of(folder / SUMS_NAME)} "
            f"(keep it elsewhere to detect deliberate rewriting)")
