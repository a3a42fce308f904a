"""The lock of an output folder: one run at a time writes into a folder.

The lock is a file beside the folder (``.<folder>.peatburn-lock``) holding the owner's pid, host
and start time, held with an exclusive ``flock`` for as long as the run lasts. The operating system
releases the ``flock`` when its process ends, however it ends: a lock file that no process holds
(the run was killed) is stale; it is taken over and reported. The lock file is removed when the
run ends.
"""

from __future__ import annotations

import contextlib
import datetime as dt
import fcntl
import json
import os
import socket
import warnings
from pathlib import Path

from ..errors import OutputLockedError


def lock_path(out_dir: Path | str) -> Path:
    out = Path(os.path.realpath(out_dir))  # a folder reached through a link has one lock
    return out.parent / f".{out.name}.peatburn-lock"


@contextlib.contextmanager
def output_lock(out_dir: Path | str):
    """Hold the lock of ``out_dir`` for the duration of the block; raise :class:`OutputLockedError`
    (one line: who holds it) if another process holds it."""
    path = lock_path(out_dir)
    path.parent.mkdir(parents=True, exist_ok=True)
    while True:
        fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o644)
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            owner = _read(fd)
            os.close(fd)
            raise OutputLockedError(
                f"output folder {Path(out_dir)} is being written by another run (pid {owner.get('pid', '?')} on "
                f"{owner.get('host', '?')} since {owner.get('started_utc', '?')}; lock {path}); wait for it to end "
                f"or choose another --out") from None
        try:
            same = os.fstat(fd).st_ino == os.stat(path).st_ino
        except FileNotFoundError:
            same = False
        if same:
            break
        os.close(fd)  # the previous owner removed the file between our open and our flock: again
    try:
        stale = _read(fd)
        if stale:
            warnings.warn(f"a stale lock of a run that ended without cleaning up was taken over ({path}: pid "
                          f"{stale.get('pid', '?')} on {stale.get('host', '?')} since {stale.get('started_utc', '?')})",
                          stacklevel=3)
        me = {"pid": os.getpid(), "host": socket.gethostname(),
              "started_utc": dt.datetime.now(dt.timezone.utc).replace(microsecond=0).isoformat()}
        os.ftruncate(fd, 0)
        os.pwrite(fd, (json.dumps(me) + "\n").encode(), 0)
        os.fsync(fd)
        yield path
    finally:
        with contextlib.suppress(FileNotFoundError):
            path.unlink()
        os.close(fd)


def _read(fd: int) -> dict:
    try:
        data = os.pread(fd, 4096, 0)
        return json.loads(data) if data.strip() else {}
    except (OSError, ValueError):
        return {"pid": "unreadable"}
