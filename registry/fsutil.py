"""Atomic, confined file writes: every file prespec writes goes through here."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

__all__ = ["write_atomic", "confined", "WriteRefused"]


class WriteRefused(ValueError):
    """A write that would leave the chosen folder or overwrite a file it must not."""


def confined(folder: Path, name: str) -> Path:
    """``folder / name``, refusing any name that would escape ``folder``."""
    target = (folder / name).resolve()
    root = folder.resolve()
    if target != root and root not in target.parents:
        raise WriteRefused(f"{name!r} would be written outside {folder}")
    return target


def _mode_for(path: Path) -> int:
    """The existing file's permissions, else 0666 less the umask."""
    try:
        return path.stat().st_mode & 0o7777
    except OSError:
        umask = os.umask(0)
        os.umask(umask)
        return 0o666 & ~umask


def write_atomic(path: Path, text: str, *, overwrite: bool = True) -> Path:
    """Write ``text`` to ``path`` through a temporary file and a rename, so readers never see half a file."""
    path = Path(path)
    if not overwrite and (path.exists() or path.is_symlink()):
        raise WriteRefused(f"{path} already exists; prespec will not overwrite it")
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as handle:
            os.fchmod(handle.fileno(), _mode_for(path))  # mkstemp makes 0600; use a normal write's mode
            handle.write(text)
            handle.flush()
            os.fsync(handle.fileno())
        if overwrite:
            os.replace(tmp, path)
        else:
            os.link(tmp, path)  # fails if path appeared meanwhile: never clobber
            os.unlink(tmp)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return path
