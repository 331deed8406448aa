"""Shared fixtures: run the CLI in-process and capture what it prints."""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path

import pytest

from registry.cli import main

ROOT = Path(__file__).resolve().parent.parent
EXAMPLES = ROOT / "example_registry"


@dataclass
class Run:
    status: int
    out: str
    err: str

    def json(self):
        return json.loads(self.out)


@pytest.fixture(autouse=True)
def _private_user_cache(tmp_path_factory, monkeypatch):
    """Simulation-verified sizes are cached in the user cache folder outside git: give each test its own."""
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path_factory.mktemp("user-cache")))


@pytest.fixture
def run(capsys, monkeypatch):
    """``run("check", "path")`` calls ``main([...])`` and returns status, stdout and stderr."""
    monkeypatch.setenv("NO_COLOR", "1")

    def _run(*argv: str) -> Run:
        status = main([str(a) for a in argv])
        captured = capsys.readouterr()
        return Run(status, captured.out, captured.err)

    return _run
