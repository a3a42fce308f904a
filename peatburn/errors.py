"""The exception hierarchy of peatburn.

Every error the tool raises on purpose derives from :class:`PeatburnError` and also from the
built-in exception a Python user would expect (``ValueError``, ``FileNotFoundError``...), so that
library users can catch either. The CLI turns each into one line naming the file, key or value,
what is wrong and the fix, and exits with status 2.
"""

from __future__ import annotations


class PeatburnError(Exception):
    """Root of every error peatburn raises on purpose."""

    exit_code = 2


class ConfigError(PeatburnError, ValueError):
    """The run configuration is malformed: syntax, unknown key, wrong type, missing value."""


class UnitError(PeatburnError, ValueError):
    """A quantity has the wrong dimension or cannot be parsed."""


class PhysicalRangeError(PeatburnError, ValueError):
    """A value is outside the physically plausible range for its quantity."""


class InputFileError(PeatburnError, OSError):
    """An input file is missing, unreadable or corrupt."""


class MissingInputError(InputFileError, FileNotFoundError):
    """An input file named in the configuration does not exist."""


class CRSError(PeatburnError, ValueError):
    """A coordinate reference system is missing or cannot be understood."""


class GridError(PeatburnError, ValueError):
    """Inputs do not overlap the run grid, or hold no valid data on it."""


class ZoneError(PeatburnError, ValueError):
    """A zone layer is unusable: missing id field, duplicate ids, no valid geometry."""


class FactorSetError(PeatburnError, ValueError):
    """An emission-factor or GWP set is unknown or malformed."""


class OutputExistsError(PeatburnError, FileExistsError):
    """The output location exists and ``--overwrite`` was not given."""


class ExecutorError(PeatburnError, RuntimeError):
    """Blocks cannot be handed out: no dask scheduler at the address, or dask.distributed missing."""


class ProvenanceMismatch(PeatburnError, ValueError):
    """Inputs no longer match a provenance record."""


class OutputLockedError(PeatburnError, BlockingIOError):
    """Another run is writing into the same output folder."""


class DiskFullError(PeatburnError, OSError):
    """The file system of the output folder filled up during a run."""
