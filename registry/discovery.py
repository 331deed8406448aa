"""Find the spec files under the paths a user names."""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

__all__ = ["SpecFile", "discover", "SPEC_SUFFIXES", "UsageError"]

SPEC_SUFFIXES = (".yaml", ".yml")


class UsageError(ValueError):
    """A command-line mistake: exit status 2."""


@dataclass(frozen=True)
class SpecFile:
    """One spec file: where it is on disk, how to show it, and the registry root it belongs to."""

    path: Path
    display: str
    root: Path
    outside: bool = False  # a symlink whose target lies outside the registry


def _display(path: Path) -> str:
    """The path as the user will recognise it: relative below the current folder, else absolute."""
    try:
        relative = os.path.relpath(path)
    except ValueError:
        return str(path.absolute())
    return str(path.absolute()) if relative.startswith("..") else relative


def discover(paths: list[str]) -> list[SpecFile]:
    """Spec files under each path: a folder is searched recursively (hidden entries skipped)."""
    found: list[SpecFile] = []
    seen: set[Path] = set()
    for raw in paths:
        path = Path(raw)
        if not path.exists() and not path.is_symlink():
            raise UsageError(f"{raw}: no such file or folder")
        if path.is_dir():
            root = path.resolve()
            for dirpath, dirnames, filenames in os.walk(path, followlinks=False):
                dirnames[:] = sorted(d for d in dirnames if not d.startswith("."))
                for name in sorted(filenames):
                    if name.startswith(".") or not name.endswith(SPEC_SUFFIXES):
                        continue
                    file = Path(dirpath) / name
                    outside = file.is_symlink() and not _inside(file, root)
                    key = file.absolute()
                    if key not in seen:
                        seen.add(key)
                        found.append(SpecFile(file, _display(file), root, outside))
        else:
            key = path.absolute()
            if key not in seen:
                seen.add(key)
                found.append(SpecFile(path, _display(path), path.absolute().parent))
    return found


def _inside(file: Path, root: Path) -> bool:
    try:
        file.resolve().relative_to(root)
        return True
    except (ValueError, OSError, RuntimeError):
        return False
