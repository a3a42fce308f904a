"""A run's outputs as one set: written into a hidden staging folder, then swapped in whole.

A result is a set of files that belong together (tables, rasters, report, provenance). So that an
output folder holds the whole old set or the whole new set at every moment, a run writes every
output into a staging folder beside the output folder, on the same file system
(``.<folder>.peatburn-stage-<pid>``), writes the checksums last (``SHA256SUMS``,
:mod:`peatburn.outputs.checksums`), and only then swaps the staging folder in:

* a new output folder (or one that does not exist yet): one ``rename`` of the staging folder;
* an existing folder (empty, or an older set replaced with ``--overwrite``): Linux's
  ``renameat2(RENAME_EXCHANGE)`` exchanges the two folders in one step; the staging name then holds
  the old set, which is deleted. Where the file system or kernel cannot exchange, two renames:
  the old folder to ``.<folder>.peatburn-old-<pid>``, the staging folder onto the output name, and
  the old one deleted.

Recovery (:func:`recover`, at the start of the next run into the same folder, under its lock, with
a warning for each): a ``.peatburn-old-<pid>`` folder while the output folder is absent (a run
killed between the two renames) is renamed back: the old set is restored whole, and the killed
run's staging folder is deleted. A ``.peatburn-old-<pid>`` folder beside an output folder (killed
while deleting the old set) and any staging folder (a killed run's) are deleted, as are
temporaries with peatburn's marker inside the output folder. Only folders and files named by
peatburn's patterns are touched; the lock (:mod:`peatburn.io.lock`) guarantees that no live run
owns them.

Files in a replaced folder that are not outputs of a peatburn run (a user's notes) are kept: they
are hard-linked into the staging folder before the swap (no copy, nothing lost if the run is
killed), with a warning; ``peatburn check --outputs`` lists them as extra.

An output folder that is itself a mount point cannot be renamed (nor is the process's working
folder, or one above it, swapped away from under the user's shell): there the staging folder is
made inside it and the files are renamed onto their names one by one, checksums last (a warning
says so); a run killed during that swap leaves a folder without ``SHA256SUMS``, which
``check --outputs`` reports as not a complete set.
"""

from __future__ import annotations

import contextlib
import ctypes
import errno
import json
import os
import re
import shutil
import stat
import warnings
from pathlib import Path

from .writers import is_own_temporary

STAGE = "peatburn-stage"
OLD = "peatburn-old"
#: Names a peatburn run may write whatever its options: never kept as a user's file on --overwrite.
ALWAYS_OURS = frozenset({"SHA256SUMS", "provenance.json", "report.pdf"})


def stage_path(out: Path, pid: int | None = None) -> Path:
    """The staging folder of this process for ``out``: ``.<name>.peatburn-stage-<pid>`` beside it."""
    return out.parent / f".{out.name}.{STAGE}-{os.getpid() if pid is None else pid}"


def _siblings(out: Path, kind: str) -> list[Path]:
    """Folders (not links) beside ``out`` named ``.<name>.<kind>-<digits>``: peatburn's own."""
    pattern = re.compile(r"^\." + re.escape(out.name) + r"\." + kind + r"-\d+$")
    if not out.parent.is_dir():
        return []
    return sorted(p for p in out.parent.iterdir()
                  if pattern.match(p.name) and p.is_dir() and not p.is_symlink())


def _warn(message: str) -> None:
    warnings.warn(message, stacklevel=4)


def recover(out: Path) -> None:
    """Undo or clear what a killed run left around ``out`` (call with the folder's lock held)."""
    out = Path(out)
    for old in _siblings(out, OLD):
        if not os.path.lexists(out) or (out.is_dir() and not out.is_symlink() and not any(out.iterdir())):
            with contextlib.suppress(FileNotFoundError):
                out.rmdir()
            os.rename(old, out)
            _warn(f"a run was killed while swapping its outputs into {out}: the previous outputs were restored "
                  f"whole from {old.name}")
        else:
            shutil.rmtree(old)
            _warn(f"removed {old.name}, the previous outputs of {out} that a killed run had already replaced")
    for st in _siblings(out, STAGE):
        shutil.rmtree(st)
        _warn(f"removed {st.name}, left by a run into {out} that was killed (the folder keeps the set it holds)")
    remove_temporaries(out)


def remove_temporaries(folder: Path) -> None:
    """Remove, with a warning, what a killed run left inside ``folder``: files with peatburn's
    temporary marker (:func:`peatburn.io.writers.is_own_temporary`) and a mount point's staging
    folder (``.peatburn-stage-<pid>``); nothing else, whatever its name."""
    folder = Path(folder)
    if not folder.is_dir():
        return
    debris = [p for p in folder.iterdir() if is_own_temporary(p)]
    debris += [p for p in folder.iterdir() if re.fullmatch(r"\." + STAGE + r"-\d+", p.name)
               and p.is_dir() and not p.is_symlink()]
    for p in debris:
        shutil.rmtree(p) if p.is_dir() else p.unlink()
    if debris:
        names = sorted(p.name for p in debris)
        _warn(f"removed {len(debris)} temporary file(s) of a killed run from {folder} "
              f"({', '.join(names[:3])}{', ...' if len(names) > 3 else ''})")


def _unmovable(out: Path) -> str | None:
    """Why ``out`` cannot be swapped as a folder (a mount point; this process's working folder or
    one above it, which a swap would leave the user's shell in), or None."""
    if not out.is_dir():
        return None
    if os.path.ismount(out) or out.stat().st_dev != out.parent.stat().st_dev:
        return "is a mount point"
    cwd = Path(os.getcwd())
    if cwd == out or out in cwd.parents:
        return "holds the current working folder"
    return None


@contextlib.contextmanager
def staged(out: Path | str, overwrite: bool):
    """Yield the staging folder of a run into ``out``; swap it in when the block succeeds, delete it
    when the block fails (the folder then keeps what it held). Call with the folder's lock held."""
    from ..errors import OutputExistsError

    given, out = Path(out), Path(os.path.realpath(out))  # a link to a folder: swapped where it points
    recover(out)
    if out.exists() and not out.is_dir():
        raise OutputExistsError(f"output folder {given} exists and is a file; choose another --out")
    if out.is_dir() and any(out.iterdir()) and not overwrite:
        raise OutputExistsError(f"output folder {given} exists and is not empty; choose another --out "
                                f"or pass --overwrite")
    inside = _unmovable(out)
    stage = out / f".{STAGE}-{os.getpid()}" if inside else stage_path(out)
    stage.mkdir(parents=True)
    if out.is_dir() and not inside:
        os.chmod(stage, stat.S_IMODE(out.stat().st_mode))  # the user's folder keeps its permissions
    try:
        yield stage
        if inside:
            _swap_files(stage, out, inside)
        else:
            _keep_other_files(out, stage)
            swap_in(stage, out)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            shutil.rmtree(stage)
        raise


def _declared(folder: Path) -> set[str]:
    """Names an earlier peatburn set in ``folder`` declares as its own (its SHA256SUMS, else its
    provenance.json's list of outputs)."""
    from ..outputs.checksums import SUMS_NAME, read_sums

    names = set(ALWAYS_OURS)
    with contextlib.suppress(OSError, ValueError):
        names |= set(read_sums(folder / SUMS_NAME)[0])
    with contextlib.suppress(OSError, ValueError, AttributeError, TypeError):
        names |= set(json.loads((folder / "provenance.json").read_text(encoding="utf-8")).get("outputs") or [])
    return {n.split("/", 1)[0] for n in names}  # an output in a subfolder: the subfolder is the set's


def _keep_other_files(out: Path, stage: Path) -> None:
    """Hard-link into ``stage`` what ``out`` holds that is neither in the new set nor the old set's."""
    if not out.is_dir():
        return
    ours = _declared(out) | {p.name for p in stage.iterdir()}
    kept = sorted(p.name for p in out.iterdir() if p.name not in ours)
    for name in kept:
        src, dst = out / name, stage / name
        if src.is_symlink():
            os.symlink(os.readlink(src), dst)
        elif src.is_dir():
            shutil.copytree(src, dst, symlinks=True, copy_function=os.link)
        else:
            os.link(src, dst)
    if kept:
        _warn(f"kept {len(kept)} file(s) in {out} that are not outputs of a peatburn run "
              f"({', '.join(kept[:3])}{', ...' if len(kept) > 3 else ''}); `peatburn check --outputs` lists them "
              f"as extra")


_RENAME_EXCHANGE = 2  # linux/fs.h


def _exchange(a: Path, b: Path) -> None:
    """Swap two paths in one step (Linux ``renameat2(RENAME_EXCHANGE)``); OSError where unsupported."""
    try:
        fn = ctypes.CDLL(None, use_errno=True).renameat2
    except AttributeError:
        raise OSError(errno.ENOSYS, "renameat2 is not available") from None
    at_fdcwd = -100
    if fn(at_fdcwd, os.fsencode(a), at_fdcwd, os.fsencode(b), _RENAME_EXCHANGE) != 0:
        e = ctypes.get_errno()
        raise OSError(e, os.strerror(e), str(a))


def swap_in(stage: Path, out: Path) -> None:
    """Put the complete set in ``stage`` under the name ``out`` (see the module's description)."""
    if not os.path.lexists(out):
        os.rename(stage, out)
        return
    try:
        _exchange(stage, out)
    except OSError as exc:
        if exc.errno not in (errno.EINVAL, errno.ENOSYS, errno.ENOTSUP, errno.EOPNOTSUPP, errno.EPERM):
            raise
        _swap_by_renames(stage, out)
        return
    _remove_old(stage)  # the staging name now holds the old set


def _swap_by_renames(stage: Path, out: Path) -> None:
    old = out.parent / f".{out.name}.{OLD}-{os.getpid()}"
    os.rename(out, old)
    try:
        os.rename(stage, out)
    except BaseException:
        os.rename(old, out)  # the old set back under its name
        raise
    _remove_old(old)


def _remove_old(folder: Path) -> None:
    """Delete a replaced set; the new one is in place, so a failure is only a warning."""
    try:
        shutil.rmtree(folder)
    except OSError as exc:
        _warn(f"the new outputs are in place, but the replaced ones could not be deleted ({folder}: {exc}); "
              f"the next run into the folder retries")


def _swap_files(stage: Path, out: Path, why: str) -> None:
    """Fallback for a folder that cannot be renamed: the old checksums go first, then each file is
    renamed onto its name, the new checksums last; the old set's other outputs are removed."""
    from ..outputs.checksums import SUMS_NAME

    _warn(f"{out} {why}, so its outputs are replaced file by file, not swapped as one set: a run killed "
          f"meanwhile leaves a folder that `peatburn check --outputs` reports as incomplete")
    new = sorted(p.name for p in stage.iterdir())
    stale = (_declared(out) & {p.name for p in out.iterdir()}) - set(new)
    with contextlib.suppress(FileNotFoundError):
        (out / SUMS_NAME).unlink()
    for name in stale:
        with contextlib.suppress(IsADirectoryError, PermissionError, FileNotFoundError):
            (out / name).unlink()
    for name in sorted(new, key=lambda n: n == SUMS_NAME):
        if (out / name).is_dir() and not (out / name).is_symlink():
            shutil.rmtree(out / name)  # a subfolder of the old set
        os.replace(stage / name, out / name)
    stage.rmdir()
