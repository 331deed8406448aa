"""The distribution ships every subpackage, the templates and the example registry."""

from __future__ import annotations

import sys

import pytest

from .conftest import ROOT

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    tomllib = pytest.importorskip("tomli")


def _setuptools() -> dict:
    return tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))["tool"]["setuptools"]


def test_every_subpackage_is_listed():
    # pyproject lists packages explicitly (to map example_registry into the package): a new
    # subpackage of registry/ that is not listed would be missing from installed copies.
    on_disk = {".".join(p.parent.relative_to(ROOT).parts) for p in (ROOT / "registry").rglob("__init__.py")}
    listed = set(_setuptools()["packages"])
    assert on_disk <= listed
    assert listed - on_disk == {"registry.example_registry"}


def test_example_registry_and_templates_are_package_data():
    config = _setuptools()
    assert config["package-dir"]["registry.example_registry"] == "example_registry"
    assert "*.yaml" in config["package-data"]["registry.example_registry"]
    assert "templates/*" in config["package-data"]["registry"]
    assert list((ROOT / "example_registry").glob("*.yaml")) and list((ROOT / "registry" / "templates").iterdir())
