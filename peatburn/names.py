"""Names that come from users (run, zone layers, zone ids) and the labels reserved for the tool.

Result rows carry a layer name and a zone id. Two kinds of row are the tool's own: the run
total (layer :data:`TOTAL_LAYER`, zone :data:`TOTAL_ZONE`) and, in each layer, the remainder
outside every zone (zone :data:`OUTSIDE`). No user name may take those labels, so that the
rows stay apart in zones.csv, the report, the tables and the API: a zone layer named like the
total (or like the pipeline's internal scar layer) and a zone id equal to :data:`OUTSIDE` are
refused with a message that says what to rename (compared without case and surrounding spaces).

Names are also shown on terminals and in the report: :func:`printable` removes the control
characters (NUL, ESC and the rest of Unicode category Cc; line breaks and tabs become spaces)
and the bidirectional overrides that could hide text (common practice: terminal escape
sequences and reordering controls are never part of a name).
"""

from __future__ import annotations

import re
import unicodedata

__all__ = ["TOTAL_LAYER", "TOTAL_ZONE", "OUTSIDE", "SCAR_LAYER", "RESERVED_LAYERS", "printable",
           "check_layer_name", "check_zone_id", "file_stems"]

#: Layer and zone of the run-total row.
TOTAL_LAYER, TOTAL_ZONE = "total", "all"
#: Zone of each layer's remainder row (what lies outside every zone of the layer).
OUTSIDE = "(outside every zone)"
#: The engine's internal per-scar layer (peatburn.engine.sums.SCAR_LAYER; a test checks they agree).
SCAR_LAYER = "__scars__"
#: Layer names no user layer may take.
RESERVED_LAYERS = (TOTAL_LAYER, SCAR_LAYER)

# Bidirectional embedding, override and isolate controls (Unicode category Cf, U+202A-U+202E,
# U+2066-U+2069), which reorder the text shown around them.
_BIDI = re.compile("[\u202a-\u202e\u2066-\u2069]")


def printable(text) -> str:
    """``text`` as a string without control characters: tab, CR and LF become a space, the other
    Cc characters (NUL, ESC, DEL, C1) and bidirectional overrides are removed."""
    s = str(text)
    if s.isprintable():
        return s
    s = re.sub(r"[\t\r\n]", " ", s)
    s = "".join(ch for ch in s if unicodedata.category(ch) != "Cc")
    return _BIDI.sub("", s)


def _folded(name: str) -> str:
    return name.strip().casefold()


def check_layer_name(name: str, where: str) -> None:
    """Refuse a zone layer name that is reserved for the tool's own rows (ValueError subclass)."""
    from .errors import ConfigError

    if _folded(name) in RESERVED_LAYERS:
        raise ConfigError(f"{where}: the zone layer name {name!r} is reserved for the run total in the results; "
                          f"give the layer another `name`")


def check_zone_id(zone_id: str, what: str, path: str, field: str) -> None:
    """Refuse a zone id that is reserved for the remainder rows (ValueError subclass)."""
    from .errors import ZoneError

    if _folded(zone_id) == _folded(OUTSIDE):
        raise ZoneError(f"{what}: {path}: the id {zone_id!r} in {field!r} is reserved for the area outside every "
                        f"zone in the results; rename that zone")


#: Longest file stem made from a name (common practice: well under the 255-byte limit of a file name
#: on common file systems, leaving room for the suffix that keeps stems apart).
MAX_STEM = 80
#: Device names that Windows refuses as file names, with any extension (common practice).
_DEVICES = {"con", "prn", "aux", "nul", *(f"com{i}" for i in range(1, 10)), *(f"lpt{i}" for i in range(1, 10))}
_UNSAFE = re.compile(r"[^A-Za-z0-9._-]+")


def file_stems(names, *, reserved=("index",), key=None) -> list[str]:
    """Safe, distinct file stems (no suffix) for user names, in order: one per name.

    A stem keeps the ASCII letters, digits, ``.``, ``_`` and ``-`` of the name (after Unicode
    decomposition with the accents dropped, and :func:`printable`); every other run of characters
    becomes one ``_``; leading and trailing dots, underscores and dashes are dropped (no hidden
    files, no ``..``), and the stem is cut to :data:`MAX_STEM` characters; a Windows device name gets
    ``zone-`` in front. So a stem never holds a path separator, never climbs out of its folder.

    Stems that would clash (the same without case, for case-insensitive file systems: ``"Bloc Nord"``
    and ``"Bloc_Nord"``, ``"A"`` and ``"a"``), an empty stem and a ``reserved`` one all get ``-`` and
    the first 10 hex digits of the SHA-256 of ``key(i)`` (default: the name) appended, whatever
    their order; a digit is added in the astronomically unlikely case of a further clash.
    """
    import hashlib
    from collections import Counter

    names = [str(n) for n in names]
    clean = []
    for name in names:
        plain = "".join(c for c in unicodedata.normalize("NFKD", printable(name)) if unicodedata.category(c) != "Mn")
        c = _UNSAFE.sub("_", plain).strip("._-")[:MAX_STEM].strip("._-")
        clean.append(f"zone-{c}" if c.casefold().split(".")[0] in _DEVICES else c)
    counts = Counter(c.casefold() for c in clean)
    banned = {r.casefold() for r in reserved}
    taken: set[str] = set()
    out = []
    for i, (name, c) in enumerate(zip(names, clean)):
        stem = c
        if not c or counts[c.casefold()] > 1 or c.casefold() in banned:
            ident = key(i) if key is not None else name
            digest = hashlib.sha256(str(ident).encode("utf-8", "surrogatepass")).hexdigest()[:10]
            stem = f"{c or 'zone'}-{digest}"
        base, k = stem, 2
        while stem.casefold() in taken or stem.casefold() in banned:
            stem = f"{base}-{k}"
            k += 1
        taken.add(stem.casefold())
        out.append(stem)
    return out
