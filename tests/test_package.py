"""Packaging habits: one source of the version, a typed package (PEP 561)."""

import tomllib
from importlib import metadata, resources
from pathlib import Path

import peatburn

ROOT = Path(__file__).resolve().parents[1]


def test_the_version_is_set_once():
    project = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
    assert "version" not in project["project"] and "version" in project["project"]["dynamic"]
    assert project["tool"]["setuptools"]["dynamic"]["version"] == {"attr": "peatburn.__version__"}
    assert metadata.version("peatburn") == peatburn.__version__  # what the installed metadata says


def test_typed_marker_is_shipped():
    assert resources.files("peatburn").joinpath("py.typed").is_file()
    project = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
    assert "py.typed" in project["tool"]["setuptools"]["package-data"]["peatburn"]
