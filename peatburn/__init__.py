"""peatburn: carbon and greenhouse gases released by smouldering tropical peat fires.

Public API::

    import peatburn
    cfg = peatburn.load_config("config.toml")
    report = peatburn.check(cfg)          # what a run would do (report.lines), no pixel read
    result = peatburn.run(cfg)            # computed in memory, nothing written
    result.frames.zones                   # pandas DataFrame, the columns of zones.csv
    result.frames.total["carbon_smouldering_t"]
    result.write("out/")                  # the files of `peatburn run`, when asked
    peatburn.check_outputs("out/")        # [] for one run's (or series') complete, unaltered set
    peatburn.check_series("SERIES.toml")  # every year checked, one method across the years, nothing run
"""

from __future__ import annotations

__version__ = "0.1.0"  # the one place the version is set (pyproject.toml reads it)

import logging  # noqa: E402
import os  # noqa: E402
from typing import TYPE_CHECKING  # noqa: E402

from .config import RunConfig, load_config  # noqa: E402
from .errors import PeatburnError  # noqa: E402

if TYPE_CHECKING:
    from .engine.check import CheckReport
    from .engine.runner import RunResult

# a library logs and leaves the handling to the application (the CLI sets it with -v / -q)
logging.getLogger(__name__).addHandler(logging.NullHandler())


def run(cfg: RunConfig | str | os.PathLike, out_dir: str | os.PathLike | None = None, **kwargs) -> RunResult:
    """Run a configuration (a :class:`RunConfig` or a path to a TOML file); see :func:`peatburn.engine.runner.run`.

    Without ``out_dir`` nothing is written: the result holds the tables (``result.frames``) and
    ``result.write(out_dir)`` writes the files when asked.
    """
    from .engine.runner import run as _run

    if not isinstance(cfg, RunConfig):
        cfg = load_config(cfg)
    return _run(cfg, out_dir, **kwargs)


def run_series(series, out_dir, **kwargs):
    """Run a series (a :class:`peatburn.series_config.SeriesConfig` or a path to SERIES.toml); see
    :func:`peatburn.engine.series.run_series`."""
    from .engine.series import run_series as _run_series
    from .series_config import SeriesConfig, load_series

    if not isinstance(series, SeriesConfig):
        series = load_series(series)
    return _run_series(series, out_dir, **kwargs)


def check(cfg: RunConfig | str | os.PathLike, against: str | os.PathLike | None = None, **kwargs) -> CheckReport:
    """Validate a configuration and its inputs; see :func:`peatburn.engine.check.check`."""
    from .engine.check import check as _check

    return _check(cfg, against, **kwargs)


def check_series(series):
    """Validate a series file and every year's configuration and inputs before anything runs; see
    :func:`peatburn.engine.check.check_series`."""
    from .engine.check import check_series as _check_series

    return _check_series(series)


def check_outputs(folder: str | os.PathLike) -> list[str]:
    """Problems that keep ``folder`` from being one run's complete, unaltered set, one line each (an
    empty list when it is one); see :func:`peatburn.outputs.checksums.check_outputs`."""
    from .outputs.checksums import check_outputs as _check

    return _check(folder)


__all__ = ["__version__", "load_config", "run", "run_series", "check", "check_series", "check_outputs", "RunConfig", "PeatburnError"]
