"""Find the spec files under the paths a user names.

A folder is searched recursively for ``*.yaml`` and ``*.yml`` files; hidden entries are
skipped and symbolic links are never followed out of the registry. Anything found that
cannot be used (a link leaving the registry, a link loop, a broken link, a folder that
cannot be listed) is still returned, with the reason, so ``check`` reports it instead of
silently skipping it.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

from .problems import escaped

__all__ = ["SpecFile", "discover", "SPEC_SUFFIXES", "UsageError", "display_name"]

SPEC_SUFFIXES = (".yaml", ".yml")

_OUTSIDE = ("is a symbolic link to a file outside the registry; specs must live inside the registry folder, "
            "so it was not read")


class UsageError(ValueError):
    """A command-line mistake: exit status 2."""


@dataclass(frozen=True)
class SpecFile:
    """One spec file: where it is on disk, how to show it, and the registry root it belongs to."""

    path: Path
    display: str
    root: Path
    outside: bool = False  # a symlink whose target lies outside the registry
    reason: str = ""  # why the file must not be read, if it must not
    named: bool = False  # named on the command line itself, not found in a folder

    @property
    def refusal(self) -> str:
        """Why ``check`` must not read this file ('' when it may)."""
        return self.reason or (_OUTSIDE if self.outside else "")


def display_name(path: Path | str) -> str:
    """A path as shown to people: relative below the current folder, else absolute; control
    characters escaped."""
    try:
        text = os.path.relpath(path)
    except ValueError:
        text = str(Path(path).absolute())
    if text.startswith(".."):
        text = str(Path(path).absolute())
    if text.isprintable():
        return text
    return "".join(ch if ch.isprintable() else escaped(ch) for ch in text)


def _link_problem(file: Path, root: Path) -> tuple[bool, str]:
    """(outside, reason) for a symbolic link found in a registry folder."""
    try:
        target = file.resolve(strict=True)
    except RuntimeError:
        return False, "is a symbolic link loop; it points back to itself"
    except FileNotFoundError:
        return False, f"is a broken symbolic link: its target {os.readlink(file)!r} does not exist"
    except OSError as exc:
        if exc.errno == 40:  # ELOOP
            return False, "is a symbolic link loop; it points back to itself"
        return False, f"is a symbolic link that cannot be followed: {exc.strerror or exc}"
    try:
        target.relative_to(root)
    except ValueError:
        return True, ""
    return False, ""


def discover(paths: list[str]) -> list[SpecFile]:
    """Spec files under each path: a folder is searched recursively (hidden entries skipped)."""
    found: list[SpecFile] = []
    seen: set[Path] = set()

    def add(spec: SpecFile) -> None:
        key = spec.path.absolute()
        if key not in seen:
            seen.add(key)
            found.append(spec)

    for raw in paths:
        path = Path(raw)
        if not path.exists() and not path.is_symlink():
            raise UsageError(f"{display_name(raw)}: no such file or folder")
        if not path.is_dir():
            add(SpecFile(path, display_name(path), path.absolute().parent, named=True))
            continue
        root = path.resolve()
        unlisted: list[OSError] = []
        for dirpath, dirnames, filenames in os.walk(path, followlinks=False, onerror=unlisted.append):
            folder = Path(dirpath)
            for name in list(dirnames):
                sub = folder / name
                if name.startswith(".") or not sub.is_symlink():
                    continue
                outside, reason = _link_problem(sub, root)
                if outside:
                    reason = ("is a symbolic link to a folder outside the registry; it was not followed, so "
                              "no spec in it was checked")
                if reason:
                    add(SpecFile(sub, display_name(sub), root, reason=reason))
            dirnames[:] = sorted(d for d in dirnames if not d.startswith("."))
            for name in sorted(filenames):
                if name.startswith(".") or not name.endswith(SPEC_SUFFIXES):
                    continue
                file = folder / name
                outside, reason = _link_problem(file, root) if file.is_symlink() else (False, "")
                add(SpecFile(file, display_name(file), root, outside, reason))
        for error in unlisted:
            where = Path(error.filename) if error.filename else path
            add(SpecFile(where, display_name(where), root,
                         reason=f"is a folder that cannot be listed: {error.strerror or error}; specs in it "
                         "were not checked"))
    return found
