"""Logging: the library logs through ``logging.getLogger(__name__)``; the command group's -v / -q set
the level as rasterio's ``rio`` does (reference: the levels of the standard library's logging module)."""

import logging

import pytest
from click.testing import CliRunner

from peatburn.cli.main import cli
from peatburn.cli.options import configure_logging


@pytest.mark.parametrize("verbosity, level", [(-2, logging.ERROR), (-1, logging.ERROR), (0, logging.WARNING),
                                              (1, logging.INFO), (2, logging.DEBUG), (5, logging.DEBUG)])
def test_verbosity_sets_the_level(verbosity, level):
    configure_logging(verbosity)
    assert logging.getLogger("peatburn").level == level
    configure_logging(0)


def test_the_library_leaves_handling_to_the_application():
    import peatburn  # noqa: F401

    assert any(isinstance(h, logging.NullHandler) for h in logging.getLogger("peatburn").handlers)


def test_verbose_run_logs_steps_and_notes_on_stderr_only(scene, tmp_path):
    runner = CliRunner()
    quiet = runner.invoke(cli, ["run", str(scene.config), "--out", str(tmp_path / "a"), "--quiet"])
    assert quiet.exit_code == 0, quiet.output
    assert "INFO" not in quiet.stderr
    loud = runner.invoke(cli, ["-v", "run", str(scene.config), "--out", str(tmp_path / "b"), "--quiet"])
    assert loud.exit_code == 0, loud.output
    assert "INFO peatburn.engine.runner: block pass:" in loud.stderr
    assert "INFO peatburn.engine.runner: co-registration: shift" in loud.stderr
    assert "INFO" not in loud.stdout  # the summary on stdout is unchanged
    configure_logging(0)
