"""A tiny progress bar over blocks for long runs (no dependency).

:func:`progress_bar` returns a callable ``progress(done, total)`` for :func:`peatburn.engine.runner.run`.
It draws on stderr with a carriage return, only when stderr is a terminal and not ``quiet``, and
only once the run has lasted ``delay`` seconds (short runs print nothing). Otherwise it does nothing.
"""

from __future__ import annotations

import sys
import time

__all__ = ["Progress", "progress_bar"]


class Progress:
    """Draw ``[#####.....]  done/total blocks  elapsed  ETA`` on one terminal line.

    Parameters
    ----------
    stream : text stream, optional
        Where to draw (default: ``sys.stderr`` at call time).
    enabled : bool, optional
        Force on or off; default: on when ``stream`` is a terminal.
    delay : float
        Seconds after the first call before anything is drawn [s].
    interval : float
        Minimum seconds between redraws [s]; the last block always redraws.
    width : int
        Characters of the bar.
    label : str
    """

    def __init__(self, stream=None, *, enabled: bool | None = None, delay: float = 1.0, interval: float = 0.2,
                 width: int = 30, label: str = "blocks", clock=time.monotonic):
        self.stream = stream
        self.enabled = enabled
        self.delay = delay
        self.interval = interval
        self.width = width
        self.label = label
        self.clock = clock
        self._start = None
        self._last = None
        self._drawn = False
        self._done0 = 0

    def _out(self):
        return self.stream if self.stream is not None else sys.stderr

    def _on(self) -> bool:
        if self.enabled is not None:
            return self.enabled
        isatty = getattr(self._out(), "isatty", None)
        try:
            return bool(isatty and isatty())
        except (ValueError, OSError):  # closed stream
            return False

    def __call__(self, done: int, total: int) -> None:
        now = self.clock()
        if self._start is None:
            self._start, self._done0 = now, done
            self.enabled = self._on() if self.enabled is None else self.enabled
        if not self.enabled or total <= 0:
            return
        final = done >= total
        elapsed = now - self._start
        if elapsed < self.delay and not (final and self._drawn):
            return
        if not final and self._last is not None and now - self._last < self.interval:
            return
        self._last = now
        self._drawn = True
        self._out().write("\r" + self.line(done, total, elapsed) + ("\n" if final else ""))
        self._out().flush()

    def line(self, done: int, total: int, elapsed: float) -> str:
        """The text of the bar (no carriage return)."""
        frac = min(max(done / total, 0.0), 1.0)
        filled = int(round(frac * self.width))
        rate_done = done - self._done0  # blocks finished since the first call, over ``elapsed``
        eta = elapsed * (total - done) / rate_done if rate_done > 0 and done < total else float("nan")
        tail = f"ETA {_hms(eta)}" if done < total else "done"
        return (f"[{'#' * filled}{'.' * (self.width - filled)}] {done}/{total} {self.label} "
                f"{frac:4.0%}  {_hms(elapsed)}  {tail}")


def _hms(seconds: float) -> str:
    if seconds != seconds:  # NaN: not known yet
        return "--:--"
    s = int(round(seconds))
    h, rem = divmod(s, 3600)
    m, s = divmod(rem, 60)
    return f"{h}:{m:02d}:{s:02d}" if h else f"{m:02d}:{s:02d}"


def progress_bar(quiet: bool = False, stream=None, **kwargs):
    """A ``progress(done, total)`` callable: a :class:`Progress`, or a no-op when ``quiet``."""
    if quiet:
        return _noop
    return Progress(stream, **kwargs)


def _noop(done: int, total: int) -> None:
    return None
