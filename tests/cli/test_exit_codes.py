"""Exit statuses of the command line (issue 25 item 4): bad input data 2, click's usage errors 64.

Reference for 64: ``EX_USAGE`` in BSD ``sysexits.h`` ("The command was used incorrectly, e.g., with the
wrong number of arguments, a bad flag, a bad syntax in a parameter"); for 130: the shells' 128 + signal
number for a process ended by SIGINT (2). The expected numbers below are those published values, not
read from peatburn.
"""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

import pytest
from click.testing import CliRunner

from peatburn.cli import exit_codes
from peatburn.cli.main import cli

EX_USAGE = 64  # BSD sysexits.h
SIGINT_STATUS = 128 + 2  # shell convention for a process ended by SIGINT


def _invoke(*args):
    return CliRunner().invoke(cli, [str(a) for a in args])


@pytest.mark.parametrize("args, says", [
    (["run", "cfg.toml", "--out", "o", "--bogus"], "No such option"),   # unknown option of a verb
    (["--bogus", "factors"], "No such option"),                          # unknown option of the group
    (["run", "--out", "o"], "Missing argument 'CONFIG'"),                         # missing argument
    (["run", "cfg.toml"], "Missing option '--out'"),                              # missing required option
    (["run", "cfg.toml", "--out", "o", "--workers", "0"], "Invalid value for '--workers'"),  # bad option value
    (["series", "--out", "o"], "Missing argument 'SERIES'"),                      # every verb, series too
    (["calibrate"], "Missing argument"),
    (["runn", "cfg.toml"], "No such command 'runn'"),                             # unknown verb
    (["check"], "give a CONFIG to check, or --outputs DIR"),                      # a UsageError raised by a verb
])
def test_usage_errors_exit_64_with_clicks_usage_message(args, says):
    res = _invoke(*args)
    assert res.exit_code == EX_USAGE, res.output
    assert says in res.output and "Usage: " in res.output and "Traceback" not in res.output


def test_usage_error_exits_64_in_a_real_process(tmp_path):
    """Not only under CliRunner: click's standalone main exits with the status the group set."""
    code = "from peatburn.cli.main import cli; cli(prog_name='peatburn')"
    proc = subprocess.run([sys.executable, "-c", code, "run", "x.toml", "--bogus"], capture_output=True, text=True,
                          cwd=tmp_path, timeout=120)
    assert proc.returncode == EX_USAGE, proc.stderr
    assert "No such option" in proc.stderr and proc.stdout == ""


def test_help_and_version_exit_0():
    assert _invoke("--help").exit_code == 0
    assert _invoke("run", "--help").exit_code == 0
    assert _invoke("--version").exit_code == 0


def test_data_error_exits_2_with_one_line(tmp_path):
    res = _invoke("run", tmp_path / "missing.toml", "--out", tmp_path / "o")
    assert res.exit_code == 2
    lines = res.output.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("peatburn: error: ") and "missing.toml" in lines[0]
    assert "Usage:" not in res.output


def test_bad_config_content_exits_2(tmp_path):
    cfg = tmp_path / "c.toml"
    cfg.write_text("[run]\nname = 'x'\nyear = 2031\nbogus_key = 1\n")
    res = _invoke("check", cfg)
    assert res.exit_code == 2 and len(res.output.strip().splitlines()) == 1, res.output


@pytest.mark.parametrize("content", [None, "not json {", "[1, 2]"])
def test_missing_or_unreadable_against_exits_2(scene, tmp_path, content):
    """A file named on the command line that is missing or unreadable is bad input (2), as a missing
    CONFIG is, not a usage error."""
    against = tmp_path / "provenance.json"
    if content is not None:
        against.write_text(content)
    res = _invoke("check", scene.config, "--against", against)
    assert res.exit_code == 2, res.output
    lines = res.output.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("peatburn: error: --against: ") and "provenance.json" in lines[0]
    assert "Traceback" not in res.output and "Usage:" not in res.output


def test_unexpected_error_exits_3_with_one_line(scene, tmp_path, monkeypatch):
    import peatburn.engine.runner

    def boom(*a, **k):
        raise ZeroDivisionError("a bug")

    monkeypatch.setattr(peatburn.engine.runner, "run", boom)
    res = _invoke("run", scene.config, "--out", tmp_path / "o")
    assert res.exit_code == 3
    assert len(res.output.strip().splitlines()) == 1 and "unexpected error: ZeroDivisionError: a bug" in res.output


def test_interrupt_exits_130(scene, tmp_path, monkeypatch):
    import peatburn.engine.runner

    def ctrl_c(*a, **k):
        raise KeyboardInterrupt

    monkeypatch.setattr(peatburn.engine.runner, "run", ctrl_c)
    res = _invoke("run", scene.config, "--out", tmp_path / "o")
    assert res.exit_code == SIGINT_STATUS and "peatburn: interrupted" in res.output
    assert not (tmp_path / "o").exists()


def test_the_documented_table_is_the_code():
    """docs/cli.md lists every status the code defines, with the same number."""
    doc = (Path(__file__).parents[2] / "docs" / "cli.md").read_text()
    table = dict(re.findall(r"^\| (\d+) \| `(\w+)` \|", doc, flags=re.M))
    code = {str(v): k for k, v in vars(exit_codes).items() if k.isupper() and isinstance(v, int)}
    assert table == code
    assert exit_codes.USAGE == EX_USAGE and exit_codes.INTERRUPTED == SIGINT_STATUS
