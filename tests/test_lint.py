"""The code base passes its linter (ruff, configured in pyproject.toml: pyflakes and syntax errors)."""

import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def test_ruff_finds_nothing():
    pytest.importorskip("ruff")  # installed by the test extra (pyproject.toml)
    res = subprocess.run([sys.executable, "-m", "ruff", "check", "--no-cache", "peatburn", "tests", "benchmarks"],
                         cwd=ROOT, capture_output=True, text=True)
    assert res.returncode == 0, res.stdout + res.stderr
