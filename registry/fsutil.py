"""Atomic, confined file writes: every file prespec writes goes through here.

:func:`write_atomic` writes a temporary file in the target folder, flushes it to disk and
renames it over the target, so a reader (or a crash) never sees half a file. With
``overwrite=False`` it never replaces anything, not even a symbolic link, and the
final step is a hard link that fails if the name appeared in the meantime.
:func:`confined` turns a user's folder and a file name into a target that cannot leave
that folder through ``..``, an absolute name or a symbolic link. :func:`output_to_null`
sends a background process's output nowhere (the only other file it opens for writing).
"""

from __future__ import annotations

import errno
import os
import stat
import tempfile
from pathlib import Path, PurePath

__all__ = ["write_atomic", "move_within", "confined", "WriteRefused", "output_to_null"]

# Errors of os.link on file systems without hard links; the fallback reserves the name instead.
_NO_HARD_LINKS = {errno.EPERM, errno.EXDEV, errno.EMLINK, errno.ENOTSUP, errno.EOPNOTSUPP, errno.ENOSYS}


class WriteRefused(ValueError):
    """A write that would leave the chosen folder or overwrite a file it must not."""


def confined(folder: Path | str, name: str) -> Path:
    """``folder / name``, refusing any name that would escape ``folder``.

    ``name`` may hold sub-folders (``summaries/x.md``) but no ``..`` and no absolute path;
    the folders on the way are resolved (a symlinked sub-folder leading outside is refused),
    the last component is not, so a symbolic link at the target is seen, never followed.
    """
    folder = Path(folder)
    parts = PurePath(name).parts
    if not parts or PurePath(name).is_absolute() or PurePath(name).drive or ".." in parts or name in (".",):
        raise WriteRefused(f"{name!r} is not a file name inside {folder}; use a plain name without '..'")
    root = folder.resolve()
    parent = (root.joinpath(*parts[:-1])).resolve() if len(parts) > 1 else root
    if parent != root and root not in parent.parents:
        raise WriteRefused(f"{name!r} would be written outside {folder}")
    return parent / parts[-1]


def _mode_for(path: Path, overwrite: bool) -> int:
    """Keep an overwritten file's permissions; give a new file the usual ones (0666 less the umask)."""
    if overwrite:
        try:
            info = os.stat(path)
            if stat.S_ISREG(info.st_mode):
                return stat.S_IMODE(info.st_mode)
        except OSError:
            pass
    umask = os.umask(0)
    os.umask(umask)
    return 0o666 & ~umask


def _sync_folder(folder: Path) -> None:
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def write_atomic(path: Path | str, text: str | bytes, *, overwrite: bool = True, durable: bool = True,
                 private: bool = False) -> Path:
    """Write ``text`` to ``path`` through a temporary file and a rename, so readers never see half a file.

    ``overwrite=False`` refuses (``WriteRefused``) when anything, even a dangling symbolic link,
    already has the name. ``durable=False`` skips flushing the file and its folder to disk (a cache
    entry lost in a crash is only recomputed; the rename still keeps readers from half a file).
    ``private=True`` gives the file mode 0600 (a key only its owner may read).
    """
    path = Path(path)
    if not overwrite and (path.exists() or path.is_symlink()):
        raise WriteRefused(f"{path} already exists; prespec will not overwrite it")
    if path.is_dir():
        raise WriteRefused(f"{path} is a folder; name a file to write")
    if path.is_symlink():
        raise WriteRefused(f"{path} is a symbolic link; prespec replaces only regular files, never a link or "
                           "what it points at")
    if path.exists() and not path.is_file():
        raise WriteRefused(f"{path} is not a regular file (a device, FIFO or socket); prespec will not replace it")
    path.parent.mkdir(parents=True, exist_ok=True)
    mode = 0o600 if private else _mode_for(path, overwrite)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with (os.fdopen(fd, "wb") if isinstance(text, bytes) else
              os.fdopen(fd, "w", encoding="utf-8", newline="\n")) as handle:
            handle.write(text)
            handle.flush()
            if durable:
                os.fsync(handle.fileno())
        os.chmod(tmp, mode)
        if overwrite:
            os.replace(tmp, path)
        else:
            _place_new(tmp, path)
        if durable:
            _sync_folder(path.parent)
    except BaseException:
        if os.path.lexists(tmp):
            os.unlink(tmp)
        raise
    return path


def _place_new(tmp: str, path: Path) -> None:
    """Give the finished temporary file the name ``path``, failing if the name is taken."""
    try:
        os.link(tmp, path)  # atomic, and fails if path appeared meanwhile: never clobber
    except FileExistsError:
        raise WriteRefused(f"{path} already exists; prespec will not overwrite it") from None
    except OSError as exc:
        if exc.errno not in _NO_HARD_LINKS:
            raise
        try:  # no hard links here: reserve the name exclusively, then rename over our own placeholder
            os.close(os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_NOFOLLOW", 0), 0o600))
        except FileExistsError:
            raise WriteRefused(f"{path} already exists; prespec will not overwrite it") from None
        os.replace(tmp, path)
        return
    os.unlink(tmp)


def move_within(folder: Path | str, source: str, target: str) -> Path:
    """Rename ``folder/source`` to ``folder/target``, both confined to ``folder``; never overwrites."""
    old, new = confined(folder, source), confined(folder, target)
    if new.exists() or new.is_symlink():
        raise WriteRefused(f"{new} already exists; prespec will not overwrite it")
    new.parent.mkdir(parents=True, exist_ok=True)
    os.rename(old, new)
    _sync_folder(new.parent)
    return new


def output_to_null() -> None:
    """Send everything this process writes to its standard output and error to the null device:
    what the programs it runs and C code write (file descriptors 1 and 2) and what Python code
    prints (``sys.stdout``, ``sys.stderr``). For a forked background process
    (:class:`registry.workers.BackgroundCall`), whose output is not for the terminal."""
    import sys

    null = os.open(os.devnull, os.O_WRONLY)
    os.dup2(null, 1)
    os.dup2(null, 2)
    sys.stdout = sys.stderr = open(null, "w", encoding="utf-8", closefd=False)
