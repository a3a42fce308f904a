"""Exit statuses of the ``peatburn`` command (documented in docs/cli.md, "Exit status").

Bad input data keeps status 2 (the design fixes it, and scripts test for it); click's own usage errors
(unknown option, missing argument, bad option value) get 64, ``EX_USAGE`` of BSD ``sysexits.h``, so a
script can tell a mistyped command line from a bad input file.
"""

from __future__ import annotations

__all__ = ["OK", "DIFFERENCES", "BAD_INPUT", "INTERNAL", "USAGE", "INTERRUPTED"]

#: Success.
OK = 0
#: A verification found differences: ``check --outputs`` found a missing, altered or extra file.
DIFFERENCES = 1
#: Bad input data, configuration or environment: a :class:`peatburn.errors.PeatburnError` (one line).
BAD_INPUT = 2
#: An error peatburn did not foresee (a bug): one line, the traceback with ``--debug``.
INTERNAL = 3
#: The command line is wrong (click's usage message): ``EX_USAGE`` of BSD ``sysexits.h``.
USAGE = 64  # EX_USAGE, BSD sysexits.h
#: Interrupted (Ctrl-C, SIGINT): 128 + 2, the shells' convention.
INTERRUPTED = 130
