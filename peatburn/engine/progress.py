"""The progress bar over blocks of long runs: tqdm's, behind the ``progress(done, total)`` callable.

:func:`progress_bar` returns a callable ``progress(done, total)`` for :func:`peatburn.engine.runner.run`.
The bar is tqdm's (elapsed time, rate, ETA, redraws throttled); it is drawn on stderr only when stderr is
a terminal (``disable=None``), not with ``quiet`` or when the ``peatburn`` logger is set to errors only
(the group's ``-q``), and only once the run has lasted ``delay`` seconds (tqdm's ``delay=``: short runs
print nothing). A new run through the same callable (``peatburn series``: one run per year) starts a new bar.

tqdm replaced a hand-made bar of about 100 lines (issue 25 item 6): it has every behaviour that bar had,
the start delay included, which click's ``progressbar`` lacks (click also echoes its label once on a
non-terminal stream).
"""

from __future__ import annotations

import logging
import os
import sys

from tqdm import tqdm

__all__ = ["BlockProgress", "progress_bar"]


class _Bar(tqdm):
    """tqdm without its monitor thread (nothing of ours runs beside the block loop)."""

    monitor_interval = 0


class BlockProgress:
    """``progress(done, total)`` drawing one tqdm bar per run: ``blocks:  50%|####    | 5/10 [00:04<00:05, ...]``.

    Parameters
    ----------
    stream : text stream, optional
        Where to draw (default: ``sys.stderr`` at call time).
    delay : float
        Seconds after a run's first call before anything is drawn [s].
    interval : float
        Minimum seconds between redraws [s]; the last block always redraws.
    """

    def __init__(self, stream=None, *, delay: float = 1.0, interval: float = 0.2):
        self.stream, self.delay, self.interval = stream, delay, interval
        self._bar = None

    def __call__(self, done: int, total: int) -> None:
        bar = self._bar
        if bar is None or done < bar.n or total != bar.total:  # the first call of a run
            if bar is not None:
                bar.close()
            stream = self.stream or sys.stderr
            bar = self._bar = _Bar(total=total, initial=done, file=stream, disable=None, delay=self.delay,
                                   mininterval=self.interval, desc="blocks", unit="block", ncols=_columns(stream))
        bar.update(done - bar.n)
        if done >= total:
            bar.close()


def _columns(stream) -> int:
    """The terminal's width, or 80 where it tells none: with a width of 0 (a terminal of unset size, as
    under ``script`` or a CI runner's pty) tqdm's dynamic width trims the whole line away."""
    try:
        return os.get_terminal_size(stream.fileno()).columns or 80
    except (AttributeError, OSError, ValueError):
        return 80


def progress_bar(quiet: bool = False, stream=None, **kwargs):
    """A ``progress(done, total)`` callable: a :class:`BlockProgress`, or a no-op when ``quiet`` or when the
    ``peatburn`` logger logs errors only (``peatburn -q``)."""
    if quiet or not logging.getLogger("peatburn").isEnabledFor(logging.WARNING):
        return _noop
    return BlockProgress(stream, **kwargs)


def _noop(done: int, total: int) -> None:
    return None
